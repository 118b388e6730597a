"""Fitting the k binary maps of a one-vs-rest calibration together.

The k maps of a one-vs-rest fit see the same rows and weights; only their scores and labels
differ. :func:`fit_one_vs_rest` checks the shared inputs once instead of once per class, and
fits Platt and beta maps by one Newton iteration over all k logistic regressions at once
(:func:`batched_weighted_logistic`): every array operation then serves k problems, which on
small sets (where the fixed cost of each NumPy call dominates) divides the solver's time by
about k. Each map is fitted exactly as ``one_vs_rest_copy(template, k).fit(...)`` fits it:
the same checks, targets, floor and limits (the maps' own ``_prepare``), the same Newton
iteration with each problem's own line search and stopping rule; only the order of some
floating-point sums differs (parameters agree to about 1e-12, tested).
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from scipy.special import expit, log_expit

from .._validation import check_sample_weight, power_of_two_unit
from ._base import CalibrationMap, WeightScaleWarning, count_weights, one_vs_rest_copy
from ._beta import BetaMap
from ._platt import PlattMap, _weighted_logistic

__all__ = ["batched_weighted_logistic", "fit_one_vs_rest", "predict_one_vs_rest"]


def batched_weighted_logistic(
    X: np.ndarray, T: np.ndarray, w: np.ndarray, *, max_iter: int = 200
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``_weighted_logistic`` for ``P`` problems on the same rows and weights at once.

    ``X`` has shape (P, n, d) (each problem's features), ``T`` (P, n) (its targets in [0, 1])
    and ``w`` (n,) (the weights every problem shares). Each problem is solved as
    :func:`~probwrap.calibration._platt._weighted_logistic` solves it (standardised columns,
    damped Newton steps with its own backtracking line search and stopping rule); a problem
    with a constant column, or a batch whose Newton system is singular, is solved one at a time
    by that function. Returns ``(coef (P, d), intercept (P,), converged (P,))``.
    """
    P, n, d = X.shape
    wn = w / power_of_two_unit(w)
    wn = wn / wn.sum()
    units = np.array([[power_of_two_unit(X[p, :, j]) for j in range(d)] for p in range(P)])
    Xs = X / units[:, None, :]
    mu = wn @ Xs  # (P, d)
    sd = np.sqrt(wn @ (Xs - mu[:, None, :]) ** 2)
    with np.errstate(over="ignore"):
        keep = sd * units > 1e-12 * np.maximum(1.0, np.abs(mu * units))
    coef = np.zeros((P, d))
    intercept = np.zeros(P)
    converged = np.zeros(P, dtype=bool)
    alone = ~keep.all(axis=1)
    batch = np.flatnonzero(~alone)
    if batch.size:
        try:
            theta, ok = _batched_newton(
                (Xs[batch] - mu[batch, None, :]) / sd[batch, None, :], T[batch], wn, max_iter
            )
        except np.linalg.LinAlgError:
            alone[:] = True  # one at a time: the singular problem raises as it would alone
        else:
            c = theta[:, 1:] / sd[batch]
            coef[batch] = c / units[batch]
            intercept[batch] = theta[:, 0] - np.einsum("pd,pd->p", c, mu[batch])
            converged[batch] = ok
    for p in np.flatnonzero(alone):
        c, b, ok = _weighted_logistic(X[p], T[p], w, max_iter=max_iter)
        coef[p], intercept[p], converged[p] = c, b, ok
    return coef, intercept, converged


def _batched_newton(
    Z: np.ndarray, T: np.ndarray, wn: np.ndarray, max_iter: int
) -> tuple[np.ndarray, np.ndarray]:
    """Newton iterations of ``_weighted_logistic`` on standardised features ``Z`` (P, n, d),
    for every problem at once; returns ``(theta (P, d + 1), converged (P,))``.

    The same iteration as ``_weighted_logistic``: from the intercept-only start, Newton steps
    with a backtracking line search (Armijo constant 1e-4, halving) until the Newton decrement
    falls below 1e-10, then full steps until it falls below 1e-26 or the step below 1e-14 of
    the parameters. Each problem keeps its own step length, count and stopping rule; a problem
    that stops leaves the batch. The loss is computed only where a line search needs it.
    """
    P, n, d = Z.shape
    D = d + 1
    # one row per parameter (intercept first), as in _weighted_logistic
    At = np.empty((P, D, n))
    At[:, 0, :] = 1.0
    At[:, 1:, :] = Z.transpose(0, 2, 1)
    # products of the rows, one per entry of the (symmetric) Hessian: its entries are then one
    # weighted sum over the rows per problem
    iu, ju = np.triu_indices(D)
    G = At[:, iu, :] * At[:, ju, :]
    theta = np.zeros((P, D))
    tbar = np.clip(T @ wn, 1e-12, 1.0 - 1e-12)
    theta[:, 0] = np.log(tbar) - np.log1p(-tbar)
    ridge = 1e-13 * np.eye(D)

    def point(rows, th):
        """eta, 1 + exp(-|eta|), sigmoid(eta) and the gradient of problems ``rows`` at ``th``."""
        A = At[rows]
        eta = (th[:, None, :] @ A)[:, 0, :]
        e = np.exp(-np.abs(eta))
        one_e = 1.0 + e
        p = np.where(eta >= 0.0, 1.0, e) / one_e
        grad = (A @ (wn * (p - T[rows]))[:, :, None])[:, :, 0]
        return eta, one_e, p, grad

    def loss(rows, eta, one_e):
        return (np.log(one_e) + np.maximum(eta, 0.0) - T[rows] * eta) @ wn

    all_rows = np.arange(P)
    eta, one_e, p, grad = point(all_rows, theta)
    f0 = np.full(P, np.nan)  # the loss at theta, computed when a line search needs it
    converged = np.zeros(P, dtype=bool)
    active = all_rows
    for _ in range(max_iter):
        if active.size == 0:
            break
        pa = p[active]
        h = (G[active] @ (wn * pa * (1.0 - pa))[:, :, None])[:, :, 0]
        hess = np.empty((active.size, D, D))
        hess[:, iu, ju] = h
        hess[:, ju, iu] = h
        # a tiny ridge keeps the solve defined when the data are (nearly) separated
        ga = grad[active]
        step = np.linalg.solve(hess + ridge, ga[:, :, None])[:, :, 0]
        decrement = np.einsum("pd,pd->p", ga, step)
        quad = decrement < 1e-10
        done = np.zeros(active.size, dtype=bool)
        if quad.any():
            # quadratic-convergence region: full Newton steps, no line search needed
            q = active[quad]
            sq = step[quad]
            theta[q] = theta[q] - sq
            stop = (decrement[quad] < 1e-26) | (
                np.max(np.abs(sq), axis=1) < 1e-14 * (1.0 + np.max(np.abs(theta[q]), axis=1))
            )
            converged[q[stop]] = True
            done[np.flatnonzero(quad)[stop]] = True
            go = q[~stop]
            if go.size:
                eta[go], one_e[go], p[go], grad[go] = point(go, theta[go])
                f0[go] = np.nan
        if not quad.all():
            # backtracking line search, each problem with its own step length
            ls = np.flatnonzero(~quad)
            rows = active[ls]
            stale = rows[np.isnan(f0[rows])]
            if stale.size:
                f0[stale] = loss(stale, eta[stale], one_e[stale])
            lam = np.ones(ls.size)
            while ls.size:
                rows = active[ls]
                cand = theta[rows] - lam[:, None] * step[ls]
                c_eta, c_one_e, c_p, c_grad = point(rows, cand)
                f1 = loss(rows, c_eta, c_one_e)
                accept = (f1 <= f0[rows] - 1e-4 * lam * decrement[ls]) | (lam < 1e-12)
                acc = rows[accept]
                theta[acc], f0[acc] = cand[accept], f1[accept]
                eta[acc], one_e[acc], p[acc], grad[acc] = (
                    c_eta[accept], c_one_e[accept], c_p[accept], c_grad[accept]
                )
                ls, lam = ls[~accept], lam[~accept] * 0.5
        active = active[~done]
    return theta, converged


def _fits_batched(template: CalibrationMap) -> bool:
    """Platt and beta maps (not subclasses, whose fit may differ) are fitted in one batch."""
    return type(template) in (PlattMap, BetaMap)


def fit_one_vs_rest(
    template: CalibrationMap, S: np.ndarray, y_index: np.ndarray, w: np.ndarray, classes: Any
) -> list[CalibrationMap]:
    """The one-vs-rest maps of ``classes``: for each class ``k``,
    ``one_vs_rest_copy(template, S.shape[1]).fit(S[:, k], y_index == k, sample_weight=w)``.

    ``S`` (n, c) holds every class's one-vs-rest scores as the maps see them, ``y_index`` the
    class index of each row. Each class must have rows of positive weight both in and outside
    it. The weights are checked once for all classes; Platt and beta maps are fitted by
    :func:`batched_weighted_logistic`. Maps with their own ``fit``, or scores that are not all
    finite (whose error the map's own checks report), are fitted one at a time.
    """
    n_classes = S.shape[1]
    classes = [int(k) for k in classes]
    y_index = np.asarray(y_index)
    labels = [(y_index == k).astype(int) for k in classes]
    if type(template).fit is not CalibrationMap.fit or not np.all(np.isfinite(S[:, classes])):
        return [
            one_vs_rest_copy(template, n_classes).fit(S[:, k], yk, sample_weight=w)
            for k, yk in zip(classes, labels, strict=True)
        ]
    # CalibrationMap.fit's checks and set-up, once for all classes
    w = check_sample_weight(w, S.shape[0])
    rescaled = False
    if template._uses_counts():
        w, rescaled = count_weights(w)
    maps: list[CalibrationMap] = []
    ready: list[tuple[CalibrationMap, tuple]] = []
    for k, yk in zip(classes, labels, strict=True):
        m = one_vs_rest_copy(template, n_classes)
        y01 = yk.astype(float)
        if not (np.any(w[yk == 1] > 0) and np.any(w[yk == 0] > 0)):
            # a side without weight: the map's own fit raises the error it raises alone
            maps.append(m.fit(S[:, k], yk, sample_weight=w))
            continue
        if rescaled:
            warnings.warn(
                f"{type(m).__name__}: `sample_weight` sums to less than the number of "
                "rows, so the weights cannot be row frequencies; they are rescaled to sum to "
                f"Kish's effective sample size ({w.sum():.4g}) for the map's counts.",
                WeightScaleWarning,
                stacklevel=3,
            )
        m.boundary_ = None
        m.floor_ = 0.0
        m.classes_ = np.array([0, 1])
        m.n_classes_ = 2
        m.n_score_columns_ = 1
        s = np.ascontiguousarray(S[:, k])
        if _fits_batched(m):
            ready.append((m, m._prepare(s, y01, w)))
        else:
            m._fit(s, y01, w)
        maps.append(m)
    if ready:
        _solve_together(ready, w)
    return maps


def _solve_together(ready: list[tuple[CalibrationMap, tuple]], w: np.ndarray) -> None:
    """Solve the prepared Platt or beta fits ``ready`` in one batch and store the results."""
    platt = isinstance(ready[0][0], PlattMap)
    if platt:
        X = np.stack([x for _, (x, _t) in ready])[:, :, None]
        T = np.stack([t for _, (_x, t) in ready])
        ww = w
    else:
        X = np.stack([x for _, (x, _t, _w) in ready])
        T = np.stack([t for _, (_x, t, _w) in ready])
        ww = ready[0][1][2]  # the weights scaled by BetaMap._prepare (the same for every class)
    coef, intercept, converged = batched_weighted_logistic(X, T, ww)
    for i, (m, prepared) in enumerate(ready):
        if platt:
            m._set_solution(coef[i], float(intercept[i]), bool(converged[i]))
        else:
            Xb, t, wb = prepared
            m._set_solution(Xb, t, wb, coef[i], float(intercept[i]))


def predict_one_vs_rest(maps: list, S: np.ndarray) -> np.ndarray | None:
    """``np.column_stack([m.predict(S[:, j]) for j, m in enumerate(maps)])`` in one pass for a
    list of fitted Platt maps or of fitted beta maps (not subclasses), else None.

    The same element-wise operations as each map's ``predict`` (score limit, linear predictor,
    logistic, output floor), applied to all columns at once, so the result is bit-identical.
    Scores that are not all finite, or outputs that would not be, are left to the maps' own
    ``predict`` (None), which reports them.
    """
    kind = type(maps[0]) if maps else None
    if kind not in (PlattMap, BetaMap) or any(type(m) is not kind for m in maps):
        return None
    if S.shape[1] != len(maps) or not np.all(np.isfinite(S)):
        return None
    floor = np.array([float(getattr(m, "floor_", 0.0)) for m in maps])
    if kind is PlattMap:
        for m in maps:
            m._limited(S[:0, 0])  # sets score_limits_ where a restored map has none yet
        limits = [m.score_limits_ for m in maps]
        if any(lim is not None for lim in limits):
            if not all(lim is not None for lim in limits):
                return None
            bound = np.array(limits, dtype=float)  # (k, 2): each map's (low, high)
            S = np.clip(S, bound[:, 0], bound[:, 1])
        slope = np.array([m.slope_ for m in maps])
        intercept = np.array([m.intercept_ for m in maps])
        with np.errstate(over="ignore"):
            q = expit(slope * S + intercept)
    else:
        a = np.array([m.a_ for m in maps])
        b = np.array([m.b_ for m in maps])
        c = np.array([m.c_ for m in maps])
        with np.errstate(over="ignore"):
            q = expit(a * log_expit(S) + b * -log_expit(-S) + c)
    q = np.clip(q, floor, 1.0 - floor)
    if not np.all(np.isfinite(q)):
        return None
    return q
