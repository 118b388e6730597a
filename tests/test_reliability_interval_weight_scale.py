"""The reliability diagram's intervals (the plot's Wilson and consistency bands; the report's
figure draws its Wilson intervals through the same ``bin_counts``) do not move with the scale of weights that are not row counts.

Before, weights summing to at least the rows were counted as they stood: weights drawn from
0.2-3 (160 rows of scikit-learn's breast cancer, a frozen logistic regression's probabilities)
times 1,000 counted 259,000 rows and narrowed every Wilson interval about 31-fold, with no
warning (benchmarks/weight_scale_hunt.py). Now they follow the calibration tests' rule
(docs/weights.md): relative, Kish's (1965) effective size ``(sum w)**2 / sum w**2`` with a
``WeightScaleWarning``. Whole-number counts still give the intervals of the rows repeated
(reference: the same diagram on ``np.repeat`` of the rows, unweighted).
"""
import warnings

import matplotlib
import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap.calibration import WeightScaleWarning
from probwrap.plot import ReliabilityDiagram

matplotlib.use("Agg")


@pytest.fixture(scope="module")
def scores():
    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    p = np.random.default_rng(0).permutation(len(y))
    X, y = X[p], y[p]
    model = LogisticRegression(C=0.3, max_iter=3000).fit(X[160:320], y[160:320])
    return y[:160], model.predict_proba(X[:160])[:, 1]


def _bands(y, p, w, band):
    import matplotlib.pyplot as plt

    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        d = ReliabilityDiagram.from_predictions(y, p, sample_weight=w, band=band, n_draws=400)
    plt.close("all")
    return np.r_[d.band_low, d.band_high], {r.category for r in rec}


@pytest.mark.parametrize("band", ["wilson", "consistency"])
def test_relative_weights_scale_free(scores, band):
    y, p = scores
    w = np.random.default_rng(1).uniform(0.2, 3.0, y.shape[0])
    base, _ = _bands(y, p, w, band)
    kish = w * (w.sum() / (w @ w))  # Kish's size, as the calibration tests read them
    for scale in (1e3, 1e-6, 1e12):
        out, cats = _bands(y, p, w * scale, band)
        np.testing.assert_allclose(out, base, atol=1e-9, equal_nan=True)
        assert WeightScaleWarning in cats
    # the Wilson interval is that of Kish's size in each bin: the n of the widest bin
    if band == "wilson":
        edges = np.linspace(0, 1, 11)
        idx = np.clip(np.searchsorted(edges, p, side="right") - 1, 0, 9)
        n_kish = np.bincount(idx, weights=kish, minlength=10)
        n_given = np.bincount(idx, weights=w, minlength=10)
        assert n_kish.sum() < n_given.sum()  # Kish's size is below the sum of these weights
        width = (base[10:] - base[:10])
        wide_bin = int(np.nanargmax(np.where(n_kish > 5, width, np.nan)))
        k = np.bincount(idx, weights=kish * y, minlength=10)[wide_bin]
        proportion_confint = pytest.importorskip(
            "statsmodels.stats.proportion").proportion_confint

        lo, hi = proportion_confint(k, n_kish[wide_bin], alpha=0.05, method="wilson")
        np.testing.assert_allclose([base[wide_bin], base[10 + wide_bin]], [lo, hi], atol=1e-9)


def test_counts_stay_counts(scores):
    y, p = scores
    c = np.random.default_rng(2).integers(1, 4, y.shape[0]).astype(float)
    got, cats = _bands(y, p, c, "wilson")
    rep, _ = _bands(np.repeat(y, c.astype(int)), np.repeat(p, c.astype(int)), None, "wilson")
    np.testing.assert_allclose(got, rep, atol=1e-12, equal_nan=True)
    assert WeightScaleWarning not in cats

