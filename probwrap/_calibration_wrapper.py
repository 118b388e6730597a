"""CalibrationWrapper: calibrated probabilities for any classifier, fitted on held-out data."""

from __future__ import annotations

import copy
import numbers
import warnings
from typing import Any

import numpy as np
from scipy.special import logsumexp
from sklearn.base import clone
from sklearn.utils import _safe_indexing, indexable
from sklearn.utils.metaestimators import available_if

from ._calibration_auto import CALIBRATION_METHODS, CLASS_SHARES, _AutoChoice, _boundary_of
from ._calibration_shares import class_shares_map
from ._heldout import (
    HeldOutClassifierBase,
    _is_dask,
    _multiclass_dask,
    check_fitted,
    fold_columns,
)
from ._predictions import HeldOutPredictions
from ._validation import plain, shared_factor
from ._weights import warn_count_reading, warn_shared_factor_table
from .calibration._base import (
    CalibrationMap,
    FewClassRowsWarning,
    UnverifiedSharpeningWarning,
    one_vs_rest_copy,
)
from .calibration._binning import BinningMap
from .calibration._identity import IdentityMap
from .calibration._isotonic import IsotonicMap
from .calibration._logodds import DEFAULT_CLIP, clip_from_smallest
from .calibration._one_vs_rest import fit_one_vs_rest, predict_one_vs_rest
from .calibration._platt import PlattMap
from .calibration._vector_scaling import VectorScalingMap
from .calibration._venn_abers import VennAbersMap

__all__ = ["CalibrationWrapper", "CALIBRATION_METHODS"]

#: Maps that use only the order of the scores: they get full-resolution scores.
_ORDER_BASED = (IsotonicMap, BinningMap, VennAbersMap)

#: A map the user named warns (FewClassRowsWarning) when a class has at least one but fewer
#: held-out rows than this: the common-practice minimum count per cell (Cochran 1954), as for
#: PriorShiftWrapper's labelled rows.
FEW_CLASS_ROWS = 5

#: A map that sharpens (temperature below 1, Platt slope above 1) fitted on fewer held-out
#: rows of weight > 0 than this, whose held-out scores misrank at most
#: ``_SEPARATED_MISRANKED_SHARE`` of the pairs of one row of each class, warns
#: (UnverifiedSharpeningWarning): so few rows cannot tell a chance separation from a real one.
#: 100 is the Platt-first bound of ``auto`` on cross-fitted rows; the DAAG nsw74psidA draws of
#: benchmarks/hunt29_sweep.py misranked 0-3 of ~220 pairs (at most 1.4 %).
_SHARPENING_CHECK_MAX_ROWS = 100
_SEPARATED_MISRANKED_SHARE = 0.02

#: ... and a temperature above 1 (softening) warns the same way when the held-out scores
#: misrank at most this share of those pairs. On (nearly) separated rows the loss of a
#: temperature falls toward 0 as it sharpens, so where it stops is set by the fit's prior
#: (``TemperatureMap``: a gamma prior at the scale giving the scores a root-mean-square of one),
#: not by errors the rows show; a model with very wide log-odds (naive Bayes, boosting) then
#: keeps a temperature above 1 that still leaves most rows far more confident than the rows can
#: check. DAAG's nsw74psidA, 30 cross-fitted rows (benchmarks/hunt29_sweep.py): naive Bayes
#: (T = 5.6-7.9) and boosting (T = 3.3) kept by ``auto`` on held-out scores misranking 0-3.8 % of
#: the pairs, test log loss 1.28-1.43x scikit-learn's sigmoid, quiet
#: (docs/evidence/small_data_log.md, the section on softening temperatures on separated small
#: draws).
_SOFTENED_MISRANKED_SHARE = 0.05

#: One-vs-rest log-odds come from one logsumexp over all classes up to this many classes: the
#: sums over the k - 1 other classes are then plain left-to-right sums whichever way NumPy runs
#: the reduction, as in one call per class; from 8 terms on NumPy may sum them pairwise in one
#: layout and not in the other, and order-based maps are sensitive to that rounding.
_STACKED_LOGSUMEXP_MAX_CLASSES = 8

#: Exact zero probabilities become this (the smallest positive float) before taking logs.
_TINY = np.nextafter(0.0, 1.0)

#: The spreads of ``predict_with``'s check are measured on at most this many labelled rows.
_SPREAD_CHECK_MAX_ROWS = 20_000

#: Values of ``CalibrationWrapper(predict_with=...)``.
_PREDICT_WITH = ("auto", "refit", "fold_models")

#: ``predict_with="auto"`` predicts with the fold models when their scores' spreads on the
#: labelled rows (standard deviations of the map's input scores) differ from fold to fold by
#: more than this (the standard deviation of their logs): the model's scale then changes from
#: fit to fit, and the refitted model's scale is one more draw that the map fitted on the
#: pooled held-out scores does not know. Chosen on two seeds of benchmarks/crossfit_sweep.py
#: --only fold-check (30-400 rows of scikit-learn's and statsmodels' sets, eight base models;
#: 0.05-0.3 tried) and checked on a third seed and on the R and econometrics sets: test log
#: loss over scikit-learn's sigmoid 0.802 -> 0.794 (696 cells, worst 2.02 -> 1.29) and
#: 0.992 -> 0.985 (1,104 cells, worst 1.72 -> 1.40); where the refit already matched
#: scikit-learn, 0.998 and 0.999 of the refit's (docs/calibration.md, "Which model predicts").
#: Comparing the refit with each fold model instead flagged nearest neighbours, whose refit
#: differs from every fold model alike and is the better model.
FOLD_SPREAD_VARIATION_LIMIT = 0.10

#: ... unless the refitted model spreads its scores more than this many times as widely as
#: every fold model (``refit_spread_ratios_``): a model whose spread grows with the rows it
#: is fitted on (nearest neighbours with a fixed number of neighbours, trees) is then a
#: sharper model than any fold model, not one more draw of an unstable scale, and the refit
#: predicts. Re-read from the cells of benchmarks/crossfit_sweep.py --only fold-check and
#: --only tiny (695, 1,103 and 936 cells): nearest neighbours 1.015, 1.001 and 1.009 of the
#: refit's test log loss -> 1.000, 0.999, 1.000; SGD 0.956, 0.974, 0.966 -> 0.955, 0.976,
#: 0.969; over scikit-learn's sigmoid 0.793, 0.985, 0.745 -> 0.792, 0.985, 0.744 (a limit of
#: 1.0 did better on two groups, worse on the R sets; docs/calibration.md, "Which model
#: predicts").
REFIT_WIDER_LIMIT = 1.10

#: ``predict_with="auto"`` also predicts with the fold models when they disagree about the
#: labelled rows (``fold_disagreement_``: the variance of their map input scores across fold
#: models, averaged over the rows, over the variance across rows of the fold models' mean
#: score) by more than this, again unless the refit spreads more widely than every fold model
#: (:data:`REFIT_WIDER_LIMIT`). Such a model changes with the rows it is fitted on (a decision
#: tree, boosting on a few hundred rows), so the average of the fold models is a smoother,
#: better model than any one fit, and the refit is one more unstable fit. Chosen
#: with benchmarks/hunt27_sweep.py --fold-check (0.01-0.2 tried): its twelve binary sets,
#: cross-fitted, 40-300 rows, two draws, 280 cells: test log loss over scikit-learn's sigmoid
#: 0.951 -> 0.932, cells above 1.10x 17 -> 6 (a single tree on openintro's bdims, 100 rows:
#: 0.429 -> 0.329, the sigmoid 0.322); hunt26_sweep.py's ten binary sets with nearest
#: neighbours and SGD, 115 cells: 0.742 -> 0.737, 5 -> 1. Where the fold models lose (up to
#: 1.32x the refit), the refit was far below the sigmoid (docs/calibration.md, "Which model
#: predicts"). Checked on multiclass data (benchmarks/multiclass_rules28.py: ten
#: bundled sets, 3-10 classes, five models, 30-300 rows, five draws, 550 cells): 0.9966 of the
#: refit's test log loss against 1.0008 for the spread rule alone; 0.02-0.1 within 0.2 % of
#: it, a limit scaled by the number of classes worse (1.0007); kept.
FOLD_DISAGREEMENT_LIMIT = 0.03


def spread_check(spreads: Any) -> tuple[np.ndarray, float]:
    """``(refit_spread_ratios_, fold_spread_variation_)`` from the spreads (standard
    deviations) of the map's input scores on the labelled rows: the refitted model's first,
    then each fold model's (0 for a model that scores every row alike)."""
    spreads = np.asarray(spreads, dtype=float)
    refit_sd, fold_sd = spreads[0], spreads[1:]
    with np.errstate(divide="ignore", invalid="ignore"):
        ratios = np.where(fold_sd > 0.0, refit_sd / fold_sd, 1.0 if refit_sd == 0.0 else np.inf)
        ratios = np.where((fold_sd == 0.0) & (refit_sd == 0.0), 1.0, ratios)
    if np.all(fold_sd == 0.0):
        unstable = 0.0  # every fold model (and so the map's input) is constant
    elif np.any(fold_sd == 0.0):
        unstable = np.inf
    else:
        unstable = float(np.std(np.log(fold_sd)))
    return ratios, unstable


def fold_disagreement(fold_scores: list[np.ndarray], sample_weight: Any = None) -> float:
    """``fold_disagreement_``: how much the fold models disagree about the same rows, as the
    variance of their scores across fold models (averaged over rows and score columns) over
    the variance across rows of the fold models' mean score; each array of shape (n, c) holds
    one fold model's map input scores on the labelled rows. Rows are weighted by
    ``sample_weight`` (a row of weight 2 counts as two rows; the scale does not matter).
    0 when there are fewer than two fold models or the mean score does not vary over the
    rows."""
    if len(fold_scores) < 2:
        return 0.0
    s = np.stack([np.asarray(f, dtype=float) for f in fold_scores])
    w = np.ones(s.shape[1]) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    if w.shape != (s.shape[1],) or not np.all(np.isfinite(w)) or not w.sum() > 0:
        w = np.ones(s.shape[1])
    w = w / w.sum()
    mean = s.mean(axis=0)  # (n, c)
    centre = w @ mean
    between = float(np.mean(w @ (mean - centre) ** 2))
    if not np.isfinite(between) or between <= 1e-12 * max(1.0, float(np.abs(s).max())):
        return 0.0
    return float(np.mean(w @ s.var(axis=0, ddof=1))) / between


def fold_models_predict(ratios: np.ndarray, variation: float, disagreement: float = 0.0) -> bool:
    """``predict_with="auto"``'s rule: the fold models predict when their spreads vary from
    fold to fold (``variation`` above :data:`FOLD_SPREAD_VARIATION_LIMIT`) or they disagree
    about the rows (``disagreement`` above :data:`FOLD_DISAGREEMENT_LIMIT`), and the refit does
    not spread more widely than every one of them by more than :data:`REFIT_WIDER_LIMIT`."""
    ratios = np.asarray(ratios, dtype=float)
    wider = ratios.size > 0 and bool(np.min(ratios) > REFIT_WIDER_LIMIT)
    unstable = variation > FOLD_SPREAD_VARIATION_LIMIT or disagreement > FOLD_DISAGREEMENT_LIMIT
    return bool(unstable) and not wider

#: ``method="auto"`` with two classes, cross-fitted and predicting with the refit: a chosen
#: temperature that sharpens (``T < 1``) is capped at 1 when the refitted model's scores spread
#: more than this many times as widely as every fold model's (``refit_spread_ratios_``) ...
_REFIT_SPREAD_RATIO_LIMIT = 3.0

#: ... and the fold scores' level fixes the inverse temperature only to within more than this
#: (one standard error by the delta method, see ``CalibrationWrapper._cap_level_sharpening``).
#: The temperature (no intercept) was then fitted to the level of near-constant fold scores,
#: not to a spread like the one it is applied to: statsmodels' nile, gradient boosting whose
#: 38-row fold models cannot split, 48 rows: T = 0.41 (1/T within 3.4), test log loss 0.846
#: against the model's own 0.655. Measured with a scratch sweep over benchmarks/crossfit_sweep.py's
#: fold-check binary sets (docs/calibration.md, "A temperature read off near-constant fold
#: scores"): among 75 boosting cells of 40-50 rows, 47 had constant fold models and a sharpening
#: temperature; capping all of them cost 1.2 % of test log loss on average (14 cells more than
#: 2 % worse, 3 better: a sharpening the level picks is often right by chance), capping the 7
#: beyond two standard errors was even (geometric mean 1.002, 2 worse, 2 better). In 200 cells
#: of 30-150 rows (eight models, seed 0) no sharpening temperature met a ratio above 1.32, so
#: nothing changes there.
_LEVEL_TEMPERATURE_MAX_SE = 2.0


def _kept_probability_map() -> IdentityMap:
    """The one-vs-rest entry of a class with no calibration rows: the model's own probability
    (an :class:`IdentityMap` on that class's binary log-odds, with no floor of its own)."""
    m = IdentityMap()
    m.classes_ = np.array([0, 1])
    m.n_classes_ = 2
    m.n_score_columns_ = 1
    m.boundary_ = None
    m.floor_ = 0.0
    return m


def _uses_interval(self: CalibrationWrapper) -> bool:
    method = getattr(self, "method_", self.method)
    return method == "venn_abers" or isinstance(self.method, VennAbersMap)


class CalibrationWrapper(_AutoChoice, HeldOutClassifierBase):
    """Calibrate any classifier's probabilities on held-out predictions.

    The wrapped estimator's held-out predictions (cross-fitted, or all rows when the estimator is
    a :class:`~sklearn.frozen.FrozenEstimator`) are turned into scores on the log-odds scale and a
    calibration map is fitted to them. Binary maps serve multiclass models one-vs-rest, with the
    class probabilities renormalised to sum to one; the temperature map is multiclass itself.

    Parameters
    ----------
    estimator : classifier
        Any classifier with ``predict_proba`` or ``decision_function``. Wrap an already fitted one
        in :class:`~sklearn.frozen.FrozenEstimator` to calibrate it without refitting; every row
        passed to :meth:`fit` then counts as held-out data.
    method : str or CalibrationMap, default="auto"
        ``"platt"``, ``"isotonic"``, ``"beta"``, ``"temperature"``, ``"binning"``,
        ``"venn_abers"``, ``"vector_scaling"``, ``"matrix_scaling"`` (the last two multiclass
        maps, see :class:`~probwrap.calibration.VectorScalingMap`), ``"identity"`` (the model's
        own probabilities with the output floor of temperature scaling, see
        :class:`~probwrap.calibration.IdentityMap`), a map instance (cloned before fitting), or
        ``"auto"``. ``"auto"`` scores
        every candidate map by cross-validated log loss on the held-out predictions and keeps the
        simplest map whose loss is within one standard error (of the paired per-row difference)
        of the best one, so a richer map must win by more than its cross-validation noise
        (simplest first: temperature before Platt scaling, except that a binary model
        cross-fitted here on 100 rows or more tries Platt scaling first, see
        docs/calibration.md). A count table (``sample_weight`` whole numbers without a common
        factor, some above 1) is scored case by case, as its rows repeated would be, except
        where a cross-fitted model's folds kept its cells together (docs/weights.md). A candidate whose fit reaches a boundary is not eligible, and with too few rows of a
        class to cross-validate ``"auto"`` warns and uses the most regularised map (Platt
        scaling for binary, temperature scaling for multiclass problems); see
        ``method_notes_``. A candidate whose fit fails in a fold is left out with a warning,
        its error in ``method_notes_``; a method the user named (or a map instance) whose fit
        fails raises a ``ValueError`` naming the method and the reason.
    cv : int, splitter or iterable of (train, test) pairs, default=5
        Folds for cross-fitting (stratified and shuffled when an int). With a frozen estimator
        only ``"auto"`` uses it, to score the candidate maps; an int larger than the smallest
        class's count of rows is cut down to that count, with a warning when it is not the
        default 5 (a tiny class is named by ``FewClassRowsWarning`` already).
    n_jobs : int, default=None
        Parallel jobs for cross-fitting (joblib).
    random_state : int, RandomState or None, default=None
        Shuffling of the folds.
    candidates : sequence of str, default=None
        Maps that ``"auto"`` chooses from. Default: all methods except matrix scaling (which
        needs many rows per class) and the identity (listed, it is scored only for
        ``predict_proba`` output, and as the candidate with no parameters it wins every close
        race of the one-standard-error rule), with vector scaling for multiclass models only (on binary
        log-odds it is Platt scaling) and beta for binary models only (one-vs-rest beta took
        about a quarter of ``auto``'s time on multiclass models and was rarely chosen, and then
        by little: see docs/calibration.md, "Speed"); Venn–Abers is a
        candidate only while the held-out rows times the number of binary maps (1 for two
        classes, k one-vs-rest) stay below 1,000: it costs one to two orders of magnitude more
        to cross-validate than the others, and beyond small sets its merged probability agrees
        with the smoothed isotonic fit to within about 1/n. On ties in the number of
        parameters, Venn–Abers is preferred to isotonic regression. With fewer than 20 held-out
        rows in some class the order-based maps (binning, isotonic, Venn–Abers) are not
        eligible, and with fewer than 8, for a multiclass model, no one-vs-rest map is (Platt
        and beta included); ``method_notes_`` says so. When the wrapper cross-fits its model
        (not a ``FrozenEstimator``) on at most 300 rows, the order-based maps are not default
        candidates either: the map is fitted on the fold models' scores and applied to the
        model refitted on all rows, whose scores differ, and a step map passes that difference
        into its probabilities (name them in ``candidates`` to score them).
    clip : float or None, default=None
        Only for the parametric maps (Platt, beta, temperature) fitted on ``predict_proba``
        output: log-odds are clipped to ``±logit(1 - clip)`` (log-probabilities floored at
        ``log(clip)``), so that a few extreme and confidently wrong rows cannot dominate the
        fit. ``None`` chooses it from the held-out probabilities: half the smallest non-zero
        probability (for a random forest of ``n`` trees, whose probabilities are multiples of
        ``1/n``, that is ``1/(2n)``), kept within ``[1e-12, 0.25]``; the value used is
        ``clip_``. With more than two classes, exact zeros and non-zero probabilities below
        ``2e-12`` (an isotonic-calibrated naive Bayes), it is instead half the
        Krichevsky-Trofimov floor of the ``N`` held-out rows, ``1 / (4 (N + 1) (k - 1))``, with
        a warning (docs/calibration.md, "Exact zeros from an already calibrated model").
        Order-based maps (isotonic, binning, Venn–Abers) always see the
        full-resolution log-odds ``log p1 - log p0``, which keep the order of probabilities deep
        in the tails; exact zeros become the smallest positive float. Platt's map (named by
        ``method``, or an ``auto`` candidate) is fitted as ``PlattMap(limit_scores=True)``,
        which further clips the scores that lie far beyond every calibration row of the other
        class (see :class:`~probwrap.calibration.PlattMap`); for a model the wrapper cross-fits, its fit
        also clips the held-out log-odds to the refitted model's range on the labelled rows
        (``platt_fit_range_``).
    tally_resolution : float, default=1e-3
        Dask input only: bin width on the log-odds scale of the score tallies that the
        predictions are reduced to (see :mod:`probwrap.scale`); ignored for in-memory input.
    predict_with : {"auto", "refit", "fold_models"}, default="auto"
        Which model's scores the fitted map turns into probabilities when the wrapper
        cross-fits its model (ignored for a :class:`~sklearn.frozen.FrozenEstimator`, which
        is the model). The map is fitted on the fold models' held-out scores. ``"refit"``:
        the model refitted on all rows (``estimator_``). ``"fold_models"``: each fold model
        (``fold_models_``), its scores through the same map, the probabilities averaged with
        equal weights; they are the models whose scores the map was fitted on, at the cost
        of one prediction per fold. ``"auto"``: the refitted model unless the fold
        models score the labelled rows on scales that differ from fold to fold (a model whose
        scale changes from fit to fit, such as ``SGDClassifier``; see
        ``fold_spread_variation_``) or disagree about the rows (a decision tree, boosting on a
        few hundred rows; ``fold_disagreement_``): the refitted model is
        then one more unstable draw that the map does not know, and the fold models
        predict — unless the refit spreads its scores more than 1.1 times as widely as every
        fold model (nearest neighbours: a sharper model, not another draw; since 4 December
        2026). ``"refit"`` warns where ``"auto"`` would switch for scales that vary.
        Measured on small bundled sets in docs/calibration.md, "Which model
        predicts".

    Attributes
    ----------
    estimator_ : classifier
        The fitted inner estimator: the frozen one, or a clone refitted on all rows (which
        predicts unless ``predicted_with_ == "fold_models"``).
    calibrator_ : CalibrationMap or list of CalibrationMap
        The fitted map (a list with one binary map per class for one-vs-rest). A class with no
        held-out rows gets no map of its own: with probability outputs its entry is an
        :class:`~probwrap.calibration.IdentityMap` (it keeps the model's own probability, at
        least ``clip_``, and the calibrated classes share the rest of each row in proportion to
        their calibrated values); with decision values it is the map fitted on the pooled
        one-vs-rest rows of the other classes. A warning names such classes.
    method_ : str
        Name of the map in use; with ``"auto"`` also ``"class_shares"``: a frozen model whose
        every candidate map scored a cross-validated log loss above the class shares' by more
        than its standard error gets the class shares (``calibrator_`` a
        :class:`~probwrap.calibration.PlattMap` held at slope 0 for two classes, a
        :class:`~probwrap.calibration.VectorScalingMap` with every scale 0 for more: every row
        the mean of Platt's smoothed targets), with a warning.
    method_scores_ : dict
        ``"auto"`` only: cross-validated log loss of every candidate that could be scored, with
        the standard error of its difference from the best eligible one, as
        ``method_scores_[name] = (loss, se)``; also ``"class_shares"``, the
        intercept-only map scored on the same folds as the reference every map is measured
        against (not a candidate of the one-standard-error rule). Empty when there were too
        few rows of a class to cross-validate.
    method_notes_ : dict
        ``"auto"`` only: ``method_notes_[name]`` says why a candidate was not eligible (its fit
        reached a boundary: a temperature at the end of its range, a beta or isotonic fit to
        classes the scores separate), why it could not be scored (the error of a failed fold
        fit), which warnings its fold fits raised, or why the chosen map was chosen without
        cross-validation; ``method_notes_["auto"]`` says when the candidates were scored on a
        sample of the rows (above 20,000 held-out rows); ``method_notes_["temperature"]`` says
        when the one-standard-error rule passed over a softening temperature that scored above
        the class shares (two classes; docs/small_data.md), or, for a frozen model, any
        temperature that did (docs/evidence/small_data_log.md, the calibration hunt of
        benchmarks/hunt31_sweep.py);
        ``method_notes_["temperature"]`` /
        ``["vector_scaling"]`` say when a sharpening temperature was capped at 1 or vector
        scaling replaced by temperature scaling, the fold models' scores being near-constant
        beside the refit's (docs/calibration.md); ``method_notes_["class_shares"]`` says when
        the class shares beat every candidate map beyond a standard error: ``"chosen: ..."``
        (frozen model) or ``"not used: ..."`` (cross-fitted: the refitted model predicts
        through the map chosen, with a warning), or ``"not scored: ..."`` (more than two
        classes, one of them without held-out rows).
    clip_ : float
        The ``clip`` in use (chosen from the held-out probabilities when ``clip=None``).
    response_ : str
        Which output of the estimator was calibrated (``"predict_proba"`` or
        ``"decision_function"``).
    classes_ : ndarray
        Class labels.
    predicted_with_ : str
        ``"refit"`` or ``"fold_models"`` (see ``predict_with``), ``"frozen"`` for a
        :class:`~sklearn.frozen.FrozenEstimator`.
    fold_models_ : list of classifier
        The fitted fold models that predict when ``predicted_with_ == "fold_models"``;
        otherwise empty (they are not kept).
    platt_fit_range_ : tuple of float or None
        Binary models the wrapper cross-fits from ``predict_proba`` (``predict_with`` not
        ``"fold_models"``): the smallest and largest log-odds of the refitted model
        (``estimator_``) on the labelled rows. Platt's map (named by ``method`` or chosen by
        ``auto``, in the folds too) is fitted on the held-out log-odds clipped to this range:
        it is applied to the refitted model's scores, and a fold model's scores far beyond
        them (naive Bayes without the few rows that tame a column) would flatten its slope.
        None otherwise (frozen models, multiclass, ``decision_function``).
    refit_spread_ratios_ : ndarray of shape (n_folds,)
        Cross-fitted models only (empty for a frozen one): for each fold model, the spread
        (standard deviation) of the refitted model's map input scores on the labelled rows over
        that fold model's; near 1 where they score the rows on one scale.
    fold_spread_variation_ : float
        Cross-fitted models only (NaN for a frozen one): the standard deviation of the logs of
        the fold models' spreads on the labelled rows. ``predict_with="auto"`` predicts with
        the fold models when it exceeds 0.10 (``inf`` when some fold model, but not all,
        scores every row alike).
    fold_disagreement_ : float
        Cross-fitted models only (NaN for a frozen one): how much the fold models disagree
        about the labelled rows, the variance of their map input scores across fold models
        (averaged over the rows) over the variance across rows of their mean score (0 when a
        fold model lacks a class). ``predict_with="auto"`` also predicts with the fold models
        when it exceeds 0.03 (a decision tree, boosting on a few hundred rows), unless the refit spreads more widely than every fold model.

    Examples
    --------
    >>> from sklearn.linear_model import SGDClassifier
    >>> from sklearn.preprocessing import StandardScaler
    >>> from sklearn.pipeline import make_pipeline
    >>> from probwrap import CalibrationWrapper
    >>> from probwrap.datasets import make_parcels
    >>> parcels = make_parcels(400, random_state=1)
    >>> margins = make_pipeline(StandardScaler(), SGDClassifier(random_state=0))
    >>> folds = CalibrationWrapper(margins, method="platt", predict_with="fold_models",
    ...                            random_state=0).fit(parcels.data, parcels.target)
    >>> folds.predicted_with_, len(folds.fold_models_)
    ('fold_models', 5)
    >>> folds.predict_proba(parcels.data[:3]).shape
    (3, 2)

    >>> from sklearn.linear_model import LogisticRegression
    >>> from sklearn.pipeline import make_pipeline
    >>> from sklearn.preprocessing import StandardScaler
    >>> from probwrap import CalibrationWrapper
    >>> from probwrap.datasets import make_parcels
    >>> parcels = make_parcels(3000, random_state=0)
    >>> base = make_pipeline(StandardScaler(), LogisticRegression())
    >>> model = CalibrationWrapper(base, method="auto", random_state=0)
    >>> model.fit(parcels.data, parcels.target).predict_proba(parcels.data[:2]).shape
    (2, 2)
    >>> model.method_ in model.method_scores_
    True
    """

    _heldout_response = "auto"

    def __init__(
        self,
        estimator: Any = None,
        *,
        method: str | CalibrationMap = "auto",
        cv: Any = 5,
        n_jobs: int | None = None,
        random_state: Any = None,
        candidates: Any = None,
        clip: float | None = None,
        tally_resolution: float = 1e-3,
        predict_with: str = "auto",
    ) -> None:
        self.estimator = estimator
        self.method = method
        self.cv = cv
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.candidates = candidates
        self.clip = clip
        self.tally_resolution = tally_resolution
        self.predict_with = predict_with

    #: the fold models are kept through ``fit`` (read by ``_heldout._cross_fit``): the refit
    #: check compares them with the refitted model; they stay only when they predict
    _keep_fold_models = True
    _split_table_cases = True  # a count table's cases split into folds

    # -- fitting ---------------------------------------------------------------------------
    def fit(self, X: Any, y: Any, sample_weight: Any = None, **fit_params: Any) -> CalibrationWrapper:
        """Fit the estimator (cross-fitted) and the calibration map on held-out predictions.

        Parameters
        ----------
        X : array-like, DataFrame, sparse matrix, list of strings, ...
            Whatever the wrapped estimator accepts; passed to it untouched.
        y : array-like of shape (n,)
            Labels.
        sample_weight : array-like of shape (n,), default=None
            Row weights, passed to the estimator where it accepts them and used by the map.
        **fit_params : dict
            Further parameters for the estimator's ``fit`` (routed when metadata routing is on).

        Returns
        -------
        self
        """
        if not isinstance(self.predict_with, str) or self.predict_with not in _PREDICT_WITH:
            raise ValueError(
                f"`predict_with` must be one of {_PREDICT_WITH}; got {plain(self.predict_with)!r}."
            )
        self._check_method()
        if _multiclass_dask(self.estimator, X, y, sample_weight):
            return self._fit_multiclass_dask(X, y, sample_weight)
        ho = self._fit_heldout(X, y, sample_weight, fit_params)
        self._platt_range = self._refit_score_range(X, ho)
        try:
            self._fit_on_heldout(ho)
        finally:
            self.__dict__.pop("_platt_range", None)
        self._choose_predicting_models(X, ho)
        scores, w = self.__dict__.pop("_map_rows")
        if self.method == "auto":
            self._cap_level_sharpening(scores, ho, w)
            self._drop_class_scales_fitted_to_level(scores, ho, w)
        self._warn_unverified_sharpening(scores, ho, w)
        return self

    def _warn_unverified_sharpening(self, scores: np.ndarray, ho: Any, w: np.ndarray) -> None:
        """Warn (``UnverifiedSharpeningWarning``; the map is unchanged) when a binary map fitted
        on fewer than ``_SHARPENING_CHECK_MAX_ROWS`` held-out rows of weight > 0
        (``class_row_counts``: a count table's cases, a score tally's original rows) sharpens the
        scores (a temperature below 1, a Platt slope above 1) while those scores misrank at
        most ``_SEPARATED_MISRANKED_SHARE`` of the weighted pairs of one row of each class
        (ties count half), or keeps a temperature above 1 on scores misranking at most
        ``_SOFTENED_MISRANKED_SHARE`` of them. A cap on such sharpening was tried and reverted: it
        also removed right sharpenings on sets that really are separable, which the same few
        rows cannot tell from a lucky draw (docs/evidence/small_data_log.md)."""
        if scores.ndim != 1:
            return
        m = self.calibrator_
        temperature = getattr(m, "temperature_", None)
        slope = getattr(m, "slope_", None)
        limit = _SEPARATED_MISRANKED_SHARE
        if isinstance(m, PlattMap) and slope is not None and slope > 1.0:
            how = f"the map sharpens the scores (a Platt slope of {slope:.3g})"
        elif temperature is not None and temperature < 1.0:
            how = f"the map sharpens the scores (a temperature of {temperature:.3g})"
        elif temperature is not None and temperature > 1.0:
            # softening wide log-odds: how far is set by the fit's prior, not by the rows
            limit = _SOFTENED_MISRANKED_SHARE
            how = (f"the map's confidence rests on its prior, not on the rows (a temperature "
                   f"of {temperature:.3g}, softening log-odds wider than the rows can check)")
        else:
            return
        # rows as every row count of the wrapper reads them: a count table's whole-number
        # weights count its cases, a Dask score tally's rows the original rows
        n = int(np.sum(ho.class_row_counts(w)))
        if n >= _SHARPENING_CHECK_MAX_ROWS:
            return
        keep = np.asarray(w, dtype=float) > 0
        s, wk = np.asarray(scores, dtype=float)[keep], np.asarray(w, dtype=float)[keep]
        pos = np.asarray(ho.y_index)[keep] == 1
        if pos.all() or not pos.any():
            return
        sp, sn, wp, wn = s[pos], s[~pos], wk[pos], wk[~pos]
        pair_w = np.outer(wp, wn)
        wrong = float(np.sum(pair_w * ((sp[:, None] < sn[None, :])
                                       + 0.5 * (sp[:, None] == sn[None, :]))))
        share = wrong / float(pair_w.sum())
        if not share <= limit:
            return
        pairs = int(pos.sum()) * int((~pos).sum())
        warnings.warn(
            f"CalibrationWrapper({self._method_asked()}): {how}, "
            f"fitted on {n} held-out rows whose scores misrank {100 * share:.2g} % of the "
            f"{pairs} pairs of one row of each class, i.e. (nearly) separate the classes. So "
            "few rows cannot tell a real separation from a draw that separates them by "
            "chance: the sharpness is unverified, and the probabilities may be overconfident "
            "on new rows. Label more rows, or use method='platt' (its smoothed targets "
            "regularise the slope).",
            UnverifiedSharpeningWarning,
            stacklevel=3,
        )

    def _fit_on_heldout(self, ho: Any) -> CalibrationWrapper:
        """The calibration map (and ``method="auto"``'s choice) on held-out predictions."""
        self.predicted_with_ = "frozen" if ho.n_folds == 0 else "refit"
        self.fold_models_ = []
        self.refit_spread_ratios_ = np.empty(0)
        self.fold_spread_variation_ = np.nan
        self.fold_disagreement_ = np.nan
        self.response_ = ho.response
        self._cross_fitted = ho.n_folds > 0
        self.__dict__.pop("_zero_floor", None)
        self.clip_ = self._choose_clip(ho.values, ho.sample_weight)
        self._warn_zero_floor()
        self.platt_fit_range_ = getattr(self, "_platt_range", None)
        scores = self._to_scores(ho.values)
        w = self._count_scale_weights(ho.sample_weight)
        if not ho.from_tally:
            self._warn_count_reading(ho)
        else:
            self._warn_tally_count_reading(getattr(self, "tally_", None))
        if isinstance(self.method, CalibrationMap):
            self.method_ = type(self.method).__name__
            template = self.method
        elif self.method == "auto":
            self.method_, self.method_scores_, self.method_notes_ = self._choose(ho, scores, w)
            if not ho.from_tally:
                warn_shared_factor_table(
                    getattr(ho, "row_weight", None) if getattr(ho, "table_row", None) is not None
                    else ho.sample_weight, "CalibrationWrapper(method='auto')",
                    "its choice (its folds, rows per class and standard errors) and its row "
                    "bounds", stacklevel=4)
            if ho.values.ndim == 2 and ho.values.shape[1] == 2:
                self._warn_overdispersed_table(
                    ho, ho.values[:, 1], "`method='auto'`'s choice (its folds, rows per class "
                    "and standard errors)")
            template = CALIBRATION_METHODS.get(self.method_, PlattMap)()
            counts = ho.class_row_counts(w)
            if counts[counts > 0].min() >= 2:
                # with 2-4 rows of a class auto scores its maps on folds and chooses one, and
                # said nothing until 5 December 2026 (benchmarks/hunt24_sweep.py: KMsurv's pneumon,
                # 2 children hospitalised among 100 rows; the tuned cost rule and
                # PriorShiftWrapper warned on the same rows). Below 2 the fallback warns.
                self._warn_few_class_rows(counts)
        else:
            self.method_ = self.method
            template = CALIBRATION_METHODS[self.method]()
        if self.method == "auto" and self.method_ == CLASS_SHARES and scores.ndim == 2:
            self.calibrator_ = class_shares_map(scores, ho.y_index, w, self._fit_map)
        elif self.method == "auto" and self.method_ == CLASS_SHARES:
            self.calibrator_ = self._class_shares_map(scores, ho.y_index, w)
        elif self.method == "auto":
            self.calibrator_ = self._fit_map(template, scores, ho.y_index, w)
        else:
            self._warn_few_class_rows(ho.class_row_counts(w))
            # a method the user named that cannot be fitted raises, naming the method
            try:
                self.calibrator_ = self._fit_map(template, scores, ho.y_index, w)
            except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
                raise ValueError(
                    f"CalibrationWrapper({self._method_asked()}): the map could not be "
                    f"fitted on the {len(ho.y_index)} held-out rows: {exc}"
                ) from exc
        if self.method == "auto":
            hit = _boundary_of(self.calibrator_)
            if hit is not None and self.method_ in self.method_scores_:
                # the fit on all rows reached a boundary that no fold fit reached: fall back
                self.method_notes_[self.method_] = (
                    f"not eligible: the fit on all held-out rows reached a boundary ({hit})"
                )
                n_maps = 1 if scores.ndim == 1 else scores.shape[1]
                fallback = self._fallback_name(
                    self._auto_names(len(ho.y_index), n_maps), scores.ndim == 1
                )
                warnings.warn(
                    f"CalibrationWrapper(method='auto'): {plain(self.method_)!r} reached a boundary on "
                    f"all held-out rows ({hit}); using {plain(fallback)!r} instead.",
                    UserWarning,
                    stacklevel=2,
                )
                self.method_ = fallback
                self.calibrator_ = self._fit_map(
                    CALIBRATION_METHODS[fallback](), scores, ho.y_index, w
                )
        self._map_rows = (scores, w)  # for _cap_level_sharpening after the predicting models
        self._warn_reversed(len(ho.y_index))
        return self

    def _refit_score_range(self, X: Any, ho: Any) -> tuple[float, float] | None:
        """``(low, high)``: the smallest and largest log-odds of the model refitted on all rows
        (``estimator_``) on the labelled rows of weight > 0, for a binary model the wrapper
        cross-fits from ``predict_proba`` (else None; ``predict_with="fold_models"``: None).

        Platt's map is fitted on the fold models' held-out log-odds clipped to this range
        (``platt_fit_range_``), because it is applied to the refitted model, whose scores on
        these rows never leave it. A fold model that lacked the few rows that tame a column
        can score the rows it holds out far beyond anything the refitted model gives: Gaussian
        naive Bayes on pscl's iraqVote (50 senators, the party nearly decides the vote), the
        fold without the one Republican who voted no gave him a log-odds of +744 for yes and
        seven Democrats who voted yes -10 to -12, while the refitted model scores the same
        rows from -2 to +10; fitted on the raw scores, Platt's slope fell to 0.05 and the test
        log loss was 0.505 against scikit-learn's sigmoid's 0.391 (docs/evidence/small_data_log.md,
        the section on Platt's fit within the refitted model's range, 4 December 2026).
        """
        if (ho.n_folds == 0 or len(self.classes_) != 2 or ho.response != "predict_proba"
                or self.predict_with == "fold_models"):
            return None
        values = np.asarray(self.estimator_.predict_proba(X), dtype=float)
        # (a count table cross-fitted by its cases: the held-out rows are pieces of X's rows)
        w = getattr(ho, "row_weight", None)
        w = ho.sample_weight if w is None else w
        if values.ndim != 2 or values.shape[0] != np.shape(w)[0]:
            return None
        lp = np.log(np.maximum(values[:, -2:], _TINY))
        s = lp[:, 1] - lp[:, 0]
        if w is not None and np.shape(w) == s.shape:
            s = s[np.asarray(w) > 0]
        s = s[np.isfinite(s)]
        if s.size == 0 or not s.max() > s.min():
            return None
        return float(s.min()), float(s.max())

    def _class_shares_map(self, scores: np.ndarray, y_index: np.ndarray,
                          w: np.ndarray) -> PlattMap:
        """``method="auto"``'s class shares (binary): a Platt map fitted on the held-out rows
        and then held at its level (slope 0, intercept the logit of the weighted mean of
        Platt's smoothed targets, ``PlattMap._hold_level``), so every row gets the class share;
        saved and applied as any Platt map."""
        m = self._fit_map(PlattMap(), scores, y_index, w)
        m.__dict__.pop("_reversed_slope", None)  # the class shares' own warning says why
        m._hold_level(np.asarray(y_index) == 1, w)
        m.boundary_ = None
        return m

    def _cap_level_sharpening(self, scores: np.ndarray, ho: Any, w: np.ndarray) -> None:
        """``method="auto"``, two classes, cross-fitted: a temperature that sharpens (``T < 1``)
        was fitted on the fold models' held-out scores; when the refitted model spreads its
        scores more than ``_REFIT_SPREAD_RATIO_LIMIT`` times as widely as every fold model
        (``refit_spread_ratios_``), those scores were near-constant beside the ones it will
        be applied to, and a scale without an intercept fitted on them was fitted to their
        level (the base rate), not to their spread, and applied to the refit's spread it
        sharpens by a factor nothing on the held-out rows supports. Where the level fixes
        ``1 / T`` only to within more than ``_LEVEL_TEMPERATURE_MAX_SE`` (one standard error),
        the temperature is capped at 1: the refit's own log-odds, no sharper
        (``method_notes_`` says so)."""
        if (scores.ndim != 1 or self.method_ != "temperature"
                or self.predicted_with_ != "refit"
                or "platt" not in self._auto_names(len(ho.y_index))):
            return
        ratios = np.asarray(self.refit_spread_ratios_, dtype=float)
        temperature = float(self.calibrator_.temperature_)
        if (temperature >= 1.0 or ratios.size == 0
                or not ratios.min() > _REFIT_SPREAD_RATIO_LIMIT):
            return
        # On near-constant scores the unpenalised score equation reads
        # beta * mean(s) = logit(mean target): beta is a ratio, and its standard error by the
        # delta method is se(logit(ybar)) / |mean(s)| = 1 / (|mean(s)| sqrt(n ybar (1 - ybar))).
        # Where that exceeds _LEVEL_TEMPERATURE_MAX_SE, the level cannot tell this sharpening
        # from none (a base rate near one half puts both logits near 0).
        wn = w / w.sum()
        n_eff = float(w.sum() ** 2 / (w @ w))
        level = abs(float(wn @ scores))
        ybar = float(wn @ (ho.y_index == 1))
        spread = level * np.sqrt(n_eff * ybar * (1.0 - ybar))
        se = np.inf if spread <= 0.0 else 1.0 / spread
        if se <= _LEVEL_TEMPERATURE_MAX_SE:
            return
        capped = copy.copy(self.calibrator_)
        capped.temperature_ = 1.0
        self.method_notes_["temperature"] = (
            f"temperature capped at 1 (fitted {temperature:.3g}): the fold models' held-out "
            f"scores spread at most 1/{ratios.min():.3g} as widely as the refitted model's, so "
            "the sharpening was fitted to their level, not to a spread like the refit's, and "
            f"that level fixes 1/T only to within {se:.3g} (one standard error)"
        )
        self.calibrator_ = capped

    def _drop_class_scales_fitted_to_level(self, scores: np.ndarray, ho: Any,
                                           w: np.ndarray) -> None:
        """``method="auto"``, more than two classes, cross-fitted, the refit predicting: where
        ``auto`` chose vector scaling and the refitted model spreads its scores more than
        ``_REFIT_SPREAD_RATIO_LIMIT`` times as widely as every fold model, the per-class scales
        were fitted on fold scores with (next to) no spread, i.e. to their level, and
        multiply the refit's spread by factors nothing supports: temperature scaling (one
        scale) is fitted on the same rows instead (``method_notes_`` says so). scikit-learn's
        wine, gradient boosting whose 36-row fold models cannot split, 45 rows: test log loss
        6.44 and 3.82 against scikit-learn's sigmoid 1.16 and 1.15, now 0.43 and 0.27
        (benchmarks/crossfit_sweep.py --only tiny, docs/calibration.md)."""
        if (scores.ndim != 2 or self.method_ != "vector_scaling"
                or self.predicted_with_ != "refit"):
            return
        ratios = np.asarray(self.refit_spread_ratios_, dtype=float)
        if ratios.size == 0 or not ratios.min() > _REFIT_SPREAD_RATIO_LIMIT:
            return
        try:
            fitted = self._fit_map(CALIBRATION_METHODS["temperature"](), scores, ho.y_index, w)
        except (ValueError, FloatingPointError, np.linalg.LinAlgError):  # pragma: no cover
            return
        self.method_notes_["vector_scaling"] = (
            "replaced by temperature: the fold models' held-out scores spread at most "
            f"1/{ratios.min():.3g} as widely as the refitted model's, so the per-class scales "
            "were fitted to their level, not to a spread like the refit's"
        )
        self.method_ = "temperature"
        self.calibrator_ = fitted

    # -- which model predicts ---------------------------------------------------------------
    def _check_scores(self, values: np.ndarray) -> np.ndarray:
        """Scores for the refit check, shape (n, 1) or (n, k): what a parametric map sees
        (log-odds clipped at ``clip_``, log-probabilities floored at ``log(clip_)``, or the
        decision values), multiclass ones centred per row."""
        s = self._to_scores(values)
        if self.response_ != "decision_function":
            clip = self._clip_value()
            if s.ndim == 1:
                bound = np.log1p(-clip) - np.log(clip)
                s = np.clip(s, -bound, bound)
            else:
                s = np.maximum(s, np.log(clip))
        if s.ndim == 1:
            return s[:, None]
        return s - s.mean(axis=1, keepdims=True)

    def _choose_predicting_models(self, X: Any, ho: Any) -> None:
        """After a cross-fit: the spread of each fold model's scores on the labelled rows against
        the refitted model's (``refit_spread_ratios_``), and which models predict."""
        models = getattr(self, "_fold_models", None)
        self._fold_models = None
        if ho.n_folds == 0 or not models:
            return
        response = self.response_
        n = ho.y_index.shape[0]
        # a count table cross-fitted by its cases: X's rows, each as many times
        # as its count, as the spread of the rows repeated; other weights: a row of weight 2
        # counts as two rows
        if getattr(ho, "table_row", None) is not None:
            w = np.round(np.asarray(ho.row_weight, dtype=float))
            n = w.shape[0]
        else:
            w = ho.sample_weight
            w = None if w is None or np.shape(w) != (n,) else np.asarray(w, dtype=float)
        if n > _SPREAD_CHECK_MAX_ROWS:  # evenly spaced rows: the check's cost stays bounded
            pick = np.linspace(0, n - 1, _SPREAD_CHECK_MAX_ROWS).astype(np.intp)
            X = _safe_indexing(indexable(X)[0], pick)
            w = None if w is None else w[pick]
        spreads = []
        fold_scores = []
        complete = True
        for model, fold_classes in [(self.estimator_, self.classes_), *models]:
            out = np.asarray(getattr(model, response)(X), dtype=float)
            complete &= fold_classes.shape[0] == self.classes_.shape[0]
            s = self._check_scores(fold_columns(fold_classes, out, self.classes_, response))
            if model is not self.estimator_:
                fold_scores.append(s)
            if w is None or not w.sum() > 0:
                sd = float(np.sqrt(np.mean(s.var(axis=0))))
            else:  # a row of weight 2 counts as two rows (the duplicated rows' spread)
                centred = s - (w @ s) / w.sum()
                sd = float(np.sqrt(np.mean((w @ centred**2) / w.sum())))
            # a model that scores every row alike (up to rounding) has no spread
            spreads.append(sd if sd > 1e-9 * max(1.0, float(np.abs(s).max())) else 0.0)
        ratios, unstable = spread_check(spreads)
        self.refit_spread_ratios_ = ratios
        self.fold_spread_variation_ = unstable
        self.fold_disagreement_ = fold_disagreement(fold_scores, w) if complete else 0.0
        # (a step map is left to the spread rule: its fold average was not measured, and its
        # steps turn rounding-level differences between fold models into jumps)
        step = (isinstance(self.method, _ORDER_BASED)
                or getattr(self, "method_", None) in ("isotonic", "binning", "venn_abers"))
        off = fold_models_predict(ratios, unstable, 0.0 if step else self.fold_disagreement_)
        off_scale = fold_models_predict(ratios, unstable)  # (the warning below names it)
        if self.predict_with == "fold_models" or (self.predict_with == "auto" and off
                                                   and complete):
            self.predicted_with_ = "fold_models"
            self.fold_models_ = [model for model, _ in models]
            self._fold_classes = [fold_classes for _, fold_classes in models]
        elif self.predict_with == "refit" and off_scale and complete:
            # (a fold model without some class scores it far below the rest, which is not a
            # scale of its own: that case has the absent-class warning of the cross-fit)
            warnings.warn(
                "CalibrationWrapper(predict_with='refit'): the fold models score the labelled "
                "rows on scales that differ from fold to fold (standard deviation of the log "
                f"of their spreads {unstable:.3g}, above {FOLD_SPREAD_VARIATION_LIMIT:g}; "
                "spread of the refitted model over each fold model's: "
                f"{np.round(ratios, 2).tolist()}), so the map fitted on their pooled held-out "
                "scores may not suit the model refitted on all rows, whose scale is one more "
                "draw. predict_with='auto' or 'fold_models' predicts with the fold models.",
                UserWarning,
                stacklevel=3,
            )

    def _score_sets(self, X: Any) -> list[np.ndarray]:
        """The scores the map turns into probabilities: the refitted (or frozen) model's, or
        each fold model's."""
        check_fitted(self, "calibrator_")
        if getattr(self, "predicted_with_", "refit") != "fold_models":
            return [self._to_scores(self._inner_output(X, self.response_))]
        out = []
        for model, fold_classes in zip(self.fold_models_, self._fold_classes, strict=True):
            values = np.asarray(getattr(model, self.response_)(X), dtype=float)
            if not np.all(np.isfinite(values)):
                raise ValueError(
                    f"A fold model returned NaN or infinite values from {self.response_} for "
                    "`X`."
                )
            values = fold_columns(fold_classes, values, self.classes_, self.response_)
            out.append(self._to_scores(values))
        return out

    def _warn_few_class_rows(self, counts: np.ndarray) -> None:
        """Warn, naming each class and its count, when a class has at least one but fewer than
        ``FEW_CLASS_ROWS`` held-out rows of weight > 0 (``counts``, per class: rows, not
        weights, so the scale of the weights cannot change the warning). Absent classes have a
        warning of their own."""
        few = np.flatnonzero((counts > 0) & (counts < FEW_CLASS_ROWS))
        if few.size:
            listed = ", ".join(
                f"{plain(self.classes_[c])!r}: {int(counts[c])} row{'s' if counts[c] > 1 else ''}"
                for c in few
            )
            warnings.warn(
                f"CalibrationWrapper({self._method_asked()}): class(es) with fewer than "
                f"{FEW_CLASS_ROWS} held-out rows ({listed}); the map's part for them rests on "
                "those rows and its regularisation, so their calibrated probabilities are "
                "uncertain. Hold out more labelled rows of the class(es) named.",
                FewClassRowsWarning,
                stacklevel=3,
            )

    def _method_asked(self) -> str:
        """The method as the user asked for it, for warnings: ``method='auto', chose 'platt'``
        when ``auto`` chose, else ``method='platt'``."""
        if isinstance(self.method, str) and self.method == "auto":
            return f"method='auto', chose {plain(self.method_)!r}"
        return f"method={plain(self.method_)!r}"

    def _warn_count_reading(self, ho: HeldOutPredictions) -> None:
        """Say so when weights that do not look like counts (not whole numbers, or whole
        numbers sharing a factor) sum to at least the rows, so the map counts them as rows and
        their scale moves ``predict_proba``, as ``PriorShiftWrapper.fit`` says for its own
        calibration (since 5 December 2026: before, weights drawn from 0.2-3 times 1,000 moved a
        Platt map's probabilities by up to 0.37 on wine without a word, while times 1e-3 warned).
        ``auto``'s warning about a shared factor already covers whole numbers there."""
        w = (getattr(ho, "row_weight", None) if getattr(ho, "table_row", None) is not None
             else ho.sample_weight)
        w = np.asarray(w, dtype=float)
        if isinstance(self.method, str) and self.method == "auto" and shared_factor(w) not in (None, 1):
            return
        warn_count_reading(
            w, "CalibrationWrapper", "the calibration map counts",
            "the fitted map and predict_proba (not the choice of map)", stacklevel=5)

    def _warn_tally_count_reading(self, tally: Any) -> None:
        """:meth:`_warn_count_reading` for held-out rows read from the bins of their tally (Dask
        or Spark), from the tally's summary of the weights (their sum, rows of positive weight,
        shared whole factor and Kish's size): the map counts the cells' weights as rows, so
        weights summing to at least the rows that are not whole numbers, or share a factor,
        move ``predict_proba`` with their scale, as in memory, in the same words (before
        5 December 2026 a tally never said so)."""
        from ._weights import warn_count_summary

        rows = None if tally is None else tally.weighted_rows_by_label
        factor = None if tally is None else tally.weight_factor
        if rows is None or factor is None:
            return
        total = float(tally.total_weight) * float(getattr(tally, "weight_unit", 1.0))
        warn_count_summary(
            int(np.sum(rows)), total, None if factor < 0 else factor,
            float(tally.effective_rows), "CalibrationWrapper", "the calibration map counts",
            "the fitted map and predict_proba (not the choice of map)", stacklevel=5)

    def _count_scale_weights(self, w: np.ndarray) -> np.ndarray:
        """Weights as row counts for the maps (see ``docs/calibration.md``, "Weights")."""
        from ._weights import count_scale_weights

        return count_scale_weights(w, "CalibrationWrapper", "for the calibration map")

    def _fit_multiclass_dask(self, X: Any, y: Any, sample_weight: Any) -> CalibrationWrapper:
        """Multiclass Dask rows with a frozen estimator: temperature scaling by reductions over
        the score blocks, binary maps one-vs-rest from per-class score tallies."""
        from .scale._entry import fit_multiclass_calibration

        if isinstance(self.method, CalibrationMap):
            self.method_ = type(self.method).__name__
            template = self.method
        elif self.method == "auto":
            template = None  # allowed on small sets (fitted as in memory), refused below
        else:
            self.method_ = self.method
            template = CALIBRATION_METHODS[self.method]()
        fitted = fit_multiclass_calibration(self, X, y, sample_weight, template)
        if isinstance(fitted, HeldOutPredictions):
            # a small set (at most probwrap.scale._tally.KEPT_ROWS rows): its rows came to the
            # client, so the map is the in-memory fit of the same rows
            self._fit_on_heldout(fitted)
            del self._map_rows  # multiclass: nothing for _cap_level_sharpening
            return self
        self.calibrator_ = fitted
        self.predicted_with_, self.fold_models_ = "frozen", []
        self.refit_spread_ratios_, self.fold_spread_variation_ = np.empty(0), np.nan
        self.fold_disagreement_ = np.nan
        return self

    def _check_method(self) -> None:
        if isinstance(self.method, CalibrationMap):
            return
        valid = (*CALIBRATION_METHODS, "auto")
        if not isinstance(self.method, str) or self.method not in valid:
            hint = ""
            if self.method == "sigmoid":
                hint = (" scikit-learn's 'sigmoid' (CalibratedClassifierCV) is 'platt' here; "
                        "'auto' chooses between the maps.")
            raise ValueError(
                f"`method` must be one of {valid} or a CalibrationMap instance; got "
                f"{plain(self.method)!r}.{hint}"
            )
        if self.method == "auto":
            self._candidate_names()
        if self.clip is not None and not (
            isinstance(self.clip, numbers.Real)
            and not isinstance(self.clip, bool)
            and 0.0 < self.clip < 0.5
        ):
            raise ValueError(f"`clip` must be None or a float in (0, 0.5); got {plain(self.clip)!r}.")

    # -- scores ------------------------------------------------------------------------------
    def _choose_clip(self, values: np.ndarray, w: np.ndarray) -> float:
        """``clip`` as given, or half the smallest non-zero held-out probability.

        Probabilities of rows of zero weight are ignored. The result is kept within
        ``[DEFAULT_CLIP, 0.25]``: a model whose outputs reach far into the tails (naive Bayes)
        keeps the previous default, a coarse one (a forest of ``n`` trees outputs multiples of
        ``1/n``) gets ``1/(2n)``, so exact 0 and 1 sit just beyond its own resolution instead of
        at log-odds of ``±27.6``.
        """
        if self.clip is not None:
            return float(self.clip)
        if self.response_ == "decision_function":
            return DEFAULT_CLIP  # not used: decision values are not clipped
        v = values
        if values.shape[0] == w.shape[0]:
            keep = w > 0
            if not keep.all():
                v = values[keep]
                w = w[keep]
        # the smallest positive value without copying the positive ones out (the same value)
        smallest = float(np.min(v, where=v > 0, initial=np.inf))
        clip = self._clip_from_smallest(smallest)
        if not smallest < 2.0 * DEFAULT_CLIP or v.ndim != 2 or v.shape[1] < 3 or w.size == 0:
            return clip
        zeros = int(np.count_nonzero(v == 0.0))
        if zeros == 0 or v.shape[0] != w.shape[0]:
            return clip
        # More than two classes, exact zeros, and positive probabilities below 2e-12: the model's own
        # resolution says nothing about how far below its smallest value a zero lies (an
        # isotonic-calibrated naive Bayes: isotonic steps at exactly 0, interpolated among
        # naive Bayes' underflowing probabilities down to 1.7e-313 on Stat2Data's Caterpillars).
        # At log(1e-12) = -27.6 the zeros dominate the scale maps' fit and their fold scores
        # (docs/calibration.md, "Exact zeros"). The floor falls back to what the labelled rows
        # can tell apart: half the Krichevsky-Trofimov floor 1 / (2 (N + 1) (k - 1)) for N rows,
        # the bound the prior-shift calibration puts on every input
        # (probwrap.shift._calibration.heldout_clip). Two classes keep the old floor: Platt's
        # map already limits such scores (PlattMap(limit_scores=True)), and on scikit-learn's
        # breast cancer the same input moved auto both ways (0.82-1.10x the sigmoid before).
        from .calibration._base import count_weights

        with np.errstate(over="ignore"):
            n_rows = float(count_weights(np.asarray(w, dtype=float))[0].sum())
        return self._exact_zero_floor(clip, v.shape[1], zeros, v.shape[0], n_rows)

    def _exact_zero_floor(self, clip: float, k: int, zeros: int, rows: int,
                          n_rows: float) -> float:
        """``clip_`` for ``k > 2`` classes with ``zeros`` exact zeros beside positive
        probabilities below ``2e-12`` (nothing to go on): half the Krichevsky-Trofimov floor of ``n_rows``
        held-out rows (weights on the row-count scale) where it lies above ``clip``, noted for
        :meth:`_warn_zero_floor`. The in-memory fit and the Dask/Spark tally path
        (probwrap.scale._multiclass_wrappers) share it."""
        if not 0.0 < n_rows < np.inf:
            return clip
        floor = min(0.25, 0.25 / ((n_rows + 1.0) * (k - 1)))
        if floor <= clip:
            return clip
        self._zero_floor = (zeros, rows, floor)
        return floor

    def _warn_zero_floor(self, stacklevel: int = 4) -> None:
        """Once per fit: the held-out probabilities' exact zeros were floored at ``clip_``."""
        from .calibration._base import ExactZeroFloorWarning

        found = self.__dict__.pop("_zero_floor", None)
        if found is None:
            return
        zeros, rows, floor = found
        warnings.warn(
            f"CalibrationWrapper: the model gave probabilities of exactly 0 ({zeros} value(s) "
            f"on {rows} held-out rows) and positive ones below 2e-12, so its own probabilities "
            "say nothing about how small a zero is; the parametric maps (temperature, vector "
            f"scaling, Platt and beta one-vs-rest) see every probability below {floor:.3g} as {floor:.3g} "
            "(clip_, from the number of held-out rows), at fit and at predict. Pass `clip=` "
            "to choose the floor yourself.",
            ExactZeroFloorWarning,
            stacklevel=stacklevel,
        )

    @staticmethod
    def _clip_from_smallest(smallest: float) -> float:
        """Half the smallest non-zero probability, within ``[DEFAULT_CLIP, 0.25]`` (``inf``:
        no non-zero probability, ``DEFAULT_CLIP``)."""
        return clip_from_smallest(smallest)  # shared with the prior-shift calibration

    def _clip_value(self) -> float:
        clip = getattr(self, "clip_", None)
        if clip is None:
            clip = DEFAULT_CLIP if self.clip is None else self.clip
        return float(clip)

    def _to_scores(self, values: np.ndarray) -> np.ndarray:
        """Inner-estimator output -> log-odds (binary, (n,)) or log-probabilities (n, k).

        Probabilities are converted at full resolution: the binary log-odds is
        ``log p1 - log p0`` from both columns, so probabilities that differ only far in the tail
        (1e-30 versus 1e-40, as naive Bayes produces) keep their order. Only exact zeros are
        replaced, by the smallest positive float. Parametric maps see the scores clipped later
        (see :meth:`_map_input`).
        """
        binary = len(self.classes_) == 2
        if self.response_ == "decision_function":
            if binary:
                return values.ravel() if values.ndim == 1 else values[:, -1] - values[:, 0]
            return values
        lp = np.log(np.maximum(values, _TINY))
        if binary:
            return lp[:, 1] - lp[:, 0]
        return lp

    def _one_vs_rest_scores(self, scores: np.ndarray) -> np.ndarray:
        """Per-class binary scores (log-odds of each class against the rest)."""
        if self.response_ == "decision_function":
            return scores
        n, k = scores.shape
        out = np.empty_like(scores)
        if k > _STACKED_LOGSUMEXP_MAX_CLASSES:
            for i in range(k):
                out[:, i] = scores[:, i] - logsumexp(np.delete(scores, i, axis=1), axis=1)
            return out
        # `part[:, others][:, i]` holds the other classes of class i: one logsumexp over the
        # last axis for all classes (the same per-row operations as one call per class with
        # np.delete, so bit-identical), in blocks of rows that keep it within ~8 MB
        others = np.array([[j for j in range(k) if j != i] for i in range(k)], dtype=np.intp)
        block = max(1, (1 << 20) // (k * (k - 1)))
        for start in range(0, n, block):
            part = scores[start : start + block]
            out[start : start + block] = part - logsumexp(part[:, others], axis=2)
        return out

    def _map_input(
        self, cal: CalibrationMap, scores: np.ndarray, log_odds: bool | None = None
    ) -> np.ndarray:
        """What a map sees: order-based maps the full-resolution scores; parametric maps, for
        probability outputs, log-odds clipped to ``±logit(1 - clip)`` (log-probabilities floored
        at ``log(clip)``) so that a few extreme, confidently wrong rows cannot dominate the fit.
        ``log_odds=True``: every column of ``scores`` is a binary log-odds (one-vs-rest).
        """
        if self.response_ == "decision_function" or isinstance(cal, _ORDER_BASED):
            return scores
        clip = self._clip_value()
        if scores.ndim == 1 or log_odds:
            bound = np.log1p(-clip) - np.log(clip)
            return np.clip(scores, -bound, bound)
        return np.maximum(scores, np.log(clip))

    # -- maps ----------------------------------------------------------------------------------
    def _fit_map(self, template: CalibrationMap, scores, y_index, w, ovr=None, start=None):
        """Fit ``template`` (cloned) on held-out ``scores``: binary, multiclass, or one-vs-rest
        (``ovr`` the one-vs-rest scores when already computed; ``start`` a one-vs-rest fit on
        other rows to start the iterations from, see ``fit_one_vs_rest``)."""
        with warnings.catch_warnings():
            # the wrapper made these scores itself (log-odds of the model's probabilities, or
            # its decision_function): a weak model's all lie in [0, 1], and PlattMap's advice to
            # convert probabilities first does not apply
            warnings.filterwarnings(
                "ignore", message=r"PlattMap: every one of `scores` lies in \[0, 1\]"
            )
            return self._fit_map_checked(template, scores, y_index, w, ovr, start)

    def _fit_map_checked(self, template, scores, y_index, w, ovr, start):
        """:meth:`_fit_map` without the warning filter."""
        if (
            type(template) is PlattMap
            and self.response_ != "decision_function"
            and not isinstance(self.method, CalibrationMap)
        ):
            # log-odds from probabilities: Platt's map clips those far beyond every row of the
            # other class, so that rows at (or within 1e-12 of) 0 or 1 cannot flatten its slope
            # (see PlattMap)
            template = clone(template).set_params(limit_scores=True)
        if scores.ndim == 1:
            limits = getattr(self, "_platt_range", None)
            if limits is not None and type(template) is PlattMap and template.limit_scores:
                # the map serves the refitted model: fold models' scores beyond its range are
                # fitted as at its ends (see _refit_score_range)
                scores = np.clip(scores, limits[0], limits[1])
            fitted = clone(template).fit(self._map_input(template, scores), y_index, sample_weight=w)
            self._keep_order(fitted, y_index, w)
            return fitted
        if template.supports_multiclass:
            m = clone(template)
            if type(start) is type(m) and type(m) is VectorScalingMap:
                m._start_from = start  # the fit starts from the previous fold's parameters
            try:
                return m.fit(self._map_input(template, scores), np.asarray(y_index), sample_weight=w)
            finally:
                m.__dict__.pop("_start_from", None)
        if ovr is None:
            ovr = self._one_vs_rest_scores(scores)
        n_classes = scores.shape[1]
        total = float(w.sum())
        pos = np.bincount(np.asarray(y_index, dtype=np.intp), weights=w, minlength=n_classes)
        fitted = (pos > 0) & (pos < total)
        maps: list = [None] * n_classes
        ks = np.flatnonzero(fitted)
        # the k binary maps together: inputs checked once, Platt and beta solved in one batch
        S = self._map_input(template, ovr, log_odds=True)
        for k, m in zip(ks, fit_one_vs_rest(template, S, y_index, w, ks, start), strict=True):
            maps[k] = m
            self._keep_order(m, np.asarray(y_index) == k, w)
        if not fitted.all():
            pooled = None
            if self.response_ == "decision_function" and fitted.sum() >= 2:
                cols = np.flatnonzero(fitted)
                pooled = (
                    ovr[:, cols].T.ravel(),
                    np.concatenate([(y_index == k).astype(int) for k in cols]),
                    np.tile(w, cols.shape[0]),
                )
            self._fill_absent_classes(template, maps, pos, total, pooled, stacklevel=5)
        return maps

    def _keep_order(self, m: CalibrationMap, y01: np.ndarray, w: np.ndarray) -> None:
        """For a model the wrapper cross-fits: a Platt map fitted with a negative slope keeps
        the level only (slope 0, the constrained optimum, see ``PlattMap._hold_level``).

        The map is fitted on the fold models' held-out scores and applied to the model refitted
        on all rows. When the fold models' scores run against the labels (SVC(probability=True)
        on 30 rows of scikit-learn's diabetes: Platt slope -3.25), the refitted model still
        ranks the classes the way it was fitted to, and a decreasing map turns its ranking
        upside down (test log loss 1.29 against the model's own 0.68). A frozen model's rows
        are its own held-out rows: its map is kept as fitted (``_warn_reversed`` warns).
        """
        if (
            getattr(self, "_cross_fitted", False)
            and isinstance(m, PlattMap)
            and getattr(m, "slope_", 0.0) < 0.0
        ):
            m._reversed_slope = m._hold_level(np.asarray(y01, dtype=float), w)

    def _warn_reversed(self, n_rows: int) -> None:
        """Warn when the fitted map ran against the model's scores: held at its level for a
        cross-fitted model (``_keep_order``), or decreasing for a frozen one."""
        maps = self.calibrator_ if isinstance(self.calibrator_, list) else [self.calibrator_]
        held = [(k, m._reversed_slope) for k, m in enumerate(maps)
                if hasattr(m, "_reversed_slope")]
        falling = [(k, m.slope_) for k, m in enumerate(maps)
                   if isinstance(m, PlattMap) and not hasattr(m, "_reversed_slope")
                   and m.slope_ < 0.0]

        def where(k: int) -> str:
            return "" if len(maps) == 1 else f" for class {plain(self.classes_[k])!r}"

        for k, slope in held:
            warnings.warn(
                f"CalibrationWrapper({self._method_asked()}): the fold models' "
                f"held-out scores run against the labels{where(k)} (Platt slope {slope:.3g} on "
                f"{n_rows} held-out rows), so they show no usable order; the map gives every "
                f"row the same probability, {float(maps[k].predict(np.zeros(1))[0]):.3g}, "
                "instead of reversing the order of the model refitted on all rows. Check the "
                "model on more labelled rows.",
                UserWarning,
                stacklevel=4,
            )
        for k, slope in falling:
            warnings.warn(
                f"CalibrationWrapper({self._method_asked()}): the map decreases{where(k)} "
                f"(Platt slope {slope:.3g} on {n_rows} held-out rows): the model's higher scores "
                "get lower probabilities. Check that the model and the labels match (the same "
                "positive class).",
                UserWarning,
                stacklevel=4,
            )

    def _fill_absent_classes(self, template, maps, pos, total, pooled, stacklevel) -> None:
        """Entries of a one-vs-rest list for the classes that have no map (``None``).

        A class absent from the held-out rows (or, when only one class is present, every class)
        cannot get a binary map of its own. With probability outputs it keeps the model's own
        probability: its entry is an :class:`~probwrap.calibration.IdentityMap`, and
        :meth:`_apply_map` gives the class the model's probability (at least ``clip_``) and the
        calibrated classes the rest of the row in proportion to their calibrated values. With
        decision values there is no probability of the model's own; the class gets the map
        fitted on the pooled one-vs-rest rows ``pooled = (scores, labels, weights)`` of the
        classes that have rows, or, when there are none to pool, its smoothed share
        ``(N_k + 1) / (N + k)`` (rule of succession) as a float.
        """
        n_classes = len(maps)
        missing = [k for k, m in enumerate(maps) if m is None]
        names = [plain(c) for c in np.asarray(self.classes_)[missing]]
        if self.response_ != "decision_function":
            for k in missing:
                maps[k] = _kept_probability_map()
            done = (
                "they keep the model's own probability (at least clip_ = "
                f"{self._clip_value():.3g}) and the calibrated classes share the rest of each "
                "row in proportion to their calibrated one-vs-rest probabilities"
            )
        elif pooled is not None:
            s, yk, wk = pooled
            shared = one_vs_rest_copy(template, n_classes).fit(
                self._map_input(template, s), yk, sample_weight=wk
            )
            for k in missing:
                maps[k] = shared
            done = (
                "their decision values are calibrated by one map fitted on the pooled "
                "one-vs-rest rows of the classes that have rows"
            )
        else:
            for k in missing:
                maps[k] = float((pos[k] + 1.0) / (total + n_classes))
            done = (
                "with decision values and a single class present, each class gets its smoothed "
                "share (N_k + 1) / (N + k) of the held-out rows (rule of succession)"
            )
        warnings.warn(
            f"CalibrationWrapper: no one-vs-rest map can be fitted for class(es) {names}: "
            f"they have no held-out rows (or are the only class present); {done}.",
            UserWarning,
            stacklevel=stacklevel,
        )

    def _apply_map(self, calibrator, scores: np.ndarray, ovr=None) -> np.ndarray:
        if scores.ndim == 1:
            q = calibrator.predict(self._map_input(calibrator, scores))
            return np.column_stack([1.0 - q, q])
        if not isinstance(calibrator, list):
            return calibrator.predict(self._map_input(calibrator, scores))
        if ovr is None:
            ovr = self._one_vs_rest_scores(scores)
        kept = np.array([isinstance(m, IdentityMap) for m in calibrator])
        q = None
        if not kept.any() and all(isinstance(m, CalibrationMap) for m in calibrator):
            # one kind of map for every class: checked once (Platt and beta in one pass)
            q = predict_one_vs_rest(calibrator, self._map_input(calibrator[0], ovr, log_odds=True))
        if q is None:
            q = np.column_stack(
                [
                    np.full(scores.shape[0], m)
                    if isinstance(m, float)
                    else m.predict(ovr[:, k] if kept[k] else self._map_input(m, ovr[:, k]))
                    for k, m in enumerate(calibrator)
                ]
            )
        if kept.any():
            return self._share_with_kept_classes(q, kept)
        total = q.sum(axis=1, keepdims=True)
        uniform = np.full_like(q, 1.0 / q.shape[1])
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(total > 0, q / np.where(total > 0, total, 1.0), uniform)

    def _share_with_kept_classes(self, q: np.ndarray, kept: np.ndarray) -> np.ndarray:
        """Rows of one-vs-rest outputs ``q`` where the classes ``kept`` (no calibration rows)
        hold the model's own probability.

        A kept class keeps the model's probability, raised to ``clip_`` only where it is below
        (an exact 0 of a forest); the calibrated classes share the rest of the row in
        proportion to their calibrated one-vs-rest values, which their maps' floors keep
        positive. Only where the kept classes would leave the calibrated ones less than
        ``clip_`` each are the kept probabilities scaled down to leave them that. When every
        class is kept (a single class present), the model's probabilities are floored at
        ``clip_`` and renormalised.
        """
        clip = self._clip_value()
        q = q.copy()
        q[:, kept] = np.maximum(q[:, kept], clip)
        if kept.all():
            return q / q.sum(axis=1, keepdims=True)
        room = 1.0 - clip * float(np.count_nonzero(~kept))
        held = q[:, kept].sum(axis=1, keepdims=True)
        q[:, kept] *= np.minimum(1.0, room / held)
        rest = 1.0 - q[:, kept].sum(axis=1, keepdims=True)
        part = q[:, ~kept]
        q[:, ~kept] = part / part.sum(axis=1, keepdims=True) * rest
        return q

    # -- prediction ----------------------------------------------------------------------------
    def _calibrated(self, X: Any) -> np.ndarray:
        sets = self._score_sets(X)
        total = self._apply_map(self.calibrator_, sets[0])
        for scores in sets[1:]:
            total = total + self._apply_map(self.calibrator_, scores)
        return total / len(sets) if len(sets) > 1 else total

    def predict_proba(self, X: Any) -> np.ndarray:
        """Calibrated class probabilities, shape (n, n_classes), rows summing to one.

        For Dask input the result is a Dask array, computed block by block.
        """
        if _is_dask(X):
            return self._dask_predict(self._calibrated, X, len(self.classes_))
        return self._calibrated(X)

    def predict(self, X: Any) -> np.ndarray:
        """Class with the largest calibrated probability (a Dask array for Dask input)."""
        if _is_dask(X):
            return self._dask_predict(self.predict, X, None, self.classes_.dtype)
        proba = self._calibrated(X)
        return self.classes_[np.argmax(proba, axis=1)]

    @available_if(_uses_interval)
    def predict_proba_interval(self, X: Any) -> np.ndarray:
        """Venn–Abers probability intervals.

        Returns
        -------
        ndarray
            Binary: shape (n, 2) with columns [p0, p1] for the positive class. Multiclass:
            shape (n, n_classes, 2), the one-vs-rest interval of each class before
            renormalisation.
        """
        sets = self._score_sets(X)
        return sum(self._interval(scores) for scores in sets) / len(sets)

    def _interval(self, scores: np.ndarray) -> np.ndarray:
        if scores.ndim == 1:
            return self.calibrator_.predict_interval(scores)
        ovr = self._one_vs_rest_scores(scores)
        out = np.empty((scores.shape[0], scores.shape[1], 2))
        for k, m in enumerate(self.calibrator_):
            if isinstance(m, IdentityMap):  # no rows: the model's own probability
                out[:, k, :] = m.predict(ovr[:, k])[:, None]
            else:
                out[:, k, :] = m if isinstance(m, float) else m.predict_interval(ovr[:, k])
        return out
