"""The decision rules of the multiclass / multi-action report, compared on the labelled rows
(and on the unlabelled rows, if any), and the recommendation drawn from them."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

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
from ._common import Recommendation

__all__ = ["ActionRuleRow", "general_rules", "general_target_columns", "recommend_general",
           "resolve_capacity"]


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
            raise ValueError(f"`capacity` names action {label!r}, which is not among the "
                             f"actions {list(names)}.")
        return names.index(str(label)), float(check_capacity(share))
    if len(names) != 2:
        raise ValueError(
            f"`capacity` as a number limits the second of two actions; there are {len(names)} "
            "actions, so name the limited one: capacity={action: share}."
        )
    return 1, float(check_capacity(capacity))


def general_rules(content, proba, y_index, w, matrix, per_row, policy, policy_costs, X, q,
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


def general_target_columns(content, proba, y_index, w, matrix, per_row, q, rule_fns, q_costs,
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


def recommend_general(content, proba, q, q_costs, notes) -> None:
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
