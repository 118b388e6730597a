"""One object that learns from labelled held-out posteriors and estimates priors of new rows."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
from scipy.special import expit
from sklearn.utils import check_random_state

from .._validation import check_labels, check_proba, check_same_length, check_sample_weight, plain
from ..calibration._logodds import proba_to_log_proba
from ._calibration import BiasCorrectedScaling, _log_softmax
from ._confusion import _simplex_least_squares, acc_prior, bbse_prior, heldout_confusion
from ._estimate import BoundaryPriorWarning, PriorEstimate, _solve_prior, _warn_empty_columns
from ._interval import bca_interval, score_interval
from ._shift_tests import (
    _mean_cov,
    _score_rows,
    _score_stat_moments,
    _source_moments,
    null_harm_scale,
)

__all__ = ["PriorEstimator", "PRIOR_METHODS", "CALIBRATIONS", "INTERVALS", "prior_by_batch"]

PRIOR_METHODS = ("em", "bbse", "bbse_soft", "acc", "pacc")
CALIBRATIONS = ("bcts", "vector", None)
INTERVALS = ("score", "bca", "percentile")

#: Fewer effective unlabelled rows than this draws a warning (common practice: 30 rows).
FEW_ROWS = 30
#: Groups of rows left out per sample by the grouped jackknife behind the BCa acceleration.
JACKKNIFE_GROUPS = 10


def _softmax(z: np.ndarray, scale: np.ndarray, bias: np.ndarray) -> np.ndarray:
    """``softmax(z * scale + bias)`` row-wise; for two columns one logistic function."""
    if z.shape[1] == 2:
        p1 = expit(z[:, 1] * scale[1] - z[:, 0] * scale[0] + (bias[1] - bias[0]))
        return np.column_stack([1.0 - p1, p1])
    return np.exp(_log_softmax(z * scale + bias, axis=1))


def _kish(w: np.ndarray) -> float:
    return float(w.sum() ** 2 / np.dot(w, w))


class PriorEstimator:
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
        The interval is always built around the maximum-likelihood estimate.
    interval : {"score", "bca", "percentile"}, default="score"
        ``"score"``: for two classes, the inverted two-sample score test
        (:func:`score_interval`; no resampling, both samples' error included, honest at the
        edges); for more classes it falls back to ``"bca"``. ``"bca"``: bias-corrected and
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
        self, proba: Any, y: Any, sample_weight: Any = None, *, effective_rows: float | None = None
    ) -> PriorEstimator:
        """Learn from held-out posteriors ``proba`` (n, k) and class indices ``y`` in 0..k-1.

        ``effective_rows`` overrides Kish's effective number of labelled rows (for rows that
        are bins of a tally, whose weights are counts of many rows).
        """
        self._check_params()
        p = check_proba(proba, name="proba", ndim=2)
        k = p.shape[1]
        check_same_length(("proba", p), ("y", y))
        y_idx, _ = check_labels(y, name="y", classes=np.arange(k), min_classes=1)
        w = check_sample_weight(sample_weight, p.shape[0])
        counts = np.bincount(y_idx, weights=w, minlength=k)
        if np.any(counts <= 0):
            raise ValueError(
                f"`y` has no (positively weighted) rows of class index(es) "
                f"{np.flatnonzero(counts <= 0).tolist()}; every class needs held-out rows to "
                "estimate its prior."
            )
        self._src = (p.copy(), np.asarray(y_idx, dtype=int), w)
        self._src_rows = None  # rows behind each entry of _src (None: one row each)
        self._boot = None
        self.n_classes_ = k
        self.n_source_effective_ = float(effective_rows) if effective_rows else _kish(w)
        summary = self._summarise(p, y_idx, w)
        self.calibrator_, self.source_prior_, self.confusion_, self.soft_confusion_ = summary
        # mean and covariance of the labelled rows' scores, for the two-sample shift test
        self._source_score = _source_moments(
            _score_rows(self.calibrate(p), self.source_prior_), w, self._src[1],
            self.source_prior_, effective_rows,
        )
        return self

    def _summarise(
        self, p: np.ndarray, y_idx: np.ndarray, w: np.ndarray, warm_start: Any = None
    ) -> tuple:
        k = p.shape[1]
        cal = None
        if self.calibration is not None:
            kind = "temperature" if self.calibration == "bcts" else "vector"
            cal = BiasCorrectedScaling(kind=kind).fit_log_proba(
                proba_to_log_proba(p), y_idx, w, warm_start=warm_start
            )
            p = cal.predict(p)
        prior = np.bincount(y_idx, weights=w, minlength=k) / w.sum()
        hard = heldout_confusion(p, y_idx, sample_weight=w)
        soft = heldout_confusion(p, y_idx, sample_weight=w, soft=True)
        return cal, prior, hard, soft

    def calibrate(self, proba: Any) -> np.ndarray:
        """Apply the fitted calibration to posteriors of shape (n, k) (identity when none)."""
        self._check_fitted()
        p = check_proba(proba, name="proba", ndim=2)
        if p.shape[1] != self.n_classes_:
            raise ValueError(
                f"`proba` has {p.shape[1]} columns but the estimator was fitted on "
                f"{self.n_classes_} classes."
            )
        return p if self.calibrator_ is None else self.calibrator_.predict(p)

    def _check_fitted(self) -> None:
        if not hasattr(self, "source_prior_"):
            raise ValueError("This PriorEstimator is not fitted yet; call fit first.")

    def _source_rows(self) -> tuple | None:
        return getattr(self, "_src", None)

    def _source_row_counts(self) -> np.ndarray | None:
        """Rows behind each labelled entry (Kish's count of a bin; None: one row each)."""
        return getattr(self, "_src_rows", None)

    def __getstate__(self) -> dict:
        # the per-row bootstrap pieces are a cache, recomputed on demand: never pickled
        state = self.__dict__.copy()
        state["_boot"] = None
        return state

    def _condense_source(self, resolution: float, max_bins: int) -> None:
        """Replace the kept labelled rows of a binary fit by a tally of their log-odds.

        Everything :meth:`fit` derives from the rows (calibration, source prior, confusion
        matrices, the score moments of the shift test) stays as computed on every row; only the
        intervals, which re-read the labelled rows, then read bins instead: per class, the rows
        whose raw log-odds fall in one bin of width ``resolution`` (doubled until at most
        ``max_bins`` bins span the scores) become one entry with the bin's weighted mean
        probability, the bin's total weight and Kish's count of its rows (for the Poisson
        bootstrap: a bin of ``c`` unit-weight rows drawn Poisson(1) times each holds
        Poisson(``c``) rows of a resample). Exact up to the binning for unit weights.
        """
        src = self._source_rows()
        if src is None or self.n_classes_ != 2 or self._source_row_counts() is not None:
            return
        p, y, w = src
        keep = w > 0
        p, y, w = p[keep], y[keep], w[keep]
        with np.errstate(divide="ignore"):
            s = np.log(p[:, 1]) - np.log(p[:, 0])
        finite = np.isfinite(s)
        res = float(resolution)
        if finite.any():
            lo, hi = float(s[finite].min()), float(s[finite].max())
            while (hi - lo) / res + 1.0 > max_bins:
                res *= 2.0
            b = np.floor((np.where(finite, s, lo) - lo) / res).astype(np.int64) + 1
        else:
            b = np.zeros(s.shape[0], dtype=np.int64)
        b = np.where(finite, b, np.where(s > 0, max_bins + 2, 0))  # scores 0 and 1 apart
        key = b * 2 + y
        uniq, inverse = np.unique(key, return_inverse=True)
        inverse = inverse.ravel()
        m = uniq.shape[0]
        total = np.bincount(inverse, weights=w, minlength=m)
        square = np.bincount(inverse, weights=w * w, minlength=m)
        # the bin's weighted mean log-odds (scores of exactly 0 or 1 keep their own bins)
        mean = np.bincount(inverse, weights=w * np.where(finite, s, 0.0), minlength=m) / total
        edge = uniq // 2
        mean = np.where(edge == 0, -np.inf, np.where(edge == max_bins + 2, np.inf, mean))
        proba = np.column_stack([expit(-mean), expit(mean)])
        self._src = (proba, (uniq % 2).astype(int), total)
        self._src_rows = total * total / square
        self._boot = None

    # -- the pieces the bootstrap re-uses ------------------------------------------------------
    def _bootstrap_parts(self) -> dict:
        """Per-row gradients and Hessians of the calibration loss at the fitted parameters.

        A resample with row weights ``v`` moves the calibration parameters by one Newton step,
        ``-(sum v H)^-1 sum v g`` (the one-step bootstrap: asymptotically equivalent to refitting
        each resample, at the cost of two weighted sums).
        """
        parts = getattr(self, "_boot", None)
        if parts is not None:
            return parts
        sp, sy, sw = self._src
        k = self.n_classes_
        parts = {"y": sy, "w": sw, "onehot": np.eye(k)[sy]}
        cal = self.calibrator_
        if cal is None:
            parts["p"] = sp
        else:
            z = proba_to_log_proba(sp)
            n_scale = 1 if cal.kind == "temperature" else k
            p = np.exp(_log_softmax(z * cal.scale_ + cal.bias_, axis=1))
            n = z.shape[0]
            jac = np.zeros((n, k, n_scale + k - 1))
            if n_scale == 1:
                jac[:, :, 0] = z
            else:
                jac[:, np.arange(k), np.arange(k)] = z
            jac[:, np.arange(1, k), n_scale + np.arange(k - 1)] = 1.0
            resid = p - parts["onehot"]
            parts["grad"] = np.einsum("nkp,nk->np", jac, resid)
            curv = p[:, :, None] * np.eye(k)[None] - p[:, :, None] * p[:, None, :]
            parts["hess"] = np.einsum("nkp,nkl,nlq->npq", jac, curv, jac).reshape(n, -1)
            parts["z"] = z
            parts["p"] = p
            parts["n_scale"] = n_scale
        self._boot = parts
        return parts

    def _calibration_at(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
        """One-step re-estimate of the calibration's (scale, bias) under labelled weights v."""
        cal = self.calibrator_
        if cal is None:
            return None
        parts = self._bootstrap_parts()
        k, n_scale = self.n_classes_, parts["n_scale"]
        m = n_scale + k - 1
        g = v @ parts["grad"]
        h = (v @ parts["hess"]).reshape(m, m)
        try:
            step = np.linalg.solve(h + 1e-12 * max(float(np.trace(h)), 1.0) * np.eye(m), g)
        except np.linalg.LinAlgError:  # pragma: no cover - h is positive definite here
            step = np.zeros(m)
        theta = np.concatenate([cal.scale_[:n_scale], cal.bias_[1:]]) - step
        scale = np.broadcast_to(np.maximum(theta[:n_scale], 0.0), (k,)).astype(float)
        return scale, np.concatenate([[0.0], theta[n_scale:]])

    def _replicate(
        self,
        z_target: np.ndarray | None,
        p_target: np.ndarray,
        v_source: np.ndarray | None,
        v_target: np.ndarray,
        init: np.ndarray,
    ) -> np.ndarray | None:
        """The (unpenalised) estimate under labelled weights ``v_source`` and target weights.

        Returns None when a class has no labelled weight left (its prior is undefined).
        """
        k = self.n_classes_
        src, hard, soft = self.source_prior_, self.confusion_, self.soft_confusion_
        pt = p_target
        if v_source is not None:
            parts = self._bootstrap_parts()
            counts = v_source @ parts["onehot"]
            if np.any(counts <= 0):
                return None
            src = counts / counts.sum()
            params = self._calibration_at(v_source)
            ps = parts["p"]
            if params is not None:
                scale, bias = params
                pt = _softmax(z_target, scale, bias)
                if self.method != "em":
                    ps = _softmax(parts["z"], scale, bias)
            if self.method != "em":
                vn = v_source / v_source.sum()
                onehot = parts["onehot"]
                hard = (np.eye(k)[np.argmax(ps, axis=1)] * vn[:, None]).T @ onehot
                soft = (ps * vn[:, None]).T @ onehot
        if v_target.sum() <= 0:
            return None
        m = self.method
        if m == "em":
            start = init if np.all(init > 0) else src
            return _solve_prior(pt, v_target, src, start, self.tol, self.max_iter)[0]
        soft_mode = m in ("bbse_soft", "pacc")
        c = soft if soft_mode else hard
        wn = v_target / v_target.sum()
        mu = wn @ (pt if soft_mode else np.eye(k)[np.argmax(pt, axis=1)])
        if m.startswith("bbse"):
            from ._adjust import project_to_simplex

            weights = np.linalg.lstsq(c / c.sum(), mu, rcond=None)[0]
            return project_to_simplex(weights * src)
        col = c.sum(axis=0)
        if np.any(col <= 0):
            return None
        return _simplex_least_squares(c / col, mu)[0]

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
        z_t = proba_to_log_proba(target_proba) if self.calibrator_ is not None else None
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
                              n_source=n_source)
        s = m == "pacc"
        return acc_prior(p, soft if s else hard, soft=s, sample_weight=w, n_source=n_source)

    def estimate(
        self,
        proba: Any,
        sample_weight: Any = None,
        *,
        random_state: Any = None,
        effective_rows: float | None = None,
        interval: bool = True,
    ) -> PriorEstimate:
        """Estimate the class priors of unlabelled rows.

        Parameters
        ----------
        proba : array-like of shape (n, k)
            Posteriors of the unlabelled rows from the same model as the held-out ones.
        sample_weight : array-like of shape (n,), default=None
            Frequency weights of the unlabelled rows. Only their relative sizes matter:
            counts use Kish's effective sample size ``(sum w)^2 / sum w^2``.
        random_state : int, RandomState or None, default=None
            Overrides the estimator's ``random_state`` for this call.
        effective_rows : float, default=None
            Overrides Kish's effective number of unlabelled rows (for rows that are bins of a
            tally).
        interval : bool, default=True
            Whether to compute the bootstrap interval (when ``n_resamples > 0``).

        Returns
        -------
        PriorEstimate
            ``prior`` is the point estimate (for ``method="em"`` the MAP estimate shrunk toward
            the source prior by ``prior_strength``; ``ml_prior`` the plain maximum-likelihood
            one). ``interval`` is a bootstrap interval over Poisson resamples of both the
            unlabelled and the labelled rows (BCa by default), built around the unpenalised
            estimate and widened to contain ``prior``. ``shift_statistic`` and
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
        n_eff = float(effective_rows) if effective_rows else _kish(w)
        if n_eff < FEW_ROWS:
            warnings.warn(
                f"Only {n_eff:.3g} effective unlabelled rows; the prior estimate is very "
                "uncertain and its interval is wide.",
                UserWarning,
                stacklevel=2,
            )
        wk = w * (n_eff / w.sum())  # weights summing to the effective number of rows
        p = self.calibrate(p_raw)
        src = self.source_prior_
        n_src = getattr(self, "n_source_effective_", None)
        point = self._point(p, wk, src, self.confusion_, self.soft_confusion_, n_source=n_src)
        ml = None
        if self.method == "em":
            _warn_empty_columns(wk @ p, "predicted probability mass")
            ml = _solve_prior(p, wk, src, point.prior if np.all(point.prior > 0) else src,
                              float(self.tol), int(self.max_iter))[0]
            self._warn_boundary(ml, p, wk, n_eff)
        m_t, c_t, _ = _mean_cov(_score_rows(p, src), w)
        source_score = getattr(self, "_source_score", None)
        stat, pvalue = _score_stat_moments((m_t, c_t, n_eff), source_score, k)
        mean_cov = c_t / max(n_eff - 1.0, 1.0)
        if source_score is not None:
            mean_cov = mean_cov + source_score[1]
        harm_scale = null_harm_scale(p, w, src, mean_cov)
        bounds, dropped = None, 0
        if self.n_resamples > 0 and interval:
            source = self._source_rows()
            if not point.identified:
                bounds = np.column_stack([np.zeros(k), np.ones(k)])
            elif getattr(self, "interval", "score") == "score" and k == 2 and source is not None:
                (lo, hi), consistent = score_interval(
                    p, self.calibrate(source[0]), source[1], src, sample_weight=w,
                    source_sample_weight=source[2], effective_rows=n_eff,
                    source_effective_rows=n_src, confidence_level=self.confidence_level,
                    centre=float((ml if ml is not None else point.prior)[1]),
                )
                if not consistent:
                    warnings.warn(
                        "No class prior is consistent with both the labelled and the unlabelled "
                        f"rows at the {self.confidence_level:.0%} level: they differ by more "
                        "than a change of class shares explains. The prior-shift assumption "
                        "probably fails (the features of a class changed too); the interval "
                        "is the single least-rejected prior.",
                        UserWarning,
                        stacklevel=2,
                    )
                bounds = np.array([[1.0 - hi, 1.0 - lo], [lo, hi]])
                centre = ml if ml is not None else point.prior
                bounds = _widen(bounds, point.prior, centre, n_eff, self.confidence_level)
            else:
                rs = self.random_state if random_state is None else random_state
                centre = ml if ml is not None else point.prior
                bounds, dropped = self._bootstrap(p_raw, w, centre, check_random_state(rs))
                bounds = _widen(bounds, point.prior, centre, n_eff, self.confidence_level)
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
        )

    def _warn_boundary(self, ml: np.ndarray, p: np.ndarray, w: np.ndarray, n_eff: float) -> None:
        """Warn when the maximum-likelihood prior puts a class at (or next to) share 0 or 1."""
        src = self.source_prior_
        edge = np.flatnonzero((ml <= 1e-3 * src) | (ml >= 1.0 - 1e-3 * (1.0 - src)))
        if edge.size == 0:
            return
        # Information per row about the prior at the source prior (score variance), and the
        # standard error it implies for n_eff rows: weak separation shows as small information.
        q = p / src
        u = q[:, 1:] - q[:, :1]
        info = (u * (w / w.sum())[:, None]).T @ u
        try:
            cov = np.linalg.pinv(info) / max(n_eff, 1.0)
        except np.linalg.LinAlgError:  # pragma: no cover
            cov = np.full((src.shape[0] - 1,) * 2, np.inf)
        j = int(edge[0])
        # standard error of class j's share: class 0 is minus the sum of the others
        if j == 0:
            var = float(np.sum(cov))
        else:
            var = float(cov[j - 1, j - 1])
        se = float(np.sqrt(max(var, 0.0)))
        worth = src[j] * (1 - src[j]) / max(var * n_eff, 1e-300)
        why = (
            "the model separates the classes weakly" if worth < 0.25 else "there are few rows"
        )
        warnings.warn(
            f"The maximum-likelihood share of class index {j} is at the edge "
            f"({ml[j]:.4g}; source share {src[j]:.4g}): {why}. Each of the {n_eff:.4g} "
            f"effective unlabelled rows carries about {worth:.2g} of a labelled row's "
            f"information about this share, so the share is known only to about +-{1.96 * se:.2g}"
            " (95 %). The reported prior is shrunk toward the source prior (prior_strength) and "
            "the interval is wide; do not read the edge value as a finding.",
            BoundaryPriorWarning,
            stacklevel=3,
        )

    def _bootstrap(
        self,
        p_raw: np.ndarray,
        w: np.ndarray,
        centre: np.ndarray,
        rng: np.random.RandomState,
    ) -> tuple[np.ndarray, int]:
        k = self.n_classes_
        source = self._source_rows()
        B = int(self.n_resamples)
        n = p_raw.shape[0]
        resample_source = bool(self.resample_source) and source is not None
        ws = source[2] if resample_source else None
        # all resample weights drawn up front, labelled then unlabelled, so a seed fixes both
        gen = np.random.default_rng(rng.randint(2**31 - 1))
        rows = self._source_row_counts() if resample_source else None
        if rows is None:
            src_counts = gen.poisson(1.0, size=(B, ws.shape[0])) if resample_source else None
            unit = ws
        else:
            # tallied labelled rows: a bin of c rows holds Poisson(c) rows of a resample
            src_counts = gen.poisson(rows, size=(B, ws.shape[0]))
            unit = ws / rows
        tgt_counts = gen.poisson(1.0, size=(B, n))

        def draw_source(b: int) -> np.ndarray | None:
            return None if src_counts is None else src_counts[b] * unit

        def draw_target(b: int) -> np.ndarray:
            return tgt_counts[b] * w

        draws, dropped = self.replicate_draws(p_raw, draw_source, draw_target, B, centre)
        jack = None
        if self.interval == "bca" and draws.shape[0] > 0:
            jack = self._jackknife(p_raw, w, centre, ws, rng)
        bounds = _interval_from_draws(
            centre, draws, jack, self.confidence_level, dropped, B, k,
        )
        return bounds, dropped

    def _jackknife(
        self,
        p_raw: np.ndarray,
        w: np.ndarray,
        centre: np.ndarray,
        ws: np.ndarray | None,
        rng: np.random.RandomState,
    ) -> list[np.ndarray]:
        """Leave-one-group-out estimates per sample (target rows; labelled rows when resampled)."""
        out = []
        samples = [("target", w)] + ([("source", ws)] if ws is not None else [])
        for name, weights in samples:
            n = weights.shape[0]
            groups = min(JACKKNIFE_GROUPS, n)
            if groups < 2:
                continue
            label = np.empty(n, dtype=int)
            label[rng.permutation(n)] = np.arange(n) % groups
            values = []
            for g in range(groups):
                keep = np.where(label == g, 0.0, weights)
                if name == "target":
                    v_s, v_t = ws, keep
                else:
                    v_s, v_t = keep, w
                draws, _ = self.replicate_draws(
                    p_raw, lambda b, v=v_s: v, lambda b, v=v_t: v, 1, centre
                )
                if draws.shape[0] == 0:
                    break
                values.append(draws[0])
            else:
                out.append(np.asarray(values))
        return out


def _widen(
    bounds: np.ndarray, point: np.ndarray, centre: np.ndarray, n_eff: float, level: float
) -> np.ndarray:
    """Widen a bootstrap interval to contain the point estimate and a Clopper-Pearson floor.

    No estimate from ``n_eff`` unlabelled rows can know a class share better than ``n_eff``
    labelled rows would, so the interval contains the Clopper & Pearson (1934) interval of the
    unpenalised estimate on ``n_eff`` rows. This matters where the bootstrap degenerates: an
    estimate on the edge of the simplex (every resample at 0) would otherwise give [0, 0].
    """
    from ._confusion import binomial_interval

    out = bounds.copy()
    cp = binomial_interval(np.clip(centre, 0.0, 1.0), max(n_eff, 1e-9), level)
    out[:, 0] = np.minimum(np.minimum(out[:, 0], cp[:, 0]), point)
    out[:, 1] = np.maximum(np.maximum(out[:, 1], cp[:, 1]), point)
    return out


def _interval_from_draws(
    centre: np.ndarray,
    draws: np.ndarray,
    jackknife: list | None,
    confidence_level: float,
    dropped: int,
    n_resamples: int,
    k: int,
) -> np.ndarray:
    """BCa (with ``jackknife``) or bias-corrected percentile interval, with dropped-resample warnings."""
    if dropped:
        warnings.warn(
            f"{dropped} of {n_resamples} bootstrap resamples were dropped because a class had "
            "no labelled rows left in them; the interval rests on the other "
            f"{n_resamples - dropped}. Few labelled rows of some class make every estimate "
            "of its prior fragile.",
            UserWarning,
            stacklevel=4,
        )
    if draws.shape[0] == 0:
        warnings.warn(
            "Every bootstrap resample was dropped; the interval is [0, 1] for every class "
            "(nothing is known from the resamples).",
            UserWarning,
            stacklevel=4,
        )
        return np.column_stack([np.zeros(k), np.ones(k)])
    if jackknife is None:
        alpha = (1.0 - confidence_level) / 2.0
        lo, hi = np.quantile(draws, [alpha, 1.0 - alpha], axis=0)
        return np.column_stack([lo, hi])
    return bca_interval(centre, draws, jackknife or None, confidence_level=confidence_level)



def prior_by_batch(
    estimator: PriorEstimator,
    proba: Any,
    batches: Any = None,
    *,
    batch_size: int | None = None,
    sample_weight: Any = None,
) -> np.ndarray:
    """Estimate the class priors batch by batch (for example week by week).

    Parameters
    ----------
    estimator : PriorEstimator
        A fitted estimator.
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows, in arrival order.
    batches : array-like of shape (n,), default=None
        Batch label of each row (a week number, a date, a string); batches appear in the table
        in the order of their first row. Exactly one of ``batches`` and ``batch_size`` is given.
    batch_size : int, default=None
        Consecutive batches of this many rows (the last one may be shorter); labelled 0, 1, ...
    sample_weight : array-like of shape (n,), default=None

    Returns
    -------
    numpy structured array with one record per batch and fields ``batch``, ``n_rows`` (int),
    ``prior``, ``lower``, ``upper`` (float, shape (k,) each), ``shift_statistic``,
    ``shift_pvalue`` (float) and ``converged`` (bool). ``table["prior"][:, 1]`` is the series of
    positive-class prevalences of a binary problem.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=600)
    >>> y = (rng.uniform(size=600) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> est = PriorEstimator(n_resamples=20, random_state=0).fit(proba[:300], y[:300])
    >>> table = prior_by_batch(est, proba[300:], batch_size=100)
    >>> table["n_rows"].tolist(), table.dtype.names[:3]
    ([100, 100, 100], ('batch', 'n_rows', 'prior'))
    """
    estimator._check_fitted()
    p = check_proba(proba, name="proba", ndim=2)
    n, k = p.shape
    w = check_sample_weight(sample_weight, n)
    if (batches is None) == (batch_size is None):
        raise ValueError("Give exactly one of `batches` (a label per row) and `batch_size`.")
    if batch_size is not None:
        if not (isinstance(batch_size, numbers.Integral) and batch_size >= 1):
            raise ValueError(f"`batch_size` must be a positive integer; got {plain(batch_size)!r}.")
        labels = np.arange(n) // int(batch_size)
    else:
        labels = np.asarray(batches)
        if labels.ndim != 1 or labels.shape[0] != n:
            raise ValueError(
                f"`batches` must be 1-d with one label per row ({n}); got shape {labels.shape}."
            )
        if labels.dtype == object:
            labels = labels.astype(str)
    uniq, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    dtype = [
        ("batch", uniq.dtype),
        ("n_rows", np.int64),
        ("prior", float, (k,)),
        ("lower", float, (k,)),
        ("upper", float, (k,)),
        ("shift_statistic", float),
        ("shift_pvalue", float),
        ("converged", bool),
    ]
    table = np.zeros(len(uniq), dtype=dtype)
    rng = check_random_state(estimator.random_state)
    for row, b in enumerate(order):
        rows = inverse.ravel() == b
        res = estimator.estimate(p[rows], w[rows], random_state=rng.randint(2**31 - 1))
        interval = res.interval
        if interval is None:
            interval = np.column_stack([res.prior, res.prior])
        table[row] = (
            uniq[b], int(rows.sum()), res.prior, interval[:, 0], interval[:, 1],
            res.shift_statistic, res.shift_pvalue, res.converged,
        )
    return table
