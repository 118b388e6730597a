"""Render a :class:`ReportContent` as one self-contained HTML page with inline SVG figures."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import __version__
from .._validation import cutoff_text
from ..plot import (
    CostCurveDisplay,
    DecisionCurveDisplay,
    PrevalenceDriftDisplay,
)
from ._alarm_chart import alarm_svg
from ._batch_marks import binary_batch_table
from ._cells import prevalence_unit_words, reliability_diagram, unit_words, widened_words
from ._common import draw_figure, figure_notes
from ._content import BAYES_NAME, HALF_NAME, ReportContent
from ._general_groups import multiclass_group_section
from ._general_html import general_figures, general_glance, general_sections, pull_words
from ._groups_html import group_section
from ._html_parts import (
    _cut,
    _figure,
    _num,
    _num_cut,
    _share,
    _text,
    ece_note,
    figure_to_svg,
    gate_sentence,
    metric_rows_html,
    notes_box,
    recommendation_box,
    share_of_way,
)
from ._page_css import PAGE_CSS as _CSS
from ._promises import guarantee_html, late_label_html

__all__ = ["render_html", "figure_to_svg", "CAUTIONS"]

#: the Cautions section, one paragraph per item
CAUTIONS: tuple[str, ...] = (
    "Validate on data like the deployment data. Held-out rows from the training period say "
    "little about a new site, season or customer group; re-check calibration and costs on rows "
    "that look like the ones the rule will act on.",
    "Watch for shift. Base rates and the relation between features and outcomes move; monitor "
    "the estimated prevalence batch by batch and re-check the rule when it moves or when the "
    "shift test flags a batch.",
    "Check error rates across groups. A rule with a good average cost can still put most false "
    "alarms or most misses on one group of people; compare error rates and costs by group "
    "before use.",
    "Keep a human route for contested decisions. People affected by an automated decision need "
    "a way to have it reviewed by a person who can overturn it.",
    "Defer to local regulation and licensed professional practice. Where decisions concern "
    "credit, health, employment, insurance or accusations of wrongdoing, the applicable law and "
    "the judgement of licensed professionals take precedence over this report.",
)



def _class_pair(c: ReportContent) -> tuple[str, str]:
    """The two class names, escaped and quoted, as the report's text names them."""
    names = getattr(c, "class_names", ("negative", "positive"))
    return tuple(f"&ldquo;{_text(n)}&rdquo;" for n in names)  # type: ignore[return-value]


def _positive(c: ReportContent) -> str:
    return _class_pair(c)[1]


def _calibration_section(c: ReportContent, figures: dict[str, str]) -> str:
    level = f"{c.confidence_level:.0%}"
    rows = metric_rows_html(c)
    parts = [
        '<section id="calibration"><h2><span class="pw-num">1</span>Calibration</h2>',
        f"<p>Measured on {c.n_rows} labelled rows with an observed prevalence of "
        f"{c.prevalence:.4f} (share of {_positive(c)}). Intervals are {level} bootstrap percentile intervals "
        f"({_text(unit_words(c.resampling))}).</p>",
        '<table id="calibration-metrics"><thead><tr><th>metric</th><th>value</th>'
        f"<th>{level} low</th><th>{level} high</th><th>ideal</th></tr></thead>"
        f"<tbody>{rows}</tbody></table>",
        ece_note(c),
        notes_box([n for n in c.notes if n.key.startswith(("metric:", "cells"))],
                  "notes-calibration"),
        late_label_html(c),
    ]
    if c.calibration_method is not None:
        parts.append(
            f"<p>Calibration map in use: <b>{_text(c.calibration_method)}</b>.</p>"
        )
        if c.method_scores:
            srows = "".join(
                f"<tr><td>{_text(k)}</td>{_num(v[0])}{_num(v[1])}</tr>"
                for k, v in c.method_scores.items()
            )
            parts.append(
                '<table id="method-scores"><thead><tr><th>candidate map</th>'
                "<th>held-out log loss</th><th>standard error vs best</th></tr></thead>"
                f"<tbody>{srows}</tbody></table>"
            )
    parts.append(_figure(
        "fig-reliability", figures["reliability"],
        f"Reliability diagram: observed frequency against mean forecast in {c.n_bins} "
        f"equal-width bins, with {level} Wilson (1927) intervals{widened_words(c)}; rows per "
        "bin below.",
        figure_notes(c, "reliability"),
    ))
    parts.append("</section>")
    return "".join(parts)


def _exact_range_words(c: ReportContent) -> str:
    """Below 100 rows (rows of unequal weight counted by Kish's effective number, see
    docs/decisions.md): the cutoffs no one-sided exact binomial test sets apart
    (``CutoffInterval.exact_low`` / ``exact_high``), beside the bootstrap interval that covers
    less often than it says there; "" where the interval has no such range."""
    ci = c.cost_interval
    low = getattr(ci, "exact_low", float("nan"))
    high = getattr(ci, "exact_high", float("nan"))
    if not (np.isfinite(low) and np.isfinite(high)):
        return ""
    alpha = 100 * (1 - c.confidence_level)
    return (
        f" On so few rows that interval covers the least-cost cutoff less often than it says; "
        f"no one-sided exact binomial test at {alpha:.3g}&nbsp;% shows any of the cutoffs from "
        f'<span id="cutoff-exact-range" data-low="{low!r}" data-high="{high!r}">'
        f"{_cut(low)} to {_cut(high)}</span> dearer than another (a range that covered it in "
        "97.5&ndash;100&nbsp;% of draws of 20&ndash;50 rows)."
    )


def _decision_section(c: ReportContent, figures: dict[str, str]) -> str:
    parts = ['<section id="decisions"><h2><span class="pw-num">2</span>Decisions</h2>']
    if c.cost_matrix is None:
        parts.append(
            "<p>No costs were given, so no decision rule was chosen. The decision curve below "
            "shows the net benefit of acting at each threshold probability.</p>"
        )
    else:
        m = c.cost_matrix
        a0, a1 = (_text(a) for a in c.action_names)
        neg, pos = _class_pair(c)
        parts.append(
            '<table id="cost-matrix"><thead><tr><th>true class</th>'
            f"<th>{a0}</th><th>{a1}</th></tr></thead><tbody>"
            f'<tr data-class="negative"><td>{neg}</td>{_num(m[0, 0], 2)}{_num(m[0, 1], 2)}</tr>'
            f'<tr data-class="positive"><td>{pos}</td>{_num(m[1, 0], 2)}{_num(m[1, 1], 2)}</tr>'
            "</tbody></table>"
        )
        cap = (
            f"at most {100 * c.capacity:.1f}% of rows may receive &ldquo;{a1}&rdquo;"
            if c.capacity is not None else "no capacity limit"
        )
        parts.append(
            f'<p id="chosen-rule">Highlighted below: <b>{a1}</b> when the probability exceeds '
            f"the {_text(c.chosen_name)} "
            f'<b data-value="{c.chosen_cutoff!r}">{_cut(c.chosen_cutoff)}</b>, '
            f"{_text(c.cutoff_source)}; {cap}."
        )
        if c.chosen_interval is not None:
            span = (
                f'<span id="cutoff-interval" data-low="{c.chosen_interval[0]!r}" '
                f'data-high="{c.chosen_interval[1]!r}" data-cutoff="{c.interval_cutoff!r}">'
                f"{_cut(c.chosen_interval[0])} to {_cut(c.chosen_interval[1])}</span>"
            )
            if c.interval_cutoff is None or c.interval_cutoff == c.chosen_cutoff:
                parts.append(f" Its {c.confidence_level:.0%} bootstrap interval is {span}.")
            else:
                # a tuned policy keeps the Bayes cutoff unless its held-out rows show the
                # least-cost cutoff to cost less: the interval is the least-cost cutoff's
                parts.append(
                    f" The {c.confidence_level:.0%} bootstrap interval of the "
                    f"{_text(c.interval_name)} ({_cut(c.interval_cutoff)}) is {span}. It is "
                    f"not an interval of the {_text(c.chosen_name)}: that one moves from the "
                    f"{BAYES_NAME} only as far as the held-out rows show a cost saving, and can "
                    "lie outside it."
                )
            parts.append(_exact_range_words(c))
        if c.plugin is not None:
            parts.append(
                f" With calibrated probabilities the {BAYES_NAME} "
                f"(c<sub>fp</sub> &minus; c<sub>tn</sub>) / ((c<sub>fp</sub> &minus; "
                f"c<sub>tn</sub>) + (c<sub>fn</sub> &minus; c<sub>tp</sub>)) is "
                f'<span id="plugin-cutoff" data-value="{c.plugin!r}">{c.plugin:.4f}</span>. '
                "It needs only the costs; the searched or tuned cutoff also corrects for "
                "miscalibration but carries the noise of the search. The recommendation at the "
                "top says which to use on these data and why."
            )
        parts.append("</p>")
        target = c.rules and c.rules[0].target_expected_cost is not None
        head = (
            "<tr><th>rule</th><th>cutoff</th><th>mean cost per row</th><th>share acted on</th>"
            + (("<th>within capacity (unlabelled rows)</th>" if target
                else "<th>within capacity</th>") if c.capacity is not None else "")
            + ("<th>share acted on (unlabelled)</th><th>expected cost (unlabelled)</th>"
               if target else "")
            + "</tr>"
        )
        body = []
        for r in c.rules:
            rec = c.recommendation is not None and r.key == c.recommendation.key
            cls = (' class="pw-chosen pw-recommended"' if rec and r.key == "chosen" else
                   ' class="pw-chosen"' if r.key == "chosen" else
                   ' class="pw-recommended"' if rec else "")
            cells = [f"<td>{_text(r.label)}</td>", _num_cut(r.cutoff), _num(r.mean_cost),
                     _share(r.flagged_share)]
            if c.capacity is not None:
                cells.append(f"<td>{'yes' if r.within_capacity else 'no'}</td>")
            if target:
                cells += [_share(r.target_flagged_share), _num(r.target_expected_cost)]
            body.append(f'<tr data-rule="{r.key}"{cls}>{"".join(cells)}</tr>')
        n_columns = (4 + (c.capacity is not None) + 2 * bool(target))
        unreachable_row, guarantee_text = guarantee_html(c, n_columns)
        body.insert(1, unreachable_row)
        parts.append(
            f'<table id="rule-comparison"><thead>{head}</thead><tbody>{"".join(body)}'
            "</tbody></table>"
        )
        parts.append(guarantee_text)
        parts.append(
            '<p class="pw-note">Mean cost per row is the realised cost on the labelled rows of '
            "this report. A cutoff searched on these same rows is optimistic there; prefer "
            "held-out or later rows for the comparison. The highlighted row is the "
            f"{_text(c.chosen_name)}; the row marked &#9654; is the recommended rule."
            + (" The unlabelled columns use the posteriors re-weighted to the estimated new "
               "prevalence (expected, not realised, cost); capacity is judged on the share "
               "acted on there, the rows the rule will act on." if target else "")
            + "</p>"
        )
        parts.append(notes_box(
            [n for n in c.notes if n.key in ("plugin", "cutoff", "capacity")
             or (n.key == "guarantee" and n.kind != "not computed")],  # said above
            "notes-decisions"))
        parts.append(_figure(
            "fig-cost", figures["cost"],
            f"Mean cost per row at every cutoff, with the {c.chosen_name}, its bootstrap "
            f"interval, the {BAYES_NAME} and the {HALF_NAME}.",
            figure_notes(c, "cost"),
        ))
    parts.append(_figure(
        "fig-decision-curve", figures["decision_curve"],
        "Decision curve: net benefit TP/n \u2212 FP/n \u00b7 t/(1\u2212t) against threshold "
        "probability t (Vickers & Elkin 2006), with the act-on-all and act-on-none references.",
        figure_notes(c, "decision_curve"),
    ))
    parts.append("</section>")
    return "".join(parts)


def _prevalence_section(c: ReportContent, figures: dict[str, str]) -> str:
    parts = ['<section id="prevalence"><h2><span class="pw-num">3</span>Prevalence</h2>']
    if c.target_prevalence is None:
        parts.append(
            "<p>No unlabelled rows were given, so the prevalence of the deployment data was not "
            f"estimated. The labelled rows have prevalence {c.prevalence:.4f} (share of "
            f"{_positive(c)}).</p>"
        )
    else:
        ml = getattr(c, "ml_prevalence", None)
        ml_iv = getattr(c, "ml_interval", None)
        # the shrunk estimate differs from the maximum-likelihood one at the shown precision:
        # show both, the interval with the estimate it belongs to (not widened to the other)
        both = ml is not None and abs(ml - c.target_prevalence) >= 5e-5
        iv = ml_iv if ml_iv is not None else c.target_interval
        level = f"{c.confidence_level:.0%}"
        whose = " of the maximum-likelihood estimate" if both else ""
        interval_rows = (
            f'<tr data-item="target_low"><td>{level} interval{whose}, low</td>'
            f'{_num(iv[0])}</tr><tr data-item="target_high"><td>'
            f"{level} interval{whose}, high</td>{_num(iv[1])}</tr>"
            if iv is not None else ""
        )
        pull, faded = pull_words(c, "source prevalence", level)
        if both:
            estimate_rows = (
                f'<tr data-item="target_ml"><td>estimated target prevalence, maximum '
                f"likelihood ({_text(c.prior_method)})</td>{_num(ml)}</tr>" + interval_rows
                + f'<tr data-item="target"><td>estimated target prevalence, shrunk toward the '
                f"source prevalence ({pull}); used by the rules</td>"
                f"{_num(c.target_prevalence)}</tr>"
            )
        else:
            estimate_rows = (
                f'<tr data-item="target"><td>estimated target prevalence '
                f"({_text(c.prior_method)})</td>{_num(c.target_prevalence)}</tr>" + interval_rows
            )
        parts.append(
            '<table id="prevalence-summary"><thead><tr><th>quantity</th><th>value</th></tr>'
            "</thead><tbody>"
            f'<tr data-item="source"><td>source prevalence (labelled rows)</td>'
            f"{_num(c.source_prevalence)}</tr>"
            + estimate_rows
            + f'<tr data-item="shift_statistic"><td>shift test statistic (score test, on the '
            f"chi-square scale, 1 df)</td>{_num(c.shift_statistic)}</tr>"
            f'<tr data-item="shift_pvalue"><td>shift test p-value</td>'
            f'<td data-value="{c.shift_pvalue!r}">{c.shift_pvalue:.3g}</td></tr>'
            + (
                f'<tr data-item="applied"><td>prevalence the rules move to (the source '
                f"prevalence moved {share_of_way(c.adaptation_weight)} of the way to the "
                f"estimate, as PriorShiftWrapper's evidence gate does)</td>"
                f"{_num(c.applied_prevalence)}</tr>"
                if c.applied_prevalence is not None and c.adaptation_weight is not None else ""
            )
            + (
                f'<tr data-item="adapted_cutoff"><td>{_text(c.chosen_name)}, moved to the '
                f"applied prevalence</td>{_num_cut(c.adapted_cutoff)}</tr>"
                if c.adapted_cutoff is not None else ""
            )
            + "</tbody></table>"
        )
        verdict = (
            "The test rejects &ldquo;no shift&rdquo; at the 1% level: the base rate has moved."
            if c.shift_pvalue < 0.01 else
            "The test does not reject &ldquo;no shift&rdquo; at the 1% level."
        )
        parts.append(
            f"<p>Prevalence is the share of {_positive(c)}, estimated from "
            f"{c.n_unlabelled or 'the'} unlabelled rows, assuming only the class shares of "
            f"{_positive(c)} and {_class_pair(c)[0]} changed (prior shift). {verdict}"
            + (f" {_text(units)}" if (units := prevalence_unit_words(c)) else "") + "</p>"
        )
        if both:
            parts.append(
                f'<p id="prevalence-shrunk">The {level} interval is a confidence interval for '
                "the prevalence of the population the unlabelled rows come from, around the "
                "maximum-likelihood estimate; it carries the sampling error of both the labelled "
                "and the unlabelled rows. The rules start from that estimate shrunk toward the "
                f"source prevalence ({pull}), so that a noisy estimate does not move every "
                "decision." + faded + "</p>"
            )
        if c.applied_prevalence is not None and c.adaptation_weight is not None:
            parts.append(gate_sentence(c.adaptation_weight, "prevalence"))
        parts.append(notes_box(
            [n for n in c.notes if n.key in ("prevalence", "batches")], "notes-prevalence"))
        if "prevalence" in figures:
            parts.append(_figure(
                "fig-prevalence", figures["prevalence"],
                "Estimated prevalence per batch of unlabelled rows with bootstrap intervals, "
                "against the source prevalence; circled batches fail the shift test.",
                figure_notes(c, "prevalence"),
            ))
        if c.batch_table is not None and c.source_prevalence is not None:
            # the batches in numbers, a batch kept near the source prevalence for lack of rows
            # marked as the command line marks it (since 5 December 2026)
            parts.append(binary_batch_table(c.batch_table, c.source_prevalence,
                                            f"{c.confidence_level:.0%}"))
        if getattr(c, "alarm", None) is not None:
            parts.append(_alarm_text(c))
            if "alarm" in figures:
                parts.append(_figure(
                    "fig-alarm", figures["alarm"],
                    "Two-sided CUSUM of the batch shift tests (each the signed root of its "
                    "statistic, a standard normal when nothing moved) against the source "
                    f"prevalence (k = {c.alarm.result.reference:g}); an "
                    "alarm fires when a sum crosses the dashed decision interval "
                    f"h = {c.alarm.result.decision_interval:g} and both sums restart.",
                    figure_notes(c, "alarm"),
                ))
    parts.append("</section>")
    return "".join(parts)


def _alarm_text(c: Any) -> str:
    a = c.alarm
    res = a.result
    if a.first_batch is None:
        verdict = "<b>No alarm</b>: the prevalence estimates have not drifted beyond the chart's "
        verdict += "decision interval."
    else:
        way = "rose" if res.direction[0] > 0 else "fell"
        verdict = (f"<b>Alarm after batch {_text(a.first_batch)}</b>: the prevalence {way} "
                   "beyond the chart's decision interval")
        if res.alarms.size > 1:
            verdict += (f" ({res.alarms.size} alarms in all, after batches "
                        + ", ".join(_text(a.batches[i]) for i in res.alarms) + ")")
        verdict += "."
    return (
        f'<p class="pw-alarm" data-first-alarm="{_text(a.first_batch or "")}" '
        f'data-n-alarms="{res.alarms.size}">'
        f"Prevalence alarm (two-sided CUSUM, Page 1954; reference value k = "
        f"{res.reference:g} and decision interval h = {res.decision_interval:g}, on each "
        "batch's shift test standardised to a standard normal when nothing moved): "
        f"{verdict} When nothing has moved, the chart sounds falsely on average not sooner "
        f'than every <span data-value="{a.in_control_run_length!r}">'
        f"{a.in_control_run_length:.0f}</span> batches with probability "
        f"{a.run_length_probability:g} over the labelled rows every batch is compared with "
        f"(median {a.median_run_length:.0f}; {a.exact_baseline_run_length:.0f} if the "
        "source prevalence were exact; in-control average run length given the labelled "
        "rows, Brook &amp; Evans 1972). "
        + "".join(f"Note: {_text(w)} " for w in a.warnings)
        + "An alarm says the estimates drifted, not why; check a labelled sample before "
        "acting.</p>"
    )


def _cautions_section() -> str:
    items = "".join(f"<li>{_text(t)}</li>" for t in CAUTIONS)
    return (
        '<section id="cautions"><h2><span class="pw-num">4</span>Cautions</h2>'
        "<p>Decisions made with these numbers can affect people.</p>"
        f"<ul>{items}</ul></section>"
    )


def _glance(c: Any) -> str:
    if getattr(c, "kind", "binary") == "general":
        items = general_glance(c)
        li = "".join(f"<li>{_text(k)}<b>{_text(v)}</b></li>" for k, v in items)
        return f'<ul class="pw-glance" id="glance">{li}</ul>'
    positive = c.class_names[1]
    items = [("labelled rows", f"{c.n_rows}"),
             (f"observed prevalence ({positive})", f"{c.prevalence:.4f}")]
    if c.recommendation is not None and c.recommendation.cutoff is not None:
        items.append(("recommended cutoff", _cut(c.recommendation.cutoff)))
    elif c.chosen_cutoff is not None:
        items.append((c.chosen_name, _cut(c.chosen_cutoff)))
    if c.target_prevalence is not None:
        items.append((f"estimated new prevalence ({positive})", f"{c.target_prevalence:.4f}"))
    li = "".join(f"<li>{_text(k)}<b>{_text(v)}</b></li>" for k, v in items)
    return f'<ul class="pw-glance" id="glance">{li}</ul>'


def make_figures(c: Any) -> dict[str, str]:
    """Draw every figure of the report and return them as inline SVG strings.

    With matplotlib installed (the ``plot`` extra) the figures come from the display objects
    of :mod:`probwrap.plot`; without it, from the built-in SVG renderer, so that a plain
    ``pip install .`` still writes a report with its figures (the multiclass report then shows
    its reliability diagram and tables; the action-share and class-share charts need
    matplotlib). Warnings met while drawing a figure are added to ``c.notes`` under
    ``"figure:<key>"`` and shown under that figure (:func:`._common.draw_figure`).
    """
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        from ._builtin_figures import builtin_figures

        return builtin_figures(c)
    if getattr(c, "kind", "binary") == "general":
        return general_figures(c)
    figs: dict[str, str] = {}

    def reliability() -> str:
        rel = reliability_diagram(c)
        return figure_to_svg(rel.figure_, "rel")

    def cost() -> str:
        disp = CostCurveDisplay(
            result=c.cost_curve, plugin_cutoff=c.plugin, interval=c.cost_interval
        ).plot()
        if c.chosen_cutoff != disp.cutoff:
            disp.chosen_line_.set_xdata([c.chosen_cutoff, c.chosen_cutoff])
        # the legend names the cutoff as the table and the text do
        disp.chosen_line_.set_label(f"{c.chosen_name} {cutoff_text(c.chosen_cutoff, '.3f')}")
        disp.ax_.legend(fontsize=7, frameon=False, loc="best")
        return figure_to_svg(disp.figure_, "cost")

    def decision_curve() -> str:
        dc = DecisionCurveDisplay.from_predictions(
            c.y_true, c.y_prob, sample_weight=c.sample_weight, pos_label=1.0,
            marked_threshold=c.chosen_cutoff,
        )
        if dc.marked_line_ is not None:
            dc.marked_line_.set_label(f"{c.chosen_name} {cutoff_text(c.chosen_cutoff, '.3f')}")
            dc.ax_.legend(fontsize=7, frameon=False, loc="upper right")
        return figure_to_svg(dc.figure_, "dc")

    def prevalence() -> str:
        pd_ = PrevalenceDriftDisplay.from_table(
            c.batch_table, source_prevalence=c.source_prevalence
        )
        return figure_to_svg(pd_.figure_, "prev")

    draw_figure(c, figs, "reliability", reliability)
    if c.cost_matrix is not None and c.cost_curve is not None:
        draw_figure(c, figs, "cost", cost)
    draw_figure(c, figs, "decision_curve", decision_curve)
    if c.batch_table is not None:
        draw_figure(c, figs, "prevalence", prevalence)
    if getattr(c, "alarm", None) is not None:
        # the CUSUM chart is drawn by the built-in renderer in both cases (no display object)
        draw_figure(c, figs, "alarm", alarm_svg, c.alarm, key="alarm")
    return figs


def render_html(c: Any, figures: dict[str, str]) -> str:
    """The complete page."""
    if getattr(c, "kind", "binary") == "general":
        body = general_sections(c, figures) + multiclass_group_section(c)
    else:
        body = (_calibration_section(c, figures) + _decision_section(c, figures)
                + _prevalence_section(c, figures) + group_section(c))
    return (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{_text(c.title)}</title><style>{_CSS}</style></head><body>"
        f'<header class="pw-head"><h1>{_text(c.title)}</h1>'
        + (f'<p class="pw-source" id="made-from">Made from {_text(c.source)}</p>'
           if getattr(c, "source", None) else "")
        + f"<p>Calibration, decision rule and prevalence &middot; probwrap {__version__}</p>"
        "</header>"
        '<nav class="pw-nav"><a href="#calibration">Calibration</a>'
        '<a href="#decisions">Decisions</a><a href="#prevalence">'
        + ("Class shares" if getattr(c, "kind", "binary") == "general" else "Prevalence")
        + "</a>"
        + ('<a href="#by-group">By group</a>' if getattr(c, "group_checks", None) else "")
        + '<a href="#cautions">Cautions</a></nav><main>'
        + _glance(c)
        + recommendation_box(c)
        + body
        + _cautions_section()
        + "</main><footer>Written by probwrap. Self-contained: no scripts, no external "
        "files.</footer></body></html>"
    )
