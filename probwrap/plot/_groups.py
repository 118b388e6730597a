"""Reliability curves group by group, on one set of axes."""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np

from .._validation import label_column, plain
from ..metrics import expected_calibration_error, reliability_table, smooth_calibration_error
from ..metrics._groups import MIN_EVENTS, MIN_ROWS, check_group_labels
from ..metrics._inputs import count_scale_weights
from ._style import PALETTE, new_axes, style_axes

__all__ = ["GroupReliabilityDisplay"]

#: a colour cycle of our own for the groups (the palette's observed colour first)
_GROUP_COLOURS = ("#0f6e74", "#b8432f", "#6b5b95", "#c08a1e", "#3c7a3b", "#8a4f7d",
                  "#2f5d8a", "#7a6a4f")


class GroupReliabilityDisplay:
    """One reliability curve per group (observed frequency against mean forecast per bin).

    The companion picture of :func:`probwrap.metrics.calibration_by_group`: the same bins as
    :class:`ReliabilityDiagram` (binary, or the top-label form for class probabilities), one
    curve per group on shared axes, each group's calibration error in the legend: for binary
    forecasts the smooth ECE (:func:`probwrap.metrics.smooth_calibration_error`), the number
    ``calibration_by_group`` shows; for class probabilities the binned top-label error over the
    same bins, the number the multiclass report's by-group table shows. Groups not judged by
    ``calibration_by_group``'s rule (fewer than ``min_rows`` rows or ``min_events`` rows of a
    class, weights read as row frequencies; 100 and 10 by default, common practice) are drawn
    dashed and marked "too few rows to judge" rather than left out. With three or more classes
    the curve is judged as the multiclass table judges a group's overall scores: with
    ``min_rows`` rows, whatever rows of each class it holds. More than eight groups
    draw a ``UserWarning`` (since 5 December 2026): the eight colours then repeat, so curves of
    different groups look alike.

    Parameters
    ----------
    tables : dict
        Group label to :class:`probwrap.metrics.ReliabilityTable`, in the order drawn.
    calibration_errors : dict
        Group label to its calibration error (see above).
    effective_rows : dict
        Group label to its number of rows (weighted, as judged).
    min_rows : float
    judged : dict, optional
        Group label to whether it is judged; by default a group is judged when its
        ``effective_rows`` reach ``min_rows``.

    Attributes
    ----------
    ax_ : matplotlib Axes
    figure_ : matplotlib Figure
    lines_ : dict
        Group label to its Line2D.

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> import numpy as np
    >>> from probwrap.datasets import make_parcels
    >>> from probwrap.plot import GroupReliabilityDisplay
    >>> parcels = make_parcels(3000, random_state=0)
    >>> size = np.where(parcels.data[:, 0] < 1.5, "light", "heavier")
    >>> disp = GroupReliabilityDisplay.from_predictions(
    ...     parcels.target, parcels.true_proba[:, 1], size, n_bins=5)
    >>> sorted(disp.lines_)
    ['heavier', 'light']
    """

    def __init__(self, *, tables: dict, calibration_errors: dict, effective_rows: dict,
                 min_rows: float = MIN_ROWS, judged: dict | None = None) -> None:
        self.tables = tables
        self.calibration_errors = calibration_errors
        self.effective_rows = effective_rows
        self.min_rows = min_rows
        self.judged = (judged if judged is not None
                       else {k: v >= min_rows for k, v in effective_rows.items()})

    @classmethod
    def from_predictions(
        cls, y_true: Any, y_prob: Any, groups: Any, *, n_bins: int = 10,
        strategy: str = "uniform", sample_weight: Any = None, labels: Any = None,
        min_rows: float = MIN_ROWS, min_events: float = MIN_EVENTS, ax: Any = None,
    ) -> GroupReliabilityDisplay:
        """Compute each group's reliability table and draw the curves.

        Parameters
        ----------
        y_true : array-like of shape (n,)
            Labels (binary with 1-d ``y_prob``; column indices with 2-d ``y_prob``).
        y_prob : array-like of shape (n,) or (n, k)
            Positive-class probabilities, or class probabilities (top-label form).
        groups : array-like of shape (n,)
            Group label of each row (no missing values).
        n_bins, strategy, sample_weight, labels
            As for :func:`probwrap.metrics.reliability_table`, within each group. Weights are
            row frequencies; weights summing to less than the number of rows are rescaled to
            Kish's effective size, with a ``WeightScaleWarning``, as in
            :func:`probwrap.metrics.calibration_by_group`.
        min_rows, min_events : float, default=100, 10
            Groups with fewer rows, or fewer rows of a class, are drawn dashed and marked
            (``calibration_by_group``'s rule); with three or more classes, groups with fewer
            rows (``min_events`` is not used: the multiclass table's rule for a group's
            overall scores).
        ax : matplotlib Axes, optional

        Returns
        -------
        GroupReliabilityDisplay
        """
        y_arr = label_column(y_true, "y_true")
        p = np.asarray(y_prob, dtype=float)
        n = y_arr.shape[0]
        g = check_group_labels(groups, n)
        if p.shape[0] != n:
            raise ValueError(f"`y_true` has {n} rows but `y_prob` has {p.shape[0]}.")
        if not (isinstance(min_rows, (int, float)) and min_rows >= 0):
            raise ValueError(f"`min_rows` must be a number >= 0; got {plain(min_rows)!r}.")
        if not (isinstance(min_events, (int, float)) and min_events >= 0):
            raise ValueError(f"`min_events` must be a number >= 0; got {plain(min_events)!r}.")
        w = np.ones(n) if sample_weight is None else np.asarray(sample_weight, dtype=float)
        if w.shape != (n,):
            raise ValueError(f"`sample_weight` must have shape ({n},); got shape {w.shape}.")
        w = count_scale_weights(w, "GroupReliabilityDisplay")
        if p.ndim == 1 and labels is None:
            labels = np.unique(y_arr)
            if labels.shape[0] == 1:
                labels = None
        # the classes each group must hold min_events rows of: the two labels (binary), or every
        # class with weight somewhere (class probabilities), as the tables beside it count them
        if p.ndim == 1:
            classes = [] if labels is None else list(np.asarray(labels))
        else:
            classes = list(np.unique(y_arr[w > 0]))
        # three or more classes: the top-label curve is one of the group's overall quantities,
        # judged with min_rows rows whatever its classes (the multiclass report's rule); before,
        # one class short of min_events left it dashed however many rows the group had
        overall_only = p.ndim == 2 and len(classes) > 2
        found, first = np.unique(g, return_index=True)
        tables, errors, eff, judged = {}, {}, {}, {}
        weightless = []
        for label in found[np.argsort(first)]:
            rows = g == label
            key = label.item() if hasattr(label, "item") else label
            ww = w[rows]
            if not np.any(ww > 0):  # e.g. late labels: every outcome of the group still open
                weightless.append(key)
                continue
            kw = {"n_bins": n_bins, "strategy": strategy, "sample_weight": ww}
            if labels is not None:  # 1-d: the two labels; 2-d: the labels of the columns
                kw["labels"] = labels
            tables[key] = reliability_table(y_arr[rows], p[rows], **kw)
            if p.ndim == 1:
                err_kw = {"sample_weight": ww}
                if labels is not None:
                    err_kw["labels"] = labels
                errors[key] = float(smooth_calibration_error(y_arr[rows], p[rows], **err_kw))
            else:
                errors[key] = float(expected_calibration_error(y_arr[rows], p[rows], **kw))
            eff[key] = float(ww.sum())
            sizes = [float(ww[y_arr[rows] == c].sum()) for c in classes]
            judged[key] = bool(eff[key] >= min_rows and (
                overall_only or min(sizes, default=0.0) >= min_events))
        if weightless:
            # until 5 December 2026 one such group stopped the whole picture with an error about
            # all weights being zero
            warnings.warn(
                f"GroupReliabilityDisplay: {len(weightless)} group(s) have weight 0 on every "
                "row (for late labels: every outcome still open) and get no curve: "
                + ", ".join(str(k) for k in weightless[:10])
                + (", ..." if len(weightless) > 10 else "") + ".",
                UserWarning,
                stacklevel=2,
            )
        disp = cls(tables=tables, calibration_errors=errors, effective_rows=eff,
                   min_rows=min_rows, judged=judged)
        return disp.plot(ax=ax)

    def plot(self, ax: Any = None) -> GroupReliabilityDisplay:
        """Draw the curves (on ``ax``, or a new figure)."""
        ax = new_axes(ax, figsize=(5.2, 4.6))
        style_axes(ax)
        ax.plot([0, 1], [0, 1], linestyle=(0, (4, 3)), color=PALETTE["ideal"], linewidth=1.0,
                label="calibrated")
        self.lines_ = {}
        top = False
        if len(self.tables) > len(_GROUP_COLOURS):
            # more curves than colours: groups i and i + 8 would look alike without a word.
            # Where to read the others: calibration_by_group checks binary forecasts only, so
            # for class probabilities the multiclass report's table (before, the warning sent
            # them to calibration_by_group, which refuses class probabilities)
            if any(getattr(t, "top_label", False) for t in self.tables.values()):
                table = ("the by-group table of the multiclass report "
                         "(probwrap.report.write_report(..., groups=...))")
            else:
                table = "probwrap.metrics.calibration_by_group's table"
            warnings.warn(
                f"GroupReliabilityDisplay: {len(self.tables)} groups drawn with "
                f"{len(_GROUP_COLOURS)} colours, so the colours repeat (the curves of the first "
                f"and the {len(_GROUP_COLOURS) + 1}th group look alike) and the legend lists "
                f"{len(self.tables)} entries. Draw at most {len(_GROUP_COLOURS)} groups (e.g. "
                f"the rows of the largest ones) and read the others in {table}.",
                UserWarning,
                stacklevel=3,
            )
        for i, (group, t) in enumerate(self.tables.items()):
            small = not self.judged[group]
            top = top or bool(getattr(t, "top_label", False))
            label = (f"{group} (error {self.calibration_errors[group]:.3f}"
                     + (", too few rows to judge)" if small else ")"))
            (self.lines_[group],) = ax.plot(
                t.mean_predicted, t.observed_frequency, marker="o", markersize=3.5,
                linewidth=1.4, linestyle="--" if small else "-",
                color=_GROUP_COLOURS[i % len(_GROUP_COLOURS)], label=label)
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_xlabel("mean confidence (largest probability)" if top
                      else "mean forecast probability")
        ax.set_ylabel("accuracy of the top class" if top else "observed frequency")
        ax.set_title("Reliability by group", fontsize=9)
        ax.legend(loc="upper left", fontsize=7, frameon=False)
        self.ax_ = ax
        self.figure_ = ax.figure
        return self
