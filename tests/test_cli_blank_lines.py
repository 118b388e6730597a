"""A blank line in a one-column CSV file is a missing value, not a row to skip.

Before 4 December 2026 pandas' ``skip_blank_lines`` dropped it silently: ``calibrate apply``
wrote 6 rows for a 7-row file (its output then out of line with the input) and ``prevalence``
estimated from 6 rows without a word. Data: held-out probabilities of a logistic model on
scikit-learn's bundled breast-cancer set.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from _cli_helpers import run_cli as run
from probwrap.cli._tables import read_table

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def scores():
    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(max_iter=5000).fit(X[:200], y[:200])
    return model.predict_proba(X[200:])[:, 1], y[200:]


def _one_column(path, values, blank_after=None, trailing=0):
    lines = ["risk"]
    for i, v in enumerate(values):
        lines.append(repr(float(v)))
        if blank_after is not None and i == blank_after:
            lines.append("")
    path.write_text("\n".join(lines) + "\n" + "\n" * trailing)
    return path


def test_interior_blank_line_is_a_missing_value_named_by_its_row(scores, tmp_path, capsys):
    s, y = scores
    pd.DataFrame({"risk": s, "event": y}).to_csv(tmp_path / "labelled.csv", index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "labelled.csv",
                       "--score-column", "risk", "--label-column", "event",
                       "--method", "platt", "--out", tmp_path / "map.json")
    assert code == 0, err
    path = _one_column(tmp_path / "new.csv", s[:6], blank_after=2)
    for argv in (("calibrate", "apply", "--map", tmp_path / "map.json", "--scores", path,
                  "--score-column", "risk", "--out", tmp_path / "out.csv",
                  "--missing", "refuse"),
                 ("prevalence", "--unlabelled", path, "--score-column", "risk",
                  "--source-prevalence", 0.6, "--resamples", 20)):
        code, _, err = run(capsys, *argv)
        # line 5 of the file: header, three rows, then the blank line
        assert code != 0
        assert "row 5" in err and "missing" in err, err
    assert not (tmp_path / "out.csv").exists()


def test_trailing_blank_lines_are_still_ignored(scores, tmp_path, capsys):
    s, _ = scores
    path = _one_column(tmp_path / "new.csv", s[:5], trailing=3)
    frame = read_table(path, exact=["risk"])
    assert frame.shape == (5, 1)
    np.testing.assert_array_equal(frame["risk"].astype(float).to_numpy(), s[:5])


def test_blank_line_kept_in_place_when_read_as_text(scores, tmp_path):
    s, _ = scores
    path = _one_column(tmp_path / "new.csv", s[:4], blank_after=0)
    frame = read_table(path, exact=["risk"], as_text=True)
    # rows stay where the file has them: the blank line is row 1, the last value row 4
    assert frame.shape == (5, 1)
    assert frame["risk"].isna().tolist() == [False, True, False, False, False]
    assert float(frame["risk"].iloc[4]) == s[3]
    assert frame.attrs["csv_dialect"]["sep"] == ","


def test_files_with_several_columns_keep_pandas_reading(scores, tmp_path):
    # a blank line in a file of several fields is not a row (a missing row would be ","):
    # unchanged, as pandas reads it
    s, y = scores
    path = tmp_path / "two.csv"
    path.write_text("risk,event\n" + f"{s[0]!r},{y[0]}\n\n" + f"{s[1]!r},{y[1]}\n")
    frame = read_table(path, exact=["risk"])
    assert frame.shape == (2, 2)
