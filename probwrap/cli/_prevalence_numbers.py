"""The numbers of ``probwrap prevalence``: EM from a source prevalence, the estimator from a
labelled reference file, and the prevalence alarm on batch estimates (no argument parsing).

:mod:`._prevalence` reads the files and prints; this module computes.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np

from ._progress import progress

__all__ = ["prevalence_from_source", "prevalence_from_reference", "batch_alarm_json",
           "two_columns", "result_dict"]


def two_columns(p: np.ndarray) -> np.ndarray:
    return np.column_stack([1.0 - p, p])


def _warn_per_resample(caught: list, n_resamples: int) -> None:
    """Each distinct warning of the bootstrap fits once, with how many resamples raised it."""
    counts: dict[tuple[type, str], int] = {}
    for w in caught:
        key = (w.category, str(w.message))
        counts[key] = counts.get(key, 0) + 1
    for (category, message), count in counts.items():
        warnings.warn(f"in {count} of {n_resamples} bootstrap resamples: {message}", category,
                      stacklevel=3)


def prevalence_from_source(
    proba: np.ndarray,
    source_prevalence: float,
    *,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    seed: int | None = 0,
) -> dict[str, Any]:
    """EM prevalence of unlabelled rows whose probabilities hold for ``source_prevalence``.

    The interval is a percentile bootstrap of the unlabelled rows, widened where needed to
    contain the Clopper-Pearson interval of as many labelled rows (as
    :meth:`probwrap.shift.PriorEstimator.estimate` does).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.cli._prevalence import prevalence_from_source
    >>> p = np.array([0.1, 0.1, 0.2, 0.9])
    >>> out = prevalence_from_source(p, 0.325, n_resamples=20)
    >>> round(out["prevalence"], 3), out["shift_pvalue"] > 0.9
    (0.325, True)
    """
    from sklearn.utils import check_random_state

    from probwrap.shift import binomial_interval, em_prior, shift_test

    p2 = two_columns(proba)
    src = np.array([1.0 - source_prevalence, source_prevalence])
    point = em_prior(p2, src)
    test = shift_test(p2, src)
    if not (np.all(np.isfinite(point.prior)) and np.isfinite(test.statistic)):
        raise ValueError(
            f"with source prevalence {source_prevalence:g} the estimate is not a finite number; "
            "give a source prevalence the scores were really calibrated for"
        )
    out = result_dict(point.prior[1], point.converged, "em", proba.shape[0], source_prevalence, test)
    if n_resamples > 0:
        rng = check_random_state(seed)
        n = proba.shape[0]
        draws = np.empty(n_resamples)
        init = point.prior if np.all(point.prior > 0) else None
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            for b in progress(range(n_resamples), desc="bootstrap", total=n_resamples):
                counts = np.bincount(rng.randint(0, n, size=n), minlength=n).astype(float)
                draws[b] = em_prior(p2, src, sample_weight=counts, init=init).prior[1]
        _warn_per_resample(caught, n_resamples)
        alpha = 1.0 - confidence_level
        lo, hi = np.quantile(draws, [alpha / 2, 1 - alpha / 2])
        cp = binomial_interval(point.prior[1], float(n), confidence_level)
        out["interval"] = [
            float(min(lo, cp[0], point.prior[1])), float(max(hi, cp[1], point.prior[1]))
        ]
    return out


def prevalence_from_reference(
    proba: np.ndarray,
    ref_proba: np.ndarray,
    ref_y: np.ndarray,
    *,
    method: str = "em",
    recalibrate: bool = True,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    seed: int | None = 0,
) -> dict[str, Any]:
    """Prevalence of unlabelled rows by :class:`probwrap.shift.PriorEstimator`.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.cli._prevalence import prevalence_from_reference
    >>> rng = np.random.default_rng(0)
    >>> ref = rng.uniform(0.01, 0.99, size=400)
    >>> y = (rng.uniform(size=400) < ref).astype(int)
    >>> out = prevalence_from_reference(rng.uniform(0.3, 0.99, size=300), ref, y,
    ...                                 n_resamples=0)
    >>> out["prevalence"] > out["source_prevalence"], out["shift_pvalue"] < 1e-6
    (True, True)
    """
    from probwrap.shift import PriorEstimator, ShiftTestResult

    est = PriorEstimator(
        method,
        calibration="bcts" if recalibrate else None,
        n_resamples=n_resamples,
        confidence_level=confidence_level,
        random_state=seed,
    ).fit(two_columns(ref_proba), ref_y)
    res = est.estimate(two_columns(proba))
    # the estimator's two-sample score test (it carries the reference rows' error too)
    test = ShiftTestResult(res.shift_statistic, res.shift_pvalue, 1)
    out = result_dict(
        res.prior[1], res.converged, method, proba.shape[0], float(est.source_prior_[1]), test
    )
    if res.interval is not None:
        out["interval"] = [float(res.interval[1, 0]), float(res.interval[1, 1])]
    out["recalibrated"] = bool(recalibrate)
    out["n_reference_rows"] = int(ref_y.shape[0])
    return out


def batch_alarm_json(
    batches: list[dict[str, Any]],
    source_prevalence: float,
    *,
    confidence_level: float = 0.95,
    reference: float = 0.5,
    decision_interval: float = 5.0,
) -> dict[str, Any]:
    """The prevalence alarm of per-batch estimates (each with an ``interval``), as JSON values.

    Examples
    --------
    >>> rows = [{"batch": str(i), "prevalence": v, "interval": [v - 0.0078, v + 0.0078]}
    ...         for i, v in enumerate([0.040, 0.043, 0.038, 0.041, 0.052, 0.055, 0.051, 0.054])]
    >>> out = batch_alarm_json(rows, 0.040)
    >>> out["first_alarm"], [a["batch"] for a in out["alarms"]]
    ('5', ['5', '7'])
    """
    from scipy.stats import norm

    from probwrap.shift import cusum_alarms, cusum_run_length

    if any(b["interval"] is None for b in batches):
        raise ValueError("the prevalence alarm needs an interval per batch (--resamples > 0)")
    width = np.array([b["interval"][1] - b["interval"][0] for b in batches], dtype=float)
    if not np.all(width > 0):
        raise ValueError("a batch's prevalence interval has zero width, so the alarm has no "
                         "standard error to work with (give larger batches)")
    se = width / (2.0 * norm.ppf(0.5 + confidence_level / 2.0))
    prev = np.array([b["prevalence"] for b in batches], dtype=float)
    res = cusum_alarms(prev, float(source_prevalence), se, reference=reference,
                       decision_interval=decision_interval)
    labels = [b["batch"] for b in batches]
    alarms = [{"batch": labels[i], "index": int(i), "direction": "up" if d > 0 else "down"}
              for i, d in zip(res.alarms.tolist(), res.direction.tolist(), strict=True)]
    return {
        "reference": res.reference,
        "decision_interval": res.decision_interval,
        "standard_error": se.tolist(),
        "upper": res.upper.tolist(),
        "lower": res.lower.tolist(),
        "alarms": alarms,
        "first_alarm": alarms[0]["batch"] if alarms else None,
        "in_control_run_length": cusum_run_length(
            0.0, reference=res.reference, decision_interval=res.decision_interval,
            two_sided=True),
    }


def result_dict(prev, converged, method, n, source, test) -> dict[str, Any]:
    return {
        "prevalence": float(prev),
        "interval": None,
        "source_prevalence": float(source),
        "method": method,
        "converged": bool(converged),
        "n_rows": int(n),
        "shift_statistic": float(test.statistic),
        "shift_pvalue": float(test.pvalue),
    }
