"""The interval that holds every class share at once (more than two classes; session 23).

``PriorShiftWrapper.adapt`` gives each class share an interval that holds it with probability
``confidence_level`` one class at a time (``target_prior_interval_each_class_``); all of them
at once hold less often (the session-22 hunt: 89.6 % at 95 % on its multiclass cells).
``target_prior_interval_all_classes_`` builds the same interval at the per-share level
``1 - (1 - level) / k`` (Bonferroni), which for multinomial proportions is Goodman's (1965)
simultaneous interval. References: statsmodels' ``multinomial_proportions_confint(method=
"goodman")`` and ``proportion_confint(method="beta")`` (Clopper-Pearson), SciPy's chi-square
and normal quantiles. Every test here fails on the code before (no such option or attribute).
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from scipy.stats import chi2, norm
from sklearn.datasets import load_digits, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.tree import DecisionTreeClassifier

from probwrap import PriorShiftWrapper
from probwrap.shift import PriorEstimate
from probwrap.shift._analytic import all_shares_level, share_interval

sm_proportion = pytest.importorskip("statsmodels.stats.proportion")


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn()


def test_all_shares_level_gives_goodmans_simultaneous_interval():
    # multinomial counts: the shares' delta-method covariance is (diag(p) - p p') / n, and the
    # Wilson-shaped interval at the per-share level 1 - 0.05 / k is Goodman's (1965) interval
    # (statsmodels), whose chi-square quantile is chi2(1) at 1 - alpha / k (SciPy)
    counts = np.array([120, 340, 60, 480])
    n = counts.sum()
    p = counts / n
    cov = (np.diag(p) - np.outer(p, p)) / n
    k = p.shape[0]
    level = all_shares_level(0.95, k)
    assert level == pytest.approx(1 - 0.05 / 4, abs=1e-15)
    assert norm.ppf(0.5 + level / 2) ** 2 == pytest.approx(chi2.ppf(1 - 0.05 / k, 1), rel=1e-12)
    ours = share_interval(p, cov, level, shape="wilson")
    goodman = sm_proportion.multinomial_proportions_confint(counts, alpha=0.05, method="goodman")
    np.testing.assert_allclose(ours, goodman, rtol=0, atol=1e-12)
    # the per-class interval at 95 % is each share's own Wilson interval, narrower
    each = share_interval(p, cov, 0.95, shape="wilson")
    wilson = np.array(sm_proportion.proportion_confint(counts, n, alpha=0.05,
                                                       method="wilson")).T
    np.testing.assert_allclose(each, wilson, rtol=0, atol=1e-12)
    assert np.all(each[:, 1] - each[:, 0] < 0.85 * (ours[:, 1] - ours[:, 0]))


@pytest.mark.parametrize("bad", [0.0, 1.0, 1.2, float("nan")])
def test_all_shares_level_refuses_a_level_outside_zero_one(bad):
    with pytest.raises(ValueError, match="confidence_level"):
        all_shares_level(bad, 3)


def _separated(counts, rng):
    """Rows whose one feature is the class plus noise of +-0.2: a tree separates them exactly."""
    y = np.repeat(np.arange(len(counts)), counts)
    return y[:, None] + rng.uniform(-0.2, 0.2, (y.shape[0], 1)), y


@pytest.fixture(scope="module")
def separating():
    """A perfectly separating frozen tree (posteriors exactly 0 or 1), fitted without a
    calibration on 1,000 labelled rows and adapted to 1,000 rows of shares 0.3/0.5/0.15/0.05:
    the maximum-likelihood prior is then the rows' class proportions, multinomial counts."""
    rng = np.random.default_rng(0)
    tree = DecisionTreeClassifier().fit(*_separated([50] * 4, rng))
    lab = _separated([250] * 4, rng)
    new_X, new_y = _separated([300, 500, 150, 50], rng)
    assert set(np.unique(tree.predict_proba(new_X))) == {0.0, 1.0}
    return tree, lab, new_X, np.bincount(new_y)


@pytest.mark.parametrize("covers", ["each_class", "all_classes"])
def test_perfectly_separating_model_gives_the_multinomial_intervals(separating, covers):
    tree, (X, y), X_new, counts = separating
    psw = PriorShiftWrapper(FrozenEstimator(tree), calibration=None,
                            interval_covers=covers).fit(X, y)
    _quiet(lambda: psw.adapt(X_new))
    n, k = counts.sum(), counts.shape[0]
    np.testing.assert_allclose(psw.prior_estimate_.ml_prior, counts / n, atol=1e-9)
    # per class: Clopper & Pearson's interval at 95 % (the floor every interval here keeps,
    # wider than the moment interval on counts), statsmodels' method="beta"
    cp = np.array(sm_proportion.proportion_confint(counts, n, alpha=0.05, method="beta")).T
    np.testing.assert_allclose(psw.target_prior_interval_each_class_, cp, rtol=0, atol=1e-9)
    # all at once: the same two intervals at the Bonferroni level 1 - 0.05 / k — the hull of
    # Clopper-Pearson at alpha / k and Goodman's interval (its moment form carries Student's t
    # on n - 1 degrees of freedom and n - 1 rows, hence the 2e-4)
    cp_k = np.array(sm_proportion.proportion_confint(counts, n, alpha=0.05 / k,
                                                     method="beta")).T
    goodman = sm_proportion.multinomial_proportions_confint(counts, alpha=0.05, method="goodman")
    hull = np.column_stack([np.minimum(cp_k[:, 0], goodman[:, 0]),
                            np.maximum(cp_k[:, 1], goodman[:, 1])])
    every = psw.target_prior_interval_all_classes_
    np.testing.assert_allclose(every, hull, rtol=0, atol=2e-4)
    assert np.all(every[:, 0] <= cp_k[:, 0] + 1e-12) and np.all(every[:, 1] >= cp_k[:, 1] - 1e-12)
    # and far from the per-class interval (what the old code gave as the only one)
    assert np.min((every[:, 1] - every[:, 0]) - (cp[:, 1] - cp[:, 0])) > 5e-3
    chosen = every if covers == "all_classes" else cp
    np.testing.assert_allclose(psw.target_prior_interval_, chosen, rtol=0, atol=1e-9)


@pytest.fixture(scope="module")
def wine():
    X, y = load_wine(return_X_y=True)
    order = np.random.default_rng(5).permutation(y.shape[0])
    model = LogisticRegression(C=0.05, max_iter=5000).fit(X[order[:60]], y[order[:60]])
    return model, X[order[60:120]], y[order[60:120]], X[order[120:]]


@pytest.mark.parametrize("kind", [dict(), dict(interval="bca", n_resamples=60),
                                  dict(method="bbse", n_resamples=60)])
def test_all_classes_interval_contains_the_per_class_one_on_every_multiclass_interval(wine, kind):
    model, X, y, X_new = wine
    psw = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(model), random_state=0, **kind)
                 .fit(X, y).adapt(X_new))
    each = psw.target_prior_interval_each_class_
    every = psw.target_prior_interval_all_classes_
    assert each.shape == every.shape == (3, 2)
    assert np.all(every[:, 0] <= each[:, 0]) and np.all(every[:, 1] >= each[:, 1])
    assert np.sum(every[:, 1] - every[:, 0]) > 1.05 * np.sum(each[:, 1] - each[:, 0])
    np.testing.assert_array_equal(psw.target_prior_interval_, each)  # the default
    np.testing.assert_array_equal(psw.prior_estimate_.all_shares_interval, every)
    # the option only chooses which one target_prior_interval_ holds: the estimate, the
    # applied prior and both intervals are the same
    other = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(model), random_state=0,
                                             interval_covers="all_classes", **kind)
                   .fit(X, y).adapt(X_new))
    np.testing.assert_array_equal(other.target_prior_interval_, every)
    np.testing.assert_array_equal(other.target_prior_interval_all_classes_, every)
    np.testing.assert_array_equal(other.applied_prior_, psw.applied_prior_)


def test_two_classes_all_classes_interval_is_the_per_class_one(wine):
    model, X, y, X_new = wine
    two = (y != 2)
    m2 = LogisticRegression(C=0.05, max_iter=5000).fit(X[two], y[two])
    psw = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(m2), interval_covers="all_classes")
                 .fit(X[two], y[two]).adapt(X_new))
    np.testing.assert_array_equal(psw.target_prior_interval_all_classes_,
                                  psw.target_prior_interval_each_class_)
    assert psw.prior_estimate_.all_shares_interval is None


def test_no_interval_gives_none_for_both(wine):
    model, X, y, X_new = wine
    psw = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(model), n_resamples=0,
                                           interval_covers="all_classes").fit(X, y).adapt(X_new))
    assert psw.target_prior_interval_ is None
    assert psw.target_prior_interval_all_classes_ is None


@pytest.mark.parametrize("bad", ["joint", "all", None, 1])
def test_interval_covers_refuses_other_values(wine, bad):
    model, X, y, _ = wine
    with pytest.raises(ValueError, match="`interval_covers` must be one of"):
        PriorShiftWrapper(FrozenEstimator(model), interval_covers=bad).fit(X, y)


def test_an_estimate_without_the_all_classes_interval_is_refused_not_passed_off(wine):
    # a path that builds only the per-class interval must not let the per-class one pass as
    # the all-classes one
    model, X, y, X_new = wine
    psw = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(model),
                                           interval_covers="all_classes").fit(X, y))
    res = PriorEstimate(prior=np.full(3, 1 / 3), method="em",
                        interval=np.array([[0.2, 0.5]] * 3))
    with pytest.raises(ValueError, match="interval_covers='all_classes' is not available"):
        psw._finish_adapt(res, res.interval)
    assert not hasattr(psw, "target_prior_interval_")  # nothing was stored
    psw.set_params(interval_covers="each_class")
    _quiet(lambda: psw._finish_adapt(res, res.interval))
    assert psw.target_prior_interval_all_classes_ is None


def test_dask_rows_beyond_the_kept_limit_give_the_in_memory_all_classes_interval(tally_path):
    # more than 20,000 multiclass Dask rows (forced): the class-moment interval from sums taken
    # where the rows live, at both levels, as in memory
    da = pytest.importorskip("dask.array")
    dask = pytest.importorskip("dask")
    X, y = load_digits(return_X_y=True)
    order = np.random.default_rng(1).permutation(y.shape[0])
    model = LogisticRegression(C=1e-3, max_iter=2000).fit(X[order[:500]], y[order[:500]])
    lab, new = order[500:1100], order[1100:1500]
    psw = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(model), random_state=0,
                                           interval_covers="all_classes").fit(X[lab], y[lab]))
    mem = _quiet(lambda: copy.deepcopy(psw).adapt(X[new]))
    with dask.config.set(scheduler="synchronous"):
        dist = _quiet(lambda: copy.deepcopy(psw).adapt(da.from_array(X[new], chunks=(100, 64))))
    assert dist.prior_estimate_.all_shares_interval is not None
    np.testing.assert_allclose(dist.target_prior_interval_all_classes_,
                               mem.target_prior_interval_all_classes_, rtol=0, atol=1e-9)
    np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_all_classes_,
                               rtol=0, atol=1e-9)
    every, each = mem.target_prior_interval_all_classes_, mem.target_prior_interval_each_class_
    assert np.sum(every[:, 1] - every[:, 0]) > 1.1 * np.sum(each[:, 1] - each[:, 0])


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas")
@pytest.mark.filterwarnings("ignore:The copy keyword is deprecated")
def test_spark_rows_give_the_in_memory_all_classes_interval(spark, tally_path):
    # a Spark DataFrame of multiclass rows takes the same reductions as Dask beyond the kept
    # limit (forced): both intervals equal adapt's in memory
    pd = pytest.importorskip("pandas")
    X, y = load_digits(return_X_y=True)
    order = np.random.default_rng(1).permutation(y.shape[0])
    model = LogisticRegression(C=1e-3, max_iter=2000).fit(X[order[:500]], y[order[:500]])
    lab, new = order[500:1100], order[1100:1500]
    psw = _quiet(lambda: PriorShiftWrapper(FrozenEstimator(model), random_state=0,
                                           interval_covers="all_classes").fit(X[lab], y[lab]))
    mem = _quiet(lambda: copy.deepcopy(psw).adapt(X[new]))
    frame = spark.createDataFrame(pd.DataFrame(X[new], columns=[f"x{i}" for i in range(64)]))
    remote = _quiet(lambda: copy.deepcopy(psw).adapt(frame))
    assert remote.prior_estimate_.all_shares_interval is not None
    np.testing.assert_allclose(remote.target_prior_interval_all_classes_,
                               mem.target_prior_interval_all_classes_, rtol=0, atol=1e-6)
    np.testing.assert_allclose(remote.target_prior_interval_each_class_,
                               mem.target_prior_interval_each_class_, rtol=0, atol=1e-6)
