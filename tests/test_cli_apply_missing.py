"""``calibrate apply`` on a score file with some blank scores.

Before 4 December 2026 the whole file was refused at the first missing score. By default
(``--missing keep``) each row comes through, a row without a score with an empty calibrated
probability, and one warning line counts them and names the first five rows;
``--missing refuse`` keeps the old refusal for pipelines that must not pass a blank on.

Data: held-out probabilities of a logistic regression on scikit-learn's bundled breast cancer
set; the calibrated column of the rows with a score is compared with the saved map applied in
Python (:func:`probwrap.calibration.map_from_dict`) to the file without the blank rows.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS
from probwrap.calibration import map_from_dict, proba_to_log_odds
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(max_iter=5000).fit(X[:300, :5], y[:300])
    p = model.predict_proba(X[300:, :5])[:, 1]
    root = tmp_path_factory.mktemp("missing")
    pd.DataFrame({"risk": p, "y": y[300:]}).to_csv(root / "held.csv", index=False)
    code = main(["calibrate", "fit", "--scores", str(root / "held.csv"), "--score-column",
                 "risk", "--label-column", "y", "--method", "platt",
                 "--out", str(root / "map.json")])
    assert code == 0
    cal = map_from_dict(json.loads((root / "map.json").read_text()))
    return root, p, cal


#: rows left without a score: empty fields and the words read as missing
BLANK = {3: "", 10: "NA", 20: "", 21: "null", 40: "", 77: "NaN", 200: ""}


def _gappy(root, p):
    ids = [f"p{i:04d}" for i in range(p.shape[0])]
    risk = [BLANK.get(i, repr(float(v))) for i, v in enumerate(p)]
    path = root / "gappy.csv"
    pd.DataFrame({"parcel": ids, "risk": risk}).to_csv(path, index=False)
    return path


def _apply(capsys, root, scores, out, *extra):
    code = main(["calibrate", "apply", "--map", str(root / "map.json"), "--scores", str(scores),
                 "--score-column", "risk", "--out", str(out), *extra])
    _, err = capsys.readouterr()
    return code, err


def test_blank_scores_come_through_empty_with_a_counting_warning(fitted, tmp_path, capsys):
    root, p, cal = fitted
    code, err = _apply(capsys, root, _gappy(tmp_path, p), tmp_path / "out.csv")
    assert code == 0, err
    warning = [line for line in err.splitlines() if "warning" in line]
    assert len(warning) == 1, err
    # counted, and the first five named as a spreadsheet numbers them (header = row 1)
    assert f"7 of {p.shape[0]} rows have no score in column 'risk'" in warning[0]
    assert "rows 5, 12, 22, 23, 42, ... (counting the header as row 1)" in warning[0]
    assert "--missing refuse" in warning[0]
    out = pd.read_csv(tmp_path / "out.csv", dtype={"parcel": str}, **EXACT_FLOATS)
    assert out.shape[0] == p.shape[0]  # every row written, in order
    assert out["parcel"].tolist() == [f"p{i:04d}" for i in range(p.shape[0])]
    blank = np.zeros(p.shape[0], dtype=bool)
    blank[list(BLANK)] = True
    assert out["calibrated_probability"].isna().to_numpy().tolist() == blank.tolist()
    assert out["risk"].isna().to_numpy().tolist() == blank.tolist()
    np.testing.assert_array_equal(out["calibrated_probability"].to_numpy()[~blank],
                                  cal.predict(proba_to_log_odds(p[~blank])))


def test_one_blank_row_is_named_alone(fitted, tmp_path, capsys):
    root, p, _ = fitted
    text = "risk\n0.2\n\n0.7\n0.4\n"  # one column: the blank line is a missing score
    (tmp_path / "one.csv").write_text(text)
    code, err = _apply(capsys, root, tmp_path / "one.csv", tmp_path / "o.csv")
    assert code == 0, err
    assert re.search(r"1 of 4 rows have no score .*: row 3 \(counting the header as row 1\)",
                     err), err
    assert pd.read_csv(tmp_path / "o.csv")["calibrated_probability"].isna().tolist() == [
        False, True, False, False]


def test_parquet_nulls_are_kept_as_nulls(fitted, tmp_path, capsys):
    root, p, cal = fitted
    frame = pd.DataFrame({"risk": p[:50].copy()})
    frame.loc[[0, 9], "risk"] = np.nan
    frame.to_parquet(tmp_path / "in.parquet")
    code, err = _apply(capsys, root, tmp_path / "in.parquet", tmp_path / "o.parquet")
    assert code == 0, err
    assert "rows 1 and 10 (counting the first row as row 1)" in err
    out = pd.read_parquet(tmp_path / "o.parquet")
    assert out["calibrated_probability"].isna().tolist() == [i in (0, 9) for i in range(50)]
    keep = np.ones(50, dtype=bool)
    keep[[0, 9]] = False
    np.testing.assert_array_equal(out["calibrated_probability"].to_numpy()[keep],
                                  cal.predict(proba_to_log_odds(p[:50][keep])))


def test_refuse_stops_at_the_first_and_writes_nothing(fitted, tmp_path, capsys):
    root, p, _ = fitted
    code, err = _apply(capsys, root, _gappy(tmp_path, p), tmp_path / "out.csv",
                       "--missing", "refuse")
    assert code == 1
    assert "column 'risk', row 5 (counting the header as row 1): the value is missing" in err
    assert not (tmp_path / "out.csv").exists()


def test_bad_values_and_an_all_blank_column_are_still_refused(fitted, tmp_path, capsys):
    root, p, _ = fitted
    # text that is not a number is not a missing score: refused, keep or not
    (tmp_path / "bad.csv").write_text("risk\n0.2\n\nabc\n")
    code, err = _apply(capsys, root, tmp_path / "bad.csv", tmp_path / "o.csv")
    assert code == 1 and "'abc' is not a finite number" in err
    (tmp_path / "none.csv").write_text("id,risk\n1,\n2,NA\n")
    code, err = _apply(capsys, root, tmp_path / "none.csv", tmp_path / "o.csv")
    assert code == 1 and "holds no score (every row is missing)" in err
