"""The numbers of ``probwrap prevalence``: EM from a source prevalence, the estimator from a
labelled reference file, and the prevalence alarm on batch estimates (no argument parsing).

:mod:`._prevalence` reads the files and prints; this module computes.
"""

from __future__ import annotations

import dataclasses
import warnings
from typing import Any

import numpy as np

from ._progress import progress

__all__ = ["prevalence_from_source", "prevalence_from_reference", "batch_alarm_json",
           "held_toward_source", "interval_reach",
           "two_columns", "result_dict", "effective_rows",
           "kish_scaled", "library_weights", "reference_estimator", "table_cases",
           "source_baseline_standard_error"]


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
    sample_weight: np.ndarray | None = None,
    edge_warning: bool = True,
) -> dict[str, Any]:
    """EM prevalence of unlabelled rows whose probabilities hold for ``source_prevalence``.

    The interval is a percentile bootstrap of the unlabelled rows (each resampled row keeps
    its weight), widened where needed to contain the Clopper-Pearson interval of as many
    labelled rows as Kish's effective size of ``sample_weight`` (as
    :meth:`probwrap.shift.PriorEstimator.estimate` does). Weights are relative: scaling them
    all changes nothing, except that a count table (:func:`table_cases`: whole numbers, some
    above 1, no common factor above 1, at most 1e6 cases) counts its cases, as the library
    reads one since 5 December 2026: the test of no shift and the interval's floor count the total,
    and a resample draws Poisson(``c``) cases of a row of ``c`` cases, so the same cases one
    row each give the same estimate, p-value and (in distribution) interval. Until 5 December
    2026, vcd CoalMiners' 1,000 unlabelled miners on 18 cells counted as Kish's 13.7 rows:
    interval [0, 0.65] and p = 0.43 against [0.22, 0.30] and p = 2e-11 for the miners as rows.

    With ``edge_warning``, an estimate at the edge (within 1e-3 of the source prevalence's
    distance to 0 or to 1, the rule of :class:`probwrap.shift.BoundaryPriorWarning`) warns with
    the scores' own average beside it: EM reaches an edge both when the batch holds (nearly) no
    row of a class and when the scores were not calibrated for ``source_prevalence``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.cli._prevalence import prevalence_from_source
    >>> p = np.array([0.1, 0.1, 0.2, 0.9])
    >>> out = prevalence_from_source(p, 0.325, n_resamples=20)
    >>> round(out["prevalence"], 3), out["shift_pvalue"] > 0.9
    (0.325, True)
    """
    from scipy.stats import chi2
    from sklearn.utils import check_random_state

    from probwrap.shift import binomial_interval, em_prior, shift_test

    p2 = two_columns(proba)
    src = np.array([1.0 - source_prevalence, source_prevalence])
    w = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
    with warnings.catch_warnings(record=True) as point_caught:
        warnings.simplefilter("always")
        point = em_prior(p2, src, sample_weight=w)
    for caught_one in point_caught:  # passed on as raised
        warnings.warn_explicit(caught_one.message, caught_one.category, caught_one.filename,
                               caught_one.lineno)
    test = shift_test(p2, src, sample_weight=w)
    cases = table_cases(w)
    n_rows = effective_rows(w, proba.shape[0])
    if cases is not None:
        # shift_test reads weights summing to Kish's size; the log-likelihood ratio is linear
        # in the weights (the maximum does not move with their scale), so the cases' statistic
        # is Kish's times cases / Kish
        statistic = float(test.statistic) * cases / n_rows
        test = dataclasses.replace(test, statistic=statistic,
                                   pvalue=float(chi2.sf(statistic, test.df)))
        n_rows = cases
    if not (np.all(np.isfinite(point.prior)) and np.isfinite(test.statistic)):
        raise ValueError(
            f"with source prevalence {source_prevalence:g} the estimate is not a finite number; "
            "give a source prevalence the scores were really calibrated for"
        )
    out = result_dict(point.prior[1], point.converged, "em", proba.shape[0], source_prevalence, test)
    if edge_warning and not point_caught:  # em_prior's own warning says it already
        if not _warn_edge(float(point.prior[1]), source_prevalence, p2[:, 1], w):
            _warn_source_mean(float(point.prior[1]), source_prevalence, p2[:, 1], w,
                              float(test.pvalue))
    if n_resamples > 0:
        rng = check_random_state(seed)
        n = proba.shape[0]
        draws = np.empty(n_resamples)
        init = point.prior if np.all(point.prior > 0) else None
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            for b in progress(range(n_resamples), desc="bootstrap", total=n_resamples):
                if cases is not None:  # Poisson(c) cases of a row of c cases
                    counts = rng.poisson(w).astype(float)
                else:
                    counts = np.bincount(rng.randint(0, n, size=n), minlength=n).astype(float)
                    if w is not None:
                        counts = counts * w
                if w is not None and not np.any(counts > 0):  # every drawn row has weight 0
                    draws[b] = np.nan
                    continue
                draws[b] = em_prior(p2, src, sample_weight=counts, init=init).prior[1]
        _warn_per_resample(caught, n_resamples)
        alpha = 1.0 - confidence_level
        lo, hi = np.nanquantile(draws, [alpha / 2, 1 - alpha / 2])
        cp = binomial_interval(point.prior[1], n_rows, confidence_level)
        out["interval"] = [
            float(min(lo, cp[0], point.prior[1])), float(max(hi, cp[1], point.prior[1]))
        ]
    return out


#: factor by which the scores' average share of the rarer class may differ from the source
#: prevalence's before ``prevalence --source-prevalence`` warns that the scores may not be
#: calibrated for it (our rule: the class at least doubled or halved)
SOURCE_MEAN_FACTOR = 2.0


def _warn_source_mean(estimate: float, source: float, p: np.ndarray, w: np.ndarray | None,
                      pvalue: float, level: float = 0.05) -> bool:
    """Warn when the scores' average puts the rarer class's share at least
    :data:`SOURCE_MEAN_FACTOR` times above or below the source prevalence's, beyond sampling
    error (the shift test's p-value below ``level``).

    Nothing in unlabelled scores tells a shift from scores not calibrated for ``source``: EM's
    estimate ``q`` is exactly the reading of scores whose log-odds are all off by
    ``logit(q) - logit(source)`` with no shift. But calibrated scores move less than the
    prevalence does: under prior shift their average is ``source + (q - source) * d``, where
    ``d`` (the difference of the classes' mean scores) lies in [0, 1]. An average at twice
    the stated share of the rarer class therefore says that the class at least doubled, or
    that the scores were not calibrated for ``source`` (scores of a model trained on
    rebalanced classes average near 0.5; naive Bayes' often sit far off) -- the two readings
    the warning names. Returns whether it warned.
    """
    if not pvalue < level:
        return False
    mean = float(np.average(p, weights=w))
    rare_source = min(source, 1.0 - source)
    rare_mean = mean if source < 0.5 else 1.0 - mean
    factor = rare_mean / rare_source
    if 1.0 / SOURCE_MEAN_FACTOR < factor < SOURCE_MEAN_FACTOR:
        return False
    cls = "positive" if source < 0.5 else "negative"
    how = (f"{factor:.3g} times" if factor >= 1.0 else f"{1.0 / factor:.3g} times less than")
    warnings.warn(
        f"the scores average {mean:.4g}, which puts the share of the {cls} class at {how} the "
        f"{rare_source:.4g} that --source-prevalence {source:.4g} gives it (shift test p-value "
        f"{pvalue:.2g}). Calibrated scores move less than the prevalence does, so either the "
        f"share of {cls}s moved at least that far (the estimate {estimate:.4g} says so), or "
        "the scores are not calibrated for that source prevalence (a model trained on "
        "rebalanced classes, naive Bayes, a forest's votes), which reads the same: nothing in "
        "an unlabelled file tells the two apart. Check the scores on labelled rows of the "
        "source population (their share as --source-prevalence should find no shift), or give "
        "them as --reference so that the scores are recalibrated",
        UserWarning,
        stacklevel=3,
    )
    return True


def _warn_edge(estimate: float, source: float, p: np.ndarray, w: np.ndarray | None) -> bool:
    """Warn when EM's prevalence sits at 0 or 1 (see :func:`prevalence_from_source`);
    returns whether it warned."""
    from probwrap.shift import BoundaryPriorWarning

    if not (estimate <= 1e-3 * source or estimate >= 1.0 - 1e-3 * (1.0 - source)):
        return False
    mean = float(np.average(p, weights=w))
    side = "1 (every row positive)" if estimate > 0.5 else "0 (no row positive)"
    warnings.warn(
        f"the estimated prevalence is at the edge, {side}: EM goes there when the batch holds "
        f"(nearly) only one class, and also when the scores were not calibrated for the source "
        f"prevalence given ({source:.4g}); the scores' own average here is {mean:.4g}. If that "
        "average is far from the estimate, check --source-prevalence, or give --reference with "
        "labelled held-out scores of the same model so that the scores are recalibrated",
        BoundaryPriorWarning,
        stacklevel=2,
    )
    return True


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
    sample_weight: np.ndarray | None = None,
    reference_weight: np.ndarray | None = None,
    cells: np.ndarray | None = None,
    reference_cells: np.ndarray | None = None,
    reference_folds: int | None = None,
) -> dict[str, Any]:
    """Prevalence of unlabelled rows by :class:`probwrap.shift.PriorEstimator`.

    ``reference_folds``: how many fold models scored the reference rows, for the check of
    repeated rows (:func:`warn_repeated_scores`; None: read from the scores).

    ``sample_weight`` weights the unlabelled rows (``estimate``), ``reference_weight`` the
    reference rows (``fit``); the estimator counts both by Kish's effective size. ``cells`` /
    ``reference_cells``: the cell of every unlabelled / reference row (counts ``k`` of ``n``),
    each cell one unit of the shift test and the interval (``estimate(cells=)``,
    ``fit(cells=)``).

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
    from probwrap.shift import ShiftTestResult

    est = reference_estimator(ref_proba, ref_y, method=method, recalibrate=recalibrate,
                              n_resamples=n_resamples, confidence_level=confidence_level,
                              seed=seed, reference_weight=reference_weight,
                              reference_cells=reference_cells)
    res = est.estimate(two_columns(proba), sample_weight=sample_weight, cells=cells)
    if cells is None:
        # rows repeating one another beyond the chance the reference rows show (resampled or
        # copied rows): the rule of PriorShiftWrapper.adapt and monitor (since 5 December 2026)
        warn_repeated_scores(est, proba, ref_proba, ref_y, sample_weight,
                             reference_folds=reference_folds)
    # the estimator's two-sample score test (it carries the reference rows' error too)
    test = ShiftTestResult(res.shift_statistic, res.shift_pvalue, 1)
    out = result_dict(
        res.prior[1], res.converged, method, proba.shape[0], float(est.source_prior_[1]), test
    )
    if res.interval is not None:
        out["interval"] = [float(res.interval[1, 0]), float(res.interval[1, 1])]
    if res.ml_prior is not None:
        # EM: the rows alone (no pull toward the source prevalence) and the pseudo-rows of the
        # pull used for "prevalence"; on a small batch they say that the estimate was held
        # near the source prevalence for lack of evidence (held_toward_source)
        out["ml_prevalence"] = float(res.ml_prior[1])
        out["pseudo_rows"] = float(res.pseudo_rows or 0.0)
    out["recalibrated"] = bool(recalibrate)
    out["n_reference_rows"] = int(ref_y.shape[0])
    if cells is not None:
        # the rows' evidence as the estimate weighed it: Kish's count over the cells' design
        # effect on the mean score (what the alarm counts a batch as)
        from probwrap.shift._cells import cell_design_rows, check_cells
        from probwrap.shift._shift_tests import _score_rows

        w = np.ones(proba.shape[0]) if sample_weight is None else np.asarray(sample_weight, float)
        out["effective_rows"] = cell_design_rows(
            _score_rows(est.calibrate(two_columns(proba)), est.source_prior_), w,
            check_cells(cells, proba.shape[0]), float(w.sum() ** 2 / np.dot(w, w)))
    if reference_cells is not None:
        out["reference_effective_rows"] = float(est.n_source_design_rows_)
    return out


def warn_repeated_scores(est: Any, proba: np.ndarray, ref_proba: np.ndarray, ref_y: np.ndarray,
                         sample_weight: np.ndarray | None = None,
                         reference_folds: int | None = None) -> None:
    """A :class:`~probwrap.shift.RepeatedRowsWarning` when the unlabelled scores repeat one
    another (exactly equal) far more often than independent draws do, by the rule of
    ``PriorShiftWrapper.adapt`` (:func:`probwrap.shift._repeats.repeats_of_rows`): the chance
    rate read from how often reference scores of each pair of classes coincide. Nothing
    without resamples (``est.n_resamples == 0``, as the wrapper). By batch, the warning of each
    batch is shown once with how many more batches had it (``_by_batch``).

    ``reference_folds`` (``--reference-folds``): the reference rows were scored by that many
    fold models (out-of-fold scores), so their ties are read over the pairs of one fold; 1:
    by one model. None: read as five fold models where the scores show that another model
    scored them (``scored_by_other_models``), else as one."""
    from probwrap.shift._repeats import (
        REFERENCE_MODELS,
        RepeatedRowsWarning,
        labelled_clumps,
        labelled_repeat_counts,
        repeats_of_rows,
        rows_repeat_message,
        scored_by_other_models,
        within_model_counts,
    )

    ref = two_columns(ref_proba)
    y = np.asarray(ref_y).astype(int)
    counts = (*labelled_repeat_counts(ref, y, 2), *labelled_clumps(ref, y, 2))
    if reference_folds is not None:
        # the user says how the reference was scored (a ten-fold reference read as five fold
        # models warned on 3 of 6 draws of distinct TitanicSurvival rows;
        # benchmarks/cli_repeat_reference.py)
        if reference_folds > 1:
            counts = within_model_counts(counts, reference_folds)
    elif scored_by_other_models(ref_proba, proba):
        # out-of-fold reference scores: they tie only within a fold, so their rate of ties is
        # read over the pairs of one fold (before 5 December 2026, over all pairs:
        # a warning on every draw of coarse scores such as carData Cowles and TitanicSurvival)
        counts = within_model_counts(counts, REFERENCE_MODELS)
    found = repeats_of_rows(est, counts, two_columns(proba), None, sample_weight)
    if found is None:
        return
    warnings.warn(
        rows_repeat_message(found).replace("posteriors", "score")
        + ". The interval and the test of no shift count every row as an independent draw; "
        "rows resampled with replacement from a pool, or copied records, are not, and the "
        "interval is then too narrow (it can miss the prevalence with no other warning). If "
        "the repeats are copies, drop them, or give --cell-column with one label per group of "
        "identical rows so that each group counts once",
        RepeatedRowsWarning,
        stacklevel=3,
    )


def reference_estimator(
    ref_proba: np.ndarray,
    ref_y: np.ndarray,
    *,
    method: str = "em",
    recalibrate: bool = True,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    seed: int | None = 0,
    reference_weight: np.ndarray | None = None,
    reference_cells: np.ndarray | None = None,
) -> Any:
    """The :class:`probwrap.shift.PriorEstimator` of ``prevalence --reference``, fitted on the
    reference rows (``reference_weight``: their weights as :func:`library_weights` passes them:
    a count table's cases, other weights by Kish's effective size)."""
    from probwrap.shift import PriorEstimator

    return PriorEstimator(
        method,
        calibration="bcts" if recalibrate else None,
        n_resamples=n_resamples,
        confidence_level=confidence_level,
        random_state=seed,
    ).fit(two_columns(ref_proba), ref_y, sample_weight=reference_weight, cells=reference_cells,
          _weight_owner=None)  # (a count table's cases, or Kish's size: nothing to warn about)


def source_baseline_standard_error(
    proba: np.ndarray,
    source_prevalence: float,
    pooled_prevalence: float,
    batch_rows: float,
    sample_weight: np.ndarray | None = None,
) -> float | None:
    """Standard error of the EM prevalence of a batch of ``batch_rows`` rows at the source
    prevalence ``pi0`` (the baseline), when no labelled rows are kept (``--source-prevalence``).

    The maximum-likelihood prevalence of a two-component mixture with known components has the
    asymptotic variance ``1 / (m I)``, ``I = E[(p - pi0)^2] / (pi0 (1 - pi0))^2`` the
    information of one row with posterior ``p`` at ``pi0`` (the score of the mixing share;
    Titterington, Smith & Makov 1985, sec. 4.3, cited from memory). The expectation is over a
    batch at the baseline: the pooled rows (prevalence ``pooled_prevalence``, EM) re-weighted by
    the density ratio ``1 / (pi p / pi0 + (1 - pi) (1 - p) / (1 - pi0))``, exact under prior
    shift. Not below the binomial ``sqrt(pi0 (1 - pi0) / m)``, the floor of the batches' own
    intervals (Clopper-Pearson). None where it cannot be formed.
    """
    pi0, pi = float(source_prevalence), float(pooled_prevalence)
    if not (0.0 < pi0 < 1.0 and 0.0 <= pi <= 1.0 and np.isfinite(batch_rows)
            and batch_rows > 1):
        return None
    p = np.asarray(proba, dtype=float)
    ratio = 1.0 / (pi * p / pi0 + (1.0 - pi) * (1.0 - p) / (1.0 - pi0))
    weight = ratio if sample_weight is None else ratio * np.asarray(sample_weight, dtype=float)
    if not np.all(np.isfinite(weight)) or weight.sum() <= 0:
        return None
    info = float(np.average(((p - pi0) / (pi0 * (1.0 - pi0))) ** 2, weights=weight))
    floor = float(np.sqrt(pi0 * (1.0 - pi0) / batch_rows))
    if not info > 0:
        return None
    return max(float(1.0 / np.sqrt(batch_rows * info)), floor)


def batch_alarm_json(
    batches: list[dict[str, Any]],
    source_prevalence: float,
    *,
    confidence_level: float = 0.95,
    reference: float = 0.5,
    decision_interval: float = 5.0,
    labelled_rows: float = np.inf,
    baseline_standard_error: float | None = None,
) -> dict[str, Any]:
    """The prevalence alarm of per-batch results, as JSON values.

    Each batch is standardised by its own shift test: the signed root of its statistic (on the
    chi-square scale, 1 df), positive where the batch's prevalence lies above the source one
    (:func:`probwrap.shift.signed_shift_scores`). ``labelled_rows``: the reference rows every
    batch is compared with (``np.inf`` for a source prevalence taken as exact); the quoted
    in-control run length is the one reached with probability 0.9 over their draw
    (:func:`probwrap.shift.baseline_error_run_length`). How fast the chart detects a shift (the
    small-batch note) is judged, as in the HTML report, from ``baseline_standard_error``: the
    standard error of a batch at the source prevalence (the batches' own intervals are wider
    once the prevalence has risen); without it, from the median of the batches' own intervals.
    A batch's size is its ``effective_rows`` (Kish's size of weighted rows) when given, else
    ``n_rows``.

    Examples
    --------
    >>> rows = [{"batch": str(i), "n_rows": 100, "prevalence": v, "shift_statistic": s,
    ...          "interval": [v - 0.0078, v + 0.0078]}
    ...         for i, (v, s) in enumerate([(0.040, 0.0), (0.043, 0.6), (0.038, 0.3),
    ...                                     (0.041, 0.1), (0.052, 9.0), (0.055, 13.0),
    ...                                     (0.051, 8.0), (0.054, 12.0)])]
    >>> out = batch_alarm_json(rows, 0.040)
    >>> out["first_alarm"], [a["batch"] for a in out["alarms"]], round(out["in_control_run_length"])
    ('5', ['5', '7'], 465)
    """
    from scipy.stats import norm

    from probwrap.report._alarm_chart import alarm_on_scores

    stat = np.array([b["shift_statistic"] for b in batches], dtype=float)
    prev = np.array([b["prevalence"] for b in batches], dtype=float)
    if not np.all(np.isfinite(stat)):
        raise ValueError("a batch's shift statistic is not finite, so the alarm cannot "
                         "standardise it")
    z = np.sign(prev - float(source_prevalence)) * np.sqrt(np.maximum(stat, 0.0))
    se = None
    if all(b.get("interval") is not None for b in batches):
        width = np.array([b["interval"][1] - b["interval"][0] for b in batches], dtype=float)
        if np.all(width > 0):
            se = width / (2.0 * norm.ppf(0.5 + confidence_level / 2.0))
    labels = [b["batch"] for b in batches]
    a = alarm_on_scores(z, labels, np.array([b.get("effective_rows", b.get("n_rows", 1)) for b in batches],
                                         dtype=float),
                        labelled_rows=labelled_rows, baseline=float(source_prevalence),
                        standard_error=se, baseline_standard_error=baseline_standard_error,
                        reference=reference, decision_interval=decision_interval)
    res = a.result
    alarms = [{"batch": labels[i], "index": int(i), "direction": "up" if d > 0 else "down"}
              for i, d in zip(res.alarms.tolist(), res.direction.tolist(), strict=True)]
    return {
        "reference": res.reference,
        "decision_interval": res.decision_interval,
        "standardized": z.tolist(),
        "upper": res.upper.tolist(),
        "lower": res.lower.tolist(),
        "alarms": alarms,
        "first_alarm": alarms[0]["batch"] if alarms else None,
        "in_control_run_length": a.in_control_run_length,
        "run_length_probability": a.run_length_probability,
        "median_in_control_run_length": a.median_run_length,
        "exact_baseline_run_length": a.exact_baseline_run_length,
        "labelled_share": a.labelled_share,
        "assured_decision_interval": a.assured_decision_interval,
        "batches_to_detect": a.batches_to_detect,
        "detection_standard_error": (
            "baseline" if baseline_standard_error is not None else
            "batches" if se is not None else None),
        "warnings": list(a.warnings),
    }


def effective_rows(w: np.ndarray | None, n: int) -> float:
    """Kish's effective sample size ``(sum w)^2 / sum w^2`` of ``w`` (``n`` without weights)."""
    if w is None:
        return float(n)
    u = w / w.max()
    return float(u.sum() ** 2 / (u @ u))


def kish_scaled(w: np.ndarray | None) -> np.ndarray | None:
    """``w`` rescaled to sum to Kish's effective size: the same ratios, at the scale where
    the library reads them as relative everywhere. (The reference rows' recalibration reads
    weights that sum to at least the rows as row frequencies; on MASS birthwt, weights times
    1000 moved the estimate from 0.33432 to 0.33472.) ``prevalence`` promises that only the
    ratios of the weights matter."""
    if w is None:
        return None
    u = w / w.max()
    return u * (u.sum() / (u @ u))


def library_weights(w: np.ndarray | None, cells: np.ndarray | None = None) -> np.ndarray | None:
    """The weights ``prevalence --reference`` passes to :class:`probwrap.shift.PriorEstimator`:
    a count table (:func:`probwrap._validation.whole_counts`: whole numbers, some above 1, no
    common factor above 1, at most 1e6 cases) unchanged, so that the estimator counts its cases
    as it does for the same weights given in Python (since 5 December 2026), and the same cases one
    row each give the same estimate, interval and p-value; other weights, and any weights with
    ``cells`` (the cells' clustering counts the units), :func:`kish_scaled`. Before, a count
    table was rescaled to Kish's size: vcd CoalMiners, 1,000 unlabelled miners on 16 cells,
    counted as about 13 rows (interval about [0, 0.7] against the library's [0.13, 0.31])."""
    if w is None:
        return None
    if cells is None and table_cases(w) is not None:
        return w
    return kish_scaled(w)


def table_cases(w: np.ndarray | None) -> float | None:
    """The number of cases of a count table read as its cases (:func:`library_weights`), or
    None for other weights (read as relative, by Kish's size)."""
    from probwrap._validation import whole_counts

    if w is None:
        return None
    counts = whole_counts(np.asarray(w, dtype=float))
    return None if counts is None else float(counts.sum())


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


# HELD_MOVE (probwrap.shift._by_batch, our rule): a pull of at least 0.01 on the prevalence is
# reported as "held"; the HTML report's batch tables mark the same batches (held_near_source)
EDGE = 1e-3  # an interval end within this of 0 or 1 reaches the edge


def held_toward_source(result: dict[str, Any]) -> bool:
    """Whether the estimate was held toward the source prevalence for lack of evidence: the
    pull of ``prior_strength`` pseudo-rows (EM with ``--reference``) moved it by at least
    ``HELD_MOVE`` (0.01) from the rows-alone (maximum-likelihood) estimate.

    Examples
    --------
    >>> held_toward_source({"prevalence": 0.47, "ml_prevalence": 0.62, "pseudo_rows": 20.0})
    True
    >>> held_toward_source({"prevalence": 0.62, "interval": [0.5, 0.7]})
    False
    """
    from probwrap.shift._by_batch import HELD_MOVE  # here: importing shift loads SciPy

    ml = result.get("ml_prevalence")
    return bool(ml is not None and result.get("pseudo_rows", 0.0) > 0
                and abs(result["prevalence"] - ml) >= HELD_MOVE)


def interval_reach(interval: list[float] | None) -> str | None:
    """What an interval reaching an edge means, or None: ``"whole range"`` for [0, 1] (the rows
    cannot place the prevalence), ``"reaches 0"`` / ``"reaches 1"`` where the rows allow a
    batch with no positives / only positives (ends within 1e-3 of the edge).

    Examples
    --------
    >>> interval_reach([0.0, 1.0]), interval_reach([0.489, 1.0]), interval_reach([0.2, 0.7])
    ('whole range', 'reaches 1', None)
    """
    if interval is None:
        return None
    lo, hi = interval
    if lo <= EDGE and hi >= 1.0 - EDGE:
        return "whole range"
    if hi >= 1.0 - EDGE:
        return "reaches 1"
    if lo <= EDGE:
        return "reaches 0"
    return None
