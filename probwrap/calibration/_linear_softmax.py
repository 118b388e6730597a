"""Fitting ``softmax(z @ A.T + b)`` by penalised Newton steps: the machinery behind vector and
matrix scaling (:mod:`._vector_scaling` holds the maps themselves)."""

from __future__ import annotations

import numbers
import warnings

import numpy as np
from scipy.optimize import minimize

from .._validation import plain
from ._base import CalibrationMap

__all__: list[str] = []


#: relative strength of the pull of the common scale toward the identity map (a = 1): tiny, it
#: only keeps the fit finite when the scores separate the classes
_IDENTITY_PULL = 1e-4

#: outputs are kept within [_OUTPUT_FLOOR, 1 - _OUTPUT_FLOOR]
_OUTPUT_FLOOR = 1e-15

#: parameters (on standardised scores) beyond this size mean the fit ran off toward infinity
_RUNAWAY = 30.0

#: vector scaling takes its last Newton step, unchecked, once the Newton decrement (about twice
#: the distance of the objective from its minimum) is below this
_LAST_STEP_DECREMENT = 1e-12

#: ... and takes full Newton steps without a line search once it is below this
_FULL_STEP_DECREMENT = 1e-10


def _as_columns(scores: np.ndarray) -> np.ndarray:
    """Binary log-odds ``s`` (n,) -> two logit columns ``[-s/2, s/2]`` whose softmax is sigmoid(s)."""
    if scores.ndim == 1:
        half = 0.5 * scores
        return np.column_stack([-half, half])
    return scores


def _smoothed_targets(y: np.ndarray, w: np.ndarray, k: int, smooth: bool) -> np.ndarray:
    """Target distributions, one row per sample.

    With smoothing, a row of class ``c`` whose class has weighted count ``N_c`` keeps
    ``(N_c + 1) / (N_c + 2)`` on its class and shares ``1 / (N_c + 2)`` evenly among the other
    ``k - 1`` classes: for two classes these are exactly Platt's (1999) targets
    ``(N+ + 1) / (N+ + 2)`` and ``1 / (N- + 2)``, and for more classes the true class keeps
    the share Platt's rule gives it one-vs-rest.
    """
    n = y.shape[0]
    t = np.zeros((n, k))
    if not smooth:
        t[np.arange(n), y] = 1.0
        return t
    counts = np.bincount(y, weights=w, minlength=k)
    rest = 1.0 / (counts[y] + 2.0)
    t += (rest / (k - 1))[:, None]
    t[np.arange(n), y] = 1.0 - rest
    return t


def _floored_softmax(eta: np.ndarray, binary: bool) -> np.ndarray:
    """Softmax with every probability kept at or above ``_OUTPUT_FLOOR`` (rows renormalised);
    for binary scores the positive-class column, kept within [floor, 1 - floor]."""
    q = np.maximum(np.exp(_log_softmax(eta)), _OUTPUT_FLOOR)
    if binary:
        return np.clip(q[:, 1], _OUTPUT_FLOOR, 1.0 - _OUTPUT_FLOOR)
    return q / q.sum(axis=1, keepdims=True)


def _log_softmax(eta: np.ndarray) -> np.ndarray:
    m = eta.max(axis=1, keepdims=True)
    shifted = eta - m
    return shifted - np.log(np.exp(shifted).sum(axis=1, keepdims=True))


def _vector_newton(
    xt: np.ndarray,
    tw: np.ndarray,
    wn: np.ndarray,
    lam: float,
    scale: float,
    max_iter: int = 200,
    theta0: np.ndarray | None = None,
) -> tuple[np.ndarray, float, float]:
    """Minimise the vector-scaling objective by damped Newton steps; returns ``(theta, f, g)``.

    ``xt`` holds the standardised scores with one row per class (shape (k, n)), ``tw`` the
    weighted targets ``wn * t`` in the same layout and ``theta = (a, b)``. Each evaluation makes
    one pass of exponentials over the scores; its probabilities ``q`` also give the Hessian, so
    an accepted step costs one pass (the previous solver's objective and Hessian made two
    log-softmax passes each). Per row the Hessian of the log loss in the logits is
    ``diag(q) - q q^T``; the logit of class ``j`` is ``a_j x_j + b_j``, so the blocks are
    weighted sums of ``x x^T``, ``x`` and 1 against it, one (2k, n) by (n, 2k) product. The
    penalty adds ``2 lam (I - (1 - pull) 11^T / k)`` for ``a`` and ``2 lam I`` for ``b``.
    Returns the parameters, the objective there and its largest gradient entry. ``theta0``:
    where to start (default: the identity map), e.g. a fit on another fold of mostly the same
    rows; with a penalty (``lam > 0``) the objective is strictly convex and the iteration
    reaches the same minimum from any start, in fewer steps from a close one.
    """
    k = xt.shape[0]
    pull = _IDENTITY_PULL
    penalty_hessian = np.zeros((2 * k, 2 * k))
    penalty_hessian[:k, :k] = 2.0 * lam * (np.eye(k) - (1.0 - pull) / k)
    penalty_hessian[k:, k:] = 2.0 * lam * np.eye(k)
    idx = np.arange(k)
    tw_flat = tw.ravel()

    def evaluate(theta):
        a, b = theta[:k], theta[k:]
        eta = xt * a[:, None]
        eta += b[:, None]
        eta -= eta.max(axis=0)
        q = np.exp(eta)
        s = q.sum(axis=0)
        # rows of the targets sum to one, so the shift by the row maximum cancels in the loss
        loss = float(wn @ np.log(s)) - float(tw_flat @ eta.ravel())
        q /= s
        r = q * wn
        r -= tw  # d loss / d eta
        dev = a - a.mean()
        common = a.mean() - scale  # the identity map has a = scale on standardised scores
        penalty = float(dev @ dev + pull * k * common**2 + b @ b)
        grad = np.concatenate([
            np.einsum("ij,ij->i", r, xt) + 2.0 * lam * (dev + pull * common),
            r.sum(axis=1) + 2.0 * lam * b,
        ])
        return loss + lam * penalty, grad, q

    def hessian(q):
        u = np.concatenate([q * xt, q])  # (2k, n): d eta / d theta, times q
        v = u * wn
        h = penalty_hessian - v @ u.T
        h[idx, idx] += np.einsum("ij,ij->i", v[:k], xt)
        diag_ab = v[:k].sum(axis=1)
        h[idx, k + idx] += diag_ab
        h[k + idx, idx] += diag_ab
        h[k + idx, k + idx] += v[k:].sum(axis=1)
        return h

    if theta0 is None:
        theta = np.concatenate([np.full(k, scale), np.zeros(k)])  # start at the identity map
    else:
        theta = np.array(theta0, dtype=float)
    f, g, q = evaluate(theta)
    eye = np.eye(2 * k)
    for _ in range(max_iter):
        step = np.linalg.solve(hessian(q) + 1e-12 * eye, g)
        decrement = float(g @ step)
        small = np.max(np.abs(step)) < 1e-6 * (1.0 + np.max(np.abs(theta)))
        if (decrement < _LAST_STEP_DECREMENT and small) or np.max(np.abs(g)) < 1e-14:
            # quadratic convergence: this last full step leaves a decrement and a step of the
            # order of their squares, below what doubles resolve; no evaluation needed (the
            # step size condition keeps flat, nearly separable fits iterating)
            theta = theta - step
            break
        if decrement < _FULL_STEP_DECREMENT:
            # near the minimum the objective changes by less than its rounding can resolve
            # reliably, so a line search on it would only stall: full Newton steps
            theta = theta - step
            f, g, q = evaluate(theta)
            continue
        lr = 1.0
        while True:
            cand = theta - lr * step
            f1, g1, q1 = evaluate(cand)
            if f1 <= f - 1e-4 * lr * decrement:
                break
            lr *= 0.5
            if lr < 1e-10:
                # no decrease possible in floating point: at the minimum to precision
                return theta, f, float(np.max(np.abs(g)))
        theta, f, g, q = cand, f1, g1, q1
    return theta, f, float(np.max(np.abs(g)))


def _check_settings(m: CalibrationMap) -> None:
    s = m.shrinkage
    if isinstance(s, bool) or not isinstance(s, numbers.Real) or not (np.isfinite(s) and s >= 0):
        raise ValueError(f"`shrinkage` must be a finite number >= 0; got {plain(s)!r}.")
    if not isinstance(m.smooth_targets, (bool, np.bool_)):
        raise ValueError(f"`smooth_targets` must be True or False; got {plain(m.smooth_targets)!r}.")


def _fit_linear_softmax(
    z: np.ndarray, y: np.ndarray, w: np.ndarray, *, full: bool, shrinkage: float, smooth: bool,
    name: str, start: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, str | None]:
    """Fit ``softmax(z @ A.T + b)`` with ``A`` diagonal (``full=False``) or full.

    Works on the standardised scores ``z / scale`` so that the penalty is free of the score
    units; returns ``(A, b, boundary)`` on the original scale (``A`` as a (k,) vector when
    diagonal; ``boundary`` the reason when the fit ran off toward infinity, else None).
    Objective (to minimise): ``sum_i w_i CE(t_i, q_i) + shrinkage * P``, with ``P`` the sum of
    squared deviations of the diagonal from its mean, of the off-diagonal entries and of the
    intercepts, plus ``_IDENTITY_PULL * k`` times the squared distance of the mean diagonal
    from the identity map. ``start = (A, b)`` (diagonal, on the original scale, e.g. a fit on
    another cross-validation fold) starts vector scaling's Newton iteration there when
    ``shrinkage > 0`` (a strictly convex objective: the same minimum, fewer steps).
    """
    n, k = z.shape
    total = float(w.sum())
    wn = w / total
    # one row per class: the reductions over the classes of a row then run along contiguous
    # memory (with rows of k entries they are several times slower)
    zt = np.ascontiguousarray(z.T)
    centred = zt - zt.mean(axis=0)
    scale = float(np.sqrt(wn @ np.mean(centred**2, axis=0)))
    if not (scale > 0.0 and np.isfinite(scale)):
        scale = 1.0
    constant_rows = not np.any(centred)
    xt = zt / scale
    t = _smoothed_targets(y, w, k, smooth)
    lam = shrinkage / total  # the penalty per unit of weight, as the loss is a weighted mean
    diag = np.arange(k)
    x = xt.T  # (n, k) view for the matrix-scaling objective

    def unpack(theta):
        if full:
            return theta[: k * k].reshape(k, k), theta[k * k :]
        return theta[:k], theta[k:]

    def objective(theta):
        A, b = unpack(theta)
        eta = (x @ A.T if full else x * A) + b
        logq = _log_softmax(eta)
        loss = -float(np.sum(wn[:, None] * t * logq))
        g_eta = wn[:, None] * (np.exp(logq) - t)  # d loss / d eta (rows of t sum to one)
        grad_b = g_eta.sum(axis=0)
        if full:
            d = np.diag(A)
            dev = d - d.mean()
            common = d.mean() - scale
            off = A.copy()
            off[diag, diag] = 0.0
            penalty = float(dev @ dev + _IDENTITY_PULL * k * common**2 + np.sum(off**2) + b @ b)
            grad_A = g_eta.T @ x + 2.0 * lam * off
            grad_A[diag, diag] += 2.0 * lam * (dev + _IDENTITY_PULL * common)
            grad = np.concatenate([grad_A.ravel(), grad_b + 2.0 * lam * b])
        else:
            dev = A - A.mean()
            common = A.mean() - scale  # the identity map has a = scale on standardised scores
            penalty = float(dev @ dev + _IDENTITY_PULL * k * common**2 + b @ b)
            grad_A = np.sum(g_eta * x, axis=0) + 2.0 * lam * (dev + _IDENTITY_PULL * common)
            grad = np.concatenate([grad_A, grad_b + 2.0 * lam * b])
        return loss + lam * penalty, grad

    A0 = scale * (np.eye(k).ravel() if full else np.ones(k))  # start at the identity map
    theta0 = np.concatenate([A0, np.zeros(k)])
    if full:
        res = minimize(
            objective, theta0, jac=True, method="L-BFGS-B",
            options={"maxiter": 5000, "ftol": 1e-15, "gtol": 1e-11},
        )
        theta, grad_norm, note = res.x, float(np.max(np.abs(res.jac))), str(res.message)
        f_end = objective(theta)[0]
    else:
        tw = np.ascontiguousarray(t.T) * wn
        theta0 = None
        if start is not None and lam > 0 and not constant_rows:
            theta0 = np.concatenate([np.asarray(start[0]) * scale, np.asarray(start[1])])
            if theta0.shape != (2 * k,) or not np.all(np.isfinite(theta0)):
                theta0 = None
        theta, f_end, grad_norm = _vector_newton(xt, tw, wn, lam, scale, theta0=theta0)
        note = "Newton iterations reached their limit"
    if not np.all(np.isfinite(theta)):  # pragma: no cover - the objective is convex and smooth
        raise ValueError(f"{name}: the fit did not give finite parameters.")
    boundary = None
    A, b = unpack(theta)
    separated = False
    if not smooth:
        eta = (A @ xt if full else xt * A[:, None]) + b[:, None]  # (k, n)
        rows = np.arange(n)
        true = eta[y, rows]
        eta[y, rows] = -np.inf
        live = w > 0
        separated = bool(np.all(true[live] > eta.max(axis=0)[live]))
    if separated and shrinkage > 0:
        # every calibration row is ranked first for its own class: only the weak pull keeps
        # the fit finite and it would be confidently extreme; refit with smoothed targets
        reason = (
            "the scores separate the classes (every calibration row is ranked first for its "
            "own class), so the likelihood has no finite maximum"
        )
        warnings.warn(
            f"{name}: {reason}; refitted with Platt-style smoothed targets, which bound the "
            "confidence.",
            UserWarning,
            stacklevel=4,
        )
        A_s, b_s, _ = _fit_linear_softmax(
            z, y, w, full=full, shrinkage=shrinkage, smooth=True, name=name
        )
        return A_s, b_s, reason
    if separated or np.max(np.abs(theta)) > _RUNAWAY or f_end < 1e-9:
        boundary = (
            "the scores separate the classes and the likelihood has no finite maximum (fitted "
            f"parameters up to {np.max(np.abs(theta)):.3g} on standardised scores)"
        )
        advice = (
            "Use shrinkage > 0 or smooth_targets=True for a finite fit."
            if shrinkage == 0 and not smooth
            else "The outputs are kept within [1e-15, 1 - 1e-15]; smooth_targets=True bounds "
            "the fit itself."
        )
        warnings.warn(
            f"{name}: {boundary}. {advice}",
            UserWarning,
            stacklevel=4,
        )
    elif grad_norm > 1e-6:
        warnings.warn(
            f"{name}: the fit stopped before full precision (largest gradient entry "
            f"{grad_norm:.2g}; {note}).",
            UserWarning,
            stacklevel=4,
        )
    A, b = unpack(theta)
    if constant_rows:
        # no score varies within a row: the scales have no effect on the fitted rows; zero
        # them so that new scores cannot give confident outputs the data never supported
        A = np.zeros_like(A)
    # b is only defined up to a constant (softmax ignores it); report it centred
    b = b - b.mean()
    return A / scale, b, boundary
