"""The decision rules of the binary two-action report, compared on the labelled rows (and on
the unlabelled rows, if any), and the recommendation drawn from them: the rule to use now, why,
its expected cost and the share acted on, within the capacity at the estimated prevalence."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..decision import capacity_cutoff
from ..plot._cost import cutoff_cost
from ..shift import shift_cutoff
from ._common import Recommendation

__all__ = ["RuleRow", "BAYES_NAME", "HALF_NAME", "HINDSIGHT_NAME", "CAPACITY_NAME",
           "CHOSEN_NAMES", "POLICY_SOURCES", "SETTLED_NAME", "RECALIBRATED_NAME", "rule_row",
           "cost_scale", "ScaledCosts", "target_columns", "recommend", "flagged_share"]


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


#: one name per thing, in the tables, the figure legends and the text
BAYES_NAME = "Bayes cutoff"
HALF_NAME = "0.5 cutoff"
HINDSIGHT_NAME = "least-cost cutoff on these rows (hindsight)"
# what a tuned policy's ``cutoff_interval_`` is the interval of (``cost_curve_.cutoff``)
HELDOUT_LEAST_COST_NAME = "least-cost cutoff on the policy's held-out predictions"
CAPACITY_NAME = "capacity cutoff"
# a score file's recommendation when the Bayes cutoff is rejected but the least-cost cutoff is
# not the nearest one the rows allow (decision.settle_cutoff)
SETTLED_NAME = "settled cutoff (nearest the Bayes cutoff not shown to cost more)"
# the Bayes cutoff carried back through a calibration map fitted on the same rows (the cutoff a
# tuned policy settles toward when a map fits the rows better than the scores themselves)
RECALIBRATED_NAME = "recalibrated Bayes cutoff"
SETTLED_RECALIBRATED_NAME = ("settled cutoff (nearest the recalibrated Bayes cutoff not shown to "
                             "cost more)")
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


def flagged_share(p: np.ndarray, cutoff: float, w: np.ndarray | None) -> float:
    flag = p > cutoff
    if w is None:
        return float(flag.mean())
    return float(np.dot(w, flag) / w.sum())


def _rule_cutoff(key: str, cutoff: float | None) -> float:
    """Cutoff of a rule; "none" acts on no row (cutoff 1), "all" on every row (cutoff -1)."""
    if cutoff is not None:
        return cutoff
    return 1.0 if key == "none" else -1.0


def rule_row(key, label, cutoff, y01, p, matrix, w, cap) -> RuleRow:
    c = _rule_cutoff(key, cutoff)
    share = flagged_share(p, c, w)
    return RuleRow(key=key, label=label, cutoff=cutoff,
                   mean_cost=cutoff_cost(y01, p, matrix, c, w), flagged_share=share,
                   within_capacity=None if cap is None else bool(share <= cap * (1 + 1e-12)))


def cost_scale(matrix: np.ndarray) -> float:
    """A power of two near the largest cost: dividing by it is exact and keeps sums finite."""
    top = float(np.max(np.abs(matrix)))
    return 2.0 ** float(np.floor(np.log2(top))) if top > 0 else 1.0


class ScaledCosts:
    """Expected costs of the unlabelled rows, held divided by ``scale`` (huge costs)."""

    def __init__(self, values: np.ndarray, scale: float) -> None:
        self.values, self.scale = values, scale

    def mean_of(self, act: np.ndarray) -> float:
        """Mean expected cost per row of the given actions, in the original units."""
        return self.scale * float(self.values[np.arange(act.shape[0]), act].mean())


def target_columns(row: RuleRow, q: np.ndarray, E: ScaledCosts, cap: float | None) -> None:
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
    scale = cost_scale(matrix)
    cost_a = matrix[y01.astype(np.intp), (p > c_a).astype(np.intp)] / scale
    cost_b = matrix[y01.astype(np.intp), (p > c_b).astype(np.intp)] / scale
    d = cost_a - cost_b
    ww = np.ones_like(d) if w is None else w
    mean = float(np.average(d, weights=ww))
    n_eff = ww.sum() ** 2 / np.sum(ww**2)
    var = float(np.average((d - mean) ** 2, weights=ww))
    return scale * mean, scale * float(np.sqrt(var / max(n_eff - 1.0, 1.0)))


def recommend(content, y01, p, w, q, E, notes) -> None:
    """Fill ``content.recommendation``: base rule, prevalence move, capacity (see the docs)."""
    matrix = content.cost_matrix
    cap = content.capacity
    rows = {r.key: r for r in content.rules}
    chosen = rows["chosen"]
    key, name, cutoff = "chosen", chosen.label, content.chosen_cutoff
    reasons: list[str] = []
    searched_here = "hindsight" not in rows and content.cost_curve is not None and (
        content.cutoff_source.startswith("the least-cost search"))
    promise = getattr(content, "guarantee", None)
    kept = promise is not None and promise.cutoff is not None and "guarantee" in rows
    if kept:
        # a promise binds the choice: only certified cutoffs may be recommended
        key, name, cutoff = "guarantee", rows["guarantee"].label, float(promise.cutoff)
        reasons.append(f"A promise was given ({promise.promise}): the least-cost cutoff "
                       "certified to keep it is recommended; the cheaper rules in the table are "
                       "not certified to keep it.")
    elif promise is not None:
        reasons.append(f"No cutoff can be certified to keep the promise ({promise.promise}); "
                       "the rule recommended below does NOT keep it. "
                       f"{promise.unreachable or ''}".rstrip())
    if not kept and content.plugin is not None and (
            abs(content.plugin - content.chosen_cutoff) > 1e-12):
        diff, se = _paired_difference(y01, p, content.sample_weight, matrix,
                                      content.chosen_cutoff, content.plugin)
        said = (f"on the labelled rows the {chosen.label} costs {diff:+.4g} per row against "
                f"the {BAYES_NAME} (standard error {se:.2g})")
        settled = getattr(content, "settled", None)
        if searched_here and settled is not None:
            # one rule with CostPolicyWrapper(strategy="tuned"): decision.settle_cutoff, toward
            # the Bayes cutoff carried back through the map chosen on these rows
            anchor_map = getattr(content, "anchor_map", None)
            recal = (anchor_map not in (None, "identity") and settled.anchor is not None
                     and settled.anchor != content.plugin)
            ref_key, ref_name, ref_cut = (("recalibrated", RECALIBRATED_NAME, settled.anchor)
                                          if recal else ("plugin", BAYES_NAME, content.plugin))
            if recal:
                diff = _paired_difference(y01, p, content.sample_weight, matrix,
                                          content.chosen_cutoff, ref_cut)[0]
            said = (f"on the labelled rows the {chosen.label} costs {diff:+.4g} per row against "
                    f"the {ref_name} (standard error {settled.excess_se:.2g})")
            test = (f"an exact one-sided test at the {100 * settled.level:g}% level (the share "
                    "of positives among the rows between the two cutoffs; p = "
                    f"{settled.p_value:.2g}), the rule of the tuned cost policy "
                    "(probwrap.decision.settle_cutoff)")
            what = (f"The {RECALIBRATED_NAME} ({ref_cut:.4g}) is the score at which a "
                    f"{anchor_map} map fitted on these rows reaches the {BAYES_NAME} "
                    f"({content.plugin:.4g}): these rows show the scores to be miscalibrated. "
                    if recal else "")
            if settled.kept_plugin:
                key, name, cutoff = ref_key, ref_name, float(ref_cut)
                reasons.append(f"{what}The {ref_name} needs no search and {said}. By {test}, "
                               f"these rows do not show that the {ref_name} costs more, so it "
                               "is kept: the search on these same rows adds nothing reliable.")
                if recal and key not in rows:
                    content.rules.insert(1, rule_row(key, name, cutoff, y01, p, matrix,
                                                     content.sample_weight, cap))
            elif settled.cutoff == content.chosen_cutoff:
                reasons.append(f"{what}{said[0].upper()}{said[1:]}. By {test}, the {ref_name} "
                               "costs more, and no cutoff nearer it is as good, so the "
                               f"{chosen.label} is kept; it was searched on these same rows, so "
                               "this advantage is optimistic.")
            else:
                key, cutoff = "settled", float(settled.cutoff)
                name = SETTLED_RECALIBRATED_NAME if recal else SETTLED_NAME
                reasons.append(f"{what}{said[0].upper()}{said[1:]}. By {test}, the {ref_name} "
                               "costs more, so the recommended cutoff is the one nearest the "
                               f"{ref_name} among those these rows do not show to cost more "
                               f"than the least: {cutoff:.4f}.")
                if key not in rows:
                    content.rules.insert(1, rule_row(key, name, cutoff, y01, p, matrix,
                                                     content.sample_weight, cap))
        elif searched_here:  # no settling result (it could not be computed): two errors
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
    elif not kept:
        reasons.append(f"The {name} is {content.cutoff_source}.")
    basis = "labelled"
    base_cutoff = cutoff
    if q is not None and E is not None and content.shift_pvalue is not None:
        src, tgt = content.source_prevalence, content.target_prevalence
        # the wrapper's evidence gate decides whether and how far the prevalence moves
        # (PriorShiftWrapper.adaptation_weight_); the test's p-value alone does not
        weight = content.adaptation_weight
        applied = content.applied_prevalence
        moves = weight is not None and weight > 0 and applied is not None
        if kept and moves:
            if promise.requirement in ("recall", "false_positive_rate"):
                reasons.append(f"The prevalence of the unlabelled rows is estimated at {tgt:.4f} "
                               f"against {src:.4f}; the cutoff is not moved: under a change of "
                               f"prevalence alone the {promise.requirement.replace('_', ' ')} "
                               "of a fixed cutoff does not change, so the promise still holds "
                               "there, while moving the cutoff would void its certificate.")
            else:
                reasons.append(f"The prevalence of the unlabelled rows is estimated at {tgt:.4f} "
                               f"against {src:.4f}; the {promise.requirement.replace('_', ' ')} "
                               "of a fixed cutoff changes with the prevalence, so the "
                               "certificate from the labelled rows does not carry over: "
                               "certify again on labelled rows of the new period.")
        elif moves and 0 < cutoff < 1 and 0 < applied < 1:
            cutoff = float(shift_cutoff(cutoff, src, applied))
            key = "adapted" if key == "chosen" else key + "_adapted"
            name = f"{name}, moved to the applied prevalence"
            share = ("all" if weight >= 1.0 else f"{100 * weight:.0f}%")
            reasons.append(f"The prevalence of the unlabelled rows is estimated at {tgt:.4f} "
                           f"against {src:.4f} in the labelled rows (shift test p = "
                           f"{content.shift_pvalue:.2g}); the evidence moves it {share} of the "
                           f"way there, to {applied:.4f}, as PriorShiftWrapper would, and the "
                           f"cutoff is moved to that prevalence (Saerens et al. 2002): "
                           f"{cutoff:.4f}.")
            if key not in rows:
                content.rules.insert(2, rule_row(key, name, cutoff, y01, p, matrix,
                                                  content.sample_weight, cap))
        else:
            reasons.append("The shift test's evidence is below the cutoff at which "
                           "PriorShiftWrapper moves the prevalence (shift test p = "
                           f"{content.shift_pvalue:.2g}), so the cutoff is not moved.")
        basis = "unlabelled"
    acting = q if basis == "unlabelled" else p
    acting_w = None if basis == "unlabelled" else content.sample_weight
    if cap is not None and flagged_share(acting, cutoff, acting_w) > cap * (1 + 1e-12):
        over = flagged_share(acting, cutoff, acting_w)
        cap_cut = notes.compute("capacity", "capacity cutoff", capacity_cutoff, acting, cap,
                                sample_weight=acting_w, score_bounds=(0.0, 1.0))
        where = "unlabelled" if basis == "unlabelled" else "labelled"
        reasons.append(f"At {cutoff:.4f} it would act on {100 * over:.1f}% of the {where} rows, "
                       f"above the capacity of {100 * cap:.1f}%. The {CAPACITY_NAME} "
                       f"{cap_cut:.4f} acts on the rows with the highest probabilities up to "
                       "the capacity; with calibrated probabilities no other choice of that "
                       "many rows has a lower expected cost.")
        if kept:
            reasons.append("Holding to the capacity lowers the share acted on below what the "
                           "certified cutoff needs: the promise is then not kept. Choose "
                           "between the capacity and the promise.")
        key, name, cutoff = "capacity", CAPACITY_NAME, float(cap_cut)
        content.rules.insert(2, rule_row(key, name, cutoff, y01, p, matrix,
                                          content.sample_weight, cap))
    if basis == "unlabelled":
        act = (q > cutoff).astype(np.intp)
        share = float(act.mean())
        cost = E.mean_of(act)
    else:
        share = flagged_share(p, cutoff, content.sample_weight)
        cost = cutoff_cost(y01, p, matrix, cutoff, content.sample_weight)
    content.recommendation = Recommendation(
        key=key, name=name, cutoff=cutoff, reasons=reasons, expected_cost=cost,
        acted_share=share, basis=basis,
        within_capacity=None if cap is None else bool(share <= cap * (1 + 1e-12)),
        base_cutoff=base_cutoff,
    )
