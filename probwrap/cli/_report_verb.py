"""``probwrap report``: the HTML report for score files (CSV or Parquet)."""

from __future__ import annotations

import argparse
import json
import math
import sys
import warnings
from typing import Any

import numpy as np

from .._validation import cutoff_text, plain
from ._calibrate import add_scale_flag, read_scores, report_warnings
from ._common import (
    MIN_RESAMPLES,
    DataError,
    add_encoding_flag,
    add_format_flag,
    add_positive_label_flag,
    add_resamples_flag,
    add_seed_flag,
    add_weight_flag,
    check_ranking,
    check_row_count,
    check_scores_vary,
    clean,
    not_a_number,
    percent_hint,
    require,
    row_number,
    shown,
    warn_line,
    weight_summary,
    whole_number,
)
from ._files import check_out_suffix, check_writable, replaced_note, to_stdout, write_text
from ._progress import Stages
from ._promise_flags import (
    add_alarm_flags,
    add_guarantee_flags,
    add_late_label_flags,
    alarm_settings,
    guarantee_args,
    late_label_columns,
    promise_summary,
    read_late_labels,
)
from ._tables import (
    numeric_column,
    probability_column,
    read_labels,
    read_table,
    read_weights,
    refuse_repeated,
)

__all__ = ["register"]

#: the most reliability bins the report draws (common practice: 10-20; more leave bins empty)
MAX_BINS = 1000
REPORT_SUFFIXES = (".html", ".htm")


def _finite(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise not_a_number(text) from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number; got {text}")
    return value


def _bins(text: str) -> int:
    value = whole_number(1)(text)
    if value > MAX_BINS:
        raise argparse.ArgumentTypeError(f"must be at most {MAX_BINS}; got {value}")
    return value


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "report",
        help="write a single-file HTML report for a labelled score file",
        description="Calibration, decisions and prevalence for a labelled file of positive-class "
        "scores (CSV or Parquet; two labels, or late labels); optionally an unlabelled file from the "
        "deployment population. With --class-columns (one probability column per class) and "
        "--cost-matrix, the multiclass / multi-action report.",
    )
    parser.add_argument("--scores", required=True, metavar="FILE",
                        help="labelled score file (CSV or Parquet)")
    parser.add_argument("--score-column", metavar="C",
                        help="column of positive-class scores: probabilities in [0, 1], "
                        "percentages with --scale percent, or log-odds with --scale log-odds")
    parser.add_argument("--class-columns", metavar="C1,C2,...",
                        help="instead of --score-column: one probability column per class, "
                        "comma-separated; labels are these column names or indices 0..k-1")
    parser.add_argument("--label-column", metavar="L",
                        help="column of labels: two values (0/1, or any two with "
                        "--positive-label), or with --class-columns the class of each row "
                        "(binary files: or late labels, --time-column, --event-column, "
                        "--horizon)")
    add_positive_label_flag(parser)
    add_scale_flag(parser, help_extra=" (binary files; --class-columns take probabilities)")
    add_encoding_flag(parser)
    parser.add_argument("--cost-matrix", metavar="ROWS",
                        help="with --class-columns: costs, one row per class (in column order) "
                        "separated by ';', one entry per action separated by ',', e.g. "
                        "'0,4,12;20,4,12;60,64,12'")
    parser.add_argument("--actions", metavar="A1,A2,...",
                        help="names of the actions (columns of --cost-matrix)")
    parser.add_argument("--capacity-action", metavar="A",
                        help="with --cost-matrix: the action that --capacity limits")
    parser.add_argument("--unlabelled", metavar="FILE",
                        help="unlabelled score file from the deployment population")
    parser.add_argument("--unlabelled-score-column", metavar="C",
                        help="its score column, on the same scale (default: --score-column)")
    for key, default, what in (("fp", None, "acting on a negative"),
                               ("fn", None, "not acting on a positive"),
                               ("tp", 0.0, "acting on a positive"),
                               ("tn", 0.0, "not acting on a negative")):
        parser.add_argument(f"--cost-{key}", type=_finite, default=default, metavar="X",
                            help=f"cost of {what}" + ("" if default is None else " (default 0)"))
    parser.add_argument("--capacity", type=_finite, metavar="SHARE",
                        help="largest share of rows that may be acted on, in (0, 1]")
    parser.add_argument("--batch-size", type=whole_number(1), metavar="N",
                        help="also estimate the prevalence (class shares with --class-columns) "
                        "per batch of N unlabelled rows, with a prevalence alarm (one per "
                        "class with --class-columns)")
    parser.add_argument("--bins", type=_bins, default=10, metavar="K",
                        help=f"reliability bins (default 10, at most {MAX_BINS})")
    add_resamples_flag(parser, allow_zero=False)
    parser.add_argument("--group-column", metavar="G",
                        help="column of group labels (e.g. depot); adds a 'By group' section "
                        "with calibration, scores and the rule's error rates (binary) or "
                        "action shares (several classes) and cost per group, largest gaps "
                        "first")
    parser.add_argument("--cell-column", metavar="C",
                        help="column naming the group of trials each row belongs to, for "
                        "outcomes that arrive as k of n (a success row and a failure row per "
                        "group, weighted by --weight-column): every bootstrap interval then "
                        "resamples whole groups, and the page gives the groups' dispersion")
    parser.add_argument("--unlabelled-cell-column", metavar="C",
                        help="column of --unlabelled naming the unit each unlabelled row "
                        "belongs to (a district, a route and week): the prevalence estimate, "
                        "its interval and shift test, and the batches count each unit once, "
                        "its rows worth their number over the units' design effect")
    add_alarm_flags(parser)
    add_guarantee_flags(parser)
    add_late_label_flags(parser)
    add_weight_flag(parser)
    add_seed_flag(parser, "the bootstraps and folds")
    parser.add_argument("--title", default="probwrap report", help="report title")
    parser.add_argument("--out", required=True, metavar="FILE",
                        help="HTML file to write (.html or .htm); '-': write the page to "
                        "standard output (the summary line then goes to stderr)")
    add_format_flag(parser)
    parser.set_defaults(func=_handler, _parser=parser)


def _probabilities(frame, column: str, path: str, flag: str) -> np.ndarray:
    return probability_column(frame, column, path, flag=flag, log_odds=False)


def _split(text: str) -> list[str]:
    return [t.strip() for t in text.split(",") if t.strip()]


def _cost_matrix(text: str, parser: argparse.ArgumentParser) -> np.ndarray:
    try:
        rows = [[float(v) for v in row.split(",")] for row in text.split(";") if row.strip()]
        matrix = np.array(rows, dtype=float)
    except ValueError:
        parser.error(f"--cost-matrix must be numbers, rows separated by ';' and entries by ',' "
                     f"(e.g. '0,4,12;20,4,12'); got {plain(text)!r}")
    if matrix.ndim != 2 or not np.all(np.isfinite(matrix)):
        parser.error(f"--cost-matrix rows must all have the same number of finite entries; got "
                     f"{plain(text)!r}")
    return matrix


#: how far from 1 a row of class probabilities may sum without a word (float rounding)
SUM_TOLERANCE = 1e-6
#: the most decimals looked for when class probabilities may have been rounded
MAX_ROUNDED_DECIMALS = 6
#: rows off by more than this are refused even where rounding could explain it (many classes
#: at one or two decimals): our rule of thumb
MAX_ROUNDING_GAP = 0.05


def rounded_decimals(P: np.ndarray) -> int | None:
    """The fewest decimals every value of ``P`` is written with (1 to
    :data:`MAX_ROUNDED_DECIMALS`), or None when they carry more.

    Examples
    --------
    >>> import numpy as np
    >>> rounded_decimals(np.array([[0.125, 0.875], [0.5, 0.5]])), rounded_decimals(np.array([[1 / 3]]))
    (3, None)
    """
    for d in range(1, MAX_ROUNDED_DECIMALS + 1):
        scaled = P * 10.0**d
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-6):
            return d
    return None


def rounded_rows_to_one(P: np.ndarray, path: Any, verb: str = "report") -> np.ndarray:
    """Rows of class probabilities that sum to 1, as the report needs.

    Probabilities rounded to d decimals (a spreadsheet's export, ``round(3)``) sum to 1 only
    within k times half a unit in the last place for k classes (0.999 or 1.001 for three
    columns at 3 decimals). Rows within that bound (and within :data:`MAX_ROUNDING_GAP`) are
    divided by their sum, with a warning
    that counts them; a row beyond it (or beyond :data:`SUM_TOLERANCE` when the values carry
    more than :data:`MAX_ROUNDED_DECIMALS` decimals) is refused, naming it. Before 4 December
    2026 every row off by more than 1e-6 was refused, so a file of probabilities rounded to 3
    decimals could not be read.

    Examples
    --------
    >>> import numpy as np
    >>> rounded_rows_to_one(np.array([[0.334, 0.333, 0.334], [0.2, 0.3, 0.5]]), "a.csv")
    ... # doctest: +NORMALIZE_WHITESPACE
    array([[0.33366633, 0.33266733, 0.33366633],
           [0.2       , 0.3       , 0.5       ]])
    """
    sums = P.sum(axis=1)
    gap = np.abs(sums - 1.0)
    off = gap > SUM_TOLERANCE
    if not off.any():
        return P
    decimals = rounded_decimals(P)
    bound = None if decimals is None else min(P.shape[1] * 0.5 * 10.0**-decimals,
                                              MAX_ROUNDING_GAP)
    allowed = SUM_TOLERANCE if bound is None else bound + SUM_TOLERANCE
    beyond = gap > allowed
    if beyond.any():
        row = int(np.flatnonzero(beyond)[0])
        because = ("" if decimals is None else
                   f", more than rounding {P.shape[1]} probabilities to {decimals} decimals "
                   f"explains (at most {bound:.2g} off)")
        raise DataError(f"{path}: {row_number(path, row)}: the class probabilities sum to "
                        f"{shown(sums[row])}, not 1{because}")
    warn_line(verb, (
        f"{path}: {int(off.sum())} of {P.shape[0]} rows' class probabilities sum to "
        f"{sums[off].min():.{decimals + 1}f} to {sums[off].max():.{decimals + 1}f}, not 1, as "
        f"probabilities rounded to {decimals} decimals do; each such row was divided by its "
        "sum"))
    out = P.copy()
    out[off] /= sums[off, None]
    return out


def _class_handler(args: argparse.Namespace, parser: argparse.ArgumentParser) -> int:
    columns = _split(args.class_columns)
    if len(columns) < 2:
        parser.error("--class-columns needs at least two columns")
    twice = sorted({c for c in columns if columns.count(c) > 1})
    if twice:
        parser.error(f"--class-columns names {', '.join(shown(c) for c in twice)} more than "
                     "once; name each class's column once")
    if any(getattr(args, f"cost_{k}") is not None for k in ("fp", "fn")):
        parser.error("with --class-columns give costs as --cost-matrix, not --cost-fp/--cost-fn")
    if args.batch_size is not None and args.unlabelled is None:
        parser.error("--batch-size needs --unlabelled")
    if args.unlabelled_score_column is not None:
        parser.error("--unlabelled-score-column is for binary score files (--score-column); "
                     "with --class-columns the unlabelled file holds the same class columns")
    if args.guarantee is not None or args.guarantee_target is not None:
        parser.error("--guarantee is available for binary score files only (one cutoff)")
    if any(v is not None for v in (args.time_column, args.event_column, args.horizon)):
        parser.error("late labels (--time-column, --event-column, --horizon) are available for "
                     "binary score files only")
    if args.label_column is None:
        parser.error("--class-columns needs --label-column")
    if args.positive_label is not None:
        parser.error("--positive-label is for binary score files (--score-column); with "
                     "--class-columns the labels name the classes")
    if args.scale != "proba":
        parser.error(f"--class-columns take probabilities in [0, 1]; --scale {args.scale} is "
                     "for binary files (one --score-column)")
    if args.capacity is not None and not 0 < args.capacity <= 1:
        parser.error(f"--capacity must be a share in (0, 1]; got {args.capacity:g}"
                     f"{percent_hint(args.capacity)}")
    check_writable(args.out, inputs={"--scores": args.scores, "--unlabelled": args.unlabelled})
    matrix = None if args.cost_matrix is None else _cost_matrix(args.cost_matrix, parser)
    if matrix is not None and matrix.shape[0] != len(columns):
        parser.error(f"--cost-matrix has {matrix.shape[0]} rows but --class-columns names "
                     f"{len(columns)} classes; one row per class")
    actions = None if args.actions is None else _split(args.actions)
    if actions is not None and (matrix is None or len(actions) != matrix.shape[1]):
        parser.error(f"--actions must name the {0 if matrix is None else matrix.shape[1]} "
                     f"columns of --cost-matrix; got {len(actions)}")
    if matrix is not None and actions is None and matrix.shape[1] != len(columns):
        parser.error("--actions must name the columns of --cost-matrix (it is not square)")
    capacity = None
    if args.capacity is not None:
        if matrix is None:
            parser.error("--capacity needs --cost-matrix")
        names = actions or columns
        if args.capacity_action is None or args.capacity_action not in names:
            parser.error(f"--capacity needs --capacity-action, one of {', '.join(names)}")
        capacity = {args.capacity_action: args.capacity}

    def probabilities(path, frame):
        P = np.column_stack([_probabilities(frame, c, path, "--class-columns") for c in columns])
        return rounded_rows_to_one(P, path)

    with Stages("report", ["reading", "computing the report", "writing"]) as stages:
        stages.start("reading")
        frame = read_table(args.scores, exact=[*columns, *([args.weight_column]
                                                           if args.weight_column else [])],
                           text=_text_columns(args))
        P = probabilities(args.scores, frame)
        y = _class_labels(frame, args, columns)
        given = read_weights(frame, args.weight_column, args.scores, "report",
                             dots=getattr(args, "weight_dots", None))
        q = None
        unlabelled_cells: dict = {}
        if args.unlabelled is not None:
            uframe = read_table(args.unlabelled, exact=columns, text=_unlabelled_text(args))
            q = probabilities(args.unlabelled, uframe)
            _unlabelled_cells(args, uframe, unlabelled_cells)
        check_row_count("report", P.shape[0], args.scores, "labelled rows",
                        sample_weight=given)
        # rows of weight 0 are not judged
        _check_class_rows(y if given is None else y[given > 0], columns, args.scores)
        if q is not None:
            check_row_count("report", q.shape[0], args.unlabelled, "unlabelled rows")
            if args.batch_size is not None and args.batch_size >= q.shape[0]:
                warn_line("report", (
                    f"{args.unlabelled}: --batch-size {args.batch_size} is not below the file's "
                    f"{q.shape[0]} rows, so there is one batch: the prevalence alarm needs a "
                    "series of batches and cannot judge a drift from one"))
        extra = {} if given is None else {"sample_weight": given}
        extra.update(unlabelled_cells)
        if args.group_column is not None:
            extra["groups"] = _group_labels(frame, args.group_column, args.scores)
        if args.cell_column is not None:
            extra["cells"] = _group_labels(frame, args.cell_column, args.scores,
                                           flag="--cell-column")
        if args.batch_size is not None:
            extra.update(batch_size=args.batch_size, alarm_reference=args.alarm_reference,
                         alarm_decision_interval=args.alarm_decision_interval)
        content = _build_and_write(
            args, stages, y_true=y, y_prob=P, costs=matrix, capacity=capacity,
            action_names=actions, unlabelled_prob=q, class_names=columns, **extra,
        )
    summary = {"out": args.out, "n_rows": int(content.n_rows),
               "n_classes": int(content.n_classes)}
    line = (f"wrote {_written_to(args.out)}: {content.n_rows} labelled rows, "
            f"{content.n_classes} classes")
    if content.rules:
        summary["mean_cost_rule_in_use"] = float(content.rules[0].mean_cost)
        line += f", mean cost of the rule in use {content.rules[0].mean_cost:.4f}"
    if content.shift_pvalue is not None:
        summary["shift_pvalue"] = float(content.shift_pvalue)
        line += f", shift p = {content.shift_pvalue:.3g}"
    if getattr(content, "class_alarms", None):
        # the first alarm of each class's prevalence alarm (null: none)
        summary["first_alarms"] = {content.class_names[j]: a.first_batch
                                   for j, a in content.class_alarms.items()}
        fired = [f"{content.class_names[j]} after batch {a.first_batch}"
                 for j, a in content.class_alarms.items() if a.first_batch is not None]
        line += f", alarms: {'; '.join(fired)}" if fired else ", no prevalence alarm"
    metric_summary(content, summary)
    line += group_summary(content, summary)
    line += cell_summary(content, summary)
    if given is not None:
        summary["weights"] = weight_summary(args.weight_column, given)
        line += f"; weighted by {shown(args.weight_column)}"
    _print_summary(args, line, summary)
    return 0


#: fewer labelled rows of a class than this draw a warning (as the calibration wrapper's)
FEW_CLASS_ROWS = 5


def _check_class_rows(y: np.ndarray, columns: list[str], path: str) -> None:
    """Warn about classes with no or very few labelled rows: the report's per-class numbers
    for them are missing or rest on a handful of rows."""
    counts = np.bincount(y, minlength=len(columns))
    absent = [shown(columns[j]) for j in np.flatnonzero(counts == 0)]
    few = [f"{shown(columns[j])} ({int(counts[j])})"
           for j in np.flatnonzero((counts > 0) & (counts < FEW_CLASS_ROWS))]
    if absent:
        warn_line("report", f"{path}: class(es) {', '.join(absent)} have no labelled rows; "
                  "their calibration and the cost of deciding on them are not checked by this "
                  "file")
    if few:
        warn_line("report", f"{path}: class(es) with fewer than {FEW_CLASS_ROWS} labelled rows: "
                  f"{', '.join(few)}; their per-class numbers rest on those rows alone")


def _class_labels(frame, args: argparse.Namespace, columns: list[str]) -> np.ndarray:
    pd = require("pandas")
    if args.label_column not in frame.columns:
        refuse_repeated(frame, args.label_column, args.scores, "--label-column")
        raise DataError(f"{args.scores}: no column {shown(args.label_column)} (given by "
                        f"--label-column)")
    raw = frame[args.label_column]
    missing = raw.isna().to_numpy()
    if missing.any():
        row = int(np.flatnonzero(missing)[0])
        raise DataError(f"{args.scores}: column {shown(args.label_column)}, "
                        f"{row_number(args.scores, row)}: the label is missing")
    as_text = raw.astype(str).to_numpy(dtype=object)
    numeric = pd.to_numeric(raw, errors="coerce").notna().to_numpy()
    named = np.isin(as_text, columns)
    if named.any() or not numeric.all():
        if not named.all():
            row = int(np.flatnonzero(~named)[0])
            raise DataError(
                f"{args.scores}: column {shown(args.label_column)}, "
                f"{row_number(args.scores, row)}: label {shown(raw.iloc[row])} is not one of "
                f"the class columns {', '.join(columns)}" + (
                    "" if named.any() else
                    # nothing matches: the columns are probably named otherwise than the labels
                    "; the labels name the classes, so --class-columns must list columns named "
                    f"as the labels (the file's labels: "
                    f"{', '.join(shown(v) for v in pd.unique(as_text)[:6])})"
                )
            )
        return np.array([columns.index(v) for v in as_text], dtype=np.intp)
    y = numeric_column(frame, args.label_column, args.scores, flag="--label-column")
    bad = (y != np.round(y)) | (y < 0) | (y >= len(columns))
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise DataError(
            f"{args.scores}: column {shown(args.label_column)}, "
            f"{row_number(args.scores, row)}: label {shown(raw.iloc[row])} is neither a class "
            f"column name nor an index 0..{len(columns) - 1}"
        )
    return y.astype(np.intp)


def _text_columns(args: argparse.Namespace) -> list[str]:
    """Columns read as the text they hold: the --group-column and --cell-column (``01`` and
    ``1`` are two groups, ``NA`` is a group, as ``calibrate apply`` keeps the columns it passes
    through)."""
    return [c for c in (args.group_column, getattr(args, "cell_column", None)) if c is not None]


def _unlabelled_text(args: argparse.Namespace) -> list[str]:
    """The --unlabelled-cell-column, read as the text it holds (as --cell-column is)."""
    column = getattr(args, "unlabelled_cell_column", None)
    return [] if column is None else [column]


def _unlabelled_cells(args: argparse.Namespace, uframe: Any, extra: dict) -> None:
    """With --unlabelled-cell-column: the unlabelled rows' cells as ``unlabelled_cells``."""
    if getattr(args, "unlabelled_cell_column", None) is not None:
        extra["unlabelled_cells"] = _group_labels(uframe, args.unlabelled_cell_column,
                                                  args.unlabelled,
                                                  flag="--unlabelled-cell-column")


def _group_labels(frame, column: str, path: str, flag: str = "--group-column") -> np.ndarray:
    """The --group-column (or ``flag``) as text labels, exactly as written (read with
    :func:`_text_columns`); an empty cell is refused (never silently dropped)."""
    if column not in frame.columns:
        refuse_repeated(frame, column, path, flag)
        raise DataError(f"{path}: no column {shown(column)} ({flag}); the columns are "
                        f"{', '.join(shown(str(c)) for c in frame.columns)}")
    raw = frame[column]
    missing = raw.isna().to_numpy()
    if missing.any():
        row = int(np.flatnonzero(missing)[0])
        raise DataError(f"{path}: column {shown(column)}, {row_number(path, row)} has no "
                        f"group ({flag}); give every row a group (e.g. "
                        "'unknown')")
    return raw.astype(str).to_numpy()


def _made_from(args: argparse.Namespace) -> str:
    """The input files and the columns read from them, for the line under the report's title
    (a page passed on without its command line still says what it was made from)."""
    def col(name: str | None) -> str:
        return repr(plain(name))

    read = []
    if args.class_columns is not None:
        read.append(f"class columns {', '.join(col(c) for c in _split(args.class_columns))}")
    elif args.score_column is not None:
        read.append(f"scores {col(args.score_column)}"
                    + {"log-odds": " (log-odds)", "percent": " (percentages, divided by 100)"}
                    .get(getattr(args, "scale", "proba"), ""))
    for flag, what in (("label_column", "labels"), ("time_column", "times"),
                       ("event_column", "events"), ("weight_column", "weights"),
                       ("group_column", "groups"), ("cell_column", "cells")):
        name = getattr(args, flag, None)
        if name is not None:
            read.append(f"{what} {col(name)}")
    text = f"{args.scores} ({', '.join(read)})"
    if args.unlabelled is not None:
        column = args.unlabelled_score_column or args.score_column
        cells = getattr(args, "unlabelled_cell_column", None)
        inner = [f"scores {col(column)}"] if column is not None else []
        inner += [f"cells {col(cells)}"] if cells is not None else []
        text += (f"; unlabelled rows from {args.unlabelled}"
                 + (f" ({', '.join(inner)})" if inner else ""))
    return text


def _build_and_write(args: argparse.Namespace, stages: Stages, **inputs):
    """Compute the report, then write it atomically; library errors become DataErrors."""
    from probwrap.report import build_report

    stages.start("computing the report")
    if "progress" in _collect_parameters():
        inputs["progress"] = stages.detail
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            content, page = build_report(
                n_bins=args.bins, n_resamples=args.resamples, random_state=args.seed,
                title=args.title, source=_made_from(args), **inputs,
            )
        except (ValueError, FloatingPointError, OverflowError) as exc:
            raise DataError(f"{args.scores}: the report cannot be made ({clean(str(exc))})"
                            ) from None
    report_warnings("report", caught)
    stages.start("writing")
    write_text(args.out, page)
    return content


def _collect_parameters() -> set[str]:
    """Keyword arguments the report accepts (a progress callback where available)."""
    import inspect

    from probwrap.report._content import collect_content  # what build_report calls

    return set(inspect.signature(collect_content).parameters)


def _plain_json(value: Any) -> Any:
    """A by-group field as JSON: NaN as null, NumPy numbers and arrays as plain ones."""
    if hasattr(value, "tolist"):
        value = value.tolist()
    if isinstance(value, list | tuple):
        return [_plain_json(v) for v in value]
    if isinstance(value, float):
        return value if np.isfinite(value) else None
    if isinstance(value, bool | int | str) or value is None:
        return value
    return str(value)


def metric_summary(content: Any, summary: dict) -> None:
    """The calibration metrics in the JSON summary (``metrics``: each one's value, interval,
    the bootstrap resamples left out because the number could not be computed on them, and
    why an interval is not given, null when it is)."""
    summary["metrics"] = [
        {"key": m.key, "label": m.label, "value": _plain_json(float(m.value)),
         "low": _plain_json(float(m.low)), "high": _plain_json(float(m.high)),
         "dropped_resamples": int(getattr(m, "dropped_resamples", 0)),
         "interval_note": getattr(m, "interval_note", None)}
        for m in getattr(content, "metrics", None) or []]


def group_summary(content: Any, summary: dict) -> str:
    """The "By group" section in the JSON summary (``groups``: every group's checks, the
    overall row, the gaps between judged groups and the notes), and its words in the line.

    With ``--group-column`` and ``--format json`` the summary had nothing about the groups, so
    a program had to read them off the HTML page.
    """
    import dataclasses

    checks = getattr(content, "group_checks", None)
    if checks is None:
        return ""

    def row(check: Any) -> dict:
        return {f.name: _plain_json(getattr(check, f.name)) for f in dataclasses.fields(check)}

    summary["groups"] = {
        "groups": [row(c) for c in checks.groups],
        "overall": row(checks.overall),
        "gaps": [row(g) for g in checks.gaps],
        # three or more classes: each class's one-vs-rest error between the groups judged on it
        **({"class_gaps": [row(g) for g in checks.class_gaps]}
           if getattr(checks, "class_gaps", None) else {}),
        "min_rows": float(checks.min_rows), "min_events": float(checks.min_events),
        "notes": list(checks.notes),
    }
    if getattr(checks, "action_names", None) is not None:  # the order of action_shares
        summary["groups"]["action_names"] = [str(a) for a in checks.action_names]
    judged = sum(bool(c.judged) for c in checks.groups)
    # three or more classes: groups judged on their overall scores but not on every class
    partial = sum(bool(c.judged and getattr(c, "classes_not_judged", ())) for c in checks.groups)
    return (f", {len(checks.groups)} groups ({judged} judged"
            + (f", {partial} on their overall scores only" if partial else "") + ")")


def cell_summary(content: Any, summary: dict) -> str:
    """With --cell-column: what the intervals resampled (``resampled``: the unit, the number of
    cells and their Pearson dispersion, null where not computed), and its words in the line;
    with --unlabelled-cell-column: the unlabelled cells and the rows they are worth
    (``unlabelled_cells``)."""
    words = ""
    if getattr(content, "unlabelled_cells", None) is not None:
        # --unlabelled-cell-column: the units of the unlabelled side and their worth in rows
        summary["unlabelled_cells"] = {
            "n_cells": int(content.unlabelled_cells),
            "effective_rows": float(content.unlabelled_effective_rows)}
        words = (f"; {content.n_unlabelled} unlabelled rows in {content.unlabelled_cells} cells "
                 f"(worth {content.unlabelled_effective_rows:.4g} rows)")
    unit = getattr(content, "resampling", None)
    if unit is None or unit.kind != "cells":
        return words
    summary["resampled"] = {"unit": "cells", "n_cells": int(unit.n_cells),
                            "dispersion": unit.dispersion}
    cells = f"; intervals resample {unit.n_cells} cells"
    if unit.dispersion is not None:
        cells += f" (dispersion {unit.dispersion:.3g})"
    return cells + words


def _written_to(out: str) -> str:
    """Where the page went, for the summary line."""
    return "the page to standard output" if to_stdout(out) else f"{out}{replaced_note(out)}"


def _print_summary(args: argparse.Namespace, line: str, summary: dict) -> None:
    """The summary on standard output, or on stderr when the page went to standard output
    (``--out -``), which then holds the page alone."""
    if args.format == "json":
        print(json.dumps(summary, indent=2, allow_nan=False))
    elif to_stdout(args.out):
        print(line, file=sys.stderr)
    else:
        print(line)


def _handler(args: argparse.Namespace) -> int:
    parser: argparse.ArgumentParser = args._parser
    check_out_suffix(parser, args.out, REPORT_SUFFIXES, stdout="the page")
    if to_stdout(args.out) and args.format == "json":
        parser.error("--out - with --format json: the page and the JSON summary cannot both "
                     "go to standard output; write the page to a file (--out report.html), or "
                     "leave out --format json (the summary line then goes to stderr)")
    if args.resamples < MIN_RESAMPLES:  # pragma: no cover - the flag's type refuses it
        parser.error(f"--resamples must be at least {MIN_RESAMPLES}")
    if (args.score_column is None) == (args.class_columns is None):
        parser.error("give either --score-column (binary) or --class-columns (one per class)")
    if args.unlabelled_score_column is not None and args.unlabelled is None:
        parser.error("--unlabelled-score-column needs --unlabelled (the file it names a "
                     "column of)")
    if args.unlabelled_cell_column is not None and args.unlabelled is None:
        parser.error("--unlabelled-cell-column needs --unlabelled (the file it names a "
                     "column of)")
    alarm_settings(args, parser, batched=args.batch_size is not None,
                   batches="--batch-size (with --unlabelled)")
    if args.class_columns is not None:
        return _class_handler(args, parser)
    if args.cost_matrix is not None or args.actions is not None or args.capacity_action:
        parser.error("--cost-matrix, --actions and --capacity-action need --class-columns")
    given = [k for k in ("fp", "fn") if getattr(args, f"cost_{k}") is not None]
    if len(given) == 1:
        parser.error("give both --cost-fp and --cost-fn, or neither")
    if args.capacity is not None and not 0 < args.capacity <= 1:
        parser.error(f"--capacity must be a share in (0, 1]; got {args.capacity:g}"
                     f"{percent_hint(args.capacity)}")
    if args.capacity is not None and not given:
        parser.error("--capacity needs costs (--cost-fp and --cost-fn)")
    if args.batch_size is not None and args.unlabelled is None:
        parser.error("--batch-size needs --unlabelled")
    if args.guarantee is not None and not given:
        parser.error("--guarantee needs costs (--cost-fp and --cost-fn)")
    guarantee = guarantee_args(args, parser)
    late_columns = late_label_columns(args, parser)

    check_writable(args.out, inputs={"--scores": args.scores, "--unlabelled": args.unlabelled})
    costs = None
    if given:
        costs = {"fp": args.cost_fp, "fn": args.cost_fn, "tp": args.cost_tp,
                 "tn": args.cost_tn}
        if not (costs["fp"] > costs["tn"] and costs["fn"] > costs["tp"]):
            raise DataError(
                "costs: each error must cost more than the matching correct decision "
                "(--cost-fp > --cost-tn and --cost-fn > --cost-tp)"
            )
    with Stages("report", ["reading", "computing the report", "writing"]) as stages:
        stages.start("reading")
        frame = read_table(args.scores, exact=[args.score_column, *(late_columns or []),
                                               *([args.weight_column] if args.weight_column
                                                 else [])],
                           text=_text_columns(args))
        p = read_scores(frame, args.score_column, args.scores, scale=args.scale, verb="report")
        given = read_weights(frame, args.weight_column, args.scores, "report",
                             dots=getattr(args, "weight_dots", None))
        late = None
        if late_columns is None:
            y, labels = read_labels(frame, args.label_column, args.scores,
                                    positive=args.positive_label,
                                    score_column=args.score_column)
            closed = np.ones(y.shape[0], dtype=bool)
        else:
            late = read_late_labels(frame, args, args.scores, sample_weight=given)
            y, closed = late.y, ~late.is_open
            labels = [f"no event within {late.horizon:g}", f"event within {late.horizon:g}"]
        if given is not None:  # rows of weight 0 are not judged
            closed = closed & (given > 0)
        if np.unique(y).shape[0] < 2:
            raise DataError(f"{args.scores}: both outcomes are needed (rows with and without "
                            "the event)")
        q = None
        extra_cells: dict = {}
        if args.unlabelled is not None:
            column = args.unlabelled_score_column or args.score_column
            uframe = read_table(args.unlabelled, exact=[column], text=_unlabelled_text(args))
            q = read_scores(uframe, column, args.unlabelled, scale=args.scale,
                            flag="--unlabelled-score-column" if args.unlabelled_score_column
                            else "--score-column")
            _unlabelled_cells(args, uframe, extra_cells)
        check_row_count("report", p.shape[0], args.scores, "labelled rows",
                        sample_weight=given)
        if q is not None:
            check_row_count("report", q.shape[0], args.unlabelled, "unlabelled rows")
            if args.batch_size is not None and args.batch_size >= q.shape[0]:
                warn_line("report", (
                    f"{args.unlabelled}: --batch-size {args.batch_size} is not below the file's "
                    f"{q.shape[0]} rows, so there is one batch: the prevalence alarm needs a "
                    "series of batches and cannot judge a drift from one"))
        check_ranking("report", p[closed], y[closed], labels, args.scores,
                      sample_weight=None if given is None else given[closed])
        check_scores_vary("report", p[closed], args.scores, args.score_column,
                          "the page's ranking, calibration slope and cutoff say no more than "
                          "whether acting on every row or on none costs less")
        if args.scale == "log-odds":  # the report reads the log-odds as given where it can
            extra_scale = {"score_scale": "log-odds"}
        else:
            extra_scale = {}
        if [str(v) for v in labels] != ["0", "1"]:  # say on the page which class is positive
            args.title = f"{args.title} (positive class: {labels[1]})"
        extra: dict = {"guarantee": guarantee, **extra_scale}
        extra.update(extra_cells)
        if args.group_column is not None:
            extra["groups"] = _group_labels(frame, args.group_column, args.scores)
        if args.cell_column is not None:
            extra["cells"] = _group_labels(frame, args.cell_column, args.scores,
                                           flag="--cell-column")
        if late is not None:
            extra["horizon_labels"] = late  # (carrying the given weights)
        else:
            extra["y_true"] = y
            if given is not None:
                extra["sample_weight"] = given
        if args.batch_size is not None:
            extra.update(alarm_reference=args.alarm_reference,
                         alarm_decision_interval=args.alarm_decision_interval)
        content = _build_and_write(
            args, stages, y_prob=p, costs=costs, capacity=args.capacity,
            unlabelled_prob=q, batch_size=args.batch_size,
            class_names=None if [str(v) for v in labels] == ["0", "1"] else [
                str(v) for v in labels], **extra,
        )
    summary = {"out": args.out, "n_rows": int(content.n_rows),
               "labels": {"negative": labels[0], "positive": labels[1]}}
    line = (f"wrote {_written_to(args.out)}: {content.n_rows} labelled rows (positive label "
            f"{shown(labels[1])})")
    if content.chosen_cutoff is not None:
        summary["cutoff"] = float(content.chosen_cutoff)
        rec = getattr(content, "recommendation", None)
        if rec is None or rec.cutoff == content.chosen_cutoff:
            line += f", cutoff {cutoff_text(content.chosen_cutoff, '.4f')}"
        else:
            # the page recommends another cutoff than the least-cost one (the settled or Bayes
            # cutoff, a capacity or a new prevalence): say both, the recommendation first
            summary["recommended_cutoff"] = float(rec.cutoff)
            every = (" (below every probability: act on every row)" if rec.cutoff < 0
                     and getattr(args, "scale", None) != "log-odds" else "")
            line += (f", recommended cutoff {cutoff_text(rec.cutoff, '.4f')}{every} ({rec.name}; "
                     f"least-cost cutoff {cutoff_text(content.chosen_cutoff, '.4f')} on these rows)")
    if content.chosen_cutoff is not None and getattr(args, "scale", None) == "percent":
        # the cutoffs are probabilities; the file's column holds percentages
        shown_cutoff = summary.get("recommended_cutoff", summary["cutoff"])
        line += (f" (cutoffs are probabilities: in the file's percentages "
                 f"{100 * shown_cutoff:.4g})")
        summary["score_column_divided_by"] = 100
    if content.target_prevalence is not None:
        summary.update(source_prevalence=float(content.source_prevalence),
                       target_prevalence=float(content.target_prevalence),
                       shift_pvalue=float(content.shift_pvalue))
        line += (f", prevalence {content.source_prevalence:.4f} -> "
                 f"{content.target_prevalence:.4f} (shift p = {content.shift_pvalue:.3g})")
        if content.applied_prevalence is not None and content.adaptation_weight is not None:
            # what the rules move to: the wrapper's evidence gate on that estimate
            summary.update(applied_prevalence=float(content.applied_prevalence),
                           adaptation_weight=float(content.adaptation_weight))
            line += f", applied by the rules {content.applied_prevalence:.4f}"
    line += promise_summary(content, summary)
    metric_summary(content, summary)
    line += group_summary(content, summary)
    line += cell_summary(content, summary)
    if given is not None:
        summary["weights"] = weight_summary(args.weight_column, given)
        line += f"; weighted by {shown(args.weight_column)}"
    _print_summary(args, line, summary)
    return 0
