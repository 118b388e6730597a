"""The command line as a new user meets it: the session-27 pass over ugly files.

Data: scikit-learn's breast cancer (a scaled logistic regression fitted on 280 rows, held-out
probabilities of the other 289 written to CSV) and wine (three classes, for ``report
--class-columns``). Every test here failed on the code before this session (see
docs/command_line.md, "Every verb on breast-cancer and wine files").
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from _cli_helpers import cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"score": np.round(p, 6), "y": y})


def _cutoff(capsys, path):
    code, out, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                         "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5, "--resamples",
                         0, "--format", "json")
    assert code == 0, err
    return json.loads(out)


@pytest.mark.parametrize("encoding", ["utf-16-le", "utf-16-be"])
def test_utf16_without_byte_order_mark_read_as_the_plain_file(cancer, tmp_path, capsys,
                                                              encoding):
    """Read as one column named 's' and 'Unnamed: 1', ... ("no column 'score'") before."""
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    other = tmp_path / "wide.csv"
    other.write_text(cancer.to_csv(index=False), encoding=encoding)
    assert other.read_bytes()[:2] != b"\xff\xfe"  # no byte-order mark
    want, got = _cutoff(capsys, plain), _cutoff(capsys, other)
    assert (got["n_rows"], got["n_positive"], got["cutoff"]) == (
        want["n_rows"], want["n_positive"], want["cutoff"]) == (289, 181, want["cutoff"])


def test_pipe_separated_file_read_and_written_back(cancer, tmp_path, capsys):
    """A '|'-separated export was one column named 'score|y' ("no column 'score'")."""
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    piped = tmp_path / "piped.csv"
    cancer.to_csv(piped, index=False, sep="|")
    want, got = _cutoff(capsys, plain), _cutoff(capsys, piped)
    assert (got["n_rows"], got["cutoff"]) == (want["n_rows"], want["cutoff"])
    mapped = tmp_path / "map.json"
    assert run(capsys, "calibrate", "fit", "--scores", piped, "--score-column", "score",
               "--label-column", "y", "--method", "platt", "--out", mapped)[0] == 0
    out = tmp_path / "out.csv"
    assert run(capsys, "calibrate", "apply", "--map", mapped, "--scores", piped,
               "--score-column", "score", "--out", out)[0] == 0
    # a .csv name is written with commas (since 5 December 2026); standard output, which has
    # no extension, keeps the bars
    assert out.read_text().splitlines()[0] == "score,y,calibrated_probability"
    code, text, err = run(capsys, "calibrate", "apply", "--map", mapped, "--scores", piped,
                          "--score-column", "score", "--out", "-")
    assert code == 0, err
    assert text.splitlines()[0] == "score|y|calibrated_probability"


def test_apply_keeps_an_empty_header_cell(cancer, tmp_path, capsys):
    """A file written with its index (``to_csv()``: the header starts with ','): the output's
    header read 'Unnamed: 0,score,...', so replacing the file in place renamed a column."""
    path = tmp_path / "indexed.csv"
    cancer.to_csv(path)  # index column with an empty name
    mapped = tmp_path / "map.json"
    assert run(capsys, "calibrate", "fit", "--scores", path, "--score-column", "score",
               "--label-column", "y", "--method", "platt", "--out", mapped)[0] == 0
    before = path.read_text().splitlines()
    code, _, err = run(capsys, "calibrate", "apply", "--map", mapped, "--scores", path,
                       "--score-column", "score", "--out", path)
    assert code == 0, err
    after = path.read_text().splitlines()
    assert after[0] == before[0] + ",calibrated_probability" == ",score,y,calibrated_probability"
    assert [line.rsplit(",", 1)[0] for line in after[1:]] == before[1:]


def test_report_refuses_to_write_over_an_input_file(cancer, tmp_path, capsys):
    """``--out`` naming the score file (or a link to the unlabelled file) replaced it with the
    page: the labelled rows were gone."""
    scores = tmp_path / "scores.html"  # a CSV file with a misleading name
    cancer.to_csv(scores, index=False)
    before = scores.read_bytes()
    code, _, err = run(capsys, "report", "--scores", scores, "--score-column", "score",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5, "--resamples",
                       10, "--out", scores)
    assert code == 1
    assert "is also the input file --scores" in err and "give --out another file name" in err
    assert scores.read_bytes() == before
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    link = tmp_path / "page.html"
    link.symlink_to(scores)
    code, _, err = run(capsys, "report", "--scores", plain, "--unlabelled", scores,
                       "--score-column", "score", "--label-column", "y", "--cost-fp", 1,
                       "--cost-fn", 5, "--resamples", 10, "--out", link)
    assert code == 1 and "is also the input file --unlabelled" in err
    assert scores.read_bytes() == before


def test_question_marks_for_missing_scores_and_labels_are_counted(cancer, tmp_path, capsys):
    """'?' (UCI files' missing value) was "'?' is not a finite number" for the first row only,
    and as a label "it holds 3: '1', '?', '0'" with no row named."""
    frame = cancer.astype(str)
    frame.loc[[5, 9, 40], "score"] = "?"
    path = tmp_path / "q.csv"
    frame.to_csv(path, index=False)
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1
    assert "3 of 289 rows hold '?': rows 7, 11 and 42" in err
    assert "if it marks a missing value" in err
    frame = cancer.astype(str)
    frame.loc[[5, 9], "y"] = "?"
    frame.to_csv(path, index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--out", tmp_path / "m.json")
    assert code == 1
    assert "(--label-column) must hold exactly two labels" in err
    assert ("'?' looks like a mark for a missing label, in 2 of 289 rows: rows 7 and 11 "
            "(counting the header as row 1)") in err


def test_class_columns_in_percent_do_not_offer_log_odds(tmp_path, capsys):
    """The percentage message said "for log-odds scores use --scale log-odds", which
    ``--class-columns`` refuses."""
    X, y = load_wine(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1)).fit(X[::2], y[::2])
    names = ["barolo", "grignolino", "barbera"]
    frame = pd.DataFrame(np.round(model.predict_proba(X[1::2]) * 100, 2), columns=names)
    frame["cls"] = [names[k] for k in y[1::2]]
    path = tmp_path / "wine.csv"
    frame.to_csv(path, index=False)
    code, _, err = run(capsys, "report", "--scores", path, "--class-columns", ",".join(names),
                       "--label-column", "cls", "--cost-matrix", "0,4,12;20,4,12;60,64,12",
                       "--out", tmp_path / "r.html")
    assert code == 1
    assert "look like percentages: divide them by 100" in err
    assert "--scale log-odds" not in err


@pytest.mark.slow
def test_demo_prints_library_warnings_as_its_own_lines(tmp_path, capsys):
    """With few training parcels the report's warnings came out as Python's display
    ('.../report/__init__.py:45: UserWarning:' and a source line)."""
    with _no_warning_escapes():
        code, out, err = run(capsys, "demo", "--out", tmp_path / "d", "--n-train", 500)
    assert code == 0
    assert "probwrap demo: warning: report, prevalence alarm:" in err
    assert "UserWarning" not in err


class _no_warning_escapes:
    """No warning leaves the command (Python would print it with its source line)."""

    def __enter__(self):
        import warnings

        self._catch = warnings.catch_warnings(record=True)
        self.caught = self._catch.__enter__()
        warnings.simplefilter("always")
        return self

    def __exit__(self, *exc):
        self._catch.__exit__(*exc)
        escaped = [str(w.message)[:80] for w in self.caught]
        assert not escaped, escaped
        return False


def test_event_column_of_words_says_what_it_takes(cancer, tmp_path, capsys):
    """An event column of yes/no was "'yes' is not a finite number" and nothing more."""
    frame = cancer.assign(event=np.where(cancer.y == 1, "yes", "no"),
                          days=np.round(np.linspace(1, 60, cancer.shape[0]), 1))
    path = tmp_path / "late.csv"
    frame.to_csv(path, index=False)
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                       "--time-column", "days", "--event-column", "event", "--horizon", 30,
                       "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1
    assert "'yes' is not a finite number" in err
    assert "--event-column takes 1 (the event happened) or 0 (not yet), or True / False" in err


def test_weight_in_percent_is_not_told_to_be_a_probability(cancer, tmp_path, capsys):
    """A weight written '12%' was told to "write scores as probabilities in [0, 1]"."""
    frame = cancer.assign(w="1").astype(str)
    frame.loc[4, "w"] = "12%"
    path = tmp_path / "w.csv"
    frame.to_csv(path, index=False)
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--weight-column", "w", "--cost-fp", 1,
                       "--cost-fn", 5)
    assert code == 1
    assert "column 'w', row 6" in err and "(--weight-column)" in err
    # the share only: "or as 12" made whole numbers, which prevalence counts as cases
    assert "without the sign (12% as 0.12; only the ratios of weights matter)" in err
    assert "(1 of 289 rows hold one: row 6 (counting the header as row 1))" in err
    assert "scores" not in err


def test_rows_after_blank_lines_are_numbered_as_a_spreadsheet_shows_them(cancer, tmp_path,
                                                                         capsys):
    """Blank lines between rows are skipped on reading, and every message counted rows from
    the header without them: a bad value on line 103 below two blank lines was "row 101"."""
    lines = cancer.to_csv(index=False).splitlines()
    lines[100] = "abc," + lines[100].split(",", 1)[1]
    text = "\n".join(lines[:50] + ["", "   "] + lines[50:]) + "\n"
    assert text.splitlines().index(lines[100]) + 1 == 103
    path = tmp_path / "gaps.csv"
    path.write_text(text)
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1 and "column 'score', row 103 (counting the header as row 1)" in err
    # the same file without its bad value reads as the plain file; a later file at the same
    # path without blank lines is numbered line by line again
    lines[100] = ",".join(str(v) for v in cancer.iloc[99])
    path.write_text("\n".join(lines[:50] + [""] + lines[50:60] + ["NA,1"] + lines[60:]) + "\n")
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1 and "row 62 (counting the header as row 1): the value is missing" in err
    path.write_text("\n".join(lines[:60] + ["NA,1"] + lines[60:]) + "\n")
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1 and "row 61 (counting the header as row 1): the value is missing" in err


def test_read_only_output_file_is_not_replaced(cancer, tmp_path, capsys, monkeypatch):
    """``--out`` naming a read-only file in a writable folder: the file is replaced by a rename,
    which its permissions do not stop, so a file made read-only to keep it was replaced. (The
    check is ``os.access``; as root every file is writable, so the test stands in for a user
    whose file is read-only.)"""
    import os

    import probwrap.cli._files as files

    path = tmp_path / "scores.csv"
    cancer.to_csv(path, index=False)
    kept = tmp_path / "kept.csv"
    kept.write_text("do not replace\n")
    kept.chmod(0o444)
    real = os.access
    monkeypatch.setattr(files.os, "access", lambda p, mode: (
        False if os.fspath(p) == os.fspath(kept) and mode & os.W_OK else real(p, mode)))
    code, _, err = run(capsys, "calibrate", "fit", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--method", "platt", "--out", tmp_path / "m.json")
    assert code == 0, err
    code, _, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json", "--scores",
                       path, "--score-column", "score", "--out", kept)
    assert code == 1 and "is read-only; make it writable (chmod u+w)" in err
    assert kept.read_text() == "do not replace\n"
