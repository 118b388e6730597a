"""Reference checks of the calibration maps against outside sources.

Each test names its source beside the assertion: statsmodels GLM, scikit-learn's
IsotonicRegression / CalibratedClassifierCV, SciPy optimisers, numpy.histogram, a published
formula, or a hand-worked example whose arithmetic is spelled out.
"""

from __future__ import annotations

import time

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import brute, minimize
from scipy.special import expit, log_expit, log_softmax
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.isotonic import IsotonicRegression
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB

from probwrap.calibration import (
    BetaMap,
    BinningMap,
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    VennAbersMap,
)


# --------------------------------------------------------------------------- data
@pytest.fixture(scope="module")
def cancer_scores():
    """Held-out naive Bayes log-odds on scikit-learn's bundled breast cancer data (2 features)."""
    X, y = load_breast_cancer(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X[:, [0, 1]], y, test_size=0.5, random_state=0, stratify=y)
    lp = GaussianNB().fit(Xa, ya).predict_log_proba(Xb)
    return lp[:, 1] - lp[:, 0], yb.astype(float)


@pytest.fixture(scope="module")
def digits_logits():
    """Held-out naive Bayes log-probabilities (10 classes) on scikit-learn's bundled digits."""
    X, y = load_digits(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    lp = GaussianNB(var_smoothing=1e-2).fit(Xa, ya).predict_log_proba(Xb)
    return lp, yb


def _weights(n, seed=0):
    return np.random.default_rng(seed).integers(1, 4, size=n).astype(float)


# --------------------------------------------------------------------------- Platt
def test_platt_raw_targets_match_statsmodels_glm(cancer_scores):
    s, y = cancer_scores
    w = _weights(s.shape[0])
    # statsmodels GLM Binomial (logit link) with frequency weights: the same likelihood
    ref = sm.GLM(y, sm.add_constant(s), family=sm.families.Binomial(), freq_weights=w).fit(
        tol=1e-14
    )
    m = PlattMap(smooth_targets=False).fit(s, y, sample_weight=w)
    assert m.intercept_ == pytest.approx(ref.params[0], abs=1e-8)
    assert m.slope_ == pytest.approx(ref.params[1], abs=1e-8)
    np.testing.assert_allclose(m.predict(s), ref.predict(sm.add_constant(s)), atol=1e-9)


def test_platt_smoothed_targets_match_glm_on_fractional_targets(cancer_scores):
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=1)
    n_pos, n_neg = w @ y, w @ (1 - y)
    # Platt (1999), section 2.2: t+ = (N+ + 1) / (N+ + 2), t- = 1 / (N- + 2)
    t = np.where(y == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    ref = sm.GLM(t, sm.add_constant(s), family=sm.families.Binomial(), freq_weights=w).fit(
        tol=1e-14
    )
    m = PlattMap().fit(s, y, sample_weight=w)
    assert m.intercept_ == pytest.approx(ref.params[0], abs=1e-8)
    assert m.slope_ == pytest.approx(ref.params[1], abs=1e-8)


def test_platt_wide_score_range_matches_glm(cancer_scores):
    # scores stretched to about +-1e3 (decision_function values of a hard-margin model);
    # statsmodels GLM is the reference, and the slope must shrink by the same factor
    s, y = cancer_scores
    wide = 60.0 * s
    assert np.abs(wide).max() > 1e3
    ref = sm.GLM(y, sm.add_constant(wide), family=sm.families.Binomial()).fit(tol=1e-14)
    m = PlattMap(smooth_targets=False).fit(wide, y)
    assert m.slope_ == pytest.approx(ref.params[1], rel=1e-8)
    assert m.intercept_ == pytest.approx(ref.params[0], abs=1e-8)
    narrow = PlattMap(smooth_targets=False).fit(s, y)
    assert m.slope_ * 60.0 == pytest.approx(narrow.slope_, rel=1e-8)


def test_platt_agrees_with_scikit_learn_sigmoid_calibration():
    # scikit-learn's CalibratedClassifierCV(method="sigmoid") also fits Platt's smoothed
    # targets on the decision_function; its optimiser stops at a looser tolerance
    X, y = load_breast_cancer(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=1, stratify=y)
    clf = GaussianNB().fit(Xa[:, :3], ya)
    cal = CalibratedClassifierCV(FrozenEstimator(clf), method="sigmoid").fit(Xb[:, :3], yb)
    # GaussianNB has no decision_function, so scikit-learn feeds predict_proba[:, 1] to the
    # sigmoid; give PlattMap the same input
    p1 = clf.predict_proba(Xb[:, :3])[:, 1]
    # probabilities where log-odds belong: PlattMap says so (and still fits, as asked)
    with pytest.warns(UserWarning, match="look like probabilities"):
        m = PlattMap().fit(p1, yb)
    np.testing.assert_allclose(m.predict(p1), cal.predict_proba(Xb[:, :3])[:, 1], atol=1e-5)


# --------------------------------------------------------------------------- isotonic
def test_isotonic_matches_scikit_learn_with_weights_and_ties():
    rng = np.random.default_rng(0)
    for _ in range(20):
        n = int(rng.integers(5, 400))
        s = np.round(rng.normal(size=n) * 2, int(rng.integers(0, 3)))  # rounding makes ties
        y = (rng.random(n) < expit(1.5 * s)).astype(float)
        y[:2] = [0.0, 1.0]
        w = rng.uniform(0.1, 3.0, size=n)
        m = IsotonicMap(smooth_targets=False).fit(s, y, sample_weight=w)
        # scikit-learn IsotonicRegression(out_of_bounds="clip"): the reference fit
        ref = IsotonicRegression(out_of_bounds="clip").fit(s, y, sample_weight=w)
        grid = np.concatenate([np.unique(s), np.linspace(s.min() - 3, s.max() + 3, 101)])
        np.testing.assert_allclose(m.predict(grid), ref.predict(grid), atol=1e-12)
        np.testing.assert_allclose(m.values_, ref.predict(m.thresholds_), atol=1e-12)


def test_isotonic_large_sample_matches_scikit_learn():
    # 1e5 rows with ties: exercises both the vectorised pooling rounds and the stack pass;
    # scikit-learn IsotonicRegression(out_of_bounds="clip") is the reference
    rng = np.random.default_rng(11)
    n = 100_000
    s = np.round(rng.normal(size=n), 3)
    y = (rng.random(n) < expit(s)).astype(float)
    w = rng.uniform(0.1, 2.0, size=n)
    grid = np.linspace(-5, 5, 2001)
    got = IsotonicMap(smooth_targets=False).fit(s, y, sample_weight=w).predict(grid)
    ref = IsotonicRegression(out_of_bounds="clip").fit(s, y, sample_weight=w).predict(grid)
    np.testing.assert_allclose(got, ref, atol=1e-12)


def test_isotonic_on_bundled_data_matches_scikit_learn(cancer_scores):
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=3)
    m = IsotonicMap(smooth_targets=False).fit(s, y, sample_weight=w)
    ref = IsotonicRegression(out_of_bounds="clip").fit(s, y, sample_weight=w)
    grid = np.linspace(-30, 10, 400)
    np.testing.assert_allclose(m.predict(grid), ref.predict(grid), atol=1e-12)


def test_isotonic_smoothed_equals_scikit_learn_on_platt_targets(cancer_scores):
    # The default fit pools Platt's (1999, section 2.2) smoothed targets
    # t+ = (N+ + 1) / (N+ + 2), t- = 1 / (N- + 2): scikit-learn's IsotonicRegression fitted to
    # those targets is the reference, and its levels lie in [t-, t+].
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=13)
    n_pos, n_neg = w @ y, w @ (1 - y)
    t = np.where(y == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    ref = IsotonicRegression(out_of_bounds="clip").fit(s, t, sample_weight=w)
    m = IsotonicMap().fit(s, y, sample_weight=w)
    grid = np.linspace(-30, 10, 400)
    np.testing.assert_allclose(m.predict(grid), ref.predict(grid), atol=1e-12)
    assert m.values_.min() >= 1 / (n_neg + 2) - 1e-15
    assert m.values_.max() <= (n_pos + 1) / (n_pos + 2) + 1e-15
    assert m.floor_ == pytest.approx(1 / (w.sum() + 2))
    # the plain fit reaches exact 0 and 1 here; the smoothed one never does
    raw = IsotonicMap(smooth_targets=False).fit(s, y, sample_weight=w)
    assert raw.values_.min() == 0.0 and raw.values_.max() == 1.0


def test_isotonic_hand_worked():
    # y = 1, 0 at scores 0, 1 violate the order: PAV pools them to (1 + 0) / 2 = 0.5;
    # with weights 3 and 1 the pooled value is (3 * 1 + 1 * 0) / 4 = 0.75 (Ayer et al. 1955)
    m = IsotonicMap(smooth_targets=False).fit(
        [-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1], sample_weight=[1, 3, 1, 1]
    )
    np.testing.assert_allclose(m.values_, [0.0, 0.75, 0.75, 1.0])
    # smoothed: N+ = 4, N- = 2, so t+ = 5/6 and t- = 1/4; the pooled pair is
    # (3 * 5/6 + 1 * 1/4) / 4 = 11/16
    m = IsotonicMap().fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1], sample_weight=[1, 3, 1, 1])
    np.testing.assert_allclose(m.values_, [0.25, 11 / 16, 11 / 16, 5 / 6])


# --------------------------------------------------------------------------- beta
def test_beta_matches_statsmodels_glm_when_constraints_inactive(cancer_scores):
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=4)
    # Kull, Silva Filho & Flach (2017), eq. (4): logistic regression on [ln p, -ln(1 - p)]
    F = np.column_stack([log_expit(s), -log_expit(-s)])
    ref = sm.GLM(y, sm.add_constant(F), family=sm.families.Binomial(), freq_weights=w).fit(
        tol=1e-14
    )
    assert ref.params[1] > 0 and ref.params[2] > 0  # the constraints a, b >= 0 are inactive
    m = BetaMap(smooth_targets=False).fit(s, y, sample_weight=w)
    assert m.c_ == pytest.approx(ref.params[0], abs=1e-7)
    assert m.a_ == pytest.approx(ref.params[1], abs=1e-7)
    assert m.b_ == pytest.approx(ref.params[2], abs=1e-7)
    np.testing.assert_allclose(m.predict(s), ref.predict(sm.add_constant(F)), atol=1e-9)


def test_beta_smoothed_matches_statsmodels_glm_on_platt_targets(cancer_scores):
    # default: the same logistic regression on [ln p, -ln(1 - p)] fitted to Platt's (1999)
    # smoothed targets; statsmodels GLM Binomial accepts fractional responses
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=14)
    n_pos, n_neg = w @ y, w @ (1 - y)
    t = np.where(y == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    F = np.column_stack([log_expit(s), -log_expit(-s)])
    ref = sm.GLM(t, sm.add_constant(F), family=sm.families.Binomial(), freq_weights=w).fit(
        tol=1e-14
    )
    assert ref.params[1] > 0 and ref.params[2] > 0
    m = BetaMap().fit(s, y, sample_weight=w)
    np.testing.assert_allclose([m.c_, m.a_, m.b_], ref.params, atol=1e-7)


def test_beta_with_a_binding_constraint_matches_bounded_optimum():
    # labels that rise towards *both* ends of the score range make the unconstrained fit give
    # a < 0; the constrained optimum must then sit on the face a = 0
    rng = np.random.default_rng(5)
    s = rng.normal(scale=2.0, size=600)
    p = expit(s)
    y = (rng.random(600) < 0.15 + 0.8 * np.abs(2 * p - 1) ** 2 * (p > 0.5) + 0.5 * (p < 0.1))
    y = y.astype(float)
    F = np.column_stack([log_expit(s), -log_expit(-s)])
    free = sm.GLM(y, sm.add_constant(F), family=sm.families.Binomial()).fit(tol=1e-14)
    assert free.params[1] < 0  # the constraint binds
    m = BetaMap(smooth_targets=False).fit(s, y)
    assert m.a_ == 0.0 and m.b_ > 0

    # reference 1: SciPy L-BFGS-B on the same log loss with bounds a, b >= 0
    def loss(theta):
        eta = F @ theta[:2] + theta[2]
        return np.mean(np.logaddexp(0, eta) - y * eta)

    res = minimize(
        loss, x0=[0.5, 0.5, 0.0], method="L-BFGS-B",
        bounds=[(0, None), (0, None), (None, None)], options={"ftol": 1e-15, "gtol": 1e-12},
    )
    assert loss([m.a_, m.b_, m.c_]) <= res.fun + 1e-10
    np.testing.assert_allclose([m.a_, m.b_, m.c_], res.x, atol=1e-4)
    # reference 2: statsmodels GLM on the remaining feature -ln(1 - p)
    reduced = sm.GLM(y, sm.add_constant(F[:, 1]), family=sm.families.Binomial()).fit(tol=1e-14)
    assert m.c_ == pytest.approx(reduced.params[0], abs=1e-7)
    assert m.b_ == pytest.approx(reduced.params[1], abs=1e-7)


# --------------------------------------------------------------------------- temperature
def _brute_log_t(loss, centre, half_width=6.0, n=4001):
    # direct 1-d search on a fine grid of log T (scipy.optimize.brute without polishing)
    grid = slice(centre - half_width, centre + half_width, 2 * half_width / (n - 1))
    x = brute(lambda v: loss(v[0]), (grid,), finish=None)
    return float(np.atleast_1d(x)[0]), 2 * half_width / (n - 1)


def test_temperature_binary_matches_brute_force(cancer_scores):
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=6)
    wn = w / w.sum()

    def loss(log_t):
        eta = s / np.exp(log_t)
        return float(wn @ (np.logaddexp(0, eta) - y * eta))

    m = TemperatureMap(shrinkage=0).fit(s, y, sample_weight=w)
    best, step = _brute_log_t(loss, 0.0)
    assert abs(np.log(m.temperature_) - best) <= step
    assert loss(np.log(m.temperature_)) <= loss(best) + 1e-12
    np.testing.assert_allclose(m.predict(s), expit(s / m.temperature_))


def test_temperature_multiclass_matches_brute_force(digits_logits):
    z, y = digits_logits
    w = _weights(z.shape[0], seed=7)
    wn = w / w.sum()

    def loss(log_t):
        lp = log_softmax(z / np.exp(log_t), axis=1)
        return float(-(wn @ lp[np.arange(len(y)), y]))

    m = TemperatureMap(shrinkage=0).fit(z, y, sample_weight=w)
    best, step = _brute_log_t(loss, 2.0, half_width=8.0)
    assert abs(np.log(m.temperature_) - best) <= step
    assert loss(np.log(m.temperature_)) <= loss(best) + 1e-12
    out = m.predict(z)
    np.testing.assert_allclose(out.sum(axis=1), 1.0)
    np.testing.assert_array_equal(out.argmax(axis=1), z.argmax(axis=1))


def test_temperature_closed_form_example():
    # hand-worked: equal logits 4 on the predicted class, 0 elsewhere, 3 of 4 rows right.
    # With e = exp(4 / T) the loss is -3 ln(e / (e + 2)) - ln(1 / (e + 2)); setting the
    # derivative -3 / e + 4 / (e + 2) to zero gives e = 6, so T = 4 / ln 6.
    z = np.array([[4.0, 0, 0], [0, 4.0, 0], [0, 0, 4.0], [4.0, 0, 0]])
    m = TemperatureMap(shrinkage=0).fit(z, [0, 1, 2, 1])
    assert m.temperature_ == pytest.approx(4 / np.log(6), rel=1e-8)
    # Smoothed targets: (N_y + 1) / (N_y + 2) on the true class, 1 / (2 (N_y + 2)) on each of the
    # two others; class counts 1, 2, 1. The top-scored column gets targets 2/3, 3/4, 2/3 and
    # 1/8 (the wrong row). The slope vanishes where the model's top probability e / (e + 2)
    # equals their mean 53/96, so e = 106/43 and T = 4 / ln(106/43).
    m = TemperatureMap(smooth_targets=True, shrinkage=0).fit(z, [0, 1, 2, 1])
    assert m.temperature_ == pytest.approx(4 / np.log(106 / 43), rel=1e-8)


def test_temperature_smoothed_matches_scipy_minimisation(digits_logits):
    # the smoothed objective (cross-entropy against the targets of TemperatureMap's docstring)
    # minimised directly by SciPy's bounded scalar search on log T
    from scipy.optimize import minimize_scalar

    z, y = digits_logits
    w = _weights(z.shape[0], seed=15)
    k = z.shape[1]
    n_y = np.bincount(y, weights=w, minlength=k)[y]
    t = np.tile((1 / ((n_y + 2) * (k - 1)))[:, None], (1, k))
    t[np.arange(len(y)), y] = (n_y + 1) / (n_y + 2)
    wn = w / w.sum()

    def loss(log_t):
        return float(-(wn @ np.sum(t * log_softmax(z / np.exp(log_t), axis=1), axis=1)))

    res = minimize_scalar(loss, bounds=(-5, 10), method="bounded", options={"xatol": 1e-10})
    m = TemperatureMap(smooth_targets=True, shrinkage=0).fit(z, y, sample_weight=w)
    assert np.log(m.temperature_) == pytest.approx(res.x, abs=1e-5)
    assert m.floor_ == pytest.approx(1 / (w.sum() + k))


@pytest.mark.parametrize("rows", [12, 300])
def test_temperature_prior_matches_scipy_minimisation(digits_logits, rows):
    # the default objective: weighted log loss against the labels (as a total over the weight)
    # plus the gamma prior 0.5 * (beta / beta0 - log(beta / beta0) - 1) on beta = 1 / T, its
    # mode beta0 at unit root-mean-square of the row-centred logits; minimised directly by
    # SciPy's bounded scalar search on log T (12 rows: a set the logits separate, where only
    # the prior keeps T finite)
    from scipy.optimize import minimize_scalar

    z, y = digits_logits
    z, y = z[:rows], y[:rows]
    w = _weights(z.shape[0], seed=16)
    w = w * (w.shape[0] / w.sum())  # frequencies summing to the number of rows
    beta0 = 1 / np.sqrt(w @ np.mean((z - z.mean(axis=1, keepdims=True)) ** 2, axis=1) / w.sum())

    def objective(log_t):
        beta = np.exp(-log_t)
        nll = -(w @ log_softmax(z * beta, axis=1)[np.arange(len(y)), y])
        return float(nll + 0.5 * (beta / beta0 - np.log(beta / beta0) - 1))

    res = minimize_scalar(objective, bounds=(-8, 8), method="bounded", options={"xatol": 1e-10})
    m = TemperatureMap().fit(z, y, sample_weight=w)
    assert m.boundary_ is None
    # xatol 1e-10 on log T; the objective is flat near its minimum to about 1e-6 relative
    assert np.log(m.temperature_) == pytest.approx(res.x, abs=1e-5)
    # Krichevsky-Trofimov: 1/2 / (N + 1) for an error after N rows, shared by k - 1 classes
    assert m.floor_ == pytest.approx(1 / (2 * (w.sum() + 1) * (z.shape[1] - 1)))


# --------------------------------------------------------------------------- binning
def test_binning_hand_worked_example():
    # 8 rows, weights 1,1,2,1,1,1,1,2 (total 10), n_bins=2, prior_strength=2.
    # Cumulative weight before each distinct score: 0,1,2,4,5,6,7,8; mass midpoints divided by
    # 10: 0.05,0.15,0.3,0.45,0.55,0.65,0.75,0.9 -> bins 0,0,0,0,1,1,1,1.
    # Each bin's Beta prior is centred on the model's mean probability in the bin (Naeini,
    # Cooper & Hauskrecht 2015 centre it on the model's score in the bin): with scipy's expit,
    # c0 = (e(0) + e(1) + 2 e(2) + e(3)) / 5 and c1 = (e(4) + e(5) + e(6) + 2 e(7)) / 5.
    # Bin 0: weight 5, positives 2 -> (2 + 2 c0) / (5 + 2).
    # Bin 1: weight 5, positives 4 -> (4 + 2 c1) / (5 + 2).
    # Edge: half-way between 3 and 4 -> 3.5.
    from scipy.special import expit

    s = np.arange(8.0)
    y = np.array([0, 0, 1, 0, 1, 0, 1, 1])
    w = np.array([1, 1, 2, 1, 1, 1, 1, 2.0])
    c0 = (expit(0.0) + expit(1.0) + 2 * expit(2.0) + expit(3.0)) / 5
    c1 = (expit(4.0) + expit(5.0) + expit(6.0) + 2 * expit(7.0)) / 5
    v = [(2 + 2 * c0) / 7, (4 + 2 * c1) / 7]
    m = BinningMap(n_bins=2, prior_strength=2.0).fit(s, y, sample_weight=w)
    np.testing.assert_allclose(m.edges_, [3.5])
    np.testing.assert_allclose(m.values_, v, rtol=1e-12)
    np.testing.assert_allclose(m.predict([-10.0, 3.49, 3.5, 99.0]), [v[0], v[0], v[1], v[1]], rtol=1e-12)
    # prior_strength=0 gives the raw weighted positive rate per bin: 2/5 and 4/5
    raw = BinningMap(n_bins=2, prior_strength=0.0).fit(s, y, sample_weight=w)
    np.testing.assert_allclose(raw.values_, [0.4, 0.8])


def test_binning_ties_are_not_split():
    # four rows tied at 0 hold 4/6 of the mass: they all go to one bin (the one holding their
    # mass midpoint 2/6 -> bin 1 of 3) and bin 0 is empty, so only 2 bins are used
    s = np.array([0.0, 0.0, 0.0, 0.0, 1.0, 2.0])
    y = np.array([0, 1, 0, 1, 1, 1])
    m = BinningMap(n_bins=3, prior_strength=0.0).fit(s, y)
    assert m.n_bins_used_ == 2
    np.testing.assert_allclose(m.bin_weights_, [4.0, 2.0])
    np.testing.assert_allclose(m.values_, [0.5, 1.0])


def test_binning_counts_match_numpy_histogram(cancer_scores):
    s, y = cancer_scores
    w = _weights(s.shape[0], seed=8)
    m = BinningMap(n_bins=10).fit(s, y, sample_weight=w)
    bins = np.concatenate([[s.min()], m.edges_, [s.max()]])
    # numpy.histogram with the same edges: the same weight and positive weight per bin
    hist_w, _ = np.histogram(s, bins=bins, weights=w)
    hist_pos, _ = np.histogram(s, bins=bins, weights=w * y)
    np.testing.assert_allclose(m.bin_weights_, hist_w)
    # each bin's prior centre: the weighted mean of scipy's expit(s) over the bin
    from scipy.special import expit

    hist_p, _ = np.histogram(s, bins=bins, weights=w * expit(s))
    np.testing.assert_allclose(m.values_, (hist_pos + 2.0 * hist_p / hist_w) / (hist_w + 2.0))
    # equal mass: no bin is further than the heaviest single row from a tenth of the total
    assert np.all(np.abs(hist_w - w.sum() / 10) <= w.max())


# --------------------------------------------------------------------------- Venn-Abers
def _brute_venn_abers(s, y, w, test):
    """Vovk, Petej & Fedorova (2015), definition: refit isotonic regression with the test point
    labelled 0 and then 1 (weight 1), using scikit-learn's IsotonicRegression."""
    out = np.empty((len(test), 2))
    for i, t in enumerate(test):
        for label in (0, 1):
            ir = IsotonicRegression(out_of_bounds="clip").fit(
                np.r_[s, t], np.r_[y, label], sample_weight=np.r_[w, 1.0]
            )
            out[i, label] = ir.predict([t])[0]
    return out


def test_venn_abers_matches_brute_force_refits():
    rng = np.random.default_rng(9)
    n = 150
    s = np.round(rng.normal(size=n) * 2, 1)  # ties on purpose
    y = (rng.random(n) < expit(s)).astype(float)
    w = rng.uniform(0.2, 3.0, size=n)
    m = VennAbersMap().fit(s, y, sample_weight=w)
    test = np.concatenate([np.unique(s)[::2], rng.normal(size=150) * 3, [-50.0, 50.0]])
    ref = _brute_venn_abers(s, y, w, test)
    got = m.predict_interval(test)
    np.testing.assert_allclose(got, ref, atol=1e-10)
    # merged probability p1 / (1 - p0 + p1): the log-loss merge of Vovk, Petej & Fedorova
    # (2015) (formula from the paper; equation number not quoted)
    np.testing.assert_allclose(m.predict(test), ref[:, 1] / (1 - ref[:, 0] + ref[:, 1]), atol=1e-10)


def test_venn_abers_one_vs_rest_merge_shares_the_width_among_the_other_classes():
    # One-vs-rest for one of k = 4 classes: the interval is still the paper's (scikit-learn's
    # IsotonicRegression refitted with the test point labelled 0 and 1), and the merge uses
    # p0 + (p1 - p0) / (k - 1) in place of p1 (docs/calibration.md, "One-vs-rest with k
    # classes"); one_vs_rest_copy(map, 2) is the paper's binary merge.
    from probwrap.calibration._base import one_vs_rest_copy

    rng = np.random.default_rng(11)
    s = np.round(rng.normal(size=60) * 2, 1)
    y = (rng.random(60) < expit(s - 1)).astype(float)
    # exact ties and points half-way between the 0.1 grid (scikit-learn merges x values that
    # differ by rounding only, so near-ties are avoided)
    test = np.concatenate([[-50.0], np.unique(s)[::3], np.linspace(-8, 8, 41) + 0.05, [50.0]])
    ref = _brute_venn_abers(s, y, np.ones_like(s), test)
    m4 = one_vs_rest_copy(VennAbersMap(), 4).fit(s, y)
    np.testing.assert_allclose(m4.predict_interval(test), ref, atol=1e-10)
    p1 = ref[:, 0] + (ref[:, 1] - ref[:, 0]) / 3
    np.testing.assert_allclose(m4.predict(test), p1 / (1 - ref[:, 0] + p1), atol=1e-10)
    # below every calibration score p0 = 0: the merge there is a third of p1's share
    assert ref[0, 0] == 0 and ref[0, 1] > 0
    m2 = one_vs_rest_copy(VennAbersMap(), 2).fit(s, y)
    np.testing.assert_allclose(m2.predict(test), ref[:, 1] / (1 - ref[:, 0] + ref[:, 1]), atol=1e-10)
    assert m4.predict(test)[0] < m2.predict(test)[0]


def test_venn_abers_bundled_data_matches_brute_force(cancer_scores):
    s, y = cancer_scores
    m = VennAbersMap().fit(s, y)
    test = np.linspace(-25, 6, 120)
    np.testing.assert_allclose(
        m.predict_interval(test), _brute_venn_abers(s, y, np.ones_like(s), test), atol=1e-10
    )


def test_venn_abers_large_calibration_set_is_fast_and_exact_on_a_sample():
    # not a timed assertion: 2e4 rows should take well under a few seconds
    rng = np.random.default_rng(10)
    n = 20_000
    s = rng.normal(size=n)
    y = (rng.random(n) < expit(2 * s)).astype(float)
    t0 = time.perf_counter()
    m = VennAbersMap().fit(s, y)
    elapsed = time.perf_counter() - t0
    test = rng.normal(size=5)
    np.testing.assert_allclose(
        m.predict_interval(test), _brute_venn_abers(s, y, np.ones(n), test), atol=1e-10
    )
    print(f"VennAbersMap fit on {n} rows: {elapsed:.2f} s")
