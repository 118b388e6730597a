"""Calibration tests with p-values and calibration errors with known statistical behaviour.

- :func:`hosmer_lemeshow_test` — Hosmer & Lemeshow's (1980) C-hat statistic over deciles of risk.
- :func:`spiegelhalter_z_test` — Spiegelhalter's (1986) Z test built on the Brier score.
- :func:`smooth_calibration_error` — smooth ECE of Błasiok & Nakkiran (2023): kernel-smoothed
  residuals with a reflected Gaussian kernel and a bandwidth that equals the error it yields.
- :func:`debiased_calibration_error` — the binned (l2) calibration error with the bias of the
  plug-in estimate removed (Kumar, Liang & Ma 2019).

Weights are row frequencies throughout: weight 2 counts a row twice. The tests' p-values therefore
depend on the scale of the weights exactly as they depend on the number of copied rows.
"""

from __future__ import annotations

import numbers
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import optimize, stats

from .._validation import plain
from ._calibration import _bin_edges, _bin_index, _top_label
from ._inputs import (
    check_n_bins,
    check_strategy,
    count_scale_weights,
    prepare_any,
    prepare_binary,
)

__all__ = [
    "ApproximatePValueWarning",
    "HosmerLemeshowResult",
    "SpiegelhalterResult",
    "hosmer_lemeshow_test",
    "spiegelhalter_z_test",
    "smooth_calibration_error",
    "debiased_calibration_error",
]

_SETTINGS = ("fitted", "held_out")

#: Smallest expected count of events and of non-events per Hosmer-Lemeshow group for the
#: chi-square reference: 5, common practice for Pearson's chi-square (Cochran 1954's rule).
HL_MIN_EXPECTED = 5.0
#: Smallest expected number of events and of non-events over all rows for Spiegelhalter's normal
#: reference: 10, our own rule of thumb (common practice for normal approximations of sums of
#: Bernoulli terms, e.g. n p >= 10); below it the exact p-value differs visibly (6 rows with one
#: expected event: normal 0.055 against exact 0.056, but 1 row: 2.5e-23 against 0.01).
SPIEGELHALTER_MIN_EXPECTED = 10.0


class ApproximatePValueWarning(UserWarning):
    """A calibration test's large-sample reference distribution does not fit these data.

    Raised by :func:`hosmer_lemeshow_test` when a group of risk expects fewer than 5 events or
    5 non-events (``HL_MIN_EXPECTED``, common practice for Pearson's chi-square), and by
    :func:`spiegelhalter_z_test` when all rows together expect fewer than 10 events or 10
    non-events (``SPIEGELHALTER_MIN_EXPECTED``, our own rule of thumb). The p-value from the
    chi-square or normal distribution can then be far from the exact one; pass
    ``n_null_draws`` for a Monte-Carlo p-value instead.
    """


def _check_null_draws(n_null_draws: Any) -> int | None:
    if n_null_draws is None:
        return None
    if (isinstance(n_null_draws, bool) or not isinstance(n_null_draws, numbers.Integral)
            or n_null_draws < 1):
        raise ValueError(
            f"`n_null_draws` must be None or a whole number >= 1; got {plain(n_null_draws)!r}.")
    return int(n_null_draws)


def _null_event_counts(p: np.ndarray, w: np.ndarray, n_draws: int, rng: np.random.RandomState,
                       chunk_rows: int) -> np.ndarray:
    """``n_draws`` x ``chunk`` weighted event counts drawn under calibration.

    A row of weight ``w`` stands for ``w`` copies, each an event with probability ``p``: its
    count is Binomial(floor(w), p) plus ``w - floor(w)`` times a Bernoulli(p) draw (exact for
    whole-number weights, where it equals drawing the copied rows; mean ``w p`` otherwise).
    """
    whole = np.floor(w)
    frac = w - whole
    counts = rng.binomial(whole.astype(np.int64), p, size=(n_draws, p.shape[0])).astype(float)
    if np.any(frac > 0):
        counts += frac * (rng.uniform(size=(n_draws, p.shape[0])) < p)
    return counts


def _null_draw_pvalue(statistic_of_counts, observed: float, p: np.ndarray, w: np.ndarray,
                      n_draws: int, random_state: Any) -> tuple[float, float]:
    """Monte-Carlo p-value ``(1 + #{T* >= T}) / (1 + B)`` (Davison & Hinkley 1997, eq. 4.11,
    cited from memory) and its binomial standard error; the statistic of each drawn outcome set
    is ``statistic_of_counts(counts)`` on ``(draws, n)`` weighted event counts."""
    from sklearn.utils import check_random_state

    rng = check_random_state(random_state)
    n = p.shape[0]
    per_block = max(1, int(2**20 // max(n, 1)))  # about 8 MB of counts at a time
    exceed = 0
    done = 0
    # compare on a relative tolerance so that outcomes tied with the observed one count
    bar = observed - 1e-10 * max(1.0, abs(observed))
    while done < n_draws:
        b = min(per_block, n_draws - done)
        stats_b = statistic_of_counts(_null_event_counts(p, w, b, rng, n))
        exceed += int(np.count_nonzero(stats_b >= bar))
        done += b
    pvalue = (1.0 + exceed) / (1.0 + n_draws)
    se = float(np.sqrt(pvalue * (1.0 - pvalue) / n_draws))
    return float(pvalue), se


# ----------------------------------------------------------------------------------------------
# Hosmer-Lemeshow
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class HosmerLemeshowResult:
    """Outcome of :func:`hosmer_lemeshow_test`.

    Attributes
    ----------
    statistic : float
        ``C = sum_g (O_g - E_g)^2 / (E_g (1 - E_g / n_g))``.
    pvalue : float
        Upper tail of the chi-square distribution with ``dof`` degrees of freedom.
    dof : int
        Number of groups used minus 2 (``setting="fitted"``) or the number of groups
        (``setting="held_out"``).
    weight : ndarray
        ``n_g``, the total weight (row count) of each group used.
    observed : ndarray
        ``O_g``, the weighted number of positives in each group.
    expected : ndarray
        ``E_g``, the sum of the forecasts in each group.
    reference : str
        ``"chi-square"``, or ``"null draws"`` when ``pvalue`` is the Monte-Carlo p-value.
    pvalue_standard_error : float
        Binomial standard error of a Monte-Carlo ``pvalue`` (0 for the chi-square one).
    """

    statistic: float
    pvalue: float
    dof: int
    weight: np.ndarray
    observed: np.ndarray
    expected: np.ndarray
    reference: str = "chi-square"
    pvalue_standard_error: float = 0.0


def hosmer_lemeshow_test(
    y_true: Any,
    y_prob: Any,
    *,
    n_groups: int = 10,
    setting: str = "fitted",
    sample_weight: Any = None,
    labels: Any = None,
    n_null_draws: int | None = None,
    random_state: Any = None,
) -> HosmerLemeshowResult:
    """Hosmer–Lemeshow goodness-of-fit test over groups of risk (Hosmer & Lemeshow 1980).

    Rows are sorted by forecast and cut into ``n_groups`` groups of (nearly) equal weight — the
    "deciles of risk" for 10 groups. In each group ``g`` with weight ``n_g``, observed positives
    ``O_g`` and expected positives ``E_g = sum p``, the statistic is

    ``C = sum_g (O_g - E_g)^2 / (E_g (1 - E_g / n_g))``,

    which is Pearson's chi-square over the ``2 x G`` table of observed and expected positives and
    negatives. Tied forecasts are never split between groups, so a large tied block can leave
    fewer groups; ``dof`` counts only the groups used.

    Which reference distribution applies depends on where the forecasts came from:

    - ``setting="fitted"`` (the 1980 setting): the forecasts come from a logistic model fitted on
      these same rows; ``C`` is then close to chi-square with ``G - 2`` degrees of freedom.
    - ``setting="held_out"``: the forecasts were fixed before these rows were seen (held-out or
      deployment data, the usual case when checking a calibrated model); no parameter was fitted
      on them and ``C`` is close to chi-square with ``G`` degrees of freedom (Hosmer & Lemeshow,
      *Applied Logistic Regression*, on external validation; recalled from memory). Using
      ``G - 2`` there rejects a perfectly calibrated model about 11 % of the time at the 5 %
      level for ``G = 10`` (see ``benchmarks/assessment.py``).

    The chi-square reference needs enough rows: when a group expects fewer than 5 events or 5
    non-events (common practice for Pearson's chi-square), an :class:`ApproximatePValueWarning`
    says so. With ``n_null_draws`` (``setting="held_out"`` only) the p-value is instead a
    Monte-Carlo one: that many outcome sets are drawn as if the forecasts were the true
    probabilities (each row an event with probability ``p``), the groups kept, ``C`` recomputed
    on each, and the p-value is ``(1 + #{C* >= C}) / (1 + n_null_draws)``. Under
    ``setting="fitted"`` the null would need the model refitted on every drawn outcome set, which
    this function cannot do.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive).
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    n_groups : int, default=10
        Number of groups of risk.
    setting : {"fitted", "held_out"}, default="fitted"
        Where the forecasts came from; sets the degrees of freedom (see above).
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice (and so changes the p-value as a copied row
        would). Weights summing to less than the number of rows cannot be frequencies; they
        are rescaled to Kish's effective sample size with a ``WeightScaleWarning``, so the
        p-value does not depend on the scale of the weights.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.
    n_null_draws : int, optional
        Number of outcome sets drawn under calibration for a Monte-Carlo p-value (see above;
        the standard error of the p-value is about ``sqrt(p (1 - p) / n_null_draws)``). A row of
        weight ``w`` draws as ``w`` copied rows (exact for whole-number weights). None (the
        default) keeps the chi-square p-value.
    random_state : int, RandomState instance or None
        Seed of the null draws (:func:`sklearn.utils.check_random_state`).

    Returns
    -------
    HosmerLemeshowResult

    Raises
    ------
    ValueError
        When fewer groups than needed for a positive number of degrees of freedom are formed, or
        a group's forecasts are all exactly 0 or all exactly 1 (its variance term is zero).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.metrics import hosmer_lemeshow_test
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(0.05, 0.95, size=2000)
    >>> y = (rng.uniform(size=2000) < p).astype(int)
    >>> res = hosmer_lemeshow_test(y, p, setting="held_out")
    >>> res.dof, bool(res.pvalue > 0.05)
    (10, True)

    On 30 rows the groups expect too few events for the chi-square; draw the null instead:

    >>> res = hosmer_lemeshow_test(y[:30], p[:30], setting="held_out", n_null_draws=2000,
    ...                            random_state=0)
    >>> res.reference, bool(res.pvalue > 0.05), bool(res.pvalue_standard_error < 0.012)
    ('null draws', True, True)
    """
    n_groups = check_n_bins(n_groups, "n_groups")
    if setting not in _SETTINGS:
        raise ValueError(f"`setting` must be one of {list(_SETTINGS)}; got {plain(setting)!r}.")
    draws = _check_null_draws(n_null_draws)
    if draws is not None and setting != "held_out":
        raise ValueError(
            "`n_null_draws` needs setting='held_out': under setting='fitted' the null "
            "distribution needs the model refitted on every drawn outcome set."
        )
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    w = count_scale_weights(w, "hosmer_lemeshow_test")
    edges = _bin_edges(p, w, n_groups, "quantile")
    idx = _bin_index(p, edges)
    weight = np.bincount(idx, weights=w, minlength=n_groups)
    observed = np.bincount(idx, weights=w * y, minlength=n_groups)
    expected = np.bincount(idx, weights=w * p, minlength=n_groups)
    used = weight > 0
    weight, observed, expected = weight[used], observed[used], expected[used]
    n_used = int(weight.shape[0])
    dof = n_used - 2 if setting == "fitted" else n_used
    if dof < 1:
        raise ValueError(
            f"Only {n_used} group(s) of risk could be formed from `y_prob` (tied forecasts are "
            f"not split); setting={setting!r} needs at least {3 if setting == 'fitted' else 1}."
        )
    variance = expected * (1.0 - expected / weight)
    if np.any(variance <= 0):
        raise ValueError(
            "A group of `y_prob` holds only exact 0s or only exact 1s; its binomial variance is "
            "zero and the Hosmer-Lemeshow statistic is undefined."
        )
    statistic = float(np.sum((observed - expected) ** 2 / variance))
    if draws is not None:
        keep = w > 0
        group_of = np.cumsum(used) - 1  # group index among the groups used
        row_group = group_of[idx[keep]]
        n_used_groups = n_used

        def c_of(counts: np.ndarray) -> np.ndarray:
            o = np.zeros((counts.shape[0], n_used_groups))
            for j in range(n_used_groups):
                o[:, j] = counts[:, row_group == j].sum(axis=1)
            return np.sum((o - expected) ** 2 / variance, axis=1)

        pvalue, se = _null_draw_pvalue(c_of, statistic, p[keep], w[keep], draws, random_state)
        return HosmerLemeshowResult(statistic=statistic, pvalue=pvalue, dof=dof, weight=weight,
                                    observed=observed, expected=expected,
                                    reference="null draws", pvalue_standard_error=se)
    sparse = int(np.count_nonzero((expected < HL_MIN_EXPECTED)
                                  | (weight - expected < HL_MIN_EXPECTED)))
    if sparse:
        warnings.warn(
            f"hosmer_lemeshow_test: {sparse} of {n_used} groups of risk expect fewer than "
            f"{HL_MIN_EXPECTED:g} events or {HL_MIN_EXPECTED:g} non-events (smallest "
            f"{float(min(expected.min(), (weight - expected).min())):.3g}); the chi-square "
            "p-value can be far from the exact one there (5 per cell is common practice). Pass "
            "`n_null_draws` (with setting='held_out') for a Monte-Carlo p-value, or use fewer "
            "groups.",
            ApproximatePValueWarning,
            stacklevel=2,
        )
    return HosmerLemeshowResult(
        statistic=statistic,
        pvalue=float(stats.chi2.sf(statistic, dof)),
        dof=dof,
        weight=weight,
        observed=observed,
        expected=expected,
    )


# ----------------------------------------------------------------------------------------------
# Spiegelhalter
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SpiegelhalterResult:
    """Outcome of :func:`spiegelhalter_z_test`.

    Attributes
    ----------
    statistic : float
        ``Z``; positive when the Brier score is worse than a calibrated forecast would give.
    pvalue : float
        Two-sided, from the standard normal distribution.
    brier : float
        The (weighted) Brier score ``B``.
    expected_brier : float
        ``E0[B] = sum w p (1 - p) / W``, the Brier score expected if the forecasts were
        calibrated.
    reference : str
        ``"normal"``, or ``"null draws"`` when ``pvalue`` is the Monte-Carlo p-value.
    pvalue_standard_error : float
        Binomial standard error of a Monte-Carlo ``pvalue`` (0 for the normal one).
    """

    statistic: float
    pvalue: float
    brier: float
    expected_brier: float
    reference: str = "normal"
    pvalue_standard_error: float = 0.0


def spiegelhalter_z_test(
    y_true: Any, y_prob: Any, *, sample_weight: Any = None, labels: Any = None,
    n_null_draws: int | None = None, random_state: Any = None,
) -> SpiegelhalterResult:
    """Spiegelhalter's Z test of calibration (Spiegelhalter 1986).

    If every forecast ``p_i`` were the true probability of its outcome, the Brier score
    ``B = sum w (y - p)^2 / W`` would have mean ``E0[B] = sum w p (1 - p) / W`` and variance
    ``Var0[B] = sum w (1 - 2p)^2 p (1 - p) / W^2``. The test statistic is

    ``Z = (B - E0[B]) / sqrt(Var0[B]) = sum w (y - p)(1 - 2p) / sqrt(sum w (1 - 2p)^2 p (1 - p))``,

    compared with the standard normal distribution (two-sided). Unlike Hosmer–Lemeshow it needs
    no grouping. Forecasts of exactly 0, 1/2 or 1 carry no information for it (their
    ``(1 - 2p)^2 p (1 - p)`` is zero).

    The normal reference needs many events and non-events: when all rows together expect fewer
    than 10 of either (``sum w p`` or ``sum w (1 - p)``; our own rule of thumb), an
    :class:`ApproximatePValueWarning` says so. With ``n_null_draws`` the p-value is a
    Monte-Carlo one instead: that many outcome sets are drawn as if the forecasts were the true
    probabilities, ``Z`` recomputed on each, and the p-value is
    ``(1 + #{|Z*| >= |Z|}) / (1 + n_null_draws)``.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive).
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice. Weights summing to less than the number
        of rows cannot be frequencies; they are rescaled to Kish's effective sample size with a
        ``WeightScaleWarning``, so ``Z`` does not depend on the scale of the weights.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.
    n_null_draws : int, optional
        Number of outcome sets drawn under calibration for a Monte-Carlo p-value (standard
        error about ``sqrt(p (1 - p) / n_null_draws)``). A row of weight ``w`` draws as ``w``
        copied rows (exact for whole-number weights). None (the default) keeps the normal
        p-value.
    random_state : int, RandomState instance or None
        Seed of the null draws (:func:`sklearn.utils.check_random_state`).

    Returns
    -------
    SpiegelhalterResult

    Raises
    ------
    ValueError
        When every forecast (with positive weight) is 0, 1/2 or 1: the variance is then zero.

    Examples
    --------
    >>> from probwrap.metrics import spiegelhalter_z_test
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")  # 3 rows: ApproximatePValueWarning
    ...     res = spiegelhalter_z_test([0, 1, 1], [0.2, 0.6, 0.9])
    >>> round(res.statistic, 4), round(res.pvalue, 4)
    (-0.7926, 0.428)
    >>> res = spiegelhalter_z_test([0, 1, 1], [0.2, 0.6, 0.9], n_null_draws=4000, random_state=0)
    >>> res.reference, round(res.pvalue, 1)
    ('null draws', 0.6)
    """
    draws = _check_null_draws(n_null_draws)
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    w = count_scale_weights(w, "spiegelhalter_z_test")
    total = w.sum()
    variance = float(np.dot(w, (1.0 - 2.0 * p) ** 2 * p * (1.0 - p)))
    if variance <= 0:
        raise ValueError(
            "Every forecast in `y_prob` is 0, 1/2 or 1; the variance of the Brier score under "
            "calibration is zero and Spiegelhalter's Z is undefined."
        )
    # (y - p)^2 - p (1 - p) = (y - p)(1 - 2p) for y in {0, 1}: the centred Brier score
    statistic = float(np.dot(w, (y - p) * (1.0 - 2.0 * p)) / np.sqrt(variance))
    brier = float(np.dot(w, (y - p) ** 2) / total)
    expected_brier = float(np.dot(w, p * (1.0 - p)) / total)
    if draws is not None:
        keep = w > 0
        pk, wk = p[keep], w[keep]
        slope = 1.0 - 2.0 * pk
        centre = float(np.dot(wk * pk, slope))
        sd = np.sqrt(variance)

        def z_of(counts: np.ndarray) -> np.ndarray:  # Z is linear in the event counts
            return np.abs((counts @ slope - centre) / sd)

        pvalue, se = _null_draw_pvalue(z_of, abs(statistic), pk, wk, draws, random_state)
        return SpiegelhalterResult(statistic=statistic, pvalue=pvalue, brier=brier,
                                   expected_brier=expected_brier, reference="null draws",
                                   pvalue_standard_error=se)
    events, non_events = float(np.dot(w, p)), float(np.dot(w, 1.0 - p))
    if min(events, non_events) < SPIEGELHALTER_MIN_EXPECTED:
        warnings.warn(
            f"spiegelhalter_z_test: the rows expect {events:.3g} events and {non_events:.3g} "
            f"non-events; below {SPIEGELHALTER_MIN_EXPECTED:g} of either (our own rule of thumb) "
            "the normal p-value can be far from the exact one. Pass `n_null_draws` for a "
            "Monte-Carlo p-value.",
            ApproximatePValueWarning,
            stacklevel=2,
        )
    return SpiegelhalterResult(
        statistic=statistic,
        pvalue=float(2.0 * stats.norm.sf(abs(statistic))),
        brier=brier,
        expected_brier=expected_brier,
    )


# ----------------------------------------------------------------------------------------------
# smooth ECE
# ----------------------------------------------------------------------------------------------

#: Number of grid cells on [0, 1] for the smoothed residual (cell width about 6e-5).
_SMOOTH_GRID = 2**14


def _outcome_and_forecast(y_true, y_prob, sample_weight, labels):
    y, p, w = prepare_any(y_true, y_prob, sample_weight, labels)
    if p.ndim == 2:
        values, outcome = _top_label(y, p)
        return outcome, values, w
    return y, p, w


def _residual_masses(values: np.ndarray, residual: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Linear binning of ``w * residual / W`` onto the cell midpoints ``(j + 0.5) / G``.

    Forecasts in the outer half-cells go wholly to the outer midpoint, which is where the
    reflection about 0 and 1 would send the part beyond it.
    """
    g = _SMOOTH_GRID
    u = np.clip(values * g - 0.5, 0.0, g - 1.0)
    left = np.minimum(np.floor(u).astype(np.intp), g - 2)
    frac = u - left
    mass = w * residual / w.sum()
    out = np.bincount(left, weights=mass * (1.0 - frac), minlength=g)
    out += np.bincount(left + 1, weights=mass * frac, minlength=g)
    return out


class _SmoothedResidual:
    """The smoothed residual on the grid, for any bandwidth, by FFT convolution.

    The reflected kernel ``K(t, f) = sum_k phi(t - f - 2k) + phi(t + f - 2k)`` on [0, 1] equals a
    period-2 convolution of the masses mirrored about 0 (index ``2G - 1 - j`` holds cell ``j``).
    """

    def __init__(self, masses: np.ndarray) -> None:
        g = masses.shape[0]
        self.g = g
        self.spectrum = np.fft.rfft(np.concatenate((masses, masses[::-1])))
        m = np.arange(2 * g)
        self.offset = np.where(m < g, m, m - 2 * g) / g  # circular distance, period 2

    def values(self, sigma: float) -> np.ndarray:
        n_images = int(np.ceil(4.0 * sigma)) + 1
        shifts = 2.0 * np.arange(-n_images, n_images + 1)
        kernel = np.exp(-0.5 * ((self.offset[:, None] + shifts[None, :]) / sigma) ** 2).sum(axis=1)
        # normalised on the grid so every mass keeps its total exactly (the kernel integrates to
        # one on [0, 1]; the grid sum does so up to discretisation)
        kernel *= self.g / kernel.sum()
        smoothed = np.fft.irfft(self.spectrum * np.fft.rfft(kernel), n=2 * self.g)
        return smoothed[: self.g]

    def error(self, sigma: float) -> float:
        return float(np.sum(np.abs(self.values(sigma))) / self.g)


def smooth_calibration_error(
    y_true: Any,
    y_prob: Any,
    *,
    bandwidth: float | None = None,
    sample_weight: Any = None,
    labels: Any = None,
) -> float:
    """Smooth expected calibration error (smooth ECE, Błasiok & Nakkiran 2023).

    No bins: the residuals ``r_i = y_i - p_i`` are smoothed over the forecast axis with a
    Gaussian kernel of width ``sigma`` reflected at 0 and 1,

    ``smECE_sigma = integral_0^1 | sum_i w_i r_i K_sigma(t, p_i) / W | dt``,
    ``K_sigma(t, p) = sum_k phi_sigma(t - p - 2k) + phi_sigma(t + p - 2k)``,

    which is the kernel-smoothed mean residual weighted by the kernel density of the forecasts.
    With ``bandwidth=None`` (recommended) the width is the fixed point ``sigma*`` at which
    ``smECE_sigma* = sigma*``; since ``smECE_sigma`` does not increase with ``sigma``, the fixed
    point is unique. Forecasts that are all equal to ``c`` with outcome rate ``q`` give exactly
    ``|q - c|`` at every width.

    The integral is evaluated on a grid of 16384 cells (residuals spread linearly onto the cell
    midpoints, convolution by FFT), so the cost does not grow with the bandwidth search; the
    grid error is of order ``(cell width / sigma)^2``, below 1e-5 for ``sigma >= 0.01``.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        With 1-d ``y_prob``: binary labels. With 2-d ``y_prob``: class labels; the top-label
        form is used (confidence of the arg-max class against whether it was right).
    y_prob : array-like of shape (n,) or (n, k)
        Positive-class probabilities, or class probabilities.
    bandwidth : float, optional
        A fixed ``sigma`` in (0, 1]; ``None`` uses the fixed point.
    sample_weight : array-like of shape (n,), optional
        Row frequencies (weight 2 counts a row twice). Scaling every weight changes nothing.
    labels : array-like, optional
        As for :func:`expected_calibration_error`.

    Returns
    -------
    float
        In [0, 1].

    Examples
    --------
    >>> from probwrap.metrics import smooth_calibration_error
    >>> round(smooth_calibration_error([0, 1, 1, 1], [0.6, 0.6, 0.6, 0.6]), 6)
    0.15
    """
    if bandwidth is not None and not (
        isinstance(bandwidth, (int, float)) and not isinstance(bandwidth, bool)
        and 0.0 < bandwidth <= 1.0
    ):
        raise ValueError(f"`bandwidth` must be None or a number in (0, 1]; got {plain(bandwidth)!r}.")
    outcome, values, w = _outcome_and_forecast(y_true, y_prob, sample_weight, labels)
    smoothed = _SmoothedResidual(_residual_masses(values, outcome - values, w))
    if bandwidth is not None:
        return smoothed.error(float(bandwidth))
    floor = 1.0 / _SMOOTH_GRID
    if smoothed.error(floor) <= floor:
        # calibrated below the resolution of the grid
        return smoothed.error(floor)
    sigma = optimize.brentq(lambda s: smoothed.error(s) - s, floor, 1.0, xtol=1e-13, rtol=1e-12)
    return float(smoothed.error(sigma))


# ----------------------------------------------------------------------------------------------
# debiased binned calibration error
# ----------------------------------------------------------------------------------------------


def debiased_calibration_error(
    y_true: Any,
    y_prob: Any,
    *,
    n_bins: int = 10,
    strategy: str = "quantile",
    squared: bool = False,
    sample_weight: Any = None,
    labels: Any = None,
) -> float:
    """Binned l2 calibration error with the plug-in bias removed (Kumar, Liang & Ma 2019).

    The plug-in estimate ``sum_b (W_b / W) (obs_b - pred_b)^2`` is biased upwards: even a
    calibrated forecast shows a gap of variance ``q_b (1 - q_b) / n_b`` in every bin. Kumar et al.
    subtract the unbiased estimate of that variance,

    ``CE^2 = sum_b (W_b / W) [(obs_b - pred_b)^2 - obs_b (1 - obs_b) / (W_b - 1)]``,

    which is unbiased for the binned squared calibration error when the forecasts within a bin
    are equal. The result may be negative for a well-calibrated model (sampling noise);
    ``squared=False`` returns ``sqrt(max(CE^2, 0))``, on the scale of the forecasts.

    Parameters
    ----------
    y_true, y_prob, labels
        As for :func:`expected_calibration_error` (2-d ``y_prob`` uses the top-label form).
    n_bins : int, default=10
        Number of bins.
    strategy : {"quantile", "uniform"}, default="quantile"
        Bins of equal weight (as recommended by Kumar et al.) or of equal width.
    squared : bool, default=False
        Return the (possibly negative) squared estimate instead of its clamped square root.
    sample_weight : array-like of shape (n,), optional
        Row frequencies: ``W_b`` counts rows, so weight 2 counts a row twice. Bins with total
        weight of at most 1 cannot estimate their variance; they keep their plug-in term and a
        ``UserWarning`` says so Weights summing to less than the number of rows cannot be
        frequencies; they are first rescaled to Kish's effective sample size (with a
        ``WeightScaleWarning``), so the result does not depend on the scale of the weights.

    Returns
    -------
    float

    Examples
    --------
    >>> from probwrap.metrics import debiased_calibration_error
    >>> y = [0, 1, 0, 1, 1, 1, 0, 1]
    >>> p = [0.2, 0.2, 0.2, 0.2, 0.8, 0.8, 0.8, 0.8]
    >>> round(debiased_calibration_error(y, p, n_bins=2, squared=True), 6)
    -0.026667
    """
    n_bins = check_n_bins(n_bins)
    strategy = check_strategy(strategy)
    if not isinstance(squared, (bool, np.bool_)):
        raise ValueError(f"`squared` must be True or False; got {plain(squared)!r}.")
    outcome, values, w = _outcome_and_forecast(y_true, y_prob, sample_weight, labels)
    w = count_scale_weights(w, "debiased_calibration_error")
    edges = _bin_edges(values, w, n_bins, strategy)
    idx = _bin_index(values, edges)
    weight = np.bincount(idx, weights=w, minlength=n_bins)
    sum_pred = np.bincount(idx, weights=w * values, minlength=n_bins)
    sum_obs = np.bincount(idx, weights=w * outcome, minlength=n_bins)
    used = weight > 0
    weight, sum_pred, sum_obs = weight[used], sum_pred[used], sum_obs[used]
    obs, pred = sum_obs / weight, sum_pred / weight
    share = weight / weight.sum()
    small = weight <= 1.0
    if small.any():
        warnings.warn(
            f"{int(small.sum())} bin(s) hold a total weight of at most 1; their variance cannot "
            "be estimated and they keep the plug-in (biased) term. Use fewer bins.",
            UserWarning,
            stacklevel=2,
        )
    correction = np.where(small, 0.0, obs * (1.0 - obs) / np.where(small, 2.0, weight - 1.0))
    value = float(np.sum(share * ((obs - pred) ** 2 - correction)))
    if squared:
        return value
    return float(np.sqrt(max(value, 0.0)))
