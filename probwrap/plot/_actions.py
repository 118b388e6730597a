"""Action shares of several decision rules with their mean cost (any number of actions)."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import plain
from ._style import PALETTE, new_axes, style_axes

__all__ = ["ActionShareDisplay"]

# colours of successive actions, taken from the probwrap palette
_ACTION_COLOURS = ("observed", "counts", "chosen", "plugin", "half", "treat_none", "band")


class ActionShareDisplay:
    """Share of rows given each action under several decision rules, with each rule's mean cost.

    One horizontal bar per rule, split into the shares of the actions (they add up to one); the
    mean cost per row of the rule is written at the end of its bar. Works for any cost matrix
    of shape (n_classes, n_actions), where cost curves (one cutoff) do not apply.

    Parameters
    ----------
    shares : array-like of shape (n_rules, n_actions)
        Share of rows given each action by each rule (rows sum to one).
    mean_cost : array-like of shape (n_rules,)
        Mean cost per row of each rule.
    rule_names : sequence of str, length n_rules
    action_names : sequence of str, length n_actions
    capacity : tuple (action index, share), optional
        A limit on one action, drawn as a tick on each bar at the largest allowed share.

    Attributes
    ----------
    ax_, figure_ : matplotlib Axes and Figure
    segments_ : list of BarContainer
        One per action; ``segments_[j].patches[r]`` has width ``shares[r, j]``.
    cost_labels_ : list of Text
        The mean cost written beside each bar.

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> from probwrap.plot import ActionShareDisplay
    >>> disp = ActionShareDisplay(
    ...     shares=[[0.7, 0.2, 0.1], [1.0, 0.0, 0.0]], mean_cost=[2.5, 4.1],
    ...     rule_names=["Bayes", "ship all"], action_names=["ship", "repack", "hold"]).plot()
    >>> round(float(disp.segments_[1].patches[0].get_width()), 2)
    0.2
    """

    def __init__(
        self,
        *,
        shares: Any,
        mean_cost: Any,
        rule_names: Any,
        action_names: Any,
        capacity: tuple[int, float] | None = None,
    ) -> None:
        s = np.asarray(shares, dtype=float)
        c = np.asarray(mean_cost, dtype=float)
        rules = [str(r) for r in rule_names]
        acts = [str(a) for a in action_names]
        if s.ndim != 2 or s.shape != (len(rules), len(acts)):
            raise ValueError(
                f"`shares` must have shape (n_rules, n_actions) = ({len(rules)}, {len(acts)}); "
                f"got {s.shape}."
            )
        if c.shape != (len(rules),):
            raise ValueError(f"`mean_cost` must have one value per rule ({len(rules)}); got "
                             f"shape {c.shape}.")
        if capacity is not None and not 0 <= int(capacity[0]) < len(acts):
            raise ValueError(f"`capacity` names action index {plain(capacity[0])!r}, not among "
                             f"0..{len(acts) - 1}.")
        self.shares = s
        self.mean_cost = c
        self.rule_names = rules
        self.action_names = acts
        self.capacity = capacity

    def plot(self, ax: Any = None) -> ActionShareDisplay:
        """Draw the bars (on ``ax``, or a new figure)."""
        n_rules = len(self.rule_names)
        ax = new_axes(ax, figsize=(7.4, 0.5 * n_rules + 1.6))
        style_axes(ax)
        ax.grid(False)
        ypos = np.arange(n_rules)[::-1]
        left = np.zeros(n_rules)
        self.segments_ = []
        for j, name in enumerate(self.action_names):
            colour = PALETTE[_ACTION_COLOURS[j % len(_ACTION_COLOURS)]]
            bars = ax.barh(ypos, self.shares[:, j], left=left, height=0.62, color=colour,
                           edgecolor=PALETTE["paper"], linewidth=0.8, label=name)
            self.segments_.append(bars)
            left = left + self.shares[:, j]
        self.cost_labels_ = [
            ax.text(1.045, y, f"{c:.3f}", va="center", ha="left", fontsize=8,
                    color=PALETTE["ink"])
            for y, c in zip(ypos, self.mean_cost, strict=True)
        ]
        if self.capacity is not None:
            j, share = int(self.capacity[0]), float(self.capacity[1])
            # the limit as a tick inside the bar: where the limited segment would have to end
            at = self.shares[:, :j].sum(axis=1) + share
            inside = at <= 1.0 + 1e-12
            ax.scatter(at[inside], ypos[inside], marker="|", s=160, color=PALETTE["ink"],
                       label=f"capacity of {self.action_names[j]}", zorder=3)
        ax.set_yticks(ypos, self.rule_names, fontsize=8)
        ax.set_xlim(0, 1.2)
        ax.set_xticks([0, 0.25, 0.5, 0.75, 1.0])
        ax.set_xlabel("share of rows (mean cost per row at the right)")
        ax.set_title("Actions taken by each rule", fontsize=9)
        ax.figure.legend(*ax.get_legend_handles_labels(), loc="outside lower center",
                         ncol=min(len(self.action_names) + 1, 5), fontsize=7, frameon=False)
        self.ax_ = ax
        self.figure_ = ax.figure
        return self
