"""Score files as people write them, on real data: held-out scores of a logistic regression on
scikit-learn's breast cancer set, saved compressed, in European spreadsheet form, as percentages,
with percent signs or thousands separators, or sent through standard input.

Each case is compared with the plain CSV file read by the same verb (the same cutoff, the same
map), or must stop with a one-line message that says what was expected.
"""

from __future__ import annotations

import bz2
import gzip
import json
import lzma
import zipfile

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def scored(tmp_path_factory):
    """Held-out probabilities of a regularised logistic regression on load_breast_cancer."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    X_fit, X_held, y_fit, y_held = train_test_split(X, y, test_size=0.5, random_state=0)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1)).fit(X_fit, y_fit)
    root = tmp_path_factory.mktemp("messy")
    frame = pd.DataFrame({"score": model.predict_proba(X_held)[:, 1], "label": y_held,
                          "w": np.arange(y_held.shape[0]) % 3 + 1.0})
    frame.to_csv(root / "plain.csv", index=False)
    return root, frame


def _cutoff(capsys, path, *extra):
    code, out, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                         "--label-column", "label", "--weight-column", "w", "--cost-fp", 1,
                         "--cost-fn", 5, "--resamples", 0, "--format", "json", *extra)
    return code, out, err


def _compress(kind, text, path):
    data = text.encode("utf-8")
    if kind == "gz":
        with gzip.open(path, "wb") as handle:
            handle.write(data)
    elif kind == "bz2":
        path.write_bytes(bz2.compress(data))
    elif kind == "xz":
        path.write_bytes(lzma.compress(data))
    else:
        with zipfile.ZipFile(path, "w") as archive:
            archive.writestr("scores.csv", data)


@pytest.mark.parametrize("kind", ["gz", "bz2", "xz", "zip"])
def test_compressed_semicolon_file_reads_as_the_plain_one(scored, capsys, kind):
    """A semicolon file with decimal commas, compressed: the separator and the decimal mark are
    found in the CSV text, not in the compressed bytes (they were looked for in the bytes, so
    the file was read as one comma-separated column and refused)."""
    root, frame = scored
    code, out, err = _cutoff(capsys, root / "plain.csv")
    assert code == 0, err
    expected = json.loads(out)
    path = root / f"euro.csv.{kind}"
    _compress(kind, frame.to_csv(index=False, sep=";", decimal=","), path)
    code, out, err = _cutoff(capsys, path)
    assert code == 0, err
    got = json.loads(out)
    assert got["n_rows"] == frame.shape[0] == expected["n_rows"]
    assert got["cutoff"] == expected["cutoff"]
    assert got["weights"] == expected["weights"]


def test_compressed_file_with_a_repeated_column_name_is_refused(scored, capsys):
    """The header of a gzip'd file is read for repeated names as in a plain file (it was not
    read, so pandas' renamed 'score.1' passed and the first 'score' was used without a word)."""
    root, frame = scored
    text = frame[["score", "label", "w"]].assign(extra=frame["score"][::-1].to_numpy()).to_csv(
        index=False).replace("extra", "score", 1)
    path = root / "twice.csv.gz"
    _compress("gz", text, path)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "names the column(s) 'score' more than once" in err


def test_zip_with_two_files_is_refused(scored, capsys):
    root, frame = scored
    path = root / "two.zip"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("a.csv", frame.to_csv(index=False))
        archive.writestr("b.csv", frame.to_csv(index=False))
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "two.zip: a .zip file must hold exactly one file (it holds 2: " in err


def test_percentages_are_named_as_percentages(scored, capsys):
    """Scores written as 0-100: the message says they look like percentages (it pointed to
    --scale log-odds only, which would run and give a wrong cutoff on percentages)."""
    root, frame = scored
    path = root / "percent.csv"
    frame.assign(score=frame["score"] * 100).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "look like percentages: give --scale percent, which divides every score by 100" in err
    assert "column 'score', row" in err
    # log-odds (negative values) keep the log-odds hint, without the percentage one
    path = root / "logodds.csv"
    frame.assign(score=np.log(frame["score"] / (1 - frame["score"]))).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "use --scale log-odds" in err and "percentages" not in err


def test_percent_sign_and_thousands_separators_are_explained(scored, capsys):
    root, frame = scored
    path = root / "signs.csv"
    frame.assign(score=[f"{100 * v:.1f}%" for v in frame["score"]]).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    first = f"{100 * frame['score'].iloc[0]:.1f}%"
    assert f"'{first}' is not a finite number; a percent sign is read only with --scale percent" \
        in err
    assert f"(which reads {first} as {float(first[:-1]) / 100:.15g})" in err

    path = root / "thousands.csv"
    frame.assign(w=[f"{1000 * v:,.0f}" for v in frame["w"]]).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "column 'w', row 2" in err and "without thousands separators" in err
    assert "(--weight-column)" in err

    # a comma-separated file with decimal commas in quotes (a spreadsheet set to ',' fields)
    path = root / "quoted_commas.csv"
    frame.assign(score=[f"{v:.6f}".replace(".", ",") for v in frame["score"]]).to_csv(
        path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "decimal comma is read only in a semicolon-separated file" in err


def test_standard_input_is_read_as_the_file(scored, capsys, monkeypatch, tmp_path):
    """'-' is standard input (before 4 December 2026 it was refused by name): the weighted
    cutoff read from it is the file's, gzip told by its first bytes; a map on standard input
    too (tests/test_cli_standard_streams.py has the rest)."""
    import io
    import sys

    root, _ = scored
    code, from_file, err = _cutoff(capsys, root / "plain.csv")
    assert code == 0, err
    data = gzip.compress((root / "plain.csv").read_bytes())
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(data)))
    code, from_stream, err = _cutoff(capsys, "-")
    assert code == 0, err
    assert json.loads(from_stream) == json.loads(from_file)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", root / "plain.csv",
                       "--score-column", "score", "--label-column", "label", "--method", "platt",
                       "--out", tmp_path / "map.json")
    assert code == 0, err
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(
        (tmp_path / "map.json").read_bytes())))
    code, _, err = run(capsys, "calibrate", "apply", "--map", "-", "--scores",
                       root / "plain.csv", "--score-column", "score", "--out", tmp_path / "o.csv")
    assert code == 0, err
    assert (tmp_path / "o.csv").exists()


def test_labels_differing_only_in_spaces_are_named(scored, capsys):
    """'yes' and 'yes ' (a spreadsheet cell with a trailing space) are two labels: the message
    says that some differ only in spaces or case (it listed three labels without saying why)."""
    root, frame = scored
    path = root / "spaces.csv"
    words = np.where(frame["label"] == 1, "yes", "no").astype(object)
    words[::4] = [w + " " for w in words[::4]]
    frame.assign(label=words).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path, "--positive-label", "yes")
    assert code == 1
    assert "differ only in spaces around them or in case" in err


def test_apply_keeps_windows_line_endings(scored, capsys, tmp_path):
    """calibrate apply on a file with CRLF line ends and a byte-order mark (Excel's 'CSV UTF-8'
    on Windows) writes CRLF back (it wrote LF), with the same calibrated numbers as on the
    plain file."""
    root, frame = scored
    code, _, err = run(capsys, "calibrate", "fit", "--scores", root / "plain.csv",
                       "--score-column", "score", "--label-column", "label", "--method", "platt",
                       "--out", tmp_path / "map.json")
    assert code == 0, err
    windows = tmp_path / "windows.csv"
    with open(windows, "w", encoding="utf-8-sig", newline="") as handle:
        frame.to_csv(handle, index=False, lineterminator="\r\n")
    for source, out in ((root / "plain.csv", tmp_path / "plain_out.csv"),
                        (windows, windows)):
        code, _, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "map.json",
                           "--scores", source, "--score-column", "score", "--out", out)
        assert code == 0, err
    data = windows.read_bytes()
    assert data.startswith(b"\xef\xbb\xbf")
    assert data.count(b"\r\n") == frame.shape[0] + 1 and b"\n" not in data.replace(b"\r\n", b"")
    assert b"\r\n" not in (tmp_path / "plain_out.csv").read_bytes()
    pd.testing.assert_frame_equal(pd.read_csv(windows, encoding="utf-8-sig"),
                                  pd.read_csv(tmp_path / "plain_out.csv"))


@pytest.mark.parametrize("sep", [";", ",", "\t"])
def test_spreadsheet_sep_line_is_read_and_written_back(scored, capsys, tmp_path, sep):
    """A first line 'sep=;' (written by spreadsheets so that another locale opens the file
    right) names the separator: the file reads as without it (it was taken for the header and
    the file refused), and calibrate apply writes the line back."""
    root, frame = scored
    decimal = "," if sep == ";" else "."
    path = tmp_path / "with_sep_line.csv"
    path.write_text(f"sep={sep}\n" + frame.to_csv(index=False, sep=sep, decimal=decimal),
                    encoding="utf-8")
    code, out, err = _cutoff(capsys, root / "plain.csv")
    assert code == 0, err
    expected = json.loads(out)
    code, out, err = _cutoff(capsys, path)
    assert code == 0, err
    got = json.loads(out)
    assert (got["n_rows"], got["cutoff"], got["weights"]) == (
        expected["n_rows"], expected["cutoff"], expected["weights"])
    code, _, err = run(capsys, "calibrate", "fit", "--scores", path, "--score-column", "score",
                       "--label-column", "label", "--method", "platt",
                       "--out", tmp_path / "map.json")
    assert code == 0, err
    # a tab-separated file is written back as .tsv (a .csv name is written with commas)
    out = tmp_path / ("o.tsv" if sep == "\t" else "o.csv")
    code, _, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "map.json",
                       "--scores", path, "--score-column", "score", "--out", out)
    assert code == 0, err
    lines = out.read_text(encoding="utf-8").splitlines()
    assert lines[0] == f"sep={sep}"
    assert lines[1].split(sep) == ["score", "label", "w", "calibrated_probability"]
    back = pd.read_csv(out, skiprows=1, sep=sep, decimal=decimal,
                       **EXACT_FLOATS)
    np.testing.assert_array_equal(back["score"].to_numpy(), frame["score"].to_numpy())


def test_parquet_rows_are_numbered_from_the_first_row(scored, capsys):
    """A Parquet file has no header line: its 0-based row 3 is 'row 4 (counting the first row
    as row 1)', not 'row 5 (counting the header as row 1)' as in a CSV file."""
    root, frame = scored
    labels = frame["label"].astype("Int64")
    labels.iloc[3] = pd.NA
    path = root / "missing_label.parquet"
    frame.assign(label=labels).to_parquet(path)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "column 'label', row 4 (counting the first row as row 1): the label is missing" in err
    weights = frame["w"].copy()
    weights.iloc[6] = -1.0
    path = root / "negative_weight.parquet"
    frame.assign(w=weights).to_parquet(path)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "column 'w', row 7 (counting the first row as row 1): -1.0 is a negative weight" in err
    # the same row of a CSV file keeps the spreadsheet's numbering
    path = root / "negative_weight.csv"
    frame.assign(w=weights).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "column 'w', row 8 (counting the header as row 1): -1.0 is a negative weight" in err


def test_infinite_log_odds_point_to_the_probabilities(tmp_path, capsys):
    """Log-odds computed from a random forest's vote shares are infinite where the share is 0
    or 1: the message says where they come from and that --scale proba reads the shares
    themselves (it said only "'inf' is not a finite number"); the shares run."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.model_selection import train_test_split

    X, y = load_breast_cancer(return_X_y=True)
    X_fit, X_held, y_fit, y_held = train_test_split(X, y, test_size=0.5, random_state=0)
    share = RandomForestClassifier(50, random_state=0).fit(X_fit, y_fit).predict_proba(
        X_held)[:, 1]
    assert np.any(share == 1.0) and np.any(share == 0.0)
    with np.errstate(divide="ignore"):
        log_odds = np.log(share) - np.log1p(-share)
    pd.DataFrame({"score": log_odds, "label": y_held}).to_csv(tmp_path / "lo.csv", index=False)
    pd.DataFrame({"score": share, "label": y_held}).to_csv(tmp_path / "p.csv", index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "lo.csv",
                       "--score-column", "score", "--label-column", "label", "--scale",
                       "log-odds", "--out", tmp_path / "m.json")
    assert code == 1
    assert "is not a finite number; an infinite log-odds comes from a probability of " \
        "exactly 0 or 1" in err and "--scale proba" in err
    code, _, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "p.csv",
                       "--score-column", "score", "--label-column", "label",
                       "--out", tmp_path / "m.json")
    assert code == 0, err
