"""What the binary and the general report share: input checks, metric rows, notes, progress.

Both :mod:`._content` (binary, one cutoff) and :mod:`._general` (multiclass / multi-action)
import from here; neither imports the other's internals through this module.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import label_column, plain
from ..metrics import bootstrap_interval
from ..metrics._bootstrap import MAX_DROPPED_SHARE

__all__ = [
    "MetricRow",
    "Recommendation",
    "ReportNote",
    "NoteLog",
    "ProgressCallback",
    "as_positive_proba",
    "as_proba_2d",
    "class_index",
    "gated_prior",
    "metric_row",
    "withheld_interval",
    "FIGURE_NAMES",
    "draw_figure",
    "figure_notes",
]

#: ``progress(step, done, total)``: called before each long step of a report (``done`` steps of
#: ``total`` finished, ``step`` names the one starting) and once more with ``done == total``.
ProgressCallback = Callable[[str, int, int], None]


@dataclass
class MetricRow:
    """One calibration metric with its bootstrap interval.

    ``value`` is the number shown; for the binned calibration error it is the bias-corrected
    estimate and ``plain_value`` the plain (plug-in) binned error (see ``interval_method``).
    ``dropped_resamples`` counts the bootstrap resamples on which the metric could not be
    computed (left out of the interval). When more than
    :data:`probwrap.metrics._bootstrap.MAX_DROPPED_SHARE` of them were dropped (or all), the
    interval is not given (``low`` and ``high`` NaN) and ``interval_note`` says why.
    """

    key: str
    label: str
    value: float
    low: float
    high: float
    ideal: str
    interval_method: str = "percentile"
    plain_value: float | None = None
    dropped_resamples: int = 0
    interval_note: str | None = None


@dataclass(frozen=True)
class ReportNote:
    """A warning, or an expected failure, met while computing one number of a report.

    ``key`` names the number (``"metric:slope"``, ``"cutoff"``, ``"prevalence"``, ...),
    ``about`` says it in words, ``kind`` is the warning's category name (``"not computed"`` when
    the number could not be computed), ``count`` how many times the same message came up (e.g.
    once per bootstrap resample).
    """

    key: str
    about: str
    kind: str
    message: str
    count: int = 1


@dataclass
class Recommendation:
    """The rule a report recommends now, and why.

    ``expected_cost`` and ``acted_share`` are per row of the population the rule will act on:
    the unlabelled rows, with posteriors moved to the estimated prevalence (expected cost), when
    those were given (``basis == "unlabelled"``); otherwise the labelled rows (realised cost,
    ``basis == "labelled"``). ``within_capacity`` is judged on that same share.
    ``base_cutoff`` is the binary cutoff chosen on the labelled rows, before any move to the
    estimated prevalence and any capacity fallback; ``action_shares`` the share of each action
    (several actions).
    """

    key: str
    name: str
    cutoff: float | None
    reasons: list[str]
    expected_cost: float
    acted_share: float
    basis: str
    within_capacity: bool | None = None
    action_shares: np.ndarray | None = None
    base_cutoff: float | None = None


_NUMBER = re.compile(r"\d+(?:\.\d+)?(?:e[-+]?\d+)?")


class NoteLog:
    """Collects :class:`ReportNote` objects, one computation at a time.

    :meth:`compute` runs one computation with the warnings it raises recorded (narrowly: only
    inside that call), stores each distinct warning as a note about that number, and warns
    once more with the number named, so that a caller of the report sees it too (once per
    log: a kind of warning met again by a later computation is noted there, not warned again). Exceptions
    listed in ``expected`` become a note (and a ``UserWarning``) and ``None`` is returned; any
    other exception propagates.
    """

    def __init__(self) -> None:
        self.notes: list[ReportNote] = []
        # kinds of warning already warned once more to the caller: another computation that
        # meets the same kind (the slope and the intercept both clipping the same rows near 0
        # or 1, on ordinary near-separated data such as AER's CreditCard) adds its note but
        # does not warn again, so one report warns each kind once
        self._warned: set[tuple[type, str]] = set()

    def add(self, key: str, about: str, kind: str, message: str, count: int = 1) -> None:
        self.notes.append(ReportNote(key, about, kind, message, count))

    def compute(self, key: str, about: str, fn: Callable[..., Any], /, *args: Any,
                expected: tuple[type[BaseException], ...] = (), **kwargs: Any) -> Any:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                result = fn(*args, **kwargs)
            except expected as exc:
                failure = str(exc)
                result = None
            else:
                failure = None
        # one note per kind of warning: messages that differ only in their numbers (a count of
        # clipped rows that changes from one bootstrap resample to the next) are one note,
        # showing the first message (the computation on all rows comes first) and the count
        seen: dict[tuple[type, str], list[Any]] = {}
        for w in caught:
            k = (w.category, _NUMBER.sub("#", str(w.message)))
            if k in seen:
                seen[k][1] += 1
            else:
                seen[k] = [str(w.message), 1]
        for (category, kind), (message, count) in seen.items():
            self.add(key, about, category.__name__, message, count)
            if (category, kind) in self._warned:
                continue
            self._warned.add((category, kind))
            # the count is of times the warning was raised, not of rows: a bootstrap meets the
            # same row in many of its resamples
            more = (f" (raised {count} times in this computation (a bootstrap raises it in "
                    f"each resample that meets it), the first shown)" if count > 1 else "")
            warnings.warn(f"report, {about}: {message}{more}", category, stacklevel=3)
        if failure is not None:
            self.add(key, about, "not computed", failure)
            warnings.warn(f"report, {about}: not computed: {failure}", UserWarning,
                          stacklevel=3)
        return result

    def about(self, *prefixes: str) -> list[ReportNote]:
        """The notes whose key starts with one of ``prefixes``."""
        return [n for n in self.notes if n.key.startswith(prefixes)]


#: what each figure of a report is called in its notes (keys as in ``make_figures``)
FIGURE_NAMES: dict[str, str] = {
    "reliability": "reliability diagram",
    "cost": "cost curve",
    "decision_curve": "decision curve",
    "prevalence": "prevalence-by-batch chart",
    "alarm": "prevalence alarm chart",
    "actions": "action-share chart",
    "class_prior": "class-share chart",
}


def draw_figure(content: Any, figures: dict[str, str], key: str, draw: Callable[..., str],
                /, *args: Any, **kwargs: Any) -> None:
    """Draw one figure into ``figures[key]``; its warnings become notes about that figure.

    Warnings raised while drawing (a weight rescaled for the per-bin intervals, an estimate
    outside its interval, ...) are recorded narrowly, as for the numbers, under the key
    ``"figure:<key>"`` in ``content.notes`` (each distinct message once, with its count; a
    note already there from an earlier drawing of the same content is not repeated), shown in
    a notes box under that figure, and warned once more with the figure named. Exceptions
    propagate: a figure that cannot be drawn is a bug, not a note.
    """
    log = NoteLog()
    figures[key] = log.compute(f"figure:{key}", FIGURE_NAMES.get(key, key), draw, *args,
                               **kwargs)
    notes = content.notes
    for note in log.notes:
        if note not in notes:
            notes.append(note)


def figure_notes(content: Any, key: str) -> list[ReportNote]:
    """The notes recorded while drawing the figure ``key``."""
    return [n for n in getattr(content, "notes", []) if n.key == f"figure:{key}"]


def as_positive_proba(values: Any, name: str) -> np.ndarray:
    """Positive-class probabilities of shape (n,) (a two-column array gives its second column)."""
    try:
        p = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be numeric probabilities ({exc}).") from None
    if p.ndim == 2 and p.shape[1] == 2:
        p = p[:, 1]
    if p.ndim != 1:
        raise ValueError(
            f"`{name}` must be positive-class probabilities of shape (n,) (binary reports only); "
            f"got shape {p.shape}."
        )
    if p.shape[0] == 0:
        raise ValueError(f"`{name}` is empty.")
    if not np.all(np.isfinite(p)) or np.any((p < 0) | (p > 1)):
        bad = int(np.flatnonzero(~(np.isfinite(p) & (p >= 0) & (p <= 1)))[0])
        raise ValueError(
            f"`{name}` must hold probabilities in [0, 1]; row {bad} holds {float(p[bad])!r}."
        )
    return p


def as_proba_2d(values: Any, name: str) -> np.ndarray:
    """Class probabilities of shape (n, k), rows summing to one (a 1-d array means k = 2)."""
    try:
        p = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be numeric probabilities ({exc}).") from None
    if p.ndim == 1:
        p = np.column_stack([1.0 - p, p])
    if p.ndim != 2 or p.shape[1] < 2:
        raise ValueError(f"`{name}` must have shape (n, n_classes); got shape {p.shape}.")
    if p.shape[0] == 0:
        raise ValueError(f"`{name}` is empty.")
    ok = np.isfinite(p) & (p >= 0) & (p <= 1)
    if not ok.all():
        row = int(np.flatnonzero(~ok.all(axis=1))[0])
        raise ValueError(f"`{name}` must hold probabilities in [0, 1]; row {row} holds "
                         f"{p[row].tolist()}.")
    sums = p.sum(axis=1)
    if np.any(np.abs(sums - 1.0) > 1e-6):
        row = int(np.flatnonzero(np.abs(sums - 1.0) > 1e-6)[0])
        raise ValueError(f"`{name}` rows must sum to one; row {row} sums to "
                         f"{float(sums[row])!r}.")
    return p


def class_index(y: Any, classes: np.ndarray, name: str) -> np.ndarray:
    """Position of each label of ``y`` among ``classes`` (a clear error for unknown labels)."""
    arr = label_column(y, name)
    unknown = ~np.isin(arr, classes)
    if unknown.any():
        row = int(np.flatnonzero(unknown)[0])
        raise ValueError(f"`{name}` row {row} holds {plain(arr[row])!r}, not among the classes "
                         f"{classes.tolist()}.")
    order = np.argsort(classes, kind="stable")
    return order[np.searchsorted(classes[order], arr)].astype(np.intp)


def metric_row(notes: NoteLog, key: str, label: str, fn: Any, y: np.ndarray, p: np.ndarray,
               w: np.ndarray | None, ideal: str, n_resamples: int, level: float, seed: int,
               groups: np.ndarray | None = None, **kw: Any) -> MetricRow:
    """One metric with its bootstrap interval; warnings and expected failures become notes.

    The binned calibration error (``key`` starting with ``"ece"``) is biased upwards: resampled
    values lie mostly above the plain value, so a percentile interval can miss it. It is shown
    bias-corrected, ``2 s - median(s*)``, with the basic bootstrap interval ``(2 s - q_high,
    2 s - q_low)`` (Davison & Hinkley 1997, section 5.2.1), which contains that estimate by
    construction; both are floored at 0 (the error cannot be negative), and the plain value is
    kept in ``plain_value``. ``groups``: the cell of every row, resampled whole (None: rows).
    """
    binned = key.startswith("ece")
    if groups is not None:
        kw = {**kw, "groups": groups}
    res = notes.compute(
        f"metric:{key}", label, bootstrap_interval, fn, y, p, sample_weight=w,
        n_resamples=n_resamples, confidence_level=level, random_state=seed,
        method="basic" if binned else "percentile",
        expected=(ValueError, np.linalg.LinAlgError), **kw,
    )
    if res is None:
        nan = float("nan")
        return MetricRow(key, label, nan, nan, nan, ideal)
    value = float(res.statistic)
    low, high = float(res.confidence_interval.low), float(res.confidence_interval.high)
    why = withheld_interval(notes, key, label, res.n_failed, res.n_resamples)
    if why is not None:
        low = high = float("nan")
    extra = {"dropped_resamples": int(res.n_failed), "interval_note": why}
    if not binned:
        return MetricRow(key, label, value, low, high, ideal, **extra)
    corrected = 2.0 * value - float(np.median(res.bootstrap_distribution))
    return MetricRow(key, label, max(corrected, 0.0), max(low, 0.0), max(high, 0.0), ideal,
                     interval_method="basic, bias-corrected", plain_value=value, **extra)


def withheld_interval(notes: NoteLog, key: str, label: str, n_dropped: int,
                      n_resamples: int) -> str | None:
    """Why a metric's interval is not given (None: it is): more than ``MAX_DROPPED_SHARE`` of
    its bootstrap resamples could not be computed. Those resamples are not a fair share (a
    calibration slope fails exactly on resamples whose classes separate, where it would be
    largest), so an interval from the rest would be biased. The reason is also a note and a
    ``UserWarning``."""
    if n_dropped <= MAX_DROPPED_SHARE * n_resamples:
        return None
    why = (f"no interval: the number could not be computed in {n_dropped} of {n_resamples} "
           f"resamples, more than {MAX_DROPPED_SHARE:.0%} (common practice), so an interval "
           "from the rest would be biased")
    notes.add(f"metric:{key}", label, "no interval", why)
    warnings.warn(f"report, {label}: {why}", UserWarning, stacklevel=3)
    return why


def gated_prior(res: Any, source_prior: Any, index: int | None = None) -> tuple[float, Any]:
    """``(adaptation_weight, applied prior)`` of an estimate ``res`` under the evidence gate of
    :class:`~probwrap.PriorShiftWrapper` at its default settings (``max_harm``,
    ``min_evidence``): the source prior moved that share of the way to ``res.prior`` and
    renormalised, as ``PriorShiftWrapper.applied_prior_``; ``index`` picks one share."""
    from .._prior_shift import PriorShiftWrapper, evidence_gate, moved_prior

    src = np.asarray(source_prior, dtype=float)
    defaults = PriorShiftWrapper(None)
    weight, _ = evidence_gate(res, src.shape[0], defaults.max_harm, defaults.min_evidence)
    moved = moved_prior(src, res.prior, weight)
    return weight, (moved if index is None else float(moved[index]))
