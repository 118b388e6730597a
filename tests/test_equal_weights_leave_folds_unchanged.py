"""Equal row weights of any size leave the folds (and ``"auto"``'s choice) as without weights.

Rows with identical features that carry both labels are kept in one fold when the weights say
they are counts (a success row and a failure row per group). Before 4 December 2026 any weights
other than 1 counted as such, so weights all equal to 2 or to ``1/n`` (normalised to sum to 1)
put every tied score of a forest into one fold with its ties, and ``probwrap calibrate fit
--weight-column`` chose another map than without the column: on scikit-learn's breast cancer
(forest held-out probabilities, 50 trees) venn_abers without weights, temperature with weights
``1/n``. Equal weights carry no counts, and rescaling every weight must not change a choice
(docs/weights.md).

Data: scikit-learn's bundled breast cancer; held-out probabilities from scikit-learn's
``cross_val_predict``.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier
from sklearn.model_selection import StratifiedKFold, cross_val_predict

from probwrap._heldout import feature_cells
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def forest_scores():
    X, y = load_breast_cancer(return_X_y=True)
    p = cross_val_predict(RandomForestClassifier(50, random_state=0), X, y,
                          cv=StratifiedKFold(5, shuffle=True, random_state=0),
                          method="predict_proba")[:, 1]
    return p, y


def test_tied_scores_with_equal_weights_form_no_cells(forest_scores):
    p, y = forest_scores
    column = p.reshape(-1, 1)
    # the forest's probabilities tie (multiples of 1/50), and some tied values carry both labels
    values, inverse = np.unique(p, return_inverse=True)
    both = [k for k in range(values.shape[0]) if np.unique(y[inverse == k]).shape[0] == 2]
    assert len(both) >= 3
    n = p.shape[0]
    for w in (np.ones(n), np.full(n, 2.0), np.full(n, 1.0 / n), np.full(n, 1e6)):
        assert feature_cells(column, w, y) is None
    # unequal weights on the same rows still read them as counts (a cell per tied value)
    w = np.ones(n)
    w[::7] = 3.0
    cells = feature_cells(column, w, y)
    assert cells is not None and np.unique(cells).shape[0] == values.shape[0]


def test_calibrate_fit_with_normalised_weights_equals_no_weights(forest_scores, tmp_path, capsys):
    p, y = forest_scores
    frame = pd.DataFrame({"score": p, "malignant": 1 - y, "w": 1.0 / p.shape[0]})
    # scores of malignancy: the label 1 of scikit-learn's breast cancer is "benign"
    frame["score"] = 1.0 - frame["score"]
    path = tmp_path / "scores.csv"
    frame.to_csv(path, index=False)
    fitted = {}
    for name, extra in (("plain", []), ("weighted", ["--weight-column", "w"])):
        out = tmp_path / f"{name}.json"
        code = main(["calibrate", "fit", "--scores", str(path), "--score-column", "score",
                     "--label-column", "malignant", "--out", str(out), *extra])
        assert code == 0
        fitted[name] = json.loads(out.read_text())
    err = capsys.readouterr().err
    assert "rescaled to sum to Kish's effective sample size (569)" in err
    plain, weighted = fitted["plain"], fitted["weighted"]
    assert weighted["method"] == plain["method"]
    losses_plain = plain["metadata"]["auto_log_loss"]
    losses_weighted = weighted["metadata"]["auto_log_loss"]
    assert losses_plain.keys() == losses_weighted.keys()
    for name in losses_plain:
        assert losses_weighted[name] == pytest.approx(losses_plain[name], rel=1e-9, abs=1e-12)


def test_report_with_normalised_weights_reads_no_groups_of_trials(forest_scores, tmp_path, capsys):
    # before: "weighted rows with identical forecasts carry different labels ... (k of n)" on a
    # forest's tied scores whenever the weights were normalised to sum to 1
    p, y = forest_scores
    frame = pd.DataFrame({"score": 1.0 - p, "malignant": 1 - y, "w": 1.0 / p.shape[0]})
    path = tmp_path / "scores.csv"
    frame.to_csv(path, index=False)
    code = main(["report", "--scores", str(path), "--score-column", "score", "--label-column",
                 "malignant", "--weight-column", "w", "--cost-fp", "1", "--cost-fn", "5",
                 "--resamples", "20", "--out", str(tmp_path / "r.html")])
    assert code == 0
    err = capsys.readouterr().err
    assert "rescaled to sum to Kish's effective sample size" in err  # the weights were read
    assert "identical forecasts carry different labels" not in err
    # unequal weights 1/n and 3/n: scaled weights, not counts (probwrap._validation.whole_counts),
    # so since session 29 no note either (before, any unequal weights raised it); the note on
    # real counts is checked in test_report_cells.py and test_report_tied_forecasts_individual_rows.py
    frame.loc[::7, "w"] = 3.0 / p.shape[0]
    frame.to_csv(path, index=False)
    main(["report", "--scores", str(path), "--score-column", "score", "--label-column",
          "malignant", "--weight-column", "w", "--cost-fp", "1", "--cost-fn", "5",
          "--resamples", "20", "--out", str(tmp_path / "r2.html")])
    assert "identical forecasts carry different labels" not in capsys.readouterr().err
