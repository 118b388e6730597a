"""Multicalibration: probabilities calibrated within every group and every level of risk.

Hébert-Johnson, Kim, Reingold & Rothblum (ICML 2018) ask for more than calibration overall: in
every (group, forecast bin) cell of enough weight, the mean outcome must be within ``alpha`` of
the mean forecast. Their algorithm reaches it by repeated correction: find a cell whose mean
residual exceeds ``alpha``, move every forecast in it by that residual, and repeat until no cell
violates. :class:`MulticalibrationMap` records the corrections and replays them on new rows.
"""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np

from .._validation import check_proba, check_same_length, check_sample_weight, plain

__all__ = ["MulticalibrationMap"]


def _check_groups(groups: Any, n: int, name: str = "groups") -> np.ndarray:
    g = np.asarray(groups)
    if g.ndim == 1:
        g = g[:, None]
    if g.ndim != 2:
        raise ValueError(f"`{name}` must be 1-d (one label per row) or 2-d (one column per "
                         f"grouping); got shape {g.shape}.")
    check_same_length(("proba", np.empty(n)), (name, g))
    if g.dtype.kind == "f" and np.isnan(g).any():
        raise ValueError(f"`{name}` contains NaN; give every row a group.")
    return g


class MulticalibrationMap:
    """Post-processing that makes probabilities calibrated within every group and risk bin.

    Fit on held-out probabilities, labels and group memberships (one or several groupings, e.g.
    depot and parcel size); the fitted map adjusts new probabilities given their groups.

    The cells are ``(grouping j, group value v, bin b)``: rows with ``groups[:, j] == v`` whose
    *current* forecast lies in ``[b / n_bins, (b + 1) / n_bins)``, plus for each bin the cell of
    all rows (so plain calibration is part of the target). A cell is checked when its weight is
    at least ``min_share`` of the total. While a checked cell's weighted mean residual
    ``mean(y - p)`` exceeds ``alpha`` in absolute value, the correction with the largest
    ``weight * |residual|`` is applied — every forecast in the cell moves by the residual,
    clipped to [0, 1] — and recorded. At most ``max_iter`` corrections are made; if a violation
    remains a ``UserWarning`` says so. ``predict`` replays the corrections in order on new rows
    (each checks its cell on the forecasts as they are at that step, as during fitting).

    Guarantee on the fitted rows (Hébert-Johnson et al. 2018): when the loop ends without the
    warning, every checked cell is within ``alpha``. On new rows it holds only approximately;
    with small cells the corrections fit noise. Keep ``min_share`` such that a cell holds at
    least a few hundred rows, and check the gain on held-out rows (``benchmarks/assessment.py``
    prints it).

    Parameters
    ----------
    alpha : float, default=0.02
        Tolerance on each cell's mean residual.
    n_bins : int, default=10
        Equal-width forecast bins.
    min_share : float, default=0.01
        Smallest cell weight checked, as a share of the total.
    max_iter : int, default=1000
        Largest number of corrections.

    Attributes
    ----------
    corrections_ : list of tuple
        ``(grouping, value, bin, shift)`` in the order applied; ``grouping`` is ``-1`` for the
        cell of all rows.
    n_groupings_ : int
    converged_ : bool

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import MulticalibrationMap
    >>> rng = np.random.default_rng(0)
    >>> g = rng.integers(0, 2, size=4000)
    >>> p = rng.uniform(0.1, 0.6, size=4000)
    >>> y = (rng.uniform(size=4000) < np.clip(p + 0.1 * g, 0, 1)).astype(int)
    >>> m = MulticalibrationMap(alpha=0.02).fit(p, y, g)
    >>> m.converged_, len(m.corrections_) > 0
    (True, True)
    """

    def __init__(self, alpha: float = 0.02, n_bins: int = 10, min_share: float = 0.01,
                 max_iter: int = 1000) -> None:
        self.alpha = alpha
        self.n_bins = n_bins
        self.min_share = min_share
        self.max_iter = max_iter

    def _check_params(self) -> None:
        for name, low, high in (("alpha", 0.0, 1.0), ("min_share", 0.0, 1.0)):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, numbers.Real) or not low < v <= high:
                raise ValueError(f"`{name}` must be a number in ({low:g}, {high:g}]; got {plain(v)!r}.")
        for name in ("n_bins", "max_iter"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, numbers.Integral) or v < 1:
                raise ValueError(f"`{name}` must be a whole number >= 1; got {plain(v)!r}.")

    def _bins(self, p: np.ndarray) -> np.ndarray:
        return np.minimum((p * self.n_bins).astype(np.intp), self.n_bins - 1)

    def _cells(self, g: np.ndarray, bins: np.ndarray):
        """Yield ``(grouping, value, bin, mask)`` for every non-empty cell."""
        for b in range(self.n_bins):
            in_bin = bins == b
            if not in_bin.any():
                continue
            yield -1, None, b, in_bin
            for j in range(g.shape[1]):
                col = g[:, j]
                for v in np.unique(col[in_bin]):
                    yield j, v, b, in_bin & (col == v)

    def fit(self, proba: Any, y: Any, groups: Any, sample_weight: Any = None) -> MulticalibrationMap:
        """Learn the corrections on held-out positive-class probabilities ``proba`` (n,)."""
        self._check_params()
        p = check_proba(proba, name="proba", ndim=1).astype(float).copy()
        n = check_same_length(("proba", p), ("y", np.asarray(y)))
        yy = np.asarray(y)
        if not np.isin(yy, [0, 1]).all():
            raise ValueError("`y` must hold 0/1 labels (1 = positive).")
        yy = yy.astype(float)
        w = check_sample_weight(sample_weight, n)
        g = _check_groups(groups, n)
        total = w.sum()
        floor = self.min_share * total
        corrections = []
        converged = False
        for _ in range(int(self.max_iter)):
            bins = self._bins(p)
            worst = None
            for j, v, b, mask in self._cells(g, bins):
                wc = w[mask].sum()
                if wc < floor or wc <= 0:
                    continue
                resid = float(np.dot(w[mask], yy[mask] - p[mask]) / wc)
                if abs(resid) > self.alpha:
                    score = wc * abs(resid)
                    if worst is None or score > worst[0]:
                        worst = (score, j, v, b, mask, resid)
            if worst is None:
                converged = True
                break
            _, j, v, b, mask, resid = worst
            p[mask] = np.clip(p[mask] + resid, 0.0, 1.0)
            corrections.append((j, v.item() if hasattr(v, "item") else v, b, resid))
        if not converged:
            warnings.warn(
                f"MulticalibrationMap stopped after max_iter={self.max_iter} corrections with a "
                f"cell still off by more than alpha={self.alpha}; raise max_iter or alpha.",
                UserWarning, stacklevel=2,
            )
        self.corrections_ = corrections
        self.n_groupings_ = g.shape[1]
        self.converged_ = converged
        return self

    def predict(self, proba: Any, groups: Any) -> np.ndarray:
        """Apply the recorded corrections, in order, to new probabilities with their groups."""
        if not hasattr(self, "corrections_"):
            raise ValueError("This MulticalibrationMap is not fitted yet; call fit first.")
        p = check_proba(proba, name="proba", ndim=1).astype(float).copy()
        g = _check_groups(groups, p.shape[0])
        if g.shape[1] != self.n_groupings_:
            raise ValueError(f"`groups` must have {self.n_groupings_} column(s) as in fit; got "
                             f"{g.shape[1]}.")
        for j, v, b, shift in self.corrections_:
            mask = self._bins(p) == b
            if j >= 0:
                mask &= g[:, j] == v
            p[mask] = np.clip(p[mask] + shift, 0.0, 1.0)
        return p
