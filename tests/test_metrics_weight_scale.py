"""Calibration tests whose null distribution counts rows must not depend on the weights' scale.

Found by ``benchmarks/small_data_sweep.py`` on scikit-learn's bundled breast cancer data: with
weights normalised to sum 1, Hosmer-Lemeshow's p-value went from 0.46 (unit weights) to 0.99999
and Spiegelhalter's from 0.26 to 0.91 — a badly calibrated model would silently pass. Weights
summing to less than the number of rows cannot be row frequencies; they are rescaled to Kish's
(1965) effective sample size ``(sum w)^2 / sum w^2`` with a ``WeightScaleWarning`` (the
convention of ``probwrap.calibration._base.count_weights``). These are consistency tests.
"""

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.calibration import WeightScaleWarning
from probwrap.metrics import (
    debiased_calibration_error,
    hosmer_lemeshow_test,
    spiegelhalter_z_test,
)


@pytest.fixture(scope="module")
def held_out():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :3]  # a deliberately weak model, so the tests have something to find
    model = LogisticRegression(max_iter=1000).fit(X[:300], y[:300])
    return y[300:400], model.predict_proba(X[300:400])[:, 1]


def _values(y, p, sample_weight):
    return (
        hosmer_lemeshow_test(y, p, setting="held_out", sample_weight=sample_weight).pvalue,
        spiegelhalter_z_test(y, p, sample_weight=sample_weight).pvalue,
        debiased_calibration_error(y, p, sample_weight=sample_weight),
    )


@pytest.mark.parametrize("scale", [1.0 / 100, 1e-3])
def test_unit_weights_scaled_down_give_the_unweighted_tests(held_out, scale):
    y, p = held_out
    plain = _values(y, p, None)
    with pytest.warns(WeightScaleWarning, match="effective sample size"):
        scaled = _values(y, p, np.full(len(y), scale))
    # equal weights rescale to exactly 1 each: the same arithmetic up to rounding
    np.testing.assert_allclose(scaled, plain, rtol=1e-9)


def test_normalised_and_scaled_unequal_weights_agree(held_out):
    y, p = held_out
    w = np.random.default_rng(0).integers(1, 4, len(y)).astype(float)
    with pytest.warns(WeightScaleWarning):
        a = _values(y, p, w / w.sum())
    with pytest.warns(WeightScaleWarning):
        b = _values(y, p, w * 1e-3)
    np.testing.assert_allclose(a, b, rtol=1e-9)  # same Kish rescaling, rounding only


def test_integer_frequencies_still_count_rows(held_out):
    y, p = held_out
    w = np.random.default_rng(1).integers(1, 4, len(y))
    rows = np.repeat(np.arange(len(y)), w)
    np.testing.assert_allclose(
        _values(y, p, w.astype(float)), _values(y[rows], p[rows], None), rtol=1e-9
    )


def test_quantile_bins_do_not_move_when_weights_are_scaled():
    # Found by the small-data sweep: on bundled wine (naive Bayes, 3 classes) the quantile bin
    # edges compared cumulative weight shares exactly, so the same weights normalised to sum 1
    # or scaled by 1e-3 put a row on either side of an edge (ECE 0.076374 vs 0.076379). The
    # weights 1..3 from seed 72 hit an edge exactly.
    from sklearn.datasets import load_wine
    from sklearn.naive_bayes import GaussianNB

    from probwrap.metrics import expected_calibration_error

    X, y = load_wine(return_X_y=True)
    p = GaussianNB().fit(X[::2], y[::2]).predict_proba(X[1::2])
    y_te = y[1::2]
    w = np.random.default_rng(72).integers(1, 4, len(y_te)).astype(float)
    a = expected_calibration_error(y_te, p, strategy="quantile", sample_weight=w / w.sum())
    b = expected_calibration_error(y_te, p, strategy="quantile", sample_weight=w * 1e-3)
    c = expected_calibration_error(y_te, p, strategy="quantile", sample_weight=w)
    assert a == pytest.approx(c, rel=1e-12) and b == pytest.approx(c, rel=1e-12)  # rounding only
