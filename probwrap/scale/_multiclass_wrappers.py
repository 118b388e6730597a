"""CalibrationWrapper and CostPolicyWrapper on multiclass (or costs-by-X) Dask or Spark input.

Temperature scaling by reductions (each evaluation of the loss slope one pass over the blocks),
binary maps fitted one-vs-rest on per-class score tallies from one pass, and the held-out cost
of a fixed cost rule. The model's outputs stay where the rows live (Dask blocks or Spark
partitions, through :mod:`probwrap.scale._rows`); the client holds sums only. (The multiclass prior
shift is in :mod:`probwrap.scale._multiclass`.)
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np

from ._blocks import (
    block_label_index,
    block_weights,
    check_class_rows,
    class_rows,
    predict_block,
)
from ._tally import ZERO_WEIGHT, kept_rows_limit

__all__ = ["fit_multiclass_calibration", "first_block_row_costs", "heldout_cost_dask"]


# -- CalibrationWrapper: temperature by reductions, binary maps one-vs-rest from tallies --------
def _label_index(classes: np.ndarray, yb: Any) -> np.ndarray:
    return block_label_index(classes, yb)


_weights = block_weights


def _wrapper_scores_block(owner, template, Xb, yb, wb):
    y = _label_index(owner.classes_, yb)
    w = _weights(wb, y.shape[0])
    k = owner.classes_.shape[0]
    if y.shape[0] == 0:  # an empty block (partition): kept as None, left out of every sum
        return None
    scores = owner._to_scores(predict_block(owner.estimator_, owner.response_, Xb, k))
    return owner._map_input(template, scores), y, w


class _Smallest:
    """A block result whose "sum" (the reduction over blocks) is the smaller value."""

    def __init__(self, value: float) -> None:
        self.value = value

    def __add__(self, other: _Smallest) -> _Smallest:
        return _Smallest(min(self.value, other.value))


class _SharedFactor:
    """A block result whose "sum" is the greatest common divisor of the blocks' positive
    weights (0: no positive weight; -1: some positive weight is not a whole number), so the
    reduction knows whether the rows carry a count table's weights
    (:func:`probwrap._validation.shared_factor` over all rows)."""

    def __init__(self, value: int) -> None:
        self.value = int(value)

    @classmethod
    def of(cls, w: np.ndarray) -> _SharedFactor:
        from .._validation import shared_factor

        if not np.any(np.asarray(w) > 0):
            return cls(0)
        factor = shared_factor(w)
        return cls(-1 if factor is None else factor)

    def __add__(self, other: _SharedFactor) -> _SharedFactor:
        if self.value < 0 or other.value < 0:
            return _SharedFactor(-1)
        return _SharedFactor(int(np.gcd(self.value, other.value)))


class _ZeroCount:
    """What the exact-zero floor of :meth:`probwrap.CalibrationWrapper._choose_clip` reads
    from the rows of positive weight, added over blocks: their exact-zero probabilities, their
    number, and their weights' largest value, sum and sum of squares (the last two divided by
    that largest value and its square, so tiny or huge weights neither underflow nor overflow),
    for the rows' count on the row-count scale as
    :func:`probwrap.calibration._base.count_weights` reads it."""

    def __init__(self, zeros: int = 0, rows: int = 0, top: float = 0.0, total: float = 0.0,
                 squares: float = 0.0) -> None:
        self.zeros, self.rows = int(zeros), int(rows)
        self.top, self.total, self.squares = float(top), float(total), float(squares)

    @classmethod
    def of(cls, values: np.ndarray, w: np.ndarray) -> _ZeroCount:
        keep = w > 0
        if not keep.any():
            return cls()
        u = w[keep]
        top = float(u.max())
        u = u / top
        return cls(int(np.count_nonzero(values[keep] == 0.0)), int(u.shape[0]), top,
                   float(u.sum()), float(u @ u))

    def __add__(self, other: _ZeroCount) -> _ZeroCount:
        top = max(self.top, other.top)
        if top <= 0:
            return _ZeroCount(self.zeros + other.zeros, self.rows + other.rows)
        a, b = self.top / top, other.top / top
        return _ZeroCount(self.zeros + other.zeros, self.rows + other.rows, top,
                          a * self.total + b * other.total,
                          a * a * self.squares + b * b * other.squares)

    def count_rows(self) -> float:
        """The rows on the row-count scale: the weights' sum when it reaches the number of
        rows, else Kish's (1965) effective size ``(sum w)**2 / sum w**2``."""
        if self.rows == 0:
            return 0.0
        with np.errstate(over="ignore"):
            total = self.top * self.total
        if total >= self.rows:
            return float(total)
        return self.total**2 / self.squares


class _Capped:
    """A block's model outputs, label indices and weights, concatenated in block order by
    ``+`` while the rows number at most KEPT_ROWS (beyond: only the count, the smallest
    positive probability and the exact zeros (:class:`_ZeroCount`) travel on)."""

    def __init__(self, n: int, smallest: float, arrays: tuple | None,
                 zeros: _ZeroCount | None = None) -> None:
        self.n = n
        self.smallest = smallest
        self.arrays = arrays
        self.zeros = _ZeroCount() if zeros is None else zeros

    def __add__(self, other: _Capped) -> _Capped:
        from ._tally import KEPT_ROWS

        n = self.n + other.n
        arrays = None
        if self.arrays is not None and other.arrays is not None and n <= KEPT_ROWS:
            arrays = tuple(np.concatenate([a, b]) for a, b in zip(self.arrays, other.arrays,
                                                                  strict=True))
        return _Capped(n, min(self.smallest, other.smallest), arrays, self.zeros + other.zeros)

    def without_rows_beyond(self, cap: int) -> _Capped:
        """This result without its rows when it holds more than ``cap`` of them."""
        return self if self.n <= cap else _Capped(self.n, self.smallest, None, self.zeros)


def _first_pass_block(owner, Xb, yb, wb):
    """The rows of a block (while few: see :class:`_Capped`), the smallest non-zero
    probability of its rows of positive weight and their exact zeros."""
    from ._tally import KEPT_ROWS

    values = predict_block(owner.estimator_, owner.response_, Xb, owner.classes_.shape[0])
    y = _label_index(owner.classes_, yb)
    w = _weights(wb, values.shape[0])
    v = values[w > 0]
    v = v[v > 0]
    n = values.shape[0]
    return _Capped(n, float(v.min()) if v.size else np.inf,
                   (values, y, w) if n <= KEPT_ROWS else None, _ZeroCount.of(values, w))


def _temperature_terms(block, log_beta, total, counts=None):
    from ..calibration._temperature import _loss_slope

    s, y, w = block
    return np.array([_loss_slope(log_beta, s, y, w / total, counts)])


def _class_weight_terms(block, k):
    _, y, w = block
    return np.bincount(y, weights=w, minlength=k).astype(float)


def _square_terms(block, k):
    """Weighted sum of the squared centred scores, sum of weights and of squared weights, rows
    of positive weight, then the rows of each class, and each class's rows of positive weight."""
    s, y, w = block
    square = np.mean((s - s.mean(axis=1, keepdims=True)) ** 2, axis=1)
    return np.concatenate([[w @ square, w.sum(), w @ w, np.count_nonzero(w)],
                           *class_rows(y, w, k)])


def _ovr_tallies_block(owner, resolution, Xb, yb, wb):
    from ._tally import _tally_block

    y = _label_index(owner.classes_, yb)
    w = _weights(wb, y.shape[0])
    k = owner.classes_.shape[0]
    if y.shape[0] == 0:  # an empty block (partition)
        ovr = np.empty((0, k))
    else:
        scores = owner._to_scores(predict_block(owner.estimator_, owner.response_, Xb, k))
        ovr = owner._one_vs_rest_scores(scores)
    return [
        _tally_block(ovr[:, j], (y == j).astype(int), w, 2, resolution)
        for j in range(ovr.shape[1])
    ]


def fit_multiclass_calibration(owner: Any, X: Any, y: Any, sample_weight: Any, template: Any):
    """Fit ``owner.calibrator_`` (a CalibrationWrapper) from labelled multiclass Dask or Spark
    rows.

    Temperature scaling: the root of the loss slope in ``log(1 / T)`` found by Brent's method
    on the same bracket as in memory, every slope evaluation one reduction over the persisted
    score blocks. Binary maps: one-vs-rest score tallies (one per class, from one pass), each
    map fitted on its tally's weighted rows.
    """
    from scipy.optimize import brentq
    from sklearn.base import clone

    from .._predictions import resolve_response
    from ..calibration._base import WeightScaleWarning, one_vs_rest_copy
    from ..calibration._logodds import DEFAULT_CLIP
    from ..calibration._temperature import (
        _LOG_SPAN,
        TemperatureMap,
        _prior_slope,
        _valid_shrinkage,
    )
    from ._dask import _frozen_multiclass, owner_resolution
    from ._rows import in_weight_unit, rows_of
    from ._tally import warn_weight_unit

    estimator, classes = _frozen_multiclass(owner, y)
    k = classes.shape[0]
    owner.estimator_ = estimator
    owner.classes_ = classes
    owner.response_ = resolve_response(estimator, owner._heldout_response)
    if hasattr(estimator, "n_features_in_"):
        owner.n_features_in_ = estimator.n_features_in_
    if hasattr(estimator, "feature_names_in_"):
        owner.feature_names_in_ = estimator.feature_names_in_
    rows = rows_of(X, y, sample_weight, estimator)
    if owner.clip is None and owner.response_ == "predict_proba":
        # clip_ from the data as in memory (CalibrationWrapper._choose_clip): one pass, which
        # also brings the rows of a small set (at most KEPT_ROWS) to the client
        first = rows.map_reduce(_first_pass_block, owner)
        if first.arrays is not None and 0 < first.n <= kept_rows_limit():
            return _small_set_heldout(owner, estimator, classes, first.arrays,
                                      sample_weight is not None)
        owner.clip_ = owner._clip_from_smallest(first.smallest)
        owner.__dict__.pop("_zero_floor", None)
        if first.smallest < 2.0 * DEFAULT_CLIP and k >= 3 and first.zeros.zeros > 0:
            # as in memory (CalibrationWrapper._choose_clip): exact zeros beside
            # positive probabilities below 2e-12, half the Krichevsky-Trofimov floor of the
            # rows, with the same warning (until 5 December 2026 this path kept 1e-12)
            owner.clip_ = owner._exact_zero_floor(
                owner.clip_, k, first.zeros.zeros, first.zeros.rows, first.zeros.count_rows())
        owner._warn_zero_floor(stacklevel=6)
    else:
        owner.clip_ = owner._choose_clip(np.empty((0, k)), np.empty(0))
        if template is None:
            # method="auto" with `clip` given or decision values: a small set is fitted as in
            # memory from its rows (one pass brings them); a larger one is refused below
            held = _small_set_rows(owner, rows, estimator, classes, sample_weight is not None)
            if held is not None:
                return held
    if template is None:
        raise ValueError(
            "method='auto' is not supported for multiclass Dask input beyond "
            "20,000 rows of a model's predict_proba (it scores candidate maps by "
            "cross-validation over the rows); name the method."
        )
    if isinstance(template, TemperatureMap):
        parts = rows.persist(_wrapper_scores_block, owner, template)
        try:
            # weights beyond about 1e+-77 divided by a power of two, as in memory
            parts, unit = in_weight_unit(parts, sample_weight is not None)
            terms = parts.reduce(_square_terms, k)
            sq, total, total_sq, n_rows = terms[:4]
            if total <= 0:
                raise ValueError(ZERO_WEIGHT)
            rows, weighted = terms[4 : 4 + k], terms[4 + k :]
            check_class_rows(owner, classes, rows, weighted)
            warn_weight_unit(unit, type(owner).__name__, total, stacklevel=6)
            owner._warn_few_class_rows(np.asarray(weighted, dtype=np.int64))
            cal = clone(template)
            cal.classes_ = np.arange(k)
            cal.n_classes_ = k
            cal.n_score_columns_ = k
            cal.boundary_ = None
            cal.floor_ = 0.0
            shrinkage = _valid_shrinkage(template.shrinkage)
            # weights on the row-count scale, as TemperatureMap.fit puts them (count_weights):
            # kept when they sum to at least the number of rows of positive weight, else
            # rescaled to Kish's effective sample size; only the counts below use the scale
            count_scale = 1.0
            if (template.smooth_targets or shrinkage > 0) and total < n_rows:
                count_scale = (total / total_sq) if total_sq > 0 else 1.0
                warnings.warn(
                    "TemperatureMap: `sample_weight` sums to less than the number of rows, so "
                    "the weights cannot be row frequencies; they are rescaled to sum to Kish's "
                    f"effective sample size ({total * count_scale:.4g}) for the map's counts.",
                    WeightScaleWarning,
                    stacklevel=3,
                )
            n_eff = total * count_scale
            counts = None
            if template.smooth_targets:
                # smoothed targets need the weighted class counts (see TemperatureMap)
                counts = parts.reduce(_class_weight_terms, k) * count_scale
                cal._set_floor(np.array([n_eff]), k)
            elif shrinkage > 0:
                cal._set_floor(np.array([n_eff]), k, rule="half")
            scale = float(np.sqrt(sq / total))
            if scale == 0.0:
                cal.temperature_ = 1.0
                return cal
            lo, hi = -np.log(scale) - _LOG_SPAN, -np.log(scale) + _LOG_SPAN
            lam = shrinkage / n_eff

            seen: dict = {}  # the ends of the bracket are asked for twice: one pass each

            def slope(log_beta: float) -> float:
                if log_beta not in seen:
                    data = float(parts.reduce(_temperature_terms, log_beta, total, counts)[0])
                    seen[log_beta] = data + _prior_slope(float(np.exp(log_beta)), lam,
                                                         1.0 / scale)[0]
                return seen[log_beta]

            if slope(lo) >= 0 or slope(hi) <= 0:
                log_beta = lo if slope(lo) >= 0 else hi
                cal.boundary_ = (
                    "temperature at the "
                    + ("high end of its search range (flat output)" if log_beta == lo
                       else "low end of its search range (sharpest output)")
                )
                warnings.warn(
                    "TemperatureMap: the best temperature lies at the end of the search range; "
                    "the scores are either unrelated to the labels or separate the classes "
                    "perfectly.",
                    UserWarning,
                    stacklevel=3,
                )
            else:
                log_beta = brentq(slope, lo, hi, xtol=1e-14, rtol=1e-15)
            cal.temperature_ = float(np.exp(-float(log_beta)))
            return cal
        finally:
            parts.release()
    if getattr(template, "supports_multiclass", False):
        raise ValueError(
            f"{type(template).__name__} is not supported for multiclass Dask or Spark input; use "
            "'temperature' or a binary map (fitted one-vs-rest)."
        )
    # one pass: every block tallies each class's one-vs-rest scores; merged class by class
    merged = rows.map_reduce(_ovr_tallies_block, owner, owner_resolution(owner))
    if merged[0].total_weight <= 0:
        raise ValueError(ZERO_WEIGHT)
    if 0 < merged[0].n_rows <= kept_rows_limit():
        # a small set whose first pass did not bring its rows (`clip` given, or decision
        # values: there was none): one more pass, over at most KEPT_ROWS rows, brings them, and
        # the map is the in-memory fit of the rows (before 4 December 2026: fitted
        # from the one-vs-rest tallies with a BinnedFitWarning)
        if owner.clip is not None or owner.response_ != "predict_proba":
            held = _small_set_rows(owner, rows, estimator, classes, sample_weight is not None)
            if held is not None:
                return held
        from ._tally import warn_binned_small_set

        collect = ("collect the rows (frame.toPandas(), or compute() a Dask collection) and "
                   "fit in memory")
        reason, remedy = ("the rows did not reach the client (on Spark: the frame's rows "
                          "changed between passes)", "cache() the frame first, or " + collect)
        warn_binned_small_set(type(owner).__name__, merged[0].n_rows, merged[0].resolution,
                              reason, remedy, stacklevel=6)
    # class j's tally has the rows of class j as its label 1
    weighted = np.array([t.weighted_rows_by_label[1] for t in merged])
    check_class_rows(owner, classes, np.array([t.rows_by_label[1] for t in merged]), weighted)
    owner._warn_few_class_rows(np.asarray(weighted, dtype=np.int64))
    total = merged[0].total_weight
    # every class's tally holds the same rows and weights, so the same weight unit
    warn_weight_unit(merged[0].weight_unit, type(owner).__name__, total, stacklevel=6)
    pos = np.array([tally.label_weight[1] for tally in merged], dtype=float)
    fitted = (pos > 0) & (pos < total)
    maps: list = [None] * k
    class_rows = {}
    for j in np.flatnonzero(fitted):
        class_rows[j] = merged[j].to_rows()
        s, yk, wk = class_rows[j]
        # the same one-vs-rest copy as in memory (CalibrationWrapper._fit_map): the rest's
        # share of the regularisation is divided among its k - 1 classes
        maps[j] = one_vs_rest_copy(template, k).fit(
            owner._map_input(template, s), yk, sample_weight=wk
        )
    if not fitted.all():
        # as in memory (CalibrationWrapper._fill_absent_classes): the model's own probability,
        # a map on the pooled one-vs-rest rows (decision values), or with a single class
        # present and decision values the smoothed share (N_k + 1) / (N + k), the weights on
        # the row-count scale (kept when they sum to at least the number of rows, else Kish's
        # effective size)
        tally = merged[0]
        n_eff = total if total >= tally.n_rows else tally.effective_rows
        if not np.isfinite(n_eff) or n_eff <= 0:
            n_eff = float(tally.n_rows)
        pooled = None
        if fitted.sum() >= 2:
            parts = [class_rows[j] for j in np.flatnonzero(fitted)]
            pooled = tuple(np.concatenate([part[i] for part in parts]) for i in range(3))
        owner._fill_absent_classes(
            template, maps, pos * (n_eff / total), n_eff, pooled, stacklevel=5
        )
    owner.tally_ = list(merged)
    return maps


def _small_set_rows(owner, rows, estimator, classes, weighted):
    """The held-out predictions of a set of at most KEPT_ROWS rows from one pass that brings
    them to the client (:func:`_first_pass_block`), or None for a larger set, or when the
    rows did not arrive."""
    first = rows.map_reduce(_first_pass_block, owner)
    if first.arrays is not None and 0 < first.n <= kept_rows_limit():
        return _small_set_heldout(owner, estimator, classes, first.arrays, weighted)
    return None


def _small_set_heldout(owner, estimator, classes, arrays, weighted):
    """The held-out predictions of a small multiclass set, as the in-memory path makes them for
    a frozen model (the checks of the classes and weights with the in-memory messages)."""
    from .._predictions import HeldOutPredictions
    from ..calibration._base import rescale_extreme_weights

    values, y, w = arrays
    k = classes.shape[0]
    rows, positive = class_rows(y, w, k)
    if float(w.sum()) <= 0:
        raise ValueError(ZERO_WEIGHT)
    check_class_rows(owner, classes, rows, positive)
    if weighted:
        w = rescale_extreme_weights(w, type(owner).__name__, stacklevel=7)
    return HeldOutPredictions(
        values=values, response=owner.response_, classes=classes, y_index=y,
        sample_weight=w if weighted else np.broadcast_to(np.array(1.0), (y.shape[0],)),
        fold=np.full(y.shape[0], -1, dtype=int), n_folds=0, estimator=estimator,
    )


# -- CostPolicyWrapper: held-out cost of a fixed rule -----------------------------------------
class _UnitSums:
    """Weighted sums of a block, the last of them the sum of the weights, with the weights
    divided by a power of two (``unit``, see :func:`probwrap.scale._tally.weight_unit_of`);
    adding two aligns them to the larger unit of the two with weight (exact), so the total is
    that of all weights divided by the unit of the largest weight."""

    def __init__(self, values: np.ndarray, unit: float) -> None:
        self.values = values
        self.unit = unit

    def __add__(self, other: _UnitSums) -> _UnitSums:
        import math

        units = [u.unit for u in (self, other) if u.values[-1] > 0]
        unit = max(units) if units else 1.0
        exp = math.frexp(unit)[1]
        a, b = (np.ldexp(u.values, math.frexp(u.unit)[1] - exp) for u in (self, other))
        return _UnitSums(a + b, unit)


def _cost_block(policy, Xb, yb, wb):
    """Weighted realised cost and total weight of a block (``_UnitSums``), then the rows of
    each class and their rows of positive weight (not weights: added as they are)."""
    from ._tally import weight_unit_of

    k = policy.classes_.shape[0]
    y = _label_index(policy.classes_, yb)
    w = _weights(wb, y.shape[0])
    rows, weighted = class_rows(y, w, k)
    if y.shape[0] == 0:  # an empty block (partition)
        return _UnitSums(np.zeros(2), 1.0), rows, weighted
    proba = predict_block(policy.estimator_, "predict_proba", Xb, k)
    unit = weight_unit_of(w.max())
    w = w / unit if unit != 1.0 else w
    costs = (policy.cost_matrix_ if policy.cost_matrix_ is not None
             else _block_row_costs(policy, Xb, k))
    chosen = policy._decide(proba, costs)
    if costs.ndim == 2:
        realised = costs[y, chosen]
    else:
        realised = costs[np.arange(chosen.shape[0]), y, chosen]
    return _UnitSums(np.array([w @ realised, w.sum()]), unit), rows, weighted


def first_block_row_costs(
    policy: Any, X: Any, k: int, y: Any = None, sample_weight: Any = None
) -> np.ndarray:
    """``costs(X)`` of the first Dask block or first Spark rows (validated), to learn the number
    of actions. (``y`` and ``sample_weight`` tell Spark which columns are not features.)"""
    from ._rows import rows_of

    return rows_of(X, y, sample_weight, policy.estimator).apply_first(
        lambda Xb, n_classes: _block_row_costs(policy, Xb, n_classes), k)


def _block_row_costs(policy: Any, Xb: Any, k: int) -> np.ndarray:
    """``costs(X)`` of one Dask block or Spark batch, validated as in memory
    (:func:`probwrap.decision.check_row_costs` through ``policy._row_costs``, the same
    message), with the block named: the shape it expects counts the block's rows, not all the
    rows, which read as a wrong row count (a Dask array of 569 rows in blocks of 200: "must have
    shape (200, 2, 'n_actions')")."""
    try:
        return policy._row_costs(Xb, k)
    except ValueError as exc:
        if "shape" not in str(exc):  # NaN costs: nothing about the block to add
            raise
        n = Xb.shape[0] if hasattr(Xb, "shape") else len(Xb)
        raise ValueError(
            f"{exc} (`costs` is called on the Dask or Spark rows block by block, here on a "
            f"block of {n} rows: it must return one cost matrix per row of the X it is given.)"
        ) from exc


def heldout_cost_dask(policy: Any, X: Any, y: Any, sample_weight: Any) -> float:
    """Weighted mean realised cost of a fitted policy's actions on labelled Dask or Spark rows
    (``costs(X)`` evaluated block by block where the rows live)."""
    from ._rows import rows_of

    if y is None:
        raise ValueError(f"{type(policy).__name__} requires y to be passed, but the target y is None.")
    from ._tally import warn_weight_unit

    sums, rows, weighted = rows_of(X, y, sample_weight, policy.estimator_).map_reduce(
        _cost_block, policy
    )
    cost, total = sums.values
    if total <= 0:
        raise ValueError(ZERO_WEIGHT)
    check_class_rows(policy, policy.classes_, rows, weighted)
    # weights beyond about 1e+-77 were summed divided by a power of two: the in-memory warning
    warn_weight_unit(sums.unit, type(policy).__name__, total, stacklevel=6)
    return float(cost / total)
