"""Prevalence over batches with intervals, against the source prevalence."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np

from .._validation import plain
from ..shift import prior_by_batch
from ._style import PALETTE, new_axes, style_axes

__all__ = ["ClassPriorDisplay", "PrevalenceDriftDisplay"]

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
        _check_class_index(class_index, table["prior"].shape[1])
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
        _check_class_index(class_index, len(prior_estimator.source_prior_))
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
        _check_class_index(class_index, len(estimator.source_prior_))
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


class ClassPriorDisplay:
    """Source share of every class beside its estimated share in new data, with intervals.

    Parameters
    ----------
    source_prior : array-like of shape (k,)
        Class shares of the labelled (source) rows.
    target_prior : array-like of shape (k,)
        Estimated class shares of the unlabelled rows.
    interval : array-like of shape (k, 2), optional
        Lower and upper end of each estimated share, drawn as given (from low to high). An
        interval need not contain its estimate (a bootstrap percentile interval of a skewed
        estimator may not); such a class is named in a ``UserWarning``, never clipped.
    class_names : sequence of str, optional
    shift_pvalue : float, optional
        p-value of the shift test, shown in the title.

    Attributes
    ----------
    ax_, figure_ : matplotlib Axes and Figure
    source_bars_, target_bars_ : BarContainer
        Bar heights are the shares.
    interval_artist_ : ErrorbarContainer or None
        Beside the target bars: each spans exactly from the low to the high end.

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> from probwrap.plot import ClassPriorDisplay
    >>> disp = ClassPriorDisplay(source_prior=[0.8, 0.15, 0.05], target_prior=[0.6, 0.3, 0.1],
    ...                          interval=[[0.55, 0.65], [0.25, 0.35], [0.07, 0.13]]).plot()
    >>> [round(float(b.get_height()), 2) for b in disp.target_bars_]
    [0.6, 0.3, 0.1]
    """

    def __init__(
        self,
        *,
        source_prior: Any,
        target_prior: Any,
        interval: Any = None,
        class_names: Any = None,
        shift_pvalue: float | None = None,
    ) -> None:
        src = np.asarray(source_prior, dtype=float)
        tgt = np.asarray(target_prior, dtype=float)
        if src.ndim != 1 or tgt.shape != src.shape:
            raise ValueError(
                f"`source_prior` and `target_prior` must be 1-d of equal length; got shapes "
                f"{src.shape} and {tgt.shape}."
            )
        k = src.shape[0]
        iv = None if interval is None else np.asarray(interval, dtype=float)
        if iv is not None and iv.shape != (k, 2):
            raise ValueError(f"`interval` must have shape ({k}, 2); got {iv.shape}.")
        if iv is not None and not np.all(iv[:, 0] <= iv[:, 1]):
            j = int(np.flatnonzero(~(iv[:, 0] <= iv[:, 1]))[0])
            raise ValueError(f"`interval` row {j} must have low <= high (finite); got "
                             f"[{float(iv[j, 0])}, {float(iv[j, 1])}].")
        names = [str(j) for j in range(k)] if class_names is None else [str(c) for c in
                                                                       class_names]
        if len(names) != k:
            raise ValueError(f"`class_names` must name the {k} classes; got {len(names)}.")
        self.source_prior = src
        self.target_prior = tgt
        self.interval = iv
        self.class_names = names
        if iv is not None:
            outside = np.flatnonzero((tgt < iv[:, 0]) | (tgt > iv[:, 1]))
            if outside.size:
                said = "; ".join(f"{names[j]}: {float(tgt[j]):.4g} outside "
                                 f"[{float(iv[j, 0]):.4g}, {float(iv[j, 1]):.4g}]"
                                 for j in outside)
                warnings.warn(f"The estimated share lies outside its interval for "
                              f"{outside.size} class(es) ({said}); the intervals are drawn as "
                              "given.", UserWarning, stacklevel=2)
        self.shift_pvalue = shift_pvalue

    def plot(self, ax: Any = None) -> ClassPriorDisplay:
        """Draw paired bars per class (on ``ax``, or a new figure)."""
        ax = new_axes(ax)
        style_axes(ax)
        x = np.arange(self.source_prior.shape[0])
        self.source_bars_ = ax.bar(x - 0.2, self.source_prior, width=0.38,
                                   color=PALETTE["source"], label="source (labelled rows)")
        self.target_bars_ = ax.bar(x + 0.2, self.target_prior, width=0.38,
                                   color=PALETTE["shifted"], label="estimated (unlabelled rows)")
        self.interval_artist_ = None
        if self.interval is not None:
            # drawn about the interval's own midpoint, so it spans exactly [low, high] whether
            # or not the estimate lies inside it (error bars can never be negative)
            low, high = self.interval[:, 0], self.interval[:, 1]
            self.interval_artist_ = ax.errorbar(
                x + 0.2, (low + high) / 2.0, yerr=(high - low) / 2.0, fmt="none",
                ecolor=PALETTE["ink"], elinewidth=1.1, capsize=3, label="interval",
            )
        ax.set_xticks(x, self.class_names, fontsize=8)
        ax.set_ylabel("class share")
        top = max(float(self.source_prior.max()), float(self.target_prior.max()))
        if self.interval is not None:
            top = max(top, float(self.interval[:, 1].max()))
        ax.set_ylim(0, min(1.0, top * 1.15 + 0.02))
        title = "Class shares: source and estimated"
        if self.shift_pvalue is not None:
            title += f" (shift test p = {self.shift_pvalue:.3g})"
        ax.set_title(title, fontsize=9)
        ax.legend(loc="upper right", fontsize=7, frameon=False)
        self.ax_ = ax
        self.figure_ = ax.figure
        return self


def _check_class_index(class_index: Any, k: int) -> None:
    """``class_index`` must be a whole number in [0, k)."""
    if (isinstance(class_index, bool) or not isinstance(class_index, numbers.Integral)
            or not 0 <= class_index < k):
        raise ValueError(f"`class_index` must be a whole number in [0, {k}) (one of the "
                         f"{k} classes); got {plain(class_index)!r}.")
