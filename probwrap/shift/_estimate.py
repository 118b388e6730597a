"""Estimating new class priors from unlabelled posteriors: EM, BBSE, ACC, PACC, the shift test."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import beta as beta_dist
from scipy.stats import chi2
from sklearn.exceptions import ConvergenceWarning

from .._validation import check_labels, check_proba, check_same_length, check_sample_weight, plain
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
    "shift_score_test",
    "shift_test",
    "PriorNotIdentifiedWarning",
    "BoundaryPriorWarning",
    "kish_weights",
    "evidence_cutoff",
    "null_harm",
    "null_harm_scale",
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
        Test of "no shift", when requested (see :func:`shift_score_test`).
    distance : float
        Certified bound on the distance (largest absolute difference of a class share) between
        the returned prior and the exact optimum of the (penalised) likelihood: from the
        bracket of the safeguarded Newton iteration for two classes, from the observed
        contraction of the EM steps for more (0 for the closed-form estimators).
    identified : bool
        False when the estimator cannot tell the classes apart (an ill-conditioned confusion
        matrix); ``prior`` is then the source prior and ``interval`` spans [0, 1].
    n_dropped : int
        Bootstrap resamples dropped because a class vanished from the labelled resample.
    ml_prior : ndarray of shape (k,) or None
        The plain maximum-likelihood prior (EM methods), which the interval is built around.
    null_harm_scale : float or None
        Expected relative increase of the log loss, when nothing moved, per unit of
        ``E[w(T)^2 T]`` for a rule that applies the share ``w(T)`` of the estimate (see
        :func:`evidence_cutoff`); None where it was not computed.
    """

    prior: np.ndarray
    method: str
    n_iter: int = 0
    converged: bool = True
    n_rows: int = 0
    interval: np.ndarray | None = None
    shift_statistic: float | None = None
    shift_pvalue: float | None = None
    distance: float = 0.0
    identified: bool = True
    n_dropped: int = 0
    ml_prior: np.ndarray | None = None
    null_harm_scale: float | None = None


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
    prior : ndarray of shape (k,) or None
        The maximum-likelihood prior used in the statistic (None for the score test, which
        needs no estimate).
    """

    statistic: float
    pvalue: float
    df: int
    prior: np.ndarray | None = None


class PriorNotIdentifiedWarning(UserWarning):
    """The unlabelled rows cannot identify the class priors with this model.

    Raised when the confusion matrix of ACC / PACC / BBSE is ill-conditioned (the classes'
    predictions are nearly the same, for two classes the true- and false-positive rates are
    within sampling error of each other): the estimator then returns the source prior with an
    interval spanning [0, 1] instead of a confident-looking number.
    """


class BoundaryPriorWarning(UserWarning):
    """A maximum-likelihood class share sits at (or next to) 0 or 1; the message says why."""


def kish_weights(w: np.ndarray) -> np.ndarray:
    """Weights rescaled to sum to Kish's effective sample size ``(sum w)^2 / sum w^2``.

    Multiplying every weight by a constant leaves the result unchanged (Kish 1965, eq. 11.7.6
    for the effective sample size; value recalled from the book, not re-derived here).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._estimate import kish_weights
    >>> kish_weights(np.array([2.0, 2.0, 2.0])).tolist()
    [1.0, 1.0, 1.0]
    """
    total = float(w.sum())
    if total <= 0:
        return w
    return w * (total / float(np.dot(w, w)))


# -- shared input handling ---------------------------------------------------------------------
def _check_target(proba: Any, sample_weight: Any, name: str = "proba") -> tuple[np.ndarray, np.ndarray]:
    p = check_proba(proba, name=name, ndim=2)
    w = check_sample_weight(sample_weight, p.shape[0])
    return p, w


def _check_confusion(confusion: Any, k: int) -> np.ndarray:
    try:
        c = np.asarray(confusion, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`confusion` must be a numeric (k, k) matrix; got {plain(confusion)!r}.") from exc
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
_TINY = np.finfo(float).tiny


def _binary_solve(
    q0: np.ndarray,
    q1: np.ndarray,
    w: np.ndarray,
    pseudo: np.ndarray,
    start: float,
    tol: float,
    max_iter: int,
) -> tuple[float, int, bool, float]:
    """Maximise ``sum w log(q0 + t (q1 - q0)) + a1 log t + a0 log(1 - t)`` over t in [0, 1].

    The function is concave, so its derivative falls monotonically: a safeguarded Newton
    iteration keeps a bracket ``[lo, hi]`` around the root of the derivative and falls back to
    bisection whenever a Newton step leaves it. It stops once the bracket around the returned
    point is narrower than ``tol`` (checked by evaluating the derivative ``tol / 2`` either
    side), so ``distance`` bounds the error to the exact optimum. Returns
    ``(t, n_iter, converged, distance)``.
    """
    a0, a1 = float(pseudo[0]), float(pseudo[1])
    d = q1 - q0

    def grad(t: float) -> tuple[float, float]:
        with np.errstate(over="ignore"):  # at t = 0 or 1 a row may have no mass: g is then inf
            r = d / np.maximum(q0 + t * d, _TINY)
            g = float(w @ r)
            h = -float(w @ (r * r))
        if a1 > 0:
            g += a1 / t
            h -= a1 / (t * t)
        if a0 > 0:
            g -= a0 / (1.0 - t)
            h -= a0 / ((1.0 - t) ** 2)
        return g, h

    lo, hi = 0.0, 1.0
    if a1 <= 0 and grad(0.0)[0] <= 0:
        return 0.0, 1, True, 0.0
    if a0 <= 0 and grad(1.0)[0] >= 0:
        return 1.0, 1, True, 0.0
    t = min(max(float(start), 1e-12), 1.0 - 1e-12)
    for it in range(1, max_iter + 1):
        g, h = grad(t)
        if g > 0:
            lo = t
        elif g < 0:
            hi = t
        else:
            return t, it, True, 0.0
        new = t - g / h if h < 0 else np.nan
        if not (np.isfinite(new) and lo < new < hi):
            new = 0.5 * (lo + hi)
        if abs(new - t) <= 0.25 * tol or hi - lo <= tol:
            # certify: the root lies within tol / 2 of `new` if the derivative changes sign there
            left, right = max(new - 0.5 * tol, lo), min(new + 0.5 * tol, hi)
            if left > lo:
                if grad(left)[0] > 0:
                    lo = left
                else:
                    hi = left
            if right < hi:
                if grad(right)[0] < 0:
                    hi = right
                else:
                    lo = right
            new = min(max(new, lo), hi)
            dist = max(new - lo, hi - new)
            if dist <= tol:
                return new, it, True, dist
        t = new
    return t, max_iter, False, max(t - lo, hi - t)


def _em_multi(
    p: np.ndarray,
    w: np.ndarray,
    src: np.ndarray,
    pseudo: np.ndarray,
    init: np.ndarray,
    tol: float,
    max_iter: int,
) -> tuple[np.ndarray, int, bool, float]:
    """(Penalised) EM of Saerens et al. (2002); stops on a bound of the distance to the fixed point.

    With step sizes ``s_m`` shrinking by the observed ratio ``rho = s_m / s_(m-1) < 1`` (EM
    converges linearly near its fixed point; Dempster, Laird & Rubin 1977, section 3), the
    remaining distance is at most ``s_m rho / (1 - rho)`` (a geometric series); EM stops when
    that bound is below ``tol``. Returns ``(prior, n_iter, converged, distance)``.
    """
    ratio = p / src
    total = float(w.sum() + pseudo.sum())
    prior = init.copy()
    prev = np.inf
    dist = np.inf
    for it in range(1, max_iter + 1):
        num = ratio * prior
        post = num / np.maximum(num.sum(axis=1, keepdims=True), _TINY)
        new = (w @ post + pseudo) / total
        new = new / new.sum()
        step = float(np.max(np.abs(new - prior)))
        prior = new
        rho = step / prev if prev > 0 else 0.0
        dist = step * rho / (1.0 - rho) if rho < 1.0 else np.inf
        if step == 0.0 or (dist <= tol and step <= tol):
            return prior, it, True, (0.0 if step == 0.0 else dist)
        prev = step
    return prior, max_iter, False, dist


def _solve_prior(
    p: np.ndarray,
    w: np.ndarray,
    src: np.ndarray,
    init: np.ndarray,
    tol: float,
    max_iter: int,
    strength: float = 0.0,
) -> tuple[np.ndarray, int, bool, float]:
    """Maximum-likelihood (``strength=0``) or MAP prior of unlabelled posteriors ``p``.

    The penalty is a Dirichlet prior with parameters ``1 + strength * src`` (its mode is the
    source prior), i.e. ``strength`` pseudo-rows with the source shares added to the rows'
    weights ``w``. Two classes: safeguarded Newton on the concave log-likelihood; more: EM.
    """
    pseudo = float(strength) * src
    if p.shape[1] == 2:
        q = p / src
        t, n_iter, ok, dist = _binary_solve(
            q[:, 0], q[:, 1], w, pseudo, float(init[1]), tol, max_iter
        )
        return np.array([1.0 - t, t]), n_iter, ok, dist
    return _em_multi(p, w, src, pseudo, init, tol, max_iter)


def _em(
    p: np.ndarray,
    w: np.ndarray,
    src: np.ndarray,
    init: np.ndarray,
    tol: float,
    max_iter: int,
) -> tuple[np.ndarray, int, bool]:
    """Plain maximum likelihood (kept for callers that want the three-tuple)."""
    prior, n_iter, ok, _ = _solve_prior(p, w, src, init, tol, max_iter)
    return prior, n_iter, ok


def em_prior(
    proba: Any,
    source_prior: Any,
    *,
    sample_weight: Any = None,
    init: Any = None,
    tol: float = 1e-6,
    max_iter: int = 1000,
    prior_strength: float = 0.0,
) -> PriorEstimate:
    r"""Maximum-likelihood (or shrunk) class priors of unlabelled data (Saerens et al. 2002).

    With posteriors :math:`p_s(k \mid x_n)` learned under priors :math:`\pi^s`, each EM step
    re-weights the posteriors to the current priors (eq. 2.4) and sets the new priors to the
    mean re-weighted posterior (eqs. 2.9-2.10 of Saerens, Latinne & Decaestecker 2002):

    .. math::

        \pi^{(m+1)}_k = \frac{1}{N} \sum_n
            \frac{\frac{\pi^{(m)}_k}{\pi^s_k} p_s(k \mid x_n)}
                 {\sum_j \frac{\pi^{(m)}_j}{\pi^s_j} p_s(j \mid x_n)}

    Its fixed point maximises the log-likelihood of the unlabelled rows
    (:func:`prior_log_likelihood`). For two classes that likelihood is a concave function of
    one number, and it is maximised directly by a safeguarded Newton iteration (same optimum,
    fewer steps); for more classes by EM.

    ``prior_strength > 0`` adds a Dirichlet prior whose mode is the source prior, with
    parameters ``1 + prior_strength * source_prior``: the MAP estimate, as if
    ``prior_strength`` extra rows with exactly the source shares had been seen. Weights are
    rescaled to sum to Kish's effective sample size first, so the result does not depend on
    the scale of ``sample_weight``. The EM update becomes
    :math:`\pi_k \propto \sum_n w_n r_{nk} + c\,\pi^s_k`.

    The iteration stops when the estimate is certified to lie within ``tol`` of the exact
    optimum (a derivative bracket for two classes; for more classes the remaining distance
    bounded from the observed contraction of the steps). ``distance`` reports that bound.

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
        Largest accepted distance to the optimum (per class share).
    max_iter : int, default=1000
        Iteration cap; reaching it raises a :class:`~sklearn.exceptions.ConvergenceWarning`
        that states the distance reached.
    prior_strength : float, default=0.0
        Pseudo-rows of the Dirichlet prior centred on the source prior (0: maximum likelihood).

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
        raise ValueError(f"`tol` must be a positive number; got {plain(tol)!r}.")
    if not (isinstance(max_iter, (int, np.integer)) and max_iter >= 1):
        raise ValueError(f"`max_iter` must be a positive integer; got {plain(max_iter)!r}.")
    if not (isinstance(prior_strength, (int, float)) and np.isfinite(prior_strength)
            and prior_strength >= 0):
        raise ValueError(
            f"`prior_strength` must be a finite non-negative number; got {plain(prior_strength)!r}."
        )
    _warn_empty_columns(w @ p, "predicted probability mass")
    prior, n_iter, converged, dist = _solve_prior(
        p, kish_weights(w), src, start, float(tol), int(max_iter), float(prior_strength)
    )
    if not converged:
        warnings.warn(
            f"Prior estimation did not converge within max_iter={max_iter} iterations: the "
            f"last iterate may be up to {dist:.3g} from the optimum (tol={tol}). This happens "
            "when a class share heads to 0; raise `max_iter`, or use `prior_strength`.",
            ConvergenceWarning,
            stacklevel=2,
        )
    return PriorEstimate(
        prior=prior, method="em", n_iter=n_iter, converged=converged, n_rows=p.shape[0],
        distance=float(dist),
    )


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
    p, w = _check_target(proba, sample_weight)
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
    >>> from probwrap.shift._estimate import null_harm
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


def null_harm_scale(
    proba: np.ndarray, sample_weight: np.ndarray, source_prior: np.ndarray, mean_cov: np.ndarray
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
    """
    p = np.asarray(proba, dtype=float)
    w = np.asarray(sample_weight, dtype=float)
    src = np.asarray(source_prior, dtype=float)
    wn = w / w.sum()
    u = _score_rows(p, src)
    j = (u * wn[:, None]).T @ u
    mp = wn @ p
    k_mat = np.diag(mp[1:] / src[1:] ** 2) + mp[0] / src[0] ** 2 - j
    j_inv = np.linalg.pinv(j)
    sigma = j_inv @ np.atleast_2d(mean_cov) @ j_inv
    lam = float(np.max(np.linalg.eigvals(k_mat @ sigma).real, initial=0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        ent = -np.where(p > 0, p * np.log(p), 0.0).sum(axis=1)
    loss = float(wn @ ent)
    if not (loss > 0 and np.isfinite(lam)):
        return 0.0
    return max(lam, 0.0) / (2.0 * loss)


def evidence_cutoff(harm_scale: float | None, df: int, max_harm: float | None,
                    floor: float) -> float:
    r"""The cutoff ``c`` of the shrinkage rule ``w = max(0, 1 - c df / T)``.

    ``floor`` (``min_evidence``) when ``max_harm`` is None or the expected relative harm
    under no shift, ``harm_scale * null_harm(floor, df)``, is already at most ``max_harm``;
    otherwise the smallest ``c > floor`` with ``harm_scale * null_harm(c, df) = max_harm``
    (root by Brent's method; :func:`null_harm` falls monotonically in ``c``).

    Examples
    --------
    >>> from probwrap.shift._estimate import evidence_cutoff, null_harm
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
) -> ShiftTestResult:
    r"""Score test that unlabelled rows have the source class priors; no estimate needed.

    Each row's score of the prior log-likelihood at the source prior is
    :math:`u_{nj} = p(j \mid x_n)/\pi^s_j - p(0 \mid x_n)/\pi^s_0` for
    :math:`j = 1..k-1`. Under no shift its mean over the unlabelled rows is zero (Rao's score
    test; Rao 1948). Given the labelled rows' posteriors ``source_proba``, the test compares
    the mean score of the two samples instead — a two-sample comparison of means with separate
    variances (Welch's form of the z-test; for two classes it equals statsmodels'
    ``CompareMeans.ztest_ind(usevar="unequal")`` squared) — so the sampling error of the
    labelled rows the posteriors were calibrated on is part of the test, not ignored. The
    statistic :math:`\Delta^\top (\Sigma_t / (n_t - 1) + \Sigma_s / (n_s - 1))^{-1}
    \Delta` is chi-square with ``k - 1`` degrees of freedom under no shift; ``n`` are Kish's
    effective sample sizes, so the test does not depend on the scale of the weights.

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Calibrated posteriors of the unlabelled rows.
    source_prior : array-like of shape (k,)
        Priors the posteriors were learned under.
    sample_weight : array-like of shape (n,), default=None
    source_proba : array-like of shape (m, k), default=None
        Calibrated posteriors of the labelled rows (None: one-sample test, posteriors taken
        as exact).
    source_sample_weight : array-like of shape (m,), default=None
    source_y : array-like of shape (m,), default=None
        Class indices of the labelled rows. When given (and ``source_prior`` is their weighted
        class shares), the labelled mean is the class-stratified mean
        :math:`\sum_c \pi^s_c \bar u_c` and its variance the stratified
        :math:`\sum_c (\pi^s_c)^2 s^2_c / (n_c - 1)`: the class shares of the labelled rows
        are the null hypothesis itself, so their sampling error does not enter (without
        ``source_y`` the plain two-sample variance is used, which is larger).

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
    p, w = _check_target(proba, sample_weight)
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    mean, cov, n = _mean_cov(_score_rows(p, src), w)
    source = None
    if source_proba is not None:
        ps, ws = _check_target(source_proba, source_sample_weight, name="source_proba")
        if ps.shape[1] != k:
            raise ValueError(f"`source_proba` has {ps.shape[1]} columns but `proba` has {k}.")
        ys = None
        if source_y is not None:
            check_same_length(("source_proba", ps), ("source_y", source_y))
            ys, _ = check_labels(source_y, name="source_y", classes=np.arange(k), min_classes=1)
        source = _source_moments(_score_rows(ps, src), ws, ys, src)
    stat, pvalue = _score_stat_moments((mean, cov, n), source, k)
    return ShiftTestResult(statistic=stat, pvalue=pvalue, df=k - 1)


def _source_moments(
    u: np.ndarray,
    w: np.ndarray,
    y: np.ndarray | None,
    prior: np.ndarray,
    n_eff: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Mean of the labelled rows' scores and the covariance of that mean.

    With class indices ``y`` the mean is stratified by class, ``sum_c prior_c mean_c``, with
    covariance ``sum_c prior_c^2 cov_c / (n_c - 1)`` (``n_c`` Kish's count of class ``c``, or
    ``n_eff`` times the class's weight share when ``n_eff`` overrides it); without, the plain
    weighted mean with ``cov / (n - 1)``.
    """
    if y is None:
        mean, cov, n = _mean_cov(u, w)
        n = float(n_eff) if n_eff else n
        return mean, cov / max(n - 1.0, 1.0)
    total = float(w.sum())
    mean = np.zeros(u.shape[1])
    cov = np.zeros((u.shape[1], u.shape[1]))
    for c in range(prior.shape[0]):
        rows = y == c
        wc = w[rows]
        if wc.sum() <= 0:
            continue
        m_c, c_c, n_c = _mean_cov(u[rows], wc)
        if n_eff:
            n_c = float(n_eff) * float(wc.sum()) / total
        mean = mean + prior[c] * m_c
        cov = cov + prior[c] ** 2 * c_c / max(n_c - 1.0, 1.0)
    return mean, cov


def _score_stat_moments(target: tuple, source: tuple | None, k: int) -> tuple[float, float]:
    """Score statistic from the target's (mean, covariance, effective rows) of the per-row
    scores and the labelled rows' (mean, covariance of the mean)."""
    mean, cov, n = target
    total = cov / max(n - 1.0, 1.0)
    if source is not None:
        m_s, c_s = source
        mean = mean - m_s
        total = total + c_s
    stat = float(mean @ np.linalg.pinv(total) @ mean) if np.any(total) else 0.0
    stat = max(stat, 0.0)
    return stat, float(chi2.sf(stat, k - 1))


# -- confusion-matrix estimators ---------------------------------------------------------------
def _identification(c: np.ndarray, n_source: float | None) -> tuple[bool, str]:
    """Whether a joint confusion matrix ``c`` (rows predicted, columns true) identifies the priors.

    With the class-conditional matrix ``M = c / column sums`` the priors solve ``M pi = q``.
    They are identified when ``M`` is far from singular compared with its own sampling error:
    for two classes ``|tpr - fpr| > 3 se`` with the binomial standard error
    ``se = sqrt(tpr (1 - tpr) / n_1 + fpr (1 - fpr) / n_0)`` of the rates on the labelled rows
    (our rule: a denominator known to better than a third of itself); for more classes the
    smallest singular value of ``M`` against three times the root of the summed binomial
    variances of its entries. Without ``n_source`` only an exactly singular matrix fails.
    """
    col = c.sum(axis=0)
    m = c / np.where(col > 0, col, 1.0)
    k = c.shape[0]
    if k == 2:
        tpr, fpr = m[1, 1], m[1, 0]
        gap = abs(tpr - fpr)
        if n_source is None or not np.isfinite(n_source):
            return bool(gap > 1e-9), f"tpr {tpr:.3g}, fpr {fpr:.3g}"
        n1, n0 = max(n_source * col[1], 1.0), max(n_source * col[0], 1.0)
        se = float(np.sqrt(tpr * (1 - tpr) / n1 + fpr * (1 - fpr) / n0))
        return bool(gap > 3.0 * max(se, 1e-12)), (
            f"true-positive rate {tpr:.3g} and false-positive rate {fpr:.3g} differ by "
            f"{gap:.3g}, against a standard error of {se:.3g} from the labelled rows"
        )
    sv = np.linalg.svd(m, compute_uv=False)
    smallest = float(sv[-1])
    if n_source is None or not np.isfinite(n_source):
        return bool(smallest > 1e-9), f"smallest singular value {smallest:.3g}"
    var = m * (1 - m) / np.maximum(n_source * col, 1.0)
    se = float(np.sqrt(var.sum()))
    return bool(smallest > 3.0 * max(se, 1e-12)), (
        f"the class-conditional confusion matrix has smallest singular value {smallest:.3g}, "
        f"against a sampling error of about {se:.3g}"
    )


def _not_identified(what: str, reason: str, stacklevel: int = 3) -> None:
    warnings.warn(
        f"{what} cannot identify the class priors: {reason}. The model's predictions barely "
        "differ between the classes, so the estimate would be noise presented as a number. The "
        "source prior is returned with an interval spanning [0, 1]; use method='em' with "
        "calibrated posteriors, or a model that separates the classes better.",
        PriorNotIdentifiedWarning,
        stacklevel=stacklevel,
    )


def _solve_or_lstsq(a: np.ndarray, b: np.ndarray, what: str) -> np.ndarray:
    return np.linalg.lstsq(a, b, rcond=None)[0]


def bbse_prior(
    proba: Any,
    confusion: Any,
    source_prior: Any,
    *,
    soft: bool = False,
    sample_weight: Any = None,
    n_source: float | None = None,
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
    n_source : float, default=None
        Effective number of labelled rows behind ``confusion``. When given, a confusion matrix
        that is singular within its sampling error (for two classes: true- and false-positive
        rates within three standard errors) is reported as not identified: a
        :class:`PriorNotIdentifiedWarning`, the source prior, ``identified=False``. Without
        it only an exactly singular matrix is.

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
    name = "bbse_soft" if soft else "bbse"
    ok, reason = _identification(c, n_source)
    if not ok:
        _not_identified(f"BBSE ({name})", reason)
        return PriorEstimate(prior=src.copy(), method=name, n_rows=p.shape[0], identified=False)
    _warn_empty_columns(mu, "predicted mass" if soft else "predictions")
    weights = _solve_or_lstsq(c, mu, "confusion matrix")
    prior = project_to_simplex(weights * src)
    return PriorEstimate(prior=prior, method=name, n_rows=p.shape[0])


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
    n_source: float | None = None,
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
    n_source : float, default=None
        Effective number of labelled rows behind ``confusion``; see :func:`bbse_prior` for the
        identification check it enables.

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
    name = "pacc" if soft else "acc"
    ok, reason = _identification(c, n_source)
    if not ok:
        _not_identified(name.upper(), reason)
        return PriorEstimate(prior=col.copy(), method=name, n_rows=p.shape[0], identified=False)
    _warn_empty_columns(q, "predicted mass" if soft else "predictions")
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
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    if not n > 0:
        raise ValueError(f"`n` must be positive; got {plain(n)!r}.")
    if not np.all(np.isfinite(pr)) or np.any((pr < 0) | (pr > 1)):
        raise ValueError(f"`proportion` must be in [0, 1]; got {plain(proportion)!r}.")
    alpha = 1.0 - confidence_level
    x = pr * n
    with np.errstate(invalid="ignore"):
        lo = np.where(x <= 0, 0.0, beta_dist.ppf(alpha / 2, np.maximum(x, 1e-300), n - x + 1))
        hi = np.where(x >= n, 1.0, beta_dist.ppf(1 - alpha / 2, x + 1, np.maximum(n - x, 1e-300)))
    return np.stack([np.nan_to_num(lo, nan=0.0), np.nan_to_num(hi, nan=1.0)], axis=-1)
