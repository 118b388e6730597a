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

from .._validation import plain

__all__ = ["check_cells", "cell_mean_cov", "cell_sums", "cell_totals_kish"]


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
    if arr.dtype.kind == "O" and any(v is None or (isinstance(v, float) and v != v)
                                     for v in arr.tolist()):
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
