"""Reference tests for the calibration tests and calibration errors of probwrap.metrics.

Each assertion names the outside source it relies on (a published formula, a hand-worked example,
or SciPy / scikit-learn). Checks of probwrap against itself say "consistency".
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import integrate, optimize, stats
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.metrics import (
    ApproximatePValueWarning,
    debiased_calibration_error,
    hosmer_lemeshow_test,
    smooth_calibration_error,
    spiegelhalter_z_test,
)


@pytest.fixture(scope="module")
def cancer_holdout():
    """Held-out probabilities of a weak logistic model (3 features) on scikit-learn's bundled
    breast cancer data: few forecasts at exactly 0 or 1, so every group has a variance."""
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, [0, 1, 4]]
    X_tr, X_te, y_tr, y_te = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05)).fit(X_tr, y_tr)
    return y_te, model.predict_proba(X_te)[:, 1]


# ---------------------------------------------------------------------------------------------
# Hosmer-Lemeshow — reference: Pearson's chi-square of the 2 x G table by scipy.stats.chisquare
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("setting, dof_drop", [("fitted", 2), ("held_out", 0)])
def test_hosmer_lemeshow_equals_scipy_chisquare(cancer_holdout, setting, dof_drop):
    y, p = cancer_holdout
    res = hosmer_lemeshow_test(y, p, setting=setting)
    # deciles of risk built directly: sort, cut into 10 runs of (nearly) equal size (Hosmer &
    # Lemeshow 1980); the forecasts here are distinct, so no tie decides a cut
    assert np.unique(p).size == p.size
    order = np.argsort(p)
    n = p.size
    groups = np.empty(n, dtype=int)
    groups[order] = np.minimum(np.arange(n) * 10 // n, 9)
    cut_sizes = np.bincount(groups)
    # our quantile cuts put at most j/10 of the weight below cut j: sizes differ by at most one
    assert np.abs(res.weight - cut_sizes).max() <= 1
    # rebuild the table from our groups' sizes (in sorted order), then let SciPy do the chi-square
    bounds = np.concatenate(([0], np.cumsum(res.weight.astype(int))))
    obs1 = np.add.reduceat(y[order].astype(float), bounds[:-1])
    exp1 = np.add.reduceat(p[order], bounds[:-1])
    size = np.diff(bounds).astype(float)
    g = size.size
    f_obs = np.concatenate((obs1, size - obs1))
    f_exp = np.concatenate((exp1, size - exp1))
    # scipy's dof is 2g - 1 - ddof; Hosmer-Lemeshow wants g - 2 (fitted) or g (held out)
    ref = stats.chisquare(f_obs, f_exp, ddof=(2 * g - 1) - (g - dof_drop))
    assert res.dof == g - dof_drop
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-12)  # same sums, other order
    assert res.pvalue == pytest.approx(ref.pvalue, rel=1e-10)


def test_hosmer_lemeshow_weights_are_row_frequencies():
    # consistency: weight 2 gives the same table as a copied row
    rng = np.random.default_rng(3)
    p = rng.uniform(0.05, 0.95, size=300)
    y = (rng.uniform(size=300) < p).astype(int)
    w = rng.integers(1, 4, size=300)
    a = hosmer_lemeshow_test(y, p, sample_weight=w)
    b = hosmer_lemeshow_test(np.repeat(y, w), np.repeat(p, w))
    assert a.statistic == pytest.approx(b.statistic, rel=1e-10)
    assert a.dof == b.dof


def test_hosmer_lemeshow_bad_input():
    with pytest.raises(ValueError, match="`setting`"):
        hosmer_lemeshow_test([0, 1], [0.2, 0.6], setting="external")
    with pytest.raises(ValueError, match="`n_groups`"):
        hosmer_lemeshow_test([0, 1], [0.2, 0.6], n_groups=0)
    with pytest.raises(ValueError, match="group"):
        hosmer_lemeshow_test([0, 1, 1, 0], [0.3, 0.3, 0.3, 0.3])  # one tied group, fitted: g-2 < 1


# ---------------------------------------------------------------------------------------------
# Spiegelhalter's Z — reference: the Brier-score test of Spiegelhalter (1986, Stat Med 5:421-433,
# section on testing calibration): Z = (B - E0[B]) / sqrt(Var0[B]) with E0[B] = mean p(1-p) and
# Var0[B] = sum (1-2p)^2 p(1-p) / n^2 (the form as recalled from memory; equation number not
# checked) — and a hand-worked example.
# ---------------------------------------------------------------------------------------------


def test_spiegelhalter_hand_worked_example():
    # p = (0.2, 0.6, 0.9), y = (0, 1, 1), worked by hand:
    #   (y - p)(1 - 2p): (-0.2)(0.6) + (0.4)(-0.2) + (0.1)(-0.8) = -0.12 - 0.08 - 0.08 = -0.28
    #   (1 - 2p)^2 p (1 - p): 0.36*0.16 + 0.04*0.24 + 0.64*0.09 = 0.0576 + 0.0096 + 0.0576 = 0.1248
    #   Z = -0.28 / sqrt(0.1248) = -0.792594...
    res = spiegelhalter_z_test([0, 1, 1], [0.2, 0.6, 0.9])
    assert res.statistic == pytest.approx(-0.28 / np.sqrt(0.1248), rel=1e-12)
    # Brier score B = (0.04 + 0.16 + 0.01) / 3 = 0.07, E0[B] = (0.16 + 0.24 + 0.09) / 3 = 0.163333
    assert res.brier == pytest.approx(0.07, rel=1e-12)
    assert res.expected_brier == pytest.approx(0.49 / 3, rel=1e-12)
    # two-sided normal p-value, from SciPy
    assert res.pvalue == pytest.approx(2 * stats.norm.cdf(-0.28 / np.sqrt(0.1248)), rel=1e-12)


def test_spiegelhalter_equals_standardised_brier(cancer_holdout):
    # the defining form Z = (B - E0[B]) / sqrt(Var0[B]) computed literally (Spiegelhalter 1986)
    y, p = cancer_holdout
    n = p.size
    brier = np.mean((y - p) ** 2)
    e0 = np.mean(p * (1 - p))
    var0 = np.sum((1 - 2 * p) ** 2 * p * (1 - p)) / n**2
    res = spiegelhalter_z_test(y, p)
    assert res.statistic == pytest.approx((brier - e0) / np.sqrt(var0), rel=1e-9)  # cancellation


def test_spiegelhalter_undefined_when_no_information():
    with pytest.raises(ValueError, match="0, 1/2 or 1"):
        spiegelhalter_z_test([0, 1, 1], [0.5, 0.5, 1.0])


# ---------------------------------------------------------------------------------------------
# smooth ECE — reference: the definition of Błasiok & Nakkiran (2023) integrated by scipy's quad
# ---------------------------------------------------------------------------------------------

_P = np.array([0.03, 0.15, 0.3, 0.42, 0.55, 0.7, 0.81, 0.97])
_Y = np.array([1, 0, 0, 1, 0, 1, 0, 1], dtype=float)
_W = np.array([1, 2, 1, 3, 1, 1, 2, 1], dtype=float)


def _smooth_by_quad(sigma: float) -> float:
    # reflected Gaussian kernel: images at shifts 2k, |k| <= 4 (enough for sigma <= 1)
    images = 2.0 * np.arange(-4, 5)[:, None]
    norm = 1.0 / (sigma * np.sqrt(2.0 * np.pi))
    weighted_residual = _W * (_Y - _P) / _W.sum()

    def integrand(t):
        kern = norm * (np.exp(-0.5 * ((t - _P - images) / sigma) ** 2)
                       + np.exp(-0.5 * ((t + _P - images) / sigma) ** 2)).sum(axis=0)
        return abs(np.dot(weighted_residual, kern))

    return integrate.quad(integrand, 0.0, 1.0, limit=1000, epsabs=1e-14, epsrel=1e-13)[0]


@pytest.mark.parametrize("sigma", [0.02, 0.1, 0.5])
def test_smooth_ece_at_fixed_bandwidth_equals_quadrature(sigma):
    # grid of 16384 cells: discretisation error of order (cell / sigma)^2 <= 1e-5 at sigma 0.02;
    # measured about 2e-8, we allow 1e-6
    ours = smooth_calibration_error(_Y, _P, bandwidth=sigma, sample_weight=_W)
    assert ours == pytest.approx(_smooth_by_quad(sigma), abs=1e-6)


def test_smooth_ece_fixed_point_equals_quadrature():
    # the bandwidth sigma* with smECE(sigma*) = sigma* (Błasiok & Nakkiran 2023), found with
    # brentq on the quadrature form; same grid tolerance as above
    sigma_star = optimize.brentq(lambda s: _smooth_by_quad(s) - s, 1e-3, 1.0, xtol=1e-12)
    assert smooth_calibration_error(_Y, _P, sample_weight=_W) == pytest.approx(sigma_star, abs=1e-6)


@pytest.mark.parametrize("c, q", [(0.6, 0.75), (0.1, 0.0), (0.93, 0.5)])
def test_smooth_ece_constant_forecast_is_the_gap(c, q):
    # from the definition: one forecast c, outcome rate q: the kernel integrates to one on [0, 1]
    # (reflection keeps its mass), so smECE_sigma = |q - c| for every sigma and sigma* = |q - c|
    n = 40
    y = (np.arange(n) < q * n).astype(int)
    p = np.full(n, c)
    for sigma in (0.01, 0.3):
        assert smooth_calibration_error(y, p, bandwidth=sigma) == pytest.approx(abs(q - c), abs=1e-12)
    assert smooth_calibration_error(y, p) == pytest.approx(abs(q - c), abs=1e-12)


def test_smooth_ece_weight_scale_and_copies():
    # consistency: weights as frequencies, and scaling every weight changes nothing
    a = smooth_calibration_error(_Y, _P, sample_weight=_W)
    b = smooth_calibration_error(np.repeat(_Y, _W.astype(int)), np.repeat(_P, _W.astype(int)))
    c = smooth_calibration_error(_Y, _P, sample_weight=_W * 1e-3)
    assert a == pytest.approx(b, rel=1e-10)
    assert a == pytest.approx(c, rel=1e-10)


def test_smooth_ece_bad_bandwidth():
    with pytest.raises(ValueError, match="`bandwidth`"):
        smooth_calibration_error([0, 1], [0.2, 0.6], bandwidth=0.0)


# ---------------------------------------------------------------------------------------------
# debiased binned calibration error — reference: exact expectation over binomial outcomes
# (scipy.stats.binom), which Kumar, Liang & Ma (2019) show the estimator matches
# ---------------------------------------------------------------------------------------------


def test_debiased_error_is_exactly_unbiased_under_binomial_outcomes():
    # two bins of m rows each, forecast p_b in bin b, true rate q_b. The positives in bin b are
    # Binomial(m, q_b); averaging the estimator over all (k1, k2) outcomes with SciPy's pmf gives
    # its expectation, which must equal the true binned squared error sum_b 0.5 (q_b - p_b)^2.
    m = 6
    p_b = np.array([0.2, 0.8])
    q_b = np.array([0.35, 0.7])
    pmf = [stats.binom.pmf(np.arange(m + 1), m, q) for q in q_b]
    expectation = 0.0
    plugin = 0.0
    for k1 in range(m + 1):
        for k2 in range(m + 1):
            y = np.concatenate((np.arange(m) < k1, np.arange(m) < k2)).astype(int)
            p = np.repeat(p_b, m)
            prob = pmf[0][k1] * pmf[1][k2]
            expectation += prob * debiased_calibration_error(y, p, n_bins=2, squared=True)
            obs = np.array([k1, k2]) / m
            plugin += prob * np.mean((obs - p_b) ** 2)
    truth = np.mean((q_b - p_b) ** 2)
    assert expectation == pytest.approx(truth, rel=1e-12)  # exact algebra, sums of 49 terms
    # and the plug-in is biased upwards by the mean binomial variance q(1-q)/m
    assert plugin == pytest.approx(truth + np.mean(q_b * (1 - q_b) / m), rel=1e-12)


def test_debiased_error_small_bin_warns():
    with pytest.warns(UserWarning, match="at most 1"):
        debiased_calibration_error([0, 1, 1], [0.1, 0.5, 0.9], n_bins=3, strategy="uniform")


# ---------------------------------------------------------------------------------------------
# rejection rate under perfect calibration (known behaviour; the full 2,000-repetition check is
# benchmarks/assessment.py)
# ---------------------------------------------------------------------------------------------


@pytest.mark.slow
def test_tests_reject_at_nominal_rate_under_calibration():
    rng = np.random.default_rng(12)
    n_rep, n = 1000, 300
    hl = hl_wrong = spieg = 0
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        # the outer deciles of risk expect about 2 events (below the common-practice 5): warned
        warnings.simplefilter("ignore", ApproximatePValueWarning)
        for _ in range(n_rep):
            p = rng.uniform(0.02, 0.98, size=n)
            y = (rng.uniform(size=n) < p).astype(int)
            hl += hosmer_lemeshow_test(y, p, setting="held_out").pvalue < 0.05
            hl_wrong += hosmer_lemeshow_test(y, p, setting="fitted").pvalue < 0.05
            spieg += spiegelhalter_z_test(y, p).pvalue < 0.05
    # 1000 repetitions: SE of a 5 % rate = sqrt(0.05 * 0.95 / 1000) = 0.69 points. We allow
    # 3.5 SE = 2.4 points (a false alarm about 1 run in 2000 per rate; the chi-square and normal
    # approximations at n = 300 add a little of their own).
    assert abs(hl / n_rep - 0.05) <= 0.024
    assert abs(spieg / n_rep - 0.05) <= 0.024
    # held-out forecasts judged with G - 2 degrees of freedom reject too often: if C ~ chi2_10,
    # P(C > chi2_8 quantile 0.95) = stats.chi2.sf(stats.chi2.ppf(0.95, 8), 10) = 0.115; at 1000
    # repetitions its SE is 1.0 point, so 3.5 SE below it is 0.08 — far above the 5 % target
    assert hl_wrong / n_rep > 0.08
