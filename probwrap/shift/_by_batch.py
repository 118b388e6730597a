"""Prior estimates batch by batch (week by week, depot by depot)."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
from sklearn.utils import check_random_state

from .._validation import check_proba, check_sample_weight, plain
from ..calibration._base import rescale_extreme_weights
from ._estimator import PriorEstimator

__all__ = ["prior_by_batch"]


def prior_by_batch(
    estimator: PriorEstimator,
    proba: Any,
    batches: Any = None,
    *,
    batch_size: int | None = None,
    sample_weight: Any = None,
) -> np.ndarray:
    """Estimate the class priors batch by batch (for example week by week).

    Parameters
    ----------
    estimator : PriorEstimator
        A fitted estimator.
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows, in arrival order.
    batches : array-like of shape (n,), default=None
        Batch label of each row (a week number, a date, a string); batches appear in the table
        in the order of their first row (numbers or dates whose rows are not in increasing
        order warn). Exactly one of ``batches`` and ``batch_size`` is given.
    batch_size : int, default=None
        Consecutive batches of this many rows (the last one may be shorter); labelled 0, 1, ...
    sample_weight : array-like of shape (n,), default=None

    Returns
    -------
    numpy structured array with one record per batch and fields ``batch``, ``n_rows`` (int),
    ``prior``, ``lower``, ``upper`` (float, shape (k,) each), ``shift_statistic``,
    ``shift_pvalue`` (float) and ``converged`` (bool). ``table["prior"][:, 1]`` is the series of
    positive-class prevalences of a binary problem.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=600)
    >>> y = (rng.uniform(size=600) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> est = PriorEstimator(n_resamples=20, random_state=0).fit(proba[:300], y[:300])
    >>> table = prior_by_batch(est, proba[300:], batch_size=100)
    >>> table["n_rows"].tolist(), table.dtype.names[:3]
    ([100, 100, 100], ('batch', 'n_rows', 'prior'))
    """
    estimator._check_fitted()
    p = check_proba(proba, name="proba", ndim=2)
    n, k = p.shape
    w = check_sample_weight(sample_weight, n)
    if sample_weight is not None:
        # once for all batches (each batch's estimate does not change when its weights scale)
        w = rescale_extreme_weights(w, "prior_by_batch", stacklevel=3)
    if (batches is None) == (batch_size is None):
        raise ValueError("Give exactly one of `batches` (a label per row) and `batch_size`.")
    if batch_size is not None:
        if not (isinstance(batch_size, numbers.Integral) and batch_size >= 1):
            raise ValueError(f"`batch_size` must be a positive integer; got {plain(batch_size)!r}.")
        labels = np.arange(n) // int(batch_size)
    else:
        labels = np.asarray(batches)
        if labels.ndim != 1 or labels.shape[0] != n:
            raise ValueError(
                f"`batches` must be 1-d with one label per row ({n}); got shape {labels.shape}."
            )
        if labels.dtype == object:
            labels = labels.astype(str)
    uniq, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    if batch_size is None and labels.dtype.kind in "iufmM" and np.any(np.diff(order) < 0):
        # numbers or dates whose first rows are not in increasing order: a chart read off the
        # table would run out of time order
        late = int(np.flatnonzero(np.diff(order) < 0)[0])
        warnings.warn(
            f"prior_by_batch: the batch labels are {'dates' if labels.dtype.kind in 'mM' else 'numbers'} "
            f"but their rows are not in increasing order (batch {uniq[order[late + 1]]} "
            f"first appears after batch {uniq[order[late]]}). The table follows the "
            "order of each batch's first row, so a chart on it would run out of order; sort the "
            "rows by batch first if the batches are times.",
            UserWarning,
            stacklevel=3,
        )
    dtype = [
        ("batch", uniq.dtype),
        ("n_rows", np.int64),
        ("prior", float, (k,)),
        ("lower", float, (k,)),
        ("upper", float, (k,)),
        ("shift_statistic", float),
        ("shift_pvalue", float),
        ("converged", bool),
    ]
    table = np.zeros(len(uniq), dtype=dtype)
    rng = check_random_state(estimator.random_state)
    for row, b in enumerate(order):
        rows = inverse.ravel() == b
        res = estimator.estimate(p[rows], w[rows], random_state=rng.randint(2**31 - 1))
        interval = res.interval
        if interval is None:
            interval = np.column_stack([res.prior, res.prior])
        table[row] = (
            uniq[b], int(rows.sum()), res.prior, interval[:, 0], interval[:, 1],
            res.shift_statistic, res.shift_pvalue, res.converged,
        )
    return table
