"""The probwrap look: a small palette and axis styling of our own."""

from __future__ import annotations

from typing import Any

__all__ = ["PALETTE", "style_axes", "new_axes"]

#: colours by role (our own choice: deep teal, sand, brick, indigo, olive on warm paper)
PALETTE: dict[str, str] = {
    "ink": "#1f2a36",
    "paper": "#fbfaf6",
    "grid": "#e4e0d6",
    "observed": "#0f6e74",
    "band": "#9fd3c7",
    "ideal": "#8c8579",
    "counts": "#c9a66b",
    "chosen": "#b8432f",
    "interval": "#f2d0c6",
    "plugin": "#4f3f8f",
    "half": "#6b7b3a",
    "treat_all": "#c0812b",
    "treat_none": "#7d8a96",
    "source": "#4f3f8f",
    "shifted": "#b8432f",
    "inadmissible": "#c7c2b6",
}


def style_axes(ax: Any) -> Any:
    """Apply the probwrap styling to one matplotlib axes and return it."""
    ax.set_facecolor(PALETTE["paper"])
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(PALETTE["ink"])
        ax.spines[side].set_linewidth(0.8)
    ax.tick_params(colors=PALETTE["ink"], labelsize=8)
    ax.grid(True, color=PALETTE["grid"], linewidth=0.6)
    ax.set_axisbelow(True)
    ax.xaxis.label.set_color(PALETTE["ink"])
    ax.yaxis.label.set_color(PALETTE["ink"])
    ax.title.set_color(PALETTE["ink"])
    return ax


def new_axes(ax: Any = None, *, figsize: tuple[float, float] = (5.6, 3.8)) -> Any:
    """The given axes, or a fresh figure with one axes (no pyplot state, no window)."""
    if ax is not None:
        return ax
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    fig.patch.set_facecolor("white")
    return fig.add_subplot()
