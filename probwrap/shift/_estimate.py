"""Estimating new class priors from unlabelled posteriors: EM, BBSE, ACC, PACC, the shift test."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import beta as beta_dist
from scipy.stats import chi2
from sklearn.exceptions import ConvergenceWarning

from .._validation import check_labels, check_proba, check_same_length, check_sample_weight
from ._adjust import check_prior, project_to_simplex

__all__ = [
    "PriorEstimate",
    "ShiftTestResult",
    "acc_prior",
    "binomial_interval",
    "bbse_prior",
    "em_prior",
    "heldout_confusion",
    "prior_log_likelihood",
    "shift_test",
]


@dataclass(frozen=True)
class PriorEstimate:
    """An estimate of the class priors of unlabelled data.

    Attributes
    ----------
    prior : ndarray of shape (k,)
        Estimated priors, non-negative, summing to one.
    method : str
        ``"em"``, ``"bbse"``, ``"bbse_soft"``, ``"acc"`` or ``"pacc"``.
    n_iter : int
        Iterations used (EM, or the projected-gradient solver of ACC / PACC; 0 if none).
    converged : bool
        Whether the iterations met their tolerance.
    n_rows : int
        Number of unlabelled rows.
    interval : ndarray of shape (k, 2) or None
        Confidence interval per class, when requested.
    shift_statistic, shift_pvalue : float or None
        Likelihood-ratio test of "no shift", when requested (see :func:`shift_test`).
    """

    prior: np.ndarray
    method: str
    n_iter: int = 0
    converged: bool = True
    n_rows: int = 0
    interval: np.ndarray | None = None
    shift_statistic: float | None = None
    shift_pvalue: float | None = None


@dataclass(frozen=True)
class ShiftTestResult:
    """Result of :func:`shift_test`, in the style of SciPy's test results.

    Attributes
    ----------
    statistic : float
        ``2 * (loglik(prior) - loglik(source_prior))``, non-negative.
    pvalue : float
        Upper tail of the chi-square distribution with ``df`` degrees of freedom.
    df : int
        ``k - 1``.
    prior : ndarray of shape (k,)
        The maximum-likelihood (EM) prior used in the statistic.
    """

    statistic: float
    pvalue: float
    df: int
    prior: np.ndarray


# -- shared input handling ---------------------------------------------------------------------
def _check_target(proba: Any, sample_weight: Any, name: str = "proba") -> tuple[np.ndarray, np.ndarray]:
    p = check_proba(proba, name=name, ndim=2)
    w = check_sample_weight(sample_weight, p.shape[0])
    return p, w


def _check_confusion(confusion: Any, k: int) -> np.ndarray:
    try:
        c = np.asarray(confusion, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`confusion` must be a numeric (k, k) matrix; got {confusion!r}.") from exc
    if c.shape != (k, k):
        raise ValueError(
            f"`confusion` must have shape ({k}, {k}) to match `proba`; got shape {c.shape}."
        )
    if not np.all(np.isfinite(c)) or np.any(c < 0):
        raise ValueError("`confusion` must contain finite non-negative entries.")
    if c.sum() <= 0:
        raise ValueError("`confusion` is zero everywhere; it must come from labelled rows.")
    return c / c.sum()


def _target_mean(p: np.ndarray, w: np.ndarray, soft: bool) -> np.ndarray:
    if soft:
        return w @ p / w.sum()
    hard = np.zeros_like(p)
    hard[np.arange(p.shape[0]), np.argmax(p, axis=1)] = 1.0
    return w @ hard / w.sum()


def _warn_empty_columns(mean: np.ndarray, what: str) -> None:
    empty = np.flatnonzero(mean <= 0)
    if empty.size:
        warnings.warn(
            f"Class index(es) {empty.tolist()} get zero {what} in the unlabelled data; their "
            "estimated prior rests on very little information, so expect a wide interval.",
            UserWarning,
            stacklevel=3,
        )


# -- confusion matrix --------------------------------------------------------------------------
def heldout_confusion(
    proba: Any, y: Any, *, sample_weight: Any = None, soft: bool = False
) -> np.ndarray:
    """Joint confusion matrix of held-out predictions, ``C[i, j] = P(predicted i, true j)``.

    Rows are predicted classes and columns true classes (the orientation of Lipton, Wang &
    Smola 2018, so that the expected target predictions are ``C @ w``). With ``soft=True``
    each row contributes its whole posterior vector instead of a one-hot argmax, giving the
    soft confusion matrix ``C[i, j] = E[p_i(x) 1{y = j}]``.

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Held-out posteriors, columns in class-index order.
    y : array-like of shape (n,)
        Integer class indices in ``0 .. k-1``.
    sample_weight : array-like of shape (n,), default=None
    soft : bool, default=False

    Returns
    -------
    ndarray of shape (k, k), entries summing to one; column sums are the (weighted) class
    frequencies.

    Examples
    --------
    >>> from probwrap.shift import heldout_confusion
    >>> heldout_confusion([[0.9, 0.1], [0.4, 0.6], [0.2, 0.8], [0.3, 0.7]], [0, 0, 1, 1])
    array([[0.25, 0.  ],
           [0.25, 0.5 ]])
    """
    p = check_proba(proba, name="proba", ndim=2)
    k = p.shape[1]
    check_same_length(("proba", p), ("y", y))
    y_idx, _ = check_labels(y, name="y", classes=np.arange(k), min_classes=1)
    w = check_sample_weight(sample_weight, p.shape[0])
    pred = p if soft else np.eye(k)[np.argmax(p, axis=1)]
    onehot = np.eye(k)[y_idx]
    return (pred * w[:, None]).T @ onehot / w.sum()


# -- maximum likelihood by EM ------------------------------------------------------------------
def _em(
    p: np.ndarray,
    w: np.ndarray,
    src: np.ndarray,
    init: np.ndarray,
    tol: float,
    max_iter: int,
) -> tuple[np.ndarray, int, bool]:
    ratio = p / src
    wn = w / w.sum()
    prior = init.copy()
    for it in range(1, max_iter + 1):
        num = ratio * prior
        den = num.sum(axis=1, keepdims=True)
        post = num / np.maximum(den, np.finfo(float).tiny)
        new = wn @ post
        new = new / new.sum()
        step = np.max(np.abs(new - prior))
        prior = new
        if step < tol:
            return prior, it, True
    return prior, max_iter, False


def em_prior(
    proba: Any,
    source_prior: Any,
    *,
    sample_weight: Any = None,
    init: Any = None,
    tol: float = 1e-6,
    max_iter: int = 1000,
) -> PriorEstimate:
    r"""Maximum-likelihood class priors of unlabelled data by EM (Saerens et al. 2002).

    With posteriors :math:`p_s(k \mid x_n)` learned under priors :math:`\pi^s`, each step
    re-weights the posteriors to the current priors (eq. 2.4) and sets the new priors to the
    mean re-weighted posterior (eqs. 2.9-2.10 of Saerens, Latinne & Decaestecker 2002):

    .. math::

        \pi^{(m+1)}_k = \frac{1}{N} \sum_n
            \frac{\frac{\pi^{(m)}_k}{\pi^s_k} p_s(k \mid x_n)}
                 {\sum_j \frac{\pi^{(m)}_j}{\pi^s_j} p_s(j \mid x_n)}

    Each step increases the log-likelihood of the unlabelled rows
    (:func:`prior_log_likelihood`). EM needs calibrated posteriors; calibrate the held-out
    posteriors first (see :class:`BiasCorrectedScaling`).

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows under the source priors.
    source_prior : array-like of shape (k,)
        Priors the posteriors were learned under (strictly positive).
    sample_weight : array-like of shape (n,), default=None
        Frequency weights of the unlabelled rows.
    init : array-like of shape (k,), default=None
        Starting priors (default: the source priors).
    tol : float, default=1e-6
        Stop when no prior moves by more than ``tol`` in one step.
    max_iter : int, default=1000
        Iteration cap; reaching it raises a :class:`~sklearn.exceptions.ConvergenceWarning`.

    Returns
    -------
    PriorEstimate

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import em_prior
    >>> proba = np.array([[0.9, 0.1], [0.8, 0.2], [0.3, 0.7], [0.1, 0.9]])
    >>> em_prior(proba, source_prior=[0.5, 0.5]).prior.round(3)
    array([0.5, 0.5])
    """
    p, w = _check_target(proba, sample_weight)
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    start = src if init is None else check_prior(init, k, name="init", strictly_positive=True)
    if not (isinstance(tol, (int, float)) and tol > 0):
        raise ValueError(f"`tol` must be a positive number; got {tol!r}.")
    if not (isinstance(max_iter, (int, np.integer)) and max_iter >= 1):
        raise ValueError(f"`max_iter` must be a positive integer; got {max_iter!r}.")
    _warn_empty_columns(w @ p, "predicted probability mass")
    prior, n_iter, converged = _em(p, w, src, start, float(tol), int(max_iter))
    if not converged:
        warnings.warn(
            f"EM prior estimation did not converge within max_iter={max_iter} iterations "
            f"(tol={tol}); the last iterate is returned. Raise `max_iter` or `tol`.",
            ConvergenceWarning,
            stacklevel=2,
        )
    return PriorEstimate(prior=prior, method="em", n_iter=n_iter, converged=converged, n_rows=p.shape[0])


def prior_log_likelihood(
    proba: Any, source_prior: Any, prior: Any, *, sample_weight: Any = None
) -> float:
    r"""Log-likelihood of unlabelled rows as a function of their class priors.

    Up to a term that does not depend on the priors,
    :math:`\ell(\pi) = \sum_n w_n \log \sum_k \pi_k\, p_s(k \mid x_n) / \pi^s_k`
    (Saerens et al. 2002, section 2.3), because :math:`p(x \mid k) \propto p_s(k \mid x)/\pi^s_k`.

    Examples
    --------
    >>> from probwrap.shift import prior_log_likelihood
    >>> round(prior_log_likelihood([[0.2, 0.8]], [0.5, 0.5], [0.5, 0.5]), 6)
    0.0
    """
    p, w = _check_target(proba, sample_weight)
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    pi = check_prior(prior, k, name="prior")
    return _loglik(p, w, src, pi)


def _loglik(p: np.ndarray, w: np.ndarray, src: np.ndarray, pi: np.ndarray) -> float:
    mix = (p / src) @ pi
    return float(w @ np.log(np.maximum(mix, np.finfo(float).tiny)))


def shift_test(
    proba: Any,
    source_prior: Any,
    *,
    sample_weight: Any = None,
    tol: float = 1e-8,
    max_iter: int = 10000,
) -> ShiftTestResult:
    r"""Likelihood-ratio test that unlabelled rows have the source class priors.

    The statistic is :math:`2\,[\ell(\hat\pi) - \ell(\pi^s)]` with :math:`\hat\pi` the EM
    maximum-likelihood priors and :math:`\ell` the log-likelihood of :func:`prior_log_likelihood`;
    under "no shift" it is asymptotically chi-square with ``k - 1`` degrees of freedom
    (Saerens et al. 2002, section 2.3; Wilks 1938). The test treats the posteriors as exact:
    it assumes they are calibrated under the source priors, and it ignores the sampling error of
    the held-out rows they were calibrated on. Weights are frequency weights (the statistic
    scales with their sum).

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
    p, w = _check_target(proba, sample_weight)
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        prior, _, _ = _em(p, w, src, src.copy(), tol, max_iter)
    stat = 2.0 * (_loglik(p, w, src, prior) - _loglik(p, w, src, src))
    # EM increases the likelihood from the source prior, so the statistic is >= 0 up to rounding.
    stat = max(stat, 0.0)
    return ShiftTestResult(statistic=stat, pvalue=float(chi2.sf(stat, k - 1)), df=k - 1, prior=prior)


# -- confusion-matrix estimators ---------------------------------------------------------------
def _solve_or_lstsq(a: np.ndarray, b: np.ndarray, what: str) -> np.ndarray:
    cond = np.linalg.cond(a)
    if not np.isfinite(cond) or cond > 1e12:
        warnings.warn(
            f"The {what} is singular or nearly so (condition number {cond:.3g}): some class is "
            "never predicted or two classes are indistinguishable. A least-squares solution is "
            "used; expect a wide interval.",
            UserWarning,
            stacklevel=3,
        )
        return np.linalg.lstsq(a, b, rcond=None)[0]
    return np.linalg.solve(a, b)


def bbse_prior(
    proba: Any,
    confusion: Any,
    source_prior: Any,
    *,
    soft: bool = False,
    sample_weight: Any = None,
) -> PriorEstimate:
    r"""Black-box shift estimation (BBSE; Lipton, Wang & Smola 2018).

    With the joint held-out confusion matrix :math:`C_{ij} = P_s(\hat y = i, y = j)` and the
    mean prediction on the unlabelled rows :math:`\mu_i = P_t(\hat y = i)`, the importance
    weights solve :math:`C w = \mu` (Lipton et al. 2018, eq. 4 / Algorithm 1), and the target
    priors are :math:`w \odot \pi^s`. Sampling noise can make some entries negative; the result
    is projected onto the simplex (:func:`project_to_simplex`). ``soft=True`` uses posterior
    means for both :math:`C` and :math:`\mu` (pass a confusion matrix built with
    ``heldout_confusion(..., soft=True)``).

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows.
    confusion : array-like of shape (k, k)
        Joint held-out confusion matrix (rows predicted, columns true), as from
        :func:`heldout_confusion`.
    source_prior : array-like of shape (k,)
        Class frequencies of the held-out rows (the column sums of ``confusion``).
    soft : bool, default=False
    sample_weight : array-like of shape (n,), default=None

    Returns
    -------
    PriorEstimate

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import bbse_prior
    >>> confusion = np.array([[0.4, 0.1], [0.1, 0.4]])
    >>> proba = np.array([[0.2, 0.8]] * 6 + [[0.7, 0.3]] * 4)   # 60 % predicted class 1
    >>> bbse_prior(proba, confusion, [0.5, 0.5]).prior.round(4)
    array([0.3333, 0.6667])
    """
    p, w = _check_target(proba, sample_weight)
    k = p.shape[1]
    c = _check_confusion(confusion, k)
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    mu = _target_mean(p, w, soft)
    _warn_empty_columns(mu, "predicted mass" if soft else "predictions")
    weights = _solve_or_lstsq(c, mu, "confusion matrix")
    prior = project_to_simplex(weights * src)
    return PriorEstimate(prior=prior, method="bbse_soft" if soft else "bbse", n_rows=p.shape[0])


def _simplex_least_squares(
    m: np.ndarray, q: np.ndarray, tol: float = 1e-12, max_iter: int = 20000
) -> tuple[np.ndarray, int, bool]:
    """min ||m x - q||^2 over the simplex by accelerated projected gradient (Beck & Teboulle 2009)."""
    try:
        x0 = np.linalg.lstsq(m, q, rcond=None)[0]
    except np.linalg.LinAlgError:  # pragma: no cover - lstsq does not fail on finite input
        x0 = np.full(m.shape[1], 1.0 / m.shape[1])
    if np.all(x0 >= 0) and abs(x0.sum() - 1.0) < 1e-9 and np.allclose(m @ x0, q, atol=1e-12):
        return x0 / x0.sum(), 0, True
    x = project_to_simplex(x0)
    lip = max(float(np.linalg.norm(m, 2)) ** 2, 1e-12)
    mtm, mtq = m.T @ m, m.T @ q
    yk, tk = x.copy(), 1.0
    for it in range(1, max_iter + 1):
        new = project_to_simplex(yk - (mtm @ yk - mtq) / lip)
        t_new = 0.5 * (1.0 + np.sqrt(1.0 + 4.0 * tk * tk))
        yk = new + ((tk - 1.0) / t_new) * (new - x)
        step = np.max(np.abs(new - x))
        x, tk = new, t_new
        if step < tol:
            return x, it, True
    return x, max_iter, False


def acc_prior(
    proba: Any,
    confusion: Any,
    *,
    soft: bool = False,
    sample_weight: Any = None,
) -> PriorEstimate:
    r"""Adjusted classify-and-count (ACC) and its probabilistic form (PACC).

    With the class-conditional confusion matrix :math:`M_{ij} = P_s(\hat y = i \mid y = j)`
    (the columns of the joint ``confusion`` divided by their sums) and the share of each
    predicted class among the unlabelled rows :math:`q`, the target priors satisfy
    :math:`M \pi = q` (Forman 2008, eq. for adjusted count, :math:`\hat p = (q - fpr) /
    (tpr - fpr)` in the binary case). ACC returns the least-squares solution restricted to the
    simplex, which for two classes is Forman's formula clipped to [0, 1]. ``soft=True`` is the
    probabilistic form (PACC; Bella, Ferri, Hernández-Orallo & Ramírez-Quintana 2010), with
    posterior means in place of hard counts (use ``heldout_confusion(..., soft=True)``).

    When the unconstrained solution already lies in the simplex, ACC equals hard BBSE and PACC
    equals soft BBSE; they differ in how a solution outside the simplex is repaired.

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows.
    confusion : array-like of shape (k, k)
        Joint held-out confusion matrix (rows predicted, columns true).
    soft : bool, default=False
    sample_weight : array-like of shape (n,), default=None

    Returns
    -------
    PriorEstimate

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import acc_prior
    >>> confusion = np.array([[0.45, 0.1], [0.05, 0.4]])   # tpr 0.8, fpr 0.1
    >>> proba = np.array([[0.2, 0.8]] * 3 + [[0.7, 0.3]] * 7)   # 30 % predicted positive
    >>> acc_prior(proba, confusion).prior.round(4)        # (0.3 - 0.1) / (0.8 - 0.1)
    array([0.7143, 0.2857])
    """
    p, w = _check_target(proba, sample_weight)
    k = p.shape[1]
    c = _check_confusion(confusion, k)
    col = c.sum(axis=0)
    if np.any(col <= 0):
        raise ValueError(
            f"`confusion` has empty column(s) {np.flatnonzero(col <= 0).tolist()}: every class "
            "must occur among the labelled rows."
        )
    m = c / col
    q = _target_mean(p, w, soft)
    _warn_empty_columns(q, "predicted mass" if soft else "predictions")
    if np.linalg.cond(m) > 1e12:
        warnings.warn(
            "The class-conditional confusion matrix is singular or nearly so; the estimate is "
            "not identified and rests on the simplex constraint. Expect a wide interval.",
            UserWarning,
            stacklevel=2,
        )
    prior, n_iter, converged = _simplex_least_squares(m, q)
    return PriorEstimate(
        prior=prior, method="pacc" if soft else "acc", n_iter=n_iter, converged=converged,
        n_rows=p.shape[0],
    )


# -- intervals ---------------------------------------------------------------------------------
def binomial_interval(
    proportion: Any, n: float, confidence_level: float = 0.95
) -> np.ndarray:
    """Clopper & Pearson (1934) interval for proportions observed on ``n`` rows.

    ``proportion * n`` need not be an integer (the beta-quantile form is used). Returns an
    array of shape ``proportion.shape + (2,)``.

    Examples
    --------
    >>> from probwrap.shift import binomial_interval
    >>> binomial_interval(0.0, 10).round(4)
    array([0.    , 0.3085])
    """
    pr = np.asarray(proportion, dtype=float)
    if not (0.0 < confidence_level < 1.0):
        raise ValueError(f"`confidence_level` must be in (0, 1); got {confidence_level!r}.")
    if not n > 0:
        raise ValueError(f"`n` must be positive; got {n!r}.")
    if not np.all(np.isfinite(pr)) or np.any((pr < 0) | (pr > 1)):
        raise ValueError(f"`proportion` must be in [0, 1]; got {proportion!r}.")
    alpha = 1.0 - confidence_level
    x = pr * n
    with np.errstate(invalid="ignore"):
        lo = np.where(x <= 0, 0.0, beta_dist.ppf(alpha / 2, np.maximum(x, 1e-300), n - x + 1))
        hi = np.where(x >= n, 1.0, beta_dist.ppf(1 - alpha / 2, x + 1, np.maximum(n - x, 1e-300)))
    return np.stack([np.nan_to_num(lo, nan=0.0), np.nan_to_num(hi, nan=1.0)], axis=-1)
