"""The labelled rows' share of the variance (rho) with weighted batches counts Kish's size.

Reference: Kish (1965, Survey Sampling), effective sample size ``(sum w)^2 / sum w^2``, computed
here directly with NumPy; the weights contract of ``docs/weights.md`` (relative weights: scaling
every weight changes nothing). Data: scikit-learn's bundled breast_cancer set.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.report._alarm_chart import batch_alarm
from probwrap.shift import batch_effective_rows, labelled_share_of_variance


def _kish(w):
    return w.sum() ** 2 / np.sum(w ** 2)  # Kish 1965


@pytest.fixture(scope="module")
def fitted():
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(7)
    order = rng.permutation(len(y))
    lab, new = order[:250], order[250:]
    w_lab = rng.gamma(0.7, size=lab.size)  # skewed weights: Kish's size well below the rows
    model = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression(max_iter=500)),
                              n_resamples=0, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the pipeline itself is fitted without the weights
        model.fit(X[lab], y[lab], sample_weight=w_lab)
    return model, X[new], rng.gamma(0.5, size=new.size), w_lab


def _monitor(model, X, w):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # small-batch notes are not what is tested here
        return model.monitor(X, batch_size=80, sample_weight=w)


def test_batch_and_labelled_sizes_are_kish(fitted):
    model, X, w, w_lab = fitted
    table = _monitor(model, X, w)
    expected = [_kish(w[i:i + 80]) for i in range(0, len(w), 80)]
    np.testing.assert_allclose(table["n_effective"], expected, rtol=1e-12)
    np.testing.assert_allclose(batch_effective_rows(table), expected, rtol=1e-12)
    assert model.prior_estimator_.n_source_effective_ == pytest.approx(_kish(w_lab), rel=1e-12)
    n_s = model.prior_estimator_.n_source_effective_
    rho = labelled_share_of_variance(table, n_s)
    np.testing.assert_allclose(rho, np.array(expected) / (np.array(expected) + _kish(w_lab)),
                               rtol=1e-12)
    # the old reading (rows, whatever their weights) is far off with these weights
    assert np.all(table["n_rows"][:-1] > 1.5 * table["n_effective"][:-1])


def test_rho_does_not_change_when_all_weights_scale(fitted):
    model, X, w, _ = fitted
    n_s = model.prior_estimator_.n_source_effective_
    base = _monitor(model, X, w)
    for factor in (1e-3, 1000.0):
        scaled = _monitor(model, X, w * factor)
        np.testing.assert_allclose(labelled_share_of_variance(scaled, n_s),
                                   labelled_share_of_variance(base, n_s), rtol=1e-10)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = batch_alarm(base, float(model.source_prior_[1]), labelled_rows=n_s)
        b = batch_alarm(_monitor(model, X, w * 1000.0), float(model.source_prior_[1]),
                        labelled_rows=n_s)
    assert a.labelled_share == pytest.approx(b.labelled_share, rel=1e-10)
    assert a.labelled_share == pytest.approx(float(np.median(
        base["n_effective"] / (base["n_effective"] + n_s))), rel=1e-12)


def test_equal_weights_give_the_unweighted_rho(fitted):
    model, X, _, _ = fitted
    n_s = model.prior_estimator_.n_source_effective_
    plain = _monitor(model, X, None)
    equal = _monitor(model, X, np.full(X.shape[0], 3.0))
    np.testing.assert_array_equal(plain["n_effective"], plain["n_rows"])
    np.testing.assert_allclose(equal["n_effective"], plain["n_rows"], rtol=1e-12)
    np.testing.assert_allclose(labelled_share_of_variance(equal, n_s),
                               plain["n_rows"] / (plain["n_rows"] + n_s), rtol=1e-12)
