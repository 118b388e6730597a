"""The numbers of a report, computed with probwrap's array core (no files, no drawing).

:func:`collect_content` routes multiclass and multi-action inputs to :mod:`._general`; the
binary two-action report is collected here, its decision rules and recommendation in
:mod:`._binary_rules`.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.special import expit

from .._validation import plain
from ..decision import (
    check_capacity,
    check_cost_matrix,
    cutoff_interval,
    expected_costs,
    plugin_cutoff,
    search_cutoff,
    settle_cutoff,
)
from ..metrics import (
    brier_score,
    expected_calibration_error,
    log_loss,
)
from ..metrics._scores import log_loss_of_log_odds
from ..metrics._slope import slope_intercept_fit, slope_intercept_fit_log_odds
from ..plot._common import binary_labels, positive_proba
from ..shift import PriorEstimator, adjust_to_prior, prior_by_batch, shift_cutoff
from ._binary_labels import binary_class_names, binary_truth, report_costs
from ._binary_rules import (
    BAYES_NAME,
    CHOSEN_NAMES,
    HALF_NAME,
    HELDOUT_LEAST_COST_NAME,
    HINDSIGHT_NAME,
    POLICY_SOURCES,
    RuleRow,
    ScaledCosts,
    cost_scale,
    recommend,
    rule_row,
    target_columns,
)
from ._cells import frequency_cases, resampling_unit, unlabelled_cell_units, unlabelled_cells_use
from ._common import (
    MetricRow,
    NoteLog,
    ProgressCallback,
    Recommendation,
    ReportNote,
    as_positive_proba,
    gated_prior,
    metric_row,
)
from ._fast_metrics import FAST_BOOTSTRAP_ROWS, fast_metric_rows
from ._general import general_report
from ._promises import guarantee_summary, resolve_late_labels

__all__ = ["ReportContent", "MetricRow", "Recommendation", "RuleRow", "collect_content"]


@dataclass
class ReportContent:
    """Everything a report shows; :func:`probwrap.report.write_report` returns it."""

    title: str
    n_rows: int
    prevalence: float
    y_true: np.ndarray
    y_prob: np.ndarray
    sample_weight: np.ndarray | None
    metrics: list[MetricRow]
    n_bins: int
    calibration_method: str | None = None
    method_scores: dict[str, tuple[float, float]] | None = None
    cost_matrix: np.ndarray | None = None
    action_names: tuple[str, str] = ("no action", "act")
    capacity: float | None = None
    cutoff_source: str = ""
    chosen_cutoff: float | None = None
    # bootstrap interval of the cutoff ``interval_cutoff`` (named ``interval_name``): the
    # least-cost cutoff, which the chosen (settled) cutoff of a tuned policy need not equal
    chosen_interval: tuple[float, float] | None = None
    interval_cutoff: float | None = None
    interval_name: str = ""
    plugin: float | None = None
    # a score file's cutoffs through the rule of CostPolicyWrapper(strategy="tuned"):
    # decision.settle_cutoff on the labelled rows of the report (None with a fitted policy)
    settled: Any = None
    # the cutoff that rule settles toward: the Bayes cutoff carried back through the calibration
    # map chosen on the same rows (``anchor_map``: its name; "identity" or None: the Bayes cutoff)
    anchor: float | None = None
    anchor_map: str | None = None
    rules: list[RuleRow] = field(default_factory=list)
    cost_curve: Any = None
    cost_interval: Any = None
    chosen_name: str = "chosen cutoff"
    source_prevalence: float | None = None
    target_prevalence: float | None = None
    target_interval: tuple[float, float] | None = None
    #: EM: the plain maximum-likelihood prevalence, its interval before it is widened to contain
    #: the shrunk ``target_prevalence``, and the pseudo-rows of that shrinkage
    ml_prevalence: float | None = None
    ml_interval: tuple[float, float] | None = None
    prior_strength: float | None = None
    #: the pseudo-rows the shrunk estimate used: ``prior_strength``, or fewer where the data
    #: rejected the estimate with all of them (``PriorEstimate.pseudo_rows``)
    pseudo_rows: float | None = None
    shift_statistic: float | None = None
    shift_pvalue: float | None = None
    n_unlabelled: int = 0
    adapted_cutoff: float | None = None
    #: the prevalence the wrapper's evidence gate applies (``PriorShiftWrapper.applied_prior_``:
    #: the source prevalence moved ``adaptation_weight`` of the way to ``target_prevalence``)
    applied_prevalence: float | None = None
    adaptation_weight: float | None = None
    batch_table: np.ndarray | None = None
    prior_method: str = "em"
    confidence_level: float = 0.95
    notes: list[ReportNote] = field(default_factory=list)
    recommendation: Recommendation | None = None
    class_names: tuple[str, str] = ("negative", "positive")
    group_checks: Any = None
    alarm: Any = None
    guarantee: Any = None
    late_labels: Any = None
    #: what every bootstrap interval resampled: rows, or whole cells of aggregated counts
    #: (:class:`~probwrap.report._cells.ResamplingUnit`, with the cells' dispersion)
    resampling: Any = None
    #: the labelled cells the prevalence interval and shift test counted as units (None: the
    #: labelled rows were counted as independent); see :func:`._cells.prevalence_unit_words`
    prevalence_cells: int | None = None
    #: ``unlabelled_cells``: the unlabelled rows' cells the report's own estimate counted as
    #: units, and the independent rows they are worth (the rows over the cells' design effect
    #: on the mean score); None without them or with ``prior_shift`` (its own numbers)
    unlabelled_cells: int | None = None
    unlabelled_effective_rows: float | None = None
    #: where the rows came from (a file and its columns), shown under the title
    source: str | None = None


def _inner_chain(model: Any) -> list[Any]:
    chain, seen = [], 0
    while model is not None and seen < 20:
        chain.append(model)
        model = getattr(model, "estimator_", None)
        seen += 1
    return chain


def _find(chain: list[Any], cls_name: str) -> Any:
    for m in chain:
        if type(m).__name__ == cls_name:
            return m
    return None


def _metric_rows(y, p, w, n_bins, n_resamples, level, rng, notes,
                 groups=None, log_odds=None) -> list[MetricRow]:
    """The five calibration rows; ``log_odds``: the forecasts as given on the log-odds scale
    (``score_scale="log-odds"``), which the slope and intercept are fitted on instead of
    ``logit(p)`` (clipped at +-27.6, and ``p`` itself is 0 or 1 beyond about +-36.7)."""
    fit_on = slope_intercept_fit if log_odds is None else slope_intercept_fit_log_odds
    on_log_odds = ("slope", "intercept") if log_odds is None else ("slope", "intercept",
                                                                   "log_loss")

    def slope(yt, yp, sample_weight=None):
        fit = fit_on(yt, yp, sample_weight=sample_weight)
        if fit.notes:  # forecasts that do not vary or separate the classes: no slope
            raise ValueError(fit.notes[0])
        return fit.slope

    def intercept(yt, yp, sample_weight=None):
        return fit_on(yt, yp, sample_weight=sample_weight).intercept

    specs = [
        ("brier", "Brier score", brier_score, {}, "0 (lower is better)"),
        ("log_loss", "log loss", log_loss if log_odds is None else log_loss_of_log_odds, {},
         "0 (lower is better)"),
        ("ece", f"expected calibration error ({n_bins} equal-width bins, bias-corrected)",
         expected_calibration_error, {"n_bins": n_bins}, "0"),
        ("slope", "calibration slope", slope, {}, "1"),
        ("intercept", "calibration-in-the-large", intercept, {}, "0"),
    ]
    seed = int(rng.randint(2**31 - 1))
    if p.shape[0] >= FAST_BOOTSTRAP_ROWS:
        return fast_metric_rows(y, p, w, n_bins, n_resamples, level, seed, notes,
                                {key: label for key, label, *_ in specs}, groups=groups,
                                log_odds=log_odds)
    return [metric_row(notes, key, label, fn, y,
                       log_odds if key in on_log_odds and log_odds is not None else p,
                       w, ideal, n_resamples, level, seed, groups=groups, **kw)
            for key, label, fn, kw, ideal in specs]


def _given_log_odds(scores: Any, name: str) -> np.ndarray:
    """``score_scale="log-odds"``: the binary scores as 1-d finite floats (a copy)."""
    try:
        x = np.array(scores, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must hold numbers (log-odds, since "
                         f"score_scale='log-odds') ({exc}).") from None
    if x.ndim != 1:
        raise ValueError(f"`{name}` must be 1-d positive-class log-odds with "
                         f"score_scale='log-odds' (a binary report); got shape {x.shape}. "
                         "Multiclass reports take probabilities.")
    if not np.all(np.isfinite(x)):
        raise ValueError(f"`{name}` holds {int(np.count_nonzero(~np.isfinite(x)))} non-finite "
                         "value(s); log-odds (score_scale='log-odds') must be finite numbers.")
    return x


def _maximum_likelihood(content: Any, res: Any, strength: Any) -> None:
    """Copy the plain maximum-likelihood prevalence and its own interval (EM) to ``content``,
    so the report can show them beside the shrunk estimate it acts on."""
    ml = getattr(res, "ml_prior", None)
    if ml is None:
        return
    content.ml_prevalence = float(ml[1])
    iv = getattr(res, "ml_interval", None)
    if iv is not None:
        content.ml_interval = (float(iv[1, 0]), float(iv[1, 1]))
    content.prior_strength = None if strength is None else float(strength)
    used = getattr(res, "pseudo_rows", None)
    content.pseudo_rows = None if used is None else float(used)


def collect_content(
    *,
    y_true: Any = None,
    y_prob: Any = None,
    model: Any = None,
    X: Any = None,
    y: Any = None,
    sample_weight: Any = None,
    costs: Any = None,
    capacity: Any = None,
    action_names: Any = None,
    unlabelled_prob: Any = None,
    X_unlabelled: Any = None,
    prior_shift: Any = None,
    batch_size: int | None = None,
    n_bins: int = 10,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    random_state: Any = 0,
    title: str = "probwrap report",
    row_costs: Any = None,
    class_names: Any = None,
    progress: ProgressCallback | None = None,
    groups: Any = None,
    guarantee: Any = None,
    horizon_labels: Any = None,
    time: Any = None,
    event: Any = None,
    horizon: Any = None,
    alarm_reference: float | None = None,
    alarm_decision_interval: float | None = None,
    cells: Any = None,
    score_scale: str = "proba",
    unlabelled_cells: Any = None,
) -> Any:
    """Compute the report's numbers; see :func:`probwrap.report.write_report`.

    Returns a :class:`ReportContent` for binary probabilities with two actions, a
    :class:`~probwrap.report.MulticlassReportContent` otherwise.
    """
    from sklearn.utils import check_random_state

    # every interval of the report is a bootstrap one: refuse a count that cannot give one here,
    # before any work (0 used to drop the headline metrics with notes, or stop the binary
    # report late inside the cutoff's interval)
    if (isinstance(n_resamples, bool) or not isinstance(n_resamples, numbers.Integral)
            or n_resamples < 2):
        raise ValueError(
            f"`n_resamples` must be a whole number >= 2 (the bootstrap resamples behind every "
            f"interval of the report); got {plain(n_resamples)!r}. For numbers without "
            "intervals, use the functions of probwrap.metrics (e.g. calibration_by_group with "
            "n_resamples=0)."
        )
    if score_scale not in ("proba", "log-odds"):
        raise ValueError("`score_scale` must be 'proba' (probabilities) or 'log-odds'; got "
                         f"{plain(score_scale)!r}.")
    log_odds = None
    if score_scale == "log-odds":
        if y_prob is None or model is not None or prior_shift is not None:
            raise ValueError("score_scale='log-odds' says that `y_prob` (and `unlabelled_prob`) "
                             "hold log-odds; give `y_true` and `y_prob` (with `model` or "
                             "`prior_shift` the report reads their probabilities).")
        log_odds = _given_log_odds(y_prob, "y_prob")
        y_prob = expit(log_odds)
        if unlabelled_prob is not None:
            unlabelled_prob = expit(_given_log_odds(unlabelled_prob, "unlabelled_prob"))
    rng = check_random_state(random_state)
    chain = _inner_chain(model)
    policy = _find(chain, "CostPolicyWrapper")
    calib = _find(chain, "CalibrationWrapper")
    late = resolve_late_labels(horizon_labels, time, event, horizon, sample_weight,
                               labels_given=y_true is not None or y is not None)
    if late is not None:  # the labels and IPCW weights take the ordinary y / weights path
        sample_weight = late.sample_weight
        if model is not None:
            y = late.y
        else:
            y_true = late.y
    if cells is None and model is not None and late is None and row_costs is None:
        # a frequency table of whole-number counts (covariate patterns of independent cases):
        # read as its cases, the rows repeated by their counts (report/_cells.frequency_cases)
        table = frequency_cases(X, y, sample_weight)
        if table is not None:
            from sklearn.utils import _safe_indexing

            index, cells = table
            X, y, sample_weight = _safe_indexing(X, index), _safe_indexing(y, index), None
            if groups is not None:
                groups = _safe_indexing(np.asarray(groups), index)
    for name, value, low in (("alarm_reference", alarm_reference, 0.0),
                             ("alarm_decision_interval", alarm_decision_interval, None)):
        if value is not None and not (isinstance(value, (int, float)) and np.isfinite(value)
                                      and (value > 0 if low is None else value >= low)):
            raise ValueError(f"`{name}` must be a finite number "
                             f"{'> 0' if low is None else '>= 0'}; got {plain(value)!r}.")
    alarm_settings = {k: v for k, v in (("reference", alarm_reference),
                                        ("decision_interval", alarm_decision_interval))
                      if v is not None}
    general = general_report(
        y_true=y_true, y_prob=y_prob, model=model, X=X, y=y, sample_weight=sample_weight,
        costs=costs, row_costs=row_costs, capacity=capacity, action_names=action_names,
        unlabelled_prob=unlabelled_prob, X_unlabelled=X_unlabelled, prior_shift=prior_shift,
        batch_size=batch_size, n_bins=n_bins, n_resamples=n_resamples,
        confidence_level=confidence_level, rng=rng, title=title, policy=policy, calib=calib,
        class_names=class_names, progress=progress, groups=groups, cells=cells,
        alarm_settings=alarm_settings, unlabelled_cells=unlabelled_cells,
    )
    if general is not None:
        if guarantee is not None:
            raise ValueError("`guarantee` is available for binary reports (two classes, two "
                             "actions, one cutoff) only.")
        general.late_labels = late
        return general

    if model is not None:
        if X is None or y is None:
            raise ValueError("`X` and `y` (labelled evaluation rows) must be given with `model`.")
        if y_prob is not None or y_true is not None:
            raise ValueError("Give either `model` with `X`, `y`, or `y_true` with `y_prob`.")
        p = positive_proba(model, X, name="model")
        y01 = binary_labels(y, getattr(model, "classes_", None), name="y")
        labels = getattr(model, "classes_", None)
        if unlabelled_prob is None and X_unlabelled is not None:
            unlabelled_prob = positive_proba(model, X_unlabelled, name="model")
    else:
        if y_true is None or y_prob is None:
            raise ValueError("Give `y_true` and `y_prob` (or a fitted `model` with `X`, `y`).")
        p = as_positive_proba(y_prob, "y_prob")
        y01, labels = binary_truth(y_true, class_names)
    if y01.shape[0] != p.shape[0]:
        raise ValueError(
            f"`y_true` has {y01.shape[0]} rows but `y_prob` has {p.shape[0]}; they must match."
        )
    if np.unique(y01).shape[0] < 2:
        raise ValueError("The labels must contain both classes to assess calibration.")
    class_pair = binary_class_names(class_names, labels)
    w = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
    cap = check_capacity(capacity)
    if costs is not None:
        # a DataFrame read by its labels (rows in (negative, positive) order)
        costs = report_costs(costs, labels, class_names, action_names)
        check_cost_matrix(costs, n_classes=2, n_actions=2)

    def step(name: str, done: int, total: int = 4) -> None:
        if progress is not None:
            progress(name, done, total)

    notes = NoteLog()
    step("calibration metrics", 0)
    unit = resampling_unit(cells, n=int(p.shape[0]), y_index=y01.astype(np.intp), w=w,
                           X=X if model is not None else None, y01=y01, p=p, notes=notes)
    content = ReportContent(
        title=title,
        n_rows=int(p.shape[0]),
        prevalence=float(np.average(y01, weights=w)),
        y_true=y01,
        y_prob=p,
        sample_weight=w,
        metrics=_metric_rows(y01, p, w, n_bins, n_resamples, confidence_level, rng, notes,
                             groups=unit.groups, log_odds=log_odds),
        n_bins=n_bins,
        confidence_level=confidence_level,
        class_names=class_pair,
        late_labels=late,
        resampling=unit,
    )
    if calib is not None:
        content.calibration_method = str(getattr(calib, "method_", None))
        content.method_scores = getattr(calib, "method_scores_", None)

    # -- decisions -------------------------------------------------------------------------
    step("decision rules", 1)
    if costs is None and policy is not None:
        costs = getattr(policy, "cost_matrix_", None)
    if capacity is None and policy is not None and not isinstance(policy.capacity, dict):
        capacity = policy.capacity
        cap = check_capacity(capacity)
    content.capacity = cap
    if action_names is None and policy is not None:
        action_names = [str(a) for a in policy.actions_]
    if action_names is not None:
        names = [str(a) for a in action_names]
        if len(names) != 2:
            raise ValueError(f"`action_names` must name two actions; got {names}.")
        content.action_names = (names[0], names[1])
    chosen_name = CHOSEN_NAMES["search"]
    if costs is not None:
        matrix = check_cost_matrix(costs, n_classes=2, n_actions=2)
        content.cost_matrix = matrix
        content.plugin = notes.compute("plugin", BAYES_NAME, plugin_cutoff, matrix,
                                       expected=(ValueError,))
        seed = int(rng.randint(2**31 - 1))
        res = notes.compute("cutoff", "cutoff search", search_cutoff, p, y01.astype(np.intp),
                            matrix, sample_weight=w, capacity=cap, score_bounds=(0.0, 1.0))
        if policy is not None and getattr(policy, "cutoff_", None) is not None:
            content.chosen_cutoff = float(policy.cutoff_)
            chosen_name = CHOSEN_NAMES.get(policy.strategy, CHOSEN_NAMES["tuned"])
            content.cutoff_source = POLICY_SOURCES.get(policy.strategy, POLICY_SOURCES["tuned"])
            if policy.cost_curve_ is not None:
                content.cost_curve = policy.cost_curve_
                # read through the notes: below 100 rows its coverage warning (quoting the
                # exact range) is a note beside the number, as for the interval computed here
                content.cost_interval = notes.compute("cutoff", "cutoff interval", getattr,
                                                      policy, "cutoff_interval_")
                ci = content.cost_interval  # None for a guaranteed cutoff (no bootstrap)
                if ci is not None:
                    # the interval is that of the least-cost cutoff on the policy's held-out
                    # predictions (cost_curve_.cutoff), not of the settled cutoff_
                    content.chosen_interval = (float(ci.low), float(ci.high))
                    content.interval_cutoff = float(policy.cost_curve_.cutoff)
                    content.interval_name = HELDOUT_LEAST_COST_NAME
            else:
                # the plug-in ("bayes") or a fixed cutoff keeps no held-out curve: draw the
                # cost curve of this report's labelled rows, with the policy's cutoff marked
                # (the cost figure had no curve and stopped the whole report before)
                content.cost_curve = res
        else:
            content.chosen_cutoff = float(res.cutoff)
            content.cutoff_source = "the least-cost search on the labelled rows of this report"
            if content.plugin is not None:
                # the recommendation uses the same rule as the tuned policy: settled toward the
                # Bayes cutoff carried back through the map chosen on these rows
                from .._cost_policy_rules import recalibrated_plugin_cutoff

                # an int random_state seeds the map's folds as `probwrap cutoff --seed` does,
                # so that the two recommend the same cutoff on the same file
                fold_seed = (int(random_state) if isinstance(random_state, numbers.Integral)
                             else seed)
                content.anchor, content.anchor_map = recalibrated_plugin_cutoff(
                    p, y01.astype(np.intp), np.ones(p.shape[0]) if w is None else w,
                    content.plugin, fold_seed)
                content.settled = notes.compute(
                    "cutoff", "settled cutoff", settle_cutoff, p, y01.astype(np.intp), matrix,
                    res, sample_weight=w, anchor=content.anchor, expected=(ValueError,))
            ci = notes.compute(
                "cutoff", "cutoff interval", cutoff_interval, p, y01.astype(np.intp), matrix,
                sample_weight=w, capacity=cap, score_bounds=(0.0, 1.0),
                n_resamples=n_resamples, confidence_level=confidence_level, random_state=seed,
                groups=unit.groups,
            )
            content.cost_curve = res
            content.cost_interval = ci
            content.chosen_interval = (float(ci.low), float(ci.high))
            content.interval_cutoff = float(res.cutoff)
            content.interval_name = chosen_name
        content.chosen_name = chosen_name
        candidates = [("chosen", chosen_name, content.chosen_cutoff)]
        if content.plugin is not None:
            candidates.append(("plugin", BAYES_NAME, content.plugin))
        candidates.append(("half", HALF_NAME, 0.5))
        if content.chosen_cutoff != res.cutoff:
            candidates.append(("hindsight", HINDSIGHT_NAME, res.cutoff))
        candidates += [("none", f"{content.action_names[0]} for every row", 1.0),
                       ("all", f"{content.action_names[1]} for every row", -1.0)]
        for key, label, c in candidates:
            content.rules.append(rule_row(key, label, None if key in ("none", "all") else c,
                                           y01, p, matrix, w, cap))
        content.guarantee = guarantee_summary(guarantee, policy, p, y01, matrix, w, cap, notes)
        if content.guarantee is not None and content.guarantee.cutoff is not None:
            content.rules.insert(1, rule_row(
                "guarantee", f"least-cost cutoff with {content.guarantee.promise}",
                content.guarantee.cutoff, y01, p, matrix, w, cap))
    elif guarantee is not None:
        raise ValueError("`guarantee` needs `costs` (the report shows the least-cost cutoff "
                         "that keeps the promise).")

    # -- prevalence ------------------------------------------------------------------------
    step("prevalence", 2)
    q = None
    if unlabelled_prob is not None:
        q = as_positive_proba(unlabelled_prob, "unlabelled_prob")
        content.n_unlabelled = int(q.shape[0])
    batch_cells = unlabelled_cells_use(unlabelled_cells, prior_shift, q, X_unlabelled,
                                       batch_size)
    est = None
    if prior_shift is not None and hasattr(prior_shift, "target_prior_"):
        content.source_prevalence = float(prior_shift.source_prior_[1])
        content.target_prevalence = float(prior_shift.target_prior_[1])
        if prior_shift.target_prior_interval_ is not None:
            iv = prior_shift.target_prior_interval_[1]
            content.target_interval = (float(iv[0]), float(iv[1]))
        content.shift_statistic = float(prior_shift.shift_statistic_)
        content.shift_pvalue = float(prior_shift.shift_pvalue_)
        content.prior_method = prior_shift.method
        _maximum_likelihood(content, getattr(prior_shift, "prior_estimate_", None),
                            getattr(prior_shift, "prior_strength", None))
        content.applied_prevalence = float(prior_shift.applied_prior_[1])
        content.adaptation_weight = float(prior_shift.adaptation_weight_)
        content.prevalence_cells = getattr(
            getattr(prior_shift, "prior_estimator_", None), "n_source_cells_", None)
        if X_unlabelled is not None and batch_size is not None:
            step("prevalence by batch", 3)
            content.batch_table = notes.compute(
                "batches", "prevalence by batch", prior_shift.monitor, X_unlabelled,
                batch_size=batch_size, cells=batch_cells)
    elif q is not None:
        est = PriorEstimator(n_resamples=n_resamples, confidence_level=confidence_level,
                             random_state=int(rng.randint(2**31 - 1)))
        # the labelled rows' cells (given, or found as for the bootstrap) are the units of the
        # estimator's shift test and interval too, not rows counted as independent
        est.fit(np.column_stack([1.0 - p, p]), y01.astype(np.intp), w,
                class_names=content.class_names, cells=unit.groups)
        q2 = np.column_stack([1.0 - q, q])
        ucodes = None
        if unlabelled_cells is not None:
            # the unlabelled rows' cells are the units of their side (estimate(cells=))
            ucodes, content.unlabelled_cells, content.unlabelled_effective_rows = (
                unlabelled_cell_units(est, q2, unlabelled_cells))
        est_res = notes.compute("prevalence", "estimated prevalence", est.estimate, q2,
                                cells=ucodes)
        content.prevalence_cells = est.n_source_cells_
        content.source_prevalence = float(est.source_prior_[1])
        content.target_prevalence = float(est_res.prior[1])
        if est_res.interval is not None:
            content.target_interval = (float(est_res.interval[1, 0]),
                                       float(est_res.interval[1, 1]))
        content.shift_statistic = float(est_res.shift_statistic)
        content.shift_pvalue = float(est_res.shift_pvalue)
        _maximum_likelihood(content, est_res, est.prior_strength)
        content.adaptation_weight, content.applied_prevalence = gated_prior(
            est_res, est.source_prior_, 1)
        if batch_size is not None:
            step("prevalence by batch", 3)
            content.batch_table = notes.compute(
                "batches", "prevalence by batch", prior_by_batch, est, q2,
                batch_size=batch_size, cells=ucodes)
    if content.batch_table is not None and content.source_prevalence is not None:
        from ._alarm_chart import batch_alarm

        # the labelled rows every batch is compared with: their error is shared by the batches
        fitted = prior_shift.prior_estimator_ if (
            prior_shift is not None and hasattr(prior_shift, "prior_estimator_")) else est
        labelled_rows = (getattr(fitted, "n_source_design_rows_", None)
                         or getattr(fitted, "n_source_effective_", None) or np.inf)

        content.alarm = notes.compute(
            "batches", "prevalence alarm", batch_alarm, content.batch_table,
            content.source_prevalence, confidence_level=confidence_level,
            labelled_rows=float(labelled_rows), estimator=fitted, expected=(ValueError,),
            **alarm_settings)
    E = None
    if content.applied_prevalence is not None and content.chosen_cutoff is not None:
        # moved as the wrapper moves its predictions: to the prevalence its evidence gate
        # applies (none of the way without evidence of a shift), not to the estimate itself
        src = content.source_prevalence
        tgt = content.applied_prevalence
        if 0 < src < 1 and 0 < tgt < 1 and 0 < content.chosen_cutoff < 1:
            content.adapted_cutoff = float(shift_cutoff(content.chosen_cutoff, src, tgt))
            if q is not None and content.cost_matrix is not None:
                content.rules.insert(1, rule_row(
                    "adapted", f"{chosen_name}, moved to the applied prevalence",
                    content.adapted_cutoff, y01, p, content.cost_matrix, w, cap))
                # every rule acts on the unadjusted probabilities q; its expected cost on the
                # unlabelled rows uses the posteriors adjusted to the applied prevalence
                q_adj = adjust_to_prior(np.column_stack([1.0 - q, q]), [1 - src, src],
                                        [1 - tgt, tgt])
                E = ScaledCosts(expected_costs(q_adj, content.cost_matrix / cost_scale(
                    content.cost_matrix)), cost_scale(content.cost_matrix))
    if content.cost_matrix is not None:
        recommend(content, y01, p, w, q, E, notes)
        if E is not None:
            for row in content.rules:
                target_columns(row, q, E, cap)
    content.notes = notes.notes
    if groups is not None:
        from ..metrics import calibration_by_group

        # the decision columns are for the rule the report recommends (the one the reader is
        # told to use), else the chosen one
        rec = content.recommendation
        cutoff = rec.cutoff if rec is not None and rec.cutoff is not None else (
            content.chosen_cutoff)
        # given log-odds: each group's slope, intercept and log loss are read from them as
        # the overall rows are (not from logit(p), clipped at +-27.6)
        content.group_checks = calibration_by_group(
            y01, p, groups, cutoff=cutoff, log_odds=log_odds,
            costs=content.cost_matrix if cutoff is not None else None, sample_weight=w,
            n_resamples=n_resamples, confidence_level=confidence_level,
            random_state=int(rng.randint(0, 2**31 - 1)), cells=content.resampling.groups,
        )
    step("done", 4)
    return content


