"""``probwrap report --class-columns ... --weight-column W``: the multiclass report weighted.

It was refused ("binary score files only") although the report's multiclass form takes
``sample_weight``. Data: scikit-learn's bundled wine set (3 cultivars, 178 rows), 5-fold
cross-validated probabilities of a logistic regression; weights 1-3 (row number mod 3, plus
1), whole numbers, so the weighted file must give what the file with each row repeated that
often gives (the frequency-weight contract, docs/weights.md), and scikit-learn's weighted
log loss.
"""
from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main

COSTS = "0,4,9;6,0,9;12,12,0"


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def wine():
    X, y = load_wine(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=5000))
    P = cross_val_predict(model, X, y, cv=5, method="predict_proba")
    frame = pd.DataFrame(P, columns=["a", "b", "c"])
    frame["cultivar"] = np.array(["a", "b", "c"])[y]
    frame["w"] = np.arange(len(y)) % 3 + 1
    return frame


def _report(capsys, path, out, *extra):
    code = main(["report", "--scores", str(path), "--class-columns", "a,b,c", "--label-column",
                 "cultivar", "--cost-matrix", COSTS, "--resamples", "20", "--out", str(out),
                 "--format", "json", *extra])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return json.loads(captured.out), out.read_text()


def test_weighted_multiclass_report_equals_the_repeated_rows(wine, tmp_path, capsys):
    wine.to_csv(tmp_path / "w.csv", index=False, float_format="%.17g")
    repeated = wine.loc[wine.index.repeat(wine.w)].drop(columns="w")
    repeated.to_csv(tmp_path / "r.csv", index=False, float_format="%.17g")
    weighted, page_w = _report(capsys, tmp_path / "w.csv", tmp_path / "w.html",
                               "--weight-column", "w")
    copies, page_r = _report(capsys, tmp_path / "r.csv", tmp_path / "r.html")
    assert weighted["weights"]["sum"] == float(wine.w.sum())
    assert weighted["mean_cost_rule_in_use"] == pytest.approx(
        copies["mean_cost_rule_in_use"], rel=1e-12)
    # the Bayes actions' weighted mean cost, by hand
    matrix = np.array([[float(v) for v in row.split(",")] for row in COSTS.split(";")])
    P = wine[["a", "b", "c"]].to_numpy()
    y = wine.cultivar.map({"a": 0, "b": 1, "c": 2}).to_numpy()
    act = np.argmin(P @ matrix, axis=1)
    assert weighted["mean_cost_rule_in_use"] == pytest.approx(
        np.average(matrix[y, act], weights=wine.w), rel=1e-12)
    # the page's multiclass log loss: scikit-learn's weighted log loss
    expected = log_loss(y, P, sample_weight=wine.w)
    shown = re.search(r"log loss \(multiclass\)</td><td[^>]*>([0-9.]+)", page_w)
    assert shown is not None
    assert float(shown.group(1)) == pytest.approx(expected, abs=6e-4)
    assert float(re.search(r"log loss \(multiclass\)</td><td[^>]*>([0-9.]+)",
                           page_r).group(1)) == float(shown.group(1))
    unweighted = log_loss(y, P)
    assert abs(unweighted - expected) > 2e-3  # the weights move it


def test_bad_weights_name_the_option(wine, tmp_path, capsys):
    frame = wine.copy()
    frame.loc[3, "w"] = -1
    frame.to_csv(tmp_path / "bad.csv", index=False)
    code = main(["report", "--scores", str(tmp_path / "bad.csv"), "--class-columns", "a,b,c",
                 "--label-column", "cultivar", "--weight-column", "w", "--resamples", "20",
                 "--out", str(tmp_path / "x.html")])
    err = capsys.readouterr().err
    assert code != 0 and "--weight-column" in err and "negative weight" in err
