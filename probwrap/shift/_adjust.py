"""Bayes' rule re-weighting of posteriors to new class priors, and moving binary cutoffs."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np

from .._validation import check_proba, plain, row_sum

__all__ = ["adjust_to_prior", "check_prior", "project_to_simplex", "shift_cutoff"]

#: Tolerance on the sum of a prior: entries must add up to one within this.
PRIOR_SUM_TOL = 1e-6


def check_prior(
    prior: Any, n_classes: int, *, name: str = "prior", strictly_positive: bool = False
) -> np.ndarray:
    """Validate a vector of class priors and return it as a float array of shape (k,).

    A scalar is accepted when ``n_classes == 2`` and read as the positive-class prevalence.
    Entries must be finite and non-negative (strictly positive if ``strictly_positive``) and sum
    to one within 1e-6; the result is divided by its sum so that it sums to one exactly.

    Examples
    --------
    >>> from probwrap.shift import check_prior
    >>> check_prior(0.08, 2)
    array([0.92, 0.08])
    """
    if isinstance(prior, numbers.Real) and not isinstance(prior, bool):
        if n_classes != 2:
            raise ValueError(
                f"`{name}` is a single number ({plain(prior)!r}), which is only meaningful for two "
                f"classes; give one entry per class ({n_classes} entries)."
            )
        prior = [1.0 - float(prior), float(prior)]
    try:
        arr = np.asarray(prior, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be numeric class priors; got {plain(prior)!r}.") from exc
    if arr.ndim != 1 or arr.shape[0] != n_classes:
        raise ValueError(
            f"`{name}` must have one entry per class ({n_classes} entries); got shape {arr.shape}."
        )
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"`{name}` contains NaN or infinite entries; priors must be finite.")
    if np.any(arr < 0):
        raise ValueError(f"`{name}` must be non-negative; got {arr.tolist()}.")
    if strictly_positive and np.any(arr <= 0):
        raise ValueError(
            f"`{name}` must be strictly positive (every class must occur); got {arr.tolist()}."
        )
    total = arr.sum()
    if abs(total - 1.0) > PRIOR_SUM_TOL:
        hint = ""
        if total > 0 and abs(total - 1.0) <= 0.05:
            # rounded shares (0.3 + 0.699, three classes of 0.333): say the one-line repair
            # rather than renormalise silently, which could hide a mistyped share
            shares = ", ".join(f"{v:.6g}" for v in arr / total)
            hint = (f" If they are rounded shares, divide them by their sum: [{shares}]"
                    f" (numpy: `p / p.sum()`).")
        raise ValueError(f"`{name}` must sum to one; its entries sum to {total:.6g}.{hint}")
    return arr / total


def _proba_2d(proba: Any, name: str = "proba") -> tuple[np.ndarray, bool]:
    p = check_proba(proba, name=name)
    if p.ndim == 1:
        return np.column_stack([1.0 - p, p]), True
    return p, False


def adjust_to_prior(proba: Any, source_prior: Any, target_prior: Any) -> np.ndarray:
    r"""Re-weight posteriors from the class priors they were learned under to new priors.

    Under prior (label) shift the class-conditional densities stay the same and only the class
    priors change. Bayes' rule then gives the new posteriors exactly (Saerens, Latinne &
    Decaestecker 2002, eq. 2.4):

    .. math::

        p_t(k \mid x) = \frac{\frac{\pi^t_k}{\pi^s_k}\, p_s(k \mid x)}
                             {\sum_j \frac{\pi^t_j}{\pi^s_j}\, p_s(j \mid x)}

    Parameters
    ----------
    proba : array-like of shape (n, k) or (n,)
        Posteriors under the source priors; 1-d input is the positive-class probability of a
        binary problem.
    source_prior : array-like of shape (k,) or float
        Class priors the posteriors were learned under (strictly positive). For binary problems
        a float is the positive-class prevalence.
    target_prior : array-like of shape (k,) or float
        New class priors (non-negative).

    Returns
    -------
    ndarray of the same shape as ``proba``
        Adjusted posteriors. A row whose whole mass lies on classes whose target prior is zero
        carries no usable information; it gets the target prior itself, with a warning.

    Examples
    --------
    >>> from probwrap.shift import adjust_to_prior
    >>> adjust_to_prior([0.1, 0.5], source_prior=0.03, target_prior=0.08).round(4)
    array([0.238 , 0.7376])
    """
    p, one_d = _proba_2d(proba)
    k = p.shape[1]
    src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
    tgt = check_prior(target_prior, k, name="target_prior")
    with np.errstate(over="ignore"):
        ratio = tgt / src
    if not np.all(np.isfinite(ratio)):
        # a source prior near the smallest double overflows tgt / src; each row is normalised,
        # so the ratios may be divided by their largest, computed on the log scale
        with np.errstate(divide="ignore"):
            log_ratio = np.log(tgt) - np.log(src)
        ratio = np.exp(log_ratio - log_ratio.max())
    num = p * ratio
    den = row_sum(num, True)
    empty = den[:, 0] <= 0
    if empty.any():
        warnings.warn(
            f"{int(empty.sum())} row(s) of `proba` put all their mass on classes whose "
            "`target_prior` is zero; those rows are given the target prior itself.",
            UserWarning,
            stacklevel=2,
        )
        num[empty] = tgt
        den[empty] = 1.0
    out = num / den
    return out[:, 1] if one_d else out


def _as_binary_prior(prior: Any, name: str) -> float:
    return float(check_prior(prior, 2, name=name, strictly_positive=True)[1])


def shift_cutoff(cutoff: Any, source_prior: Any, target_prior: Any) -> np.ndarray | float:
    r"""Move a binary cutoff tuned under one prevalence to another prevalence.

    The cutoff applies to positive-class probabilities learned under ``source_prior`` (the
    model's unadjusted output). Write :math:`o(p) = p / (1 - p)` for odds. Under prior shift the
    posterior odds factorise into likelihood ratio times prior odds, so the new posterior odds of
    a row are its old odds times the odds ratio of the priors,
    :math:`r = o(\pi^t) / o(\pi^s)` (Saerens et al. 2002, eq. 2.4 written in odds). A rule
    "act when the correctly adjusted posterior is at least :math:`t`" is therefore the rule
    "act when the unadjusted probability :math:`p` satisfies :math:`o(p) \ge o(t) / r`", so the
    cutoff on the unadjusted scale moves to

    .. math::

        t' = \frac{o(t) / r}{1 + o(t) / r}.

    A cutoff that was cost-optimal under the source prevalence keeps its meaning — the
    posterior level at which the expected costs of the two actions are equal, which depends on
    the costs only (Elkan 2001, Theorem 1 gives the same odds correction for re-weighting the
    training set) — so ``t'`` is the cost-optimal cutoff for the unadjusted probabilities under
    the target prevalence. Applied to posteriors already passed through :func:`adjust_to_prior`
    the cutoff stays ``t``. The derivation assumes the probabilities are calibrated under the
    source prevalence; for a cutoff on another score, map the score to a calibrated probability
    first.

    Parameters
    ----------
    cutoff : float or array-like
        Cutoff(s) in [0, 1] on the unadjusted positive-class probability.
    source_prior, target_prior : float or array-like of shape (2,)
        Positive-class prevalence (or both class priors) before and after the shift; strictly
        between 0 and 1.

    Returns
    -------
    float or ndarray
        The moved cutoff(s); 0 and 1 stay where they are.

    Examples
    --------
    >>> from probwrap.shift import shift_cutoff
    >>> round(shift_cutoff(0.1, source_prior=0.03, target_prior=0.06), 4)
    0.0511
    """
    t = np.asarray(cutoff, dtype=float)
    if not np.all(np.isfinite(t)) or np.any((t < 0) | (t > 1)):
        raise ValueError(f"`cutoff` must be in [0, 1]; got {plain(cutoff)!r}.")
    ps = _as_binary_prior(source_prior, "source_prior")
    pt = _as_binary_prior(target_prior, "target_prior")
    ratio = (pt / (1.0 - pt)) / (ps / (1.0 - ps))
    # t' = t / (t + r (1 - t)): the odds form above, written so that 0 and 1 stay finite.
    with np.errstate(over="ignore", invalid="ignore"):
        moved = t / (t + ratio * (1.0 - t))
    # an odds ratio that over- or underflows (a prior near the smallest double) gives inf * 0
    # or 0 / 0 at the ends; 0 and 1 stay where they are
    moved = np.where(t <= 0.0, 0.0, np.where(t >= 1.0, 1.0, moved))
    return float(moved) if moved.ndim == 0 else moved


def project_to_simplex(v: Any) -> np.ndarray:
    """Euclidean projection of a vector onto the probability simplex.

    Returns the point of ``{x : x >= 0, sum(x) = 1}`` closest to ``v``, by the sort-based
    algorithm of Held, Wolfe & Crowder (1974) (also Duchi et al. 2008, Fig. 1).

    Examples
    --------
    >>> from probwrap.shift import project_to_simplex
    >>> project_to_simplex([0.7, 0.5, -0.2])
    array([0.6, 0.4, 0. ])
    """
    x = np.asarray(v, dtype=float)
    if x.ndim != 1 or x.shape[0] == 0 or not np.all(np.isfinite(x)):
        raise ValueError(f"`v` must be a finite non-empty 1-d vector; got {plain(v)!r}.")
    u = np.sort(x)[::-1]
    css = np.cumsum(u) - 1.0
    idx = np.arange(1, x.shape[0] + 1)
    rho = np.nonzero(u - css / idx > 0)[0][-1]
    theta = css[rho] / (rho + 1.0)
    return np.maximum(x - theta, 0.0)
