"""Bootstrap confidence intervals: bias-corrected and accelerated (BCa) and percentile."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy.special import ndtr, ndtri

from .._validation import plain

__all__ = ["bca_interval", "fold_shares", "jackknife_acceleration", "score_interval"]


def jackknife_acceleration(jackknife: Sequence[Any]) -> np.ndarray:
    r"""Acceleration of the BCa interval from leave-one(-group)-out estimates of independent samples.

    For each independent sample ``j`` with ``n_j`` leave-one-out (or leave-one-group-out)
    estimates :math:`\hat\theta_{(i)}`, the jackknife influence values are
    :math:`U_{ji} = (n_j - 1)(\bar\theta_j - \hat\theta_{(i)})` and

    .. math::

        \hat a = \frac{1}{6}\,
            \frac{\sum_j n_j^{-3} \sum_i U_{ji}^3}{\bigl(\sum_j n_j^{-2} \sum_i U_{ji}^2\bigr)^{3/2}}

    (Efron 1987, eq. 6.6, for one sample; Efron & Tibshirani 1993, section 14.3 and eq. 15.36,
    summed over independent samples). With groups of rows left out, ``n_j`` is the number of
    groups; the estimate stays consistent, with more noise.

    Parameters
    ----------
    jackknife : sequence of array-like, each of shape (n_j,) or (n_j, k)
        Leave-out estimates, one array per independent sample.

    Returns
    -------
    ndarray of shape () or (k,)
        0 where the jackknife values do not vary.
    """
    nums, dens = 0.0, 0.0
    for values in jackknife:
        v = np.asarray(values, dtype=float)
        n = float(v.shape[0])
        u = (n - 1.0) * (v.mean(axis=0) - v)
        nums = nums + np.sum(u**3, axis=0) / n**3
        dens = dens + np.sum(u**2, axis=0) / n**2
    dens = np.asarray(dens, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(dens > 0, np.asarray(nums) / (6.0 * np.maximum(dens, 1e-300) ** 1.5), 0.0)
    return a


def bca_interval(
    estimate: Any,
    draws: Any,
    jackknife: Sequence[Any] | None = None,
    *,
    confidence_level: float = 0.95,
) -> np.ndarray:
    r"""Bias-corrected and accelerated bootstrap interval (Efron 1987).

    With :math:`\hat\theta` the estimate on the data, :math:`\hat\theta^*_b` its bootstrap
    replicates, :math:`z_0 = \Phi^{-1}(\#\{\hat\theta^*_b < \hat\theta\}/B + \tfrac12
    \#\{\hat\theta^*_b = \hat\theta\}/B)` and the acceleration :math:`a`
    (:func:`jackknife_acceleration`; 0 without ``jackknife``, which gives the bias-corrected
    percentile interval), the endpoints are the replicate quantiles at

    .. math::

        \alpha_{1,2} = \Phi\Bigl(z_0 + \frac{z_0 + z_{\alpha/2,\,1-\alpha/2}}
                                         {1 - a (z_0 + z_{\alpha/2,\,1-\alpha/2})}\Bigr)

    (Efron & Tibshirani 1993, eq. 14.10). Ties are counted half, as in SciPy's
    ``scipy.stats.bootstrap(method="BCa")``; fed the same replicates and jackknife values the two
    agree (tested). Where every replicate lies on one side of the estimate (the estimate sits on
    a boundary) :math:`z_0` is capped at the quantile of half a replicate, instead of giving an
    undefined interval.

    Parameters
    ----------
    estimate : float or array-like of shape (k,)
    draws : array-like of shape (B,) or (B, k)
        Bootstrap replicates of the estimate.
    jackknife : sequence of array-like, default=None
        Leave-out estimates per independent sample, for the acceleration.
    confidence_level : float, default=0.95

    Returns
    -------
    ndarray of shape (2,) or (k, 2)

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import bca_interval
    >>> rng = np.random.default_rng(0)
    >>> x = rng.exponential(size=40)
    >>> boot = rng.choice(x, size=(2000, 40)).mean(axis=1)
    >>> jack = (x.sum() - x) / 39
    >>> lo, hi = bca_interval(x.mean(), boot, [jack])
    >>> bool(lo < x.mean() < hi)
    True
    """
    if not 0.0 < float(confidence_level) < 1.0:
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    theta = np.asarray(estimate, dtype=float)
    b = np.asarray(draws, dtype=float)
    if b.ndim == 0 or b.shape[0] < 1 or b.shape[1:] != theta.shape:
        raise ValueError(
            f"`draws` must have shape (B,) + estimate.shape = (B,) + {theta.shape}; got {b.shape}."
        )
    n_b = b.shape[0]
    frac = (np.sum(b < theta, axis=0) + np.sum(b <= theta, axis=0)) / (2.0 * n_b)
    frac = np.clip(frac, 0.5 / n_b, 1.0 - 0.5 / n_b)
    z0 = ndtri(frac)
    a = 0.0 if jackknife is None else jackknife_acceleration(jackknife)
    alpha = (1.0 - float(confidence_level)) / 2.0
    out = []
    for z in (ndtri(alpha), ndtri(1.0 - alpha)):
        num = z0 + z
        out.append(ndtr(z0 + num / (1.0 - a * num)))
    levels = np.stack(out, axis=-1)  # shape theta.shape + (2,)
    if theta.ndim == 0:
        return np.quantile(b, levels)
    return np.stack(
        [np.quantile(b[:, j], levels[j]) for j in range(theta.shape[0])], axis=0
    )


def fold_shares(
    source_fold: Any, y: Any, sample_weight: np.ndarray, n_folds: int
) -> tuple[np.ndarray, np.ndarray]:
    """Each fold's share of the labelled weight, and the labelled weights re-weighted within
    each class so that every fold holds that share of the class (see :func:`score_interval`).

    Returns ``(share, weights)``; a class with no row in a fold spreads the fold's share over
    its other folds (its weight there is 0). With stratified folds the factors are close to 1.
    """
    f = np.asarray(source_fold).astype(int)
    yy = np.asarray(y).astype(int)
    w = np.asarray(sample_weight, dtype=float)
    if f.shape != w.shape or f.min(initial=0) < 0 or f.max(initial=0) >= n_folds:
        raise ValueError(
            f"`source_fold` must give a fold in 0..{n_folds - 1} for each labelled row; got "
            f"shape {f.shape} for {w.shape[0]} rows."
        )
    share = np.bincount(f, weights=w, minlength=n_folds) / w.sum()
    out = w.copy()
    for c in np.unique(yy):
        rows = yy == c
        per = np.bincount(f[rows], weights=w[rows], minlength=n_folds)
        target = np.where(per > 0, share, 0.0)
        target = target / target.sum()
        scale = np.where(per > 0, target * w[rows].sum() / np.maximum(per, 1e-300), 0.0)
        out[rows] = w[rows] * scale[f[rows]]
    return share, out


def score_interval(
    proba: Any,
    source_proba: Any,
    source_y: Any,
    source_prior: Any,
    *,
    sample_weight: Any = None,
    source_sample_weight: Any = None,
    effective_rows: float | None = None,
    source_effective_rows: float | None = None,
    confidence_level: float = 0.95,
    n_grid: int = 241,
    centre: float | None = None,
    small_sample: bool = True,
    fold_proba: Any = None,
    source_fold: Any = None,
    cells: Any = None,
    source_cells: Any = None,
    target_moments: Any = None,
    null_variance_below: float = 100.0,
    null_variance_fade_from: float | None = None,
) -> tuple[np.ndarray, bool]:
    r"""Two-sample score interval for the positive-class prior of unlabelled rows (two classes).

    Under prior shift to priors :math:`\pi` every function of the features has the same mean
    on the unlabelled rows as on the labelled rows re-weighted by :math:`\pi_y / \pi^s_y`
    (the defining property of label shift; Lipton, Wang & Smola 2018, section 2). Taking the
    score of the prior log-likelihood at :math:`\pi`,
    :math:`u(x; \pi) = (q_1 - q_0) / ((1 - \pi) q_0 + \pi q_1)` with :math:`q_j = p(j \mid x)
    / \pi^s_j`, the statistic

    .. math::

        T(\pi) = \frac{\bigl(\bar u_t(\pi) - \bar f_s(\pi)\bigr)^2}
                      {s^2_t(\pi) / (n_t - 1) + \sum_c \pi_c^2\, s^2_c(\pi) / (n_c - 1)},
        \qquad f = \frac{\pi_y}{\pi^s_y}\, u(x; \pi)\ \text{on the labelled rows},

    (the labelled mean and variance taken within each class and combined with the shares
    :math:`\pi`, since the labelled class shares are known exactly) is approximately the
    square of Student's t at the true prior, with Satterthwaite's degrees of freedom
    :math:`\nu = V^2 / \sum_i V_i^2 / (n_i - 1)` of its three variance components :math:`V_i`
    (Welch 1947; :math:`\nu` falls with the labelled rows of each class, and grows to
    chi-square with one degree of freedom with many rows of all kinds), and the interval
    is every :math:`\pi` with :math:`T(\pi) \le t^2_{\nu(\pi),\, (1 + \text{level})/2}` (test
    inversion, as for the Wilson (1927) score interval of a proportion). Both samples' sampling error enter
    the denominator; because the equality of means holds for every calibration map, the
    estimated calibration contributes only at second order. Test inversion stays honest at
    the edges, where the bootstrap of an estimate stuck at 0 degenerates. At
    :math:`\pi = \pi^s` it is the raw statistic of :func:`shift_score_test` with ``source_y``
    (the labelled class shares taken as exact, which is right here: the shares in the
    statistic are the candidate prior, not an estimate).

    With a model refit on the labelled rows, the labelled rows' posteriors come from fold models
    (cross-fitting) and the unlabelled rows' from the model refit on all of them; the two
    differ by how much a refit moves with the draw of the labelled rows, which neither
    sample's error carries. ``fold_proba`` (the unlabelled rows scored by every fold model) and
    ``source_fold`` (the fold of every labelled row) remove that difference: the unlabelled
    side takes each row's score averaged over the fold models, :math:`\bar u(x) = \sum_k
    \omega_k u_k(x)` with :math:`\omega_k` the fold's share of the labelled weight, and the
    labelled side re-weights each class's rows so that every fold holds that same share of
    them. Both sides then mix the same fold models in the same proportions, and for each fold
    the equality of means holds exactly (its model never saw the fold's rows nor the
    unlabelled rows): the cross-fitted moment condition averaged over folds and solved once
    (Chernozhukov et al. 2018, "Double/debiased machine learning", Econometrics Journal 21,
    Definition 3.2, DML2), whose error is the two samples' sampling error to first order for
    any model, because the condition holds for every fixed model.

    On few unlabelled rows (fewer than ``null_variance_below`` effective rows, without
    ``cells``, ``fold_proba`` or ``target_moments``) the unlabelled side's variance
    :math:`s^2_t(\pi) / (n_t - 1)` is replaced by its value *under the tested prior*,
    :math:`\bigl(\sum_c \pi_c\, \overline{u^2}_c(\pi) - \bar f_s(\pi)^2\bigr) / n_t`, the
    labelled rows of each class re-weighted to :math:`\pi` (Student's t keeps the
    :math:`n_t - 1` degrees of freedom of that component). This is the choice that makes
    Wilson's (1927) interval of a proportion a score interval rather than a Wald one: with
    posteriors that reveal the class it is Wilson's interval exactly (tested against
    statsmodels). On 20 rows the rows' own variance at a far prior is dominated by the rows that
    argue against it (a low-scoring row's score at a prior near 1 is large), so the test could
    not reject any prior and the interval of a rare class reached 1 in most batches, while it
    under-covered where a skewed score's variance came out small (see
    ``benchmarks/small_batch_interval.py`` and docs/evidence/prior_shift_log.md, "Small batches").
    From ``null_variance_below`` rows on the two variances agree at the true prior and the
    rows' own one, which holds whatever the prior-shift model, is kept. Between
    ``null_variance_fade_from`` and ``null_variance_below`` rows the two are blended, the
    weight of the one under the tested prior falling linearly from 1 to 0, and it is used
    only with enough labelled rows, its weight multiplied by one rising linearly from 0 at
    ``null_variance_fade_from`` to 1 at ``null_variance_below`` effective labelled rows: a
    convex combination of two variances that both hold at the true prior, so that the
    interval moves continuously with either count (as a step at 100 rows its ends moved by
    up to 0.55 between 99.99 and 100.01 rows on scikit-learn's breast cancer set;
    docs/evidence/prior_shift_log.md, "Small batches: the 100-row switch and broken assumptions").

    With ``cells`` / ``source_cells`` (aggregated counts: the rows of one group share a cell)
    a side's variance is the cluster-robust (sandwich) variance of its mean with the cells as
    clusters, known to ``cells - 1`` degrees of freedom (:mod:`probwrap.shift._cells`; Liang &
    Zeger 1986): on the labelled side the influence of each cell on the share-weighted class
    means, :math:`h_g = \sum_c \pi_c \sum_{i \in g, y_i = c} \tilde w_i (f_i - \bar f_c)`
    with :math:`\tilde w` the weights normalised within each class, so a cell's success and
    failure rows count together. The rows of a cell are then one unit, however many trials
    their weights count.

    Parameters
    ----------
    proba : array-like of shape (n, 2)
        Calibrated posteriors of the unlabelled rows.
    source_proba : array-like of shape (m, 2)
        Calibrated posteriors of the labelled rows.
    source_y : array-like of shape (m,)
        Their class indices (0 or 1).
    source_prior : array-like of shape (2,)
        The labelled rows' (weighted) class shares.
    sample_weight, source_sample_weight : array-like, default=None
    effective_rows, source_effective_rows : float, default=None
        Override Kish's effective sample sizes.
    confidence_level : float, default=0.95
    n_grid : int, default=241
        Grid points (uniform in log-odds, plus 0 and 1) searched for accepted priors when
        ``centre`` is not given or not accepted.
    centre : float, default=None
        A prior inside the interval (for example the maximum-likelihood estimate): the
        endpoints are then found by Brent's method between it and 0 and 1, without a grid.
    small_sample : bool, default=True
        Refer the statistic to Student's t with Satterthwaite's degrees of freedom (False:
        chi-square with one degree of freedom, the large-sample limit).
    fold_proba : array-like of shape (n_folds, n, 2), default=None
        Calibrated posteriors of the unlabelled rows from each fold model (see above).
    source_fold : array-like of shape (m,), default=None
        Fold (0 .. n_folds - 1) whose model gave each labelled row's posterior; required with
        ``fold_proba``.
    cells, source_cells : array-like of shape (n,) / (m,), default=None
        The cell (group of aggregated counts) of every unlabelled / labelled row; that side's
        variance is then clustered on its cells (above). None: every row is its own unit.
    target_moments : FoldScoreMoments, default=None
        Instead of ``fold_proba``, for unlabelled rows that are not at hand (more than 20,000
        Dask or Spark rows): the weighted mean and second moment of their fold-averaged score
        on a grid of priors, summed where the rows live and interpolated between
        (:mod:`probwrap.shift._fold_moments`); ``proba`` then only locates the rows' range.
    null_variance_below : float, default=100
        Below this many effective unlabelled rows their variance is taken under the tested
        prior (above), where the labelled rows number at least as many effective rows (fewer
        are too noisy to stand in for the batch); 0 always uses the rows' own variance (the
        interval before 5 December 2026).
    null_variance_fade_from : float, default=None
        Where the variance under the tested prior starts to fade (above): between this many
        and ``null_variance_below`` effective rows the two variances are blended. None: half
        of ``null_variance_below``; equal to it gives the step at ``null_variance_below``
        of before.

    Returns
    -------
    interval : ndarray of shape (2,)
        Lower and upper bound of the positive-class prior.
    consistent : bool
        False when no prior passes the test (the labelled and unlabelled rows disagree more
        than any prior shift explains); the interval is then the single least-rejected prior.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import score_interval
    >>> rng = np.random.default_rng(0)
    >>> def draw(n, prior):
    ...     y = (rng.uniform(size=n) < prior).astype(int)
    ...     p1 = 1 / (1 + np.exp(-2 * rng.normal(2.0 * y - 1.0)))
    ...     return np.column_stack([1 - p1, p1]), y
    >>> p_s, y_s = draw(2000, 0.5)
    >>> p_t, _ = draw(2000, 0.2)
    >>> (lo, hi), ok = score_interval(p_t, p_s, y_s, [0.5, 0.5])
    >>> bool(lo < 0.2 < hi), ok
    (True, True)
    """
    from scipy.optimize import brentq
    from scipy.stats import chi2
    from scipy.stats import f as f_dist

    p_t = np.asarray(proba, dtype=float)
    p_s = np.asarray(source_proba, dtype=float)
    y_s = np.asarray(source_y).astype(int)
    src = np.asarray(source_prior, dtype=float)
    w_t = np.ones(p_t.shape[0]) if sample_weight is None else np.asarray(sample_weight, float)
    w_s = np.ones(p_s.shape[0]) if source_sample_weight is None else np.asarray(
        source_sample_weight, float
    )
    n_t = effective_rows or float(w_t.sum() ** 2 / np.dot(w_t, w_t))
    wt = w_t / w_t.sum()
    q_t, q_s = p_t / src, p_s / src
    a_t, d_t = q_t[:, 0], q_t[:, 1] - q_t[:, 0]
    tiny = np.finfo(float).tiny
    folds = None
    if fold_proba is not None:
        fp = np.asarray(fold_proba, dtype=float)
        if source_fold is None or fp.ndim != 3 or fp.shape[1:] != p_t.shape:
            raise ValueError(
                "`fold_proba` must have shape (n_folds,) + proba.shape, with `source_fold` "
                f"given; got {fp.shape} and proba {p_t.shape}."
            )
        fp = fp / src
        share, w_s = fold_shares(source_fold, y_s, w_s, fp.shape[0])
        folds = (fp[:, :, 0], fp[:, :, 1] - fp[:, :, 0], share)
    elif target_moments is not None:
        if source_fold is None:
            raise ValueError("`target_moments` needs `source_fold` (the labelled rows' folds).")
        w_s = fold_shares(source_fold, y_s, w_s, target_moments.n_folds)[1]
    strata = []  # per class: score pieces, normalised weights, effective rows
    for c in (0, 1):
        rows = y_s == c
        wc = w_s[rows]
        if source_effective_rows:
            n_c = float(source_effective_rows) * float(wc.sum()) / float(w_s.sum())
        else:
            n_c = float(wc.sum() ** 2 / np.dot(wc, wc))
        strata.append((q_s[rows, 0], q_s[rows, 1] - q_s[rows, 0], wc / wc.sum(), n_c))

    from ._cells import cell_sums, check_cells

    cell_t = check_cells(cells, p_t.shape[0], "cells")
    cell_s = check_cells(source_cells, p_s.shape[0], "source_cells")
    if cell_t is not None:
        g_t = float(np.count_nonzero(cell_sums(w_t, cell_t) > 0))
        n_t = g_t
    if cell_s is not None:
        g_s = float(np.count_nonzero(cell_sums(w_s, cell_s) > 0))
        rows_of = [np.flatnonzero(y_s == c) for c in (0, 1)]

    level = float(confidence_level)
    if (isinstance(null_variance_below, bool) or not isinstance(null_variance_below, (int, float))
            or not null_variance_below >= 0):
        raise ValueError("`null_variance_below` must be a number >= 0 (effective unlabelled "
                         f"rows); got {plain(null_variance_below)!r}.")
    # the unlabelled side's variance under the tested prior (module docstring of the function)
    # (only where the labelled rows are at least as many: their second moment stands in for the
    # batch's, and on 16 labelled rows (statsmodels' spector) it was too noisy to trust —
    # benchmarks/prior_strong_evidence.py's spector cells covered 8 and 9 of 10 with it, 10 and
    # 10 without)
    fade_from = (0.5 * float(null_variance_below) if null_variance_fade_from is None
                 else null_variance_fade_from)
    if (isinstance(fade_from, bool) or not isinstance(fade_from, (int, float))
            or not 0 <= fade_from <= float(null_variance_below)):
        raise ValueError("`null_variance_fade_from` must be a number between 0 and "
                         f"`null_variance_below` ({plain(null_variance_below)!r}); got "
                         f"{plain(null_variance_fade_from)!r}.")
    below, n_s_all = float(null_variance_below), sum(st[3] for st in strata)
    # the weight of the variance under the tested prior: 1 up to fade_from unlabelled rows,
    # falling linearly to 0 at null_variance_below, times a weight on the labelled rows rising
    # linearly from 0 at fade_from to 1 at null_variance_below, so that the interval moves
    # continuously with either count instead of jumping at one of them
    # (benchmarks/small_batch_switch.py)
    if n_t >= below:
        w_unl = 0.0
    else:
        w_unl = 1.0 if n_t <= fade_from else (below - n_t) / (below - fade_from)
    if n_s_all >= below:
        w_lab = 1.0
    else:
        w_lab = 0.0 if n_s_all <= fade_from else (n_s_all - fade_from) / (below - fade_from)
    null_weight = w_unl * w_lab
    under_null = (folds is None and target_moments is None and cell_t is None
                  and null_weight > 0.0)

    def stat(t: np.ndarray) -> np.ndarray:
        """The statistic at each candidate prior, on the chi-square scale: ``T`` referred to
        ``F(1, nu)`` (the square of Student's t) with Satterthwaite's degrees of freedom ``nu``
        of the variance components, then mapped to the chi-square quantile at the same tail
        probability, so that one chi-square cut-off serves every candidate."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        out = np.empty(t.shape[0])
        for lo in range(0, t.shape[0], 32):  # memory: rows x 32 at a time
            tc = t[lo:lo + 32]
            if target_moments is not None:  # the rows' sums, taken where they live
                m_t, v_t = target_moments.moments(tc)
                comp = v_t / max(n_t - 1.0, 1.0)
            else:
                if folds is None:
                    u_t = d_t[:, None] / np.maximum(a_t[:, None] + tc * d_t[:, None], tiny)
                else:  # each row's score averaged over the fold models
                    a_f, d_f, share_f = folds
                    u_t = np.zeros((a_t.shape[0], tc.shape[0]))
                    for s_k, a_k, d_k in zip(share_f, a_f, d_f, strict=True):
                        u_t += s_k * d_k[:, None] / np.maximum(a_k[:, None] + tc * d_k[:, None],
                                                               tiny)
                m_t = wt @ u_t
                if cell_t is None:
                    v_t = np.maximum(wt @ (u_t * u_t) - m_t**2, 0.0)
                    comp = v_t / max(n_t - 1.0, 1.0)
                else:  # clustered on the unlabelled cells (G / (G - 1) sum of squared cell sums)
                    s_t = cell_sums((u_t - m_t) * wt[:, None], cell_t)
                    comp = g_t / max(g_t - 1.0, 1.0) * np.sum(s_t * s_t, axis=0)
            m_s = np.zeros(tc.shape[0])
            second_s = np.zeros(tc.shape[0])  # the labelled rows' E[u^2] at the shares tc
            target_comp = comp
            var = np.zeros(tc.shape[0])
            spread = np.zeros(tc.shape[0])
            h_s = None if cell_s is None else np.zeros((p_s.shape[0], tc.shape[0]))
            for c, (a_c, d_c, w_c, n_c) in enumerate(strata):
                share = tc if c == 1 else 1.0 - tc
                u_c = d_c[:, None] / np.maximum(a_c[:, None] + tc * d_c[:, None], tiny)
                m_c = w_c @ u_c
                m_s = m_s + share * m_c
                second_s = second_s + share * (w_c @ (u_c * u_c))
                if h_s is not None:  # this class's rows' influence, summed by cell below
                    h_s[rows_of[c]] = share * (u_c - m_c) * w_c[:, None]
                    continue
                v_c = np.maximum(w_c @ (u_c * u_c) - m_c**2, 0.0)
                comp = share**2 * v_c / max(n_c - 1.0, 1.0)
                var = var + comp
                spread = spread + comp**2 / max(n_c - 1.0, 1.0)
            if h_s is not None:
                s_s = cell_sums(h_s, cell_s)
                comp = g_s / max(g_s - 1.0, 1.0) * np.sum(s_s * s_s, axis=0)
                var = var + comp
                spread = spread + comp**2 / max(g_s - 1.0, 1.0)
            if under_null:  # few unlabelled rows: their score's variance at the tested prior
                null_comp = np.maximum(second_s - m_s**2, 0.0) / max(n_t, 1.0)
                target_comp = (null_comp if null_weight >= 1.0 else
                               null_weight * null_comp + (1.0 - null_weight) * target_comp)
            var = var + target_comp
            spread = spread + target_comp**2 / max(n_t - 1.0, 1.0)
            raw = (m_t - m_s) ** 2 / np.maximum(var, 1e-300)
            if small_sample:
                nu = np.where(spread > 0, var**2 / np.maximum(spread, 1e-300), np.inf)
                tail = np.where(np.isfinite(nu) & (nu < 1e7),
                                f_dist.sf(raw, 1, np.minimum(np.maximum(nu, 1.0), 1e7)),
                                chi2.sf(raw, 1))
                raw = np.where(tail > 1e-300, chi2.isf(np.maximum(tail, 1e-300), 1), raw)
            out[lo:lo + 32] = raw
        return out

    crit = float(chi2.ppf(level, 1))
    if np.ptp(np.concatenate([p_t[:, 1], p_s[:, 1]])) == 0.0:
        # every row has the same posterior: the score is the same constant in both samples for
        # every candidate prior, so no prior is rejected (the statistic would be rounding noise
        # over a zero variance); the data cannot place the prior at all
        return np.array([0.0, 1.0]), True

    def excess(t: float) -> float:
        v = float(stat(np.array([t]))[0])
        return (v if np.isfinite(v) else 1e300) - crit

    def root(outer: float, inner: float) -> float:
        """The endpoint between a rejected ``outer`` and an accepted ``inner`` prior; where a
        near-zero variance makes the statistic rounding-sensitive and the two points no longer
        bracket a root when evaluated one at a time, the outer (wider, conservative) point."""
        f_out, f_in = excess(outer), excess(inner)
        if not (f_out > 0 >= f_in):
            return float(outer)
        return float(brentq(excess, min(outer, inner), max(outer, inner), xtol=1e-10))

    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        if centre is not None and excess(float(centre)) <= 0:
            c = float(centre)
            lo_t = 0.0 if c <= 0 or excess(0.0) <= 0 else brentq(excess, 0.0, c, xtol=1e-10)
            hi_t = 1.0 if c >= 1 or excess(1.0) <= 0 else brentq(excess, c, 1.0, xtol=1e-10)
            return np.array([float(lo_t), float(hi_t)]), True
    inner = 1.0 / (1.0 + np.exp(-np.linspace(-14.0, 14.0, max(int(n_grid) - 2, 3))))
    grid = np.concatenate([[0.0], inner, [1.0]])
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        values = stat(grid)
        values = np.where(np.isfinite(values), values, np.inf)
        ok = values <= crit
        if not ok.any():
            best = float(grid[int(np.argmin(values))])
            return np.array([best, best]), False
        first, last = int(np.flatnonzero(ok)[0]), int(np.flatnonzero(ok)[-1])
        lo_t = grid[first] if first == 0 else root(grid[first - 1], grid[first])
        hi_t = grid[last] if last == grid.shape[0] - 1 else root(grid[last + 1], grid[last])
    return np.array([float(lo_t), float(hi_t)]), True
