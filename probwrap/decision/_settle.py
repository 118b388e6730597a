"""Choosing a cutoff the held-out rows can support: the plug-in cutoff unless the data object.

The least-cost cutoff of :func:`~probwrap.decision.search_cutoff` is the exact minimiser of the
empirical cost; on a few dozen held-out rows it often sits in a gap that a handful of rows
decided, and it then costs more on new rows than the Bayes rule on the model's own probabilities.
:func:`settle_cutoff` keeps the plug-in cutoff ``c_fp / (c_fp + c_fn)`` (Elkan 2001) unless the
held-out rows show that it costs more than the minimum, and otherwise moves only as far from it as
they demand.
"""

from __future__ import annotations

from dataclasses import dataclass
from statistics import NormalDist
from typing import Any

import numpy as np
from scipy.special import betainc

from .._validation import (
    check_same_length,
    check_sample_weight,
    check_scores,
    costs_by_position,
)
from ..calibration._base import count_weights
from ._costs import check_cost_matrix, plugin_cutoff
from ._cutoff import CutoffSearchResult, _binary_targets, search_cutoff

__all__ = ["SettledCutoff", "SettledOffsets", "settle_class_offsets", "settle_cutoff"]


@dataclass(frozen=True)
class SettledCutoff:
    """Outcome of :func:`settle_cutoff`.

    Attributes
    ----------
    cutoff : float
        The chosen cutoff: ``anchor`` when the held-out rows do not show that it costs more than
        the least-cost cutoff, otherwise the cutoff nearest ``anchor`` among those not shown to
        cost more.
    plugin : float
        The plug-in (Bayes) cutoff of the cost matrix.
    least_cost : float
        The cutoff of least held-out cost (``search.cutoff``).
    kept_plugin : bool
        Whether ``cutoff`` is ``anchor`` (the plug-in cutoff unless another anchor was given).
    excess : float
        Held-out mean cost per row of ``anchor`` minus that of the least-cost cutoff.
    excess_se : float
        Standard error of ``excess`` (paired over rows, on Kish's effective sample size); for
        information (the test is the exact one of ``p_value``).
    level : float
        One-sided level of the test.
    anchor : float or None
        The cutoff kept unless the rows reject it, when it is not ``plugin`` (see the
        ``anchor`` argument of :func:`settle_cutoff`); None means ``plugin``.
    p_value : float
        Exact one-sided binomial p-value that ``anchor`` costs more than the least-cost cutoff
        (the share of positives among the rows between the two cutoffs against the plug-in
        cutoff); ``anchor`` is passed over when it is at most ``level``.
    """

    cutoff: float
    plugin: float
    least_cost: float
    kept_plugin: bool
    excess: float
    excess_se: float
    level: float
    anchor: float | None = None
    p_value: float = float("nan")


def _check_anchor(anchor: Any) -> float:
    try:
        value = float(anchor)
    except (TypeError, ValueError):
        value = float("nan")
    if not -1.0 <= value <= 1.0:
        raise ValueError(
            "`anchor` must be a probability cutoff in [0, 1] (or below 0, down to -1, for a "
            f"rule that flags every row); got {anchor!r}."
        )
    return value


def _check_level(level: Any) -> float:
    try:
        value = float(level)
    except (TypeError, ValueError):
        value = float("nan")
    if not 0.0 < value < 0.5:
        raise ValueError(f"`level` must be a number in (0, 0.5); got {level!r}.")
    return value


def settle_cutoff(
    scores: Any,
    y: Any,
    costs: Any,
    search: CutoffSearchResult | None = None,
    *,
    sample_weight: Any = None,
    level: float = 0.05,
    anchor: float | None = None,
) -> SettledCutoff:
    """The plug-in cutoff unless held-out rows show that another cutoff costs less.

    For probabilities ``scores`` and constant binary ``costs``: among all cutoffs not shown by
    the held-out rows to cost more than the least-cost cutoff, take the one nearest the plug-in
    cutoff ``t = (c_fp - c_tn) / ((c_fp - c_tn) + (c_fn - c_tp))``; the plug-in cutoff itself
    when it qualifies. Two cutoffs decide differently only on the rows between them; given
    those ``m`` rows, the lower cutoff (which flags them) costs more exactly when their share
    of positives is below ``t``, so a cutoff is "shown to cost more" when the exact one-sided
    binomial test of that share against ``t`` (the count of positives among the ``m`` rows)
    rejects at ``level``. This is the one-standard-error rule of Breiman et al. (1984, sec.
    3.4.3) with the rule that needs no held-out rows as the simplest model and an exact test
    in place of one error. With many rows the least-cost cutoff is returned; with a few dozen
    the plug-in cutoff is kept unless the rows clearly reject it: with a miss costing 10 times
    a false alarm (``t = 1/11``), 32 rows between the cutoffs without a single positive are
    needed before the plug-in cutoff is passed over.

    Until 4 December 2026 the test was the normal approximation to the paired per-row difference of
    the two rules' costs (``excess`` over ``excess_se``, still reported): with a handful of
    positives among the rows between the cutoffs it rejected on a few negative rows and none
    of the rare, dear positive rows (docs/evidence/small_data_log.md, "cost rules on the newer sets").

    Parameters
    ----------
    scores : array-like of shape (n,)
        Held-out probabilities of the positive class.
    y : array-like of shape (n,)
        True classes coded 0 (negative) and 1 (positive).
    costs : mapping or array-like of shape (2, 2)
        Cost matrix (rows: true class, columns: negative / positive action) or the binary
        shorthand ``{"tp", "fp", "fn", "tn"}``. Each error must cost more than the matching
        correct decision (so that a plug-in cutoff exists).
    search : CutoffSearchResult, default=None
        The result of ``search_cutoff(scores, y, costs, sample_weight=sample_weight,
        score_bounds=(0, 1))`` (with any ``capacity``); computed when None.
    sample_weight : array-like of shape (n,), default=None
        Row frequencies. Weights that sum to less than the number of rows count as Kish's
        (1965) effective sample size, so scaling all weights does not change the choice.
    level : float in (0, 0.5), default=0.05
        One-sided level at which the held-out rows must show that a cutoff costs more than the
        minimum for it to be passed over.
    anchor : float in [-1, 1], default=None
        The cutoff to keep unless the rows reject it, in place of the plug-in cutoff: for
        example the plug-in cutoff carried back through a calibration map fitted on the same
        rows (what ``CostPolicyWrapper(strategy="tuned")`` passes, see
        :class:`~probwrap.CostPolicyWrapper`). A value below 0 flags every row, probabilities
        of exactly 0 included (rows are flagged when ``score > anchor``). None: the plug-in
        cutoff.

    Returns
    -------
    SettledCutoff

    Notes
    -----
    Counts are on the scale of the rows: whole-number frequency weights count as the rows
    repeated; weights summing to less than the rows as Kish's effective size, spread over the
    rows by weight (so the counts of positives and rows between two cutoffs need not be whole;
    the binomial tails are then the regularised incomplete beta functions they equal for whole
    counts). O(n) after the search: the class weights flagged at every searched cutoff follow from the
    search's mean cost and flagged share (two linear equations), so no second sort is needed.
    A capacity imposed in ``search`` is respected: only admissible cutoffs are chosen.

    References
    ----------
    Breiman, L., Friedman, J., Olshen, R., Stone, C. (1984). Classification and Regression
    Trees, sec. 3.4.3 (the one-standard-error rule). Clopper, C., Pearson, E. (1934). The use
    of confidence or fiducial limits illustrated in the case of the binomial (the exact
    binomial tails). Elkan, C. (2001). The foundations of
    cost-sensitive learning (the plug-in cutoff). Kish, L. (1965). Survey Sampling.

    Examples
    --------
    >>> from probwrap.decision import settle_cutoff
    >>> p = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8]
    >>> y = [0, 0, 0, 0, 0, 1, 1, 1]
    >>> res = settle_cutoff(p, y, {"fp": 1.0, "fn": 3.0})
    >>> res.plugin, res.least_cost, res.cutoff  # 3 negative rows are weak evidence against 0.25
    (0.25, 0.55, 0.25)
    >>> round(res.p_value, 4)  # (3/4)^3: no positive among the 3 rows between the cutoffs
    0.4219
    """
    s = check_scores(scores, name="scores", ndim=1)
    n = check_same_length(("scores", s), ("y", np.asarray(y)))
    yi = _binary_targets(y, n)
    matrix = check_cost_matrix(costs_by_position(costs, 2), n_classes=2, n_actions=2)
    level = _check_level(level)
    w = np.ones(n) if sample_weight is None else check_sample_weight(sample_weight, n)
    if search is None:
        search = search_cutoff(s, yi, matrix, sample_weight=w, score_bounds=(0.0, 1.0))
    t_plug = plugin_cutoff(matrix)
    t0 = t_plug if anchor is None else _check_anchor(anchor)
    kept_anchor = None if anchor is None else float(t0)
    # costs divided by a power of two near the largest (exact): squares of costs near the
    # largest float would overflow; excess and its error are scaled back at the end
    top = float(np.max(np.abs(matrix)))
    scale = 2.0 ** float(np.floor(np.log2(top))) if top > 0 else 1.0
    matrix = matrix / scale
    total = float(w.sum())
    pi1 = float(w[yi == 1].sum()) / total
    pi0 = 1.0 - pi1
    a0 = matrix[0, 1] - matrix[0, 0]  # extra cost of flagging a negative row (> 0)
    a1 = matrix[1, 1] - matrix[1, 0]  # extra cost of flagging a positive row (< 0)
    base = matrix[0, 0] * pi0 + matrix[1, 0] * pi1  # mean cost when nothing is flagged

    # weighted shares of negative / positive rows flagged at every searched cutoff: from
    # cost = base + a0 f0 + a1 f1 and share = f0 + f1
    cost = np.asarray(search.costs, float) / scale
    share = np.asarray(search.flagged_share, float)
    f0 = np.clip((cost - base - a1 * share) / (a0 - a1), 0.0, pi0)
    f1 = np.clip(share - f0, 0.0, pi1)
    # the plug-in cutoff's own decision, counted directly
    flag = s > t0
    f0_t = float(w[flag & (yi == 0)].sum()) / total
    f1_t = float(w[flag & (yi == 1)].sum()) / total
    cost_t = base + a0 * f0_t + a1 * f1_t

    # the least-cost decision nearest the search's cutoff (a flat optimum spans several)
    cutoffs = np.asarray(search.cutoffs, float)
    admissible = np.asarray(search.admissible, bool)
    least = np.min(cost[admissible])
    at_min = np.flatnonzero(admissible & (cost <= least + 1e-9 * max(abs(least), 1e-300)))
    best = int(at_min[np.argmin(np.abs(cutoffs[at_min] - search.cutoff))])
    c_best = base + a0 * f0[best] + a1 * f1[best]
    n_eff = float(count_weights(w if w.all() else w[w > 0])[0].sum())  # (no copy if all > 0)

    def excess_and_se(g0, g1, c):
        # per-row difference: a0 or a1 on the rows flagged by one rule only, else 0
        d1 = c - c_best
        d2 = a0 * a0 * np.abs(g0 - f0[best]) + a1 * a1 * np.abs(g1 - f1[best])
        return d1, np.sqrt(np.maximum(d2 - d1 * d1, 0.0) / n_eff)

    ex_t, se_t = excess_and_se(f0_t, f1_t, cost_t)
    # relative tolerance for rounding in the reconstructed costs
    tol = 1e-9 * max(abs(a0), abs(a1))
    t_ratio = a0 / (a0 - a1)  # the plug-in cutoff of the (scaled) matrix

    def p_value(g0, g1, g_share):
        # Exact one-sided p-value that a rule costs more than the least-cost one. The two rules
        # differ on the rows between their cutoffs (nested: one flags all the other does and
        # more); given those m rows, their positive count k is binomial, and the rule that
        # flags them costs more exactly when the positives' share is below t_ratio (each
        # negative costs a0, each positive saves -a1). Counts on the rows' scale (n_eff;
        # whole-number frequency weights: the rows repeated); the binomial tails as regularised
        # incomplete beta functions, so that weighted counts need not be whole.
        m0 = n_eff * np.abs(g0 - f0[best])
        m1 = n_eff * np.abs(g1 - f1[best])
        m = m0 + m1
        more = g_share > share_at_best  # the rule flags the extra rows: costly if few positives
        with np.errstate(invalid="ignore", divide="ignore"):
            # P(K <= k) = I_{1-t}(m - k, k + 1); P(K >= k) = I_t(k, m - k + 1)
            low = np.where(m0 > 0, betainc(np.maximum(m0, 1e-300), m1 + 1.0, 1.0 - t_ratio), 1.0)
            high = np.where(m1 > 0, betainc(np.maximum(m1, 1e-300), m0 + 1.0, t_ratio), 1.0)
        out = np.where(more, low, high)
        return np.where(m * 1.0 <= 1e-9 * max(n_eff, 1.0), 1.0, out)

    share_at_best = f0[best] + f1[best]
    p_t = float(p_value(np.float64(f0_t), np.float64(f1_t), f0_t + f1_t))
    cap = search.capacity
    if (p_t > level or ex_t <= tol) and (cap is None or f0_t + f1_t <= cap + 1e-12):
        return SettledCutoff(float(t0), float(t_plug), float(search.cutoff), True,
                             float(scale * ex_t), float(scale * se_t), level, kept_anchor, p_t)
    ok = admissible & (p_value(f0, f1, f0 + f1) > level)
    ok[best] = True
    cands = np.flatnonzero(ok)
    chosen = float(cutoffs[cands[np.argmin(np.abs(cutoffs[cands] - t0))]])
    return SettledCutoff(chosen, float(t_plug), float(search.cutoff), False,
                         float(scale * ex_t), float(scale * se_t), level, kept_anchor, p_t)


@dataclass(frozen=True)
class SettledOffsets:
    """Outcome of :func:`settle_class_offsets`.

    Attributes
    ----------
    offsets : ndarray of shape (n_classes,)
        ``share * tuned``: the tuned offsets shrunk toward zero (the plain Bayes rule).
    share : float in [0, 1]
        How much of the tuned offsets is kept (0: the Bayes rule, 1: the tuned offsets).
    excess : float
        Held-out mean cost per row of the Bayes rule minus that of the tuned offsets.
    excess_se : float
        Standard error of ``excess`` (paired over rows, on Kish's effective sample size).
    level : float
        One-sided level of the test.
    """

    offsets: np.ndarray
    share: float
    excess: float
    excess_se: float
    level: float


def settle_class_offsets(
    proba: Any,
    y: Any,
    costs: Any,
    offsets: Any,
    *,
    sample_weight: Any = None,
    level: float = 0.05,
    n_steps: int = 20,
) -> SettledOffsets:
    """Shrink tuned class offsets toward zero as far as held-out rows allow.

    The multiclass counterpart of :func:`settle_cutoff`: along the path ``s * offsets``,
    ``s = 0, 1/n_steps, ..., 1``, the smallest ``s`` whose held-out mean cost exceeds that of
    the tuned offsets (``s = 1``) by no more than ``z`` standard errors of the paired per-row
    difference (``z`` the one-sided normal quantile of ``1 - level``). ``s = 0`` is the plain
    Bayes rule on the probabilities, which needs no held-out rows; the one-standard-error rule
    of Breiman et al. (1984, sec. 3.4.3) with it as the simplest rule.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes)
        Held-out probabilities.
    y : array-like of int of shape (n,)
        Class indices 0 .. n_classes - 1.
    costs : array-like of shape (n_classes, n_actions) or (n, n_classes, n_actions)
        Cost matrix, or one per row.
    offsets : array-like of shape (n_classes,)
        Tuned offsets (e.g. ``tune_class_offsets(...).offsets``).
    sample_weight : array-like of shape (n,), default=None
        Row frequencies (weights summing to less than the rows count as Kish's effective size).
    level : float in (0, 0.5), default=0.05
    n_steps : int, default=20
        Points on the path from zero to ``offsets``.

    Returns
    -------
    SettledOffsets

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import settle_class_offsets
    >>> p = np.array([[0.6, 0.3, 0.1], [0.2, 0.5, 0.3], [0.1, 0.2, 0.7], [0.5, 0.4, 0.1]])
    >>> res = settle_class_offsets(p, [0, 1, 2, 1], 1 - np.eye(3), [0.0, 0.5, 0.0])
    >>> res.share, res.offsets.tolist()  # four rows cannot show that the offsets help
    (0.0, [0.0, 0.0, 0.0])
    """
    from ._offsets import _adjusted_expected, _check_offsets, _prepare, _realised

    p, yi, matrix, w, unit = _prepare(proba, y, costs, sample_weight)
    b = _check_offsets(offsets, p.shape[1])
    level = _check_level(level)
    if int(n_steps) < 1:
        raise ValueError(f"`n_steps` must be a positive integer; got {n_steps!r}.")
    total = float(w.sum())
    # _prepare rescales the weights by a power of two; the count uses them as given
    raw = w if sample_weight is None else check_sample_weight(sample_weight, w.shape[0])
    n_eff = float(count_weights(raw[raw > 0])[0].sum())
    z = NormalDist().inv_cdf(1.0 - level)

    def row_costs(offs):
        return _realised(matrix, yi, np.argmin(_adjusted_expected(p, matrix, offs), axis=1))

    tuned = row_costs(b)
    tol = 1e-9 * float(np.max(np.abs(matrix))) if matrix.size else 0.0
    shares = np.arange(int(n_steps) + 1) / int(n_steps)
    excess0 = se0 = 0.0
    chosen = 1.0
    for i, s in enumerate(shares):
        d = row_costs(s * b) - tuned
        mean = float(w @ d) / total
        se = float(np.sqrt(max(float(w @ (d - mean) ** 2) / total, 0.0) / n_eff))
        if i == 0:
            excess0, se0 = mean, se
        if mean <= z * se + tol:
            chosen = float(s)
            break
    return SettledOffsets(chosen * b, chosen, excess0 * unit, se0 * unit, level)
