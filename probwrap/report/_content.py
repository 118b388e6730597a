"""The numbers of a report, computed with probwrap's array core (no files, no drawing)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..decision import (
    capacity_cutoff,
    check_capacity,
    check_cost_matrix,
    cutoff_interval,
    expected_costs,
    plugin_cutoff,
    search_cutoff,
)
from ..metrics import (
    brier_score,
    calibration_slope_intercept,
    expected_calibration_error,
    log_loss,
)
from ..plot._common import binary_labels, positive_proba
from ..plot._cost import cutoff_cost
from ..shift import PriorEstimator, adjust_to_prior, prior_by_batch, shift_cutoff
from ._common import (
    MetricRow,
    NoteLog,
    ProgressCallback,
    Recommendation,
    ReportNote,
    as_positive_proba,
    as_proba_2d,
    class_index,
    metric_row,
)
from ._fast_metrics import FAST_BOOTSTRAP_ROWS, fast_metric_rows
from ._general import collect_general_content

__all__ = ["ReportContent", "MetricRow", "Recommendation", "RuleRow", "collect_content"]


@dataclass
class RuleRow:
    """One decision rule compared on the labelled rows (and on the unlabelled rows, if any)."""

    key: str
    label: str
    cutoff: float | None
    mean_cost: float
    flagged_share: float
    within_capacity: bool | None
    target_flagged_share: float | None = None
    target_expected_cost: float | None = None


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
    chosen_interval: tuple[float, float] | None = None
    plugin: float | None = None
    rules: list[RuleRow] = field(default_factory=list)
    cost_curve: Any = None
    cost_interval: Any = None
    chosen_name: str = "chosen cutoff"
    source_prevalence: float | None = None
    target_prevalence: float | None = None
    target_interval: tuple[float, float] | None = None
    shift_statistic: float | None = None
    shift_pvalue: float | None = None
    n_unlabelled: int = 0
    adapted_cutoff: float | None = None
    batch_table: np.ndarray | None = None
    prior_method: str = "em"
    confidence_level: float = 0.95
    notes: list[ReportNote] = field(default_factory=list)
    recommendation: Recommendation | None = None


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


def _metric_rows(y, p, w, n_bins, n_resamples, level, rng, notes) -> list[MetricRow]:
    def slope(yt, yp, sample_weight=None):
        return calibration_slope_intercept(yt, yp, sample_weight=sample_weight).slope

    def intercept(yt, yp, sample_weight=None):
        return calibration_slope_intercept(yt, yp, sample_weight=sample_weight).intercept

    specs = [
        ("brier", "Brier score", brier_score, {}, "0 (lower is better)"),
        ("log_loss", "log loss", log_loss, {}, "0 (lower is better)"),
        ("ece", f"expected calibration error ({n_bins} equal-width bins, bias-corrected)",
         expected_calibration_error, {"n_bins": n_bins}, "0"),
        ("slope", "calibration slope", slope, {}, "1"),
        ("intercept", "calibration-in-the-large", intercept, {}, "0"),
    ]
    seed = int(rng.randint(2**31 - 1))
    if p.shape[0] >= FAST_BOOTSTRAP_ROWS:
        return fast_metric_rows(y, p, w, n_bins, n_resamples, level, seed, notes,
                                {key: label for key, label, *_ in specs})
    return [metric_row(notes, key, label, fn, y, p, w, ideal, n_resamples, level, seed, **kw)
            for key, label, fn, kw, ideal in specs]


def _flagged_share(p: np.ndarray, cutoff: float, w: np.ndarray | None) -> float:
    flag = p > cutoff
    if w is None:
        return float(flag.mean())
    return float(np.dot(w, flag) / w.sum())


def _rule_cutoff(key: str, cutoff: float | None) -> float:
    """Cutoff of a rule; "none" acts on no row (cutoff 1), "all" on every row (cutoff -1)."""
    if cutoff is not None:
        return cutoff
    return 1.0 if key == "none" else -1.0


#: one name per thing, in the tables, the figure legends and the text
BAYES_NAME = "Bayes cutoff"
HALF_NAME = "0.5 cutoff"
HINDSIGHT_NAME = "least-cost cutoff on these rows (hindsight)"
CAPACITY_NAME = "capacity cutoff"
CHOSEN_NAMES = {
    "tuned": "tuned cutoff",
    "bayes": "Bayes cutoff of the fitted policy",
    "fixed": "fixed cutoff",
    "search": "least-cost cutoff on these rows",
}
POLICY_SOURCES = {
    "tuned": "tuned by the fitted cost policy on held-out (cross-validated) predictions",
    "bayes": "the Bayes cutoff of the fitted cost policy, from its costs alone",
    "fixed": "fixed by hand in the fitted cost policy",
}


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
) -> Any:
    """Compute the report's numbers; see :func:`probwrap.report.write_report`.

    Returns a :class:`ReportContent` for binary probabilities with two actions, a
    :class:`~probwrap.report.MulticlassReportContent` otherwise.
    """
    from sklearn.utils import check_random_state

    rng = check_random_state(random_state)
    chain = _inner_chain(model)
    policy = _find(chain, "CostPolicyWrapper")
    calib = _find(chain, "CalibrationWrapper")
    general = _general_report(
        y_true=y_true, y_prob=y_prob, model=model, X=X, y=y, sample_weight=sample_weight,
        costs=costs, row_costs=row_costs, capacity=capacity, action_names=action_names,
        unlabelled_prob=unlabelled_prob, X_unlabelled=X_unlabelled, prior_shift=prior_shift,
        batch_size=batch_size, n_bins=n_bins, n_resamples=n_resamples,
        confidence_level=confidence_level, rng=rng, title=title, policy=policy, calib=calib,
        class_names=class_names, progress=progress,
    )
    if general is not None:
        return general

    if model is not None:
        if X is None or y is None:
            raise ValueError("`X` and `y` (labelled evaluation rows) must be given with `model`.")
        if y_prob is not None or y_true is not None:
            raise ValueError("Give either `model` with `X`, `y`, or `y_true` with `y_prob`.")
        p = positive_proba(model, X, name="model")
        y01 = binary_labels(y, getattr(model, "classes_", None), name="y")
        if unlabelled_prob is None and X_unlabelled is not None:
            unlabelled_prob = positive_proba(model, X_unlabelled, name="model")
    else:
        if y_true is None or y_prob is None:
            raise ValueError("Give `y_true` and `y_prob` (or a fitted `model` with `X`, `y`).")
        p = as_positive_proba(y_prob, "y_prob")
        y01 = binary_labels(y_true, name="y_true")
    if y01.shape[0] != p.shape[0]:
        raise ValueError(
            f"`y_true` has {y01.shape[0]} rows but `y_prob` has {p.shape[0]}; they must match."
        )
    if np.unique(y01).shape[0] < 2:
        raise ValueError("The labels must contain both classes to assess calibration.")
    w = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
    cap = check_capacity(capacity)
    if costs is not None:
        check_cost_matrix(costs, n_classes=2, n_actions=2)

    def step(name: str, done: int, total: int = 4) -> None:
        if progress is not None:
            progress(name, done, total)

    notes = NoteLog()
    step("calibration metrics", 0)
    content = ReportContent(
        title=title,
        n_rows=int(p.shape[0]),
        prevalence=float(np.average(y01, weights=w)),
        y_true=y01,
        y_prob=p,
        sample_weight=w,
        metrics=_metric_rows(y01, p, w, n_bins, n_resamples, confidence_level, rng, notes),
        n_bins=n_bins,
        confidence_level=confidence_level,
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
                content.cost_interval = policy.cutoff_interval_
                ci = content.cost_interval
                content.chosen_interval = (float(ci.low), float(ci.high))
        else:
            content.chosen_cutoff = float(res.cutoff)
            content.cutoff_source = "the least-cost search on the labelled rows of this report"
            ci = notes.compute(
                "cutoff", "cutoff interval", cutoff_interval, p, y01.astype(np.intp), matrix,
                sample_weight=w, capacity=cap, score_bounds=(0.0, 1.0),
                n_resamples=n_resamples, confidence_level=confidence_level, random_state=seed,
            )
            content.cost_curve = res
            content.cost_interval = ci
            content.chosen_interval = (float(ci.low), float(ci.high))
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
            content.rules.append(_rule_row(key, label, None if key in ("none", "all") else c,
                                           y01, p, matrix, w, cap))

    # -- prevalence ------------------------------------------------------------------------
    step("prevalence", 2)
    q = None
    if unlabelled_prob is not None:
        q = as_positive_proba(unlabelled_prob, "unlabelled_prob")
        content.n_unlabelled = int(q.shape[0])
    if prior_shift is not None and hasattr(prior_shift, "target_prior_"):
        content.source_prevalence = float(prior_shift.source_prior_[1])
        content.target_prevalence = float(prior_shift.target_prior_[1])
        if prior_shift.target_prior_interval_ is not None:
            iv = prior_shift.target_prior_interval_[1]
            content.target_interval = (float(iv[0]), float(iv[1]))
        content.shift_statistic = float(prior_shift.shift_statistic_)
        content.shift_pvalue = float(prior_shift.shift_pvalue_)
        content.prior_method = prior_shift.method
        if X_unlabelled is not None and batch_size is not None:
            step("prevalence by batch", 3)
            content.batch_table = notes.compute(
                "batches", "prevalence by batch", prior_shift.monitor, X_unlabelled,
                batch_size=batch_size)
    elif q is not None:
        est = PriorEstimator(n_resamples=n_resamples, confidence_level=confidence_level,
                             random_state=int(rng.randint(2**31 - 1)))
        est.fit(np.column_stack([1.0 - p, p]), y01.astype(np.intp), w)
        est_res = notes.compute("prevalence", "estimated prevalence", est.estimate,
                                np.column_stack([1.0 - q, q]))
        content.source_prevalence = float(est.source_prior_[1])
        content.target_prevalence = float(est_res.prior[1])
        if est_res.interval is not None:
            content.target_interval = (float(est_res.interval[1, 0]),
                                       float(est_res.interval[1, 1]))
        content.shift_statistic = float(est_res.shift_statistic)
        content.shift_pvalue = float(est_res.shift_pvalue)
        if batch_size is not None:
            step("prevalence by batch", 3)
            content.batch_table = notes.compute(
                "batches", "prevalence by batch", prior_by_batch, est,
                np.column_stack([1.0 - q, q]), batch_size=batch_size)
    E = None
    if content.target_prevalence is not None and content.chosen_cutoff is not None:
        src = content.source_prevalence
        tgt = content.target_prevalence
        if 0 < src < 1 and 0 < tgt < 1 and 0 < content.chosen_cutoff < 1:
            content.adapted_cutoff = float(shift_cutoff(content.chosen_cutoff, src, tgt))
            if q is not None and content.cost_matrix is not None:
                content.rules.insert(1, _rule_row(
                    "adapted", f"{chosen_name}, moved to the estimated prevalence",
                    content.adapted_cutoff, y01, p, content.cost_matrix, w, cap))
                # every rule acts on the unadjusted probabilities q; its expected cost on the
                # unlabelled rows uses the posteriors adjusted to the estimated prevalence
                q_adj = adjust_to_prior(np.column_stack([1.0 - q, q]), [1 - src, src],
                                        [1 - tgt, tgt])
                E = _ScaledCosts(expected_costs(q_adj, content.cost_matrix / _cost_scale(
                    content.cost_matrix)), _cost_scale(content.cost_matrix))
    if content.cost_matrix is not None:
        _recommend(content, y01, p, w, q, E, notes)
        if E is not None:
            for row in content.rules:
                _target_columns(row, q, E, cap)
    content.notes = notes.notes
    step("done", 4)
    return content


def _rule_row(key, label, cutoff, y01, p, matrix, w, cap) -> RuleRow:
    c = _rule_cutoff(key, cutoff)
    share = _flagged_share(p, c, w)
    return RuleRow(key=key, label=label, cutoff=cutoff,
                   mean_cost=cutoff_cost(y01, p, matrix, c, w), flagged_share=share,
                   within_capacity=None if cap is None else bool(share <= cap * (1 + 1e-12)))


def _cost_scale(matrix: np.ndarray) -> float:
    """A power of two near the largest cost: dividing by it is exact and keeps sums finite."""
    top = float(np.max(np.abs(matrix)))
    return 2.0 ** float(np.floor(np.log2(top))) if top > 0 else 1.0


class _ScaledCosts:
    """Expected costs of the unlabelled rows, held divided by ``scale`` (huge costs)."""

    def __init__(self, values: np.ndarray, scale: float) -> None:
        self.values, self.scale = values, scale

    def mean_of(self, act: np.ndarray) -> float:
        """Mean expected cost per row of the given actions, in the original units."""
        return self.scale * float(self.values[np.arange(act.shape[0]), act].mean())


def _target_columns(row: RuleRow, q: np.ndarray, E: _ScaledCosts, cap: float | None) -> None:
    """Share acted on and expected cost on the unlabelled rows; capacity judged there."""
    act = (q > _rule_cutoff(row.key, row.cutoff)).astype(np.intp)
    row.target_flagged_share = float(act.mean())
    row.target_expected_cost = E.mean_of(act)
    if cap is not None:
        row.within_capacity = bool(row.target_flagged_share <= cap * (1 + 1e-12))


def _paired_difference(y01, p, w, matrix, c_a, c_b) -> tuple[float, float]:
    """Mean per-row cost of cutoff ``c_a`` minus that of ``c_b``, and its standard error.

    Weighted mean with Kish's effective sample size for the standard error.
    """
    scale = _cost_scale(matrix)
    cost_a = matrix[y01.astype(np.intp), (p > c_a).astype(np.intp)] / scale
    cost_b = matrix[y01.astype(np.intp), (p > c_b).astype(np.intp)] / scale
    d = cost_a - cost_b
    ww = np.ones_like(d) if w is None else w
    mean = float(np.average(d, weights=ww))
    n_eff = ww.sum() ** 2 / np.sum(ww**2)
    var = float(np.average((d - mean) ** 2, weights=ww))
    return scale * mean, scale * float(np.sqrt(var / max(n_eff - 1.0, 1.0)))


def _recommend(content, y01, p, w, q, E, notes) -> None:
    """Fill ``content.recommendation``: base rule, prevalence move, capacity (see the docs)."""
    matrix = content.cost_matrix
    cap = content.capacity
    rows = {r.key: r for r in content.rules}
    chosen = rows["chosen"]
    key, name, cutoff = "chosen", chosen.label, content.chosen_cutoff
    reasons: list[str] = []
    searched_here = "hindsight" not in rows and content.cost_curve is not None and (
        content.cutoff_source.startswith("the least-cost search"))
    if content.plugin is not None and abs(content.plugin - content.chosen_cutoff) > 1e-12:
        diff, se = _paired_difference(y01, p, content.sample_weight, matrix,
                                      content.chosen_cutoff, content.plugin)
        said = (f"on the labelled rows the {chosen.label} costs {diff:+.4g} per row against "
                f"the {BAYES_NAME} (standard error {se:.2g})")
        if searched_here:
            if diff < -2 * se:
                reasons.append(f"{said[0].upper()}{said[1:]}: more than twice its standard "
                               "error, so it is kept; it was searched on these same rows, so "
                               "this advantage is optimistic.")
            else:
                key, name, cutoff = "plugin", BAYES_NAME, content.plugin
                reasons.append(f"The {BAYES_NAME} needs no search and {said}: within noise, "
                               "so the search on these same rows adds nothing reliable.")
        elif diff > 2 * se:
            key, name, cutoff = "plugin", BAYES_NAME, content.plugin
            reasons.append(f"{said[0].upper()}{said[1:]}: more than twice its standard error, "
                           f"so the {BAYES_NAME} is the better rule on these rows.")
        else:
            reasons.append(f"{said[0].upper()}{said[1:]}; the {chosen.label} is kept "
                           + ("(it also corrects for miscalibration seen on held-out "
                              "predictions)." if diff <= 0 or diff <= 2 * se else "."))
    else:
        reasons.append(f"The {name} is {content.cutoff_source}.")
    basis = "labelled"
    base_cutoff = cutoff
    if q is not None and E is not None and content.shift_pvalue is not None:
        src, tgt = content.source_prevalence, content.target_prevalence
        if content.shift_pvalue < 0.01 and 0 < cutoff < 1:
            cutoff = float(shift_cutoff(cutoff, src, tgt))
            key = "adapted" if key == "chosen" else key + "_adapted"
            name = f"{name}, moved to the estimated prevalence"
            reasons.append(f"The prevalence of the unlabelled rows is estimated at {tgt:.4f} "
                           f"against {src:.4f} in the labelled rows (shift test p = "
                           f"{content.shift_pvalue:.2g}), so the cutoff is moved to it "
                           f"(Saerens et al. 2002): {cutoff:.4f}.")
            if key not in rows:
                content.rules.insert(2, _rule_row(key, name, cutoff, y01, p, matrix,
                                                  content.sample_weight, cap))
        else:
            reasons.append("The shift test does not reject an unchanged prevalence at the 1% "
                           "level, so the cutoff is not moved.")
        basis = "unlabelled"
    acting = q if basis == "unlabelled" else p
    acting_w = None if basis == "unlabelled" else content.sample_weight
    if cap is not None and _flagged_share(acting, cutoff, acting_w) > cap * (1 + 1e-12):
        over = _flagged_share(acting, cutoff, acting_w)
        cap_cut = notes.compute("capacity", "capacity cutoff", capacity_cutoff, acting, cap,
                                sample_weight=acting_w, score_bounds=(0.0, 1.0))
        where = "unlabelled" if basis == "unlabelled" else "labelled"
        reasons.append(f"At {cutoff:.4f} it would act on {100 * over:.1f}% of the {where} rows, "
                       f"above the capacity of {100 * cap:.1f}%. The {CAPACITY_NAME} "
                       f"{cap_cut:.4f} acts on the rows with the highest probabilities up to "
                       "the capacity; with calibrated probabilities no other choice of that "
                       "many rows has a lower expected cost.")
        key, name, cutoff = "capacity", CAPACITY_NAME, float(cap_cut)
        content.rules.insert(2, _rule_row(key, name, cutoff, y01, p, matrix,
                                          content.sample_weight, cap))
    if basis == "unlabelled":
        act = (q > cutoff).astype(np.intp)
        share = float(act.mean())
        cost = E.mean_of(act)
    else:
        share = _flagged_share(p, cutoff, content.sample_weight)
        cost = cutoff_cost(y01, p, matrix, cutoff, content.sample_weight)
    content.recommendation = Recommendation(
        key=key, name=name, cutoff=cutoff, reasons=reasons, expected_cost=cost,
        acted_share=share, basis=basis,
        within_capacity=None if cap is None else bool(share <= cap * (1 + 1e-12)),
        base_cutoff=base_cutoff,
    )


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


def _general_report(*, y_true, y_prob, model, X, y, sample_weight, costs, row_costs, capacity,
                    action_names, unlabelled_prob, X_unlabelled, prior_shift, batch_size,
                    n_bins, n_resamples, confidence_level, rng, title, policy, calib,
                    class_names, progress) -> Any:
    """The multiclass / multi-action content, or None when the binary report applies."""
    from ..plot._common import class_proba

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
        y_arr = np.asarray(y_true)
        if y_arr.ndim != 1:
            raise ValueError(f"`y_true` must be 1-d; got shape {y_arr.shape}.")
        if y_arr.shape[0] != proba.shape[0]:
            raise ValueError(f"`y_true` has {y_arr.shape[0]} rows but `y_prob` has "
                             f"{proba.shape[0]}; they must match.")
        found = np.unique(y_arr)
        if y_arr.dtype.kind in "iu" and found.min() >= 0 and found.max() < k:
            classes = np.arange(k)
        elif found.shape[0] == k:
            classes = found
        else:
            raise ValueError(
                f"`y_true` holds {found.shape[0]} distinct labels but `y_prob` has {k} columns; "
                f"give labels as column indices 0..{k - 1}, or every class at least once."
            )
        y_index = class_index(y_arr, classes, "y_true")
    if batch_size is not None:
        raise ValueError("`batch_size` (prevalence by batch) is available for binary reports "
                         "with two actions only.")
    q = None if unlabelled_prob is None else as_proba_2d(unlabelled_prob, "unlabelled_prob")
    if q is not None and q.shape[1] != proba.shape[1]:
        raise ValueError(f"`unlabelled_prob` has {q.shape[1]} columns but the labelled "
                         f"probabilities have {proba.shape[1]}.")
    if class_names is not None and len(class_names) != proba.shape[1]:
        raise ValueError(f"`class_names` must name the {proba.shape[1]} classes (columns of the "
                         f"probabilities); got {len(class_names)}.")
    names = tuple(str(c) for c in (class_names if class_names is not None else classes))
    return collect_general_content(
        y_index=y_index, proba=proba, class_names=names, sample_weight=sample_weight,
        costs=costs, row_costs=row_costs, capacity=capacity, action_names=action_names,
        policy=policy, calib=calib, X=X, unlabelled_proba=q, X_unlabelled=X_unlabelled,
        prior_shift=prior_shift, n_bins=n_bins, n_resamples=n_resamples,
        confidence_level=confidence_level, rng=rng, title=title, progress=progress,
    )
