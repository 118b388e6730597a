"""Reliability curves group by group, on one set of axes."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import plain
from ..metrics import expected_calibration_error, reliability_table
from ..metrics._groups import MIN_ROWS
from ._style import PALETTE, new_axes, style_axes

__all__ = ["GroupReliabilityDisplay"]

#: a colour cycle of our own for the groups (the palette's observed colour first)
_GROUP_COLOURS = ("#0f6e74", "#b8432f", "#6b5b95", "#c08a1e", "#3c7a3b", "#8a4f7d",
                  "#2f5d8a", "#7a6a4f")


class GroupReliabilityDisplay:
    """One reliability curve per group (observed frequency against mean forecast per bin).

    The companion picture of :func:`probwrap.metrics.calibration_by_group`: the same bins as
    :class:`ReliabilityDiagram` (binary, or the top-label form for class probabilities), one
    curve per group on shared axes, each group's calibration error in the legend. Groups whose
    effective size is below ``min_rows`` (Kish's ``(sum w)^2 / sum w^2``; 100 by default, common
    practice) are drawn dashed and marked "too few rows to judge" rather than left out.

    Parameters
    ----------
    tables : dict
        Group label to :class:`probwrap.metrics.ReliabilityTable`, in the order drawn.
    calibration_errors : dict
        Group label to its expected calibration error over the same bins.
    effective_rows : dict
        Group label to its effective number of rows.
    min_rows : float

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
                 min_rows: float = MIN_ROWS) -> None:
        self.tables = tables
        self.calibration_errors = calibration_errors
        self.effective_rows = effective_rows
        self.min_rows = min_rows

    @classmethod
    def from_predictions(
        cls, y_true: Any, y_prob: Any, groups: Any, *, n_bins: int = 10,
        strategy: str = "uniform", sample_weight: Any = None, labels: Any = None,
        min_rows: float = MIN_ROWS, ax: Any = None,
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
            As for :func:`probwrap.metrics.reliability_table`, within each group.
        min_rows : float, default=100
            Groups with fewer effective rows are drawn dashed and marked.
        ax : matplotlib Axes, optional

        Returns
        -------
        GroupReliabilityDisplay
        """
        y_arr = np.asarray(y_true)
        p = np.asarray(y_prob, dtype=float)
        g = np.asarray(groups)
        n = y_arr.shape[0]
        if g.ndim != 1 or g.shape[0] != n:
            raise ValueError(f"`groups` must have shape ({n},) (one label per row); got shape "
                             f"{g.shape}.")
        if (g.dtype.kind == "f" and np.isnan(g).any()) or (
                g.dtype == object and any(v is None or v != v for v in g)):
            raise ValueError("`groups` has missing values; give every row a group.")
        if p.shape[0] != n:
            raise ValueError(f"`y_true` has {n} rows but `y_prob` has {p.shape[0]}.")
        if not (isinstance(min_rows, (int, float)) and min_rows >= 0):
            raise ValueError(f"`min_rows` must be a number >= 0; got {plain(min_rows)!r}.")
        w = np.ones(n) if sample_weight is None else np.asarray(sample_weight, dtype=float)
        if p.ndim == 1 and labels is None:
            labels = np.unique(y_arr)
            if labels.shape[0] == 1:
                labels = None
        found, first = np.unique(g, return_index=True)
        tables, errors, eff = {}, {}, {}
        for label in found[np.argsort(first)]:
            rows = g == label
            key = label.item() if hasattr(label, "item") else label
            ww = w[rows]
            kw = {"n_bins": n_bins, "strategy": strategy, "sample_weight": ww}
            if labels is not None:  # 1-d: the two labels; 2-d: the labels of the columns
                kw["labels"] = labels
            tables[key] = reliability_table(y_arr[rows], p[rows], **kw)
            errors[key] = float(expected_calibration_error(y_arr[rows], p[rows], **kw))
            s2 = float(np.sum(ww**2))
            eff[key] = float(ww.sum()) ** 2 / s2 if s2 > 0 else 0.0
        disp = cls(tables=tables, calibration_errors=errors, effective_rows=eff,
                   min_rows=min_rows)
        return disp.plot(ax=ax)

    def plot(self, ax: Any = None) -> GroupReliabilityDisplay:
        """Draw the curves (on ``ax``, or a new figure)."""
        ax = new_axes(ax, figsize=(5.2, 4.6))
        style_axes(ax)
        ax.plot([0, 1], [0, 1], linestyle=(0, (4, 3)), color=PALETTE["ideal"], linewidth=1.0,
                label="calibrated")
        self.lines_ = {}
        top = False
        for i, (group, t) in enumerate(self.tables.items()):
            small = self.effective_rows[group] < self.min_rows
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
