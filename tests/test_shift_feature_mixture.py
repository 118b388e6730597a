"""feature_mixture_misfit: do unlabelled rows' features fit the labelled classes at new shares?

Level on batches drawn by class (prior shift holds by construction), power on a subgroup batch
(breast cancer rows of high texture, which slide both classes' scores alike and pass the score
checks: docs/evidence/prior_shift_log.md, "A level-holding check of the batch's shape"), the rank statistic
against SciPy's Mann-Whitney test, weights and scale, bad input.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import mannwhitneyu
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.neighbors import KNeighborsClassifier

from probwrap import PriorShiftWrapper
from probwrap.shift import (
    FeatureMixtureMisfit,
    FeatureMixtureMisfitWarning,
    feature_mixture_misfit,
)
from probwrap.shift._feature_mix import _weighted_auc

X_BC, Y_BC = load_breast_cancer(return_X_y=True)
TEXTURE = X_BC[:, 1]  # mean texture


def _draw(seed: int, mult: float = 1.0, size: int = 100, subgroup=None):
    """200 labelled rows and a batch from the other rows: by class at ``mult`` times the
    labelled share of benign rows (prior shift holds), or at random from a subgroup."""
    rng = np.random.default_rng(seed)
    idx = rng.permutation(Y_BC.size)
    lab, pool = idx[:200], idx[200:]
    if subgroup is not None:
        return lab, rng.choice(pool[subgroup[pool]], size, replace=False)
    n1 = int(round(min(0.95, Y_BC[lab].mean() * mult) * size))
    batch = np.concatenate([rng.choice(pool[Y_BC[pool] == 1], n1, replace=False),
                            rng.choice(pool[Y_BC[pool] == 0], size - n1, replace=False)])
    return lab, batch


def test_rank_statistic_is_scipys_mann_whitney_with_ties():
    # equal weights: the share of pairs ordered correctly (ties one half) is U / (n1 n2) and the
    # null variance is SciPy's tie-corrected asymptotic one (no continuity correction)
    rng = np.random.default_rng(1)
    a = rng.integers(0, 5, 30).astype(float)
    b = rng.integers(0, 5, 50).astype(float)
    auc, var = _weighted_auc(a, np.ones(30), b, np.ones(50))
    ref = mannwhitneyu(a, b, alternative="greater", method="asymptotic", use_continuity=False)
    assert auc == pytest.approx(ref.statistic / 1500, abs=1e-12)
    from scipy.stats import norm

    assert norm.sf((auc - 0.5) / np.sqrt(var)) == pytest.approx(ref.pvalue, rel=1e-9)
    # whole-number weights on distinct scores count as the rows repeated for the share
    auc_w, _ = _weighted_auc(a[:10], np.arange(1.0, 11.0), b, np.ones(50))
    auc_r, _ = _weighted_auc(np.repeat(a[:10], np.arange(1, 11)), np.ones(55), b, np.ones(50))
    assert auc_w == pytest.approx(auc_r, abs=1e-12)


def test_level_on_batches_drawn_by_class():
    # 120 breast-cancer batches of 100 rows at x0.5, x1 and x1.4 the labelled benign share:
    # prior shift holds, so about 1.2 batches fire at 1 % and 6 at 5 %. Measured 0 and 5.
    # Pooling the two folds as if independent (the variance understated by about half) fired
    # on 5 and 17 (checked); without the class re-weighting on 15 and 39.
    p = []
    for seed in range(40):
        for mult in (0.5, 1.0, 1.4):
            lab, batch = _draw(seed, mult)
            p.append(feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch],
                                            level=None).pvalue)
    p = np.array(p)
    assert (p < 0.01).sum() <= 2
    assert (p < 0.05).sum() <= 9
    assert 0.35 < np.median(p) < 0.75  # not just conservative everywhere


def test_power_on_a_texture_subgroup_the_score_checks_miss():
    # 100-row batches of the rows with mean texture above its 60th percentile: both classes'
    # scores slide alike, so the score checks pass them; the features do not fit any mixture
    flagged = 0
    for seed in range(10):
        lab, batch = _draw(seed, subgroup=TEXTURE > np.quantile(TEXTURE, 0.6))
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch])
        fired = any(issubclass(w.category, FeatureMixtureMisfitWarning) for w in caught)
        assert fired == (res.combined_pvalue < 0.01)  # (session 27: the columns too)
        assert res.auc > 0.6
        flagged += fired
    assert flagged >= 9  # measured 10 of 10 (8 without the squared features)


def test_the_class_reweighting_is_what_keeps_a_change_of_share_quiet():
    # batches at half the benign share: re-weighted to the estimated shares the check is quiet;
    # re-weighted to the labelled shares (no correction) the batch differs in its class mix
    # and the check sees that
    quiet, loud = [], []
    for seed in range(10):
        lab, batch = _draw(seed, 0.5)
        source = np.bincount(Y_BC[lab]) / lab.size
        est = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], level=None)
        assert abs(est.prior[1] - Y_BC[batch].mean()) < 0.05
        np.testing.assert_allclose(est.source_prior, source)
        quiet.append(est.pvalue)
        loud.append(feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], level=None,
                                           prior=source).pvalue)
    assert min(quiet) > 0.1 and np.median(quiet) > 0.4  # measured 0.18, 0.58
    assert np.median(loud) < 0.2 and sum(p < 0.05 for p in loud) >= 3  # measured 0.14, 3


def test_weights_are_relative_and_scale_free_and_features_scale_free():
    lab, batch = _draw(3, subgroup=TEXTURE > np.median(TEXTURE))
    rng = np.random.default_rng(0)
    w_u = rng.uniform(0.5, 2.0, batch.size)
    w_l = rng.uniform(0.5, 2.0, lab.size)
    base = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], sample_weight=w_u,
                                  labelled_sample_weight=w_l, level=None)
    for scale in (1e-3, 1.0 / batch.size, 1e4):
        other = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch],
                                       sample_weight=w_u * scale,
                                       labelled_sample_weight=w_l / scale, level=None)
        assert other.pvalue == pytest.approx(base.pvalue, rel=1e-6, abs=1e-12)
        assert other.auc == pytest.approx(base.auc, rel=1e-9)
    # each feature's unit: standardized first, so unchanged
    units = 10.0 ** rng.integers(-3, 4, X_BC.shape[1])
    moved = feature_mixture_misfit(X_BC[lab] * units, Y_BC[lab], X_BC[batch] * units,
                                   sample_weight=w_u, labelled_sample_weight=w_l, level=None)
    assert moved.pvalue == pytest.approx(base.pvalue, rel=1e-4, abs=1e-10)
    # Kish's counts
    assert base.effective_rows[0] == pytest.approx(w_u.sum() ** 2 / (w_u**2).sum())


def test_weights_are_honoured_rows_of_weight_zero_take_no_part():
    # a batch of 100 rows drawn by class plus 60 other rows whose mean texture is moved up by
    # 8 (about two standard deviations): with the 60 at weight zero the check is quiet, with
    # them at weight one it fires
    for seed in range(3):
        rng = np.random.default_rng(seed)
        lab, batch = _draw(seed, 1.0)
        rest = np.setdiff1d(np.arange(Y_BC.size), np.concatenate([lab, batch]))
        extra = X_BC[rng.choice(rest, 60, replace=False)].copy()
        extra[:, 1] += 8.0
        rows = np.vstack([X_BC[batch], extra])
        w = np.r_[np.ones(batch.size), np.zeros(extra.shape[0])]
        zero = feature_mixture_misfit(X_BC[lab], Y_BC[lab], rows, sample_weight=w,
                                      level=None)
        full = feature_mixture_misfit(X_BC[lab], Y_BC[lab], rows, level=None)
        assert zero.pvalue > 0.05 and full.pvalue < 0.01
        assert zero.effective_rows[0] == pytest.approx(100.0)
        dropped = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], level=None)
        assert zero.pvalue == pytest.approx(dropped.pvalue, rel=1e-5)
        np.testing.assert_allclose(zero.prior, dropped.prior, rtol=1e-5)


def test_prior_from_an_adapted_wrapper_and_an_array():
    lab, batch = _draw(0, 0.5)
    wrapper = PriorShiftWrapper(LogisticRegression(max_iter=5000), random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.fit(X_BC[lab], Y_BC[lab]).adapt(X_BC[batch])
    res = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], prior=wrapper)
    expected = wrapper.prior_estimate_.ml_prior
    np.testing.assert_allclose(res.prior, expected if expected is not None
                               else wrapper.target_prior_)
    assert isinstance(res, FeatureMixtureMisfit) and res.pvalue > 0.05
    same = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], prior=res.prior)
    assert same.pvalue == pytest.approx(res.pvalue, rel=1e-12)
    with pytest.raises(ValueError, match="call adapt"):
        feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch],
                               prior=PriorShiftWrapper(LogisticRegression()).fit(
                                   X_BC[lab][:, :3], Y_BC[lab]))


def test_three_classes_wine():
    X, y = load_wine(return_X_y=True)
    p_by_class, p_sub = [], []
    for seed in range(10):
        rng = np.random.default_rng(seed)
        idx = rng.permutation(y.size)
        lab, pool = idx[:100], idx[100:]
        counts = (20, 10, 10)  # class 0 at about 0.5 (labelled about 0.33)
        batch = np.concatenate([rng.choice(pool[y[pool] == c], m, replace=False)
                                for c, m in enumerate(counts)])
        res = feature_mixture_misfit(X[lab], y[lab], X[batch], level=None)
        assert res.prior.shape == (3,) and res.classes.tolist() == [0, 1, 2]
        p_by_class.append(res.pvalue)
        alcohol = X[pool, 0]
        sub = pool[alcohol > np.median(alcohol)]
        p_sub.append(feature_mixture_misfit(X[lab], y[lab], X[sub], level=None).pvalue)
    assert min(p_by_class) > 0.01
    assert np.median(p_sub) < np.median(p_by_class)


def test_quiet_without_level_and_a_custom_discriminator():
    lab, batch = _draw(1, subgroup=TEXTURE > np.quantile(TEXTURE, 0.6))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = feature_mixture_misfit(X_BC[lab], Y_BC[lab], X_BC[batch], level=None)
    assert not any(issubclass(w.category, FeatureMixtureMisfitWarning) for w in caught)
    assert res.pvalue < 0.01 and res.folds == 2
    from sklearn.ensemble import RandomForestClassifier

    forest = feature_mixture_misfit(
        X_BC[lab], Y_BC[lab], X_BC[batch], level=None,
        discriminator=RandomForestClassifier(n_estimators=50, random_state=0))
    assert forest.auc > 0.6


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        (dict(X_unlabelled=X_BC[:50, :5]), ValueError, "X_unlabelled` has 5 features"),
        (dict(X_labelled=X_BC[:100, 0]), ValueError, "X_labelled` must be 2-D"),
        (dict(X_unlabelled=np.where(np.eye(50, 30) > 0, np.nan, X_BC[:50])), ValueError,
         "missing or infinite"),
        (dict(y_labelled=Y_BC[:99]), ValueError, "one label per row"),
        (dict(y_labelled=np.ones(100)), ValueError, "at least two classes"),
        (dict(sample_weight=-np.ones(50)), ValueError, "`sample_weight` must be finite"),
        (dict(labelled_sample_weight=np.ones(3)), ValueError, "labelled_sample_weight"),
        (dict(prior=[0.5, 0.3]), ValueError, "`prior` must be 2"),
        (dict(prior=[0.2, 0.3, 0.5]), ValueError, "`prior` must be 2"),
        (dict(folds=1), ValueError, "`folds` must be an integer"),
        (dict(folds=60), ValueError, "`folds` \\(60\\) exceeds"),
        (dict(level=1.5), ValueError, "`level`"),
        (dict(discriminator=KNeighborsClassifier()), TypeError, "`discriminator`"),
        (dict(X_labelled=[["a"] * 30] * 100), ValueError, "`X_labelled` must be a numeric"),
    ],
)
def test_bad_input_names_the_argument(kwargs, error, match):
    args = dict(X_labelled=X_BC[:100], y_labelled=Y_BC[:100], X_unlabelled=X_BC[100:150])
    args.update(kwargs)
    X_l, y_l, X_u = args.pop("X_labelled"), args.pop("y_labelled"), args.pop("X_unlabelled")
    before = X_BC.copy()
    with pytest.raises(error, match=match):
        feature_mixture_misfit(X_l, y_l, X_u, **args)
    np.testing.assert_array_equal(X_BC, before)
