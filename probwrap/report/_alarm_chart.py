"""The prevalence alarm of the report: a two-sided CUSUM on the per-batch estimates, and its chart.

The batch estimates of :func:`probwrap.shift.prior_by_batch` are standardised against the source
(labelled) prevalence with the standard error read from each batch's interval,
``se = (upper - lower) / (2 z)`` with ``z`` the normal quantile of the interval's level (as
docs/prevalence_alarms.md recommends), and fed to :func:`probwrap.shift.cusum_alarms` with its
defaults: reference value ``k = 0.5`` standard errors (tuned to a one-standard-error shift) and
decision interval ``h = 5`` (in-control average run length about 465 batches, from
:func:`probwrap.shift.cusum_run_length`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from ..plot._style import PALETTE
from ..shift import CusumResult, cusum_alarms, cusum_run_length
from ._svg_charts import Chart

__all__ = ["BatchAlarm", "batch_alarm", "alarm_svg", "ALARM_REFERENCE", "ALARM_INTERVAL"]

#: the report's reference value k and decision interval h (the defaults of cusum_alarms)
ALARM_REFERENCE = 0.5
ALARM_INTERVAL = 5.0


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
        Two-sided in-control average run length for this ``k`` and ``h`` (Brook & Evans 1972).
    """

    result: CusumResult
    batches: list[str]
    first_batch: str | None
    in_control_run_length: float


def batch_alarm(
    table: np.ndarray,
    baseline: float,
    *,
    confidence_level: float = 0.95,
    class_index: int = 1,
    reference: float = ALARM_REFERENCE,
    decision_interval: float = ALARM_INTERVAL,
) -> BatchAlarm:
    """Run the two-sided CUSUM on the prevalence column of a :func:`prior_by_batch` table.

    Raises ``ValueError`` when a batch's interval has zero width (no standard error to
    standardise with, e.g. ``n_resamples=0``).

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
    >>> alarm = batch_alarm(table, float(est.source_prior_[1]))
    >>> alarm.first_batch is None, round(alarm.in_control_run_length)
    (True, 465)
    """
    prev = np.asarray(table["prior"][:, class_index], dtype=float)
    width = np.asarray(table["upper"][:, class_index] - table["lower"][:, class_index],
                       dtype=float)
    if not np.all(width > 0):
        bad = [str(b) for b in np.asarray(table["batch"])[~(width > 0)]]
        raise ValueError(
            f"the prevalence interval of batch(es) {', '.join(bad[:5])} has zero width, so "
            "there is no standard error to standardise the CUSUM with (give n_resamples > 0)."
        )
    se = width / (2.0 * norm.ppf(0.5 + confidence_level / 2.0))
    res = cusum_alarms(prev, float(baseline), se, reference=reference,
                       decision_interval=decision_interval)
    labels = [str(b) for b in np.asarray(table["batch"]).tolist()]
    first = labels[int(res.alarms[0])] if res.alarms.size else None
    arl = cusum_run_length(0.0, reference=reference, decision_interval=decision_interval,
                           two_sided=True)
    return BatchAlarm(result=res, batches=labels, first_batch=first, in_control_run_length=arl)


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
                  description="Upward and downward CUSUM statistics of the batch prevalence "
                  "estimates, in standard errors, against the decision interval; ringed "
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
