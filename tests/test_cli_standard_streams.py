"""``-`` for standard input and output, the Unix convention.

Every verb that reads one table takes ``-`` for it (CSV, compressed CSV or Parquet, told by the
first bytes); ``calibrate apply`` writes CSV to standard output with ``--out -`` or no ``--out``,
``calibrate fit --out -`` prints the map (``report --out -`` the page: tests/test_cli_report_stdout.py);
what the verbs say then goes to stderr, so standard
output holds the data only. Before 4 December 2026 each ``-`` was refused by name.

Data: held-out probabilities of a logistic regression on scikit-learn's bundled breast cancer
set (Wolberg, Street & Mangasarian 1995); every result read from a stream is compared with the
same verb on the same file, and the calibrated column with the map applied in Python
(:func:`probwrap.calibration.map_from_dict`).
"""

from __future__ import annotations

import bz2
import gzip
import io
import json
import lzma
import os
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS
from _cli_helpers import run_cli as run
from probwrap.calibration import map_from_dict, proba_to_log_odds
from probwrap.cli import main

ROOT = Path(__file__).resolve().parents[1]


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(max_iter=5000).fit(X[:300, :5], y[:300])
    p = model.predict_proba(X[300:, :5])[:, 1]
    root = tmp_path_factory.mktemp("streams")
    frame = pd.DataFrame({"id": [f"{i:05d}" for i in range(p.shape[0])], "risk": p,
                          "y": y[300:]})
    frame.to_csv(root / "held.csv", index=False)
    frame.to_parquet(root / "held.parquet")
    plain = (root / "held.csv").read_bytes()
    (root / "held.csv.gz").write_bytes(gzip.compress(plain))
    (root / "held.csv.bz2").write_bytes(bz2.compress(plain))
    (root / "held.csv.xz").write_bytes(lzma.compress(plain))
    with zipfile.ZipFile(root / "held.zip", "w") as archive:
        archive.writestr("held.csv", plain)
    return root, frame


def _feed(monkeypatch, data: bytes) -> None:
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(data)))


def _cutoff(capsys, path, *extra):
    return run(capsys, "cutoff", "--scores", path, "--score-column", "risk", "--label-column",
               "y", "--cost-fp", 1, "--cost-fn", 4, "--resamples", 0, "--format", "json",
               *extra)


@pytest.mark.parametrize("name", ["held.csv", "held.csv.gz", "held.csv.bz2", "held.csv.xz",
                                  "held.zip", "held.parquet"])
def test_cutoff_reads_standard_input_as_the_file(files, capsys, monkeypatch, name):
    root, _ = files
    code, from_file, err = _cutoff(capsys, root / "held.csv")
    assert code == 0, err
    _feed(monkeypatch, (root / name).read_bytes())
    code, from_stream, err = _cutoff(capsys, "-")
    assert code == 0, err
    # the same cutoff, costs, counts and exact range, to the last bit
    assert json.loads(from_stream) == json.loads(from_file)


def test_parquet_rows_on_standard_input_are_numbered_as_in_parquet(files, capsys, monkeypatch,
                                                                 tmp_path):
    _, frame = files
    gap = frame.copy()
    gap.loc[5, "risk"] = np.nan
    gap.to_parquet(tmp_path / "gap.parquet")
    _feed(monkeypatch, (tmp_path / "gap.parquet").read_bytes())
    code, _, err = _cutoff(capsys, "-")
    assert code == 1
    # standard input named in words, and the row counted as Parquet rows are (no header)
    assert ("standard input: column 'risk', row 6 (counting the first row as row 1): the "
            "value is missing") in err, err


def test_empty_and_doubled_standard_input(files, capsys, monkeypatch, tmp_path):
    root, _ = files
    _feed(monkeypatch, b"")
    code, _, err = _cutoff(capsys, "-")
    assert code == 1 and "standard input: nothing was sent to it" in err
    # standard input is read once: two options given as '-' is a usage error
    with pytest.raises(SystemExit) as info:
        main(["calibrate", "apply", "--map", "-", "--scores", "-", "--score-column", "risk"])
    assert info.value.code == 2
    assert "--scores and --map are both '-'" in capsys.readouterr().err


def test_fit_prints_the_map_and_apply_reads_it_from_standard_input(files, capsys, monkeypatch,
                                                                   tmp_path):
    root, frame = files
    code, out, err = run(capsys, "calibrate", "fit", "--scores", root / "held.csv",
                         "--score-column", "risk", "--label-column", "y", "--method", "auto",
                         "--out", "-")
    assert code == 0, err
    description = json.loads(out)  # standard output holds the map and nothing else
    assert description["format"] == "probwrap-map"
    assert "saved it to standard output" in err and "candidate" in err
    code, _, err = run(capsys, "calibrate", "fit", "--scores", root / "held.csv",
                       "--score-column", "risk", "--label-column", "y", "--method", "auto",
                       "--out", tmp_path / "map.json")
    assert code == 0, err
    assert json.loads((tmp_path / "map.json").read_text()) == description
    _feed(monkeypatch, out.encode())
    code, _, err = run(capsys, "calibrate", "apply", "--map", "-", "--scores",
                       root / "held.parquet", "--score-column", "risk",
                       "--out", tmp_path / "o.parquet")
    assert code == 0, err
    expected = map_from_dict(description).predict(proba_to_log_odds(frame["risk"].to_numpy()))
    np.testing.assert_array_equal(
        pd.read_parquet(tmp_path / "o.parquet")["calibrated_probability"], expected)


@pytest.mark.parametrize("out", [["--out", "-"], []])
def test_apply_writes_csv_to_standard_output(files, capsys, monkeypatch, tmp_path, out):
    root, frame = files
    code, _, err = run(capsys, "calibrate", "fit", "--scores", root / "held.csv",
                       "--score-column", "risk", "--label-column", "y", "--method", "platt",
                       "--out", tmp_path / "map.json")
    assert code == 0, err
    # a semicolon file with decimal commas comes back as one, on standard output
    eu = frame.assign(risk=[repr(v).replace(".", ",") for v in frame["risk"]])
    text = eu.to_csv(index=False, sep=";")
    _feed(monkeypatch, text.encode())
    code, written, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "map.json",
                             "--scores", "-", "--score-column", "risk", *out)
    assert code == 0, err
    assert "to standard output" in err  # the summary line is not mixed into the data
    back = pd.read_csv(io.StringIO(written), sep=";", dtype=str)
    assert written.count("\n") == frame.shape[0] + 1  # the header and the rows, nothing else
    assert back["id"].tolist() == frame["id"].tolist()  # written as read: 00007 stays
    expected = map_from_dict(json.loads((tmp_path / "map.json").read_text())).predict(
        proba_to_log_odds(frame["risk"].to_numpy()))
    np.testing.assert_array_equal(
        back["calibrated_probability"].str.replace(",", ".").astype(float), expected)


def test_apply_refuses_an_output_type_it_cannot_write(files, capsys):
    # report --out - and demo --out -: tests/test_cli_report_stdout.py
    root, _ = files
    with pytest.raises(SystemExit) as info:
        main(["calibrate", "apply", "--map", "m.json", "--scores", str(root / "held.csv"),
              "--score-column", "risk", "--out", "x.json"])
    assert info.value.code == 2


def test_a_real_pipe(files, tmp_path):
    """Two processes joined by a pipe: fit prints the map, apply reads the scores from a pipe
    and writes CSV that a third reader parses; stderr carries only the summary lines."""
    root, frame = files
    env = {**os.environ, "PYTHONPATH": str(ROOT), "OMP_NUM_THREADS": "1",
           "OPENBLAS_NUM_THREADS": "1", "MPLBACKEND": "Agg"}
    cli = [sys.executable, "-m", "probwrap.cli"]
    fit = subprocess.run([*cli, "calibrate", "fit", "--scores", "-", "--score-column", "risk",
                          "--label-column", "y", "--method", "platt", "--out", "-"],
                         input=(root / "held.csv.gz").read_bytes(), capture_output=True,
                         env=env, timeout=300)
    assert fit.returncode == 0, fit.stderr.decode()
    (tmp_path / "map.json").write_bytes(fit.stdout)
    apply = subprocess.run([*cli, "calibrate", "apply", "--map", str(tmp_path / "map.json"),
                            "--scores", "-", "--score-column", "risk"],
                           input=(root / "held.parquet").read_bytes(), capture_output=True,
                           env=env, timeout=300)
    assert apply.returncode == 0, apply.stderr.decode()
    back = pd.read_csv(io.BytesIO(apply.stdout), **EXACT_FLOATS)
    assert list(back.columns) == ["id", "risk", "y", "calibrated_probability"]
    expected = map_from_dict(json.loads(fit.stdout)).predict(
        proba_to_log_odds(frame["risk"].to_numpy()))
    np.testing.assert_array_equal(back["calibrated_probability"], expected)
    assert b"wrote 269 rows" in apply.stderr


@pytest.mark.parametrize("which", ["--unlabelled", "--reference"])
def test_prevalence_reads_either_file_from_standard_input(files, capsys, monkeypatch, which):
    root, _ = files
    argv = {"--unlabelled": root / "held.csv", "--reference": root / "held.csv"}
    base = ["prevalence", "--score-column", "risk", "--label-column", "y", "--resamples", 20,
            "--format", "json"]
    code, from_files, err = run(capsys, *base, *[v for k, f in argv.items() for v in (k, f)])
    assert code == 0, err
    _feed(monkeypatch, (root / "held.parquet").read_bytes())
    argv[which] = "-"
    code, from_stream, err = run(capsys, *base, *[v for k, f in argv.items() for v in (k, f)])
    assert code == 0, err
    assert json.loads(from_stream) == json.loads(from_files)
