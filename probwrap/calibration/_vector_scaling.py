"""Vector and matrix scaling of multiclass scores (Guo et al. 2017; Kull et al. 2019)."""

from __future__ import annotations

import numpy as np

from ._base import CalibrationMap
from ._linear_softmax import _as_columns, _check_settings, _fit_linear_softmax, _floored_softmax

__all__ = ["VectorScalingMap", "MatrixScalingMap"]


class VectorScalingMap(CalibrationMap):
    """Vector scaling: one scale and one intercept per class, ``q = softmax(a * z + b)``.

    For multiclass logits or log-probabilities ``z`` of shape (n, k), class ``j`` gets the
    logit ``a_j * z_j + b_j`` and the probabilities are their softmax. With every ``a_j`` equal
    and ``b = 0`` this is temperature scaling (``a = 1 / T``); the per-class scales and
    intercepts correct classes that are over- or under-predicted. Binary log-odds ``s`` of
    shape (n,) are read as the two logits ``[-s/2, s/2]``, which makes the map Platt scaling
    with a shrunken intercept.

    The parameters minimise the weighted log loss plus an L2 penalty that pulls the scales
    toward their common value (so toward temperature scaling) and the intercepts toward 0::

        sum_i w_i * CE(t_i, q_i)
          + shrinkage * (sum_j (c * (a_j - mean(a)))^2 + sum_j b_j^2
                         + 1e-4 * k * (c * (mean(a) - 1))^2)

    where ``c`` is the weighted root-mean-square of the row-centred scores (so the penalty does
    not depend on the units of the scores) and ``CE`` the cross-entropy against the one-hot
    labels ``t_i``. The last term, a very weak pull of the common scale toward the identity map
    (the model's own probabilities), only keeps the fit finite when the scores separate the
    classes perfectly; otherwise the common scale (the temperature) is set by the data alone,
    as in temperature scaling. Every output probability is kept within [1e-15, 1 - 1e-15]
    (rows renormalised), so even far outside the fitted scores no class gets exactly 0 or 1.
    When the fitted map ranks every calibration row first for its own class (the scores
    separate the classes, so the likelihood has no finite maximum and only the weak pull would
    bound the confidence), the map warns, refits with the smoothed targets below and records
    the reason in ``boundary_`` (``method="auto"`` then leaves it out). The penalty is worth ``shrinkage`` rows, so it matters on small
    calibration sets and vanishes on large ones. Weights count as row frequencies: a weight of
    2 gives what a duplicated row gives, and the penalty is measured against the weight total.

    With ``smooth_targets=True`` the labels are replaced by Platt-style smoothed targets: a row
    of class ``c`` (weighted count ``N_c``) keeps ``(N_c + 1) / (N_c + 2)`` on its class and
    shares ``1 / (N_c + 2)`` evenly among the others (for two classes exactly Platt's 1999
    targets). It is off by default: it caps the confidence near ``1 - 1 / (N_c + 2)``, which on
    the small multiclass sets of ``benchmarks/calibration.py`` cost far more log loss on
    accurate base models (up to 17 times scikit-learn's best method) than it saved.

    Parameters
    ----------
    shrinkage : float, default=0.5
        Strength of the penalty, in units of rows (weight). ``0`` gives the unregularised fit
        of Guo et al. (2017), which runs off to infinite scales on separable data (the map then
        warns and records the reason in ``boundary_``).
    smooth_targets : bool, default=False
        Use the smoothed targets above instead of the one-hot labels.

    Attributes
    ----------
    scales_ : ndarray of shape (k,)
        Per-class scales ``a`` (on the original scale of the scores).
    intercepts_ : ndarray of shape (k,)
        Per-class intercepts ``b``, centred to sum to zero.
    boundary_ : str or None
        Why the likelihood had no finite maximum (the scores separate the classes), else None.
    classes_ : ndarray
        The labels, in column order.

    Notes
    -----
    Fitted by damped Newton steps with the analytic gradient and Hessian (2k parameters); the
    objective is convex (a log-sum-exp of linear functions plus a quadratic), so the minimum is
    unique. The fit costs a few passes over the (n, k) scores.

    References
    ----------
    C. Guo, G. Pleiss, Y. Sun and K. Q. Weinberger (2017), "On calibration of modern neural
    networks", ICML, section 4.2 (vector scaling).
    M. Kull, M. Perello-Nieto, M. Kängsepp, T. Silva Filho, H. Song and P. Flach (2019),
    "Beyond temperature scaling: obtaining well-calibrated multiclass probabilities with
    Dirichlet calibration", NeurIPS (L2 regularisation of the intercepts and off-diagonal terms).
    J. Platt (1999), "Probabilistic outputs for support vector machines and comparisons to
    regularized likelihood methods" (smoothed targets).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import VectorScalingMap
    >>> rng = np.random.default_rng(0)
    >>> z = rng.normal(size=(1000, 3)) * [3.0, 1.0, 1.0]
    >>> y = np.argmax(z / [3.0, 1.0, 1.0] + rng.gumbel(size=z.shape), axis=1)
    >>> m = VectorScalingMap().fit(z, y)
    >>> m.scales_.round(2)
    array([0.33, 0.9 , 1.06])
    >>> m.predict(z[:2]).sum(axis=1)
    array([1., 1.])

    The first class's scores were three times too large; its scale (about 1/3) brings them back.
    """

    supports_multiclass = True
    #: 2k - 1 free parameters against one-vs-rest Platt's 2k: ordered between temperature (1)
    #: and Platt (2) per class
    complexity = 1.75

    def __init__(self, *, shrinkage: float = 0.5, smooth_targets: bool = False) -> None:
        self.shrinkage = shrinkage
        self.smooth_targets = smooth_targets

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        _check_settings(self)
        # a fit of the same kind on other rows to start from (set by CalibrationWrapper's
        # cross-validation of candidates, one fold to the next; see _fit_linear_softmax)
        before = self.__dict__.pop("_start_from", None)
        start = None
        if type(before) is type(self) and hasattr(before, "scales_"):
            start = (before.scales_, before.intercepts_)
        self.scales_, self.intercepts_, self.boundary_ = _fit_linear_softmax(
            _as_columns(scores), y.astype(np.intp), w, full=False, shrinkage=float(self.shrinkage),
            smooth=bool(self.smooth_targets), name=type(self).__name__, start=start,
        )

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        eta = _as_columns(scores) * self.scales_ + self.intercepts_
        return _floored_softmax(eta, scores.ndim == 1)


class MatrixScalingMap(CalibrationMap):
    """Matrix scaling: a full linear map of the scores, ``q = softmax(z @ W.T + b)``.

    Every class logit is a linear function of all ``k`` scores. This is the richest of the
    linear maps of Guo et al. (2017); on log-probabilities it is Dirichlet calibration (Kull et
    al. 2019). It needs many rows per class: by default it is regularised as Kull et al.
    recommend, with an L2 penalty on the off-diagonal entries and the intercepts (ODIR), and
    here also on the spread of the diagonal around its mean, so that strong shrinkage gives
    temperature scaling::

        sum_i w_i * CE(t_i, q_i) + shrinkage * (sum_j (c * (W_jj - mean(diag W)))^2
                                                + sum_{j != l} (c * W_jl)^2 + sum_j b_j^2
                                                + 1e-4 * k * (c * (mean(diag W) - 1))^2)

    with ``c``, ``t_i``, the weak pull toward the identity and the weight convention as in
    :class:`VectorScalingMap`. Binary log-odds are read as the two logits ``[-s/2, s/2]``.
    Fitted by SciPy's L-BFGS-B with the analytic gradient.

    Parameters
    ----------
    shrinkage : float, default=0.5
        Strength of the penalty, in units of rows (weight); ``0`` gives the unregularised
        maximum-likelihood fit, a multinomial logistic regression on the scores.
    smooth_targets : bool, default=False
        Use Platt-style smoothed targets (see :class:`VectorScalingMap`).

    Attributes
    ----------
    coef_ : ndarray of shape (k, k)
        The matrix ``W`` (row ``j`` gives class ``j``'s logit), on the scale of the scores.
    intercepts_ : ndarray of shape (k,)
        Intercepts ``b``, centred to sum to zero.
    boundary_ : str or None
        Why the likelihood had no finite maximum (the scores separate the classes), else None;
        as in :class:`VectorScalingMap` the map then refits with smoothed targets.
    classes_ : ndarray
        The labels, in column order.

    References
    ----------
    C. Guo, G. Pleiss, Y. Sun and K. Q. Weinberger (2017), "On calibration of modern neural
    networks", ICML, section 4.2 (matrix scaling).
    M. Kull, M. Perello-Nieto, M. Kängsepp, T. Silva Filho, H. Song and P. Flach (2019),
    "Beyond temperature scaling: obtaining well-calibrated multiclass probabilities with
    Dirichlet calibration", NeurIPS, section 3 (ODIR).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import MatrixScalingMap
    >>> rng = np.random.default_rng(0)
    >>> z = rng.normal(size=(300, 3))
    >>> y = np.argmax(z[:, [1, 0, 2]] + rng.gumbel(size=z.shape), axis=1)
    >>> m = MatrixScalingMap().fit(z, y)
    >>> m.coef_.argmax(axis=1)
    array([1, 0, 2])

    The labels follow the first two score columns swapped; the fitted matrix swaps them back.
    """

    supports_multiclass = True
    #: k^2 + k - 1 free parameters: counted above beta's three per class
    complexity = 4.0

    def __init__(self, *, shrinkage: float = 0.5, smooth_targets: bool = False) -> None:
        self.shrinkage = shrinkage
        self.smooth_targets = smooth_targets

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        _check_settings(self)
        self.coef_, self.intercepts_, self.boundary_ = _fit_linear_softmax(
            _as_columns(scores), y.astype(np.intp), w, full=True,
            shrinkage=float(self.shrinkage), smooth=bool(self.smooth_targets),
            name=type(self).__name__,
        )

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        eta = _as_columns(scores) @ self.coef_.T + self.intercepts_
        return _floored_softmax(eta, scores.ndim == 1)
