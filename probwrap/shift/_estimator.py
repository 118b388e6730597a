"""One object that learns from labelled held-out posteriors and estimates priors of new rows."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
from sklearn.exceptions import ConvergenceWarning
from sklearn.utils import check_random_state

from .._validation import check_labels, check_proba, check_same_length, check_sample_weight
from ..calibration._logodds import proba_to_log_proba
from ._calibration import BiasCorrectedScaling
from ._estimate import (
    PriorEstimate,
    acc_prior,
    bbse_prior,
    binomial_interval,
    em_prior,
    heldout_confusion,
    shift_test,
)

__all__ = ["PriorEstimator", "PRIOR_METHODS", "CALIBRATIONS", "prior_by_batch"]

PRIOR_METHODS = ("em", "bbse", "bbse_soft", "acc", "pacc")
CALIBRATIONS = ("bcts", "vector", None)

#: Fewer effective unlabelled rows than this draws a warning (common practice: 30 rows).
FEW_ROWS = 30


class PriorEstimator:
    """Estimate the class priors of unlabelled rows from labelled held-out posteriors.

    ``fit`` takes held-out posteriors with their true labels (the source data): it fits the
    calibration (by default bias-corrected temperature scaling, Alexandari, Kundaje & Shrikumar
    2020), records the weighted source priors and the hard and soft held-out confusion matrices
    of the calibrated posteriors. ``estimate`` takes posteriors of unlabelled rows (the target
    data) and returns the estimated priors with a bootstrap interval and the likelihood-ratio
    test of "no shift".

    Parameters
    ----------
    method : {"em", "bbse", "bbse_soft", "acc", "pacc"}, default="em"
        Maximum likelihood by EM (Saerens et al. 2002), black-box shift estimation with hard or
        soft confusion matrices (Lipton et al. 2018), adjusted classify-and-count (Forman 2008)
        or its probabilistic form (Bella et al. 2010).
    calibration : {"bcts", "vector", None}, default="bcts"
        Calibration fitted on the held-out posteriors and applied to both source and target
        posteriors before estimation: bias-corrected temperature scaling, vector scaling (both
        :class:`BiasCorrectedScaling`), or none.
    tol, max_iter : float, int
        EM tolerance and iteration cap (see :func:`em_prior`).
    n_resamples : int, default=200
        Bootstrap resamples for the interval; 0 skips the interval.
    confidence_level : float, default=0.95
    resample_source : bool, default=True
        Whether each bootstrap resample also redraws the held-out rows (refitting the
        calibration and the confusion matrices), so the interval reflects the uncertainty of
        both samples. With ``False`` only the unlabelled rows are redrawn.
    random_state : int, RandomState or None, default=None

    Attributes
    ----------
    source_prior_ : ndarray of shape (k,)
        Weighted class frequencies of the held-out rows.
    confusion_ : ndarray of shape (k, k)
        Joint hard confusion matrix of the calibrated held-out posteriors (rows predicted).
    soft_confusion_ : ndarray of shape (k, k)
    calibrator_ : BiasCorrectedScaling or None
    n_classes_ : int

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
    ) -> None:
        self.method = method
        self.calibration = calibration
        self.tol = tol
        self.max_iter = max_iter
        self.n_resamples = n_resamples
        self.confidence_level = confidence_level
        self.resample_source = resample_source
        self.random_state = random_state

    # -- validation ----------------------------------------------------------------------------
    def _check_params(self) -> None:
        if self.method not in PRIOR_METHODS:
            raise ValueError(f"`method` must be one of {PRIOR_METHODS}; got {self.method!r}.")
        if self.calibration not in CALIBRATIONS:
            raise ValueError(
                f"`calibration` must be one of {CALIBRATIONS}; got {self.calibration!r}."
            )
        if not (isinstance(self.n_resamples, numbers.Integral) and self.n_resamples >= 0):
            raise ValueError(
                f"`n_resamples` must be a non-negative integer; got {self.n_resamples!r}."
            )
        if not (isinstance(self.confidence_level, numbers.Real) and 0 < self.confidence_level < 1):
            raise ValueError(
                f"`confidence_level` must be in (0, 1); got {self.confidence_level!r}."
            )
        if not (isinstance(self.tol, numbers.Real) and self.tol > 0):
            raise ValueError(f"`tol` must be a positive number; got {self.tol!r}.")
        if not (isinstance(self.max_iter, numbers.Integral) and self.max_iter >= 1):
            raise ValueError(f"`max_iter` must be a positive integer; got {self.max_iter!r}.")

    # -- fitting -------------------------------------------------------------------------------
    def fit(self, proba: Any, y: Any, sample_weight: Any = None) -> PriorEstimator:
        """Learn from held-out posteriors ``proba`` (n, k) and class indices ``y`` in 0..k-1."""
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
        self.n_classes_ = k
        summary = self._summarise(p, y_idx, w)
        self.calibrator_, self.source_prior_, self.confusion_, self.soft_confusion_ = summary
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

    # -- estimation ----------------------------------------------------------------------------
    def _point(
        self,
        p: np.ndarray,
        w: np.ndarray,
        src: np.ndarray,
        hard: np.ndarray,
        soft: np.ndarray,
        init: np.ndarray | None = None,
    ) -> PriorEstimate:
        m = self.method
        if m == "em":
            return em_prior(p, src, sample_weight=w, init=init, tol=self.tol, max_iter=self.max_iter)
        if m in ("bbse", "bbse_soft"):
            s = m == "bbse_soft"
            return bbse_prior(p, soft if s else hard, src, soft=s, sample_weight=w)
        s = m == "pacc"
        return acc_prior(p, soft if s else hard, soft=s, sample_weight=w)

    def estimate(
        self, proba: Any, sample_weight: Any = None, *, random_state: Any = None
    ) -> PriorEstimate:
        """Estimate the class priors of unlabelled rows.

        Parameters
        ----------
        proba : array-like of shape (n, k)
            Posteriors of the unlabelled rows from the same model as the held-out ones.
        sample_weight : array-like of shape (n,), default=None
            Frequency weights of the unlabelled rows.
        random_state : int, RandomState or None, default=None
            Overrides the estimator's ``random_state`` for this call.

        Returns
        -------
        PriorEstimate
            With ``interval`` (percentile bootstrap, Efron & Tibshirani 1993, ch. 13, widened
            where needed to contain the Clopper-Pearson interval of ``n_eff`` labelled rows, the
            least uncertainty any estimate from that many rows can have), ``shift_statistic``
            and ``shift_pvalue`` (:func:`shift_test` on the calibrated posteriors; always the
            maximum-likelihood test, whatever ``method``).
        """
        self._check_fitted()
        self._check_params()
        p_raw = check_proba(proba, name="proba", ndim=2)
        if p_raw.shape[1] != self.n_classes_:
            raise ValueError(
                f"`proba` has {p_raw.shape[1]} columns but the estimator was fitted on "
                f"{self.n_classes_} classes."
            )
        w = check_sample_weight(sample_weight, p_raw.shape[0])
        n_eff = float(w.sum() ** 2 / np.sum(w * w))
        if n_eff < FEW_ROWS:
            warnings.warn(
                f"Only {n_eff:.3g} effective unlabelled rows; the prior estimate is very "
                "uncertain and its interval is wide.",
                UserWarning,
                stacklevel=2,
            )
        p = self.calibrate(p_raw)
        point = self._point(p, w, self.source_prior_, self.confusion_, self.soft_confusion_)
        test = shift_test(p, self.source_prior_, sample_weight=w)
        interval = None
        if self.n_resamples > 0:
            rs = self.random_state if random_state is None else random_state
            interval = self._bootstrap(p_raw, p, w, point.prior, check_random_state(rs))
            cp = binomial_interval(point.prior, n_eff, self.confidence_level)
            interval[:, 0] = np.minimum(np.minimum(interval[:, 0], cp[:, 0]), point.prior)
            interval[:, 1] = np.maximum(np.maximum(interval[:, 1], cp[:, 1]), point.prior)
        return PriorEstimate(
            prior=point.prior,
            method=point.method,
            n_iter=point.n_iter,
            converged=point.converged,
            n_rows=p.shape[0],
            interval=interval,
            shift_statistic=test.statistic,
            shift_pvalue=test.pvalue,
        )

    def _bootstrap(
        self,
        p_raw: np.ndarray,
        p_cal: np.ndarray,
        w: np.ndarray,
        prior: np.ndarray,
        rng: np.random.RandomState,
    ) -> np.ndarray:
        n = p_raw.shape[0]
        sp, sy, sw = self._src
        ns = sp.shape[0]
        k = self.n_classes_
        draws = np.empty((self.n_resamples, k))
        kept = 0
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            warnings.simplefilter("ignore", UserWarning)
            for _ in range(self.n_resamples):
                wt = rng.multinomial(n, np.full(n, 1.0 / n)) * w
                src, hard, soft, pt = self.source_prior_, self.confusion_, self.soft_confusion_, p_cal
                if self.resample_source:
                    ws = rng.multinomial(ns, np.full(ns, 1.0 / ns)) * sw
                    if np.any(np.bincount(sy, weights=ws, minlength=k) <= 0):
                        continue  # a class vanished from this resample: its prior is undefined
                    cal, src, hard, soft = self._summarise(sp, sy, ws, self.calibrator_)
                    pt = p_raw if cal is None else cal.predict(p_raw)
                if wt.sum() <= 0:  # pragma: no cover - multinomial counts always sum to n
                    continue
                init = prior if self.method == "em" and np.all(prior > 0) else None
                draws[kept] = self._point(pt, wt, src, hard, soft, init=init).prior
                kept += 1
        if kept == 0:
            return np.column_stack([np.zeros(k), np.ones(k)])
        alpha = 1.0 - self.confidence_level
        lo, hi = np.quantile(draws[:kept], [alpha / 2, 1 - alpha / 2], axis=0)
        return np.column_stack([lo, hi])


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
            raise ValueError(f"`batch_size` must be a positive integer; got {batch_size!r}.")
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
