"""The fading pull toward the source prior where no interval is computed, on large Dask sets,
in ``monitor``'s warnings, and the weight-scale warning of ``PriorEstimator`` (issue 10).

Last session the shrunk EM estimate began to fade its pull toward the source prior where the
data reject it (it lay outside the interval of the class shares). Three paths still kept the
fixed 20 pseudo-rows: ``n_resamples=0`` (no interval to check against: the Cleveland heart
file sorted by label gave 0.2555 without an interval and 0.051 with one), more than 20,000
multiclass Dask rows (reductions), and the Poisson bootstrap over tallied rows. Now the first
decides by the likelihood-ratio region of the shares (Wilks 1938) on the likelihood of Saerens,
Latinne & Decaestecker (2002, section 2.3), the second by the same rule as in memory, and the
third keeps the estimate inside its interval.

Outside references: the likelihood written out here and maximised / cut at the chi-square
quantile by ``scipy.optimize`` (``minimize_scalar``, ``minimize``, ``brentq``) with
``scipy.stats.chi2``; data bundled with scikit-learn (breast cancer, digits).
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from scipy.optimize import brentq, minimize, minimize_scalar
from scipy.stats import chi2
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning
from probwrap.shift import ImprecisePriorWarning, PriorEstimate, PriorEstimator, em_prior
from probwrap.shift._estimate import rejection_reach


def _cv_scores(X, y, C=1.0):
    model = make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=2000))
    return cross_val_predict(model, X, y, cv=5, method="predict_proba")


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn()


def _loglik(x, q):
    # Saerens et al. (2002), section 2.3: sum_n log sum_k x_k p_s(k | x_n) / pi_s(k)
    return float(np.sum(np.log(q @ x)))


@pytest.fixture(scope="module")
def sorted_cancer():
    # breast cancer sorted by label: 300 labelled rows (29 % benign), the next 100 all benign
    X, y = load_breast_cancer(return_X_y=True)
    s = _cv_scores(X, y)
    order = np.argsort(y, kind="stable")
    return s, y, order[:300], order[300:400]


@pytest.fixture(scope="module")
def digits_without_a_class():
    # digits 0, 1, 2 scored by a weak logistic regression fitted on 150 other rows; 180
    # labelled rows; 150 unlabelled rows without a 2
    X, y = load_digits(return_X_y=True)
    keep = y < 3
    X, y = X[keep], y[keep]
    idx = np.random.default_rng(0).permutation(len(y))
    train, lab, rest = idx[:150], idx[150:330], idx[330:]
    unl = rest[y[rest] != 2][:150]
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.01, max_iter=2000))
    return X, y, lab, unl, model.fit(X[train], y[train])


def test_without_an_interval_the_pull_fades_as_with_one(sorted_cancer):
    s, y, lab, unl = sorted_cancer
    res = _quiet(lambda: PriorEstimator(n_resamples=0).fit(s[lab], y[lab]).estimate(s[unl]))
    with_iv = _quiet(lambda: PriorEstimator().fit(s[lab], y[lab]).estimate(s[unl]))
    assert res.interval is None and res.ml_interval is None
    est = PriorEstimator(n_resamples=0).fit(s[lab], y[lab])
    q = est.calibrate(s[unl]) / est.source_prior_
    # scipy: the maximum-likelihood share (1: every row benign) and the profile-likelihood
    # interval of the share, {t: 2 (l(t_hat) - l(t)) <= chi2_1(0.95)}
    ml = minimize_scalar(lambda t: -_loglik(np.array([1 - t, t]), q), bounds=(1e-9, 1.0),
                         method="bounded", options={"xatol": 1e-12})
    top = -ml.fun
    cut = chi2.ppf(0.95, 1)
    low = brentq(lambda t: 2 * (top - _loglik(np.array([1 - t, t]), q)) - cut, 0.3, ml.x)
    full = em_prior(est.calibrate(s[unl]), est.source_prior_, prior_strength=20.0, tol=1e-10)
    # before: the full 20-pseudo-row estimate (0.877), which the data reject (outside the
    # profile-likelihood interval [0.95..., 1])
    assert full.prior[1] < low < 0.99
    # now: the Dirichlet MAP with the faded pseudo-rows, inside that interval
    a0, a1 = res.pseudo_rows * est.source_prior_
    ref = minimize_scalar(
        lambda t: -(_loglik(np.array([1 - t, t]), q) + a1 * np.log(t) + a0 * np.log1p(-t)),
        bounds=(1e-9, 1 - 1e-9), method="bounded", options={"xatol": 1e-12})
    assert res.pseudo_rows < 2.0
    assert res.prior[1] == pytest.approx(ref.x, abs=2e-6)
    assert low <= res.prior[1] <= 1.0
    # the same estimate (same pseudo-rows) as the default estimator with its score interval
    assert res.pseudo_rows == pytest.approx(with_iv.pseudo_rows, rel=1e-12)
    np.testing.assert_allclose(res.prior, with_iv.prior, atol=1e-9)


def test_without_an_interval_no_evidence_keeps_the_full_pull():
    X, y = load_breast_cancer(return_X_y=True)
    s = _cv_scores(X, y)
    idx = np.random.default_rng(3).permutation(len(y))
    lab, unl = idx[:300], idx[300:450]
    est = PriorEstimator(n_resamples=0).fit(s[lab], y[lab])
    res = est.estimate(s[unl])
    assert res.pseudo_rows == 20.0
    ref = em_prior(est.calibrate(s[unl]), est.source_prior_, prior_strength=20.0, tol=1e-9)
    np.testing.assert_allclose(res.prior, ref.prior, atol=2e-6)


def test_the_pull_back_stops_at_the_edge_of_the_likelihood_ratio_region(sorted_cancer):
    # a shrunk estimate still rejected after the fade is moved toward the maximum-likelihood
    # estimate to where the likelihood-ratio statistic equals the chi-square quantile (here the
    # fade is replaced by one that keeps the point, so the pull-back alone is checked)
    s, y, lab, unl = sorted_cancer
    est = PriorEstimator(n_resamples=0).fit(s[lab], y[lab])
    p = est.calibrate(s[unl])
    q = p / est.source_prior_
    ml = em_prior(p, est.source_prior_, tol=1e-12).prior
    far = PriorEstimate(prior=np.array([0.5, 0.5]), method="em")

    def loglik(x):
        return _loglik(x, q)

    settled, used = est._settle_by_likelihood(far, ml, loglik, lambda pt: (pt, 20.0), 1e-9)
    top = loglik(ml)
    cut = chi2.ppf(0.95, 1)
    low = brentq(lambda t: 2 * (top - loglik(np.array([1 - t, t]))) - cut, 0.5, ml[1])
    assert used == 20.0 and settled.prior[1] == pytest.approx(low, abs=1e-9)
    # the shift test not rejecting: nothing is done (the region leaves out the labelled error)
    kept, _ = est._settle_by_likelihood(far, ml, loglik, lambda pt: (pt, 20.0), 0.2)
    np.testing.assert_array_equal(kept.prior, far.prior)
    # rejection_reach on a likelihood of 100 rows of each class (a binomial): the end of the
    # likelihood-ratio interval of 0.5 (scipy: 0.568960)
    def ell(pi):
        return 100 * np.log(pi[1]) + 100 * np.log(pi[0])

    lam = rejection_reach(ell, np.array([0.5, 0.5]), np.array([0.1, 0.9]),
                          ell(np.array([0.5, 0.5])), cut)
    end = brentq(lambda t: 2 * (ell([0.5, 0.5]) - ell([1 - t, t])) - cut, 0.5, 0.9)
    assert 0.5 + 0.4 * lam == pytest.approx(end, abs=1e-10)


def test_three_classes_without_an_interval_stay_in_the_likelihood_ratio_region(
        digits_without_a_class):
    X, y, lab, unl, model = digits_without_a_class
    s = model.predict_proba(X)
    est = PriorEstimator(n_resamples=0).fit(s[lab], y[lab])
    res = _quiet(lambda: est.estimate(s[unl]))
    q = est.calibrate(s[unl]) / est.source_prior_

    # scipy: the maximum likelihood over the simplex (SLSQP), and the likelihood-ratio
    # statistic of the reported and of the full-pull estimate against chi2_2(0.95)
    def neg(z):
        x = np.abs(z) / np.abs(z).sum()
        return -_loglik(x, q)

    ref = minimize(neg, np.array([0.4, 0.5, 0.1]), method="Nelder-Mead",
                   options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000})
    top = -ref.fun
    assert top == pytest.approx(_loglik(res.ml_prior, q), abs=1e-6)
    # the cutoff: chi2 on one degree of freedom (along the segment from the maximum-likelihood
    # to the shrunk estimate) over the unlabelled rows' share of the shift test's variance,
    # T / T_u, with T_u the unlabelled rows' own score statistic n ubar' J^-1 ubar
    u = q[:, 1:] - q[:, :1]
    ubar, J = u.mean(axis=0), u.T @ u / u.shape[0]
    share = min(1.0, res.shift_statistic / (u.shape[0] * ubar @ np.linalg.solve(J, ubar)))
    assert 0.3 < share < 1.0
    cut = chi2.ppf(0.95, 1) / share
    full = em_prior(est.calibrate(s[unl]), est.source_prior_, prior_strength=20.0, tol=1e-10)
    assert 2 * (top - _loglik(full.prior, q)) > cut  # before: 0.044 for the absent class
    assert 2 * (top - _loglik(res.prior, q)) <= cut + 1e-6
    assert res.pseudo_rows < 20 and res.prior[2] < 0.02 and res.ml_prior[2] < 1e-6
    assert abs(res.prior.sum() - 1) < 1e-12


@pytest.mark.parametrize("n_resamples", [200, 0])
def test_large_multiclass_dask_sets_fade_as_in_memory(digits_without_a_class, tally_path,
                                                      n_resamples):
    # more than 20,000 multiclass rows (forced here: tally_path) are estimated by reductions;
    # before, they kept the 20 pseudo-rows (and an interval without n_resamples): now the same
    # estimate, pseudo-rows and interval as in memory on the same rows
    dask = pytest.importorskip("dask")
    da = pytest.importorskip("dask.array")
    X, y, lab, unl, model = digits_without_a_class
    if n_resamples == 200:
        # 80 unlabelled rows: the 20-pseudo-row estimate lies outside the class-moment
        # interval of the absent class
        unl = unl[:80]
    w = PriorShiftWrapper(FrozenEstimator(model), n_resamples=n_resamples,
                          random_state=0).fit(X[lab], y[lab])
    mem = _quiet(lambda: copy.deepcopy(w).adapt(X[unl])).prior_estimate_
    with dask.config.set(scheduler="synchronous"):
        dist = _quiet(lambda: copy.deepcopy(w).adapt(
            da.from_array(X[unl], chunks=(40, 64)))).prior_estimate_
    assert mem.pseudo_rows < 20
    assert dist.pseudo_rows == pytest.approx(mem.pseudo_rows, rel=1e-9)
    np.testing.assert_allclose(dist.prior, mem.prior, atol=1e-9)
    if n_resamples:
        np.testing.assert_allclose(dist.interval, mem.interval, atol=1e-9)
        np.testing.assert_allclose(dist.ml_interval, mem.ml_interval, atol=1e-9)
        lo, hi = mem.ml_interval[:, 0], mem.ml_interval[:, 1]
        assert np.all((lo - 1e-12 <= mem.prior) & (mem.prior <= hi + 1e-12))
    else:
        assert dist.interval is None and mem.interval is None


def test_monitor_warns_once_naming_the_imprecise_batches():
    # a weak two-class model (breast cancer on two weak features: mean and standard error of
    # the fractal dimension) and batches of 15 rows: the
    # intervals of the share reach far from the estimates, and monitor says so once, naming
    # the batches; batches of 150 rows on the good model draw no such warning
    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(1).permutation(len(y))
    train, lab, unl = idx[:150], idx[150:350], idx[350:]
    weak = LogisticRegression(max_iter=2000).fit(X[train][:, [9, 19]], y[train])
    wrapper = PriorShiftWrapper(FrozenEstimator(weak), random_state=0).fit(
        X[lab][:, [9, 19]], y[lab])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = wrapper.monitor(X[unl][:, [9, 19]], batch_size=15)
    found = [c for c in caught if issubclass(c.category, ImprecisePriorWarning)]
    reach = np.maximum(table["prior"][:, 1] - table["lower"][:, 1],
                       table["upper"][:, 1] - table["prior"][:, 1])
    far = np.flatnonzero(reach > 0.25)
    assert far.size >= 2 and len(found) == 1
    text = str(found[0].message)
    assert f"in {far.size} of {table.shape[0]} batches" in text
    assert f"(batch {', '.join(str(b) for b in table['batch'][far[:8]])}" in text
    good = PriorShiftWrapper(FrozenEstimator(LogisticRegression(max_iter=5000).fit(
        X[train], y[train])), random_state=0).fit(X[lab], y[lab])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = good.monitor(X[unl], batch_size=110)
    assert not [c for c in caught if issubclass(c.category, ImprecisePriorWarning)]
    assert np.max(table["upper"][:, 1] - table["lower"][:, 1]) < 0.5


def _weight_warnings(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(c.message) for c in caught if issubclass(c.category, WeightScaleWarning)]


def test_prior_estimator_says_when_the_calibration_reads_weights_by_scale(sorted_cancer):
    # the calibration inside reads weights by the maps' rule (docs/weights.md): as counts when
    # they sum to at least the rows; x1,000 then moves what calibrate_output returns, and the
    # estimator now says so once, as PriorShiftWrapper.fit does (which still warns only once)
    X, y = load_breast_cancer(return_X_y=True)
    s = _cv_scores(X, y)
    idx = np.random.default_rng(2).permutation(len(y))[:60]
    w = np.random.default_rng(0).integers(1, 4, 60).astype(float)
    est, said = _weight_warnings(lambda: PriorEstimator(n_resamples=0).fit(s[idx], y[idx], w))
    assert not said  # whole numbers without a common factor: counts, as meant
    big, said = _weight_warnings(
        lambda: PriorEstimator(n_resamples=0).fit(s[idx], y[idx], 1000 * w))
    assert len(said) == 1 and "PriorEstimator.fit" in said[0] and "multiple of 1000" in said[0]
    # what the warning says moves, moves: the calibration reads 1,000 copies of every row
    assert np.max(np.abs(est.calibrate_output(s) - big.calibrate_output(s))) > 1e-3
    _, said = _weight_warnings(
        lambda: PriorEstimator(n_resamples=0).fit(s[idx], y[idx], w / w.sum()))
    assert len(said) == 1 and "sums to less than the number of rows" in said[0]
    # no calibration: every use of the weights reads their ratios only, nothing to say
    _, said = _weight_warnings(lambda: PriorEstimator(n_resamples=0, calibration=None).fit(
        s[idx], y[idx], 1000 * w))
    assert not said
    # the wrapper says it once, in its own words
    model = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[:200], y[:200]))
    _, said = _weight_warnings(lambda: PriorShiftWrapper(model, n_resamples=0).fit(
        X[idx], y[idx], sample_weight=1000 * w))
    assert len(said) == 1 and "PriorShiftWrapper.fit" in said[0]


def test_report_words_for_a_faded_pull_with_more_classes():
    from types import SimpleNamespace

    from probwrap.report._general_html import pull_words

    faded = SimpleNamespace(prior_strength=20.0, pseudo_rows=1.74)
    pull, sentence = pull_words(faded, "source shares", "95%")
    assert pull == "as if 1.7 labelled rows at the source shares were added"
    assert "reject, at the 95% level" in sentence and "lies inside the interval" in sentence
    full = SimpleNamespace(prior_strength=20.0, pseudo_rows=20.0)
    assert pull_words(full, "source shares", "95%") == (
        "as if 20 labelled rows at the source shares were added", "")


def test_tallied_labelled_rows_keep_the_estimate_inside_its_interval(sorted_cancer,
                                                                     tally_path):
    # labelled rows fitted on Dask (a tally, forced here) and a bootstrap interval: adapt's
    # interval comes from one Poisson bootstrap over the tally and the rows (tallied_adapt),
    # and the estimate from estimate(interval=False); before, the full pull (0.864) lay outside
    # that interval [0.964, 1]
    dask = pytest.importorskip("dask")
    da = pytest.importorskip("dask.array")
    X, y = load_breast_cancer(return_X_y=True)
    _, _, lab, unl = sorted_cancer
    train = np.random.default_rng(0).permutation(len(y))[:200]
    model = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[train], y[train]))
    with dask.config.set(scheduler="synchronous"):
        w = PriorShiftWrapper(model, interval="bca", n_resamples=100, random_state=0).fit(
            da.from_array(X[lab], chunks=(100, 30)), da.from_array(y[lab], chunks=100))
    assert w._source_tally is not None
    _quiet(lambda: w.adapt(X[unl]))
    res = w.prior_estimate_
    lo, hi = res.ml_interval[1]
    assert res.ml_prior[1] == pytest.approx(1.0) and lo > 0.9
    assert lo <= w.target_prior_[1] <= hi and res.pseudo_rows < 20
    np.testing.assert_allclose(w.target_prior_interval_, res.ml_interval)
