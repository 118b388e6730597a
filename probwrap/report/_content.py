"""The numbers of a report, computed with probwrap's array core (no files, no drawing)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..decision import (
    check_capacity,
    check_cost_matrix,
    cutoff_interval,
    expected_costs,
    plugin_cutoff,
    search_cutoff,
)
from ..metrics import (
    bootstrap_interval,
    brier_score,
    calibration_slope_intercept,
    expected_calibration_error,
    log_loss,
)
from ..plot._common import binary_labels, positive_proba
from ..plot._cost import cutoff_cost
from ..shift import PriorEstimator, adjust_to_prior, prior_by_batch, shift_cutoff

__all__ = ["ReportContent", "MetricRow", "RuleRow", "collect_content"]


@dataclass
class MetricRow:
    """One calibration metric with its bootstrap interval."""

    key: str
    label: str
    value: float
    low: float
    high: float
    ideal: str


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


def _as_prob(values: Any, name: str) -> np.ndarray:
    try:
        p = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be numeric probabilities ({exc}).") from None
    if p.ndim == 2 and p.shape[1] == 2:
        p = p[:, 1]
    if p.ndim != 1:
        raise ValueError(
            f"`{name}` must be positive-class probabilities of shape (n,) (binary reports only); "
            f"got shape {p.shape}."
        )
    if p.shape[0] == 0:
        raise ValueError(f"`{name}` is empty.")
    if not np.all(np.isfinite(p)) or np.any((p < 0) | (p > 1)):
        bad = int(np.flatnonzero(~(np.isfinite(p) & (p >= 0) & (p <= 1)))[0])
        raise ValueError(
            f"`{name}` must hold probabilities in [0, 1]; row {bad} holds {p[bad]!r}."
        )
    return p


def _metric_rows(y, p, w, n_bins, n_resamples, level, rng) -> list[MetricRow]:
    def slope(yt, yp, sample_weight=None):
        return calibration_slope_intercept(yt, yp, sample_weight=sample_weight).slope

    def intercept(yt, yp, sample_weight=None):
        return calibration_slope_intercept(yt, yp, sample_weight=sample_weight).intercept

    specs = [
        ("brier", "Brier score", brier_score, {}, "0 (lower is better)"),
        ("log_loss", "log loss", log_loss, {}, "0 (lower is better)"),
        ("ece", f"expected calibration error ({n_bins} equal-width bins)",
         expected_calibration_error, {"n_bins": n_bins}, "0"),
        ("slope", "calibration slope", slope, {}, "1"),
        ("intercept", "calibration-in-the-large", intercept, {}, "0"),
    ]
    rows = []
    seed = int(rng.randint(2**31 - 1))
    import warnings

    for key, label, fn, kw, ideal in specs:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                res = bootstrap_interval(
                    fn, y, p, sample_weight=w, n_resamples=n_resamples, confidence_level=level,
                    random_state=seed, **kw,
                )
            except ValueError:  # e.g. a slope for perfectly separated classes: not defined
                rows.append(MetricRow(key, label, float("nan"), float("nan"), float("nan"),
                                      ideal))
                continue
        rows.append(MetricRow(key, label, float(res.statistic),
                              float(res.confidence_interval.low),
                              float(res.confidence_interval.high), ideal))
    return rows


def _flagged_share(p: np.ndarray, cutoff: float, w: np.ndarray | None) -> float:
    flag = p > cutoff
    if w is None:
        return float(flag.mean())
    return float(np.dot(w, flag) / w.sum())


def _rule_cutoff(row: RuleRow) -> float:
    """Cutoff of a rule; "none" acts on no row (cutoff 1), "all" on every row (cutoff -1)."""
    if row.cutoff is not None:
        return row.cutoff
    return 1.0 if row.key == "none" else -1.0


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
        class_names=class_names,
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
        p = _as_prob(y_prob, "y_prob")
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

    content = ReportContent(
        title=title,
        n_rows=int(p.shape[0]),
        prevalence=float(np.average(y01, weights=w)),
        y_true=y01,
        y_prob=p,
        sample_weight=w,
        metrics=_metric_rows(y01, p, w, n_bins, n_resamples, confidence_level, rng),
        n_bins=n_bins,
        confidence_level=confidence_level,
    )
    if calib is not None:
        content.calibration_method = str(getattr(calib, "method_", None))
        content.method_scores = getattr(calib, "method_scores_", None)

    # -- decisions -------------------------------------------------------------------------
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
    if costs is not None:
        matrix = check_cost_matrix(costs, n_classes=2, n_actions=2)
        content.cost_matrix = matrix
        try:
            content.plugin = plugin_cutoff(matrix)
        except ValueError:
            content.plugin = None
        seed = int(rng.randint(2**31 - 1))
        res = search_cutoff(p, y01.astype(np.intp), matrix, sample_weight=w, capacity=cap,
                            score_bounds=(0.0, 1.0))
        if policy is not None and getattr(policy, "cutoff_", None) is not None:
            content.chosen_cutoff = float(policy.cutoff_)
            content.cutoff_source = f"the fitted CostPolicyWrapper (strategy={policy.strategy!r})"
            if policy.cost_curve_ is not None:
                content.cost_curve = policy.cost_curve_
                content.cost_interval = policy.cutoff_interval_
                ci = content.cost_interval
                content.chosen_interval = (float(ci.low), float(ci.high))
        else:
            content.chosen_cutoff = float(res.cutoff)
            content.cutoff_source = "the least-cost search on the rows of this report"
            ci = cutoff_interval(
                p, y01.astype(np.intp), matrix, sample_weight=w, capacity=cap,
                score_bounds=(0.0, 1.0), n_resamples=n_resamples,
                confidence_level=confidence_level, random_state=seed,
            )
            content.cost_curve = res
            content.cost_interval = ci
            content.chosen_interval = (float(ci.low), float(ci.high))
        candidates = [("chosen", "chosen cutoff", content.chosen_cutoff)]
        if content.plugin is not None:
            candidates.append(("plugin", "Bayes plug-in cutoff", content.plugin))
        candidates.append(("half", "0.5 cutoff", 0.5))
        if content.chosen_cutoff != res.cutoff:
            candidates.append(("hindsight", "least cost on these rows (hindsight)", res.cutoff))
        candidates += [("none", f"{content.action_names[0]} for every row", 1.0),
                       ("all", f"{content.action_names[1]} for every row", -1.0)]
        for key, label, c in candidates:
            share = _flagged_share(p, c, w)
            content.rules.append(RuleRow(
                key=key, label=label, cutoff=None if key in ("none", "all") else c,
                mean_cost=cutoff_cost(y01, p, matrix, c, w), flagged_share=share,
                within_capacity=None if cap is None else bool(share <= cap * (1 + 1e-12)),
            ))

    # -- prevalence ------------------------------------------------------------------------
    q = None
    if unlabelled_prob is not None:
        q = _as_prob(unlabelled_prob, "unlabelled_prob")
        content.n_unlabelled = int(q.shape[0])
    if prior_shift is not None and hasattr(prior_shift, "target_prior_"):
        est = prior_shift.prior_estimator_
        content.source_prevalence = float(prior_shift.source_prior_[1])
        content.target_prevalence = float(prior_shift.target_prior_[1])
        if prior_shift.target_prior_interval_ is not None:
            iv = prior_shift.target_prior_interval_[1]
            content.target_interval = (float(iv[0]), float(iv[1]))
        content.shift_statistic = float(prior_shift.shift_statistic_)
        content.shift_pvalue = float(prior_shift.shift_pvalue_)
        content.prior_method = prior_shift.method
        if X_unlabelled is not None and batch_size is not None:
            content.batch_table = prior_shift.monitor(X_unlabelled, batch_size=batch_size)
    elif q is not None:
        est = PriorEstimator(n_resamples=n_resamples, confidence_level=confidence_level,
                             random_state=int(rng.randint(2**31 - 1)))
        est.fit(np.column_stack([1.0 - p, p]), y01.astype(np.intp), w)
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est_res = est.estimate(np.column_stack([1.0 - q, q]))
        content.source_prevalence = float(est.source_prior_[1])
        content.target_prevalence = float(est_res.prior[1])
        if est_res.interval is not None:
            content.target_interval = (float(est_res.interval[1, 0]),
                                       float(est_res.interval[1, 1]))
        content.shift_statistic = float(est_res.shift_statistic)
        content.shift_pvalue = float(est_res.shift_pvalue)
        if batch_size is not None:
            content.batch_table = prior_by_batch(
                est, np.column_stack([1.0 - q, q]), batch_size=batch_size
            )
    if content.target_prevalence is not None and content.chosen_cutoff is not None:
        src = content.source_prevalence
        tgt = content.target_prevalence
        if 0 < src < 1 and 0 < tgt < 1 and 0 < content.chosen_cutoff < 1:
            content.adapted_cutoff = float(shift_cutoff(content.chosen_cutoff, src, tgt))
            if q is not None and content.cost_matrix is not None:
                q_adj = adjust_to_prior(np.column_stack([1.0 - q, q]), [1 - src, src],
                                        [1 - tgt, tgt])[:, 1]
                content.rules.insert(1, RuleRow(
                    key="adapted", label="chosen cutoff moved to the new prevalence",
                    cutoff=content.adapted_cutoff,
                    mean_cost=cutoff_cost(y01, p, content.cost_matrix,
                                          content.adapted_cutoff, w),
                    flagged_share=_flagged_share(p, content.adapted_cutoff, w),
                    within_capacity=None if cap is None else bool(
                        _flagged_share(p, content.adapted_cutoff, w) <= cap * (1 + 1e-12)
                    ),
                ))
                # every rule acts on the unadjusted probabilities q; its expected cost on the
                # unlabelled rows uses the posteriors adjusted to the estimated prevalence
                E = expected_costs(np.column_stack([1.0 - q_adj, q_adj]), content.cost_matrix)
                for row in content.rules:
                    c = _rule_cutoff(row)
                    act = (q > c).astype(np.intp)
                    row.target_flagged_share = float(act.mean())
                    row.target_expected_cost = float(E[np.arange(E.shape[0]), act].mean())
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


def _general_report(*, y_true, y_prob, model, X, y, sample_weight, costs, row_costs, capacity,
                    action_names, unlabelled_prob, X_unlabelled, prior_shift, batch_size,
                    n_bins, n_resamples, confidence_level, rng, title, policy, calib,
                    class_names) -> Any:
    """The multiclass / multi-action content, or None when the binary report applies."""
    from ..plot._common import class_proba
    from ._general import _class_index, _proba_2d, collect_general_content

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
        y_index = _class_index(y, classes, "y")
        if unlabelled_prob is None and X_unlabelled is not None:
            unlabelled_prob = class_proba(model, X_unlabelled, name="model")
    else:
        if y_true is None or y_prob is None:
            return None
        shape = np.shape(y_prob)
        k = shape[1] if len(shape) == 2 else 2
        if not _needs_general(k, costs, row_costs, None):
            return None
        proba = _proba_2d(y_prob, "y_prob")
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
        y_index = _class_index(y_arr, classes, "y_true")
    if batch_size is not None:
        raise ValueError("`batch_size` (prevalence by batch) is available for binary reports "
                         "with two actions only.")
    q = None if unlabelled_prob is None else _proba_2d(unlabelled_prob, "unlabelled_prob")
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
        confidence_level=confidence_level, rng=rng, title=title,
    )
