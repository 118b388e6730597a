"""``probwrap prevalence --batch-column``: a batch label that is a word for a missing value.

Before (session 28): the batch column is read as written, so "NA" (or "NaN", "null", "#N/A",
a blank cell of spaces) became a batch of its own without a word; among weekly batches 1-4 of
100 rows, three rows marked "NA" made a fifth batch of 3 rows wedged into the alarm's series
after week 1 (and its rows stopped the out-of-order check, which needs every label to be a
number or a date). An empty cell was refused naming only its first row.

Now: an empty or blank cell is refused, the rows counted and the first named; a missing-value
word among labels that are numbers or dates is refused the same way; among words (sites,
regions: "NA" may be North America) it stays a batch, as written, with a warning counting its
rows (docs/command_line.md).

Scores: 5-fold cross-validated logistic regression on scikit-learn's bundled breast cancer
data (``cross_val_predict``).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def scores():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
    return cross_val_predict(model, X, y, cv=5, method="predict_proba")[:400, 1]


def _run(capsys, path, column, *extra):
    code = main(["prevalence", "--unlabelled", str(path), "--score-column", "score",
                 "--source-prevalence", "0.63", "--resamples", "20", "--batch-column", column,
                 *extra])
    out, err = capsys.readouterr()
    return code, out, err


def test_na_among_numbered_batches_is_refused_with_its_row_count(scores, tmp_path, capsys):
    week = np.repeat([1, 2, 3, 4], 100).astype(object)
    week[[5, 150]] = "NA"
    week[151] = "null"
    pd.DataFrame({"score": scores, "week": week}).to_csv(tmp_path / "w.csv", index=False)
    code, out, err = _run(capsys, tmp_path / "w.csv", "week")
    assert code == 1 and out == ""  # was 0, with a batch "NA" of 2 rows and "null" of 1
    assert ("column 'week' (--batch-column): 3 row(s) have the batch label 'NA', 'null', a "
            "word for a missing value, among labels that are numbers, first at row 7 "
            "(counting the header as row 1)") in err


def test_nan_among_dated_batches_is_refused(scores, tmp_path, capsys):
    day = np.repeat(["2026-11-02", "2026-11-09", "2026-11-16", "2026-11-23"], 100).astype(object)
    day[399] = "NaN"
    pd.DataFrame({"score": scores, "day": day}).to_csv(tmp_path / "d.csv", index=False)
    code, _, err = _run(capsys, tmp_path / "d.csv", "day")
    assert code == 1
    assert ("1 row(s) have the batch label 'NaN', a word for a missing value, among labels "
            "that are dates, first at row 401") in err


def test_na_among_named_batches_is_kept_with_a_warning(scores, tmp_path, capsys):
    site = np.repeat(["north", "south", "NA", "east"], 100)
    pd.DataFrame({"score": scores, "site": site}).to_csv(tmp_path / "s.csv", index=False)
    code, out, err = _run(capsys, tmp_path / "s.csv", "site", "--format", "json")
    assert code == 0, err
    batches = json.loads(out)["batches"]
    assert [(b["batch"], b["n_rows"]) for b in batches] == [
        ("north", 100), ("south", 100), ("NA", 100), ("east", 100)]
    warnings = [line for line in err.splitlines() if "warning" in line]
    assert len(warnings) == 1  # was none
    assert ("column 'site' (--batch-column): 100 row(s) have the batch label 'NA', also a word "
            "for a missing value (first at row 202 (counting the header as row 1)); they are "
            "read as a batch of that name, as written") in warnings[0]


def test_empty_and_blank_cells_are_counted(scores, tmp_path, capsys):
    week = np.repeat([1, 2, 3, 4], 100).astype(object)
    week[[5, 6]] = ""
    week[200] = "   "  # was a batch "   " of one row
    pd.DataFrame({"score": scores, "week": week}).to_csv(tmp_path / "b.csv", index=False)
    code, _, err = _run(capsys, tmp_path / "b.csv", "week")
    assert code == 1
    assert ("column 'week' (--batch-column): 3 row(s) have no batch label (empty cell), first "
            "at row 7 (counting the header as row 1)") in err
