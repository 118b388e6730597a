"""Tests of "no prior shift" and the evidence cutoff that decides how far to adapt."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import chi2

from .._validation import check_labels, check_same_length
from ._adjust import check_prior
from ._estimate import _check_target, _loglik, _solve_prior, kish_weights

__all__ = [
    "ShiftTestResult",
    "shift_score_test",
    "shift_test",
    "evidence_cutoff",
    "null_harm",
    "null_harm_scale",
    "estimate_amplification",
    "null_move_ratio",
    "draw_harm",
    "draw_capped_weight",
    "NoShiftHarmWarning",
    "draw_cutoff",
]


@dataclass(frozen=True)
class ShiftTestResult:
    r"""Result of :func:`shift_test` and :func:`shift_score_test`, in the style of SciPy's results.

    Attributes
    ----------
    statistic : float
        Non-negative, on the chi-square scale with ``df`` degrees of freedom: for
        :func:`shift_test` ``2 * (loglik(prior) - loglik(source_prior))``; for
        :func:`shift_score_test` the chi-square quantile at the test's p-value (equal to
        ``raw_statistic`` when ``denominator_df`` is infinite, smaller otherwise), so that a
        rule reading the statistic as chi-square under no shift reads it correctly at any
        sample size.
    pvalue : float
        Upper tail of the reference distribution (chi-square, or the F approximation of
        :func:`shift_score_test` when the labelled rows are few).
    df : int
        ``k - 1``.
    prior : ndarray of shape (k,) or None
        The maximum-likelihood prior used in the statistic (None for the score test, which
        needs no estimate).
    raw_statistic : float or None
        :func:`shift_score_test`: the two-sample statistic
        :math:`\Delta^\top (V_t + V_s)^{-1} \Delta` itself (None for :func:`shift_test`).
    denominator_df : float
        :func:`shift_score_test`: the second degrees of freedom of its F reference
        distribution (infinite: chi-square).
    """

    statistic: float
    pvalue: float
    df: int
    prior: np.ndarray | None = None
    raw_statistic: float | None = None
    denominator_df: float = float("inf")


def shift_test(
    proba: Any,
    source_prior: Any,
    *,
    sample_weight: Any = None,
    tol: float = 1e-8,
    max_iter: int = 10000,
) -> ShiftTestResult:
    r"""Likelihood-ratio test that unlabelled rows have the source class priors.

    The statistic is :math:`2\,[\ell(\hat\pi) - \ell(\pi^s)]` with :math:`\hat\pi` the
    maximum-likelihood priors and :math:`\ell` the log-likelihood of
    :func:`prior_log_likelihood`; under "no shift" it is asymptotically chi-square with
    ``k - 1`` degrees of freedom (Saerens et al. 2002, section 2.3; Wilks 1938). The test
    treats the posteriors as exact: it ignores the sampling error of the labelled rows they
    were calibrated on (:func:`shift_score_test` with ``source_proba`` accounts for it).
    Weights are rescaled to sum to Kish's effective sample size, so the statistic does not
    depend on their scale (with unit weights it is the plain statistic).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import shift_test
    >>> rng = np.random.default_rng(1)
    >>> p1 = rng.uniform(0.6, 0.99, size=200)      # every row leans to class 1
    >>> res = shift_test(np.column_stack([1 - p1, p1]), [0.5, 0.5])
    >>> bool(res.pvalue < 1e-6)
    True
    """
    p, w = _check_target(proba, sample_weight, owner="shift_test")
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    wk = kish_weights(w)
    prior, _, _, _ = _solve_prior(p, wk, src, src.copy(), tol, max_iter)
    stat = 2.0 * (_loglik(p, wk, src, prior) - _loglik(p, wk, src, src))
    # the optimum is at least as likely as the source prior, so the statistic is >= 0 up to rounding
    stat = max(stat, 0.0)
    return ShiftTestResult(statistic=stat, pvalue=float(chi2.sf(stat, k - 1)), df=k - 1, prior=prior)


def _score_rows(p: np.ndarray, src: np.ndarray) -> np.ndarray:
    """Per-row score of the prior log-likelihood at the source prior, in a basis of the simplex.

    ``d/dt log sum_k pi_k p_k / pi^s_k`` along ``e_j - e_0`` at ``pi = pi^s`` is
    ``p_j / pi^s_j - p_0 / pi^s_0`` (the mixture there equals 1).
    """
    q = p / src
    return q[:, 1:] - q[:, :1]


def null_harm(cutoff: float, df: int) -> float:
    r"""``E[(T - a)^2 / T; T > a]`` for ``T`` chi-square with ``df`` degrees of freedom, ``a = cutoff * df``.

    When nothing moved, an estimate :math:`X` of the change of the priors has the statistic
    :math:`T = X^\top \Sigma^{-1} X` (chi-square, ``df = k - 1``) and the rule
    :math:`w = \max(0, 1 - a / T)` applies :math:`wX`; its squared error in the metric of
    :math:`\Sigma` is :math:`w^2 T = (T - a)^2 / T` for :math:`T > a` and 0 otherwise. This
    function is the expectation of that quantity, :math:`E[T; T>a] - 2a P(T>a) + a^2
    E[1/T; T>a]`, in closed form from the chi-square density identities :math:`t f_d(t) = d
    f_{d+2}(t)` and, for :math:`d \ge 3`, :math:`f_d(t)/t = f_{d-2}(t)/(d-2)`; for :math:`d = 2`
    the last term is an exponential integral, for :math:`d = 1` it follows by one integration
    by parts. ``cutoff = 0`` gives ``df``, the chi-square mean; it falls to 0 as ``cutoff``
    grows.

    Examples
    --------
    >>> from probwrap.shift._shift_tests import null_harm
    >>> round(null_harm(0.0, 1), 6), round(null_harm(1.0, 1), 4)
    (1.0, 0.3333)
    """
    from scipy.special import exp1
    from scipy.stats import chi2 as chi2_dist

    d = int(df)
    a = float(cutoff) * d
    if a <= 0:
        return float(d)
    upper = d * chi2_dist.sf(a, d + 2)
    tail = chi2_dist.sf(a, d)
    if d >= 3:
        inverse = chi2_dist.sf(a, d - 2) / (d - 2)
    elif d == 2:
        inverse = 0.5 * exp1(a / 2.0)
    else:  # int_a^inf t^(-3/2) e^(-t/2) dt = 2 a^(-1/2) e^(-a/2) - int_a^inf t^(-1/2) e^(-t/2) dt
        inverse = 2.0 * np.exp(-a / 2.0) / np.sqrt(2.0 * np.pi * a) - tail
    return float(max(upper - 2.0 * a * tail + a * a * inverse, 0.0))


def labelled_log_loss(proba: np.ndarray, y_index: np.ndarray, sample_weight: np.ndarray) -> float:
    """Weighted mean log loss of posteriors ``proba`` on labelled rows ``y_index`` (in nats;
    a posterior of 0 for the true class counts as the smallest positive float)."""
    p = np.asarray(proba, dtype=float)
    w = np.asarray(sample_weight, dtype=float)
    own = p[np.arange(p.shape[0]), np.asarray(y_index, dtype=np.intp)]
    return float(-(w @ np.log(np.maximum(own, np.finfo(float).tiny))) / w.sum())


def null_harm_scale(
    proba: np.ndarray, sample_weight: np.ndarray, source_prior: np.ndarray, mean_cov: np.ndarray,
    reference_loss: float | None = None,
) -> float:
    r"""Relative harm, when nothing moved, of applying a change of the priors of size ``T``.

    With calibrated posteriors ``proba`` of the unlabelled rows, the source prior
    :math:`\pi^s` and the covariance ``mean_cov`` (:math:`V`) of the difference of the mean
    score between unlabelled and labelled rows (the denominator of the shift test), a change
    :math:`\Delta` of the priors (coordinates ``1..k-1``) applied when nothing moved costs, per
    row and to second order, :math:`\tfrac12 \Delta^\top K \Delta` nats of log loss, with
    :math:`K` the expected Fisher information of the re-weighted posteriors about the priors,
    :math:`K = E[\sum_j p_j b_j b_j^\top] - J`, :math:`b_j = e_j/\pi^s_j - 1_{j=0}\,\mathbf 1/\pi^s_0`,
    :math:`J = E[u u^\top]` (for two classes :math:`K = E[p(1-p)] / (\pi^s_0 \pi^s_1)^2`).
    The one-step estimate of the change, :math:`X = J^{-1} \bar u`, has covariance
    :math:`\Sigma = J^{-1} V J^{-1}` and statistic :math:`T = X^\top \Sigma^{-1} X`, so
    :math:`\Delta^\top K \Delta \le \lambda\, T` for :math:`\Delta` along :math:`X`, with
    :math:`\lambda` the largest eigenvalue of :math:`K\Sigma`. Divided by the expected log loss
    of the posteriors themselves (their mean entropy), the expected relative harm of a rule
    that applies the share :math:`w(T)` is at most ``scale * E[w(T)^2 T]``, where this
    function returns ``scale`` :math:`= \lambda / (2 L_0)`.

    ``reference_loss``: the labelled rows' own log loss of the calibrated posteriors. The
    mean entropy is the loss the posteriors expect of themselves, right only where they are
    calibrated; a calibration fitted on a few dozen rows often leaves them underconfident
    (their entropy up to twice the loss they reach on new labelled rows, measured by
    ``benchmarks/shift.py --only=tiny``), which made the relative harm look smaller than it
    is. With ``reference_loss`` :math:`L_0` is the smaller of the two estimates — the larger
    harm scale, so the bound holds under either (the labelled loss is in-sample, so
    optimistic: the choice errs toward moving less).
    """
    p = np.asarray(proba, dtype=float)
    w = np.asarray(sample_weight, dtype=float)
    src = np.asarray(source_prior, dtype=float)
    wn = w / w.sum()
    u = _score_rows(p, src)
    with np.errstate(divide="ignore", invalid="ignore"):
        ent = -np.where(p > 0, p * np.log(p), 0.0).sum(axis=1)
    loss = float(wn @ ent)
    if reference_loss is not None and np.isfinite(reference_loss) and reference_loss > 0:
        loss = min(loss, float(reference_loss))
    return _null_harm_scale_moments(wn @ p, (u * wn[:, None]).T @ u, loss, src, mean_cov)


def _null_harm_scale_moments(
    mean_proba: np.ndarray,
    score_second_moment: np.ndarray,
    mean_entropy: float,
    source_prior: np.ndarray,
    mean_cov: np.ndarray,
) -> float:
    """:func:`null_harm_scale` from weighted means over the rows: the mean posterior, the
    second moment ``E[u u^T]`` of the per-row scores and the mean entropy of the posteriors (so
    row blocks on a cluster can be summed first)."""
    src = np.asarray(source_prior, dtype=float)
    mp = np.asarray(mean_proba, dtype=float)
    j = np.atleast_2d(score_second_moment)
    k_mat = np.diag(mp[1:] / src[1:] ** 2) + mp[0] / src[0] ** 2 - j
    j_inv = np.linalg.pinv(j)
    sigma = j_inv @ np.atleast_2d(mean_cov) @ j_inv
    lam = float(np.max(np.linalg.eigvals(k_mat @ sigma).real, initial=0.0))
    loss = float(mean_entropy)
    if not (loss > 0 and np.isfinite(lam)):
        return 0.0
    return max(lam, 0.0) / (2.0 * loss)


class NoShiftHarmWarning(UserWarning):
    """``adapt`` found evidence that a draw with no shift gives often enough (shift test
    p >= 0.01), and, were the class shares in fact unchanged, the move its evidence rule asks
    for would raise the log loss of these rows by more than 2 % (see :func:`null_move_ratio`).
    Where p >= 0.10 and ``max_harm`` is set (the default) the move was held to that 2 %
    (:func:`draw_capped_weight`); with ``max_harm=None``, or where 0.01 <= p < 0.10, it was
    made in full."""


#: Relative log-loss increase above which a move on weak evidence warns (issue 10's 1.02).
DRAW_HARM_LIMIT = 0.02


def draw_harm(harm_scale: float | None, ratio: float | None, statistic: float | None,
              weight: float) -> float:
    """Relative log-loss increase of applying the share ``weight`` of the estimate, had the
    rows' class shares not moved: ``scale * T * (w**2 + 2 * ratio * w)`` (second order; see
    :func:`null_move_ratio`); 0 where a part is missing.

    Examples
    --------
    >>> from probwrap.shift._shift_tests import draw_harm
    >>> round(draw_harm(0.034, 0.85, 2.18, 0.47), 4)
    0.0756
    """
    if not (harm_scale and statistic and weight > 0) or ratio is None:
        return 0.0
    if not (np.isfinite(harm_scale) and np.isfinite(statistic) and np.isfinite(ratio)):
        return 0.0
    return float(harm_scale * statistic * (weight**2 + 2.0 * max(float(ratio), 0.0) * weight))


def draw_capped_weight(harm_scale: float | None, ratio: float | None,
                       statistic: float | None, weight: float,
                       limit: float = DRAW_HARM_LIMIT) -> float:
    r"""The largest share ``w' <= weight`` of the estimate whose :func:`draw_harm` is at most
    ``limit``: ``weight`` where its own harm is within ``limit`` (or a part is missing), else
    the positive root of ``scale * T * (w**2 + 2 * ratio * w) = limit``,
    ``w' = sqrt(ratio**2 + limit / (scale * T)) - ratio``.

    ``PriorShiftWrapper.adapt`` applies it where the shift test's p-value is at least 0.10
    (docs/evidence/prior_shift_log.md, the section on milder per-draw caps): on such evidence
    the rows may well not have moved, and a move then costs them the first-order term of
    :func:`null_move_ratio` that ``max_harm`` (an average over draws) does not carry.

    Examples
    --------
    >>> from probwrap.shift._shift_tests import draw_capped_weight, draw_harm
    >>> w = draw_capped_weight(0.034, 0.85, 2.18, 0.47)   # the 0.47 move would cost 7.6 %
    >>> round(w, 4), round(draw_harm(0.034, 0.85, 2.18, w), 4)
    (0.1462, 0.02)
    >>> draw_capped_weight(0.034, 0.85, 2.18, 0.05)       # within 2 % already
    0.05
    """
    w = float(weight)
    if harm_scale is None or ratio is None or statistic is None or not w > 0:
        return w
    s, t, r = float(harm_scale), float(statistic), max(float(ratio), 0.0)
    if not (np.isfinite(s) and np.isfinite(t) and np.isfinite(r) and s > 0 and t > 0):
        return w
    if draw_harm(s, r, t, w) <= limit:
        return w
    return float(min(w, np.sqrt(r * r + limit / (s * t)) - r))


def null_move_ratio(
    mean_proba: np.ndarray, score_second_moment: np.ndarray, source_prior: np.ndarray,
    mean_cov: np.ndarray,
) -> float:
    r"""First- over second-order harm of a move when the unlabelled rows' class shares are
    exactly the source's: :math:`\mu / \lambda`, with :math:`\mu` the largest eigenvalue of
    :math:`J\Sigma` and :math:`\lambda` that of :math:`K\Sigma` (notation of
    :func:`null_harm_scale`).

    :func:`null_harm_scale` bounds the harm of a move *in expectation over the population*,
    where the unlabelled rows' own label shares vary with their features. On a given set of rows
    whose label shares equal the source's, the log loss's gradient in the prior is the
    unlabelled rows' mean score :math:`\bar u` itself, the very noise the one-step estimate
    :math:`X = J^{-1}\bar u` reads, so applying :math:`wX` costs, to second order,
    :math:`w X^\top J X + \tfrac12 w^2 X^\top K X \le (w \mu + \tfrac12 w^2 \lambda) T`
    — a term linear in ``w`` that the expected bound does not carry. With ``scale`` from
    :func:`null_harm_scale` the relative harm of that draw is at most
    ``scale * T * (w**2 + 2 * ratio * w)``. For two classes the ratio is ``J / K``, the
    posteriors' variance over their mean ``p (1 - p)``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._shift_tests import null_move_ratio
    >>> # two classes at 0.5: J = 16 var(p), K = 16 E[p(1 - p)] (posteriors 0.2 and 0.8)
    >>> round(null_move_ratio(np.array([0.5, 0.5]), np.array([[16 * 0.09]]), np.array([0.5, 0.5]),
    ...                       np.array([[0.01]])), 6)
    0.5625
    """
    src = np.asarray(source_prior, dtype=float)
    mp = np.asarray(mean_proba, dtype=float)
    j = np.atleast_2d(np.asarray(score_second_moment, dtype=float))
    k_mat = np.diag(mp[1:] / src[1:] ** 2) + mp[0] / src[0] ** 2 - j
    j_inv = np.linalg.pinv(j)
    sigma = j_inv @ np.atleast_2d(mean_cov) @ j_inv
    lam = float(np.max(np.linalg.eigvals(k_mat @ sigma).real, initial=0.0))
    mu = float(np.max(np.linalg.eigvals(j @ sigma).real, initial=0.0))
    if not (lam > 0 and np.isfinite(lam) and np.isfinite(mu)):
        return 0.0
    return max(mu, 0.0) / lam


def draw_cutoff(harm_scale: float | None, ratio: float | None, df: int, draw_harm: float,
                cutoff: float, level: float = 0.95) -> float:
    r"""Not the default (measured in docs/evidence/prior_shift_log.md, "One draw's harm when nothing moved";
    ``benchmarks/shift_draw_harm.py``): the cutoff ``c`` (at least ``cutoff``) at which a draw with no shift and the statistic
    at its ``level`` quantile ``q`` is hurt by at most ``draw_harm`` (relative log loss):
    ``scale * ((q - a)**2 / q + 2 * ratio * (q - a)) <= draw_harm`` with ``a = c * df``
    (:func:`null_move_ratio`); the harm grows with ``T``, so under no shift at most
    ``1 - level`` of the draws exceed ``draw_harm``.

    Examples
    --------
    >>> from probwrap.shift._shift_tests import draw_cutoff
    >>> round(draw_cutoff(0.034, 0.85, 1, 0.02, 1.18), 3)
    3.512
    """
    from scipy.stats import chi2 as chi2_dist

    if harm_scale is None or ratio is None or not np.isfinite(harm_scale) or harm_scale <= 0:
        return float(cutoff)
    q = float(chi2_dist.ppf(level, df))
    r = max(float(ratio), 0.0)
    x = q * (-r + np.sqrt(r * r + draw_harm / (harm_scale * q)))
    return float(max(cutoff, (q - x) / df))


def estimate_amplification(
    change: np.ndarray, score_second_moment: np.ndarray, mean_cov: np.ndarray, raw_statistic: float
) -> float:
    r"""How much farther the maximum-likelihood estimate moved than the one-step estimate,
    squared: ``max(1, W / T)``, a factor on :func:`null_harm_scale`.

    The harm bound of :func:`null_harm_scale` assumes the estimate that will be applied is the
    one-step estimate :math:`X = J^{-1}\bar u` (one Newton step of the prior log-likelihood
    from the source prior, :math:`J = E[u u^\top]` its information there), whose size under
    no shift the shift statistic :math:`T = X^\top \Sigma^{-1} X` measures,
    :math:`\Sigma = J^{-1} V J^{-1}`. EM's fixed point :math:`\hat\pi` can lie much farther
    out than :math:`X` where the likelihood is far from quadratic — posteriors near 0 and 1
    after a calibration fitted on a few labelled rows, e.g. naive Bayes with 20 rows moving a
    5 % class to 86 % on data where nothing moved — and the applied move is a share of that.
    With :math:`d = \hat\pi - \pi^s` (coordinates ``1..k-1``) and its statistic on the same
    scale, :math:`W = d^\top \Sigma^{-1} d = d^\top J V^{-1} J d` (Wald's form beside the
    score form :math:`T`; the two agree where the log-likelihood is quadratic), the moves
    scale by :math:`\sqrt{W/T}` and the second-order harm by :math:`W/T`; never below 1, so
    the bound only grows.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._shift_tests import estimate_amplification
    >>> # one-step estimate 0.1 (T = 4 with variance 0.0025), the estimate itself moved 0.3
    >>> j, v = np.array([[10.0]]), np.array([[0.25]])
    >>> round(estimate_amplification(np.array([0.3]), j, v, 4.0), 6)
    9.0
    """
    d = np.atleast_1d(np.asarray(change, dtype=float))
    j = np.atleast_2d(np.asarray(score_second_moment, dtype=float))
    v = np.atleast_2d(np.asarray(mean_cov, dtype=float))
    raw = float(raw_statistic) if raw_statistic is not None else 0.0
    if not (raw > 0 and np.all(np.isfinite(d)) and np.any(v)):
        return 1.0
    jd = j @ d
    wald = float(jd @ np.linalg.pinv(v) @ jd)
    if not np.isfinite(wald):
        return 1.0
    return max(1.0, wald / raw)


def evidence_cutoff(harm_scale: float | None, df: int, max_harm: float | None,
                    floor: float) -> float:
    r"""The cutoff ``c`` of the shrinkage rule ``w = max(0, 1 - c df / T)``.

    ``floor`` (``min_evidence``) when ``max_harm`` is None or the expected relative harm
    under no shift, ``harm_scale * null_harm(floor, df)``, is already at most ``max_harm``;
    otherwise the smallest ``c > floor`` with ``harm_scale * null_harm(c, df) = max_harm``
    (root by Brent's method; :func:`null_harm` falls monotonically in ``c``).

    Examples
    --------
    >>> from probwrap.shift._shift_tests import evidence_cutoff, null_harm
    >>> evidence_cutoff(0.01, 1, 0.01, 1.0)          # harmless enough at the floor
    1.0
    >>> c = evidence_cutoff(0.2, 1, 0.01, 1.0)
    >>> round(0.2 * null_harm(c, 1), 6)
    0.01
    """
    if max_harm is None or harm_scale is None or not np.isfinite(harm_scale) or harm_scale <= 0:
        return float(floor)
    if harm_scale * null_harm(floor, df) <= max_harm:
        return float(floor)
    from scipy.optimize import brentq

    def excess(c: float) -> float:
        return harm_scale * null_harm(c, df) - max_harm

    hi = max(float(floor), 1.0)
    while excess(hi) > 0 and hi < 1e4:
        hi *= 2.0
    if excess(hi) > 0:
        return hi
    return float(brentq(excess, float(floor), hi, xtol=1e-6))


def _mean_cov(v: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    wn = w / w.sum()
    n_eff = float(w.sum() ** 2 / np.dot(w, w))
    mean = wn @ v
    c = v - mean
    cov = (c * wn[:, None]).T @ c
    return mean, cov, n_eff


def shift_score_test(
    proba: Any,
    source_prior: Any,
    *,
    sample_weight: Any = None,
    source_proba: Any = None,
    source_sample_weight: Any = None,
    source_y: Any = None,
    variance: str | None = None,
    cells: Any = None,
    source_cells: Any = None,
) -> ShiftTestResult:
    r"""Score test that unlabelled rows have the source class priors; no estimate needed.

    Each row's score of the prior log-likelihood at the source prior is
    :math:`u_{nj} = p(j \mid x_n)/\pi^s_j - p(0 \mid x_n)/\pi^s_0` for
    :math:`j = 1..k-1`. Under no shift its mean over the unlabelled rows is zero (Rao's score
    test; Rao 1948). Given the labelled rows' posteriors ``source_proba``, the test compares
    the mean score of the two samples instead: "no shift" is then that the unlabelled rows come
    from the population the labelled rows were drawn from, so the labelled rows' own sampling
    error — the multinomial error of their class shares, which the posteriors and
    ``source_prior`` were fitted to, and the error of a calibration fitted on them — is part of
    the test. To first order both enter through the labelled rows' plain mean score (the
    calibration's error moves both samples' means alike under no shift and cancels), so the
    statistic is a two-sample comparison of means,
    :math:`T = \Delta^\top V^{-1} \Delta` (``n`` below Kish's effective sample sizes, so the
    test does not depend on the scale of the weights).

    By default (``variance="pooled"``) :math:`V = S\,(1/n_t + 1/n_s)` with one covariance of
    the per-row scores pooled over both samples, :math:`S = (n_t \Sigma_t + n_s \Sigma_s) /
    (n_t + n_s - 2)` — Hotelling's two-sample :math:`T^2`, referred to
    :math:`\nu p / (\nu - p + 1)\, F_{p,\, \nu - p + 1}` with :math:`\nu = n_t + n_s - 2` and
    :math:`p = k - 1`; for two classes Student's two-sample t-test (``raw_statistic`` is
    ``scipy.stats.ttest_ind(..., equal_var=True)``'s t squared, ``pvalue`` its p-value).
    Under "no shift" both samples come from one population, so one covariance is right, and
    it is estimated from all rows: with few labelled rows their own covariance is very
    uncertain — for the skewed score of a rare class it is too small in most draws, and a test
    that reads it alone rejects too often even with a t reference (twice the nominal rate for
    20 labelled rows in the benchmark's sweep; tested).

    With ``variance="separate"`` (and always with ``source_y``) :math:`V = V_t + V_s` with
    :math:`V = \Sigma / (n - 1)`, referred to the F approximation of the multivariate
    Behrens-Fisher problem, :math:`T \sim \nu p / (\nu - p + 1)\, F_{p,\, \nu - p + 1}` with

    .. math::

        \nu = \frac{p + p^2}{\sum_i \bigl(\operatorname{tr}[(V_i S^{-1})^2]
              + \operatorname{tr}[V_i S^{-1}]^2\bigr) / (n_i - 1)}, \qquad S = \sum_i V_i

    (the affine-invariant approximation of Krishnamoorthy & Yu 2004, written from memory with
    :math:`n_i - 1`, so that for two classes it is exactly Welch's (1947) unequal-variance
    t-test: ``statistic`` is then statsmodels' ``CompareMeans.ttest_ind(usevar="unequal")``
    t-value squared, referred to the chi-square scale, and ``pvalue`` its p-value).
    ``statistic`` is reported on the chi-square scale (the chi-square quantile at the
    p-value), ``raw_statistic`` is :math:`T`. With many rows of both kinds
    :math:`\nu` is large and the two coincide.

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Calibrated posteriors of the unlabelled rows.
    source_prior : array-like of shape (k,)
        Priors the posteriors were learned under.
    sample_weight : array-like of shape (n,), default=None
    source_proba : array-like of shape (m, k), default=None
        Calibrated posteriors of the labelled rows (None: one-sample test, posteriors and
        ``source_prior`` taken as exact; chi-square reference).
    source_sample_weight : array-like of shape (m,), default=None
    source_y : array-like of shape (m,), default=None
        Class indices of the labelled rows. When given, the labelled mean is the
        class-stratified mean :math:`\sum_c \pi^s_c \bar u_c` with the stratified variance
        :math:`\sum_c (\pi^s_c)^2 s^2_c / (n_c - 1)` (one variance component per class in
        :math:`\nu`): this tests the unlabelled rows against *exactly* the priors
        ``source_prior``, as when these are known from elsewhere and the labelled rows were
        drawn by class. Labelled class shares that are themselves an estimate do not belong
        here: the stratified variance leaves out their error and rejects far too often when the
        labelled rows are few (``PriorShiftWrapper`` never passes ``source_y``).
    variance : {"pooled", "separate"} or None, default=None
        With ``source_proba``: one score covariance pooled over both samples (Hotelling /
        Student) or one per sample (Behrens-Fisher / Welch). None: ``"pooled"`` without
        ``source_y`` and cells (what ``PriorShiftWrapper`` uses), ``"separate"`` otherwise.
    cells, source_cells : array-like of shape (n,) / (m,), default=None
        The cell of every unlabelled / labelled row (outcomes aggregated as counts ``k`` of
        ``n``, the rows of one sampled group sharing a cell): that sample's mean score then has
        the cluster-robust variance on its cells with ``cells - 1`` degrees of freedom
        (:mod:`probwrap.shift._cells`), and the variances are separate. ``source_cells`` goes
        with the plain labelled mean (not with ``source_y``).

    Returns
    -------
    ShiftTestResult
        ``prior`` is None.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import shift_score_test
    >>> rng = np.random.default_rng(1)
    >>> p1 = rng.uniform(0.6, 0.99, size=200)      # every row leans to class 1
    >>> res = shift_score_test(np.column_stack([1 - p1, p1]), [0.5, 0.5])
    >>> bool(res.pvalue < 1e-6)
    True
    """
    from ._cells import cell_mean_cov, check_cells

    p, w = _check_target(proba, sample_weight, owner="shift_score_test")
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    cell_t = check_cells(cells, p.shape[0], "cells")
    if cell_t is None:
        mean, cov, n = _mean_cov(_score_rows(p, src), w)
    else:
        mean, cov, n = cell_mean_cov(_score_rows(p, src), w, cell_t)
    clustered = cell_t is not None
    source = None
    if source_proba is not None:
        ps, ws = _check_target(source_proba, source_sample_weight, name="source_proba",
                               owner="shift_score_test")
        if ps.shape[1] != k:
            raise ValueError(f"`source_proba` has {ps.shape[1]} columns but `proba` has {k}.")
        ys = None
        if source_y is not None:
            check_same_length(("source_proba", ps), ("source_y", source_y))
            ys, _ = check_labels(source_y, name="source_y", classes=np.arange(k), min_classes=1)
        cell_s = check_cells(source_cells, ps.shape[0], "source_cells")
        if cell_s is not None and ys is not None:
            raise ValueError("`source_cells` goes with the plain labelled mean: leave "
                             "`source_y` as None.")
        if cell_s is None:
            source = _source_moments(_score_rows(ps, src), ws, ys, src)
        else:
            m_s, c_s, g_s = cell_mean_cov(_score_rows(ps, src), ws, cell_s)
            source = (m_s, ((c_s / max(g_s - 1.0, 1.0), g_s),))
            clustered = True
    elif source_cells is not None:
        raise ValueError("`source_cells` needs `source_proba` (the labelled rows).")
    if variance is None:
        variance = "separate" if source_y is not None or clustered else "pooled"
    if variance not in ("pooled", "separate"):
        raise ValueError(f"`variance` must be 'pooled', 'separate' or None; got {variance!r}.")
    if variance == "pooled" and clustered:
        raise ValueError("`variance='pooled'` pools per-row covariances; with `cells` or "
                         "`source_cells` the variances are separate (leave `variance` None).")
    if variance == "pooled" and source_y is not None:
        raise ValueError(
            "`variance='pooled'` needs the plain labelled mean: leave `source_y` as None (the "
            "class-stratified mean has one variance component per class)."
        )
    res = _score_stat_moments((mean, cov, n), source, k, pooled=variance == "pooled",
                              source_prior=src)
    return ShiftTestResult(statistic=res.statistic, pvalue=res.pvalue, df=k - 1,
                           raw_statistic=res.raw, denominator_df=res.denominator_df)


def _source_moments(
    u: np.ndarray,
    w: np.ndarray,
    y: np.ndarray | None,
    prior: np.ndarray,
    n_eff: float | None = None,
) -> tuple[np.ndarray, tuple]:
    """Mean of the labelled rows' scores and the variance components of that mean.

    Returns ``(mean, ((V_1, n_1), ...))``: the covariance of the mean as a sum of independent
    components ``V_i`` with their effective rows ``n_i`` (for the degrees of freedom of
    :func:`_score_stat_moments`). Without ``y`` (what the wrapper uses): the plain weighted mean
    with one component ``cov / (n - 1)``, ``n`` Kish's count or ``n_eff``. With class indices
    ``y``: the class-stratified mean ``sum_c prior_c mean_c`` with one component
    ``prior_c^2 cov_c / (n_c - 1)`` per class (``n_c`` Kish's count of class ``c``, or ``n_eff``
    times the class's weight share).
    """
    if y is None:
        mean, cov, n = _mean_cov(u, w)
        n = float(n_eff) if n_eff else n
        return mean, ((cov / max(n - 1.0, 1.0), n),)
    total = float(w.sum())
    mean = np.zeros(u.shape[1])
    parts = []
    for c in range(prior.shape[0]):
        rows = y == c
        wc = w[rows]
        if wc.sum() <= 0:
            continue
        m_c, c_c, n_c = _mean_cov(u[rows], wc)
        if n_eff:
            n_c = float(n_eff) * float(wc.sum()) / total
        mean = mean + prior[c] * m_c
        parts.append((prior[c] ** 2 * c_c / max(n_c - 1.0, 1.0), n_c))
    return mean, tuple(parts)


def _source_moments_from_sums(
    sum_u: np.ndarray, sum_uu: np.ndarray, sum_w: float, sum_ww: float
) -> tuple[np.ndarray, tuple]:
    """:func:`_source_moments` (plain, no classes) from weighted sums over the labelled rows:
    ``sum w u``, ``sum w u u^T``, ``sum w`` and ``sum w^2`` (so blocks on a cluster can be
    summed first)."""
    mean = np.asarray(sum_u, dtype=float) / sum_w
    cov = np.atleast_2d(sum_uu) / sum_w - np.outer(mean, mean)
    n = float(sum_w) ** 2 / float(sum_ww)
    return mean, ((cov / max(n - 1.0, 1.0), n),)


@dataclass(frozen=True)
class _ScoreStat:
    statistic: float  # on the chi-square scale with k - 1 degrees of freedom
    pvalue: float
    raw: float  # Delta' (V_t + V_s)^-1 Delta
    denominator_df: float
    mean_cov: np.ndarray  # V_t + V_s: covariance of the difference of the mean scores


def _welch_df(parts: list, total: np.ndarray, p: int) -> float:
    """``nu`` of the F approximation (see :func:`shift_score_test`) for independent variance
    components ``(V_i, n_i)`` summing to ``total``."""
    inv = np.linalg.pinv(total)
    den = 0.0
    for v, n in parts:
        a = np.atleast_2d(v) @ inv
        den += (float(np.trace(a @ a)) + float(np.trace(a)) ** 2) / max(float(n) - 1.0, 1.0)
    return float(p + p * p) / den if den > 0 else float("inf")


def _pooled_total(cov_t: np.ndarray, n_t: float, source_parts: tuple) -> tuple | None:
    """Covariance of the difference of the two mean scores with one per-row covariance pooled
    over both samples (Hotelling's two-sample :math:`T^2`), and its degrees of freedom
    ``n_t + n_s - 2``; None when the labelled side is not a single plain component with a
    finite number of rows (class-stratified, or pickled without it)."""
    if len(source_parts) != 1:
        return None
    v_s, n_s = source_parts[0]
    n_t, n_s = float(n_t), float(n_s)
    if not (np.isfinite(n_s) and np.isfinite(n_t) and n_t + n_s > 2.0):
        return None
    # the components are (biased covariance) / (n - 1): undo that for the labelled side
    cov_s = np.atleast_2d(v_s) * max(n_s - 1.0, 1.0)
    pooled = (n_t * np.atleast_2d(cov_t) + n_s * cov_s) / (n_t + n_s - 2.0)
    return pooled * (1.0 / n_t + 1.0 / n_s), n_t + n_s - 2.0


def _flat_scores(target: tuple, source: tuple | None, source_prior: Any) -> bool:
    """True when every row's score is the same in both samples up to rounding: the posteriors
    then carry no information about the priors (a model with constant output), and the
    statistic would be rounding noise over rounding noise (seen: a chi-square of 45, p = 2e-11,
    for posteriors equal in every row). The scores' terms are bounded by ``1 / min(prior)``, so
    a per-row standard deviation below ``1e-9`` of that is taken as none."""
    floor = (1e-9 / float(np.min(source_prior))) ** 2
    _, cov, _ = target
    variances = [np.diag(np.atleast_2d(cov))]
    if source is not None:
        variances.extend(np.diag(np.atleast_2d(v)) * max(float(n) - 1.0, 1.0)
                         for v, n in source[1])
    return all(bool(np.all(v <= floor)) for v in variances)


def _score_stat_moments(target: tuple, source: tuple | None, k: int,
                        pooled: bool = False, source_prior: Any = None) -> _ScoreStat:
    """Score statistic from the target's (mean, covariance, effective rows) of the per-row
    scores and the labelled rows' (mean, variance components) of :func:`_source_moments`.

    ``pooled``: one covariance of the per-row scores for both samples (see
    :func:`shift_score_test`, ``variance="pooled"``); otherwise separate variances with the
    F approximation of the Behrens-Fisher problem. With ``source_prior``, scores constant to
    rounding in both samples (:func:`_flat_scores`) give a statistic of 0 and a p-value of 1:
    no evidence of a shift."""
    from scipy.stats import f as f_dist

    mean, cov, n = target
    p = k - 1
    if source_prior is not None and _flat_scores(target, source, source_prior):
        return _ScoreStat(0.0, 1.0, 0.0, float("inf"), np.zeros((p, p)))
    parts = [(np.atleast_2d(cov) / max(n - 1.0, 1.0), n)]
    both = None
    if source is not None:
        m_s, source_parts = source
        mean = mean - m_s
        parts.extend(source_parts)
        if pooled:
            both = _pooled_total(cov, n, source_parts)
    if both is not None:
        total, nu = both
    else:
        total = sum(np.atleast_2d(v) for v, _ in parts)
    raw = float(mean @ np.linalg.pinv(total) @ mean) if np.any(total) else 0.0
    raw = max(raw, 0.0)
    if both is None:
        nu = _welch_df(parts, total, p) if np.any(total) else float("inf")
    ddf = max(nu - p + 1.0, 1.0)
    if not np.isfinite(ddf) or ddf > 1e7:  # the F reference is chi-square to 7 digits
        pvalue = float(chi2.sf(raw, p))
        return _ScoreStat(raw, pvalue, raw, float("inf"), total)
    pvalue = float(f_dist.sf(raw * ddf / (p * (ddf + p - 1.0)), p, ddf))
    # the chi-square quantile at the same p-value; beyond floating point's smallest p-values
    # the raw statistic (larger still) stands in
    stat = float(chi2.isf(pvalue, p)) if pvalue > 1e-300 else raw
    return _ScoreStat(min(stat, raw), pvalue, raw, ddf, total)


# -- confusion-matrix estimators ---------------------------------------------------------------
