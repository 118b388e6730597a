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

import math
import numbers
import warnings
from typing import Any

import numpy as np
from scipy.special import expit

from .._validation import check_same_length, check_scores, plain
from ..calibration._base import weight_unit_of

__all__ = [
    "DEFAULT_RESOLUTION",
    "BinnedFitWarning",
    "ScoreTally",
    "merge_tallies",
    "warn_binned_small_set",
    "warn_weight_unit",
    "weight_unit_of",
]

#: Default bin width on the log-odds scale. Replacing every score by its bin's mean changes the
#: log loss of a fitted Platt, beta or temperature map by far less than 1e-4 at this width (the
#: change is of second order in the width), while a score range of +-30 needs at most 60 001 bins.
DEFAULT_RESOLUTION = 1e-3

# Largest |score / resolution| that still fits comfortably into int64 bin indices.
_MAX_INDEX = 2.0**62

#: A tally of a model's outputs on at most this many rows (the wrappers' Dask and Spark paths)
#: also keeps the rows themselves — the model's output, label index and weight of each row, in
#: block order — as :attr:`ScoreTally.kept_rows`, and the wrappers then fit on those rows exactly
#: as in memory. The fits of the tally's bins are fits to binned data, and the in-memory path's
#: safeguards for small held-out sets need the rows: the tail choice on at most 200 labelled rows
#: (probwrap.shift._calibration.TAIL_CHOICE_MAX_ROWS), the recalibrated anchor of a tuned cutoff,
#: ``method="auto"``'s cross-validation over rows, and counts of rows for weights that sum to
#: less than the rows; a bin of a small tally often holds rows of both classes or of different
#: weights. Equal to the in-memory wrappers' own limit for keeping held-out rows
#: (probwrap._cost_policy_summary.SMALL_HELDOUT_ROWS; a test checks that they agree): a few
#: hundred kilobytes to the client at most.
KEPT_ROWS = 20_000


def kept_rows_limit() -> int:
    """:data:`KEPT_ROWS`, read when called (the driver-side decisions use it, so that a test can
    lower it to exercise the tally path on few rows)."""
    return KEPT_ROWS


class BinnedFitWarning(UserWarning):
    """A wrapper fitted a small Dask or Spark set (at most :data:`KEPT_ROWS` rows) from the
    bins of its score tally instead of from its rows, so the result may differ from the
    in-memory fit of the same rows (see :func:`warn_binned_small_set`)."""


def warn_binned_small_set(owner: str, n_rows: int, resolution: float, reason: str, remedy: str,
                          *, stacklevel: int = 3) -> None:
    """The :class:`BinnedFitWarning` of a set of ``n_rows`` <= :data:`KEPT_ROWS` rows fitted
    from its tally: ``reason`` says why the rows were not used, ``remedy`` how to get the fit
    of the rows."""
    warnings.warn(
        f"{owner}: the {n_rows} held-out rows were fitted from their score tally (bins of "
        f"{resolution:g} on the log-odds scale), not from the rows themselves as a set of at "
        f"most {KEPT_ROWS:,} rows is fitted in memory, because {reason}. Within a bin the rows' "
        "labels and weights are pooled, so the fit can differ from the in-memory fit of the "
        "same rows (isotonic steps move to bin edges, and a tuned cutoff does where it "
        "would split a bin's rows; the small-set "
        "safeguards that need rows, such as method='auto' by cross-validation over rows, do "
        "not apply, and the recalibrated anchor of a tuned cutoff is fitted on the bins' "
        "cases with folds of its own, or not at all for weights that are not whole numbers). "
        f"For the exact fit: {remedy}.",
        BinnedFitWarning,
        stacklevel=stacklevel,
    )

def _exponent(unit: float) -> int:
    return math.frexp(unit)[1] - 1


def warn_weight_unit(unit: float, owner: str, total: float | None, *,
                     name: str = "sample_weight", stacklevel: int = 3) -> None:
    """The :class:`~probwrap.calibration.WeightScaleWarning` of the wrappers' in-memory path
    (``rescale_extreme_weights``) for rows tallied or summed where they live, when their
    weights were divided by ``unit`` (nothing when ``unit`` is 1); ``total`` is the sum of the
    divided weights (None: not stated)."""
    if unit == 1.0:
        return
    from ..calibration._base import WeightScaleWarning

    summed = "" if total is None else f", and as row counts they now sum to {total:.4g}"
    warnings.warn(
        f"{owner}: `{name}` reaches {unit:.3g} or more (below {2 * unit:.3g}); weights this far "
        f"from 1 overflow or underflow the sums of squares the fit needs, so they are divided "
        f"by 2**{_exponent(unit)} (exact; the ratios between rows are unchanged{summed}).",
        WeightScaleWarning,
        stacklevel=stacklevel,
    )


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


#: The wrappers' message for weights that are all zero (as ``check_sample_weight`` says it).
ZERO_WEIGHT = "`sample_weight` is zero for every row; at least one weight must be positive."


def check_block_weights(w: np.ndarray, name: str = "sample_weight") -> None:
    """Refuse NaN, infinite or negative weights of one block of rows, with the messages of
    ``check_sample_weight`` (a block may have only zero weights; the total is checked later)."""
    if not np.all(np.isfinite(w)):
        raise ValueError(f"`{name}` contains NaN or infinite values.")
    if w.size and w.min() < 0:
        raise ValueError(f"`{name}` must be non-negative; got a minimum of {w.min():.6g}.")


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
    rows_by_label : ndarray of int64 of shape (n_labels,), default=None
        Number of tallied rows of each label, whatever their weight (None if unknown).
    weighted_rows_by_label : ndarray of int64 of shape (n_labels,), default=None
        Number of tallied rows of each label with a positive weight (None if unknown).
    weight_factor : int, default=None
        What the rows' weights (as given, before ``weight_unit``) are as numbers: the largest
        whole number dividing every positive weight (1 for unit weights), 0 when no weight is
        positive, -1 when some positive weight is not a whole number (or beyond 2**53); None
        if unknown. The wrappers read it to say when their reading of the weights moves with
        their scale (``PriorShiftWrapper.fit``'s ``WeightScaleWarning``).
    squared_counts : ndarray of shape (m, n_labels), default=None
        Sum of the squared row weights of each label per bin (in the units of ``counts``): with
        ``counts`` they give each cell's Kish's effective rows, which the exact cutoff range
        of unequal weights counts (:func:`probwrap.decision.cutoff_interval`). None if unknown
        (tallies pickled before 4 December 2026).
    weight_unit : float, default=1.0
        The rows' weights were divided by this power of two before they were tallied
        (``counts``, ``score_sums``, ``replicates`` and ``squared_weight`` are in its units): 1.0
        unless the largest weight lies outside about [1e-77, 1e77], whose sums of squares would
        overflow or underflow. Tallies with different units merge exactly (the one with the
        smaller unit is rescaled by a power of two).

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

    #: ``(outputs, label indices or None, weights as given or None)`` of every row, in block
    #: order, when the tally was built from a model's outputs on at most :data:`KEPT_ROWS` rows
    #: (by the wrappers' Dask and Spark paths); None otherwise.
    kept_rows: tuple | None = None

    #: ``(m, 2)``: the smallest and largest model output of the rows of positive weight in each
    #: bin, aligned with ``bins`` (the output the wrappers' binary decisions compare with a
    #: cutoff: the second column of a model's ``predict_proba``), when the tally was built from
    #: a model's two-column outputs (the wrappers' Dask and Spark paths); None otherwise (also for
    #: tallies pickled before 5 December 2026). A tuned cutoff keeps its value where no bin's
    #: rows lie on both sides of it (probwrap._cost_policy_rules._cutoff_at_bin_edge).
    bin_output_range: np.ndarray | None = None

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
        weight_unit: float = 1.0,
        rows_by_label: np.ndarray | None = None,
        weighted_rows_by_label: np.ndarray | None = None,
        weight_factor: int | None = None,
        squared_counts: np.ndarray | None = None,
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
        unit = float(weight_unit)
        if not (unit > 0 and math.isfinite(unit) and math.frexp(unit)[0] == 0.5):
            raise ValueError(f"`weight_unit` must be a power of two; got {plain(weight_unit)!r}.")
        self.weight_unit = unit
        self.rows_by_label = self._row_counts(rows_by_label, "rows_by_label")
        self.weighted_rows_by_label = self._row_counts(
            weighted_rows_by_label, "weighted_rows_by_label"
        )
        self.weight_factor = None if weight_factor is None else int(weight_factor)
        self.squared_counts = (None if squared_counts is None
                               else np.asarray(squared_counts, dtype=float))
        if self.squared_counts is not None and self.squared_counts.shape != self.counts.shape:
            raise ValueError(f"`squared_counts` must have shape {self.counts.shape}; got "
                             f"{self.squared_counts.shape}.")

    def _row_counts(self, values: Any, name: str) -> np.ndarray | None:
        if values is None:
            return None
        out = np.asarray(values, dtype=np.int64)
        if out.shape != (self.n_labels,):
            raise ValueError(f"`{name}` must have shape ({self.n_labels},); got {out.shape}.")
        return out

    def __setstate__(self, state: dict) -> None:
        # tallies pickled before these attributes existed: weights as given, row counts unknown
        state.setdefault("weight_unit", 1.0)
        state.setdefault("rows_by_label", None)
        state.setdefault("weighted_rows_by_label", None)
        state.setdefault("weight_factor", None)
        state.setdefault("squared_counts", None)
        self.__dict__.update(state)

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

    def squared_row_weights(self, positive: int | None = None) -> np.ndarray | None:
        """Sum of the squared weights behind each row of :meth:`to_rows`, shape (r,); None when
        the tally does not carry them (``squared_counts``)."""
        if self.squared_counts is None:
            return None
        counts = self._label_counts(self.counts, positive)
        bin_idx, label = np.nonzero(counts > 0)
        return self._label_counts(self.squared_counts, positive)[bin_idx, label]

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
        if self.n_replicates != other.n_replicates:
            raise ValueError(
                f"Tallies with different numbers of bootstrap replicates cannot be merged "
                f"({self.n_replicates} and {other.n_replicates})."
            )
        # a common unit for the weights: the larger of the two (a tally without weight has none)
        units = [t.weight_unit for t in (self, other) if np.any(t.counts > 0)]
        unit = max(units) if units else 1.0
        a, b = self._in_unit(unit), other._in_unit(unit)
        bins = np.concatenate([a.bins, b.bins])
        uniq, inv = np.unique(bins, return_inverse=True)
        m = uniq.shape[0]
        counts = np.concatenate([a.counts, b.counts])
        merged = np.column_stack(
            [np.bincount(inv, weights=counts[:, j], minlength=m) for j in range(self.n_labels)]
        )
        sums = np.bincount(
            inv, weights=np.concatenate([a.score_sums, b.score_sums]), minlength=m
        )
        reps = None
        if self.replicates is not None:
            reps = np.zeros((self.n_replicates, m, self.n_labels))
            reps[:, inv[: a.n_bins]] += a.replicates  # bins of one tally are distinct
            reps[:, inv[a.n_bins :]] += b.replicates
        sq = (
            None
            if a.squared_weight is None or b.squared_weight is None
            else a.squared_weight + b.squared_weight
        )
        squares = None
        if a.squared_counts is not None and b.squared_counts is not None:
            both = np.concatenate([a.squared_counts, b.squared_counts])
            squares = np.column_stack(
                [np.bincount(inv, weights=both[:, j], minlength=m)
                 for j in range(self.n_labels)])
        out = ScoreTally(
            uniq, merged, sums, self.resolution, self.n_rows + other.n_rows, self.labelled,
            reps, sq, unit, _add_counts(self.rows_by_label, other.rows_by_label),
            _add_counts(self.weighted_rows_by_label, other.weighted_rows_by_label),
            _merge_factor(self.weight_factor, other.weight_factor), squares,
        )
        out.kept_rows = _merge_kept(self, other)
        if a.bin_output_range is not None and b.bin_output_range is not None:
            both = np.concatenate([a.bin_output_range, b.bin_output_range])
            out.bin_output_range = _output_range(both[:, 0], both[:, 1], inv, m)
        return out

    def _in_unit(self, unit: float) -> ScoreTally:
        """This tally with its weights expressed in ``unit`` (a power of two not below its own);
        exact but for weights that underflow, whose bins are dropped (as the rows' weights
        divided by ``unit`` in memory would be 0 or subnormal there)."""
        if unit == self.weight_unit:
            return self
        shift = _exponent(self.weight_unit) - _exponent(unit)
        counts = np.ldexp(self.counts, shift)
        keep = counts.sum(axis=1) > 0
        reps = None if self.replicates is None else np.ldexp(self.replicates, shift)[:, keep]
        sq = None if self.squared_weight is None else float(np.ldexp(self.squared_weight, 2 * shift))
        squares = (None if self.squared_counts is None
                   else np.ldexp(self.squared_counts, 2 * shift)[keep])
        out = ScoreTally(
            self.bins[keep], counts[keep], np.ldexp(self.score_sums, shift)[keep],
            self.resolution, self.n_rows, self.labelled, reps, sq, unit, self.rows_by_label,
            self.weighted_rows_by_label, self.weight_factor, squares,
        )
        if self.bin_output_range is not None:
            out.bin_output_range = self.bin_output_range[keep]
        return out

    __add__ = merge

    def __repr__(self) -> str:
        kind = f"{self.n_labels} labels" if self.labelled else "unlabelled"
        return (
            f"ScoreTally({self.n_rows} rows, {self.n_bins} bins, {kind}, "
            f"resolution={plain(self.resolution)!r})"
        )


def _merge_factor(a: int | None, b: int | None) -> int | None:
    """The ``weight_factor`` of the rows of two tallies (see :class:`ScoreTally`)."""
    if a is None or b is None:
        return None
    if a < 0 or b < 0:
        return -1
    return math.gcd(a, b)


def weight_factor_of(w: np.ndarray) -> int:
    """``ScoreTally.weight_factor`` of the weights ``w`` of a block's rows."""
    from .._validation import shared_factor

    factor = shared_factor(w)
    if factor is not None:
        return int(factor)
    return -1 if np.any(np.asarray(w) > 0) else 0


def _merge_kept(a: ScoreTally, b: ScoreTally) -> tuple | None:
    """The kept rows of ``a`` followed by those of ``b`` (None once they exceed KEPT_ROWS)."""
    ka, kb = a.kept_rows, b.kept_rows
    if ka is None or kb is None or a.n_rows + b.n_rows > KEPT_ROWS:
        return None
    if a.n_rows == 0:
        return kb
    if b.n_rows == 0:
        return ka
    values = np.concatenate([ka[0], kb[0]])
    labels = None if ka[1] is None or kb[1] is None else np.concatenate([ka[1], kb[1]])
    weights = None
    if ka[2] is not None or kb[2] is not None:
        weights = np.concatenate([
            np.ones(a.n_rows) if ka[2] is None else ka[2],
            np.ones(b.n_rows) if kb[2] is None else kb[2],
        ])
    return values, labels, weights


def _output_range(low: np.ndarray, high: np.ndarray, idx: np.ndarray, m: int) -> np.ndarray:
    """``(m, 2)``: the smallest of ``low`` and the largest of ``high`` for each index of
    ``idx`` (``inf``, ``-inf`` where none)."""
    out = np.empty((m, 2))
    out[:, 0], out[:, 1] = np.inf, -np.inf
    np.minimum.at(out[:, 0], idx, low)
    np.maximum.at(out[:, 1], idx, high)
    return out


def _add_counts(a: np.ndarray | None, b: np.ndarray | None) -> np.ndarray | None:
    return None if a is None or b is None else a + b


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
    outputs: Any = None,
    replicate_rows: Any = None,
) -> ScoreTally:
    """Tally of one in-memory block (validated).

    ``outputs``: the model's outputs of the block's rows (from which ``scores`` were computed);
    kept with the labels and weights as ``kept_rows`` when the block has at most
    :data:`KEPT_ROWS` rows.

    With ``n_replicates > 0`` it also holds Poisson-bootstrap replicate counts; the Poisson(1)
    draws of the block's rows come from ``numpy.random.default_rng(seed)``, so they depend only
    on ``seed`` (the caller puts the block index into it), not on where the block is tallied.
    ``replicate_rows`` (int array of shape (n,), codes ``0 .. r - 1``): the entries are
    ``r`` original rows, several entries each (a row scored by several fold models); one
    Poisson(1) draw per original row, shared by its entries (None: one draw per entry).
    """
    # an empty block (an empty Dask partition) gives an empty tally; check_scores refuses it
    s = np.asarray(scores, dtype=float) if len(scores) == 0 else check_scores(scores, name="scores")
    n = s.shape[0]
    cols_out = n_labels if y is not None else 1
    if n == 0:
        empty = ScoreTally(
            np.empty(0, np.int64), np.empty((0, cols_out)), np.empty(0), resolution, 0,
            y is not None,
            np.empty((n_replicates, 0, cols_out)) if n_replicates else None,
            0.0, 1.0, np.zeros(cols_out, np.int64), np.zeros(cols_out, np.int64),
            0 if sample_weight is not None else 1, np.empty((0, cols_out)),
        )
        if outputs is not None:
            empty.kept_rows = (np.asarray(outputs, dtype=float), None, None)
            empty.bin_output_range = np.empty((0, 2))
        return empty
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
        check_block_weights(w)
    factor = 1 if sample_weight is None else weight_factor_of(w)
    # weights far from 1 are tallied divided by a power of two (see ScoreTally.weight_unit)
    unit = 1.0 if sample_weight is None else weight_unit_of(w.max())
    if unit != 1.0:
        w = w / unit
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
    squares = (counts if sample_weight is None else np.bincount(
        idx * cols + labels_of, weights=w * w, minlength=m * cols).reshape(m, cols))
    sums = np.bincount(idx, weights=w * s, minlength=m)
    occupied = counts.sum(axis=1) > 0
    bins = (np.arange(lo, hi + 1, dtype=np.int64) if uniq is None else uniq)[occupied]
    reps = None
    if n_replicates:
        rng = np.random.default_rng(seed)
        cell = idx * cols + labels_of
        reps = np.empty((n_replicates, int(occupied.sum()), cols))
        group = None if replicate_rows is None else np.asarray(replicate_rows, dtype=np.int64)
        n_draws = n if group is None else int(group.max()) + 1
        for b in range(n_replicates):  # one replicate at a time: memory O(n + m), not O(B n)
            draw = rng.poisson(1.0, size=n_draws)
            wb = w * (draw if group is None else draw[group])
            reps[b] = np.bincount(cell, weights=wb, minlength=m * cols).reshape(m, cols)[occupied]
    # rows of each label (unit weights: the weighted counts themselves), and those of them with
    # a positive weight (all of them unless some weight is 0)
    if sample_weight is None:
        rows = np.rint(counts.sum(axis=0)).astype(np.int64)
        weighted = rows
    else:
        rows = np.bincount(labels_of, minlength=cols)
        weighted = rows if w.min() > 0 else np.bincount(labels_of[w > 0], minlength=cols)
    out = ScoreTally(
        bins, counts[occupied], sums[occupied], resolution, n, y is not None, reps,
        float(np.dot(w, w)), unit, rows, weighted, factor, squares[occupied],
    )
    if outputs is not None:
        o = np.asarray(outputs, dtype=float)
        if o.ndim == 2 and o.shape == (n, 2):
            # each bin's smallest and largest output of its rows of positive weight
            pos = w > 0
            out.bin_output_range = _output_range(o[pos, 1], o[pos, 1], idx[pos], m)[occupied]
    if outputs is not None and n <= KEPT_ROWS:
        out.kept_rows = (
            np.asarray(outputs, dtype=float),
            None if y is None else y_arr.astype(np.int64),
            None if sample_weight is None else np.asarray(sample_weight, dtype=float),
        )
    return out


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
