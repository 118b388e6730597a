"""Report numbers for multiclass probabilities and any (n_classes, n_actions) cost matrix.

The binary two-action report (one cutoff) lives in :mod:`._content`; this module covers the
rest: more than two classes, more than two actions (a reject / refer / hold action), and
per-row cost matrices. Everything is computed with probwrap's array core; no files, no drawing.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..decision import (
    bayes_actions,
    budget_actions,
    check_capacity,
    check_cost_matrix,
    check_row_costs,
    expected_costs,
    fit_action_budget,
    realised_cost,
)
from ..metrics import (
    brier_score,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
)
from ..shift import PriorEstimator, adjust_to_prior
from ._common import MetricRow, NoteLog, Recommendation, ReportNote, metric_row

__all__ = ["ActionRuleRow", "MulticlassReportContent", "collect_general_content"]


@dataclass
class ActionRuleRow:
    """One decision rule over any number of actions, compared on the labelled rows.

    ``shares[j]`` is the (weighted) share of labelled rows given action ``j``;
    ``mean_cost`` the realised mean cost per row there. The ``target_*`` fields hold the share
    and the expected cost on the unlabelled rows (posteriors re-weighted to the estimated
    priors), when those were given.
    """

    key: str
    label: str
    mean_cost: float
    shares: np.ndarray
    within_capacity: bool | None = None
    target_shares: np.ndarray | None = None
    target_expected_cost: float | None = None


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
    shift_statistic: float | None = None
    shift_pvalue: float | None = None
    n_unlabelled: int = 0
    prior_method: str = "em"
    confidence_level: float = 0.95
    notes: list[ReportNote] = field(default_factory=list)
    recommendation: Recommendation | None = None

    # the binary report's names, so that shared code (glance, demo summary) can read either
    @property
    def chosen_cutoff(self) -> None:
        return None

    @property
    def target_prevalence(self) -> None:
        return None


def _metric_rows(y, p, w, n_bins, n_resamples, level, seed, notes) -> list[MetricRow]:
    specs = [
        ("log_loss", "log loss (multiclass)", log_loss, {}, "0 (lower is better)"),
        ("brier", "Brier score (sum over classes)", brier_score, {}, "0 (lower is better)"),
        ("ece_top", f"top-label calibration error ({n_bins} equal-width bins, bias-corrected)",
         expected_calibration_error, {"n_bins": n_bins}, "0"),
        ("ece_classwise", f"classwise calibration error ({n_bins} bins per class, "
         "bias-corrected)", classwise_calibration_error, {"n_bins": n_bins}, "0"),
    ]
    return [metric_row(notes, key, label, fn, y, p, w, ideal, n_resamples, level, seed, **kw)
            for key, label, fn, kw, ideal in specs]


def _shares(actions: np.ndarray, n_actions: int, w: np.ndarray | None) -> np.ndarray:
    counts = np.bincount(actions, weights=w, minlength=n_actions)
    return counts / counts.sum()


def _resolve_capacity(capacity: Any, names: tuple[str, ...]) -> tuple[int, float] | None:
    if capacity is None:
        return None
    if isinstance(capacity, Mapping):
        if len(capacity) != 1:
            raise ValueError(f"`capacity` must limit one action, {{action: share}}; got "
                             f"{dict(capacity)!r}.")
        ((label, share),) = capacity.items()
        if str(label) not in names:
            raise ValueError(f"`capacity` names action {label!r}, which is not among the "
                             f"actions {list(names)}.")
        return names.index(str(label)), float(check_capacity(share))
    if len(names) != 2:
        raise ValueError(
            f"`capacity` as a number limits the second of two actions; there are {len(names)} "
            "actions, so name the limited one: capacity={action: share}."
        )
    return 1, float(check_capacity(capacity))


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
    seed = int(rng.randint(2**31 - 1))
    content = MulticlassReportContent(
        title=title, n_rows=n, n_classes=k, class_names=class_names,
        class_shares=counts / counts.sum(), y_true=y_index, y_prob=proba, sample_weight=w,
        metrics=_metric_rows(y_index, proba, w, n_bins, n_resamples, confidence_level, seed,
                             notes),
        n_bins=n_bins, confidence_level=confidence_level,
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
    q_costs = None
    if row_costs is not None:
        per_row = check_row_costs(row_costs, n, n_classes=k, name="row_costs")
        matrix = np.average(per_row, axis=0, weights=w)
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
        content.capacity = _resolve_capacity(capacity, names)
        rule_fns, q_costs = _rules(content, proba, y_index, w, matrix, per_row, policy,
                                   policy_costs, X, unlabelled_proba, X_unlabelled)
    elif capacity is not None:
        raise ValueError("`capacity` needs costs (`costs` or `row_costs`).")

    # -- priors ------------------------------------------------------------------------------
    step("class shares", 2)
    q = unlabelled_proba
    if q is not None:
        content.n_unlabelled = int(q.shape[0])
    if prior_shift is not None and hasattr(prior_shift, "target_prior_"):
        content.source_prior = np.asarray(prior_shift.source_prior_, dtype=float)
        content.target_prior = np.asarray(prior_shift.target_prior_, dtype=float)
        iv = prior_shift.target_prior_interval_
        content.target_interval = None if iv is None else np.asarray(iv, dtype=float)
        content.shift_statistic = float(prior_shift.shift_statistic_)
        content.shift_pvalue = float(prior_shift.shift_pvalue_)
        content.prior_method = str(prior_shift.method)
    elif q is not None:
        est = PriorEstimator(n_resamples=n_resamples, confidence_level=confidence_level,
                             random_state=int(rng.randint(2**31 - 1)))
        est.fit(proba, y_index, w)
        res = notes.compute("prevalence", "estimated class shares", est.estimate, q)
        content.source_prior = np.asarray(est.source_prior_, dtype=float)
        content.target_prior = np.asarray(res.prior, dtype=float)
        content.target_interval = res.interval
        content.shift_statistic = float(res.shift_statistic)
        content.shift_pvalue = float(res.shift_pvalue)
    if (content.target_prior is not None and q is not None and matrix is not None
            and np.all(content.source_prior > 0) and np.all(content.target_prior > 0)):
        _target_columns(content, proba, y_index, w, matrix, per_row, q, rule_fns, q_costs,
                        X_unlabelled, policy is not None)
    if content.rules:
        _recommend_general(content, proba, q, q_costs, notes)
    content.notes = notes.notes
    step("done", 4)
    return content


def _rules(content, proba, y_index, w, matrix, per_row, policy, policy_costs, X, q,
           X_unlabelled) -> tuple[list, Any]:
    """Fill ``content.rules`` with the chosen rule and its alternatives.

    Returns the rule functions (to apply them to unlabelled rows) and the costs of the
    unlabelled rows (None when they are per row and unknown there).
    """
    k, n_act = matrix.shape
    names = content.action_names
    costs_l = matrix if per_row is None else per_row
    q_costs = None
    if q is not None:
        if per_row is None:
            q_costs = matrix
        elif policy_costs is not None and X_unlabelled is not None:
            q_costs = check_row_costs(policy_costs(X_unlabelled), q.shape[0], n_classes=k,
                                      n_actions=n_act, name="costs(X_unlabelled)")
    # each rule: (key, label, actions on labelled rows, actions on unlabelled rows or None)
    specs: list[tuple[str, str, Callable[..., np.ndarray]]] = []
    cap = content.capacity
    budget = None
    if cap is not None:
        budget = fit_action_budget(expected_costs(proba, costs_l), cap[0], cap[1],
                                   sample_weight=w)

    def bayes(p, c):
        return bayes_actions(p, c)

    def bayes_budget(p, c):
        return budget_actions(expected_costs(p, c), budget.action, budget.saving_threshold)

    if policy is not None:
        index = {str(a): j for j, a in enumerate(policy.actions_)}

        def chosen(p, c, _rows=None):
            acts = policy.predict(_rows)
            return np.array([index[str(a)] for a in acts], dtype=np.intp)

        content.rule_source = (
            "the fitted cost policy ("
            + ("class offsets tuned on held-out predictions" if policy.strategy == "tuned"
               else "least expected cost" if policy.strategy == "bayes" else "fixed rule")
            + (", within its capacity)" if policy.capacity is not None else ")"))
        offsets = getattr(policy, "class_offsets_", None)
        content.class_offsets = None if offsets is None else np.asarray(offsets, dtype=float)
        b = getattr(policy, "action_budget_", None)
        content.budget_threshold = None if b is None else float(b.saving_threshold)
        specs.append(("chosen", "the fitted cost policy", chosen))
        if budget is not None:
            specs.append(("bayes_capacity", "Bayes actions within capacity (filled on these rows)",
                          bayes_budget))
        specs.append(("bayes", "Bayes actions (least expected cost)", bayes))
    elif budget is not None:
        content.rule_source = "the Bayes rule filled within capacity on the rows of this report"
        content.budget_threshold = float(budget.saving_threshold)
        specs.append(("chosen", "Bayes actions within capacity", bayes_budget))
        specs.append(("bayes", "Bayes actions without the capacity limit", bayes))
    else:
        content.rule_source = "the Bayes rule (least expected cost) on the given probabilities"
        specs.append(("chosen", "Bayes actions (least expected cost)", bayes))

    if n_act == k and tuple(names) == tuple(content.class_names):
        specs.append(("argmax", "most probable class as the action",
                      lambda p, c: np.argmax(p, axis=1)))

    def as_if_certain(p, c):
        top = np.argmax(p, axis=1)
        if c.ndim == 2:
            return np.argmin(c[top], axis=1)
        return np.argmin(c[np.arange(top.shape[0]), top], axis=1)

    specs.append(("certain", "best action as if the most probable class were certain",
                  as_if_certain))
    for j, name in enumerate(names):
        specs.append((f"all:{j}", f"{name} for every row",
                      lambda p, c, j=j: np.full(p.shape[0], j, dtype=np.intp)))

    yk = np.arange(k)
    ak = np.arange(n_act)
    fns = []
    for key, label, fn in specs:
        if key == "chosen" and policy is not None:
            acts = fn(proba, costs_l, X)
        else:
            acts = fn(proba, costs_l)
        cost = realised_cost(y_index, acts, costs=matrix, classes=yk, actions=ak,
                             row_costs=per_row, sample_weight=w)
        shares = _shares(acts, n_act, w)
        within = None if cap is None else bool(shares[cap[0]] <= cap[1] * (1 + 1e-12))
        content.rules.append(ActionRuleRow(key, label, cost, shares, within))
        fns.append((key, fn))
    return fns, q_costs


def _target_columns(content, proba, y_index, w, matrix, per_row, q, rule_fns, q_costs,
                    X_unlabelled, has_policy) -> None:
    """Share of each action and expected cost on the unlabelled rows, for every rule.

    Every rule acts on the unadjusted probabilities ``q``; its expected cost there uses the
    posteriors re-weighted to the estimated priors (Saerens et al. 2002, eq. 2.4).
    """
    if q_costs is None:
        return
    src, tgt = content.source_prior, content.target_prior
    q_adj = adjust_to_prior(q, src, tgt)
    E = expected_costs(q_adj, q_costs)
    n_act = matrix.shape[1]
    rows = np.arange(q.shape[0])
    for row, (key, fn) in zip(content.rules, rule_fns, strict=True):
        if key == "chosen" and has_policy:
            if X_unlabelled is None:
                continue
            acts = fn(q, q_costs, X_unlabelled)
        else:
            acts = fn(q, q_costs)
        row.target_shares = _shares(acts, n_act, None)
        row.target_expected_cost = float(E[rows, acts].mean())
    # the Bayes rule moved to the estimated priors, on both sets of rows
    costs_l = matrix if per_row is None else per_row
    acts_l = bayes_actions(adjust_to_prior(proba, src, tgt), costs_l)
    acts_q = np.argmin(E, axis=1)
    cap = content.capacity
    shares = _shares(acts_l, n_act, w)
    content.rules.insert(1, ActionRuleRow(
        key="adapted", label="Bayes actions with the probabilities moved to the new priors",
        mean_cost=realised_cost(y_index, acts_l, costs=matrix, classes=np.arange(len(src)),
                                actions=np.arange(n_act), row_costs=per_row,
                                sample_weight=w),
        shares=shares,
        within_capacity=None if cap is None else bool(shares[cap[0]] <= cap[1] * (1 + 1e-12)),
        target_shares=_shares(acts_q, n_act, None),
        target_expected_cost=float(E[rows, acts_q].mean()),
    ))


def _recommend_general(content, proba, q, q_costs, notes) -> None:
    """The rule to use now: the rule in use, or the Bayes actions moved to the new priors when
    the class shares have moved; filled within the capacity on the rows it will act on."""
    rows = {r.key: r for r in content.rules}
    row = rows["chosen"]
    reasons = [f"The rule in use is {content.rule_source}."]
    basis = "labelled"
    if "adapted" in rows and content.shift_pvalue is not None and content.shift_pvalue < 0.01:
        row = rows["adapted"]
        reasons.append(f"The class shares of the unlabelled rows have moved (shift test p = "
                       f"{content.shift_pvalue:.2g}), so the probabilities are moved to the "
                       "estimated shares before the least expected cost action is taken "
                       "(Saerens et al. 2002).")
    elif content.shift_pvalue is not None:
        reasons.append("The shift test does not reject unchanged class shares at the 1% level.")
    shares = row.shares
    cost = row.mean_cost
    if row.target_shares is not None:
        basis = "unlabelled"
        shares, cost = row.target_shares, row.target_expected_cost
    within = None
    if content.capacity is not None:
        j, cap = content.capacity
        within = bool(shares[j] <= cap * (1 + 1e-12))
        if not within:
            reasons.append(
                f"It gives “{content.action_names[j]}” to {100 * shares[j]:.1f}% of "
                f"the {basis} rows, above the capacity of {100 * cap:.1f}%: fill that action "
                "up to the capacity with the rows it saves most on, e.g. the row "
                f"“{rows['bayes_capacity'].label}”." if "bayes_capacity" in rows
                else f"It gives “{content.action_names[j]}” to "
                f"{100 * shares[j]:.1f}% of the {basis} rows, above the capacity of "
                f"{100 * cap:.1f}%: fill that action up to the capacity with the rows it saves "
                "most on instead.")
    content.recommendation = Recommendation(
        key=row.key, name=row.label, cutoff=None, reasons=reasons,
        expected_cost=float(cost), acted_share=float(1.0 - shares[0]), basis=basis,
        within_capacity=within, action_shares=np.asarray(shares, dtype=float),
    )
