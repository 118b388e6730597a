"""Reliability diagram with per-bin intervals or consistency bands and a count histogram."""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np

from .._heldout import rescale_extreme_weights
from .._validation import plain
from ..metrics import expected_calibration_error, reliability_table
from ._common import binary_labels, class_proba, estimator_classes
from ._intervals import bin_counts, consistency_band, wilson_interval
from ._style import PALETTE, new_axes, style_axes

__all__ = ["ReliabilityDiagram"]

_BANDS = ("wilson", "consistency", None)


class ReliabilityDiagram:
    """Observed frequency against mean forecast per bin, with uncertainty and counts.

    Build it with :meth:`from_predictions` or :meth:`from_estimator`; both compute the numbers
    and call :meth:`plot`. The numbers are kept on the object so that they can be read, tested
    or written into a report.

    Parameters
    ----------
    table : probwrap.metrics.ReliabilityTable
        Per-bin summary (only bins with weight).
    band_low, band_high : ndarray of shape (n_used_bins,)
        Lower and upper end of the per-bin uncertainty: a Wilson (1927) interval around the
        observed frequency, or a Bröcker & Smith (2007) consistency band around the forecast.
    band : {"wilson", "consistency"} or None
        Which uncertainty the band holds.
    calibration_error : float
        Expected calibration error of the same bins.
    confidence_level : float
    name : str, optional
        Legend label for the observed curve.
    class_index : int, optional
        For 2-d probabilities drawn one-vs-rest: the column shown. None for the binary and the
        top-label forms.

    Attributes
    ----------
    ax_ : matplotlib Axes
        Axes of the diagram.
    hist_ax_ : matplotlib Axes
        Axes of the count histogram below it.
    figure_ : matplotlib Figure
    line_ : Line2D
        Observed frequency (ydata) against mean forecast (xdata).
    bars_ : BarContainer
        Count (weight) per bin.
    band_artist_ : artist or None
        The interval error bars (Wilson) or the band polygon (consistency).

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> from probwrap.datasets import make_parcels
    >>> from probwrap.plot import ReliabilityDiagram
    >>> parcels = make_parcels(2000, random_state=0)
    >>> disp = ReliabilityDiagram.from_predictions(
    ...     parcels.target, parcels.true_proba[:, 1], n_bins=5)
    >>> bool(disp.band_low[0] <= disp.table.observed_frequency[0] <= disp.band_high[0])
    True

    Three outcomes (intact / dented / broken): the top-label (confidence) diagram of Guo et al.
    (2017), or one class against the rest.

    >>> three = make_parcels(2000, n_outcomes=3, random_state=0)
    >>> top = ReliabilityDiagram.from_predictions(three.target, three.true_proba, n_bins=5)
    >>> top.table.top_label, top.class_index
    (True, None)
    >>> broken = ReliabilityDiagram.from_predictions(
    ...     three.target, three.true_proba, class_index=2, n_bins=5)
    >>> broken.table.top_label, broken.class_index
    (False, 2)
    """

    def __init__(
        self,
        *,
        table: Any,
        band_low: np.ndarray,
        band_high: np.ndarray,
        band: str | None,
        calibration_error: float,
        confidence_level: float = 0.95,
        name: str | None = None,
        class_index: int | None = None,
    ) -> None:
        self.class_index = class_index
        self.table = table
        self.band_low = band_low
        self.band_high = band_high
        self.band = band
        self.calibration_error = calibration_error
        self.confidence_level = confidence_level
        self.name = name

    # -- construction ------------------------------------------------------------------------
    @classmethod
    def from_predictions(
        cls,
        y_true: Any,
        y_prob: Any,
        *,
        n_bins: int = 10,
        strategy: str = "uniform",
        band: str | None = "wilson",
        confidence_level: float = 0.95,
        n_draws: int = 1000,
        sample_weight: Any = None,
        pos_label: Any = None,
        random_state: Any = 0,
        name: str | None = None,
        class_index: int | None = None,
        labels: Any = None,
        ax: Any = None,
    ) -> ReliabilityDiagram:
        """Compute the diagram from labels and probabilities and draw it.

        Parameters
        ----------
        y_true : array-like of shape (n,)
            Binary labels for 1-d ``y_prob``. For 2-d ``y_prob``: column indices ``0..k-1``, or
            the labels named by ``labels``.
        y_prob : array-like of shape (n,) or (n, k)
            Probabilities of the positive class, or class probabilities (rows sum to one). 2-d
            probabilities give the top-label (confidence) diagram of Guo et al. (2017): each row
            is binned by its largest probability and the observed frequency is the accuracy of
            the arg-max class; with ``class_index`` they give the one-vs-rest diagram of that
            column instead.
        n_bins : int, default=10
        strategy : {"uniform", "quantile"}, default="uniform"
            Bin layout, as in :func:`probwrap.metrics.reliability_table`.
        band : {"wilson", "consistency"} or None, default="wilson"
            ``"wilson"``: Wilson score interval of each bin's observed frequency.
            ``"consistency"``: range of the observed frequency that calibrated forecasts would
            produce, simulated from the forecasts themselves (Bröcker & Smith 2007).
        confidence_level : float, default=0.95
        n_draws : int, default=1000
            Simulations for the consistency band.
        sample_weight : array-like of shape (n,), optional
        pos_label : label, optional
            The positive label (default: the larger of the two).
        random_state : int, RandomState or None, default=0
            Seed of the consistency simulation.
        name : str, optional
            Legend label.
        class_index : int, optional
            2-d ``y_prob`` only: draw column ``class_index`` against the indicator of that class
            (one-vs-rest) instead of the top-label diagram.
        labels : array-like of shape (k,), optional
            2-d ``y_prob`` only: the class of each column (default: ``0..k-1``).
        ax : matplotlib Axes, optional
            Where to draw; a new figure otherwise.

        Returns
        -------
        ReliabilityDiagram
        """
        if band not in _BANDS:
            raise ValueError(f"`band` must be one of {_BANDS}; got {plain(band)!r}.")
        y_arr = np.asarray(y_true)
        p = np.asarray(y_prob, dtype=float)
        if sample_weight is not None:
            sample_weight = _diagram_weights(sample_weight, y_arr.shape[0])
        if p.ndim == 2:
            if pos_label is not None:
                raise ValueError(
                    "`pos_label` applies to 1-d `y_prob`; for 2-d probabilities use "
                    "`class_index` (one-vs-rest) or neither (top-label)."
                )
            return cls._from_proba_2d(
                y_arr, p, n_bins=n_bins, strategy=strategy, band=band,
                confidence_level=confidence_level, n_draws=n_draws,
                sample_weight=sample_weight, random_state=random_state, name=name,
                class_index=class_index, labels=labels, ax=ax,
            )
        if class_index is not None or labels is not None:
            raise ValueError(
                "`class_index` and `labels` apply to 2-d `y_prob` (n, k); got 1-d `y_prob`."
            )
        labels = None
        if pos_label is not None:
            others = [v for v in np.unique(y_arr).tolist() if v != pos_label]
            if len(others) > 1:
                raise ValueError(f"`y_true` must hold two classes; got {len(others) + 1}.")
            labels = [others[0] if others else (0 if pos_label != 0 else 1), pos_label]
        table = reliability_table(
            y_arr, p, n_bins=n_bins, strategy=strategy, sample_weight=sample_weight,
            labels=labels,
        )
        if table.top_label:
            raise ValueError("`y_prob` must be 1-d (probabilities of the positive class).")
        ece = expected_calibration_error(
            y_arr, p, n_bins=n_bins, strategy=strategy, sample_weight=sample_weight,
            labels=labels,
        )
        low, high = _bands(table, p, band, sample_weight, confidence_level, n_draws,
                           random_state)
        disp = cls(
            table=table, band_low=low, band_high=high, band=band, calibration_error=ece,
            confidence_level=confidence_level, name=name,
        )
        return disp.plot(ax=ax)

    @classmethod
    def _from_proba_2d(
        cls, y_arr, p, *, n_bins, strategy, band, confidence_level, n_draws, sample_weight,
        random_state, name, class_index, labels, ax,
    ) -> ReliabilityDiagram:
        k = p.shape[1]
        if labels is not None:
            labels = np.asarray(labels)
            if labels.ndim != 1 or labels.shape[0] != k:
                raise ValueError(
                    f"`labels` must name the class of each of the {k} columns of `y_prob`; got "
                    f"shape {labels.shape}."
                )
        if class_index is None:
            table = reliability_table(y_arr, p, n_bins=n_bins, strategy=strategy,
                                      sample_weight=sample_weight, labels=labels)
            values = p.max(axis=1)
        else:
            if not (isinstance(class_index, (int, np.integer)) and 0 <= class_index < k):
                raise ValueError(
                    f"`class_index` must be a column index in [0, {k}); got {plain(class_index)!r}."
                )
            # validates the labels and the probabilities once, for the whole matrix
            reliability_table(y_arr, p, n_bins=1, sample_weight=sample_weight, labels=labels)
            cls_labels = np.arange(k) if labels is None else labels
            indicator = (y_arr == cls_labels[class_index]).astype(float)
            values = p[:, class_index]
            table = reliability_table(indicator, values, n_bins=n_bins, strategy=strategy,
                                      sample_weight=sample_weight, labels=[0.0, 1.0])
        low, high = _bands(table, values, band, sample_weight, confidence_level, n_draws,
                           random_state)
        disp = cls(
            table=table, band_low=low, band_high=high, band=band,
            calibration_error=table.calibration_error, confidence_level=confidence_level,
            name=name, class_index=None if class_index is None else int(class_index),
        )
        return disp.plot(ax=ax)

    @classmethod
    def from_estimator(
        cls, estimator: Any, X: Any, y: Any, *, name: str | None = None, **kwargs: Any
    ) -> ReliabilityDiagram:
        """Compute the diagram from a fitted classifier on labelled rows ``X, y``.

        Binary: the positive class is ``estimator.classes_[1]``. More classes: the top-label
        diagram, or one-vs-rest with ``class_index=``; the columns are ``estimator.classes_``.
        Other keyword arguments are as for :meth:`from_predictions`.
        """
        proba = class_proba(estimator, X)
        if proba.shape[1] > 2:
            # the columns are the model's classes_ in its own order: no warning that they are
            # not sorted (metrics.UnsortedLabelsWarning is for labels a user gives)
            from ..metrics import UnsortedLabelsWarning

            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UnsortedLabelsWarning)
                return cls.from_predictions(
                    y, proba, labels=estimator_classes(estimator),
                    name=name or type(estimator).__name__, **kwargs,
                )
        p = proba[:, 1]
        y01 = binary_labels(y, estimator_classes(estimator))
        return cls.from_predictions(
            y01, p, pos_label=1.0, name=name or type(estimator).__name__, **kwargs
        )

    # -- drawing ---------------------------------------------------------------------------------
    def plot(self, ax: Any = None, *, name: str | None = None) -> ReliabilityDiagram:
        """Draw the diagram (on ``ax``, or a new figure with a histogram panel below).

        When ``ax`` is given, the histogram goes to a twin axis at the bottom of it.
        """
        name = name or self.name or "observed"
        t = self.table
        if ax is None:
            from matplotlib.figure import Figure

            fig = Figure(figsize=(5.2, 5.0), layout="constrained")
            fig.patch.set_facecolor("white")
            ax, hist_ax = fig.subplots(
                2, 1, sharex=True, gridspec_kw={"height_ratios": [3.2, 1.0]}
            )
        else:
            ax = new_axes(ax)
            hist_ax = ax.inset_axes([0.0, -0.42, 1.0, 0.25], sharex=ax)
        style_axes(ax)
        style_axes(hist_ax)
        ax.plot([0, 1], [0, 1], linestyle=(0, (4, 3)), color=PALETTE["ideal"], linewidth=1.0,
                label="calibrated")
        self.band_artist_ = None
        if self.band == "wilson":
            yerr = np.vstack([t.observed_frequency - self.band_low,
                              self.band_high - t.observed_frequency])
            self.band_artist_ = ax.errorbar(
                t.mean_predicted, t.observed_frequency, yerr=yerr, fmt="none",
                ecolor=PALETTE["observed"], elinewidth=1.2, capsize=3,
                label=f"Wilson {self.confidence_level:.0%} interval",
            )
        elif self.band == "consistency":
            self.band_artist_ = ax.fill_between(
                t.mean_predicted, self.band_low, self.band_high, color=PALETTE["band"],
                alpha=0.7, linewidth=0, label=f"{self.confidence_level:.0%} consistency band",
            )
        (self.line_,) = ax.plot(
            t.mean_predicted, t.observed_frequency, marker="o", markersize=4.5,
            color=PALETTE["observed"], linewidth=1.6, label=name,
        )
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        top = bool(getattr(t, "top_label", False))
        ax.set_ylabel("accuracy of the top class" if top else "observed frequency")
        form = (" \u2014 top label" if top else
                "" if self.class_index is None else f" \u2014 class {self.class_index} vs rest")
        ax.set_title(f"Reliability{form} (calibration error {self.calibration_error:.4f})",
                     fontsize=9)
        ax.legend(loc="upper left", fontsize=7, frameon=False)
        centres = (t.lower + t.upper) / 2.0
        widths = np.maximum((t.upper - t.lower) * 0.9, 0.005)
        self.bars_ = hist_ax.bar(centres, t.weight, width=widths, color=PALETTE["counts"],
                                 edgecolor=PALETTE["ink"], linewidth=0.4)
        hist_ax.set_ylabel("rows", fontsize=8)
        hist_ax.set_xlabel("mean confidence (largest probability)" if top
                           else "mean forecast probability")
        self.ax_ = ax
        self.hist_ax_ = hist_ax
        self.figure_ = ax.figure
        return self


def _diagram_weights(sample_weight: Any, n: int) -> np.ndarray:
    """Weights as given, or divided by a power of two (exact, with a warning) when the largest
    lies outside about [1e-77, 1e77], as the wrappers do: beyond that the bins' sums and the
    intervals' squares overflow or underflow. The bins' frequencies do not change; the weights
    the table reports are then the rescaled ones."""
    w = np.asarray(sample_weight, dtype=float)
    if w.shape != (n,):
        raise ValueError(f"`sample_weight` must have shape ({n},); got {w.shape}.")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise ValueError("`sample_weight` must be finite and non-negative.")
    return rescale_extreme_weights(w, "ReliabilityDiagram")


def _bands(table, values, band, sample_weight, confidence_level, n_draws, random_state):
    """Per-bin Wilson interval, consistency band, or NaN (no band)."""
    if band == "wilson":
        n = bin_counts(table.weight, sample_weight)
        return wilson_interval(table.observed_frequency * n, n, confidence_level)
    if band == "consistency":
        # for the top-label form each row's outcome (top class correct) would be a Bernoulli
        # draw with its confidence if calibrated, so the same simulation applies to `values`
        idx = np.searchsorted(table.upper[:-1], values, side="right")
        return consistency_band(
            values, idx, table.weight.shape[0], sample_weight=sample_weight,
            confidence_level=confidence_level, n_draws=n_draws, random_state=random_state,
        )
    nan = np.full(table.weight.shape[0], np.nan)
    return nan, nan.copy()
