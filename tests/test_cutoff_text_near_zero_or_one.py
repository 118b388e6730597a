"""Cutoffs within 1e-4 of 0 or 1 keep their digits in the command line's and report's text.

Found on vega_datasets' airports (in Alaska, from latitude and longitude; capacity 5 %): the
least-cost cutoff 0.9999999981 was printed ``cutoff 1 (act when score > cutoff)`` by
``probwrap cutoff`` and "act when the probability exceeds 1.0000" on the report, a rule that
acts on no row. The tests use scikit-learn's bundled breast-cancer set (Wolberg, Street &
Mangasarian 1995), where a flexible logistic regression puts 209 of 569 cross-validated
probabilities above 1 - 1e-6.
"""
from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main


@pytest.fixture(scope="module")
def scores_file(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=100, max_iter=5000))
    p = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
    path = tmp_path_factory.mktemp("cut") / "bc.csv"
    pd.DataFrame({"p": p, "y": y}).to_csv(path, index=False)
    return path, p


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out


@pytest.mark.parametrize("capacity", [0.05, 0.2])
def test_cutoff_verb_prints_a_rule_that_acts_on_the_rows(capsys, scores_file, capacity):
    path, p = scores_file
    args = ["cutoff", "--scores", path, "--score-column", "p", "--label-column", "y",
            "--cost-fp", 1, "--cost-fn", 20, "--capacity", capacity]
    exact = json.loads(run(capsys, *args, "--format", "json"))["cutoff"]
    assert 1 - 1e-6 < exact < 1  # the case: a cutoff that 6 significant digits show as 1
    text = run(capsys, *args)
    printed = float(re.search(r"^  cutoff\s+(\S+)", text, re.M).group(1))
    assert printed < 1  # was "1": "act when score > 1" acts on no row
    # the printed rule acts on the same rows as the exact one (counted directly on the scores)
    assert np.sum(p > printed) == np.sum(p > exact)
    assert 0 < np.mean(p > printed) <= capacity
    low, high = re.search(r"interval\s+\[(\S+), (\S+)\]", text).groups()
    assert float(low) < 1 and float(high) < 1


def test_report_page_and_summary_keep_the_digits(capsys, scores_file, tmp_path):
    path, p = scores_file
    out = tmp_path / "r.html"
    line = run(capsys, "report", "--scores", path, "--score-column", "p", "--label-column",
               "y", "--cost-fp", 1, "--cost-fn", 20, "--capacity", 0.05, "--resamples", 20,
               "--out", out)
    page = out.read_text()
    m = re.search(r'id="recommended-cutoff" data-value="([^"]+)">([^<]+)<', page)
    exact, shown = float(m.group(1)), m.group(2)
    assert 1 - 1e-6 < exact < 1
    assert shown != "1.0000" and float(shown) < 1
    assert np.sum(p > float(shown)) == np.sum(p > exact)
    # the cost figure's legend names the cutoff too (it read "... on these rows 1.000")
    legends = re.findall(r"least-cost cutoff on these rows (\d\.\d+)", page)
    assert legends and all(float(v) < 1 for v in legends), legends
    summary = re.search(r"cutoff (\d\.\d+)", line).group(1)
    assert summary != "1.0000" and float(summary) < 1


def test_cutoff_text_rule():
    from probwrap._validation import cutoff_text

    # ordinary numbers are formatted as asked; only a text that reads as 0 or 1 gets digits
    assert cutoff_text(0.31, ".4f") == "0.3100"
    assert cutoff_text(34.0167) == "34.0167"  # log-odds are not probabilities: untouched
    assert cutoff_text(1.0, ".4f") == "1.0000" and cutoff_text(0.0) == "0"
    assert cutoff_text(0.9999999980881329) == "0.9999999981"
    assert cutoff_text(2.04e-5, ".4f") == "0.000020"
    assert cutoff_text(5e-324, ".4f") == "4.9e-324"
