"""The feature check says when it could hardly have seen anything (FeatureCheckPowerWarning).

On few labelled rows of the class the estimated shares lean on, the labelled side re-weighted
to those shares counts as a handful of rows (Kish 1965), and the check's large p-value is no
evidence that the features fit (AER's HMDA on 100 labelled rows, 9 denied, gave p = 1.0:
docs/evidence/prior_shift_log.md, "The feature check's power on few labelled rows").
Breast cancer rows from scikit-learn; the expected effective counts and power are computed
here from the published formulas, not read back from the code.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.stats import norm
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import (
    FeatureCheckPowerWarning,
    FeatureMixtureMisfitWarning,
    feature_mixture_misfit,
)

BC = load_breast_cancer(as_frame=True)
X_BC, Y_BC = BC.data, BC.target.to_numpy()  # 1: benign (357 rows), 0: malignant (212)


def _rows(n0, n1, seed=0, avoid=()):
    rng = np.random.default_rng(seed)
    free = np.setdiff1d(np.arange(Y_BC.size), np.asarray(avoid, int))
    return np.concatenate([rng.choice(free[Y_BC[free] == 0], n0, replace=False),
                           rng.choice(free[Y_BC[free] == 1], n1, replace=False)])


def _caught(fn, *args, **kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn(*args, **kw)
    return out, [w.category for w in caught]


def _noether_power(n_u, n_l, level=0.01, d=0.5):
    # one-sided rank test at level/2 (the check's Bonferroni share) against the ideal AUC of a
    # slide of d standard deviations of one normal column, Phi(d / sqrt 2) (binormal AUC), on
    # the Mann-Whitney AUC's null variance (1/n_u + 1/n_l)/12 (Noether 1987, JASA 82, 645-647)
    return norm.cdf((norm.cdf(d / np.sqrt(2)) - 0.5) / np.sqrt((1 / n_u + 1 / n_l) / 12)
                    - norm.ppf(1 - level / 2))


def test_shares_leaning_on_nine_rows_say_the_check_has_no_power():
    lab = _rows(91, 9)
    new = np.setdiff1d(np.arange(Y_BC.size), lab)
    cols = list(X_BC.columns[:5])
    res, cats = _caught(feature_mixture_misfit, X_BC.iloc[lab][cols], Y_BC[lab],
                        X_BC.iloc[new][cols], prior=[0.03, 0.97])
    # Kish (1965): equal weights within a class, class c carrying share p_c on n_c rows,
    # n_eff = 1 / sum_c p_c^2 / n_c = 9.56 here
    kish = 1.0 / (0.03**2 / 91 + 0.97**2 / 9)
    np.testing.assert_allclose(res.effective_rows, (new.size, kish), rtol=1e-12)
    np.testing.assert_allclose(res.power, _noether_power(new.size, kish), rtol=1e-12)
    assert 0.10 < res.power < 0.16  # about 0.13: a half-SD slide missed seven times in eight
    assert res.combined_pvalue >= 0.01  # nothing found ...
    assert FeatureCheckPowerWarning in cats and FeatureMixtureMisfitWarning not in cats
    # ... and the result says why that is no evidence
    assert "9.6 effective labelled rows" in res.power_note
    assert "class 1 carries 97% of the weight on 9 labelled row(s)" in res.power_note


def test_enough_rows_keep_the_result_and_say_nothing_more():
    lab = _rows(80, 120)
    new = _rows(60, 140, seed=1, avoid=lab)  # drawn by class: prior shift holds
    cols = list(X_BC.columns[:5])
    res, cats = _caught(feature_mixture_misfit, X_BC.iloc[lab][cols], Y_BC[lab],
                        X_BC.iloc[new][cols], prior=[0.3, 0.7])
    kish = 1.0 / (0.3**2 / 80 + 0.7**2 / 120)
    np.testing.assert_allclose(res.effective_rows[1], kish, rtol=1e-12)
    assert res.power > 0.9 and res.power_note == ""
    assert FeatureCheckPowerWarning not in cats


def _frozen_wrapper(lab):
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    fit_rows = _rows(60, 60, seed=5, avoid=lab)
    model.fit(X_BC.iloc[fit_rows], Y_BC[fit_rows])
    wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=0, feature_check_rows=2000)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.fit(X_BC.iloc[lab], Y_BC[lab])
    return wrapper, fit_rows


def test_adapt_and_monitor_warn_where_the_estimate_leans_on_few_rows():
    lab = _rows(91, 9, seed=2)
    wrapper, fit_rows = _frozen_wrapper(lab)
    used = np.concatenate([lab, fit_rows])
    batch = _rows(5, 150, seed=3, avoid=used)  # nearly all benign: the shares lean on 9 rows
    _, cats = _caught(wrapper.adapt, X_BC.iloc[batch])
    res = wrapper.feature_check_
    assert wrapper.prior_estimate_.ml_prior[1] > 0.9
    assert res.power < 0.5 and res.effective_rows[1] < 15
    assert FeatureCheckPowerWarning in cats and FeatureMixtureMisfitWarning not in cats
    # the same labelled rows, a batch at about their own shares: enough rows, no warning
    even = _rows(60, 6, seed=4, avoid=used)
    _, cats = _caught(wrapper.adapt, X_BC.iloc[even])
    assert wrapper.feature_check_.power > 0.5 and FeatureCheckPowerWarning not in cats
    # monitor: one warning naming the low-power batch only
    rows = np.concatenate([batch, even])
    table, caught = _caught(wrapper.monitor, X_BC.iloc[rows],
                            batches=np.repeat(["lean", "even"], [batch.size, even.size]))
    assert caught.count(FeatureCheckPowerWarning) == 1
    lean = table[table["batch"] == "lean"][0]["feature_check"]
    assert lean.power < 0.5 and lean.power_note
    assert table[table["batch"] == "even"][0]["feature_check"].power_note == ""


def test_imprecise_after_a_firm_shift_test_says_the_move_may_be_wrong():
    # one weak feature, 60 labelled rows, a batch of 170 malignant and 30 benign rows: the shift
    # test rejects firmly (p about 0.001) and the move is made on a wide interval (seed 0), or
    # the test does not reject and nothing moves (seed 2: p about 0.25). Only the first is told
    # that the scores moving need not mean the share moved.
    from probwrap.shift import ImprecisePriorWarning

    said = {}
    for seed in (0, 2):
        rng = np.random.default_rng(seed)
        idx = rng.permutation(Y_BC.size)
        lab, pool = idx[:60], idx[60:]
        X = X_BC[["mean smoothness"]]
        wrapper = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression()),
                                    random_state=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wrapper.fit(X.iloc[lab], Y_BC[lab])
        batch = np.concatenate([pool[Y_BC[pool] == 0][:170], pool[Y_BC[pool] == 1][:30]])
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            wrapper.adapt(X.iloc[batch])
        msgs = [str(w.message) for w in caught if w.category is ImprecisePriorWarning]
        assert len(msgs) == 1
        firm = wrapper.shift_pvalue_ < 0.01 and wrapper.adaptation_weight_ > 0
        assert ("says the scores moved, not why" in msgs[0]) == firm
        said[seed] = firm
    assert said == {0: True, 2: False}
