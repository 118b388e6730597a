"""The SQUAREM-accelerated EM for class priors (probwrap.shift._em_loop), shared by the
in-memory and the Dask / Spark EM.

Consistency tests against plain EM (Saerens, Latinne & Decaestecker 2002, eqs. 2.9-2.10) run to
a much tighter tolerance: the accelerated loop must reach the same fixed point, within the
distance it reports, in fewer passes. Reference checks: the EM map's Jacobian against SciPy's
finite differences, and the fixed point against SciPy's SLSQP on the likelihood.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import approx_fprime, minimize, root
from sklearn.exceptions import ConvergenceWarning

from probwrap.shift import em_prior, prior_log_likelihood
from probwrap.shift._em_loop import accelerated_em, linearised_distance
from probwrap.shift._estimate import _TINY, _em_map


def _plain_em(p, w, src, pseudo, tol, max_iter):
    """Plain (penalised) EM with the geometric stopping rule, as before the acceleration."""
    ratio = p / src
    total = float(w.sum() + pseudo.sum())
    prior, prev = src.copy(), np.inf
    for it in range(1, max_iter + 1):
        num = ratio * prior
        new = (w @ (num / np.maximum(num.sum(axis=1, keepdims=True), _TINY)) + pseudo) / total
        new = new / new.sum()
        step = float(np.max(np.abs(new - prior)))
        prior = new
        rho = step / prev if prev > 0 else 0.0
        if step == 0.0 or (rho < 1 and step * rho / (1 - rho) <= tol and step <= tol):
            return prior, it
        prev = step
    raise AssertionError("plain EM did not converge")


def _gaussian_posteriors(n, k, sep, prior, seed):
    """Exact equal-prior posteriors of k Gaussian classes with centres ``sep`` apart."""
    rng = np.random.default_rng(seed)
    y = rng.choice(k, size=n, p=prior)
    centres = rng.normal(size=(k, 2)) * sep
    x = centres[y] + rng.normal(size=(n, 2))
    logits = x @ centres.T - 0.5 * np.sum(centres**2, axis=1)
    p = np.exp(logits - logits.max(axis=1, keepdims=True))
    return p / p.sum(axis=1, keepdims=True)


# weak models (overlapping classes: plain EM takes thousands of steps), a small class, a
# Dirichlet pull, unequal weights, and a well separated case
CASES = [
    dict(n=900, k=3, sep=0.2, prior=[0.5, 0.3, 0.2], strength=0.0, seed=0),
    dict(n=1300, k=6, sep=0.5, prior=None, strength=0.0, seed=1),
    dict(n=1300, k=5, sep=0.3, prior=None, strength=5.0, seed=2),
    dict(n=800, k=4, sep=0.6, prior=[0.6, 0.3, 0.09, 0.01], strength=0.0, seed=3),
    dict(n=700, k=7, sep=3.0, prior=None, strength=0.0, seed=4),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: f"k{c['k']}-sep{c['sep']}-s{c['seed']}")
@pytest.mark.parametrize("tol", [1e-6, 1e-9])
def test_fixed_point_within_the_reported_distance(case, tol):
    # Reference: the root of F(pi) - pi (F the EM map) on the simplex by MINPACK's hybrid
    # Powell solver (scipy.optimize.root, method "hybr"), checked to leave a residual below
    # 1e-14. The reported distance is first order (module docstring of _em_loop): the error
    # may exceed it by its second-order remainder, measured below 2e-4 relative here, so
    # 1e-3 relative plus 1e-12 for the reference's own error. Before the linearised check a
    # jump could leave 300 x tol hidden behind a distance below tol on cases like these.
    k = case["k"]
    prior = np.full(k, 1 / k) if case["prior"] is None else np.array(case["prior"])
    p = _gaussian_posteriors(case["n"], k, case["sep"], prior, case["seed"])
    src = np.full(k, 1 / k)
    w = np.random.default_rng(case["seed"]).uniform(0.5, 2.0, size=p.shape[0])
    pseudo = case["strength"] * src
    em_map = _em_map(p / src, w, pseudo, float(w.sum() + pseudo.sum()))
    prior_hat, n_iter, ok, dist = accelerated_em(em_map, src.copy(), tol, 100_000)
    assert ok and dist <= tol

    def full(z):
        return np.append(z, 1.0 - z.sum())

    ref = root(lambda z: (em_map(full(z))[0] - full(z))[:-1], prior_hat[:-1], method="hybr",
               options={"xtol": 1e-14})
    fixed = full(ref.x)
    assert np.max(np.abs(em_map(fixed)[0] - fixed)) < 1e-14
    assert np.max(np.abs(prior_hat - fixed)) <= dist * (1 + 1e-3) + 1e-12


def test_far_fewer_passes_than_plain_em_on_a_weak_model():
    # Consistency test: the same estimate as plain EM (both within tol = 1e-6 of the fixed
    # point, so within 2e-6 of each other) in about a tenth of the passes on a weak 3-class model
    # with a small class (plain EM: 584 steps, the accelerated loop 58).
    rng = np.random.default_rng(5)
    centres = np.array([[0.0, 0.0], [0.5, 0.1], [0.1, 0.5]])
    y = rng.choice(3, size=3000, p=[0.6, 0.35, 0.05])
    x = centres[y] + rng.normal(size=(3000, 2))
    logits = x @ centres.T - 0.5 * np.sum(centres**2, axis=1)
    p = np.exp(logits) / np.exp(logits).sum(axis=1, keepdims=True)
    src = np.array([0.6, 0.37, 0.03])
    p = p * src / (p * src).sum(axis=1, keepdims=True)  # posteriors under the source prior
    plain, plain_iter = _plain_em(p, np.ones(3000), src, np.zeros(3), 1e-6, 100_000)
    res = em_prior(p, src)
    assert plain_iter > 300 and res.n_iter <= plain_iter / 8
    np.testing.assert_allclose(res.prior, plain, atol=2e-6)


def test_fixed_point_matches_scipy_on_a_weak_model():
    # Reference: scipy.optimize.minimize (SLSQP on the simplex) of the negative log-likelihood
    # (prior_log_likelihood, Saerens et al. 2002 section 2.3) of a weak 4-class model, where
    # plain EM needs thousands of steps; ftol 1e-15 leaves SLSQP about 1e-7 from the optimum.
    p = _gaussian_posteriors(800, 4, 0.6, np.array([0.6, 0.3, 0.09, 0.01]), 3)
    src = np.full(4, 0.25)
    res = em_prior(p, src, tol=1e-9, max_iter=100_000)
    ref = minimize(lambda v: -prior_log_likelihood(p, src, np.abs(v) / np.abs(v).sum()),
                   res.prior, method="SLSQP", bounds=[(1e-12, 1)] * 4,
                   constraints=[{"type": "eq", "fun": lambda v: v.sum() - 1}],
                   options={"ftol": 1e-15, "maxiter": 500})
    assert res.converged and res.n_iter < 1000
    np.testing.assert_allclose(res.prior, ref.x / ref.x.sum(), atol=1e-6)


def test_em_map_jacobian_matches_scipy_finite_differences():
    # Reference: scipy.optimize.approx_fprime (central differences are not offered there in
    # SciPy 1.12; forward differences with step 1e-7 are accurate to about 1e-6 here).
    rng = np.random.default_rng(6)
    k = 4
    p = rng.dirichlet(np.ones(k), size=300)
    src = np.array([0.1, 0.2, 0.3, 0.4])
    w = rng.uniform(0.5, 2.0, size=300)
    pseudo = 3.0 * src
    em_map = _em_map(p / src, w, pseudo, float(w.sum() + pseudo.sum()))
    x = rng.dirichlet(np.ones(k))
    numeric = approx_fprime(x, lambda z: em_map(z)[0], 1e-7)
    np.testing.assert_allclose(em_map(x)[3](), numeric, atol=1e-5)


def test_linearised_distance_is_the_geometric_bound_on_one_direction():
    # On a linear map contracting one direction by rho, the first-order error of F(x) is
    # exactly the geometric series s rho / (1 - rho) of plain EM's rule.
    rho, d = 0.9, np.array([1.0, -1.0, 0.0])
    jac = rho * np.outer(d, d) / 2
    step = (rho - 1) * 1e-3 * d  # F(x) - x for an error of 1e-3 along d
    assert linearised_distance(jac, step) == pytest.approx(1e-3 * rho, rel=1e-12)
    assert linearised_distance(jac, step) == pytest.approx(
        np.max(np.abs(step)) * rho / (1 - rho), rel=1e-12)


def test_likelihood_never_falls_as_the_pass_cap_grows():
    # Dempster, Laird & Rubin (1977): an EM step never lowers the likelihood; the jumps are
    # kept only when they do not either, so capping the passes at m and m + 1 returns points
    # in order of likelihood (jumps happen here: the model is weak).
    p = _gaussian_posteriors(600, 3, 0.3, np.array([0.5, 0.3, 0.2]), 7)
    src = np.full(3, 1 / 3)
    lls = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        for cap in range(1, 25):
            lls.append(prior_log_likelihood(p, src, em_prior(p, src, max_iter=cap).prior))
    assert np.all(np.diff(lls) >= -1e-9)
    # and the capped run is already past where plain EM is after as many steps
    plain_24 = src.copy()
    for _ in range(24):
        num = p / src * plain_24
        plain_24 = (num / num.sum(axis=1, keepdims=True)).mean(axis=0)
    assert lls[-1] > prior_log_likelihood(p, src, plain_24) + 1e-6
