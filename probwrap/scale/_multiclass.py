"""Multiclass prior shift on Dask or Spark input: EM, BBSE and bias-corrected scaling as
reductions.

A multiclass posterior vector has no one-dimensional score to tally, so nothing is binned here.
Instead the model's posteriors stay where the rows live (persisted Dask blocks, or a cached Spark
DataFrame of blocks; see :mod:`probwrap.scale._rows`) and every step of the fits is a sum over rows
computed per block and added on the client (the driver):

- bias-corrected temperature / vector scaling: each Newton step needs the weighted log loss, its
  gradient and Hessian (sizes k and k x k) — one pass over the blocks per evaluation;
- the source prior and the hard / soft confusion matrices: one pass;
- EM: each iteration is one pass computing ``sum_i w_i normalise(p_i * prior / source)``;
  after a base model refit on the labelled rows (in memory) over every row once per fold
  model, the fold models' calibrated posteriors kept where the rows live and each weighted by
  the row's weight times the fold's share, the rows the in-memory estimate reads
  (``PriorEstimator._estimating_rows``);
- BBSE / ACC: the target's mean (hard or soft) predicted-class distribution, one pass;
- the two-sample score test of "no shift": the mean and covariance of the per-row scores, one
  pass over the labelled and one over the unlabelled blocks;
- the analytic interval of the EM prior (:mod:`probwrap.shift._analytic`): the sums behind the
  sandwich covariance of the calibration and the source prior (one pass over the labelled
  blocks), the maximum-likelihood EM, and the sums of the scores and their derivatives at it
  (one pass over the unlabelled rows, predicting again: the calibration's Jacobian needs the
  model's raw posteriors).

The client only ever holds k-vectors and k x k matrices. The arithmetic is that of
:mod:`probwrap.shift` on the same rows, so results agree with the in-memory path up to the order
of floating-point additions.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from sklearn.exceptions import ConvergenceWarning

from ._blocks import (
    block_label_index,
    block_weights,
    check_class_rows,
    class_rows,
    predict_block,
)
from ._dask import _frozen_multiclass
from ._multiclass_wrappers import _SharedFactor, _Smallest
from ._rows import _ScaledBlocks, in_weight_unit, rows_of
from ._tally import ZERO_WEIGHT, kept_rows_limit, warn_weight_unit

__all__ = ["fit_multiclass_source", "estimate_multiclass_target"]

_TINY = np.finfo(float).tiny


# -- blocks kept on the workers -----------------------------------------------------------------
def _source_block(estimator, classes, Xb, yb, wb):
    pos = block_label_index(classes, yb)
    w = block_weights(wb, pos.shape[0])
    if pos.shape[0] == 0:  # an empty block (partition): kept as None, left out of every sum
        return None
    p = predict_block(estimator, "predict_proba", Xb, classes.shape[0])
    # the log-probabilities are taken at the fit's floor (chosen from all blocks) in each pass
    return p, None, pos, w


def _target_block(estimator, calibrator, Xb, wb):
    p = predict_block(estimator, "predict_proba", Xb, len(estimator.classes_))
    w = block_weights(wb, p.shape[0])
    if p.shape[0] == 0:  # an empty block (partition): kept as None, left out of every sum
        return None
    if calibrator is not None:
        p = calibrator.predict(p)
    return p, w


def _stacked_target_block(folds, calibrator, share, Xb, wb):
    """A block of unlabelled rows as the in-memory estimate after a refit reads them
    (``PriorEstimator._estimating_rows``): every row once per fold model, its calibrated
    posterior from that model, weighted by the row's weight times the fold's share.
    ``(posteriors (K n, k), the rows' own weights (n,), stacked weights (K n,))``; the
    reductions over target blocks read the first and the last entry."""
    fp = folds.fold_proba(Xb)
    w = block_weights(wb, fp.shape[1])
    if fp.shape[1] == 0:  # an empty block (partition): kept as None, left out of every sum
        return None
    if calibrator is not None:
        fp = np.stack([calibrator.predict(f) for f in fp])
    return (fp.reshape(-1, fp.shape[2]), w,
            np.concatenate([s_k * w for s_k in np.asarray(share, dtype=float)]))


def _fold_row_sums(block, src, share, unit, averaged):
    """Sums over a block of :func:`_stacked_target_block` that need each row's fold models
    together: the weighted sums of the shift-test scores averaged over the fold models (each
    fold weighted by its share) and of their outer products (the shift test's and the
    class-moment interval's unlabelled side, as in memory); with ``averaged`` (the wrapper
    predicts with the fold models' average) also the sums behind the harm scale of that
    average posterior (as :func:`_means`: the weighted sums of the posteriors and of their
    entropy, and of the outer products of their scores). The rows' own weights (the middle
    entry, not divided by the blocks' unit) are divided by ``unit``."""
    p, w = block[0], block[1] / unit
    n = w.shape[0]
    k = src.shape[0]
    fp = p.reshape(-1, n, k)
    q = fp / src
    u = np.tensordot(share, q[:, :, 1:] - q[:, :, :1], axes=1)
    out = (w @ u, (u * w[:, None]).T @ u)
    if not averaged:
        return out
    avg = np.tensordot(share, fp, axes=1)
    qa = avg / src
    ua = qa[:, 1:] - qa[:, :1]
    with np.errstate(divide="ignore", invalid="ignore"):
        entropy = float(w @ -np.where(avg > 0, avg * np.log(avg), 0.0).sum(axis=1))
    return (*out, w @ avg, (ua * w[:, None]).T @ ua, np.array([entropy]))


# -- small sets: the rows themselves ---------------------------------------------------------
class _KeptRows:
    """Arrays of the rows of blocks, concatenated in block order by ``+`` (the reduction)."""

    def __init__(self, *arrays: np.ndarray) -> None:
        self.arrays = arrays

    def __add__(self, other: _KeptRows) -> _KeptRows:
        return _KeptRows(*(np.concatenate([a, b]) for a, b in zip(self.arrays, other.arrays,
                                                                   strict=True)))


def _kept_source(block):
    """The model's posteriors, label indices and weights of a kept labelled block."""
    p, _, y, w = block
    return _KeptRows(p, y, w)


def _kept_target(estimator, Xb, wb):
    """The model's own posteriors and the weights of a block of unlabelled rows."""
    p = predict_block(estimator, "predict_proba", Xb, len(estimator.classes_))
    return _KeptRows(p, block_weights(wb, p.shape[0]))


# -- source side ------------------------------------------------------------------------------
def _counts(block, k):
    """Class weights, sum of squared weights, rows of positive weight, and the smallest non-zero
    probability of those rows (for the floor before logarithms, as in memory)."""
    p, _, y, w = block
    positive = p[w > 0]
    positive = positive[positive > 0]
    return (np.bincount(y, weights=w, minlength=k), float(np.dot(w, w)),
            float(np.count_nonzero(w)),
            _Smallest(float(positive.min()) if positive.size else np.inf),
            *class_rows(y, w, k), _SharedFactor.of(w))


def _scaling_terms(block, theta, n_scale, k, total, clip):
    from ..calibration._logodds import proba_to_log_proba
    from ..shift._calibration import _hessian, _log_softmax

    p, _, y, w = block
    z = proba_to_log_proba(p, clip=clip)
    w = w / total
    a = np.broadcast_to(theta[:n_scale], (k,))
    b = np.concatenate([[0.0], theta[n_scale:]])
    logits = z * a + b
    logp = _log_softmax(logits, axis=1)
    onehot = np.zeros_like(logp)
    onehot[np.arange(y.shape[0]), y] = 1.0
    loss = -float(np.sum(w * np.sum(onehot * logp, axis=1)))
    resid = (np.exp(logp) - onehot) * w[:, None]
    g_a = np.sum(resid * z, axis=0)
    g_scale = np.array([g_a.sum()]) if n_scale == 1 else g_a
    grad = np.concatenate([g_scale, resid.sum(axis=0)[1:]])
    hess = _hessian(z, w, n_scale)(logits)
    return np.array([loss]), grad, hess


def _floored_sums(block, a, b, total, clip, floor):
    """A block's share of probwrap.shift._calibration.floored_terms (weights over ``total``)."""
    from ..calibration._logodds import proba_to_log_proba
    from ..shift._calibration import floored_terms

    p, _, _, w = block
    return floored_terms(proba_to_log_proba(p, clip=clip), w / total, a, b, floor)


def _confusions(block, calibrator, k):
    p, _, y, w = block
    if calibrator is not None:
        p = calibrator.predict(p)
    onehot = np.eye(k)[y]
    hard = (np.eye(k)[np.argmax(p, axis=1)] * w[:, None]).T @ onehot
    soft = (p * w[:, None]).T @ onehot
    # the labelled rows' log loss (weighted sum), the evidence gate's reference as in memory
    own = np.maximum(p[np.arange(p.shape[0]), y], np.finfo(float).tiny)
    return hard, soft, np.array([-(w @ np.log(own))])


def _score_sums(block, calibrator, src):
    """Weighted sums of the per-row shift-test scores (see probwrap.shift.shift_score_test)."""
    p, w = block[0], block[-1]
    q = p / src
    u = q[:, 1:] - q[:, :1]
    return w @ u, (u * w[:, None]).T @ u


def _class_score_sums(block, calibrator, src):
    """Per-class weighted sums of the labelled rows' scores, weights and squared weights."""
    p, _, y, w = block
    if calibrator is not None:  # source blocks hold uncalibrated posteriors
        p = calibrator.predict(p)
    q = p / src
    u = q[:, 1:] - q[:, :1]
    k = src.shape[0]
    onehot = np.eye(k)[y] * w[:, None]  # (n, k)
    su = onehot.T @ u
    suu = np.einsum("nc,ni,nj->cij", onehot, u, u)
    # and weighted by each row's posterior of every class, for the spread the posteriors imply
    # (probwrap.shift._analytic.implied_class_covs)
    pw = p * w[:, None]
    return (su, suu, onehot.sum(axis=0), (onehot * w[:, None]).sum(axis=0),
            pw.T @ u, np.einsum("nc,ni,nj->cij", pw, u, u), pw.sum(axis=0))


def fit_multiclass_source(owner: Any, X: Any, y: Any, sample_weight: Any):
    """Fit a :class:`probwrap.shift.PriorEstimator` from labelled multiclass Dask or Spark rows.

    Sets ``estimator_``, ``classes_`` (and feature attributes) on ``owner``; returns the
    estimator. Its ``n_resamples`` is the owner's where the analytic interval is prepared
    (:func:`_wants_interval`), so that unlabelled rows passed in memory after a Dask fit get
    that interval too (it was 0, and their ``target_prior_interval_`` None); 0 otherwise (no
    bootstrap for multiclass Dask input).
    """
    from ..calibration._logodds import clip_from_smallest
    from ..shift import PriorEstimator
    from ..shift._calibration import (
        BiasCorrectedScaling,
        _floor,
        _newton,
        floored_bias,
        identity_test,
        scale_penalty,
    )
    from ..shift._estimate import check_class_names, name_classes
    from ..shift._shift_tests import _source_moments_from_sums

    estimator, classes = _frozen_multiclass(owner, y)
    k = classes.shape[0]
    names = check_class_names(classes, k)
    parts = rows_of(X, y, sample_weight, estimator).persist(_source_block, estimator, classes)
    try:
        # weights beyond about 1e+-77 divided by a power of two, as in memory
        parts, unit = in_weight_unit(parts, sample_weight is not None)
        class_weight, squared_weight, positive_rows, smallest, rows, weighted, factor = (
            parts.reduce(_counts, k))
        total = float(class_weight.sum())
        if total <= 0:
            raise ValueError(ZERO_WEIGHT)
        # as in memory: two classes (two with weight); a class without rows is refused below
        check_class_rows(owner, classes, rows, weighted, absent_warning=False)
        warn_weight_unit(unit, type(owner).__name__, total, stacklevel=5)
        if np.any(class_weight <= 0):
            raise ValueError(
                f"`y` has no (positively weighted) rows of "
                f"{name_classes(np.flatnonzero(class_weight <= 0), names)}; every class needs "
                "held-out rows to estimate its prior."
            )
        owner.classes_ = classes  # (set again below) for the warning about classes of few rows
        owner._warn_few_class_rows(np.asarray(weighted, dtype=np.int64))
        if float(np.sum(rows)) <= kept_rows_limit():
            # a small set (probwrap.scale._tally.KEPT_ROWS): the posteriors come to the client and the in-memory fit
            # runs on them — the tail choice on at most 200 labelled rows, the calibration's
            # count of rows for weights summing to fewer than the rows — so the result is the
            # in-memory one (the weights already divided by the unit, as in memory)
            p, y_idx, w = parts.reduce(_kept_source).arrays
            est = PriorEstimator(
                owner.method, calibration=owner.calibration, tol=owner.em_tol,
                max_iter=owner.em_max_iter, n_resamples=owner.n_resamples,
                confidence_level=owner.confidence_level, random_state=owner.random_state,
                prior_strength=owner.prior_strength, interval=owner.interval,
            )
            est.fit(p, y_idx, w, class_names=classes, _weight_owner=None)  # (the wrapper warns)
            _set_fitted(owner, estimator, classes)
            return est
        est = PriorEstimator(
            owner.method, calibration=owner.calibration, tol=owner.em_tol,
            max_iter=owner.em_max_iter,
            n_resamples=int(owner.n_resamples) if _wants_interval(owner) else 0,
            confidence_level=owner.confidence_level, random_state=owner.random_state,
            prior_strength=owner.prior_strength,
        )
        est._check_params()
        cal = None
        if owner.calibration is not None:
            kind = "temperature" if owner.calibration == "bcts" else "vector"
            n_scale = 1 if kind == "temperature" else k
            cache: dict = {}
            # the weak prior on the scales, as in memory: worth shrinkage rows, the weights read
            # as row frequencies unless they sum to fewer rows than there are (then Kish's
            # effective size; probwrap.calibration._base.count_weights)
            shrinkage = BiasCorrectedScaling(kind=kind).shrinkage
            n_rows = total if total >= positive_rows else total**2 / squared_weight
            lam = shrinkage / n_rows
            # the floor before logarithms, as in memory (probwrap.shift._calibration
            # .heldout_clip): half the smallest non-zero probability of the rows of positive
            # weight, at least half the map's output floor for n_rows rows
            clip = max(clip_from_smallest(smallest.value), 0.5 * _floor(n_rows, k))

            def terms(theta):
                key = theta.tobytes()
                if key not in cache:
                    cache.clear()
                    cache[key] = parts.reduce(_scaling_terms, theta, n_scale, k, total, clip)
                return cache[key]

            def loss_grad(theta):
                loss, grad, _ = terms(theta)
                pen, pen_grad, _ = scale_penalty(theta, n_scale, lam)
                return float(loss[0]) + pen, grad + pen_grad

            def hess(theta):
                return terms(theta)[2] + scale_penalty(theta, n_scale, lam)[2]

            theta0 = np.concatenate([np.ones(n_scale), np.zeros(k - 1)])
            theta, converged = _newton(loss_grad, hess, theta0, n_scale)
            # as in memory: output the model's own probabilities unless a likelihood-ratio test
            # rejects them against the fitted map (BiasCorrectedScaling.identity_level)
            template = BiasCorrectedScaling(kind=kind)
            pvalue, keep = identity_test(float(terms(theta0)[0][0]), float(terms(theta)[0][0]),
                                         n_rows, theta.shape[0], template.identity_level)
            cal = template
            cal.identity_pvalue_ = pvalue
            cal.identity_kept_ = bool(keep)
            cal.scale_ = np.array(np.broadcast_to(theta[:n_scale], (k,)), dtype=float)
            cal.bias_ = np.concatenate([[0.0], theta[n_scale:]])
            cal.n_classes_ = k
            cal.converged_ = bool(converged)
            cal.floor_ = _floor(n_rows, k)
            cal.clip_ = clip
            # as in memory: the biases re-solved for the floored outputs (floored_bias)
            cal.bias_ = floored_bias(
                lambda bb: parts.reduce(_floored_sums, cal.scale_, bb, total, clip, cal.floor_),
                cal.bias_, class_weight / total, cal.floor_)
        hard, soft, loss_sum = parts.reduce(_confusions, cal, k)
        su, suu, sw, sww, spu, spuu, spw = parts.reduce(_class_score_sums, cal,
                                                        class_weight / total)
        eta_sums = None
        if _wants_interval(owner):
            # the labelled side of the analytic interval: sums for the sandwich covariance of
            # the calibration and the source prior (probwrap.shift._analytic), one pass
            eta_sums = parts.reduce(_labelled_interval_sums, cal, class_weight / total)
    finally:
        parts.release()  # release the persisted blocks on the workers
    est.n_classes_ = k
    est.class_names_ = names
    est.calibrator_ = cal
    est.source_prior_ = class_weight / total
    est.confusion_ = hard / total
    est.soft_confusion_ = soft / total
    est._source_log_loss = float(np.asarray(loss_sum).ravel()[0]) / total
    est._src = None
    est.n_source_effective_ = total**2 / squared_weight
    from .._validation import COUNT_TABLE_MAX_CASES

    cases = (unit == 1.0 and factor.value == 1 and total > positive_rows
             and total <= COUNT_TABLE_MAX_CASES)
    if cases:
        # a count table (whole numbers, no common factor above 1, some above 1): its cases, as
        # in memory (probwrap.shift._estimator._table_cases)
        est.n_source_effective_ = float(total)
    if eta_sums is not None:
        from ..shift._analytic import labelled_cov_from_sums

        # the row count behind the calibration's penalty, as in memory (count_weights)
        n_rows = total if total >= positive_rows else total**2 / squared_weight
        est._labelled_cov = labelled_cov_from_sums(cal, eta_sums, n_rows,
                                                   est.n_source_effective_)
        # the class-conditional score moments of the default interval, as in memory, from the
        # per-class sums the shift test's labelled side reads
        from ..shift._analytic import class_score_moments

        est._class_scores = class_score_moments((su, suu, sw, sww),
                                                est.n_source_effective_ if cases else None)
        from ..shift import _analytic

        if _analytic.SPREAD_FLOOR:
            # each class's spread floored at the one the posteriors imply, as in memory
            # (PriorEstimator._floored, implied_class_covs, from the same sums)
            safe = np.maximum(spw, np.finfo(float).tiny)
            mean_p = spu / safe[:, None]
            implied = spuu / safe[:, None, None] - np.einsum("ci,cj->cij", mean_p, mean_p)
            est._class_scores = _analytic.floor_class_spread(est._class_scores, implied)
    # the labelled side of the two-sample shift test, as in memory: the plain mean of the
    # scores and its variance (probwrap.shift._shift_tests._source_moments without classes)
    est._source_score = _source_moments_from_sums(su.sum(axis=0), suu.sum(axis=0),
                                                  float(sw.sum()), float(sww.sum()))
    if cases:  # the count table's cases, as in memory (_source_moments with n_eff)
        mean_s, ((cov_s, n_s),) = est._source_score
        est._source_score = (mean_s, ((cov_s * max(n_s - 1.0, 1.0) / max(total - 1.0, 1.0),
                                       float(total)),))
    _set_fitted(owner, estimator, classes)
    return est


def _set_fitted(owner: Any, estimator: Any, classes: np.ndarray) -> None:
    owner.estimator_ = estimator
    owner.classes_ = classes
    if hasattr(estimator, "n_features_in_"):
        owner.n_features_in_ = estimator.n_features_in_
    if hasattr(estimator, "feature_names_in_"):
        owner.feature_names_in_ = estimator.feature_names_in_


# -- the analytic interval (more than two classes, method="em") -------------------------------
def _wants_interval(owner: Any) -> bool:
    """Whether a Dask fit prepares the analytic interval: as in memory, for ``method="em"`` with
    ``interval="score"`` and ``n_resamples > 0`` (bootstrap intervals are not offered here)."""
    return (owner.method == "em" and getattr(owner, "interval", "score") == "score"
            and int(owner.n_resamples) > 0)


def _labelled_interval_sums(block, calibrator, src):
    """Sums over a labelled block for the analytic interval (raw posteriors are kept there)."""
    from ..shift._analytic import labelled_sums

    p, _, y, w = block
    return labelled_sums(calibrator, p, y, w, src)


def _target_interval_sums(estimator, calibrator, src, prior, unit, Xb, wb):
    """Sums over an unlabelled block for the analytic interval at the maximum-likelihood
    ``prior``; from the model's raw posteriors (the calibration's Jacobian needs them, and the
    persisted target blocks hold calibrated ones), so this pass predicts once more. The weights
    are divided by ``unit`` (see ``in_weight_unit``)."""
    from ..shift._analytic import target_sums

    k = src.shape[0]
    p = predict_block(estimator, "predict_proba", Xb, k)
    w = block_weights(wb, p.shape[0]) / unit
    if w.sum() <= 0:  # a block without weight (or rows) adds nothing: zeros of the sums' shapes
        probe = np.full((1, k), 1.0 / k)
        return tuple(0.0 * x for x in target_sums(calibrator, probe, np.ones(1), src, prior))
    return target_sums(calibrator, p, w, src, prior)


def _analytic_interval(est, estimator, rows, parts, prior, total, n_eff, unit=1.0,
                       target=None, moments=None):
    """The in-memory interval (``PriorEstimator.estimate`` with more than two classes) from
    per-block sums: the maximum-likelihood prior (EM without the shrinkage's pseudo-rows,
    started at the shrunk estimate); then, with the labelled class moments and ``target`` (the
    unlabelled rows' mean score, its per-row covariance and effective rows, from the shift
    test's sums), the class-moment interval (``moment_prior_interval``), or else (an estimator
    fitted before those were kept) one more pass for the delta-method interval's sums.
    ``moments`` replaces the labelled class moments (a refit base model: the labelled rows
    re-weighted so every fold holds its share, see ``_refit_folds``).
    Returns ``(ml prior, interval widened to contain prior, ml interval, interval of every
    share at once widened to contain prior)`` (the last as in memory: the same interval at the
    per-share level of ``all_shares_level``)."""
    from ..shift._analytic import all_shares_level, interval_from_sums, moment_prior_interval
    from ..shift._resample import _widen

    src = est.source_prior_
    est._warn_few_labelled(est.n_source_effective_)  # as in memory
    ml = _ml_prior(est, parts, prior, total)
    if moments is None:
        moments = getattr(est, "_class_scores", None)
    k = src.shape[0]
    level_all = all_shares_level(est.confidence_level, k)
    if moments is not None and target is not None:
        est._warn_moment_rank(moments)  # as in memory
        found = moment_prior_interval(target, moments, est.confidence_level)
        bounds = np.column_stack([np.zeros(k), np.ones(k)]) if found is None else found[0]
        found = moment_prior_interval(target, moments, level_all)
        joint = np.column_stack([np.zeros(k), np.ones(k)]) if found is None else found[0]
    else:
        sums = rows.map_reduce(_target_interval_sums, estimator, est.calibrator_, src, ml,
                               unit)
        bounds = interval_from_sums(sums, n_eff, ml, est._labelled_cov, est.confidence_level,
                                    est.n_source_effective_)[0]
        joint = interval_from_sums(sums, n_eff, ml, est._labelled_cov, level_all,
                                   est.n_source_effective_)[0]
    level = est.confidence_level
    return (ml, _widen(bounds, prior, ml, n_eff, level), _widen(bounds, ml, ml, n_eff, level),
            _widen(joint, prior, ml, n_eff, level_all))


def _ml_prior(est, parts, prior, total):
    """The maximum-likelihood prior (EM without the shrinkage's pseudo-rows, started at the
    shrunk estimate ``prior``), as in memory for every EM estimate."""
    src = est.source_prior_
    if float(est.prior_strength) > 0:
        start = prior if np.all(prior > 0) else src.copy()
        return _em_dask(parts, src, start, total, float(est.tol), int(est.max_iter))[0]
    return prior


# -- target side ------------------------------------------------------------------------------
def _em_step(block, src, prior, also=None):
    """One EM pass over a block: ``sum_i w_i normalise(q_i * prior)`` with ``q = p / src``, and
    the sums ``sum_i w_i q_i / m_i`` and ``sum_i w_i q_i q_i' / m_i^2`` (``m_i = q_i . prior``)
    of the EM map's Jacobian; with ``also``, the weighted log-likelihood terms
    ``sum_i w_i log(q_i . x)`` at ``prior`` and ``also`` too (for the SQUAREM safeguard;
    probwrap.shift._em_loop)."""
    p, w = block[0], block[-1]
    q = p / src
    num = q * prior
    den = num.sum(axis=1, keepdims=True)
    g = q / np.maximum(den, _TINY)
    out = (w @ (num / np.maximum(den, _TINY)), w @ g, (g * w[:, None]).T @ g)
    if also is None:
        return out
    return (*out, np.array([w @ np.log(np.maximum(den[:, 0], _TINY)),
                            w @ np.log(np.maximum(q @ also, _TINY))]))


def _means(block, k):
    p, w = block[0], block[-1]
    hard = w @ np.eye(k)[np.argmax(p, axis=1)]
    with np.errstate(divide="ignore", invalid="ignore"):
        entropy = float(w @ -np.where(p > 0, p * np.log(p), 0.0).sum(axis=1))
    return (w @ p, hard, np.array([w.sum(), float(np.dot(w, w)), p.shape[0], entropy,
                                   float(np.count_nonzero(w > 0))]), _SharedFactor.of(w))


def _em_dask(parts, src, init, total, tol, max_iter, pseudo=None, scale=1.0):
    """EM of probwrap.shift.em_prior as reductions: same update (weights times ``scale``, plus
    the Dirichlet pseudo-rows ``pseudo``), the same SQUAREM acceleration and the same stopping
    rule on the bound of the distance to the fixed point (the loop is shared:
    probwrap.shift._em_loop); one reduction per EM pass. Returns (prior, n_iter, converged,
    distance)."""
    from ..shift._em_loop import accelerated_em

    pseudo = np.zeros_like(src) if pseudo is None else pseudo
    has_pseudo = pseudo > 0

    def penalty(x):
        with np.errstate(divide="ignore"):
            return float(pseudo[has_pseudo] @ np.log(x[has_pseudo]))

    def em_map(prior, also=None):
        if also is None:
            sums, g, h = parts.reduce(_em_step, src, prior)
        else:
            sums, g, h, logliks = parts.reduce(_em_step, src, prior, also)
        denominator = scale * total + pseudo.sum()
        new = (scale * sums + pseudo) / denominator
        new = new / new.sum()
        # the Jacobian of the map at `prior` (as in memory, probwrap.shift._estimate._em_map)
        jac = scale * (np.diag(g) - prior[:, None] * h) / denominator
        if also is None:
            return new, None, None, lambda: jac
        return (new, scale * float(logliks[0]) + penalty(prior),
                scale * float(logliks[1]) + penalty(also), lambda: jac)

    return accelerated_em(em_map, init.copy(), tol, max_iter)


def _loglik_block(block, src, prior):
    """A block's weighted log-likelihood of the shares ``prior`` (Saerens et al. 2002), as
    ``probwrap.shift._estimate._loglik`` computes it in memory."""
    p, w = block[0], block[-1]
    return np.array(w @ np.log(np.maximum((p / src) @ prior, _TINY)))


def _fade_dask(est, parts, point, total, n_eff, suu, stat, pvalue):
    """``PriorEstimator._fade_pull`` by reductions: the pseudo-rows faded by the evidence of a
    shift (``faded_strength``, from the rows' Fisher information at the source prior, the sums
    ``suu`` of the shift test's scores on Kish's scale) and EM re-solved with them from
    ``point``; returns ``(estimate, pseudo-rows used)``."""
    from dataclasses import replace

    from ..shift._estimate import faded_strength

    src = est.source_prior_
    strength = float(est.prior_strength)
    if strength <= 0:
        return point, strength
    used = faded_strength(strength, suu * (n_eff / total), src, stat, src.shape[0] - 1, pvalue,
                          1.0 - float(est.confidence_level))
    if used >= strength:
        return point, strength
    prior, n_iter, ok, dist = _em_dask(parts, src, point.prior, total, float(est.tol),
                                       int(est.max_iter), pseudo=used * src, scale=n_eff / total)
    return replace(point, prior=prior, n_iter=point.n_iter + n_iter, converged=ok,
                   distance=float(dist)), used


def _refit_folds(est: Any, folds: Any) -> tuple | None:
    """``(each fold's share of the labelled weight, the labelled class-score moments with each
    class's rows re-weighted so every fold holds that share)`` for a base model refit on the
    labelled rows (``folds``, a :class:`probwrap.scale._folds.FoldScorer`), as the in-memory
    estimate computes them (``PriorEstimator.estimate`` with ``fold_proba``); None where the
    in-memory estimate would not read the fold models (no fold models, or the labelled rows kept
    as a tally)."""
    from ..shift._analytic import class_score_moments, class_score_sums
    from ..shift._interval import fold_shares

    fold = getattr(est, "_src_fold", None)
    source = est._source_rows()
    if (folds is None or fold is None or source is None
            or est._source_row_counts() is not None or fold.shape[0] != source[1].shape[0]):
        return None
    n_folds = int(fold.max()) + 1
    if folds.n_folds != n_folds:
        raise ValueError(
            f"The fold models ({folds.n_folds}) do not match the labelled rows' folds "
            f"({n_folds}); refit the wrapper."
        )
    share, w_fold = fold_shares(fold, source[1], source[2], n_folds)
    src = est.source_prior_
    moments = class_score_moments(class_score_sums(est.calibrate(source[0]), source[1], w_fold,
                                                   src))
    return share, est._floored(moments, w_fold)  # as in memory


def estimate_multiclass_target(est: Any, estimator: Any, X: Any, sample_weight: Any = None,
                               random_state: Any = None, folds: Any = None, cells: Any = None,
                               check_rows: Any = None):
    """Prior estimate (a :class:`probwrap.shift.PriorEstimate`) of unlabelled multiclass Dask or
    Spark rows.

    For ``method="em"`` fitted with ``interval="score"`` and ``n_resamples > 0``: the analytic
    (delta-method) interval of the in-memory path from per-block sums, with ``ml_prior`` and
    ``ml_interval``; otherwise no interval (``interval=None``).

    ``folds`` (a :class:`probwrap.scale._folds.FoldScorer`, for a base model refit on the
    labelled rows): the fold models score the rows where they live too, and the shift test and
    the class-moment interval read their averaged scores as in memory (a small set: the
    in-memory estimate with ``fold_proba``; beyond: one more pass for the sums of those scores).

    ``cells`` (one cell label per row, in the rows' order): read by the in-memory estimate of a
    small set; more rows are refused (:func:`probwrap.scale._rows.refuse_cells`).

    ``check_rows`` (a small set only): called as ``check_rows(proba, fold_proba, weights or
    None)`` with the rows that came to the client before they are estimated (the wrapper's
    check of repeated rows, as in memory).
    """
    from ..shift import PriorEstimate, acc_prior, bbse_prior

    k = est.n_classes_
    rows = rows_of(X, None, sample_weight, estimator)
    parts = rows.persist(_target_block, estimator, est.calibrator_)
    extra: list = []  # more persisted blocks, released with these
    try:
        # weights beyond about 1e+-77 divided by a power of two, as in memory
        parts, unit = in_weight_unit(parts, sample_weight is not None)
        soft_mean, hard_mean, (total, squared, n_rows, entropy, positive), factor = (
            parts.reduce(_means, k))
        if total <= 0:
            raise ValueError(ZERO_WEIGHT)
        warn_weight_unit(unit, "PriorShiftWrapper.adapt", total, stacklevel=5)
        if n_rows <= kept_rows_limit():
            # a small set (probwrap.scale._tally.KEPT_ROWS): the model's posteriors come to the client (one more
            # pass, predicting again: the kept blocks hold calibrated ones) and the in-memory
            # estimate runs on them, as adapt does in memory
            fold_proba = None
            if folds is not None:
                # a refit base model: the fold models score the same rows in the same pass
                from ._folds import scored_rows

                p, fold_proba, w = scored_rows(rows, folds, unit)
            else:
                p, w = rows.map_reduce(_kept_target, estimator).arrays
                if unit != 1.0:
                    w = w / unit
            if check_rows is not None:
                check_rows(p, fold_proba, None if sample_weight is None else w)
            return est.estimate(p, None if sample_weight is None else w,
                                random_state=random_state, fold_proba=fold_proba, cells=cells)
        if cells is not None:
            from ._rows import refuse_cells

            refuse_cells(int(n_rows))
        src = est.source_prior_
        method = est.method
        n_iter, converged, distance = 0, True, 0.0
        n_eff = total**2 / squared
        from .._validation import COUNT_TABLE_MAX_CASES

        if (sample_weight is not None and unit == 1.0 and factor.value == 1
                and total > positive and total <= COUNT_TABLE_MAX_CASES
                and getattr(est, "_src_fold", None) is None):
            # a count table (whole numbers, no common factor above 1, some above 1): its
            # cases, as in memory (probwrap.shift._estimator._table_cases)
            n_eff = float(total)
        su, suu = parts.reduce(_score_sums, None, src)
        # the harm scale reads the posteriors that predict: the refit model's here
        harm_sums = (soft_mean, suu, entropy)
        refit = _refit_folds(est, folds)
        # the rows the estimate reads (e_*): the model's posteriors, or for a refit base model
        # every row once per fold model, weighted by the fold's share, as in memory
        # (PriorEstimator._estimating_rows; since 4 December 2026, before the refit model's)
        e_parts, e_total, e_soft, e_hard, e_su, e_suu = (parts, total, soft_mean, hard_mean,
                                                         su, suu)
        if refit is None:
            fsu, fsuu = su, suu
        else:
            # one more pass: the fold models score every block where it lives (sent once),
            # and the stacked posteriors stay there for EM's passes
            stacked = rows.persist(_stacked_target_block, rows.shared(folds), est.calibrator_,
                                   refit[0])
            extra.append(stacked)
            e_parts = stacked if unit == 1.0 else _ScaledBlocks(stacked, unit)
            e_soft, e_hard, (e_total, _, _, _, _), _ = e_parts.reduce(_means, k)
            e_su, e_suu = e_parts.reduce(_score_sums, None, src)
            averaged = bool(getattr(est, "_fold_point", False))
            # the shift test's (and the class-moment interval's) unlabelled side: the scores
            # averaged over the fold models, as in memory
            row_sums = e_parts.reduce(_fold_row_sums, src, refit[0], unit, averaged)
            fsu, fsuu = row_sums[0], row_sums[1]
            if averaged:
                # the wrapper predicts with the fold models' average posterior
                # (PriorShiftWrapper.predicted_with_): the harm scale reads it, as in memory
                harm_sums = (row_sums[2], row_sums[3], float(np.asarray(row_sums[4])[0]))
        if method == "em":
            prior, n_iter, converged, distance = _em_dask(
                e_parts, src, src.copy(), e_total, float(est.tol), int(est.max_iter),
                pseudo=float(est.prior_strength) * src, scale=n_eff / e_total,
            )
            if not converged:
                warnings.warn(
                    f"Prior estimation did not converge within max_iter={est.max_iter} "
                    f"iterations: the last iterate may be up to {distance:.3g} from the "
                    f"optimum (tol={est.tol}). Raise `max_iter`, or use `prior_strength`.",
                    ConvergenceWarning,
                    stacklevel=3,
                )
        else:
            # the estimators need only the target's mean (hard or soft) prediction: pass it as
            # a single row with soft=True, which uses that row as the mean
            soft = method in ("bbse_soft", "pacc")
            mu = (e_soft if soft else e_hard) / e_total
            conf = est.soft_confusion_ if soft else est.confusion_
            if method.startswith("bbse"):
                point = bbse_prior(mu[None, :], conf, src, soft=True)
            else:
                point = acc_prior(mu[None, :], conf, soft=True)
            prior = point.prior
        from ..shift._estimator import _current_source_score
        from ..shift._shift_tests import (
            _null_harm_scale_moments,
            _score_stat_moments,
            estimate_amplification,
            null_move_ratio,
        )

        # the shift test (before the interval: where the data reject the shrunk estimate, the
        # pull fades with its statistic, as in memory)
        mean = fsu / total
        cov = fsuu / total - np.outer(mean, mean)
        source_score = getattr(est, "_source_score", None)
        test = _score_stat_moments((mean, cov, n_eff), _current_source_score(source_score), k,
                                    pooled=True, source_prior=src)
        stat, pvalue = test.statistic, test.pvalue
        ml = ml_interval = interval = pseudo = joint = None
        point = PriorEstimate(prior=prior, method=method, n_iter=n_iter, converged=converged,
                              n_rows=int(n_rows), distance=float(distance))
        if method == "em":
            pseudo = float(est.prior_strength)

            def fade(pt):
                return _fade_dask(est, e_parts, pt, e_total, n_eff, e_suu, stat, pvalue)

        if (method == "em" and int(est.n_resamples) > 0
                and getattr(est, "_labelled_cov", None) is not None):
            t_mean = fsu / total
            target = (t_mean, fsuu / total - np.outer(t_mean, t_mean), n_eff)
            ml, interval, ml_interval, joint = _analytic_interval(
                est, estimator, rows, e_parts, prior, e_total, n_eff, unit, target,
                moments=None if refit is None else refit[1])
            if not est._within(prior, ml_interval):
                # as in memory: the data reject the shrunk estimate at the interval's level, so
                # the pseudo-rows fade with the evidence, and what still lies outside moves back
                # to the interval's end
                point, pseudo = fade(point)
                point, interval = est._inside(point, ml, ml_interval)
        elif method == "em":
            # as in memory, every EM estimate has its maximum-likelihood prior (the evidence
            # gate's amplification below reads it); without an interval the likelihood-ratio
            # region decides the fade (one more pass, more only where the data reject the
            # shrunk estimate)
            ml = _ml_prior(est, e_parts, prior, e_total)
            from ..shift._estimate import unlabelled_share

            scale = n_eff / e_total
            share = unlabelled_share(stat, e_su / e_total, e_suu / e_total, n_eff)
            point, pseudo = est._settle_by_likelihood(
                point, ml, lambda x: scale * float(e_parts.reduce(_loglik_block, src, x)),
                fade, pvalue, share)
        prior, n_iter, converged, distance = (point.prior, point.n_iter, point.converged,
                                              point.distance)
        if ml is not None:
            # the in-memory warning of a maximum-likelihood share at the edge, from the same
            # sums (the rows' information is the weighted mean of u u'; the log-likelihood
            # one more pass, only without an interval and only where a share is at the edge)
            scale = n_eff / e_total
            est._warn_boundary(
                ml, None, None, n_eff, pvalue=pvalue, ml_bounds=ml_interval, prior=prior,
                pseudo=pseudo, info=e_suu / e_total,
                loglik=lambda x: scale * float(e_parts.reduce(_loglik_block, src, x)))
    finally:
        parts.release()
        for more in extra:
            more.release()
    # the same harm scale as in memory (for the max_harm cutoff): from the same sums
    h_mean, h_suu, h_entropy = harm_sums
    loss = h_entropy / total
    reference = getattr(est, "_source_log_loss", None)  # the labelled rows' log loss
    if reference is not None and np.isfinite(reference) and reference > 0:
        loss = min(loss, float(reference))
    harm_scale = _null_harm_scale_moments(h_mean / total, h_suu / total, loss, src,
                                          test.mean_cov)
    # the first- over second-order harm of a move on rows whose shares did not change (the
    # NoShiftHarmWarning's input), from the same sums, as in memory (PriorEstimator.estimate)
    move_ratio = null_move_ratio(h_mean / total, h_suu / total, src, test.mean_cov)
    if ml is not None and harm_scale:
        # as in memory: the applied move is a share of EM's estimate, which can lie far beyond
        # the one-step estimate the harm bound assumes (J = the weighted mean of u u' over the
        # rows the estimate reads)
        harm_scale *= estimate_amplification((ml - src)[1:], e_suu / e_total, test.mean_cov,
                                             test.raw)
    if interval is not None:
        # as in memory: an interval that excludes the source shares while the test does not
        # reject is widened to reach them (PriorIntervalConflictWarning)
        interval, ml_interval = est._reconcile(np.asarray(interval), ml_interval, pvalue)
    if joint is not None and interval is not None:
        # as in memory: the interval of every share at once contains the per-share one
        joint = np.column_stack([np.minimum(joint[:, 0], interval[:, 0]),
                                 np.maximum(joint[:, 1], interval[:, 1])])
    return PriorEstimate(
        prior=prior,
        method=method,
        n_iter=n_iter,
        converged=converged,
        n_rows=int(n_rows),
        interval=interval,
        shift_statistic=stat,
        shift_pvalue=pvalue,
        distance=float(distance),
        null_harm_scale=harm_scale,
        null_move_ratio=move_ratio,
        ml_prior=ml,
        ml_interval=ml_interval,
        pseudo_rows=pseudo,
        all_shares_interval=joint,
    )
