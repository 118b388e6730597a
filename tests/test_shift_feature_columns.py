"""feature_mixture_misfit names the columns that differ (session 27).

Per column: the weighted Kolmogorov-Smirnov distance between the new rows and the labelled rows
re-weighted to the class shares, against SciPy's ``ks_2samp``; Holm's correction against
statsmodels' ``multipletests``; the rank share against SciPy's ``mannwhitneyu``; the level under
pure prior shift (batches drawn by class from breast cancer) and the power on a subgroup batch.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import ks_2samp, mannwhitneyu
from sklearn.datasets import load_breast_cancer

from probwrap.shift import FeatureMixtureMisfitWarning, feature_mixture_misfit
from probwrap.shift._feature_mix import _holm, _weighted_ks

BC = load_breast_cancer(as_frame=True)
X_BC, Y_BC = BC.data, BC.target.to_numpy()
A_BC = X_BC.to_numpy()
TEXTURE = A_BC[:, 1]


def _draw(seed: int, mult: float = 1.0, size: int = 100, subgroup=None):
    rng = np.random.default_rng(seed)
    idx = rng.permutation(Y_BC.size)
    lab, pool = idx[:200], idx[200:]
    if subgroup is not None:
        return lab, rng.choice(pool[subgroup[pool]], size, replace=False)
    n1 = int(round(min(0.95, Y_BC[lab].mean() * mult) * size))
    batch = np.concatenate([rng.choice(pool[Y_BC[pool] == 1], n1, replace=False),
                            rng.choice(pool[Y_BC[pool] == 0], size - n1, replace=False)])
    return lab, batch


def test_column_distance_and_pvalue_are_scipys_ks_2samp():
    # equal weights: the two-sample Kolmogorov-Smirnov distance and Smirnov's asymptotic
    # two-sided p-value, ties included (SciPy evaluates both ECDFs at every observed value)
    rng = np.random.default_rng(4)
    for n_u, n_l, ties in ((40, 70, True), (120, 90, False), (33, 300, True)):
        a = rng.normal(0.3, 1.0, n_u)
        b = rng.normal(0.0, 1.2, n_l)
        if ties:
            a, b = np.round(a, 1), np.round(b, 1)
        d, p = _weighted_ks(a, np.ones(n_u), b, np.ones(n_l))
        ref = ks_2samp(a, b, method="asymp")
        assert d == pytest.approx(ref.statistic, abs=1e-12)
        assert p == pytest.approx(ref.pvalue, rel=1e-9)
    # whole-number weights give the distance of the rows repeated; scaling them changes nothing
    w = rng.integers(1, 4, 40).astype(float)
    a, b = rng.normal(size=40), rng.normal(size=60)
    d_w, _ = _weighted_ks(a, w, b, np.ones(60))
    d_r = ks_2samp(np.repeat(a, w.astype(int)), b).statistic
    assert d_w == pytest.approx(d_r, abs=1e-12)
    assert _weighted_ks(a, w * 1e-3, b, np.ones(60) * 7)[1] == pytest.approx(
        _weighted_ks(a, w, b, np.ones(60))[1], rel=1e-12)


def test_holm_matches_statsmodels_and_the_1979_step_down():
    multitest = pytest.importorskip("statsmodels.stats.multitest")
    rng = np.random.default_rng(0)
    for m in (1, 2, 7, 30):
        p = rng.uniform(0, 0.2, m) ** 2
        p[: m // 3] = p[0]  # ties
        ref = multitest.multipletests(p, method="holm")[1]
        np.testing.assert_allclose(_holm(p), ref, rtol=1e-12)
    # Holm (1979): sorted p_(1) <= ... <= p_(m) are compared with level / (m - i + 1); with
    # p = (0.01, 0.04, 0.03, 0.005) the adjusted values are 4 * 0.005, 3 * 0.01, then
    # max(0.03 * 2, 0.03) = 0.06 and max(0.04, 0.06) = 0.06
    np.testing.assert_allclose(_holm([0.01, 0.04, 0.03, 0.005]), [0.03, 0.06, 0.06, 0.02])


def test_columns_with_unit_weights_match_scipy_end_to_end():
    # prior equal to the labelled shares: every re-weighting factor is 1, so each column's
    # numbers are SciPy's two-sample tests of the raw columns
    lab, batch = _draw(2, subgroup=TEXTURE > np.median(TEXTURE))
    source = np.bincount(Y_BC[lab]) / lab.size
    res = feature_mixture_misfit(X_BC.iloc[lab], Y_BC[lab], X_BC.iloc[batch], prior=source,
                                 level=None)
    assert res.feature_names == tuple(BC.feature_names)
    for j in (0, 1, 7, 21):
        a, b = A_BC[batch, j], A_BC[lab, j]
        ks = ks_2samp(a, b, method="asymp")
        assert res.column_distance[j] == pytest.approx(ks.statistic, abs=1e-12)
        assert res.column_pvalue[j] == pytest.approx(ks.pvalue, rel=1e-9)
        u = mannwhitneyu(a, b).statistic
        assert res.column_rank_share[j] == pytest.approx(u / (a.size * b.size), abs=1e-12)
        assert res.column_mean_shift[j] == pytest.approx((a.mean() - b.mean()) / b.std(),
                                                         rel=1e-9)
    np.testing.assert_allclose(res.column_pvalue_holm, _holm(res.column_pvalue))


def test_the_class_reweighting_keeps_columns_quiet_under_pure_prior_shift():
    # 60 batches of 100 rows drawn by class at x0.5, x1, x1.4 the labelled benign share: prior
    # shift holds, so a column is flagged at 1 % (Holm over 30 columns) in at most about 1 %
    # of batches, and the raw per-column p-values fall below 5 % about 5 % of the time.
    # Measured: 0 batches flagged, 3.0 % of raw p below 5 %. Against the labelled shares
    # (no re-weighting) the x0.5 batches differ in the class-related columns: 19 of 20 flagged.
    flagged, raw5, plain = 0, [], 0
    for seed in range(20):
        for mult in (0.5, 1.0, 1.4):
            lab, batch = _draw(seed, mult)
            res = feature_mixture_misfit(A_BC[lab], Y_BC[lab], A_BC[batch], level=None)
            flagged += len(res.flagged_columns) > 0
            raw5.append(np.mean(res.column_pvalue < 0.05))
            if mult == 0.5:
                src = np.bincount(Y_BC[lab]) / lab.size
                plain += len(feature_mixture_misfit(A_BC[lab], Y_BC[lab], A_BC[batch],
                                                    prior=src, level=None).flagged_columns) > 0
    assert flagged <= 2
    assert 0.01 < np.mean(raw5) < 0.08
    assert plain >= 18


def test_a_texture_subgroup_is_named_by_its_column():
    # batches from the rows of mean texture above its 60th percentile: the column that defines
    # the subgroup is flagged and named first, the new rows higher; names from the DataFrame
    first = 0
    for seed in range(10):
        lab, batch = _draw(seed, subgroup=TEXTURE > np.quantile(TEXTURE, 0.6))
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = feature_mixture_misfit(X_BC.iloc[lab], Y_BC[lab], X_BC.iloc[batch])
        j = BC.feature_names.tolist().index("mean texture")
        assert "mean texture" in res.flagged_columns
        assert res.column_rank_share[j] > 0.65 and res.column_mean_shift[j] > 0.5
        first += res.flagged_columns[0] == "mean texture"
        messages = [str(w.message) for w in caught
                    if issubclass(w.category, FeatureMixtureMisfitWarning)]
        if res.combined_pvalue < 0.01:
            assert len(messages) == 1 and "mean texture (new rows higher" in messages[0]
    assert first >= 9  # measured 10 of 10


def test_names_from_arrays_and_feature_names_and_mismatches():
    lab, batch = _draw(1, subgroup=TEXTURE > np.quantile(TEXTURE, 0.6))
    res = feature_mixture_misfit(A_BC[lab][:, :3], Y_BC[lab], A_BC[batch][:, :3], level=None)
    assert res.feature_names == ("x0", "x1", "x2") and res.flagged_columns[0] == "x1"
    named = feature_mixture_misfit(A_BC[lab][:, :3], Y_BC[lab], A_BC[batch][:, :3],
                                   level=None, feature_names=["r", "t", "p"])
    assert named.flagged_columns[0] == "t" and "t (new rows higher" in named.describe_columns(1)
    with pytest.raises(ValueError, match="`feature_names` must name each of the 3"):
        feature_mixture_misfit(A_BC[lab][:, :3], Y_BC[lab], A_BC[batch][:, :3],
                               feature_names=["a"])
    other = X_BC.iloc[batch, :3].rename(columns={"mean radius": "radius"})
    with pytest.raises(ValueError, match="columns differ"):
        feature_mixture_misfit(X_BC.iloc[lab, :3], Y_BC[lab], other)


def test_no_column_alone_is_said_plainly():
    # labelled rows along the diagonal, new rows along the other one: each column keeps its
    # distribution, only how the two combine differs. A forest tells the sides apart, no column
    # alone does, and the message says so
    from sklearn.ensemble import RandomForestClassifier

    rng = np.random.default_rng(0)
    y = rng.integers(0, 2, 600)
    z = rng.normal(size=600)
    X = np.column_stack([z + rng.normal(0, 0.2, 600), z + rng.normal(0, 0.2, 600)])
    z_new = rng.normal(size=600)
    X_new = np.column_stack([z_new + rng.normal(0, 0.2, 600), -z_new + rng.normal(0, 0.2, 600)])
    forest = RandomForestClassifier(n_estimators=50, min_samples_leaf=5, random_state=0)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = feature_mixture_misfit(X, y, X_new, prior=[0.5, 0.5], discriminator=forest)
    assert res.flagged_columns == ()  # (Holm p of the two: 0.09, 0.017)
    messages = [str(w.message) for w in caught
                if issubclass(w.category, FeatureMixtureMisfitWarning)]
    assert res.pvalue < 1e-6 and len(messages) == 1
    assert "No single column differs at 0.01" in messages[0]
