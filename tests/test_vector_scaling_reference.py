"""Vector and matrix scaling against outside references.

Sources named beside each assertion: scikit-learn's ``LogisticRegression`` (multinomial and
binary, unpenalised), statsmodels' GLM, SciPy's ``minimize`` on the published objective written
out independently here, and Platt's (1999) smoothed targets. Data: held-out naive Bayes
log-probabilities on scikit-learn's bundled wine and breast cancer sets.
"""

from __future__ import annotations

import numpy as np
import pytest
import sklearn
import statsmodels.api as sm
from scipy.optimize import minimize
from scipy.special import log_softmax, softmax
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper
from probwrap.calibration import MatrixScalingMap, TemperatureMap, VectorScalingMap

_SK = tuple(int(p) for p in sklearn.__version__.split(".")[:2])


def _unpenalised_lr(**kw):
    # scikit-learn >= 1.8 spells "no penalty" C=inf (penalty=None is deprecated there)
    if _SK >= (1, 8):
        return LogisticRegression(C=np.inf, tol=1e-12, max_iter=20_000, **kw)
    return LogisticRegression(penalty=None, tol=1e-12, max_iter=20_000, **kw)


@pytest.fixture(scope="module")
def wine_logprob():
    """Held-out naive Bayes log-probabilities (3 classes) on the bundled wine data, 2 features
    (alcohol, malic acid), so that the classes overlap and the likelihood has a finite maximum."""
    X, y = load_wine(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X[:, [0, 1]], y, test_size=0.5, random_state=0, stratify=y)
    return GaussianNB().fit(Xa, ya).predict_log_proba(Xb), yb


@pytest.fixture(scope="module")
def cancer_logprob():
    """Held-out naive Bayes log-probabilities (2 columns) on the bundled breast cancer data."""
    X, y = load_breast_cancer(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X[:, [0, 1]], y, test_size=0.5, random_state=0, stratify=y)
    return GaussianNB().fit(Xa, ya).predict_log_proba(Xb), yb


def _weights(n, seed=0):
    return np.random.default_rng(seed).integers(1, 4, size=n).astype(float)


def test_matrix_scaling_unregularised_equals_multinomial_logistic_regression(wine_logprob):
    z, y = wine_logprob
    w = _weights(len(y))
    m = MatrixScalingMap(shrinkage=0.0, smooth_targets=False).fit(z, y, sample_weight=w)
    # scikit-learn LogisticRegression (multinomial, unpenalised) on the log-probabilities: the
    # same model (class logits linear in all k scores plus intercepts) and likelihood
    ref = _unpenalised_lr().fit(z, y, sample_weight=w)
    np.testing.assert_allclose(m.predict(z), ref.predict_proba(z), atol=1e-6)


def test_vector_scaling_unregularised_two_columns_equals_binary_logistic_regression(cancer_logprob):
    z, y = cancer_logprob
    w = _weights(len(y), seed=1)
    m = VectorScalingMap(shrinkage=0.0, smooth_targets=False).fit(z, y, sample_weight=w)
    # With two columns the log-odds is a_1 z_1 - a_0 z_0 + (b_1 - b_0): a binary logistic
    # regression on the features (z_0, z_1). scikit-learn LogisticRegression, unpenalised.
    ref = _unpenalised_lr().fit(z, y, sample_weight=w)
    np.testing.assert_allclose([-m.scales_[0], m.scales_[1]], ref.coef_[0], rtol=1e-5)
    assert m.intercepts_[1] - m.intercepts_[0] == pytest.approx(ref.intercept_[0], abs=1e-5)
    np.testing.assert_allclose(m.predict(z), ref.predict_proba(z), atol=1e-7)


def test_vector_scaling_unregularised_matches_scipy_on_the_published_objective(wine_logprob):
    z, y = wine_logprob
    w = _weights(len(y), seed=2)
    k = z.shape[1]

    # Guo et al. (2017), section 4.2: q = softmax(diag(a) z + b), fitted by the (here weighted)
    # negative log-likelihood; minimised by SciPy's BFGS with numerical gradients.
    def nll(theta):
        lp = log_softmax(z * theta[:k] + theta[k:], axis=1)
        return -float(w @ lp[np.arange(len(y)), y]) / w.sum()

    ref = minimize(nll, np.concatenate([np.ones(k), np.zeros(k)]), method="BFGS",
                   options={"gtol": 1e-9})
    m = VectorScalingMap(shrinkage=0.0, smooth_targets=False).fit(z, y, sample_weight=w)
    ours = np.concatenate([m.scales_, m.intercepts_])
    assert nll(ours) <= ref.fun + 1e-10
    np.testing.assert_allclose(m.scales_, ref.x[:k], atol=1e-4)
    ref_b = ref.x[k:] - ref.x[k:].mean()  # softmax ignores a common shift of the intercepts
    np.testing.assert_allclose(m.intercepts_, ref_b, atol=1e-4)


def test_vector_scaling_regularised_matches_scipy_on_the_documented_objective(wine_logprob):
    z, y = wine_logprob
    w = _weights(len(y), seed=3)
    n, k = z.shape
    shrinkage = 3.0
    # the documented objective with smooth_targets=True, written out independently: targets
    # (N_c + 1) / (N_c + 2) on the row's class and 1 / (N_c + 2) shared evenly by the others
    # (Platt 1999 for k = 2),
    # weighted cross-entropy, and shrinkage * (sum (c (a_j - mean a))^2 + sum b_j^2) with c the
    # weighted root-mean-square of the row-centred scores, and the weak pull toward a = 1
    counts = np.array([w[y == j].sum() for j in range(k)])
    t = np.zeros((n, k))
    for i in range(n):
        t[i, :] = 1.0 / (counts[y[i]] + 2.0) / (k - 1)
        t[i, y[i]] = (counts[y[i]] + 1.0) / (counts[y[i]] + 2.0)
    centred = z - z.mean(axis=1, keepdims=True)
    c = np.sqrt(np.sum(w * np.mean(centred**2, axis=1)) / w.sum())

    def objective(theta):
        a, b = theta[:k], theta[k:]
        ce = -np.sum(w[:, None] * t * log_softmax(z * a + b, axis=1))
        pull = 1e-4 * k * (c * (a.mean() - 1.0)) ** 2  # the weak pull toward the identity
        return ce + shrinkage * (np.sum((c * (a - a.mean())) ** 2) + np.sum(b**2) + pull)

    ref = minimize(objective, np.concatenate([np.ones(k), np.zeros(k)]), method="BFGS",
                   options={"gtol": 1e-8})
    m = VectorScalingMap(shrinkage=shrinkage, smooth_targets=True).fit(z, y, sample_weight=w)
    ours = np.concatenate([m.scales_, m.intercepts_])
    assert objective(ours) <= ref.fun + 1e-8
    np.testing.assert_allclose(ours, ref.x, atol=1e-4)  # SciPy BFGS


def test_vector_scaling_default_fit_matches_scipy_on_ten_classes():
    # the default fit (one-hot labels, shrinkage 0.5) on ten classes, against SciPy's L-BFGS-B
    # on the documented objective written out independently: naive Bayes log-probabilities
    # (floored at log 1e-12, as the wrapper's clip does) on held-out rows of the bundled digits
    from sklearn.datasets import load_digits

    X, y = load_digits(return_X_y=True)
    Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    z = np.maximum(GaussianNB().fit(Xa, ya).predict_log_proba(Xb), np.log(1e-12))
    w = _weights(len(yb), seed=5)
    n, k = z.shape
    shrinkage = 0.5
    centred = z - z.mean(axis=1, keepdims=True)
    c = np.sqrt(np.sum(w * np.mean(centred**2, axis=1)) / w.sum())

    def objective(theta):
        a, b = theta[:k], theta[k:]
        lp = log_softmax(z * a + b, axis=1)
        q = np.exp(lp)
        q[np.arange(n), yb] -= 1.0
        r = w[:, None] * q
        pull = 1e-4 * k * c**2
        dev = a - a.mean()
        f = -float(w @ lp[np.arange(n), yb]) + shrinkage * (
            np.sum((c * dev) ** 2) + np.sum(b**2) + pull * (a.mean() - 1.0) ** 2
        )
        ga = np.sum(r * z, axis=0) + 2 * shrinkage * (c**2 * dev + pull * (a.mean() - 1.0) / k)
        gb = r.sum(axis=0) + 2 * shrinkage * b
        return f, np.concatenate([ga, gb])

    ref = minimize(objective, np.concatenate([np.ones(k), np.zeros(k)]), jac=True,
                   method="L-BFGS-B", options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 10_000})
    m = VectorScalingMap().fit(z, yb, sample_weight=w)
    ours = np.concatenate([m.scales_, m.intercepts_])
    # the objective is a sum over ~900 rows of weight 1-3: 1e-9 of it is far below any change
    # in the fitted probabilities; parameters to 1e-5 (L-BFGS-B's own precision here)
    assert objective(ours)[0] <= ref.fun + 1e-9
    np.testing.assert_allclose(m.scales_, ref.x[:k], atol=1e-5)
    np.testing.assert_allclose(m.intercepts_, ref.x[k:] - ref.x[k:].mean(), atol=1e-5)


def test_binary_log_odds_without_shrinkage_give_platt_scaling(cancer_logprob):
    z, y = cancer_logprob
    s = z[:, 1] - z[:, 0]
    w = _weights(len(y), seed=4)
    m = VectorScalingMap(shrinkage=0.0, smooth_targets=True).fit(s, y, sample_weight=w)
    # Platt (1999), section 2.2: targets (N+ + 1) / (N+ + 2) and 1 / (N- + 2); statsmodels GLM
    # Binomial (logit link) with fractional targets and frequency weights fits that likelihood
    n_pos, n_neg = w @ y, w @ (1 - y)
    t = np.where(y == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    ref = sm.GLM(t, sm.add_constant(s), family=sm.families.Binomial(), freq_weights=w).fit(
        tol=1e-14
    )
    np.testing.assert_allclose(m.predict(s), ref.predict(sm.add_constant(s)), atol=1e-8)


def test_strong_shrinkage_keeps_the_scores_as_they_are(wine_logprob):
    # with a very large penalty every scale is pulled to 1 and every intercept to 0: the map
    # returns the softmax of the scores, i.e. the model's own probabilities (SciPy's softmax)
    z, y = wine_logprob
    m = VectorScalingMap(shrinkage=1e9).fit(z, y)
    np.testing.assert_allclose(m.scales_, 1.0, atol=1e-4)
    np.testing.assert_allclose(m.predict(z), softmax(z, axis=1), atol=1e-4)


def test_moderate_shrinkage_gives_temperature_scaling(wine_logprob):
    # consistency test (against the project's own TemperatureMap): a large penalty on the
    # per-class deviations (100 rows), whose pull toward the identity is 1e-4 times weaker, leaves the
    # common scale to the data: it is the temperature-scaling fit
    z, y = wine_logprob
    m = VectorScalingMap(shrinkage=100.0).fit(z, y)
    temp = TemperatureMap(shrinkage=0).fit(z, y)
    np.testing.assert_allclose(m.scales_, m.scales_.mean(), rtol=0.01)
    assert 1.0 / m.scales_.mean() == pytest.approx(temp.temperature_, rel=0.01)


def _separable_three_class(n_per=15, seed=0):
    rng = np.random.default_rng(seed)
    y = np.repeat(np.arange(3), n_per)[: 44]
    z = np.full((y.shape[0], 3), -6.0) + rng.normal(scale=0.3, size=(y.shape[0], 3))
    z[np.arange(y.shape[0]), y] = -0.01
    return z, y


@pytest.mark.parametrize("cls", [VectorScalingMap, MatrixScalingMap])
def test_separable_small_set_stays_inside_zero_one(cls):
    # 44 rows whose scores separate three classes perfectly (the case where temperature
    # scaling runs off to T -> 0): the map says so, refits with smoothed targets and keeps
    # every probability inside what they allow
    z, y = _separable_three_class()
    with pytest.warns(UserWarning, match="smoothed targets"):
        m = cls().fit(z, y)
    assert "separate the classes" in m.boundary_
    q = m.predict(z)
    assert np.all(q > 0.0) and np.all(q < 1.0)
    # Platt-style targets: the true class keeps (N_c + 1) / (N_c + 2) with N_c <= 15; the fit
    # (a linear map, not a table) may exceed its target a little, never by an order
    assert q[np.arange(len(y)), y].max() < 1.0 - 1.0 / 17 / 10
    smooth = cls(smooth_targets=True).fit(z, y)
    np.testing.assert_allclose(q, smooth.predict(z))


def test_unregularised_fit_on_separable_data_warns():
    z, y = _separable_three_class()
    with pytest.warns(UserWarning, match="separate the"):
        m = VectorScalingMap(shrinkage=0.0, smooth_targets=False).fit(z, y)
    assert "separate the classes" in m.boundary_


def test_wrapper_method_strings_use_the_maps():
    from sklearn.datasets import load_digits
    from sklearn.frozen import FrozenEstimator
    from sklearn.metrics import log_loss

    # naive Bayes on the bundled digits (10 classes) is far over-confident on fresh rows
    X, y = load_digits(return_X_y=True)
    Xa, Xr, ya, yr = train_test_split(X, y, test_size=0.6, random_state=0, stratify=y)
    Xc, Xt, yc, yt = train_test_split(Xr, yr, test_size=0.5, random_state=0, stratify=yr)
    base = FrozenEstimator(GaussianNB().fit(Xa, ya))
    raw = log_loss(yt, base.predict_proba(Xt))  # scikit-learn's log loss
    for name, cls in (("vector_scaling", VectorScalingMap), ("matrix_scaling", MatrixScalingMap)):
        model = CalibrationWrapper(base, method=name).fit(Xc, yc)
        assert isinstance(model.calibrator_, cls) and model.method_ == name
        q = model.predict_proba(Xt)
        assert np.all((q > 0) & (q < 1))
        assert log_loss(yt, q) < 0.5 * raw


@pytest.mark.parametrize("cls", [VectorScalingMap, MatrixScalingMap])
@pytest.mark.parametrize("bad", [-1.0, np.inf, "a", True])
def test_bad_shrinkage_is_named(cls, bad, wine_logprob):
    z, y = wine_logprob
    with pytest.raises(ValueError, match="`shrinkage`"):
        cls(shrinkage=bad).fit(z, y)
