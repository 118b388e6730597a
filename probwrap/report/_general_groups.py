"""The "By group" section of the multiclass / multi-action report.

The binary report uses :func:`probwrap.metrics.calibration_by_group`; with more classes the
same questions are asked with the multiclass measures the report already shows: per group, the
top-label (Guo et al. 2017) and classwise (Kull et al. 2019) calibration error, the largest gap
between a class's observed share and its mean probability, the Brier score and log loss with
bootstrap intervals (rows resampled within the group), and for the rule in use its mean cost and
the share of each action. Groups too small to judge are listed and marked, not hidden; the
spread of each quantity across the judged groups is listed largest first.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..metrics import (
    bootstrap_interval,
    brier_score,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
)
from ..metrics._groups import (
    MIN_EVENTS,
    MIN_ROWS,
    GroupGap,
    cell_labels,
    cell_sizes,
    check_group_labels,
    gap_with_interval,
)
from ..metrics._inputs import count_scale_weights
from ._common import NoteLog, withheld_interval
from ._groups_html import gap_interval_text, resampled_words, row_name
from ._html_parts import _text

__all__ = ["ClassGroupCheck", "ClassGroupChecks", "multiclass_by_group",
           "multiclass_group_section"]

_NAN2 = (float("nan"), float("nan"))


@dataclass(frozen=True)
class ClassGroupCheck:
    """Checks of one group in the multiclass report (NaN where not computable)."""

    group: Any
    weight: float
    effective_rows: float
    rarest_class_rows: float
    judged: bool
    top_label_error: float
    classwise_error: float
    largest_share_gap: float
    brier: float
    brier_interval: tuple[float, float]
    log_loss: float
    log_loss_interval: tuple[float, float]
    mean_cost: float = float("nan")
    action_shares: np.ndarray | None = None
    #: the classes (named as the notes name them) with rows elsewhere but none of weight > 0 here
    absent_classes: tuple[str, ...] = ()


@dataclass(frozen=True)
class ClassGroupChecks:
    """Every group's checks (judged first, by top-label error), the overall row and the gaps."""

    groups: list[ClassGroupCheck]
    gaps: list[GroupGap]
    overall: ClassGroupCheck
    min_rows: float
    min_events: float
    n_bins: int
    action_names: tuple[str, ...] | None
    rule_label: str | None
    notes: list[str] = field(default_factory=list)
    resampled: str = "rows"


def _one(group, y, p, w, k, row_cost, actions, n_actions, n_bins, n_resamples, level, seed,
         min_rows, min_events, classes_present, class_names, log: NoteLog,
         cells: np.ndarray | None = None, overall: bool = False) -> ClassGroupCheck:
    # the overall row's notes say "all rows" (before, "group all", as a group named "all" does)
    key, about = ("overall", "all rows") if overall else (f"group:{group}", f"group {group}")
    # sizes as calibration_by_group judges them: weights on the row-count scale, summed
    eff_class = [float(w[y == j].sum()) for j in classes_present]
    rarest = float(min(eff_class)) if eff_class else 0.0
    eff = float(w.sum())
    judged = eff >= min_rows and rarest >= min_events
    units = cell_sizes(y, w, cells, classes_present)
    if units is not None:  # counts: the cells must reach the sizes too (calibration_by_group)
        judged = judged and units[0] >= min_rows and min(units[1:], default=0) >= min_events
    nan = float("nan")

    def value(fn, **kw):
        out = log.compute(key, about, fn, y, p, sample_weight=w, expected=(ValueError,), **kw)
        return nan if out is None else float(out)

    lacking = [int(j) for j in classes_present if not np.any(w[y == j] > 0)]
    absent = tuple(str(class_names[j]) if class_names is not None else str(j) for j in lacking)
    if lacking and not overall:
        named = ", ".join(absent)
        log.add(key, about, "no interval",
                f"no row of class(es) {named} with weight > 0: no bootstrap interval for the "
                "Brier score or log loss (resamples within the group never hold those classes)")

    def interval(fn):
        if n_resamples == 0 or lacking:
            return _NAN2
        kw = {} if cells is None else {"groups": cells}
        res = log.compute(key, about, bootstrap_interval, fn, y, p, sample_weight=w,
                          n_resamples=n_resamples, confidence_level=level, random_state=seed,
                          expected=(ValueError,), **kw)
        if res is None or withheld_interval(log, key, about, res.n_failed,
                                            res.n_resamples) is not None:
            return _NAN2
        return float(res.confidence_interval.low), float(res.confidence_interval.high)

    total = float(w.sum())
    shares = mean_cost = None
    if total > 0:
        observed = np.bincount(y, weights=w, minlength=k) / total
        forecast = (w @ p) / total
        if actions is not None:
            shares = np.bincount(actions, weights=w, minlength=n_actions) / total
            mean_cost = float(np.average(row_cost, weights=w))
    else:  # every row of weight 0 (late labels all open): NaN, not numpy's 0 / 0 warning
        observed = forecast = np.full(k, nan)
        if actions is not None:
            shares = np.full(n_actions, nan)
    return ClassGroupCheck(
        group=group, weight=total, effective_rows=eff, rarest_class_rows=rarest, judged=judged,
        top_label_error=value(expected_calibration_error, n_bins=n_bins),
        classwise_error=value(classwise_calibration_error, n_bins=n_bins),
        largest_share_gap=float(np.max(np.abs(observed - forecast))),
        brier=value(brier_score), brier_interval=interval(brier_score),
        log_loss=value(log_loss), log_loss_interval=interval(log_loss),
        mean_cost=nan if mean_cost is None else mean_cost, action_shares=shares,
        absent_classes=() if overall else absent,
    )


def _gaps(judged: list[ClassGroupCheck], overall: ClassGroupCheck,
          action_names: tuple[str, ...] | None) -> list[GroupGap]:
    if len(judged) < 2:
        return []
    quantities: list[tuple[str, list[float], float]] = [
        (name, [getattr(g, name) for g in judged], getattr(overall, name))
        for name in ("top_label_error", "classwise_error", "largest_share_gap", "brier",
                     "log_loss", "mean_cost")
    ]
    if action_names is not None and overall.action_shares is not None:
        for j, a in enumerate(action_names):
            quantities.append((f"share {a}", [float(g.action_shares[j]) for g in judged],
                               float(overall.action_shares[j])))
    found = []
    for name, values, whole in quantities:
        v = np.asarray(values, dtype=float)
        if not np.all(np.isfinite(v)):
            continue
        hi, lo = int(np.argmax(v)), int(np.argmin(v))
        gap = float(v[hi] - v[lo])
        # quantities differ in scale: order by the gap relative to the overall value, as the
        # binary table does (max(|overall|, 0.05))
        found.append((gap / max(abs(whole), 0.05),
                      GroupGap(name, gap, judged[hi].group, judged[lo].group)))
    return [g for _, g in sorted(found, key=lambda t: -t[0])]


def multiclass_by_group(
    y_index: np.ndarray, proba: np.ndarray, groups: Any, *, sample_weight: Any = None,
    actions: np.ndarray | None = None, row_cost: np.ndarray | None = None,
    action_names: tuple[str, ...] | None = None, rule_label: str | None = None,
    n_bins: int = 10, n_resamples: int = 200, confidence_level: float = 0.95,
    random_state: int = 0, min_rows: float = MIN_ROWS, min_events: float = MIN_EVENTS,
    class_names: Any = None, cells: Any = None,
) -> ClassGroupChecks:
    """Multiclass checks in every group; see the module docstring.

    ``y_index`` holds column indices of ``proba``; ``actions`` (column of the cost matrix taken
    for each row) and ``row_cost`` (the realised cost of each row) describe the rule in use.
    Warnings met in a group become notes naming the group (and are warned once more).
    ``class_names`` (one per column of ``proba``) name the classes in the notes.

    The gaps in the Brier score, log loss, mean cost and action shares get a percentile
    bootstrap interval of the difference between the highest and lowest group (rows resampled
    within each of the two, as the binary table does); the binned calibration errors and the
    largest class-share gap get none: resampled, they are biased upwards by amounts that
    differ with the group's size, so their difference has no honest percentile interval.
    ``cells`` (the cell of every row, aggregated counts): whole cells are resampled within
    each group instead of rows (:func:`probwrap.metrics.calibration_by_group`).
    """
    n, k = proba.shape
    g = check_group_labels(groups, n)
    codes = None if cells is None else cell_labels(cells, n)
    w = np.ones(n) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    w = count_scale_weights(w, "report, by group")
    present = np.flatnonzero(np.bincount(y_index, weights=w, minlength=k) > 0)
    n_actions = None if action_names is None else len(action_names)
    log = NoteLog()
    args = (n_bins, n_resamples, confidence_level, int(random_state), min_rows, min_events,
            present, class_names, log)
    labels, first = np.unique(g, return_index=True)
    checks = []
    rows_of = {}
    for label in labels[np.argsort(first)]:
        rows = g == label
        name = label.item() if hasattr(label, "item") else label
        rows_of[name] = rows
        checks.append(_one(
            name, y_index[rows], proba[rows],
            w[rows], k, None if row_cost is None else row_cost[rows],
            None if actions is None else actions[rows], n_actions, *args,
            None if codes is None else codes[rows]))
    overall = _one("all", y_index, proba, w, k, row_cost, actions, n_actions, *args, codes,
                   overall=True)
    judged = sorted((c for c in checks if c.judged), key=lambda c: -np.nan_to_num(
        c.top_label_error, nan=-1.0))
    small = sorted((c for c in checks if not c.judged), key=lambda c: -c.weight)
    # a group without a class is not judged however large it is: said so, not "too small"
    # (before: "too small to judge (1748 rows, 0 of its rarest class)")
    notes = [f"{c.group}: not judged: no row of class(es) {', '.join(c.absent_classes[:5])}"
             + (", ..." if len(c.absent_classes) > 5 else "")
             + f" ({c.effective_rows:.0f} rows; a group is judged with {min_events:g} rows of "
             "every class)" if c.absent_classes else
             f"{c.group}: too small to judge ({c.effective_rows:.0f} rows, "
             f"{c.rarest_class_rows:.0f} of its rarest class)" for c in small]
    notes += [f"{n.about}: {n.kind}: {n.message}" + (f" ({n.count} times)" if n.count > 1
                                                       else "") for n in log.notes]
    gaps = _gaps(judged, overall, action_names)
    if n_resamples and gaps:
        computed: list[str] = []
        gaps = [_with_interval(gap, rows_of, y_index, proba, w, k, actions, row_cost, action_names,
                               int(n_resamples), float(confidence_level), int(random_state),
                               computed, codes) for gap in gaps]
        notes += computed
    return ClassGroupChecks(groups=[*judged, *small], gaps=gaps,
                            overall=overall, min_rows=min_rows, min_events=min_events,
                            n_bins=n_bins, action_names=action_names, rule_label=rule_label,
                            notes=notes, resampled="rows" if codes is None else "cells")


_NO_GAP_INTERVAL = ("top_label_error", "classwise_error", "largest_share_gap")


def _with_interval(gap: GroupGap, rows_of: dict, y: np.ndarray, p: np.ndarray, w: np.ndarray,
                   k: int, actions: np.ndarray | None, row_cost: np.ndarray | None,
                   action_names: tuple[str, ...] | None, n_resamples: int, level: float,
                   seed: int, notes: list[str], cells: np.ndarray | None = None) -> GroupGap:
    """``gap`` with its stratified bootstrap interval (none for the binned errors)."""
    if gap.metric in _NO_GAP_INTERVAL:
        return gap
    labels = list(range(k))
    if gap.metric == "brier":
        def value(idx, ww):
            return float(brier_score(y[idx], p[idx], sample_weight=ww, labels=labels))
    elif gap.metric == "log_loss":
        def value(idx, ww):
            return float(log_loss(y[idx], p[idx], sample_weight=ww, labels=labels))
    elif gap.metric == "mean_cost":
        def value(idx, ww):
            return float(np.dot(ww, row_cost[idx]) / ww.sum())
    else:  # "share <action>"
        j = list(action_names).index(gap.metric[len("share "):])

        def value(idx, ww):
            return float(np.dot(ww, actions[idx] == j) / ww.sum())
    return gap_with_interval(gap, value, rows_of, w, n_resamples, level, seed, notes,
                             label=gap.metric.replace("_", " "), cells=cells)


def _cell(value: float, digits: int = 4) -> str:
    return "<td>&ndash;</td>" if value != value else f"<td>{value:.{digits}f}</td>"


def _interval(pair: tuple[float, float], supported: bool = True) -> str:
    lo, hi = pair
    if lo != lo:
        return "<td>&ndash;</td>"
    mark = "" if supported else ' <small class="pw-unsupported">(not supported)</small>'
    return f"<td>[{lo:.4f}, {hi:.4f}]{mark}</td>"


def multiclass_group_section(c: Any) -> str:
    """HTML for a multiclass report's ``group_checks`` (or ``""``)."""
    checks = getattr(c, "group_checks", None)
    if not isinstance(checks, ClassGroupChecks):
        return ""
    rule = checks.action_names is not None
    head = ("<th>group</th><th>rows</th><th>judged</th><th>top-label error</th>"
            "<th>classwise error</th><th>largest class-share gap</th><th>Brier</th>"
            "<th>interval</th><th>log loss</th><th>interval</th>")
    if rule:
        head += "<th>mean cost</th>" + "".join(f"<th>share {_text(a)}</th>"
                                               for a in checks.action_names)
    rows = []
    for g in [*checks.groups, checks.overall]:
        judged = ("yes" if g.judged else "<b>not judged: a class missing</b>"
                  if g.absent_classes else "<b>too small to judge</b>")
        name = row_name(checks, g)
        cells = [f"<td>{_text(name)}</td>", f"<td>{g.effective_rows:.0f}</td>",
                 f"<td>{judged}</td>", _cell(g.top_label_error), _cell(g.classwise_error),
                 _cell(g.largest_share_gap), _cell(g.brier), _interval(g.brier_interval, g.judged),
                 _cell(g.log_loss), _interval(g.log_loss_interval, g.judged)]
        if rule:
            cells.append(_cell(g.mean_cost))
            cells += [_cell(float(s)) for s in g.action_shares]
        rows.append(f'<tr data-group="{_text(name)}">{"".join(cells)}</tr>')
    gaps = "".join(
        f"<li>{_text(x.metric.replace('_', ' '))}: {x.gap:.4f} (highest "
        f"{_text(str(x.highest))}, lowest {_text(str(x.lowest))}{gap_interval_text(x)})</li>"
        for x in checks.gaps)
    said = (f" The cost and action columns are for the rule in use ({_text(checks.rule_label)})."
            if rule and checks.rule_label else "")
    notes = "".join(f"<p>{_text(n)}</p>" for n in checks.notes)
    return (
        '<section id="by-group"><h2>By group</h2>'
        f"<p>The checks above, group by group: top-label and classwise calibration error "
        f"(plain binned estimates, {checks.n_bins} equal-width bins), the largest gap between a class's observed share "
        "and its mean probability, and the scores with bootstrap intervals "
        f"({resampled_words(checks)} within the group).{said} Groups below {checks.min_rows:g} rows or "
        f"{checks.min_events:g} rows of any class (common practice) are listed but not "
        "judged and left out of the gaps (rows are counted with the weights as row frequencies; "
        "weights summing to less than the number of rows are first rescaled to Kish's "
        "effective size); their intervals are shown but not supported (with few "
        "rows they cover far less than their level), and a group missing a class has none. "
        "The gaps in the scores, mean cost and action shares carry a bootstrap interval of the "
        "difference between the two groups named (rows resampled within each); one that holds 0 "
        "means these data do not establish their order. "
        "Equal calibration and equal error rates across groups are different notions of fairness; when base rates differ they cannot both hold.</p>"
        f'<table id="group-checks"><thead><tr>{head}</tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table>"
        + (f'<h3>Largest gaps between judged groups first</h3><ul id="group-gaps">{gaps}</ul>'
           if gaps else "<p>Fewer than two judged groups: no gaps to compare.</p>")
        + notes + "</section>"
    )
