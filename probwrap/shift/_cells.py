"""Cells of aggregated counts in the prior-shift estimates: the clustered variance of a mean.

Outcomes given as ``k`` of ``n`` enter as two weighted rows per group (a success row of weight
``k`` and a failure row of weight ``n - k``; :func:`probwrap.aggregated.expand_counts`), and a
frequency table the same way. The rows of one group (a *cell*) are not independent draws: a
group's rate varies around its forecast more than ``n`` independent trials would (the pupils of
one school share causes). The mean of a per-row quantity over such rows then has the
cluster-robust (sandwich) variance with the cells as clusters (Liang & Zeger 1986; the
small-sample factor ``G / (G - 1)`` of statsmodels' ``cov_type="cluster"``),

    V = G / (G - 1) * sum_g s_g s_g^T / W^2,     s_g = sum_{i in g} w_i (v_i - mean),

with ``G`` cells and ``W`` the total weight, and is known to ``G - 1`` degrees of freedom.
Every row in a cell of its own with unit weights, it is the plain ``cov / (n - 1)`` of
:func:`probwrap.shift._shift_tests._mean_cov` exactly.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import sparse

from .._validation import _is_missing, plain

__all__ = ["cell_design_rows", "check_cells", "cell_mean_cov", "cell_sums", "cell_totals_kish"]


def check_cells(cells: Any, n_rows: int, name: str = "cells") -> np.ndarray | None:
    """``cells`` (one cell label per row) as codes ``0 .. G - 1``, None for None, or a clear
    ``ValueError`` naming the argument."""
    if cells is None:
        return None
    arr = np.asarray(cells)
    if arr.ndim != 1 or arr.shape[0] != n_rows:
        raise ValueError(
            f"`{name}` must be 1-d with one cell label per row ({n_rows} rows); got shape "
            f"{arr.shape}."
        )
    if arr.dtype.kind == "f" and np.isnan(arr).any():
        raise ValueError(f"`{name}` contains missing labels (NaN); give every row a cell.")
    if arr.dtype.kind == "O" and any(_is_missing(v) for v in arr.tolist()):  # None, NaN, NA
        raise ValueError(f"`{name}` contains missing labels; give every row a cell.")
    try:
        _, codes = np.unique(arr, return_inverse=True)
    except TypeError as exc:
        raise ValueError(
            f"`{name}` must hold sortable labels of one kind; got {plain(arr[:3].tolist())!r}... "
            f"({exc})."
        ) from None
    return np.asarray(codes, dtype=np.intp).ravel()


def _indicator(codes: np.ndarray) -> sparse.csr_matrix:
    n = codes.shape[0]
    g = int(codes.max()) + 1 if n else 0
    return sparse.csr_matrix((np.ones(n), (codes, np.arange(n))), shape=(g, n))


def cell_sums(values: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """Sum of ``values`` (rows first; 1-d or 2-d) within every cell: shape ``(G,) + rest``."""
    v = np.asarray(values, dtype=float)
    out = _indicator(codes) @ (v if v.ndim > 1 else v[:, None])
    return np.asarray(out) if v.ndim > 1 else np.asarray(out).ravel()


def cell_mean_cov(v: np.ndarray, w: np.ndarray, codes: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray, float]:
    """Weighted mean of the rows ``v`` (n, d), and ``(cov, G)`` such that ``cov / (G - 1)`` is
    the mean's cluster-robust covariance with the cells ``codes`` as clusters (module
    docstring): the same form as :func:`~probwrap.shift._shift_tests._mean_cov`'s ``(mean,
    cov, n_eff)``, so the shift test's variance components and degrees of freedom read the
    cells. Cells with no weight are not counted."""
    w = np.asarray(w, dtype=float)
    wn = w / w.sum()
    mean = wn @ v
    s = cell_sums((v - mean) * wn[:, None], codes)
    g = float(np.count_nonzero(cell_sums(w, codes) > 0))
    cov = g * (s.T @ s)  # (G - 1) * G / (G - 1) * sum s s^T
    return mean, cov, g


def cell_totals_kish(w: np.ndarray, codes: np.ndarray) -> float:
    """Kish's effective number of cells, ``(sum W_g)^2 / sum W_g^2`` over the cells' total
    weights ``W_g``: the effective count of rows if every cell's rows were perfectly alike
    (the most a cell's trials can be correlated), so never more than the information in the
    rows however they vary within the cells."""
    tot = cell_sums(np.asarray(w, dtype=float), codes)
    return float(tot.sum() ** 2 / np.dot(tot, tot))


def cell_design_rows(v: np.ndarray, w: np.ndarray, codes: np.ndarray, rows: float) -> float:
    """The evidence of ``rows`` effective rows (Kish's count) divided by the cells' design
    effect on the weighted mean of ``v`` (n, d): never more than ``rows``.

    Kish's (1965, sec. 8.2; from memory) design effect of a cluster sample is the variance of a
    mean over the variance it would have from as many independent rows; the rows' worth in
    independent rows is their count divided by it. Here the mean's variance clustered on the
    cells, ``V = sum_g s_g s_g^T / W^2`` (:func:`cell_mean_cov` without the small-sample factor,
    so that every row in a cell of its own gives ``V = S / n`` for unit weights), against
    ``S / rows`` with ``S`` the rows' weighted covariance of ``v``; over ``d`` directions the
    mean of the design effect's eigenvalues, ``rows * tr(S^+ V) / d``, so the count is
    ``d / tr(S^+ V)`` (the harmonic mean of the directions' counts: the directions with the most
    correlated cells weigh most). Rows whose ``v`` is the same within a cell (a group's success
    and failure rows, scored on the group's features) give about Kish's count of the cells'
    total weights (:func:`cell_totals_kish`); rows that vary independently within their cells
    give up to ``rows``. ``rows`` where ``v`` does not vary (no evidence either way).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._cells import cell_design_rows
    >>> v = np.repeat([[-1.0], [0.0], [1.0], [2.0]], 5, axis=0)   # 4 cells, 5 alike rows each
    >>> round(cell_design_rows(v, np.ones(20), np.repeat(np.arange(4), 5), 20.0), 6)
    4.0
    """
    v = np.asarray(v, dtype=float)
    v = v if v.ndim > 1 else v[:, None]
    w = np.asarray(w, dtype=float)
    wn = w / w.sum()
    d = v - wn @ v
    s_rows = (d * wn[:, None]).T @ d
    s = cell_sums(d * wn[:, None], codes)
    ratio = float(np.trace(np.linalg.pinv(s_rows) @ (s.T @ s))) / v.shape[1]
    if not (np.isfinite(ratio) and ratio > 0 and np.any(s_rows)):
        return float(rows)
    return float(min(float(rows), 1.0 / ratio))
