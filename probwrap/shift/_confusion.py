"""Confusion-matrix estimators of class priors (BBSE, ACC) and the binomial interval."""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from scipy.stats import beta as beta_dist

from .._validation import check_labels, check_proba, check_same_length, check_sample_weight, plain
from ._adjust import check_prior, project_to_simplex
from ._estimate import (
    PriorEstimate,
    PriorNotIdentifiedWarning,
    _check_target,
    _warn_empty_columns,
    check_class_names,
    name_classes,
)

__all__ = [
    "acc_prior",
    "bbse_prior",
    "binomial_interval",
    "heldout_confusion",
]


def _check_confusion(confusion: Any, k: int) -> np.ndarray:
    try:
        c = np.asarray(confusion, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`confusion` must be a numeric (k, k) matrix; got {plain(confusion)!r}.") from exc
    if c.shape != (k, k):
        raise ValueError(
            f"`confusion` must have shape ({k}, {k}) to match `proba`; got shape {c.shape}."
        )
    if not np.all(np.isfinite(c)) or np.any(c < 0):
        raise ValueError("`confusion` must contain finite non-negative entries.")
    if c.sum() <= 0:
        raise ValueError("`confusion` is zero everywhere; it must come from labelled rows.")
    return c / c.sum()


def _target_mean(p: np.ndarray, w: np.ndarray, soft: bool) -> np.ndarray:
    if soft:
        return w @ p / w.sum()
    hard = np.zeros_like(p)
    hard[np.arange(p.shape[0]), np.argmax(p, axis=1)] = 1.0
    return w @ hard / w.sum()


def heldout_confusion(
    proba: Any, y: Any, *, sample_weight: Any = None, soft: bool = False
) -> np.ndarray:
    """Joint confusion matrix of held-out predictions, ``C[i, j] = P(predicted i, true j)``.

    Rows are predicted classes and columns true classes (the orientation of Lipton, Wang &
    Smola 2018, so that the expected target predictions are ``C @ w``). With ``soft=True``
    each row contributes its whole posterior vector instead of a one-hot argmax, giving the
    soft confusion matrix ``C[i, j] = E[p_i(x) 1{y = j}]``.

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Held-out posteriors, columns in class-index order.
    y : array-like of shape (n,)
        Integer class indices in ``0 .. k-1``.
    sample_weight : array-like of shape (n,), default=None
    soft : bool, default=False

    Returns
    -------
    ndarray of shape (k, k), entries summing to one; column sums are the (weighted) class
    frequencies.

    Examples
    --------
    >>> from probwrap.shift import heldout_confusion
    >>> heldout_confusion([[0.9, 0.1], [0.4, 0.6], [0.2, 0.8], [0.3, 0.7]], [0, 0, 1, 1])
    array([[0.25, 0.  ],
           [0.25, 0.5 ]])
    """
    p = check_proba(proba, name="proba", ndim=2)
    k = p.shape[1]
    check_same_length(("proba", p), ("y", y))
    y_idx, _ = check_labels(y, name="y", classes=np.arange(k), min_classes=1)
    w = check_sample_weight(sample_weight, p.shape[0])
    pred = p if soft else np.eye(k)[np.argmax(p, axis=1)]
    onehot = np.eye(k)[y_idx]
    return (pred * w[:, None]).T @ onehot / w.sum()


# -- maximum likelihood by EM ------------------------------------------------------------------
def _identification(c: np.ndarray, n_source: float | None) -> tuple[bool, str]:
    """Whether a joint confusion matrix ``c`` (rows predicted, columns true) identifies the priors.

    With the class-conditional matrix ``M = c / column sums`` the priors solve ``M pi = q``.
    They are identified when ``M`` is far from singular compared with its own sampling error:
    for two classes ``|tpr - fpr| > 3 se`` with the binomial standard error
    ``se = sqrt(tpr (1 - tpr) / n_1 + fpr (1 - fpr) / n_0)`` of the rates on the labelled rows
    (our rule: a denominator known to better than a third of itself); for more classes the
    smallest singular value of ``M`` against three times the root of the summed binomial
    variances of its entries. Without ``n_source`` only an exactly singular matrix fails.
    """
    col = c.sum(axis=0)
    m = c / np.where(col > 0, col, 1.0)
    k = c.shape[0]
    if k == 2:
        tpr, fpr = m[1, 1], m[1, 0]
        gap = abs(tpr - fpr)
        if n_source is None or not np.isfinite(n_source):
            return bool(gap > 1e-9), f"tpr {tpr:.3g}, fpr {fpr:.3g}"
        n1, n0 = max(n_source * col[1], 1.0), max(n_source * col[0], 1.0)
        se = float(np.sqrt(tpr * (1 - tpr) / n1 + fpr * (1 - fpr) / n0))
        return bool(gap > 3.0 * max(se, 1e-12)), (
            f"true-positive rate {tpr:.3g} and false-positive rate {fpr:.3g} differ by "
            f"{gap:.3g}, against a standard error of {se:.3g} from the labelled rows"
        )
    sv = np.linalg.svd(m, compute_uv=False)
    smallest = float(sv[-1])
    if n_source is None or not np.isfinite(n_source):
        return bool(smallest > 1e-9), f"smallest singular value {smallest:.3g}"
    var = m * (1 - m) / np.maximum(n_source * col, 1.0)
    se = float(np.sqrt(var.sum()))
    return bool(smallest > 3.0 * max(se, 1e-12)), (
        f"the class-conditional confusion matrix has smallest singular value {smallest:.3g}, "
        f"against a sampling error of about {se:.3g}"
    )


def _not_identified(what: str, reason: str, stacklevel: int = 3) -> None:
    warnings.warn(
        f"{what} cannot identify the class priors: {reason}. The model's predictions barely "
        "differ between the classes, so the estimate would be noise presented as a number. The "
        "source prior is returned with an interval spanning [0, 1]; use method='em' with "
        "calibrated posteriors, or a model that separates the classes better.",
        PriorNotIdentifiedWarning,
        stacklevel=stacklevel,
    )


def _solve_or_lstsq(a: np.ndarray, b: np.ndarray, what: str) -> np.ndarray:
    return np.linalg.lstsq(a, b, rcond=None)[0]


def bbse_prior(
    proba: Any,
    confusion: Any,
    source_prior: Any,
    *,
    soft: bool = False,
    sample_weight: Any = None,
    n_source: float | None = None,
    class_names: Any = None,
) -> PriorEstimate:
    r"""Black-box shift estimation (BBSE; Lipton, Wang & Smola 2018).

    With the joint held-out confusion matrix :math:`C_{ij} = P_s(\hat y = i, y = j)` and the
    mean prediction on the unlabelled rows :math:`\mu_i = P_t(\hat y = i)`, the importance
    weights solve :math:`C w = \mu` (Lipton et al. 2018, eq. 4 / Algorithm 1), and the target
    priors are :math:`w \odot \pi^s`. Sampling noise can make some entries negative; the result
    is projected onto the simplex (:func:`project_to_simplex`). ``soft=True`` uses posterior
    means for both :math:`C` and :math:`\mu` (pass a confusion matrix built with
    ``heldout_confusion(..., soft=True)``).

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows.
    confusion : array-like of shape (k, k)
        Joint held-out confusion matrix (rows predicted, columns true), as from
        :func:`heldout_confusion`.
    source_prior : array-like of shape (k,)
        Class frequencies of the held-out rows (the column sums of ``confusion``).
    soft : bool, default=False
    sample_weight : array-like of shape (n,), default=None
    n_source : float, default=None
        Effective number of labelled rows behind ``confusion``. When given, a confusion matrix
        that is singular within its sampling error (for two classes: true- and false-positive
        rates within three standard errors) is reported as not identified: a
        :class:`PriorNotIdentifiedWarning`, the source prior, ``identified=False``. Without
        it only an exactly singular matrix is.
    class_names : array-like of shape (k,), default=None
        Labels of the columns, to name classes in warnings (default: by column index).

    Returns
    -------
    PriorEstimate

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import bbse_prior
    >>> confusion = np.array([[0.4, 0.1], [0.1, 0.4]])
    >>> proba = np.array([[0.2, 0.8]] * 6 + [[0.7, 0.3]] * 4)   # 60 % predicted class 1
    >>> bbse_prior(proba, confusion, [0.5, 0.5]).prior.round(4)
    array([0.3333, 0.6667])
    """
    p, w = _check_target(proba, sample_weight, owner="bbse_prior")
    k = p.shape[1]
    c = _check_confusion(confusion, k)
    names = check_class_names(class_names, k)
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    mu = _target_mean(p, w, soft)
    name = "bbse_soft" if soft else "bbse"
    ok, reason = _identification(c, n_source)
    if not ok:
        _not_identified(f"BBSE ({name})", reason)
        return PriorEstimate(prior=src.copy(), method=name, n_rows=p.shape[0], identified=False)
    _warn_empty_columns(mu, "predicted mass" if soft else "predictions", names)
    weights = _solve_or_lstsq(c, mu, "confusion matrix")
    prior = project_to_simplex(weights * src)
    return PriorEstimate(prior=prior, method=name, n_rows=p.shape[0])


def _simplex_least_squares(
    m: np.ndarray, q: np.ndarray, tol: float = 1e-12, max_iter: int = 20000
) -> tuple[np.ndarray, int, bool]:
    """min ||m x - q||^2 over the simplex by accelerated projected gradient (Beck & Teboulle 2009)."""
    try:
        x0 = np.linalg.lstsq(m, q, rcond=None)[0]
    except np.linalg.LinAlgError:  # pragma: no cover - lstsq does not fail on finite input
        x0 = np.full(m.shape[1], 1.0 / m.shape[1])
    if np.all(x0 >= 0) and abs(x0.sum() - 1.0) < 1e-9 and np.allclose(m @ x0, q, atol=1e-12):
        return x0 / x0.sum(), 0, True
    x = project_to_simplex(x0)
    lip = max(float(np.linalg.norm(m, 2)) ** 2, 1e-12)
    mtm, mtq = m.T @ m, m.T @ q
    yk, tk = x.copy(), 1.0
    for it in range(1, max_iter + 1):
        new = project_to_simplex(yk - (mtm @ yk - mtq) / lip)
        t_new = 0.5 * (1.0 + np.sqrt(1.0 + 4.0 * tk * tk))
        yk = new + ((tk - 1.0) / t_new) * (new - x)
        step = np.max(np.abs(new - x))
        x, tk = new, t_new
        if step < tol:
            return x, it, True
    return x, max_iter, False


def acc_prior(
    proba: Any,
    confusion: Any,
    *,
    soft: bool = False,
    sample_weight: Any = None,
    n_source: float | None = None,
    class_names: Any = None,
) -> PriorEstimate:
    r"""Adjusted classify-and-count (ACC) and its probabilistic form (PACC).

    With the class-conditional confusion matrix :math:`M_{ij} = P_s(\hat y = i \mid y = j)`
    (the columns of the joint ``confusion`` divided by their sums) and the share of each
    predicted class among the unlabelled rows :math:`q`, the target priors satisfy
    :math:`M \pi = q` (Forman 2008, eq. for adjusted count, :math:`\hat p = (q - fpr) /
    (tpr - fpr)` in the binary case). ACC returns the least-squares solution restricted to the
    simplex, which for two classes is Forman's formula clipped to [0, 1]. ``soft=True`` is the
    probabilistic form (PACC; Bella, Ferri, Hernández-Orallo & Ramírez-Quintana 2010), with
    posterior means in place of hard counts (use ``heldout_confusion(..., soft=True)``).

    When the unconstrained solution already lies in the simplex, ACC equals hard BBSE and PACC
    equals soft BBSE; they differ in how a solution outside the simplex is repaired.

    Parameters
    ----------
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows.
    confusion : array-like of shape (k, k)
        Joint held-out confusion matrix (rows predicted, columns true).
    soft : bool, default=False
    sample_weight : array-like of shape (n,), default=None
    n_source : float, default=None
        Effective number of labelled rows behind ``confusion``; see :func:`bbse_prior` for the
        identification check it enables.
    class_names : array-like of shape (k,), default=None
        Labels of the columns, to name classes in warnings (default: by column index).

    Returns
    -------
    PriorEstimate

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import acc_prior
    >>> confusion = np.array([[0.45, 0.1], [0.05, 0.4]])   # tpr 0.8, fpr 0.1
    >>> proba = np.array([[0.2, 0.8]] * 3 + [[0.7, 0.3]] * 7)   # 30 % predicted positive
    >>> acc_prior(proba, confusion).prior.round(4)        # (0.3 - 0.1) / (0.8 - 0.1)
    array([0.7143, 0.2857])
    """
    p, w = _check_target(proba, sample_weight, owner="acc_prior")
    k = p.shape[1]
    c = _check_confusion(confusion, k)
    names = check_class_names(class_names, k)
    col = c.sum(axis=0)
    if np.any(col <= 0):
        empty = np.flatnonzero(col <= 0)
        which = "" if names is None else f" ({name_classes(empty, names)})"
        raise ValueError(
            f"`confusion` has empty column(s) {empty.tolist()}{which}: every class must occur "
            "among the labelled rows."
        )
    m = c / col
    q = _target_mean(p, w, soft)
    name = "pacc" if soft else "acc"
    ok, reason = _identification(c, n_source)
    if not ok:
        _not_identified(name.upper(), reason)
        return PriorEstimate(prior=col.copy(), method=name, n_rows=p.shape[0], identified=False)
    _warn_empty_columns(q, "predicted mass" if soft else "predictions", names)
    prior, n_iter, converged = _simplex_least_squares(m, q)
    return PriorEstimate(
        prior=prior, method="pacc" if soft else "acc", n_iter=n_iter, converged=converged,
        n_rows=p.shape[0],
    )


# -- intervals ---------------------------------------------------------------------------------
def binomial_interval(
    proportion: Any, n: float, confidence_level: float = 0.95
) -> np.ndarray:
    """Clopper & Pearson (1934) interval for proportions observed on ``n`` rows.

    ``proportion * n`` need not be an integer (the beta-quantile form is used). Returns an
    array of shape ``proportion.shape + (2,)``.

    Examples
    --------
    >>> from probwrap.shift import binomial_interval
    >>> binomial_interval(0.0, 10).round(4)
    array([0.    , 0.3085])
    """
    pr = np.asarray(proportion, dtype=float)
    if not (0.0 < confidence_level < 1.0):
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    if not n > 0:
        raise ValueError(f"`n` must be positive; got {plain(n)!r}.")
    if not np.all(np.isfinite(pr)) or np.any((pr < 0) | (pr > 1)):
        raise ValueError(f"`proportion` must be in [0, 1]; got {plain(proportion)!r}.")
    alpha = 1.0 - confidence_level
    x = pr * n
    with np.errstate(invalid="ignore"):
        lo = np.where(x <= 0, 0.0, beta_dist.ppf(alpha / 2, np.maximum(x, 1e-300), n - x + 1))
        hi = np.where(x >= n, 1.0, beta_dist.ppf(1 - alpha / 2, x + 1, np.maximum(n - x, 1e-300)))
    return np.stack([np.nan_to_num(lo, nan=0.0), np.nan_to_num(hi, nan=1.0)], axis=-1)
