"""The report's figures drawn with the built-in SVG renderer (no matplotlib needed).

:func:`builtin_figures` returns the same keys, with the same numbers, as
:func:`probwrap.report._html.make_figures` draws with matplotlib through :mod:`probwrap.plot`:
the same bins, intervals, threshold grid and markers. It lets the report keep its figures when
the optional ``plot`` extra (matplotlib) is not installed.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .._validation import cutoff_text
from ..metrics import (
    expected_calibration_error,
    net_benefit,
    net_benefit_treat_all,
    reliability_table,
)
from ..plot._intervals import bin_counts
from ..plot._style import PALETTE
from ._alarm_chart import alarm_svg
from ._cells import bin_dispersion, bin_intervals
from ._common import draw_figure
from ._svg_axes import nice_ticks
from ._svg_charts import Chart

__all__ = ["builtin_figures", "reliability_svg", "cost_svg", "decision_curve_svg",
           "prevalence_svg"]

#: thresholds of the decision curve, as in probwrap.plot.DecisionCurveDisplay
THRESHOLDS = np.arange(1, 100) / 100.0
#: batches whose shift-test p-value falls below this are circled (PrevalenceDriftDisplay)
SHIFT_ALPHA = 0.01


def _upper(values: Any, floor: float = 0.0) -> float:
    """A round upper axis limit a little above the largest finite value."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    top = max(float(v.max()) if v.size else 0.0, floor)
    if top <= 0:
        return 1.0
    if not math.isfinite(top * 1.08):  # near the largest float: no room for a round limit
        return top
    ticks = nice_ticks(0.0, top * 1.08, target=4)
    step = ticks[1] - ticks[0] if ticks.shape[0] > 1 else top
    upper = float(ticks[-1] if ticks[-1] >= top * 1.05 else ticks[-1] + step)
    return upper if math.isfinite(upper) else top


def reliability_svg(
    y_true: Any, y_prob: Any, *, n_bins: int = 10, sample_weight: Any = None,
    confidence_level: float = 0.95, key: str = "rel", dispersion: float = 1.0,
) -> str:
    """Reliability diagram with Wilson (1927) intervals and a count histogram, as SVG.

    1-d ``y_prob`` (positive-class probabilities, labels 0/1) gives the binary diagram; 2-d
    ``y_prob`` (class probabilities, labels column indices) the top-label form of Guo et al.
    (2017). Bins are :func:`probwrap.metrics.reliability_table` with equal-width bins.
    ``dispersion`` above 1 (the cells' Pearson dispersion, :func:`._cells.bin_dispersion`)
    widens each bin's interval to the quasi-binomial one: the Wilson interval of
    ``n / dispersion`` trials (McCullagh & Nelder 1989, section 4.5).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(size=400)
    >>> y = (rng.uniform(size=400) < p).astype(float)
    >>> svg = reliability_svg(y, p, n_bins=5)
    >>> svg.startswith("<svg") and 'data-series="observed"' in svg
    True
    """
    p = np.asarray(y_prob, dtype=float)
    level = float(confidence_level)
    if p.ndim == 2:
        table = reliability_table(y_true, p, n_bins=n_bins, sample_weight=sample_weight)
        ece = table.calibration_error
        form, ylabel = " \u2014 top label", "accuracy of the top class"
        xlabel = "mean confidence (largest probability)"
    else:
        table = reliability_table(y_true, p, n_bins=n_bins, sample_weight=sample_weight,
                                  labels=[0.0, 1.0])
        ece = expected_calibration_error(y_true, p, n_bins=n_bins,
                                         sample_weight=sample_weight, labels=[0.0, 1.0])
        form, ylabel, xlabel = "", "observed frequency", "mean forecast probability"
    n = bin_counts(table.weight, sample_weight)
    low, high = bin_intervals(table.observed_frequency, n, dispersion, level)
    widened = dispersion != 1.0
    band_words = (f"Wilson {level:.0%} interval" if not widened else
                  f"Wilson {level:.0%} interval, widened for overdispersion")
    chart = Chart(
        key, title=f"Reliability{form} (calibration error {ece:.4f})", width=540, height=500,
        description=f"Observed frequency against mean forecast in {n_bins} equal-width bins, "
        f"with {level:.0%} Wilson intervals"
        + ("" if not widened else f" on the trials divided by the cells' dispersion "
           f"{dispersion:.3g}") + "; rows per bin in the lower panel.",
    )
    top = chart.add_panel(xlim=(0.0, 1.0), ylim=(0.0, 1.0), ylabel=ylabel, height=3.2,
                          show_xticklabels=False)
    top.line([0.0, 1.0], [0.0, 1.0], color=PALETTE["ideal"], width=1.0, dash=(4, 3),
             label="calibrated", name="diagonal")
    top.errorbars(table.mean_predicted, low, high, color=PALETTE["observed"], width=1.2,
                  label=band_words, name="wilson")
    top.line(table.mean_predicted, table.observed_frequency, color=PALETTE["observed"],
             width=1.6, marker=True, label="observed", name="observed")
    top.legend("upper left")
    pad = (table.upper - table.lower) * 0.05
    hist = chart.add_panel(xlim=(0.0, 1.0), ylim=(0.0, _upper(table.weight)), xlabel=xlabel,
                           ylabel="rows", height=1.0)
    hist.bars(table.lower + pad, table.upper - pad, table.weight, color=PALETTE["counts"],
              name="counts")
    return chart.to_svg()


def cost_svg(result: Any, *, chosen_cutoff: float | None = None, interval: Any = None,
             plugin: float | None = None, key: str = "cost",
             chosen_name: str = "chosen cutoff") -> str:
    """Mean cost per row against the cutoff, with the chosen, plug-in and 0.5 cutoffs, as SVG.

    ``result`` is a :class:`probwrap.decision.CutoffSearchResult`; decisions beyond a capacity
    (``result.admissible`` False) are drawn in grey. ``chosen_cutoff`` defaults to
    ``result.cutoff``; ``interval`` is a :class:`probwrap.decision.CutoffInterval` or None.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import search_cutoff
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(size=300)
    >>> y = (rng.uniform(size=300) < p).astype(np.intp)
    >>> res = search_cutoff(p, y, [[0.0, 3.0], [40.0, 0.0]], score_bounds=(0.0, 1.0))
    >>> 'data-series="curve"' in cost_svg(res, plugin=3 / 43)
    True
    """
    cutoffs = np.asarray(result.cutoffs, dtype=float)
    costs = np.asarray(result.costs, dtype=float)
    admissible = np.asarray(result.admissible, dtype=bool)
    chosen = float(result.cutoff if chosen_cutoff is None else chosen_cutoff)
    chart = Chart(key, title="Cost versus cutoff", width=560, height=380,
                  description="Mean cost per row of acting when the probability exceeds each "
                  "cutoff, with the chosen cutoff, its interval, the Bayes cutoff and "
                  "the 0.5 cutoff.")
    panel = chart.add_panel(xlim=(0.0, 1.0), ylim=(0.0, _upper(costs)),
                            xlabel="cutoff on the probability (act when p > cutoff)",
                            ylabel="mean cost per row")
    if interval is not None:
        panel.vspan(float(interval.low), float(interval.high), color=PALETTE["interval"],
                    opacity=0.8, name="interval",
                    label=f"cutoff {interval.confidence_level:.0%} bootstrap interval")
    if not admissible.all():
        capacity = getattr(result, "capacity", None)
        panel.line(cutoffs, np.where(admissible, np.nan, costs), color=PALETTE["inadmissible"],
                   width=1.2, name="over-capacity",
                   label="over capacity" + ("" if capacity is None else f" ({capacity:.0%})"))
    panel.line(cutoffs, np.where(admissible, costs, np.nan), color=PALETTE["observed"],
               width=1.6, label="mean cost per row", name="curve")
    panel.vline(chosen, color=PALETTE["chosen"], width=1.4, name="chosen",
                label=f"{chosen_name} {cutoff_text(chosen, '.3f')}")
    if plugin is not None:
        panel.vline(float(plugin), color=PALETTE["plugin"], width=1.2, dash=(5, 2),
                    name="plugin", label=f"Bayes cutoff {cutoff_text(plugin, '.3f')}")
    panel.vline(0.5, color=PALETTE["half"], width=1.0, dash="dotted", name="half",
                label="0.5 cutoff")
    panel.legend("upper right")
    return chart.to_svg()


def decision_curve_svg(y_true: Any, y_prob: Any, *, sample_weight: Any = None,
                       marked_threshold: float | None = None, key: str = "dc",
                       marked_name: str = "cutoff in use") -> str:
    """Net benefit against threshold probability (Vickers & Elkin 2006), as SVG.

    Thresholds 0.01, 0.02, ..., 0.99; the model's net benefit
    (:func:`probwrap.metrics.net_benefit`), acting on all
    (:func:`probwrap.metrics.net_benefit_treat_all`) and acting on none (zero).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(size=300)
    >>> y = (rng.uniform(size=300) < p).astype(float)
    >>> svg = decision_curve_svg(y, p, marked_threshold=0.2)
    >>> 'data-series="treat-all"' in svg and 'data-series="marked"' in svg
    True
    """
    t = THRESHOLDS
    nb = np.atleast_1d(net_benefit(y_true, y_prob, t, sample_weight=sample_weight,
                                   labels=[0, 1]))
    ta = np.atleast_1d(net_benefit_treat_all(y_true, t, sample_weight=sample_weight,
                                             labels=[0, 1]))
    top = float(np.nanmax(np.concatenate([nb, ta, [0.0]])))
    span = max(top, 1e-3)
    chart = Chart(key, title="Decision curve", width=560, height=380,
                  description="Net benefit of acting on the model at each threshold "
                  "probability, against acting on every row and on no row.")
    panel = chart.add_panel(xlim=(float(t.min()), float(t.max())),
                            ylim=(-0.25 * span, 1.15 * span),
                            xlabel="threshold probability", ylabel="net benefit")
    panel.line(t, np.zeros_like(t), color=PALETTE["treat_none"], width=1.0,
               label="act on none", name="treat-none")
    panel.line(t, ta, color=PALETTE["treat_all"], width=1.2, dash=(5, 2), label="act on all",
               name="treat-all")
    panel.line(t, nb, color=PALETTE["observed"], width=1.8, label="model", name="model")
    if marked_threshold is not None:
        panel.vline(float(marked_threshold), color=PALETTE["chosen"], width=1.1, name="marked",
                    label=f"{marked_name} {cutoff_text(marked_threshold, '.3f')}")
    panel.legend("upper right")
    return chart.to_svg()


def prevalence_svg(table: np.ndarray, *, source_prevalence: float | None = None,
                   class_index: int = 1, key: str = "prev") -> str:
    """Estimated prevalence per batch with its interval, against the source prevalence, as SVG.

    ``table`` is the structured array of :func:`probwrap.shift.prior_by_batch`; batches whose
    shift-test p-value is below 0.01 are circled.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=600)
    >>> y = (rng.uniform(size=600) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> est = PriorEstimator(n_resamples=20, random_state=0).fit(proba[:300], y[:300])
    >>> table = prior_by_batch(est, proba[300:], batch_size=100)
    >>> svg = prevalence_svg(table, source_prevalence=float(est.source_prior_[1]))
    >>> svg.count("<circle") >= 3
    True
    """
    prev = np.asarray(table["prior"][:, class_index], dtype=float)
    lower = np.asarray(table["lower"][:, class_index], dtype=float)
    upper = np.asarray(table["upper"][:, class_index], dtype=float)
    flagged = np.asarray(table["shift_pvalue"], dtype=float) < SHIFT_ALPHA
    x = np.arange(prev.shape[0], dtype=float)
    ref = [] if source_prevalence is None else [float(source_prevalence)]
    xlim = (-0.5, max(prev.shape[0] - 0.5, 0.5))
    labels = [str(b) for b in table["batch"]]
    step = max(1, int(np.ceil(len(labels) / 12)))  # at most about 12 batch labels
    chart = Chart(key, title="Prevalence by batch", width=560, height=380,
                  description="Estimated prevalence of each batch of unlabelled rows with its "
                  "interval, against the source prevalence.")
    panel = chart.add_panel(xlim=xlim, ylim=(0.0, _upper(np.concatenate([upper, prev, ref]))),
                            xlabel="batch", ylabel="prevalence", xticks=x[::step],
                            xticklabels=labels[::step])
    panel.band(x, lower, upper, color=PALETTE["band"], opacity=0.75, label="interval",
               name="interval")
    panel.line(x, prev, color=PALETTE["observed"], width=1.5, marker=True,
               label="estimated prevalence", name="prevalence")
    if flagged.any():
        panel.points(x[flagged], prev[flagged], color=PALETTE["shifted"], radius=6.0,
                     fill="none", stroke_width=1.4, name="flagged",
                     label=f"shift test p < {SHIFT_ALPHA:g}")
    if source_prevalence is not None:
        panel.hline(float(source_prevalence), color=PALETTE["source"], width=1.1, dash=(5, 2),
                    name="source", label=f"source {source_prevalence:.3f}")
    panel.legend("lower right")
    return chart.to_svg()


def builtin_figures(content: Any) -> dict[str, str]:
    """Every figure of the report as inline SVG, without matplotlib.

    Same keys and meaning as :func:`probwrap.report._html.make_figures` for the binary report:
    ``"reliability"`` always, ``"cost"`` when costs were given, ``"decision_curve"`` always,
    ``"prevalence"`` when a per-batch table was computed, ``"alarm"`` when its CUSUM was.
    Warnings met while drawing a figure are added to ``content.notes`` under
    ``"figure:<key>"`` (:func:`._common.draw_figure`). For the general (multiclass or
    multi-action) report, ``content.kind == "general"``, only ``"reliability"`` is returned, in
    its top-label form; the action-share and class-share figures of that report are not drawn
    by the built-in renderer.

    Parameters
    ----------
    content : ReportContent or MulticlassReportContent

    Returns
    -------
    dict of str to str
        Figure key to ``<svg>`` element; ids are prefixed per figure so all can share a page.

    Examples
    --------
    >>> from probwrap.datasets import make_parcels
    >>> from probwrap.report._content import collect_content
    >>> parcels = make_parcels(800, random_state=0)
    >>> content = collect_content(y_true=parcels.target, y_prob=parcels.true_proba[:, 1],
    ...                           costs={"fp": 3.0, "fn": 40.0}, n_resamples=10)
    >>> sorted(builtin_figures(content))
    ['cost', 'decision_curve', 'reliability']
    """
    c = content
    figs: dict[str, str] = {}
    draw_figure(c, figs, "reliability", reliability_svg, c.y_true, c.y_prob, n_bins=c.n_bins,
                sample_weight=c.sample_weight, confidence_level=c.confidence_level, key="rel",
                dispersion=bin_dispersion(getattr(c, "resampling", None)))
    if getattr(c, "kind", "binary") == "general":
        return figs
    if c.cost_matrix is not None and c.cost_curve is not None:
        draw_figure(c, figs, "cost", cost_svg, c.cost_curve, chosen_cutoff=c.chosen_cutoff,
                    interval=c.cost_interval, plugin=c.plugin, key="cost",
                    chosen_name=c.chosen_name)
    draw_figure(c, figs, "decision_curve", decision_curve_svg, c.y_true, c.y_prob,
                sample_weight=c.sample_weight, marked_threshold=c.chosen_cutoff, key="dc",
                marked_name=c.chosen_name)
    if c.batch_table is not None:
        draw_figure(c, figs, "prevalence", prevalence_svg, c.batch_table,
                    source_prevalence=c.source_prevalence, key="prev")
    if getattr(c, "alarm", None) is not None:
        draw_figure(c, figs, "alarm", alarm_svg, c.alarm, key="alarm")
    return figs
