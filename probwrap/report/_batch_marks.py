"""The report's batch tables: each batch's estimate with its interval and shift test, and a
mark where the estimate was kept near the source share for lack of rows.

On a small batch EM's estimate is drawn toward the source share by ``prior_strength``
pseudo-rows (``PriorEstimate.pseudo_rows``), so a batch of a few rows reads close to the
source share whatever its rows say; the command line marks such batches (``probwrap
prevalence``, docs/evidence/prior_shift_log.md, "Small batches"), and the page marks the same ones, by the
same rule (:func:`probwrap.shift._by_batch.held_near_source`: the pull moved the share by at
least 0.01 from the rows-alone estimate ``ml_prior``), with the rows-alone estimate beside it.
Plain table text: no colours or symbols carry the meaning.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..shift._by_batch import held_near_source
from ._html_parts import _text

__all__ = ["binary_batch_table", "held_cell_mark", "held_note"]


def held_cell_mark(ml_share: float) -> str:
    """The words added to a batch's estimate that was kept near the source share."""
    return f"kept near source (rows alone {ml_share:.4f})"


def held_note(table: np.ndarray, held: np.ndarray, source_words: str, elem_id: str) -> str:
    """A paragraph saying what the mark means, or "" when no batch carries it. ``held``: the
    (batches,) mask of marked batches; ``source_words``: the source share(s) in words."""
    if not held.any():
        return ""
    rows = np.sort(np.asarray(table["n_rows"])[held])
    span = f"{rows[0]}" if rows[0] == rows[-1] else f"{rows[0]} to {rows[-1]}"
    pull = float(np.max(np.asarray(table["pseudo_rows"], dtype=float)[held]))
    return (
        f'<p id="{elem_id}" data-held-batches="{int(held.sum())}">'
        f"&ldquo;Kept near source&rdquo;: in {int(held.sum())} of {table.shape[0]} batches "
        f"({span} rows) the estimate is drawn toward {_text(source_words)} by up to {pull:g} "
        "pseudo-rows (fewer where a shift shows), which moved it by 0.01 or more, so that a "
        "batch of few rows does not move far on noise. The pull is no finding that the "
        "batch's share is near the source one: &ldquo;rows alone&rdquo; is the batch's own "
        "maximum-likelihood estimate without it, the interval is the one of the rows alone "
        "and holds both, and the shift test says whether the share moved. Larger batches are "
        "drawn less.</p>"
    )


def binary_batch_table(table: np.ndarray, source_prevalence: float, level: str) -> str:
    """The binary report's table of the prevalence by batch (the positive class's share, the
    second column of ``prior``), with the mark on batches kept near the source prevalence and
    the note explaining it."""
    held = held_near_source(table)[:, 1]
    ml = (np.asarray(table["ml_prior"], dtype=float)[:, 1] if held.any() else None)
    body = []
    for i in range(table.shape[0]):
        label = _text(str(table["batch"][i]))
        est = float(table["prior"][i, 1])
        lo, hi = float(table["lower"][i, 1]), float(table["upper"][i, 1])
        p = float(table["shift_pvalue"][i])
        mark = held_cell_mark(float(ml[i])) if held[i] else ""
        body.append(
            f'<tr data-item="batch:{label}" data-held="{int(held[i])}"><td>{label}</td>'
            f'<td>{int(table["n_rows"][i])}</td>'
            f'<td data-value="{est!r}">{est:.4f}</td>'
            f"<td>[{lo:.4f}, {hi:.4f}]</td>"
            f'<td data-value="{p!r}">{p:.3g}</td><td>{_text(mark)}</td></tr>')
    return (
        '<table id="prevalence-batches"><thead><tr><th>batch</th><th>rows</th>'
        f"<th>prevalence</th><th>{_text(level)} interval</th><th>shift test p-value</th>"
        f"<th>remark</th></tr></thead><tbody>{''.join(body)}</tbody></table>"
        + held_note(table, held, f"the source prevalence {source_prevalence:.4f}",
                    "prevalence-batches-held")
    )


def general_held(table: np.ndarray) -> tuple[np.ndarray, Any]:
    """``(held (batches, k), rows-alone shares or None)`` of a multiclass batch table."""
    held = held_near_source(table)
    ml = np.asarray(table["ml_prior"], dtype=float) if held.any() else None
    return held, ml
