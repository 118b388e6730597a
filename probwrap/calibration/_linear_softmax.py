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


def _as_columns(scores: np.ndarray) -> np.ndarray:
    """Binary log-odds ``s`` (n,) -> two logit columns ``[-s/2, s/2]`` whose softmax is sigmoid(s)."""
    if scores.ndim == 1:
        half = 0.5 * scores
        return np.column_stack([-half, half])
    return scores


def _score_scale(z: np.ndarray, wn: np.ndarray) -> float:
    """Weighted root-mean-square of the row-centred scores (1.0 when they are all constant)."""
    centred = z - z.mean(axis=1, keepdims=True)
    scale = float(np.sqrt(wn @ np.mean(centred**2, axis=1)))
    return scale if scale > 0.0 and np.isfinite(scale) else 1.0


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


def _vector_hessian(
    theta: np.ndarray, x: np.ndarray, wn: np.ndarray, lam: float, pull: float
) -> np.ndarray:
    """Hessian of the vector-scaling objective in ``(a, b)``.

    Per row the Hessian of the log loss in the logits is ``diag(q) - q q^T``; the logit of
    class ``j`` is ``a_j x_j + b_j``, so the blocks are weighted sums of ``x x^T``, ``x`` and 1
    against it. The penalty adds ``2 lam (I - (1 - pull) 11^T / k)`` for ``a`` and ``2 lam I``
    for ``b``.
    """
    k = x.shape[1]
    a, b = theta[:k], theta[k:]
    q = np.exp(_log_softmax(x * a + b))
    wq = wn[:, None] * q
    qx = q * x
    wqx = wq * x
    h_aa = np.diag(np.sum(wqx * x, axis=0)) - qx.T @ (wn[:, None] * qx)
    h_ab = np.diag(np.sum(wqx, axis=0)) - qx.T @ wq
    h_bb = np.diag(np.sum(wq, axis=0)) - q.T @ wq
    center = np.eye(k) - (1.0 - pull) / k
    return np.block([[h_aa + 2.0 * lam * center, h_ab], [h_ab.T, h_bb + 2.0 * lam * np.eye(k)]])


def _newton(objective, hessian, theta: np.ndarray, max_iter: int = 200) -> tuple[np.ndarray, float]:
    """Damped Newton's method (backtracking on the objective) for a smooth convex objective.

    Returns the parameters and the largest gradient entry at the end.
    """
    f, g = objective(theta)
    eye = np.eye(theta.shape[0])
    for _ in range(max_iter):
        step = np.linalg.solve(hessian(theta) + 1e-12 * eye, g)
        decrement = float(g @ step)
        if decrement < 1e-24 or np.max(np.abs(g)) < 1e-14:
            break
        lr = 1.0
        while True:
            cand = theta - lr * step
            f1, g1 = objective(cand)
            if f1 <= f - 1e-4 * lr * decrement or lr < 1e-10:
                break
            lr *= 0.5
        if f1 > f:  # no decrease possible in floating point: at the minimum to precision
            break
        theta, f, g = cand, f1, g1
    return theta, float(np.max(np.abs(g)))


def _check_settings(m: CalibrationMap) -> None:
    s = m.shrinkage
    if isinstance(s, bool) or not isinstance(s, numbers.Real) or not (np.isfinite(s) and s >= 0):
        raise ValueError(f"`shrinkage` must be a finite number >= 0; got {plain(s)!r}.")
    if not isinstance(m.smooth_targets, (bool, np.bool_)):
        raise ValueError(f"`smooth_targets` must be True or False; got {plain(m.smooth_targets)!r}.")


def _fit_linear_softmax(
    z: np.ndarray, y: np.ndarray, w: np.ndarray, *, full: bool, shrinkage: float, smooth: bool,
    name: str,
) -> tuple[np.ndarray, np.ndarray, str | None]:
    """Fit ``softmax(z @ A.T + b)`` with ``A`` diagonal (``full=False``) or full.

    Works on the standardised scores ``z / scale`` so that the penalty is free of the score
    units; returns ``(A, b, boundary)`` on the original scale (``A`` as a (k,) vector when
    diagonal; ``boundary`` the reason when the fit ran off toward infinity, else None).
    Objective (to minimise): ``sum_i w_i CE(t_i, q_i) + shrinkage * P``, with ``P`` the sum of
    squared deviations of the diagonal from its mean, of the off-diagonal entries and of the
    intercepts, plus ``_IDENTITY_PULL * k`` times the squared distance of the mean diagonal
    from the identity map.
    """
    n, k = z.shape
    total = float(w.sum())
    wn = w / total
    scale = _score_scale(z, wn)
    x = z / scale
    t = _smoothed_targets(y, w, k, smooth)
    lam = shrinkage / total  # the penalty per unit of weight, as the loss is a weighted mean
    diag = np.arange(k)

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
    else:
        theta, grad_norm = _newton(
            objective, lambda th: _vector_hessian(th, x, wn, lam, _IDENTITY_PULL), theta0
        )
        note = "Newton iterations reached their limit"
    if not np.all(np.isfinite(theta)):  # pragma: no cover - the objective is convex and smooth
        raise ValueError(f"{name}: the fit did not give finite parameters.")
    boundary = None
    A, b = unpack(theta)
    separated = False
    if not smooth:
        eta = (x @ A.T if full else x * A) + b
        rows = np.arange(n)
        true = eta[rows, y]
        others = eta.copy()
        others[rows, y] = -np.inf
        live = w > 0
        separated = bool(np.all(true[live] > others[live].max(axis=1)))
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
    if separated or np.max(np.abs(theta)) > _RUNAWAY or objective(theta)[0] < 1e-9:
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
    if not np.any(x - x.mean(axis=1, keepdims=True)):
        # no score varies within a row: the scales have no effect on the fitted rows; zero
        # them so that new scores cannot give confident outputs the data never supported
        A = np.zeros_like(A)
    # b is only defined up to a constant (softmax ignores it); report it centred
    b = b - b.mean()
    return A / scale, b, boundary
