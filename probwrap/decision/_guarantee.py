"""Cutoffs that come with a guarantee on recall, precision, false-positive rate or share flagged.

The least-cost cutoff is searched only among cutoffs that are *certified* to meet a requirement
on new rows from the same distribution as the held-out rows:

- ``method="high_probability"`` (Learn-then-Test: Angelopoulos, Bates, Candès, Jordan & Lei,
  "Learn then Test: calibrating predictive algorithms to achieve risk control", Ann. Appl. Stat.
  2025): each candidate cutoff is a hypothesis "the risk exceeds alpha", tested with the exact
  binomial-tail p-value of its held-out loss count; the cutoffs are tested in a fixed order, from
  the one that meets the requirement most easily, and certification stops at the first that is
  not rejected at level delta. Every certified cutoff then meets the requirement with probability
  at least ``confidence = 1 - delta`` (family-wise), so choosing the cheapest of them keeps it.
- ``method="expectation"`` (conformal risk control: Angelopoulos, Bates, Fisch, Lei & Schuster,
  "Conformal risk control", ICLR 2024, eq. (4)): the cutoffs whose inflated held-out risk
  ``(n R(c) + 1) / (n + 1)`` is at most alpha; the risk on a new row is at most alpha *on
  average over held-out sets* (not with high probability). Only for the requirements whose loss
  is monotone in the cutoff (not precision).

Every requirement is a 0/1 loss whose mean must stay at most ``alpha``:

============================  ======================  =====================================
requirement (``target``)      rows the loss is over   loss of a row
============================  ======================  =====================================
``recall`` >= target          true positives          not flagged; alpha = 1 - target
``precision`` >= target       flagged rows            true negative; alpha = 1 - target
``false_positive_rate`` <=    true negatives          flagged; alpha = target
``flagged_share`` <=          all rows                flagged; alpha = target
============================  ======================  =====================================
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import special

from .._validation import check_sample_weight, check_scores, plain, shared_factor
from ._cutoff import CutoffSearchResult, _binary_targets, search_cutoff

__all__ = [
    "GUARANTEE_REQUIREMENTS",
    "GuaranteeUnreachableError",
    "GuaranteedCutoff",
    "binomial_tail_pvalue",
    "guaranteed_cutoff",
]

#: requirement name -> True when the target is a floor (at least), False for a ceiling.
GUARANTEE_REQUIREMENTS: dict[str, bool] = {
    "recall": True,
    "precision": True,
    "false_positive_rate": False,
    "flagged_share": False,
}
_METHODS = ("high_probability", "expectation")


class GuaranteeUnreachableError(ValueError):
    """No cutoff can be certified to meet the requirement at the requested confidence."""


@dataclass(frozen=True)
class GuaranteedCutoff:
    """Outcome of :func:`guaranteed_cutoff`.

    Attributes
    ----------
    cutoff : float
        Least-cost certified cutoff (positive action when ``score > cutoff``).
    cost : float
        Mean cost per row of ``cutoff`` on the held-out rows.
    requirement, target, method : str, float, str
        What was asked.
    confidence : float or None
        ``1 - delta`` for ``method="high_probability"``; None for ``"expectation"``.
    achieved : float
        Value of the requirement's metric (recall, precision, ...) at ``cutoff`` on the held-out
        rows (nan for precision when no row is flagged).
    bound : float
        The metric's guaranteed side at ``cutoff``. High probability: the one-sided
        Clopper–Pearson bound at level ``confidence`` (a floor for recall/precision, a ceiling
        otherwise). Expectation: the inflated risk ``(n R + 1) / (n + 1)`` turned into the
        metric's scale.
    p_value : float
        Binomial-tail p-value of "the requirement fails at ``cutoff``" (nan for
        ``"expectation"``).
    cutoffs, p_values, certified : ndarray of shape (m + 1,)
        Every candidate cutoff (those of :func:`search_cutoff`), its p-value (nan where not
        tested) and whether it is certified.
    unconstrained : CutoffSearchResult
        The least-cost search without the requirement, for comparison.
    """

    cutoff: float
    cost: float
    requirement: str
    target: float
    method: str
    confidence: float | None
    achieved: float
    bound: float
    p_value: float
    cutoffs: np.ndarray
    p_values: np.ndarray
    certified: np.ndarray
    unconstrained: CutoffSearchResult

    @property
    def binding(self) -> bool:
        """True when the requirement moved the cutoff away from the unconstrained optimum."""
        return not bool(self.certified[self._index(self.unconstrained.cutoff)])

    def _index(self, cutoff: float) -> int:
        return int(np.argmin(np.abs(self.cutoffs - cutoff)))


def binomial_tail_pvalue(losses: Any, n: Any, alpha: float) -> np.ndarray:
    """P(Binomial(n, alpha) <= losses): evidence that a 0/1 risk is at most ``alpha``.

    For integer counts this equals ``scipy.stats.binomtest(losses, n, alpha,
    alternative="less").pvalue``; weighted (non-integer) counts use the same expression through
    the regularised incomplete beta function, ``I_{1-alpha}(n - k, k + 1)``, its continuous
    extension. ``n = 0`` (no rows to judge) gives 1.

    Examples
    --------
    >>> from probwrap.decision import binomial_tail_pvalue
    >>> round(float(binomial_tail_pvalue(0, 30, 0.1)), 4)  # 0.9 ** 30
    0.0424
    """
    k = np.asarray(losses, dtype=float)
    m = np.asarray(n, dtype=float)
    a = float(alpha)
    k, m = np.broadcast_arrays(k, m)
    out = np.ones(k.shape)
    inside = (m > 0) & (k < m)
    if np.any(inside):
        kk, mm = k[inside], m[inside]
        # weighted counts that are whole numbers up to rounding are treated as whole numbers
        tol = 1e-9 * np.maximum(mm, 1.0)
        kk = np.where(np.abs(kk - np.round(kk)) <= tol, np.round(kk), kk)
        mm = np.where(np.abs(mm - np.round(mm)) <= tol, np.round(mm), mm)
        # P(Binomial(n, a) <= k) = I_{1-a}(n - k, k + 1) for integer k < n
        # (for integer k < n; in between it interpolates, never below the value at floor(k))
        out[inside] = special.betainc(np.maximum(mm - kk, 1e-300), kk + 1.0, 1.0 - a)
    return out


def _miss_allowance(confidence: Any) -> float:
    """``delta = 1 - confidence`` after checking ``confidence`` is a number in (0, 1)."""
    try:
        c = float(confidence)
    except (TypeError, ValueError) as exc:
        raise ValueError(
            f"`confidence` must be a number in (0, 1); got {plain(confidence)!r}."
        ) from exc
    if isinstance(confidence, bool) or not 0.0 < c < 1.0:
        raise ValueError(f"`confidence` must be a number in (0, 1); got {plain(confidence)!r}.")
    return 1.0 - c


def _check_requirement(requirement: Any, target: Any, method: Any, confidence: Any):
    if requirement not in GUARANTEE_REQUIREMENTS:
        raise ValueError(
            f"`requirement` must be one of {sorted(GUARANTEE_REQUIREMENTS)}; got "
            f"{plain(requirement)!r}."
        )
    try:
        t = float(target)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`target` must be a number in (0, 1); got {plain(target)!r}.") from exc
    if isinstance(target, bool) or not 0.0 < t < 1.0:
        raise ValueError(f"`target` must be a number in (0, 1); got {plain(target)!r}.")
    if method not in _METHODS:
        raise ValueError(f"`method` must be one of {list(_METHODS)}; got {plain(method)!r}.")
    if method == "expectation":
        if requirement == "precision":
            raise ValueError(
                "`method='expectation'` needs a loss that moves one way with the cutoff; "
                "precision does not (use method='high_probability')."
            )
        delta = None
    else:
        delta = _miss_allowance(confidence)
    floor = GUARANTEE_REQUIREMENTS[requirement]
    alpha = 1.0 - t if floor else t
    return t, alpha, delta


def _loss_counts(requirement: str, cutoffs: np.ndarray, s: np.ndarray, yi: np.ndarray,
                 w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Weighted loss count ``k`` and number of judged rows ``n`` at every cutoff."""

    def above(mask: np.ndarray) -> np.ndarray:
        # weight of the rows in ``mask`` whose score is strictly above each cutoff
        order = np.argsort(s[mask], kind="stable")
        ss = s[mask][order]
        cw = np.concatenate([[0.0], np.cumsum(w[mask][order])])
        return cw[-1] - cw[np.searchsorted(ss, cutoffs, side="right")]

    pos, neg = yi == 1, yi == 0
    flag_pos, flag_neg = above(pos), above(neg)
    w_pos, w_neg = float(w[pos].sum()), float(w[neg].sum())
    if requirement == "recall":
        return np.maximum(w_pos - flag_pos, 0.0), np.full(cutoffs.shape, w_pos)
    if requirement == "precision":
        return flag_neg, flag_pos + flag_neg
    if requirement == "false_positive_rate":
        return flag_neg, np.full(cutoffs.shape, w_neg)
    return flag_pos + flag_neg, np.full(cutoffs.shape, w_pos + w_neg)


def counts_as_rows(w: np.ndarray, owner: str | None = None) -> bool:
    """Whether the guarantees read weights ``w`` as row frequencies: every weight a whole
    number (a row of weight 2 is two rows). Any other weights are relative ones (see
    :func:`evidence_counts`).

    With ``owner``, whole-number weights that all share a factor above 1 (every row weighs 3,
    or 2, 4 and 6) warn: read as counts they say that no row was seen once, which is more
    often a scaled weight than a count, and the guarantee is then judged on that many times
    the rows.
    """
    if not np.all(w == np.round(w)):
        return False
    if owner is not None:
        factor = shared_factor(w)
        if factor is not None and factor > 1:
            from ..calibration._base import WeightScaleWarning

            warnings.warn(
                f"{owner}: every `sample_weight` is a multiple of {factor}. Whole-number weights "
                f"are read as row counts, so each row counts as at least {factor} independent "
                "rows in the guarantee's test. If the weights are relative, not counts, divide "
                f"them by {factor} (or pass non-integer weights, which are counted by Kish's "
                "effective sample size).",
                WeightScaleWarning,
                stacklevel=3,
            )
    return True


def evidence_counts(k: np.ndarray, n: np.ndarray, n_sq: np.ndarray, as_rows: bool
                    ) -> tuple[np.ndarray, np.ndarray]:
    """The loss count and number of judged rows that the binomial test and bounds read.

    ``k`` and ``n`` are the weighted loss count and the weighted number of judged rows, ``n_sq``
    the sum of the squared weights of the judged rows. With whole-number weights
    (``as_rows``) they are counts of rows and are returned as they are. Other weights —
    inverse-probability-of-censoring weights from
    :func:`probwrap.late_labels.labels_at_horizon`, normalised or importance weights — carry
    less evidence than their sum: the judged rows then count as Kish's (1965) effective
    number, ``n_eff = n**2 / n_sq``, with the weighted loss share ``k / n`` kept, so
    ``k_eff = k * n_eff / n``. Multiplying such weights by a constant changes neither.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision._guarantee import evidence_counts
    >>> w = np.array([0.5, 1.5, 1.5, 0.5])            # four rows, Kish size 3.2
    >>> evidence_counts(np.array([0.5]), np.array([w.sum()]), np.array([w @ w]), False)
    (array([0.4]), array([3.2]))
    """
    if as_rows:
        return k, n
    with np.errstate(invalid="ignore", divide="ignore"):
        n_eff = np.where(n_sq > 0, n * n / np.where(n_sq > 0, n_sq, 1.0), 0.0)
        k_eff = np.where(n > 0, k * (n_eff / np.where(n > 0, n, 1.0)), 0.0)
    return k_eff, n_eff


def _upper_risk(k: float, n: float, delta: float) -> float:
    """One-sided Clopper–Pearson upper bound on a 0/1 risk (Clopper & Pearson 1934)."""
    if n <= 0:
        return 1.0
    if k >= n:
        return 1.0
    return float(special.betaincinv(k + 1.0, max(n - k, 1e-300), 1.0 - delta))


def guaranteed_cutoff(
    scores: Any,
    y: Any,
    costs: Any,
    *,
    requirement: str,
    target: float,
    confidence: float = 0.9,
    method: str = "high_probability",
    sample_weight: Any = None,
    capacity: float | None = None,
    score_bounds: tuple[float, float] | None = None,
) -> GuaranteedCutoff:
    """Least-cost cutoff among those certified to meet a recall, precision, false-positive-rate
    or flagged-share requirement on new rows.

    Parameters
    ----------
    scores, y, costs, sample_weight, capacity, score_bounds
        As for :func:`search_cutoff` (``y`` coded 0/1, positive action when ``score > cutoff``).
        Whole-number weights are row frequencies: a row of weight 2 counts as two rows in
        every count and p-value. Any other weights (the censoring weights of
        :func:`probwrap.late_labels.labels_at_horizon`, normalised or importance weights) are
        relative: each count is judged on Kish's effective number of the rows it is over,
        ``(sum w)**2 / sum w**2``, with the weighted error share kept (see
        :func:`evidence_counts`), so multiplying them by a constant changes nothing and rows of
        large weight are not taken for many independent rows.
    requirement : {"recall", "precision", "false_positive_rate", "flagged_share"}
        The metric to guarantee. Recall and precision get a floor, the other two a ceiling.
    target : float in (0, 1)
        The floor or ceiling, e.g. ``requirement="recall", target=0.95``.
    confidence : float in (0, 1), default=0.9
        For ``method="high_probability"``: the probability (over held-out sets) that every
        certified cutoff meets the requirement on new rows.
    method : {"high_probability", "expectation"}, default="high_probability"
        Learn-then-Test with binomial-tail p-values and fixed-sequence testing, or conformal risk
        control (the requirement holds on average over held-out sets; not for precision).

    Returns
    -------
    GuaranteedCutoff

    Raises
    ------
    GuaranteeUnreachableError
        When no cutoff can be certified (too few rows for the confidence asked, or a model that
        cannot reach the target), or none of the certified ones respects ``capacity``. A rule
        without the guarantee is never returned in its place.

    Notes
    -----
    Fixed-sequence order: recall is tested from the lowest cutoff (flag every row) upwards;
    the false-positive rate and the flagged share from the highest (flag none) downwards;
    precision from the highest cutoff that flags enough rows for a rejection to be possible at
    all (``(1 - alpha) ** n <= delta``) downwards. That starting point depends on the scores
    but not on the labels. The p-value of a cutoff is exact given the number of rows it judges
    (for precision, the flagged rows are a random sample of the rows above the cutoff).
    ``benchmarks/guarantee.py`` checks the violation rate by simulation.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import guaranteed_cutoff
    >>> rng = np.random.default_rng(0)
    >>> y = rng.integers(0, 2, 2000)
    >>> s = rng.normal(1.5 * y, 1.0)
    >>> g = guaranteed_cutoff(s, y, {"fp": 1.0, "fn": 1.0}, requirement="recall", target=0.95,
    ...                       confidence=0.9)
    >>> bool(g.achieved >= 0.95), bool(g.bound >= 0.95), bool(g.p_value <= 0.1)
    (True, True, True)
    """
    t, alpha, delta = _check_requirement(requirement, target, method, confidence)
    base = search_cutoff(
        scores, y, costs, sample_weight=sample_weight, capacity=capacity,
        score_bounds=score_bounds,
    )
    s = check_scores(scores, name="scores", ndim=1)
    yi = _binary_targets(y, s.shape[0])
    w = (np.ones(s.shape[0]) if sample_weight is None
         else check_sample_weight(sample_weight, s.shape[0]))
    cutoffs = np.asarray(base.cutoffs, dtype=float)
    k, n = _loss_counts(requirement, cutoffs, s, yi, w)
    # whole-number weights are row counts; other weights count as Kish's effective rows
    as_rows = counts_as_rows(w, None if sample_weight is None else "guaranteed_cutoff")
    if not as_rows:
        _, n_sq = _loss_counts(requirement, cutoffs, s, yi, w * w)
        k, n = evidence_counts(k, n, n_sq, False)
    m = cutoffs.shape[0]
    p_values = np.full(m, np.nan)
    certified = np.zeros(m, dtype=bool)
    if method == "high_probability":
        if requirement == "recall":
            order = np.arange(m)
        elif requirement == "precision":
            n_min = math.log(delta) / math.log1p(-alpha)
            start = np.flatnonzero(n >= n_min * (1 - 1e-12))
            order = np.arange(start.max(), -1, -1) if start.size else np.arange(0)
        else:
            order = np.arange(m - 1, -1, -1)
        p_seq = binomial_tail_pvalue(k[order], n[order], alpha) if order.size else np.zeros(0)
        p_values[order] = p_seq
        failed = np.flatnonzero(p_seq > delta)
        n_ok = failed[0] if failed.size else order.size
        certified[order[:n_ok]] = True
    else:
        with np.errstate(invalid="ignore", divide="ignore"):
            inflated = (k + 1.0) / (n + 1.0)
        certified = inflated <= alpha * (1 + 1e-12)
    admissible = certified & np.asarray(base.admissible, dtype=bool)
    if not admissible.any():
        raise GuaranteeUnreachableError(_unreachable_message(
            requirement, t, method, delta, certified.any(), capacity, k, n, alpha, as_rows
        ))
    costs_curve = np.where(admissible, base.costs, np.inf)
    best = float(costs_curve.min())
    tol = 1e-9 * max(abs(best), float(np.max(np.abs(base.costs[admissible]))))
    ties = np.flatnonzero(costs_curve <= best + tol)
    j = int(ties[len(ties) // 2])
    risk = float(k[j] / n[j]) if n[j] > 0 else float("nan")
    floor = GUARANTEE_REQUIREMENTS[requirement]
    achieved = 1.0 - risk if floor else risk
    if method == "high_probability":
        upper = _upper_risk(float(k[j]), float(n[j]), delta)
        p_value = float(p_values[j])
    else:
        upper = float((k[j] + 1.0) / (n[j] + 1.0))
        p_value = float("nan")
    bound = 1.0 - upper if floor else upper
    return GuaranteedCutoff(
        cutoff=float(cutoffs[j]),
        cost=float(base.costs[j]),
        requirement=requirement,
        target=t,
        method=method,
        confidence=None if delta is None else 1.0 - delta,
        achieved=achieved,
        bound=bound,
        p_value=p_value,
        cutoffs=cutoffs,
        p_values=p_values,
        certified=certified,
        unconstrained=base,
    )


def _unreachable_message(requirement, target, method, delta, any_certified, capacity, k, n,
                         alpha, as_rows: bool = True) -> str:
    side = "at least" if GUARANTEE_REQUIREMENTS[requirement] else "at most"
    what = f"{requirement.replace('_', ' ')} {side} {target:g}"
    if any_certified:
        return (
            f"Cutoffs that guarantee {what} exist, but none respects `capacity`={capacity:g}; "
            "relax one of the two."
        )
    if method == "expectation":
        return (
            f"No cutoff keeps {what} on average: even the most favourable cutoff's inflated risk "
            f"(n R + 1)/(n + 1) exceeds {alpha:g} with n = {float(np.max(n)):g} rows judged."
        )
    n_need = math.ceil(math.log(delta) / math.log1p(-alpha))
    judged = {"recall": "positive rows", "false_positive_rate": "negative rows",
              "precision": "flagged rows", "flagged_share": "rows"}[requirement]
    n_have = float(np.max(n)) if np.size(n) else 0.0
    have = (f"{n_have:.4g} {judged} at most" if as_rows
            else f"the equivalent of {n_have:.4g} {judged} at most (Kish's effective number "
                 "of the weighted rows; the weights are not whole numbers, so they are not "
                 "read as row counts)")
    return (
        f"No cutoff can be certified to give {what} with confidence {1 - delta:g}: the "
        f"first cutoff tested was not rejected. With no errors at all this needs at least "
        f"{n_need} judged {judged} ((1 - {alpha:g})^n <= {delta:g}); there are {have}. "
        "Otherwise the model cannot reach the target on these rows. Lower the target or the "
        "confidence, or use more held-out rows."
    )
