"""The EM loop for class priors, accelerated by squared extrapolation (SQUAREM), shared by the
in-memory EM (:func:`probwrap.shift.em_prior`) and the Dask / Spark EM
(:mod:`probwrap.scale._multiclass`), where every evaluation of the EM map is one pass over the
rows (one distributed job).

Plain EM for class priors converges linearly, and slowly when the classes overlap (a weak
model): hundreds of passes. SQUAREM (Varadhan & Roland 2008, "Simple and globally convergent
methods for accelerating the convergence of any EM algorithm", Scand. J. Statist. 35, 335-353;
the step length is their scheme S3) takes two EM steps ``x1 = F(x0)``, ``x2 = F(x1)``, forms
``r = x1 - x0`` and ``v = x2 - x1 - r``, and jumps to ``x' = x0 - 2 a r + a^2 v`` with
``a = -|r| / |v|``, then takes one EM step from ``x'``. The fixed points are those of EM. As
safeguards (the paper's, in the form we use): ``a = -1`` gives back ``x2`` (no jump), the
step is halved towards -1 while ``x'`` has a negative share, and the jump is kept only if the
(penalised) log-likelihood at ``x'`` is at least that at ``x2``; otherwise the loop continues
from ``x2`` as plain EM would. So every point the loop can return is at least as likely as
plain EM's after as many passes, and EM's monotone convergence (Dempster, Laird & Rubin 1977)
carries over.

Stopping rule: plain EM's, plus a check it needs after a jump. With two consecutive plain EM
steps of sizes ``s_prev`` and ``s`` (largest absolute change of a share) and
``rho = s / s_prev < 1``, the remaining distance to the fixed point is at most
``s rho / (1 - rho)`` (a geometric series), formed only from two EM steps in a row, never across
a jump. That bound assumes the error shrinks along one direction, which plain EM's path
approaches (its slowest direction dominates) but a jump breaks: it removes most of the error
along the slow direction and leaves a mix, whose next steps shrink fast and hide what is left
along the slow one. So a stop also needs the linearised distance: with ``J`` the Jacobian of the
EM map at the point ``x`` the step started from and ``s = F(x) - x``, the error of ``F(x)`` is
``J (I - J)^-1 s`` to first order (for one direction of rate ``rho`` this is the bound above).
The loop stops when both distances and ``s`` are at most ``tol`` and reports the larger
distance.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

__all__ = ["accelerated_em"]

# em_map(x, also) -> (F(x), objective at x, objective at `also`, jacobian): the objective is
# the (penalised) log-likelihood that EM increases, asked for only when `also` is given (then one
# pass computes both; otherwise the two may be None); `jacobian()` returns the k x k Jacobian of
# the map at x (computed when called, or kept from the pass).
EmMap = Callable[[np.ndarray, "np.ndarray | None"], tuple]


def linearised_distance(jac: np.ndarray, step: np.ndarray) -> float:
    """Largest share of ``J (I - J)^-1 step``: the first-order error of ``x + step = F(x)``
    (inf where ``I - J`` is singular)."""
    k = step.shape[0]
    try:
        err = np.linalg.solve(np.eye(k) - jac, step)
    except np.linalg.LinAlgError:
        return np.inf
    out = float(np.max(np.abs(jac @ err)))
    return out if np.isfinite(out) else np.inf


def accelerated_em(
    em_map: EmMap, init: np.ndarray, tol: float, max_iter: int
) -> tuple[np.ndarray, int, bool, float]:
    """Fixed point of the EM map ``em_map`` from ``init``, accelerated by SQUAREM.

    ``max_iter`` caps the evaluations of ``em_map`` (passes over the rows). Returns
    ``(prior, n_iter, converged, distance)`` with ``n_iter`` the evaluations used and
    ``distance`` the bound of the stopping rule (module docstring).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._em_loop import accelerated_em
    >>> def halfway(x, also=None):  # a linear map with fixed point (0.5, 0.5), rate 1/2
    ...     def closeness(z):
    ...         return -float(np.sum((z - 0.5) ** 2))
    ...     objectives = (None, None) if also is None else (closeness(x), closeness(also))
    ...     return 0.5 * (x + 0.5), *objectives, lambda: 0.5 * np.eye(2)
    >>> prior, n_iter, ok, dist = accelerated_em(halfway, np.array([0.9, 0.1]), 1e-9, 100)
    >>> prior.round(9).tolist(), ok
    ([0.5, 0.5], True)
    """
    state = {"n": 0}

    def step(x, prev, also=None):
        """One evaluation; returns (new, size, stop, dist, obj_x, obj_also)."""
        state["n"] += 1
        new, obj, obj_also, jacobian = em_map(x, also)
        size = float(np.max(np.abs(new - x)))
        if size == 0.0:
            return new, size, True, 0.0, obj, obj_also
        if prev is None:  # not the second of two EM steps in a row: nothing to certify
            return new, size, False, np.inf, obj, obj_also
        rho = size / prev if prev > 0 else 0.0
        dist = size * rho / (1.0 - rho) if rho < 1.0 else np.inf
        if not (dist <= tol and size <= tol):
            return new, size, False, dist, obj, obj_also
        dist = max(dist, linearised_distance(jacobian(), new - x))
        return new, size, dist <= tol, dist, obj, obj_also

    x0 = np.asarray(init, dtype=float).copy()
    # the first step is judged as plain EM judges its first step (rho = 0 against no step)
    prev: float | None = np.inf
    dist = np.inf
    while True:
        x1, s1, stop, dist, _, _ = step(x0, prev)
        if stop or state["n"] >= max_iter:
            return x1, state["n"], stop, dist
        x2, s2, stop, dist, _, _ = step(x1, s1)
        if stop or state["n"] >= max_iter:
            return x2, state["n"], stop, dist
        r = x1 - x0
        v = x2 - x1 - r
        norm_v = float(np.linalg.norm(v))
        alpha = -float(np.linalg.norm(r)) / norm_v if norm_v > 0 else -1.0
        jump = None
        while alpha < -1.0:
            cand = x0 - 2.0 * alpha * r + alpha * alpha * v
            if np.all(cand >= 0):
                jump = cand / cand.sum()
                break
            alpha = 0.5 * (alpha - 1.0)
            if alpha > -1.0 - 1e-3:  # within a hair of x2: no jump
                break
        if jump is None:
            x0, prev = x2, s2  # the next step continues EM from x2: steps in a row
            continue
        x3, s3, stop, _, obj_jump, obj_x2 = step(jump, None, also=x2)
        if obj_jump >= obj_x2:
            if stop:  # an exact fixed point
                return x3, state["n"], True, 0.0
            if state["n"] >= max_iter:  # x2's bound, plus how far x3 lies from x2
                return x3, state["n"], False, dist + float(np.max(np.abs(x3 - x2)))
            x0, prev = x3, s3  # jump -> x3 -> next: EM steps in a row from the jump
        else:
            if state["n"] >= max_iter:
                return x2, state["n"], False, dist
            x0, prev = x2, s2
