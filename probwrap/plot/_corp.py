"""CORP reliability diagram: the isotonic recalibration curve, its consistency band and scores."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..metrics import corp_reliability
from ._common import binary_labels, estimator_classes, positive_proba
from ._style import PALETTE, style_axes

__all__ = ["IsotonicReliabilityDiagram"]


class IsotonicReliabilityDiagram:
    """CORP reliability diagram (Dimitriadis, Gneiting & Jordan 2021): no bins to choose.

    The curve is the isotonic (PAV) recalibration of the outcomes on the forecasts, drawn as a
    step function over the distinct forecasts; the shaded band, if requested, is where a
    calibrated forecaster's curve would lie; the title carries the CORP decomposition of the
    Brier score (miscalibration, discrimination, uncertainty). A histogram of the forecasts sits
    below.

    Parameters
    ----------
    result : probwrap.metrics.CorpReliability
        The numbers drawn.
    name : str, optional
        Legend label for the curve.

    Attributes
    ----------
    ax_, hist_ax_ : matplotlib Axes
    figure_ : matplotlib Figure
    line_ : Line2D
        Recalibrated probability (ydata) against forecast (xdata), drawn as steps.
    band_artist_ : artist or None

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.plot import IsotonicReliabilityDiagram
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(size=300)
    >>> y = (rng.uniform(size=300) < p**1.5).astype(int)
    >>> disp = IsotonicReliabilityDiagram.from_predictions(y, p, n_resamples=50, random_state=0)
    >>> bool(disp.result.brier.miscalibration > 0)
    True
    """

    def __init__(self, result: Any, *, name: str | None = None) -> None:
        self.result = result
        self.name = name

    @classmethod
    def from_predictions(
        cls,
        y_true: Any,
        y_prob: Any,
        *,
        sample_weight: Any = None,
        labels: Any = None,
        n_resamples: int = 200,
        confidence_level: float = 0.9,
        random_state: Any = None,
        name: str | None = None,
        ax: Any = None,
    ) -> IsotonicReliabilityDiagram:
        """Compute the CORP curve with :func:`probwrap.metrics.corp_reliability` and draw it.

        ``n_resamples=0`` draws no band. Other parameters as for
        :func:`probwrap.metrics.corp_reliability`.
        """
        result = corp_reliability(
            y_true, y_prob, n_resamples=n_resamples, confidence_level=confidence_level,
            sample_weight=sample_weight, labels=labels, random_state=random_state,
        )
        return cls(result, name=name).plot(ax=ax)

    @classmethod
    def from_estimator(
        cls, estimator: Any, X: Any, y: Any, *, sample_weight: Any = None, **kwargs: Any
    ) -> IsotonicReliabilityDiagram:
        """As :meth:`from_predictions`, with the positive-class column of ``predict_proba``."""
        p = positive_proba(estimator, X)
        y01 = binary_labels(y, estimator_classes(estimator))
        return cls.from_predictions(y01, p, sample_weight=sample_weight, **kwargs)

    def plot(self, ax: Any = None, *, name: str | None = None) -> IsotonicReliabilityDiagram:
        """Draw the diagram (on ``ax``, or a new figure with a histogram panel below)."""
        name = name or self.name or "isotonic recalibration"
        r = self.result
        if ax is None:
            from matplotlib.figure import Figure

            fig = Figure(figsize=(5.2, 5.0), layout="constrained")
            fig.patch.set_facecolor("white")
            ax, hist_ax = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3.2, 1.0]})
        else:
            hist_ax = ax.inset_axes([0.0, -0.42, 1.0, 0.25], sharex=ax)
        style_axes(ax)
        style_axes(hist_ax)
        ax.plot([0, 1], [0, 1], linestyle=(0, (4, 3)), color=PALETTE["ideal"], linewidth=1.0,
                label="calibrated")
        self.band_artist_ = None
        if r.band_low is not None:
            self.band_artist_ = ax.fill_between(
                r.forecast, r.band_low, r.band_high, step="post", color=PALETTE["band"],
                alpha=0.7, linewidth=0,
                label=f"{r.confidence_level:.0%} consistency band",
            )
        (self.line_,) = ax.step(r.forecast, r.recalibrated, where="post",
                                color=PALETTE["observed"], linewidth=1.6, label=name)
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_ylabel("recalibrated probability")
        b = r.brier
        ax.set_title(
            f"CORP reliability \u2014 Brier {b.total:.4f} = MCB {b.miscalibration:.4f} "
            f"\u2212 DSC {b.discrimination:.4f} + UNC {b.uncertainty:.4f}", fontsize=8,
        )
        ax.legend(loc="upper left", fontsize=7, frameon=False)
        edges = np.linspace(0.0, 1.0, 41)
        self.bars_ = hist_ax.hist(r.forecast, bins=edges, weights=r.weight,
                                  color=PALETTE["counts"], edgecolor=PALETTE["ink"],
                                  linewidth=0.4)[2]
        hist_ax.set_ylabel("rows", fontsize=8)
        hist_ax.set_xlabel("forecast probability")
        self.ax_ = ax
        self.hist_ax_ = hist_ax
        self.figure_ = ax.figure
        return self
