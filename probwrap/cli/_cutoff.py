"""``probwrap cutoff``: the cost-optimal cutoff of a labelled score file, with its uncertainty.

The numbers are those of :func:`probwrap.decision.search_cutoff` (the exact minimum of the
empirical cost over every distinct score) and :func:`probwrap.decision.cutoff_interval` (a
bootstrap interval of that cutoff), on the rows of the file as given.
"""

from __future__ import annotations

import argparse
import json
import math
import warnings
from typing import Any

import numpy as np

from .._validation import cutoff_text, cutoff_texts, power_of_two_unit
from ._calibrate import add_scale_flag, probability_scale, read_scores, report_warnings
from ._common import (
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
    not_a_number,
    percent_hint,
    shown,
    weight_summary,
)
from ._progress import Stages
from ._promise_flags import (
    add_guarantee_flags,
    add_late_label_flags,
    guarantee_args,
    late_label_columns,
    late_label_line,
    late_label_summary,
    read_late_labels,
)
from ._tables import read_labels, read_table, read_weights

__all__ = ["register", "cutoff_summary"]


def _finite_number(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise not_a_number(text) from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be finite; got {text}")
    return value


def _share(text: str) -> float:
    value = _finite_number(text)
    if not 0.0 < value <= 1.0:
        raise argparse.ArgumentTypeError(f"must be a share of rows in (0, 1]; got {text}"
                                         f"{percent_hint(value)}")
    return value


def _level(text: str) -> float:
    value = _finite_number(text)
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"must be in (0, 1); got {text}{percent_hint(value)}")
    return value


def cutoff_summary(
    scores: np.ndarray,
    y: np.ndarray,
    costs: dict[str, float],
    *,
    scale: str = "proba",
    capacity: float | None = None,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    seed: int | None = 0,
    guarantee: dict[str, Any] | None = None,
    sample_weight: np.ndarray | None = None,
) -> dict[str, Any]:
    """Everything ``probwrap cutoff`` reports, as a JSON-ready dictionary.

    Parameters
    ----------
    scores : ndarray of shape (n,)
        Held-out scores (probabilities, or log-odds with ``scale="log-odds"``).
    y : ndarray of shape (n,)
        0/1 labels.
    costs : dict
        Binary shorthand ``{"tp", "fp", "fn", "tn"}``.
    scale : {"proba", "log-odds"}
    capacity : float, optional
        Largest share of rows that may be flagged.
    n_resamples, confidence_level, seed
        Bootstrap settings of :func:`probwrap.decision.cutoff_interval` (``n_resamples=0``:
        no interval).
    guarantee : dict, optional
        Keyword arguments of :func:`probwrap.decision.guaranteed_cutoff` (``requirement``,
        ``target``, ``confidence``, ``method``): adds the least-cost cutoff certified to meet
        that requirement under ``"guarantee"``.
    sample_weight : ndarray of shape (n,), optional
        Row weights (e.g. the late-label weights of
        :func:`probwrap.late_labels.labels_at_horizon`): every search, interval, cost and
        share is weighted.

    Returns
    -------
    dict

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.cli._cutoff import cutoff_summary
    >>> s = np.array([0.1, 0.4, 0.4, 0.8])
    >>> out = cutoff_summary(s, np.array([0, 0, 1, 1]), {"fp": 1.0, "fn": 4.0}, n_resamples=20)
    >>> out["cutoff"], out["expected_cost"], out["cutoff_range"]
    (0.25, 0.25, [0.1, 0.4])
    """
    from probwrap.decision import binary_cost_matrix, cutoff_interval, plugin_cutoff, search_cutoff
    from probwrap.decision._cutoff_interval import exact_cutoff_range

    from .._weights import whole_counts

    matrix = binary_cost_matrix(costs)
    bounds = (0.0, 1.0) if scale == "proba" else None
    w = np.ones(scores.shape[0]) if sample_weight is None else np.asarray(sample_weight, float)
    # where a sum of costs over the rows could overflow (costs near the largest float gave inf
    # costs and JSON that cannot hold inf), every rule and interval below acts on the costs
    # divided by a power of two near the largest (exact; no choice changes) and costs are
    # scaled back when reported; ordinary costs are used as given
    original = matrix
    top = float(np.abs(matrix).max())
    unit = 1.0
    if not np.isfinite(top * 4.0 * max(float(w.sum()), scores.shape[0], 1.0)):
        unit = power_of_two_unit(matrix)
        matrix = matrix / unit

    def mean(values: np.ndarray) -> float:
        return float(np.average(values, weights=w))

    def mean_cost(values: np.ndarray) -> float:
        return mean(values) * unit

    res = search_cutoff(scores, y, matrix, capacity=capacity, score_bounds=bounds,
                        sample_weight=sample_weight)
    ci = None
    if n_resamples > 0:
        ci = cutoff_interval(
            scores, y, matrix, capacity=capacity, score_bounds=bounds, n_resamples=n_resamples,
            confidence_level=confidence_level, random_state=seed, sample_weight=sample_weight,
        )
    # below 100 (effective) rows, the cutoffs no one-sided exact binomial test sets apart
    # (CutoffInterval.exact_low / exact_high; needs no resampling, so with --resamples 0 too);
    # unequal weights count the rows between two cutoffs as Kish's effective rows
    exact_low, exact_high, exact_note = exact_cutoff_range(
        scores, y, matrix, sample_weight=sample_weight, capacity=capacity, score_bounds=bounds,
        confidence_level=confidence_level,
    )
    flagged = mean(scores > res.cutoff)
    realised = matrix[y, 1]
    out: dict[str, Any] = {
        "n_rows": int(scores.shape[0]),
        "n_positive": int(y.sum()),
        "score_scale": scale,
        "costs": {key: float(costs.get(key, 0.0)) for key in ("tp", "fp", "fn", "tn")},
        "capacity": capacity,
        "cutoff": float(res.cutoff),
        "cutoff_range": [float(res.interval[0]), float(res.interval[1])],
        "cutoff_interval": None if ci is None else [float(ci.low), float(ci.high)],
        # True when the bootstrap percentiles fell inside the same-cost range and the interval
        # was widened to contain it
        "cutoff_interval_widened": None if ci is None else bool(ci.widened_to_ties),
        "cutoff_exact_range": (None if exact_note is not None
                               else [float(exact_low), float(exact_high)]),
        # why there is no exact range (None when there is one)
        "cutoff_exact_range_note": exact_note,
        # what the exact tests count: "rows", "cases" for whole-number weights (a count
        # table's rows repeated by their counts, since 5 December 2026), or "kish_effective_rows"
        # for other unequal weights
        "cutoff_exact_range_counts": None if exact_note is not None else (
            "rows" if sample_weight is None
            or np.ptp(np.asarray(sample_weight)[np.asarray(sample_weight) > 0]) == 0
            else "cases" if whole_counts(np.asarray(sample_weight, dtype=float)) is not None
            else "kish_effective_rows"),
        "confidence_level": float(confidence_level),
        "n_resamples": int(n_resamples),
        "expected_cost": float(res.cost) * unit,
        "flagged_share": flagged,
        "cost_flag_none": mean_cost(matrix[y, 0]),
        # acting on every row breaks any capacity below 1
        "cost_flag_all": mean_cost(realised) if capacity in (None, 1.0) else None,
        "capacity_ties": None,
    }
    if capacity is not None:
        out["capacity_ties"] = _capacity_ties(scores, y, matrix, w, res.cutoff, capacity,
                                              bounds, sample_weight)
    if scale == "proba":
        try:
            bayes = plugin_cutoff(original)
        except ValueError as exc:
            # the least-cost search still runs; say why two of the usual lines are missing
            warnings.warn(f"no Bayes cutoff, and so no settled cutoff (which starts from "
                          f"it): {exc}", UserWarning, stacklevel=2)
            bayes = None
        out["bayes_cutoff"] = bayes
        for name, cut in (("cost_at_half", 0.5), ("cost_at_bayes_cutoff", bayes)):
            if cut is None:
                out[name] = None
                continue
            action = (scores > cut).astype(np.intp)
            share = mean(action)
            over = capacity is not None and share > capacity
            out[name] = None if over else mean_cost(matrix[y, action])
        out["settled_cutoff"] = None
        if bayes is not None:
            from probwrap._cost_policy_rules import recalibrated_plugin_cutoff
            from probwrap.decision import settle_cutoff

            # the tuned policy's anchor: the Bayes cutoff carried back through the calibration
            # map chosen on these rows (the scores' own probabilities tried first)
            anchor, amap = recalibrated_plugin_cutoff(scores, y, w, bayes, seed)
            settled = settle_cutoff(scores, y, matrix, res, sample_weight=sample_weight,
                                    anchor=anchor)
            out["settled_cutoff"] = {
                "cutoff": settled.cutoff,
                "expected_cost": mean_cost(
                    matrix[y, (scores > settled.cutoff).astype(np.intp)]),
                "is_bayes_cutoff": bool(settled.cutoff == bayes),
                "recalibrated_bayes_cutoff": float(anchor),
                "recalibration": amap,
                "kept_recalibrated_bayes_cutoff": bool(settled.kept_plugin),
            }
    if guarantee is not None:
        from probwrap.decision import guaranteed_cutoff

        g = guaranteed_cutoff(scores, y, matrix, capacity=capacity, score_bounds=bounds,
                              sample_weight=sample_weight, **guarantee)
        out["guarantee"] = {
            "requirement": g.requirement,
            "target": g.target,
            "method": g.method,
            "confidence": g.confidence,
            "cutoff": g.cutoff,
            "expected_cost": g.cost * unit,
            "flagged_share": mean(scores > g.cutoff),
            "achieved": g.achieved,
            "bound": g.bound,
            "p_value": None if math.isnan(g.p_value) else g.p_value,
            "moved_the_cutoff": g.binding,
        }
    return out


def _capacity_ties(
    scores: np.ndarray, y: np.ndarray, matrix: np.ndarray, w: np.ndarray, cutoff: float,
    capacity: float, bounds: tuple[float, float] | None, sample_weight: np.ndarray | None,
) -> dict[str, Any] | None:
    """The rows tied at the score just below the cutoff, when the capacity alone keeps them
    from being acted on (a cutoff acts on all tied rows or on none), with a warning; else None.
    """
    from probwrap.decision import search_cutoff

    below = scores <= cutoff
    if not below.any():
        return None
    score = float(scores[below].max())
    tied = scores == score
    count = int(np.count_nonzero(tied))
    total = float(w.sum())
    flagged = float(w[scores > cutoff].sum()) / total
    share = float(w[tied].sum()) / total
    if count < 2 or flagged + share <= capacity * (1 + 1e-12):
        return None
    free = search_cutoff(scores, y, matrix, score_bounds=bounds, sample_weight=sample_weight)
    if not free.cutoff < score:  # the costs alone leave them out: the capacity does not bind
        return None
    if flagged == 0.0:
        warnings.warn(
            f"the {count} rows with the top score {score:.6g} are {share:.4g} of the rows, more "
            f"than the capacity {capacity:g}: a cutoff acts on all tied rows or on none, and "
            f"acting on them all would break the capacity, so no row is acted on; scores with "
            f"fewer ties (more digits), or --capacity {share:.4g} or more, let them be acted on",
            UserWarning, stacklevel=3,
        )
    else:
        warnings.warn(
            f"{count} rows tie at the score {score:.6g} just below the cutoff ({share:.4g} of "
            f"the rows): acting on them too would act on {flagged + share:.4g} of the rows, "
            f"more than the capacity {capacity:g}, and a cutoff acts on all tied rows or on "
            f"none, so none of them is acted on and the share acted on stays at {flagged:.4g}",
            UserWarning, stacklevel=3,
        )
    return {"score": score, "rows": count, "share": share,
            "flagged_share_with_them": flagged + share}


def _same_cost_text(out: dict[str, Any], lo_t: str, hi_t: str) -> str:
    """The same-cost range ``[low, high)`` as text, or the one cutoff when it is a point."""
    low, high = out["cutoff_range"]
    if low == high:  # e.g. probabilities of exactly 1: "act on none" is the cutoff 1 alone
        return f"{lo_t} only"
    # a range that reaches 1 for probabilities includes 1 (no row scores above it)
    return f"[{lo_t}, {hi_t}" + ("]" if out["score_scale"] == "proba" and high >= 1.0 else ")")


def _exact_lines(out: dict[str, Any], level: int) -> list[str]:
    """The exact-test range below 100 rows, or why there is none (nothing from 100 rows on,
    where the bootstrap interval is the one to read)."""
    exact, note = out.get("cutoff_exact_range"), out.get("cutoff_exact_range_note")
    if exact is not None:
        lo_t, hi_t = cutoff_texts(exact)
        how = out.get("cutoff_exact_range_counts")
        counted = ("; unequal weights: the rows between two cutoffs count as Kish's "
                   "effective rows" if how == "kish_effective_rows" else
                   "; whole-number weights: each row counts as that many cases"
                   if how == "cases" else "")
        return [f"  exact-test range      [{lo_t}, {hi_t}]   (no one-sided exact binomial test "
                f"at {100 - level}% shows one of these cutoffs dearer than another; fewer than "
                f"100 (effective) rows{counted})"]
    if note is None or note.startswith("not computed: 100 or more"):
        return []
    return [f"  exact-test range      {note}"]


def _text(out: dict[str, Any], path: str) -> str:
    level = round(100 * out["confidence_level"])
    # the cutoff and the ends of its same-cost range with enough digits to be told apart
    lo_t, cut_t, hi_t = cutoff_texts([out["cutoff_range"][0], out["cutoff"],
                                      out["cutoff_range"][1]])
    ci_t = (None if out["cutoff_interval"] is None else cutoff_texts(out["cutoff_interval"]))
    costs = ", ".join(f"{k}={v:g}" for k, v in out["costs"].items())
    lines = [
        f"cost-optimal cutoff for {path}: {out['n_rows']} rows, {out['n_positive']} positive"
        + (f" (label {shown(out['labels']['positive'])})" if "labels" in out else ""),
        f"  costs                 {costs}"
        + (f"; capacity {out['capacity']:g} of rows" if out["capacity"] is not None else ""),
        f"  cutoff                {cut_t}   (act when score > cutoff)",
        f"  same cost for         {_same_cost_text(out, lo_t, hi_t)}",
        f"  {level}% interval          [{ci_t[0]}, {ci_t[1]}]   (bootstrap, "
        f"{out['n_resamples']} resamples"
        + ("; widened to the same-cost range)" if out.get("cutoff_interval_widened") else ")")
        if out["cutoff_interval"] is not None else "  interval              not computed (--resamples 0)",
        *_exact_lines(out, level),
        f"  expected cost per row {out['expected_cost']:.6g}",
        f"  share flagged         {out['flagged_share']:.4g}",
        f"  acting on no row      {out['cost_flag_none']:.6g}",
    ]
    if out["cost_flag_all"] is not None:
        lines.append(f"  acting on every row   {out['cost_flag_all']:.6g}")
    ci, exact = out["cutoff_interval"], out.get("cutoff_exact_range")
    if out["score_scale"] == "proba" and min(
            [out["cutoff"]] + ([] if ci is None else [ci[0]])
            + ([] if exact is None else [exact[0]])) < 0:
        # rows scored exactly 0 (a forest) are acted on only by a cutoff below 0
        lines.append("  (a cutoff below 0 acts on every row, including rows scored exactly 0)")
    g = out.get("guarantee")
    if g is not None:
        side = ">=" if g["requirement"] in ("recall", "precision") else "<="
        how = (f"with probability {g['confidence']:g}, p = {g['p_value']:.3g}"
               if g["method"] == "high_probability" else "on average over held-out sets")
        lines += [
            f"  with the guarantee    {g['requirement'].replace('_', ' ')} {side} {g['target']:g} "
            f"({how})",
            f"    cutoff              {cutoff_text(g['cutoff'])}"
            + ("" if g["moved_the_cutoff"] else "   (the same rule as without it)"),
            f"    expected cost/row   {g['expected_cost']:.6g}",
            f"    on these rows       {g['achieved']:.4g}; guaranteed {side} {g['bound']:.4g}",
            f"    share flagged       {g['flagged_share']:.4g}",
        ]
    if out["score_scale"] == "proba":
        bayes = out["bayes_cutoff"]

        def cost(v: float | None) -> str:
            return "over capacity" if v is None else f"{v:.6g}"

        lines.append(f"  at cutoff 0.5         {cost(out['cost_at_half'])}")
        if bayes is not None:
            lines.append(
                f"  at Bayes cutoff       {cost(out['cost_at_bayes_cutoff'])}   "
                f"(cutoff {bayes:.4g}; right for calibrated probabilities)"
            )
        kept = out.get("settled_cutoff")
        if kept is not None:
            recal = kept.get("recalibration") not in (None, "identity")
            target = (f"the Bayes cutoff after {kept['recalibration']} recalibration on these "
                      f"rows ({kept['recalibrated_bayes_cutoff']:.4g})" if recal else
                      "the Bayes cutoff")
            why = (f"{target}: these rows do not show at 5 % that another costs less"
                   if kept["kept_recalibrated_bayes_cutoff"] else
                   f"nearest {target} among those not shown at 5 % to cost more")
            # a cutoff below 0 on probabilities (a recalibration that puts every row above the
            # Bayes cutoff, as with scores that are all one value) acts on every row: said so
            every = (" (below every probability: act on every row)"
                     if out["score_scale"] == "proba" and kept["cutoff"] < 0 else "")
            lines.append(
                f"  settled cutoff        {cutoff_text(kept['cutoff'])}{every}   "
                f"cost {kept['expected_cost']:.6g}"
                f"   ({why})"
            )
    return "\n".join(lines)


def _run(args: argparse.Namespace) -> int:
    late_columns = late_label_columns(args, args._parser)
    guarantee = guarantee_args(args, args._parser)
    late = weights = None
    with Stages("cutoff", ["reading", "searching the cutoff and its interval"]) as stages:
        stages.start("reading")
        frame = read_table(args.scores, exact=[args.score_column, *(late_columns or []),
                                                *([args.weight_column] if args.weight_column
                                                  else [])])
        scores = read_scores(frame, args.score_column, args.scores, scale=args.scale, verb="cutoff")
        given = read_weights(frame, args.weight_column, args.scores, "cutoff",
                             dots=getattr(args, "weight_dots", None))
        if late_columns is None:
            y, labels = read_labels(
                frame, args.label_column, args.scores, positive=args.positive_label,
                score_column=args.score_column
            )
            closed = np.ones(y.shape[0], dtype=bool)
        else:
            late = read_late_labels(frame, args, args.scores, sample_weight=given)
            y, weights = late.y, late.sample_weight
            labels = [f"no event within {late.horizon:g}", f"event within {late.horizon:g}"]
            closed = ~late.is_open
        if late is None:  # (late labels carry the given weights in theirs)
            weights = given
        if given is not None:  # rows of weight 0 are not judged
            closed = closed & (given > 0)
        check_row_count("cutoff", scores.shape[0], args.scores, sample_weight=given,
                        counted="the bootstrap interval and the exact-test range count")
        check_ranking("cutoff", scores[closed], y[closed], labels, args.scores,
                      sample_weight=None if weights is None else weights[closed])
        check_scores_vary("cutoff", scores[closed], args.scores, args.score_column,
                          "a cutoff can only act on every row or on none, and the cutoff and "
                          "its range say no more than which of the two costs less")
        costs = {"tp": args.cost_tp, "fp": args.cost_fp, "fn": args.cost_fn, "tn": args.cost_tn}
        stages.start("searching the cutoff and its interval")
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                out = cutoff_summary(
                    scores, y, costs, scale=probability_scale(args.scale),
                    capacity=args.capacity,
                    n_resamples=args.resamples, confidence_level=args.confidence,
                    seed=args.seed, guarantee=guarantee,
                    sample_weight=weights,
                )
            except ValueError as exc:
                raise DataError(f"{args.scores}: {exc}") from None
    report_warnings("cutoff", caught)
    out["labels"] = {"negative": labels[0], "positive": labels[1]}
    if args.scale == "percent":  # the cutoffs are probabilities; the file's column percent
        out["score_column_divided_by"] = 100
    if late is not None:
        out["late_labels"] = late_label_summary(late)
    if given is not None:
        out["weights"] = weight_summary(args.weight_column, given)
    if args.format == "json":
        print(json.dumps(out, indent=2, allow_nan=False))
    else:
        print(_text(out, args.scores))
        if args.scale == "percent":
            print(f"  (--scale percent: the scores were divided by 100, so the cutoffs are "
                  f"probabilities; in the file's percentages, act when the score is above "
                  f"{100 * out['cutoff']:.6g})")
        if late is not None:
            print("  " + late_label_line(late))
        if given is not None:
            ws = out["weights"]
            print(f"  weights: column {shown(ws['column'])}, sum {ws['sum']:.6g} "
                  f"({ws['effective_rows']:.1f} effective rows, Kish); every number is weighted")
    return 0


def register(subparsers: Any) -> None:
    """Add the ``cutoff`` verb."""
    parser = subparsers.add_parser(
        "cutoff",
        help="cost-optimal cutoff of a labelled score file, with its interval and cost",
        description="The cutoff with the least cost on a labelled score file (act on rows whose "
        "score is above it), a bootstrap interval for it, and the expected cost per row. "
        "Costs are per row and may be negative (gains).",
    )
    parser.add_argument("--scores", required=True, metavar="FILE", help="CSV or Parquet file")
    parser.add_argument("--score-column", required=True, metavar="C", help="column of scores")
    parser.add_argument("--label-column", metavar="L",
                        help="column of labels (or late labels: --time-column, --event-column, "
                        "--horizon)")
    add_positive_label_flag(parser)
    add_scale_flag(parser)
    add_encoding_flag(parser)
    for key, what in (
        ("fp", "acting on a negative row (e.g. an inspection that finds nothing)"),
        ("fn", "not acting on a positive row (e.g. a damaged delivery)"),
        ("tp", "acting on a positive row (default 0)"),
        ("tn", "not acting on a negative row (default 0)"),
    ):
        parser.add_argument(
            f"--cost-{key}", type=_finite_number, required=key in ("fp", "fn"),
            default=0.0, metavar="X", help=f"cost of {what}",
        )
    parser.add_argument(
        "--capacity", type=_share, default=None, metavar="SHARE",
        help="largest share of rows that may be acted on, e.g. 0.1",
    )
    add_resamples_flag(parser)
    parser.add_argument(
        "--confidence", type=_level, default=0.95, metavar="LEVEL",
        help="coverage of the interval (default 0.95)",
    )
    add_seed_flag(parser, "the bootstrap and of the folds that choose a recalibration map")
    add_guarantee_flags(parser)
    add_late_label_flags(parser)
    add_weight_flag(parser)
    add_format_flag(parser)
    parser.set_defaults(func=_run, _parser=parser)
