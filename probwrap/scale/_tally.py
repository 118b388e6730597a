"""Mergeable score tallies: weighted label counts per fine bin of the log-odds scale.

A :class:`ScoreTally` summarises any number of rows of (score, label, weight) by the weighted
count of every label in each bin of width ``resolution`` on the score (log-odds) scale, plus the
weighted sum of the scores in the bin. Tallies of disjoint chunks of rows merge by addition, so
they can be built block by block (NumPy chunks, Dask blocks on a cluster) and combined in any
order; only the occupied bins are stored.

Bins are centred on the multiples of ``resolution``: bin ``b`` holds the scores in
``[(b - 1/2) r, (b + 1/2) r)``. Each bin is represented by the weighted mean of its scores (which
lies inside the bin). :meth:`ScoreTally.to_rows` turns a tally into weighted rows — one per
(bin, label) with positive weight — that every sample-weight-aware routine of probwrap accepts:
the calibration maps, :func:`probwrap.decision.search_cutoff`, the metrics and the prior
estimators. Weights count as row frequencies there, so these fits are fits to the binned data.
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np
from scipy.special import expit

from .._validation import check_same_length, check_scores, plain

__all__ = ["DEFAULT_RESOLUTION", "ScoreTally", "merge_tallies"]

#: Default bin width on the log-odds scale. Replacing every score by its bin's mean changes the
#: log loss of a fitted Platt, beta or temperature map by far less than 1e-4 at this width (the
#: change is of second order in the width), while a score range of +-30 needs at most 60 001 bins.
DEFAULT_RESOLUTION = 1e-3

# Largest |score / resolution| that still fits comfortably into int64 bin indices.
_MAX_INDEX = 2.0**62


def _check_resolution(resolution: Any) -> float:
    if (
        isinstance(resolution, bool)
        or not isinstance(resolution, numbers.Real)
        or not np.isfinite(resolution)
        or resolution <= 0
    ):
        raise ValueError(f"`resolution` must be a positive finite number; got {plain(resolution)!r}.")
    return float(resolution)


def _check_n_replicates(n_replicates: Any) -> int:
    if (
        isinstance(n_replicates, bool)
        or not isinstance(n_replicates, numbers.Integral)
        or n_replicates < 0
    ):
        raise ValueError(
            f"`n_replicates` must be a non-negative integer; got {plain(n_replicates)!r}."
        )
    return int(n_replicates)


def replicate_seed(random_state: Any) -> int:
    """One integer seed from a ``random_state`` (int, RandomState or None), for block seeding.

    The replicate draws of block ``i`` come from ``numpy.random.default_rng([seed, stream, i])``.
    """
    from sklearn.utils import check_random_state

    return int(check_random_state(random_state).randint(2**31 - 1))


def _check_n_labels(n_labels: Any) -> int:
    if (
        isinstance(n_labels, bool)
        or not isinstance(n_labels, numbers.Integral)
        or n_labels < 1
    ):
        raise ValueError(f"`n_labels` must be a positive integer; got {plain(n_labels)!r}.")
    return int(n_labels)


class ScoreTally:
    """Weighted label counts per bin of width ``resolution`` on the score scale.

    Build one with :func:`tally_scores`; combine tallies of disjoint rows with ``+`` or
    :func:`merge_tallies`.

    Parameters
    ----------
    bins : ndarray of int64, shape (m,)
        Occupied bin indices, strictly increasing; bin ``b`` covers
        ``[(b - 1/2) * resolution, (b + 1/2) * resolution)``.
    counts : ndarray of shape (m, n_labels)
        Weighted count of each label per bin (one column for an unlabelled tally).
    score_sums : ndarray of shape (m,)
        Weighted sum of the scores per bin.
    resolution : float
        Bin width.
    n_rows : int
        Number of rows tallied (whatever their weight).
    labelled : bool
        Whether the columns of ``counts`` are labels (False: a single column of weights of
        unlabelled rows).
    replicates : ndarray of shape (n_replicates, m, n_labels), default=None
        Poisson-bootstrap replicate counts aligned with ``bins``: replicate ``b`` counts every
        row with its weight times an independent Poisson(1) draw (see :func:`tally_scores`).
    squared_weight : float, default=None
        Sum of the squared row weights (for the effective number of rows); None if unknown.

    Examples
    --------
    >>> from probwrap.scale import tally_scores
    >>> t = tally_scores([0.0, 0.0004, 1.0], [0, 1, 1], resolution=0.001)
    >>> t.n_bins, t.counts.tolist()
    (2, [[1.0, 1.0], [0.0, 1.0]])
    >>> s, y, w = t.to_rows()
    >>> s.round(4).tolist(), y.tolist(), w.tolist()
    ([0.0002, 0.0002, 1.0], [0, 1, 1], [1.0, 1.0, 1.0])
    """

    def __init__(
        self,
        bins: np.ndarray,
        counts: np.ndarray,
        score_sums: np.ndarray,
        resolution: float,
        n_rows: int,
        labelled: bool = True,
        replicates: np.ndarray | None = None,
        squared_weight: float | None = None,
    ) -> None:
        self.bins = np.asarray(bins, dtype=np.int64)
        self.counts = np.asarray(counts, dtype=float)
        self.score_sums = np.asarray(score_sums, dtype=float)
        self.resolution = _check_resolution(resolution)
        self.n_rows = int(n_rows)
        self.labelled = bool(labelled)
        if self.counts.ndim != 2 or self.counts.shape[0] != self.bins.shape[0]:
            raise ValueError(
                f"`counts` must have shape ({self.bins.shape[0]}, n_labels); got "
                f"{self.counts.shape}."
            )
        if self.score_sums.shape != self.bins.shape:
            raise ValueError(
                f"`score_sums` must have shape {self.bins.shape}; got {self.score_sums.shape}."
            )
        self.replicates = None if replicates is None else np.asarray(replicates, dtype=float)
        if self.replicates is not None and (
            self.replicates.ndim != 3 or self.replicates.shape[1:] != self.counts.shape
        ):
            raise ValueError(
                f"`replicates` must have shape (n_replicates, {self.counts.shape[0]}, "
                f"{self.counts.shape[1]}); got {self.replicates.shape}."
            )
        self.squared_weight = None if squared_weight is None else float(squared_weight)

    # -- summaries -------------------------------------------------------------------------
    @property
    def n_bins(self) -> int:
        """Number of occupied bins."""
        return int(self.bins.shape[0])

    @property
    def n_labels(self) -> int:
        """Number of label columns (1 for an unlabelled tally)."""
        return int(self.counts.shape[1])

    @property
    def bin_weight(self) -> np.ndarray:
        """Total weight per bin, shape (m,)."""
        return self.counts.sum(axis=1)

    @property
    def total_weight(self) -> float:
        """Total weight of all tallied rows."""
        return float(self.counts.sum())

    @property
    def label_weight(self) -> np.ndarray:
        """Total weight of each label, shape (n_labels,)."""
        return self.counts.sum(axis=0)

    @property
    def n_replicates(self) -> int:
        """Number of bootstrap replicate tallies carried along (0 for none)."""
        return 0 if self.replicates is None else int(self.replicates.shape[0])

    @property
    def effective_rows(self) -> float:
        """Effective number of rows ``(sum w)^2 / sum w^2`` (NaN when ``squared_weight`` is unknown)."""
        if self.squared_weight is None or self.squared_weight <= 0:
            return float("nan")
        return self.total_weight**2 / self.squared_weight

    @property
    def bin_edges(self) -> np.ndarray:
        """Lower and upper edge of every occupied bin, shape (m, 2)."""
        r = self.resolution
        return np.column_stack([(self.bins - 0.5) * r, (self.bins + 0.5) * r])

    @property
    def bin_scores(self) -> np.ndarray:
        """Representative score of every bin: the weighted mean of its scores, shape (m,)."""
        mean = self.score_sums / self.bin_weight
        edges = self.bin_edges
        return np.clip(mean, edges[:, 0], np.nextafter(edges[:, 1], -np.inf))

    # -- turning a tally into weighted rows -----------------------------------------------------
    def to_rows(
        self, positive: int | None = None, *, proba: bool = False
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Weighted rows ``(scores, labels, weights)`` that stand for the tallied rows.

        One row per bin and label with positive weight; its score is the bin's representative
        score (the weighted mean score of the bin, the same for every label of the bin, so that
        order-based fits and cutoff searches never separate rows of one bin).

        Parameters
        ----------
        positive : int, default=None
            Return binary labels, 1 for label index ``positive`` and 0 for every other label
            (one-vs-rest). By default the label indices themselves are returned.
        proba : bool, default=False
            Return two-column probabilities ``[1 - expit(s), expit(s)]`` instead of the
            log-odds scores (for the prior estimators, ECE and Brier score).

        Returns
        -------
        scores : ndarray of shape (r,) or (r, 2)
        labels : ndarray of int of shape (r,)
        weights : ndarray of shape (r,)
        """
        if not self.labelled:
            raise ValueError(
                "This tally holds unlabelled rows; use to_scores() for their scores and weights."
            )
        counts = self._label_counts(self.counts, positive)
        rep = self.bin_scores
        keep = counts > 0
        bin_idx, label = np.nonzero(keep)
        scores = rep[bin_idx]
        weights = counts[bin_idx, label]
        if proba:
            scores = _two_column_proba(scores)
        return scores, label.astype(int), weights

    def _label_counts(self, counts: np.ndarray, positive: int | None) -> np.ndarray:
        if positive is None:
            return counts
        if not (isinstance(positive, numbers.Integral) and 0 <= positive < self.n_labels):
            raise ValueError(
                f"`positive` must be a label index in 0..{self.n_labels - 1}; got {plain(positive)!r}."
            )
        pos = counts[..., positive]
        rest = np.maximum(counts.sum(axis=-1) - pos, 0.0)
        return np.stack([rest, pos], axis=-1)

    def replicate_row_weights(self, positive: int | None = None) -> np.ndarray:
        """Bootstrap replicate weights of the rows of :meth:`to_rows`, shape (n_replicates, r).

        Row ``j`` of ``to_rows(positive)`` has weight ``out[b, j]`` in replicate ``b``: the
        tallied weight of its (bin, label) with every original row's weight multiplied by that
        row's Poisson(1) draw of replicate ``b``. Fitting on ``to_rows()`` with these weights is
        fitting on a Poisson bootstrap resample of the original rows.
        """
        if self.replicates is None:
            raise ValueError("This tally carries no bootstrap replicates (n_replicates=0).")
        counts = self._label_counts(self.counts, positive)
        bin_idx, label = np.nonzero(counts > 0)
        reps = self._label_counts(self.replicates, positive)
        return reps[:, bin_idx, label]

    def replicate_bin_weights(self) -> np.ndarray:
        """Bootstrap replicate weights of the rows of :meth:`to_scores`, shape (n_replicates, m)."""
        if self.replicates is None:
            raise ValueError("This tally carries no bootstrap replicates (n_replicates=0).")
        return self.replicates.sum(axis=2)

    def to_scores(self, *, proba: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """One weighted row per bin, whatever the labels: ``(scores, weights)``.

        With ``proba=True`` the scores are two-column probabilities, as in :meth:`to_rows`.
        """
        rep = self.bin_scores
        return (_two_column_proba(rep) if proba else rep), self.bin_weight

    # -- merging ---------------------------------------------------------------------------
    def merge(self, other: ScoreTally) -> ScoreTally:
        """Tally of the rows of both tallies (they must share resolution and labels)."""
        if not isinstance(other, ScoreTally):
            raise ValueError(f"`other` must be a ScoreTally; got {type(other).__name__}.")
        if other.resolution != self.resolution:
            raise ValueError(
                f"Tallies with different resolutions cannot be merged ({plain(self.resolution)!r} and "
                f"{plain(other.resolution)!r})."
            )
        if other.n_labels != self.n_labels or other.labelled != self.labelled:
            raise ValueError(
                f"Tallies with different label columns cannot be merged ({self.n_labels} "
                f"{'labelled' if self.labelled else 'unlabelled'} and {other.n_labels} "
                f"{'labelled' if other.labelled else 'unlabelled'})."
            )
        bins = np.concatenate([self.bins, other.bins])
        uniq, inv = np.unique(bins, return_inverse=True)
        m = uniq.shape[0]
        counts = np.concatenate([self.counts, other.counts])
        merged = np.column_stack(
            [np.bincount(inv, weights=counts[:, j], minlength=m) for j in range(self.n_labels)]
        )
        sums = np.bincount(
            inv, weights=np.concatenate([self.score_sums, other.score_sums]), minlength=m
        )
        if self.n_replicates != other.n_replicates:
            raise ValueError(
                f"Tallies with different numbers of bootstrap replicates cannot be merged "
                f"({self.n_replicates} and {other.n_replicates})."
            )
        reps = None
        if self.replicates is not None:
            reps = np.zeros((self.n_replicates, m, self.n_labels))
            reps[:, inv[: self.n_bins]] += self.replicates  # bins of one tally are distinct
            reps[:, inv[self.n_bins :]] += other.replicates
        sq = (
            None
            if self.squared_weight is None or other.squared_weight is None
            else self.squared_weight + other.squared_weight
        )
        return ScoreTally(
            uniq, merged, sums, self.resolution, self.n_rows + other.n_rows, self.labelled,
            reps, sq,
        )

    __add__ = merge

    def __repr__(self) -> str:
        kind = f"{self.n_labels} labels" if self.labelled else "unlabelled"
        return (
            f"ScoreTally({self.n_rows} rows, {self.n_bins} bins, {kind}, "
            f"resolution={plain(self.resolution)!r})"
        )


def _two_column_proba(scores: np.ndarray) -> np.ndarray:
    return np.column_stack([expit(-scores), expit(scores)])


def _tally_block(
    scores: Any,
    y: Any,
    sample_weight: Any,
    n_labels: int,
    resolution: float,
    n_replicates: int = 0,
    seed: Any = None,
) -> ScoreTally:
    """Tally of one in-memory block (validated).

    With ``n_replicates > 0`` it also holds Poisson-bootstrap replicate counts; the Poisson(1)
    draws of the block's rows come from ``numpy.random.default_rng(seed)``, so they depend only
    on ``seed`` (the caller puts the block index into it), not on where the block is tallied.
    """
    s = check_scores(scores, name="scores")
    n = s.shape[0]
    cols_out = n_labels if y is not None else 1
    if n == 0:
        return ScoreTally(
            np.empty(0, np.int64), np.empty((0, cols_out)), np.empty(0), resolution, 0,
            y is not None,
            np.empty((n_replicates, 0, cols_out)) if n_replicates else None,
            0.0,
        )
    if y is not None:
        y_arr = np.asarray(y)
        check_same_length(("scores", s), ("y", y_arr))
        if y_arr.ndim != 1:
            raise ValueError(f"`y` must be 1-d of shape (n,); got shape {y_arr.shape}.")
        if y_arr.dtype.kind == "b":
            y_arr = y_arr.astype(int)
        if y_arr.dtype.kind == "f":
            if np.isnan(y_arr).any() or np.any(y_arr != np.round(y_arr)):
                raise ValueError("`y` must hold integer label indices; got non-integer values.")
            y_arr = y_arr.astype(np.int64)
        if y_arr.dtype.kind not in "iu":
            raise ValueError(
                f"`y` must hold integer label indices 0..{n_labels - 1}; got dtype "
                f"{y_arr.dtype}."
            )
        if y_arr.min() < 0 or y_arr.max() >= n_labels:
            raise ValueError(
                f"`y` must hold label indices in 0..{n_labels - 1}; got values from "
                f"{y_arr.min()} to {y_arr.max()}."
            )
    if sample_weight is None:
        w = np.ones(n)
    else:
        w = np.asarray(sample_weight, dtype=float)
        if w.ndim != 1 or w.shape[0] != n:
            raise ValueError(f"`sample_weight` has shape {w.shape} but the data have {n} rows.")
        if not np.all(np.isfinite(w)) or np.any(w < 0):
            raise ValueError("`sample_weight` must be finite and non-negative.")
    scaled = s / resolution
    if np.max(np.abs(scaled)) >= _MAX_INDEX:
        raise ValueError(
            f"`scores` reach {np.max(np.abs(s)):.3g}, too far out for bins of width "
            f"{plain(resolution)!r}; use a coarser `resolution`."
        )
    b = np.floor(scaled + 0.5).astype(np.int64)
    lo, hi = int(b.min()), int(b.max())
    span = hi - lo + 1
    if span <= 4 * n + 4096:
        idx = b - lo
        uniq = None
        m = span
    else:
        uniq, idx = np.unique(b, return_inverse=True)
        m = uniq.shape[0]
    labels_of = np.zeros(n, dtype=np.int64) if y is None else y_arr.astype(np.int64)
    cols = n_labels if y is not None else 1
    counts = np.bincount(idx * cols + labels_of, weights=w, minlength=m * cols).reshape(m, cols)
    sums = np.bincount(idx, weights=w * s, minlength=m)
    occupied = counts.sum(axis=1) > 0
    bins = (np.arange(lo, hi + 1, dtype=np.int64) if uniq is None else uniq)[occupied]
    reps = None
    if n_replicates:
        rng = np.random.default_rng(seed)
        cell = idx * cols + labels_of
        reps = np.empty((n_replicates, int(occupied.sum()), cols))
        for b in range(n_replicates):  # one replicate at a time: memory O(n + m), not O(B n)
            wb = w * rng.poisson(1.0, size=n)
            reps[b] = np.bincount(cell, weights=wb, minlength=m * cols).reshape(m, cols)[occupied]
    return ScoreTally(
        bins, counts[occupied], sums[occupied], resolution, n, y is not None, reps,
        float(np.dot(w, w)),
    )


def merge_tallies(tallies: Any) -> ScoreTally:
    """Merge tallies of disjoint rows (pairwise, as a balanced tree of additions).

    Examples
    --------
    >>> from probwrap.scale import merge_tallies, tally_scores
    >>> parts = [tally_scores([0.1, 2.0], [0, 1]), tally_scores([0.1], [1])]
    >>> merge_tallies(parts).counts.tolist()
    [[1.0, 1.0], [0.0, 1.0]]
    """
    items = list(tallies)
    if not items:
        raise ValueError("`tallies` is empty; give at least one ScoreTally.")
    while len(items) > 1:
        items = [
            items[i].merge(items[i + 1]) if i + 1 < len(items) else items[i]
            for i in range(0, len(items), 2)
        ]
    return items[0]


def _combine(a: Any, b: Any) -> Any:
    """Sum of two partial results of a reduction over row blocks: tallies merge, tuples and lists
    combine entry by entry, everything else (arrays, numbers) adds."""
    if isinstance(a, ScoreTally):
        return a.merge(b)
    if isinstance(a, (tuple, list)):
        return type(a)(_combine(x, y) for x, y in zip(a, b, strict=True))
    return a + b
