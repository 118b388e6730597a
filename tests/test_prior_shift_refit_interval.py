"""A base model refit on the labelled rows: the default interval scores the unlabelled rows with
the cross-fitting's fold models too (probwrap.shift.score_interval, ``fold_proba``).

The labelled rows' posteriors come from fold models and the unlabelled rows' from the model
refit on all labelled rows; the interval compares the unlabelled rows' scores averaged over the
fold models (each weighted by its fold's share of the labelled weight) with the labelled rows
re-weighted so every fold holds that share of each class: the cross-fitted moment condition
averaged over folds (Chernozhukov et al. 2018, Econometrics Journal 21, Definition 3.2, DML2),
which holds for every fixed model under prior shift (Lipton, Wang & Smola 2018, section 2).
Coverage on scikit-learn's and statsmodels' bundled data: benchmarks/shift.py --only=refit.
"""

from __future__ import annotations

import copy
import pickle
import warnings

import numpy as np
import pytest
from scipy.stats import chi2
from scipy.stats import f as f_dist
from sklearn.base import clone
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, PriorShiftWrapper
from probwrap.shift import score_interval
from probwrap.shift._analytic import moment_prior_interval
from probwrap.shift._resample import _widen


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


@pytest.fixture(scope="module")
def cancer_split():
    # scikit-learn's bundled breast-cancer data, "malignant" as the positive class: 250
    # labelled rows at random, unlabelled rows resampled from the others at prevalence 0.2
    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    cls = (rng.uniform(size=300) < 0.2).astype(int)
    rows = np.where(cls == 1, rng.choice(pool[y[pool] == 1], 300),
                    rng.choice(pool[y[pool] == 0], 300))
    return X[lab], y[lab], X[rows]


def _fit_adapt(model, X, y, X_new):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return model.fit(X, y).adapt(X_new)


def _direct_folds(base, X, y, X_new, seed, n_folds=3):
    """The wrapper's folds rebuilt outside it: StratifiedKFold(shuffle, random_state=seed),
    a clone fitted on each training part; returns (fold of each labelled row, fold models'
    posteriors of the new rows)."""
    fold = np.empty(y.shape[0], dtype=int)
    proba = []
    for i, (train, test) in enumerate(
            StratifiedKFold(n_folds, shuffle=True, random_state=seed).split(X, y)):
        fold[test] = i
        proba.append(clone(base).fit(X[train], y[train]).predict_proba(X_new))
    return fold, np.stack(proba)


def test_refit_interval_is_the_fold_averaged_score_interval(cancer_split):
    X, y, X_new = cancer_split
    model = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=0), X, y, X_new)
    est = model.prior_estimator_
    fold, fold_raw = _direct_folds(_model(), X, y, X_new, seed=0)
    # the wrapper kept the same folds and fold models as a direct rebuild
    np.testing.assert_array_equal(est._src_fold, fold)
    np.testing.assert_allclose(np.stack([m.predict_proba(X_new) for m, _ in model._fold_models]),
                               fold_raw, rtol=1e-12)
    p_t = est.calibrate(model.estimator_.predict_proba(X_new))
    p_s, y_s, w_s = est._source_rows()
    ml = float(model.prior_estimate_.ml_prior[1])
    kwargs = dict(effective_rows=300.0, source_effective_rows=250.0, centre=ml)
    with_folds, ok = score_interval(
        p_t, est.calibrate(p_s), y_s, est.source_prior_,
        fold_proba=np.stack([est.calibrate(f) for f in fold_raw]), source_fold=fold, **kwargs)
    without, _ = score_interval(p_t, est.calibrate(p_s), y_s, est.source_prior_, **kwargs)
    assert ok
    expected = _widen(np.array([[1 - with_folds[1], 1 - with_folds[0]], with_folds]),
                      model.target_prior_, model.prior_estimate_.ml_prior, 300.0, 0.95)
    np.testing.assert_allclose(model.target_prior_interval_, expected, rtol=0, atol=1e-12)
    # the earlier interval (refit model only) is another one
    assert np.max(np.abs(with_folds - without)) > 1e-4


def test_refit_endpoints_solve_the_fold_averaged_statistic_in_numpy(cancer_split):
    # At each end of the 95 % interval the statistic, computed here from its definition in
    # NumPy (unlabelled scores averaged over the fold models with weights = the folds' shares
    # of the labelled rows; each class's labelled rows re-weighted so every fold holds that
    # share; Welch-Satterthwaite degrees of freedom, Welch 1947), has tail probability 0.05.
    X, y, X_new = cancer_split
    model = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=0), X, y, X_new)
    est = model.prior_estimator_
    fold, fold_raw = _direct_folds(_model(), X, y, X_new, seed=0)
    src = est.source_prior_
    fp = np.stack([est.calibrate(f) for f in fold_raw]) / src
    p_s, y_s, _ = est._source_rows()
    q_s = est.calibrate(p_s) / src
    n_t, n_s = X_new.shape[0], y.shape[0]
    share = np.bincount(fold, minlength=3) / n_s
    w = np.array([share[fold[i]] * np.sum(y_s == y_s[i]) / np.sum((y_s == y_s[i])
                  & (fold == fold[i])) for i in range(n_s)])

    def tail(t):
        u_t = sum(share[k] * (fp[k, :, 1] - fp[k, :, 0])
                  / ((1 - t) * fp[k, :, 0] + t * fp[k, :, 1]) for k in range(3))
        var = u_t.var() / (n_t - 1)
        parts = [var]
        m_s = 0.0
        for c, pi_c in ((0, 1 - t), (1, t)):
            rows = y_s == c
            u_c = (q_s[rows, 1] - q_s[rows, 0]) / ((1 - t) * q_s[rows, 0] + t * q_s[rows, 1])
            wc = w[rows] / w[rows].sum()
            mean = wc @ u_c
            n_c = n_s * rows.sum() / n_s
            parts.append(pi_c**2 * (wc @ (u_c - mean) ** 2) / (n_c - 1))
            m_s += pi_c * mean
        total = sum(parts)
        nu = total**2 / (parts[0] ** 2 / (n_t - 1) + sum(
            parts[1 + c] ** 2 / (n_s * np.mean(y_s == c) - 1) for c in (0, 1)))
        return f_dist.sf((u_t.mean() - m_s) ** 2 / total, 1, nu)

    p_s_cal, _, _ = est._source_rows()
    (lo, hi), _ = score_interval(
        est.calibrate(model.estimator_.predict_proba(X_new)), est.calibrate(p_s_cal), y_s, src,
        fold_proba=fp * src, source_fold=fold, effective_rows=float(n_t),
        source_effective_rows=float(n_s))
    assert tail(lo) == pytest.approx(0.05, abs=2e-6)
    assert tail(hi) == pytest.approx(0.05, abs=2e-6)
    assert tail(0.5 * (lo + hi)) > 0.05
    assert chi2.ppf(0.95, 1) > 0  # (the chi-square scale maps the same tail probability)


def test_frozen_model_interval_is_unchanged(cancer_split):
    # a model fitted elsewhere and frozen: no fold models, the interval exactly as before
    # (score_interval without fold_proba, the two-sample score interval)
    X, y, X_new = cancer_split
    frozen = FrozenEstimator(_model().fit(X[:100], y[:100]))
    model = _fit_adapt(PriorShiftWrapper(frozen, random_state=0), X[100:], y[100:], X_new)
    est = model.prior_estimator_
    assert getattr(model, "_fold_models", None) is None
    assert getattr(est, "_src_fold", None) is None
    p_s, y_s, w_s = est._source_rows()
    (lo, hi), _ = score_interval(
        est.calibrate(frozen.predict_proba(X_new)), est.calibrate(p_s), y_s, est.source_prior_,
        effective_rows=300.0, source_effective_rows=150.0,
        centre=float(model.prior_estimate_.ml_prior[1]))
    expected = _widen(np.array([[1 - hi, 1 - lo], [lo, hi]]), model.target_prior_,
                      model.prior_estimate_.ml_prior, 300.0, 0.95)
    np.testing.assert_array_equal(model.target_prior_interval_, expected)


def test_only_the_prior_shift_wrapper_keeps_fold_models(cancer_split):
    X, y, _ = cancer_split
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cal = CalibrationWrapper(_model(), method="platt", cv=3).fit(X, y)
        shift = PriorShiftWrapper(_model(), cv=4).fit(X, y)
    assert cal._fold_models is None
    assert len(shift._fold_models) == 4
    # refitting the same wrapper on a frozen model drops them
    shift.set_params(estimator=FrozenEstimator(shift.estimator_))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        shift.fit(X, y)
    assert shift._fold_models is None and shift.prior_estimator_._src_fold is None
    # and a pickled refit wrapper gives the same interval
    refit = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=1), X, y, X[:200])
    again = pickle.loads(pickle.dumps(refit))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        again.adapt(X[:200])
    np.testing.assert_array_equal(again.target_prior_interval_, refit.target_prior_interval_)


def test_monitor_batches_carry_the_fold_models(cancer_split):
    # one batch of monitor is the adapt estimate of the same rows, with the same interval
    X, y, X_new = cancer_split
    model = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=0), X, y, X_new)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = model.monitor(X_new, batch_size=X_new.shape[0])
    np.testing.assert_allclose(np.column_stack([table["lower"][0], table["upper"][0]]),
                               model.target_prior_interval_, atol=1e-12)


def _held_out(base, X, y, X_new, seed, n_folds=3):
    """Cross-fitting outside the wrapper: (held-out posteriors of the labelled rows, fold of
    each, the fold models' posteriors of the new rows (K, n, k), the refit model's)."""
    fold = np.empty(y.shape[0], dtype=int)
    held = np.empty((y.shape[0], np.unique(y).shape[0]))
    proba = []
    for i, (train, test) in enumerate(
            StratifiedKFold(n_folds, shuffle=True, random_state=seed).split(X, y)):
        model = clone(base).fit(X[train], y[train])
        fold[test] = i
        held[test] = model.predict_proba(X[test])
        proba.append(model.predict_proba(X_new))
    return held, fold, np.stack(proba), clone(base).fit(X, y).predict_proba(X_new)


def _poisson_counts(seed, n_resamples, n_rows):
    # PriorEstimator's documented draw: one NumPy Generator seeded from the RandomState of
    # random_state, Poisson(1) counts per row and resample (labelled rows not redrawn here)
    gen = np.random.default_rng(np.random.RandomState(seed).randint(2**31 - 1))
    return gen.poisson(1.0, size=(n_resamples, n_rows))


def test_percentile_bootstrap_resamples_the_fold_models_scores(cancer_split):
    # Estimator level, no calibration, labelled rows fixed: each resample's estimate solves the
    # prior's score equation with every unlabelled row's score averaged over the fold models
    # (weights: the folds' shares of the labelled rows), sum_i c_i sum_k s_k u_k(x_i; t) = 0,
    # solved here by SciPy's brentq from the formula (Saerens et al. 2002's fixed point is the
    # zero of this score; Chernozhukov et al. 2018, DML2, for the fold average). The interval is
    # their 2.5 / 97.5 % quantiles (then widened as always); before 4 December 2026 the
    # resamples read the refit model's posteriors, an interval that is measurably another.
    from scipy.optimize import brentq

    from probwrap.shift import PriorEstimator

    X, y, X_new = cancer_split
    base = make_pipeline(StandardScaler(), KNeighborsClassifier(25))
    held, fold, fold_new, refit_new = _held_out(base, X, y, X_new, seed=0)
    est = PriorEstimator(calibration=None, resample_source=False, interval="percentile",
                         n_resamples=200, random_state=7, tol=1e-10, prior_strength=0.0)
    est.fit(held, y, source_fold=fold)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(refit_new, fold_proba=list(fold_new))
    src = est.source_prior_
    share = np.bincount(fold, minlength=3) / y.shape[0]

    def root(counts, proba, weights):  # proba (K, n, 2), averaged with `weights`
        q = proba / src
        return brentq(lambda t: sum(
            s_k * np.sum(counts * (q_k[:, 1] - q_k[:, 0]) / ((1 - t) * q_k[:, 0] + t * q_k[:, 1]))
            for s_k, q_k in zip(weights, q, strict=True)), 1e-9, 1 - 1e-9, xtol=1e-13)

    counts = _poisson_counts(7, 200, X_new.shape[0])
    n = float(X_new.shape[0])

    def interval(proba, weights):
        draws = np.array([root(c, proba, weights) for c in counts])
        lo, hi = np.quantile(draws, [0.025, 0.975])
        return _widen(np.array([[1 - hi, 1 - lo], [lo, hi]]), res.ml_prior, res.ml_prior, n, 0.95)

    expected = interval(fold_new, share)
    np.testing.assert_allclose(res.ml_interval, expected, rtol=0, atol=1e-8)
    # the refit model's posteriors alone (the earlier bootstrap) give another interval
    earlier = interval(refit_new[None], np.ones(1))
    assert np.max(np.abs(earlier - expected)) > 2e-3
    # and its point estimate is the same fold-averaged root on the rows themselves (since 4
    # December 2026; before, brentq on the refit model's posteriors, which differs here)
    ones = np.ones(X_new.shape[0])
    assert res.ml_prior[1] == pytest.approx(root(ones, fold_new, share), abs=1e-8)
    assert abs(root(ones, refit_new[None], np.ones(1)) - res.ml_prior[1]) > 1e-3


def test_multiclass_bbse_bootstrap_resamples_the_fold_models_posteriors():
    # Three classes, method="bbse_soft" (whose interval is the bootstrap): each resample
    # solves the soft confusion system C w = mu (Lipton, Wang & Smola 2018, eq. 4 with the soft
    # confusion matrix) for mu the unlabelled rows' mean posterior averaged over the fold
    # models; the prior is w * source shares. Solved here by numpy.linalg.solve on scikit-learn's
    # bundled digits (3 / 5 / 8), the unlabelled rows resampled at shares (0.5, 0.3, 0.2).
    from sklearn.datasets import load_digits

    from probwrap.shift import PriorEstimator

    digits = load_digits()
    keep = np.isin(digits.target, (3, 5, 8))
    X, y = digits.data[keep], np.searchsorted([3, 5, 8], digits.target[keep])
    rng = np.random.default_rng(11)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:300], order[300:]
    cls = rng.choice(3, size=300, p=[0.5, 0.3, 0.2])
    rows = np.array([rng.choice(pool[y[pool] == c]) for c in cls])
    base = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=2000))
    held, fold, fold_new, refit_new = _held_out(base, X[lab], y[lab], X[rows], seed=1)
    est = PriorEstimator("bbse_soft", calibration=None, resample_source=False,
                         interval="percentile", n_resamples=100, random_state=3)
    est.fit(held, y[lab], source_fold=fold)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(refit_new, fold_proba=list(fold_new))
    share = np.bincount(fold, minlength=3) / 300.0
    soft = held.T @ np.eye(3)[y[lab]] / 300.0  # joint soft confusion, rows predicted
    src = np.bincount(y[lab], minlength=3) / 300.0
    averaged = np.tensordot(share, fold_new, axes=1)
    draws = []
    for c in _poisson_counts(3, 100, 300):
        w = np.linalg.solve(soft, c @ averaged / c.sum())
        assert np.all(w * src > 0)  # inside the simplex: no projection needed
        draws.append(w * src)
    lo, hi = np.quantile(np.array(draws), [0.025, 0.975], axis=0)
    expected = _widen(np.column_stack([lo, hi]), res.prior, res.prior, 300.0, 0.95)
    assert res.shift_pvalue < 0.05  # (so no widening toward the source shares either)
    np.testing.assert_allclose(res.interval, expected, rtol=0, atol=1e-10)
    refit_draws = [np.linalg.solve(soft, c @ refit_new / c.sum()) * src
                   for c in _poisson_counts(3, 100, 300)]
    earlier = np.quantile(np.array(refit_draws), [0.025, 0.975], axis=0).T
    assert np.max(np.abs(earlier - np.column_stack([lo, hi]))) > 2e-3


@pytest.mark.parametrize("interval", ["bca", "percentile"])
def test_bootstrap_interval_with_a_refit_model_reads_the_fold_models(cancer_split, interval):
    # the bootstrap intervals now resample the fold models' posteriors of the unlabelled rows:
    # no warning (there was one before 4 December 2026), the same interval as the estimator
    # given fold posteriors rebuilt outside the wrapper, another than with the folds hidden
    X, y, X_new = cancer_split
    model = PriorShiftWrapper(_model(), cv=3, interval=interval, n_resamples=60,
                              random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.fit(X, y)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model.adapt(X_new)
    assert not [w for w in caught if "refit" in str(w.message)]
    _, fold_raw = _direct_folds(_model(), X, y, X_new, seed=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rebuilt = model.prior_estimator_.estimate(model.estimator_.predict_proba(X_new),
                                                  fold_proba=list(fold_raw), random_state=0)
    np.testing.assert_allclose(model.target_prior_interval_, rebuilt.interval, atol=1e-10)
    shown = model.target_prior_interval_.copy()
    model._fold_models = None  # the earlier interval: the refit model's posteriors only
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.adapt(X_new)
    assert np.max(np.abs(model.target_prior_interval_ - shown)) > 1e-4
    # the shift test reads the fold models whatever the interval
    score = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=0), X, y, X_new)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        again = PriorShiftWrapper(_model(), cv=3, interval=interval, n_resamples=60,
                                  random_state=0).fit(X, y).adapt(X_new)
    assert again.shift_statistic_ == score.shift_statistic_


def test_multiclass_non_em_refit_does_not_warn():
    # more than two classes with a method other than EM: the (bootstrap) interval reads the
    # fold models, so adapt no longer warns (scikit-learn's bundled wine data)
    X, y = load_wine(return_X_y=True)
    order = np.random.default_rng(5).permutation(y.shape[0])
    lab, new = order[:120], order[120:]
    for method in ("bbse", "pacc"):
        model = PriorShiftWrapper(_model(), cv=3, method=method, n_resamples=40,
                                  random_state=2)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            model.fit(X[lab], y[lab])
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            model.adapt(X[new])
        assert not [w for w in caught if "refit" in str(w.message)], method


def test_dask_unlabelled_rows_with_a_refit_model(cancer_split, tally_path):
    # unlabelled Dask rows beyond the kept-rows limit (lowered to 0 by `tally_path`) are tallied
    # on the workers from the refit model's posteriors: since 4 December 2026 the score
    # interval reads the fold models' score sums there (tests/test_distributed_refit_large.py),
    # and (since a later change the same day) a bootstrap interval draws Poisson replicates of
    # the rows once per fold model in the same pass: neither warns (before, the bootstrap one
    # did). A small Dask set is collected as rows, which the fold models score too: the same
    # interval as in memory.
    da = pytest.importorskip("dask.array")
    import probwrap.scale._tally as tally_module

    X, y, X_new = cancer_split
    model = PriorShiftWrapper(_model(), cv=3, random_state=0)
    boot = PriorShiftWrapper(_model(), cv=3, random_state=0, interval="percentile",
                             n_resamples=50)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.fit(X, y)
        boot.fit(X, y)
        memory = copy.deepcopy(model).adapt(X_new).target_prior_interval_
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        boot.adapt(da.from_array(X_new, chunks=100))
    assert not [w for w in caught if "refit" in str(w.message)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model.adapt(da.from_array(X_new, chunks=100))
    assert not [w for w in caught if "refit" in str(w.message)]
    np.testing.assert_allclose(model.target_prior_interval_, memory, atol=1e-6)
    frozen = PriorShiftWrapper(FrozenEstimator(model.estimator_), random_state=0)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        frozen.fit(X, y).adapt(da.from_array(X_new, chunks=100))
    assert not [w for w in caught if "refit" in str(w.message)]
    tally_module.KEPT_ROWS = 20_000  # (monkeypatch puts the original back after the test)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model.adapt(da.from_array(X_new, chunks=100))
    assert not [w for w in caught if "refit" in str(w.message)]
    small = model.target_prior_interval_.copy()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.adapt(X_new)
    np.testing.assert_allclose(small, model.target_prior_interval_, atol=1e-9)


def test_shift_test_compares_fold_averaged_scores(cancer_split):
    # the shift test's unlabelled side is the fold-averaged score at the source prior: the
    # statistic is the one of PriorEstimator.estimate given the fold models' posteriors
    # (rebuilt outside the wrapper), and another one without them
    X, y, X_new = cancer_split
    model = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=0), X, y, X_new)
    est = model.prior_estimator_
    _, fold_raw = _direct_folds(_model(), X, y, X_new, seed=0)
    proba = model.estimator_.predict_proba(X_new)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with_folds = est.estimate(proba, fold_proba=list(fold_raw), interval=False)
        without = est.estimate(proba, interval=False)
    assert model.shift_statistic_ == pytest.approx(with_folds.shift_statistic, rel=1e-12)
    assert abs(with_folds.shift_statistic - without.shift_statistic) > 1e-3
    # the point estimate reads the fold models too (since 4 December 2026; before, the refit
    # model's posteriors only, as `without` still does)
    np.testing.assert_allclose(model.prior_estimate_.ml_prior, with_folds.ml_prior, rtol=0,
                               atol=1e-9)
    assert abs(with_folds.ml_prior[1] - without.ml_prior[1]) > 1e-3


def test_multiclass_refit_interval_is_the_fold_averaged_moment_interval():
    # scikit-learn's bundled wine data (three classes): 120 labelled rows, the other 58
    # unlabelled. The class-moment interval with fold models: the unlabelled rows' shift-test
    # scores (at the source prior) averaged over the fold models, against the labelled rows'
    # class means re-weighted so each fold holds its share of every class, computed here in
    # NumPy and handed to moment_prior_interval.
    X, y = load_wine(return_X_y=True)
    order = np.random.default_rng(5).permutation(y.shape[0])
    lab, new = order[:120], order[120:]
    model = _fit_adapt(PriorShiftWrapper(_model(), cv=3, random_state=2),
                       X[lab], y[lab], X[new])
    est = model.prior_estimator_
    fold, fold_raw = _direct_folds(_model(), X[lab], y[lab], X[new], seed=2)
    np.testing.assert_array_equal(est._src_fold, fold)
    src = est.source_prior_
    share = np.bincount(fold, minlength=3) / 120.0
    scores = [est.calibrate(f) / src for f in fold_raw]
    u_bar = sum(s * (q[:, 1:] - q[:, :1]) for s, q in zip(share, scores, strict=True))
    m_t = u_bar.mean(axis=0)
    c_t = np.cov(u_bar.T, bias=True)
    p_s, y_s, _ = est._source_rows()
    q_s = est.calibrate(p_s) / src
    u_s = q_s[:, 1:] - q_s[:, :1]
    means, covs, n_c = [], [], []
    for c in range(3):
        rows = y_s == c
        w = np.array([share[fold[i]] * rows.sum() / np.sum(rows & (fold == fold[i]))
                      for i in np.flatnonzero(rows)])
        wn = w / w.sum()
        mean = wn @ u_s[rows]
        means.append(mean)
        covs.append(((u_s[rows] - mean) * wn[:, None]).T @ (u_s[rows] - mean))
        n_c.append(w.sum() ** 2 / np.dot(w, w))
    # each class's spread floored at the one the calibrated posteriors imply (session 29): the
    # score over all labelled rows (their fold re-weighting kept) weighted by the class's
    # posterior, the class's matrix scaled by the largest ratio of diagonals above 1
    p_cal = est.calibrate(p_s)
    w_all = np.array([share[fold[i]] * np.sum(y_s == y_s[i])
                      / np.sum((y_s == y_s[i]) & (fold == fold[i])) for i in range(len(y_s))])
    for c in range(3):
        wp = w_all * p_cal[:, c] / np.sum(w_all * p_cal[:, c])
        d = u_s - wp @ u_s
        implied = (d * wp[:, None]).T @ d
        covs[c] = covs[c] * max(1.0, float(np.max(np.diag(implied) / np.diag(covs[c]))))
    bounds = moment_prior_interval((m_t, c_t, 58.0), (np.array(means), np.array(covs),
                                                      np.array(n_c)), 0.95)[0]
    ml = model.prior_estimate_.ml_prior
    np.testing.assert_allclose(model.prior_estimate_.ml_interval,
                               _widen(bounds, ml, ml, 58.0, 0.95), atol=1e-10)


def test_many_labelled_rows_keep_no_fold_models_unless_asked(cancer_split, monkeypatch):
    # More than SMALL_HELDOUT_ROWS labelled rows (lowered here to 100 of the 250) without
    # keep_heldout: the held-out scores become a tally that mixes the folds and no fold models
    # are kept, so the interval is the one with the fold models hidden (up to the tally's
    # binning), without a warning (measured negligible at 25,000 rows: docs/evidence/prior_shift_log.md);
    # keep_heldout=True keeps the rows and the fold models and carries the refit.
    import probwrap._prior_shift as module

    monkeypatch.setattr(module, "SMALL_HELDOUT_ROWS", 100)
    X, y, X_new = cancer_split
    default = PriorShiftWrapper(_model(), cv=3, random_state=0)
    kept = PriorShiftWrapper(_model(), cv=3, random_state=0, keep_heldout=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        default.fit(X, y)
        kept.fit(X, y)
    assert default._fold_models is None and default.prior_estimator_._source_row_counts() is not None
    assert len(kept._fold_models) == 3
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        default.adapt(X_new)
    assert not [w for w in caught if "refit" in str(w.message)]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        kept.adapt(X_new)
        carried = kept.target_prior_interval_.copy()
        kept._fold_models = None
        kept.adapt(X_new)
    np.testing.assert_allclose(default.target_prior_interval_, kept.target_prior_interval_,
                               atol=2e-3)
    assert np.max(np.abs(carried - kept.target_prior_interval_)) > 1e-4


@pytest.mark.parametrize("predict_with", ["refit", "fold_models"])
def test_point_estimate_is_the_fold_averaged_root(cancer_split, predict_with):
    # The point estimate after a refit (since 4 December 2026): the root of the prior's score
    # equation with every unlabelled row's score averaged over the fold models, weighted by the
    # folds' shares of the labelled rows, sum_i sum_k s_k u(c(p_ik); t) = 0 with c the fitted
    # calibration (bias-corrected temperature scaling) and u the score of Saerens, Latinne &
    # Decaestecker's (2002) likelihood, whose zero is their EM fixed point (eqs. 2.9-2.10):
    # the fold models rebuilt here as scikit-learn clones on the wrapper's folds, the root
    # found by SciPy's brentq. Before, the root read the refit model's posteriors through the
    # calibration fitted on the fold models' held-out ones (about 0.001 away here, 1,000 times
    # the tolerance below; on diamonds at 2,000 labelled rows a bias of -0.02,
    # docs/evidence/prior_shift_log.md).
    from scipy.optimize import brentq

    X, y, X_new = cancer_split
    base = make_pipeline(StandardScaler(), KNeighborsClassifier(25))
    model = _fit_adapt(PriorShiftWrapper(base, cv=3, random_state=0, prior_strength=0.0,
                                         predict_with=predict_with), X, y, X_new)
    assert model.predicted_with_ == predict_with
    est = model.prior_estimator_
    fold, fold_raw = _direct_folds(base, X, y, X_new, seed=0)
    np.testing.assert_array_equal(fold, est._src_fold)
    src = np.bincount(y, minlength=2) / y.shape[0]
    np.testing.assert_allclose(est.source_prior_, src, atol=1e-12)
    share = np.bincount(fold, minlength=3) / y.shape[0]

    def root(proba, weights):  # proba (K, n, 2): calibrated, averaged with `weights`
        q = proba / src
        return brentq(lambda t: sum(
            s_k * np.mean((q_k[:, 1] - q_k[:, 0]) / ((1 - t) * q_k[:, 0] + t * q_k[:, 1]))
            for s_k, q_k in zip(weights, q, strict=True)), 1e-9, 1 - 1e-9, xtol=1e-13)

    calibrated = np.stack([est.calibrate(f) for f in fold_raw])
    expected = root(calibrated, share)
    assert model.prior_estimate_.ml_prior[1] == pytest.approx(expected, abs=1e-6)
    assert model.target_prior_[1] == pytest.approx(expected, abs=1e-6)
    # the rule before: the refit model's calibrated posteriors (or, predicting with the fold
    # models, their average), measurably another share
    refit = est.calibrate(model.estimator_.predict_proba(X_new))[None]
    averaged = np.tensordot(share, calibrated, axes=1)[None]
    before = refit if predict_with == "refit" else averaged
    assert abs(root(before, np.ones(1)) - expected) > 5e-4
    # the interval holds it without widening: the score interval's centre, the same equation
    # with the labelled rows' fold-reweighted class means subtracted, is within 0.01
    lo, hi = model.target_prior_interval_[1]
    assert lo < expected < hi
