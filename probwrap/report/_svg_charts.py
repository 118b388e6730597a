"""A small dependency-free SVG chart renderer (NumPy only) for the report's figures.

A :class:`Chart` holds one or more vertically stacked :class:`Panel` objects (relative heights).
Each panel has its own data limits, "nice" ticks, axis labels, an optional title, series (lines,
shaded bands, error bars, reference lines, spans, bars, points) and an optional legend.
:meth:`Chart.to_svg` returns one inline-safe ``<svg>`` element: every id starts with the chart's
``key`` (several charts share one page), all text is XML-escaped, there are no scripts, and the
element carries ``width``, ``height``, ``viewBox``, ``role="img"`` and a ``<title>``.

Each panel group records its data limits and plot box (``data-xlim``, ``data-ylim``,
``data-box``) and each series group its name (``data-series``), so drawn coordinates can be
mapped back to data values by :func:`~._svg_axes.pixel_to_data`. The axis arithmetic ("nice"
ticks, their labels, data-to-pixel mapping) lives in :mod:`._svg_axes`.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any
from xml.sax.saxutils import escape, quoteattr

import numpy as np

from .._validation import plain
from ._svg_axes import data_to_pixel, format_ticks, nice_ticks

__all__ = ["Chart", "Panel"]

_FONT = "'DejaVu Sans', Verdana, Arial, sans-serif"
_INK = "#1f2a36"  # same value as probwrap.plot._style.PALETTE["ink"]
_GRID = "#e4e0d6"  # PALETTE["grid"]
_PAPER = "#fbfaf6"  # PALETTE["paper"]
_KEY = re.compile(r"^[A-Za-z][A-Za-z0-9_-]*$")


def _f(v: float) -> str:
    """A pixel coordinate: 6 decimals, so data values survive a round trip to ~1e-8."""
    s = f"{float(v):.6f}".rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _dash(dash: Any) -> str:
    if dash is None:
        return ""
    if isinstance(dash, str):
        dash = {"dashed": (5, 3), "dotted": (1.2, 2.4), "dashdot": (6, 2, 1.5, 2)}[dash]
    return f' stroke-dasharray="{" ".join(_f(d) for d in dash)}"'


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Start/stop index pairs of the True runs of a boolean array."""
    padded = np.concatenate([[False], mask, [False]]).astype(np.int8)
    edges = np.flatnonzero(np.diff(padded))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist(), strict=True))


@dataclass
class _Item:
    kind: str
    name: str
    data: dict[str, Any]
    style: dict[str, Any]


@dataclass
class Panel:
    """One plotting area of a :class:`Chart`; add series with its methods.

    Parameters
    ----------
    xlim, ylim : tuple of float
        Data limits (drawing is clipped to them).
    xlabel, ylabel : str
    title : str, optional
    height : float, default=1.0
        Relative height among the chart's panels.
    xticks, yticks : array-like, optional
        Tick positions (default :func:`nice_ticks`).
    xticklabels : sequence of str, optional
        Labels of ``xticks`` (default :func:`format_ticks`).
    show_xticklabels : bool, default=True
    """

    xlim: tuple[float, float]
    ylim: tuple[float, float]
    xlabel: str = ""
    ylabel: str = ""
    title: str | None = None
    height: float = 1.0
    xticks: Any = None
    yticks: Any = None
    xticklabels: Any = None
    show_xticklabels: bool = True
    items: list[_Item] = field(default_factory=list)
    legend_loc: str | None = None

    def __post_init__(self) -> None:
        for name in ("xlim", "ylim"):
            lo, hi = (float(v) for v in getattr(self, name))
            if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
                raise ValueError(f"`{name}` must be finite with low < high; got {(lo, hi)}.")
            setattr(self, name, (lo, hi))

    def _add(self, kind: str, name: str | None, data: dict, **style: Any) -> Panel:
        self.items.append(_Item(kind, name or f"{kind}{len(self.items)}", data, style))
        return self

    def line(self, x: Any, y: Any, *, color: str = _INK, width: float = 1.5, dash: Any = None,
             marker: bool = False, marker_size: float = 3.0, label: str | None = None,
             name: str | None = None) -> Panel:
        """A polyline through ``(x, y)``; NaN values break it into pieces."""
        return self._add("line", name, {"x": np.asarray(x, float), "y": np.asarray(y, float)},
                         color=color, width=width, dash=dash, marker=marker,
                         marker_size=marker_size, label=label)

    def band(self, x: Any, low: Any, high: Any, *, color: str, opacity: float = 0.6,
             label: str | None = None, name: str | None = None) -> Panel:
        """A shaded region between ``low`` and ``high`` over ``x``."""
        return self._add("band", name, {"x": np.asarray(x, float), "low": np.asarray(low, float),
                                        "high": np.asarray(high, float)},
                         color=color, opacity=opacity, label=label)

    def errorbars(self, x: Any, low: Any, high: Any, *, color: str = _INK, width: float = 1.2,
                  cap: float = 3.0, label: str | None = None, name: str | None = None) -> Panel:
        """Vertical error bars from ``low`` to ``high`` at each ``x`` (with caps)."""
        return self._add("errorbars", name, {"x": np.asarray(x, float),
                                             "low": np.asarray(low, float),
                                             "high": np.asarray(high, float)},
                         color=color, width=width, cap=cap, label=label)

    def vline(self, x: float, *, color: str = _INK, width: float = 1.2, dash: Any = None,
              label: str | None = None, name: str | None = None) -> Panel:
        """A vertical reference line across the panel at ``x``."""
        return self._add("vline", name, {"x": float(x)}, color=color, width=width, dash=dash,
                         label=label)

    def hline(self, y: float, *, color: str = _INK, width: float = 1.2, dash: Any = None,
              label: str | None = None, name: str | None = None) -> Panel:
        """A horizontal reference line across the panel at ``y``."""
        return self._add("hline", name, {"y": float(y)}, color=color, width=width, dash=dash,
                         label=label)

    def vspan(self, low: float, high: float, *, color: str, opacity: float = 0.8,
              label: str | None = None, name: str | None = None) -> Panel:
        """A shaded vertical strip from ``x = low`` to ``x = high``."""
        return self._add("vspan", name, {"low": float(low), "high": float(high)}, color=color,
                         opacity=opacity, label=label)

    def bars(self, left: Any, right: Any, height: Any, *, color: str, edge: str = _INK,
             label: str | None = None, name: str | None = None) -> Panel:
        """Bars from ``y = 0`` to ``height`` spanning ``[left, right]``."""
        return self._add("bars", name, {"left": np.asarray(left, float),
                                        "right": np.asarray(right, float),
                                        "height": np.asarray(height, float)},
                         color=color, edge=edge, label=label)

    def points(self, x: Any, y: Any, *, color: str = _INK, radius: float = 3.0,
               fill: str | None = None, stroke_width: float = 1.2, label: str | None = None,
               name: str | None = None) -> Panel:
        """Circles at ``(x, y)``; ``fill=None`` fills with ``color``, ``"none"`` leaves rings."""
        return self._add("points", name, {"x": np.asarray(x, float), "y": np.asarray(y, float)},
                         color=color, radius=radius, fill=fill, stroke_width=stroke_width,
                         label=label)

    def legend(self, loc: str = "upper left") -> Panel:
        """Show a legend of the labelled series: ``"upper left"``, ``"upper right"``,
        ``"lower left"`` or ``"lower right"``."""
        if loc not in ("upper left", "upper right", "lower left", "lower right"):
            raise ValueError(f"unknown legend location {plain(loc)!r}.")
        self.legend_loc = loc
        return self


class Chart:
    """A stack of panels drawn as one inline ``<svg>``.

    Parameters
    ----------
    key : str
        Prefix of every id in the SVG (letters, digits, ``-``, ``_``; starts with a letter).
    title : str
        Accessible title (the ``<title>`` element) and the heading drawn above the panels.
    width, height : int
        Size in pixels.
    description : str, optional
        Longer accessible description (``<desc>``).

    Examples
    --------
    >>> import xml.etree.ElementTree as ET
    >>> chart = Chart("demo", title="Squares & roots", width=300, height=200)
    >>> panel = chart.add_panel(xlim=(0, 2), ylim=(0, 4), xlabel="x", ylabel="x²")
    >>> panel = panel.line([0, 1, 2], [0, 1, 4], label="x < y?", name="sq").legend()
    >>> svg = chart.to_svg()
    >>> root = ET.fromstring(svg)
    >>> root.get("viewBox"), root.get("role")
    ('0 0 300 200', 'img')
    >>> "Squares &amp; roots" in svg and "x &lt; y?" in svg
    True
    >>> all(i.startswith("demo-") for i in re.findall(r'id="([^"]+)"', svg))
    True
    """

    def __init__(self, key: str, *, title: str, width: int = 560, height: int = 400,
                 description: str | None = None) -> None:
        if not _KEY.match(key):
            raise ValueError(f"`key` must be a letter followed by [A-Za-z0-9_-]; got {plain(key)!r}.")
        self.key = key
        self.title = str(title)
        self.width = int(width)
        self.height = int(height)
        self.description = description
        self.panels: list[Panel] = []

    def add_panel(self, **kwargs: Any) -> Panel:
        """Append a :class:`Panel` below the existing ones and return it."""
        panel = Panel(**kwargs)
        self.panels.append(panel)
        return panel

    # -- layout ------------------------------------------------------------------------------
    def _boxes(self) -> list[tuple[float, float, float, float]]:
        left, right, head = 62.0, 16.0, 30.0
        total = sum(p.height for p in self.panels)
        avail = self.height - head - 6.0
        boxes, top = [], head
        for p in self.panels:
            outer = avail * p.height / total
            pad_top = 20.0 if p.title else 6.0
            pad_bottom = (18.0 if p.show_xticklabels else 6.0) + (18.0 if p.xlabel else 0.0)
            boxes.append((left, top + pad_top, self.width - left - right,
                          max(outer - pad_top - pad_bottom, 10.0)))
            top += outer
        return boxes

    # -- drawing -----------------------------------------------------------------------------
    def to_svg(self) -> str:
        """The chart as one ``<svg>`` element (a string)."""
        if not self.panels:
            raise ValueError("a chart needs at least one panel.")
        k = self.key
        out = [
            f'<svg xmlns="http://www.w3.org/2000/svg" width="{self.width}" '
            f'height="{self.height}" viewBox="0 0 {self.width} {self.height}" role="img" '
            f'aria-labelledby="{k}-title{f" {k}-desc" if self.description else ""}" '
            f'class="pw-svg-chart" font-family="{_FONT}" data-key="{k}">',
            f'<title id="{k}-title">{escape(self.title)}</title>',
        ]
        if self.description:
            out.append(f'<desc id="{k}-desc">{escape(self.description)}</desc>')
        out.append(f'<rect x="0" y="0" width="{self.width}" height="{self.height}" '
                   'fill="#ffffff"/>')
        out.append(f'<text x="{_f(self.width / 2)}" y="18" text-anchor="middle" font-size="12" '
                   f'font-weight="bold" fill="{_INK}">{escape(self.title)}</text>')
        for i, (panel, box) in enumerate(zip(self.panels, self._boxes(), strict=True)):
            out.append(self._panel(i, panel, box))
        out.append("</svg>")
        return "".join(out)

    def _panel(self, i: int, p: Panel, box: tuple[float, float, float, float]) -> str:
        bx, by, bw, bh = box
        clip = f"{self.key}-clip{i}"

        def X(v: Any) -> np.ndarray:
            return data_to_pixel(v, p.xlim, bx, bw)

        def Y(v: Any) -> np.ndarray:
            return data_to_pixel(v, p.ylim, by, bh, flip=True)

        s = [f'<g class="pw-panel" data-panel="{i}" data-xlim="{p.xlim[0]!r} {p.xlim[1]!r}" '
             f'data-ylim="{p.ylim[0]!r} {p.ylim[1]!r}" '
             f'data-box="{bx!r} {by!r} {bw!r} {bh!r}">',
             f'<clipPath id="{clip}"><rect x="{_f(bx)}" y="{_f(by)}" width="{_f(bw)}" '
             f'height="{_f(bh)}"/></clipPath>',
             f'<rect x="{_f(bx)}" y="{_f(by)}" width="{_f(bw)}" height="{_f(bh)}" '
             f'fill="{_PAPER}"/>']
        xt = nice_ticks(*p.xlim, target=6) if p.xticks is None else np.asarray(p.xticks, float)
        yt = nice_ticks(*p.ylim, target=5) if p.yticks is None else np.asarray(p.yticks, float)
        inside = (xt >= p.xlim[0] - 1e-12) & (xt <= p.xlim[1] + 1e-12)
        if p.xticklabels is None:
            xl = format_ticks(xt[inside])
        else:
            labels = [str(t) for t in p.xticklabels]
            if len(labels) != xt.shape[0]:
                raise ValueError("`xticklabels` needs one label per entry of `xticks`.")
            xl = [lab for lab, keep in zip(labels, inside, strict=True) if keep]
        xt = xt[inside]
        yt = yt[(yt >= p.ylim[0] - 1e-12) & (yt <= p.ylim[1] + 1e-12)]
        # grid, axes, ticks
        s.append(f'<g stroke="{_GRID}" stroke-width="0.6">')
        s += [f'<line x1="{_f(v)}" y1="{_f(by)}" x2="{_f(v)}" y2="{_f(by + bh)}"/>' for v in X(xt)]
        s += [f'<line x1="{_f(bx)}" y1="{_f(v)}" x2="{_f(bx + bw)}" y2="{_f(v)}"/>' for v in Y(yt)]
        s.append("</g>")
        s.append(f'<g class="pw-items" clip-path="url(#{clip})">')
        for item in p.items:
            s.append(self._item(item, p, box, X, Y))
        s.append("</g>")
        s.append(f'<path d="M{_f(bx)} {_f(by)} V{_f(by + bh)} H{_f(bx + bw)}" fill="none" '
                 f'stroke="{_INK}" stroke-width="0.8"/>')
        s.append(f'<g font-size="9" fill="{_INK}">')
        for v, lab in zip(X(xt), xl, strict=True):
            s.append(f'<line x1="{_f(v)}" y1="{_f(by + bh)}" x2="{_f(v)}" y2="{_f(by + bh + 4)}" '
                     f'stroke="{_INK}" stroke-width="0.8"/>')
            if p.show_xticklabels:
                s.append(f'<text x="{_f(v)}" y="{_f(by + bh + 14)}" text-anchor="middle">'
                         f"{escape(lab)}</text>")
        for v, lab in zip(Y(yt), format_ticks(yt), strict=True):
            s.append(f'<line x1="{_f(bx - 4)}" y1="{_f(v)}" x2="{_f(bx)}" y2="{_f(v)}" '
                     f'stroke="{_INK}" stroke-width="0.8"/>')
            s.append(f'<text x="{_f(bx - 6)}" y="{_f(v + 3)}" text-anchor="end">'
                     f"{escape(lab)}</text>")
        s.append("</g>")
        if p.xlabel:
            off = 30 if p.show_xticklabels else 16
            s.append(f'<text x="{_f(bx + bw / 2)}" y="{_f(by + bh + off)}" text-anchor="middle" '
                     f'font-size="10" fill="{_INK}">{escape(p.xlabel)}</text>')
        if p.ylabel:
            cx, cy = bx - 46, by + bh / 2
            s.append(f'<text x="{_f(cx)}" y="{_f(cy)}" text-anchor="middle" font-size="10" '
                     f'fill="{_INK}" transform="rotate(-90 {_f(cx)} {_f(cy)})">'
                     f"{escape(p.ylabel)}</text>")
        if p.title:
            s.append(f'<text x="{_f(bx)}" y="{_f(by - 6)}" font-size="10" font-style="italic" '
                     f'fill="{_INK}">{escape(p.title)}</text>')
        if p.legend_loc:
            s.append(self._legend(p, box))
        s.append("</g>")
        return "".join(s)

    @staticmethod
    def _item(it: _Item, p: Panel, box: tuple, X: Any, Y: Any) -> str:
        bx, by, bw, bh = box
        st, d = it.style, it.data
        head = f'<g class="pw-series pw-{it.kind}" data-series={quoteattr(it.name)}>'
        body: list[str] = []
        if it.kind == "line":
            x, y = d["x"], d["y"]
            ok = np.isfinite(x) & np.isfinite(y)
            px, py = X(x), Y(y)
            for a, b in _runs(ok):
                pts = " ".join(
                    f"{_f(u)},{_f(v)}" for u, v in zip(px[a:b], py[a:b], strict=True)
                )
                body.append(f'<polyline points="{pts}" fill="none" stroke="{st["color"]}" '
                            f'stroke-width="{_f(st["width"])}" stroke-linejoin="round"'
                            f'{_dash(st["dash"])}/>')
            if st["marker"]:
                body += [f'<circle cx="{_f(u)}" cy="{_f(v)}" r="{_f(st["marker_size"])}" '
                         f'fill="{st["color"]}"/>' for u, v in zip(px[ok], py[ok], strict=True)]
        elif it.kind == "band":
            x, lo, hi = d["x"], d["low"], d["high"]
            ok = np.isfinite(x) & np.isfinite(lo) & np.isfinite(hi)
            for a, b in _runs(ok):
                xs = X(x[a:b])
                up = [f"{_f(u)},{_f(v)}" for u, v in zip(xs, Y(hi[a:b]), strict=True)]
                down = [f"{_f(u)},{_f(v)}"
                        for u, v in zip(xs[::-1], Y(lo[a:b])[::-1], strict=True)]
                body.append(f'<polygon points="{" ".join(up + down)}" fill="{st["color"]}" '
                            f'fill-opacity="{_f(st["opacity"])}" stroke="none"/>')
        elif it.kind == "errorbars":
            x, lo, hi = d["x"], d["low"], d["high"]
            ok = np.isfinite(x) & np.isfinite(lo) & np.isfinite(hi)
            c = st["cap"]
            for u, v0, v1 in zip(X(x[ok]), Y(lo[ok]), Y(hi[ok]), strict=True):
                body.append(f'<path d="M{_f(u)} {_f(v0)} V{_f(v1)} M{_f(u - c)} {_f(v0)} '
                            f'H{_f(u + c)} M{_f(u - c)} {_f(v1)} H{_f(u + c)}" fill="none" '
                            f'stroke="{st["color"]}" stroke-width="{_f(st["width"])}"/>')
        elif it.kind in ("vline", "hline"):
            if it.kind == "vline":
                u = float(X(d["x"]))
                pts = f"{_f(u)},{_f(by)} {_f(u)},{_f(by + bh)}"
            else:
                v = float(Y(d["y"]))
                pts = f"{_f(bx)},{_f(v)} {_f(bx + bw)},{_f(v)}"
            body.append(f'<polyline points="{pts}" fill="none" stroke="{st["color"]}" '
                        f'stroke-width="{_f(st["width"])}"{_dash(st["dash"])}/>')
        elif it.kind == "vspan":
            u0, u1 = float(X(d["low"])), float(X(d["high"]))
            body.append(f'<rect x="{_f(u0)}" y="{_f(by)}" width="{_f(max(u1 - u0, 0.0))}" '
                        f'height="{_f(bh)}" fill="{st["color"]}" '
                        f'fill-opacity="{_f(st["opacity"])}"/>')
        elif it.kind == "bars":
            u0, u1 = X(d["left"]), X(d["right"])
            v0, v1 = Y(np.zeros_like(d["height"])), Y(d["height"])
            for a, b, c, e in zip(u0, u1, v0, v1, strict=True):
                body.append(f'<rect x="{_f(a)}" y="{_f(min(c, e))}" width="{_f(b - a)}" '
                            f'height="{_f(abs(c - e))}" fill="{st["color"]}" '
                            f'stroke="{st["edge"]}" stroke-width="0.4"/>')
        elif it.kind == "points":
            ok = np.isfinite(d["x"]) & np.isfinite(d["y"])
            fill = st["color"] if st["fill"] is None else st["fill"]
            body += [f'<circle cx="{_f(u)}" cy="{_f(v)}" r="{_f(st["radius"])}" fill="{fill}" '
                     f'stroke="{st["color"]}" stroke-width="{_f(st["stroke_width"])}"/>'
                     for u, v in zip(X(d["x"][ok]), Y(d["y"][ok]), strict=True)]
        return head + "".join(body) + "</g>"

    @staticmethod
    def _legend(p: Panel, box: tuple) -> str:
        bx, by, bw, bh = box
        entries = [it for it in p.items if it.style.get("label")]
        if not entries:
            return ""
        row, size = 13.0, 8.5
        text_w = max(len(it.style["label"]) for it in entries) * size * 0.56
        w, h = 26.0 + text_w + 8.0, row * len(entries) + 6.0
        x0 = bx + 6 if p.legend_loc.endswith("left") else bx + bw - w - 6
        y0 = by + 6 if p.legend_loc.startswith("upper") else by + bh - h - 6
        s = [f'<g class="pw-legend" font-size="{size}" fill="{_INK}">',
             f'<rect x="{_f(x0)}" y="{_f(y0)}" width="{_f(w)}" height="{_f(h)}" fill="#ffffff" '
             f'fill-opacity="0.85" stroke="{_GRID}" stroke-width="0.6"/>']
        for j, it in enumerate(entries):
            cy = y0 + 3 + row * j + row / 2
            st, sx = it.style, x0 + 5
            if it.kind in ("band", "vspan", "bars"):
                op = st.get("opacity", 1.0)
                s.append(f'<rect x="{_f(sx)}" y="{_f(cy - 4)}" width="16" height="8" '
                         f'fill="{st["color"]}" fill-opacity="{_f(op)}"/>')
            elif it.kind == "points":
                fill = st["color"] if st["fill"] is None else st["fill"]
                s.append(f'<circle cx="{_f(sx + 8)}" cy="{_f(cy)}" r="{_f(st["radius"])}" '
                         f'fill="{fill}" stroke="{st["color"]}" '
                         f'stroke-width="{_f(st["stroke_width"])}"/>')
            elif it.kind == "errorbars":
                s.append(f'<path d="M{_f(sx + 8)} {_f(cy - 5)} V{_f(cy + 5)} M{_f(sx + 5)} '
                         f'{_f(cy - 5)} H{_f(sx + 11)} M{_f(sx + 5)} {_f(cy + 5)} '
                         f'H{_f(sx + 11)}" stroke="{st["color"]}" fill="none" '
                         f'stroke-width="{_f(st["width"])}"/>')
            else:
                s.append(f'<line x1="{_f(sx)}" y1="{_f(cy)}" x2="{_f(sx + 16)}" y2="{_f(cy)}" '
                         f'stroke="{st["color"]}" stroke-width="{_f(st["width"])}"'
                         f'{_dash(st.get("dash"))}/>')
                if st.get("marker"):
                    s.append(f'<circle cx="{_f(sx + 8)}" cy="{_f(cy)}" r="2.5" '
                             f'fill="{st["color"]}"/>')
            s.append(f'<text x="{_f(sx + 21)}" y="{_f(cy + 3)}">{escape(st["label"])}</text>')
        s.append("</g>")
        return "".join(s)
