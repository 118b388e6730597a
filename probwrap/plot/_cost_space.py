"""Cost over every cost ratio (cost curve and Brier curve) and the gain chart of a review."""

from __future__ import annotations

from typing import Any

from ..metrics import brier_curve, cost_curve, lift_gain
from ._common import binary_labels, estimator_classes, positive_proba
from ._style import PALETTE, new_axes, style_axes

__all__ = ["CostRangeDisplay", "GainChartDisplay"]


class CostRangeDisplay:
    """Cost when the cost ratio is uncertain: a cost curve and a Brier curve side by side.

    Left: normalised expected cost over probability cost (Drummond & Holte 2006) — the best
    cutoff at each cost, the cutoff the probabilities imply, and the better of acting on all or
    none. Right: the Brier curve (Hernández-Orallo, Flach & Ferri 2011) — the loss of acting
    when ``p > c`` at cost proportion ``c``; its area is the Brier score.

    Parameters
    ----------
    cost : probwrap.metrics.CostCurve
    brier : probwrap.metrics.BrierCurve
    name : str, optional

    Attributes
    ----------
    ax_, brier_ax_ : matplotlib Axes
    figure_ : matplotlib Figure
    lowest_line_, forecast_line_, brier_line_ : Line2D

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.plot import CostRangeDisplay
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(size=400)
    >>> y = (rng.uniform(size=400) < p).astype(int)
    >>> disp = CostRangeDisplay.from_predictions(y, p)
    >>> bool(abs(disp.brier.area - np.mean((p - y) ** 2)) < 1e-9)
    True
    """

    def __init__(self, cost: Any, brier: Any, *, name: str | None = None) -> None:
        self.cost = cost
        self.brier = brier
        self.name = name

    @classmethod
    def from_predictions(
        cls, y_true: Any, y_prob: Any, *, sample_weight: Any = None, labels: Any = None,
        n_points: int = 201, name: str | None = None, ax: Any = None,
    ) -> CostRangeDisplay:
        """Compute both curves (:func:`~probwrap.metrics.cost_curve`,
        :func:`~probwrap.metrics.brier_curve`) and draw them; ``ax`` is a pair of axes."""
        cost = cost_curve(y_true, y_prob, n_points=n_points, sample_weight=sample_weight,
                          labels=labels)
        brier = brier_curve(y_true, y_prob, n_points=n_points, sample_weight=sample_weight,
                            labels=labels)
        return cls(cost, brier, name=name).plot(ax=ax)

    @classmethod
    def from_estimator(cls, estimator: Any, X: Any, y: Any, **kwargs: Any) -> CostRangeDisplay:
        """As :meth:`from_predictions`, with the positive-class column of ``predict_proba``."""
        p = positive_proba(estimator, X)
        return cls.from_predictions(binary_labels(y, estimator_classes(estimator)), p, **kwargs)

    def plot(self, ax: Any = None, *, name: str | None = None) -> CostRangeDisplay:
        """Draw on a pair of axes (or a new figure with two panels)."""
        name = name or self.name or "model"
        if ax is None:
            from matplotlib.figure import Figure

            fig = Figure(figsize=(9.0, 3.8), layout="constrained")
            fig.patch.set_facecolor("white")
            ax, bax = fig.subplots(1, 2)
        else:
            ax, bax = ax
        style_axes(ax)
        style_axes(bax)
        c = self.cost
        ax.plot(c.probability_cost, c.trivial_cost, linestyle=(0, (4, 3)),
                color=PALETTE["treat_none"], linewidth=1.0, label="act on all or none")
        (self.forecast_line_,) = ax.plot(c.probability_cost, c.forecast_cutoff_cost,
                                         color=PALETTE["plugin"], linewidth=1.2,
                                         label=f"{name}: cutoff from its probabilities")
        (self.lowest_line_,) = ax.plot(c.probability_cost, c.lowest_cost,
                                       color=PALETTE["observed"], linewidth=1.6,
                                       label=f"{name}: best cutoff (same rows)")
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 0.5)
        ax.set_xlabel("probability cost  PC = \u03c0 C_FN / (\u03c0 C_FN + (1\u2212\u03c0) C_FP)")
        ax.set_ylabel("normalised expected cost")
        ax.set_title("Cost curve", fontsize=9)
        ax.legend(loc="upper right", fontsize=7, frameon=False)
        b = self.brier
        (self.brier_line_,) = bax.plot(b.cost_proportion, b.loss, color=PALETTE["chosen"],
                                       linewidth=1.6, label=name)
        bax.set_xlim(0, 1)
        bax.set_xlabel("cost proportion  c = C_FP / (C_FP + C_FN),  act when p > c")
        bax.set_ylabel("loss (C_FP + C_FN = 2)")
        bax.set_title(f"Brier curve (area = Brier score {b.area:.4f})", fontsize=9)
        self.ax_ = ax
        self.brier_ax_ = bax
        self.figure_ = ax.figure
        return self


class GainChartDisplay:
    """Share of positives found against the share of rows reviewed, highest forecasts first.

    Parameters
    ----------
    result : probwrap.metrics.LiftGain
    name : str, optional

    Attributes
    ----------
    ax_ : matplotlib Axes
    figure_ : matplotlib Figure
    line_ : Line2D
        Gain (ydata) against depth (xdata), starting at (0, 0).

    Examples
    --------
    >>> from probwrap.plot import GainChartDisplay
    >>> disp = GainChartDisplay.from_predictions([1, 0, 1, 0, 0], [0.9, 0.8, 0.7, 0.2, 0.1])
    >>> float(disp.result.gain[19])  # top 20 %: the 0.9 row, one of the two positives
    0.5
    """

    def __init__(self, result: Any, *, name: str | None = None) -> None:
        self.result = result
        self.name = name

    @classmethod
    def from_predictions(
        cls, y_true: Any, y_prob: Any, *, sample_weight: Any = None, labels: Any = None,
        name: str | None = None, ax: Any = None,
    ) -> GainChartDisplay:
        """Compute :func:`~probwrap.metrics.lift_gain` at depths 1 %, ..., 100 % and draw it."""
        res = lift_gain(y_true, y_prob, sample_weight=sample_weight, labels=labels)
        return cls(res, name=name).plot(ax=ax)

    @classmethod
    def from_estimator(cls, estimator: Any, X: Any, y: Any, **kwargs: Any) -> GainChartDisplay:
        """As :meth:`from_predictions`, with the positive-class column of ``predict_proba``."""
        p = positive_proba(estimator, X)
        return cls.from_predictions(binary_labels(y, estimator_classes(estimator)), p, **kwargs)

    def plot(self, ax: Any = None, *, name: str | None = None) -> GainChartDisplay:
        """Draw the gain chart with the random-review diagonal."""
        import numpy as np

        name = name or self.name or "model"
        ax = style_axes(new_axes(ax, figsize=(4.6, 3.8)))
        r = self.result
        ax.plot([0, 1], [0, 1], linestyle=(0, (4, 3)), color=PALETTE["ideal"], linewidth=1.0,
                label="random review")
        (self.line_,) = ax.plot(np.concatenate(([0.0], r.depth)), np.concatenate(([0.0], r.gain)),
                                color=PALETTE["observed"], linewidth=1.6, label=name)
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1.02)
        ax.set_xlabel("share of rows reviewed (highest forecasts first)")
        ax.set_ylabel("share of positives found")
        ax.set_title("Gain chart", fontsize=9)
        ax.legend(loc="lower right", fontsize=7, frameon=False)
        self.ax_ = ax
        self.figure_ = ax.figure
        return self
