"""One object that learns from labelled held-out posteriors and estimates priors of new rows.

The resampling behind its bootstrap intervals lives in :mod:`._resample`; the batch-by-batch
table in :mod:`._by_batch`.
"""

from __future__ import annotations

import numbers
import warnings
from dataclasses import replace
from typing import Any

import numpy as np
from scipy.stats import chi2
from sklearn.utils import check_random_state

from .._validation import (
    check_labels,
    check_proba,
    check_same_length,
    check_sample_weight,
    plain,
    whole_counts,
)
from ..calibration._base import rescale_extreme_weights
from . import _analytic
from ._analytic import (
    all_shares_level,
    analytic_prior_interval,
    class_score_moments,
    class_score_sums,
    floor_class_spread,
    implied_class_covs,
    labelled_parameter_cov,
    moment_identified_rank,
    moment_prior_interval,
)
from ._calibration import BiasCorrectedScaling, choose_tail, tail_log_scores
from ._cells import cell_design_rows, cell_mean_cov, check_cells
from ._confusion import acc_prior, bbse_prior, heldout_confusion
from ._estimate import (
    BoundaryPriorWarning,
    FewLabelledRowsWarning,
    NoConsistentPriorWarning,
    PriorEstimate,
    PriorIntervalConflictWarning,
    PriorNotIdentifiedWarning,
    _loglik,
    _solve_prior,
    _warn_empty_columns,
    check_class_names,
    evidence_strength,
    name_classes,
    rejection_reach,
    unlabelled_share,
)
from ._interval import fold_shares, score_interval
from ._mixture_fit import MIXTURE_MISFIT_LEVEL, ClassMixtureMisfitWarning, class_mixture_misfit
from ._resample import (  # noqa: F401  (_interval_from_draws: imported from here elsewhere)
    _interval_from_draws,
    _Resampling,
    _widen,
)
from ._shift_tests import (
    _mean_cov,
    _null_harm_scale_moments,
    _score_rows,
    _score_stat_moments,
    _source_moments,
    estimate_amplification,
    labelled_log_loss,
    null_harm_scale,
    null_move_ratio,
)

__all__ = ["PriorEstimator", "PRIOR_METHODS", "CALIBRATIONS", "INTERVALS"]

PRIOR_METHODS = ("em", "bbse", "bbse_soft", "acc", "pacc")
CALIBRATIONS = ("bcts", "vector", None)
INTERVALS = ("score", "bca", "percentile")

#: Fewer effective unlabelled rows than this draws a warning (common practice: 30 rows).
FEW_ROWS = 30
#: An interval on fewer effective labelled rows than this draws a FewLabelledRowsWarning (where
#: benchmarks/shift.py --only=fewlabels measured coverage 2-6 points short on real data).
FEW_LABELLED_ROWS = 100
#: Under this many effective labelled rows of a class (common practice: the rule of five
#: expected counts per cell of Cochran 1954, cited from memory), that warning adds that the
#: shift test can reject too often (measured in benchmarks/promise_hunt31.py's evidence section).
FEW_CLASS_LABELLED_ROWS = 5
#: ``PriorShiftWrapper.adapt`` warns (ImprecisePriorWarning) when a class share's interval reaches
#: further than this from the estimate: the distance at which benchmarks/prior_far_off.py counts
#: an estimate as far off, so an estimate that far from the truth, with an interval that holds
#: the truth, always draws the warning.
IMPRECISE_REACH = 0.25


def _current_source_score(source_score: Any) -> Any:
    """The labelled side of the shift test, ``(mean, ((V, n), ...))``; an estimator pickled
    before the variance components were kept holds ``(mean, covariance of the mean)`` (treated
    as one component with many rows: the chi-square reference it was fitted with)."""
    if source_score is None or isinstance(source_score[1], tuple):
        return source_score
    return source_score[0], ((source_score[1], float("inf")),)


def _cell_moments(u: np.ndarray, w: np.ndarray, codes: np.ndarray) -> tuple:
    """The labelled side of the shift test with the rows of a cell one unit: the mean score and
    one variance component, its cluster-robust covariance on the cells' count."""
    mean, cov, g = cell_mean_cov(u, w, codes)
    return mean, ((cov / max(g - 1.0, 1.0), g),)


def _cell_floor_rows(p: np.ndarray, w: np.ndarray, codes: np.ndarray) -> float:
    """Rows whose binomial error, ``m (1 - m) / n``, equals the clustered (cells) variance of
    the mean calibrated posterior ``m`` of a class (the smallest such count over the classes).

    With calibrated posteriors a class's indicator has the posterior as its mean given the
    features, so the clustered variance of the share of the class is at least that of the
    mean posterior: this count is at least the cells' design-effective count of the labels,
    and a Clopper-Pearson floor on it (:func:`_widen`) is never wider than the cells' own
    error. (Kish's count of the rows, the floor without cells, can be far smaller: 59.6 rows
    for statsmodels' star98 districts, whose clustered error of the pass rate is that of
    about 340 independent pupils.)"""
    mean, cov, g = cell_mean_cov(p, w, codes)
    var = np.diag(np.atleast_2d(cov)) / max(g - 1.0, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        rows = np.where(var > 0, mean * (1.0 - mean) / var, np.inf)
    return float(min(np.min(rows), 1e12))


def _source_cells(est: Any) -> np.ndarray | None:
    """Cell codes of the kept labelled rows (None: rows are their own units, or none kept)."""
    return getattr(est, "_src_cells", None)


def _kish(w: np.ndarray) -> float:
    """Kish's (1965) effective size ``(sum w)^2 / sum w^2``, from the weights over their
    largest: equal weights at any scale give exactly the number of rows. Before, 100 rows of
    weight 1/7 gave 99.99999999999993, under the 100 labelled rows of the
    FewLabelledRowsWarning, and 30 unlabelled rows of weight 0.37 drew "Only 30 effective
    unlabelled rows", which weights 1 did not (benchmarks/shift_real_hunt27.py)."""
    top = float(np.max(w)) if w.size else 0.0
    if not top > 0.0:
        return float(w.sum() ** 2 / np.dot(w, w))
    u = w / top
    return float(u.sum() ** 2 / np.dot(u, u))


def _table_cases(w: np.ndarray, effective_rows: float | None, cells: Any,
                 folds: Any = None, case_folds: bool = False) -> np.ndarray | None:
    """The whole-number counts of a count table (:func:`probwrap._validation.whole_counts`:
    whole numbers, some above 1, no common factor above 1, at most 1e6 cases) read as CASES:
    the prior-shift estimate, shift test, intervals and few-rows warnings then count its total
    as rows and the bootstraps draw Poisson(count) cases per row, as for the same cases passed
    one row each (since 5 December 2026). None (the relative reading, Kish's effective size)
    for other weights, when ``effective_rows`` overrides the count (a tally's bins), with ``cells``
    (the cells' clustering counts the units instead) or with ``folds``, the labelled rows'
    folds of a cross-fitted model: its folds split the table's rows (cells), not its cases,
    and counting the cases of such fold models' held-out scores harmed (R's HairEyeColor,
    logistic regression refit on a table of 150 students: the shift test rejected at p = 1e-21
    with no shift and adapt's log loss rose 1.6-1.8 times; the cases as rows: p = 0.5), so
    a cross-fitted estimator kept Kish's reading on both sides (docs/evidence/prior_shift_log.md,
    the section on count tables in adapt).

    ``case_folds`` (since 5 December 2026): the folds split CASES, as the folds of the same
    cases passed one row each do: the labelled rows are a count table cross-fitted by its cases
    (:meth:`probwrap._heldout.HeldOutClassifierBase._table_case_folds`, its held-out rows the
    (row, fold) runs of cases weighted by their length) or rows of equal weight. A table is
    then read as its cases with ``folds`` too; on the labelled side ``w`` holds the runs'
    lengths, whole numbers that may share a factor, so they are taken as they are.

    Before, 1,000 cases on the 16 cells of a table counted as 6 to 37 rows by Kish's size and
    ``adapt`` never moved (benchmarks/shift_real_hunt27.py: esoph, CoalMiners, Punishment,
    HairEyeColor)."""
    if effective_rows or cells is not None or (folds is not None and not case_folds):
        return None
    return whole_counts(w)


def _case_runs(w: np.ndarray) -> np.ndarray | None:
    """The labelled runs' lengths of a count table cross-fitted by its cases (whole numbers,
    at least one case in all, at most 1e6 cases: :func:`_table_cases` with ``case_folds``),
    else None."""
    r = np.round(np.asarray(w, dtype=float))
    if not r.size or np.any(r < 0) or not np.array_equal(r, w) or not 0 < r.sum() <= 1e6:
        return None
    return r.astype(np.int64)


def _count_table_hint(w: np.ndarray, n_units: float, cross_fitted: bool = False) -> str:
    """The end of the few-rows warning where the unlabelled weights look like a table of
    counts (whole numbers, some above 1, summing to more than twice the rows counted): they
    are read as relative weights, so the table's cases do not count as rows. Found on count
    tables (vcd CoalMiners, datasets esoph, HairEyeColor; benchmarks/shift_real_hunt27.py):
    1,000 cases on 8 to 18 cells counted as 6 to 13 rows, the interval spanned [0, 1] and the
    warning advised larger batches, while the cases as rows detected the shift."""
    w = np.asarray(w, dtype=float)
    if not w.size or not np.all(w == np.round(w)) or not float(w.max()) > 1.0:
        return ""
    total = float(w.sum())
    if whole_counts(w) is not None:  # a count table: its cases were counted
        if not cross_fitted or not total > 2.0 * n_units:
            return ""
        return (
            f" The weights are a table of counts summing to {total:.6g}, but the model was "
            "cross-fitted on the labelled rows, whose folds split a table's rows, not its "
            "cases: adapt then reads the weights as relative (only their ratios count). Pass "
            "one row per case (np.repeat of the rows by their counts) to count the cases."
        )
    if not total > 2.0 * n_units:
        return ""
    return (
        f" The weights are whole numbers summing to {total:.6g} but not a table of counts "
        "(they share a common factor above 1, or sum to more than 1e6): adapt reads them as "
        "relative weights (only their ratios count), not as counts of cases. If each row "
        "stands for that many independent cases, pass the counts without the common factor "
        "(a count table is read as its cases) or one row per case (np.repeat of the rows by "
        "their counts) instead."
    )


class PriorEstimator(_Resampling):
    """Estimate the class priors of unlabelled rows from labelled held-out posteriors.

    ``fit`` takes held-out posteriors with their true labels (the source data): it fits the
    calibration (by default bias-corrected temperature scaling, Alexandari, Kundaje & Shrikumar
    2020), records the weighted source priors and the hard and soft held-out confusion matrices
    of the calibrated posteriors. ``estimate`` takes posteriors of unlabelled rows (the target
    data) and returns the estimated priors with a bootstrap interval and a test of "no shift".

    Parameters
    ----------
    method : {"em", "bbse", "bbse_soft", "acc", "pacc"}, default="em"
        Likelihood-based (Saerens et al. 2002; shrunk toward the source prior by
        ``prior_strength``), black-box shift estimation with hard or soft confusion matrices
        (Lipton et al. 2018), adjusted classify-and-count (Forman 2008) or its probabilistic
        form (Bella et al. 2010).
    calibration : {"bcts", "vector", None}, default="bcts"
        Calibration fitted on the held-out posteriors and applied to both source and target
        posteriors before estimation: bias-corrected temperature scaling, vector scaling (both
        :class:`BiasCorrectedScaling`), or none.
    tol, max_iter : float, int
        Largest accepted distance to the optimum and iteration cap (see :func:`em_prior`).
    n_resamples : int, default=200
        Bootstrap resamples for the interval; 0 skips the interval.
    confidence_level : float, default=0.95
    resample_source : bool, default=True
        Whether each bootstrap resample also redraws the labelled rows (re-estimating the
        calibration by one Newton step from the fitted one, the source prior and the confusion
        matrices), so the interval reflects the uncertainty of both samples. With ``False``
        only the unlabelled rows are redrawn. (Bootstrap intervals only: the score interval
        always carries both samples' error.)
    random_state : int, RandomState or None, default=None
    prior_strength : float, default=20.0
        ``method="em"`` only: pseudo-rows of a Dirichlet prior centred on the source prior
        (MAP estimate; see :func:`em_prior`). 0 gives the plain maximum-likelihood estimate.
        The interval is always built around the maximum-likelihood estimate; where the data
        reject the shrunk estimate (it lies outside that interval), fewer pseudo-rows are used,
        faded with the evidence of a shift (:func:`~probwrap.shift._estimate.evidence_strength`;
        ``PriorEstimate.pseudo_rows``), and the estimate is kept inside the interval. Without an
        interval (``n_resamples=0``) the same is decided from the likelihood-ratio region of
        the shares (:func:`~probwrap.shift._estimate.rejection_reach`), once the shift test
        rejects at the interval's level.
    interval : {"score", "bca", "percentile"}, default="score"
        ``"score"``: for two classes, the inverted two-sample score test
        (:func:`score_interval`; no resampling, both samples' error included, honest at the
        edges); for more classes with ``method="em"`` the class-moment interval (Wilson shape;
        ``probwrap.shift._analytic.moment_prior_interval``): the shares that make the labelled
        rows' class means of the shift test's score, re-weighted, reproduce the unlabelled
        rows' mean, with both samples' error and no resampling, valid whatever the calibration
        map (before 4 December 2026, and still for an estimator fitted earlier without its
        rows, the delta-method interval on the EM fixed point); other multiclass methods fall
        back to ``"bca"``. ``"bca"``:
        bias-corrected and
        accelerated bootstrap interval (Efron 1987; acceleration from a grouped jackknife over
        both samples) over ``n_resamples`` Poisson resamples of both samples.
        ``"percentile"``: the plain percentile bootstrap interval.

    Attributes
    ----------
    source_prior_ : ndarray of shape (k,)
        Weighted class frequencies of the held-out rows.
    confusion_ : ndarray of shape (k, k)
        Joint hard confusion matrix of the calibrated held-out posteriors (rows predicted).
    soft_confusion_ : ndarray of shape (k, k)
    calibrator_ : BiasCorrectedScaling or None
    n_classes_ : int
    n_source_effective_ : float
        Kish's effective number of labelled rows.
    n_source_design_rows_ : float
        The labelled rows' evidence about the mean score in rows: ``n_source_effective_``
        divided by the cells' design effect on the mean score with ``fit(cells=...)``
        (:func:`probwrap.shift._cells.cell_design_rows`), ``n_source_effective_`` without cells.
        What :func:`probwrap.shift.labelled_share_of_variance` takes as ``labelled_rows``.
    n_source_cells_ : int or None
        With ``fit(cells=...)``: the labelled cells of positive weight (the units of the shift
        test and the interval); None without cells.
    class_names_ : tuple or None
        Labels of the classes given to ``fit`` (``class_names``), used to name classes in
        warnings; None names them by column index.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator
    >>> rng = np.random.default_rng(0)
    >>> def draw(n, prior):   # two unit-variance Gaussian classes, means -1 and +1
    ...     y = (rng.uniform(size=n) < prior).astype(int)
    ...     x = rng.normal(2.0 * y - 1.0)
    ...     p1 = 1 / (1 + np.exp(-2 * x))      # exact posterior under equal priors
    ...     return np.column_stack([1 - p1, p1]), y
    >>> p_src, y_src = draw(2000, 0.5)
    >>> p_new, _ = draw(2000, 0.2)
    >>> est = PriorEstimator(n_resamples=50, random_state=0).fit(p_src, y_src)
    >>> res = est.estimate(p_new)
    >>> bool(abs(res.prior[1] - 0.2) < 0.04), bool(res.shift_pvalue < 0.001)
    (True, True)
    """

    def __init__(
        self,
        method: str = "em",
        *,
        calibration: str | None = "bcts",
        tol: float = 1e-6,
        max_iter: int = 1000,
        n_resamples: int = 200,
        confidence_level: float = 0.95,
        resample_source: bool = True,
        random_state: Any = None,
        prior_strength: float = 20.0,
        interval: str = "score",
    ) -> None:
        self.method = method
        self.calibration = calibration
        self.tol = tol
        self.max_iter = max_iter
        self.n_resamples = n_resamples
        self.confidence_level = confidence_level
        self.resample_source = resample_source
        self.random_state = random_state
        self.prior_strength = prior_strength
        self.interval = interval

    # -- validation ----------------------------------------------------------------------------
    def _check_params(self) -> None:
        if self.method not in PRIOR_METHODS:
            raise ValueError(f"`method` must be one of {PRIOR_METHODS}; got {plain(self.method)!r}.")
        if self.calibration not in CALIBRATIONS:
            raise ValueError(
                f"`calibration` must be one of {CALIBRATIONS}; got {plain(self.calibration)!r}."
            )
        if not (isinstance(self.n_resamples, numbers.Integral) and self.n_resamples >= 0):
            raise ValueError(
                f"`n_resamples` must be a non-negative integer; got {plain(self.n_resamples)!r}."
            )
        if not (isinstance(self.confidence_level, numbers.Real) and 0 < self.confidence_level < 1):
            raise ValueError(
                f"`confidence_level` must be in (0, 1); got {plain(self.confidence_level)!r}."
            )
        if not (isinstance(self.tol, numbers.Real) and self.tol > 0):
            raise ValueError(f"`tol` must be a positive number; got {plain(self.tol)!r}.")
        if not (isinstance(self.max_iter, numbers.Integral) and self.max_iter >= 1):
            raise ValueError(f"`max_iter` must be a positive integer; got {plain(self.max_iter)!r}.")
        strength = getattr(self, "prior_strength", 0.0)
        if not (isinstance(strength, numbers.Real) and np.isfinite(strength) and strength >= 0):
            raise ValueError(
                f"`prior_strength` must be a finite non-negative number; got {plain(strength)!r}."
            )
        if getattr(self, "interval", "score") not in INTERVALS:
            raise ValueError(f"`interval` must be one of {INTERVALS}; got {plain(self.interval)!r}.")

    # -- fitting -------------------------------------------------------------------------------
    def fit(
        self, proba: Any, y: Any, sample_weight: Any = None, *, effective_rows: float | None = None,
        class_names: Any = None, source_fold: Any = None, cells: Any = None,
        _weight_owner: str | None = "PriorEstimator.fit", _case_folds: bool = False,
    ) -> PriorEstimator:
        """Learn from held-out posteriors ``proba`` (n, k) and class indices ``y`` in 0..k-1.

        ``effective_rows`` overrides Kish's effective number of labelled rows (for rows that
        are bins of a tally, whose weights are counts of many rows). ``class_names`` (one label
        per column, kept as ``class_names_``) names the classes in warnings and errors, which
        otherwise name them by column index. ``source_fold`` (one integer per row, 0 .. K - 1,
        K >= 2) says which of K fold models of a cross-fitted model gave each row's posterior;
        :meth:`estimate` then takes the unlabelled rows' posteriors from every fold model too
        (``fold_proba``) for the score interval (see :func:`score_interval`). ``cells`` (one
        label per row; aggregated counts, e.g. the success and failure rows of a group from
        :func:`probwrap.aggregated.expand_counts`) makes the rows of a cell one unit for the
        shift test and the intervals: the labelled mean score's variance is clustered on the
        cells (:mod:`probwrap.shift._cells`) and the bootstrap draws whole cells.

        ``sample_weight``: the source shares, confusion matrices, shift test and intervals read
        only their ratios (Kish's effective size), except a count table (whole numbers, no
        common factor above 1, some above 1, at most 1e6 cases; without ``cells``, and
        with ``source_fold`` only where its folds split cases: ``_case_folds``, the runs of
        a table cross-fitted by its cases, from ``PriorShiftWrapper``; an
        unlabelled table also after labelled rows of equal weight), whose cases count (the effective size is the
        total, the bootstrap draws Poisson(count) cases of each row); the calibration
        (``calibration`` not None) reads them by the calibration maps' rule (docs/weights.md):
        row counts when they sum to at least the number of rows, otherwise relative. A
        :class:`~probwrap.calibration.WeightScaleWarning` (once) says when that reading moves
        with their scale, as ``PriorShiftWrapper.fit`` says for the same calibration (since
        4 December 2026; ``effective_rows``, a tally's counts, is not warned about).
        """
        self._check_params()
        p = check_proba(proba, name="proba", ndim=2)
        k = p.shape[1]
        names = check_class_names(class_names, k)
        check_same_length(("proba", p), ("y", y))
        y_idx, _ = check_labels(y, name="y", classes=np.arange(k), min_classes=1)
        w = check_sample_weight(sample_weight, p.shape[0])
        if sample_weight is not None:
            w = rescale_extreme_weights(w, "PriorEstimator.fit", stacklevel=3)
            if _weight_owner and self.calibration is not None and not effective_rows:
                self._warn_weight_reading(w, _weight_owner)
        counts = np.bincount(y_idx, weights=w, minlength=k)
        if np.any(counts <= 0):
            raise ValueError(
                f"`y` has no (positively weighted) rows of "
                f"{name_classes(np.flatnonzero(counts <= 0), names)}; every class needs "
                "held-out rows to estimate its prior."
            )
        self.class_names_ = names
        self._src = (p.copy(), np.asarray(y_idx, dtype=int), w)
        self._src_rows = None  # rows behind each entry of _src (None: one row each)
        self._src_fold = self._check_source_fold(source_fold, p.shape[0])
        self._src_cells = check_cells(cells, p.shape[0])
        self.n_source_cells_ = (None if self._src_cells is None else
                                int(np.unique(self._src_cells[w > 0]).shape[0]))
        self._boot = None
        self.n_classes_ = k
        # a count table's cases (_table_cases): its total counts as the labelled rows, and
        # the bootstrap draws Poisson(count) cases of each row (_resample._bootstrap)
        # ``_case_folds`` (PriorShiftWrapper): the rows are the runs of a count
        # table's cases that share a row and a fold (the table cross-fitted by its cases);
        # their lengths are its cases, as the same cases passed one row each
        case_runs = (_case_runs(w) if _case_folds and self._src_fold is not None
                     and self._src_cells is None and not effective_rows else None)
        # whether the folds split cases (a table cross-fitted by its cases, or rows of equal
        # weight): the unlabelled side then reads a table as its cases too (estimate)
        self._folds_split_cases = self._src_fold is None or case_runs is not None or (
            self._src_cells is None and not effective_rows
            and bool(np.all(w[w > 0] == np.max(w))))
        self._src_cases = (case_runs if case_runs is not None else
                           _table_cases(w, effective_rows, self._src_cells, self._src_fold))
        if self._src_cases is not None:
            effective_rows = float(self._src_cases.sum())
        self.n_source_effective_ = float(effective_rows) if effective_rows else _kish(w)
        summary = self._summarise(p, y_idx, w)
        self.calibrator_, self.source_prior_, self.confusion_, self.soft_confusion_ = summary
        # mean of the labelled rows' scores and its variance, for the two-sample shift test:
        # the plain (not class-stratified) mean, whose variance carries the error of the
        # labelled class shares that source_prior_ and the calibration were fitted to
        p_cal = self.calibrate(p)
        self._source_score = _source_moments(
            _score_rows(p_cal, self.source_prior_), w, None,
            self.source_prior_, effective_rows,
        ) if self._src_cells is None else _cell_moments(
            _score_rows(p_cal, self.source_prior_), w, self._src_cells)
        # the labelled rows' own log loss of the calibrated posteriors: the evidence gate's
        # harm is relative to the log loss, and the posteriors' entropy alone overstates it
        # where a calibration fitted on few rows leaves them underconfident
        self._source_log_loss = labelled_log_loss(p_cal, y_idx, w)
        self.n_source_design_rows_ = (
            self.n_source_effective_ if self._src_cells is None else cell_design_rows(
                _score_rows(p_cal, self.source_prior_), w, self._src_cells,
                self.n_source_effective_))
        # the labelled rows' share of the analytic interval (more than two classes): the
        # sandwich covariance of the calibration and the source prior, a small matrix
        self._labelled_cov = (
            labelled_parameter_cov(self.calibrator_, p, y_idx, w, self.source_prior_,
                                   self.n_source_effective_) if k > 2 else None
        )
        # and the labelled rows' class-conditional score moments behind the default interval
        # (moment_prior_interval): k small matrices
        # (each class's spread floored at the one the posteriors imply, _floored: kept in the
        # summary, so a fit beyond 20,000 rows that keeps no rows floors it too)
        self._class_scores = (
            self._floored(class_score_moments(class_score_sums(p_cal, y_idx, w,
                                                               self.source_prior_),
                                              effective_rows)) if k > 2 else None
        )
        return self

    @staticmethod
    def _warn_weight_reading(w: np.ndarray, owner: str) -> None:
        """One :class:`~probwrap.calibration.WeightScaleWarning` when the calibration's reading
        of the labelled weights moves with their scale (the maps' rule; the words are shared
        with the wrappers, :mod:`probwrap._weights`). The wrappers that fit this estimator say
        it in their own words and pass ``_weight_owner=None``."""
        from .._weights import count_scale_weights, warn_count_reading

        count_scale_weights(w, owner, "for the calibration (and its test of whether "
                            "calibrate_output keeps the model's own probabilities)")
        warn_count_reading(
            w, owner,
            "the calibration (its test of whether calibrate_output keeps the model's own "
            "probabilities, its scale prior and output floor) counts",
            "that test's choice and calibrate_output, and through the calibrated posteriors the "
            "estimate, the shift test and the interval",
        )

    def _summarise(
        self, p: np.ndarray, y_idx: np.ndarray, w: np.ndarray, warm_start: Any = None
    ) -> tuple:
        k = p.shape[1]
        cal = None
        if self.calibration is not None:
            kind = "temperature" if self.calibration == "bcts" else "vector"
            # the floor before logarithms: chosen from the held-out rows as CalibrationWrapper
            # does, and on a few hundred rows or fewer the order of the scores beyond it kept
            # where that cross-validates better (choose_tail); kept fixed for bootstrap refits,
            # which start from the fitted map
            if getattr(warm_start, "clip_", None):
                tail = (getattr(warm_start, "tail_floor_", warm_start.clip_), warm_start.clip_,
                        getattr(warm_start, "tail_width_", 0.0))
            else:
                tail = choose_tail(p, y_idx, w, kind)
            cal = BiasCorrectedScaling(kind=kind).fit_log_proba(
                tail_log_scores(p, *tail), y_idx, w, warm_start=warm_start, tail=tail
            )
            p = cal.predict(p)
        prior = np.bincount(y_idx, weights=w, minlength=k) / w.sum()
        hard = heldout_confusion(p, y_idx, sample_weight=w)
        soft = heldout_confusion(p, y_idx, sample_weight=w, soft=True)
        return cal, prior, hard, soft

    def calibrate(self, proba: Any) -> np.ndarray:
        """Apply the fitted calibration to posteriors of shape (n, k) (identity when none)."""
        p = self._checked_proba(proba)
        return p if self.calibrator_ is None else self.calibrator_.predict(p)

    def calibrate_output(self, proba: Any) -> np.ndarray:
        """Posteriors to return to a user: :meth:`calibrate`, or the model's own (floored) where
        the calibration's likelihood-ratio test kept them (``calibrator_.identity_kept_``)."""
        p = self._checked_proba(proba)
        return p if self.calibrator_ is None else self.calibrator_.predict_output(p)

    def _checked_proba(self, proba: Any) -> np.ndarray:
        """``proba`` checked as posteriors over the fitted classes (after the fitted check)."""
        self._check_fitted()
        p = check_proba(proba, name="proba", ndim=2)
        if p.shape[1] != self.n_classes_:
            raise ValueError(
                f"`proba` has {p.shape[1]} columns but the estimator was fitted on "
                f"{self.n_classes_} classes."
            )
        return p

    def _eta_cov(self) -> np.ndarray | None:
        """The labelled summary of the analytic interval (computed from the kept rows for an
        estimator fitted before it was stored; None for two classes or without rows)."""
        cov = getattr(self, "_labelled_cov", None)
        if cov is None and self.n_classes_ > 2:
            src = self._source_rows()
            if src is not None and self._source_row_counts() is None:
                cov = labelled_parameter_cov(self.calibrator_, src[0], src[1], src[2],
                                             self.source_prior_, self.n_source_effective_)
                self._labelled_cov = cov
        return cov

    def _class_score_moments(self) -> tuple | None:
        """The labelled rows' class-conditional score moments of the default multiclass
        interval (computed from the kept rows for an estimator fitted before they were stored;
        None for two classes or without them)."""
        moments = getattr(self, "_class_scores", None)
        if moments is None and self.n_classes_ > 2:
            src = self._source_rows()
            if src is not None and self._source_row_counts() is None:
                moments = self._floored(class_score_moments(class_score_sums(
                    self.calibrate(src[0]), src[1], src[2], self.source_prior_)))
                self._class_scores = moments
        return moments

    def _floored(self, moments: tuple | None, weights: np.ndarray | None = None) -> tuple | None:
        """The labelled class-score ``moments`` of the multiclass interval with each class's
        spread floored at the one the calibrated posteriors of the kept labelled rows imply
        (:func:`~probwrap.shift._analytic.floor_class_spread`; ``weights`` the rows' weights
        the moments were summed with, default their own). Unchanged without kept rows or with
        ``SPREAD_FLOOR`` off. A class's few labelled rows that miss its rows the model confuses
        with another class give a mean score that is off and a spread that is too small
        together (R's mlmRev ``Exam``, 150 labelled rows: the 95 % interval missed 15 of 50
        cells, 11 without a warning; docs/evidence/prior_shift_log.md, the section on intervals
        that miss on an unusual labelled draw)."""
        source = self._source_rows()
        if moments is None or source is None or not _analytic.SPREAD_FLOOR:
            return moments
        w = source[2] if weights is None else weights
        return floor_class_spread(moments, implied_class_covs(
            self.calibrate(source[0]), w, self.source_prior_))

    @staticmethod
    def _check_source_fold(source_fold: Any, n: int) -> np.ndarray | None:
        """``source_fold`` as integers 0 .. K - 1 (K >= 2) per labelled row, or None."""
        if source_fold is None:
            return None
        f = np.asarray(source_fold)
        if (f.shape != (n,) or f.dtype.kind not in "iu" or f.min(initial=0) < 0
                or np.unique(f).shape[0] < 2 or np.unique(f).shape[0] != int(f.max()) + 1):
            raise ValueError(
                "`source_fold` must give every labelled row its fold as an integer 0 .. K - 1, "
                f"every fold used and K >= 2; got {plain(f.tolist()[:5])!r}... of shape "
                f"{f.shape} for {n} rows."
            )
        return f.astype(np.intp)

    def _refit_folds(self, fold_proba: Any, n_rows: int) -> tuple | None:
        """``(calibrated fold posteriors (K, n, k), fold of each kept labelled row)`` when
        ``fold_proba`` is given and the labelled rows were fitted with ``source_fold`` and are
        still kept as rows; else None."""
        if fold_proba is None:
            return None
        fold = getattr(self, "_src_fold", None)
        src = self._source_rows()
        if fold is None or src is None or self._source_row_counts() is not None \
                or fold.shape[0] != src[1].shape[0]:
            return None
        n_folds = int(fold.max()) + 1
        fp = [self._checked_proba(f) for f in fold_proba]
        if len(fp) != n_folds or any(f.shape[0] != n_rows for f in fp):
            raise ValueError(
                f"`fold_proba` must hold one (n, {self.n_classes_}) array of posteriors per fold "
                f"({n_folds} folds, n = {n_rows} rows); got {len(fp)} arrays."
            )
        return np.stack([self.calibrate(f) for f in fp]), fold

    def _fold_moments(self, fold_proba: Any) -> Any:
        """``fold_proba`` when it is the unlabelled rows' fold-score sums
        (:class:`probwrap.shift._fold_moments.FoldScoreMoments`, two classes) and the labelled
        rows are kept with their folds as :meth:`_refit_folds` needs them; else None."""
        from ._fold_moments import FoldScoreMoments

        if not isinstance(fold_proba, FoldScoreMoments):
            return None
        fold = getattr(self, "_src_fold", None)
        src = self._source_rows()
        if (fold is None or src is None or self._source_row_counts() is not None
                or fold.shape[0] != src[1].shape[0] or self.n_classes_ != 2
                or fold_proba.n_folds != int(fold.max()) + 1):
            return None
        return fold_proba

    def _names(self) -> tuple | None:
        """Labels of the classes for messages (None: by column index)."""
        return getattr(self, "class_names_", None)

    def _check_fitted(self) -> None:
        if not hasattr(self, "source_prior_"):
            raise ValueError("This PriorEstimator is not fitted yet; call fit first.")

    def _source_rows(self) -> tuple | None:
        return getattr(self, "_src", None)

    def _source_row_counts(self) -> np.ndarray | None:
        """Rows behind each labelled entry (Kish's count of a bin; None: one row each)."""
        return getattr(self, "_src_rows", None)

    # -- resampling (the pieces are in ._resample) -----------------------------------------
    def replicate_draws(
        self,
        target_proba: np.ndarray,
        draw_source: Any,
        draw_target: Any,
        n_replicates: int,
        init: np.ndarray,
    ) -> tuple[np.ndarray, int]:
        """Estimates under ``n_replicates`` pairs of replicate weights; returns (draws, n_dropped).

        ``draw_source(b)`` gives labelled row weights (or None: labelled rows as fitted),
        ``draw_target(b)`` target row weights.
        """
        z_t = self.calibrator_.log_scores(target_proba) if self.calibrator_ is not None else None
        p_t = self.calibrate(target_proba)
        draws, dropped = [], 0
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for b in range(n_replicates):
                est = self._replicate(z_t, p_t, draw_source(b), draw_target(b), init)
                if est is None:
                    dropped += 1
                else:
                    draws.append(est)
        k = self.n_classes_
        return (np.asarray(draws) if draws else np.empty((0, k))), dropped

    # -- estimation ----------------------------------------------------------------------------
    def _point(
        self,
        p: np.ndarray,
        w: np.ndarray,
        src: np.ndarray,
        hard: np.ndarray,
        soft: np.ndarray,
        init: np.ndarray | None = None,
        n_source: float | None = None,
    ) -> PriorEstimate:
        m = self.method
        if m == "em":
            start = src if init is None else init
            prior, n_iter, ok, dist = _solve_prior(
                p, w, src, start, float(self.tol), int(self.max_iter),
                float(getattr(self, "prior_strength", 0.0)),
            )
            return PriorEstimate(prior=prior, method="em", n_iter=n_iter, converged=ok,
                                 n_rows=p.shape[0], distance=float(dist))
        if m in ("bbse", "bbse_soft"):
            s = m == "bbse_soft"
            return bbse_prior(p, soft if s else hard, src, soft=s, sample_weight=w,
                              n_source=n_source, class_names=self._names())
        s = m == "pacc"
        return acc_prior(p, soft if s else hard, soft=s, sample_weight=w, n_source=n_source,
                         class_names=self._names())

    def estimate(
        self,
        proba: Any,
        sample_weight: Any = None,
        *,
        random_state: Any = None,
        effective_rows: float | None = None,
        interval: bool = True,
        fold_proba: Any = None,
        cells: Any = None,
        repeat_design_effect: float | None = None,
    ) -> PriorEstimate:
        """Estimate the class priors of unlabelled rows.

        Parameters
        ----------
        proba : array-like of shape (n, k)
            Posteriors of the unlabelled rows from the same model as the held-out ones.
        sample_weight : array-like of shape (n,), default=None
            Frequency weights of the unlabelled rows. A count table (whole numbers, no common
            factor above 1, some above 1, at most 1e6 cases) counts its cases: its total is the
            effective number of rows and the bootstrap draws Poisson(count) cases of each row,
            as for the cases passed one row each (not with ``cells``, nor for
            an estimator fitted with ``source_fold``). Other weights: only their relative sizes
            matter, counted as Kish's effective sample size ``(sum w)^2 / sum w^2``.
        random_state : int, RandomState or None, default=None
            Overrides the estimator's ``random_state`` for this call.
        effective_rows : float, default=None
            Overrides Kish's effective number of unlabelled rows (for rows that are bins of a
            tally).
        interval : bool, default=True
            Whether to compute the bootstrap interval (when ``n_resamples > 0``).
        fold_proba : sequence of array-like of shape (n, k), default=None
            The same rows' posteriors from each fold model, in fold order, for an estimator
            fitted with ``source_fold``: the shift test and the score interval (default) then
            compare the unlabelled rows' scores averaged over the fold models with the labelled
            rows' held-out scores of the same models (:func:`score_interval`), so they carry
            the difference between the fold models and a model refit on all labelled rows that
            scored ``proba``; the point estimate reads every row once per fold model too, each
            weighted by the fold's share (the fold-averaged root of the score equation; since
            4 December 2026, before it read ``proba``; see :meth:`_estimating_rows`). The
            bootstrap
            intervals (and more than two classes with a method other than ``"em"``, whose
            interval is the bootstrap) then resample every unlabelled row once per fold model,
            weighted by the fold's share (since 4 December 2026; before, they read ``proba``).
            Ignored without ``source_fold`` or once the labelled rows are kept as a tally.
        cells : array-like of shape (n,), default=None
            The cell of every unlabelled row (aggregated counts: a group's success and failure
            rows share one). The shift test and the intervals then count each cell as one unit
            (the variance of the mean score clustered on the cells, with the cells' count as
            its degrees of freedom; the bootstrap draws whole cells), as ``fit(cells=...)``
            does for the labelled rows; either side may have cells without the other. With
            cells on either side the shift test compares the two means with separate variances
            (Welch) instead of one pooled covariance, and the floor of the interval
            (:func:`_widen`) counts the rows whose binomial error equals the cells' clustered
            error of the mean posterior (:func:`_cell_floor_rows`), not Kish's count. With
            labelled cells and more than two classes the interval is the BCa bootstrap over
            whole cells.
            Two classes: a :class:`probwrap.shift._fold_moments.FoldScoreMoments` (the sums of
            the fold-averaged score of rows that are not at hand, more than 20,000 Dask or
            Spark rows) serves the shift test and the score interval the same way, and its
            ``rows`` (every row once per fold model, as bins of a tally) the point estimate.
        repeat_design_effect : float, default=None
            The rows' design effect of their exact repeats beyond chance (at least 1; None or
            1: the rows are independent draws): the mixture check (``mixture_misfit_pvalue``,
            :class:`ClassMixtureMisfitWarning`) then counts the rows as their effective number
            over it, since rows drawn again from a pool carry the pool's own deviation in
            every bin share (:func:`probwrap.shift._repeats.mixture_design_effect`; passed by
            ``PriorShiftWrapper.adapt`` where it raises
            :class:`~probwrap.shift.RepeatedRowsWarning`, since 5 December 2026).
            Nothing else reads it.

        Returns
        -------
        PriorEstimate
            ``prior`` is the point estimate (for ``method="em"`` the MAP estimate shrunk toward
            the source prior by ``prior_strength``; ``ml_prior`` the plain maximum-likelihood
            one). ``interval`` is the score interval (two classes) or a bootstrap interval over
            Poisson resamples of both the unlabelled and the labelled rows (BCa), built around
            the unpenalised estimate and widened to contain ``prior``; ``ml_interval`` is the
            same before that widening (the confidence interval of the class shares; for
            ``method="em"`` the shrunk ``prior`` is kept inside it, so the two agree).
            ``interval`` holds each class share one class at a time; with more than two classes
            ``all_shares_interval`` holds all of them at once (the same interval at the
            per-share level :func:`probwrap.shift._analytic.all_shares_level`, containing
            ``interval``). ``shift_statistic`` and
            ``shift_pvalue`` come from the two-sample score test
            (:func:`shift_score_test`), whatever ``method``. ``n_dropped`` counts resamples
            dropped because a class vanished from the labelled resample (a
            :class:`UserWarning` says so).
        """
        self._check_fitted()
        self._check_params()
        p_raw = check_proba(proba, name="proba", ndim=2)
        k = self.n_classes_
        if p_raw.shape[1] != k:
            raise ValueError(
                f"`proba` has {p_raw.shape[1]} columns but the estimator was fitted on "
                f"{k} classes."
            )
        w = check_sample_weight(sample_weight, p_raw.shape[0])
        if sample_weight is not None:
            w = rescale_extreme_weights(w, "PriorEstimator.estimate", stacklevel=3)
        cell_t = check_cells(cells, p_raw.shape[0])
        cell_s = _source_cells(self)
        # a count table's cases (_table_cases): its total counts as the unlabelled rows (the
        # pseudo-rows, the shift test, the intervals and the few-rows warning read it) and the
        # bootstrap draws Poisson(count) cases of each row, as for the cases passed as rows
        # (with a cross-fitted model: where its folds split cases)
        split_cases = getattr(self, "_folds_split_cases", False)
        cases_t = _table_cases(w, effective_rows, cell_t, getattr(self, "_src_fold", None),
                               case_folds=split_cases)
        if cases_t is not None:
            effective_rows = float(cases_t.sum())
        n_eff = float(effective_rows) if effective_rows else _kish(w)
        wk = w * (n_eff / w.sum())  # weights summing to the effective number of rows
        p = self.calibrate(p_raw)
        # more than 20,000 two-class Dask or Spark rows: the fold models' scores as sums
        # (probwrap.shift._fold_moments) instead of one array per fold
        moments = self._fold_moments(fold_proba)
        refit = (None if moments is not None or hasattr(fold_proba, "test_moments")
                 else self._refit_folds(fold_proba, p_raw.shape[0]))
        share = None
        if refit is not None:
            kept = self._source_rows()
            share = fold_shares(refit[1], kept[1], kept[2], refit[0].shape[0])[0]
            if getattr(self, "_fold_point", False):
                # the wrapper predicts with the fold models (PriorShiftWrapper.predicted_with_):
                # it re-weights the fold-share average of their posteriors
                p = np.tensordot(share, refit[0], axes=1)
        src = self.source_prior_
        n_src = getattr(self, "n_source_effective_", None)
        n_units = n_eff
        if cell_t is not None:
            # with cells, the evidence the pseudo-rows (prior_strength), the likelihood-ratio
            # region and the boundary warning weigh against is Kish's count divided by the
            # cells' design effect on the mean score (cell_design_rows), not Kish's count
            n_units = cell_design_rows(_score_rows(p, src), w, cell_t, n_eff)
            wk = w * (n_units / w.sum())
        if n_units < FEW_ROWS:
            warnings.warn(
                f"Only {n_units:.3g} effective unlabelled rows"
                + ("" if cell_t is None else " (Kish's count over the cells' design effect)")
                + "; the prior estimate is very uncertain and its interval is wide: read "
                "the interval, not the estimate, or pass more rows (larger batches)."
                + _count_table_hint(w, n_units, getattr(self, "_src_fold", None) is not None
                                    and not split_cases),
                UserWarning,
                stacklevel=2,
            )
        # the rows the estimate reads (pe, weights we summing to the effective count): the
        # posteriors p themselves, or for a base model refit on the labelled rows every
        # unlabelled row once per fold model (_estimating_rows); p stays the predicting
        # model's (the harm scale)
        pe, we = p, wk
        if refit is not None:
            pe, we = self._estimating_rows(refit[0], share, w, n_units)
        elif moments is not None and moments.rows is not None:
            # rows that are not at hand (more than 20,000 Dask or Spark rows): the same rows as
            # bins of a tally of every row's log-odds once per fold model, weighted by the
            # fold's share, taken where the rows live (probwrap.scale._folds.fold_moments)
            raw, stacked = moments.rows
            pe = self.calibrate(self._checked_proba(raw))
            we = stacked * (n_units / stacked.sum())
        point = self._point(pe, we, src, self.confusion_, self.soft_confusion_, n_source=n_src)
        ml = None
        if self.method == "em":
            _warn_empty_columns(we @ pe, "predicted probability mass", self._names())
            ml = _solve_prior(pe, we, src, point.prior if np.all(point.prior > 0) else src,
                              float(self.tol), int(self.max_iter))[0]
        deff = 1.0 if repeat_design_effect is None else float(repeat_design_effect)
        if not (np.isfinite(deff) and deff >= 1.0):
            raise ValueError("`repeat_design_effect` must be a finite number of at least 1 (or "
                             f"None); got {repeat_design_effect!r}.")
        misfit = self._mixture_misfit(pe, we, n_eff / deff, cell_t, cell_s, moments)
        u_t = _score_rows(p, src)
        if refit is not None:
            # a model refit on the labelled rows: the unlabelled rows' scores averaged over the
            # fold models (weights: the folds' shares of the labelled rows), so they mix the
            # same models as the labelled rows' held-out scores (see score_interval); for the
            # shift test and the multiclass interval alike
            u_t = np.tensordot(share, np.stack([_score_rows(f, src) for f in refit[0]]), axes=1)
        if cell_t is None:
            m_t, c_t, _ = _mean_cov(u_t, w)
            n_test = n_eff
        else:  # the unlabelled rows' mean score clustered on their cells
            m_t, c_t, n_test = cell_mean_cov(u_t, w, cell_t)
        if moments is not None:  # (cells are refused on Dask or Spark rows)
            m_t, c_t = moments.test_moments(src)
        source_score = getattr(self, "_source_score", None)
        test = _score_stat_moments((m_t, c_t, n_test), _current_source_score(source_score), k,
                                    pooled=cell_t is None and cell_s is None, source_prior=src)
        stat, pvalue = test.statistic, test.pvalue
        pseudo = float(getattr(self, "prior_strength", 0.0)) if self.method == "em" else None
        if moments is not None and moments.harm is not None:
            # rows not at hand whose fold models' average posterior predicts: its sums, taken
            # where the rows live (null_harm_scale of that average, as in memory)
            mean_p, second, loss = moments.harm
            reference = getattr(self, "_source_log_loss", None)
            if reference is not None and np.isfinite(reference) and reference > 0:
                loss = min(loss, float(reference))
            harm_scale = _null_harm_scale_moments(mean_p, second, loss, src, test.mean_cov)
            move_ratio = null_move_ratio(mean_p, second, src, test.mean_cov)
        else:
            harm_scale = null_harm_scale(p, w, src, test.mean_cov,
                                         reference_loss=getattr(self, "_source_log_loss", None))
            wn_h = w / w.sum()
            u_h = _score_rows(p, src)
            move_ratio = null_move_ratio(wn_h @ p, (u_h * wn_h[:, None]).T @ u_h, src,
                                         test.mean_cov)
        if ml is not None and harm_scale:
            # the move that will be applied is a share of EM's estimate, which can lie far
            # beyond the one-step estimate the harm bound assumes (estimate_amplification)
            u = _score_rows(pe, src)
            harm_scale *= estimate_amplification(
                (ml - src)[1:], (u * (we / we.sum())[:, None]).T @ u, test.mean_cov, test.raw
            )
        bounds, dropped, ml_bounds = None, 0, None
        # more than two classes: the interval that holds every class share at once
        # (all_shares_level), built the same way at the per-share level that makes it joint
        joint = None
        level_all = all_shares_level(self.confidence_level, k)
        conflict = False  # the two-class score interval found no share consistent with the rows
        # the interval's floor (_widen): Kish's count of the unlabelled rows; with cells the
        # count whose binomial error equals the clustered error of the mean posterior, which is
        # at most the labels' own (_cell_floor_rows), so the floor stays below the cells' error
        n_floor = n_eff if cell_t is None else max(n_eff, _cell_floor_rows(p, w, cell_t))
        if self.n_resamples > 0 and interval:
            # with cells, the labelled rows' design-effective count: Kish's count over the
            # cells' design effect on the mean score (cell_design_rows), the count the
            # unlabelled side's shrinkage weighs too (half of star98's districts, 151, under a
            # logistic regression on four covariates: 12.8, where their pupils' counts are 23.5
            # rows by Kish's size; the older count, the larger of Kish's and the cells', was 151)
            self._warn_few_labelled(
                n_src if getattr(self, "_src_cells", None) is None
                else getattr(self, "n_source_design_rows_", n_src),
                design=getattr(self, "_src_cells", None) is not None)
            source = self._source_rows()
            if not point.identified:
                bounds = np.column_stack([np.zeros(k), np.ones(k)])
                joint = bounds.copy() if k > 2 else None
            elif getattr(self, "interval", "score") == "score" and k == 2 and source is not None:
                (lo, hi), consistent = score_interval(
                    p, self.calibrate(source[0]), source[1], src, sample_weight=w,
                    source_sample_weight=source[2], effective_rows=n_eff,
                    source_effective_rows=n_src, confidence_level=self.confidence_level,
                    centre=float((ml if ml is not None else point.prior)[1]),
                    fold_proba=None if refit is None else refit[0],
                    source_fold=self._src_fold if moments is not None else (
                        None if refit is None else refit[1]),
                    cells=cell_t, source_cells=cell_s,
                    target_moments=moments,
                )
                conflict = not consistent
                if not consistent:
                    warnings.warn(
                        "No class prior is consistent with both the labelled and the unlabelled "
                        f"rows at the {self.confidence_level:.0%} level: they differ by more "
                        "than a change of class shares explains. The prior-shift assumption "
                        "probably fails (the features of a class changed too); the interval "
                        "is the single least-rejected prior.",
                        NoConsistentPriorWarning,
                        stacklevel=2,
                    )
                bounds = np.array([[1.0 - hi, 1.0 - lo], [lo, hi]])
                centre = ml if ml is not None else point.prior
                if ml is not None:
                    ml_bounds = _widen(bounds, ml, ml, n_floor, self.confidence_level)
                bounds = _widen(bounds, point.prior, centre, n_floor, self.confidence_level)
            elif getattr(self, "interval", "score") == "score" and ml is not None and (
                    cell_s is None) and (self._class_score_moments() is not None):
                # more than two classes: the labelled rows' class-conditional mean scores
                # re-weighted to the shares (moment_prior_interval); the delta method on EM's
                # fixed point missed under real shifts where the calibration errs on new rows
                moments = self._class_score_moments()
                w_implied = None
                if refit is not None:
                    # (m_t, c_t: the fold-averaged scores, above) against the labelled rows
                    # re-weighted so each fold holds its share of every class (as
                    # score_interval does for two classes)
                    w_fold = fold_shares(refit[1], source[1], source[2], refit[0].shape[0])[1]
                    sums = class_score_sums(self.calibrate(source[0]), source[1], w_fold, src)
                    cases = getattr(self, "_src_cases", None)
                    if cases is not None:
                        # a count table's runs of cases: each class's Kish count
                        # over its cases, a run of c cases of weight w_fold / c each (the same
                        # cases passed one row each give exactly this)
                        sums = (*sums[:3], np.bincount(
                            source[1], weights=w_fold ** 2 / np.maximum(cases, 1),
                            minlength=k))
                    moments = class_score_moments(sums)
                    w_implied = w_fold
                if w_implied is not None:  # (the fit's own moments were floored at fit)
                    moments = self._floored(moments, w_implied)
                self._warn_moment_rank(moments)
                found = moment_prior_interval((m_t, c_t, n_test), moments,
                                              self.confidence_level)
                bounds = (np.column_stack([np.zeros(k), np.ones(k)]) if found is None
                          else found[0])
                found = moment_prior_interval((m_t, c_t, n_test), moments, level_all)
                joint = (np.column_stack([np.zeros(k), np.ones(k)]) if found is None
                         else found[0])
                joint = _widen(joint, point.prior, ml, n_floor, level_all)
                ml_bounds = _widen(bounds, ml, ml, n_floor, self.confidence_level)
                bounds = _widen(bounds, point.prior, ml, n_floor, self.confidence_level)
            elif getattr(self, "interval", "score") == "score" and ml is not None and (
                    cell_t is None and cell_s is None) and (self._eta_cov() is not None):
                # an estimator fitted before the class moments were kept, without its rows:
                # the delta method on the EM fixed point, with the labelled rows' error
                # through the calibration and the source prior
                bounds = analytic_prior_interval(
                    self.calibrator_, p_raw, w, n_eff, src, ml, self._eta_cov(),
                    self.confidence_level, n_source=n_src,
                )[0]
                joint = _widen(analytic_prior_interval(
                    self.calibrator_, p_raw, w, n_eff, src, ml, self._eta_cov(),
                    level_all, n_source=n_src,
                )[0], point.prior, ml, n_eff, level_all)
                ml_bounds = _widen(bounds, ml, ml, n_eff, self.confidence_level)
                bounds = _widen(bounds, point.prior, ml, n_eff, self.confidence_level)
            else:
                rs = self.random_state if random_state is None else random_state
                centre = ml if ml is not None else point.prior
                if source is None and bool(self.resample_source):
                    warnings.warn(
                        "The labelled rows were not kept (more than 20,000 of them and "
                        "keep_heldout=False), so this bootstrap interval redraws the unlabelled "
                        "rows only and leaves out the labelled rows' error; fit with "
                        "keep_heldout=True for it, or use interval='score'.",
                        UserWarning,
                        stacklevel=2,
                    )
                if refit is None:
                    bounds, dropped = self._bootstrap(p_raw, w, centre, check_random_state(rs),
                                                      cells=cell_t, cases=cases_t)
                else:
                    bounds, dropped = self._refit_bootstrap(
                        fold_proba, refit[0], share, w, n_eff, centre, check_random_state(rs),
                        cells=cell_t, cases=cases_t)
                if k > 2:  # the same replicates at the per-share level of the joint interval
                    joint = _widen(self._last_all_shares, point.prior, centre, n_floor,
                                   level_all)
                if ml is not None:
                    ml_bounds = _widen(bounds, ml, ml, n_floor, self.confidence_level)
                bounds = _widen(bounds, point.prior, centre, n_floor, self.confidence_level)
        if ml is not None and ml_bounds is not None and point.identified and not self._within(
                point.prior, ml_bounds):
            # the data reject the shrunk estimate at the interval's level: the pseudo-rows
            # conflict with the rows, and fade with the evidence (_fade_pull); what still lies
            # outside is moved back to the interval's end (_inside)
            point, pseudo = self._fade_pull(point, pe, we, src, stat, pvalue)
            point, bounds = self._inside(point, ml, ml_bounds)
        elif ml is not None and ml_bounds is None and point.identified:
            # no interval (n_resamples=0, or interval=False): the same decision from the
            # likelihood-ratio region of the shares, which costs no resampling
            u = _score_rows(pe, src)
            info = (u * (we / we.sum())[:, None]).T @ u
            share = unlabelled_share(stat, (we / we.sum()) @ u, info, n_units)
            point, pseudo = self._settle_by_likelihood(
                point, ml, lambda x: _loglik(pe, we, src, x),
                lambda pt: self._fade_pull(pt, pe, we, src, stat, pvalue), pvalue, share)
        if ml is not None:
            self._warn_boundary(ml, pe, we, n_units, pvalue=pvalue, ml_bounds=ml_bounds,
                                prior=point.prior, pseudo=pseudo, conflict=conflict)
        if k > 2 and bounds is not None and point.identified:
            bounds, ml_bounds = self._reconcile(bounds, ml_bounds, pvalue)
        if joint is not None and bounds is not None:
            # every widening of the per-share interval (the shrunk estimate kept inside, the
            # source shares reached where the shift test accepts them) holds for the joint one
            joint = np.column_stack([np.minimum(joint[:, 0], bounds[:, 0]),
                                     np.maximum(joint[:, 1], bounds[:, 1])])
        return PriorEstimate(
            prior=point.prior,
            method=point.method,
            n_iter=point.n_iter,
            converged=point.converged,
            n_rows=p.shape[0],
            interval=bounds,
            shift_statistic=stat,
            shift_pvalue=pvalue,
            distance=point.distance,
            identified=point.identified,
            n_dropped=dropped,
            ml_prior=ml,
            null_harm_scale=harm_scale,
            ml_interval=ml_bounds,
            pseudo_rows=pseudo,
            null_move_ratio=move_ratio,
            all_shares_interval=joint,
            mixture_misfit_pvalue=misfit,
        )

    def _mixture_misfit(self, pe: np.ndarray, we: np.ndarray, n_eff: float, cell_t: Any,
                        cell_s: Any, moments: Any) -> float | None:
        """Two classes: the p-value of :func:`class_mixture_misfit` (do the unlabelled rows'
        calibrated scores ``pe``, weights ``we``, follow some mixture of the labelled classes'?)
        and a :class:`ClassMixtureMisfitWarning` below ``MIXTURE_MISFIT_LEVEL``. None (no
        check) with more than two classes, with cells on either side (the bins' variance would
        need the cells' clustering), with rows not at hand or labelled rows kept as a tally."""
        source = self._source_rows()
        if (self.n_classes_ != 2 or source is None or cell_t is not None or cell_s is not None
                or moments is not None or self._source_row_counts() is not None):
            return None
        found = class_mixture_misfit(pe[:, 1], self.calibrate(source[0])[:, 1], source[1],
                                     sample_weight=we, source_sample_weight=source[2],
                                     effective_rows=n_eff,
                                     source_cases=getattr(self, "_src_cases", None))
        if found is None:
            return None
        stat, pvalue, share, bins = found
        if pvalue < MIXTURE_MISFIT_LEVEL:
            warnings.warn(
                f"The unlabelled rows' scores fit no mixture of the labelled classes' scores "
                f"(counted in {bins} bins, the closest mixture at a share of {share:.2f} for "
                f"{name_classes(1, self._names())}: p = {pvalue:.2g}). Within a class the rows "
                "differ from the labelled ones, not only in the class shares (rows from one "
                "subgroup or source?); the prior-shift assumption probably fails, and the "
                "estimate and its interval can be far off without knowing it.",
                ClassMixtureMisfitWarning,
                stacklevel=3,
            )
        return pvalue

    @staticmethod
    def _estimating_rows(fold_calibrated: np.ndarray, share: np.ndarray, w: np.ndarray,
                         n_eff: float) -> tuple[np.ndarray, np.ndarray]:
        """The rows :meth:`estimate` reads for a base model refit on the labelled rows: every
        unlabelled row once per fold model (``fold_calibrated``, calibrated, shape (K, n, k)),
        weighted by the fold's share of the labelled rows (``share``) times its own weight
        ``w``, the weights summing to Kish's ``n_eff`` (so the pseudo-rows of
        ``prior_strength`` and the evidence count the rows once).

        The calibration, the source shares and the confusion matrices were fitted on the fold
        models' held-out posteriors; the refit model, fitted on all labelled rows, scores more
        sharply or less than they do, and read through their calibration it moved the estimate
        (R's ggplot2 diamonds, "Ideal", gradient boosting, 2,000 labelled rows, 10,000 at
        share 0.2: mean 0.180 for 0.2, against 0.199 from these rows). Averaging the fold
        models' posteriors first is no cure either (0.190 there): an average of calibrated
        posteriors is flatter than each. For EM the estimate from the stacked rows is the root
        of the prior's score equation with each row's score averaged over the fold models,
        ``sum_i w_i sum_k share_k u(p_ik; pi) = 0``, the fold models' Saerens, Latinne &
        Decaestecker (2002, eq. 2.9-2.10) fixed points averaged in the shares their held-out
        posteriors have among the labelled rows, the moment condition that the score interval
        inverts (:func:`score_interval`; Chernozhukov et al. 2018, DML2); for the
        confusion-matrix methods the unlabelled rows' mean (hard or soft) prediction averaged
        over the fold models.
        """
        k = fold_calibrated.shape[2]
        stacked = np.concatenate([s * np.asarray(w, dtype=float) for s in share])
        return fold_calibrated.reshape(-1, k), stacked * (n_eff / stacked.sum())

    def _refit_bootstrap(
        self, fold_proba: Any, fold_calibrated: np.ndarray, share: np.ndarray, w: np.ndarray,
        n_eff: float, centre: np.ndarray, rng: np.random.RandomState,
        cells: np.ndarray | None = None, cases: np.ndarray | None = None,
    ) -> tuple[np.ndarray, int]:
        """The bootstrap interval of a base model refit on the labelled rows, from the fold
        models' posteriors of the unlabelled rows (``fold_proba``, raw; ``fold_calibrated``,
        calibrated, shape (K, n, k)) instead of the refit model's.

        Every unlabelled row enters once per fold model, weighted by the fold's share of the
        labelled rows (``share``): the estimating equation is then the fold models' equations
        averaged in the shares their held-out posteriors have among the labelled rows, which
        the calibration, the source shares and the confusion matrices were fitted on. For EM
        it is the score equation of the prior with each row's score averaged over the fold
        models, the moment condition of :func:`score_interval` (Chernozhukov et al. 2018,
        DML2); for the confusion-matrix methods the unlabelled rows' mean (hard or soft)
        prediction averaged over the fold models. Each fold model never saw its fold's
        labelled rows nor the unlabelled rows, so resampling both samples with the fold
        models fixed carries the sampling error without the mismatch between the refit model
        and the fold models. The interval is built around the estimate from the stacked rows
        (the refit model's ``centre`` is then added by :func:`_widen`, as for the score
        interval).
        """
        k = self.n_classes_
        copies = fold_calibrated.shape[0]
        raw = np.concatenate([self._checked_proba(f) for f in fold_proba])
        stacked_w = np.concatenate([s * w for s in share])
        p = fold_calibrated.reshape(-1, k)
        wk = stacked_w * (n_eff / stacked_w.sum())
        src = self.source_prior_
        if self.method == "em":
            start = centre if np.all(centre > 0) else src
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                fold_centre = _solve_prior(p, wk, src, start, float(self.tol),
                                           int(self.max_iter))[0]
        else:
            with warnings.catch_warnings():
                # the refit model's estimate above already warned about what this one would
                warnings.simplefilter("ignore")
                fold_centre = self._point(
                    p, wk, src, self.confusion_, self.soft_confusion_,
                    n_source=getattr(self, "n_source_effective_", None)).prior
        return self._bootstrap(raw, stacked_w, fold_centre, rng, copies=copies, cells=cells,
                               cases=cases)

    def _fade_pull(self, point: PriorEstimate, p: np.ndarray, wk: np.ndarray, src: np.ndarray,
                   stat: float | None, pvalue: float | None,
                   ) -> tuple[PriorEstimate, float | None]:
        """The shrunk EM estimate recomputed with ``prior_strength`` faded by the evidence of a
        shift once the shift test rejects at the interval's level (:func:`evidence_strength`),
        and the pseudo-rows used."""
        strength = float(getattr(self, "prior_strength", 0.0))
        if strength <= 0:
            return point, strength
        used = evidence_strength(strength, p, wk, src, stat, self.n_classes_ - 1, pvalue,
                                 1.0 - float(self.confidence_level))
        if used >= strength:
            return point, strength
        prior, n_iter, ok, dist = _solve_prior(p, wk, src, point.prior, float(self.tol),
                                               int(self.max_iter), used)
        return replace(point, prior=prior, n_iter=point.n_iter + n_iter, converged=ok,
                       distance=float(dist)), used

    def _likelihood_cutoff(self) -> float:
        """The chi-square quantile (one degree of freedom, the interval's level) that bounds
        the likelihood-ratio region along the segment from the maximum-likelihood to the
        shrunk estimate: the candidates lie on that one-parameter path, so the ratio within
        it has one degree of freedom (for two classes the profile-likelihood interval)."""
        return float(chi2.ppf(float(self.confidence_level), 1))

    def _settle_by_likelihood(
        self, point: PriorEstimate, ml: np.ndarray, loglik: Any, fade: Any,
        pvalue: float | None, share: float = 1.0,
    ) -> tuple[PriorEstimate, float | None]:
        """Without an interval: fade the pull where the data reject the shrunk estimate, judged
        by the likelihood-ratio region of the shares at the interval's level.

        The shrunk estimate is rejected when ``2 (l(ml) - l(prior))`` exceeds the chi-square
        quantile on one degree of freedom (Wilks 1938; along the segment from ``ml`` to the
        shrunk estimate, see :meth:`_likelihood_cutoff`; ``l`` = ``loglik``, the
        log-likelihood of Saerens et al. 2002 on Kish's effective rows). Then, as where an
        interval exists, the pseudo-rows fade with the evidence (``fade(point)`` returns the
        re-solved estimate and the pseudo-rows used: :meth:`_fade_pull`, or the Dask / Spark
        reductions), and a faded estimate still rejected moves back toward ``ml`` to the
        region's edge (:func:`rejection_reach`). For two classes the region is the
        profile-likelihood interval of the share. The region carries the unlabelled rows'
        sampling error only, so nothing is done unless the shift test (``pvalue``), which
        carries the labelled rows' error too, also rejects "no shift" at that level, and the
        cutoff is divided by ``share``, the unlabelled rows' share of the test's variance
        (:func:`unlabelled_share`), which widens the region to carry the labelled rows' error
        too. Where nothing conflicts it costs two evaluations of the likelihood.
        """
        strength = float(getattr(self, "prior_strength", 0.0))
        if strength <= 0 or not (pvalue is not None and np.isfinite(pvalue)
                                 and pvalue < 1.0 - float(self.confidence_level)):
            return point, strength
        top = float(loglik(ml))
        cutoff = self._likelihood_cutoff() / min(1.0, max(float(share), 1e-12))
        if 2.0 * (top - float(loglik(point.prior))) <= cutoff:
            return point, strength
        point, used = fade(point)
        lam = rejection_reach(loglik, ml, point.prior, top, cutoff)
        if lam < 1.0:
            new = np.clip(ml + lam * (point.prior - ml), 0.0, 1.0)
            point = replace(point, prior=new / new.sum())
        return point, used

    def _settle_in(self, res: PriorEstimate, proba: Any, sample_weight: Any,
                   effective_rows: float | None, ml_bounds: np.ndarray) -> PriorEstimate:
        """``res`` (from :meth:`estimate` without an interval) kept inside ``ml_bounds``, an
        interval of the shares built elsewhere (the Poisson bootstrap over tallied rows): the
        pull fades where ``ml_bounds`` rejects the shrunk estimate (unless it already faded)
        and what still lies outside moves back to the interval's end, as in :meth:`estimate`.
        """
        ml = res.ml_prior
        if ml is None or not res.identified or self._within(res.prior, ml_bounds):
            return res
        p = self.calibrate(proba)
        w = check_sample_weight(sample_weight, p.shape[0])
        n_eff = float(effective_rows) if effective_rows else _kish(w)
        wk = w * (n_eff / w.sum())
        point, pseudo = res, res.pseudo_rows
        strength = float(getattr(self, "prior_strength", 0.0))
        if pseudo is not None and pseudo >= strength:
            point, pseudo = self._fade_pull(res, p, wk, self.source_prior_,
                                            res.shift_statistic, res.shift_pvalue)
        point = self._inside(point, ml, ml_bounds)[0]
        return replace(point, pseudo_rows=pseudo)

    @staticmethod
    def _within(x: np.ndarray, bounds: np.ndarray) -> bool:
        return bool(np.all((x >= bounds[:, 0] - 1e-12) & (x <= bounds[:, 1] + 1e-12)))

    @staticmethod
    def _inside(point: PriorEstimate, ml: np.ndarray,
                ml_bounds: np.ndarray) -> tuple[PriorEstimate, np.ndarray]:
        """Keep the shrunk estimate inside the interval of the class shares.

        ``ml_bounds`` holds the shares the data do not reject at the interval's level; a shrunk
        estimate beyond it would report a share the data reject. It is moved back along the
        segment to the maximum-likelihood estimate (inside by construction; a convex
        combination, so still on the simplex) to the interval's end, and the reported interval
        is then ``ml_bounds`` with that point in it.
        """
        x = point.prior
        d = x - ml
        lo, hi = ml_bounds[:, 0], ml_bounds[:, 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            reach = np.where(d > 0, (hi - ml) / d, np.where(d < 0, (lo - ml) / d, np.inf))
        lam = float(min(1.0, np.min(reach)))
        if lam >= 1.0:
            return point, np.column_stack([np.minimum(lo, x), np.maximum(hi, x)])
        new = ml + max(lam, 0.0) * d
        new = np.clip(new, 0.0, 1.0)
        new = new / new.sum()
        out = np.column_stack([np.minimum(lo, new), np.maximum(hi, new)])
        return replace(point, prior=new), out

    def _reconcile(self, bounds: np.ndarray, ml_bounds: np.ndarray | None,
                   pvalue: float | None) -> tuple[np.ndarray, np.ndarray | None]:
        """More than two classes: widen an interval that excludes the source prior while the
        shift test does not reject "no shift" at the interval's level, so that it reaches the
        source prior, and warn (:class:`PriorIntervalConflictWarning`).

        Both read the same rows; the score test holds its level where an interval widened to
        contain EM's estimate may not (EM amplifies small calibration errors on new rows), so
        the widened interval covers the unchanged shares whenever the test accepts them.
        """
        src = self.source_prior_
        alpha = 1.0 - float(self.confidence_level)
        if pvalue is None or not np.isfinite(pvalue) or pvalue <= alpha:
            return bounds, ml_bounds
        out = np.flatnonzero((src < bounds[:, 0] - 1e-12) | (src > bounds[:, 1] + 1e-12))
        if out.size == 0:
            return bounds, ml_bounds
        listed = ", ".join(
            f"{name_classes(int(c), self._names())} [{bounds[c, 0]:.3g}, {bounds[c, 1]:.3g}] "
            f"against {src[c]:.3g}" for c in out[:4])
        widened = np.column_stack([np.minimum(bounds[:, 0], src), np.maximum(bounds[:, 1], src)])
        if ml_bounds is not None:
            ml_bounds = np.column_stack([np.minimum(ml_bounds[:, 0], src),
                                         np.maximum(ml_bounds[:, 1], src)])
        warnings.warn(
            f"The {self.confidence_level:.0%} interval of EM's estimate excluded the source "
            f"share of {listed}, but the shift test finds no evidence of a shift (p = "
            f"{pvalue:.2g} > {alpha:.2g}): EM's estimate moved further than the rows support "
            f"(the calibration fitted on {self.n_source_effective_:.4g} effective labelled "
            "rows errs slightly on new rows, and EM amplifies that). The interval was widened "
            "to reach the source shares; read the estimate as unreliable, or label more rows.",
            PriorIntervalConflictWarning,
            stacklevel=3,
        )
        return widened, ml_bounds

    def _warn_moment_rank(self, moments: tuple | None) -> bool:
        """Warn (:class:`PriorNotIdentifiedWarning`, with the reason) where the labelled
        classes' mean scores identify fewer than ``k - 1`` directions of the class shares
        (:func:`~probwrap.shift._analytic.moment_identified_rank`); the interval is then each
        share's whole range over the shares consistent with the identified directions. Returns
        whether it warned."""
        if moments is None:
            return False
        means = np.asarray(moments[0], dtype=float)
        k = means.shape[0]
        rank = moment_identified_rank(means)
        if rank >= k - 1:
            return False
        message = (
            f"The class priors are not identified: the labelled rows' {k} classes have mean "
            f"scores that move along {rank} of the {k - 1} directions of the class shares "
            "(the calibrated posteriors vary along too few directions between the classes; a "
            f"model whose posteriors take only {rank + 1} distinct values, for instance). "
            "Along the other directions no share is told apart from another, so each share's "
            "interval is its whole range over the shares consistent with the identified "
            + ("direction" if rank == 1 else "directions")
            + ", and the estimate along them is EM's starting point, not evidence.")
        notes = getattr(self, "_rank_notes", None)
        if notes is not None:
            # within PriorShiftWrapper.adapt: said in the wrapper's one warning
            if message not in notes:
                notes.append(message)
            return True
        warnings.warn(message, PriorNotIdentifiedWarning, stacklevel=3)
        return True

    def _warn_few_labelled(self, n_src: float | None, *, design: bool = False) -> None:
        """Warn when the interval rests on fewer than ``FEW_LABELLED_ROWS`` effective labelled
        rows (see :class:`FewLabelledRowsWarning` for what was measured there); ``design``:
        ``n_src`` is the cells' design-effective count (``n_source_design_rows_``)."""
        if n_src is None or not n_src < FEW_LABELLED_ROWS:
            return
        warnings.warn(
            f"The interval of the class priors rests on {n_src:.3g} effective labelled rows "
            + ("(Kish's count over the labelled cells' design effect; " if design else "(")
            + f"fewer than {FEW_LABELLED_ROWS}): the calibration and the source shares it "
            "carries are fitted to them, and an error of that calibration, which so few rows "
            "cannot reveal, moves the estimate beyond the interval's allowance. On resampled "
            "real data with 30-60 labelled rows the nominal 90 % interval covered 84-92 % of "
            "the draws (docs/prior_shift.md, 'Coverage with few labelled rows'); read it as "
            "optimistic, or label more rows." + self._few_class_rows_note(n_src),
            FewLabelledRowsWarning,
            stacklevel=3,
        )

    def _few_class_rows_note(self, n_src: float) -> str:
        """The end of the few-labelled-rows warning where a class has fewer than
        ``FEW_CLASS_LABELLED_ROWS`` effective labelled rows (its share of ``n_src``): the shift
        test then compares the batches with a mean score over a handful of extreme rows, and
        its p-values (which ``monitor``'s table and the alarm chart read) fall below the level
        more often than stated (benchmarks/promise_hunt31.py; 5 December 2026)."""
        prior = np.asarray(getattr(self, "source_prior_", ()), dtype=float)
        if prior.size < 2:
            return ""
        j = int(np.argmin(prior))
        rows = float(n_src) * float(prior[j])
        if not rows < FEW_CLASS_LABELLED_ROWS:
            return ""
        names = self._names()
        label = f"class {names[j]}" if names is not None else f"class index {j}"
        return (
            f" Only {rows:.3g} of them are of {label}: the shift test (its "
            "p-value, and the alarm chart on its signed roots) can then reject more often than "
            "its level. On ISLR's Default (3 % positives, a logistic model), 30 labelled rows "
            "holding 1-2 positives rejected 9-10 % of batches drawn with no shift at the 5 % "
            "level (7.6 % with 60 labelled rows, about 2 positives)."
        )

    def _warn_boundary(self, ml: np.ndarray, p: np.ndarray | None, w: np.ndarray | None,
                       n_eff: float, *, pvalue: float | None = None,
                       ml_bounds: np.ndarray | None = None, prior: np.ndarray | None = None,
                       pseudo: float | None = None, info: np.ndarray | None = None,
                       loglik: Any = None, conflict: bool = False) -> None:
        """Warn when the maximum-likelihood prior puts a class at (or next to) share 0 or 1.

        ``p``, ``w``: the unlabelled rows' calibrated posteriors and weights (summing to
        ``n_eff``); or, for rows that stay where they live (Dask, Spark), None with ``info``
        (the weighted mean of the rows' score products ``u u'``) and ``loglik`` (the shares'
        log-likelihood, weights summing to ``n_eff``) computed from their sums.

        Where the data point firmly at the edge — the shift test rejects "no shift" at the
        interval's level and the interval of that share (``ml_bounds``) excludes the source
        share — the message says the edge is a finding, not an artefact, and where the
        reported (shrunk) prior stands; otherwise it says why the edge is weakly supported.
        With ``conflict`` (the score interval found no share consistent with both the labelled
        and the unlabelled rows, so ``ml_bounds`` is the single least-rejected share, not a
        confidence interval) the edge is never called a finding: it rests on rows that no
        change of shares explains (lending_club, a weak refit logistic regression, unlabelled
        rows at half the source's 5.1 %: the share's "interval" [0, 0.0018] beside a true
        0.0255; benchmarks/shift_real_hunt22.py).
        """
        src = self.source_prior_
        edge = np.flatnonzero((ml <= 1e-3 * src) | (ml >= 1.0 - 1e-3 * (1.0 - src)))
        if edge.size == 0:
            return
        # Information per row about the prior at the source prior (score variance), and the
        # standard error it implies for n_eff rows: weak separation shows as small information.
        if info is None:
            q = p / src
            u = q[:, 1:] - q[:, :1]
            info = (u * (w / w.sum())[:, None]).T @ u
        try:
            cov = np.linalg.pinv(info) / max(n_eff, 1.0)
        except np.linalg.LinAlgError:  # pragma: no cover
            cov = np.full((src.shape[0] - 1,) * 2, np.inf)
        def spread(j: int) -> tuple[float, float]:
            # standard error of class j's share (class 0 is minus the sum of the others) and
            # each row's worth in labelled rows
            var = float(np.sum(cov)) if j == 0 else float(cov[j - 1, j - 1])
            return (float(np.sqrt(max(var, 0.0))),
                    src[j] * (1 - src[j]) / max(var * n_eff, 1e-300))

        alpha = 1.0 - float(self.confidence_level)
        rejects = pvalue is not None and np.isfinite(pvalue) and pvalue < alpha and (
            prior is not None)
        # without an interval, the likelihood-ratio statistic of the source shares (the
        # log-likelihood is 0 there) against the chi-square quantile of the interval's level
        if ml_bounds is not None:
            lr_source = None
        else:
            lr_source = 2.0 * (_loglik(p, w, src, ml) if loglik is None else float(loglik(ml)))

        def firm(j: int) -> bool:
            if not rejects or conflict:
                return False
            if ml_bounds is not None:
                return not ml_bounds[j, 0] <= src[j] <= ml_bounds[j, 1]
            return lr_source > self._likelihood_cutoff()

        # where the data point firmly at the edge, name a class at share 0 (for two classes the
        # one whose share went to 0, e.g. the prevalence of the command line)
        zero = edge[ml[edge] <= 1e-3 * src[edge]]
        j = int(zero[0]) if zero.size else int(edge[0])
        if not firm(j):
            j = int(edge[0])
        se, worth = spread(j)
        why = (
            "the model separates the classes weakly" if worth < 0.25 else "there are few rows"
        )
        if firm(j):
            cls = "this class" if ml[j] <= 1e-3 * src[j] else "the other classes"
            pulled = (
                f"pulled toward the source share by {pseudo:.2g} pseudo-rows (the pull fades as "
                "the evidence of a shift grows)" if pseudo else "not pulled toward the source"
            )
            if ml_bounds is not None:
                against = (f"the {self.confidence_level:.0%} interval of the share "
                           f"[{ml_bounds[j, 0]:.3g}, {ml_bounds[j, 1]:.3g}] excludes the "
                           "source share")
                where = "lies inside the interval"
            else:
                against = (f"the likelihood ratio rejects the source shares at the "
                           f"{self.confidence_level:.0%} level (2 x log-likelihood ratio "
                           f"{lr_source:.3g})")
                where = "is one the data do not reject at that level"
            warnings.warn(
                f"The maximum-likelihood share of {name_classes(j, self._names())} is at the "
                f"edge ({ml[j]:.4g}; source share {src[j]:.4g}), and the data point there "
                f"firmly: the shift test rejects no shift (p = {pvalue:.2g}), {against}, and "
                f"each of the {n_eff:.4g} effective unlabelled rows carries about {worth:.2g} "
                "of a labelled row's information about it. Read the edge as a finding (these "
                f"rows may hold no member, or nearly none, of {cls}) only if the class shares "
                "are all that changed: where the new rows come from another period, site or "
                "group, a feature that moved for another reason along the class direction gives "
                "the same picture (PriorShiftWrapper(feature_check_rows=...) tests the features; "
                "docs/prior_shift.md, 'Natural shifts move the features too'). The reported "
                f"share {prior[j]:.3g} is {pulled} and {where}.",
                BoundaryPriorWarning,
                stacklevel=3,
            )
            return
        warnings.warn(
            f"The maximum-likelihood share of {name_classes(j, self._names())} is at the edge "
            f"({ml[j]:.4g}; source share {src[j]:.4g}): {why}. Each of the {n_eff:.4g} "
            f"effective unlabelled rows carries about {worth:.2g} of a labelled row's "
            f"information about this share, so the share is known only to about +-{1.96 * se:.2g}"
            " (95 %). The reported prior is shrunk toward the source prior (prior_strength); do "
            "not read the edge value as a finding (the interval says which shares the data "
            "allow)." + (
                " No share is consistent with both the labelled and the unlabelled rows here "
                "(they differ by more than a change of class shares explains), so the interval "
                "is the single least-rejected share and the edge may come from that conflict."
                if conflict else ""),
            BoundaryPriorWarning,
            stacklevel=3,
        )
