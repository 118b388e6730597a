"""Parquet files that name a column twice, and the separator of a ``.csv`` output.

pyarrow writes a table that names a column twice; pandas' reader refused such a file whole
("cannot be read as Parquet (Multiple matches for FieldRef.Name(notes) ...)") even when no
option named the column. It is now read as a CSV file with a repeated header name is: the verbs
leave the column aside, an option naming it is refused naming the file, the column and its
positions, and ``calibrate apply`` writes both columns back to CSV.

``calibrate apply --out x.csv`` on a tab- or ``|``-separated file wrote tabs or bars into the
``.csv`` file; the separator now follows the extension (a comma, or a semicolon for decimal
commas and for a semicolon file, as spreadsheets in decimal-comma locales write CSV).

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows). Every expected value is the verb's own result on
the plain CSV file of the same scores.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS, cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"id": np.arange(y.size), "score": p, "y": y})


@pytest.fixture()
def parquet_twice(cancer, tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = cancer.shape[0]
    table = pa.table([pa.array(cancer["id"]), pa.array([f"first {i}" for i in range(n)]),
                      pa.array(cancer["score"]), pa.array(cancer["y"]),
                      pa.array([f"second {i}" for i in range(n)])],
                     names=["id", "notes", "score", "y", "notes"])
    path = tmp_path / "twice.parquet"
    pq.write_table(table, path)
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    return plain, path


CUTOFF = ("--label-column", "y", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 0,
          "--format", "json")


def test_parquet_with_an_unused_name_twice_gives_the_plain_files_numbers(
        parquet_twice, tmp_path, capsys):
    plain, twice = parquet_twice
    code, expected, err = run(capsys, "cutoff", "--scores", plain, "--score-column", "score",
                              *CUTOFF)
    assert code == 0, err
    code, got, err = run(capsys, "cutoff", "--scores", twice, "--score-column", "score",
                         *CUTOFF)
    assert code == 0, err
    assert json.loads(got) == json.loads(expected)
    maps = []
    for name, path in (("plain", plain), ("twice", twice)):
        code, out, err = run(capsys, "calibrate", "fit", "--scores", path, "--score-column",
                             "score", "--label-column", "y", "--method", "platt", "--out",
                             tmp_path / f"{name}.json")
        assert code == 0, err
        maps.append(json.loads((tmp_path / f"{name}.json").read_text())["fitted"])
    assert maps[0] == maps[1]
    code, out, err = run(capsys, "prevalence", "--unlabelled", twice, "--score-column", "score",
                         "--source-prevalence", 0.6, "--resamples", 0, "--format", "json")
    assert code == 0, err
    code, ref, err = run(capsys, "prevalence", "--unlabelled", plain, "--score-column", "score",
                         "--source-prevalence", 0.6, "--resamples", 0, "--format", "json")
    assert json.loads(out)["prevalence"] == json.loads(ref)["prevalence"]


def test_parquet_option_naming_the_repeated_column_is_refused(parquet_twice, capsys):
    _, twice = parquet_twice
    code, out, err = run(capsys, "cutoff", "--scores", twice, "--score-column", "notes",
                         *CUTOFF)
    assert code == 1
    assert "Traceback" not in err
    assert (f"{twice}: the Parquet file names the column(s) 'notes' more than once (columns 2 "
            "and 5, counting from 1) and --score-column names it") in err


def test_apply_writes_both_parquet_columns_to_csv_and_refuses_parquet(
        parquet_twice, tmp_path, capsys):
    plain, twice = parquet_twice
    code, out, err = run(capsys, "calibrate", "fit", "--scores", plain, "--score-column",
                         "score", "--label-column", "y", "--method", "platt", "--out",
                         tmp_path / "m.json")
    assert code == 0, err
    code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                         "--scores", twice, "--score-column", "score", "--out",
                         tmp_path / "out.csv")
    assert code == 0, err
    lines = (tmp_path / "out.csv").read_text().splitlines()
    assert lines[0] == "id,notes,score,y,notes,calibrated_probability"
    assert lines[1].split(",")[:5] == ["0", "first 0", repr(float(
        pd.read_csv(plain)["score"][0])), str(int(pd.read_csv(plain)["y"][0])), "second 0"]
    code, ref, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                         "--scores", plain, "--score-column", "score", "--out", "-")
    got = pd.read_csv(tmp_path / "out.csv")["calibrated_probability"].to_numpy()
    want = pd.read_csv(__import__("io").StringIO(ref))["calibrated_probability"].to_numpy()
    np.testing.assert_array_equal(got, want)
    code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                         "--scores", twice, "--score-column", "score", "--out",
                         tmp_path / "out.parquet")
    assert code == 1
    assert "the Parquet file names the column 'notes' more than once (columns 2 and 5" in err
    assert not (tmp_path / "out.parquet").exists()


@pytest.mark.parametrize("sep, decimal, out_sep", [
    ("\t", ".", ","), ("|", ".", ","), ("\t", ",", ";"), (";", ",", ";"), (";", ".", ";"),
    (",", ".", ","),
])
def test_csv_output_is_separated_as_its_extension_says(cancer, tmp_path, capsys, sep, decimal,
                                                       out_sep):
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    code, out, err = run(capsys, "calibrate", "fit", "--scores", plain, "--score-column",
                         "score", "--label-column", "y", "--method", "platt", "--out",
                         tmp_path / "m.json")
    assert code == 0, err
    given = tmp_path / "in.txt"
    cancer.to_csv(given, index=False, sep=sep, decimal=decimal)
    results = {}
    for ext in (".csv", ".tsv"):
        code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                             "--scores", given, "--score-column", "score", "--out",
                             tmp_path / f"out{ext}")
        assert code == 0, err
        written = "\t" if ext == ".tsv" else out_sep
        text = (tmp_path / f"out{ext}").read_text()
        assert text.splitlines()[0] == written.join(
            ["id", "score", "y", "calibrated_probability"])
        back = pd.read_csv(tmp_path / f"out{ext}", sep=written, decimal=decimal,
                           **EXACT_FLOATS)
        np.testing.assert_array_equal(back["score"], cancer["score"])
        results[ext] = back["calibrated_probability"].to_numpy()
        if written != sep:
            assert "as " + ext + " files" in out and "the file read was separated by" in out
        else:
            assert "the file read was separated by" not in out
    np.testing.assert_array_equal(results[".csv"], results[".tsv"])
    # standard output has no extension: the table goes out as it came in
    code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                         "--scores", given, "--score-column", "score", "--out", "-")
    assert code == 0, err
    assert out.splitlines()[0] == sep.join(["id", "score", "y", "calibrated_probability"])
