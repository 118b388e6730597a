"""The decision rules of the multiclass / multi-action report, compared on the labelled rows
(and on the unlabelled rows, if any), and the recommendation drawn from them."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import plain, power_of_two_unit
from ..decision import (
    bayes_actions,
    budget_actions,
    check_capacity,
    check_row_costs,
    expected_costs,
    fit_action_budget,
    realised_cost,
)
from ..shift import adjust_to_prior
from ._common import NoteLog, Recommendation

__all__ = ["ActionRuleRow", "RuleCosts", "general_rules", "general_target_columns",
           "recommend_general", "resolve_capacity"]

#: a share at most the capacity, up to rounding
_CAP_SLACK = 1 + 1e-12


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
    actions: np.ndarray | None = None  # the action of each labelled row (column of the costs)


@dataclass
class RuleCosts:
    """The costs the rules act on, divided by ``unit`` (a power of two near the largest cost).

    Dividing by a power of two is exact and changes no least-cost action, and keeps sums of
    expected costs finite for costs near the largest float; amounts shown are multiplied back.
    ``labelled`` is the (n, k, a) per-row array or the (k, a) matrix of the labelled rows,
    ``unlabelled`` that of the unlabelled rows (None when they are per row and unknown there).
    """

    matrix: np.ndarray
    per_row: np.ndarray | None
    unit: float
    labelled: np.ndarray
    unlabelled: np.ndarray | None


def _shares(actions: np.ndarray, n_actions: int, w: np.ndarray | None) -> np.ndarray:
    counts = np.bincount(actions, weights=w, minlength=n_actions)
    return counts / counts.sum()


def resolve_capacity(capacity: Any, names: tuple[str, ...]) -> tuple[int, float] | None:
    if capacity is None:
        return None
    if isinstance(capacity, Mapping):
        if len(capacity) != 1:
            raise ValueError(f"`capacity` must limit one action, {{action: share}}; got "
                             f"{dict(capacity)!r}.")
        ((label, share),) = capacity.items()
        if str(label) not in names:
            raise ValueError(f"`capacity` names action {plain(label)!r}, which is not among the "
                             f"actions {list(names)}.")
        return names.index(str(label)), float(check_capacity(share))
    if len(names) != 2:
        raise ValueError(
            f"`capacity` as a number limits the second of two actions; there are {len(names)} "
            "actions, so name the limited one: capacity={action: share}."
        )
    return 1, float(check_capacity(capacity))


def general_rules(content, proba, y_index, w, matrix, per_row, policy, policy_costs, X, q,
                  X_unlabelled) -> tuple[list, RuleCosts]:
    """Fill ``content.rules`` with the chosen rule and its alternatives.

    Returns the rule functions (to apply them to unlabelled rows) and the costs they act on.
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
    unit = max(power_of_two_unit(costs_l),
               1.0 if q_costs is None else power_of_two_unit(q_costs))
    costs_l = costs_l / unit
    rc = RuleCosts(matrix=matrix, per_row=per_row, unit=unit, labelled=costs_l,
                   unlabelled=None if q_costs is None else q_costs / unit)
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
        content.budget_threshold = unit * float(budget.saving_threshold)
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
        within = None if cap is None else bool(shares[cap[0]] <= cap[1] * _CAP_SLACK)
        content.rules.append(ActionRuleRow(key, label, cost, shares, within, actions=acts))
        fns.append((key, fn))
    return fns, rc


def general_target_columns(content, proba, y_index, w, rc: RuleCosts, q, rule_fns,
                           X_unlabelled, has_policy) -> None:
    """Share of each action and expected cost on the unlabelled rows, for every rule.

    Every rule acts on the unadjusted probabilities ``q``; its expected cost there uses the
    posteriors re-weighted to the applied priors (the estimated ones, moved as far as the
    wrapper's evidence gate allows; Saerens et al. 2002, eq. 2.4). "Within
    capacity" is judged there, on the rows the rule will act on.
    """
    if rc.unlabelled is None:
        return
    # moved as the wrapper moves its predictions: to the shares its evidence gate applies
    src, tgt = content.source_prior, content.applied_prior
    q_adj = adjust_to_prior(q, src, tgt)
    E = expected_costs(q_adj, rc.unlabelled)
    n_act = rc.matrix.shape[1]
    rows = np.arange(q.shape[0])
    cap = content.capacity
    for row, (key, fn) in zip(content.rules, rule_fns, strict=True):
        if key == "chosen" and has_policy:
            if X_unlabelled is None:
                continue
            acts = fn(q, rc.unlabelled, X_unlabelled)
        else:
            acts = fn(q, rc.unlabelled)
        row.target_shares = _shares(acts, n_act, None)
        row.target_expected_cost = rc.unit * float(E[rows, acts].mean())
        if cap is not None:
            row.within_capacity = bool(row.target_shares[cap[0]] <= cap[1] * _CAP_SLACK)
    # the Bayes rule moved to the estimated priors, on both sets of rows
    acts_l = bayes_actions(adjust_to_prior(proba, src, tgt), rc.labelled)
    acts_q = np.argmin(E, axis=1)
    target_shares = _shares(acts_q, n_act, None)
    content.rules.insert(1, ActionRuleRow(
        key="adapted", label="Bayes actions with the probabilities moved to the new priors",
        mean_cost=_realised(y_index, acts_l, rc, w),
        shares=_shares(acts_l, n_act, w),
        within_capacity=None if cap is None else bool(
            target_shares[cap[0]] <= cap[1] * _CAP_SLACK),
        target_shares=target_shares,
        target_expected_cost=rc.unit * float(E[rows, acts_q].mean()),
    ))


def _realised(y_index, acts, rc: RuleCosts, w) -> float:
    k, n_act = rc.matrix.shape
    return realised_cost(y_index, acts, costs=rc.matrix, classes=np.arange(k),
                         actions=np.arange(n_act), row_costs=rc.per_row, sample_weight=w)


def _capacity_rule(content, proba, y_index, w, rc: RuleCosts, q, moved: bool,
                   notes: NoteLog) -> ActionRuleRow | None:
    """The recommended rule filled within the capacity on the unlabelled rows it will act on.

    Bayes actions (on the probabilities moved to the estimated class shares when ``moved``),
    with the limited action kept only on the unlabelled rows where it saves the most expected
    cost, up to the capacity (:func:`~probwrap.decision.fit_action_budget`). The same saving
    threshold is applied to the labelled rows for their realised cost.
    """
    j, cap = content.capacity
    src, tgt = content.source_prior, content.applied_prior
    post_q = adjust_to_prior(q, src, tgt) if moved else q
    E_act = expected_costs(post_q, rc.unlabelled)
    budget = notes.compute("capacity", "capacity-respecting rule", fit_action_budget, E_act, j,
                           cap)
    if budget is None:
        return None
    acts_q = budget_actions(E_act, budget.action, budget.saving_threshold)
    E = E_act if moved else expected_costs(adjust_to_prior(q, src, tgt), rc.unlabelled)
    post_l = adjust_to_prior(proba, src, tgt) if moved else proba
    acts_l = budget_actions(expected_costs(post_l, rc.labelled), budget.action,
                            budget.saving_threshold)
    n_act = rc.matrix.shape[1]
    target_shares = _shares(acts_q, n_act, None)
    label = ("Bayes actions with the probabilities moved to the new priors, within capacity on "
             "the unlabelled rows" if moved
             else "Bayes actions within capacity on the unlabelled rows")
    return ActionRuleRow(
        key="capacity", label=label, mean_cost=_realised(y_index, acts_l, rc, w),
        shares=_shares(acts_l, n_act, w),
        within_capacity=bool(target_shares[j] <= cap * _CAP_SLACK),
        target_shares=target_shares,
        target_expected_cost=rc.unit * float(E[np.arange(q.shape[0]), acts_q].mean()),
    )


def recommend_general(content, proba, y_index, w, rc: RuleCosts | None, q,
                      notes: NoteLog) -> None:
    """The rule to use now: the rule in use, or the Bayes actions moved to the new priors when
    the class shares have moved; within the capacity on the rows it will act on (the
    unlabelled rows, at the estimated class shares, when they are given)."""
    rows = {r.key: r for r in content.rules}
    row = rows["chosen"]
    reasons = [f"The rule in use is {content.rule_source}."]
    moved = False
    # the wrapper's evidence gate decides whether and how far the shares move
    # (PriorShiftWrapper.adaptation_weight_); the test's p-value alone does not
    weight = content.adaptation_weight
    if "adapted" in rows and weight is not None and weight > 0:
        row, moved = rows["adapted"], True
        share = "all" if weight >= 1.0 else f"{100 * weight:.0f}%"
        reasons.append(f"The class shares of the unlabelled rows have moved (shift test p = "
                       f"{content.shift_pvalue:.2g}); the evidence moves them {share} of the "
                       "way to the estimated shares, as PriorShiftWrapper would, and the "
                       "probabilities are moved to those shares before the least expected cost "
                       "action is taken (Saerens et al. 2002).")
    elif content.shift_pvalue is not None:
        reasons.append("The shift test's evidence is below the cutoff at which "
                       "PriorShiftWrapper moves the class shares (shift test p = "
                       f"{content.shift_pvalue:.2g}), so the probabilities are not moved.")
    basis = "labelled" if row.target_shares is None else "unlabelled"
    shares = row.shares if basis == "labelled" else row.target_shares
    within = None
    if content.capacity is not None:
        j, cap = content.capacity
        within = bool(shares[j] <= cap * _CAP_SLACK)
        if not within:
            over = (f"It gives “{content.action_names[j]}” to {100 * shares[j]:.1f}% of the "
                    f"{basis} rows, above the capacity of {100 * cap:.1f}%.")
            alt = None
            if basis == "unlabelled" and rc is not None and rc.unlabelled is not None:
                alt = _capacity_rule(content, proba, y_index, w, rc, q, moved, notes)
                if alt is not None:
                    content.rules.insert(2, alt)
            elif basis == "labelled" and "bayes_capacity" in rows:
                alt = rows["bayes_capacity"]
            if alt is not None:
                reasons.append(
                    f"{over} The rule “{alt.label}” gives that action only to the rows where "
                    "it saves the most expected cost against their next best action, up to the "
                    "capacity; with calibrated probabilities no other choice of that many rows "
                    "has a lower expected cost.")
                row = alt
                shares = row.shares if basis == "labelled" else row.target_shares
                within = bool(shares[j] <= cap * _CAP_SLACK)
            else:
                reasons.append(f"{over} Fill that action up to the capacity with the rows it "
                               "saves most on instead.")
    cost = row.mean_cost if basis == "labelled" else row.target_expected_cost
    content.recommendation = Recommendation(
        key=row.key, name=row.label, cutoff=None, reasons=reasons,
        expected_cost=float(cost), acted_share=float(1.0 - shares[0]), basis=basis,
        within_capacity=within, action_shares=np.asarray(shares, dtype=float),
    )
