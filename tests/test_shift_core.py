"""Reference tests of the prior-shift array core (probwrap.shift), each naming its source."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import minimize
from scipy.stats import norm
from sklearn.exceptions import ConvergenceWarning
from sklearn.metrics import confusion_matrix

from probwrap.shift import (
    BiasCorrectedScaling,
    acc_prior,
    adjust_to_prior,
    bbse_prior,
    em_prior,
    heldout_confusion,
    prior_log_likelihood,
    project_to_simplex,
    shift_cutoff,
)

MEANS = np.array([-1.5, 0.0, 1.5])


def gaussian_rows(n, prior, rng, means=MEANS):
    """Unit-variance Gaussian classes; returns x, y and the exact posteriors under `prior`."""
    prior = np.asarray(prior, dtype=float)
    y = rng.choice(len(prior), size=n, p=prior)
    x = rng.normal(means[y], 1.0)
    return x, y


def exact_posterior(x, prior, means=MEANS):
    dens = norm.pdf(x[:, None], loc=means[None, :], scale=1.0) * np.asarray(prior)
    return dens / dens.sum(axis=1, keepdims=True)


# -- adjust_to_prior ---------------------------------------------------------------------------
def test_adjust_to_source_prior_is_identity():
    # Saerens, Latinne & Decaestecker (2002) eq. 2.4 with equal priors: every ratio is one.
    rng = np.random.default_rng(0)
    p = rng.dirichlet(np.ones(4), size=50)
    prior = np.array([0.1, 0.2, 0.3, 0.4])
    np.testing.assert_allclose(adjust_to_prior(p, prior, prior), p, rtol=0, atol=1e-15)


def test_adjust_a_to_b_to_a_is_identity():
    # eq. 2.4 composes: (a -> b) then (b -> a) multiplies by ratios that cancel.
    rng = np.random.default_rng(1)
    p = rng.dirichlet(np.ones(3), size=40)
    a, b = np.array([0.6, 0.3, 0.1]), np.array([0.05, 0.15, 0.8])
    np.testing.assert_allclose(adjust_to_prior(adjust_to_prior(p, a, b), b, a), p, atol=1e-12)


def test_adjust_matches_bayes_rule_with_known_densities():
    # Exact posteriors of Gaussian classes computed from scipy.stats.norm densities under the
    # target prior must equal the source posteriors re-weighted by eq. 2.4 (Saerens et al. 2002).
    x = np.linspace(-4, 4, 81)
    src, tgt = np.array([0.5, 0.3, 0.2]), np.array([0.1, 0.2, 0.7])
    np.testing.assert_allclose(
        adjust_to_prior(exact_posterior(x, src), src, tgt), exact_posterior(x, tgt), atol=1e-12
    )


def test_adjust_binary_one_d_and_scalar_priors():
    p1 = np.array([0.01, 0.3, 0.9])
    two = adjust_to_prior(np.column_stack([1 - p1, p1]), [0.97, 0.03], [0.92, 0.08])
    np.testing.assert_allclose(adjust_to_prior(p1, 0.03, 0.08), two[:, 1], atol=1e-15)


def test_adjust_does_not_modify_input():
    p = np.array([[0.2, 0.8], [0.5, 0.5]])
    before = p.copy()
    adjust_to_prior(p, [0.5, 0.5], [0.9, 0.1])
    np.testing.assert_array_equal(p, before)


# -- shift_cutoff ------------------------------------------------------------------------------
@pytest.mark.parametrize("t", [0.0, 0.02, 0.1, 0.5, 0.93, 1.0])
def test_shift_cutoff_is_the_adjusted_cutoff(t):
    # The moved cutoff t' on the unadjusted scale is the point whose eq. 2.4 adjustment equals t.
    moved = shift_cutoff(t, 0.03, 0.08)
    assert adjust_to_prior(np.array([moved]), 0.03, 0.08)[0] == pytest.approx(t, abs=1e-12)


def test_shift_cutoff_agrees_with_elkan_theorem_1():
    # Elkan (2001), Theorem 1: a threshold p0 corresponds to p* when negatives are multiplied by
    # m = p*(1 - p0) / ((1 - p*) p0). Moving the prevalence from 3% to 8% multiplies the prior
    # odds of a positive by r, i.e. negatives by m = 1 / r, with p0 = t and p* = t'.
    ps, pt, t = 0.03, 0.08, 0.12
    r = (pt / (1 - pt)) / (ps / (1 - ps))
    moved = shift_cutoff(t, ps, pt)
    m = moved * (1 - t) / ((1 - moved) * t)
    assert m == pytest.approx(1 / r, rel=1e-12)


def test_shift_cutoff_is_cost_optimal_under_target_prevalence():
    # Brute force: on Gaussian classes with known densities (means 0 and 2), sample the target
    # population and pick, over every observed value, the cutoff on the *unadjusted* posterior with least
    # realised cost. It must sit where shift_cutoff puts the Bayes cutoff c_fp / (c_fp + c_fn)
    # (Elkan 2001, eq. for the optimal threshold).
    rng = np.random.default_rng(3)
    means = np.array([0.0, 2.0])
    c_fp, c_fn = 1.0, 9.0
    ps, pt = 0.1, 0.3
    y = (rng.uniform(size=400_000) < pt).astype(int)
    x = rng.normal(means[y], 1.0)
    p_old = exact_posterior(x, [1 - ps, ps], means)[:, 1]
    # exhaustive sweep over every observed value as cutoff: flag rows with p_old >= cutoff
    order = np.argsort(p_old)
    ys = y[order]
    fn_below = np.concatenate([[0], np.cumsum(ys)])[:-1]          # positives below cutoff i
    fp_above = np.sum(1 - ys) - np.concatenate([[0], np.cumsum(1 - ys)])[:-1]
    cost = c_fn * fn_below + c_fp * fp_above
    best = p_old[order][np.argmin(cost)]
    assert best == pytest.approx(shift_cutoff(c_fp / (c_fp + c_fn), ps, pt), abs=0.01)


# -- simplex projection ------------------------------------------------------------------------
def test_project_to_simplex_matches_scipy_slsqp():
    # Reference: SciPy's SLSQP minimising ||x - v||^2 subject to x >= 0, sum(x) = 1.
    rng = np.random.default_rng(4)
    for _ in range(20):
        v = rng.normal(size=5) * 2
        ref = minimize(
            lambda x, v=v: np.sum((x - v) ** 2),
            np.full(5, 0.2),
            method="SLSQP",
            bounds=[(0, None)] * 5,
            constraints=[{"type": "eq", "fun": lambda x: x.sum() - 1}],
            options={"ftol": 1e-14, "maxiter": 500},
        ).x
        np.testing.assert_allclose(project_to_simplex(v), ref, atol=1e-6)


# -- confusion matrices and the linear estimators ----------------------------------------------
def test_hard_confusion_matches_sklearn_confusion_matrix():
    # Reference: sklearn.metrics.confusion_matrix(normalize="all"), transposed to rows = predicted.
    rng = np.random.default_rng(5)
    p = rng.dirichlet(np.ones(3), size=200)
    y = rng.integers(0, 3, size=200)
    w = rng.uniform(0.1, 2, size=200)
    ref = confusion_matrix(y, p.argmax(1), labels=[0, 1, 2], sample_weight=w, normalize="all").T
    np.testing.assert_allclose(heldout_confusion(p, y, sample_weight=w), ref, atol=1e-14)


def _rows_with_predicted_shares(shares, n=1000):
    """Rows whose argmax shares are exactly `shares` and whose mean posterior is `shares` too."""
    k = len(shares)
    counts = np.round(np.asarray(shares) * n).astype(int)
    rows = []
    for i, c in enumerate(counts):
        rows.append(np.repeat(np.eye(k)[i][None, :], c, axis=0))
    return np.vstack(rows)


def test_bbse_matches_numpy_linalg_solve():
    # Lipton, Wang & Smola (2018), Algorithm 1: w = C^{-1} mu, target prior = w * source prior.
    # Hand-built joint confusion matrix (rows predicted, columns true) and target shares.
    conf = np.array([[0.30, 0.04, 0.02], [0.05, 0.25, 0.03], [0.05, 0.01, 0.25]])
    src = conf.sum(axis=0)
    mu = np.array([0.25, 0.30, 0.45])
    proba = _rows_with_predicted_shares(mu)
    expected = np.linalg.solve(conf, mu) * src
    assert np.all(expected > 0)
    for soft in (False, True):
        res = bbse_prior(proba, conf, src, soft=soft)
        np.testing.assert_allclose(res.prior, expected, atol=1e-12)


def test_bbse_projects_negative_solutions_onto_the_simplex():
    conf = np.array([[0.45, 0.10], [0.05, 0.40]])
    proba = _rows_with_predicted_shares([0.95, 0.05])  # fewer positives than the false alarms
    raw = np.linalg.solve(conf, [0.95, 0.05]) * conf.sum(0)
    assert raw.min() < 0
    res = bbse_prior(proba, conf, conf.sum(0))
    np.testing.assert_allclose(res.prior, project_to_simplex(raw), atol=1e-12)
    np.testing.assert_allclose(res.prior, [1.0, 0.0], atol=1e-12)


@pytest.mark.parametrize("q", [0.02, 0.3, 0.7, 0.95])
def test_acc_binary_is_forman_adjusted_count(q):
    # Forman (2008): p = (q - fpr) / (tpr - fpr), clipped to [0, 1].
    tpr, fpr, src1 = 0.8, 0.1, 0.4
    conf = np.array([[(1 - fpr) * (1 - src1), (1 - tpr) * src1], [fpr * (1 - src1), tpr * src1]])
    proba = _rows_with_predicted_shares([1 - q, q])
    expected = np.clip((q - fpr) / (tpr - fpr), 0, 1)
    res = acc_prior(proba, conf)
    assert res.prior[1] == pytest.approx(expected, abs=1e-9)


def test_acc_multiclass_outside_simplex_matches_scipy_slsqp():
    # Constrained least squares min ||M pi - q|| on the simplex, reference SciPy SLSQP.
    conf = np.array([[0.30, 0.04, 0.02], [0.05, 0.25, 0.03], [0.05, 0.01, 0.25]])
    m = conf / conf.sum(0)
    q = np.array([0.70, 0.08, 0.22])
    proba = _rows_with_predicted_shares(q)
    assert np.linalg.solve(m, q).min() < 0
    ref = minimize(
        lambda x: np.sum((m @ x - q) ** 2),
        np.full(3, 1 / 3),
        method="SLSQP",
        bounds=[(0, 1)] * 3,
        constraints=[{"type": "eq", "fun": lambda x: x.sum() - 1}],
        options={"ftol": 1e-15, "maxiter": 1000},
    ).x
    res = acc_prior(proba, conf)
    np.testing.assert_allclose(res.prior, ref, atol=1e-5)
    assert res.converged


def test_pacc_uses_posterior_means():
    # Bella et al. (2010): PACC solves M_soft pi = mean posterior. With a hand-built soft
    # confusion matrix, the answer is numpy.linalg.solve(M_soft, q).
    conf = np.array([[0.35, 0.12], [0.15, 0.38]])
    m = conf / conf.sum(0)
    proba = np.array([[0.7, 0.3]] * 5 + [[0.2, 0.8]] * 5)
    q = proba.mean(0)
    res = acc_prior(proba, conf, soft=True)
    np.testing.assert_allclose(res.prior, np.linalg.solve(m, q), atol=1e-10)


# -- EM ----------------------------------------------------------------------------------------
def test_em_recovers_prior_of_gaussian_classes_with_known_posteriors():
    # Saerens et al. (2002): with exact posteriors, EM is the MLE of the new priors and is
    # consistent. 20 000 rows: standard error about 0.005; tolerance 0.02.
    rng = np.random.default_rng(6)
    src, tgt = np.array([1 / 3, 1 / 3, 1 / 3]), np.array([0.6, 0.3, 0.1])
    x, _ = gaussian_rows(20_000, tgt, rng)
    res = em_prior(exact_posterior(x, src), src, tol=1e-8)
    assert res.converged
    np.testing.assert_allclose(res.prior, tgt, atol=0.02)


def test_em_is_the_maximum_likelihood_estimate():
    # Reference: SciPy's L-BFGS-B maximising the same mixture log-likelihood over the simplex
    # (softmax parametrisation), written out here independently of the package.
    rng = np.random.default_rng(7)
    src = np.array([0.5, 0.3, 0.2])
    x, _ = gaussian_rows(3000, [0.2, 0.2, 0.6], rng)
    p = exact_posterior(x, src)

    def negll(theta):
        pi = np.exp(np.r_[0.0, theta])
        pi /= pi.sum()
        return -np.sum(np.log((p / src) @ pi))

    theta = minimize(negll, np.zeros(2), method="L-BFGS-B", options={"gtol": 1e-10}).x
    pi_ref = np.exp(np.r_[0.0, theta])
    pi_ref /= pi_ref.sum()
    res = em_prior(p, src, tol=1e-10, max_iter=10000)
    np.testing.assert_allclose(res.prior, pi_ref, atol=1e-5)
    assert prior_log_likelihood(p, src, res.prior) >= -negll(theta) - 1e-6


def test_em_warns_when_it_does_not_converge():
    rng = np.random.default_rng(8)
    x, _ = gaussian_rows(500, [0.8, 0.1, 0.1], rng)
    with pytest.warns(ConvergenceWarning, match="max_iter=2"):
        res = em_prior(exact_posterior(x, [1 / 3] * 3), [1 / 3] * 3, max_iter=2)
    assert not res.converged and res.n_iter == 2
    assert np.all(np.isfinite(res.prior)) and res.prior.sum() == pytest.approx(1)


def test_em_likelihood_increases_every_step():
    # Dempster, Laird & Rubin (1977): an EM step never lowers the likelihood.
    rng = np.random.default_rng(9)
    src = np.array([1 / 3] * 3)
    x, _ = gaussian_rows(1000, [0.7, 0.2, 0.1], rng)
    p = exact_posterior(x, src)
    lls = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        for it in range(1, 8):
            lls.append(prior_log_likelihood(p, src, em_prior(p, src, max_iter=it).prior))
    assert np.all(np.diff(lls) >= -1e-9)


# -- bias-corrected calibration ----------------------------------------------------------------
def _miscalibrated_binary(n, rng):
    s = rng.normal(0, 2, size=n)
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-(0.7 + 0.5 * s)))).astype(int)
    p1 = 1 / (1 + np.exp(-s))
    return np.column_stack([1 - p1, p1]), y, s


def test_bcts_binary_matches_statsmodels_logistic_glm():
    # For two classes, bias-corrected temperature scaling is a logistic regression of y on the
    # log-odds with an intercept: reference statsmodels GLM (Binomial family).
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(10)
    proba, y, s = _miscalibrated_binary(3000, rng)
    glm = sm.GLM(y, sm.add_constant(s), family=sm.families.Binomial()).fit()
    cal = BiasCorrectedScaling("temperature", shrinkage=0).fit(proba, y)  # the plain MLE
    np.testing.assert_allclose(cal.predict(proba)[:, 1], glm.predict(sm.add_constant(s)), atol=1e-6)
    assert cal.scale_[0] == pytest.approx(glm.params[1], abs=1e-5)


def test_vector_scaling_binary_matches_statsmodels_logistic_glm():
    # Vector scaling with biases: log-odds = a1 log p1 - a0 log p0 + b1, a GLM on
    # [1, log p1, log p0] (statsmodels reference).
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(11)
    proba, y, _ = _miscalibrated_binary(3000, rng)
    z = np.log(proba)
    design = np.column_stack([np.ones(len(y)), z[:, 1], z[:, 0]])
    glm = sm.GLM(y, design, family=sm.families.Binomial()).fit()
    assert glm.params[1] > 0 and glm.params[2] < 0  # inside the non-negativity bounds
    cal = BiasCorrectedScaling("vector", shrinkage=0).fit(proba, y)  # the plain MLE
    np.testing.assert_allclose(cal.predict(proba)[:, 1], glm.predict(design), atol=1e-5)


def test_bcts_multiclass_matches_scipy_minimiser_and_bias_property():
    # Reference: SciPy's BFGS (numerical gradient) on the multinomial log-likelihood of
    # softmax(a z + b), written out here. Alexandari et al. (2020): with bias terms, the mean
    # calibrated posterior equals the class frequencies (score equations of the biases).
    rng = np.random.default_rng(12)
    x, y = gaussian_rows(2000, [0.5, 0.3, 0.2], rng)
    z = np.log(exact_posterior(2.0 * x, [1 / 3] * 3))  # overconfident, wrong prior
    from scipy.special import log_softmax

    def negll(theta):
        logp = log_softmax(z * theta[0] + np.r_[0.0, theta[1:]], axis=1)
        return -logp[np.arange(len(y)), y].mean()

    ref = minimize(negll, np.r_[1.0, 0.0, 0.0], method="BFGS", options={"gtol": 1e-9}).x
    # the plain MLE on the log-probabilities themselves (fit(proba) first floors them at the
    # data-chosen clip, see heldout_clip)
    cal = BiasCorrectedScaling(shrinkage=0).fit_log_proba(z, y)
    assert cal.scale_[0] == pytest.approx(ref[0], abs=1e-4)
    np.testing.assert_allclose(cal.bias_[1:], ref[1:], atol=1e-4)
    np.testing.assert_allclose(cal.predict(np.exp(z)).mean(0), np.bincount(y) / len(y), atol=1e-7)


def test_bcts_prior_matches_scipy_minimiser_keeps_bias_property():
    # The default fit adds the weak gamma prior 5 * (a - log a - 1) (in rows) on the scale.
    # Reference: SciPy's minimiser on that penalised log-likelihood written out here for the
    # scale; the biases are then re-solved so that the mean *floored* calibrated posterior equals
    # the class frequencies (the biases' score equations, Alexandari et al. 2020, for the outputs
    # as returned): SciPy's root of those equations, the floor written out here (max with the
    # floor, rows renormalised), at the reference scale.
    from scipy.optimize import root
    from scipy.special import log_softmax

    rng = np.random.default_rng(13)
    x, y = gaussian_rows(150, [0.5, 0.3, 0.2], rng)
    z = np.log(exact_posterior(2.0 * x, [1 / 3] * 3))
    n = len(y)

    def objective(theta):
        if theta[0] <= 0:
            return np.inf
        logp = log_softmax(z * theta[0] + np.r_[0.0, theta[1:]], axis=1)
        return -logp[np.arange(n), y].sum() + 5.0 * (theta[0] - np.log(theta[0]) - 1.0)

    ref = minimize(objective, np.r_[1.0, 0.0, 0.0], method="Nelder-Mead",
                   options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000}).x
    floor = 1 / (2 * (n + 1) * 2)  # Krichevsky-Trofimov

    def floored_gap(b):
        q = np.maximum(np.exp(log_softmax(z * ref[0] + np.r_[0.0, b], axis=1)), floor)
        return (q / q.sum(1, keepdims=True)).mean(0)[1:] - np.bincount(y)[1:] / n

    ref_b = root(floored_gap, ref[1:], tol=1e-14).x
    cal = BiasCorrectedScaling().fit_log_proba(z, y)  # z itself, without the data-chosen floor
    assert cal.scale_[0] == pytest.approx(ref[0], abs=1e-5)
    np.testing.assert_allclose(cal.bias_[1:], ref_b, atol=1e-5)
    assert np.max(np.abs(ref_b - ref[1:])) > 1e-3  # the floor matters on these rows
    assert cal.floor_ == pytest.approx(floor)
    np.testing.assert_allclose(cal.predict(np.exp(z)).mean(0), np.bincount(y) / n, atol=1e-12)


def test_bcts_separated_classes_stay_inside_zero_one():
    # separated held-out scores: the plain MLE scale runs off; the prior keeps it finite and the
    # floor keeps every posterior near at least 1 / (2 (N + 1) (k - 1))
    rng = np.random.default_rng(14)
    y = np.repeat([0, 1, 2], 15)
    z = rng.normal(0, 0.3, (45, 3)) + 4.0 * np.eye(3)[y]
    proba = np.exp(z) / np.exp(z).sum(1, keepdims=True)
    cal = BiasCorrectedScaling().fit(proba, y)
    out = cal.predict(proba)
    assert np.all(np.isfinite(cal.scale_)) and cal.scale_[0] < 50
    # floored, then renormalised: at least floor / (1 + (k - 1) floor)
    assert out.min() >= cal.floor_ / (1 + 2 * cal.floor_) * (1 - 1e-9) and out.max() < 1.0
    assert cal.floor_ == pytest.approx(1 / (2 * 46 * 2))


def test_em_prior_ignores_rows_of_weight_zero_without_a_warning():
    # A bootstrap resample gives some rows weight 0; with probabilities exactly 0 or 1 among
    # them, the sums at the boundary t = 0 used to compute 0 * inf = nan ("invalid value
    # encountered in matmul"). Rows of weight zero must change nothing: the estimate equals the
    # one on the rows of positive weight alone (consistency check).
    import warnings

    from probwrap.shift import em_prior

    rng = np.random.default_rng(0)
    p = rng.uniform(size=200)
    p[:5], p[5:10] = 0.0, 1.0
    w = rng.poisson(1.0, size=200).astype(float)
    w[:10] = 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        full = em_prior(np.c_[1 - p, p], [0.7, 0.3], sample_weight=w)
    kept = em_prior(np.c_[1 - p, p][w > 0], [0.7, 0.3], sample_weight=w[w > 0])
    np.testing.assert_allclose(full.prior, kept.prior, rtol=0, atol=1e-12)
