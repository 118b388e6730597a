"""The shrunk prior estimate under strong evidence of a shift (issue 10, "do no harm").

The default EM estimate is shrunk toward the source prior by Dirichlet pseudo-rows. Before
4 December 2026 their number was fixed (``prior_strength=20``), and the Dirichlet's log-density,
whose slope is unbounded at a share of 0, held the estimate far inside the simplex when the
unlabelled rows said firmly that a class was absent: a reference file sorted by label (the
first 200 rows of the Cleveland heart data, 82.5 % disease, as labelled rows; the last 103, no
disease, as unlabelled ones) gave 0.255 with an interval [0, 0.255], while the
maximum-likelihood share was 0 with interval [0, 0.14]. The pull now fades with the shift test's
statistic (``evidence_strength``), the estimate stays inside the interval of the class shares,
and the boundary warning says when the edge is a finding.

Outside references: the maximum-likelihood and Dirichlet-MAP shares of Saerens, Latinne &
Decaestecker (2002, section 2.3 likelihood) found by ``scipy.optimize.minimize_scalar`` on the
log-likelihood written out here, and the Fisher information by finite differences of that
likelihood; data bundled with scikit-learn (breast cancer, digits) and pingouin (Cleveland
heart).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import minimize_scalar
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import BoundaryPriorWarning, PriorEstimator, em_prior
from probwrap.shift._estimate import evidence_strength


def _cv_scores(X, y, C=1.0):
    model = make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=2000))
    return cross_val_predict(model, X, y, cv=5, method="predict_proba")


@pytest.fixture(scope="module")
def sorted_cancer():
    # breast cancer sorted by label (212 malignant = 0 first): 300 labelled rows (29 % benign),
    # the next 100 rows as unlabelled ones, all benign
    X, y = load_breast_cancer(return_X_y=True)
    s = _cv_scores(X, y)
    order = np.argsort(y, kind="stable")
    lab, unl = order[:300], order[300:400]
    assert y[unl].min() == 1 and abs(y[lab].mean() - 88 / 300) < 1e-12
    return X, y, s, lab, unl


def _neg_loglik(t, q0, q1, a0=0.0, a1=0.0):
    # Saerens et al. (2002), section 2.3: log-likelihood of the unlabelled rows as a function of
    # the share t of class 1, p(x | k) proportional to p_s(k | x) / pi_s(k); plus the
    # log-density of a Dirichlet(1 + a0, 1 + a1)
    mix = q0 + t * (q1 - q0)
    return -(np.sum(np.log(mix)) + a1 * np.log(t) + a0 * np.log1p(-t))


def test_estimate_stays_inside_the_interval_of_the_shares(sorted_cancer):
    X, y, s, lab, unl = sorted_cancer
    est = PriorEstimator().fit(s[lab], y[lab])
    with pytest.warns(BoundaryPriorWarning):
        res = est.estimate(s[unl])
    lo, hi = res.ml_interval[1]
    # the maximum-likelihood share is 1 (scipy on the likelihood agrees: above 0.999)
    p = est.calibrate(s[unl])
    q = p / est.source_prior_
    ref = minimize_scalar(_neg_loglik, bounds=(1e-9, 1 - 1e-9), method="bounded",
                          args=(q[:, 0], q[:, 1]), options={"xatol": 1e-10})
    assert ref.x > 0.999 and res.ml_prior[1] == pytest.approx(1.0, abs=1e-6)
    # before: shrunk 0.877 against an interval of the shares [0.964, 1]
    assert lo <= res.prior[1] <= hi
    assert res.prior[1] > 0.98 and lo > 0.95
    # the reported interval is the interval of the shares (no widening to a rejected value)
    np.testing.assert_allclose(res.interval, res.ml_interval)
    assert res.shift_pvalue < 1e-20 and res.pseudo_rows < 2.0


def test_shrunk_share_is_the_dirichlet_map_with_the_faded_pseudo_rows(sorted_cancer):
    # the reported share maximises likelihood + Dirichlet log-density with pseudo_rows (scipy),
    # and pseudo_rows is the empirical-Bayes count: the shrink share dof / T of Efron & Morris
    # (1973), c / (n_info + c) = 1 / T, with n_info the Fisher information of the rows about the
    # share (finite differences of the likelihood at the source share) over one pseudo-row's
    # curvature 1 / pi + 1 / (1 - pi) there
    X, y, s, lab, unl = sorted_cancer
    est = PriorEstimator().fit(s[lab], y[lab])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BoundaryPriorWarning)
        res = est.estimate(s[unl])
    src = est.source_prior_
    q = est.calibrate(s[unl]) / src
    h = 1e-4
    t0 = src[1]
    second = (-_neg_loglik(t0 + h, q[:, 0], q[:, 1]) + 2 * _neg_loglik(t0, q[:, 0], q[:, 1])
              - _neg_loglik(t0 - h, q[:, 0], q[:, 1])) / h**2
    n_info = -second / (1 / src[0] + 1 / src[1])
    expected = n_info / (res.shift_statistic - 1)
    assert res.pseudo_rows == pytest.approx(expected, rel=1e-4)
    assert res.pseudo_rows < 20
    a0, a1 = res.pseudo_rows * src
    ref = minimize_scalar(_neg_loglik, bounds=(1e-9, 1 - 1e-9), method="bounded",
                          args=(q[:, 0], q[:, 1], a0, a1), options={"xatol": 1e-12})
    assert res.prior[1] == pytest.approx(ref.x, abs=2e-6)


def test_no_evidence_keeps_the_full_pull():
    # rows drawn at random (no shift): T is small, all 20 pseudo-rows are used, and the estimate
    # is em_prior's MAP with prior_strength=20 exactly as before
    X, y = load_breast_cancer(return_X_y=True)
    s = _cv_scores(X, y)
    idx = np.random.default_rng(3).permutation(len(y))
    lab, unl = idx[:300], idx[300:450]
    est = PriorEstimator().fit(s[lab], y[lab])
    res = est.estimate(s[unl])
    assert res.shift_statistic < 3.84 and res.pseudo_rows == 20.0
    ref = em_prior(est.calibrate(s[unl]), est.source_prior_, prior_strength=20.0, tol=1e-9)
    np.testing.assert_allclose(res.prior, ref.prior, atol=2e-6)
    p = est.calibrate(s[unl])
    assert evidence_strength(20.0, p, np.ones(150), est.source_prior_, 0.5, 1) == 20.0
    # on 8 rows the empirical-Bayes count is below 20 already at T = 3 (p = 0.08), but the pull
    # fades only once the test rejects at the interval's level
    few = evidence_strength(20.0, p[:8], np.ones(8), est.source_prior_, 3.0, 1)
    assert few < 20.0
    assert evidence_strength(20.0, p[:8], np.ones(8), est.source_prior_, 3.0, 1,
                             pvalue=0.083, alpha=0.05) == 20.0
    assert evidence_strength(20.0, p[:8], np.ones(8), est.source_prior_, 3.0, 1,
                             pvalue=0.04, alpha=0.05) == few


def test_a_shrunk_estimate_the_data_allow_keeps_the_full_pull():
    # a strong shift (breast cancer, 150 unlabelled rows at about 30 % benign against 63 %
    # labelled) whose 20-pseudo-row estimate lies inside the interval of the shares: nothing
    # conflicts, so nothing changes (the benchmark's evidence cells, likewise, are unchanged)
    X, y = load_breast_cancer(return_X_y=True)
    s = _cv_scores(X, y)
    rng = np.random.default_rng(5)
    idx = rng.permutation(len(y))
    lab, rest = idx[:250], idx[250:]
    unl = np.concatenate([rest[y[rest] == 1][:45], rest[y[rest] == 0][:105]])
    est = PriorEstimator().fit(s[lab], y[lab])
    res = est.estimate(s[unl])
    assert res.shift_pvalue < 1e-6
    assert res.ml_interval[1, 0] <= res.prior[1] <= res.ml_interval[1, 1]
    assert res.pseudo_rows == 20.0
    ref = em_prior(est.calibrate(s[unl]), est.source_prior_, prior_strength=20.0, tol=1e-9)
    np.testing.assert_allclose(res.prior, ref.prior, atol=2e-6)


def test_three_classes_absent_class_stays_inside():
    # digits 0, 1, 2; 80 unlabelled rows without a 2: before, the shrunk share of 2 was 0.073
    # against an interval of the shares [0, 0.045]
    X, y = load_digits(return_X_y=True)
    keep = y < 3
    X, y = X[keep], y[keep]
    s = _cv_scores(X, y, C=0.01)
    idx = np.random.default_rng(0).permutation(len(y))
    lab, rest = idx[:200], idx[200:]
    unl = rest[y[rest] != 2][:80]
    with pytest.warns(BoundaryPriorWarning, match="class index 2"):
        res = PriorEstimator().fit(s[lab], y[lab]).estimate(s[unl])
    assert res.ml_prior[2] < 1e-3 and res.ml_interval[2, 1] < 0.06
    for j in range(3):
        assert res.ml_interval[j, 0] - 1e-12 <= res.prior[j] <= res.ml_interval[j, 1] + 1e-12
    assert res.prior[2] < 0.6 * res.ml_interval[2, 1]  # not pinned to the interval's end
    assert abs(res.prior.sum() - 1) < 1e-12


def test_boundary_warning_says_the_edge_is_a_finding(sorted_cancer):
    X, y, s, lab, unl = sorted_cancer
    est = PriorEstimator().fit(s[lab], y[lab])
    with pytest.warns(BoundaryPriorWarning) as record:
        est.estimate(s[unl])
    text = " ".join(str(r.message) for r in record if r.category is BoundaryPriorWarning)
    assert "the data point there firmly" in text and "Read the edge as a finding" in text
    assert "do not read the edge value" not in text and "lies inside the interval" in text


def test_wrapper_moves_to_a_share_the_data_allow(sorted_cancer):
    X, y, s, lab, unl = sorted_cancer
    rest = np.setdiff1d(np.arange(len(y)), np.concatenate([lab, unl]))
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    # a model fitted on rows of both classes outside the labelled and unlabelled ones, plus
    # every other labelled row (the rest are all benign)
    train = np.concatenate([rest, lab[::2]])
    frozen = FrozenEstimator(model.fit(X[train], y[train]))
    wrapper = PriorShiftWrapper(frozen, random_state=0).fit(X[lab], y[lab])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.adapt(X[unl])
    res = wrapper.prior_estimate_
    lo, hi = res.ml_interval[1]
    assert lo <= wrapper.target_prior_[1] <= hi
    assert wrapper.target_prior_[1] > 0.95
