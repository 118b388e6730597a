"""``probwrap calibrate fit`` and ``probwrap calibrate apply``: calibration maps for score files.

``fit`` reads a labelled score file, fits a calibration map exactly as
:class:`probwrap.CalibrationWrapper` would on an already-fitted model (the score column acts as
the model's output, so ``--method auto`` makes the same choice the wrapper makes) and saves the
map as JSON (:func:`probwrap.calibration.map_to_dict`). ``apply`` adds a column of calibrated
probabilities to a score file. Also holds the small readers that the ``cutoff`` and
``prevalence`` verbs share.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from .._validation import plain
from ._common import (
    NAMED_ROWS,
    DataError,
    StandardStream,
    add_encoding_flag,
    add_positive_label_flag,
    add_seed_flag,
    add_weight_flag,
    check_ranking,
    check_row_count,
    check_scores_vary,
    clean,
    is_standard_stream,
    not_found,
    require,
    row_number,
    rows_text,
    shown,
    table_kind,
    warn_line,
    whole_number,
)
from ._files import (
    check_out_suffix,
    check_writable,
    output_separator,
    replaced_note,
    to_stdout,
    write_table,
    write_text,
)
from ._progress import Stages, progress
from ._promise_flags import (
    add_late_label_flags,
    late_label_columns,
    late_label_line,
    late_label_summary,
    read_late_labels,
)
from ._tables import (
    numeric_column,
    positions_text,
    probability_column,
    read_labels,
    read_table,
    read_weights,
)
from ._wording import cli_wording

__all__ = [
    "register", "read_labels", "read_scores", "write_table", "add_scale_flag", "whole_number",
    "report_warnings", "load_map",
]

SCALES = ("proba", "log-odds")
#: what ``--scale`` takes: the scales of :data:`SCALES` and ``percent``, probabilities written
#: from 0 to 100, which are divided by 100 when read (a map takes them as ``proba``)
SCORE_SCALES = ("proba", "percent", "log-odds")
#: the maps ``calibrate fit --method`` offers besides auto: the names a saved map file records
#: (``probwrap.calibration._serialize.MAP_NAMES``, in its order; a test checks they agree),
#: written out here because importing the calibration package loads scikit-learn and SciPy,
#: which every command, ``probwrap --help`` too, would then wait for
METHODS = ("temperature", "platt", "beta", "binning", "isotonic", "venn_abers",
           "vector_scaling", "matrix_scaling", "identity")
#: rows predicted per step in ``apply`` (a progress bar counts the steps on a terminal)
_CHUNK = 200_000


# -- shared readers ------------------------------------------------------------------------------
def add_scale_flag(parser: argparse.ArgumentParser, *, default: str | None = "proba",
                   help_extra: str = "") -> None:
    """The ``--scale`` flag: what the score column holds."""
    parser.add_argument(
        "--scale",
        choices=SCORE_SCALES,
        default=default,
        help="what the score column holds: probabilities of the positive class in [0, 1] "
        + ("(proba, the default), " if default == "proba" else "(proba), ")
        + "the same written as percentages from 0 to 100 (percent: each score is divided by "
        "100 when read) or log-odds (any real number, e.g. a decision_function value)"
        + help_extra,
    )


def probability_scale(scale: str | None) -> str | None:
    """The scale a map or a computation takes for scores read with ``--scale scale``:
    percentages are read as probabilities (divided by 100), the others as they are.

    Examples
    --------
    >>> probability_scale("percent"), probability_scale("log-odds")
    ('proba', 'log-odds')
    """
    return "proba" if scale == "percent" else scale


def read_scores(frame: Any, column: str, path: str | Path, *, scale: str,
                flag: str = "--score-column", verb: str | None = None,
                allow_missing: bool = False) -> np.ndarray:
    """The score column as finite floats; probabilities must lie in [0, 1]. ``allow_missing``:
    missing scores are NaN (``calibrate apply --missing keep``), not an error.

    Log-odds that all lie in [0, 1] (at least 10 rows, not all equal) are most likely
    probabilities passed with ``--scale log-odds``: read as log-odds they are probabilities
    from 0.5 to 0.73 only, so with ``verb`` a warning line says so (real log-odds can lie
    there, so it is not an error). Log-odds in [0, 100] above 1 and none negative (at least 10
    rows) are most likely percentages: read as log-odds every row is at least even odds, and
    a warning line says so.
    """
    if scale == "proba":
        return probability_column(frame, column, path, flag=flag, allow_missing=allow_missing)
    if scale == "percent":
        return _percent_column(frame, column, path, flag=flag, verb=verb,
                               allow_missing=allow_missing)
    values = numeric_column(frame, column, path, flag=flag, allow_missing=allow_missing,
                            infinite_hint=(
        "; an infinite log-odds comes from a probability of exactly 0 or 1 (a forest's vote "
        "share, a rounded score): give the probabilities with --scale proba instead, which "
        "reads 0 and 1"))
    given = values[~np.isnan(values)]
    if (verb is not None and given.shape[0] >= 10 and given.min() >= 0.0
            and given.max() <= 1.0 and given.max() > given.min()):
        lo, hi = float(given.min()), float(given.max())
        warn_line(verb, (
            f"{path}: every value of column {plain(column)!r} lies in [0, 1] ({lo:.3g} to "
            f"{hi:.3g}), as probabilities do, but the scale is log-odds, which reads them as "
            f"probabilities from {1 / (1 + np.exp(-lo)):.3g} to {1 / (1 + np.exp(-hi)):.3g} "
            "only; if the column holds probabilities, use --scale proba"))
    elif (verb is not None and given.shape[0] >= 10 and given.min() >= 0.0
            and 1.0 < given.max() <= 100.0):
        # percentages passed as log-odds (the percentages message names --scale log-odds for
        # real log-odds): no value below 0 means every row at least even odds
        # (since 5 December 2026)
        lo, hi = float(given.min()), float(given.max())
        warn_line(verb, (
            f"{path}: every value of column {plain(column)!r} lies in [0, 100] ({lo:.3g} to "
            f"{hi:.3g}), none negative, as percentages do, but the scale is log-odds, which "
            f"reads every row as a probability of at least {1 / (1 + np.exp(-lo)):.3g}; if "
            "the column holds percentages, use --scale percent"))
    return values


def _percent_column(frame: Any, column: str, path: str | Path, *, flag: str,
                    verb: str | None, allow_missing: bool) -> np.ndarray:
    """``--scale percent``: the column's numbers in [0, 100] divided by 100 (a new array; the
    table is not changed), or a DataError naming the first row outside; every value in [0, 1]
    (at least 10 rows, not all equal) draws a warning that they look like probabilities."""
    values = numeric_column(frame, column, path, flag=flag, allow_missing=allow_missing,
                            percent_sign=True)
    with np.errstate(invalid="ignore"):
        bad = (values < 0.0) | (values > 100.0)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        hint = ("; for log-odds scores use --scale log-odds" if np.nanmin(values) < 0.0
                else "")
        raise DataError(
            f"{path}: column {shown(column)}, {row_number(path, row)}: {shown(values[row])} is not a percentage in [0, 100] (--scale percent reads "
            f"every score as a percentage; {int(bad.sum())} of {int(np.isfinite(values).sum())} "
            f"values lie outside){hint}")
    given = values[~np.isnan(values)]
    if (verb is not None and given.shape[0] >= 10 and given.max() <= 1.0
            and given.max() > given.min()):
        warn_line(verb, (
            f"{path}: every value of column {plain(column)!r} lies in [0, 1] "
            f"({float(given.min()):.3g} to {float(given.max()):.3g}), as probabilities do, but "
            "--scale percent divides them by 100, reading them as probabilities of at most "
            f"{float(given.max()) / 100:.3g}; if the column holds probabilities, use --scale "
            "proba"))
    return values / 100.0


def report_warnings(verb: str, caught: list) -> None:
    """Print each distinct library warning once, on one line of stderr (no source lines)."""
    seen: set[str] = set()
    for w in caught:
        message = clean(cli_wording(" ".join(str(w.message).split())))
        if message not in seen:
            seen.add(message)
            print(f"probwrap {verb}: warning: {message}", file=sys.stderr)


def to_log_odds(scores: np.ndarray, scale: str) -> np.ndarray:
    """Scores on the log-odds scale that the maps take (probabilities via proba_to_log_odds)."""
    from probwrap.calibration import proba_to_log_odds

    return proba_to_log_odds(scores) if probability_scale(scale) == "proba" else scores


def fit_map(
    log_odds: np.ndarray, y: np.ndarray, *, method: str, folds: int, seed: int | None,
    sample_weight: np.ndarray | None = None, copies: np.ndarray | None = None,
) -> Any:
    """Fit :class:`probwrap.CalibrationWrapper` on the scores as a frozen model; return it.

    ``sample_weight`` (e.g. late-label weights) goes to the wrapper's ``fit``. ``copies``: the
    cell of every row when some rows are copies of others (:func:`file_copies`); they ride
    along as a second column (the frozen model reads the first only), so the wrapper's folds
    keep each row's copies together as they do for a model's features.
    """
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper
    from probwrap._column_models import LogOddsColumn

    wrapper = CalibrationWrapper(
        FrozenEstimator(LogOddsColumn().fit()), method=method, cv=folds, random_state=seed
    )
    X = log_odds[:, None] if copies is None else np.column_stack([log_odds, copies])
    return wrapper.fit(X, y, sample_weight=sample_weight)


def file_copies(frame: Any, used: list[str]) -> np.ndarray | None:
    """The cell of every row when some rows of the file are copies of others, else None.

    Copies are told as the wrappers tell them by a model's features
    (:func:`probwrap._heldout.copied_row_cells`), with the file's other columns (not the
    score, label or weight columns ``used``) as the features: rows identical in every column,
    one of whose values in another column occurs in no row outside them, in a column with at
    least a quarter as many distinct values as there are distinct rows (an id, a measurement
    with many digits) whose repeats chance does not explain. The score and label alone cannot
    tell copies from ties (a tree gives many rows one score), so a file without such a column
    is never read as holding copies.
    """
    pd = require("pandas")
    other = [c for c in frame.columns if c not in set(used)]
    n = int(frame.shape[0])
    if not other or n < 2:
        return None
    keys = pd.util.hash_pandas_object(frame, index=False).to_numpy()
    _, cells = np.unique(keys, return_inverse=True)
    cells = cells.ravel()
    n_distinct = int(cells.max()) + 1
    if n_distinct == n:
        return None
    from probwrap._heldout import copied_row_cells

    return copied_row_cells(frame[other], cells, min_columns=1)


# -- verbs ---------------------------------------------------------------------------------------
def _fit(args: argparse.Namespace) -> int:
    from probwrap.calibration import map_to_dict

    with Stages("calibrate", ["reading", "fitting the map", "writing"]) as stages:
        stages.start("reading")
        late_columns = late_label_columns(args, args._fit_parser)
        frame = read_table(args.scores, exact=[args.score_column, *(late_columns or []),
                                                *([args.weight_column] if args.weight_column
                                                  else [])])
        scores = read_scores(frame, args.score_column, args.scores, scale=args.scale,
                             verb="calibrate")
        given = read_weights(frame, args.weight_column, args.scores, "calibrate",
                             dots=getattr(args, "weight_dots", None))
        late = weights = None
        if late_columns is None:
            y, labels = read_labels(
                frame, args.label_column, args.scores, positive=args.positive_label,
                score_column=args.score_column
            )
            closed = np.ones(y.shape[0], dtype=bool)
        else:
            late = read_late_labels(frame, args, args.scores, sample_weight=given)
            y, weights, closed = late.y, late.sample_weight, ~late.is_open
            labels = [f"no event within {late.horizon:g}", f"event within {late.horizon:g}"]
        if late is None:  # (late labels carry the given weights in theirs)
            weights = given
        if given is not None:  # rows of weight 0 are not counted
            closed = closed & (given > 0)
        check_row_count("calibrate", scores.shape[0], args.scores, sample_weight=given,
                        counted="the choice between maps (--method auto) counts")
        check_ranking("calibrate", scores[closed], y[closed], labels, args.scores,
                      sample_weight=None if weights is None else weights[closed])
        check_scores_vary("calibrate", scores[closed], args.scores, args.score_column,
                          "the map can learn one probability for that score and nothing about "
                          "any other score it is applied to")
        counts = np.bincount(y[closed], minlength=2)
        if args.method == "auto" and counts.min() < 2:
            raise DataError(
                f"{args.scores}: column {shown(args.label_column or args.event_column)} has "
                f"only {counts.min()} "
                "row(s) of one label; --method auto needs at least two of each to compare maps "
                "by cross-validation"
            )
        copies = file_copies(frame, [args.score_column, args.label_column, args.weight_column,
                                     *(late_columns or [])])
        if copies is not None:
            n_copied = int(scores.shape[0] - (int(copies.max()) + 1))
            warn_line("calibrate", (
                f"{args.scores}: {n_copied} row(s) repeat another row in every column (a file "
                "passed twice, an upsampled class); the map's folds keep each row's copies "
                "together, but the map still counts every copy as a row: drop them if they are "
                "not real repeats"))
        stages.start("fitting the map")
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                wrapper = fit_map(
                    to_log_odds(scores, args.scale), y, method=args.method, folds=args.folds,
                    seed=args.seed, sample_weight=weights, copies=copies,
                )
        except ValueError as exc:
            raise DataError(f"{args.scores}: the map cannot be fitted ({exc})") from None
        report_warnings("calibrate", caught)
        metadata: dict[str, Any] = {
            "score_scale": probability_scale(args.scale),
            "labels": labels,
            "n_rows": int(scores.shape[0]),
            "n_positive": int(counts[1]),
            "fitted_on": Path(args.scores).name,
            "score_column": args.score_column,
        }
        if late is not None:
            metadata["late_labels"] = late_label_summary(late)
        if given is not None:
            metadata["weight_column"] = args.weight_column
        if args.method == "auto":
            metadata["auto_log_loss"] = {
                name: {"log_loss": loss, "standard_error": se}
                for name, (loss, se) in wrapper.method_scores_.items()
            }
            # why each other candidate has no loss, and whether a sample of rows scored them
            metadata["auto_notes"] = {
                name: clean(" ".join(str(note).split()))
                for name, note in wrapper.method_notes_.items()
            }
        description = map_to_dict(wrapper.calibrator_, **metadata)
        stages.start("writing")
        write_text(args.out, json.dumps(description, indent=2, allow_nan=False) + "\n")
    # with the map on standard output, the summary goes to stderr (stdout holds the map only)
    echo = sys.stderr if to_stdout(args.out) else sys.stdout
    where = "standard output" if to_stdout(args.out) else f"{args.out}{replaced_note(args.out)}"
    print(
        f"fitted {'an' if wrapper.method_[0] in 'aeiou' else 'a'} {wrapper.method_} map on {scores.shape[0]} rows ({counts[1]} with label "
        f"{shown(labels[1])}) and saved it to {where}", file=echo,
    )
    if late is not None:
        print("  " + late_label_line(late), file=echo)
    if args.method == "auto":
        _print_candidates(wrapper, echo)
    return 0


def _print_candidates(wrapper: Any, echo: Any = None) -> None:
    """Every candidate of ``--method auto``: its cross-validated log loss, or why it has none
    (left out after a fold, not eligible, failed), and whether a sample of the rows scored
    them."""
    import functools

    print_ = functools.partial(print, file=echo or sys.stdout)
    notes = {name: clean(" ".join(str(note).split()))
             for name, note in wrapper.method_notes_.items()}
    # one column for the names, as wide as the longest ("class_shares" is 12 characters)
    width = max([11, *(len(str(name)) for name in (*wrapper.method_scores_, *notes))])
    if wrapper.method_scores_:
        # the standard error is that of each candidate's difference from the best one (so the
        # best one has none): printing it as "+-" read as the uncertainty of the loss itself
        print_(f"  {'candidate':<{width}} cross-validated log loss   (standard error of the "
               "difference from the lowest)")
        for name, (loss, se) in sorted(wrapper.method_scores_.items(), key=lambda kv: kv[1][0]):
            mark = "  <- chosen" if name == wrapper.method_ else ""
            gap = "lowest" if se == 0.0 else f"{se:.5f}"
            print_(f"  {name:<{width}} {loss:.5f}   ({gap}){mark}")
    for name, note in notes.items():
        if name == "auto":
            continue
        if name in wrapper.method_scores_:  # scored, then set aside (e.g. a boundary)
            print_(f"  {name:<{width}} {note}")
        else:
            mark = "  <- chosen" if name == wrapper.method_ else ""
            print_(f"  {name:<{width}} no loss: {note}{mark}")
    if "auto" in notes:
        print_(f"  note: {notes['auto']}")


def load_map(path: str | Path, scale: str | None = None) -> tuple[Any, dict[str, Any], str]:
    """A saved map, its description and the scale of the scores it takes.

    ``scale`` (the ``--scale`` flag of ``apply``) is used when the file does not record the
    scale (field ``score_scale``; ``metadata.score_scale`` in version 1 files); when both are
    given they must agree. Any problem is a DataError naming the file.
    """
    from probwrap.calibration import map_from_dict, map_score_scale
    from probwrap.calibration._serialize import MAP_FORMAT

    if is_standard_stream(path):
        path = path if isinstance(path, StandardStream) else StandardStream()
        source = getattr(sys.stdin, "buffer", None)
        if source is None:
            raise DataError(f"{path}: there is no standard input to read")

        def read_text() -> str:
            return source.read().decode("utf-8-sig")
    else:
        path = Path(path)
        if not path.exists():
            raise DataError(not_found(path))
        if path.is_dir():
            raise DataError(f"{path}: is a folder, not a map file")

        def read_text() -> str:
            return path.read_text(encoding="utf-8-sig")
    try:
        # a byte-order mark (editors on Windows add one) is skipped, as in CSV files
        description = json.loads(read_text())
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DataError(f"{path}: not a JSON file ({exc}); --map takes the .json map file "
                        "written by `probwrap calibrate fit --out`") from None
    except RecursionError:
        raise DataError(f"{path}: not a probwrap map (JSON nested too deeply)") from None
    except OSError as exc:
        raise DataError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if not isinstance(description, dict):
        raise DataError(f"{path}: not a probwrap map (the file must hold a JSON object)")
    if description.get("format") != MAP_FORMAT:
        raise DataError(
            f"{path}: not a probwrap map (field 'format' must be {plain(MAP_FORMAT)!r}; got "
            f"{shown(description.get('format'))})"
        )
    metadata = description.get("metadata", {})
    if not isinstance(metadata, dict):
        raise DataError(f"{path}: not a usable probwrap map: field 'metadata' must be an object")
    stored = description.get("score_scale", metadata.get("score_scale"))
    if stored is None and scale is None:
        raise DataError(
            f"{path}: the map file does not record the scale of its scores (field "
            "'score_scale'); say it with --scale proba or --scale log-odds"
        )
    wanted = probability_scale(scale)  # percentages are read as probabilities
    if stored in SCALES and wanted is not None and stored != wanted:
        raise DataError(
            f"{path}: the map was fitted on {stored} scores but --scale says {scale}"
        )
    try:
        used = map_score_scale(description, score_scale=wanted)
        cal_map = map_from_dict(description, score_scale=wanted)
    except (ValueError, TypeError, KeyError) as exc:
        raise DataError(f"{path}: not a usable probwrap map: {clean(str(exc))}") from None
    except RecursionError:
        raise DataError(f"{path}: not a probwrap map (nested too deeply)") from None
    if cal_map.n_score_columns_ != 1:
        raise DataError(f"{path}: the map is multiclass; score files here hold one binary score")
    if scale == "percent":  # the file's scores are read as percentages, then divided
        used = "percent"
    return cal_map, dict(description), used


#: rows with a missing score named in the warning of ``calibrate apply --missing keep``
_NAMED_MISSING = NAMED_ROWS


def _missing_rows_text(path: Any, rows: np.ndarray) -> str:
    """The first rows of ``rows`` (0-based data rows) as a message names them (see
    :func:`._common.rows_text`)."""
    return rows_text(path, rows)


#: separators as a summary line names them
_SEPARATOR_WORDS = {",": "commas", ";": "semicolons", "\t": "tabs"}


def _with_commas(sep: str, dialect: dict[str, Any]) -> str:
    return " with decimal commas" if sep == ";" and dialect.get("decimal") == "," else ""


def _separator_note(out: Any, dialect: dict[str, Any] | None) -> str:
    """", separated by commas as .csv files are (the file read was separated by tabs)" when
    the output's extension chose another separator than the CSV file read had (see
    :func:`._files.output_separator`); "" otherwise (standard output keeps the input's)."""
    if not dialect or to_stdout(out):
        return ""
    was = dialect.get("sep", ",")
    now = output_separator(out, was, dialect.get("decimal", "."))
    if now == was:
        return ""
    return (f", separated by {_SEPARATOR_WORDS.get(now, repr(now))} as "
            f"{Path(out).suffix.lower()} files{_with_commas(now, dialect)} are (the file read was separated by "
            f"{_SEPARATOR_WORDS.get(was, repr(was))})")


def _apply(args: argparse.Namespace) -> int:
    from pandas.api.types import is_numeric_dtype

    keep_missing = args.missing == "keep"
    with Stages("calibrate", ["reading", "calibrating", "writing"]) as stages:
        stages.start("reading")
        cal_map, description, scale = load_map(args.map, args.scale)
        # every column is written out as it was read: CSV columns as their text
        frame = read_table(args.scores, exact=[args.score_column], as_text=True)
        scores = read_scores(frame, args.score_column, args.scores, scale=scale,
                             verb="calibrate", allow_missing=keep_missing)
        # percentages are written back as the percentages read (they were written as the
        # probabilities, 85.2784 as 0.8527840000000001, until 5 December 2026)
        written_scores = (numeric_column(frame, args.score_column, args.scores,
                                         flag="--score-column", allow_missing=True,
                                         percent_sign=True) if scale == "percent" else scores)
        repeated = frame.attrs.get("repeated_columns", {})
        if args.output_column in repeated:
            raise DataError(
                f"{args.scores}: already has columns named {shown(args.output_column)} "
                f"({positions_text(repeated[args.output_column])}, counting from 1); choose "
                "another name with --output-column")
        if repeated and not to_stdout(args.out) and table_kind(Path(args.out)) == "Parquet":
            # a Parquet file cannot hold two columns of one name (pandas refuses to write it)
            name, where = next(iter(repeated.items()))
            raise DataError(
                f"{args.scores}: {frame.attrs.get('names_from', 'the header')} names the "
                f"column {shown(name)} more than once "
                f"({positions_text(where)}, counting from 1), and a Parquet file cannot hold "
                "two columns of one name; rename one of them (such as "
                f"{shown(name + '_2')}), or write --out as .csv or .tsv, which keep both")
        if args.output_column in frame.columns:
            raise DataError(
                f"{args.scores}: already has a column {shown(args.output_column)}; choose another "
                "name with --output-column"
            )
        missing = np.flatnonzero(np.isnan(scores))
        if missing.shape[0] == scores.shape[0]:
            raise DataError(
                f"{args.scores}: column {shown(args.score_column)} holds no score (every row is "
                "missing); check --score-column"
            )
        if missing.shape[0]:
            warn_line("calibrate", (
                f"{args.scores}: {missing.shape[0]} of {scores.shape[0]} rows have no score in "
                f"column {shown(args.score_column)}: {_missing_rows_text(args.scores, missing)}; "
                f"they are written with an empty {shown(args.output_column)} (--missing refuse "
                "stops at the first instead)"))
        stages.start("calibrating")
        log_odds = to_log_odds(scores[np.isfinite(scores)], scale)
        given = np.empty(log_odds.shape[0])
        starts = range(0, log_odds.shape[0], _CHUNK)
        for start in progress(starts, desc="calibrating", total=len(starts)):
            given[start : start + _CHUNK] = cal_map.predict(log_odds[start : start + _CHUNK])
        if not np.all(np.isfinite(given)):
            raise DataError(f"{args.map}: the map gives probabilities that are not finite")
        out = np.full(scores.shape[0], np.nan)
        out[np.isfinite(scores)] = given
        dialect = frame.attrs.get("csv_dialect")
        written = frame.attrs.get("csv_header")
        aside = frame.attrs.get("repeated_as", {})
        frame = frame.copy()
        frame.attrs.clear()
        if written is not None and len(written) == frame.shape[1]:
            # empty header cells stay empty (they were written back as "Unnamed: 0", which
            # changed the header of a file replaced in place)
            frame.columns = [name if not str(name).strip() and str(column).startswith("Unnamed: ")
                             else column for name, column in zip(written, frame.columns,
                                                                 strict=True)]
        # a name the header gives more than once is written back as it was, at each place
        frame.columns = [aside.get(str(column), column) for column in frame.columns]
        if not is_numeric_dtype(frame[args.score_column].dtype):
            # a CSV column read as text: written as the numbers it holds (with the decimal
            # mark of the file it came from; a missing score as an empty field);
            # a Parquet column of numbers keeps its type (float32 stays float32)
            frame[args.score_column] = written_scores
        frame[args.output_column] = out
        stages.start("writing")
        write_table(frame, "-" if to_stdout(args.out) else args.out, dialect=dialect)
    # with the table on standard output, the summary goes to stderr
    print(
        f"wrote {frame.shape[0]} rows with column {shown(args.output_column)} "
        f"({description['method']} map, {scale} scores) to "
        f"{'standard output' if to_stdout(args.out) else str(args.out) + replaced_note(args.out)}"
        f"{_separator_note(args.out, dialect)}",
        file=sys.stderr if to_stdout(args.out) else sys.stdout,
    )
    return 0


def register(subparsers: Any) -> None:
    """Add ``calibrate fit`` and ``calibrate apply``."""
    from ._common import TABLE_SUFFIXES

    parser = subparsers.add_parser(
        "calibrate",
        help="fit a calibration map on a labelled score file, or apply a saved one",
        description="Fit a calibration map on held-out scores and labels and save it as JSON, "
        "or apply a saved map to new scores.",
    )
    steps = parser.add_subparsers(dest="step", metavar="STEP")
    steps.required = True

    fit = steps.add_parser(
        "fit",
        help="fit a map on a labelled score file and save it as JSON",
        description="Fit a calibration map on a labelled score file (held-out scores: rows the "
        "model was not trained on) and save it as JSON.",
    )
    fit.add_argument("--scores", required=True, metavar="FILE", help="CSV or Parquet score file")
    fit.add_argument("--score-column", required=True, metavar="C", help="column of scores")
    fit.add_argument("--label-column", metavar="L",
                     help="column of true labels (or late labels: --time-column, "
                     "--event-column, --horizon)")
    add_positive_label_flag(fit)
    add_scale_flag(fit)
    add_encoding_flag(fit)
    fit.add_argument(
        "--method", choices=("auto", *METHODS), default="auto",
        help="calibration map; auto (default) keeps the simplest map whose cross-validated log "
        "loss is within one standard error of the best",
    )
    fit.add_argument(
        "--folds", type=whole_number(2), default=5, metavar="K",
        help="cross-validation folds used by --method auto (default 5)",
    )
    add_seed_flag(fit, "the folds")
    add_late_label_flags(fit)
    add_weight_flag(fit)
    fit.add_argument("--out", required=True, metavar="MAP.json",
                     help="where to save the map (.json); '-': print the map on standard "
                     "output (the summary then goes to stderr)")

    def run_fit(args: argparse.Namespace) -> int:
        check_out_suffix(fit, args.out, (".json",), stdout="the map")
        check_writable(args.out, inputs={"--scores": args.scores})
        return _fit(args)

    fit.set_defaults(func=run_fit, _fit_parser=fit)

    apply = steps.add_parser(
        "apply",
        help="add calibrated probabilities to a score file",
        description="Apply a saved map: write the score file with an added column of calibrated "
        "probabilities (CSV or Parquet, by the extension of --out). The output may replace the "
        "input file: it is written completely before it takes the input's place.",
    )
    apply.add_argument("--map", required=True, metavar="MAP.json", help="map saved by 'fit'")
    apply.add_argument("--scores", required=True, metavar="FILE", help="CSV or Parquet score file")
    apply.add_argument("--score-column", required=True, metavar="C", help="column of scores")
    add_scale_flag(
        apply, default=None,
        help_extra="; needed only when the map file does not record the scale it was fitted on "
        "(it must agree when it does)",
    )
    add_encoding_flag(apply)
    apply.add_argument(
        "--output-column", default="calibrated_probability", metavar="NAME",
        help="name of the added column (default calibrated_probability)",
    )
    apply.add_argument(
        "--missing", choices=("keep", "refuse"), default="keep",
        help="rows whose score is missing (an empty field, NA, a Parquet null): keep (default) "
        "writes them with an empty calibrated probability and warns, counting them and naming "
        "the first rows; refuse stops at the first one",
    )
    apply.add_argument("--out", default=None, metavar="FILE",
                       help="output file: .csv (comma-separated; semicolons for decimal "
                       "commas or a semicolon file read), .tsv (tab-separated), .parquet or "
                       ".pq; '-' or left out: CSV on standard output, separated as the file "
                       "read (the summary line then goes to stderr)")

    def run_apply(args: argparse.Namespace) -> int:
        if not args.output_column.strip():
            # an empty name is written as an empty header cell, read back as "Unnamed: k"
            apply.error(f"--output-column {args.output_column!r}: give a name with at least "
                        "one visible character")
        if to_stdout(args.out):
            args.out = None  # standard output: CSV
        else:
            check_out_suffix(apply, args.out, TABLE_SUFFIXES)
            # --scores may be replaced (the table with its added column: documented); the
            # map may not
            check_writable(args.out, inputs={"--map": args.map})
        return _apply(args)

    apply.set_defaults(func=run_apply)
