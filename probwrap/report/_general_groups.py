"""The "By group" section of the multiclass / multi-action report.

The binary report uses :func:`probwrap.metrics.calibration_by_group`; with more classes the
same questions are asked with the multiclass measures the report already shows: per group, the
top-label (Guo et al. 2017) and classwise (Kull et al. 2019) calibration error, the largest gap
between a class's observed share and its mean probability, the Brier score and log loss with
bootstrap intervals (rows resampled within the group), and for the rule in use its mean cost and
the share of each action. Groups too small to judge are listed and marked, not hidden; the
spread of each quantity across the judged groups is listed largest first.

What a group is judged on, with three or more classes (see :func:`multiclass_by_group`): its
overall quantities (log loss, Brier score, top-label error, largest class-share gap, mean cost,
action shares) when it has ``min_rows`` rows in total; each class's one-vs-rest calibration
error only when the group holds ``min_events`` rows of that class and ``min_events`` of the
others (the binary rule of :func:`probwrap.metrics.calibration_by_group`, read one class
against the rest); the classwise error (their mean) only when every class is judged. Before,
one class short of 10 rows left a group of any size unjudged, so with the ten classes of
scikit-learn's digits a grouping where each group misses a digit or two judged none. With two
classes the rule is the binary one, unchanged: both classes are needed.
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
from ..metrics._calibration import _binned_gap
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
    #: each class's one-vs-rest binned calibration error (column j against ``y == j``; their
    #: mean is ``classwise_error``), in the order of the columns
    class_errors: tuple[float, ...] = ()
    #: the classes (present somewhere) whose one-vs-rest error this group can support: at least
    #: ``min_events`` rows of the class and ``min_events`` rows of the other classes
    classes_judged: tuple[str, ...] = ()
    #: the others, each as ``"name: reason"`` (e.g. ``"0: no row"``, ``"3: 4 rows, below 10"``)
    classes_not_judged: tuple[str, ...] = ()


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
    #: three or more classes: the spread of each class's one-vs-rest calibration error across
    #: the groups judged on that class (``"error of class <name>"``), largest first (relative
    #: to the overall value, as ``gaps``); no intervals (binned errors, as the classwise gap)
    class_gaps: list[GroupGap] = field(default_factory=list)


def _one(group, y, p, w, k, row_cost, actions, n_actions, n_bins, n_resamples, level, seed,
         min_rows, min_events, classes_present, class_names, log: NoteLog,
         cells: np.ndarray | None = None, overall: bool = False) -> ClassGroupCheck:
    # the overall row's notes say "all rows" (before, "group all", as a group named "all" does)
    key, about = ("overall", "all rows") if overall else (f"group:{group}", f"group {group}")
    # sizes as calibration_by_group judges them: weights on the row-count scale, summed
    eff_class = [float(w[y == j].sum()) for j in classes_present]
    rarest = float(min(eff_class)) if eff_class else 0.0
    eff = float(w.sum())
    units = cell_sizes(y, w, cells, classes_present)
    # counts: the cells must reach the sizes too (calibration_by_group)
    rows_ok = eff >= min_rows and (units is None or units[0] >= min_rows)
    judged_names, not_judged = [], []
    for i, j in enumerate(classes_present):
        name = str(class_names[j]) if class_names is not None else str(j)
        rest = eff - eff_class[i]
        if units is not None:  # cells holding the class, and cells holding another class
            live = w > 0
            rest_cells = int(np.unique(cells[live & (y != j)]).shape[0])
            why = _class_reason(eff_class[i], rest, min_events, units[1 + i], rest_cells)
        else:
            why = _class_reason(eff_class[i], rest, min_events)
        if why is None and not rows_ok:  # one class against the rest: the binary rule
            why = f"group below {min_rows:g} rows"
        if why is None:
            judged_names.append(name)
        else:
            not_judged.append(f"{name}: {why}")
    if len(classes_present) > 2:
        # the group's overall quantities need its rows; each class's piece, its own rows
        judged = rows_ok
    else:  # two classes: the binary rule, unchanged (both classes needed)
        judged = rows_ok and not not_judged
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
        class_errors=_class_errors(y, p, w, k, n_bins),
        classes_judged=tuple(judged_names), classes_not_judged=tuple(not_judged),
    )


def _class_reason(n_class: float, n_rest: float, min_events: float,
                  cells_class: int | None = None, cells_rest: int | None = None) -> str | None:
    """Why a group cannot support one class's one-vs-rest error, or None when it can: the
    binary rule (``min_events`` rows of each side) read one class against the rest."""
    if n_class <= 0:
        return "no row"
    if n_class < min_events:
        return f"{_rows(n_class)}, below {min_events:g}"
    if n_rest < min_events:
        return f"{_rows(n_rest)} of the other classes, below {min_events:g}"
    if cells_class is not None and cells_class < min_events:
        return f"{cells_class} cells, below {min_events:g}"
    if cells_rest is not None and cells_rest < min_events:
        return f"{cells_rest} cells of the other classes, below {min_events:g}"
    return None


def _rows(n: float) -> str:
    return f"{n:.0f} row" + ("" if f"{n:.0f}" == "1" else "s")


def _class_errors(y: np.ndarray, p: np.ndarray, w: np.ndarray, k: int,
                  n_bins: int) -> tuple[float, ...]:
    """Each column's one-vs-rest binned error (the terms whose mean is the classwise error,
    Kull et al. 2019); NaN for a group whose rows all weigh 0."""
    if not np.any(w > 0):
        return tuple(float("nan") for _ in range(k))
    return tuple(_binned_gap(p[:, j], (y == j).astype(float), w, n_bins, "uniform")
                 for j in range(k))


#: the gap name of one class's one-vs-rest calibration error (``CLASS_GAP.format(name)``)
CLASS_GAP = "error of class {}"


def _gaps(judged: list[ClassGroupCheck], overall: ClassGroupCheck,
          action_names: tuple[str, ...] | None,
          class_columns: dict[str, int] | None = None) -> list[GroupGap]:
    """The spread of each quantity across the groups judged on it: the overall quantities over
    the judged groups, and the classwise error over those judged on every class; or, with
    ``class_columns`` (class name -> column; three or more classes), instead each class's
    one-vs-rest error over the groups judged on that class."""
    quantities: list[tuple[str, list[ClassGroupCheck], list[float], float]] = [
        (name, judged, [getattr(g, name) for g in judged], getattr(overall, name))
        for name in ("top_label_error", "largest_share_gap", "brier", "log_loss", "mean_cost")
    ]
    complete = [g for g in judged if not g.classes_not_judged]
    quantities.insert(1, ("classwise_error", complete, [g.classwise_error for g in complete],
                          overall.classwise_error))
    if action_names is not None and overall.action_shares is not None:
        for j, a in enumerate(action_names):
            quantities.append((f"share {a}", judged, [float(g.action_shares[j]) for g in judged],
                               float(overall.action_shares[j])))
    if class_columns is not None:  # the class pieces only (kept apart from the rest)
        quantities = []
        for name, j in class_columns.items():
            among = [g for g in judged if name in g.classes_judged]
            quantities.append((CLASS_GAP.format(name), among,
                               [g.class_errors[j] for g in among], overall.class_errors[j]))
    found = []
    for name, among, values, whole in quantities:
        v = np.asarray(values, dtype=float)
        if v.shape[0] < 2 or not np.all(np.isfinite(v)):
            continue
        hi, lo = int(np.argmax(v)), int(np.argmin(v))
        gap = float(v[hi] - v[lo])
        # quantities differ in scale: order by the gap relative to the overall value, as the
        # binary table does (max(|overall|, 0.05))
        found.append((gap / max(abs(whole), 0.05),
                      GroupGap(name, gap, among[hi].group, among[lo].group)))
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

    With three or more classes a group is judged (``judged``) on its overall quantities when it
    has ``min_rows`` rows, and on each class's one-vs-rest calibration error (``class_errors``)
    when it also holds ``min_events`` rows of the class and ``min_events`` of the others
    (``classes_judged``; the rest in ``classes_not_judged`` with the reason); its classwise error
    enters the gaps only when every class is judged, and each class's error is compared in
    ``class_gaps`` across the groups judged on it. With two classes a group needs
    ``min_events`` rows of both (the binary rule of
    :func:`probwrap.metrics.calibration_by_group`).

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
    many = present.shape[0] > 2
    if many:
        # three or more classes: a group is judged on its overall quantities with min_rows
        # rows, and on each class's piece with min_events rows of it (before, one class short
        # of min_events left the whole group unjudged, however many rows it had)
        notes = [f"{c.group}: too small to judge ({c.effective_rows:.0f} rows; a group is "
                 f"judged on its overall scores with {min_rows:g} rows)" for c in small]
        notes += [f"{c.group}: judged on its overall scores, but not on class(es) "
                  + "; ".join(c.classes_not_judged[:5])
                  + ("; ..." if len(c.classes_not_judged) > 5 else "")
                  + f" (a class is judged with {min_events:g} rows of it and {min_events:g} of "
                  "the others): their one-vs-rest errors and the group's classwise error are "
                  "left out of the gaps" for c in judged if c.classes_not_judged]
    else:
        # two classes, the binary rule: a group without a class is not judged however large it
        # is, and said so, not "too small"
        notes = [f"{c.group}: not judged: no row of class(es) {', '.join(c.absent_classes[:5])}"
                 + (", ..." if len(c.absent_classes) > 5 else "")
                 + f" ({c.effective_rows:.0f} rows; a group is judged with {min_events:g} rows "
                 "of every class)" if c.absent_classes else
                 f"{c.group}: too small to judge ({c.effective_rows:.0f} rows, "
                 f"{c.rarest_class_rows:.0f} of its rarest class)" for c in small]
    notes += [f"{n.about}: {n.kind}: {n.message}" + (f" ({n.count} times)" if n.count > 1
                                                       else "") for n in log.notes]
    columns = None
    if many:
        columns = {(str(class_names[j]) if class_names is not None else str(j)): int(j)
                   for j in present}
    gaps = _gaps(judged, overall, action_names)
    class_gaps = [] if columns is None else _gaps(judged, overall, action_names, columns)
    if n_resamples and gaps:
        computed: list[str] = []
        lacking = {c.group: c.absent_classes for c in checks if c.absent_classes}
        gaps = [_with_interval(gap, rows_of, y_index, proba, w, k, actions, row_cost, action_names,
                               int(n_resamples), float(confidence_level), int(random_state),
                               computed, codes, lacking) for gap in gaps]
        notes += computed
    return ClassGroupChecks(groups=[*judged, *small], gaps=gaps,
                            overall=overall, min_rows=min_rows, min_events=min_events,
                            n_bins=n_bins, action_names=action_names, rule_label=rule_label,
                            notes=notes, resampled="rows" if codes is None else "cells",
                            class_gaps=class_gaps)


_NO_GAP_INTERVAL = ("top_label_error", "classwise_error", "largest_share_gap")


def _with_interval(gap: GroupGap, rows_of: dict, y: np.ndarray, p: np.ndarray, w: np.ndarray,
                   k: int, actions: np.ndarray | None, row_cost: np.ndarray | None,
                   action_names: tuple[str, ...] | None, n_resamples: int, level: float,
                   seed: int, notes: list[str], cells: np.ndarray | None = None,
                   lacking: dict | None = None) -> GroupGap:
    """``gap`` with its stratified bootstrap interval (none for the binned errors, and none
    where one of its two groups holds no row of a class: its resamples never hold that class
    either, as for the group's own intervals)."""
    if gap.metric in _NO_GAP_INTERVAL:
        return gap
    short = [x for x in (gap.highest, gap.lowest) if (lacking or {}).get(x)]
    if short:
        notes.append(f"gap in {gap.metric.replace('_', ' ')}: no interval ("
                     + "; ".join(f"group {str(x)!r} holds no row of class(es) "
                                 + ", ".join(lacking[x][:5]) + (", ..." if len(lacking[x]) > 5
                                                                else "") for x in short)
                     + (", so their" if len(short) > 1 else ", so its")
                     + " resamples never hold them).")
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
    whole = checks.overall
    many = len(whole.classes_judged) + len(whole.classes_not_judged) > 2
    if many:  # which classes each group is judged on, and why not the others
        head = head.replace("<th>judged</th>", "<th>judged</th><th>classes not judged</th>")
    rows = []
    for g in [*checks.groups, checks.overall]:
        if many:
            judged = ("<b>too small to judge</b>" if not g.judged else
                      "overall scores only" if g.classes_not_judged else "yes")
        else:
            judged = ("yes" if g.judged else "<b>not judged: a class missing</b>"
                      if g.absent_classes else "<b>too small to judge</b>")
        name = row_name(checks, g)
        cells = [f"<td>{_text(name)}</td>", f"<td>{g.effective_rows:.0f}</td>",
                 f"<td>{judged}</td>"]
        if many:
            cells.append("<td>all (group too small)</td>" if not g.judged else
                         f"<td>{_text('; '.join(g.classes_not_judged)) or '&ndash;'}</td>")
        cells += [_cell(g.top_label_error), _cell(g.classwise_error),
                  _cell(g.largest_share_gap), _cell(g.brier),
                  _interval(g.brier_interval, g.judged),
                  _cell(g.log_loss), _interval(g.log_loss_interval, g.judged)]
        if rule:
            cells.append(_cell(g.mean_cost))
            cells += [_cell(float(s)) for s in g.action_shares]
        rows.append(f'<tr data-group="{_text(name)}">{"".join(cells)}</tr>')
    gaps = "".join(
        f"<li>{_text(x.metric.replace('_', ' '))}: {x.gap:.4f} (highest "
        f"{_text(str(x.highest))}, lowest {_text(str(x.lowest))}{gap_interval_text(x)})</li>"
        for x in checks.gaps)
    class_gaps = "".join(
        f"<li>{_text(x.metric)}: {x.gap:.4f} (highest {_text(str(x.highest))}, lowest "
        f"{_text(str(x.lowest))})</li>" for x in checks.class_gaps)
    said = (f" The cost and action columns are for the rule in use ({_text(checks.rule_label)})."
            if rule and checks.rule_label else "")
    notes = "".join(f"<p>{_text(n)}</p>" for n in checks.notes)
    return (
        '<section id="by-group"><h2>By group</h2>'
        f"<p>The checks above, group by group: top-label and classwise calibration error "
        f"(plain binned estimates, {checks.n_bins} equal-width bins), the largest gap between a class's observed share "
        "and its mean probability, and the scores with bootstrap intervals "
        f"({resampled_words(checks)} within the group).{said} "
        + (f"A group is judged on its overall scores (top-label error, class-share gap, Brier, "
           f"log loss{', cost and shares' if rule else ''}) with {checks.min_rows:g} rows, and "
           f"on a class's one-vs-rest calibration error with {checks.min_events:g} rows of "
           f"that class and {checks.min_events:g} of the others (common practice, the binary "
           "table's rule read one class against the rest); the classes a group is not judged "
           "on are listed with the reason, and its classwise error is then left out of the "
           "gaps. Groups below "
           f"{checks.min_rows:g} rows are listed but not judged and left out of the gaps "
           if many else
           f"Groups below {checks.min_rows:g} rows or {checks.min_events:g} rows of any class "
           "(common practice) are listed but not judged and left out of the gaps ")
        + "(rows are counted with the weights as row frequencies; "
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
        + (f"<h3>Each class against the rest, between the groups judged on it</h3>"
           f'<ul id="group-class-gaps">{class_gaps}</ul>' if class_gaps else "")
        + notes + "</section>"
    )
