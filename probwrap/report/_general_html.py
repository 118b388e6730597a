"""HTML sections and figures of the multiclass / multi-action report."""

from __future__ import annotations

from typing import Any

import numpy as np

from ._batch_marks import general_held, held_cell_mark, held_note
from ._cells import prevalence_unit_words, reliability_diagram, unit_words, widened_words
from ._common import draw_figure, figure_notes
from ._general import MulticlassReportContent
from ._html_parts import (
    _figure,
    _num,
    _share,
    _text,
    ece_note,
    figure_to_svg,
    gate_sentence,
    metric_rows_html,
    notes_box,
    share_of_way,
)
from ._promises import late_label_html

__all__ = ["general_figures", "general_sections", "general_glance"]


def general_figures(c: MulticlassReportContent) -> dict[str, str]:
    """Top-label reliability diagram, action shares per rule, class shares (when estimated).

    Warnings met while drawing a figure become notes about it (:func:`._common.draw_figure`).
    """
    from ..plot import ActionShareDisplay, ClassPriorDisplay

    figs: dict[str, str] = {}

    def reliability() -> str:
        rel = reliability_diagram(c)
        return figure_to_svg(rel.figure_, "rel")

    def actions() -> str:
        disp = ActionShareDisplay(
            shares=np.vstack([r.shares for r in c.rules]),
            mean_cost=[r.mean_cost for r in c.rules], rule_names=[r.label for r in c.rules],
            action_names=c.action_names, capacity=c.capacity,
        ).plot()
        return figure_to_svg(disp.figure_, "act")

    def class_prior() -> str:
        disp = ClassPriorDisplay(
            source_prior=c.source_prior, target_prior=c.target_prior,
            interval=c.target_interval, class_names=c.class_names,
            shift_pvalue=c.shift_pvalue,
        ).plot()
        return figure_to_svg(disp.figure_, "cprior")

    draw_figure(c, figs, "reliability", reliability)
    if c.rules:
        draw_figure(c, figs, "actions", actions)
    if c.target_prior is not None:
        draw_figure(c, figs, "class_prior", class_prior)
    from ._alarm_chart import alarm_svg

    for j, alarm in getattr(c, "class_alarms", {}).items():
        if alarm.first_batch is not None:  # a chart only for the classes whose share moved
            draw_figure(c, figs, f"alarm:{j}", alarm_svg, alarm, key=f"alarm{j}")
    return figs


def _calibration(c: MulticlassReportContent, figures: dict[str, str]) -> str:
    level = f"{c.confidence_level:.0%}"
    rows = metric_rows_html(c)
    shares = "".join(
        f'<tr data-item="class:{j}"><td>{_text(name)}</td>{_share(c.class_shares[j])}</tr>'
        for j, name in enumerate(c.class_names)
    )
    parts = [
        '<section id="calibration"><h2><span class="pw-num">1</span>Calibration</h2>',
        f"<p>Measured on {c.n_rows} labelled rows of {c.n_classes} classes. Intervals are "
        f"{level} bootstrap percentile intervals ({_text(unit_words(c.resampling))}).</p>",
        '<table id="class-shares"><thead><tr><th>class</th><th>share of labelled rows</th>'
        f"</tr></thead><tbody>{shares}</tbody></table>",
        '<table id="calibration-metrics"><thead><tr><th>metric</th><th>value</th>'
        f"<th>{level} low</th><th>{level} high</th><th>ideal</th></tr></thead>"
        f"<tbody>{rows}</tbody></table>",
        '<p class="pw-note">The top-label error bins each row by its largest probability and '
        "compares it with how often that class occurred (Guo et al. 2017); the classwise error "
        "averages the one-vs-rest binned error of every class (Kull et al. 2019).</p>",
        ece_note(c),
        notes_box([n for n in c.notes if n.key.startswith(("metric:", "cells"))],
                  "notes-calibration"),
        late_label_html(c),
    ]
    if c.calibration_method is not None:
        parts.append(f"<p>Calibration map in use: <b>{_text(c.calibration_method)}</b>.</p>")
    parts.append(_figure(
        "fig-reliability", figures["reliability"],
        f"Top-label reliability diagram: accuracy of the most probable class against its mean "
        f"probability in {c.n_bins} equal-width bins, with {level} Wilson (1927) intervals"
        f"{widened_words(c)}; rows per bin below.",
        figure_notes(c, "reliability"),
    ))
    parts.append("</section>")
    return "".join(parts)


def _decisions(c: MulticlassReportContent, figures: dict[str, str]) -> str:
    parts = ['<section id="decisions"><h2><span class="pw-num">2</span>Decisions</h2>']
    if c.cost_matrix is None:
        parts.append(
            "<p>No costs were given, so no decision rule was chosen. Cost and decision curves "
            "are defined for two classes and two actions only.</p></section>"
        )
        return "".join(parts)
    m = c.cost_matrix
    head = "".join(f"<th>{_text(a)}</th>" for a in c.action_names)
    body = "".join(
        f'<tr data-item="cost:{i}"><td>{_text(name)}</td>'
        + "".join(_num(v, 2) for v in m[i]) + "</tr>"
        for i, name in enumerate(c.class_names)
    )
    what = ("Mean cost matrix over the labelled rows (each row has its own matrix)"
            if c.per_row_costs else "Cost matrix")
    parts.append(
        f"<p>{what}: rows are the true class, columns the actions; negative entries are "
        "gains.</p>"
        f'<table id="cost-matrix"><thead><tr><th>true class</th>{head}</tr></thead>'
        f"<tbody>{body}</tbody></table>"
    )
    cap = "no capacity limit"
    if c.capacity is not None:
        j, share = c.capacity
        cap = (f"at most <span id=\"capacity\" data-value=\"{share!r}\">{100 * share:.1f}%"
               f"</span> of rows may receive &ldquo;{_text(c.action_names[j])}&rdquo;")
    parts.append(f'<p id="chosen-rule">Rule in use: {_text(c.rule_source)}; {cap}.')
    if c.budget_threshold is not None and c.budget_threshold <= 0:
        parts.append(" The capacity does not bind: the least-cost actions already stay within it.")
    elif c.budget_threshold is not None:
        parts.append(
            " Within the capacity a row takes the limited action only when that saves at least "
            f'<span id="budget-threshold" data-value="{c.budget_threshold!r}">'
            f"{c.budget_threshold:.4f}</span> in expected cost against its next best action."
        )
    parts.append("</p>")
    if c.class_offsets is not None and np.any(c.class_offsets != 0):
        cells = "".join(
            f'<tr data-item="offset:{i}"><td>{_text(name)}</td>{_num(c.class_offsets[i])}</tr>'
            for i, name in enumerate(c.class_names)
        )
        parts.append(
            "<p>Tuned class offsets, added to the log-probabilities before the expected costs "
            "are compared:</p>"
            '<table id="class-offsets"><thead><tr><th>class</th><th>offset</th></tr></thead>'
            f"<tbody>{cells}</tbody></table>"
        )
    target = any(r.target_expected_cost is not None for r in c.rules)
    share_head = "".join(f"<th>share {_text(a)}</th>" for a in c.action_names)
    head = (
        f"<tr><th>rule</th><th>mean cost per row</th>{share_head}"
        + (("<th>within capacity (unlabelled rows)</th>" if target else
             "<th>within capacity</th>") if c.capacity is not None else "")
        + ("<th>expected cost (unlabelled)</th>" if target else "")
        + "</tr>"
    )
    rows = []
    for r in c.rules:
        rec = c.recommendation is not None and r.key == c.recommendation.key
        cls = " ".join(k for k, on in (("pw-chosen", r.key == "chosen"),
                                       ("pw-recommended", rec)) if on)
        cls = f' class="{cls}"' if cls else ""
        cells = [f"<td>{_text(r.label)}</td>", _num(r.mean_cost)]
        cells += [_share(s) for s in r.shares]
        if c.capacity is not None:
            cells.append(f"<td>{'yes' if r.within_capacity else 'no'}</td>")
        if target:
            cells.append(_num(r.target_expected_cost))
        rows.append(f'<tr data-rule="{r.key}"{cls}>{"".join(cells)}</tr>')
    parts.append(f'<table id="rule-comparison"><thead>{head}</thead><tbody>{"".join(rows)}'
                 "</tbody></table>")
    if target:
        tshare = "".join(f"<th>share {_text(a)}</th>" for a in c.action_names)
        trows = "".join(
            f'<tr data-rule="target:{r.key}"><td>{_text(r.label)}</td>'
            + "".join(_share(s) for s in r.target_shares) + "</tr>"
            for r in c.rules if r.target_shares is not None
        )
        parts.append(
            "<p>The same rules on the unlabelled rows:</p>"
            f'<table id="rule-comparison-unlabelled"><thead><tr><th>rule</th>{tshare}</tr>'
            f"</thead><tbody>{trows}</tbody></table>"
        )
    parts.append(
        '<p class="pw-note">Mean cost per row is the realised cost on the labelled rows of '
        "this report. A rule tuned on these same rows is optimistic there; prefer held-out or "
        "later rows for the comparison. The row marked &#9654; is the recommended rule."
        + (" The unlabelled column uses the posteriors re-weighted to the estimated new class "
           "shares (expected, not realised, cost)." if target else "")
        + "</p>"
    )
    if "actions" in figures:  # drawn with matplotlib only (the plot extra)
        parts.append(_figure(
            "fig-actions", figures["actions"],
            "Share of labelled rows given each action under each rule, with the rule's mean cost "
            "per row at the right" + (" and the capacity marked." if c.capacity else "."),
            figure_notes(c, "actions"),
        ))
    parts.append("</section>")
    return "".join(parts)


def pull_words(c: Any, toward: str, level: str) -> tuple[str, str]:
    """How far the shrunk estimate was pulled toward the ``toward`` (the source prevalence or
    shares), for the prevalence section: ``(words in brackets, a sentence or "")``.

    The pull is ``prior_strength`` pseudo-rows unless the unlabelled rows reject the estimate
    with all of them at the interval's level; then it fades with the evidence of a shift to
    ``pseudo_rows`` and the shrunk estimate lies inside the interval (``PriorEstimate``, since
    4 December 2026), which the sentence says. (Before, a fixed pull could hold the shrunk
    value outside the interval, and the page said so.)
    """
    strength = getattr(c, "prior_strength", None)
    used = getattr(c, "pseudo_rows", None)
    if strength is None:
        return f"toward the {toward}", ""
    if used is None or used >= strength:
        return f"as if {strength:g} labelled rows at the {toward} were added", ""
    return (
        f"as if {used:.2g} labelled rows at the {toward} were added",
        f" Here the unlabelled rows reject, at the {level} level, the estimate shrunk by the "
        f"full {strength:g} rows, so the pull faded with the evidence of a shift (to "
        f"{used:.2g} rows) and the shrunk value lies inside the interval.",
    )


def _prevalence(c: MulticlassReportContent, figures: dict[str, str]) -> str:
    parts = ['<section id="prevalence"><h2><span class="pw-num">3</span>Class shares</h2>']
    if c.target_prior is None:
        parts.append(
            "<p>No unlabelled rows were given, so the class shares of the deployment data were "
            "not estimated.</p></section>"
        )
        return "".join(parts)
    level = f"{c.confidence_level:.0%}"
    ml = getattr(c, "ml_prior", None)
    ml_iv = getattr(c, "ml_interval", None)
    # the shrunk estimate differs from the maximum-likelihood one at the shown precision: show
    # both, the interval with the estimate it belongs to (not widened to the other)
    both = ml is not None and float(np.max(np.abs(ml - c.target_prior))) >= 5e-5
    iv = ml_iv if ml_iv is not None else c.target_interval
    pull, faded = pull_words(c, "source shares", level)
    applied = getattr(c, "applied_prior", None)
    weight = getattr(c, "adaptation_weight", None)
    if weight is None:
        applied = None
    rows = "".join(
        f'<tr data-item="prior:{j}"><td>{_text(name)}</td>{_num(c.source_prior[j])}'
        f"{_num(ml[j] if both else c.target_prior[j])}"
        + (f"{_num(iv[j, 0])}{_num(iv[j, 1])}" if iv is not None else "")
        + (f"{_num(c.target_prior[j])}" if both else "")
        + (f"{_num(applied[j])}" if applied is not None else "")
        + "</tr>"
        for j, name in enumerate(c.class_names)
    )
    parts.append(
        '<table id="prevalence-summary"><thead><tr><th>class</th><th>source share</th>'
        + (f"<th>estimated target share, maximum likelihood ({_text(c.prior_method)})</th>"
           if both else f"<th>estimated target share ({_text(c.prior_method)})</th>")
        + (f"<th>{level} low</th><th>{level} high</th>" if iv is not None else "")
        + (f"<th>shrunk toward the source shares ({pull})</th>" if both else "")
        + ("<th>applied by the rules (the source shares moved "
           f"{share_of_way(weight)} of the way to the estimate)</th>"
           if applied is not None else "")
        + f"</tr></thead><tbody>{rows}"
        f'<tr data-item="shift_statistic"><td>shift test statistic (score test, on the '
        f"chi-square scale, {c.n_classes - 1} df)</td>{_num(c.shift_statistic)}</tr>"
        f'<tr data-item="shift_pvalue"><td>shift test p-value</td>'
        f'<td data-value="{c.shift_pvalue!r}">{c.shift_pvalue:.3g}</td></tr></tbody></table>'
    )
    verdict = (
        "The test rejects &ldquo;no shift&rdquo; at the 1% level: the class shares have moved."
        if c.shift_pvalue < 0.01 else
        "The test does not reject &ldquo;no shift&rdquo; at the 1% level."
    )
    parts.append(
        f"<p>Estimated from {c.n_unlabelled or 'the'} unlabelled rows, assuming only the class "
        f"shares changed (prior shift). {verdict}"
        + (f" {_text(units)}" if (units := prevalence_unit_words(c)) else "") + "</p>"
    )
    if both:
        parts.append(
            f'<p id="prevalence-shrunk">The {level} intervals are confidence intervals for the '
            "class shares of the population the unlabelled rows come from, around the "
            "maximum-likelihood estimate. The rules start from that estimate shrunk toward the "
            f"source shares ({pull}), so that a noisy estimate does not move every decision."
            + faded + "</p>"
        )
    if applied is not None:
        parts.append(gate_sentence(weight, "class shares"))
    parts.append(notes_box([n for n in c.notes if n.key in ("prevalence", "batches")],
                           "notes-prevalence"))
    if "class_prior" in figures:  # drawn with matplotlib only (the plot extra)
        parts.append(_figure(
            "fig-class-prior", figures["class_prior"],
            f"Share of each class in the labelled rows and estimated in the unlabelled rows, with "
            f"{level} intervals.",
            figure_notes(c, "class_prior"),
        ))
    parts.append(_batches(c, figures))
    parts.append("</section>")
    return "".join(parts)


def _alarm_warnings(c: MulticlassReportContent) -> dict[str, list[int]]:
    """Each distinct warning of the class alarms once, with the classes it came up for (the
    labelled rows' shared error is the same for every class)."""
    out: dict[str, list[int]] = {}
    for j, a in c.class_alarms.items():
        for w in a.warnings:
            out.setdefault(w, []).append(j)
    return out


def _batches(c: MulticlassReportContent, figures: dict[str, str]) -> str:
    """Class shares batch by batch and one prevalence alarm per class (or nothing)."""
    table = c.batch_table
    if table is None:
        return ""
    level = f"{c.confidence_level:.0%}"
    head = "".join(f"<th>{_text(name)}</th>" for name in c.class_names)
    # a share kept near the source share for lack of rows says so, with the rows alone
    held, ml = general_held(table)

    def mark(i: int, j: int) -> str:
        return f" {_text(held_cell_mark(float(ml[i, j])))}" if held[i, j] else ""

    body = "".join(
        f'<tr data-item="batch:{_text(str(table["batch"][i]))}" '
        f'data-held="{int(held[i].any())}"><td>'
        f'{_text(str(table["batch"][i]))}</td><td>{int(table["n_rows"][i])}</td>'
        + "".join(
            f'<td data-value="{float(table["prior"][i, j])!r}">{table["prior"][i, j]:.4f} '
            f'[{table["lower"][i, j]:.4f}, {table["upper"][i, j]:.4f}]{mark(i, j)}</td>'
            for j in range(c.n_classes))
        + f'<td data-value="{float(table["shift_pvalue"][i])!r}">'
        f'{table["shift_pvalue"][i]:.3g}</td></tr>'
        for i in range(table.shape[0]))
    parts = [
        '<h3 id="class-batches-title">Class shares by batch</h3>',
        f"<p>Each batch's estimated class shares with {level} intervals, and the p-value of its "
        "test of no shift against the source shares.</p>",
        f'<table id="class-batches"><thead><tr><th>batch</th><th>rows</th>{head}'
        f"<th>shift test p-value</th></tr></thead><tbody>{body}</tbody></table>",
        held_note(table, held.any(axis=1), "the source shares", "class-batches-held"),
    ]
    if c.class_alarms:
        rows = []
        for j, a in c.class_alarms.items():
            res = a.result
            if a.first_batch is None:
                verdict = "no alarm"
            else:
                way = "rose" if res.direction[0] > 0 else "fell"
                verdict = (f"alarm after batch {_text(a.first_batch)} (the share {way}; "
                           f"{res.alarms.size} in all)")
            rows.append(
                f'<tr data-item="alarm:{j}" data-first-alarm="{_text(a.first_batch or "")}" '
                f'data-n-alarms="{res.alarms.size}"><td>{_text(c.class_names[j])}</td>'
                f"<td>{verdict}</td>"
                f'<td data-value="{a.in_control_run_length!r}">'
                f"{a.in_control_run_length:.0f}</td></tr>")
        n_charts = len(c.class_alarms)
        first = next(iter(c.class_alarms.values())).result
        several = (
            f" With one chart per class ({n_charts} charts), a false alarm on any of them comes "
            f"up to {n_charts} times as often as the run length of one chart (a union bound)."
            if n_charts > 1 else "")
        parts.append(
            '<table id="class-alarms"><thead><tr><th>class</th><th>prevalence alarm</th>'
            f"<th>in-control run length (batches, probability "
            f"{next(iter(c.class_alarms.values())).run_length_probability:g})</th></tr></thead>"
            f"<tbody>{''.join(rows)}</tbody></table>"
            "<p>Prevalence alarm per class: a two-sided CUSUM (Page 1954; k = "
            f"{first.reference:g}, h = {first.decision_interval:g}) of each batch's signed "
            "shift score for that class, a standard normal when nothing moved; the run length "
            "is the one reached with that probability over the labelled rows every batch is "
            f"compared with.{several} "
            + "".join(f"Note ({', '.join(_text(c.class_names[j]) for j in where)}): "
                      f"{_text(w)} " for w, where in _alarm_warnings(c).items())
            + "An alarm says the estimates drifted, not why; check a labelled sample before "
            "acting.</p>")
        for j in c.class_alarms:
            key = f"alarm:{j}"
            if key in figures:
                parts.append(_figure(
                    f"fig-alarm-{j}", figures[key],
                    f"Two-sided CUSUM of the batch shift scores of {_text(c.class_names[j])} "
                    "against its source share; an alarm fires when a sum crosses the dashed "
                    "decision interval and both sums restart.",
                    figure_notes(c, key)))
    return "".join(parts)


def general_sections(c: MulticlassReportContent, figures: dict[str, str]) -> str:
    """Calibration, decisions and class-share sections (the caller adds the cautions)."""
    return _calibration(c, figures) + _decisions(c, figures) + _prevalence(c, figures)


def general_glance(c: MulticlassReportContent) -> list[tuple[str, Any]]:
    items: list[tuple[str, Any]] = [("labelled rows", f"{c.n_rows}"),
                                    ("classes", f"{c.n_classes}")]
    if c.rules:
        items.append(("actions", f"{len(c.action_names)}"))
        items.append(("mean cost of the rule in use", f"{c.rules[0].mean_cost:.4f}"))
    if c.shift_pvalue is not None:
        items.append(("shift test p-value", f"{c.shift_pvalue:.3g}"))
    return items
