"""Generator of the invented parcel-damage scenario, with known true probabilities."""

from __future__ import annotations

from functools import lru_cache
from typing import Any

import numpy as np
from scipy.special import expit, softmax
from sklearn.utils import Bunch, check_random_state

from .._validation import plain

__all__ = [
    "PARCEL_FEATURES",
    "ROUTING_ACTIONS",
    "make_parcels",
    "parcel_routing_costs",
    "parcel_source_prior",
]

PARCEL_FEATURES = (
    "weight_kg",
    "fragile",
    "packaging",  # 0 plain box, 1 padded box, 2 crate
    "fill_ratio",
    "route_km",
    "transfers",
    "stack_layer",
    "outdoor_temp_c",
)

_OUTCOMES = {
    2: ("intact", "damaged"),
    3: ("intact", "dented", "broken"),
}


def _features(n: int, rng: np.random.RandomState) -> np.ndarray:
    weight = rng.lognormal(mean=1.0, sigma=0.7, size=n)
    fragile = (rng.uniform(size=n) < 0.2).astype(float)
    packaging = rng.choice(3, size=n, p=[0.6, 0.3, 0.1]).astype(float)
    fill = rng.beta(5.0, 2.0, size=n)
    route = rng.gamma(2.0, 150.0, size=n)
    transfers = rng.poisson(0.5 + route / 400.0).astype(float)
    stack = rng.randint(1, 7, size=n).astype(float)
    temp = rng.normal(12.0, 9.0, size=n)
    return np.column_stack([weight, fragile, packaging, fill, route, transfers, stack, temp])


def _risk(X: np.ndarray) -> np.ndarray:
    """Damage log-odds in the summer population (non-linear on purpose)."""
    weight, fragile, packaging, fill, route, transfers, stack, temp = X.T
    return (
        -6.5
        + 0.45 * np.log(weight)
        + 1.1 * fragile
        - 0.5 * (packaging == 1)
        - 1.3 * (packaging == 2)
        + 4.0 * (0.75 - fill) ** 2 * 6.0
        + 0.0012 * route
        + 0.30 * transfers
        + 0.18 * (stack - 1.0) * (1.0 + fragile)
        - 0.035 * (temp - 12.0)
    )


def _summer_proba(X: np.ndarray, n_outcomes: int) -> np.ndarray:
    eta = _risk(X)
    if n_outcomes == 2:
        p1 = expit(eta)
        return np.column_stack([1.0 - p1, p1])
    weight, fragile, packaging = X[:, 0], X[:, 1], X[:, 2]
    # "dented" follows the same risk; "broken" leans on fragility and heavy parcels.
    logits = np.column_stack(
        [
            np.zeros_like(eta),
            eta + 0.3,
            eta - 0.9 + 1.2 * fragile + 0.3 * np.log(weight) - 0.6 * (packaging == 2),
        ]
    )
    return softmax(logits, axis=1)


@lru_cache(maxsize=4)
def _source_prior(n_outcomes: int) -> tuple[float, ...]:
    rng = np.random.RandomState(20261202)
    X = _features(400_000, rng)
    return tuple(_summer_proba(X, n_outcomes).mean(axis=0))


def parcel_source_prior(n_outcomes: int = 2) -> np.ndarray:
    """Class shares of the summer population (a fixed Monte Carlo estimate from 400,000 parcels).

    Examples
    --------
    >>> from probwrap.datasets import parcel_source_prior
    >>> bool(0.02 < parcel_source_prior()[1] < 0.08)
    True
    """
    if n_outcomes not in _OUTCOMES:
        raise ValueError(f"`n_outcomes` must be 2 or 3; got {plain(n_outcomes)!r}.")
    return np.asarray(_source_prior(n_outcomes))


def make_parcels(
    n_samples: int = 2000,
    *,
    season: str = "summer",
    prevalence: float | None = None,
    n_outcomes: int = 2,
    random_state: Any = None,
    as_frame: bool = False,
) -> Bunch:
    """Invented parcels with known true damage probabilities (demo data only).

    A parcel-sorting hub scores outgoing parcels for the risk of arriving damaged. Summer is
    the reference season. Winter is a pure prior (label) shift: damage roughly doubles while
    the features of damaged and of intact parcels keep their summer distributions, so the true
    winter probabilities are the summer ones re-weighted by Bayes' rule.

    Parameters
    ----------
    n_samples : int, default=2000
        Number of parcels.
    season : {"summer", "winter"}, default="summer"
        ``"winter"`` doubles the share of each damage outcome.
    prevalence : float, default=None
        Share of damaged parcels to impose instead of the season's (binary only), for
        experiments with other base rates.
    n_outcomes : {2, 3}, default=2
        2: intact / damaged. 3: intact / dented (repacking prevents it) / broken.
    random_state : int, RandomState or None, default=None
        Seed.
    as_frame : bool, default=False
        Return ``data`` as a pandas DataFrame (requires pandas).

    Returns
    -------
    Bunch
        ``data`` (n, 8), ``target`` (n,), ``true_proba`` (n, n_outcomes) — the true class
        probabilities for each parcel in its season —, ``parcel_value`` (n,) in currency units,
        ``feature_names``, ``target_names``, ``prior`` (the season's class shares) and
        ``source_prior`` (the summer class shares).

    Examples
    --------
    >>> from probwrap.datasets import make_parcels
    >>> summer = make_parcels(5000, random_state=0)
    >>> winter = make_parcels(5000, season="winter", random_state=0)
    >>> bool(winter.target.mean() > 1.5 * summer.target.mean())
    True
    """
    if n_outcomes not in _OUTCOMES:
        raise ValueError(f"`n_outcomes` must be 2 or 3; got {plain(n_outcomes)!r}.")
    if season not in ("summer", "winter"):
        raise ValueError(f"`season` must be 'summer' or 'winter'; got {plain(season)!r}.")
    if int(n_samples) != n_samples or n_samples < 1:
        raise ValueError(f"`n_samples` must be a positive integer; got {plain(n_samples)!r}.")
    n_samples = int(n_samples)
    rng = check_random_state(random_state)
    source = parcel_source_prior(n_outcomes)
    if prevalence is not None:
        if n_outcomes != 2:
            raise ValueError("`prevalence` is only available with n_outcomes=2.")
        if not 0.0 < prevalence < 1.0:
            raise ValueError(f"`prevalence` must be in (0, 1); got {plain(prevalence)!r}.")
        target_prior = np.array([1.0 - prevalence, prevalence])
    elif season == "winter":
        target_prior = source.copy()
        target_prior[1:] *= 2.0
        target_prior[0] = 1.0 - target_prior[1:].sum()
    else:
        target_prior = None

    if target_prior is None:
        X = _features(n_samples, rng)
        proba = _summer_proba(X, n_outcomes)
        y = (proba.cumsum(axis=1) < rng.uniform(size=(n_samples, 1))).sum(axis=1)
        prior = source
    else:
        # Label shift: draw the class counts first, then parcels from each class's summer
        # distribution (rejection from a summer pool).
        counts = rng.multinomial(n_samples, target_prior)
        X_parts, y_parts = [], []
        need = counts.copy()
        while need.sum() > 0:
            m = max(4 * int(need.max() / max(source[need > 0].min(), 1e-3)), 1000)
            Xp = _features(m, rng)
            pp = _summer_proba(Xp, n_outcomes)
            yp = (pp.cumsum(axis=1) < rng.uniform(size=(m, 1))).sum(axis=1)
            for k in range(n_outcomes):
                take = np.flatnonzero(yp == k)[: need[k]]
                X_parts.append(Xp[take])
                y_parts.append(np.full(take.shape[0], k))
                need[k] -= take.shape[0]
        X = np.concatenate(X_parts)
        y = np.concatenate(y_parts)
        order = rng.permutation(n_samples)
        X, y = X[order], y[order]
        ratio = target_prior / source
        proba = _summer_proba(X, n_outcomes) * ratio
        proba /= proba.sum(axis=1, keepdims=True)
        prior = target_prior

    value = np.round(rng.lognormal(mean=3.4, sigma=0.8, size=n_samples) * (1 + 0.1 * X[:, 0]), 2)
    data: Any = X
    if as_frame:
        import pandas as pd

        data = pd.DataFrame(X, columns=list(PARCEL_FEATURES))
        for col in ("fragile", "packaging", "transfers", "stack_layer"):
            data[col] = data[col].astype(int)
    return Bunch(
        data=data,
        target=y.astype(int),
        true_proba=proba,
        parcel_value=value,
        feature_names=list(PARCEL_FEATURES),
        target_names=list(_OUTCOMES[n_outcomes]),
        prior=np.asarray(prior, dtype=float),
        source_prior=source,
    )


#: Actions of the three-way variant, in the column order of :func:`parcel_routing_costs`.
ROUTING_ACTIONS = ("ship", "repack", "hold")


def parcel_routing_costs(parcel_value: Any) -> np.ndarray:
    """Invented per-parcel costs of the three-way variant (ship / repack / hold).

    Rows of each (3, 3) matrix are the outcomes intact / dented / broken, columns the actions.
    Shipping is free when the parcel arrives intact; a dent costs 30% of the value plus 5 and a
    break the value plus 8. Repacking (4) prevents dents but not breaks; holding (12) lets
    nothing leave damaged. Demo values only.

    Parameters
    ----------
    parcel_value : array-like of shape (n,)
        Value of each parcel in currency units (``make_parcels(...).parcel_value``).

    Returns
    -------
    ndarray of shape (n, 3, 3)

    Examples
    --------
    >>> from probwrap.datasets import parcel_routing_costs
    >>> parcel_routing_costs([100.0])[0].tolist()
    [[0.0, 4.0, 12.0], [35.0, 4.0, 12.0], [108.0, 112.0, 12.0]]
    """
    value = np.asarray(parcel_value, dtype=float)
    if value.ndim != 1 or not np.all(np.isfinite(value)) or np.any(value < 0):
        raise ValueError("`parcel_value` must be a 1-d array of finite, non-negative values.")
    out = np.empty((value.shape[0], 3, 3))
    out[:, 0, :] = [0.0, 4.0, 12.0]  # intact
    out[:, 1, 0] = 0.3 * value + 5.0  # dented, shipped
    out[:, 1, 1] = 4.0  # dented, but repacked in time
    out[:, 1, 2] = 12.0
    out[:, 2, 0] = value + 8.0  # broken
    out[:, 2, 1] = value + 12.0
    out[:, 2, 2] = 12.0
    return out
