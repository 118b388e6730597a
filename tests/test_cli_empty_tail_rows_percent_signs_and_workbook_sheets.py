"""Files a practitioner gets from a spreadsheet: rows of bare separators under the table,
scores shown as percentages (``85.2784%``, ``85,2784 %``), and a workbook of two sheets.

- Rows whose every field is empty at the end of a CSV file (``,,,``: a spreadsheet writes one
  for every formatted row below its table) made every verb refuse the file ("row 291: the
  value is missing") and ``calibrate apply`` write the empty rows out; they are now left out
  with a warning naming them. A row of empty fields between rows of data is still a missing
  value, named by its row.
- ``--scale percent`` refused ``85.2784%`` as "not a finite number", though the message named
  that option; the sign is now read. ``calibrate apply --scale percent`` wrote the score column
  as the probabilities (85.2784 as 0.8527840000000001); it now writes the percentages read.
- An Excel workbook of several sheets is refused, now naming its sheets.

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows). Every expected value is the verb's own result on
the plain file of the same scores.
"""

from __future__ import annotations

import io
import json
import zipfile

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS, cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")

CUTOFF = ("--score-column", "score", "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5,
          "--resamples", 0, "--format", "json")


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"id": np.arange(y.size), "score": np.round(p, 6), "y": y})


@pytest.fixture()
def plain(cancer, tmp_path):
    path = tmp_path / "plain.csv"
    cancer.to_csv(path, index=False)
    return path


def _fit(capsys, path, out, *extra):
    code, _, err = run(capsys, "calibrate", "fit", "--scores", path, "--score-column", "score",
                       "--label-column", "y", "--method", "platt", *extra, "--out", out)
    assert code == 0, err
    return json.loads(out.read_text())["fitted"]


def test_rows_of_empty_fields_at_the_end_are_left_out_with_a_warning(cancer, plain, tmp_path,
                                                                      capsys):
    tail = tmp_path / "tail.csv"
    tail.write_text(cancer.to_csv(index=False) + ",,\n , ,\n,,\n\n")
    code, want, err = run(capsys, "cutoff", "--scores", plain, *CUTOFF)
    assert code == 0, err
    code, got, err = run(capsys, "cutoff", "--scores", tail, *CUTOFF)
    assert code == 0, err
    # the same JSON exactly (0/1 labels stay whole numbers: the file is read again without
    # the empty rows, not cut after reading them as missing values)
    assert json.loads(got) == json.loads(want)
    assert (f"{tail}: the last 3 rows, rows 291, 292 and 293 (counting the header as row 1), "
            "hold only empty fields") in err
    assert _fit(capsys, tail, tmp_path / "t.json") == _fit(capsys, plain, tmp_path / "p.json")
    code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "p.json", "--scores",
                         tail, "--score-column", "score", "--out", tmp_path / "t.csv")
    assert code == 0, err
    assert "wrote 289 rows" in out and "hold only empty fields" in err
    code, ref, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "p.json", "--scores",
                         plain, "--score-column", "score", "--out", "-")
    assert (tmp_path / "t.csv").read_text() == ref
    code, got, err = run(capsys, "prevalence", "--unlabelled", tail, "--score-column", "score",
                         "--source-prevalence", 0.6, "--resamples", 0, "--format", "json")
    code, want, _ = run(capsys, "prevalence", "--unlabelled", plain, "--score-column", "score",
                        "--source-prevalence", 0.6, "--resamples", 0, "--format", "json")
    assert json.loads(got) == json.loads(want)


def test_a_row_of_empty_fields_inside_the_table_is_still_a_missing_value(cancer, tmp_path,
                                                                          capsys):
    lines = cancer.to_csv(index=False).splitlines()
    inside = tmp_path / "inside.csv"
    inside.write_text("\n".join(lines[:101] + [",,"] + lines[101:]) + "\n")
    code, _, err = run(capsys, "cutoff", "--scores", inside, *CUTOFF)
    assert code == 1
    assert (f"{inside}: column 'score', row 102 (counting the header as row 1): the value is "
            "missing") in err
    assert "hold only empty fields" not in err


@pytest.mark.parametrize("sep, form", [(",", "{:.4f}%"), (";", "{:.4f} %")])
def test_percent_signs_are_read_with_scale_percent(cancer, tmp_path, capsys, sep, form):
    numbers = (cancer.score * 100).map(lambda x: f"{x:.4f}")
    bare = tmp_path / "bare.csv"
    cancer.assign(score=numbers).to_csv(bare, index=False)
    signed = tmp_path / "signed.csv"
    decimal_comma = sep == ";"
    shown = (cancer.score * 100).map(
        lambda x: form.format(x).replace(".", ",") if decimal_comma else form.format(x))
    cancer.assign(score=shown).to_csv(signed, index=False, sep=sep)
    code, want, err = run(capsys, "cutoff", "--scores", bare, *CUTOFF, "--scale", "percent")
    assert code == 0, err
    code, got, err = run(capsys, "cutoff", "--scores", signed, *CUTOFF, "--scale", "percent")
    assert code == 0, err
    assert json.loads(got) == json.loads(want)
    # without the option: refused, naming it and the probability the value stands for
    code, _, err = run(capsys, "cutoff", "--scores", signed, *CUTOFF)
    assert code == 1
    assert ("is not a finite number; a percent sign is read only with --scale percent (which "
            "reads") in err
    # apply writes the percentages read back (the numbers of the bare file, exactly)
    _fit(capsys, bare, tmp_path / "m.json", "--scale", "percent")
    code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                         "--scores", bare, "--score-column", "score", "--scale", "percent",
                         "--out", "-")
    assert code == 0, err
    back = pd.read_csv(io.StringIO(out), **EXACT_FLOATS)
    np.testing.assert_array_equal(back["score"].to_numpy(), numbers.astype(float).to_numpy())
    code, signed_out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json",
                                "--scores", signed, "--score-column", "score", "--scale",
                                "percent", "--out", "-")
    assert code == 0, err
    got = pd.read_csv(io.StringIO(signed_out), sep=sep, decimal="," if decimal_comma else ".",
                      **EXACT_FLOATS)
    np.testing.assert_array_equal(got["score"].to_numpy(), back["score"].to_numpy())
    np.testing.assert_array_equal(got["calibrated_probability"].to_numpy(),
                                  back["calibrated_probability"].to_numpy())


def test_a_workbook_of_two_sheets_is_refused_naming_its_sheets(tmp_path, capsys):
    book = tmp_path / "scores.xlsx"
    with zipfile.ZipFile(book, "w") as archive:
        archive.writestr("xl/workbook.xml", (
            '<workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
            'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
            '<sheets><sheet name="held out" sheetId="1" r:id="rId1"/>'
            '<sheet name="notes" sheetId="2" r:id="rId2"/></sheets></workbook>'))
    code, _, err = run(capsys, "cutoff", "--scores", book, *CUTOFF)
    assert code == 1
    assert (f"{book}: Excel files are not read; save the table as CSV (UTF-8) or Parquet "
            "(.csv, .parquet); the workbook has 2 sheets ('held out', 'notes')") in err
