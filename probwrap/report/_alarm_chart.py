"""The prevalence alarm of the report: a two-sided CUSUM on the per-batch shift tests, and its chart.

Each batch of :func:`probwrap.shift.prior_by_batch` is standardised by its own two-sample shift
test, the signed root of its statistic (:func:`probwrap.shift.signed_shift_scores`): in control
roughly a standard normal at every batch size. (The earlier recipe, the estimate shrunk toward
the source prevalence over the standard error of the unshrunk one, spread with a standard
deviation of 0.2-0.4 in batches of 5-20 rows and could not sound.) The CUSUM is
:func:`probwrap.shift.cusum_alarms` with reference value ``k = 0.5`` and decision interval
``h = 5``. Every batch is compared with the same labelled rows, whose error is shared: the run
length quoted is the one reached with probability 0.9 over the draw of those rows
(:func:`probwrap.shift.baseline_error_run_length`), 465 batches only when they are many next to a
batch.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import norm

from ..plot._style import PALETTE
from ..shift import (
    CusumResult,
    baseline_error_run_length,
    batch_effective_rows,
    cusum_alarms,
    cusum_run_length,
    decision_interval_for_run_length,
    labelled_share_of_variance,
    signed_shift_scores,
)
from ._svg_charts import Chart

__all__ = ["BatchAlarm", "batch_alarm", "alarm_on_scores", "alarm_svg",
           "baseline_batch_standard_error", "ALARM_REFERENCE",
           "ALARM_INTERVAL", "RUN_LENGTH_PROBABILITY", "SHARED_ERROR_LIMIT", "SLOW_DETECTION"]

#: the report's reference value k and decision interval h (the defaults of cusum_alarms)
ALARM_REFERENCE = 0.5
ALARM_INTERVAL = 5.0
#: the quoted in-control run length is reached with this probability over the labelled rows
RUN_LENGTH_PROBABILITY = 0.9
#: above this share of the variance from the labelled rows, warn (rule of thumb)
SHARED_ERROR_LIMIT = 0.1
#: warn when a move of the rarer class's share by half of itself takes more batches than this
#: to detect on average (our rule of thumb, not a published one). The move is measured in
#: standard errors of a batch at the labelled rows' prevalence where the labelled rows are kept
#: (baseline_batch_standard_error): the batches' own intervals are wider once the prevalence
#: has risen, and on the demo's winter batches (twice the summer share) they put the detection
#: of a 1.5-fold rise at 23 batches where the chart took 15.6 on average in simulation
#: (docs/prevalence_alarms.md, "The small-batch note").
SLOW_DETECTION = 20.0


@dataclass(frozen=True)
class BatchAlarm:
    """A CUSUM run on a per-batch prevalence table.

    Attributes
    ----------
    result : CusumResult
    batches : list of str
        Batch labels, in the table's order.
    first_batch : str or None
        Label of the batch after which the first alarm fired (``None``: no alarm).
    in_control_run_length : float
        Two-sided in-control average run length reached with probability
        ``run_length_probability`` over the draw of the labelled rows (equal to the classic
        value of Brook & Evans 1972 when the baseline is exact).
    exact_baseline_run_length : float
        The in-control average run length if the baseline were exact (465 for k=0.5, h=5).
    median_run_length : float
        Median over the labelled rows of the in-control average run length.
    labelled_share : float
        Median over batches of the labelled rows' share of the variance.
    run_length_probability : float
    assured_decision_interval : float
        The ``h`` that would keep the in-control run length at least ``exact_baseline_run_length``
        with ``run_length_probability``.
    batches_to_detect : float or None
        Average batches to an alarm after the rarer class's share moves by half of itself (from
        the median standard error of the batch estimates; None without intervals).
    warnings : list of str
    """

    result: CusumResult
    batches: list[str]
    first_batch: str | None
    in_control_run_length: float
    exact_baseline_run_length: float = float("nan")
    median_run_length: float = float("nan")
    labelled_share: float = 0.0
    run_length_probability: float = RUN_LENGTH_PROBABILITY
    assured_decision_interval: float = ALARM_INTERVAL
    batches_to_detect: float | None = None
    warnings: tuple[str, ...] = ()


def baseline_batch_standard_error(estimator: Any, batch_rows: float, *,
                                  class_index: int = 1) -> float | None:
    """Standard error of the prevalence estimate of a batch of ``batch_rows`` effective rows
    that looks like the labelled rows (so sits at the baseline), or None.

    The estimator's own interval on its labelled rows counted as ``batch_rows`` effective rows
    (``estimate(..., effective_rows=)``), divided by twice the normal quantile of its level:
    one deterministic call, within 2 % of the median over random subsets of that many labelled
    rows on the demo (0.0248 against 0.0252 for 400 rows). None when the estimator did not keep
    its labelled rows or gives no interval.
    """
    src = getattr(estimator, "_src", None)
    if src is None or not np.isfinite(batch_rows) or batch_rows <= 1:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # notes about the labelled rows are raised elsewhere
        try:
            res = estimator.estimate(src[0], src[2], effective_rows=float(batch_rows),
                                     random_state=0)
        except (ValueError, FloatingPointError):
            return None
    if res.interval is None:
        return None
    width = float(res.interval[class_index, 1] - res.interval[class_index, 0])
    level = float(getattr(estimator, "confidence_level", 0.95))
    se = width / (2.0 * norm.ppf(0.5 + level / 2.0))
    return se if np.isfinite(se) and se > 0 else None


#: How the note on the labelled rows' shared error ends, and how it ends beside the note that
#: the batches are already small for the chart (smaller batches would slow the chart further).
SHARED_ADVICE = "Label more rows or use smaller batches."
SHARED_ADVICE_SLOW = ("Label more rows (smaller batches would lower this share but, as the note "
                      "on the batches says, they are already small for the chart).")
#: The start of the note that the batches are small for the chart.
SLOW_NOTE_START = "the batches are small for the chart"


def same_batch_advice(alarms: dict) -> dict:
    """Alarms on the same batches (one per class) with one piece of advice: where any chart's
    batches are small for it, every chart's note on the shared error stops advising smaller
    batches (they are the same batches), so the classes' notes stay one note."""
    import dataclasses

    if not any(w.startswith(SLOW_NOTE_START) for a in alarms.values() for w in a.warnings):
        return alarms
    return {j: dataclasses.replace(a, warnings=tuple(w.replace(SHARED_ADVICE, SHARED_ADVICE_SLOW)
                                                     for w in a.warnings))
            for j, a in alarms.items()}


def alarm_on_scores(
    scores: np.ndarray,
    labels: list[str],
    n_rows: np.ndarray,
    *,
    labelled_rows: float = np.inf,
    baseline: float | None = None,
    standard_error: np.ndarray | None = None,
    baseline_standard_error: float | None = None,
    reference: float = ALARM_REFERENCE,
    decision_interval: float = ALARM_INTERVAL,
    probability: float = RUN_LENGTH_PROBABILITY,
) -> BatchAlarm:
    """The CUSUM on standardised batch shifts, with the run length given the labelled rows'
    error and warnings where it is shared or where the batches are too small to detect a shift
    (:data:`SHARED_ERROR_LIMIT`, :data:`SLOW_DETECTION`; rules of thumb) in ``warnings``
    (:func:`batch_alarm` also raises them as :class:`UserWarning`).

    Examples
    --------
    >>> import numpy as np
    >>> a = alarm_on_scores(np.zeros(8), [str(i) for i in range(8)], np.full(8, 100),
    ...                     labelled_rows=5000)
    >>> a.first_batch is None, round(a.exact_baseline_run_length), a.warnings
    (True, 465, ())
    """
    res = cusum_alarms(np.asarray(scores, dtype=float), 0.0, 1.0, reference=reference,
                       decision_interval=decision_interval)
    share = float(np.median(labelled_share_of_variance(n_rows, labelled_rows)))
    share = min(share, 0.999)
    runs = baseline_error_run_length(share, reference=res.reference,
                                     decision_interval=res.decision_interval,
                                     probability=probability)
    notes = []
    assured_h = res.decision_interval
    if share > SHARED_ERROR_LIMIT:
        assured_h = decision_interval_for_run_length(runs.exact_baseline, labelled_share=share,
                                                     probability=probability,
                                                     reference=res.reference)
        notes.append(
            f"every batch is compared with the same labelled rows, whose error takes "
            f"{share:.0%} of each batch's variance (more than {SHARED_ERROR_LIMIT:.0%}, a rule "
            f"of thumb): the chart's in-control run length is not {runs.exact_baseline:.0f} "
            f"batches but, with probability {probability:g} over the labelled rows, at least "
            f"{runs.assured:.0f} (median {runs.median:.0f}); h = {assured_h:.3g} would keep it "
            f"at least {runs.exact_baseline:.0f} with that probability. {SHARED_ADVICE}"
        )
        shared_note = len(notes) - 1
    detect = None
    se_ref = None
    if baseline_standard_error is not None and np.isfinite(baseline_standard_error) and (
            baseline_standard_error > 0):
        se_ref = float(baseline_standard_error)  # a batch at the baseline (the labelled rows)
    elif standard_error is not None:
        se = np.asarray(standard_error, dtype=float)
        if np.all(np.isfinite(se)) and np.all(se > 0):
            se_ref = float(np.median(se))  # the batches as they are (wider if they moved up)
    if se_ref is not None and baseline is not None and 0.0 < baseline < 1.0:
        move = 0.5 * min(baseline, 1.0 - baseline)
        detect = cusum_run_length(move / se_ref, reference=res.reference,
                                  decision_interval=res.decision_interval, two_sided=True)
        if detect > SLOW_DETECTION:
            rows = float(np.median(np.asarray(n_rows, dtype=float))) * detect
            notes.append(
                f"the batches are small for the chart: a move of the prevalence by "
                f"{move:.3g} (half the rarer class's share) takes about {detect:.0f} "
                f"batches (about {rows:.0f} rows) to sound on average (more than "
                f"{SLOW_DETECTION:.0f} batches, our rule of thumb); within a few batches "
                "it catches only larger moves."
            )
            if share > SHARED_ERROR_LIMIT:
                # "use smaller batches" beside "the batches are small for the chart" left the
                # reader no way to follow both: smaller batches would slow the chart further
                notes[shared_note] = notes[shared_note].replace(SHARED_ADVICE, SHARED_ADVICE_SLOW)
    first = labels[int(res.alarms[0])] if res.alarms.size else None
    return BatchAlarm(
        result=res, batches=list(labels), first_batch=first,
        in_control_run_length=runs.assured, exact_baseline_run_length=runs.exact_baseline,
        median_run_length=runs.median, labelled_share=share, run_length_probability=probability,
        assured_decision_interval=assured_h, batches_to_detect=detect, warnings=tuple(notes),
    )


def batch_alarm(
    table: np.ndarray,
    baseline: float,
    *,
    confidence_level: float = 0.95,
    class_index: int = 1,
    reference: float = ALARM_REFERENCE,
    decision_interval: float = ALARM_INTERVAL,
    labelled_rows: float = np.inf,
    estimator: Any = None,
) -> BatchAlarm:
    """Run the two-sided CUSUM on the batch shift tests of a :func:`prior_by_batch` table.

    ``labelled_rows``: the effective labelled rows the baseline comes from (``np.inf``: taken
    as exact). How fast the chart detects a shift is estimated from the standard error of a
    batch at the baseline, from ``estimator`` (the fitted :class:`PriorEstimator`, see
    :func:`baseline_batch_standard_error`) where it kept its labelled rows, else from the
    batches' own intervals.

    Examples
    --------
    >>> import warnings
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=900)
    >>> y = (rng.uniform(size=900) < p1).astype(int)
    >>> est = PriorEstimator(n_resamples=30, random_state=0).fit(
    ...     np.column_stack([1 - p1[:300], p1[:300]]), y[:300])
    >>> table = prior_by_batch(est, np.column_stack([1 - p1[300:], p1[300:]]), batch_size=100)
    >>> with warnings.catch_warnings(record=True) as caught:  # 300 labelled, 100 per batch
    ...     alarm = batch_alarm(table, float(est.source_prior_[1]), labelled_rows=300)
    >>> alarm.first_batch is None, round(alarm.labelled_share, 2), round(alarm.in_control_run_length)
    (True, 0.25, 15)
    """
    z = signed_shift_scores(table, float(baseline), class_index=class_index)
    width = np.asarray(table["upper"][:, class_index] - table["lower"][:, class_index],
                       dtype=float)
    se = width / (2.0 * norm.ppf(0.5 + confidence_level / 2.0)) if np.all(width > 0) else None
    labels = [str(b) for b in np.asarray(table["batch"]).tolist()]
    # Kish's effective rows of each batch: with weights, what the batch's shift test counts
    rows = batch_effective_rows(table)
    se0 = None if estimator is None or table["prior"].shape[1] != 2 else (
        baseline_batch_standard_error(estimator, float(np.median(rows)),
                                      class_index=class_index))
    alarm = alarm_on_scores(z, labels, rows, labelled_rows=labelled_rows,
                            baseline=float(baseline), standard_error=se,
                            baseline_standard_error=se0, reference=reference,
                            decision_interval=decision_interval)
    for note in alarm.warnings:
        warnings.warn(note[0].upper() + note[1:], UserWarning, stacklevel=2)
    return alarm


def alarm_svg(alarm: BatchAlarm, *, key: str = "alarm") -> str:
    """The CUSUM statistics by batch against the decision interval, alarms ringed, as SVG.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=900)
    >>> y = (rng.uniform(size=900) < p1).astype(int)
    >>> est = PriorEstimator(n_resamples=30, random_state=0).fit(
    ...     np.column_stack([1 - p1[:300], p1[:300]]), y[:300])
    >>> table = prior_by_batch(est, np.column_stack([1 - p1[300:], p1[300:]]), batch_size=100)
    >>> alarm_svg(batch_alarm(table, float(est.source_prior_[1]))).startswith("<svg")
    True
    """
    res = alarm.result
    n = res.upper.shape[0]
    x = np.arange(n, dtype=float)
    h = res.decision_interval
    top = max(h * 1.25, float(np.max(np.concatenate([res.upper, res.lower]))) * 1.08)
    step = max(1, int(np.ceil(n / 12)))  # at most about 12 batch labels
    chart = Chart(key, title="Prevalence alarm (CUSUM)", width=560, height=320,
                  description="Upward and downward CUSUM statistics of the batch shift "
                  "tests, in standard deviations, against the decision interval; ringed "
                  "batches are where an alarm fired.")
    panel = chart.add_panel(xlim=(-0.5, max(n - 0.5, 0.5)), ylim=(0.0, top), xlabel="batch",
                            ylabel="CUSUM (standard errors)", xticks=x[::step],
                            xticklabels=alarm.batches[::step])
    panel.line(x, res.upper, color=PALETTE["chosen"], width=1.5, marker=True,
               label="rise", name="upper")
    panel.line(x, res.lower, color=PALETTE["source"], width=1.5, marker=True, dash=(4, 2),
               label="fall", name="lower")
    panel.hline(h, color=PALETTE["ink"], width=1.1, dash=(5, 2), name="interval",
                label=f"decision interval h = {h:g}")
    if res.alarms.size:
        at = res.alarms
        y = np.where(res.direction > 0, res.upper[at], res.lower[at])
        panel.points(x[at], y, color=PALETTE["shifted"], radius=6.0, fill="none",
                     stroke_width=1.6, name="alarms", label="alarm")
    panel.legend("upper left")
    return chart.to_svg()
