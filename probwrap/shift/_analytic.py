"""Analytic (delta-method) interval of the EM prior that carries the labelled rows' error.

The maximum-likelihood prior :math:`\\hat\\pi` of the unlabelled rows solves the score equations
of Saerens, Latinne & Decaestecker (2002), one per free class share :math:`c = 1..k-1`,

.. math:: \\bar\\psi_t(\\pi; \\eta) = \\frac1{n_t}\\sum_j \\frac{r_c(x_j) - r_0(x_j)}
          {\\sum_l \\pi_l r_l(x_j)} = 0, \\qquad r_l(x) = p_l(x; \\theta) / \\pi^s_l ,

where the calibrated posteriors :math:`p(x; \\theta)` and the source prior :math:`\\pi^s` —
together :math:`\\eta` — were themselves estimated from the labelled rows, by their own
estimating equations (the calibration's score, and the class indicators minus their shares).
Stacking the two sets of equations over two independent samples (the M-estimator sandwich of
Stefanski & Boos 2002, "The calculus of M-estimation" — its stacked form written from memory —
with the nuisance parameters' equations from the second sample) gives, to first order,

.. math:: \\hat\\pi - \\pi \\approx -A^{-1}\\bigl(\\bar\\psi_t + D(\\hat\\eta - \\eta)\\bigr),
          \\qquad \\operatorname{Var}\\hat\\pi = A^{-1}\\Bigl(\\frac{V_t}{n_t} +
          D\\,\\Sigma_\\eta D^\\top\\Bigr)A^{-\\top},

with :math:`A = \\partial\\bar\\psi_t/\\partial\\pi` (minus the observed information),
:math:`D = \\partial\\bar\\psi_t/\\partial\\eta`, :math:`V_t` the covariance of the per-row scores,
and :math:`\\Sigma_\\eta` the sandwich covariance of :math:`\\hat\\eta` from the labelled rows —
the only thing the labelled rows contribute, so a fitted estimator keeps that small matrix
instead of the rows. The interval of each class share is the score (Wilson) interval of a
proportion on the effective number of rows :math:`n_c = \\hat\\pi_c(1-\\hat\\pi_c)/\\mathrm{se}_c^2`
that the delta-method variance implies (:func:`share_interval`, which also gives the normal
interval on the logit scale; the caller widens it to at least the Clopper-Pearson interval on
the unlabelled rows, as every interval here).
"""

from __future__ import annotations

import numpy as np
from scipy.stats import norm
from scipy.stats import t as student_t

from ._calibration import _log_softmax, scale_penalty

__all__: list[str] = []


def _logit_jacobian(z: np.ndarray, n_scale: int) -> np.ndarray:
    """d logits / d theta per row, shape (n, k, n_scale + k - 1) (theta: scales, biases 1..)."""
    n, k = z.shape
    jac = np.zeros((n, k, n_scale + k - 1))
    if n_scale == 1:
        jac[:, :, 0] = z
    else:
        jac[:, np.arange(k), np.arange(k)] = z
    jac[:, np.arange(1, k), n_scale + np.arange(k - 1)] = 1.0
    return jac


def _calibrated(cal, proba: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Calibrated posteriors (without the output floor, which the derivatives ignore) and the
    d p / d theta Jacobian of shape (n, k, m), or (proba, None) without a calibration."""
    if cal is None:
        return proba, None
    z = cal.log_scores(proba)
    k = z.shape[1]
    n_scale = 1 if cal.kind == "temperature" else k
    p = np.exp(_log_softmax(z * cal.scale_ + cal.bias_, axis=1))
    jac = _logit_jacobian(z, n_scale)
    # d p_l / d logit_m = p_l (delta_lm - p_m)
    curv = p[:, :, None] * np.eye(k)[None] - p[:, :, None] * p[:, None, :]
    return p, np.einsum("nlm,nmq->nlq", curv, jac, optimize=True)


def labelled_sums(
    cal, proba: np.ndarray, y: np.ndarray, w: np.ndarray, source_prior: np.ndarray,
) -> tuple[np.ndarray, ...]:
    """Weighted sums over labelled rows behind :func:`labelled_parameter_cov` (they add over
    blocks of rows): ``(sum w, sum w x_i, sum w x_i x_i^T, sum w H_i)`` with ``x_i = (g_i,
    e_i)`` — the calibration's per-row score ``g_i`` (when there is a calibration) and the
    class indicators ``e_i`` minus the source shares — and ``H_i`` the row's Hessian of the
    calibration's log loss (an empty matrix without a calibration)."""
    k = proba.shape[1]
    onehot = np.eye(k)[y]
    parts = [onehot[:, 1:] - source_prior[1:]]
    hess = np.zeros((0, 0))
    if cal is not None:
        z = cal.log_scores(proba)
        n_scale = 1 if cal.kind == "temperature" else k
        p = np.exp(_log_softmax(z * cal.scale_ + cal.bias_, axis=1))
        jac = _logit_jacobian(z, n_scale)
        parts.insert(0, np.einsum("nkq,nk->nq", jac, p - onehot))
        curv = p[:, :, None] * np.eye(k)[None] - p[:, :, None] * p[:, None, :]
        hess = np.einsum("n,nkq,nkl,nlr->qr", w, jac, curv, jac, optimize=True)
    x = np.hstack(parts)
    return np.array([w.sum()]), w @ x, (x * w[:, None]).T @ x, hess


def labelled_cov_from_sums(
    cal, sums: tuple[np.ndarray, ...], n_rows: float, n_eff: float,
) -> np.ndarray:
    """The sandwich covariance of ``eta`` from :func:`labelled_sums` (added over blocks):
    ``n_rows`` the row count behind the calibration's penalty (``count_weights``), ``n_eff``
    Kish's effective number of labelled rows."""
    total, sx, sxx, shess = sums
    total = float(np.asarray(total).ravel()[0])
    mean, second = sx / total, sxx / total
    m = second.shape[0]
    t = np.eye(m)
    if cal is not None:
        k = cal.bias_.shape[0]
        n_scale = 1 if cal.kind == "temperature" else k
        theta = np.concatenate([cal.scale_[:n_scale], cal.bias_[1:]])
        lam = float(cal.shrinkage) / n_rows if 0.0 < n_rows < np.inf else 0.0
        hess = shess / total + scale_penalty(theta, n_scale, lam)[2]
        q = theta.shape[0]
        t[:q, :q] = -np.linalg.inv(hess)  # the calibration's influence: -H^-1 g_i
    mean = t @ mean
    cov = t @ second @ t.T - np.outer(mean, mean)
    return cov / max(float(n_eff), 1.0)


def labelled_parameter_cov(
    cal, proba: np.ndarray, y: np.ndarray, w: np.ndarray, source_prior: np.ndarray,
    n_eff: float,
) -> np.ndarray:
    """Sandwich covariance of the labelled rows' estimates ``eta = (theta, pi^s_1..k-1)``.

    ``theta`` (the calibration's scales and biases, when there is a calibration) solves the
    penalised weighted score equations ``sum w~ g_i + penalty'(theta) = 0`` (``w~`` the weights
    summing to one), so ``theta^ - theta ~ -H^-1 sum w~ g_i`` with ``H`` the Hessian of the
    fitted objective; the source shares are ``sum w~ e_i`` with ``e_i`` the class indicators
    minus the shares. The covariance of the stacked per-row influence ``(-H^-1 g_i, e_i)`` over
    ``n_eff`` rows (Kish's effective size, as the shift test counts the labelled rows). Its
    calibration block is the robust (Huber-White) sandwich ``H^-1 (sum g_i g_i^T) H^-1``, not
    the inverse Hessian, so a misspecified map does not understate it: without the scale prior
    it equals statsmodels' ``cov_type="HC0"`` covariance of the same likelihood (tested).
    """
    from ..calibration._base import count_weights

    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    return labelled_cov_from_sums(cal, labelled_sums(cal, proba, y, w, source_prior),
                                  n_rows, n_eff)


def score_derivatives(
    cal, proba: np.ndarray, w: np.ndarray, source_prior: np.ndarray, prior: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-row scores ``psi`` (n, k-1) of the free class shares at ``prior``, their weighted
    mean's derivative ``A`` in the free shares (k-1, k-1) and ``D`` in ``eta = (theta,
    pi^s_1..k-1)`` (k-1, m) — ``theta`` only with a calibration."""
    k = proba.shape[1]
    src = np.asarray(source_prior, dtype=float)
    pi = np.asarray(prior, dtype=float)
    wn = w / w.sum()
    p, dp = _calibrated(cal, proba)
    r = p / src
    s = np.maximum(r @ pi, np.finfo(float).tiny)
    u = r[:, 1:] - r[:, :1]
    psi = u / s[:, None]
    a = -(psi * wn[:, None]).T @ psi
    # d psi_c / d r_l = (delta_lc - delta_l0) / s - psi_c pi_l / s   (c = 1..k-1)
    e = np.zeros((k - 1, k))
    e[np.arange(k - 1), np.arange(1, k)] = 1.0
    e[:, 0] = -1.0
    dpsi_dr = e[None] / s[:, None, None] - psi[:, :, None] * (pi / s[:, None])[:, None, :]
    blocks = []
    if dp is not None:
        dr_dtheta = dp / src[None, :, None]
        blocks.append(np.einsum("n,ncl,nlq->cq", wn, dpsi_dr, dr_dtheta, optimize=True))
    # r_l = p_l / pi^s_l with pi^s_0 = 1 - the sum of the others
    dr_dsrc = np.zeros((p.shape[0], k, k - 1))
    rows = -p / src**2                           # d r_l / d pi^s_l
    dr_dsrc[:, np.arange(1, k), np.arange(k - 1)] = rows[:, 1:]
    dr_dsrc[:, 0, :] = -rows[:, :1]              # d r_0 / d pi^s_d = p_0 / (pi^s_0)^2
    blocks.append(np.einsum("n,ncl,nld->cd", wn, dpsi_dr, dr_dsrc, optimize=True))
    return psi, a, np.hstack(blocks)


def target_sums(
    cal, proba: np.ndarray, w: np.ndarray, source_prior: np.ndarray, prior: np.ndarray,
) -> tuple[np.ndarray, ...]:
    """Weighted sums over unlabelled rows behind :func:`analytic_prior_interval` (they add over
    blocks of rows): ``(sum w, sum w psi_i, sum w psi_i psi_i^T, sum w d psi_i / d eta)``."""
    w = np.asarray(w, dtype=float)
    total = float(w.sum())
    psi, _, d = score_derivatives(cal, proba, w, source_prior, prior)
    return np.array([total]), w @ psi, (psi * w[:, None]).T @ psi, d * total


def labelled_dof(n_source: float | None, n_params: int) -> float | None:
    """Residual degrees of freedom of the labelled rows' estimates: Kish's effective number of
    labelled rows ``n_source`` less the ``n_params`` parameters fitted to them (at least 1);
    None without ``n_source``."""
    if n_source is None or not np.isfinite(float(n_source)):
        return None
    return max(float(n_source) - float(n_params), 1.0)


def cov_from_sums(
    sums: tuple[np.ndarray, ...], n_eff: float, prior: np.ndarray,
    eta_cov: np.ndarray | None, n_source: float | None = None,
) -> tuple[np.ndarray, np.ndarray | None]:
    """Covariance of the ``k`` shares from :func:`target_sums` (added over blocks) and, with
    ``n_source`` (Kish's effective number of labelled rows), the small-sample step: the
    labelled part ``A^-1 D Sigma_eta D^T A^-T`` scaled by ``n_s / (n_s - m)``, ``m`` the
    parameters fitted to the labelled rows — the degrees-of-freedom correction of the
    sandwich, "HC1" of MacKinnon & White (1985, "Some heteroskedasticity-consistent covariance
    matrix estimators with improved finite sample properties", J. Econometrics 29, p. 309;
    cited from memory; statsmodels' least squares ``cov_type="HC1"`` scales by the same factor,
    tested) — and per
    share Satterthwaite's (1946) degrees of freedom of the two variance parts,

    .. math:: \\nu_c = \\frac{(a_c + b_c)^2}{a_c^2 / (n_t - 1) + b_c^2 / (n_s - m)}

    (``a_c``, ``b_c`` the unlabelled and labelled parts of share ``c``'s variance; Welch 1947,
    as the two-class score interval does). Returns ``(cov, df)``; ``df`` None without
    ``n_source`` (the normal reference)."""
    total, spsi, spp, sd = sums
    total = float(np.asarray(total).ravel()[0])
    pi = np.asarray(prior, dtype=float)
    k = pi.shape[0]
    mean, second, d = spsi / total, spp / total, sd / total
    a = -second
    n_t = max(float(n_eff), 1.0)
    middle_t = (second - np.outer(mean, mean)) / n_t
    a_inv = np.linalg.pinv(a)
    # all k shares: share 0 is one minus the others
    t = np.vstack([-np.ones((1, k - 1)), np.eye(k - 1)])
    cov_t = t @ a_inv @ middle_t @ a_inv.T @ t.T
    if eta_cov is None:
        return cov_t, None
    if d.shape[1] != eta_cov.shape[0]:
        raise ValueError("The labelled summary does not match the calibration.")
    cov_s = t @ a_inv @ (d @ eta_cov @ d.T) @ a_inv.T @ t.T
    dof = labelled_dof(n_source, eta_cov.shape[0])
    if dof is None:
        return cov_t + cov_s, None
    cov_s = cov_s * (float(n_source) / dof)
    df = satterthwaite_df((np.diag(cov_t), np.diag(cov_s)), (max(n_t - 1.0, 1.0), dof))
    return cov_t + cov_s, df


def satterthwaite_df(variances, dofs) -> np.ndarray:
    """Satterthwaite's (1946) degrees of freedom of a sum of independent variance estimates,
    ``(sum v_i)^2 / sum (v_i^2 / dof_i)`` (elementwise over arrays ``v_i``; inf where every
    part is 0). For the two parts ``s_1^2 / n_1`` and ``s_2^2 / n_2`` with ``n_i - 1``
    degrees of freedom it is Welch's (1947) t-test's (tested against SciPy's
    ``ttest_ind(..., equal_var=False).df``)."""
    parts = [np.maximum(np.asarray(v, dtype=float), 0.0) for v in variances]
    total = sum(parts)
    spread = sum(v**2 / float(d) for v, d in zip(parts, dofs, strict=True))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(spread > 0, total**2 / np.maximum(spread, 1e-300), np.inf)


def interval_from_sums(
    sums: tuple[np.ndarray, ...], n_eff: float, prior: np.ndarray,
    eta_cov: np.ndarray | None, confidence_level: float, n_source: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """The interval and covariance of :func:`analytic_prior_interval` from :func:`target_sums`
    (added over blocks); with ``n_source`` the small-sample step of :func:`cov_from_sums`."""
    cov, df = cov_from_sums(sums, n_eff, prior, eta_cov, n_source)
    return share_interval(prior, cov, confidence_level, df=df), cov


def class_score_sums(
    proba: np.ndarray, y: np.ndarray, w: np.ndarray, source_prior: np.ndarray,
) -> tuple[np.ndarray, ...]:
    """Per-class weighted sums over labelled rows behind :func:`moment_prior_interval` (they
    add over blocks of rows): ``(sum w u, sum w u u^T, sum w, sum w^2)`` per class, of shapes
    ``(k, k-1)``, ``(k, k-1, k-1)``, ``(k,)``, ``(k,)``, with ``u`` the shift test's score at
    the source prior, ``p_j / pi^s_j - p_0 / pi^s_0`` (``proba`` calibrated posteriors)."""
    src = np.asarray(source_prior, dtype=float)
    k = src.shape[0]
    q = np.asarray(proba, dtype=float) / src
    u = q[:, 1:] - q[:, :1]
    onehot = np.eye(k)[np.asarray(y, dtype=int)] * np.asarray(w, dtype=float)[:, None]
    return (onehot.T @ u, np.einsum("nc,ni,nj->cij", onehot, u, u), onehot.sum(axis=0),
            (onehot * np.asarray(w, dtype=float)[:, None]).sum(axis=0))


def class_score_moments(
    sums: tuple[np.ndarray, ...], n_source: float | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-class mean score, per-row covariance of the score and effective rows from
    :func:`class_score_sums`: Kish's count of each class, or ``n_source`` (an overriding
    effective number of labelled rows) times the class's weight share."""
    su, suu, sw, sww = (np.asarray(x, dtype=float) for x in sums)
    safe = np.maximum(sw, np.finfo(float).tiny)
    means = su / safe[:, None]
    covs = suu / safe[:, None, None] - np.einsum("ci,cj->cij", means, means)
    if n_source:
        n_c = float(n_source) * sw / sw.sum()
    else:
        n_c = sw**2 / np.maximum(sww, np.finfo(float).tiny)
    return means, covs, n_c


#: Whether the labelled classes' score spread is floored at the one the calibrated posteriors
#: imply (:func:`floor_class_spread`) in the multiclass interval of ``PriorEstimator.estimate``;
#: a benchmark may switch it off to compare (since 5 December 2026; the two-class score
#: interval has no such floor: measured there, it covered none of the misses,
#: docs/evidence/prior_shift_log.md).
SPREAD_FLOOR = True

#: A class's own score variance at most this share of its second moment is read as none by
#: :func:`floor_class_spread` (the variance is a difference of second moments, exact to about
#: 1e-16 of them in double precision; 1e-9 leaves a wide margin and no real spread).
SPREAD_ROUNDING = 1e-9


def implied_class_covs(
    proba: np.ndarray, w: np.ndarray, source_prior: np.ndarray,
) -> np.ndarray:
    """Per-class covariance ``(k, k-1, k-1)`` of the shift test's score (as
    :func:`class_score_sums`) that the calibrated posteriors ``proba`` of the labelled rows
    imply: over *all* labelled rows, each weighted by ``w`` times its posterior of the class
    (Bayes' rule, :math:`E[g \\mid y = c] = E[p_c(x)\\, g(x)] / \\pi^s_c` for calibrated
    posteriors). The floor of :func:`floor_class_spread`."""
    src = np.asarray(source_prior, dtype=float)
    p = np.asarray(proba, dtype=float)
    q = p / src
    u = q[:, 1:] - q[:, :1]
    k = src.shape[0]
    out = np.zeros((k, k - 1, k - 1))
    for c in range(k):
        wc = np.asarray(w, dtype=float) * np.clip(p[:, c], 0.0, None)
        if not wc.sum() > 0:
            continue
        wc = wc / wc.sum()
        d = u - wc @ u
        out[c] = (d * wc[:, None]).T @ d
    return out


def floor_class_spread(class_moments: tuple, implied: np.ndarray) -> tuple:
    """``class_moments`` (:func:`class_score_moments`) with each class's per-row covariance
    scaled up by the largest ratio of a diagonal entry of ``implied``
    (:func:`implied_class_covs`) to its own, where that exceeds 1 (a scaling keeps the
    matrix positive semi-definite and its correlations). A class's few labelled rows that miss
    the rows the model confuses with another class give a class mean that is off and a
    spread that is too small together: the score is skewed within a class, the mean-variance
    correlation of skewed data that makes Student's t anti-conservative on one side (Johnson
    1978, "Modified t tests and confidence intervals for asymmetrical populations", JASA 73,
    536-544, cited from memory); the implied spread reads the rows a class's own rows missed
    from the other classes' rows, where the model puts them."""
    means, covs, n_c = class_moments
    covs = np.array(covs, dtype=float, copy=True)
    for c in range(covs.shape[0]):
        own = np.diag(covs[c])
        imp = np.diag(np.asarray(implied[c], dtype=float))
        # a spread within rounding of zero is none: the covariance is a difference of second
        # moments (class_score_sums), so a class whose labelled rows all have one score (a
        # class the model separates, its posteriors at one floor) gets entries of about
        # 1e-16 x the second moment, of either sign and moved by the weights' scale;
        # scaling those up by implied / own (1e18) made the interval noise (heplots' peng,
        # 112 labelled rows, naive Bayes: the same weights x 1/112 took a share's interval
        # from [0.37, 0.57] to [0.007, 0.99]; docs/evidence/prior_shift_log.md, the prior-shift
        # hunt of benchmarks/shift_real_hunt31.py on twelve unused sets)
        live = own > SPREAD_ROUNDING * (np.abs(own) + np.asarray(means[c], dtype=float) ** 2)
        if not np.any(live):  # no spread of its own (a class of one row, or of one score)
            covs[c] = np.array(implied[c], dtype=float)
            continue
        if np.any(~live & (imp > own)):
            # a direction with no spread of its own: the implied matrix, scaled up where the
            # class's own spread is larger in a direction it has (positive semi-definite)
            with np.errstate(divide="ignore", invalid="ignore"):
                up = np.where(live & (imp > 0), own / np.maximum(imp, 1e-300), 1.0)
            covs[c] = np.array(implied[c], dtype=float) * max(1.0, float(np.max(up)))
            continue
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(live, imp / np.maximum(own, 1e-300), 1.0)
        f = float(np.max(ratio)) if ratio.size else 1.0
        if np.isfinite(f) and f > 1.0:
            covs[c] = covs[c] * f
    return means, covs, n_c


def moment_prior_interval(
    target: tuple, class_moments: tuple, confidence_level: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None:
    r"""Interval of the class shares from the labelled rows' class-conditional mean scores
    (more than two classes; the default multiclass interval since 4 December 2026).

    Under a prior shift to :math:`\pi` every function of the features has the same mean on the
    unlabelled rows as on the labelled rows re-weighted by :math:`\pi_y / \pi^s_y` (Lipton,
    Wang & Smola 2018, section 2) — whatever the calibration map, so a map that misfits the
    labelled population moves nothing here. Taking the shift test's score ``u`` (at the source
    prior, ``k - 1`` values per row), the unlabelled mean :math:`\bar u_t` is estimated by
    :math:`\sum_y \pi_y \bar u_y` with :math:`\bar u_y` the labelled mean of class ``y``; the
    ``k - 1`` equations :math:`\bar u_t = \bar u_0 + \sum_{c \ge 1} \pi_c (\bar u_c -
    \bar u_0)` give :math:`\tilde\pi = B^{-1}(\bar u_t - \bar u_0)` (the probabilistic
    adjusted count of Bella et al. 2010 on the score's coordinates), and the delta method its
    covariance :math:`B^{-1}(S_t / (n_t - 1) + \sum_y \pi_y^2 S_y / (n_y - 1))B^{-\top}` —
    the unlabelled rows' and each class's labelled rows' sampling error, with Student's t on
    Satterthwaite's (1946) degrees of freedom of these ``k + 1`` parts and the Wilson shape of
    :func:`share_interval` around :math:`\tilde\pi` (clipped to the simplex). It is the
    multiclass counterpart of the two-class score interval (:func:`probwrap.shift.
    score_interval`), in its Wald form. The delta-method interval on EM's fixed point
    (:func:`analytic_prior_interval`) assumes the calibrated posteriors are right on the
    unlabelled rows; a map fitted on a few hundred rows errs slightly there and EM amplifies
    that beyond the interval (docs/prior_shift.md, *Interval against the test*).

    ``target``: ``(mean, per-row covariance, effective rows)`` of the unlabelled rows' scores
    (as the shift test computes them); ``class_moments``: :func:`class_score_moments`.
    Returns ``(interval (k, 2), centre (k,), covariance (k, k), degrees of freedom (k,))``, or
    None where the class means identify no direction of the shares (``B`` zero, or no share
    vector consistent with them).

    Where ``B`` has rank ``r`` below ``k - 1`` (:func:`moment_identified_rank`: a model whose
    calibrated posteriors take only ``r + 1`` distinct values, for instance, moves the mean
    score along ``r`` directions only), the shares are identified only along those ``r``
    directions and each share's interval is its whole range over the simplex's points
    consistent with them (:func:`_partial_moment_interval`); the covariance and degrees of
    freedom are then NaN. Until 5 December 2026 such a ``B`` went to the inverse regardless, and
    its rounding-level singular values decided the interval: on R's ``HairEyeColor``
    (a frozen gradient-boosting model with two distinct posterior rows) the ends flipped
    between [0, 1] and [0.135, 0.909] when the weights changed in the last bit.
    """
    m_t, c_t, n_t = target
    means, covs, n_c = class_moments
    k = means.shape[0]
    b = (means[1:] - means[:1]).T  # column c - 1: how the mean score moves with share c
    if not np.all(np.isfinite(b)):
        return None
    rank = moment_identified_rank(means)
    if rank == 0:
        return None
    if rank < k - 1:
        return _partial_moment_interval(target, class_moments, confidence_level, rank)
    try:
        b_inv = np.linalg.inv(b)
    except np.linalg.LinAlgError:  # pragma: no cover (rank k - 1 above)
        return None
    if not np.all(np.isfinite(b_inv)):
        return None
    free = b_inv @ (np.asarray(m_t, dtype=float) - means[0])
    pi = np.concatenate([[1.0 - free.sum()], free])
    centre = np.clip(pi, 0.0, None)
    centre = centre / centre.sum() if centre.sum() > 0 else np.full(k, 1.0 / k)
    t = np.vstack([-np.ones((1, k - 1)), np.eye(k - 1)])  # share 0: one minus the others
    lift = t @ b_inv
    n_t = max(float(n_t), 1.0)
    parts = [lift @ (np.asarray(c_t, dtype=float) / max(n_t - 1.0, 1.0)) @ lift.T]
    dofs = [max(n_t - 1.0, 1.0)]
    for y in range(k):
        dof = max(float(n_c[y]) - 1.0, 1.0)
        parts.append(lift @ (centre[y] ** 2 * covs[y] / dof) @ lift.T)
        dofs.append(dof)
    cov = sum(parts)
    df = satterthwaite_df([np.diag(v) for v in parts], dofs)
    return share_interval(centre, cov, confidence_level, df=df), centre, cov, df


#: Singular values of the class-mean matrix ``B`` of :func:`moment_prior_interval` at or below
#: this share of the largest are read as rounding: the shares are not identified along them.
#: A direction of real data at 1e-9 of the largest would need the class means to differ by a
#: billionth of their spread to move the mean score; its interval would be [0, 1] anyway.
MOMENT_RANK_TOL = 1e-9


def moment_identified_rank(means: np.ndarray) -> int:
    """Number of directions of the ``k - 1`` free class shares that the labelled classes' mean
    scores ``means`` (k, k-1) identify: the rank of ``B = (means[1:] - means[0]).T``, its
    singular values counted above ``MOMENT_RANK_TOL`` times the largest (NumPy's
    ``matrix_rank`` with that relative tolerance). ``k - 1``: every share is identified.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._analytic import moment_identified_rank
    >>> # two distinct posterior rows: every class mean lies on the line through their scores
    >>> u = np.array([[1.0, -0.5, 2.0], [0.2, 0.1, -0.3]])
    >>> mix = np.array([[0.9, 0.1], [0.6, 0.4], [0.3, 0.7], [0.2, 0.8]])
    >>> moment_identified_rank(mix @ u)
    1
    """
    means = np.asarray(means, dtype=float)
    b = (means[1:] - means[:1]).T
    if b.size == 0 or not np.all(np.isfinite(b)):
        return 0
    sv = np.linalg.svd(b, compute_uv=False)
    if not sv[0] > 0.0:
        return 0
    return int(np.sum(sv > MOMENT_RANK_TOL * sv[0]))


def _share_ranges(v: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> tuple | None:
    """Smallest and largest value of each of the ``k`` class shares over the simplex's points
    whose free shares ``f`` (share 0 is one minus their sum) have ``lo <= v.T @ f <= hi``, by
    linear programming (SciPy's ``linprog``, HiGHS); ``(ranges (k, 2), the mean of the 2k
    optimal points)``, or None where no point qualifies."""
    from scipy.optimize import linprog

    km1 = v.shape[0]
    a_ub = np.vstack([v.T, -v.T, np.ones((1, km1))])
    b_ub = np.concatenate([hi, -lo, [1.0]])
    out = np.empty((km1 + 1, 2))
    points = []
    for c in range(km1 + 1):
        # share 0 = 1 - sum f: its smallest value is where sum f is largest
        obj = -np.ones(km1) if c == 0 else np.eye(km1)[c - 1]
        for end, sign in ((0, 1.0), (1, -1.0)):
            res = linprog(sign * obj, A_ub=a_ub, b_ub=b_ub, bounds=[(0.0, 1.0)] * km1,
                          method="highs")
            if res.status != 0:
                return None
            f = np.clip(res.x, 0.0, 1.0)
            points.append(f)
            val = 1.0 - f.sum() if c == 0 else f[c - 1]
            out[c, end] = val
    out = np.clip(out, 0.0, 1.0)
    f = np.mean(points, axis=0)
    return out, np.concatenate([[max(1.0 - f.sum(), 0.0)], f])


def _partial_moment_interval(target: tuple, class_moments: tuple, confidence_level: float,
                             rank: int) -> tuple | None:
    r""":func:`moment_prior_interval` where ``B`` has rank ``r < k - 1``: the shares are
    identified along ``r`` directions only, and every other direction gets its whole range.

    With ``B``'s singular value decomposition cut to its ``r`` leading terms, ``B ~ U S V^T``,
    the equations :math:`B f = ar u_t - ar u_0` of the free shares ``f`` give the ``r``
    combinations :math:`g = V^	op f = S^{-1} U^	op (ar u_t - ar u_0)` and nothing along
    the other directions (the equations' component outside ``U`` is sampling error). Each
    combination gets the t interval of the same delta method (the unlabelled rows' and each
    class's labelled rows' error, Satterthwaite's degrees of freedom), at the per-combination
    level ``1 - (1 - level) / r`` (Bonferroni, so that all ``r`` hold at once); the class parts
    are weighted by each share's largest value over the region (a first pass with weight 1,
    then the region's upper ends: an upper bound on the plug-in of the full-rank case). Each
    share's interval is its smallest and largest value over the simplex's points whose
    combinations lie in those intervals (linear programming, :func:`_share_ranges`), so it
    covers the share whenever the ``r`` intervals cover theirs; where they meet no point of
    the simplex they are widened together, by the least multiple of their half-widths that
    reaches one (as the full-rank centre is moved into the simplex), with a margin of 1e-6
    on the combinations there, for the solver's tolerance. The centre is the mean of
    the optimal points (a point of the region), the covariance and degrees of freedom NaN.
    """
    from scipy.optimize import linprog

    m_t, c_t, n_t = target
    means, covs, n_c = class_moments
    means = np.asarray(means, dtype=float)
    k = means.shape[0]
    b = (means[1:] - means[:1]).T
    u, s, vt = np.linalg.svd(b)
    ur, sr, v = u[:, :rank], s[:rank], vt[:rank].T  # v: (k-1, r)
    proj = (ur / sr).T  # (r, k-1): g = proj @ (m_t - means[0])
    g = proj @ (np.asarray(m_t, dtype=float) - means[0])
    n_t = max(float(n_t), 1.0)
    level = 1.0 - (1.0 - float(confidence_level)) / rank
    weight = np.ones(k)
    found = None
    for _ in range(2):
        parts = [np.diag(proj @ (np.asarray(c_t, dtype=float) / max(n_t - 1.0, 1.0)) @ proj.T)]
        dofs = [max(n_t - 1.0, 1.0)]
        for y in range(k):
            dof = max(float(n_c[y]) - 1.0, 1.0)
            parts.append(np.diag(proj @ (weight[y] ** 2 * covs[y] / dof) @ proj.T))
            dofs.append(dof)
        se = np.sqrt(np.maximum(sum(parts), 0.0))
        df = satterthwaite_df(parts, dofs)
        q = np.full(rank, float(norm.ppf(0.5 + level / 2.0)))
        small = np.isfinite(df) & (df < 1e7)
        q[small] = student_t.ppf(0.5 + level / 2.0, np.maximum(df[small], 1.0))
        half = q * se
        # the least widening (a multiple tau of the half-widths) that meets the simplex
        a_ub = np.vstack([np.column_stack([v.T, -half]), np.column_stack([-v.T, -half]),
                          np.append(np.ones(v.shape[0]), 0.0)[None]])
        b_ub = np.concatenate([g, -g, [1.0]])  # |v' f - g| <= tau half
        res = linprog(np.append(np.zeros(v.shape[0]), 1.0), A_ub=a_ub, b_ub=b_ub,
                      bounds=[(0.0, 1.0)] * v.shape[0] + [(0.0, None)], method="highs")
        if res.status != 0:
            return None
        tau = max(float(res.x[-1]), 0.0)
        # where the intervals barely meet the simplex (tau near 1 or above) the region is a
        # sliver that the solver's feasibility tolerance (1e-7) can miss: a margin of 1e-6 on
        # the combinations, brought in continuously from tau = 0.99
        margin = 1e-6 * min(max((tau - 0.99) / 0.01, 0.0), 1.0)
        stretch = max(1.0, tau)
        found = _share_ranges(v, g - stretch * half - margin, g + stretch * half + margin)
        if found is None:  # pragma: no cover (a last try, wider)
            found = _share_ranges(v, g - stretch * half - 1e-4, g + stretch * half + 1e-4)
        if found is None:  # pragma: no cover
            return None
        weight = found[0][:, 1]
    ranges, centre = found
    return ranges, centre, np.full((k, k), np.nan), np.full(k, np.nan)


def all_shares_level(confidence_level: float, k: int) -> float:
    r"""Level of each class share's interval such that the ``k`` intervals together hold all
    ``k`` shares at once with probability at least ``confidence_level``.

    Bonferroni's inequality: if each of ``k`` intervals misses its share with probability at
    most :math:`(1 - \text{level}) / k`, all of them hold at once with probability at least
    ``level``, whatever the dependence between the shares (which sum to one, so they are
    negatively correlated). For multinomial proportions this is Goodman's (1965) simultaneous
    interval ("On simultaneous confidence intervals for multinomial proportions",
    Technometrics 7, 247-254): the score (Wilson) interval of each proportion at the chi-square
    (one degree of freedom) quantile :math:`\chi^2_{1,\,1 - (1 - \text{level})/k}` — the
    ``method="goodman"`` of statsmodels' ``multinomial_proportions_confint``, which
    :func:`share_interval` at this level reproduces on multinomial counts (tested). Šidák's
    per-share level :math:`\text{level}^{1/k}` is narrower by a hair (0.98305 against 0.98333
    for ``k = 3`` at 95 %); the projections of the chi-square(``k - 1``) Wald ellipsoid of the
    free shares (Scheffé's method) are wider for the class counts met here (half-width
    :math:`\sqrt{\chi^2_{2,\,0.95}} = 2.45` standard errors against Bonferroni's 2.39 for
    ``k = 3``; 4.11 against 2.81 for ``k = 10``).

    Examples
    --------
    >>> from probwrap.shift._analytic import all_shares_level
    >>> round(all_shares_level(0.95, 4), 4)
    0.9875
    """
    level = float(confidence_level)
    if not 0.0 < level < 1.0:
        raise ValueError(f"`confidence_level` must be in (0, 1); got {confidence_level!r}.")
    if int(k) < 1:
        raise ValueError(f"`k` must be a positive number of classes; got {k!r}.")
    return 1.0 - (1.0 - level) / int(k)


#: Shape of the per-share interval of :func:`share_interval` used by default.
SHARE_INTERVAL_SHAPE = "wilson"


def share_interval(pi: np.ndarray, cov: np.ndarray, confidence_level: float,
                   shape: str | None = None, df: np.ndarray | None = None) -> np.ndarray:
    """Per-share interval from the delta-method covariance ``cov`` of the shares ``pi``: the
    score (Wilson) interval on the implied effective row count (``shape="wilson"``, the
    default) or the normal interval on the logit scale of each share (``shape="logit"``).
    ``benchmarks/shift.py --only=multiclass`` compares both on the same estimates: the same
    coverage cells on its grid, the Wilson shape 20-33 % narrower for a share near 0.

    ``shape="logit"``:
    The delta method applied to ``logit(pi_c) = log(pi_c / (1 - pi_c))`` — the log-ratio of
    the share against all other classes together — gives the standard error ``se_c / (pi_c
    (1 - pi_c))`` there; the normal interval on that scale, mapped back by the logistic
    function, lies inside (0, 1) and is asymmetric the way a share's estimate is skewed (the
    logit interval of a binomial proportion, among those compared by Brown, Cai & DasGupta
    2001, "Interval estimation for a binomial proportion" — cited from memory; for one-hot
    posteriors it is the Wald interval of an intercept-only logistic regression, tested
    against statsmodels). A share estimated at exactly 0 or 1 (no logit) keeps the plain
    normal interval clipped to [0, 1]. ``benchmarks/shift.py --only=multiclass`` measured both
    shapes on the same draws (docs/prior_shift.md).

    ``shape="wilson"``: the score (Wilson 1927) interval of a proportion on the effective
    number of rows ``n_c = pi_c (1 - pi_c) / se_c^2`` that the delta-method variance implies —
    the set of shares ``t`` with ``(pi_c - t)^2 <= z^2 t (1 - t) / n_c``, i.e. the variance
    taken to scale with the hypothesised share as a proportion's does (the effective-sample-
    size form of Korn & Graubard 1998, cited from memory). It is the score test's inversion
    instead of the Wald test's, narrower than the logit interval where ``se_c`` is large next to
    a share near 0 or 1 (tested against statsmodels' ``proportion_confint(method="wilson")``).
    ``None``: ``SHARE_INTERVAL_SHAPE``.

    ``df`` (per share, or None for the normal quantile): Student's t quantile with those
    degrees of freedom in place of the normal one, in either shape. For the Wilson shape that
    is the score interval on the degrees-of-freedom-adjusted effective row count ``n_c (z /
    t_df)^2`` of Korn & Graubard (1998, "Confidence intervals for proportions with small
    expected number of positive counts estimated from survey data", Survey Methodology 24,
    p. 193; cited from memory).
    """
    from scipy.special import expit, logit

    shape = SHARE_INTERVAL_SHAPE if shape is None else shape
    if shape not in ("logit", "wilson"):
        raise ValueError(f"`shape` must be 'logit' or 'wilson'; got {shape!r}.")
    pi = np.asarray(pi, dtype=float)
    se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    zq = np.full(pi.shape[0], float(norm.ppf(0.5 + confidence_level / 2.0)))
    if df is not None:
        dfs = np.broadcast_to(np.asarray(df, dtype=float), pi.shape)
        small = np.isfinite(dfs) & (dfs < 1e7)
        zq[small] = student_t.ppf(0.5 + confidence_level / 2.0, np.maximum(dfs[small], 1.0))
    lo = np.clip(pi - zq * se, 0.0, 1.0)
    hi = np.clip(pi + zq * se, 0.0, 1.0)
    inside = (pi > 0.0) & (pi < 1.0)
    if shape == "wilson":
        inside &= se > 0.0
        if np.any(inside):
            p = pi[inside]
            n = p * (1.0 - p) / se[inside] ** 2
            z = zq[inside]
            z2n = z * z / n
            centre = (p + z2n / 2.0) / (1.0 + z2n)
            half = z / (1.0 + z2n) * np.sqrt(p * (1.0 - p) / n + z2n / (4.0 * n))
            lo[inside] = np.clip(centre - half, 0.0, 1.0)
            hi[inside] = np.clip(centre + half, 0.0, 1.0)
        return np.column_stack([lo, hi])
    if np.any(inside):
        p = pi[inside]
        with np.errstate(over="ignore"):
            half = zq[inside] * se[inside] / (p * (1.0 - p))
            centre = logit(p)
            lo[inside] = expit(centre - half)
            hi[inside] = expit(centre + half)
    return np.column_stack([lo, hi])


def analytic_prior_interval(
    cal, proba: np.ndarray, w: np.ndarray, n_eff: float, source_prior: np.ndarray,
    prior: np.ndarray, eta_cov: np.ndarray | None, confidence_level: float,
    n_source: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Delta-method interval of the maximum-likelihood ``prior`` of unlabelled rows ``proba``
    (raw model posteriors; ``cal`` the fitted calibration or None). Returns ``(interval of
    shape (k, 2), covariance of the k shares)``. ``eta_cov`` None: the labelled rows' error
    is left out (the unlabelled rows' sampling error only). ``n_source`` (Kish's effective
    number of labelled rows): the small-sample step of :func:`cov_from_sums` (None: the
    large-sample interval)."""
    sums = target_sums(cal, proba, w, source_prior, prior)
    return interval_from_sums(sums, n_eff, prior, eta_cov, confidence_level, n_source)


def analytic_prior_cov(
    cal, proba: np.ndarray, w: np.ndarray, n_eff: float, source_prior: np.ndarray,
    prior: np.ndarray, eta_cov: np.ndarray | None, n_source: float | None = None,
) -> tuple[np.ndarray, np.ndarray | None]:
    """``(covariance, degrees of freedom per share)`` behind :func:`analytic_prior_interval`."""
    sums = target_sums(cal, proba, w, source_prior, prior)
    return cov_from_sums(sums, n_eff, prior, eta_cov, n_source)
