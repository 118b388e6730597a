"""The report's "by group" section: calibration, scores and the decision rule in every group."""

from __future__ import annotations

from typing import Any

from ._html_parts import _cut, _text

__all__ = ["group_section"]


def _cell(value: float, digits: int = 4) -> str:
    return "<td>&ndash;</td>" if value != value else f"<td>{value:.{digits}f}</td>"


def _interval(pair: tuple[float, float], supported: bool = True) -> str:
    lo, hi = pair
    if lo != lo:
        return "<td>&ndash;</td>"
    mark = "" if supported else ' <small class="pw-unsupported">(not supported)</small>'
    return f"<td>[{lo:.4f}, {hi:.4f}]{mark}</td>"


def resampled_words(checks: Any) -> str:
    """What the group intervals resampled, for the page."""
    return ("whole cells resampled" if getattr(checks, "resampled", "rows") == "cells"
            else "rows resampled")


def row_name(checks: Any, g: Any) -> str:
    """The name a by-group table shows for ``g``: its group, or "all" for the overall row;
    "all rows (overall)" where a group is itself named "all" (before, two rows of the table
    read "all", and the overall one could not be told from the group)."""
    if g is not checks.overall:
        return str(g.group)
    names = {str(x.group) for x in checks.groups}
    name = "all"
    if name in names:
        name = "all rows (overall)"
        while name in names:
            name += "*"
    return name


def group_section(c: Any) -> str:
    """HTML for ``c.group_checks`` (a :class:`probwrap.metrics.GroupChecks`), or ``""``."""
    checks = getattr(c, "group_checks", None)
    if checks is None:
        return ""
    decision = checks.cutoff is not None
    head = ("<th>group</th><th>rows</th><th>judged</th><th>observed rate</th>"
            "<th>mean forecast</th><th>smooth ECE</th><th>slope</th><th>intercept</th>"
            "<th>Brier</th><th>interval</th><th>log loss</th><th>interval</th>")
    if decision:
        head += ("<th>share acted on</th><th>false-positive rate</th>"
                 "<th>false-negative rate</th><th>mean cost</th>")
    rows = []
    for g in [*checks.groups, checks.overall]:
        judged = "yes" if g.judged else "<b>too small to judge</b>"
        units = getattr(g, "cells", None)  # counts: the group's cells, the units judged
        size = (f"{g.effective_rows:.0f}" if units is None
                else f"{g.effective_rows:.0f} ({units[0]} cells)")
        name = row_name(checks, g)
        cells = [f"<td>{_text(name)}</td>", f"<td>{size}</td>",
                 f"<td>{judged}</td>", _cell(g.observed_rate), _cell(g.mean_forecast),
                 _cell(g.calibration_error), _cell(g.calibration_slope, 3),
                 _cell(g.calibration_intercept, 3), _cell(g.brier), _interval(g.brier_interval, g.judged),
                 _cell(g.log_loss), _interval(g.log_loss_interval, g.judged)]
        if decision:
            cells += [_cell(g.share_acted_on), _cell(g.false_positive_rate),
                      _cell(g.false_negative_rate), _cell(g.mean_cost)]
        rows.append(f'<tr data-group="{_text(name)}">{"".join(cells)}</tr>')
    gaps = "".join(
        f"<li>{_text(x.metric.replace('_', ' '))}: {x.gap:.4f} (highest "
        f"{_text(str(x.highest))}, lowest {_text(str(x.lowest))}{gap_interval_text(x)})</li>"
        for x in checks.gaps
    )
    rule = (f" The decision columns are for the rule &ldquo;act when p &gt; {_cut(checks.cutoff)}"
            "&rdquo;." if decision else "")
    notes = "".join(f"<p>{_text(n)}</p>" for n in checks.notes)
    return (
        '<section id="by-group"><h2>By group</h2>'
        "<p>The checks above, group by group: smooth calibration error (Błasiok &amp; Nakkiran "
        "2023), calibration slope and intercept (Cox 1958), scores with bootstrap intervals "
        f"({resampled_words(checks)} within the group).{rule} Groups below {checks.min_rows:g} rows "
        f"or {checks.min_events:g} rows of either class (common practice) are "
        "listed but not judged and left out of the gaps (rows are counted with the weights as "
        "row frequencies; weights summing to less than the number of rows are first rescaled "
        "to Kish's effective size); their intervals are shown but not "
        "supported (with few events they cover far less than their level), and a group with one "
        "class has none. Equal calibration and equal error "
        "rates across groups are different notions of fairness; when base rates differ they "
        "cannot both hold.</p>"
        f'<table id="group-checks"><thead><tr>{head}</tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table>"
        + (f'<h3>Largest gaps between judged groups first</h3>'
           "<p>Each with the bootstrap interval of the difference between its two groups "
           f"({resampled_words(checks)} within each group; none for the calibration error, "
           "whose resampled values "
           f'are biased upwards).</p><ul id="group-gaps">{gaps}</ul>'
           if gaps else "<p>Fewer than two judged groups: no gaps to compare.</p>")
        + notes + "</section>"
    )


def gap_interval_text(x: Any) -> str:
    """The HTML clause quoting a gap's bootstrap interval (``""`` without one)."""
    lo, hi = getattr(x, "interval", (float("nan"), float("nan")))
    if lo != lo:
        return ""
    scale = " on the log scale" if x.metric == "calibration_slope" else ""
    return (f"; difference {_text(str(x.highest))} minus {_text(str(x.lowest))}{scale} "
            f"[{lo:.4f}, {hi:.4f}]" + (", which contains 0: the order of these two is not "
                                        "established" if lo <= 0.0 <= hi else ""))
