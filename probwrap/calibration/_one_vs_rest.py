"""Fitting the k binary maps of a one-vs-rest calibration together.

The k maps of a one-vs-rest fit see the same rows and weights; only their scores and labels
differ. :func:`fit_one_vs_rest` checks the shared inputs once instead of once per class, and
fits Platt and beta maps by one Newton iteration over all k logistic regressions at once
(:func:`batched_weighted_logistic`): every array operation then serves k problems, which
saves the fixed cost of k - 1 NumPy calls per operation (the arithmetic per row stays; on a
few hundred rows per class it is about half of the solver's time). Each map is fitted as
``one_vs_rest_copy(template, k).fit(...)`` fits it: the same checks, targets, floor and
limits (the maps' own ``_prepare`` and ``_set_solution``), the same Newton iteration with each
problem's own line search; it stops once the Newton decrement is below 1e-20 (the one-problem
solver: 1e-26) and may start from given parameters. Parameters agree with one map at a time
to 1e-9 (tests; seen: 1e-14).
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
    X: np.ndarray,
    T: np.ndarray,
    w: np.ndarray,
    *,
    max_iter: int = 200,
    start: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``_weighted_logistic`` for ``P`` problems on the same rows and weights at once.

    ``X`` has shape (P, n, d) (each problem's features), ``T`` (P, n) (its targets in [0, 1])
    and ``w`` (n,) (the weights every problem shares). Each problem is solved as
    :func:`~probwrap.calibration._platt._weighted_logistic` solves it (standardised columns,
    damped Newton steps with its own backtracking line search and stopping rule, see
    :func:`_batched_newton`); a problem
    with a constant column, or a batch whose Newton system is singular, is solved one at a time
    by that function. Returns ``(coef (P, d), intercept (P,), converged (P,))``.

    ``start = (coef (P, d), intercept (P,))`` starts the Newton iteration of each problem from
    those parameters (NaN: from the intercept-only start) instead of the intercept-only fit,
    e.g. from the same class's fit on another fold of mostly the same rows, which saves about
    half of the iterations. Only for problems with a finite optimum (smoothed targets): the
    iteration then converges to it to machine precision from any start.
    """
    P, n, d = X.shape
    wn = w / power_of_two_unit(w)
    wn = wn / wn.sum()
    units = _powers_of_two_units(X)
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
        # the intercept-only start of _weighted_logistic, or the given start on the
        # standardised scale (z = (x / unit - mu) / sd)
        theta0 = np.zeros((batch.size, d + 1))
        tbar = np.clip(T[batch] @ wn, 1e-12, 1.0 - 1e-12)
        theta0[:, 0] = np.log(tbar) - np.log1p(-tbar)
        if start is not None:
            cold = theta0.copy()
            c0, b0 = start[0][batch], start[1][batch]
            given = np.isfinite(b0) & np.all(np.isfinite(c0), axis=1)
            scaled = c0[given] * units[batch][given]
            theta0[given, 1:] = scaled * sd[batch][given]
            theta0[given, 0] = b0[given] + np.einsum("pd,pd->p", scaled, mu[batch][given])
            bad = ~np.all(np.isfinite(theta0), axis=1)
            theta0[bad] = cold[bad]  # (a start that overflows on this scale: not used)
        try:
            theta, ok = _batched_newton(
                (Xs[batch] - mu[batch, None, :]) / sd[batch, None, :], T[batch], wn, max_iter,
                theta0,
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


def _powers_of_two_units(X: np.ndarray) -> np.ndarray:
    """``power_of_two_unit(X[p, :, j])`` for every problem ``p`` and column ``j`` at once."""
    top = np.abs(X).max(axis=1) if X.shape[1] else np.zeros(X.shape[::2])
    usable = (top > 0.0) & np.isfinite(top)
    exponent = np.frexp(np.where(usable, top, 1.0))[1]
    return np.where(usable, np.ldexp(1.0, exponent - 1), 1.0)


def _batched_newton(
    Z: np.ndarray, T: np.ndarray, wn: np.ndarray, max_iter: int, theta0: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Newton iterations of ``_weighted_logistic`` on standardised features ``Z`` (P, n, d),
    for every problem at once, from ``theta0`` (P, d + 1); returns ``(theta, converged (P,))``.

    The same iteration as ``_weighted_logistic``: Newton steps with a backtracking line search
    (Armijo constant 1e-4, halving) until the Newton decrement falls below 1e-10, then full
    steps until it falls below 1e-20 (``_weighted_logistic``: 1e-26; the same parameters to
    rounding) or the step below 1e-14 of the parameters. Each problem keeps its own step
    length, count and stopping rule; a problem that stops leaves the batch. The loss is
    computed only where the line search's test is not certain from the self-concordance bound.
    """
    P, n, d = Z.shape
    D = d + 1
    At = np.empty((P, D, n))
    At[:, 0, :] = 1.0
    At[:, 1:, :] = Z.transpose(0, 2, 1)
    # one row per parameter (intercept first), as in _weighted_logistic; the weights folded
    # into the rows of the gradient and of the Hessian (whose entries are then one weighted
    # sum over the rows per problem and entry of its upper triangle)
    wAt = At * wn
    iu, ju = np.triu_indices(D)
    wG = wAt[:, iu, :] * At[:, ju, :]
    pos = np.empty((D, D), dtype=np.intp)
    pos[iu, ju] = np.arange(iu.size)
    pos[ju, iu] = np.arange(iu.size)
    pos = pos.ravel()
    ridge = (1e-13 * np.eye(D)).ravel()
    theta = theta0.copy()

    def point(rows, th):
        full = rows is None
        A = At if full else At[rows]
        eta = (th[:, None, :] @ A)[:, 0, :]
        e = np.abs(eta)
        np.negative(e, out=e)
        np.exp(e, out=e)
        one_e = e + 1.0
        p = np.where(eta >= 0.0, 1.0, e)
        p /= one_e
        grad = ((wAt if full else wAt[rows]) @ (p - (T if full else T[rows]))[:, :, None])[:, :, 0]
        return eta, one_e, p, grad

    def loss(rows, eta, one_e):
        v = np.log(one_e)
        v += np.maximum(eta, 0.0)
        v -= (T if rows is None else T[rows]) * eta
        return v @ wn

    eta, one_e, p, grad = point(None, theta)
    f0 = np.full(P, np.nan)
    converged = np.zeros(P, dtype=bool)
    active = np.arange(P)
    for _ in range(max_iter):
        m = active.size
        if m == 0:
            break
        full = m == P
        pa = p if full else p[active]
        c = 1.0 - pa
        c *= pa
        h = ((wG if full else wG[active]) @ c[:, :, None])[:, :, 0]
        hess = h[:, pos]
        hess += ridge  # a tiny ridge keeps the solve defined for (nearly) separated data
        ga = grad if full else grad[active]
        step = np.linalg.solve(hess.reshape(m, D, D), ga[:, :, None])[:, :, 0]
        decrement = (ga * step).sum(axis=1)
        quad = decrement < 1e-10
        if full:
            # the common cases, with every problem in the same phase, in fewer operations
            # (the same arithmetic as the general bookkeeping below)
            if quad.all():
                new = theta - step
                stop = (decrement < 1e-20) | (
                    np.abs(step).max(axis=1) < 1e-14 * (1.0 + np.abs(new).max(axis=1))
                )
                if stop.all():
                    theta = new
                    converged[:] = True
                    active = active[:0]
                    break
                if not stop.any():
                    theta = new
                    eta, one_e, p, grad = point(None, theta)
                    f0[:] = np.nan
                    continue
            elif not quad.any():
                cand = theta - step  # the first step length of the line search, 1
                c_eta, c_one_e, c_p, c_grad = point(None, cand)
                big_u = np.abs(c_eta - eta).max(axis=1)
                u = np.clip(big_u, 1e-8, 700.0)
                if np.all(np.where(big_u > 1e-8, (np.expm1(u) - u) / (u * u), 0.5) <= 0.99):
                    theta, f0[:] = cand, np.nan
                    eta, one_e, p, grad = c_eta, c_one_e, c_p, c_grad
                    continue
        done = np.zeros(m, dtype=bool)
        if quad.any():
            # quadratic-convergence region: full Newton steps, no line search needed
            q = active[quad]
            sq = step[quad]
            theta[q] -= sq
            # (_weighted_logistic stops below a decrement of 1e-26; below 1e-20 the step
            # just taken is below 1e-10 of the curvature's scale and, converging
            # quadratically, leaves an error of the order of its square: the same parameters
            # to rounding, one evaluation sooner)
            stop = (decrement[quad] < 1e-20) | (
                np.abs(sq).max(axis=1) < 1e-14 * (1.0 + np.abs(theta[q]).max(axis=1))
            )
            converged[q[stop]] = True
            done[np.flatnonzero(quad)[stop]] = True
            go = q[~stop]
            if go.size == P:
                eta, one_e, p, grad = point(None, theta)
                f0[:] = np.nan
            elif go.size:
                eta[go], one_e[go], p[go], grad[go] = point(go, theta[go])
                f0[go] = np.nan
        if not quad.all():
            # backtracking line search, each problem with its own step length
            ls = np.flatnonzero(~quad)
            lam = np.ones(ls.size)
            while ls.size:
                rows = active[ls]
                sel = None if rows.size == P else rows
                cand = theta[rows] - lam[:, None] * step[ls]
                c_eta, c_one_e, c_p, c_grad = point(sel, cand)
                # The logistic loss is self-concordant (its third derivative is at most its
                # second in size), so with u the change of a row's linear predictor,
                # l(eta + u) <= l + l' u + l'' u^2 psi(|u|), psi(a) = (e^a - a - 1) / a^2, and
                # a step of length lam along the Newton step lowers the loss by at least
                # lam dec (1 - lam psi(max |u|)). Where that certainly passes the Armijo test
                # (lam psi <= 0.99: a decrease of at least 0.01 lam dec, far above the loss's
                # rounding as dec >= 1e-10) the step is accepted without computing the loss,
                # as the test would accept it; elsewhere the test runs on computed losses.
                big_u = np.abs(c_eta - eta[rows]).max(axis=1)
                u = np.clip(big_u, 1e-8, 700.0)  # (psi(a) -> 1/2 as a -> 0; e^700 is finite)
                psi = np.where(big_u > 1e-8, (np.expm1(u) - u) / (u * u), 0.5)
                accept = lam * psi <= 0.99
                f1 = np.full(rows.size, np.nan)  # the loss there, computed only if tested
                test = np.flatnonzero(~accept)
                if test.size:
                    tr = rows[test]
                    stale = tr[np.isnan(f0[tr])]
                    if stale.size:
                        f0[stale] = loss(stale, eta[stale], one_e[stale])
                    f1[test] = loss(tr, c_eta[test], c_one_e[test])
                    accept[test] = (f1[test] <= f0[tr] - 1e-4 * lam[test] * decrement[ls][test]) | (
                        lam[test] < 1e-12
                    )
                if accept.all():
                    theta[rows], f0[rows] = cand, f1
                    if sel is None:  # every problem: the new arrays replace the old ones
                        eta, one_e, p, grad = c_eta, c_one_e, c_p, c_grad
                    else:
                        eta[rows], one_e[rows], p[rows], grad[rows] = c_eta, c_one_e, c_p, c_grad
                    break
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
    template: CalibrationMap,
    S: np.ndarray,
    y_index: np.ndarray,
    w: np.ndarray,
    classes: Any,
    start: list | None = None,
) -> list[CalibrationMap]:
    """The one-vs-rest maps of ``classes``: for each class ``k``,
    ``one_vs_rest_copy(template, S.shape[1]).fit(S[:, k], y_index == k, sample_weight=w)``.

    ``S`` (n, c) holds every class's one-vs-rest scores as the maps see them, ``y_index`` the
    class index of each row. Each class must have rows of positive weight both in and outside
    it. The weights are checked once for all classes; Platt and beta maps are fitted by
    :func:`batched_weighted_logistic`. Maps with their own ``fit``, or scores that are not all
    finite (whose error the map's own checks report), are fitted one at a time.

    ``start``: fitted one-vs-rest maps of the same kind, indexed by class (e.g. the fit on the
    previous cross-validation fold): with smoothed targets (a finite optimum) each Platt or
    beta fit starts its Newton iteration from that class's parameters, and reaches the same
    optimum in fewer iterations.
    """
    n_classes = S.shape[1]
    classes = [int(k) for k in classes]
    y_index = np.asarray(y_index)
    labels = [(y_index == k).astype(int) for k in classes]
    if type(template).fit is not CalibrationMap.fit or not (
        np.all(np.isfinite(S)) or np.all(np.isfinite(S[:, classes]))
    ):
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
    prior: list = []
    # rows of positive weight in each class and outside it
    weighted = w > 0
    inside = np.bincount(y_index[weighted].astype(np.intp), minlength=n_classes)
    outside = int(np.count_nonzero(weighted)) - inside
    blank = one_vs_rest_copy(template, n_classes)  # copied per class (unfitted: parameters only)
    for k, yk in zip(classes, labels, strict=True):
        m = object.__new__(type(blank))
        m.__dict__.update(blank.__dict__)
        y01 = yk.astype(float)
        if not (inside[k] > 0 and outside[k] > 0):
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
            before = start[k] if start is not None and k < len(start) else None
            prior.append(before if type(before) is type(m) and m.smooth_targets else None)
        else:
            m._fit(s, y01, w)
        maps.append(m)
    if ready:
        _solve_together(ready, w, prior)
    return maps


def _solve_together(ready: list[tuple[CalibrationMap, tuple]], w: np.ndarray, prior: list) -> None:
    """Solve the prepared Platt or beta fits ``ready`` in one batch (each from the parameters
    of its ``prior`` map, where not None) and store the results."""
    platt = isinstance(ready[0][0], PlattMap)
    start = None
    if any(m is not None for m in prior):
        d = 1 if platt else 2
        coef0 = np.full((len(ready), d), np.nan)
        intercept0 = np.full(len(ready), np.nan)
        for i, m in enumerate(prior):
            if m is not None:
                coef0[i] = [m.slope_] if platt else [m.a_, m.b_]
                intercept0[i] = m.intercept_ if platt else m.c_
        start = (coef0, intercept0)
    if platt:
        X = np.stack([x for _, (x, _t) in ready])[:, :, None]
        T = np.stack([t for _, (_x, t) in ready])
        ww = w
    else:
        X = np.stack([x for _, (x, _t, _w) in ready])
        T = np.stack([t for _, (_x, t, _w) in ready])
        ww = ready[0][1][2]  # the weights scaled by BetaMap._prepare (the same for every class)
    coef, intercept, converged = batched_weighted_logistic(X, T, ww, start=start)
    for i, (m, prepared) in enumerate(ready):
        if platt:
            m._set_solution(coef[i], float(intercept[i]), bool(converged[i]))
        else:
            Xb, t, wb = prepared
            m._set_solution(Xb, t, wb, coef[i], float(intercept[i]))


def predict_one_vs_rest(maps: list, S: np.ndarray) -> np.ndarray | None:
    """``np.column_stack([m.predict(S[:, j]) for j, m in enumerate(maps)])`` for a list of
    fitted binary maps of one kind, in one pass for Platt and beta maps; None for maps with
    their own ``predict`` (left to it).

    The same element-wise operations as each map's ``predict`` (score limit, linear predictor,
    logistic, output floor), applied to all columns at once, so the result is bit-identical.
    Scores that are not all finite, or outputs that would not be, are left to the maps' own
    ``predict`` (None), which reports them.
    """
    kind = type(maps[0]) if maps else None
    if kind is None or any(type(m) is not kind for m in maps):
        return None
    if S.shape[1] != len(maps) or not np.all(np.isfinite(S)):
        return None
    if kind not in (PlattMap, BetaMap):
        if kind.predict is not CalibrationMap.predict or kind.supports_multiclass:
            return None
        # CalibrationMap.predict of each binary map, without repeating its input checks
        cols = []
        for j, m in enumerate(maps):
            floor = float(getattr(m, "floor_", 0.0))
            cols.append(np.clip(np.asarray(m._predict(S[:, j]), dtype=float), floor, 1.0 - floor))
        q = np.column_stack(cols)
        return q if np.all(np.isfinite(q)) else None
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
