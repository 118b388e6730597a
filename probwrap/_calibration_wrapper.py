"""CalibrationWrapper: calibrated probabilities for any classifier, fitted on held-out data."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
from scipy.special import logsumexp
from sklearn.base import clone
from sklearn.model_selection import StratifiedKFold
from sklearn.utils.metaestimators import available_if
from sklearn.utils.validation import check_is_fitted

from ._heldout import HeldOutClassifierBase, HeldOutPredictions, _is_dask, _multiclass_dask
from .calibration._base import CalibrationMap
from .calibration._beta import BetaMap
from .calibration._binning import BinningMap
from .calibration._isotonic import IsotonicMap
from .calibration._logodds import DEFAULT_CLIP
from .calibration._platt import PlattMap
from .calibration._temperature import TemperatureMap
from .calibration._vector_scaling import MatrixScalingMap, VectorScalingMap
from .calibration._venn_abers import VennAbersMap

__all__ = ["CalibrationWrapper", "CALIBRATION_METHODS"]

#: Method names accepted by ``CalibrationWrapper(method=...)`` and the maps they stand for.
CALIBRATION_METHODS: dict[str, type[CalibrationMap]] = {
    "temperature": TemperatureMap,
    "platt": PlattMap,
    "beta": BetaMap,
    "binning": BinningMap,
    "isotonic": IsotonicMap,
    "venn_abers": VennAbersMap,
    "vector_scaling": VectorScalingMap,
    "matrix_scaling": MatrixScalingMap,
}

#: Candidates of ``method="auto"`` that compete only for multiclass models: on binary log-odds
#: vector scaling is Platt scaling with a shrunken intercept.
_AUTO_MULTICLASS_ONLY = ("vector_scaling",)

#: Methods that ``method="auto"`` leaves out unless named in ``candidates``: matrix scaling has
#: k^2 + k - 1 parameters and needs many rows per class.
_AUTO_EXCLUDED_BY_DEFAULT = ("matrix_scaling",)

#: ``method="auto"`` leaves Venn-Abers out of its default candidates above this many rows.
_VENN_ABERS_AUTO_MAX_ROWS = 20_000

#: Maps that use only the order of the scores: they get full-resolution scores.
_ORDER_BASED = (IsotonicMap, BinningMap, VennAbersMap)

#: Exact zero probabilities become this (the smallest positive float) before taking logs.
_TINY = np.nextafter(0.0, 1.0)

#: Probabilities are floored at this value when scoring candidate maps by log loss, so that a map
#: that predicts an exact 0 for an event that happens is heavily penalised but stays finite.
_LOG_LOSS_FLOOR = 1e-15


def _uses_interval(self: CalibrationWrapper) -> bool:
    method = getattr(self, "method_", self.method)
    return method == "venn_abers" or isinstance(self.method, VennAbersMap)


class CalibrationWrapper(HeldOutClassifierBase):
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
        maps, see :class:`~probwrap.calibration.VectorScalingMap`), a map instance (cloned
        before fitting), or ``"auto"``. ``"auto"`` scores
        every candidate map by cross-validated log loss on the held-out predictions and keeps the
        simplest map whose loss is within one standard error (of the paired per-row difference)
        of the best one, so a richer map must win by more than its cross-validation noise.
    cv : int, splitter or iterable of (train, test) pairs, default=5
        Folds for cross-fitting (stratified and shuffled when an int). With a frozen estimator
        only ``"auto"`` uses it, to score the candidate maps.
    n_jobs : int, default=None
        Parallel jobs for cross-fitting (joblib).
    random_state : int, RandomState or None, default=None
        Shuffling of the folds.
    candidates : sequence of str, default=None
        Maps that ``"auto"`` chooses from. Default: all methods except matrix scaling (which
        needs many rows per class), with vector scaling for multiclass models only (on binary
        log-odds it is Platt scaling); Venn–Abers is left out above 20,000 held-out rows, where
        it agrees with isotonic regression to within about 1/n but costs far more to
        cross-validate.
    clip : float, default=1e-12
        Only for the parametric maps (Platt, beta, temperature) fitted on ``predict_proba``
        output: log-odds are clipped to ``±logit(1 - clip)`` (about ±27.6 by default, log-
        probabilities floored at ``log(clip)``), so that a few extreme and confidently wrong rows
        cannot dominate the fit. Order-based maps (isotonic, binning, Venn–Abers) always see the
        full-resolution log-odds ``log p1 - log p0``, which keep the order of probabilities deep
        in the tails; exact zeros become the smallest positive float.
    tally_resolution : float, default=1e-3
        Dask input only: bin width on the log-odds scale of the score tallies that the
        predictions are reduced to (see :mod:`probwrap.scale`); ignored for in-memory input.

    Attributes
    ----------
    estimator_ : classifier
        The fitted inner estimator used for prediction.
    calibrator_ : CalibrationMap or list of CalibrationMap
        The fitted map (a list with one binary map per class for one-vs-rest).
    method_ : str
        Name of the map in use.
    method_scores_ : dict
        ``"auto"`` only: cross-validated log loss of every candidate, with its standard error
        relative to the best as ``method_scores_[name] = (loss, se)``.
    response_ : str
        Which output of the estimator was calibrated (``"predict_proba"`` or
        ``"decision_function"``).
    classes_ : ndarray
        Class labels.

    Examples
    --------
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
        clip: float = DEFAULT_CLIP,
        tally_resolution: float = 1e-3,
    ) -> None:
        self.estimator = estimator
        self.method = method
        self.cv = cv
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.candidates = candidates
        self.clip = clip
        self.tally_resolution = tally_resolution

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
        self._check_method()
        if _multiclass_dask(self.estimator, X, y, sample_weight):
            return self._fit_multiclass_dask(X, y, sample_weight)
        ho = self._fit_heldout(X, y, sample_weight, fit_params)
        self.response_ = ho.response
        scores = self._to_scores(ho.values)
        if isinstance(self.method, CalibrationMap):
            self.method_ = type(self.method).__name__
            template = self.method
        elif self.method == "auto":
            self.method_, self.method_scores_ = self._choose(ho, scores)
            template = CALIBRATION_METHODS[self.method_]()
        else:
            self.method_ = self.method
            template = CALIBRATION_METHODS[self.method]()
        self.calibrator_ = self._fit_map(template, scores, ho.y_index, ho.sample_weight)
        return self

    def _fit_multiclass_dask(self, X: Any, y: Any, sample_weight: Any) -> CalibrationWrapper:
        """Multiclass Dask rows with a frozen estimator: temperature scaling by reductions over
        the score blocks, binary maps one-vs-rest from per-class score tallies."""
        from .scale._multiclass import fit_multiclass_calibration

        if isinstance(self.method, CalibrationMap):
            self.method_ = type(self.method).__name__
            template = self.method
        elif self.method == "auto":
            raise ValueError(
                "method='auto' is not supported for multiclass Dask input; name the method."
            )
        else:
            self.method_ = self.method
            template = CALIBRATION_METHODS[self.method]()
        self.calibrator_ = fit_multiclass_calibration(self, X, y, sample_weight, template)
        return self

    def _check_method(self) -> None:
        if isinstance(self.method, CalibrationMap):
            return
        valid = (*CALIBRATION_METHODS, "auto")
        if not isinstance(self.method, str) or self.method not in valid:
            raise ValueError(
                f"`method` must be one of {valid} or a CalibrationMap instance; got "
                f"{self.method!r}."
            )
        if self.method == "auto":
            self._candidate_names()
        if not (isinstance(self.clip, numbers.Real) and 0.0 < self.clip < 0.5):
            raise ValueError(f"`clip` must be a float in (0, 0.5); got {self.clip!r}.")

    def _candidate_names(self) -> list[str]:
        names = list(CALIBRATION_METHODS) if self.candidates is None else list(self.candidates)
        unknown = [c for c in names if c not in CALIBRATION_METHODS]
        if unknown or not names:
            raise ValueError(
                f"`candidates` must be a non-empty list drawn from {tuple(CALIBRATION_METHODS)}; "
                f"got {self.candidates!r}."
            )
        return names

    # -- scores ------------------------------------------------------------------------------
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
        out = np.empty_like(scores)
        for k in range(scores.shape[1]):
            out[:, k] = scores[:, k] - logsumexp(np.delete(scores, k, axis=1), axis=1)
        return out

    def _map_input(self, cal: CalibrationMap, scores: np.ndarray) -> np.ndarray:
        """What a map sees: order-based maps the full-resolution scores; parametric maps, for
        probability outputs, log-odds clipped to ``±logit(1 - clip)`` (log-probabilities floored
        at ``log(clip)``) so that a few extreme, confidently wrong rows cannot dominate the fit.
        """
        if self.response_ == "decision_function" or isinstance(cal, _ORDER_BASED):
            return scores
        if scores.ndim == 1:
            bound = np.log1p(-self.clip) - np.log(self.clip)
            return np.clip(scores, -bound, bound)
        return np.maximum(scores, np.log(self.clip))

    # -- maps ----------------------------------------------------------------------------------
    def _fit_map(self, template: CalibrationMap, scores, y_index, w):
        if scores.ndim == 1:
            return clone(template).fit(self._map_input(template, scores), y_index, sample_weight=w)
        if template.supports_multiclass:
            return clone(template).fit(
                self._map_input(template, scores), np.asarray(y_index), sample_weight=w
            )
        ovr = self._one_vs_rest_scores(scores)
        maps = []
        for k in range(scores.shape[1]):
            yk = (y_index == k).astype(int)
            wk_pos = w[yk == 1].sum()
            if wk_pos == 0 or wk_pos == w.sum():
                # This class is absent from (or alone in) the held-out rows: no binary map can be
                # fitted; its calibrated probability is the share it has there (0 or 1).
                maps.append(float(wk_pos > 0))
                continue
            maps.append(
                clone(template).fit(self._map_input(template, ovr[:, k]), yk, sample_weight=w)
            )
        if any(isinstance(m, float) for m in maps):
            warnings.warn(
                "Some classes have no held-out rows; their calibrated probability is set to 0.",
                UserWarning,
                stacklevel=3,
            )
        return maps

    def _apply_map(self, calibrator, scores: np.ndarray) -> np.ndarray:
        if scores.ndim == 1:
            q = calibrator.predict(self._map_input(calibrator, scores))
            return np.column_stack([1.0 - q, q])
        if not isinstance(calibrator, list):
            return calibrator.predict(self._map_input(calibrator, scores))
        ovr = self._one_vs_rest_scores(scores)
        cols = [
            np.full(scores.shape[0], m)
            if isinstance(m, float)
            else m.predict(self._map_input(m, ovr[:, k]))
            for k, m in enumerate(calibrator)
        ]
        q = np.column_stack(cols)
        total = q.sum(axis=1, keepdims=True)
        uniform = np.full_like(q, 1.0 / q.shape[1])
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(total > 0, q / np.where(total > 0, total, 1.0), uniform)

    # -- automatic choice ----------------------------------------------------------------------
    def _selection_folds(self, ho: HeldOutPredictions, scores: np.ndarray) -> np.ndarray:
        if ho.n_folds >= 2:
            return ho.fold
        y = ho.y_index
        cv = self.cv if self.cv is not None else 5
        if isinstance(cv, numbers.Integral):
            counts = np.bincount(y)
            n_splits = int(min(cv, max(2, counts[counts > 0].min())))
            splitter = StratifiedKFold(n_splits, shuffle=True, random_state=self.random_state)
        else:
            splitter = self._make_splitter(y)
        fold = np.full(y.shape[0], -1)
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message="The least populated class")
            for i, (_, test) in enumerate(splitter.split(np.zeros((y.shape[0], 1)), y)):
                fold[test] = i
        if np.any(fold < 0):
            raise ValueError("`cv` must partition the rows to score the candidate maps.")
        return fold

    def _choose(self, ho: HeldOutPredictions, scores: np.ndarray):
        names = self._candidate_names()
        if self.candidates is None:
            names = [n for n in names if n not in _AUTO_EXCLUDED_BY_DEFAULT]
            if scores.ndim == 1:
                names = [n for n in names if n not in _AUTO_MULTICLASS_ONLY]
        if self.candidates is None and ho.y_index.shape[0] > _VENN_ABERS_AUTO_MAX_ROWS:
            # Beyond this size the Venn-Abers interval is narrower than 1/n and its merged
            # probability coincides with isotonic regression to that order, while its fit costs
            # far more; by default it is not among the candidates then (pass `candidates` to
            # include it anyway).
            names = [n for n in names if n != "venn_abers"]
        fold = self._selection_folds(ho, scores)
        y, w = ho.y_index, ho.sample_weight
        losses: dict[str, np.ndarray] = {}
        for name in names:
            per_row = np.empty(y.shape[0])
            ok = True
            for f in np.unique(fold):
                test = fold == f
                train = ~test
                try:
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        cal = self._fit_map(CALIBRATION_METHODS[name](), scores[train], y[train], w[train])
                except ValueError:
                    # e.g. a training part with one class only: this candidate cannot be scored.
                    ok = False
                    break
                q = self._apply_map(cal, scores[test])
                per_row[test] = -np.log(np.maximum(q[np.arange(q.shape[0]), y[test]], _LOG_LOSS_FLOOR))
            if ok:
                losses[name] = per_row
        if not losses:
            raise ValueError(
                "No candidate map could be scored by cross-validation on the held-out "
                "predictions; every fold needs both classes. Pass an explicit `method`."
            )
        total_w = w.sum()
        means = {name: float(np.dot(w, loss) / total_w) for name, loss in losses.items()}
        best = min(means, key=means.get)
        scores_out: dict[str, tuple[float, float]] = {}
        for name, loss in losses.items():
            d = loss - losses[best]
            dbar = np.dot(w, d) / total_w
            # weights count as row frequencies (weight 2 == two rows)
            var = np.dot(w, (d - dbar) ** 2) / max(total_w - 1.0, 1.0)
            scores_out[name] = (means[name], float(np.sqrt(var / total_w)))
        order = sorted(losses, key=lambda nm: (CALIBRATION_METHODS[nm]().complexity, names.index(nm)))
        for name in order:
            loss, se = scores_out[name]
            if loss - means[best] <= se:
                return name, scores_out
        return best, scores_out  # pragma: no cover - the best always qualifies

    # -- prediction ----------------------------------------------------------------------------
    def _calibrated(self, X: Any) -> np.ndarray:
        check_is_fitted(self, "calibrator_")
        values = self._inner_output(X, self.response_)
        return self._apply_map(self.calibrator_, self._to_scores(values))

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
        check_is_fitted(self, "calibrator_")
        scores = self._to_scores(self._inner_output(X, self.response_))
        if scores.ndim == 1:
            return self.calibrator_.predict_interval(scores)
        ovr = self._one_vs_rest_scores(scores)
        out = np.empty((scores.shape[0], scores.shape[1], 2))
        for k, m in enumerate(self.calibrator_):
            out[:, k, :] = m if isinstance(m, float) else m.predict_interval(ovr[:, k])
        return out
