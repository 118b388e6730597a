"""The analytic (delta-method) interval of the multiclass EM prior, and the small fitted
wrapper it allows (no labelled rows kept beyond 20,000)."""

from __future__ import annotations

import pickle
import warnings

import numpy as np
import pytest
from scipy.optimize import approx_fprime
from scipy.stats import multinomial
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift import PriorEstimator
from probwrap.shift._analytic import labelled_parameter_cov, score_derivatives
from probwrap.shift._estimate import _solve_prior

CENTRES = np.array([[0.0, 0.0], [1.5, 0.3], [0.4, 1.6]])


def draw(n, prior, rng):
    y = rng.choice(3, size=n, p=prior)
    return CENTRES[y] + rng.normal(size=(n, 2)), y


@pytest.fixture(scope="module")
def model():
    X, y = draw(5000, [0.5, 0.3, 0.2], np.random.default_rng(0))
    return LogisticRegression(C=0.05).fit(X, y)  # shrunk: the calibration has work to do


def _ml(p_cal, src, w):
    return _solve_prior(p_cal, w, src, src, 1e-13, 100_000)[0]


@pytest.mark.parametrize("kind", ["bcts", "vector"])
def test_fixed_point_derivatives_match_scipy_finite_differences(model, kind):
    # Reference: scipy.optimize.approx_fprime on the EM solver itself. By the implicit function
    # theorem the maximum-likelihood prior moves with the labelled estimates eta = (theta,
    # source prior) as d pi / d eta = -A^-1 D; re-solving EM (to 1e-13) at eta +- h gives the
    # same derivative up to the finite-difference error (step 1e-6: about 1e-6 relative, so
    # rtol 1e-4; atol for entries that are near 0).
    rng = np.random.default_rng(1)
    X, y = draw(1500, [0.5, 0.3, 0.2], rng)
    X_new, _ = draw(1500, [0.3, 0.5, 0.2], rng)
    est = PriorEstimator(calibration=kind, n_resamples=0).fit(model.predict_proba(X), y)
    q = model.predict_proba(X_new)
    w = np.ones(q.shape[0])
    cal, src = est.calibrator_, est.source_prior_
    n_scale = 1 if kind == "bcts" else 3
    theta0 = np.concatenate([cal.scale_[:n_scale], cal.bias_[1:]])
    eta0 = np.concatenate([theta0, src[1:]])
    z = cal.log_scores(q)

    def ml_at(eta):
        theta, s_free = eta[:theta0.size], eta[theta0.size:]
        scale = np.broadcast_to(theta[:n_scale], (3,))
        bias = np.concatenate([[0.0], theta[n_scale:]])
        logits = z * scale + bias
        p = np.exp(logits - logits.max(1, keepdims=True))
        p /= p.sum(1, keepdims=True)
        s = np.concatenate([[1.0 - s_free.sum()], s_free])
        return _ml(p, s, w)[1:]

    pi = np.concatenate([[0.0], ml_at(eta0)])
    pi[0] = 1.0 - pi[1:].sum()
    _, a, d = score_derivatives(cal, q, w, src, pi)
    implied = -np.linalg.solve(a, d)
    numeric = np.column_stack([
        approx_fprime(eta0, lambda e, j=j: ml_at(e)[j], 1e-6) for j in range(2)]).T
    np.testing.assert_allclose(implied, numeric, rtol=1e-4, atol=1e-6)
    # and A is minus the observed information: the Hessian of the mean log-likelihood in the
    # free shares (scipy finite differences of its gradient)
    r = est.calibrate(q) / src

    def grad(free):
        full = np.concatenate([[1.0 - free.sum()], free])
        return ((r[:, 1:] - r[:, :1]) / (r @ full)[:, None]).mean(0)

    hess = np.column_stack([approx_fprime(pi[1:], lambda f, j=j: grad(f)[j], 1e-7)
                            for j in range(2)]).T
    np.testing.assert_allclose(a, hess, rtol=1e-4)


def test_labelled_share_block_is_the_multinomial_covariance():
    # Reference: scipy.stats.multinomial(n, p).cov() / n^2 is the covariance of the sample
    # shares of n draws; without a calibration the labelled summary is exactly that, for the
    # shares the rows show (to rounding).
    rng = np.random.default_rng(2)
    y = rng.choice(3, size=400, p=[0.5, 0.3, 0.2])
    share = np.bincount(y, minlength=3) / 400
    cov = labelled_parameter_cov(None, np.full((400, 3), 1 / 3), y, np.ones(400), share, 400.0)
    ref = multinomial(400, share).cov() / 400**2
    np.testing.assert_allclose(cov, ref[1:, 1:], rtol=1e-10, atol=1e-15)


@pytest.mark.parametrize("kind", ["temperature", "vector"])
def test_calibration_block_is_the_statsmodels_sandwich(kind):
    # Reference: statsmodels' GenericLikelihoodModel with cov_type="HC0" — the robust
    # (Huber-White) sandwich H^-1 (sum s_i s_i^T) H^-1 from its own numerical derivatives of
    # the same per-row log-likelihood (the calibration without its scale prior). The labelled
    # rows' calibration block of the analytic interval is that sandwich, not the model-based
    # inverse Hessian: on posteriors distorted beyond what the map can undo (misspecified) the
    # two differ by 3-28 % here, so the comparison has teeth. Tolerance 1e-4: statsmodels
    # differentiates numerically (agreement seen about 1e-6).
    from scipy.special import log_softmax
    from statsmodels.base.model import GenericLikelihoodModel

    from probwrap.shift._calibration import BiasCorrectedScaling

    rng = np.random.default_rng(4)
    n = 600
    y = rng.choice(3, size=n, p=[0.5, 0.3, 0.2])
    logits = rng.normal(size=(n, 3)) + 1.2 * np.eye(3)[y]
    proba = np.exp(log_softmax(np.sign(logits) * np.abs(logits) ** 1.6, axis=1))
    cal = BiasCorrectedScaling(kind=kind, shrinkage=0.0).fit(proba, y)
    z = cal.log_scores(proba)
    n_scale = 1 if kind == "temperature" else 3

    class Calibration(GenericLikelihoodModel):
        def loglikeobs(self, theta):
            a = np.broadcast_to(theta[:n_scale], (3,))
            b = np.concatenate([[0.0], theta[n_scale:]])
            return log_softmax(z * a + b, axis=1)[np.arange(n), y]

    theta = np.concatenate([cal.scale_[:n_scale], cal.bias_[1:]])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # statsmodels: degrees of freedom of a generic model
        model = Calibration(y.astype(float), np.ones((n, 1)))
        robust = model.fit(start_params=theta + 0.05, method="newton", disp=0, cov_type="HC0")
        plain = model.fit(start_params=theta + 0.05, method="newton", disp=0)
    np.testing.assert_allclose(robust.params, theta, atol=1e-6)
    cov = labelled_parameter_cov(cal, proba, y, np.ones(n), np.bincount(y) / n, float(n))
    q = theta.shape[0]
    np.testing.assert_allclose(cov[:q, :q], robust.cov_params(), rtol=1e-4)
    assert np.max(np.abs(np.diag(cov[:q, :q]) / np.diag(plain.cov_params()) - 1)) > 0.1


@pytest.mark.slow
def test_analytic_standard_error_matches_the_spread_over_draws(model):
    # Consistency test by simulation (known truth): over 300 independent draws of 400 labelled
    # and 1,500 unlabelled rows the standard deviation of the maximum-likelihood shares equals
    # the analytic standard error (its mean over the draws) within 12 % (the Monte-Carlo error
    # of a standard deviation from 300 draws is about 4 %; 3 of those), and the labelled rows'
    # part matters: leaving it out gives a standard error at least 10 % too small here.
    rng = np.random.default_rng(3)
    target = np.array([0.3, 0.5, 0.2])
    mls, ses, ses_unl = [], [], []
    for _ in range(300):
        X, y = draw(400, [0.5, 0.3, 0.2], rng)
        X_new, _ = draw(1500, target, rng)
        est = PriorEstimator(n_resamples=1, random_state=0).fit(model.predict_proba(X), y)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = est.estimate(model.predict_proba(X_new))
        from probwrap.shift._analytic import analytic_prior_interval

        q = model.predict_proba(X_new)
        w = np.ones(q.shape[0])
        full = analytic_prior_interval(est.calibrator_, q, w, 1500.0, est.source_prior_,
                                       res.ml_prior, est._eta_cov(), 0.95)[1]
        unl = analytic_prior_interval(est.calibrator_, q, w, 1500.0, est.source_prior_,
                                      res.ml_prior, None, 0.95)[1]
        mls.append(res.ml_prior)
        ses.append(np.sqrt(np.diag(full)))
        ses_unl.append(np.sqrt(np.diag(unl)))
    sd = np.std(mls, axis=0, ddof=1)
    np.testing.assert_allclose(np.mean(ses, axis=0), sd, rtol=0.12)
    assert np.all(np.mean(ses_unl, axis=0) < 0.9 * sd)


def test_large_multiclass_fit_keeps_a_summary_not_the_rows(model):
    # Consistency test: beyond 20,000 labelled rows a three-class EM fit keeps only the
    # labelled summary of the analytic interval; predictions, estimate and interval are those
    # of keep_heldout=True (the same formula, the summary computed from the same rows: equal
    # to rounding), and the pickle no longer grows with the rows.
    rng = np.random.default_rng(4)
    X, y = draw(25_000, [0.5, 0.3, 0.2], rng)
    X_new, _ = draw(3000, [0.3, 0.5, 0.2], rng)
    frozen = FrozenEstimator(model)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        slim = PriorShiftWrapper(frozen).fit(X, y).adapt(X_new)
        full = PriorShiftWrapper(frozen, keep_heldout=True).fit(X, y).adapt(X_new)
    assert slim.prior_estimator_._source_rows() is None
    assert full.prior_estimator_._source_rows() is not None
    np.testing.assert_array_equal(slim.predict_proba(X_new), full.predict_proba(X_new))
    np.testing.assert_array_equal(slim.target_prior_, full.target_prior_)
    np.testing.assert_allclose(slim.target_prior_interval_, full.target_prior_interval_,
                               rtol=1e-12, atol=1e-15)
    size_slim, size_full = len(pickle.dumps(slim)), len(pickle.dumps(full))
    assert size_slim < 50_000 < 25_000 * 3 * 8 < size_full
    # the interval holds the truth here and is not degenerate
    lo, hi = slim.target_prior_interval_.T
    assert np.all(lo < [0.3, 0.5, 0.2]) and np.all(hi > [0.3, 0.5, 0.2])
    assert np.all(hi - lo > 0.01) and np.all(hi - lo < 0.1)
    # a bootstrap interval asked for on the fitted estimator can redraw only the unlabelled
    # rows, and says so; a wrapper fitted with interval="bca" keeps the rows it needs
    est = slim.prior_estimator_
    est.interval, est.n_resamples = "bca", 20
    with pytest.warns(UserWarning, match="labelled rows were not kept"):
        est.estimate(model.predict_proba(X_new))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        boot = PriorShiftWrapper(frozen, interval="bca", n_resamples=5).fit(X, y)
    assert boot.prior_estimator_._source_rows() is not None


def test_share_interval_is_the_logit_interval_of_statsmodels_glm():
    # Reference: statsmodels. With one-hot posteriors (the classes perfectly separated, no
    # calibration) the maximum-likelihood share of class c is the share of its rows, the score
    # variance is the multinomial one, and the analytic interval on the logit scale is the Wald
    # interval of the intercept of an intercept-only logistic regression of "class c" on the
    # rows (statsmodels GLM, Binomial family), mapped back by the logistic function. Both are
    # closed forms of the same numbers: agreement to 1e-9 (GLM's IRLS stops at 1e-8 deviance).
    # The default (Wilson) shape is then exactly Wilson's interval of the class's row count
    # out of 300 (statsmodels' proportion_confint): the implied row count is 300 itself.
    sm = pytest.importorskip("statsmodels.api")
    from scipy.special import expit
    from statsmodels.stats.proportion import proportion_confint

    from probwrap.shift._analytic import analytic_prior_interval, share_interval

    rng = np.random.default_rng(7)
    y = rng.choice(3, size=300, p=[0.6, 0.3, 0.1])
    proba = np.eye(3)[y]
    share = np.bincount(y, minlength=3) / y.shape[0]
    default, cov = analytic_prior_interval(None, proba, np.ones(300), 300.0,
                                           np.array([0.5, 0.3, 0.2]), share, None, 0.9)
    iv = share_interval(share, cov, 0.9, "logit")
    for c in range(3):
        fit = sm.GLM((y == c).astype(float), np.ones((300, 1)),
                     family=sm.families.Binomial()).fit()
        np.testing.assert_allclose(iv[c], expit(fit.conf_int(alpha=0.1)[0]), atol=1e-9)
        count = int(np.sum(y == c))
        np.testing.assert_allclose(default[c], proportion_confint(count, 300, alpha=0.1,
                                                                  method="wilson"), atol=1e-9)
    # asymmetric, as a share's sampling distribution: the small class reaches further up
    assert iv[2, 1] - share[2] > share[2] - iv[2, 0]


def test_wilson_share_interval_is_statsmodels_wilson_on_the_implied_row_count():
    # Reference: statsmodels' proportion_confint(method="wilson") (Wilson 1927) with the
    # effective row count pi (1 - pi) / se^2 that the delta-method variance implies; closed
    # forms of the same numbers, so 1e-12. Near 0 with a large standard error it is narrower
    # than the logit interval and reaches less far up.
    from statsmodels.stats.proportion import proportion_confint

    from probwrap.shift._analytic import share_interval

    pi = np.array([0.02, 0.3, 0.68])
    se = np.array([0.03, 0.05, 0.05])
    cov = np.diag(se**2)
    wil = share_interval(pi, cov, 0.9, "wilson")
    for c in range(3):
        n = pi[c] * (1 - pi[c]) / se[c] ** 2
        np.testing.assert_allclose(wil[c], proportion_confint(pi[c] * n, n, alpha=0.1,
                                                              method="wilson"), atol=1e-12)
    lgt = share_interval(pi, cov, 0.9, "logit")
    assert wil[0, 1] < lgt[0, 1] and wil[0, 1] - wil[0, 0] < lgt[0, 1] - lgt[0, 0]
    with pytest.raises(ValueError, match="`shape` must be"):
        share_interval(pi, cov, 0.9, "profile")


# -- the small-sample step (few labelled rows) --------------------------------------------------
def test_satterthwaite_df_is_welchs_df_of_scipy():
    # Reference: scipy.stats.ttest_ind(..., equal_var=False).df — Welch's (1947) test, whose
    # degrees of freedom are Satterthwaite's (1946) for the two parts s_i^2 / n_i with n_i - 1
    # degrees of freedom each; the same closed form, so 1e-12.
    from scipy.stats import ttest_ind

    from probwrap.shift._analytic import satterthwaite_df

    rng = np.random.default_rng(11)
    a, b = rng.normal(size=12), 3.0 * rng.normal(size=40)
    parts = (np.var(a, ddof=1) / 12, np.var(b, ddof=1) / 40)
    ref = ttest_ind(a, b, equal_var=False).df
    np.testing.assert_allclose(satterthwaite_df(parts, (11, 39)), ref, rtol=1e-12)
    # elementwise over shares; every part 0: no spread to count, infinitely many
    out = satterthwaite_df((np.array([parts[0], 0.0]), np.array([parts[1], 0.0])), (11, 39))
    np.testing.assert_allclose(out[0], ref, rtol=1e-12)
    assert out[1] == np.inf


def test_labelled_dof_is_the_hc1_factor_of_statsmodels_least_squares():
    # Reference: statsmodels' OLS with cov_type="HC1" against "HC0": the degrees-of-freedom
    # correction n / (n - p) of MacKinnon & White (1985) for p fitted parameters, which the
    # interval applies to the labelled rows' part with p the parameters fitted to them.
    import statsmodels.api as sm

    from probwrap.shift._analytic import labelled_dof

    rng = np.random.default_rng(12)
    n, p = 30, 5
    X = sm.add_constant(rng.normal(size=(n, p - 1)))
    y = X @ rng.normal(size=p) + rng.standard_t(3, size=n)
    hc0 = sm.OLS(y, X).fit(cov_type="HC0").cov_params()
    hc1 = sm.OLS(y, X).fit(cov_type="HC1").cov_params()
    np.testing.assert_allclose(hc1, hc0 * n / labelled_dof(n, p), rtol=1e-12)
    assert labelled_dof(None, p) is None and labelled_dof(3.0, p) == 1.0


def test_share_interval_with_df_is_statsmodels_wilson_on_the_df_adjusted_row_count():
    # Reference: statsmodels' proportion_confint(method="wilson") on Korn & Graubard's (1998)
    # degrees-of-freedom-adjusted effective row count n (z / t_df)^2 (z, t_df the normal and
    # Student quantiles from SciPy): Wilson's interval with Student's quantile in place of the
    # normal one. Closed forms, so 1e-12. An infinite df is the normal interval.
    from scipy.stats import norm
    from scipy.stats import t as student_t
    from statsmodels.stats.proportion import proportion_confint

    from probwrap.shift._analytic import share_interval

    pi = np.array([0.05, 0.35, 0.6])
    se = np.array([0.03, 0.06, 0.05])
    df = np.array([8.0, 25.0, np.inf])
    iv = share_interval(pi, np.diag(se**2), 0.95, "wilson", df=df)
    z = norm.ppf(0.975)
    for c in range(3):
        n = pi[c] * (1 - pi[c]) / se[c] ** 2 * (z / student_t.ppf(0.975, df[c])) ** 2
        np.testing.assert_allclose(iv[c], proportion_confint(pi[c] * n, n, alpha=0.05,
                                                             method="wilson"), atol=1e-12)
    np.testing.assert_allclose(iv[2], share_interval(pi, np.diag(se**2), 0.95)[2], atol=1e-15)
    # the logit shape takes the same quantile
    lgt = share_interval(pi, np.diag(se**2), 0.95, "logit", df=df)
    half = student_t.ppf(0.975, 8.0) * se[0] / (pi[0] * (1 - pi[0]))
    np.testing.assert_allclose(np.log(lgt[0] / (1 - lgt[0])),
                               np.log(pi[0] / (1 - pi[0])) + np.array([-half, half]), atol=1e-12)


def test_few_labelled_rows_widen_the_multiclass_interval_and_many_do_not(model):
    # The small-sample step: with 30 labelled rows the labelled part of the variance grows by
    # n / (n - m) (m = 5 parameters: temperature, two biases, two shares) and the quantile is
    # Student's with Satterthwaite's degrees of freedom, so the interval is wider than the
    # large-sample one (the estimator's interval was this one until 4 December 2026; it is now
    # the class-moment interval, tests/test_prior_shift_moment_interval.py, and this one serves
    # estimators fitted before that without their rows). With n_source -> infinity the
    # labelled part's factor vanishes and the degrees of freedom are those of the unlabelled
    # rows alone (n_t - 1 = 1999 at most): the large-sample interval to about 1e-6.
    from probwrap.shift._analytic import analytic_prior_cov, analytic_prior_interval

    rng = np.random.default_rng(13)
    X, y = draw(30, [0.5, 0.3, 0.2], rng)
    X_new, _ = draw(2000, [0.3, 0.5, 0.2], rng)
    est = PriorEstimator(random_state=0).fit(model.predict_proba(X), y)
    q = model.predict_proba(X_new)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(q)
    args = (est.calibrator_, q, np.ones(2000), 2000.0, est.source_prior_, res.ml_prior,
            est._eta_cov())
    small, cov = analytic_prior_interval(*args, 0.95, n_source=30.0)
    large, cov_large = analytic_prior_interval(*args, 0.95)
    assert np.all(small[:, 1] - small[:, 0] > 1.05 * (large[:, 1] - large[:, 0]))
    unl = analytic_prior_cov(*args[:-1], None)[0]
    np.testing.assert_allclose(np.diag(cov) - np.diag(unl),
                               (np.diag(cov_large) - np.diag(unl)) * 30 / 25, rtol=1e-10)
    df = analytic_prior_cov(*args, n_source=30.0)[1]
    assert np.all((df > 20) & (df < 2000))
    df_many = analytic_prior_cov(*args, n_source=1e12)[1]
    assert np.all((df_many >= 1999 - 1e-6) & (df_many < 1e7))
    np.testing.assert_allclose(analytic_prior_interval(*args, 0.95, n_source=1e12)[0], large,
                               atol=1e-6)


@pytest.mark.parametrize("k", [2, 3])
def test_an_interval_on_few_labelled_rows_warns_and_one_on_enough_does_not(model, k):
    # Fewer than FEW_LABELLED_ROWS (100) effective labelled rows: the interval warns
    # (FewLabelledRowsWarning, with the coverage measured in benchmarks/shift.py); 150 rows, or
    # no interval asked for, do not. Kish's count decides, so 200 rows of which 150 carry
    # almost all the weight still warn. The wrapper passes it on.
    from probwrap.shift import FewLabelledRowsWarning

    rng = np.random.default_rng(14)
    X, y = draw(200, [0.5, 0.3, 0.2], rng)
    X_new, _ = draw(500, [0.3, 0.5, 0.2], rng)
    p, q = model.predict_proba(X), model.predict_proba(X_new)
    if k == 2:
        keep = y < 2
        X, y, p = X[keep], y[keep], p[keep][:, :2] / p[keep][:, :2].sum(1, keepdims=True)
        q = q[:, :2] / q[:, :2].sum(1, keepdims=True)

    def categories(n, **kw):
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            PriorEstimator(**{"random_state": 0, "n_resamples": 20, **kw}).fit(
                p[:n], y[:n]).estimate(q)
        return [w.category for w in seen]

    assert FewLabelledRowsWarning in categories(60)
    assert FewLabelledRowsWarning not in categories(150)
    assert FewLabelledRowsWarning not in categories(60, interval="bca", n_resamples=0)
    weights = np.where(np.arange(len(y)) < 60, 1.0, 1e-3)
    with pytest.warns(FewLabelledRowsWarning, match="effective labelled rows"):
        PriorEstimator(random_state=0).fit(p, y, sample_weight=weights).estimate(q)
    with pytest.warns(FewLabelledRowsWarning, match="Coverage with few labelled rows"):
        PriorShiftWrapper(FrozenEstimator(model) if k == 3 else _binary_model(model, X, y),
                          random_state=0).fit(X[:60], y[:60]).adapt(X_new)


def _binary_model(model, X, y):
    """A two-class logistic regression on the rows of classes 0 and 1 (the test's k=2 case)."""
    return FrozenEstimator(LogisticRegression(C=0.05).fit(X, y))
