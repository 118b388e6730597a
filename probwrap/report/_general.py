"""Report numbers for multiclass probabilities and any (n_classes, n_actions) cost matrix.

The binary two-action report (one cutoff) lives in :mod:`._content`; this module covers the
rest: more than two classes, more than two actions (a reject / refer / hold action), and
per-row cost matrices. It reads the inputs and collects the numbers; the decision rules and the
recommendation are in :mod:`._general_rules`. Everything is computed with probwrap's array
core; no files, no drawing.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._validation import label_column, power_of_two_unit
from ..decision import check_cost_matrix, check_row_costs
from ..metrics import (
    brier_score,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
)
from ..plot._common import class_proba
from ..shift import PriorEstimator, prior_by_batch
from ._binary_labels import report_costs
from ._cells import resampling_unit, unlabelled_cell_units, unlabelled_cells_use
from ._common import (
    MetricRow,
    NoteLog,
    Recommendation,
    ReportNote,
    as_proba_2d,
    class_index,
    gated_prior,
    metric_row,
)
from ._general_rules import (
    ActionRuleRow,
    general_rules,
    general_target_columns,
    recommend_general,
    resolve_capacity,
)

__all__ = ["ActionRuleRow", "MulticlassReportContent", "collect_general_content"]


@dataclass
class MulticlassReportContent:
    """Everything a multiclass / multi-action report shows (returned by ``write_report``)."""

    title: str
    n_rows: int
    n_classes: int
    class_names: tuple[str, ...]
    class_shares: np.ndarray
    y_true: np.ndarray
    y_prob: np.ndarray
    sample_weight: np.ndarray | None
    metrics: list[MetricRow]
    n_bins: int
    kind: str = "general"
    calibration_method: str | None = None
    method_scores: dict[str, tuple[float, float]] | None = None
    cost_matrix: np.ndarray | None = None
    per_row_costs: bool = False
    action_names: tuple[str, ...] = ()
    capacity: tuple[int, float] | None = None
    rule_source: str = ""
    class_offsets: np.ndarray | None = None
    budget_threshold: float | None = None
    rules: list[ActionRuleRow] = field(default_factory=list)
    source_prior: np.ndarray | None = None
    target_prior: np.ndarray | None = None
    target_interval: np.ndarray | None = None
    #: EM: the plain maximum-likelihood shares, their interval before it is widened to contain
    #: the shrunk ``target_prior``, and the pseudo-rows of that shrinkage
    ml_prior: np.ndarray | None = None
    ml_interval: np.ndarray | None = None
    prior_strength: float | None = None
    #: the pseudo-rows the shrunk estimate used: ``prior_strength``, or fewer where the data
    #: rejected the estimate with all of them (``PriorEstimate.pseudo_rows``)
    pseudo_rows: float | None = None
    #: the shares the wrapper's evidence gate applies (``PriorShiftWrapper.applied_prior_``:
    #: the source shares moved ``adaptation_weight`` of the way to ``target_prior``); the
    #: rules move to these
    applied_prior: np.ndarray | None = None
    adaptation_weight: float | None = None
    shift_statistic: float | None = None
    shift_pvalue: float | None = None
    n_unlabelled: int = 0
    prior_method: str = "em"
    confidence_level: float = 0.95
    notes: list[ReportNote] = field(default_factory=list)
    late_labels: Any = None
    group_checks: Any = None
    recommendation: Recommendation | None = None
    #: what every bootstrap interval resampled (see ``ReportContent.resampling``)
    resampling: Any = None
    #: the labelled cells the class shares' intervals and shift test counted as units (None:
    #: rows; see ``ReportContent.prevalence_cells``)
    prevalence_cells: int | None = None
    #: the unlabelled rows' cells and the independent rows they are worth (see
    #: ``ReportContent.unlabelled_cells``)
    unlabelled_cells: int | None = None
    unlabelled_effective_rows: float | None = None
    #: class shares batch by batch (:func:`probwrap.shift.prior_by_batch` or
    #: ``PriorShiftWrapper.monitor``), and one prevalence alarm per class
    #: (:class:`~probwrap.report._alarm_chart.BatchAlarm`; two classes: the second only)
    batch_table: np.ndarray | None = None
    class_alarms: dict[int, Any] = field(default_factory=dict)
    #: where the rows came from (a file and its columns), shown under the title
    source: str | None = None

    # the binary report's names, so that shared code (glance, demo summary) can read either
    @property
    def chosen_cutoff(self) -> None:
        return None

    @property
    def target_prevalence(self) -> None:
        return None


def _maximum_likelihood(content: Any, res: Any, strength: Any) -> None:
    """Copy the plain maximum-likelihood shares and their own interval (EM) to ``content``, so
    the report can show them beside the shrunk estimate it acts on."""
    ml = getattr(res, "ml_prior", None)
    if ml is None:
        return
    content.ml_prior = np.asarray(ml, dtype=float)
    iv = getattr(res, "ml_interval", None)
    content.ml_interval = None if iv is None else np.asarray(iv, dtype=float)
    content.prior_strength = None if strength is None else float(strength)
    used = getattr(res, "pseudo_rows", None)
    content.pseudo_rows = None if used is None else float(used)


def _class_alarms(content: MulticlassReportContent, fitted: Any, notes: NoteLog,
                  settings: dict[str, float]) -> None:
    """One prevalence alarm per class on the batch table (two classes: the second class's,
    as in the binary report): the CUSUM of each class's signed shift score
    (:func:`probwrap.shift.signed_shift_scores`; ``class_shift_score`` beyond two classes)."""
    from ._alarm_chart import batch_alarm

    table = content.batch_table
    labelled_rows = (getattr(fitted, "n_source_design_rows_", None)
                     or getattr(fitted, "n_source_effective_", None) or np.inf)
    classes = [1] if content.n_classes == 2 else list(range(content.n_classes))
    for j in classes:
        alarm = notes.compute(
            "batches", f"prevalence alarm of {content.class_names[j]}", batch_alarm, table,
            float(content.source_prior[j]), confidence_level=content.confidence_level,
            class_index=j, labelled_rows=float(labelled_rows), estimator=fitted,
            expected=(ValueError,), **settings)
        if alarm is not None:
            content.class_alarms[j] = alarm
    from ._alarm_chart import same_batch_advice

    content.class_alarms = same_batch_advice(content.class_alarms)


def _metric_rows(y, p, w, n_bins, n_resamples, level, seed, notes,
                 groups=None) -> list[MetricRow]:
    specs = [
        ("log_loss", "log loss (multiclass)", log_loss, {}, "0 (lower is better)"),
        ("brier", "Brier score (sum over classes)", brier_score, {}, "0 (lower is better)"),
        ("ece_top", f"top-label calibration error ({n_bins} equal-width bins, bias-corrected)",
         expected_calibration_error, {"n_bins": n_bins}, "0"),
        ("ece_classwise", f"classwise calibration error ({n_bins} bins per class, "
         "bias-corrected)", classwise_calibration_error, {"n_bins": n_bins}, "0"),
    ]
    return [metric_row(notes, key, label, fn, y, p, w, ideal, n_resamples, level, seed,
                       groups=groups, **kw)
            for key, label, fn, kw, ideal in specs]


def collect_general_content(
    *,
    y_index: np.ndarray,
    proba: np.ndarray,
    class_names: tuple[str, ...],
    sample_weight: Any,
    costs: Any,
    row_costs: Any,
    capacity: Any,
    action_names: Any,
    policy: Any,
    calib: Any,
    X: Any,
    unlabelled_proba: np.ndarray | None,
    X_unlabelled: Any,
    prior_shift: Any,
    n_bins: int,
    n_resamples: int,
    confidence_level: float,
    rng: Any,
    title: str,
    progress: Any = None,
    groups: Any = None,
    cells: Any = None,
    from_model: bool = False,
    batch_size: int | None = None,
    alarm_settings: dict[str, float] | None = None,
    unlabelled_cells: Any = None,
) -> MulticlassReportContent:
    """The numbers of a multiclass and/or multi-action report (see ``write_report``)."""
    n, k = proba.shape
    w = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
    if w is not None and w.shape != (n,):
        raise ValueError(f"`sample_weight` must have shape ({n},); got {w.shape}.")
    counts = np.bincount(y_index, weights=w, minlength=k)
    if np.count_nonzero(counts) < 2:
        raise ValueError("The labels must contain at least two classes to assess calibration.")
    def step(name: str, done: int, total: int = 4) -> None:
        if progress is not None:
            progress(name, done, total)

    notes = NoteLog()
    step("calibration metrics", 0)
    binary = k == 2
    unit = resampling_unit(cells, n=n, y_index=y_index, w=w, X=X if from_model else None,
                           y01=y_index if binary else None,
                           p=proba[:, 1] if binary else None, notes=notes)
    seed = int(rng.randint(2**31 - 1))
    content = MulticlassReportContent(
        title=title, n_rows=n, n_classes=k, class_names=class_names,
        class_shares=counts / counts.sum(), y_true=y_index, y_prob=proba, sample_weight=w,
        metrics=_metric_rows(y_index, proba, w, n_bins, n_resamples, confidence_level, seed,
                             notes, groups=unit.groups),
        n_bins=n_bins, confidence_level=confidence_level, resampling=unit,
    )
    if calib is not None:
        content.calibration_method = str(getattr(calib, "method_", None))
        content.method_scores = getattr(calib, "method_scores_", None)

    # -- costs and actions -------------------------------------------------------------------
    step("decision rules", 1)
    policy_costs = None
    if policy is not None and costs is None and row_costs is None:
        if getattr(policy, "cost_matrix_", None) is not None:
            costs = policy.cost_matrix_
        elif callable(policy.costs):
            policy_costs = policy.costs
            row_costs = policy_costs(X)
    matrix = None
    per_row = None
    rule_fns: list = []
    rule_costs = None
    if row_costs is not None:
        per_row = check_row_costs(row_costs, n, n_classes=k, name="row_costs")
        # the mean matrix, with costs and weights divided by powers of two (exact) so that
        # the sums stay finite for costs near the largest float
        unit = power_of_two_unit(per_row)
        matrix = unit * np.average(per_row / unit, axis=0,
                                   weights=None if w is None else w / power_of_two_unit(w))
    elif costs is not None:
        matrix = check_cost_matrix(costs, n_classes=k)
    if matrix is not None:
        n_actions = matrix.shape[1]
        if action_names is None and policy is not None:
            action_names = [str(a) for a in policy.actions_]
        if action_names is None:
            if n_actions != k:
                raise ValueError(
                    f"`action_names` must name the {n_actions} actions (columns of `costs`): "
                    f"there are {k} classes, so the class names cannot be used."
                )
            action_names = list(class_names)
        names = tuple(str(a) for a in action_names)
        if len(names) != n_actions:
            raise ValueError(
                f"`action_names` must name the {n_actions} actions (columns of `costs`); got "
                f"{len(names)}: {list(names)}."
            )
        if len(set(names)) != len(names):
            raise ValueError(f"`action_names` must be distinct; got {list(names)}.")
        content.action_names = names
        content.cost_matrix = matrix
        content.per_row_costs = per_row is not None
        if capacity is None and policy is not None:
            capacity = policy.capacity
        content.capacity = resolve_capacity(capacity, names)
        rule_fns, rule_costs = general_rules(content, proba, y_index, w, matrix, per_row,
                                             policy, policy_costs, X, unlabelled_proba,
                                             X_unlabelled)
    elif capacity is not None:
        raise ValueError("`capacity` needs costs (`costs` or `row_costs`).")

    # -- priors ------------------------------------------------------------------------------
    step("class shares", 2)
    q = unlabelled_proba
    fitted = None
    if q is not None:
        content.n_unlabelled = int(q.shape[0])
    batch_cells = unlabelled_cells_use(unlabelled_cells, prior_shift, q, X_unlabelled,
                                       batch_size)
    if prior_shift is not None and hasattr(prior_shift, "target_prior_"):
        content.source_prior = np.asarray(prior_shift.source_prior_, dtype=float)
        content.target_prior = np.asarray(prior_shift.target_prior_, dtype=float)
        iv = prior_shift.target_prior_interval_
        content.target_interval = None if iv is None else np.asarray(iv, dtype=float)
        content.shift_statistic = float(prior_shift.shift_statistic_)
        content.shift_pvalue = float(prior_shift.shift_pvalue_)
        content.prior_method = str(prior_shift.method)
        _maximum_likelihood(content, getattr(prior_shift, "prior_estimate_", None),
                            getattr(prior_shift, "prior_strength", None))
        content.applied_prior = np.asarray(prior_shift.applied_prior_, dtype=float)
        content.adaptation_weight = float(prior_shift.adaptation_weight_)
        content.prevalence_cells = getattr(
            getattr(prior_shift, "prior_estimator_", None), "n_source_cells_", None)
        if X_unlabelled is not None and batch_size is not None:
            step("class shares by batch", 3)
            content.batch_table = notes.compute(
                "batches", "class shares by batch", prior_shift.monitor, X_unlabelled,
                batch_size=batch_size, cells=batch_cells)
            fitted = getattr(prior_shift, "prior_estimator_", None)
    elif q is not None:
        est = PriorEstimator(n_resamples=n_resamples, confidence_level=confidence_level,
                             random_state=int(rng.randint(2**31 - 1)))
        # the labelled rows' cells are the estimator's units too (see the binary report)
        est.fit(proba, y_index, w, class_names=content.class_names, cells=unit.groups)
        ucodes = None
        if unlabelled_cells is not None:
            # the unlabelled rows' cells are the units of their side (estimate(cells=))
            ucodes, content.unlabelled_cells, content.unlabelled_effective_rows = (
                unlabelled_cell_units(est, q, unlabelled_cells))
        res = notes.compute("prevalence", "estimated class shares", est.estimate, q,
                            cells=ucodes)
        content.prevalence_cells = est.n_source_cells_
        content.source_prior = np.asarray(est.source_prior_, dtype=float)
        content.target_prior = np.asarray(res.prior, dtype=float)
        content.target_interval = res.interval
        content.shift_statistic = float(res.shift_statistic)
        content.shift_pvalue = float(res.shift_pvalue)
        _maximum_likelihood(content, res, est.prior_strength)
        content.adaptation_weight, content.applied_prior = gated_prior(res, est.source_prior_)
        if batch_size is not None:
            step("class shares by batch", 3)
            content.batch_table = notes.compute(
                "batches", "class shares by batch", prior_by_batch, est, q,
                batch_size=batch_size, cells=ucodes)
            fitted = est
    if content.batch_table is not None and content.source_prior is not None:
        _class_alarms(content, fitted, notes, alarm_settings or {})
    if (content.applied_prior is not None and q is not None and matrix is not None
            and np.all(content.source_prior > 0) and np.all(content.applied_prior > 0)):
        general_target_columns(content, proba, y_index, w, rule_costs, q, rule_fns,
                               X_unlabelled, policy is not None)
    if content.rules:
        recommend_general(content, proba, y_index, w, rule_costs, q, notes)
    content.notes = notes.notes
    if groups is not None:
        from ._general_groups import multiclass_by_group

        chosen = content.rules[0] if content.rules else None
        acts = None if chosen is None else chosen.actions
        row_cost = None
        if acts is not None:
            row_cost = (matrix[y_index, acts] if per_row is None
                        else per_row[np.arange(n), y_index, acts])
        content.group_checks = multiclass_by_group(
            y_index, proba, groups, sample_weight=w, actions=acts, row_cost=row_cost,
            action_names=None if acts is None else content.action_names,
            rule_label=None if chosen is None else chosen.label, n_bins=n_bins,
            n_resamples=n_resamples, confidence_level=confidence_level,
            random_state=int(rng.randint(2**31 - 1)), class_names=content.class_names,
            cells=content.resampling.groups)
    step("done", 4)
    return content


def _needs_general(k: int, costs: Any, row_costs: Any, policy: Any) -> bool:
    """Whether the report is beyond binary-with-two-actions (one cutoff)."""
    if k > 2 or row_costs is not None:
        return True
    if costs is not None and not isinstance(costs, Mapping):
        shape = np.shape(costs)
        return len(shape) == 2 and shape != (2, 2)
    if costs is None and policy is not None:
        return (getattr(policy, "cost_matrix_", None) is None and callable(policy.costs)) or (
            len(getattr(policy, "actions_", ())) != 2
        )
    return False


def general_report(*, y_true, y_prob, model, X, y, sample_weight, costs, row_costs, capacity,
                    action_names, unlabelled_prob, X_unlabelled, prior_shift, batch_size,
                    n_bins, n_resamples, confidence_level, rng, title, policy, calib,
                    class_names, progress, groups=None, cells=None,
                    alarm_settings=None, unlabelled_cells=None) -> Any:
    """The multiclass / multi-action content, or None when the binary report applies."""

    if model is not None:
        if X is None or y is None:
            return None  # the binary path raises the clear error
        proba = class_proba(model, X, name="model")
        k = proba.shape[1]
        if not _needs_general(k, costs, row_costs, policy):
            return None
        if y_prob is not None or y_true is not None:
            raise ValueError("Give either `model` with `X`, `y`, or `y_true` with `y_prob`.")
        classes = np.asarray(getattr(model, "classes_", np.arange(k)))
        y_index = class_index(y, classes, "y")
        if unlabelled_prob is None and X_unlabelled is not None:
            unlabelled_prob = class_proba(model, X_unlabelled, name="model")
    else:
        if y_true is None or y_prob is None:
            return None
        shape = np.shape(y_prob)
        k = shape[1] if len(shape) == 2 else 2
        if not _needs_general(k, costs, row_costs, None):
            return None
        proba = as_proba_2d(y_prob, "y_prob")
        y_arr = label_column(y_true, "y_true")
        if y_arr.shape[0] != proba.shape[0]:
            raise ValueError(f"`y_true` has {y_arr.shape[0]} rows but `y_prob` has "
                             f"{proba.shape[0]}; they must match.")
        found = np.unique(y_arr)
        named = None
        if class_names is not None and len(class_names) == k:
            named = np.asarray([str(c) for c in class_names])
        if y_arr.dtype.kind in "iu" and found.min() >= 0 and found.max() < k:
            classes = np.arange(k)
        elif named is not None and np.isin(found.astype(str), named).all():
            # labels named by `class_names`, which names the columns in their order
            classes = named
            y_arr = y_arr.astype(str)
        elif found.shape[0] == k:
            classes = found
        else:
            raise ValueError(
                f"`y_true` holds {found.shape[0]} distinct labels but `y_prob` has {k} columns; "
                f"give labels as column indices 0..{k - 1}, or every class at least once."
            )
        y_index = class_index(y_arr, classes, "y_true")
    q = None if unlabelled_prob is None else as_proba_2d(unlabelled_prob, "unlabelled_prob")
    if q is not None and q.shape[1] != proba.shape[1]:
        raise ValueError(f"`unlabelled_prob` has {q.shape[1]} columns but the labelled "
                         f"probabilities have {proba.shape[1]}.")
    if class_names is not None and len(class_names) != proba.shape[1]:
        raise ValueError(f"`class_names` must name the {proba.shape[1]} classes (columns of the "
                         f"probabilities); got {len(class_names)}.")
    names = tuple(str(c) for c in (class_names if class_names is not None else classes))
    costs = report_costs(costs, classes, class_names, action_names)  # a DataFrame by labels
    return collect_general_content(
        y_index=y_index, proba=proba, class_names=names, sample_weight=sample_weight,
        costs=costs, row_costs=row_costs, capacity=capacity, action_names=action_names,
        policy=policy, calib=calib, X=X, unlabelled_proba=q, X_unlabelled=X_unlabelled,
        prior_shift=prior_shift, n_bins=n_bins, n_resamples=n_resamples,
        confidence_level=confidence_level, rng=rng, title=title, progress=progress,
        groups=groups, cells=cells, from_model=model is not None, batch_size=batch_size,
        alarm_settings=alarm_settings, unlabelled_cells=unlabelled_cells,
    )
