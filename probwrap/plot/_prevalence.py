"""Prevalence over batches with intervals, against the source prevalence."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..shift import prior_by_batch
from ._style import PALETTE, new_axes, style_axes

__all__ = ["PrevalenceDriftDisplay"]

_FIELDS = ("batch", "n_rows", "prior", "lower", "upper", "shift_pvalue")


class PrevalenceDriftDisplay:
    """Estimated share of one class batch by batch, with intervals and the source share.

    Reads the table of :func:`probwrap.shift.prior_by_batch` (or
    :meth:`probwrap.PriorShiftWrapper.monitor`).

    Parameters
    ----------
    table : numpy structured array
        One record per batch with fields ``batch``, ``n_rows``, ``prior``, ``lower``, ``upper``
        and ``shift_pvalue``.
    source_prevalence : float, optional
        Share of the class in the labelled (source) data, drawn as a reference line.
    class_index : int, default=1
        Which column of ``prior`` to show (1: the positive class of a binary problem).
    alpha : float, default=0.01
        Batches whose shift-test p-value falls below it are marked.

    Attributes
    ----------
    batches : ndarray
        Batch labels.
    prevalence, lower, upper : ndarray
        Estimated share and interval per batch (columns ``class_index`` of the table).
    shift_pvalue : ndarray
    flagged : ndarray of bool
        ``shift_pvalue < alpha``.
    ax_, figure_ : matplotlib Axes and Figure
    line_ : Line2D
        ``xdata`` batch positions 0, 1, ..., ``ydata`` the prevalence.
    band_ : PolyCollection
        The intervals.

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator
    >>> from probwrap.plot import PrevalenceDriftDisplay
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=600)
    >>> y = (rng.uniform(size=600) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> est = PriorEstimator(n_resamples=20, random_state=0).fit(proba[:300], y[:300])
    >>> disp = PrevalenceDriftDisplay.from_predictions(proba[300:], est, batch_size=100)
    >>> disp.prevalence.shape
    (3,)
    """

    def __init__(
        self,
        *,
        table: np.ndarray,
        source_prevalence: float | None = None,
        class_index: int = 1,
        alpha: float = 0.01,
    ) -> None:
        names = getattr(getattr(table, "dtype", None), "names", None) or ()
        missing = [f for f in _FIELDS if f not in names]
        if missing:
            raise ValueError(
                f"`table` must be the structured array of prior_by_batch; it lacks {missing}."
            )
        k = table["prior"].shape[1]
        if not 0 <= int(class_index) < k:
            raise ValueError(f"`class_index` must lie in [0, {k}); got {class_index!r}.")
        self.table = table
        self.class_index = int(class_index)
        self.source_prevalence = None if source_prevalence is None else float(source_prevalence)
        self.alpha = float(alpha)
        self.batches = table["batch"]
        self.prevalence = table["prior"][:, self.class_index]
        self.lower = table["lower"][:, self.class_index]
        self.upper = table["upper"][:, self.class_index]
        self.shift_pvalue = table["shift_pvalue"]
        self.flagged = self.shift_pvalue < self.alpha

    @classmethod
    def from_predictions(
        cls,
        proba: Any,
        prior_estimator: Any,
        batches: Any = None,
        *,
        batch_size: int | None = None,
        sample_weight: Any = None,
        class_index: int = 1,
        alpha: float = 0.01,
        ax: Any = None,
    ) -> PrevalenceDriftDisplay:
        """Estimate the prevalence of each batch of unlabelled posteriors and draw it.

        Parameters
        ----------
        proba : array-like of shape (n, k)
            Posteriors of unlabelled rows in arrival order.
        prior_estimator : probwrap.shift.PriorEstimator
            Fitted on labelled held-out posteriors (its ``source_prior_`` is the reference).
        batches, batch_size, sample_weight
            As for :func:`probwrap.shift.prior_by_batch`.
        class_index : int, default=1
        alpha : float, default=0.01
        ax : matplotlib Axes, optional
        """
        table = prior_by_batch(
            prior_estimator, proba, batches, batch_size=batch_size, sample_weight=sample_weight
        )
        source = prior_estimator.source_prior_[class_index]
        return cls(
            table=table, source_prevalence=source, class_index=class_index, alpha=alpha
        ).plot(ax=ax)

    @classmethod
    def from_estimator(
        cls,
        estimator: Any,
        X: Any,
        batches: Any = None,
        *,
        batch_size: int | None = None,
        sample_weight: Any = None,
        class_index: int = 1,
        alpha: float = 0.01,
        ax: Any = None,
    ) -> PrevalenceDriftDisplay:
        """From a fitted :class:`~probwrap.PriorShiftWrapper` and unlabelled rows ``X``.

        Uses ``estimator.monitor(X, batches, batch_size=...)`` and ``source_prior_``.
        """
        if not hasattr(estimator, "monitor") or not hasattr(estimator, "source_prior_"):
            raise ValueError(
                f"`estimator` must be a fitted PriorShiftWrapper; got {type(estimator).__name__}."
            )
        table = estimator.monitor(X, batches, batch_size=batch_size, sample_weight=sample_weight)
        return cls(
            table=table, source_prevalence=estimator.source_prior_[class_index],
            class_index=class_index, alpha=alpha,
        ).plot(ax=ax)

    @classmethod
    def from_table(
        cls, table: np.ndarray, *, source_prevalence: float | None = None, ax: Any = None,
        **kwargs: Any,
    ) -> PrevalenceDriftDisplay:
        """Draw an existing ``prior_by_batch`` / ``monitor`` table."""
        return cls(table=table, source_prevalence=source_prevalence, **kwargs).plot(ax=ax)

    def plot(self, ax: Any = None) -> PrevalenceDriftDisplay:
        """Draw the prevalence per batch with its interval band."""
        ax = style_axes(new_axes(ax))
        x = np.arange(self.prevalence.shape[0], dtype=float)
        self.band_ = ax.fill_between(
            x, self.lower, self.upper, color=PALETTE["band"], alpha=0.75, linewidth=0,
            label="interval",
        )
        (self.line_,) = ax.plot(
            x, self.prevalence, color=PALETTE["observed"], marker="o", markersize=4,
            linewidth=1.5, label="estimated prevalence",
        )
        self.flag_points_ = None
        if self.flagged.any():
            self.flag_points_ = ax.scatter(
                x[self.flagged], self.prevalence[self.flagged], s=46, facecolors="none",
                edgecolors=PALETTE["shifted"], linewidths=1.4, zorder=3,
                label=f"shift test p < {self.alpha:g}",
            )
        self.source_line_ = None
        if self.source_prevalence is not None:
            self.source_line_ = ax.axhline(
                self.source_prevalence, color=PALETTE["source"], linestyle=(0, (5, 2)),
                linewidth=1.1, label=f"source {self.source_prevalence:.3f}",
            )
        ax.set_xticks(x)
        ax.set_xticklabels([str(b) for b in self.batches], fontsize=7)
        ax.set_xlabel("batch")
        ax.set_ylabel("prevalence")
        ax.set_ylim(bottom=0)
        ax.set_title("Prevalence by batch", fontsize=9)
        ax.legend(fontsize=7, frameon=False, loc="best")
        self.ax_ = ax
        self.figure_ = ax.figure
        return self
