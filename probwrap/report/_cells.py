"""What a report's bootstrap resamples: rows, or whole cells of rows (aggregated counts).

Outcomes that arrive as ``k`` of ``n`` are passed as two weighted rows per group (a success row
of weight ``k`` and a failure row of weight ``n - k`` with the same features,
:func:`probwrap.aggregated.expand_counts`) or as a weighted frequency table. Resampling those
rows one by one breaks each group into its successes alone or its failures alone: on
statsmodels' star98 (303 school districts) the row bootstrap's standard error of the pass rate
was 2.07 times statsmodels' group-robust one, the bootstrap of whole districts 0.96 times
(docs/aggregated_outcomes.md). So the report resamples whole cells when

- ``cells`` gives the cell of every labelled row (any labels), or
- ``cells`` is None, a model is given with ``X``, and weighted rows with identical features
  carry different labels: the rule that keeps a group's rows in one fold
  (:func:`probwrap._heldout.feature_cells`, used by the wrappers' folds) — unless those rows
  are a frequency table (:func:`frequency_table_levels`): combinations of a few levels per
  column, each with a count, are covariate patterns of independent cases, not sampled units,
  and clustering on them overstates the error (R's esoph, docs/evidence/prior_shift_log.md "Counts (k of
  n)"). With whole-number counts (at most ``MAX_TABLE_CASES`` cases) such a table is read as
  its cases, the rows repeated by their counts, and the report resamples cases
  (:func:`frequency_cases`; a note says so; since 4 December 2026, before it was read as
  cells).

``cells=False`` keeps the row bootstrap. With scores alone (``y_true``/``y_prob``) the features
are not known; weighted rows with identical forecasts and different labels then only earn a
note that asks for ``cells``, and only when the weights are whole-number counts
(:func:`probwrap._validation.whole_counts`) with at least half of them on such tied forecasts
(:func:`tied_count_share`; since 5 December 2026: before, any unequal weights and one tied pair
of labels raised it, on individual people too), split evenly over the labels in rows as
expanded counts are (:func:`tied_label_row_balance`) or with the labels' weight apart from
their rows (:func:`tied_row_weight_gap`; both since 5 December 2026: before, individual rows with
whole-number weights under a coarse model raised it).

For binary outcomes and weights that are whole numbers (trial counts), the cells' Pearson
dispersion (:func:`probwrap.aggregated.binomial_dispersion`, held-out forecasts: no fitted
parameters) says how much more the cells vary than binomial; well above 1, everything that
reads the weights as independent trials is too sure. The reliability diagram's per-bin Wilson
intervals therefore take the quasi-binomial variance ``phi p (1 - p) / n`` (McCullagh & Nelder
1989, section 4.5: one dispersion ``phi`` for the whole fit): each bin's trial count is divided by
``max(1, phi)`` before its Wilson interval is taken (:func:`bin_intervals`). The shift test and
the prevalence interval read weights as relative and count the labelled rows by Kish's
effective size, ``(sum w)^2 / sum w^2``, neither the trials nor the cells (59.6 rows on star98,
for 303 districts of 267,611 pupils); the overdispersion note says so.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import chi2

from .._heldout import feature_cells
from .._validation import _is_missing, plain, whole_counts

__all__ = ["ResamplingUnit", "resampling_unit", "unit_words", "DISPERSION_NOTE_RATIO",
           "DISPERSION_NOTE_PVALUE", "bin_dispersion", "bin_intervals", "frequency_table_levels",
           "frequency_cases", "FrequencyCases", "MAX_TABLE_CASES", "tied_count_share",
           "TIED_COUNT_SHARE", "tied_label_row_balance", "TIED_ROW_BALANCE",
           "tied_row_weight_gap", "TIED_ROW_WEIGHT_GAP"]

#: the report warns about overdispersion when the cells' Pearson dispersion is above this ratio
#: (common practice reads values near 1 as binomial; 1.5 is our rule of thumb for "well above")
DISPERSION_NOTE_RATIO = 1.5
#: ... and Pearson's chi-square against the binomial (``n_cells`` degrees of freedom) rejects at
#: this level, so that a few small cells do not raise it by chance
DISPERSION_NOTE_PVALUE = 0.01


@dataclass(frozen=True)
class ResamplingUnit:
    """The unit every bootstrap interval of a report resamples.

    Attributes
    ----------
    kind : {"rows", "cells"}
    source : str
        Where the cells came from: ``"given"`` (the ``cells`` argument), ``"features"``
        (weighted rows of ``X`` with identical features and different labels) or ``""`` (rows).
    codes : ndarray of int of shape (n,) or None
        The cell of every labelled row (``0 .. n_cells - 1``); None for rows.
    n_cells : int
        Number of cells (the number of rows for ``kind == "rows"``).
    dispersion : float or None
        Pearson's dispersion of the cells (binary outcomes, whole-number weights), else None.
    dispersion_pvalue : float or None
        Upper tail of chi-square with ``n_cells`` degrees of freedom at ``dispersion * n_cells``.
    dispersion_skipped : str
        Why no dispersion was computed (empty when it was, or for rows).
    """

    kind: str
    source: str = ""
    codes: np.ndarray | None = None
    n_cells: int = 0
    dispersion: float | None = None
    dispersion_pvalue: float | None = None
    dispersion_skipped: str = ""

    @property
    def groups(self) -> np.ndarray | None:
        """What the bootstrap functions take as ``groups=`` (None: rows)."""
        return self.codes


def _given_cells(cells: Any, n: int) -> np.ndarray:
    arr = np.asarray(cells)
    if arr.ndim != 1 or arr.shape[0] != n:
        raise ValueError(f"`cells` must be 1-d with one cell label per labelled row ({n}); got "
                         f"shape {arr.shape}.")
    if arr.dtype.kind == "f" and np.any(np.isnan(arr)):
        raise ValueError("`cells` contains NaN; give every labelled row a cell.")
    if arr.dtype.kind == "O" and any(_is_missing(v) for v in arr.tolist()):
        # (None, NaN or NA: pandas 3's text columns hold NaN where a value is missing)
        raise ValueError("`cells` contains missing labels (None, NaN or NA); give every "
                         "labelled row a cell.")
    try:
        _, codes = np.unique(arr, return_inverse=True)
    except TypeError as exc:
        raise ValueError(f"`cells` must hold sortable labels of one kind ({exc}).") from None
    return np.asarray(codes, dtype=np.intp).ravel()


#: a frequency table is read as its cases (rows repeated by their counts) up to this many cases;
#: beyond, its combinations stay cells (the resamples would hold too many rows)
MAX_TABLE_CASES = 200_000


@dataclass(frozen=True)
class FrequencyCases:
    """A frequency table the report reads as its cases (:func:`frequency_cases`); passed as
    ``cells`` to :func:`resampling_unit` after the rows were repeated."""

    table_rows: int
    patterns: int
    levels: tuple
    cases: float


def frequency_cases(X: Any, y: Any, sample_weight: Any) -> tuple[np.ndarray, FrequencyCases] | None:
    """``(index, info)`` when the weighted labelled rows ``X``, ``y`` are a frequency table of
    whole-number counts (:func:`frequency_table_levels` of the cells the folds' rule finds, and
    one row per combination and label: rows of people with survey weights repeat
    combinations) of at most ``MAX_TABLE_CASES`` cases: ``index`` repeats every row by its count, so the rows it
    takes are the table's cases, each of weight 1. None otherwise.

    The bootstrap of such a table's cells (its combinations) or of its weighted rows draws
    whole combinations of many independent cases: on R's UCBAdmissions (4,526 applicants in
    24 rows) the standard error of the Brier score was 7.4 times (cells) and 15 times (rows)
    that of resampling the applicants.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.report._cells import frequency_cases
    >>> X = np.array([[a, b] for a in range(3) for b in range(2) for _ in range(2)], float)
    >>> y = np.tile([1, 0], 6)
    >>> index, info = frequency_cases(X, y, np.arange(1, 13))
    >>> index.shape[0], info.patterns, info.levels
    (78, 6, (3, 2))
    """
    if sample_weight is None or X is None or y is None:
        return None
    w = np.asarray(sample_weight, dtype=float).ravel()
    if w.ndim != 1 or not np.all(np.isfinite(w)) or np.any(w < 0) or not np.allclose(
            w, np.round(w), rtol=0.0, atol=1e-9):
        return None
    try:
        y_index = np.unique(np.asarray(y), return_inverse=True)[1].ravel()
    except TypeError:
        return None
    if y_index.shape[0] != w.shape[0] or not 0 < w.sum() <= MAX_TABLE_CASES:
        return None
    found = feature_cells(X, w, y_index)
    if found is None:
        return None
    found = np.asarray(found, dtype=np.intp)
    if np.unique(found * (int(y_index.max()) + 1) + y_index).shape[0] < found.shape[0]:
        return None  # a table has one row per combination and label (else: weighted rows)
    levels = frequency_table_levels(X, found)
    if levels is None:
        return None
    counts = np.round(w).astype(np.intp)
    info = FrequencyCases(int(w.shape[0]), int(np.max(found)) + 1, tuple(levels),
                          float(counts.sum()))
    return np.repeat(np.arange(w.shape[0]), counts), info


def frequency_table_levels(X: Any, codes: np.ndarray) -> list[int] | None:
    """The number of levels of every column when the distinct feature rows (one per cell
    ``codes``) are a frequency table, else None.

    A frequency table crosses a few levels per column, so no column tells a sampled unit
    apart: either every column has at most ``sqrt(G)`` levels among the ``G`` distinct rows
    (one-hot columns have two), or the distinct rows fill at least half of the grid of the
    columns' levels (the product of their distinct counts is at most ``2 G``) and every level
    recurs (``G`` at least twice the levels of any column). R's UCBAdmissions (6 departments x
    2 genders, 12 rows) and esoph (6 x 4 x 4 levels, 88 rows) are, coded as levels or one-hot;
    counts of sampled units described by measurements (statsmodels' star98: 303 districts, a
    distinct value of every covariate for nearly every district) are not, nor is a single
    column of distinct values. (All columns of few levels: rows found alike are covariate
    patterns even where they came from sampled units, since units with the same features
    cannot be told apart from them.)

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.report._cells import frequency_table_levels
    >>> X = np.array([[a, b] for a in range(3) for b in range(2) for _ in range(2)], float)
    >>> frequency_table_levels(X, np.repeat(np.arange(6), 2))
    [3, 2]
    >>> frequency_table_levels(np.repeat(np.arange(6.0), 2)[:, None], np.repeat(np.arange(6), 2))
    >>> one_hot = np.repeat(np.eye(5)[np.arange(20) % 5], 2, axis=0)   # 5 levels, one-hot
    >>> frequency_table_levels(np.column_stack([one_hot, np.arange(40) // 10 % 2]),
    ...                        np.repeat(np.arange(20), 2))
    [2, 2, 2, 2, 2, 2]
    """
    codes = np.asarray(codes, dtype=np.intp)
    n_cells = int(codes.max()) + 1 if codes.size else 0
    if n_cells < 4:
        return None
    first = np.full(n_cells, codes.shape[0])
    np.minimum.at(first, codes, np.arange(codes.shape[0]))
    try:
        if hasattr(X, "iloc") and hasattr(X, "columns"):
            distinct = X.iloc[first]
            levels = [int(distinct.iloc[:, j].nunique(dropna=False))
                      for j in range(distinct.shape[1])]
        else:
            distinct = np.asarray(X)[first]
            levels = [int(np.unique(distinct[:, j]).shape[0]) for j in range(distinct.shape[1])]
    except (TypeError, ValueError, IndexError):
        return None
    if not levels:
        return None
    if max(levels) <= np.sqrt(n_cells):
        return levels
    if n_cells < 2 * max(levels):
        return None
    grid = float(np.sum(np.log(np.maximum(levels, 1))))
    return levels if grid <= np.log(2.0 * n_cells) + 1e-12 else None


def _dispersion(codes: np.ndarray, n_cells: int, y01: np.ndarray, p: np.ndarray,
                w: np.ndarray | None) -> tuple[float | None, float | None, str]:
    from ..aggregated import binomial_dispersion

    if w is None:
        return None, None, "the rows carry no weights, so no cell holds counts of trials"
    if not np.allclose(w, np.round(w), rtol=0.0, atol=1e-9):
        return None, None, ("the weights are not whole numbers, so they are not read as counts "
                            "of trials")
    trials = np.bincount(codes, weights=w, minlength=n_cells)
    keep = trials > 0
    k = np.bincount(codes, weights=w * y01, minlength=n_cells)[keep]
    mean_p = np.bincount(codes, weights=w * p, minlength=n_cells)[keep] / trials[keep]
    trials = trials[keep]
    inside = (mean_p > 0.0) & (mean_p < 1.0)
    if np.count_nonzero(inside) < 2:
        return None, None, "fewer than two cells have a forecast strictly between 0 and 1"
    ratio = binomial_dispersion(k[inside], trials[inside], mean_p[inside])
    m = int(np.count_nonzero(inside))
    return ratio, float(chi2.sf(ratio * m, m)), ""


#: With scores alone, the note asking for ``cells`` needs at least this share of the weight on
#: tied forecasts that carry more than one label (:func:`tied_count_share`): half, common
#: practice for "most".
TIED_COUNT_SHARE = 0.5


def tied_count_share(codes: np.ndarray, y_index: np.ndarray, w: np.ndarray | None) -> float:
    """The share of the weight on rows whose forecast ``codes`` group holds more than one label,
    when the weights are a count table (:func:`probwrap._validation.whole_counts`); 0 otherwise.

    Expanded ``k`` of ``n`` counts (:func:`probwrap.aggregated.expand_counts`) put a success row
    and a failure row on every forecast, so nearly all their weight lies on such groups (star98:
    1.0; datasets' UCBAdmissions and Titanic tables: 1.0 and 0.99), and their weights are whole
    numbers. Individual rows whose model repeats some scores (boosting, naive Bayes on coarse
    columns) have a few percent of their weight there (openintro's acs12, 481 people,
    gradient boosting: 0.02), and survey, normalised or scaled weights are no counts at all
    (docs/evidence/small_data_log.md, the section on the report's tied-forecast warning on
    individual rows).

    Examples
    --------
    >>> import numpy as np
    >>> codes, y = np.array([0, 0, 1, 1, 2]), np.array([1, 0, 1, 0, 1])
    >>> float(tied_count_share(codes, y, np.array([3.0, 5.0, 2.0, 7.0, 3.0])))
    0.85
    >>> float(tied_count_share(codes, y, np.array([0.3, 0.5, 0.2, 0.7, 0.3])))  # no counts
    0.0
    """
    if w is None:
        return 0.0
    w = np.asarray(w, dtype=float).ravel()
    if whole_counts(w) is None or float(w.sum()) <= 0.0:
        return 0.0
    codes = np.asarray(codes, dtype=np.intp).ravel()
    y_index = np.asarray(y_index, dtype=np.intp).ravel()
    n_cells = int(codes.max()) + 1
    lo = np.full(n_cells, np.iinfo(np.intp).max)
    hi = np.full(n_cells, -1)
    np.minimum.at(lo, codes, y_index)
    np.maximum.at(hi, codes, y_index)
    mixed = (hi > lo)[codes]
    return float(w[mixed].sum() / w.sum())


#: ... and the rows of each such forecast spread evenly over its labels
#: (:func:`tied_label_row_balance` at least this): counts expanded to a success and a failure
#: row per group give every label of a tied forecast the same number of rows (1.0 on the nine
#: count tables of benchmarks/report_tied_forecast_note.py, coarse nearest-neighbour forecasts
#: that merge many groups included), individual rows as many as the label's share (0.12-0.58
#: where the note used to fire on them). Four fifths, between the two (common practice: a
#: round number in the gap, not fitted); docs/evidence/small_data_log.md, the section on the
#: tied-forecast note under coarse models.
TIED_ROW_BALANCE = 0.8


def tied_label_row_balance(codes: np.ndarray, y_index: np.ndarray,
                           w: np.ndarray | None) -> float:
    """How evenly the rows of tied forecasts that carry more than one label are split among
    those labels: per forecast group, the fewest rows of a label present over the most, averaged
    with the groups' weights; 0 when no group holds two labels.

    :func:`probwrap.aggregated.expand_counts` gives each group one row per label it has (a
    success row of weight ``k``, a failure row of weight ``n - k``) and every forecast, being a
    function of the group's features, falls on both: the labels of a tied forecast have the same
    number of rows however many groups a coarse model merges (1.0). Individual rows give a label
    as many rows as its share of the forecast (a forecast of 0.2 on 50 rows: about 10 against
    40, 0.25), and their weights do not change that.

    Examples
    --------
    >>> import numpy as np
    >>> codes = np.array([0, 0, 1, 1])  # two groups, a success and a failure row each
    >>> float(tied_label_row_balance(codes, np.array([1, 0, 1, 0]), np.array([3.0, 5, 2, 7])))
    1.0
    >>> codes = np.zeros(5, dtype=int)  # one forecast, 1 positive row and 4 negative rows
    >>> float(tied_label_row_balance(codes, np.array([1, 0, 0, 0, 0]), np.ones(5)))
    0.25
    """
    if np.asarray(codes).shape[0] == 0:
        return 0.0
    rows, by_label = _label_rows_and_weight(codes, y_index, w)
    present = rows > 0
    mixed = present.sum(axis=1) >= 2
    if not mixed.any():
        return 0.0
    fewest = np.where(present, rows, np.inf).min(axis=1)
    ratio = np.where(mixed, fewest / np.maximum(rows.max(axis=1), 1.0), 0.0)
    weight = by_label.sum(axis=1)
    total = float(weight[mixed].sum())
    if total <= 0.0:
        return 0.0
    return float(np.sum(weight[mixed] * ratio[mixed]) / total)


#: ... or, where lone rows of groups with no successes (or no failures) unbalance the rows of a
#: coarse forecast, the labels' shares of the rows and of the weight of such forecasts apart by
#: at least this (:func:`tied_row_weight_gap`): a count table's success row carries ``k`` and
#: its failure row ``n - k``, so the weight follows the group's rate while the rows stay one a
#: label; individual rows' weights do not depend on the label. 5-NN forecasts of R's esoph and
#: MASS's snails expanded: row balance 0.59 and 0.71, gap 0.20 and 0.21; the individual rows
#: where the note used to fire: gap 0.013-0.079. Between the two (common practice: a round
#: number in the gap, not fitted); docs/evidence/small_data_log.md, the section on the
#: tied-forecast note under coarse models.
TIED_ROW_WEIGHT_GAP = 0.15


def _label_rows_and_weight(codes: np.ndarray, y_index: np.ndarray, w: np.ndarray | None):
    codes = np.asarray(codes, dtype=np.intp).ravel()
    y_index = np.asarray(y_index, dtype=np.intp).ravel()
    w = np.ones(codes.shape[0]) if w is None else np.asarray(w, dtype=float).ravel()
    n_cells = int(codes.max()) + 1
    n_labels = int(y_index.max()) + 1
    flat = codes * n_labels + y_index
    rows = np.bincount(flat, minlength=n_cells * n_labels).reshape(n_cells, n_labels)
    weight = np.bincount(flat, weights=w, minlength=n_cells * n_labels).reshape(n_cells, n_labels)
    return rows.astype(float), weight


def tied_row_weight_gap(codes: np.ndarray, y_index: np.ndarray, w: np.ndarray | None) -> float:
    """How far the labels' share of the rows lies from their share of the weight, on forecasts
    that carry more than one label: per forecast group the total variation distance between
    the two shares (half the sum of their absolute differences), averaged with the groups'
    weights; 0 when no group holds two labels.

    Expanded counts put one row on each label of a group and the weights ``k`` and ``n - k``
    on them: the weight share is the group's rate, the row share one half. Individual rows'
    weights do not depend on their label, so the two shares differ only by chance.

    Examples
    --------
    >>> import numpy as np
    >>> codes, y = np.array([0, 0, 1, 1]), np.array([1, 0, 1, 0])
    >>> float(tied_row_weight_gap(codes, y, np.array([2.0, 8, 3, 7])))  # rates 0.2 and 0.3
    0.25
    >>> float(tied_row_weight_gap(codes, y, np.ones(4)))
    0.0
    """
    if np.asarray(codes).shape[0] == 0:
        return 0.0
    rows, weight = _label_rows_and_weight(codes, y_index, w)
    mixed = (rows > 0).sum(axis=1) >= 2
    totals = weight.sum(axis=1)
    mixed &= totals > 0
    if not mixed.any():
        return 0.0
    rows, weight, totals = rows[mixed], weight[mixed], totals[mixed]
    gap = 0.5 * np.abs(rows / rows.sum(axis=1, keepdims=True) - weight / totals[:, None]).sum(axis=1)
    return float(np.sum(totals * gap) / totals.sum())


def resampling_unit(cells: Any, *, n: int, y_index: np.ndarray, w: np.ndarray | None,
                    X: Any = None, y01: np.ndarray | None = None, p: np.ndarray | None = None,
                    notes: Any = None) -> ResamplingUnit:
    """The resampling unit of a report (see the module docstring); notes go to ``notes``.

    ``y_index``: class index of every labelled row; ``y01`` and ``p`` (binary only): labels and
    positive-class forecasts, for the dispersion.
    """
    if cells is False:
        return ResamplingUnit("rows", n_cells=n)
    if isinstance(cells, FrequencyCases):
        message = (
            f"the {cells.table_rows} weighted rows are a frequency table ({cells.patterns} "
            f"combinations of the columns' levels, {' x '.join(map(str, cells.levels))}, "
            "with whole-number counts as weights): its combinations are covariate patterns of "
            "independent cases, not sampled units, so the report reads each row as that many "
            f"cases ({cells.cases:.0f}, the rows repeated by their counts) and resamples cases; "
            "if each combination is a sampled unit (a district, a route and week) whose cases "
            "share causes, give `cells` (`--cell-column`)"
        )
        if notes is not None:
            notes.add("cells", "frequency table", "UserWarning", message)
        warnings.warn(f"report, resampling unit: {message}", UserWarning, stacklevel=4)
        return ResamplingUnit("rows", source="cases", n_cells=n)
    source = ""
    codes = None
    if cells is not None:
        if cells is True:
            raise ValueError("`cells` must be the cell of every labelled row, None (found from "
                             "the features of `X` with `model`) or False (rows); got True.")
        codes, source = _given_cells(cells, n), "given"
    elif X is not None:
        found = feature_cells(X, w, y_index)
        if found is not None:
            codes, source = np.asarray(found, dtype=np.intp), "features"
    elif p is not None and notes is not None:
        ties = feature_cells(np.asarray(p, dtype=float).reshape(-1, 1), w, y_index)
        if (ties is not None and tied_count_share(ties, y_index, w) >= TIED_COUNT_SHARE
                and (tied_label_row_balance(ties, y_index, w) >= TIED_ROW_BALANCE
                     or tied_row_weight_gap(ties, y_index, w) >= TIED_ROW_WEIGHT_GAP)):
            shared = int(np.unique(ties).shape[0])
            message = (
                f"weighted rows with identical forecasts carry different labels ({shared} "
                f"forecast values for {n} rows), as counts expanded to a success and a failure "
                "row per group are: if the rows are groups of trials (k of n), pass their group "
                "as `cells` (or `--cell-column`) so that the intervals resample whole groups; "
                "these resample rows, which breaks each group into its successes alone or its "
                "failures alone and gives intervals about twice too wide on statsmodels' star98"
            )
            notes.add("cells", "resampling unit", "UserWarning", message)
            warnings.warn(f"report, resampling unit: {message}", UserWarning, stacklevel=4)
    if codes is None:
        return ResamplingUnit("rows", n_cells=n)
    n_cells = int(codes.max()) + 1
    if n_cells < 2:
        raise ValueError(f"`cells` holds one cell ({plain(cells if cells is not None else 0)!r}"
                         " for every row); a bootstrap needs at least two cells to resample.")
    ratio = pvalue = None
    skipped = "the outcomes are not binary"
    if y01 is not None and p is not None:
        ratio, pvalue, skipped = _dispersion(codes, n_cells, np.asarray(y01, dtype=float), p, w)
    unit = ResamplingUnit("cells", source, codes, n_cells, ratio, pvalue, skipped)
    if (notes is not None and ratio is not None and ratio > DISPERSION_NOTE_RATIO
            and pvalue < DISPERSION_NOTE_PVALUE):
        ww = np.asarray(w, dtype=float)
        trials = float(ww.sum())
        if whole_counts(ww) is not None:
            # a count table: the prior-shift estimate reads its cases (docs/weights.md)
            counted = (f"as {trials:.6g} independent cases (a count table's whole-number "
                       f"weights, for {n_cells} cells), not by cells, so their labelled part is "
                       "too narrow where the cells' cases share causes; pass the cells as "
                       "`cells` to the prior-shift wrapper")
        else:
            kish = trials ** 2 / float(np.dot(ww, ww))
            counted = (f"by Kish's effective size of the weights ({kish:.4g} rows here, for "
                       f"{n_cells} cells of {trials:.6g} trials), not by cells, so their "
                       "labelled part may be too narrow or too wide")
        message = (
            f"the {n_cells} cells vary {ratio:.3g} times as much as binomial counts would "
            f"(Pearson dispersion; chi-square p = {pvalue:.2g}): the intervals here resample "
            "whole cells and carry that, and the reliability diagram's Wilson intervals are "
            "widened by its square root (quasi-binomial); the shift test and the prevalence "
            f"interval count the labelled rows {counted}; compare models on held-out cells"
        )
        notes.add("cells", "overdispersion", "UserWarning", message)
        warnings.warn(f"report, overdispersion: {message}", UserWarning, stacklevel=4)
    return unit


def unit_words(unit: ResamplingUnit | None) -> str:
    """What the intervals resampled, in words for the page (plain text, no markup)."""
    if unit is not None and unit.kind == "rows" and unit.source == "cases":
        return (f"cases resampled with replacement: {unit.n_cells} cases (a frequency table's "
                "rows repeated by their counts)")
    if unit is None or unit.kind == "rows":
        return "rows resampled with replacement"
    how = ("the cells given" if unit.source == "given" else
           "rows with identical features and different labels, weighted: counts of trials")
    words = f"whole cells resampled with replacement: {unit.n_cells} cells ({how})"
    if unit.dispersion is not None:
        words += (f"; the cells vary {unit.dispersion:.3g} times as much as binomial counts "
                  "(Pearson dispersion, 1 for binomial)")
    return words


def unlabelled_cell_units(estimator: Any, q: np.ndarray, unlabelled_cells: Any,
                          name: str = "unlabelled_cells") -> tuple[np.ndarray, int, float]:
    """The unlabelled rows' cells for the report's own estimate: ``(codes, cells, rows)``.

    ``codes`` are the cells as ``0 .. G - 1`` (:func:`probwrap.shift._cells.check_cells`, a
    clear error naming ``name``); ``cells`` the number of cells; ``rows`` the rows' evidence as
    :meth:`~probwrap.shift.PriorEstimator.estimate` weighs it with those cells: the rows (no
    weights: Kish's count is the number of rows) divided by the cells' design effect on the
    mean score (:func:`probwrap.shift._cells.cell_design_rows`), the count that
    :func:`~probwrap.shift.prior_by_batch` gives a batch as ``n_effective``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(0.05, 0.95, 400)
    >>> est = PriorEstimator(n_resamples=0).fit(np.column_stack([1 - p, p]),
    ...                                         (rng.uniform(size=400) < p).astype(int))
    >>> q = np.repeat(rng.uniform(0.05, 0.95, 50), 4)     # 50 cells of 4 alike rows
    >>> codes, cells, rows = unlabelled_cell_units(est, np.column_stack([1 - q, q]),
    ...                                            np.repeat(np.arange(50), 4))
    >>> cells, round(rows, 6)
    (50, 50.0)
    """
    from ..shift._cells import cell_design_rows, check_cells
    from ..shift._shift_tests import _score_rows

    codes = check_cells(unlabelled_cells, q.shape[0], name)
    n_cells = int(np.unique(codes).shape[0])
    if n_cells < 2:
        raise ValueError(f"`{name}` holds one cell for every unlabelled row; the unlabelled "
                         "side's variance clustered on cells needs at least two cells.")
    rows = cell_design_rows(_score_rows(estimator.calibrate(q), estimator.source_prior_),
                            np.ones(q.shape[0]), codes, float(q.shape[0]))
    return codes, n_cells, float(rows)


def unlabelled_cells_use(unlabelled_cells: Any, prior_shift: Any, q: Any, X_unlabelled: Any,
                         batch_size: Any) -> Any:
    """Check ``unlabelled_cells`` before the prevalence section reads them; returns the cells to
    pass to ``prior_shift.monitor`` (None otherwise).

    The report's own estimate (``unlabelled_prob``, or ``X_unlabelled`` with ``model``) takes
    them (:func:`unlabelled_cell_units`). A fitted and adapted ``prior_shift`` brings its own
    prevalence, interval and shift test, so the cells are read only for its batches
    (``X_unlabelled`` with ``batch_size``); anywhere else they would change nothing, which is
    refused with a clear error rather than passed over.
    """
    if unlabelled_cells is None:
        return None
    if prior_shift is not None and hasattr(prior_shift, "target_prior_"):
        if X_unlabelled is None or batch_size is None:
            raise ValueError(
                "`unlabelled_cells` with a fitted and adapted `prior_shift`: the prevalence, its "
                "interval and shift test are the wrapper's own, so give the cells to its "
                "`adapt(X, cells=...)`; the report reads `unlabelled_cells` only for the "
                "batches of `X_unlabelled` (with `batch_size`), through `prior_shift.monitor`."
            )
        from sklearn.utils.validation import _num_samples

        from ..shift._cells import check_cells

        check_cells(unlabelled_cells, _num_samples(X_unlabelled), "unlabelled_cells")
        return unlabelled_cells
    if q is None:
        raise ValueError("`unlabelled_cells` gives the cell of every unlabelled row; give the "
                         "rows too (`unlabelled_prob`, or `X_unlabelled` with `model`).")
    return None


def prevalence_unit_words(content: Any) -> str:
    """What the prevalence (class shares) interval and shift test counted as units, in words
    for the page (plain text): the labelled cells, or the labelled rows as independent where
    the report's own bootstrap resampled cells (a ``prior_shift`` fitted without ``cells``);
    and the unlabelled cells (``unlabelled_cells``) with the rows they are worth, or the
    unlabelled rows as independent; empty where both sides counted rows."""
    n = getattr(content, "prevalence_cells", None)
    g = getattr(content, "unlabelled_cells", None)
    if g is not None:
        unlabelled = (f"the {content.n_unlabelled} unlabelled rows' {g} cells are the units of "
                      f"the unlabelled side, worth {content.unlabelled_effective_rows:.4g} "
                      "independent rows (their count over the cells' design effect on the mean "
                      "score).")
    else:
        unlabelled = "the unlabelled rows count as independent rows."
    if n is not None:
        return (f"The interval and the shift test count the labelled rows' {n} cells as the "
                "units of the labelled side (the rows of a cell are not independent), as the "
                f"bootstrap intervals do; {unlabelled}")
    unit = getattr(content, "resampling", None)
    if unit is not None and unit.groups is not None:
        return ("The interval and the shift test come from the given prior-shift wrapper, "
                "fitted without cells: they count the labelled rows as independent, so they "
                "are too narrow if the rows of a cell share causes (pass the cells to its fit).")
    if g is not None:
        return f"The labelled rows count as independent rows; {unlabelled}"
    return ""


def bin_dispersion(unit: ResamplingUnit | None) -> float:
    """What a reliability bin's trial count is divided by: ``max(1, phi)`` for cells.

    ``phi`` is the cells' Pearson dispersion (:attr:`ResamplingUnit.dispersion`): the
    quasi-binomial variance ``phi p (1 - p) / n`` of a proportion (McCullagh & Nelder 1989,
    section 4.5) is the binomial one of ``n / phi`` trials. Below 1 (cells less varied than
    binomial) the binomial count is kept, as common practice does rather than narrowing. Rows,
    cells without whole-number weights and more than two classes give 1: the count as before.

    Examples
    --------
    >>> import numpy as np
    >>> bin_dispersion(ResamplingUnit("rows", n_cells=10))
    1.0
    >>> bin_dispersion(ResamplingUnit("cells", "given", np.arange(3), 3, dispersion=4.0))
    4.0
    >>> bin_dispersion(ResamplingUnit("cells", "given", np.arange(3), 3, dispersion=0.5))
    1.0
    """
    if unit is None or unit.kind != "cells" or unit.dispersion is None:
        return 1.0
    return max(1.0, float(unit.dispersion))


def bin_intervals(observed: Any, counts: Any, dispersion: float,
                  confidence_level: float) -> tuple[np.ndarray, np.ndarray]:
    """Per-bin Wilson (1927) intervals on ``counts / dispersion`` trials (quasi-binomial).

    ``observed``: each bin's observed frequency; ``counts``: its trial count
    (:func:`probwrap.plot._intervals.bin_counts`). ``dispersion == 1`` is the plain Wilson
    interval, bit for bit.

    Examples
    --------
    >>> low, high = bin_intervals([0.3], [40.0], 4.0, 0.95)  # as 3 of 10 trials
    >>> round(float(low[0]), 4), round(float(high[0]), 4)
    (0.1078, 0.6032)
    """
    from ..plot._intervals import wilson_interval

    n = np.asarray(counts, dtype=float)
    freq = np.asarray(observed, dtype=float)
    if dispersion != 1.0:
        n = n / float(dispersion)
    return wilson_interval(freq * n, n, confidence_level)


def reliability_diagram(content: Any) -> Any:
    """The report's reliability diagram (matplotlib), its intervals widened for cells.

    The same :class:`probwrap.plot.ReliabilityDiagram` as before for rows (bit for bit); for
    cells with a Pearson dispersion above 1 the bins' Wilson intervals are those of
    :func:`bin_intervals` and the legend says they were widened.
    """
    from ..plot import ReliabilityDiagram
    from ..plot._intervals import bin_counts

    c = content
    phi = bin_dispersion(getattr(c, "resampling", None))
    binary = np.asarray(c.y_prob).ndim == 1
    extra = {"pos_label": 1.0} if binary else {}
    if phi == 1.0:
        return ReliabilityDiagram.from_predictions(
            c.y_true, c.y_prob, n_bins=c.n_bins, sample_weight=c.sample_weight,
            confidence_level=c.confidence_level, **extra)
    first = ReliabilityDiagram.from_predictions(
        c.y_true, c.y_prob, n_bins=c.n_bins, sample_weight=c.sample_weight,
        confidence_level=c.confidence_level, band=None, **extra)
    table = first.table
    low, high = bin_intervals(table.observed_frequency,
                              bin_counts(table.weight, c.sample_weight), phi,
                              c.confidence_level)
    rel = ReliabilityDiagram(table=table, band_low=low, band_high=high, band="wilson",
                             calibration_error=first.calibration_error,
                             confidence_level=c.confidence_level).plot()
    rel.band_artist_.set_label(f"Wilson {c.confidence_level:.0%} interval, widened for "
                               f"overdispersion (trials / {phi:.3g})")
    rel.ax_.legend(loc="upper left", fontsize=7, frameon=False)
    return rel


def widened_words(content: Any) -> str:
    """The figure caption's words on widened bin intervals ("" when not widened)."""
    phi = bin_dispersion(getattr(content, "resampling", None))
    if phi == 1.0:
        return ""
    return (f" on each bin's trials divided by the cells' Pearson dispersion {phi:.3g} "
            "(quasi-binomial, McCullagh & Nelder 1989)")
