"""Calibration, scores and a decision rule's outcomes, group by group.

The question a reviewer asks of a model that acts on people or things in different groups (depots,
regions, product lines, or groups protected by law): are the probabilities equally trustworthy in
every group, and does the same cutoff treat the groups alike? :func:`calibration_by_group` answers
both in one table, with intervals, the largest gaps between groups first, and the groups too small
to judge marked rather than dropped.
"""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Callable
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._validation import check_target_labels, plain
from ._bootstrap import MAX_DROPPED_SHARE, bootstrap_interval
from ._calibration_tests import smooth_calibration_error
from ._inputs import count_scale_weights, prepare_binary
from ._scores import brier_score, log_loss, log_loss_of_log_odds
from ._slope import (
    calibration_slope_intercept,
    slope_intercept_fit,
    slope_intercept_fit_log_odds,
)

__all__ = ["GroupCheck", "GroupGap", "GroupChecks", "calibration_by_group"]

#: Default smallest group judged: 100 effective rows and 10 effective rows of each class. Common
#: practice (rules of thumb for fitting and validating a logistic model: about 10 events per
#: estimated parameter, and at least 100 events for a precise validation), not a law.
MIN_ROWS = 100
MIN_EVENTS = 10

_GAP_METRICS = (
    "calibration_error", "calibration_intercept", "calibration_slope", "brier", "log_loss",
    "share_acted_on", "false_positive_rate", "false_negative_rate", "mean_cost",
)


@dataclass(frozen=True)
class GroupCheck:
    """Checks for one group (NaN where a quantity cannot be computed, e.g. one class only).

    Attributes
    ----------
    group : object
        The group label.
    weight : float
        Total weight (the row count when unweighted).
    effective_rows, effective_positives, effective_negatives : float
        The group's rows, positives and negatives counted as the function judges them: the sums
        of the weights read as row frequencies (weight 2 counts a row twice, so integer weights
        give the counts of the duplicated rows). Weights summing to less than the number of
        rows of positive weight cannot be frequencies, nor (since 5 December 2026) can unequal
        weights that are not all whole numbers (late-label IPCW or survey weights) or whole
        numbers sharing a factor above 1; these are first rescaled, over all rows together, to
        sum to Kish's effective size ``(sum w)^2 / sum w^2`` (with a ``WeightScaleWarning``;
        docs/weights.md), and equal weights count each row once, so that scaling the weights
        changes no group's verdict. The counts when every weight is 1.
    judged : bool
        Whether the group reaches ``min_rows`` and ``min_events``; groups not judged are listed
        but left out of the gaps.
    observed_rate, mean_forecast : float
        Weighted share of positives, weighted mean forecast.
    calibration_error : float
        Smooth ECE (:func:`smooth_calibration_error`).
    calibration_slope, calibration_intercept : float
        Cox's slope and calibration-in-the-large (:func:`calibration_slope_intercept`).
    brier, log_loss : float
        Mean scores.
    brier_interval, log_loss_interval : tuple of float
        Percentile bootstrap intervals (rows resampled within the group). NaN for a group with
        one class only (its resamples never hold the other class, so the interval cannot cover
        the group's score; a note says so). For a group not ``judged`` the interval is shown
        but not supported: with few events it covers far less than its level (a group of 20
        rows from a population with 3 % events: about 43 % for a 95 % interval).
    share_acted_on, false_positive_rate, false_negative_rate, mean_cost : float
        For the decision rule "act when ``p > cutoff``" (NaN without a cutoff; ``mean_cost`` NaN
        without costs): the weighted share acted on, the share of negatives acted on, the share
        of positives not acted on, and the mean cost per row.
    """

    group: Any
    weight: float
    effective_rows: float
    effective_positives: float
    effective_negatives: float
    judged: bool
    observed_rate: float
    mean_forecast: float
    calibration_error: float
    calibration_slope: float
    calibration_intercept: float
    brier: float
    brier_interval: tuple[float, float]
    log_loss: float
    log_loss_interval: tuple[float, float]
    share_acted_on: float = float("nan")
    false_positive_rate: float = float("nan")
    false_negative_rate: float = float("nan")
    mean_cost: float = float("nan")
    #: with ``cells``: the group's cells, and its cells holding positive / negative rows (the
    #: units the judged rule counts then); None without cells
    cells: tuple[int, int, int] | None = None


def cell_sizes(y: np.ndarray, w: np.ndarray, cells: np.ndarray | None,
               classes: Any = (0.0, 1.0)) -> tuple[int, ...] | None:
    """Cells with positive weight, then those holding positive weight of each class in
    ``classes`` (None without ``cells``): the units a group is judged on when outcomes come as
    counts, since a cell's trials are not independent rows."""
    if cells is None:
        return None
    live = w > 0
    out = [int(np.unique(cells[live]).shape[0])]
    for c in classes:
        out.append(int(np.unique(cells[live & (y == c)]).shape[0]))
    return tuple(out)


@dataclass(frozen=True)
class GroupGap:
    """The spread of one quantity across the judged groups.

    Attributes
    ----------
    metric : str
        Name of a :class:`GroupCheck` field.
    gap : float
        Largest minus smallest value over the judged groups (for the slope: on the log scale,
        ``|log(slope_max / slope_min)|``, since a slope of 0.5 is as far from 1 as 2 is).
    highest, lowest : object
        The groups holding the largest and smallest value.
    interval : tuple of float
        Percentile bootstrap interval of the difference between ``highest`` and ``lowest``
        (on the log scale for the slope), rows resampled within each of the two groups
        independently (a stratified bootstrap); NaN without resamples, and for
        ``calibration_error`` (resampled calibration errors are biased upwards, by amounts that
        differ with the group's size, so their difference has no honest percentile interval).
        An interval that contains 0 means these data do not establish which of the two groups
        is higher.
    """

    metric: str
    gap: float
    highest: Any
    lowest: Any
    interval: tuple[float, float] = (float("nan"), float("nan"))


@dataclass(frozen=True)
class GroupChecks:
    """Outcome of :func:`calibration_by_group`.

    Attributes
    ----------
    groups : list of GroupCheck
        Judged groups first, by calibration error (largest first); then the groups too small to
        judge, by size.
    gaps : list of GroupGap
        The spread of each quantity across the judged groups, largest first. Quantities differ
        in scale, so the order uses each gap divided by ``max(|overall value|, 0.05)`` (the log
        ratio itself for the slope); ``gap`` holds the unscaled difference.
    overall : GroupCheck
        The same checks on all rows together (its ``group`` is ``"all"``).
    cutoff : float or None
    min_rows, min_events : float
    notes : list of str
        Groups too small to judge, then every warning met while computing a group's numbers
        and every number that could not be computed, with the group named (shown in the
        report's "By group" section).
    resampled : {"rows", "cells"}
        What the intervals resampled within each group (``cells``: whole cells).
    """

    groups: list[GroupCheck]
    gaps: list[GroupGap]
    overall: GroupCheck
    cutoff: float | None
    min_rows: float
    min_events: float
    notes: list[str] = field(default_factory=list)
    resampled: str = "rows"

    def to_frame(self):
        """The per-group table as a pandas DataFrame (needs pandas, in the ``cli`` extra)."""
        import pandas as pd

        rows = []
        for g in [*self.groups, self.overall]:
            d = dict(g.__dict__)
            d["brier_low"], d["brier_high"] = d.pop("brier_interval")
            d["log_loss_low"], d["log_loss_high"] = d.pop("log_loss_interval")
            rows.append(d)
        return pd.DataFrame(rows)


def _missing_label(value: Any) -> bool:
    if value is None or type(value).__name__ in ("NAType", "NaTType"):
        return True
    if isinstance(value, (float, np.floating)):
        return bool(value != value)
    if isinstance(value, (np.datetime64, np.timedelta64)):
        return bool(np.isnat(value))
    return False


def cell_labels(cells: Any, n_rows: int) -> np.ndarray:
    """``cells`` (the cell of every row) as codes ``0 .. n_cells - 1``, or a ``ValueError``.

    Examples
    --------
    >>> cell_labels(["b", "a", "b"], 3).tolist()
    [1, 0, 1]
    """
    arr = np.asarray(cells)
    if arr.ndim != 1 or arr.shape[0] != n_rows:
        raise ValueError(f"`cells` must be 1-d with one cell label per row ({n_rows}); got "
                         f"shape {arr.shape}.")
    # (an object array's gaps are None, NaN or NA: pandas 3's text columns hold NaN there)
    if (arr.dtype.kind == "f" and np.any(np.isnan(arr))) or (
            arr.dtype.kind == "O" and any(_missing_label(v) for v in arr.tolist())):
        raise ValueError("`cells` contains missing labels; give every row a cell.")
    try:
        _, codes = np.unique(arr, return_inverse=True)
    except TypeError as exc:
        raise ValueError(f"`cells` must hold sortable labels of one kind ({exc}).") from None
    return np.asarray(codes, dtype=np.intp).ravel()


def check_group_labels(groups: Any, n_rows: int) -> np.ndarray:
    """``groups`` as a 1-d array of one known label per row, or a ``ValueError`` saying what is
    wrong: one check shared by :func:`calibration_by_group`, the display of reliability by group
    and the reports, so they refuse the same labels with the same words.

    Refused: a single value (a column's name such as ``"region"`` instead of its values), a
    shape other than one label per row, missing labels (``None``, NaN, ``pd.NA``, ``NaT``) and
    labels mixing numbers and strings.

    Examples
    --------
    >>> import numpy as np
    >>> check_group_labels(["north", "south", "north"], 3).tolist()
    ['north', 'south', 'north']
    >>> try:
    ...     check_group_labels(np.array(["2024-01-01", "NaT"], dtype="datetime64[D]"), 2)
    ... except ValueError as exc:
    ...     print(str(exc)[:48])
    `groups` contains 1 missing label(s) (None, NaN,
    """
    g = np.asarray(groups)
    if g.ndim == 0:
        raise ValueError(
            f"`groups` must hold one label per row; got the single value {plain(g.item())!r}. "
            "To group by a column of a table, pass the column's values (e.g. "
            f"`frame[{plain(g.item())!r}]`), not its name."
        )
    if g.ndim == 2 and g.shape[1] == 1:
        g = g[:, 0]
    if g.ndim != 1:
        raise ValueError(f"`groups` must be 1-d with one label per row; got shape {g.shape}.")
    if g.shape[0] != n_rows:
        raise ValueError(
            f"`groups` has {g.shape[0]} labels but there are {n_rows} rows; give one label per "
            "row.")
    if g.dtype.kind == "f":
        missing = np.flatnonzero(np.isnan(g))
    elif g.dtype.kind in "mM":
        missing = np.flatnonzero(np.isnat(g))
    elif g.dtype.kind == "O":
        missing = np.flatnonzero([_missing_label(v) for v in g])
    else:
        missing = np.empty(0, dtype=np.intp)
    if missing.size:
        raise ValueError(
            f"`groups` contains {missing.size} missing label(s) (None, NaN, NA or NaT; first at "
            f"row {int(missing[0])}); give every row a group (e.g. 'unknown')."
        )
    check_target_labels(g, "groups", object_numbers=True)  # numbers and strings mixed
    return g


def judged_sizes(w: np.ndarray, y: np.ndarray | None = None) -> tuple[float, ...]:
    """Rows (and, with 0/1 labels ``y``, positives and negatives) of a group as judged: sums of
    weights already on the row-count scale (:func:`count_scale_weights`)."""
    if y is None:
        return (float(w.sum()),)
    return float(w.sum()), float(np.dot(w, y)), float(np.dot(w, 1.0 - y))


def _who(label: Any, overall: bool = False) -> str:
    """How a note names the rows it is about: ``group 'north'``, or ``all rows`` for the
    overall row (before, ``group 'all'``, which a group named "all" also gets)."""
    return "all rows" if overall else f"group {plain(label)!r}"


@contextmanager
def _noted(notes: list[str], who: str):
    """Warnings raised while checking one group go to the result's ``notes`` (once each, with
    the group named) instead of the caller's console, where one line per group and metric would
    bury them; warnings that are not ``UserWarning`` pass through unchanged."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield
    for item in caught:
        if issubclass(item.category, UserWarning):
            msg = f"{who}: {item.message}"
            if msg not in notes:
                notes.append(msg)
        else:
            warnings.warn_explicit(item.message, item.category, item.filename, item.lineno)


def _safe(notes, who, fn, *args, **kwargs) -> float:
    try:
        with _noted(notes, who):
            return float(fn(*args, **kwargs))
    except ValueError as exc:  # e.g. one class only: the value is NaN, and the note says why
        notes.append(f"{who}: {fn.__name__} not computed ({exc})")
        return float("nan")


def _interval(notes, who, metric, y, p, w, n_resamples, level, seed,
              cells=None) -> tuple[float, float]:
    if n_resamples == 0 or np.count_nonzero(w) < 2:
        return (float("nan"), float("nan"))
    kw = {} if cells is None else {"groups": cells}
    try:
        with _noted(notes, who):
            res = bootstrap_interval(metric, y, p, sample_weight=w, n_resamples=n_resamples,
                                     confidence_level=level, random_state=seed, **kw)
    except ValueError as exc:
        notes.append(f"{who}: no interval for {metric.__name__} ({exc})")
        return (float("nan"), float("nan"))
    if not res.interval_reliable:  # many resamples failed, for a reason tied to their values
        notes.append(f"{who}: no interval for {metric.__name__} (it could not "
                     f"be computed in {res.n_failed} of {res.n_resamples} resamples, more than "
                     f"{MAX_DROPPED_SHARE:.0%}, so an interval from the rest would be biased)")
        return (float("nan"), float("nan"))
    return (float(res.confidence_interval.low), float(res.confidence_interval.high))


def _check_one(label, y, p, w, cutoff, matrix, min_rows, min_events, n_resamples, level,
               seed, notes, cells=None, x=None, overall=False) -> GroupCheck:
    """One group's row of the table; ``x``: its forecasts as given log-odds (None: read
    from ``p``), which the slope, intercept and log loss are computed on; ``overall``: the
    row of all rows (its notes say "all rows", not the name of a group)."""
    who = _who(label, overall)
    if not np.any(w > 0):
        # every row of weight 0 (late labels: every outcome still open): nothing to compute,
        # and dividing by the group's weight would only warn about 0 / 0
        notes.append(f"{who}: every row has weight 0 (for late labels: every "
                     "outcome still open), so no number can be computed for it; it is listed, "
                     "not judged.")
        nan = float("nan")
        return GroupCheck(group=label, weight=0.0, effective_rows=0.0, effective_positives=0.0,
                          effective_negatives=0.0, judged=False, observed_rate=nan,
                          mean_forecast=nan, calibration_error=nan, calibration_slope=nan,
                          calibration_intercept=nan, brier=nan, brier_interval=(nan, nan),
                          log_loss=nan, log_loss_interval=(nan, nan),
                          cells=cell_sizes(y, w, cells, (1.0, 0.0)))
    pos = w * y
    neg = w * (1.0 - y)
    eff_rows, eff_pos, eff_neg = judged_sizes(w, y)
    judged = eff_rows >= min_rows and eff_pos >= min_events and eff_neg >= min_events
    units = cell_sizes(y, w, cells, (1.0, 0.0))
    if units is not None:
        # counts: the cells are the independent units, so they must reach the sizes too (two
        # cells of 10,000 trials are two observations of a rate, not 10,000 rows)
        judged = judged and units[0] >= min_rows and min(units[1:]) >= min_events
    total = float(w.sum())
    both = pos.sum() > 0 and neg.sum() > 0

    def slope_parts():
        try:
            with _noted(notes, who):
                if x is None:
                    r = calibration_slope_intercept(y, p, sample_weight=w, labels=[0.0, 1.0])
                else:
                    r = slope_intercept_fit_log_odds(y, x, sample_weight=w, labels=[0.0, 1.0])
                    for note in r.notes:  # forecasts that do not vary or separate the classes
                        notes.append(f"{who}: {note}")
            return r.slope, r.intercept
        except ValueError as exc:
            notes.append(f"{who}: no calibration slope ({exc})")
            return float("nan"), float("nan")

    slope, intercept = slope_parts() if both else (float("nan"), float("nan"))
    if not both:
        # resampling within a one-class group never draws the missing class: its interval only
        # shows how the forecasts of one class vary and cannot cover the group's true score
        missing = "positives" if pos.sum() <= 0 else "negatives"
        notes.append(
            f"{who}: one class only (no {missing} with weight > 0): no "
            "calibration slope or intercept, and no bootstrap interval for the Brier score or "
            "log loss (resamples within the group never hold the missing class)."
        )
        n_resamples = 0
    decision = {}
    if cutoff is not None:
        act = p > cutoff
        decision["share_acted_on"] = float(np.dot(w, act) / total)
        decision["false_positive_rate"] = (float(np.dot(neg, act) / neg.sum()) if neg.sum() > 0
                                           else float("nan"))
        decision["false_negative_rate"] = (float(np.dot(pos, ~act) / pos.sum()) if pos.sum() > 0
                                           else float("nan"))
        if matrix is not None:
            cell = matrix[y.astype(np.intp), act.astype(np.intp)]
            decision["mean_cost"] = float(np.dot(w, cell) / total)
    return GroupCheck(
        group=label,
        weight=total,
        effective_rows=eff_rows,
        effective_positives=eff_pos,
        effective_negatives=eff_neg,
        judged=bool(judged),
        observed_rate=float(pos.sum() / total),
        mean_forecast=float(np.dot(w, p) / total),
        calibration_error=_safe(notes, who, smooth_calibration_error, y, p, sample_weight=w,
                                labels=[0.0, 1.0]),
        calibration_slope=slope,
        calibration_intercept=intercept,
        brier=_safe(notes, who, brier_score, y, p, sample_weight=w, labels=[0.0, 1.0]),
        brier_interval=_interval(notes, who, brier_score, y, p, w, n_resamples, level, seed,
                                 cells),
        log_loss=(_safe(notes, who, log_loss, y, p, sample_weight=w, labels=[0.0, 1.0])
                  if x is None else log_loss_of_log_odds(y, x, sample_weight=w)),
        log_loss_interval=_interval(notes, who, log_loss if x is None else log_loss_of_log_odds,
                                    y, p if x is None else x, w, n_resamples, level, seed,
                                    cells),
        cells=units,
        **decision,
    )


def calibration_by_group(
    y_true: Any,
    y_prob: Any,
    groups: Any,
    *,
    cutoff: float | None = None,
    costs: Any = None,
    sample_weight: Any = None,
    labels: Any = None,
    min_rows: float = MIN_ROWS,
    min_events: float = MIN_EVENTS,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    random_state: int | None = 0,
    cells: Any = None,
    log_odds: Any = None,
) -> GroupChecks:
    """Calibration, scores and the outcomes of a decision rule in every group.

    For each group (and for all rows together) this reports the smooth calibration error, Cox's
    calibration slope and calibration-in-the-large, the Brier score and log loss with percentile
    bootstrap intervals (rows, or whole ``cells``, resampled within the group,
    :func:`bootstrap_interval`), and — for
    the rule "act when ``y_prob > cutoff``" — the share acted on, the false-positive rate (share
    of negatives acted on), the false-negative rate (share of positives missed) and, with
    ``costs``, the mean cost per row. Then the spread of each quantity across the groups, largest
    first.

    A group is *judged* when it holds at least ``min_rows`` rows and ``min_events`` rows of each
    class, counted with the weights as row frequencies (see ``sample_weight``), and, with
    ``cells``, at least ``min_rows`` cells and ``min_events`` cells holding rows of each class
    (``GroupCheck.cells``). Smaller
    groups are still listed with every number that can be computed, flagged ``judged=False``,
    and left out of the gaps: a gap between two tiny groups is mostly noise. The defaults (100
    rows, 10 of each class) are common practice, not a law; a precise check of the slope needs
    far more (hundreds of events).

    Calibration being equal across groups is one notion of fairness among several that cannot
    all hold at once when base rates differ (equal error rates is another); this table shows both
    so the choice is made in the open. Decisions about people need the judgement of those
    accountable for them and may fall under local law.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive).
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    groups : array-like of shape (n,)
        Group label of each row (any hashable values; missing values are not allowed).
    cutoff : float in [0, 1], optional
        The decision rule's cutoff; without it the decision columns are NaN.
    costs : dict or array-like of shape (2, 2), optional
        Cost matrix (rows: true class negative/positive; columns: not acted / acted) or the
        binary shorthand ``{"tp", "fp", "fn", "tn"}``; needs ``cutoff``.
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice, so integer weights judge a group as the
        duplicated rows would. Weights summing to less than the number of rows of positive
        weight cannot be frequencies; they are rescaled to sum to Kish's effective sample size
        ``(sum w)^2 / sum w^2``, with a ``WeightScaleWarning`` (the contract of
        docs/calibration.md, "Weights"), so their scale changes nothing.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.
    min_rows, min_events : float, default=100, 10
        Smallest group size, and smallest number of rows of each class, judged (weighted as
        above).
    n_resamples : int, default=200
        Bootstrap resamples per group for the score intervals; 0 gives no intervals (NaN).
    confidence_level : float, default=0.95
    random_state : int or None, default=0
        Seed of the bootstrap (the same seed in every group).
    cells : array-like of shape (n,), optional
        Cell of every row when outcomes arrive as counts (a success row and a failure row per
        group of trials, :func:`probwrap.aggregated.expand_counts`): the intervals, and those of
        the gaps, then resample whole cells within each group, as the report's other intervals
        do. Resampling the rows breaks each cell into its successes alone or its failures
        alone: on statsmodels' star98 (303 districts in three groups) the rows' Brier-score
        intervals are 2.7-8.6 times as wide as statsmodels' cluster-robust ones, the cells'
        0.90-1.08 times. None: rows, as before, draw for draw. With cells a group is judged
        only when its cells, not only its trials, reach ``min_rows`` and ``min_events``.
    log_odds : array-like of shape (n,), optional
        The same forecasts as log-odds (a ``decision_function``, a score column read with
        ``--scale log-odds``), with ``y_prob`` equal to ``expit(log_odds)``: the calibration
        slope and intercept (and their gaps) are then fitted on them as given, and the log loss
        computed from them exactly, as the report's overall rows are. None: from ``y_prob``,
        whose log-odds are clipped at +-27.6 (``logit(1 - 1e-12)``; a probability is exactly
        0 or 1 beyond about +-36.7).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.metrics import calibration_by_group
    >>> rng = np.random.default_rng(0)
    >>> g = rng.choice(["north", "south", "east"], size=3000, p=[0.5, 0.47, 0.03])
    >>> p = rng.uniform(0.05, 0.6, size=3000)
    >>> y = (rng.uniform(size=3000) < np.where(g == "south", 1.3 * p, p)).astype(int)
    >>> res = calibration_by_group(y, p, g, cutoff=0.3, n_resamples=0)
    >>> [(c.group, c.judged) for c in res.groups]
    [('south', True), ('north', True), ('east', False)]
    >>> res.gaps[0].metric, res.gaps[0].highest
    ('calibration_intercept', 'south')
    """
    shape = np.shape(y_prob)
    if len(shape) == 2 and shape[1] > 2:
        raise ValueError(
            f"`y_prob` has {shape[1]} columns: calibration_by_group checks binary forecasts (one "
            "column, or two). For class probabilities, the multiclass report checks every group "
            "(probwrap.report.write_report(..., groups=...), or `probwrap report "
            "--class-columns ... --group-column ...`), and GroupReliabilityDisplay draws each "
            "group's top-label reliability; for one class against the rest, pass that column."
        )
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    x = None if log_odds is None else _check_log_odds(log_odds, p)
    w = count_scale_weights(w, "calibration_by_group")
    g = check_group_labels(groups, p.shape[0])
    cell_codes = None if cells is None else cell_labels(cells, p.shape[0])
    if cutoff is not None and not (
        isinstance(cutoff, numbers.Real) and not isinstance(cutoff, bool) and 0.0 <= cutoff <= 1.0
    ):
        raise ValueError(f"`cutoff` must be None or a number in [0, 1]; got {plain(cutoff)!r}.")
    matrix = None
    if costs is not None:
        if cutoff is None:
            raise ValueError("`costs` needs `cutoff`: the mean cost is that of the rule p > cutoff.")
        # a DataFrame read by its labels: rows in the order of `labels` (default: the sorted
        # labels of y_true, as the positive class is read)
        from .._validation import costs_by_labels, label_column
        from ..decision import check_cost_matrix

        pair = labels if labels is not None else np.unique(label_column(y_true, "y_true"))
        matrix = check_cost_matrix(costs_by_labels(costs, pair), n_classes=2, n_actions=2)
    for name, value in (("min_rows", min_rows), ("min_events", min_events)):
        if isinstance(value, bool) or not isinstance(value, numbers.Real) or value < 0:
            raise ValueError(f"`{name}` must be a number >= 0; got {plain(value)!r}.")
    if (isinstance(n_resamples, bool) or not isinstance(n_resamples, numbers.Integral)
            or n_resamples < 0 or n_resamples == 1):
        raise ValueError(f"`n_resamples` must be 0 or a whole number >= 2; got {plain(n_resamples)!r}.")
    keys, inverse = np.unique(g, return_inverse=True)
    inverse = inverse.reshape(-1)
    args = (cutoff, matrix, float(min_rows), float(min_events), int(n_resamples),
            float(confidence_level), random_state)
    checks = []
    computed: list[str] = []  # warnings met while computing, by group
    for k, key in enumerate(keys):
        rows = inverse == k
        # dates and durations stay NumPy scalars (their .item() is integer nanoseconds)
        label = key.item() if hasattr(key, "item") and g.dtype.kind not in "mM" else key
        checks.append(_check_one(label, y[rows], p[rows], w[rows], *args, computed,
                                 None if cell_codes is None else cell_codes[rows],
                                 None if x is None else x[rows]))
    overall = _check_one("all", y, p, w, *args, computed, cell_codes, x, overall=True)
    judged = sorted((c for c in checks if c.judged), key=lambda c: -np.nan_to_num(
        c.calibration_error, nan=-1.0))
    small = sorted((c for c in checks if not c.judged), key=lambda c: -c.weight)
    gaps = _gaps(judged, overall)
    if n_resamples and gaps:
        rows_of = {(key.item() if hasattr(key, "item") and g.dtype.kind not in "mM" else key):
                   inverse == k for k, key in enumerate(keys)}
        # the smooth calibration error's gap gets none: resampled errors are biased upwards,
        # by different amounts in groups of different sizes, so a percentile interval of their
        # difference would be off-centre (and each evaluation takes about 30 ms)
        gaps = [gap if gap.metric == "calibration_error" else
                _gap_interval(gap, rows_of, y, p, w, cutoff, matrix, int(n_resamples),
                              float(confidence_level), random_state, computed, cell_codes, x)
                for gap in gaps]
    notes = []
    if small:
        notes.append(
            f"{len(small)} group(s) below {min_rows:g} rows or {min_events:g} of a class "
            + ("(counting cells, and trials) " if cell_codes is not None else "")
            + "are listed but not judged: " + ", ".join(str(c.group) for c in small) + "."
        )
    if any(np.isfinite(c.brier_interval[0]) for c in small):
        notes.append(
            "The bootstrap intervals of the groups not judged are not supported: with few rows "
            "or events a percentile interval covers far less than its level."
        )
    notes.extend(computed)
    return GroupChecks(groups=judged + small, gaps=gaps, overall=overall, cutoff=cutoff,
                       min_rows=float(min_rows), min_events=float(min_events), notes=notes,
                       resampled="rows" if cell_codes is None else "cells")



def _check_log_odds(log_odds: Any, p: np.ndarray) -> np.ndarray:
    """``log_odds`` as 1-d finite floats (a copy), checked to be the log-odds of ``p``."""
    from scipy.special import expit

    try:
        x = np.array(log_odds, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`log_odds` must be numbers (one log-odds per row) ({exc}).") from None
    if x.shape != p.shape or not np.all(np.isfinite(x)):
        raise ValueError(f"`log_odds` must be {p.shape[0]} finite numbers, one per row of "
                         f"`y_prob`; got shape {x.shape}"
                         + ("" if x.shape != p.shape else " with non-finite values") + ".")
    gap = float(np.max(np.abs(expit(x) - p))) if p.size else 0.0
    if gap > 1e-9:
        raise ValueError("`y_prob` must be expit(`log_odds`) (the same forecasts on the two "
                         f"scales); they differ by up to {plain(gap)}.")
    return x


def _metric_of(metric: str, y: np.ndarray, p: np.ndarray, w: np.ndarray, cutoff, matrix,
               x: np.ndarray | None = None) -> float:
    """One gap quantity of one (resampled) group; NaN where it is not defined. ``x``: the
    forecasts as given log-odds (for the slope, intercept and log loss), or None."""
    lab = [0.0, 1.0]
    if metric == "calibration_error":
        return float(smooth_calibration_error(y, p, sample_weight=w, labels=lab))
    if metric in ("calibration_intercept", "calibration_slope"):
        fit = (slope_intercept_fit(y, p, sample_weight=w, labels=lab) if x is None else
               slope_intercept_fit_log_odds(y, x, sample_weight=w, labels=lab))
        if metric == "calibration_intercept":
            return fit.intercept
        return float(np.log(fit.slope)) if fit.slope > 0 else float("nan")
    if metric == "brier":
        return float(brier_score(y, p, sample_weight=w, labels=lab))
    if metric == "log_loss":
        return (float(log_loss(y, p, sample_weight=w, labels=lab)) if x is None else
                log_loss_of_log_odds(y, x, sample_weight=w))
    act = p > cutoff
    pos, neg = w * y, w * (1.0 - y)
    if metric == "share_acted_on":
        return float(np.dot(w, act) / w.sum())
    if metric == "false_positive_rate":
        return float(np.dot(neg, act) / neg.sum()) if neg.sum() > 0 else float("nan")
    if metric == "false_negative_rate":
        return float(np.dot(pos, ~act) / pos.sum()) if pos.sum() > 0 else float("nan")
    cell = matrix[y.astype(np.intp), act.astype(np.intp)]  # mean_cost
    return float(np.dot(w, cell) / w.sum())


def _gap_interval(gap: GroupGap, rows_of: dict, y, p, w, cutoff, matrix, n_resamples: int,
                  level: float, random_state, notes: list[str], cells=None,
                  x=None) -> GroupGap:
    """``gap`` with the percentile interval of ``value(highest) - value(lowest)``, rows
    resampled within each group (counts as weights, as :func:`bootstrap_interval` does)."""
    def value(idx: np.ndarray, ww: np.ndarray) -> float:
        return _metric_of(gap.metric, y[idx], p[idx], ww, cutoff, matrix,
                          None if x is None else x[idx])

    return gap_with_interval(gap, value, rows_of, w, n_resamples, level, random_state, notes,
                             cells=cells)


def gap_with_interval(gap: GroupGap, value: Callable[[np.ndarray, np.ndarray], float],
                      rows_of: dict, w: np.ndarray, n_resamples: int, level: float,
                      random_state, notes: list[str], label: str | None = None,
                      cells: np.ndarray | None = None) -> GroupGap:
    """``gap`` with the percentile interval of ``value(highest) - value(lowest)``.

    A stratified bootstrap: the rows of each of the two groups are resampled independently,
    the draw counts multiplying the weights (as :func:`bootstrap_interval` does), and
    ``value(row_indices, weights)`` evaluated on each. Resamples that give no value are left
    out and counted in ``notes``; with more than 10 % failed (``MAX_DROPPED_SHARE``), no
    interval. With ``cells`` (a cell code per row) whole cells are drawn within each group
    instead of rows.
    """
    from dataclasses import replace

    from sklearn.utils import check_random_state

    rng = check_random_state(random_state)
    name = gap.metric if label is None else label
    parts = [np.flatnonzero(rows_of[c]) for c in (gap.highest, gap.lowest)]
    # each part's rows as positions of its cells (rows: one cell per row, the draw as before)
    cell_of = [None if cells is None else np.unique(cells[idx], return_inverse=True)[1].ravel()
               for idx in parts]
    diffs = np.full(n_resamples, np.nan)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # resamples that cannot give a value are counted below
        for r in range(n_resamples):
            vals = []
            for idx, of in zip(parts, cell_of, strict=True):
                if of is None:
                    counts = np.bincount(rng.randint(0, idx.shape[0], size=idx.shape[0]),
                                         minlength=idx.shape[0])
                else:
                    m = int(of.max()) + 1
                    counts = np.bincount(rng.randint(0, m, size=m), minlength=m)[of]
                try:
                    vals.append(value(idx, w[idx] * counts))
                except (ValueError, np.linalg.LinAlgError):
                    vals.append(float("nan"))
            diffs[r] = vals[0] - vals[1]
    ok = diffs[np.isfinite(diffs)]
    failed = n_resamples - ok.shape[0]
    if ok.shape[0] < 2 or failed > MAX_DROPPED_SHARE * n_resamples:
        notes.append(f"gap in {name}: no interval ({failed} of {n_resamples} resamples "
                     f"gave no value, more than {MAX_DROPPED_SHARE:.0%}, so an interval from "
                     "the rest would be biased).")
        return gap
    if failed:
        notes.append(f"gap in {name}: {failed} of {n_resamples} resamples gave no value "
                     "and were left out of its interval.")
    alpha = 1.0 - level
    lo, hi = np.quantile(ok, [alpha / 2.0, 1.0 - alpha / 2.0])
    return replace(gap, interval=(float(lo), float(hi)))


def _gaps(judged: list[GroupCheck], overall: GroupCheck) -> list[GroupGap]:
    if len(judged) < 2:
        return []
    out = []
    for metric in _GAP_METRICS:
        values = np.array([getattr(c, metric) for c in judged], dtype=float)
        ok = np.isfinite(values)
        if metric == "calibration_slope":
            ok &= values > 0
        if ok.sum() < 2:
            continue
        v = values[ok]
        names = [c.group for c, keep in zip(judged, ok, strict=True) if keep]
        hi, lo = int(np.argmax(v)), int(np.argmin(v))
        if metric == "calibration_slope":
            gap = float(np.log(v[hi] / v[lo]))
            scaled = gap
        else:
            gap = float(v[hi] - v[lo])
            ref = abs(float(getattr(overall, metric)))
            # the intercept and rates can be near 0 overall: scale by a floor of 0.05
            scaled = gap / max(ref, 0.05)
        out.append((scaled, GroupGap(metric=metric, gap=gap, highest=names[hi], lowest=names[lo])))
    out.sort(key=lambda t: -t[0])
    return [gap for _, gap in out]
