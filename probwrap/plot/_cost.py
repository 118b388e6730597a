"""Mean cost against cutoff, with the chosen cutoff, its interval and the Bayes cutoff."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import check_proba, costs_by_labels, costs_by_position, cutoff_text, label_column
from ..decision import (
    check_cost_matrix,
    cutoff_interval,
    plugin_cutoff,
    realised_cost,
    search_cutoff,
    settle_cutoff,
)
from ._common import binary_labels, estimator_classes, positive_proba
from ._style import PALETTE, new_axes, style_axes

__all__ = ["CostCurveDisplay", "cutoff_cost"]


def cutoff_cost(
    y01: np.ndarray, p: np.ndarray, matrix: np.ndarray, cutoff: float, sample_weight: Any = None
) -> float:
    """Mean cost per row of "act when ``p > cutoff``" (via :func:`realised_cost`).

    The costs are divided by a power of two near their largest magnitude first and the mean
    multiplied back (exact in floating point), so that huge finite costs do not overflow the
    sum over rows.
    """
    m = np.asarray(costs_by_position(matrix, 2), dtype=float)
    top = float(np.max(np.abs(m)))
    scale = 2.0 ** np.floor(np.log2(top)) if top > 0 and np.isfinite(top) else 1.0
    return scale * realised_cost(
        y01, (p > cutoff).astype(np.intp), costs=m / scale, classes=[0, 1], actions=[0, 1],
        sample_weight=sample_weight,
    )


class CostCurveDisplay:
    """Mean cost per row at every cutoff of a binary decision rule.

    The curve is the exact empirical cost of "take the positive action when ``p > cutoff``" at
    every distinct probability (:func:`probwrap.decision.search_cutoff`). The display marks the
    cutoff with the least cost, its bootstrap interval (:func:`probwrap.decision.cutoff_interval`)
    and the Bayes plug-in cutoff of the costs (:func:`probwrap.decision.plugin_cutoff`), which is
    optimal when the probabilities are calibrated, and, where it differs from the least-cost
    cutoff, the cutoff the rows support (:func:`probwrap.decision.settle_cutoff` toward the
    plug-in cutoff carried back through a calibration map chosen on the rows, what
    ``CostPolicyWrapper(strategy="tuned")`` uses). Under a capacity, decisions that flag too many
    rows are drawn greyed out.

    Parameters
    ----------
    result : probwrap.decision.CutoffSearchResult
    plugin_cutoff : float or None
    interval : probwrap.decision.CutoffInterval or None
    plugin_cost, half_cost : float or None
        Mean cost per row of the plug-in cutoff and of the 0.5 cutoff on the same rows (None
        when the display was built from a stored curve without the rows).
    name : str, optional
    settled_cutoff : float or None
        The cutoff actually chosen (``CostPolicyWrapper.cutoff_``, or
        :func:`~probwrap.decision.settle_cutoff` on the rows); None to mark only the least-cost
        cutoff.

    Attributes
    ----------
    cutoffs, costs : ndarray
        The curve (same arrays as ``result.cutoffs`` and ``result.costs``).
    cutoff : float
        The least-cost cutoff (``result.cutoff``).
    cost : float
        Its mean cost.
    ax_, figure_ : matplotlib Axes and Figure
    line_ : Line2D
        The admissible part of the curve (``xdata`` cutoffs, ``ydata`` costs; NaN where a
        capacity excludes the decision).
    chosen_line_, plugin_line_, settled_line_ : Line2D
        Vertical markers (``settled_line_`` None where the settled cutoff is the least-cost one
        or not given).

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> from probwrap.datasets import make_parcels
    >>> from probwrap.plot import CostCurveDisplay
    >>> parcels = make_parcels(2000, random_state=0)
    >>> disp = CostCurveDisplay.from_predictions(
    ...     parcels.target, parcels.true_proba[:, 1], costs={"fp": 3.0, "fn": 40.0},
    ...     n_resamples=20, random_state=0)
    >>> round(disp.plugin_cutoff, 4)
    0.0698
    >>> bool(disp.cost <= disp.costs.min() + 1e-12)
    True
    """

    def __init__(
        self,
        *,
        result: Any,
        plugin_cutoff: float | None = None,
        interval: Any = None,
        plugin_cost: float | None = None,
        half_cost: float | None = None,
        name: str | None = None,
        settled_cutoff: float | None = None,
    ) -> None:
        self.result = result
        self.settled_cutoff = None if settled_cutoff is None else float(settled_cutoff)
        self.cutoffs = result.cutoffs
        self.costs = result.costs
        self.cutoff = float(result.cutoff)
        self.cost = float(result.cost)
        self.plugin_cutoff = plugin_cutoff
        self.interval = interval
        self.plugin_cost = plugin_cost
        self.half_cost = half_cost
        self.name = name

    @classmethod
    def from_predictions(
        cls,
        y_true: Any,
        y_prob: Any,
        costs: Any,
        *,
        capacity: float | None = None,
        sample_weight: Any = None,
        pos_label: Any = None,
        n_resamples: int = 200,
        confidence_level: float = 0.95,
        random_state: Any = None,
        name: str | None = None,
        ax: Any = None,
    ) -> CostCurveDisplay:
        """Search the cutoff on labelled probabilities, bootstrap it and draw the curve.

        Parameters
        ----------
        y_true : array-like of shape (n,)
            Binary labels.
        y_prob : array-like of shape (n,) or (n, 2)
            Positive-class probabilities (held-out, so the cost is honest); of two columns
            the second is used.
        costs : mapping or array-like of shape (2, 2)
            Binary costs (``{"tp", "fp", "fn", "tn"}`` or a matrix, rows true class).
        capacity : float in (0, 1], optional
            Largest share of rows that may be flagged.
        sample_weight : array-like of shape (n,), optional
        pos_label : label, optional
            Positive label (default: the larger of two).
        n_resamples : int, default=200
            Bootstrap resamples for the cutoff interval; 0 for none.
        confidence_level : float, default=0.95
        random_state : int, RandomState or None
        name : str, optional
        ax : matplotlib Axes, optional

        Returns
        -------
        CostCurveDisplay
        """
        classes = None
        if pos_label is not None:
            others = [v for v in np.unique(np.asarray(y_true)).tolist() if v != pos_label]
            classes = [others[0] if others else None, pos_label]
        y01 = binary_labels(y_true, classes, name="y_true").astype(np.intp)
        # positive-class probabilities, or two columns (the second is used), as the metrics
        # read them (two columns used to stop with a message about `scores`)
        p = check_proba(y_prob, name="y_prob", column_as_1d=True)
        if p.ndim == 2:
            if p.shape[1] != 2:
                raise ValueError(
                    "`y_prob` must be 1-d positive-class probabilities (or two columns) for "
                    f"a binary cost curve; got shape {p.shape}."
                )
            p = p[:, 1]
        # a DataFrame of costs read by its labels: rows (and columns labelled with the
        # classes) put in (negative, positive) order
        pair = classes if classes is not None else np.unique(label_column(y_true, "y_true"))
        matrix = check_cost_matrix(costs_by_labels(costs, pair), n_classes=2, n_actions=2)
        res = search_cutoff(
            p, y01, matrix, sample_weight=sample_weight, capacity=capacity,
            score_bounds=(0.0, 1.0),
        )
        interval = None
        if n_resamples:
            interval = cutoff_interval(
                p, y01, matrix, sample_weight=sample_weight, capacity=capacity,
                score_bounds=(0.0, 1.0), n_resamples=n_resamples,
                confidence_level=confidence_level, random_state=random_state,
            )
        try:
            plug = plugin_cutoff(matrix)
        except ValueError:
            plug = None
        settled = None
        if plug is not None:
            # the tuned policy's rule: settled toward the plug-in cutoff carried back through
            # the calibration map chosen on these rows (its folds seeded by random_state)
            from .._cost_policy_rules import recalibrated_plugin_cutoff

            w = np.ones(p.shape[0]) if sample_weight is None else np.asarray(sample_weight, float)
            anchor, _ = recalibrated_plugin_cutoff(p, y01, w, plug, random_state)
            settled = settle_cutoff(p, y01, matrix, res, sample_weight=sample_weight,
                                    anchor=anchor).cutoff
        return cls(
            result=res, plugin_cutoff=plug, interval=interval, name=name, settled_cutoff=settled,
            plugin_cost=None if plug is None else cutoff_cost(y01, p, matrix, plug, sample_weight),
            half_cost=cutoff_cost(y01, p, matrix, 0.5, sample_weight),
        ).plot(ax=ax)

    @classmethod
    def from_estimator(
        cls,
        estimator: Any,
        X: Any = None,
        y: Any = None,
        *,
        costs: Any = None,
        name: str | None = None,
        ax: Any = None,
        **kwargs: Any,
    ) -> CostCurveDisplay:
        """From a fitted :class:`~probwrap.CostPolicyWrapper`, or any classifier and rows.

        A wrapper fitted with ``strategy="tuned"`` carries its held-out cost curve
        (``cost_curve_``) and interval (``cutoff_interval_``): with ``X`` and ``y`` omitted
        they are drawn as they are. Otherwise the probabilities of ``estimator`` on ``X`` are
        evaluated against ``y`` with ``costs`` (default: the wrapper's ``cost_matrix_``), as in
        :meth:`from_predictions`.
        """
        name = name or type(estimator).__name__
        curve = getattr(estimator, "cost_curve_", None)
        matrix = getattr(estimator, "cost_matrix_", None)
        if X is None and y is None:
            if curve is None:
                raise ValueError(
                    "`estimator` carries no cost curve (cost_curve_ is set by a "
                    "CostPolicyWrapper fitted with strategy='tuned'); pass X and y to evaluate "
                    "it on labelled rows."
                )
            try:
                plug = plugin_cutoff(matrix)
            except ValueError:
                plug = None
            return cls(
                result=curve, plugin_cutoff=plug, interval=estimator.cutoff_interval_,
                name=name, settled_cutoff=getattr(estimator, "cutoff_", None),
            ).plot(ax=ax)
        if X is None or y is None:
            raise ValueError("Give both `X` and `y` (labelled rows), or neither.")
        costs = matrix if costs is None else costs
        if costs is None:
            raise ValueError("`costs` must be given for an estimator without cost_matrix_.")
        p = positive_proba(estimator, X)
        y01 = binary_labels(y, estimator_classes(estimator))
        return cls.from_predictions(y01, p, costs, pos_label=1.0, name=name, ax=ax, **kwargs)

    def plot(self, ax: Any = None, *, name: str | None = None) -> CostCurveDisplay:
        """Draw the curve and the markers."""
        ax = style_axes(new_axes(ax))
        res = self.result
        admissible = np.asarray(res.admissible, dtype=bool)
        costs, ylabel = np.asarray(self.costs, dtype=float), "mean cost per row"
        finite = np.abs(costs[np.isfinite(costs)])
        if finite.size and finite.max() > 1e300:
            # matplotlib's tick search multiplies the axis range and overflows near the largest
            # float: costs that large are drawn in units of a power of ten named on the axis
            exponent = int(np.floor(np.log10(finite.max())))
            costs, ylabel = costs / 10.0**exponent, f"mean cost per row (x 1e{exponent})"
        if self.interval is not None:
            self.interval_patch_ = ax.axvspan(
                self.interval.low, self.interval.high, color=PALETTE["interval"], alpha=0.8,
                linewidth=0,
                label=f"cutoff {self.interval.confidence_level:.0%} bootstrap interval",
            )
        if not admissible.all():
            ax.plot(self.cutoffs, np.where(admissible, np.nan, costs),
                    color=PALETTE["inadmissible"], linewidth=1.2,
                    label=f"over capacity ({res.capacity:.0%})")
        (self.line_,) = ax.plot(
            self.cutoffs, np.where(admissible, costs, np.nan), color=PALETTE["observed"],
            linewidth=1.6, label=name or self.name or "mean cost per row",
        )
        self.chosen_line_ = ax.axvline(
            self.cutoff, color=PALETTE["chosen"], linewidth=1.4,
            label=f"least cost cutoff {cutoff_text(self.cutoff, '.3f')}",
        )
        self.settled_line_ = None
        if self.settled_cutoff is not None and self.settled_cutoff != self.cutoff:
            self.settled_line_ = ax.axvline(
                self.settled_cutoff, color=PALETTE["chosen"], linestyle=(0, (1, 1)),
                linewidth=1.6, label=f"settled cutoff {cutoff_text(self.settled_cutoff, '.3f')}",
            )
        self.plugin_line_ = None
        if self.plugin_cutoff is not None:
            self.plugin_line_ = ax.axvline(
                self.plugin_cutoff, color=PALETTE["plugin"], linestyle=(0, (5, 2)),
                linewidth=1.2, label=f"Bayes cutoff {cutoff_text(self.plugin_cutoff, '.3f')}",
            )
        self.half_line_ = ax.axvline(0.5, color=PALETTE["half"], linestyle=":", linewidth=1.0,
                                     label="0.5 cutoff")
        ax.set_xlim(0, 1)
        ax.set_xlabel("cutoff on the probability (act when p > cutoff)")
        ax.set_ylabel(ylabel)
        ax.set_title("Cost versus cutoff", fontsize=9)
        ax.legend(fontsize=7, frameon=False, loc="best")
        self.ax_ = ax
        self.figure_ = ax.figure
        return self
