"""The HTML report marks the batches whose estimate was kept near the source share for lack of
rows, as ``probwrap prevalence`` marks them ("held (rows alone x)"): the same batches, the same
rows-alone estimates, in the binary report's batch table and in the multiclass report's class
shares by batch, with a note saying what the mark means.

Before 5 December 2026 the binary report had no batch table (the figure only) and the
multiclass table showed the estimate held near the source share bare, while the command line
said it was held. Data: scikit-learn's bundled breast cancer set with 5-fold cross-validated
logistic regression scores (as tests/test_cli_prevalence_small_batches.py: a reference drawn at
prevalence 0.30, unlabelled rows at about 0.62) and invented three-outcome parcels. Outside
reference: the rows-alone estimate of a batch by SciPy's root finder on the EM score equation
(Saerens, Latinne & Decaestecker 2002, eq. 2.9-2.10) on the batch's recalibrated posteriors.
"""

from __future__ import annotations

import json
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import brentq
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main
from probwrap.datasets import make_parcels
from probwrap.report import build_report
from probwrap.shift._by_batch import held_near_source

MARK = re.compile(r"kept near source \(rows alone ([01]\.\d{4})\)")


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
    p = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
    rng = np.random.default_rng(0)
    neg, pos = rng.permutation(np.flatnonzero(y == 0)), rng.permutation(np.flatnonzero(y == 1))
    ref = rng.permutation(np.r_[neg[:120], pos[:51]])  # prevalence 0.298
    unl = rng.permutation(np.r_[neg[120:], pos[51:200]])  # 92 + 149 rows: prevalence 0.618
    return p, y, ref, unl


def _rows(page, table_id):
    table = re.search(rf'<table id="{table_id}">.*?</table>', page, re.S).group(0)
    return re.findall(r'<tr data-item="batch:([^"]*)" data-held="(\d)">(.*?)</tr>', table, re.S)


def _report(**kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return build_report(**kw)


@pytest.mark.parametrize("size", [20, 171])
def test_binary_table_marks_the_batches_the_command_line_holds(cancer, tmp_path, capsys, size):
    p, y, ref, unl = cancer
    if size == 171:  # a first batch of all the reference rows: no shift, nothing held back
        unl = np.r_[ref, unl]
    content, page = _report(y_true=y[ref], y_prob=p[ref], unlabelled_prob=p[unl],
                            batch_size=size, n_resamples=30, random_state=0)
    pd.DataFrame({"score": p[ref], "label": y[ref]}).to_csv(tmp_path / "ref.csv", index=False)
    pd.DataFrame({"score": p[unl]}).to_csv(tmp_path / "unl.csv", index=False)
    assert main(["prevalence", "--unlabelled", str(tmp_path / "unl.csv"), "--score-column",
                 "score", "--reference", str(tmp_path / "ref.csv"), "--label-column", "label",
                 "--positive-label", "1", "--batch-size", str(size), "--resamples", "30",
                 "--format", "json"]) == 0
    cli = json.loads(capsys.readouterr().out)["batches"]
    rows = _rows(page, "prevalence-batches")  # before: no such table
    assert len(rows) == len(cli) == content.batch_table.shape[0]
    held = [r[1] == "1" for r in rows]
    assert held == [b["held_toward_source"] for b in cli]
    assert held == held_near_source(content.batch_table)[:, 1].tolist()
    marked = [MARK.search(r[2]) for r in rows]
    assert [m is not None for m in marked] == held
    for m, b in zip(marked, cli, strict=True):
        if m is not None:  # the rows alone as the command line gives them
            assert float(m.group(1)) == pytest.approx(b["ml_prevalence"], abs=5.1e-5)
    if size == 20:
        assert all(held)  # 20 rows: every batch held (13 of 13, as the command line says)
        assert 'id="prevalence-batches-held" data-held-batches="13"' in page
        # the outside reference: the first batch's rows alone by the EM score equation
        est = content.batch_table
        q = _calibrated(p[ref], y[ref], p[unl][:20])
        assert est["ml_prior"][0, 1] == pytest.approx(_ml_root(q, y[ref].mean()), abs=1e-5)
    else:
        # the batch of reference rows is not held (its rows alone sit at the source share);
        # the shifted ones are, pulled by up to 20 pseudo-rows against 171 and 70 rows
        assert held == [False, True, True]
        assert 'data-held-batches="2"' in page


def _calibrated(ref_p, ref_y, p):
    from probwrap.shift import PriorEstimator

    est = PriorEstimator(n_resamples=0).fit(np.column_stack([1 - ref_p, ref_p]), ref_y)
    return est.calibrate(np.column_stack([1 - p, p]))


def _ml_root(q, src1):
    src = np.array([1 - src1, src1])

    def score(t):
        r = q * (np.array([1 - t, t]) / src)
        r /= r.sum(axis=1, keepdims=True)
        return float(np.sum(r[:, 1] / t - r[:, 0] / (1 - t)))

    return brentq(score, 1e-6, 1 - 1e-6)


def test_multiclass_table_marks_held_class_shares():
    lab = make_parcels(900, n_outcomes=3, random_state=3)
    winter = make_parcels(300, n_outcomes=3, season="winter", random_state=51)
    back = winter.true_proba * (lab.source_prior / winter.prior)
    q = back / back.sum(axis=1, keepdims=True)
    content, page = _report(y_true=lab.target, y_prob=lab.true_proba, unlabelled_prob=q,
                            batch_size=15, n_resamples=20, random_state=0)
    table = content.batch_table
    held = held_near_source(table)
    assert held.any()
    rows = _rows(page, "class-batches")
    assert len(rows) == table.shape[0]
    for i, (_, flag, cells) in enumerate(rows):
        assert flag == str(int(held[i].any()))
        shares = re.findall(r'<td data-value="[^"]*">([^<]*)</td>', cells)[:3]
        for j, text in enumerate(shares):
            m = MARK.search(text)
            assert (m is not None) == bool(held[i, j])  # before: no mark at all
            if m is not None:
                assert float(m.group(1)) == pytest.approx(table["ml_prior"][i, j], abs=5.1e-5)
    assert 'id="class-batches-held"' in page
