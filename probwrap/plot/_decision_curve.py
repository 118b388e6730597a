"""Decision curve: net benefit against threshold probability (Vickers & Elkin 2006)."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import cutoff_text
from ..metrics import net_benefit, net_benefit_treat_all
from ._common import binary_labels, estimator_classes, positive_proba
from ._style import PALETTE, new_axes, style_axes

__all__ = ["DecisionCurveDisplay"]


class DecisionCurveDisplay:
    """Net benefit of acting on the model against acting on everyone or on no one.

    ``NB(t) = TP/n - FP/n * t / (1 - t)`` at threshold probability ``t`` (Vickers & Elkin
    2006), computed by :func:`probwrap.metrics.net_benefit`; the "act on all" reference is
    :func:`probwrap.metrics.net_benefit_treat_all` and "act on none" is 0 at every threshold.

    Parameters
    ----------
    thresholds : ndarray of shape (m,)
    net_benefit : ndarray of shape (m,)
    treat_all : ndarray of shape (m,)
    marked_threshold : float, optional
        A threshold to mark, e.g. the Bayes cutoff implied by the costs.
    name : str, optional

    Attributes
    ----------
    treat_none : ndarray of shape (m,)
        Zeros.
    ax_, figure_ : matplotlib Axes and Figure
    line_, treat_all_line_, treat_none_line_ : Line2D
        Drawn curves; their ``xdata`` are the thresholds.

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> from probwrap.datasets import make_parcels
    >>> from probwrap.plot import DecisionCurveDisplay
    >>> parcels = make_parcels(2000, random_state=0)
    >>> disp = DecisionCurveDisplay.from_predictions(parcels.target, parcels.true_proba[:, 1])
    >>> disp.thresholds.shape, bool(disp.net_benefit[0] >= disp.treat_all[0] - 1e-12)
    ((99,), True)
    """

    def __init__(
        self,
        *,
        thresholds: np.ndarray,
        net_benefit: np.ndarray,
        treat_all: np.ndarray,
        marked_threshold: float | None = None,
        name: str | None = None,
    ) -> None:
        self.thresholds = thresholds
        self.net_benefit = net_benefit
        self.treat_all = treat_all
        self.treat_none = np.zeros_like(thresholds)
        self.marked_threshold = marked_threshold
        self.name = name

    @classmethod
    def from_predictions(
        cls,
        y_true: Any,
        y_prob: Any,
        *,
        thresholds: Any = None,
        sample_weight: Any = None,
        pos_label: Any = None,
        marked_threshold: float | None = None,
        name: str | None = None,
        ax: Any = None,
    ) -> DecisionCurveDisplay:
        """Compute the decision curve from labels and positive-class probabilities.

        Parameters
        ----------
        y_true : array-like of shape (n,)
            Binary labels.
        y_prob : array-like of shape (n,)
            Probabilities of the positive class.
        thresholds : array-like, optional
            Threshold probabilities in (0, 1); default 0.01, 0.02, ..., 0.99.
        sample_weight : array-like of shape (n,), optional
        pos_label : label, optional
        marked_threshold : float, optional
            Threshold to mark with a vertical line.
        name : str, optional
        ax : matplotlib Axes, optional

        Returns
        -------
        DecisionCurveDisplay
        """
        if thresholds is None:
            thresholds = np.arange(1, 100) / 100.0
        t = np.asarray(thresholds, dtype=float)
        if t.ndim != 1:
            raise ValueError(f"`thresholds` must be 1-d; got shape {t.shape}.")
        classes = None
        if pos_label is not None:
            others = [v for v in np.unique(np.asarray(y_true)).tolist() if v != pos_label]
            classes = [others[0] if others else None, pos_label]
        y01 = binary_labels(y_true, classes, name="y_true")
        p = np.asarray(y_prob, dtype=float)
        nb = np.atleast_1d(net_benefit(y01, p, t, sample_weight=sample_weight, labels=[0, 1]))
        ta = np.atleast_1d(
            net_benefit_treat_all(y01, t, sample_weight=sample_weight, labels=[0, 1])
        )
        return cls(
            thresholds=t, net_benefit=nb, treat_all=ta, marked_threshold=marked_threshold,
            name=name,
        ).plot(ax=ax)

    @classmethod
    def from_estimator(
        cls, estimator: Any, X: Any, y: Any, *, name: str | None = None, **kwargs: Any
    ) -> DecisionCurveDisplay:
        """Compute the decision curve of a fitted binary classifier on labelled rows.

        A fitted :class:`~probwrap.CostPolicyWrapper` has its ``cutoff_`` marked unless
        ``marked_threshold`` is given. Other keyword arguments as in :meth:`from_predictions`.
        """
        p = positive_proba(estimator, X)
        y01 = binary_labels(y, estimator_classes(estimator))
        if kwargs.get("marked_threshold") is None:
            kwargs["marked_threshold"] = getattr(estimator, "cutoff_", None)
        return cls.from_predictions(
            y01, p, pos_label=1.0, name=name or type(estimator).__name__, **kwargs
        )

    def plot(self, ax: Any = None, *, name: str | None = None) -> DecisionCurveDisplay:
        """Draw the three curves (and the marked threshold)."""
        ax = style_axes(new_axes(ax))
        (self.treat_none_line_,) = ax.plot(
            self.thresholds, self.treat_none, color=PALETTE["treat_none"], linewidth=1.0,
            label="act on none",
        )
        (self.treat_all_line_,) = ax.plot(
            self.thresholds, self.treat_all, color=PALETTE["treat_all"], linewidth=1.2,
            linestyle=(0, (5, 2)), label="act on all",
        )
        (self.line_,) = ax.plot(
            self.thresholds, self.net_benefit, color=PALETTE["observed"], linewidth=1.8,
            label=name or self.name or "model",
        )
        self.marked_line_ = None
        if self.marked_threshold is not None:
            self.marked_line_ = ax.axvline(
                self.marked_threshold, color=PALETTE["chosen"], linewidth=1.1,
                label=f"cutoff in use {cutoff_text(self.marked_threshold, '.3f')}",
            )
        top = float(np.nanmax(np.concatenate([self.net_benefit, self.treat_all, [0.0]])))
        span = max(top, 1e-3)
        ax.set_ylim(-0.25 * span, 1.15 * span)
        ax.set_xlim(float(self.thresholds.min()), float(self.thresholds.max()))
        ax.set_xlabel("threshold probability")
        ax.set_ylabel("net benefit")
        ax.set_title("Decision curve", fontsize=9)
        ax.legend(fontsize=7, frameon=False, loc="upper right")
        self.ax_ = ax
        self.figure_ = ax.figure
        return self
