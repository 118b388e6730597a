"""Files whose name does not say what they hold, and paths with a ``~`` the shell left alone.

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows). A Parquet file, a gzip file and a workbook saved
under a ``.csv`` name were refused as "not UTF-8 text", showing a line of binary bytes and
advising ``--encoding``; ``--scores=~/scores.csv`` (the shell expands ``~`` only at the start of
an unquoted word) said "file not found" and no more. Each test failed on the code before.
"""

from __future__ import annotations

import json
import zipfile

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"id": np.arange(y.size), "score": np.round(p, 6), "y": y})


def _cutoff(capsys, path):
    return run(capsys, "cutoff", "--scores", path, "--score-column", "score", "--label-column",
               "y", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 0, "--format", "json")


def test_parquet_and_gzip_under_a_csv_name_are_named_with_the_name_to_give(
        cancer, tmp_path, capsys):
    parquet, gz = tmp_path / "scores.csv", tmp_path / "export.csv"
    cancer.to_parquet(parquet)
    cancer.to_csv(gz, index=False, compression="gzip")
    code, out, err = _cutoff(capsys, parquet)
    assert code == 1 and out == ""
    assert "is a Parquet file (it starts with PAR1)" in err and "not UTF-8" not in err
    assert "mv scores.csv scores.parquet" in err
    code, out, err = _cutoff(capsys, gz)
    assert code == 1 and "is gzip-compressed" in err and "mv export.csv export.csv.gz" in err
    # renamed as the message says, both read as the plain file does
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    expected = json.loads(_cutoff(capsys, plain)[1])
    for path, new in ((parquet, "scores.parquet"), (gz, "export.csv.gz")):
        code, out, err = _cutoff(capsys, path.rename(tmp_path / new))
        assert code == 0, err
        assert json.loads(out) == expected


def test_workbooks_under_a_csv_name_are_named(tmp_path, capsys):
    xlsx, ods, xls = tmp_path / "a.csv", tmp_path / "b.csv", tmp_path / "c.csv"
    with zipfile.ZipFile(xlsx, "w") as archive:  # the parts every .xlsx file holds
        archive.writestr("[Content_Types].xml", "<Types/>")
        archive.writestr("xl/workbook.xml", "<workbook/>")
    with zipfile.ZipFile(ods, "w") as archive:  # and every .ods file
        archive.writestr("mimetype", "application/vnd.oasis.opendocument.spreadsheet")
        archive.writestr("content.xml", "<office:document-content/>")
    xls.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504))  # OLE2 header (.xls)
    for path, what in ((xlsx, "an Excel workbook (.xlsx)"),
                       (ods, "an OpenDocument spreadsheet (.ods)"),
                       (xls, "an Excel 97-2003 workbook (.xls)")):
        code, out, err = _cutoff(capsys, path)
        assert code == 1 and out == ""
        assert f"is {what}, though its name ends in .csv" in err
        assert "save the sheet as CSV UTF-8" in err and "not UTF-8" not in err


def test_a_tilde_left_by_the_shell_is_explained(cancer, tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("HOME", str(tmp_path))
    cancer.to_csv(tmp_path / "scores.csv", index=False)
    code, out, err = _cutoff(capsys, "~/scores.csv")
    assert code == 1 and "~/scores.csv: file not found" in err
    assert f"give '{tmp_path / 'scores.csv'}' (that file exists)" in err
    code, out, err = run(capsys, "calibrate", "apply", "--map", "~/map.json", "--scores",
                         tmp_path / "scores.csv", "--score-column", "score")
    assert code == 1 and "the ~ was not turned into the home folder" in err
    assert "(that file exists)" not in err
