"""``calibrate apply`` writes every column it does not compute exactly as it read it: CSV columns
as their text (identifiers with leading zeros, the words ``NA``/``None``/``n/a``, integers too
large for a float, decimal commas), Parquet columns with their types and a named index. Data:
logistic-regression probabilities on scikit-learn's bundled breast cancer set.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap.calibration import map_from_dict, proba_to_log_odds
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def map_file(tmp_path_factory):
    root = tmp_path_factory.mktemp("map")
    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X[:, :5])
    p = LogisticRegression().fit(X, y).predict_proba(X)[:, 1]
    pd.DataFrame({"risk": p, "y": y}).to_csv(root / "held.csv", index=False)
    code = main(["calibrate", "fit", "--scores", str(root / "held.csv"), "--score-column", "risk",
                 "--label-column", "y", "--method", "platt", "--out", str(root / "map.json")])
    assert code == 0
    return root / "map.json"


def _apply(map_file, scores, out, capsys):
    code = main(["calibrate", "apply", "--map", str(map_file), "--scores", str(scores),
                 "--score-column", "risk", "--out", str(out)])
    _, err = capsys.readouterr()
    return code, err


def _expected(map_file, scores):
    import json

    cal = map_from_dict(json.loads(map_file.read_text()))
    return cal.predict(proba_to_log_odds(np.asarray(scores, dtype=float)))


def test_csv_columns_are_written_as_their_text(map_file, tmp_path, capsys):
    text = ("parcel_id,zip,note,amount,risk\n"
            "000123,01234,NA,0.1000000000000000055511151231257827,0.25\n"
            "000124,99501,None,12345678901234567890,0.75\n"
            "007,00000,n/a,1.10,0.5\n"
            "008, 42 ,,-0,0.125\n")
    (tmp_path / "today.csv").write_text(text)
    code, err = _apply(map_file, tmp_path / "today.csv", tmp_path / "out.csv", capsys)
    assert code == 0, err
    lines = (tmp_path / "out.csv").read_text().splitlines()
    assert lines[0] == "parcel_id,zip,note,amount,risk,calibrated_probability"
    # each row is the input row, unchanged, with one more field
    for original, written in zip(text.splitlines()[1:], lines[1:], strict=True):
        head, _, added = written.rpartition(",")
        assert head == original
        assert float(added) == pytest.approx(
            _expected(map_file, [float(original.rsplit(",", 1)[1])])[0], rel=1e-15)


def test_semicolon_file_keeps_its_decimal_commas(map_file, tmp_path, capsys):
    (tmp_path / "eu.csv").write_text("id;risk;amount\n01;0,25;1,50\n02;0,75;NA\n")
    code, err = _apply(map_file, tmp_path / "eu.csv", tmp_path / "out.csv", capsys)
    assert code == 0, err
    # written back as it came: ';'-separated with decimal commas (it opens in the same
    # spreadsheet); the score column is the column of numbers read, the others their text
    written = pd.read_csv(tmp_path / "out.csv", dtype=str, keep_default_na=False, sep=";")
    assert written["id"].tolist() == ["01", "02"]
    assert written["risk"].tolist() == ["0,25", "0,75"]
    assert written["amount"].tolist() == ["1,50", "NA"]
    np.testing.assert_array_equal(
        written["calibrated_probability"].str.replace(",", ".").astype(float),
        _expected(map_file, [0.25, 0.75]))


def test_missing_score_is_kept_or_refused(map_file, tmp_path, capsys):
    # kept by default (tests/test_cli_apply_missing.py); refused with --missing refuse
    (tmp_path / "gap.csv").write_text("id,risk\n1,0.2\n2,NA\n")
    code, err = _apply(map_file, tmp_path / "gap.csv", tmp_path / "out.csv", capsys)
    assert code == 0 and "row 3 (counting the header as row 1)" in err
    code = main(["calibrate", "apply", "--map", str(map_file), "--scores",
                 str(tmp_path / "gap.csv"), "--score-column", "risk", "--out",
                 str(tmp_path / "out2.csv"), "--missing", "refuse"])
    err = capsys.readouterr()[1]
    assert code == 1
    assert "column 'risk', row 3" in err and "missing" in err


def test_parquet_types_and_index_round_trip(map_file, tmp_path, capsys):
    frame = pd.DataFrame({
        "code": ["000123", "NA", "None"],
        "count": np.array([1, 2, 2**62], dtype=np.int64),
        "flag": pd.array([True, None, False], dtype="boolean"),
        "risk": np.array([0.25, 0.75, 0.5], dtype=np.float32),
        "when": pd.to_datetime(["2026-01-01", "2026-02-01", "2026-03-01"]),
    }, index=pd.Index([10, 20, 30], name="parcel"))
    frame.to_parquet(tmp_path / "in.parquet")
    code, err = _apply(map_file, tmp_path / "in.parquet", tmp_path / "out.parquet", capsys)
    assert code == 0, err
    back = pd.read_parquet(tmp_path / "out.parquet")
    expected = frame.reset_index()
    assert list(back.columns) == [*expected.columns, "calibrated_probability"]
    pd.testing.assert_frame_equal(back[expected.columns], expected)
    np.testing.assert_array_equal(back["calibrated_probability"],
                                  _expected(map_file, frame["risk"]))
