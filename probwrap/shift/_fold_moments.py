"""The unlabelled side of the two-class score interval, as sums over rows that live elsewhere.

With a base model refit on the labelled rows, :func:`probwrap.shift.score_interval` compares
the unlabelled rows' score averaged over the fold models,
:math:`\\bar u(x; \\pi) = \\sum_k \\omega_k d_k(x) / (a_k(x) + \\pi d_k(x))` (``a_k = q_0``,
``d_k = q_1 - q_0``, ``q = p / \\pi^s`` from fold model ``k``'s calibrated posterior), with the
labelled rows' held-out scores. The unlabelled rows enter its statistic only through the
weighted mean and second moment of :math:`\\bar u` at each candidate prior :math:`\\pi`. Rows
that cannot come to one machine (more than 20,000 Dask or Spark rows, which come back as a
tally of the refit model's score, where each row's fold-model scores cannot be kept) give
those two moments as sums computed where the rows live, on a fixed grid of priors: 0, 1, the
source prior and 401 priors uniform in log-odds from -20 to 20 (step 0.1). Between grid points
both moments are interpolated by a cubic spline in the log-odds of :math:`\\pi` (each row's
:math:`\\bar u` is a ratio of functions linear in :math:`\\pi`, smooth in its log-odds on the
scale of 1, so a step of 0.1 leaves an interpolation error of order 1e-7 of the moments;
measured against the rows themselves in tests/test_distributed_refit_large.py); below the
smallest and above the largest interior grid prior (2.1e-9 from 0 or 1) linearly in
:math:`\\pi` toward the exact value at 0 or 1. At the source prior, where the shift test reads
them, the moments are the sums themselves.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["FoldScoreMoments", "fold_score_block", "score_grid"]

#: log-odds of the interior grid priors
GRID_LOGODDS = np.round(np.arange(-200, 201) * 0.1, 10)


def score_grid(positive_source_share: float) -> np.ndarray:
    """The grid of candidate priors (positive-class shares) the sums are taken at: 0, 1, the
    source share and the interior log-odds grid, sorted and distinct."""
    inner = 1.0 / (1.0 + np.exp(-GRID_LOGODDS))
    return np.unique(np.concatenate([[0.0, 1.0, float(positive_source_share)], inner]))


def fold_score_block(calibrated: np.ndarray, share: np.ndarray, src: np.ndarray,
                     w: np.ndarray, grid: np.ndarray) -> FoldScoreMoments:
    """The sums of one block of unlabelled rows: ``calibrated`` (n_folds, n, 2) is every fold
    model's calibrated posterior of the rows, ``share`` the folds' shares of the labelled
    weight, ``src`` the source prior, ``w`` the rows' weights (n,)."""
    q = np.asarray(calibrated, dtype=float) / np.asarray(src, dtype=float)
    a, d = q[:, :, 0], q[:, :, 1] - q[:, :, 0]
    w = np.asarray(w, dtype=float)
    tiny = np.finfo(float).tiny
    s1 = np.empty(grid.shape[0])
    s2 = np.empty(grid.shape[0])
    for lo in range(0, grid.shape[0], 32):  # memory: rows x 32 at a time, as score_interval
        t = grid[lo:lo + 32]
        u = np.zeros((a.shape[1], t.shape[0]))
        for s_k, a_k, d_k in zip(share, a, d, strict=True):
            u += s_k * d_k[:, None] / np.maximum(a_k[:, None] + t * d_k[:, None], tiny)
        s1[lo:lo + 32] = w @ u
        s2[lo:lo + 32] = w @ (u * u)
    return FoldScoreMoments(grid, float(w.sum()), s1, s2, int(share.shape[0]))


class FoldScoreMoments:
    """Weighted sums of the fold-averaged score ``u`` and of ``u**2`` over unlabelled rows at
    each prior of ``grid`` (``total`` the sum of the weights), summed over blocks by ``+``;
    :meth:`moments` gives the weighted mean and variance at any prior, as
    :func:`~probwrap.shift.score_interval` computes them from the rows."""

    def __init__(self, grid: np.ndarray, total: float, s1: np.ndarray, s2: np.ndarray,
                 n_folds: int) -> None:
        self.grid = np.asarray(grid, dtype=float)
        self.total = float(total)
        self.s1 = np.asarray(s1, dtype=float)
        self.s2 = np.asarray(s2, dtype=float)
        self.n_folds = int(n_folds)
        self._splines = None
        #: ``(proba (m, 2), weights (m,))``: the rows' posteriors from every fold model, each
        #: row once per fold model weighted by its weight times the fold's share (as bins of a
        #: tally), for the point estimate (:meth:`with_rows`); None if not taken
        self.rows: tuple | None = None
        #: ``(mean posterior (2,), mean of u u' (1, 1), mean entropy)`` of the fold models'
        #: average posterior (the wrapper predicts with it), for the harm scale; or None
        self.harm: tuple | None = None
        #: ``(B, m)``: Poisson-bootstrap replicate weights of :attr:`rows` (each original row
        #: one draw, shared by its fold copies), for a bootstrap interval; or None
        self.row_replicates: np.ndarray | None = None

    def __add__(self, other: FoldScoreMoments) -> FoldScoreMoments:
        return FoldScoreMoments(self.grid, self.total + other.total, self.s1 + other.s1,
                                self.s2 + other.s2, self.n_folds)

    def with_rows(self, proba: Any, weights: Any, harm: tuple | None = None,
                  replicates: Any = None) -> FoldScoreMoments:
        """These sums with the rows the point estimate reads after a refit (``rows``): the
        fold models' raw posteriors ``proba`` (m, 2) of the unlabelled rows, each row once
        per fold model, with ``weights`` (m,) the row's weight times the fold's share (only
        their ratios matter), e.g. the bins of a tally of those rows; the estimate reads them
        as ``PriorEstimator.estimate`` reads every row once per fold model in memory.
        ``harm``: the weighted means of the fold models' average posterior, of the outer
        products of its scores at the source prior and of its entropy, when that average
        predicts (the harm scale reads them; see :attr:`harm`). ``replicates``: the rows'
        Poisson-bootstrap replicate weights, shape (B, m) (:attr:`row_replicates`)."""
        out = FoldScoreMoments(self.grid, self.total, self.s1, self.s2, self.n_folds)
        out.rows = (np.asarray(proba, dtype=float), np.asarray(weights, dtype=float))
        out.harm = harm
        out.row_replicates = None if replicates is None else np.asarray(replicates, dtype=float)
        return out

    def scaled(self, unit: float) -> FoldScoreMoments:
        """The same sums with the weights divided by ``unit`` (means do not change)."""
        out = FoldScoreMoments(self.grid, self.total / unit, self.s1 / unit, self.s2 / unit,
                               self.n_folds)
        out.rows, out.harm, out.row_replicates = self.rows, self.harm, self.row_replicates
        return out

    def _interpolators(self) -> tuple:
        if self._splines is None:
            from scipy.interpolate import CubicSpline

            inner = (self.grid > 0) & (self.grid < 1)
            x = np.log(self.grid[inner]) - np.log1p(-self.grid[inner])
            m = self.s1 / self.total
            e2 = self.s2 / self.total
            self._splines = (CubicSpline(x, m[inner]), CubicSpline(x, e2[inner]), m, e2,
                             self.grid[inner][[0, -1]])
        return self._splines

    def moments(self, t: Any) -> tuple[np.ndarray, np.ndarray]:
        """Weighted mean and variance of the fold-averaged score at the priors ``t``."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        spline_m, spline_e2, m, e2, (first, last) = self._interpolators()
        out_m = np.empty(t.shape[0])
        out_e2 = np.empty(t.shape[0])
        exact = np.searchsorted(self.grid, t)
        exact = np.minimum(exact, self.grid.shape[0] - 1)
        on_grid = self.grid[exact] == t
        mid = ~on_grid & (t > first) & (t < last)
        if np.any(mid):
            x = np.log(t[mid]) - np.log1p(-t[mid])
            out_m[mid], out_e2[mid] = spline_m(x), spline_e2(x)
        low = ~on_grid & (t <= first)
        high = ~on_grid & (t >= last)
        for rows, edge, near in ((low, 0, 1), (high, -1, -2)):
            if np.any(rows):
                g0, g1 = self.grid[edge], self.grid[near]
                f = (t[rows] - g0) / (g1 - g0)
                out_m[rows] = m[edge] + f * (m[near] - m[edge])
                out_e2[rows] = e2[edge] + f * (e2[near] - e2[edge])
        out_m[on_grid] = m[exact[on_grid]]
        out_e2[on_grid] = e2[exact[on_grid]]
        return out_m, np.maximum(out_e2 - out_m**2, 0.0)

    def test_moments(self, src: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Mean (1,) and covariance (1, 1) of the fold-averaged score at the source prior, as
        the shift test reads them (``_mean_cov`` of the rows' scores)."""
        m, v = self.moments([float(src[1])])
        return m.reshape(1), v.reshape(1, 1)
