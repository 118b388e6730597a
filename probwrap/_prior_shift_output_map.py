"""The map :class:`probwrap.PriorShiftWrapper` returns its probabilities through on small sets
where the labelled rows contradict the model's confidence (a rule since 5 December 2026).

``BiasCorrectedScaling`` serves two purposes: the prior estimate (its class-wise biases make the
mean calibrated posterior the class frequency, which EM needs) and the probabilities handed to
the user (``predict_output``: the map, or the model's own where a likelihood-ratio test keeps
them). On a few dozen labelled rows of a model whose probabilities reach nearer 0 and 1 than
the rows can resolve (naive Bayes), a labelled row given less than the row bound for its own
class shows that confidence is misplaced, while the map's prior on the scale (worth 5 rows,
mode 1) holds the slope near the model's own and the floor flattens the most confident rows.
There the probabilities returned are those of ``CalibrationWrapper(method="auto")`` fitted on
the same held-out probabilities, choosing among the smooth maps (temperature, Platt and beta
scaling: :data:`OUTPUT_MAP_CANDIDATES`) on folds fixed by the rows (:func:`output_map_folds`),
so that the choice draws nothing at random and the Dask and Spark fits, which bring a small
set's rows, make the in-memory choice. The prior estimate keeps ``BiasCorrectedScaling``. Measured in
docs/evidence/prior_shift_log.md, "Before adapt on small labelled sets".

Since 5 December 2026 the same map also serves two more cases — a naive Bayes whose
held-out probabilities are mostly exactly 0 or 1 (``"saturated"``), and every small set of more
than two classes (``"more classes"``) — and a coarse grid of probabilities (a forest's) kept by
the likelihood-ratio test gives way to the map where the map sharpens it by a scale of at
least :data:`GRID_SHARPEN_SCALE` (:func:`under_confident_grid`). Measured in
docs/evidence/prior_shift_log.md, the section on the sharpening grid before adapt
(benchmarks/hunt23_sweep.py).

Also since 5 December 2026 the model's own probabilities kept by the test give way
to the map where the map softens them (scale below 1) and the labelled rows carry at least
:data:`INFORMED_ROWS` rows' worth of information on the map's intercept
(:func:`informed_softening`). Measured in docs/evidence/prior_shift_log.md, the section on softening
informed maps before adapt.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin

from .shift._calibration import _floor

__all__ = ["GRID_SHARPEN_SCALE", "INFORMED_ROWS", "OUTPUT_MAP_CANDIDATES",
           "OUTPUT_MAP_MAX_ROWS", "RESOLUTION_POWER", "SATURATED_SHARE",
           "contradicted_confidence", "fit_output_map", "informed_softening",
           "intercept_information", "output_map_folds", "under_confident_grid"]

#: The rule applies up to this many held-out rows (counted as for the map's prior on the scale,
#: worth 5 rows: at least 5 % of the rows here). Measured on 20-600 rows (docs/prior_shift.md,
#: "Before adapt on small labelled sets"): at 150 rows of benchmarks/hunt23_sweep.py's sets it
#: raised the geometric mean (0.8386 -> 0.8411 over the sigmoid), at 20-100 it lowered it.
OUTPUT_MAP_MAX_ROWS = 100

#: The rule needs the model to resolve probabilities below ``b ** RESOLUTION_POWER``, ``b`` the
#: row bound (log-odds beyond twice the bound's). With ``b`` itself, on
#: benchmarks/shift_calibration_tiny.py's 457 frozen draws (20 / 40 / 100 rows) 14 cells of
#: logistic regression and boosting changed and 13 got worse (penguins' boosting on 20 rows
#: 0.82 -> 0.94x the sigmoid; their geometric means 0.9303 -> 0.9325 and 0.9990 -> 1.0027), while
#: every one of them had its smallest probability above ``b ** 1.82``; naive Bayes reaches far
#: below (``b ** 2`` to ``b ** 110``). Measured in docs/evidence/prior_shift_log.md, "Before adapt on small
#: labelled sets".
RESOLUTION_POWER = 2.0

#: Share of the held-out rows (by weight) with a probability of exactly 0 or 1 from which a
#: model that resolves beyond the row bound (naive Bayes) counts as saturated: its
#: probabilities have underflowed for most rows, the held-out log-odds are mostly the two
#: clipped values, and the map chosen by folds (Platt or beta scaling, mostly) replaces the
#: map with its scale held toward the model's own confidence. Measured with
#: benchmarks/hunt23_sweep.py (docs/evidence/prior_shift_log.md, the section on the sharpening
#: grid before adapt): AER's NMES1988, naive Bayes cross-fitted on 40 rows, 1.31 -> 1.00x
#: scikit-learn's sigmoid; 0.3 and 0.5 changed the same cells there, 0.7 fewer.
SATURATED_SHARE = 0.5

#: The map's scale (its prior, worth 5 rows, holding it toward 1) from which a model whose
#: held-out probabilities lie on a coarse grid (a forest's or a nearest-neighbour vote's,
#: exact 0 and 1 included) is taken as less confident than its rows: the map then predicts
#: where the likelihood-ratio test would keep the model's own (floored) probabilities
#: (:func:`under_confident_grid`). Measured on frozen forests and 15-neighbour votes of 20-100
#: labelled rows (docs/evidence/prior_shift_log.md, the section on the sharpening grid before
#: adapt): with scale
#: 1.3 and above the map gave 0.87-0.96x the kept probabilities' test log loss in every band of
#: the test's p-value, below 1.3 about 1.0x (up to 2.1x); 1.2 let a forest's worst draw rise
#: (1.24 -> 1.34x the sigmoid), 1.5 left most of the gain.
GRID_SHARPEN_SCALE = 1.3

#: Rows' worth of information on the map's intercept — the labelled rows' sum of
#: ``w q (1 - q)``, ``q`` the map's probabilities, weights read as rows (the Fisher information
#: of a logistic intercept; its standard error is at most ``1 / sqrt(2)`` on the log-odds here)
#: — from which a map that softens the model's probabilities replaces them where the
#: likelihood-ratio test kept them (:func:`informed_softening`). A calibrated, confident model on
#: 20 rows (tests/test_prior_shift_safety.py: breast cancer, logistic regression) gives 0.46-1.35
#: there, and the map on those draws up to 2.07x the model's own test log loss; AER's foodstamp
#: (frozen logistic regression, 40 rows) gives 3.7 and the map 1.35 -> 1.00x scikit-learn's
#: sigmoid. Chosen on hunt23_sweep.py's sets and shift_calibration_tiny.py's tasks (1.5 and 2
#: measured alike, 3 kept fewer of the gains), checked on hunt24 and hunt26 sets not used for it
#: (docs/evidence/prior_shift_log.md, the section on softening informed maps before adapt).
INFORMED_ROWS = 2.0

#: The maps the output is chosen from: the smooth ones (one, two and three parameters on the
#: log-odds). The step maps ``auto`` also scores where each class has 30 rows (histogram
#: binning, isotonic regression, Venn-Abers) are left out: on scikit-learn's breast cancer with
#: naive Bayes, 100 labelled rows (tests/test_prior_shift_tiny_tail.py's third draw), binning won
#: the folds in 6 of 100 random fold draws and then gave 1.18x the flat floor's test log loss
#: (temperature scaling, chosen in 93: 0.78x). Measured in docs/evidence/prior_shift_log.md, "Before adapt
#: on small labelled sets".
OUTPUT_MAP_CANDIDATES = ("temperature", "platt", "beta")

#: Folds that score the candidates (fewer where the smaller class has fewer rows, at least 2).
OUTPUT_MAP_FOLDS = 5


class _GivenProbabilities(ClassifierMixin, BaseEstimator):
    """A fitted "model" whose ``predict_proba`` returns its input: held-out probabilities
    handed to :class:`probwrap.CalibrationWrapper` as a frozen model's outputs."""

    def __init__(self, n_classes: int = 2) -> None:
        self.n_classes = n_classes

    def fit(self, X: Any = None, y: Any = None) -> _GivenProbabilities:
        self.classes_ = np.arange(self.n_classes)
        return self

    def predict_proba(self, X: Any) -> np.ndarray:
        return np.asarray(X, dtype=float)


def contradicted_confidence(proba: np.ndarray, y_idx: np.ndarray, w: np.ndarray) -> str | None:
    """Why the output map should be chosen by folds, or None.

    Two classes, at most :data:`OUTPUT_MAP_MAX_ROWS` (100) held-out
    rows (weights read as row frequencies, or Kish's effective size, as for the map's prior),
    and probabilities far nearer 0 or 1 than the rows resolve: some held-out probability above
    0 lies below the square of the row bound ``b = 1 / (4 (N + 1))`` (``b`` is half the map's
    output floor, :func:`heldout_clip`'s bound; a forest's grid of multiples of
    ``1 / n_trees`` does not reach it, and its exact 0 is its resolution; a logistic regression
    or boosting whose probabilities pass ``b`` but not ``b ** 2`` was measured worse with the
    map: :data:`RESOLUTION_POWER`). Then ``"confident miss"`` where a labelled row of weight > 0 got less than that bound for
    its own class (but none exactly 0: underflowed probabilities), or ``"saturated"`` where
    at least :data:`SATURATED_SHARE` of the rows (by weight) have a probability of exactly 0
    or 1 (underflowed for most rows: the log-odds carry little more than the class).

    More than two classes on at most 100 rows: always (``"more classes"``), whatever the
    probabilities. On 345 draws of twelve multiclass sets (20, 40 and 100 labelled rows;
    logistic regression, forest, naive Bayes; frozen or cross-fitted) the map chosen by folds
    lowered the test log loss over scikit-learn's sigmoid in geometric mean, in the worst
    draw and in the count of draws above 1.10x (docs/evidence/prior_shift_log.md, the section on
    the sharpening grid before adapt).
    """
    from .calibration._base import count_weights

    p = np.asarray(proba, dtype=float)
    if p.ndim != 2 or p.shape[1] < 2:
        return None
    w = np.asarray(w, dtype=float)
    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    if not 0.0 < n_rows <= OUTPUT_MAP_MAX_ROWS:
        return None
    if p.shape[1] > 2:
        # more classes: the map chosen by folds on every small set (measured; docstring)
        return "more classes"
    keep = w > 0
    bound = 0.5 * _floor(n_rows, 2)
    positive = p[keep][p[keep] > 0]
    if not (positive.size and float(positive.min()) < bound ** RESOLUTION_POWER):
        return None
    own = p[np.flatnonzero(keep), np.asarray(y_idx)[keep]]
    if own.size and 0.0 < float(own.min()) < bound:
        # (a row at exactly 0 for its own class: the probabilities have underflowed, and the
        # maps chosen by folds see no order among them; measured worse, docs/prior_shift.md)
        return "confident miss"
    exact = np.any((p[keep] == 0.0) | (p[keep] == 1.0), axis=1)
    if float(np.sum(w[keep] * exact)) >= SATURATED_SHARE * float(np.sum(w[keep])):
        # most rows underflowed to exactly 0 or 1: the log-odds are two clipped values for
        # most rows, and the scale's prior (toward the model's own, infinite, confidence)
        # holds the map near them (SATURATED_SHARE)
        return "saturated"
    # (the model's own probabilities kept by the likelihood-ratio test while the map's scale is
    # below 1: the map chosen by folds there always breaks the guarantee for calibrated models
    # on 20 rows, tests/test_prior_shift_safety.py; the map predicts there only where the rows
    # tie its intercept, informed_softening; docs/prior_shift.md)
    return None


def under_confident_grid(proba: np.ndarray, w: np.ndarray, scale: float) -> bool:
    """Whether the model's own probabilities, kept by the likelihood-ratio test, should give
    way to the map: two classes, at most :data:`OUTPUT_MAP_MAX_ROWS` held-out rows (counted as
    in :func:`contradicted_confidence`), probabilities on a coarse grid — some exactly 0 or 1,
    none above 0 below the row bound ``b = 1 / (4 (N + 1))`` (a forest's multiples of
    ``1 / n_trees``, a nearest-neighbour vote) — and the map's scale at least
    :data:`GRID_SHARPEN_SCALE` although its prior holds it toward 1: the floored grid is
    less confident than the labelled rows say. Measured in docs/evidence/prior_shift_log.md, the
    section on the sharpening grid before adapt (DAAG's ais, a frozen forest on 40 rows: 1.42 ->
    0.85x
    scikit-learn's sigmoid)."""
    from .calibration._base import count_weights

    p = np.asarray(proba, dtype=float)
    if p.ndim != 2 or p.shape[1] != 2 or not float(scale) >= GRID_SHARPEN_SCALE:
        return False
    w = np.asarray(w, dtype=float)
    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    if not 0.0 < n_rows <= OUTPUT_MAP_MAX_ROWS:
        return False
    q = p[w > 0]
    positive = q[q > 0]
    return bool(np.any((q == 0.0) | (q == 1.0)) and positive.size
                and float(positive.min()) >= 0.5 * _floor(n_rows, 2))


def intercept_information(calibrated: np.ndarray, w: np.ndarray) -> float:
    """Rows' worth of information on a two-class map's intercept: ``N * sum(w q (1 - q)) /
    sum(w)`` over the rows of weight > 0, ``q`` the map's probability of the second class and
    ``N`` the rows counted as for the map's prior (weights read as row frequencies, or, where
    they sum to fewer than the rows, Kish's effective size: then their scale does not matter;
    docs/weights.md). For unit weights it is
    the Fisher information of the intercept of a logistic model at ``q`` (McCullagh and Nelder
    1989, chapter 4: ``sum q (1 - q)``; from memory)."""
    from .calibration._base import count_weights

    q = np.asarray(calibrated, dtype=float)[:, -1]
    w = np.asarray(w, dtype=float)
    keep = w > 0
    total = float(np.sum(w[keep]))
    if not total > 0.0:
        return 0.0
    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    return n_rows * float(np.sum(w[keep] * q[keep] * (1.0 - q[keep]))) / total


def informed_softening(proba: np.ndarray, w: np.ndarray, calibrator: Any) -> bool:
    """Whether the model's own probabilities, kept by the likelihood-ratio test, should give
    way to the map because the map softens them and the rows can tell: two classes, at most
    :data:`OUTPUT_MAP_MAX_ROWS` held-out rows (counted as in :func:`contradicted_confidence`),
    the map's scale below 1, and at least :data:`INFORMED_ROWS` rows' worth of information on
    its intercept (:func:`intercept_information` of the map's probabilities of the held-out
    rows). A confident model right on few rows (its probabilities near 0 and 1, ``q (1 - q)``
    small) leaves the map's intercept loosely tied and is kept, as the test said; a model
    whose probabilities the rows resolve (a weak logistic regression on 40 rows) is softened.
    Measured in docs/evidence/prior_shift_log.md, the section on softening informed maps
    before adapt."""
    from .calibration._base import count_weights

    p = np.asarray(proba, dtype=float)
    if p.ndim != 2 or p.shape[1] != 2:
        return False
    if not float(np.ravel(calibrator.scale_)[0]) < 1.0:
        return False
    w = np.asarray(w, dtype=float)
    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    if not 0.0 < n_rows <= OUTPUT_MAP_MAX_ROWS:
        return False
    return intercept_information(calibrator.predict(p), w) >= INFORMED_ROWS


def output_map_folds(proba: np.ndarray, y_idx: np.ndarray, w: np.ndarray) -> list:
    """Stratified folds fixed by the rows themselves, as ``(train, test)`` index pairs.

    The rows of each class are ordered by their log-odds (then by weight) and dealt to the
    folds in turn (systematic sampling: every fold holds a spread of scores of each class).
    No random draw: the in-memory, Dask and Spark fits of the same rows — in any order — get
    the same folds up to rows that are identical in score, class and weight (interchangeable),
    whatever ``random_state`` is. With random folds the chosen map changed from one fit to the
    next (breast cancer, naive Bayes, 60 rows: Platt scaling in one fit and temperature scaling
    in the next, test probabilities 0.075 against 0.011).
    """
    p = np.asarray(proba, dtype=float)
    y = np.asarray(y_idx)
    w = np.asarray(w, dtype=float)
    with np.errstate(divide="ignore"):
        if p.shape[1] == 2:
            score = np.log(p[:, 1]) - np.log(p[:, 0])
        else:  # more classes: each row's log-probability of its own class
            score = np.log(p[np.arange(y.shape[0]), y])
    counts = np.bincount(y[w > 0], minlength=p.shape[1])
    n_splits = int(min(OUTPUT_MAP_FOLDS, max(2, counts[counts > 0].min())))
    fold = np.empty(y.shape[0], dtype=int)
    for k in np.unique(y):
        rows = np.flatnonzero(y == k)
        order = rows[np.lexsort((w[rows], score[rows]))]
        fold[order] = np.arange(order.shape[0]) % n_splits
    everything = np.arange(y.shape[0])
    return [(everything[fold != f], everything[fold == f]) for f in range(n_splits)]


def fit_output_map(proba: np.ndarray, y_idx: np.ndarray, w: np.ndarray | None,
                   random_state: Any, owner: str) -> Any:
    """``CalibrationWrapper(method="auto")`` over the smooth maps
    (:data:`OUTPUT_MAP_CANDIDATES`) on the folds of :func:`output_map_folds`, fitted on
    held-out probabilities (a frozen "model" returning them), with ``w`` as its
    ``sample_weight`` (None: unweighted). The choice draws nothing at random
    (``random_state`` is passed on for the wrapper's record only). Its warnings are passed on,
    named as the output calibration of ``owner``; a ``WeightScaleWarning`` is left to
    ``owner``, which says the same about the same weights."""
    from sklearn.frozen import FrozenEstimator

    from ._calibration_wrapper import CalibrationWrapper
    from .calibration import WeightScaleWarning

    p = np.asarray(proba, dtype=float)
    y = np.asarray(y_idx)
    folds = output_map_folds(p, y, np.ones(y.shape[0]) if w is None else w)
    model = FrozenEstimator(_GivenProbabilities(p.shape[1]).fit())
    cw = CalibrationWrapper(model, method="auto", cv=folds, candidates=OUTPUT_MAP_CANDIDATES,
                            random_state=random_state)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if w is None:
            cw.fit(p, y)
        else:
            cw.fit(p, y, sample_weight=w)
    for item in caught:
        if issubclass(item.category, (WeightScaleWarning, DeprecationWarning)):
            continue
        warnings.warn(f"{owner} (its output calibration, chosen by folds): {item.message}",
                      item.category, stacklevel=4)
    return cw
