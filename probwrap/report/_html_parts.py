"""HTML pieces both report forms use: table cells, figures, the notes and recommendation boxes."""

from __future__ import annotations

import html
import io
import re
from typing import Any

import numpy as np

from .._validation import cutoff_text

__all__ = ["figure_to_svg", "notes_box", "recommendation_box"]


def figure_to_svg(figure: Any, key: str) -> str:
    """The figure as an inline ``<svg>`` element (text drawn as paths, ids unique per key)."""
    import matplotlib

    with matplotlib.rc_context({"svg.fonttype": "path", "svg.hashsalt": f"probwrap-{key}"}):
        buf = io.StringIO()
        # no date in the file: the same inputs and seed give the same page, byte for byte
        figure.savefig(buf, format="svg", facecolor="white", metadata={"Date": None})
    text = buf.getvalue()
    svg = text[text.index("<svg"):]
    # several figures share one page: prefix every id and every reference to one
    svg = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{key}-{m.group(1)}"', svg)
    svg = re.sub(r'url\(#([^)]+)\)', lambda m: f"url(#{key}-{m.group(1)})", svg)
    return re.sub(r'href="#([^"]+)"', lambda m: f'href="#{key}-{m.group(1)}"', svg)


def _fmt(v: float, digits: int = 4) -> str:
    """A number for the page: fixed digits, or 6 significant ones when huge (no 300 digits)."""
    return f"{v:.{digits}f}" if abs(v) < 1e9 else f"{v:.6g}"


def _cut(value: float) -> str:
    """A cutoff for the page: 4 decimals, more where those would read as exactly 0 or 1."""
    return cutoff_text(value, ".4f")


def _num(value: float | None, digits: int = 4) -> str:
    """A table cell holding a number, with the full value in ``data-value``."""
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return '<td data-value="">&ndash;</td>'
    v = float(value)
    return f'<td data-value="{v!r}">{_fmt(v, digits)}</td>'


def _num_cut(value: float | None) -> str:
    """A table cell holding a cutoff (see :func:`_cut`), with the full value in ``data-value``."""
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return _num(value)
    return f'<td data-value="{float(value)!r}">{_cut(float(value))}</td>'


def _share(value: float | None) -> str:
    if value is None:
        return '<td data-value="">&ndash;</td>'
    return f'<td data-value="{float(value)!r}">{100 * float(value):.1f}%</td>'


def _text(value: Any) -> str:
    return html.escape(str(value))


def _figure(fig_id: str, svg: str, caption: str, notes: Any = ()) -> str:
    """A figure with its caption and, right under it, the notes met while drawing it."""
    return (
        f'<figure class="pw-figure" id="{fig_id}">{svg}'
        f"<figcaption>{_text(caption)}</figcaption></figure>"
        + notes_box(list(notes), f"notes-{fig_id}", "Notes on this figure")
    )


def _times(count: int) -> str:
    return (f", raised {count} times in this computation (a bootstrap raises it in each "
            f"resample that meets it), the first shown" if count > 1 else "")


def notes_box(notes: Any, box_id: str, title: str = "Notes") -> str:
    """A "notes" box listing warnings met while computing the numbers beside it (or nothing)."""
    if not notes:
        return ""
    # a count is of times raised, not of rows (a bootstrap meets one row in many resamples)
    items = "".join(
        f'<li data-note="{_text(n.key)}" data-kind="{_text(n.kind)}"><b>{_text(n.about)}</b> '
        f"({_text(n.kind)}{_times(n.count)}): "
        f"{_text(n.message)}"
        "</li>"
        for n in notes
    )
    return (f'<aside class="pw-notes" id="{box_id}"><h3>{_text(title)}</h3><ul>{items}</ul>'
            "</aside>")


def recommendation_box(c: Any) -> str:
    """The short "recommendation" box at the top of a report (or nothing without costs)."""
    r = getattr(c, "recommendation", None)
    if r is None:
        return ""
    where = ("expected on the unlabelled rows, at the estimated prevalence or class shares" if
             r.basis == "unlabelled" else "realised on the labelled rows")
    rule = f"<b>{_text(r.name)}</b>"
    if r.cutoff is not None:
        a1 = _text(c.action_names[1])
        rule = (f"&ldquo;{a1}&rdquo; when the probability exceeds <b id=\"recommended-cutoff\" "
                f'data-value="{r.cutoff!r}">{_cut(r.cutoff)}</b> ({_text(r.name)})')
    share = (f'share acted on <b id="recommended-share" data-value="{r.acted_share!r}">'
             f"{100 * r.acted_share:.1f}%</b>")
    if r.action_shares is not None:
        share = "shares " + ", ".join(
            f"{_text(a)} {100 * v:.1f}%" for a, v in zip(c.action_names, r.action_shares,
                                                       strict=True))
    cap = ""
    if r.within_capacity is not None:
        cap = (" &mdash; within the capacity" if r.within_capacity
               else " &mdash; <b>over the capacity</b>")
    reasons = "".join(f"<li>{_text(t)}</li>" for t in r.reasons)
    return (
        f'<aside class="pw-recommend" id="recommendation" data-rule="{_text(r.key)}">'
        f"<h2>Recommendation</h2><p>Use now: {rule}. Cost per row "
        f'<b id="recommended-cost" data-value="{r.expected_cost!r}">{_fmt(r.expected_cost)}</b>, '
        f"{share} ({where}){cap}.</p>"
        f"<p>Why:</p><ul>{reasons}</ul>"
        '<p class="pw-note">A recommendation from these data only: check it against the '
        "cautions at the end, and defer to local regulation and licensed professional "
        "practice where decisions affect people.</p></aside>"
    )



def metric_rows_html(c: Any) -> str:
    """Rows of a calibration-metric table; a metric with notes links to the notes box."""
    noted = {n.key for n in getattr(c, "notes", [])}
    out = []
    for m in c.metrics:
        mark = (' <sup class="pw-mark"><a href="#notes-calibration">note</a></sup>'
                if f"metric:{m.key}" in noted else "")
        # resamples on which the number could not be computed (left out of the interval)
        dropped = getattr(m, "dropped_resamples", 0)
        count = f' data-dropped-resamples="{dropped}"' if dropped else ""
        out.append(f'<tr data-metric="{m.key}"{count}>'
                   f"<td>{_text(m.label)}{mark}</td>{_num(m.value)}"
                   f"{_num(m.low)}{_num(m.high)}<td>{_text(m.ideal)}</td></tr>")
    return "".join(out)


def ece_note(c: Any) -> str:
    """How the binned calibration errors and their intervals are computed (plain values too)."""
    plain = [(m.label.split(" (")[0], m.plain_value) for m in c.metrics
             if m.plain_value is not None and np.isfinite(m.plain_value)]
    if not plain:
        return ""
    said = "; ".join(f"{_text(label)} {value:.4f}" for label, value in plain)
    return (
        '<p class="pw-note" id="ece-note">A binned calibration error is biased upwards: '
        "resampled values lie mostly above the value itself, so a percentile interval can miss "
        "it. It is therefore shown bias-corrected (twice the plain value minus the median of "
        "the resampled values) with the basic bootstrap interval (Davison &amp; Hinkley 1997, "
        "section 5.2.1), which contains that estimate; both are floored at 0. Plain binned "
        f"values: {said}.</p>"
    )


def share_of_way(weight: float | None) -> str:
    """``adaptation_weight`` as words: "none", "all" or a percentage."""
    if weight is None or weight <= 0:
        return "none"
    return "all" if weight >= 1 else f"{100 * weight:.0f}%"


def gate_sentence(weight: float, what: str) -> str:
    """What the evidence gate did, as PriorShiftWrapper does it (``adaptation_weight_``)."""
    if weight <= 0:
        return (f'<p id="prevalence-gate">The shift evidence is below the cutoff at which '
                f"PriorShiftWrapper moves the {what}, so the rules do not move: they act as on "
                "the labelled rows.</p>")
    return (f'<p id="prevalence-gate">As PriorShiftWrapper does, the rules move the {what} '
            f"{share_of_way(weight)} of the way from the labelled rows' to the shrunk estimate: "
            "the stronger the shift test's evidence, the further (adaptation weight "
            f"{weight:.3g}).</p>")
