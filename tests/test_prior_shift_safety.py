"""Prior shift that does no harm: the no-evidence gate, the boundary warning, identity at the
source prior, weight-scale invariance, degenerate estimators, the certified EM stopping rule,
and reference checks of the new statistics (score test, BCa, penalised likelihood)."""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss

import probwrap._prior_shift as psw_module
from probwrap import PriorShiftWrapper
from probwrap.shift import (
    BoundaryPriorWarning,
    PriorEstimator,
    PriorNotIdentifiedWarning,
    adjust_to_prior,
    bca_interval,
    em_prior,
    score_interval,
    shift_score_test,
)

# Two Gaussian classes one unit-variance feature apart by DELTA: AUC = Phi(DELTA / sqrt 2)
# (binormal model), 0.74 for DELTA = 0.91 - the weak model of the collapse report.
DELTA = 0.91


def gaussian(n, prevalence, rng, delta=DELTA):
    y = (rng.uniform(size=n) < prevalence).astype(int)
    return rng.normal(size=(n, 1)) + delta * y[:, None], y


@pytest.fixture(scope="module")
def weak_model():
    X, y = gaussian(20_000, 0.05, np.random.default_rng(0))
    return FrozenEstimator(LogisticRegression().fit(X, y))


def binary_gaussian(n, prior, rng, sep=2.0):
    y = (rng.uniform(size=n) < prior).astype(int)
    x = rng.normal(sep * y - sep / 2)
    p1 = 1 / (1 + np.exp(-sep * x))  # exact posterior under equal priors
    return np.column_stack([1 - p1, p1]), y


# -- do no harm --------------------------------------------------------------------------------
def test_collapse_case_does_not_move_predictions_beyond_the_interval(weak_model):
    # Weak model (AUC about 0.74), 5 % prevalence, no shift, 2,000 labelled and 2,000
    # unlabelled rows: a draw on which the maximum-likelihood prior collapses to 0 (seed found
    # by search). The report saw the wrapper re-weight to about 0 and double the log loss.
    rng = np.random.default_rng(32)
    X, y = gaussian(2000, 0.05, rng)
    X_new, _ = gaussian(2000, 0.05, rng)
    model = PriorShiftWrapper(weak_model, random_state=0).fit(X, y)
    before = model.predict_proba(X_new)
    with pytest.warns(BoundaryPriorWarning, match="separates the classes weakly"):
        model.adapt(X_new)
    assert model.prior_estimate_.ml_prior[1] == 0.0  # the collapse is there ...
    lo, hi = model.target_prior_interval_[1]
    assert lo <= 0.05 <= hi  # ... the interval is honest about it ...
    # ... the evidence (statistic 3.4, p = 0.07) is weak, so the predictions move by a small
    # share of the way, and stay between the predictions at the interval's ends
    assert model.shift_pvalue_ >= 0.05 and 0 <= model.adaptation_weight_ < 0.5
    lo_a, hi_a = (adjust_to_prior(model.prior_estimator_.calibrate_output(
        model.estimator_.predict_proba(X_new)), model.source_prior_, [1 - v, v])[:, 1]
        for v in (lo, hi))
    after = model.predict_proba(X_new)[:, 1]
    assert np.all(after >= lo_a - 1e-12) and np.all(after <= hi_a + 1e-12)
    assert lo <= model.applied_prior_[1] <= hi
    # The estimate applied in full also moves the predictions only within the interval.
    eager = PriorShiftWrapper(weak_model, min_evidence=0, max_harm=None, random_state=0).fit(X, y)
    with pytest.warns(BoundaryPriorWarning):
        eager.adapt(X_new)
    moved = eager.predict_proba(X_new)[:, 1]
    src = eager.source_prior_
    cal = eager.prior_estimator_.calibrate_output(eager.estimator_.predict_proba(X_new))
    at_lo = adjust_to_prior(cal, src, [1 - lo, lo])[:, 1]
    at_hi = adjust_to_prior(cal, src, [1 - hi, hi])[:, 1]
    assert lo <= eager.target_prior_[1] <= hi and eager.adaptation_weight_ == 1.0
    assert np.all(moved >= at_lo - 1e-12) and np.all(moved <= at_hi + 1e-12)
    np.testing.assert_allclose(before[:, 1], eager.prior_estimator_.calibrate_output(
        eager.estimator_.predict_proba(X_new))[:, 1])


def test_predictions_do_not_move_without_evidence():
    # Statistic at or below evidence_cutoff_ * (k - 1): exactly the calibrated posteriors.
    rng = np.random.default_rng(31)
    p_lab, y_lab = binary_gaussian(2000, 0.3, rng, sep=1.5)
    X = np.log(p_lab[:, 1:] / p_lab[:, :1])  # one feature whose logistic fit is the posterior
    fitted = PriorShiftWrapper(LogisticRegression(), cv=3, random_state=0).fit(X, y_lab)
    for seed in range(6):
        p_new, _ = binary_gaussian(1500, 0.3, np.random.default_rng(100 + seed), sep=1.5)
        X_new = np.log(p_new[:, 1:] / p_new[:, :1])
        model = copy.deepcopy(fitted)  # each batch adapts a wrapper that has not adapted yet
        before = model.predict_proba(X_new)
        model.adapt(X_new)
        c = model.evidence_cutoff_
        assert c >= model.min_evidence
        if model.shift_statistic_ <= c:
            assert not model.shift_detected_ and model.adaptation_weight_ == 0.0
            np.testing.assert_array_equal(model.predict_proba(X_new), before)
        else:
            expected = 1 - c / model.shift_statistic_
            assert model.adaptation_weight_ == pytest.approx(expected, rel=1e-12)


def test_no_evidence_keeps_predictions_and_evidence_moves_them(weak_model):
    rng = np.random.default_rng(3)
    X, y = gaussian(3000, 0.05, rng)
    model = PriorShiftWrapper(weak_model, random_state=0).fit(X, y)
    before = model.predict_proba(X[:200])
    X_same, _ = gaussian(3000, 0.05, rng)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BoundaryPriorWarning)
        model.adapt(X_same)
    if not model.shift_detected_:  # the usual outcome without shift
        np.testing.assert_array_equal(model.predict_proba(X[:200]), before)
    X_more, _ = gaussian(5000, 0.25, rng)
    model.adapt(X_more)
    assert model.shift_detected_ and model.shift_pvalue_ < 1e-6
    w = model.adaptation_weight_
    assert w > 0.9
    np.testing.assert_allclose(
        model.applied_prior_, model.source_prior_ + w * (model.target_prior_ - model.source_prior_)
    )
    assert not np.allclose(model.predict_proba(X[:200]), before)


def test_null_harm_is_scipy_chi_square_expectation():
    # Reference: SciPy's numerical expectation over the chi-square distribution, and the
    # chi-square mean (cutoff 0 leaves the estimate untouched: E[T] = df).
    from scipy.stats import chi2

    from probwrap.shift._shift_tests import null_harm

    for df in (1, 2, 4):
        assert null_harm(0.0, df) == df
        for c in (0.5, 1.0, 2.0, 3.5):
            a = c * df
            ref = chi2(df).expect(lambda t, a=a: (t - a) ** 2 / t, lb=a)
            assert null_harm(c, df) == pytest.approx(ref, rel=1e-8)  # two quadratures
    # and it falls with the cutoff (what the root-finding in evidence_cutoff relies on)
    values = [null_harm(c, 1) for c in np.linspace(0, 8, 17)]
    assert np.all(np.diff(values) < 0)


def test_harm_scale_is_the_log_loss_curvature_over_the_estimate_variance():
    # Consistency test of the second-order formula: the excess log loss (expected under the
    # calibrated posteriors themselves) of re-weighting by a small change d of the prior is
    # 1/2 K d^2, with K = E[p(1-p)] / (pi0 pi1)^2 for two classes.
    from probwrap.shift._shift_tests import null_harm_scale

    rng = np.random.default_rng(8)
    p, _ = binary_gaussian(4000, 0.1, rng, sep=1.0)
    src = np.array([0.9, 0.1])
    w = np.ones(p.shape[0])
    var = 2.5e-5  # covariance of the mean score difference (any positive number)
    scale = null_harm_scale(p, w, src, np.array([[var]]))
    ent = -np.sum(p * np.log(p), axis=1).mean()
    j = np.mean((p[:, 1] / src[1] - p[:, 0] / src[0]) ** 2)
    d = 1e-3
    moved = adjust_to_prior(p, src, [src[0] - d, src[1] + d])
    excess = np.mean(np.sum(p * (np.log(p) - np.log(moved)), axis=1))  # KL, per row
    curvature = 2 * excess / d**2
    # scale = 1/2 K sigma^2 / L0 with sigma^2 = var / J^2; third-order term is O(d): 1 %
    assert scale == pytest.approx(0.5 * curvature * var / j**2 / ent, rel=1e-2)


def test_harm_reference_is_the_smaller_of_entropy_and_labelled_log_loss():
    # Reference for the labelled loss: scikit-learn's log_loss with sample weights (and it
    # does not depend on the weights' scale). The harm scale is lambda / (2 L0): with the
    # labelled rows' loss below the posteriors' mean entropy it is that much larger, above it
    # unchanged (consistency test of the rule in null_harm_scale's docstring).
    from probwrap.shift._shift_tests import labelled_log_loss, null_harm_scale

    rng = np.random.default_rng(21)
    p, y = binary_gaussian(500, 0.3, rng, sep=1.0)
    w = rng.integers(1, 4, size=500).astype(float)
    ll = labelled_log_loss(p, y, w)
    assert ll == pytest.approx(log_loss(y, p, sample_weight=w), rel=1e-12)
    assert labelled_log_loss(p, y, w * 1e-3) == pytest.approx(ll, rel=1e-12)
    src = np.array([0.7, 0.3])
    v = np.array([[1e-4]])
    ent = float(w @ -np.sum(p * np.log(p), axis=1) / w.sum())
    plain = null_harm_scale(p, w, src, v)
    assert null_harm_scale(p, w, src, v, reference_loss=ent / 2) == pytest.approx(2 * plain,
                                                                                   rel=1e-12)
    assert null_harm_scale(p, w, src, v, reference_loss=2 * ent) == plain


def test_twenty_labelled_rows_on_bundled_breast_cancer_move_less_when_they_fit_well(monkeypatch):
    # scikit-learn's bundled breast cancer data (malignant = 1), a logistic regression fitted on
    # a quarter of the rows and frozen, 20 labelled rows, the other rows unlabelled: no shift.
    # On these draws the calibrated posteriors' mean entropy on the unlabelled rows was 3.2-6.5x
    # the labelled rows' own log loss, so the harm relative to the entropy looked small, the
    # gate kept its floor cutoff 1 and adapt cost 3.6-16 % of the log loss (ratios 1.144,
    # 1.057, 1.036, 1.161 before the labelled loss became the reference). Relative to the
    # labelled loss the cutoff rises and the cost stays within 4 % (target of the tiny-set
    # benchmark: 2 % on a cell's mean; 4 %: a single draw, whose own noise is larger).
    from sklearn.datasets import load_breast_cancer
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    idx = np.random.default_rng(0).permutation(len(y))
    fit, pool = idx[:142], idx[142:]
    model = FrozenEstimator(make_pipeline(StandardScaler(), LogisticRegression(max_iter=300))
                            .fit(X[fit], y[fit]))
    for seed in (205, 210, 236, 239):
        lab = np.random.default_rng(seed).choice(pool, 20, replace=False)
        new = np.setdiff1d(pool, lab)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # 3 rows of a class on one draw: warned, as it should
            wrapper = PriorShiftWrapper(model, n_resamples=0).fit(X[lab], y[lab])
        none = log_loss(y[new], wrapper.predict_proba(X[new]))
        ratios, capped = [], []
        for reference in (None, wrapper.prior_estimator_._source_log_loss):
            wrapper.prior_estimator_._source_log_loss = reference
            for level, out in ((2.0, ratios), (psw_module.NO_SHIFT_HARM_PVALUE, capped)):
                # the average-harm rule alone (level 2: the per-draw cap of session 23 never
                # applies), then with the cap
                with monkeypatch.context() as m, warnings.catch_warnings():
                    m.setattr(psw_module, "NO_SHIFT_HARM_PVALUE", level)
                    warnings.simplefilter("ignore")
                    wrapper.adapt(X[new])
                out.append(log_loss(y[new], wrapper.predict_proba(X[new])) / none)
        assert wrapper.evidence_cutoff_ > 2.0
        assert ratios[1] <= 1.04
        # the per-draw cap (shift test p >= 0.10) changes neither rule where p < 0.10 (draws
        # 205 and 239: p = 0.043, 0.059) and holds the entropy-only rule's move on draw 236
        # (p = 0.12; w 0.58 -> 0.03, 1.057 -> 1.001)
        if wrapper.shift_pvalue_ < 0.10:
            assert capped == pytest.approx(ratios, abs=1e-12)
        else:
            assert max(capped) <= 1.02 and capped[1] <= ratios[1] + 1e-12
        # on draw 239 (3 labelled rows of class 1) EM's estimate lies far beyond the one-step
        # estimate, and the harm bound's growth for that (estimate_amplification) already holds
        # the entropy-only rule (0.991, was 1.161); on the others the reference is what helps.
        # Since the calibration keeps the order of the scores beyond its floor where that
        # cross-validates better (choose_tail; chosen on all four draws) the entropy-only rule
        # costs 1.161 / 1.015 / 1.050 on draws 205 / 210 / 236 (1.144 / 1.052 / 1.036 with the
        # flat floor): draw 210 no longer shows the case
        if seed in (205, 236):
            assert ratios[0] > 1.03 and ratios[1] < ratios[0]
        elif seed == 210:
            assert ratios[1] <= ratios[0]

def test_cutoff_rises_only_where_no_shift_would_be_harmed(weak_model):
    # A weak model at a small prevalence: its rows say little about the prior while every
    # prediction reacts to it, so the cutoff rises above min_evidence; a strong model at
    # 30 % keeps it at the floor. The expected harm at the chosen cutoff is max_harm.
    from probwrap.shift._shift_tests import null_harm

    rng = np.random.default_rng(5)
    X, y = gaussian(2000, 0.02, rng, delta=0.74)
    X_new, _ = gaussian(2000, 0.02, rng, delta=0.74)
    weak = PriorShiftWrapper(weak_model, random_state=0).fit(X, y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BoundaryPriorWarning)
        weak.adapt(X_new)
    scale = weak.prior_estimate_.null_harm_scale
    assert weak.evidence_cutoff_ > 2.0
    assert scale * null_harm(weak.evidence_cutoff_, 1) == pytest.approx(0.01, rel=1e-4)
    loose = PriorShiftWrapper(weak_model, max_harm=None, random_state=0).fit(X, y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BoundaryPriorWarning)
        loose.adapt(X_new)
    assert loose.evidence_cutoff_ == 1.0
    X_s, y_s = gaussian(2000, 0.3, rng, delta=2.5)
    strong_model = FrozenEstimator(LogisticRegression().fit(*gaussian(5000, 0.3, rng, delta=2.5)))
    strong = PriorShiftWrapper(strong_model, random_state=0).fit(X_s, y_s)
    strong.adapt(gaussian(2000, 0.3, rng, delta=2.5)[0])
    assert strong.evidence_cutoff_ == 1.0
    with pytest.raises(ValueError, match="max_harm"):
        PriorShiftWrapper(weak_model, max_harm=0.0).fit(X, y)


def test_map_estimate_lies_between_source_and_maximum_likelihood():
    rng = np.random.default_rng(4)
    p_src, y_src = binary_gaussian(1000, 0.5, rng, sep=1.0)
    p_new, _ = binary_gaussian(500, 0.3, rng, sep=1.0)
    res = PriorEstimator(n_resamples=0).fit(p_src, y_src).estimate(p_new)
    ml, src = res.ml_prior[1], 0.5
    assert min(ml, src) < res.prior[1] < max(ml, src)
    plain = PriorEstimator(n_resamples=0, prior_strength=0.0).fit(p_src, y_src).estimate(p_new)
    assert plain.prior[1] == pytest.approx(ml, abs=1e-9)


# -- identity at the source prior and one calibration rule ------------------------------------
def test_target_prior_equal_to_source_prior_is_exactly_the_untargeted_output():
    rng = np.random.default_rng(5)
    X, y = gaussian(1500, 0.3, rng, delta=1.5)
    base = PriorShiftWrapper(LogisticRegression(), n_resamples=0, random_state=0).fit(X, y)
    same = PriorShiftWrapper(
        LogisticRegression(), target_prior=base.source_prior_, n_resamples=0, random_state=0
    ).fit(X, y)
    dict_prior = dict(zip(base.classes_.tolist(), base.source_prior_.tolist(), strict=True))
    same_dict = PriorShiftWrapper(
        LogisticRegression(), target_prior=dict_prior, n_resamples=0, random_state=0
    ).fit(X, y)
    X_new, _ = gaussian(300, 0.6, rng, delta=1.5)
    np.testing.assert_array_equal(same.predict_proba(X_new), base.predict_proba(X_new))
    np.testing.assert_array_equal(same_dict.predict_proba(X_new), base.predict_proba(X_new))
    # adapt never switches the calibration: at any applied prior the output is the calibrated
    # posteriors re-weighted (consistency test against adjust_to_prior)
    base.adapt(X_new)
    cal = base.prior_estimator_.calibrate_output(base.estimator_.predict_proba(X_new))
    np.testing.assert_allclose(
        base.predict_proba(X_new), adjust_to_prior(cal, base.source_prior_, base.applied_prior_),
        atol=1e-15,
    )


# -- weights -----------------------------------------------------------------------------------
def test_weight_scale_changes_nothing():
    rng = np.random.default_rng(6)
    p_src, y_src = binary_gaussian(800, 0.3, rng, sep=1.2)
    p_new, _ = binary_gaussian(600, 0.45, rng, sep=1.2)
    ws = rng.uniform(0.2, 3.0, size=800)
    wt = rng.uniform(0.2, 3.0, size=600)
    out = []
    for c in (1.0, 1e-3, "sum1"):
        cs = 1 / ws.sum() if c == "sum1" else c
        ct = 1 / wt.sum() if c == "sum1" else c
        for interval in ("score", "bca"):
            est = PriorEstimator(n_resamples=60, random_state=0, interval=interval)
            res = est.fit(p_src, y_src, ws * cs).estimate(p_new, wt * ct)
            out.append((interval, res))
    for interval in ("score", "bca"):
        runs = [r for i, r in out if i == interval]
        # scaled by 1e-3 or to sum 1, the weights cannot be row frequencies and count as Kish's
        # effective size either way: identical fits. The optimiser stops at points ~1e-9 apart
        # when weights of another scale round differently (observed 1.03e-9 with NumPy 1.26 /
        # SciPy 1.12), hence atol 1e-8; without the effective-size rule the estimates differ by
        # orders of magnitude more.
        ref, r = runs[1], runs[2]
        np.testing.assert_allclose(r.prior, ref.prior, rtol=0, atol=1e-8)
        np.testing.assert_allclose(r.interval, ref.interval, rtol=1e-7, atol=1e-10)
        assert r.shift_pvalue == pytest.approx(ref.shift_pvalue, rel=1e-6)
        # as given, the weights sum to ~1,280 over 800 rows: row frequencies, 1,280 rows for the
        # calibration's weak prior (five rows) instead of Kish's ~650. That moves the prior's
        # strength by a few thousandths of a row per row of the fit: the estimate by ~1e-4
        # (observed 1.02e-4; 1.1e-5 with a prior of half a row).
        np.testing.assert_allclose(runs[0].prior, ref.prior, rtol=0, atol=5e-4)
        np.testing.assert_allclose(runs[0].interval, ref.interval, rtol=0, atol=1e-3)


def test_weight_scale_changes_nothing_in_the_wrapper(weak_model):
    rng = np.random.default_rng(7)
    X, y = gaussian(1500, 0.1, rng)
    X_new, _ = gaussian(1000, 0.2, rng)
    w = rng.uniform(0.5, 2.0, size=1000)
    fits = [PriorShiftWrapper(weak_model, random_state=0).fit(X, y).adapt(X_new, sample_weight=w * c)
            for c in (1.0, 1e-3, 1 / w.sum())]
    for m in fits[1:]:
        np.testing.assert_allclose(m.target_prior_, fits[0].target_prior_, rtol=1e-9)
        np.testing.assert_allclose(m.target_prior_interval_, fits[0].target_prior_interval_,
                                   rtol=1e-7)
        assert m.shift_pvalue_ == pytest.approx(fits[0].shift_pvalue_, rel=1e-9)
        # the cutoff and the share applied (hence the predictions) do not move either
        assert m.evidence_cutoff_ == pytest.approx(fits[0].evidence_cutoff_, rel=1e-6)
        assert m.adaptation_weight_ == pytest.approx(fits[0].adaptation_weight_, abs=1e-7)


def test_dropped_resamples_are_counted_and_reported():
    rng = np.random.default_rng(8)
    p_src, y_src = binary_gaussian(300, 0.5, rng)
    y_src[:] = 0
    y_src[:2] = 1  # two labelled rows of class 1: Poisson resamples lose both in ~14 %
    p_new, _ = binary_gaussian(300, 0.5, rng)
    est = PriorEstimator(n_resamples=100, random_state=0, interval="bca").fit(p_src, y_src)
    with pytest.warns(UserWarning, match="bootstrap resamples were dropped"):
        res = est.estimate(p_new)
    # P(both Poisson(1) draws are 0) = exp(-2) = 0.135: expect about 13.5 of 100
    assert 4 <= res.n_dropped <= 25



def test_every_resample_dropped_gives_the_whole_range_and_says_so():
    # One labelled row of class 1: a Poisson(1) resample loses it with probability e^-1, so
    # with 3 resamples some seed among the first 200 drops it in all three. Then the interval
    # is [0, 1] for every class, and two warnings say how many were dropped and why.
    rng = np.random.default_rng(8)
    p_src, y_src = binary_gaussian(200, 0.5, rng)
    y_src[:] = 0
    y_src[0] = 1
    p_new, _ = binary_gaussian(200, 0.5, rng)
    for seed in range(200):
        est = PriorEstimator(n_resamples=3, random_state=seed, interval="percentile")
        est.fit(p_src, y_src)
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always")
            res = est.estimate(p_new)
        if res.n_dropped == 3:
            break
    else:  # pragma: no cover - P(no seed of 200 drops all three) = (1 - e^-3)^200 < 1e-4
        pytest.fail("no seed dropped every resample")
    messages = " ".join(str(r.message) for r in rec)
    assert "3 of 3 bootstrap resamples were dropped" in messages
    assert "Every bootstrap resample was dropped" in messages
    np.testing.assert_array_equal(res.interval, [[0, 1], [0, 1]])


def test_wrapper_reports_dropped_resamples():
    rng = np.random.default_rng(8)
    p_src, y_src = binary_gaussian(300, 0.5, rng)
    y_src[:] = 0
    y_src[:2] = 1
    p_new, _ = binary_gaussian(300, 0.5, rng)
    X = np.log(p_src[:, 1:] / p_src[:, :1])
    X_new = np.log(p_new[:, 1:] / p_new[:, :1])
    model = PriorShiftWrapper(FrozenEstimator(LogisticRegression().fit(X, (X[:, 0] > 0))),
                              interval="bca", n_resamples=100, random_state=0).fit(X, y_src)
    with pytest.warns(UserWarning, match="bootstrap resamples were dropped"):
        model.adapt(X_new)
    assert model.n_dropped_resamples_ == model.prior_estimate_.n_dropped
    # P(both Poisson(1) draws are 0) = exp(-2) = 0.135: expect about 13.5 of 100
    assert 4 <= model.n_dropped_resamples_ <= 25


def test_boundary_warning_blames_few_rows_when_the_model_separates_well():
    # A strong model (classes 4 standard deviations apart), source prevalence 50 %, and 30
    # unlabelled rows all of class 1: each row is worth about a labelled row (its score is
    # about +-2 at the source prior, information 4 against 1 / (0.5 * 0.5) = 4 for a labelled
    # row), so the maximum-likelihood share of 1 is put down to the few rows, not to weak
    # separation.
    # (Since 4 December 2026 an estimate without an interval, n_resamples=0, is judged by the
    # likelihood-ratio region of the shares: 30 such rows reject the source share firmly
    # (p = 1.3e-7), and the warning says the edge is a finding; 5 rows (p = 0.085) do not, and
    # it puts the edge down to the few rows.)
    rng = np.random.default_rng(12)
    p_src, y_src = binary_gaussian(2000, 0.5, rng, sep=4.0)
    p_new, _ = binary_gaussian(30, 1.0, rng, sep=4.0)
    est = PriorEstimator(n_resamples=0).fit(p_src, y_src)
    with pytest.warns(BoundaryPriorWarning, match="Read the edge as a finding"):
        res = est.estimate(p_new)
    assert res.ml_prior[1] >= 1 - 1e-3 * (1 - est.source_prior_[1])
    assert res.prior[1] < res.ml_prior[1]  # the reported (MAP) prior is shrunk off the edge
    rng = np.random.default_rng(12)
    p_src, y_src = binary_gaussian(2000, 0.5, rng, sep=4.0)
    p_new, _ = binary_gaussian(5, 1.0, rng, sep=4.0)
    est = PriorEstimator(n_resamples=0).fit(p_src, y_src)
    with pytest.warns(BoundaryPriorWarning, match="there are few rows"):
        res = est.estimate(p_new)
    assert res.ml_prior[1] >= 1 - 1e-3 * (1 - est.source_prior_[1])
    assert res.prior[1] < res.ml_prior[1] and res.pseudo_rows == 20.0

# -- degenerate estimators ---------------------------------------------------------------------
@pytest.mark.parametrize("method", ["acc", "pacc", "bbse", "bbse_soft"])
def test_degenerate_confusion_matrix_warns_and_does_not_pretend(method, weak_model):
    # Weak model at 5 %: the argmax is always class 0, so hard tpr = fpr = 0 (ACC / BBSE have
    # nothing to invert); the report saw ACC return exactly 0.500 with [0.48, 0.52].
    rng = np.random.default_rng(9)
    X, y = gaussian(2000, 0.05, rng)
    X_new, _ = gaussian(2000, 0.05, rng)
    # (the soft rates differ, 0.11 against 0.04, but by only about two standard errors of
    # the 100 labelled positives: not identified either)
    model = PriorShiftWrapper(weak_model, method=method, random_state=0).fit(X, y)
    before = model.predict_proba(X_new)
    with pytest.warns(PriorNotIdentifiedWarning, match="cannot identify"):
        model.adapt(X_new)
    np.testing.assert_allclose(model.target_prior_, model.source_prior_, atol=1e-12)
    np.testing.assert_array_equal(model.target_prior_interval_, [[0, 1], [0, 1]])
    assert not model.shift_detected_
    np.testing.assert_array_equal(model.predict_proba(X_new), before)


def test_nearly_equal_rates_are_not_identified():
    # tpr 0.52 vs fpr 0.50 on 200 + 200 labelled rows: the gap 0.02 is under one standard
    # error (about 0.05), so ACC must not return (q - fpr) / (tpr - fpr) as a finding.
    confusion = np.array([[0.5 * 0.50, 0.5 * 0.48], [0.5 * 0.50, 0.5 * 0.52]])
    proba = np.array([[0.4, 0.6]] * 51 + [[0.6, 0.4]] * 49)
    from probwrap.shift import acc_prior

    with pytest.warns(PriorNotIdentifiedWarning, match="standard error"):
        res = acc_prior(proba, confusion, n_source=400)
    assert not res.identified and res.prior == pytest.approx([0.5, 0.5])
    assert acc_prior(proba, confusion).identified  # without n_source: not exactly singular


# -- EM / Newton stopping ----------------------------------------------------------------------
def _penalised_negloglik(pi, p, w, src, strength):
    mix = (p / src) @ pi
    return -(w @ np.log(mix) + np.sum(strength * src * np.log(pi)))


def test_binary_estimate_is_within_its_certified_distance_of_scipy_optimum():
    # Reference: the root of the penalised log-likelihood's derivative by SciPy's brentq
    # (xtol 1e-14), cross-checked by minimize_scalar on the likelihood itself; the estimate
    # must lie within the distance it reports.
    from scipy.optimize import brentq, minimize_scalar

    rng = np.random.default_rng(10)
    p, _ = binary_gaussian(3000, 0.08, rng, sep=0.9)
    src = np.array([0.5, 0.5])
    d, a = p[:, 1] / src[1] - p[:, 0] / src[0], p[:, 0] / src[0]
    for strength in (0.0, 20.0):
        res = em_prior(p, src, tol=1e-9, prior_strength=strength)

        def slope(t, c=strength):
            return np.sum(d / (a + t * d)) + c * src[1] / t - c * src[0] / (1 - t)

        root = brentq(slope, 1e-9, 1 - 1e-9, xtol=1e-14)
        assert res.converged and res.distance <= 1e-9
        assert abs(res.prior[1] - root) <= res.distance + 1e-12
        ref = minimize_scalar(
            lambda t, c=strength: _penalised_negloglik(np.array([1 - t, t]), p, np.ones(3000),
                                                       src, c),
            bounds=(1e-12, 1 - 1e-12), method="bounded", options={"xatol": 1e-12},
        )
        assert abs(res.prior[1] - ref.x) < 1e-7  # minimize_scalar is only ~sqrt(eps) sharp


def test_multiclass_em_fixed_point_matches_scipy_and_the_bound_holds():
    # Reference: scipy.optimize.minimize (SLSQP on the simplex) of the penalised
    # log-likelihood. A small class makes plain EM crawl: the old rule (step < tol) stopped
    # about 1000 x tol short of the fixed point; the distance bound does not.
    from scipy.optimize import minimize

    rng = np.random.default_rng(11)
    k, n = 3, 4000
    y = rng.choice(k, size=n, p=[0.6, 0.39, 0.01])
    centres = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 0.8]])
    x = centres[y] + rng.normal(size=(n, 2))
    logits = x @ centres.T - 0.5 * np.sum(centres**2, axis=1)
    p = np.exp(logits) / np.exp(logits).sum(axis=1, keepdims=True)  # equal-prior posteriors
    src = np.full(k, 1 / k)
    for strength in (0.0, 10.0):
        res = em_prior(p, src, tol=1e-8, max_iter=100_000, prior_strength=strength)
        ref = minimize(
            lambda v, c=strength: _penalised_negloglik(np.abs(v) / np.abs(v).sum(), p,
                                                       np.ones(n), src, c),
            res.prior, method="SLSQP", bounds=[(1e-12, 1)] * k,
            constraints=[{"type": "eq", "fun": lambda v: v.sum() - 1}],
            options={"ftol": 1e-15, "maxiter": 500},
        )
        pi_ref = ref.x / ref.x.sum()
        assert res.converged
        assert np.max(np.abs(res.prior - pi_ref)) <= max(res.distance, 1e-8) + 1e-6


def test_iteration_cap_reports_the_distance():
    rng = np.random.default_rng(12)
    p, _ = binary_gaussian(500, 0.2, rng, sep=0.5)
    p3 = np.column_stack([p * 0.5, np.full(500, 0.5)])
    with pytest.warns(Warning, match="may be up to"):
        res = em_prior(p3, [0.3, 0.3, 0.4], max_iter=2)
    assert not res.converged and res.distance > 0


# -- reference checks of the new statistics ----------------------------------------------------
def test_two_class_score_test_is_statsmodels_welch_t_test():
    # Reference: statsmodels CompareMeans(...).ttest_ind(usevar="unequal") (Welch 1947, with
    # Satterthwaite's degrees of freedom) on the per-row scores u = p1 / pi1 - p0 / pi0 of both
    # samples (weights rescaled to Kish's count, which DescrStatsW reads as frequency weights):
    # for two classes the F approximation of shift_score_test is exactly Welch's t-test.
    ws_mod = pytest.importorskip("statsmodels.stats.weightstats")
    from scipy.stats import chi2

    rng = np.random.default_rng(13)
    for n_s in (700, 25):  # many labelled rows, and few (where the t reference matters)
        p_s, _ = binary_gaussian(n_s, 0.4, rng, sep=1.0)
        p_t, _ = binary_gaussian(500, 0.5, rng, sep=1.0)
        src = np.array([0.55, 0.45])
        w_s, w_t = rng.uniform(0.3, 2.0, n_s), rng.uniform(0.3, 2.0, 500)
        for weighted in (False, True):
            a = shift_score_test(p_t, src, sample_weight=w_t if weighted else None,
                                 source_proba=p_s, variance="separate",
                                 source_sample_weight=w_s if weighted else None)
            u_t = p_t[:, 1] / src[1] - p_t[:, 0] / src[0]
            u_s = p_s[:, 1] / src[1] - p_s[:, 0] / src[0]
            if weighted:
                kt = w_t * w_t.sum() / np.dot(w_t, w_t)
                ks = w_s * w_s.sum() / np.dot(w_s, w_s)
            else:
                kt, ks = np.ones(500), np.ones(n_s)
            cm = ws_mod.CompareMeans(ws_mod.DescrStatsW(u_t, weights=kt),
                                     ws_mod.DescrStatsW(u_s, weights=ks))
            t, pval, dof = cm.ttest_ind(usevar="unequal")
            assert a.raw_statistic == pytest.approx(t**2, rel=1e-10)
            assert a.pvalue == pytest.approx(pval, rel=1e-8)
            assert a.denominator_df == pytest.approx(dof, rel=1e-10)
            # reported on the chi-square scale: the chi-square quantile at the same p-value
            assert a.statistic == pytest.approx(chi2.isf(pval, 1), rel=1e-8)
            assert a.statistic <= a.raw_statistic


def test_two_class_pooled_score_test_is_students_t_test():
    # Reference: scipy.stats.ttest_ind(equal_var=True) (Student's two-sample t-test) on the
    # per-row scores u = p1 / pi1 - p0 / pi0 of both samples, unweighted; with weights,
    # statsmodels CompareMeans(...).ttest_ind(usevar="pooled") with the weights rescaled to
    # Kish's count. The default variance of shift_score_test without source_y pools the two
    # samples' score variance: under "no shift" both samples come from one population.
    ws_mod = pytest.importorskip("statsmodels.stats.weightstats")
    from scipy.stats import chi2, ttest_ind

    rng = np.random.default_rng(43)
    for n_s in (700, 25):
        p_s, _ = binary_gaussian(n_s, 0.4, rng, sep=1.0)
        p_t, _ = binary_gaussian(500, 0.5, rng, sep=1.0)
        src = np.array([0.55, 0.45])
        u_t = p_t[:, 1] / src[1] - p_t[:, 0] / src[0]
        u_s = p_s[:, 1] / src[1] - p_s[:, 0] / src[0]
        a = shift_score_test(p_t, src, source_proba=p_s)
        ref = ttest_ind(u_t, u_s, equal_var=True)
        assert a.raw_statistic == pytest.approx(ref.statistic**2, rel=1e-10)
        assert a.pvalue == pytest.approx(ref.pvalue, rel=1e-8)
        assert a.denominator_df == pytest.approx(500 + n_s - 2, rel=1e-12)
        assert a.statistic == pytest.approx(chi2.isf(ref.pvalue, 1), rel=1e-8)
        w_s, w_t = rng.uniform(0.3, 2.0, n_s), rng.uniform(0.3, 2.0, 500)
        b = shift_score_test(p_t, src, sample_weight=w_t, source_proba=p_s,
                             source_sample_weight=w_s, variance="pooled")
        kt = w_t * w_t.sum() / np.dot(w_t, w_t)
        ks = w_s * w_s.sum() / np.dot(w_s, w_s)
        cm = ws_mod.CompareMeans(ws_mod.DescrStatsW(u_t, weights=kt),
                                 ws_mod.DescrStatsW(u_s, weights=ks))
        t, pval, dof = cm.ttest_ind(usevar="pooled")
        assert b.raw_statistic == pytest.approx(t**2, rel=1e-10)
        assert b.pvalue == pytest.approx(pval, rel=1e-8)
        assert b.denominator_df == pytest.approx(dof, rel=1e-10)
    with pytest.raises(ValueError, match="source_y"):
        shift_score_test(p_t, src, source_proba=p_s, source_y=(p_s[:, 1] > 0.5).astype(int),
                         variance="pooled")
    with pytest.raises(ValueError, match="variance"):
        shift_score_test(p_t, src, source_proba=p_s, variance="welch")


def test_pooled_variance_holds_its_size_with_few_skewed_labelled_rows():
    # Few labelled rows (20) of a skewed score (log-normal, as the score of a rare class is):
    # their own variance is underestimated in most draws, and the separate-variance test
    # over-rejects even with its t reference; under "no shift" both samples share one
    # population, and the variance pooled over both holds the 5 % level. Tolerance: 1,000
    # draws, binomial sd of a 5 % rate 0.7 points; the pooled band is about 3 sd wide (it
    # measures 3.7 %: the t reference is slightly conservative for a skewed mean), and the
    # separate variance measures 11.3 %.
    from probwrap.shift._shift_tests import _mean_cov, _score_stat_moments, _source_moments

    rng = np.random.default_rng(44)
    pooled = separate = 0
    for _ in range(1000):
        u_t = rng.lognormal(0.0, 1.0, size=(600, 1))
        u_s = rng.lognormal(0.0, 1.0, size=(20, 1))
        target = _mean_cov(u_t, np.ones(600))
        source = _source_moments(u_s, np.ones(20), None, np.full(2, 0.5))
        pooled += _score_stat_moments(target, source, 2, pooled=True).pvalue < 0.05
        separate += _score_stat_moments(target, source, 2).pvalue < 0.05
    assert 0.025 <= pooled / 1000 <= 0.065
    assert separate / 1000 >= 0.09


def test_multiclass_f_reference_holds_its_size_where_chi_square_does_not():
    # The F approximation of the multivariate Behrens-Fisher problem (Krishnamoorthy & Yu 2004)
    # checked by simulation: normal score vectors (p = 4) with unequal covariances, 30 labelled
    # rows against 400 unlabelled. Under equal means the F reference rejects at about 5 %, the
    # chi-square reference of the same statistic clearly more (a covariance estimated from 30
    # rows has heavy tails). Tolerance: 600 draws, binomial sd of a 5 % rate 0.9 points; the
    # F band is about 3 sd wide, and chi-square measures ~11 %.
    from scipy.stats import chi2

    from probwrap.shift._shift_tests import _mean_cov, _score_stat_moments, _source_moments

    rng = np.random.default_rng(31)
    scale_s = np.diag([1.0, 2.0, 0.5, 3.0])
    f_rej = chi_rej = 0
    for _ in range(600):
        u_t = rng.normal(size=(400, 4))
        u_s = rng.normal(size=(30, 4)) @ scale_s
        res = _score_stat_moments(_mean_cov(u_t, np.ones(400)),
                                  _source_moments(u_s, np.ones(30), None, np.full(5, 0.2)), 5)
        f_rej += res.pvalue < 0.05
        chi_rej += chi2.sf(res.raw, 4) < 0.05
    assert 0.03 <= f_rej / 600 <= 0.075
    assert chi_rej / 600 >= 0.085


def test_score_test_rejects_at_about_its_nominal_rate_without_shift():
    # Under no shift the two-sample score test's p-value is uniform: about 5 % below 0.05.
    rng = np.random.default_rng(14)
    rejections = 0
    for _ in range(300):
        p_s, _ = binary_gaussian(400, 0.5, rng, sep=1.0)
        p_t, _ = binary_gaussian(400, 0.5, rng, sep=1.0)
        res = shift_score_test(p_t, [0.5, 0.5], source_proba=p_s)
        rejections += res.pvalue < 0.05
    # binomial(300, 0.05): mean 15, sd 3.8
    assert 4 <= rejections <= 27


def test_score_interval_endpoint_is_at_students_t_quantile_with_satterthwaite_df():
    # Reference: at an endpoint pi of the score interval the two-sample statistic equals the
    # squared Student t quantile (scipy.stats.t.ppf) at Satterthwaite's (1946) degrees of
    # freedom of its three independent variance components (unlabelled rows, labelled rows of
    # each class; Welch 1947), computed here from the formula of score_interval's docstring.
    # Few labelled rows (30) make the degrees of freedom small, so the interval is wider than
    # with the chi-square cut-off (small_sample=False), which it contains.
    from scipy.stats import t as t_dist

    rng = np.random.default_rng(46)
    p_s, y_s = binary_gaussian(30, 0.4, rng, sep=1.2)
    p_t, _ = binary_gaussian(400, 0.25, rng, sep=1.2)
    src = np.bincount(y_s, minlength=2) / 30
    (lo, hi), ok = score_interval(p_t, p_s, y_s, src)
    (lo_c, hi_c), _ = score_interval(p_t, p_s, y_s, src, small_sample=False)
    assert ok and lo < lo_c < hi_c < hi

    def t_and_df(pi):
        def u(p):
            q = p / src
            return (q[:, 1] - q[:, 0]) / ((1 - pi) * q[:, 0] + pi * q[:, 1])

        u_t = u(p_t)
        comps = [(u_t.var() / (u_t.size - 1), u_t.size)]
        m_s = 0.0
        for c, share in ((0, 1 - pi), (1, pi)):
            u_c = u(p_s[y_s == c])
            m_s += share * u_c.mean()
            comps.append((share**2 * u_c.var() / (u_c.size - 1), u_c.size))
        var = sum(v for v, _ in comps)
        df = var**2 / sum(v**2 / (n - 1) for v, n in comps)
        return (u_t.mean() - m_s) / np.sqrt(var), df

    for end in (lo, hi):
        t_val, df = t_and_df(end)
        assert df < 60  # few labelled rows: far from the normal limit
        # rtol: the endpoint is found by Brent's method to 1e-10 in the prior
        assert abs(t_val) == pytest.approx(t_dist.ppf(0.975, df), rel=1e-6)


def test_score_interval_at_source_prior_inverts_the_score_test():
    # Consistency test: the interval excludes the source prior exactly when the test rejects.
    rng = np.random.default_rng(15)
    for prior in (0.5, 0.56, 0.7):
        p_s, y_s = binary_gaussian(600, 0.5, rng, sep=1.0)
        p_t, _ = binary_gaussian(600, prior, rng, sep=1.0)
        src = np.bincount(y_s, minlength=2) / 600
        test = shift_score_test(p_t, src, source_proba=p_s)
        (lo, hi), ok = score_interval(p_t, p_s, y_s, src)
        assert ok
        assert (lo <= src[1] <= hi) == (test.pvalue >= 0.05)


def test_bca_matches_scipy_on_the_same_resamples():
    # Reference: scipy.stats.bootstrap(method="BCa"); fed its bootstrap distribution and the
    # leave-one-out jackknife of the same statistic, bca_interval reproduces its interval.
    from scipy.stats import bootstrap

    rng = np.random.default_rng(16)
    x = rng.exponential(size=35)
    y = rng.gamma(2.0, size=28)
    one = bootstrap((x,), np.mean, method="BCa", n_resamples=3000,
                    random_state=np.random.default_rng(1))
    jack = (x.sum() - x) / (x.size - 1)
    mine = bca_interval(x.mean(), one.bootstrap_distribution, [jack])
    np.testing.assert_allclose(mine, [one.confidence_interval.low, one.confidence_interval.high],
                               rtol=1e-10)

    def diff(a, b, axis=-1):
        return np.mean(a, axis=axis) - np.mean(b, axis=axis)

    two = bootstrap((x, y), diff, method="BCa", n_resamples=3000,
                    random_state=np.random.default_rng(2))
    jack_x = (x.sum() - x) / (x.size - 1) - y.mean()
    jack_y = x.mean() - (y.sum() - y) / (y.size - 1)
    mine = bca_interval(diff(x, y), two.bootstrap_distribution, [jack_x, jack_y])
    np.testing.assert_allclose(mine, [two.confidence_interval.low, two.confidence_interval.high],
                               rtol=1e-10)


def test_default_interval_is_fast_enough_to_be_the_default():
    # Not a timing test: the default interval needs no resampling, so adapt does one pass of
    # arithmetic per grid point instead of n_resamples refits; checked by counting that the
    # bootstrap is never entered.
    rng = np.random.default_rng(17)
    p_src, y_src = binary_gaussian(500, 0.5, rng)
    p_new, _ = binary_gaussian(500, 0.3, rng)
    est = PriorEstimator(random_state=0).fit(p_src, y_src)
    est._bootstrap = None  # would raise TypeError if called
    res = est.estimate(p_new)
    assert res.interval[1, 0] < 0.3 < res.interval[1, 1]


def test_estimator_test_is_the_plain_public_score_test():
    # Consistency test: PriorEstimator.estimate reports shift_score_test on the calibrated
    # posteriors without the labelled rows' classes: the plain two-sample variance, which
    # carries the error of the labelled class shares. The class-stratified variance (source_y)
    # takes those shares as exact and so gives the larger statistic.
    rng = np.random.default_rng(18)
    p_src, y_src = binary_gaussian(900, 0.3, rng, sep=1.2)
    p_new, _ = binary_gaussian(700, 0.38, rng, sep=1.2)
    est = PriorEstimator(n_resamples=0).fit(p_src, y_src)
    res = est.estimate(p_new)
    cal_s, cal_t = est.calibrate(p_src), est.calibrate(p_new)
    strat = shift_score_test(cal_t, est.source_prior_, source_proba=cal_s, source_y=y_src)
    plain = shift_score_test(cal_t, est.source_prior_, source_proba=cal_s)
    assert res.shift_statistic == pytest.approx(plain.statistic, rel=1e-10)
    assert res.shift_pvalue == pytest.approx(plain.pvalue, rel=1e-10)
    assert strat.statistic > plain.statistic
    # the harm scale behind the evidence cutoff reads the same variance: both samples' mean
    # scores, the labelled one unstratified
    from probwrap.shift._shift_tests import _mean_cov, _score_rows, null_harm_scale

    src = est.source_prior_
    _, c_t, n_t = _mean_cov(_score_rows(cal_t, src), np.ones(700))
    _, c_s, n_s = _mean_cov(_score_rows(cal_s, src), np.ones(900))
    # one score variance pooled over both samples (Student's t-test's denominator)
    both = (n_t * c_t + n_s * c_s) / (n_t + n_s - 2) * (1 / n_t + 1 / n_s)
    # times the growth for EM's estimate lying beyond the one-step estimate (W / T: 1.09 here)
    from probwrap.shift._shift_tests import estimate_amplification

    u = _score_rows(cal_t, src)
    growth = estimate_amplification((res.ml_prior - src)[1:], u.T @ u / 700, both,
                                    plain.raw_statistic)
    assert 1.05 < growth < 1.15
    assert res.null_harm_scale == pytest.approx(
        null_harm_scale(cal_t, np.ones(700), src, both,
                        reference_loss=est._source_log_loss) * growth, rel=1e-10)


def test_few_labelled_rows_raise_no_false_alarm_on_bundled_digits():
    # scikit-learn's bundled digits (10 classes), a logistic regression fitted on 600 rows and
    # frozen, 60 labelled rows drawn at random, the unlabelled rows drawn from the same
    # remaining rows: no shift. Taking the labelled class shares (6 rows a class) as exact, the
    # test rejected in ~95 % of the draws (p = 6e-7 in the reported case) and adapt moved the
    # predictions in nearly all; with their error in the test it rejects at about its level.
    # Tolerance: 40 draws, binomial(40, 0.05) exceeds 7 rejections with probability 1e-3.
    from sklearn.datasets import load_digits
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_digits(return_X_y=True)
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=300))
    model = FrozenEstimator(model.fit(X[idx[:600]], y[idx[:600]]))
    pool = idx[600:]
    rejected, ratios = 0, []
    for _ in range(40):
        perm = rng.permutation(pool)
        lab, new = perm[:60], perm[60:]
        if np.unique(y[lab]).size < 10:
            continue
        wrapper = PriorShiftWrapper(model, n_resamples=0).fit(X[lab], y[lab])
        before = wrapper.predict_proba(X[new])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wrapper.adapt(X[new])
        after = wrapper.predict_proba(X[new])
        rejected += wrapper.shift_pvalue_ < 0.05
        rows = np.arange(new.size)
        ratios.append(np.log(after[rows, y[new]]).mean() / np.log(before[rows, y[new]]).mean())
    assert rejected <= 7
    # and adapting costs nothing on average when nothing moved (the do-no-harm target: 2 %)
    assert np.mean(ratios) <= 1.02


def test_forest_with_exact_zero_one_on_bundled_wine_stays_inside():
    # scikit-learn's bundled wine data, a forest that outputs exact 0/1 and 60 held-out rows the
    # calibration separates: the plain bias-corrected fit made 96 % of the posteriors exactly 0
    # or 1; with the weak prior on the scale and the floor none is, and the test log loss is no
    # worse than the forest's own.
    from sklearn.datasets import load_wine
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.frozen import FrozenEstimator

    X, y = load_wine(return_X_y=True)
    idx = np.random.default_rng(0).permutation(len(y))
    fit, held, test = idx[:60], idx[60:120], idx[120:]
    forest = RandomForestClassifier(random_state=0).fit(X[fit], y[fit])
    assert np.any(forest.predict_proba(X[test]) == 0.0)
    model = PriorShiftWrapper(FrozenEstimator(forest), random_state=0, n_resamples=20)
    model.fit(X[held], y[held])
    p = model.predict_proba(X[test])
    assert np.all((p > 0) & (p < 1))
    base = np.clip(forest.predict_proba(X[test]), 1e-15, 1)
    ll = -np.mean(np.log(p[np.arange(len(test)), y[test]]))
    ll_base = -np.mean(np.log(base[np.arange(len(test)), y[test]]))
    assert ll <= ll_base


@pytest.mark.parametrize("variance", ["pooled", "separate"])
def test_score_test_reference_distribution_does_not_depend_on_the_weight_scale(variance):
    # The labelled rows' effective size (Kish) sets the F reference's degrees of freedom:
    # weights scaled by 1e-3 or to sum 1 give the same statistic, p-value and degrees of
    # freedom (rounding only: rtol 1e-9).
    rng = np.random.default_rng(32)
    p_s = rng.dirichlet([2.0, 1.0, 1.0], size=40)
    p_t = rng.dirichlet([2.0, 1.0, 1.0], size=300)
    w_s, w_t = rng.uniform(0.5, 2.0, 40), rng.uniform(0.5, 2.0, 300)
    src = [0.5, 0.25, 0.25]
    runs = [shift_score_test(p_t, src, sample_weight=w_t * c, source_proba=p_s,
                             source_sample_weight=w_s * d, variance=variance)
            for c, d in ((1.0, 1.0), (1e-3, 1e-3), (1 / w_t.sum(), 1 / w_s.sum()))]
    # pooled: Kish's counts of both samples minus 2 (about 320); separate: Welch's, far fewer
    assert np.isfinite(runs[0].denominator_df)
    assert (runs[0].denominator_df < 100) == (variance == "separate")
    for r in runs[1:]:
        assert r.pvalue == pytest.approx(runs[0].pvalue, rel=1e-9)
        assert r.statistic == pytest.approx(runs[0].statistic, rel=1e-9)
        assert r.denominator_df == pytest.approx(runs[0].denominator_df, rel=1e-9)


def test_few_labelled_rows_keep_a_calibrated_models_probabilities_on_bundled_breast_cancer():
    # scikit-learn's bundled breast cancer data, a logistic regression fitted on 189 rows and
    # frozen, 20 labelled rows: the bias-corrected map fitted on them (biases following the
    # class shares of 20 rows) made the test log loss up to 1.93x the model's own (draws 1, 4
    # and 5 below: 1.93, 1.17, 1.57). A likelihood-ratio test (Wilks 1938) finds no evidence
    # against the model's probabilities there, so they are returned (floored at
    # 1 / (2 * 21), which costs < 1 % here). Limit 1.10x: the harm limit of
    # benchmarks/small_data_sweep.py (common practice, not a published bound).
    from sklearn.datasets import load_breast_cancer
    from sklearn.naive_bayes import GaussianNB
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(0).permutation(len(y))
    fit, test, pool = idx[:189], idx[189:378], idx[378:]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=300)).fit(X[fit], y[fit])
    base = log_loss(y[test], model.predict_proba(X[test]))
    for s in range(6):
        lab = np.random.default_rng(100 + s).choice(pool, 20, replace=False)
        wrapper = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0).fit(X[lab], y[lab])
        assert wrapper.calibrator_.identity_kept_
        assert log_loss(y[test], wrapper.predict_proba(X[test])) <= 1.10 * base
        # the fitted map still serves the prior estimation (its bias score equations)
        est = wrapper.prior_estimator_
        np.testing.assert_allclose(est.calibrate(model.predict_proba(X[lab])).mean(0),
                                   wrapper.source_prior_, atol=3 * wrapper.calibrator_.floor_)
    # naive Bayes' probabilities are far off (overconfident): 60 labelled rows reject them and
    # the map is applied, improving on the model's own log loss
    nb = GaussianNB().fit(X[fit], y[fit])
    lab = np.random.default_rng(100).choice(pool, 60, replace=False)
    wrapper = PriorShiftWrapper(FrozenEstimator(nb), n_resamples=0).fit(X[lab], y[lab])
    assert not wrapper.calibrator_.identity_kept_ and wrapper.calibrator_.identity_pvalue_ < 0.05
    assert (log_loss(y[test], wrapper.predict_proba(X[test]))
            < log_loss(y[test], nb.predict_proba(X[test])))


class _ConstantModel:
    """A fitted two-class model giving every row the same probability (as a gradient boosting
    trained on 22 rows of lifelines' larynx data did in the sweep)."""

    classes_ = np.array([0, 1])
    n_features_in_ = 1

    def fit(self, X, y):
        return self

    def predict_proba(self, X):
        n = np.asarray(X).shape[0]
        return np.column_stack([np.full(n, 0.409), np.full(n, 0.591)])

    def get_params(self, deep=True):
        return {}


def test_score_interval_of_constant_posteriors_is_everything():
    # every row has the same posterior, so the score is the same constant in both samples at
    # every candidate prior: no prior can be rejected, and the interval is [0, 1] (before, the
    # statistic was rounding noise over a zero variance and Brent's method stopped with
    # "f(a) and f(b) must have different signs")
    p_t = np.tile([0.409, 0.591], (30, 1))
    p_s = np.tile([0.409, 0.591], (38, 1))
    y_s = np.r_[0, np.ones(37, int)]
    interval, consistent = score_interval(p_t, p_s, y_s, [1 / 38, 37 / 38])
    np.testing.assert_array_equal(interval, [0.0, 1.0])
    assert consistent


def test_adapt_with_constant_scores_warns_and_does_not_move():
    X_cal, y_cal = np.arange(38.0)[:, None], np.r_[0, np.ones(37, int)]
    X_new = np.arange(30.0)[:, None]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # one labelled row of class 0: warned at fit
        wrapper = PriorShiftWrapper(FrozenEstimator(_ConstantModel()), random_state=0,
                                    n_resamples=30).fit(X_cal, y_cal)
    before = wrapper.predict_proba(X_new)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper.adapt(X_new)
    assert any(issubclass(c.category, PriorNotIdentifiedWarning) for c in caught)
    np.testing.assert_array_equal(wrapper.target_prior_interval_, [[0.0, 1.0], [0.0, 1.0]])
    # constant posteriors carry no evidence of a shift: the statistic is 0, not rounding noise
    # over a zero variance (seen with NumPy 2.4: a chi-square of 45, p = 2e-11, and the
    # prediction moved by 4e-12 toward an estimate of (0, 1)), so nothing moves at all
    assert wrapper.shift_statistic_ == 0.0 and wrapper.shift_pvalue_ == 1.0
    assert wrapper.adaptation_weight_ == 0.0
    np.testing.assert_array_equal(wrapper.predict_proba(X_new), before)


def test_score_test_of_posteriors_constant_to_rounding_finds_no_shift():
    # the same posterior in every row of both samples, off the source prior by rounding-sized
    # amounts that differ between the samples: the two-sample score test has no variance to
    # read, so it reports no evidence (statistic 0, p-value 1) rather than noise over noise
    base = np.array([1 / 38, 37 / 38])
    p_s = np.tile(base + [3e-12, -3e-12], (38, 1))
    p_t = np.tile(base + [-3e-12, 3e-12], (30, 1))
    res = shift_score_test(p_t, base, source_proba=p_s)
    assert res.statistic == 0.0 and res.pvalue == 1.0
    # the guard needs both samples flat: constant unlabelled posteriors far from labelled ones
    # that spread by +-0.01 are still a clear shift
    rng = np.random.default_rng(0)
    spread = rng.uniform(-0.01, 0.01, size=(38, 1))
    p_s2 = np.clip(base[1] + spread, 0, 1)
    p_s2 = np.column_stack([1 - p_s2, p_s2])
    p_t2 = np.column_stack([np.full(30, 0.2), np.full(30, 0.8)])
    assert shift_score_test(p_t2, base, source_proba=p_s2).pvalue < 1e-6
