"""``probwrap prevalence``: the share of positives in an unlabelled batch of scores.

Two ways in:

* ``--source-prevalence P``: the scores are taken as calibrated probabilities for a population
  with prevalence ``P``; the new prevalence is the maximum-likelihood (EM) estimate of
  :func:`probwrap.shift.em_prior`, its interval a bootstrap of the unlabelled rows.
* ``--reference FILE --label-column L``: a labelled file of held-out scores from the same model.
  :class:`probwrap.shift.PriorEstimator` learns from it (recalibrating the scores, and the
  confusion matrices for ``bbse``, ``acc`` and ``pacc``), then estimates the batch's prevalence
  with a bootstrap interval over both files.

Both report a test of "the prevalence has not moved": with ``--source-prevalence`` the
likelihood-ratio test against that prevalence taken as exact (:func:`probwrap.shift.shift_test`);
with ``--reference`` the two-sample score test, which also carries the labelled file's own error
(``PriorEstimate.shift_statistic``, on the chi-square scale).

With ``--batch-size N`` or ``--batch-column C`` the prevalence is also estimated batch by batch
(in the order of each batch's first row), and a two-sided CUSUM of the batch estimates against the
source prevalence names the batches after which a prevalence alarm fired. Each batch enters as
the signed root of its shift test statistic (a standard normal when nothing moved,
:func:`probwrap.shift.signed_shift_scores`); with ``--reference`` the quoted in-control run
length is the one reached with probability 0.9 over the reference rows every batch is compared
with (:func:`probwrap.shift.baseline_error_run_length`).
"""

from __future__ import annotations

import argparse
import json
import re
import warnings
from typing import Any

import numpy as np

from .._validation import plain
from ._calibrate import add_scale_flag, read_scores, report_warnings
from ._common import (
    DataError,
    add_encoding_flag,
    add_format_flag,
    add_positive_label_flag,
    add_resamples_flag,
    add_seed_flag,
    add_weight_dots_flag,
    check_ranking,
    check_row_count,
    check_scores_vary,
    is_standard_stream,
    not_a_number,
    percent_hint,
    row_number,
    shown,
    warn_line,
    weight_summary,
    whole_number,
)
from ._cutoff import _level
from ._prevalence_numbers import (
    batch_alarm_json,
    effective_rows,
    held_toward_source,
    interval_reach,
    kish_scaled,
    library_weights,
    prevalence_from_reference,
    prevalence_from_source,
    reference_estimator,
    source_baseline_standard_error,
    table_cases,
)
from ._progress import Stages
from ._promise_flags import add_alarm_flags, alarm_settings
from ._tables import read_labels, read_table, read_weights, refuse_repeated

#: Level at which the note under the estimate calls the test's result a shift (common practice).
SHIFT_LEVEL = 0.05

__all__ = ["register", "prevalence_from_source", "prevalence_from_reference", "batch_alarm_json"]


def _prevalence(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise not_a_number(text) from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"must be a share strictly between 0 and 1; got {text}"
                                         f"{percent_hint(value)}")
    return value


def _cells(frame: Any, column: str, path: str, flag: str) -> np.ndarray:
    """The cell labels of ``column`` (``flag``), as written; a missing column or an empty
    label is a :class:`DataError` naming the file and the flag."""
    if column not in frame.columns:
        refuse_repeated(frame, column, path, flag)
        raise DataError(f"{path}: no column {plain(column)!r} ({flag}); columns: "
                        f"{', '.join(map(str, list(frame.columns)[:12]))}")
    values = np.asarray(frame[column].to_numpy(), dtype=object)
    empty = [i for i, v in enumerate(values.tolist())
             if v is None or (isinstance(v, float) and v != v) or str(v).strip() == ""]
    if empty:
        raise DataError(f"{path}: column {plain(column)!r} ({flag}) has no cell in row "
                        f"{empty[0] + 1} ({len(empty)} such rows); give every row its cell")
    return np.asarray([str(v) for v in values.tolist()], dtype=object)


def _batch_labels(frame: Any, args: argparse.Namespace, n: int) -> np.ndarray | None:
    if args.batch_size is not None:
        return (np.arange(n) // args.batch_size).astype(str)
    if args.batch_column is None:
        return None
    if args.batch_column not in frame.columns:
        refuse_repeated(frame, args.batch_column, args.unlabelled, "--batch-column")
        raise DataError(f"{args.unlabelled}: no column {plain(args.batch_column)!r} "
                        "(--batch-column)")
    col = frame[args.batch_column]
    where = f"{args.unlabelled}: column {plain(args.batch_column)!r} (--batch-column)"
    # an empty or blank cell: no batch label (refused, its rows counted)
    blank = col.isna().to_numpy() | col.astype(str).str.strip().eq("").to_numpy()
    if blank.any():
        rows = np.flatnonzero(blank)
        raise DataError(f"{where}: {rows.shape[0]} row(s) have no batch label (empty cell), first "
                        f"at {row_number(args.unlabelled, int(rows[0]))}; give every row its "
                        "batch, or remove those rows")
    labels = col.astype(str).to_numpy()
    worded = _missing_words(col)
    if worded.any():
        _check_missing_words(col, labels, worded, where, args)
    _warn_out_of_order(col, labels, args)
    return labels


def _missing_words(col: Any) -> np.ndarray:
    """Rows whose batch label is one of the words that tables use for a missing value
    ("NA", "NaN", "null", "#N/A", ...), read as written from a CSV's batch column."""
    from ._tables import _MISSING_WORDS

    return col.astype(str).str.strip().isin(_MISSING_WORDS).to_numpy()


def _check_missing_words(col: Any, labels: np.ndarray, worded: np.ndarray, where: str,
                         args: argparse.Namespace) -> None:
    """A batch label such as "NA" became a batch of its own without a word (until
    5 December 2026).

    Among labels that are otherwise numbers or dates (weeks, days) it cannot be a batch: it is
    refused, its rows counted and the first named. Among words (sites, regions: "NA" may be
    North America) it stays a batch, as written, with a warning that counts its rows."""
    rows = np.flatnonzero(worded)
    words = ", ".join(repr(plain(w)) for w in dict.fromkeys(labels[rows].tolist()))
    first = row_number(args.unlabelled, int(rows[0]))
    rest = _order_keys(col[~worded])
    if rest is not None and (~worded).any():
        raise DataError(
            f"{where}: {rows.shape[0]} row(s) have the batch label {words}, a word for a "
            f"missing value, among labels that are {rest[1]}, first at {first}; give those "
            "rows their batch or remove them (a batch that is really called so: rename it)")
    warn_line("prevalence", (
        f"{where}: {rows.shape[0]} row(s) have the batch label {words}, also a word for a "
        f"missing value (first at {first}); they are read as a batch of that name, as "
        "written. If their batch is missing, give those rows their batch or remove them"))


def _order_keys(col: Any) -> tuple[np.ndarray, str] | None:
    """Numbers or dates the batch labels stand for (None for other labels such as words)."""
    import pandas as pd

    if pd.api.types.is_bool_dtype(col.dtype):
        return None
    if pd.api.types.is_numeric_dtype(col.dtype):
        return col.to_numpy(dtype=float), "numbers"
    if pd.api.types.is_datetime64_any_dtype(col.dtype):
        return col.to_numpy(dtype="datetime64[ns]").astype(np.int64).astype(float), "dates"
    text = col.astype(str).str.strip()
    numbers = pd.to_numeric(text, errors="coerce")
    if numbers.notna().all():
        return numbers.to_numpy(dtype=float), "numbers"
    dates = pd.to_datetime(text, errors="coerce", format="ISO8601")
    if dates.notna().all():
        return dates.to_numpy(dtype="datetime64[ns]").astype(np.int64).astype(float), "dates"
    return None


def _warn_out_of_order(col: Any, labels: np.ndarray, args: argparse.Namespace) -> None:
    """Warn when the batch labels are numbers or dates whose rows are not in increasing order:
    batches are taken in the order of their first row, so the alarm would run out of time
    order (a file exported newest first ran the chart backwards without a word)."""
    keys = _order_keys(col)
    if keys is None:
        return
    values, kind = keys
    _, first = np.unique(labels, return_index=True)
    first = np.sort(first)
    step = np.flatnonzero(np.diff(values[first]) < 0)
    if step.size:
        a, b = labels[first[step[0]]], labels[first[step[0] + 1]]
        warn_line("prevalence", (
            f"{args.unlabelled}: the batch labels of column {plain(args.batch_column)!r} "
            f"(--batch-column) are {kind}, but their rows are not in increasing order (batch "
            f"{plain(b)!r} first appears after batch {plain(a)!r}); batches are taken in the "
            "order of their first row, so the alarm runs in that order: sort the rows by "
            f"{plain(args.batch_column)!r} first if the batches are times"))


_NUMBER = re.compile(r"\d+(?:\.\d+)?(?:e[-+]?\d+)?")


def _classes_by_label(message: str, names: dict[str, Any]) -> str:
    """A library message naming the two classes by index ("class index 1", "Class index(es)
    [1] get ...") with their labels instead (``names``: the negative and positive labels)."""
    neg, pos = f"the class {names['negative']!r}", f"the class {names['positive']!r}"
    message = re.sub(r"Class index\(es\) \[0, 1\] get\b", "Both classes get", message)
    for index, label in (("0", neg), ("1", pos)):
        one = re.sub(rf"Class index\(es\) \[{index}\] get\b", label[0].upper() + label[1:]
                     + " gets", message)
        if one != message:
            message = one.replace("; their estimated prior rests", "; its estimated share rests")
    return message.replace("class index 0", neg).replace("class index 1", pos)


def _factor_hint(w: np.ndarray | None, counted: bool) -> str:
    """The end of the few-rows warning for whole-number weights sharing a factor above 1
    (``counted``: without cells, where a count table counts its cases)."""
    from .._validation import shared_factor

    factor = None if w is None or not counted else shared_factor(w)
    if factor is None or factor < 2 or float(w.sum()) / factor > 1e6:
        return ""
    return (f"; or, if they are counts, divide the weights by their common factor {factor}: "
            "a table of counts without one (at most 1e6 cases) counts its cases here")


def _by_batch(estimate: Any, proba: np.ndarray, labels: np.ndarray,
              seed: int | None, weights: np.ndarray | None = None,
              cells: np.ndarray | None = None, cases: bool = False) -> list[dict[str, Any]]:
    """Each batch's estimate. A warning met in a batch is warned once per kind (messages that
    differ only in their numbers), naming the batch it is shown for and how many more had it:
    it said "250 effective unlabelled rows" without saying of which batch. ``cases``: a
    batch whose weights are a count table counts its cases (``effective_rows``), as the
    estimate read them (:func:`library_weights`)."""
    uniq, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    rows = []
    kinds: dict[tuple[type, str], list[Any]] = {}
    for i, b in enumerate(np.argsort(first, kind="stable")):
        mask = inverse.ravel() == b
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = estimate(proba[mask], None if weights is None else weights[mask],
                           None if seed is None else seed + 1 + i,
                           None if cells is None else cells[mask])
        for w in caught:
            key = (w.category, _NUMBER.sub("#", str(w.message)))
            if key in kinds:
                kinds[key][2].add(str(uniq[b]))
            else:
                kinds[key] = [str(w.message), str(uniq[b]), {str(uniq[b])}]
        rows.append({"batch": str(uniq[b]), "n_rows": int(mask.sum()),
                     "prevalence": res["prevalence"], "interval": res["interval"],
                     "shift_statistic": res["shift_statistic"],
                     "shift_pvalue": res["shift_pvalue"]})
        if "ml_prevalence" in res:  # EM with --reference: the rows alone and the pull used
            rows[-1]["ml_prevalence"] = res["ml_prevalence"]
            rows[-1]["pseudo_rows"] = res["pseudo_rows"]
        rows[-1]["held_toward_source"] = held_toward_source(res)
        rows[-1]["interval_reach"] = interval_reach(res["interval"])
        if "effective_rows" in res:  # with cells: Kish's count over the design effect
            rows[-1]["effective_rows"] = float(res["effective_rows"])
        elif weights is not None:  # the alarm counts a weighted batch by Kish's size,
            # a count table's batch by its cases where the estimate counted them
            rows[-1]["effective_rows"] = ((cases and table_cases(weights[mask]))
                                          or effective_rows(weights[mask], int(mask.sum())))
    for (category, _), (message, batch, batches) in kinds.items():
        more = len(batches) - 1
        also = f" (and {more} more batch{'es' if more > 1 else ''} alike)" if more else ""
        warnings.warn(f"batch {batch!r}{also}: {message}", category, stacklevel=2)
    return rows


def _baseline_error(args: argparse.Namespace, out: dict[str, Any], proba: np.ndarray,
                    weights: np.ndarray | None, settings: dict[str, Any],
                    reference: tuple | None) -> float | None:
    """Standard error of a batch of the median batch size at the source prevalence, which the
    small-batch note measures a move in, as the HTML report does: from the reference rows
    (:func:`probwrap.report._alarm_chart.baseline_batch_standard_error`) with ``--reference``,
    else from the EM information of a batch at the source prevalence
    (:func:`source_baseline_standard_error`)."""
    from probwrap.report._alarm_chart import baseline_batch_standard_error

    rows = float(np.median([b.get("effective_rows", b["n_rows"]) for b in out["batches"]]))
    if reference is None:
        return source_baseline_standard_error(proba, args.source_prevalence,
                                              out["prevalence"], rows, kish_scaled(weights))
    ref_scores, ref_y, ref_settings = reference
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the reference rows' notes were raised by the estimate
        est = reference_estimator(ref_scores, ref_y, method=args.method,
                                  recalibrate=not args.no_recalibration,
                                  n_resamples=settings["n_resamples"],
                                  confidence_level=settings["confidence_level"],
                                  seed=settings["seed"], **ref_settings)
    return baseline_batch_standard_error(est, rows)


def _batch_notes(out: dict[str, Any]) -> list[str]:
    """The notes under the batch table that say what its marks mean: ``held`` (the estimate
    kept near the source prevalence for lack of evidence, not a finding that the prevalence
    is there) and an interval reaching 0 or 1 (a boundary, or no information at all)."""
    batches = out["batches"]
    lines = []
    held = [b for b in batches if b.get("held_toward_source")]
    if held:
        rows = sorted(b["n_rows"] for b in held)
        span = f"{rows[0]}" if rows[0] == rows[-1] else f"{rows[0]} to {rows[-1]}"
        lines.append(
            f"  note: held: in {len(held)} of {len(batches)} batches ({span} rows) the rows are too "
            "few to move the estimate far from the source prevalence "
            f"{out['source_prevalence']:.4f}: it is pulled toward it by "
            f"{max(b['pseudo_rows'] for b in held):g} pseudo-rows (fewer where a shift shows) and "
            "says only that the batch gives no firm evidence, not that its prevalence is near "
            "the source one. 'rows alone' is the batch's own estimate without the pull; the "
            "interval is that of the rows alone (the prevalences they allow) and holds both. "
            f"The whole file's estimate ({out['prevalence']:.4f}) reads more rows; larger batches "
            "are held less.")
    reach = [b for b in batches if b.get("interval_reach")]
    if reach:
        whole = [b["batch"] for b in reach if b["interval_reach"] == "whole range"]
        edge = len(reach) - len(whole)
        parts = []
        if edge:
            parts.append(
                f"{edge} batch{'es have' if edge > 1 else ' has'} an interval reaching 0 or 1 (the "
                "rows allow a batch with no positives or only positives: the prevalence is "
                "known on one side only)")
        if whole:
            names = ", ".join(whole[:5]) + (", ..." if len(whole) > 5 else "")
            one = len(whole) == 1
            parts.append(
                f"the interval{'' if one else 's'} of batch{'' if one else 'es'} {names} "
                f"{'is' if one else 'are'} the whole range [0, 1]: the batch's rows alone cannot "
                "rule out any prevalence at the interval's level (too few rows, a rare class, or "
                "scores that barely separate the classes)")
        lines.append("  note: " + "; ".join(parts) + ". Use larger batches for a narrower one.")
    return lines


def _text(out: dict[str, Any], path: str, level: float) -> str:
    lines = [
        f"prevalence of {path}: {out['n_rows']} unlabelled rows, method {out['method']}",
        f"  estimated prevalence  {out['prevalence']:.4f}",
    ]
    if out["interval"] is not None:
        lo, hi = out["interval"]
        lines.append(f"  {round(100 * level)}% interval          [{lo:.4f}, {hi:.4f}]")
    lines += [
        f"  source prevalence     {out['source_prevalence']:.4f}"
        + (f"   (reference file, {out['n_reference_rows']} rows)" if "n_reference_rows" in out
           else ""),
        f"  test of no shift      statistic {out['shift_statistic']:.4g}, "
        f"p-value {out['shift_pvalue']:.3g}",
    ]
    if held_toward_source(out):
        if out["shift_pvalue"] < SHIFT_LEVEL:
            # "for lack of evidence" beside a test that finds a shift read as a contradiction:
            # the pull answers how little the rows say about the share, not whether it moved
            why = (f"({out['pseudo_rows']:g} pseudo-rows) although the test finds a shift: the "
                   "rows carry too little information to place the prevalence alone")
        else:
            why = f"for lack of evidence ({out['pseudo_rows']:g} pseudo-rows)"
        lines.append(
            f"  note: held toward the source prevalence {why}; the rows alone give "
            f"{out['ml_prevalence']:.4f}, inside the interval")
    if not out["converged"]:
        lines.append("  note: the estimate's iterations did not converge; treat it with care")
    if "alarm" in out:
        a = out["alarm"]
        fired = {x["index"]: x["direction"] for x in a["alarms"]}
        lines.append(f"  by batch ({len(out['batches'])} batches; CUSUM of the batch shift tests, "
                     "each a standard normal when nothing moved)")
        lines.append("    batch        rows  prevalence  interval            rise   fall")
        for i, b in enumerate(out["batches"]):
            lo, hi = b["interval"]
            marks = [f"ALARM ({fired[i]})"] if i in fired else []
            if b.get("held_toward_source"):
                marks.append(f"held (rows alone {b['ml_prevalence']:.4f})")
            if b.get("interval_reach"):
                marks.append(b["interval_reach"])
            mark = "".join(f"  {m}" for m in marks)
            lines.append(f"    {b['batch'][:10]:<10} {b['n_rows']:>6}  {b['prevalence']:.4f}    "
                         f"[{lo:.4f}, {hi:.4f}]  {a['upper'][i]:5.2f}  {a['lower'][i]:5.2f}"
                         f"{mark}")
        lines += _batch_notes(out)
        verdict = (f"first alarm after batch {a['first_alarm']} ({len(a['alarms'])} in all)"
                   if a["alarms"] else "no alarm")
        lines.append(
            f"  prevalence alarm      {verdict}; two-sided CUSUM, k = {a['reference']:g}, "
            f"h = {a['decision_interval']:g}"
        )
        exact = a["exact_baseline_run_length"]
        if a["labelled_share"] > 0:
            lines.append(
                f"  false alarms          in control it sounds on average not sooner than every "
                f"{a['in_control_run_length']:.0f} batches with probability "
                f"{a['run_length_probability']:g} over the reference rows (median "
                f"{a['median_in_control_run_length']:.0f}; {exact:.0f} if the source "
                "prevalence were exact)"
            )
        else:
            lines.append(
                f"  false alarms          in control it sounds about once every {exact:.0f} "
                "batches (the source prevalence taken as exact)"
            )
        for note in a["warnings"]:
            lines.append(f"  note: {note}")
    return "\n".join(lines)


def _run(args: argparse.Namespace) -> int:
    names = ["reading", "estimating the prevalence" + (" and its interval" if args.resamples else "")]
    with Stages("prevalence", names) as stages:
        stages.start("reading")
        # batch labels as written: "01" and "1" are two batches, as group columns are read
        frame = read_table(args.unlabelled, exact=[args.score_column,
                                                   *([args.weight_column] if args.weight_column
                                                     else [])],
                           text=([] if args.batch_column is None else [args.batch_column])
                           + ([] if args.cell_column is None else [args.cell_column]))
        proba = read_scores(frame, args.score_column, args.unlabelled, scale=args.scale, verb="prevalence")
        if args.weight_column is not None:
            refuse_repeated(frame, args.weight_column, args.unlabelled, "--weight-column")
        if (args.weight_column is not None and args.weight_column not in frame.columns
                and args.reference is not None and not is_standard_stream(args.reference)):
            # the weights of the labelled file given to --weight-column, which weights the
            # unlabelled rows: say which option the user wanted
            try:  # only on the way to an error: the reference file is read in full later
                header = read_table(args.reference).columns
            except DataError:
                header = ()
            if args.weight_column in header:
                raise DataError(
                    f"{args.unlabelled}: no column {shown(args.weight_column)} (given by "
                    f"--weight-column, which weights the --unlabelled rows); the --reference "
                    f"file {args.reference} has it: to weight the reference rows give "
                    f"--reference-weight-column {shown(args.weight_column)} instead")
        weights = read_weights(frame, args.weight_column, args.unlabelled, "prevalence",
                               relative=True, dots=args.weight_dots)
        ref_weights = None
        batch_labels = _batch_labels(frame, args, proba.shape[0])
        if batch_labels is not None and np.unique(batch_labels).shape[0] < 2:
            flag = (f"--batch-size {args.batch_size} is not below the file's {proba.shape[0]} rows"
                    if args.batch_size is not None else
                    f"column {plain(args.batch_column)!r} (--batch-column) holds one label")
            warn_line("prevalence", (
                f"{args.unlabelled}: {flag}, so there is one batch: the prevalence alarm needs a "
                "series of batches and cannot judge a drift from one"))
        if args.scale == "log-odds":
            from probwrap.calibration import log_odds_to_proba

            proba = log_odds_to_proba(proba)
        settings = {
            "n_resamples": args.resamples, "confidence_level": args.confidence, "seed": args.seed,
        }
        ref_settings: dict[str, Any] = {}
        if args.reference is not None:
            ref_column = args.reference_score_column or args.score_column
            ref_weight_column = args.reference_weight_column
            ref = read_table(args.reference, exact=[ref_column, *([ref_weight_column]
                                                                  if ref_weight_column else [])],
                             text=[] if args.reference_cell_column is None
                             else [args.reference_cell_column])
            ref_weights = read_weights(ref, ref_weight_column, args.reference, "prevalence",
                                       flag="--reference-weight-column", relative=True,
                                       dots=args.weight_dots)
            if (ref_weight_column is None and args.weight_column is not None
                    and args.weight_column in ref.columns):
                warn_line("prevalence", (
                    f"{args.reference}: has a column {plain(args.weight_column)!r} too, but "
                    "--weight-column weights only the unlabelled rows; the reference rows are "
                    "unweighted. Add --reference-weight-column "
                    f"{plain(args.weight_column)!r} to weight them"))
            ref_scores = read_scores(
                ref, ref_column, args.reference, scale=args.scale,
                flag="--reference-score-column" if args.reference_score_column
                else "--score-column", verb="prevalence",
            )
            if args.scale == "log-odds":
                ref_scores = log_odds_to_proba(ref_scores)
            ref_y, labels = read_labels(
                ref, args.label_column, args.reference, positive=args.positive_label,
                score_column=ref_column, score_flag=("--reference-score-column"
                                                     if args.reference_score_column
                                                     else "--score-column")
            )
            ref_settings = {}
            if args.reference_cell_column is not None:
                ref_settings["reference_cells"] = _cells(ref, args.reference_cell_column,
                                                         args.reference, "--reference-cell-column")
            # a count table as its cases, as the library reads it; other weights by Kish's size
            ref_settings["reference_weight"] = library_weights(
                ref_weights, ref_settings.get("reference_cells"))
        # a count table counts its cases (as the library does) unless cells are given, with
        # --reference and (since 5 December 2026) with --source-prevalence
        cases = None if args.cell_column is not None else table_cases(weights)
        check_row_count("prevalence", proba.shape[0] if cases is None else int(cases),
                        args.unlabelled, "unlabelled rows" if cases is None else "unlabelled cases",
                        sample_weight=weights if cases is None else None,
                        counted="the interval and the test of no shift count",
                        hint=_factor_hint(weights, args.cell_column is None))
        if args.reference is not None:
            ref_cases = (None if args.reference_cell_column is not None
                         else table_cases(ref_weights))
            check_row_count("prevalence", ref_scores.shape[0] if ref_cases is None
                            else int(ref_cases), args.reference,
                            "reference rows" if ref_cases is None else "reference cases",
                            sample_weight=ref_weights if ref_cases is None else None,
                            counted="the interval and the test of no shift count",
                            hint=_factor_hint(ref_weights, args.reference_cell_column is None))
            judged = np.ones(ref_y.shape[0], bool) if ref_weights is None else ref_weights > 0
            check_ranking("prevalence", ref_scores[judged], ref_y[judged], labels,
                          args.reference,
                          sample_weight=None if ref_weights is None else ref_weights[judged])
            check_scores_vary("prevalence", ref_scores[judged], args.reference,
                              ref_column,
                              "the reference cannot show how the two classes' scores differ, "
                              "and the estimate has nothing to tell the classes apart by")
        check_scores_vary("prevalence", proba, args.unlabelled, args.score_column,
                          "the estimate reads that one value alone, and no mix of the two "
                          "classes can be seen in it",
                          sample_weight=weights if args.cell_column is None else None)
        stages.start(names[1])
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                if args.reference is None:
                    out = prevalence_from_source(proba, args.source_prevalence,
                                                 sample_weight=library_weights(weights),
                                                 **settings)
                else:
                    cells = None if args.cell_column is None else _cells(
                        frame, args.cell_column, args.unlabelled, "--cell-column")
                    out = prevalence_from_reference(
                        proba, ref_scores, ref_y, method=args.method,
                        recalibrate=not args.no_recalibration,
                        sample_weight=library_weights(weights, cells), cells=cells,
                        reference_folds=args.reference_folds, **ref_settings, **settings,
                    )
                    out["labels"] = {"negative": labels[0], "positive": labels[1]}
                if batch_labels is not None:
                    def one(p: np.ndarray, w: np.ndarray | None, seed: int | None,
                            c: np.ndarray | None) -> dict[str, Any]:
                        kw = {**settings, "seed": seed, "sample_weight": library_weights(w, c)}
                        if args.reference is None:
                            return prevalence_from_source(p, args.source_prevalence,
                                                          edge_warning=False, **kw)
                        return prevalence_from_reference(
                            p, ref_scores, ref_y, method=args.method,
                            recalibrate=not args.no_recalibration, cells=c,
                            reference_folds=args.reference_folds, **ref_settings, **kw)

                    out["batches"] = _by_batch(
                        one, proba, batch_labels, args.seed, weights,
                        None if args.reference is None else cells, cases=True)
                    out["alarm"] = batch_alarm_json(
                        out["batches"], out["source_prevalence"],
                        confidence_level=args.confidence, reference=args.alarm_reference,
                        decision_interval=args.alarm_decision_interval,
                        labelled_rows=(np.inf if args.reference is None else
                                       out.get("reference_effective_rows",
                                               ref_cases or effective_rows(ref_weights,
                                                                           ref_y.shape[0]))),
                        baseline_standard_error=_baseline_error(
                            args, out, proba, weights, settings,
                            None if args.reference is None else
                            (ref_scores, ref_y, ref_settings)))
            except (ValueError, FloatingPointError, ZeroDivisionError) as exc:
                raise DataError(
                    f"{args.unlabelled}: the prevalence cannot be estimated ({exc})"
                ) from None
    names = out.get("labels") or {"negative": "negative", "positive": "positive"}
    for w in caught:  # the library counts classes by index; the user knows them by label
        w.message = _classes_by_label(str(w.message), names)
    report_warnings("prevalence", caught)
    if weights is not None:
        out["weights"] = weight_summary(args.weight_column, weights)
        out["weights"]["cases"] = cases
    if ref_weights is not None:
        out["reference_weights"] = weight_summary(args.reference_weight_column, ref_weights)
        out["reference_weights"]["cases"] = ref_cases
    if not all(np.isfinite(v) for v in (out["prevalence"], out["shift_statistic"])):
        raise DataError(
            f"{args.unlabelled}: the prevalence cannot be estimated (the computation did not "
            "give a finite answer; check --source-prevalence and the scores)"
        )
    if args.format == "json":
        print(json.dumps(out, indent=2, allow_nan=False))
    else:
        print(_text(out, args.unlabelled, args.confidence))
        for key, which in (("weights", "unlabelled"), ("reference_weights", "reference")):
            if key in out:
                ws = out[key]
                read = (f"a count table: its {ws['cases']:.0f} cases counted"
                        if ws.get("cases") is not None else
                        f"{ws['effective_rows']:.1f} effective rows, Kish")
                print(f"  {which} weights: column {plain(ws['column'])!r}, sum {ws['sum']:.6g} "
                      f"({read})")
    return 0


def register(subparsers: Any) -> None:
    """Add the ``prevalence`` verb."""
    parser = subparsers.add_parser(
        "prevalence",
        help="estimate the share of positives in an unlabelled batch of scores",
        description="Estimate the prevalence (share of positives) of an unlabelled batch from "
        "its scores, with an interval and a test of whether it moved. Give either the "
        "prevalence the scores were calibrated for (--source-prevalence) or a labelled "
        "reference file of held-out scores from the same model (--reference).",
    )
    parser.add_argument("--unlabelled", required=True, metavar="FILE", help="CSV or Parquet")
    parser.add_argument("--score-column", required=True, metavar="C", help="column of scores")
    add_scale_flag(parser)
    add_encoding_flag(parser)
    source = parser.add_mutually_exclusive_group(required=True)
    source.add_argument(
        "--source-prevalence", type=_prevalence, metavar="P",
        help="prevalence of the population the scores are calibrated for, e.g. 0.04",
    )
    source.add_argument(
        "--reference", metavar="FILE",
        help="labelled CSV or Parquet file of held-out scores from the same model",
    )
    parser.add_argument(
        "--label-column", metavar="L", help="column of labels in the reference file"
    )
    parser.add_argument(
        "--reference-score-column", metavar="C", default=None,
        help="score column of the reference file (default: the --score-column name)",
    )
    add_positive_label_flag(parser, "reference label")
    parser.add_argument(
        "--weight-column", metavar="W", default=None,
        help="column of row weights of the --unlabelled file (numbers >= 0, not all 0; only "
        "their ratios matter: counted by Kish's effective size, except that without "
        "--cell-column a count table (whole numbers, some above 1, no common factor above 1) "
        "counts its cases, as one row per case would); the reference file's rows take "
        "--reference-weight-column",
    )
    add_weight_dots_flag(parser)
    parser.add_argument(
        "--cell-column", metavar="C", default=None,
        help="with --reference: column naming the cell of every unlabelled row, for counts "
        "(k of n: rows of one group share a cell); the shift test and the interval count "
        "each cell as one unit; with batches, each batch's cells (a cell split over batches "
        "counts in each)",
    )
    parser.add_argument(
        "--reference-cell-column", metavar="C", default=None,
        help="with --reference: column naming the cell of every reference row (a group's "
        "success and failure rows share one); each cell is one unit of the shift test and "
        "the interval",
    )
    parser.add_argument(
        "--reference-weight-column", metavar="W", default=None,
        help="with --reference: column of row weights of the reference file (numbers >= 0, "
        "not all 0; read as --weight-column is: a count table counts its cases unless "
        "--reference-cell-column is given); --weight-column weights only the unlabelled file",
    )
    parser.add_argument(
        "--reference-folds", type=whole_number(1), metavar="K", default=None,
        help="with --reference: the reference scores are out-of-fold scores of K fold models "
        "(cross_val_predict with cv=K; 1: one model scored every reference row), so the check "
        "of repeated rows reads their ties within one fold; by default read as 5 folds where "
        "none of the unlabelled rows' repeated scores appears among the reference scores",
    )
    parser.add_argument(
        "--method", choices=("em", "bbse", "acc", "pacc"), default="em",
        help="maximum likelihood (em, default), black-box shift estimation (bbse), adjusted "
        "classify-and-count (acc) or its probabilistic form (pacc); all but em need --reference",
    )
    parser.add_argument(
        "--no-recalibration", action="store_true",
        help="with --reference: use the scores as they are instead of recalibrating them on "
        "the reference rows (bias-corrected temperature scaling)",
    )
    add_resamples_flag(parser)
    parser.add_argument(
        "--confidence", type=_level, default=0.95, metavar="LEVEL",
        help="coverage of the interval (default 0.95)",
    )
    add_seed_flag(parser, "the bootstrap")
    batching = parser.add_mutually_exclusive_group()
    batching.add_argument(
        "--batch-size", type=whole_number(1), metavar="N",
        help="also estimate the prevalence per batch of N consecutive rows and run the "
        "prevalence alarm (a two-sided CUSUM) on the batch estimates",
    )
    batching.add_argument(
        "--batch-column", metavar="C",
        help="as --batch-size, with batches given by the labels of column C (a week, a date)",
    )
    add_alarm_flags(parser)
    add_format_flag(parser)

    def run(args: argparse.Namespace) -> int:
        if args.reference is None:
            if args.method != "em":
                parser.error(f"--method {args.method} needs --reference (a labelled file)")
            if (args.label_column is not None or args.no_recalibration
                    or args.positive_label is not None
                    or args.reference_weight_column is not None
                    or args.reference_folds is not None):
                parser.error(
                    "--label-column, --positive-label, --no-recalibration, "
                    "--reference-weight-column and --reference-folds go with --reference"
                )
        elif args.label_column is None:
            parser.error("--reference needs --label-column")
        if args.reference is None and (args.cell_column is not None
                                       or args.reference_cell_column is not None):
            parser.error("--cell-column and --reference-cell-column go with --reference (the "
                         "cells are units of the two-sample shift test and its interval)")
        alarm_settings(args, parser,
                       batched=args.batch_size is not None or args.batch_column is not None,
                       batches="--batch-size or --batch-column")
        if (args.batch_size is not None or args.batch_column is not None) and not args.resamples:
            parser.error("--batch-size and --batch-column need --resamples > 0 (each batch's "
                         "table shows its interval, and the alarm judges from the intervals how "
                         "fast it can detect a shift)")
        return _run(args)

    parser.set_defaults(func=run)
