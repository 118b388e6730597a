"""Two additions to the binary report: a cutoff with a guarantee, and labels that arrive late.

- **Guarantee**: the least-cost cutoff certified to keep a recall, precision, false-positive-rate
  or flagged-share promise on new rows (:func:`probwrap.decision.guaranteed_cutoff`), shown as a
  "guarantee" row of the decisions table with the promise, the value on the rows, the
  certified bound and its p-value, or a clear "unreachable" message when nothing can be
  certified.
- **Late labels**: the outcome "event within the horizon" from how long each row has been
  observed and whether its event happened (:func:`probwrap.late_labels.labels_at_horizon`);
  its labels and inverse-probability-of-censoring weights go through the report's ordinary
  ``y`` / ``sample_weight`` path, and a note says how many rows are still open.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ._html_parts import _cut, _text

__all__ = ["GuaranteeSummary", "guarantee_summary", "guarantee_html", "resolve_late_labels",
           "late_label_html", "REQUIREMENT_WORDS"]

#: how each requirement is said in the report: (words, comparison)
REQUIREMENT_WORDS: dict[str, tuple[str, str]] = {
    "recall": ("recall", "\u2265"),
    "precision": ("precision", "\u2265"),
    "false_positive_rate": ("false-positive rate", "\u2264"),
    "flagged_share": ("share acted on", "\u2264"),
}


@dataclass(frozen=True)
class GuaranteeSummary:
    """The guarantee a report shows (``content.guarantee``).

    ``requirement``, ``target``, ``method`` and ``confidence`` say what was promised; ``where``
    on which rows it was certified. When it was certified, ``cutoff`` is the least-cost
    certified cutoff, ``achieved`` the requirement's value there on those rows, ``bound`` its
    certified floor or ceiling and ``p_value`` the binomial-tail p-value (None for
    ``method="expectation"``); ``binding`` says whether the promise moved the cutoff. When no
    cutoff can be certified, ``unreachable`` holds the reason and the numbers are None.
    """

    requirement: str
    target: float
    method: str
    confidence: float | None
    where: str
    cutoff: float | None = None
    achieved: float | None = None
    bound: float | None = None
    p_value: float | None = None
    binding: bool | None = None
    unreachable: str | None = None

    @property
    def promise(self) -> str:
        """The promise in words, e.g. "recall ≥ 0.8 with probability 0.9"."""
        words, sign = REQUIREMENT_WORDS.get(self.requirement, (self.requirement, "?"))
        how = (f"with probability {self.confidence:g}" if self.method == "high_probability"
               else "on average over held-out sets")
        return f"{words} {sign} {self.target:g} {how}"


def _check_guarantee(guarantee: Any) -> dict[str, Any]:
    if not isinstance(guarantee, dict) or not {"requirement", "target"} <= set(guarantee):
        raise ValueError(
            "`guarantee` must be a dict with keys 'requirement' and 'target' (and optionally "
            f"'confidence', 'method'), e.g. {{'requirement': 'recall', 'target': 0.9}}; got "
            f"{guarantee!r}."
        )
    unknown = set(guarantee) - {"requirement", "target", "confidence", "method"}
    if unknown:
        raise ValueError(f"`guarantee` has unknown keys {sorted(unknown)}; allowed: "
                         "'requirement', 'target', 'confidence', 'method'.")
    return dict(guarantee)


def _from_result(g: Any, where: str) -> GuaranteeSummary:
    p = float(g.p_value)
    return GuaranteeSummary(
        requirement=g.requirement, target=float(g.target), method=g.method,
        confidence=None if g.confidence is None else float(g.confidence), where=where,
        cutoff=float(g.cutoff), achieved=float(g.achieved), bound=float(g.bound),
        p_value=None if math.isnan(p) else p, binding=bool(g.binding),
    )


def guarantee_summary(guarantee: Any, policy: Any, p: np.ndarray, y01: np.ndarray,
                      matrix: np.ndarray, w: np.ndarray | None, cap: float | None,
                      notes: Any) -> GuaranteeSummary | None:
    """The guarantee to show: asked of the report (certified on its labelled rows), else the
    fitted policy's ``guarantee_`` (certified on its held-out rows), else None.

    An unreachable guarantee becomes a summary with ``unreachable`` set and a note (key
    ``"guarantee"``); it never silently turns into a rule without the promise.
    """
    from ..decision import GuaranteeUnreachableError, guaranteed_cutoff

    if guarantee is None:
        g = getattr(policy, "guarantee_", None) if policy is not None else None
        if g is None:
            return None
        return _from_result(g, "the fitted cost policy's held-out (cross-validated) rows")
    args = _check_guarantee(guarantee)
    where = "the labelled rows of this report"
    res = notes.compute("guarantee", "guaranteed cutoff", guaranteed_cutoff, p,
                        y01.astype(np.intp), matrix, sample_weight=w, capacity=cap,
                        score_bounds=(0.0, 1.0), expected=(GuaranteeUnreachableError,), **args)
    if res is not None:
        return _from_result(res, where)
    failure = next(n.message for n in reversed(notes.notes)
                   if n.key == "guarantee" and n.kind == "not computed")
    return GuaranteeSummary(
        requirement=str(args["requirement"]), target=float(args["target"]),
        method=str(args.get("method", "high_probability")),
        confidence=(float(args.get("confidence", 0.9))
                    if args.get("method", "high_probability") == "high_probability" else None),
        where=where, unreachable=failure,
    )


def guarantee_html(c: Any, n_columns: int) -> tuple[str, str]:
    """The "guarantee" row of the decisions table (``n_columns`` cells) and the paragraph
    under the table; ``("", "")`` without a guarantee."""
    g = getattr(c, "guarantee", None)
    if g is None:
        return "", ""
    label = f"least-cost cutoff with {g.promise}"
    if g.unreachable is not None:
        row = (f'<tr data-rule="guarantee" class="pw-unreachable"><td>{_text(label)}</td>'
               f'<td colspan="{n_columns - 1}">unreachable: no cutoff can be certified</td>'
               "</tr>")
        text = (f'<p id="guarantee" data-status="unreachable">Guarantee ({_text(g.promise)}) '
                f"<b>unreachable</b> on {_text(g.where)}: {_text(g.unreachable)} No rule "
                "without the promise is offered in its place.</p>")
        return row, text
    words, sign = REQUIREMENT_WORDS.get(g.requirement, (g.requirement, "?"))
    pv = ("" if g.p_value is None else
          f', p-value <span id="guarantee-pvalue" data-value="{g.p_value!r}">'
          f"{g.p_value:.3g}</span>")
    text = (
        f'<p id="guarantee" data-status="certified">Guarantee ({_text(g.promise)}), certified '
        f"on {_text(g.where)}: at the cutoff "
        f'<span id="guarantee-cutoff" data-value="{g.cutoff!r}">{_cut(g.cutoff)}</span> the '
        f'{_text(words)} on those rows is <span id="guarantee-achieved" data-value="{g.achieved!r}">'
        f"{g.achieved:.4f}</span> and on new rows it is guaranteed {sign} "
        f'<span id="guarantee-bound" data-value="{g.bound!r}">{g.bound:.4f}</span>{pv} '
        + ("(Learn-then-Test, Angelopoulos et al. 2025)" if g.method == "high_probability"
           else "(conformal risk control, Angelopoulos et al. 2024)")
        + (". The promise moved the cutoff away from the least-cost one." if g.binding else
           ". The least-cost cutoff already keeps the promise.")
        + " The recommendation above does not take the promise into account: to keep it, use "
        "this row's cutoff on rows like these.</p>"
    )
    return "", text


def resolve_late_labels(horizon_labels: Any, time: Any, event: Any, horizon: Any,
                        sample_weight: Any, labels_given: bool) -> Any:
    """A :class:`~probwrap.late_labels.HorizonLabels` from the report's arguments, or None."""
    from ..late_labels import HorizonLabels, labels_at_horizon

    by_time = any(v is not None for v in (time, event, horizon))
    if horizon_labels is None and not by_time:
        return None
    if labels_given:
        raise ValueError("Give the labels either as `y_true`/`y` or as late labels "
                         "(`time`, `event`, `horizon`, or `horizon_labels`), not both.")
    if horizon_labels is not None:
        if by_time:
            raise ValueError("Give either `horizon_labels` or `time`, `event` and `horizon`, "
                             "not both.")
        if not isinstance(horizon_labels, HorizonLabels):
            raise ValueError("`horizon_labels` must be a probwrap.late_labels.HorizonLabels "
                             f"(from labels_at_horizon); got {type(horizon_labels).__name__}.")
        if sample_weight is not None:
            raise ValueError("`horizon_labels` already carries the weights (its "
                             "sample_weight); pass them to labels_at_horizon, not here.")
        return horizon_labels
    missing = [name for name, v in (("time", time), ("event", event), ("horizon", horizon))
               if v is None]
    if missing:
        raise ValueError(f"Late labels need `time`, `event` and `horizon`; missing "
                         f"{', '.join(f'`{m}`' for m in missing)}.")
    return labels_at_horizon(time, event, horizon, sample_weight=sample_weight)


def late_label_html(c: Any) -> str:
    """The late-label note of the calibration section (``""`` without late labels)."""
    hl = getattr(c, "late_labels", None)
    if hl is None:
        return ""
    n_open = int(np.count_nonzero(hl.is_open))
    n = int(hl.is_open.shape[0])
    return (
        f'<p class="pw-late" id="late-labels" data-open-share="{hl.open_share!r}" '
        f'data-open-rows="{n_open}">Labels arrive late: the outcome is &ldquo;event within '
        f"{hl.horizon:g}&rdquo;. <b>{n_open} of {n} rows (share "
        f'<span data-value="{hl.open_share!r}">{100 * hl.open_share:.1f}%</span>, counting '
        "the rows' own weights if any) are still open</b> (observed for less than the horizon, no event yet): their "
        "outcome is unknown, so they carry weight 0, and the other rows are weighted by the "
        "inverse probability of still being observed (Kaplan&ndash;Meier estimate of the "
        "censoring distribution; Graf, Schmoor, Sauerbrei &amp; Schumacher 1999). Every number "
        "and figure of this report uses those weights. This corrects for the open rows only "
        "when whether a row is still open does not depend on its outcome (e.g. the open rows "
        "are simply the most recent ones); the weights are not row frequencies, so intervals "
        "are somewhat optimistic.</p>"
    )

