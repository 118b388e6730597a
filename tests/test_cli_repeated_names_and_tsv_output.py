"""Score files whose header gives a name twice, and tab-separated output.

A spreadsheet export often has two ``notes`` columns or two columns with an empty name. Such a
file was refused by every verb even when no option named the repeated column; it is now read,
and only an option naming the repeated name is refused (naming the positions). ``calibrate
apply`` writes both columns back under their names (CSV, TSV) and refuses Parquet, which cannot
hold two columns of one name. ``--out x.tsv`` was refused; it writes the table tab-separated.

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows). Every expected value is the verb's own result on
the same scores written without the extra columns, so a column read from the wrong place, or
a header changed on the way out, fails the comparison.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS, cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")

#: the export's header: "notes" twice, two empty names in the middle
HEADER = ["id", "notes", "", "score", "", "y", "w", "notes"]


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"id": np.arange(y.size), "score": p, "y": y,
                         "w": np.where(np.arange(y.size) % 3 == 0, 2.0, 1.0)})


def _write(cancer, path, header, sep=","):
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, delimiter=sep, lineterminator="\n")
        writer.writerow(header)
        for i, (p, y, w) in enumerate(zip(cancer["score"], cancer["y"], cancer["w"],
                                          strict=True)):
            cells = {"id": str(i), "score": repr(float(p)), "y": str(int(y)),
                     "w": repr(float(w))}
            row, seen = [], 0
            for name in header:
                if name == "notes":
                    seen += 1
                    row.append(f"note {seen} of row {i}, with a comma")
                elif name == "":
                    row.append("x" if len(row) < 3 else "")
                else:
                    row.append(cells[name])
            writer.writerow(row)
    return path


@pytest.fixture()
def files(cancer, tmp_path):
    plain = _write(cancer, tmp_path / "plain.csv", ["id", "score", "y", "w"])
    twice = _write(cancer, tmp_path / "twice.csv", HEADER)
    return plain, twice


def _same(text, plain, twice):
    return text.replace(str(twice), str(plain))


def test_every_verb_reads_a_file_with_an_unused_name_twice(files, tmp_path, capsys):
    plain, twice = files
    cutoff = ("cutoff", "--score-column", "score", "--label-column", "y", "--weight-column",
              "w", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 0, "--format", "json")
    code, expected, err = run(capsys, *cutoff[:1], "--scores", plain, *cutoff[1:])
    assert code == 0, err
    code, got, err = run(capsys, *cutoff[:1], "--scores", twice, *cutoff[1:])
    assert code == 0, err
    assert json.loads(got) == json.loads(expected)
    maps = []
    for path in files:
        out = tmp_path / f"{path.stem}.json"
        code, _, err = run(capsys, "calibrate", "fit", "--scores", path, "--score-column",
                           "score", "--label-column", "y", "--method", "platt", "--out", out)
        assert code == 0, err
        fitted = json.loads(out.read_text())
        fitted["metadata"].pop("fitted_on")  # the file's name
        maps.append(fitted)
    assert maps[0] == maps[1]
    prevalence = ("--score-column", "score", "--source-prevalence", 0.6, "--resamples", 0)
    code, expected, err = run(capsys, "prevalence", "--unlabelled", plain, *prevalence)
    assert code == 0, err
    code, got, err = run(capsys, "prevalence", "--unlabelled", twice, *prevalence)
    assert code == 0, err
    assert _same(got, plain, twice) == expected
    code, got, err = run(capsys, "report", "--scores", twice, "--score-column", "score",
                         "--label-column", "y", "--out", tmp_path / "r.html")
    assert code == 0, err
    assert "289 labelled rows" in got


@pytest.mark.parametrize("flag", ["--score-column", "--label-column", "--weight-column"])
def test_an_option_naming_the_repeated_name_is_refused_with_its_positions(files, capsys, flag):
    _, twice = files
    names = {"--score-column": "score", "--label-column": "y", "--weight-column": "w"}
    names[flag] = "notes"
    code, out, err = run(capsys, "cutoff", "--scores", twice, "--score-column",
                         names["--score-column"], "--label-column", names["--label-column"],
                         "--weight-column", names["--weight-column"], "--cost-fp", 1,
                         "--cost-fn", 5, "--resamples", 0)
    assert code == 1 and out == ""
    assert ("the header names the column(s) 'notes' more than once (columns 2 and 8, "
            f"counting from 1) and {flag} names it") in err


def test_pandas_name_for_the_second_copy_is_not_a_column(files, capsys):
    """pandas reads the second "notes" as "notes.1", a name that is not in the file: an option
    giving it is told that no such column exists, the list showing the header's names."""
    _, twice = files
    code, _, err = run(capsys, "cutoff", "--scores", twice, "--score-column", "notes.1",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1
    assert "no column 'notes.1' (given by --score-column)" in err
    assert "'notes' (column 2)" in err and "'notes' (column 8)" in err


def test_calibrate_apply_writes_both_columns_back_and_refuses_parquet(files, tmp_path, capsys):
    plain, twice = files
    fitted = tmp_path / "map.json"
    assert run(capsys, "calibrate", "fit", "--scores", plain, "--score-column", "score",
               "--label-column", "y", "--method", "platt", "--out", fitted)[0] == 0
    outputs = {}
    for path, suffix in ((plain, ".csv"), (twice, ".csv"), (twice, ".tsv")):
        out = tmp_path / f"{path.stem}-out{suffix}"
        code, _, err = run(capsys, "calibrate", "apply", "--map", fitted, "--scores", path,
                           "--score-column", "score", "--out", out)
        assert code == 0, err
        outputs[out.name] = out
    expected = pd.read_csv(outputs["plain-out.csv"], **EXACT_FLOATS)[
        "calibrated_probability"].to_numpy()
    for name, sep in (("twice-out.csv", ","), ("twice-out.tsv", "\t")):
        with open(outputs[name], newline="", encoding="utf-8") as handle:
            rows = list(csv.reader(handle, delimiter=sep))
        with open(twice, newline="", encoding="utf-8") as handle:
            given = list(csv.reader(handle))
        # the header as written, both "notes" and both empty names, then the added column
        assert rows[0] == [*HEADER, "calibrated_probability"]
        # every cell of the input as it was (the notes hold commas, quoted in the CSV)
        assert [row[:-1] for row in rows[1:]] == given[1:]
        got = np.array([float(row[-1]) for row in rows[1:]])
        np.testing.assert_array_equal(got, expected)
    # Parquet cannot hold two columns of one name: refused before anything is written
    out = tmp_path / "twice-out.parquet"
    code, _, err = run(capsys, "calibrate", "apply", "--map", fitted, "--scores", twice,
                       "--score-column", "score", "--out", out)
    assert code == 1 and not out.exists()
    assert "names the column 'notes' more than once (columns 2 and 8" in err
    assert "rename one of them" in err and ".tsv" in err
    # an added column of the repeated name would make it three
    code, _, err = run(capsys, "calibrate", "apply", "--map", fitted, "--scores", twice,
                       "--score-column", "score", "--output-column", "notes",
                       "--out", tmp_path / "three.csv")
    assert code == 1 and "already has columns named 'notes' (columns 2 and 8" in err


def test_tsv_output_and_input(files, tmp_path, capsys):
    """``--out x.tsv`` was refused ("unsupported file type .tsv"); a semicolon file with
    decimal commas keeps its decimal commas in the tab-separated output, and the TSV file read
    back gives the same cutoff as the file it was written from."""
    plain, _ = files
    fitted = tmp_path / "map.json"
    assert run(capsys, "calibrate", "fit", "--scores", plain, "--score-column", "score",
               "--label-column", "y", "--method", "platt", "--out", fitted)[0] == 0
    frame = pd.read_csv(plain, **EXACT_FLOATS)
    semicolon = tmp_path / "semicolon.csv"
    frame.to_csv(semicolon, sep=";", decimal=",", index=False)
    outs = {}
    for path in (plain, semicolon):
        out = tmp_path / f"{path.stem}.tsv"
        code, _, err = run(capsys, "calibrate", "apply", "--map", fitted, "--scores", path,
                           "--score-column", "score", "--out", out)
        assert code == 0, err
        outs[path.stem] = out
    first = outs["plain"].read_text(encoding="utf-8").splitlines()
    assert first[0] == "id\tscore\ty\tw\tcalibrated_probability"
    table = pd.read_csv(outs["plain"], sep="\t", **EXACT_FLOATS)
    reference = pd.read_csv(tmp_path / "plain.csv", **EXACT_FLOATS)
    np.testing.assert_array_equal(table["score"].to_numpy(), reference["score"].to_numpy())
    comma = pd.read_csv(outs["semicolon"], sep="\t", decimal=",",
                        **EXACT_FLOATS)
    assert "," in outs["semicolon"].read_text(encoding="utf-8").splitlines()[1]
    np.testing.assert_array_equal(comma["calibrated_probability"].to_numpy(),
                                  table["calibrated_probability"].to_numpy())
    cutoff = ("--score-column", "score", "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5,
              "--resamples", 0, "--format", "json")
    code, expected, err = run(capsys, "cutoff", "--scores", plain, *cutoff)
    assert code == 0, err
    code, got, err = run(capsys, "cutoff", "--scores", outs["plain"], *cutoff)
    assert code == 0, err
    assert json.loads(got) == json.loads(expected)
