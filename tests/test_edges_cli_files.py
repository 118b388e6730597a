"""Score files as spreadsheets and other programs save them, through the command line in-process:
UTF-16 text with a byte-order mark, files in another encoding, a header that names a column
twice, a spreadsheet file given instead of a table, and column names that differ only in case
or surrounding spaces. Data: logistic-regression probabilities on scikit-learn's
bundled breast cancer set, with the labels as the words "yes" / "no".
"""

from __future__ import annotations

import zipfile

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def table():
    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X[:, :5])
    p = LogisticRegression().fit(X, y).predict_proba(X)[:, 1]
    return pd.DataFrame({"risk": p, "outcome": np.where(y == 1, "yes", "no")})


def _cutoff(capsys, path, score="risk"):
    code = main(["cutoff", "--scores", str(path), "--score-column", score, "--label-column",
                 "outcome", "--positive-label", "yes", "--cost-fp", "1", "--cost-fn", "5",
                 "--resamples", "0", "--format", "json"])
    out, err = capsys.readouterr()
    return code, out, err


def test_utf16_file_reads_as_the_utf8_one(tmp_path, capsys, table):
    """Spreadsheets' "Unicode text" is UTF-16 with a byte-order mark, often tab-separated; it
    used to stop with "'utf-8' codec can't decode byte 0xff"."""
    table.to_csv(tmp_path / "plain.csv", index=False)
    with open(tmp_path / "wide.csv", "w", encoding="utf-16") as handle:
        handle.write(table.to_csv(index=False, sep="\t"))
    code_a, out_a, _ = _cutoff(capsys, tmp_path / "plain.csv")
    code_b, out_b, err_b = _cutoff(capsys, tmp_path / "wide.csv")
    assert code_a == code_b == 0, err_b
    assert out_a.replace("plain.csv", "X") == out_b.replace("wide.csv", "X")


def test_other_encoding_names_the_byte_and_what_to_do(tmp_path, capsys, table):
    path = tmp_path / "latin.csv"
    path.write_bytes(table.assign(outcome=np.where(table.outcome == "yes", "oui", "non"))
                     .rename(columns={"outcome": "résultat"}).to_csv(index=False)
                     .encode("latin-1"))
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "is not UTF-8 text (byte 0xe9 at position 6" in err
    assert "save it as CSV UTF-8" in err and "Traceback" not in err


def test_a_column_named_twice_is_refused(tmp_path, capsys, table):
    """pandas reads "risk,risk" as "risk" and "risk.1": the first was used without a word."""
    path = tmp_path / "twice.csv"
    table[["risk", "risk", "outcome"]].to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "the header names the column(s) 'risk' more than once" in err


def test_empty_names_from_trailing_separators_are_not_repeats(tmp_path, capsys, table):
    path = tmp_path / "trailing.csv"
    path.write_text("".join(line + ",,\n" for line in
                            table.to_csv(index=False).splitlines()))
    assert _cutoff(capsys, path)[0] == 0


def test_spreadsheet_files_are_refused_by_extension(tmp_path, capsys):
    path = tmp_path / "held.xlsx"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("xl/workbook.xml", "<workbook/>")
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "Excel files are not read; save the table as CSV (UTF-8) or Parquet" in err


@pytest.mark.parametrize("flag, given, near", [("--score-column", "Risk", "risk"),
                                               ("--label-column", "outcome ", "outcome")])
def test_a_near_column_name_is_pointed_out(tmp_path, capsys, table, flag, given, near):
    path = tmp_path / "held.csv"
    table.to_csv(path, index=False)
    columns = {"--score-column": "risk", "--label-column": "outcome", flag: given}
    code = main(["cutoff", "--scores", str(path), *[x for kv in columns.items() for x in kv],
                 "--positive-label", "yes", "--cost-fp", "1", "--cost-fn", "5",
                 "--resamples", "0"])
    err = capsys.readouterr().err
    assert code == 1
    assert f"no column '{given}' (given by {flag})" in err
    assert f"(the column '{near}' differs only in spaces or case" in err


@pytest.mark.parametrize("name", ["", "   "])
def test_empty_output_column_is_a_usage_error(tmp_path, capsys, table, name):
    """Before, an empty name was written as an empty header cell (read back as "Unnamed: 2")."""
    table.to_csv(tmp_path / "held.csv", index=False)
    assert main(["calibrate", "fit", "--scores", str(tmp_path / "held.csv"), "--score-column",
                 "risk", "--label-column", "outcome", "--positive-label", "yes", "--method",
                 "platt", "--out", str(tmp_path / "map.json")]) == 0
    with pytest.raises(SystemExit) as info:
        main(["calibrate", "apply", "--map", str(tmp_path / "map.json"), "--scores",
              str(tmp_path / "held.csv"), "--score-column", "risk", "--output-column", name,
              "--out", str(tmp_path / "out.csv")])
    assert info.value.code == 2
    assert "--output-column" in capsys.readouterr().err
    assert not (tmp_path / "out.csv").exists()


@pytest.fixture(scope="module")
def wine_probabilities():
    """Out-of-fold class probabilities of a logistic regression on scikit-learn's wine set."""
    from sklearn.datasets import load_wine
    from sklearn.model_selection import cross_val_predict

    X, y = load_wine(return_X_y=True)
    P = cross_val_predict(LogisticRegression(), StandardScaler().fit_transform(X), y, cv=3,
                          method="predict_proba")
    names = np.array(["barolo", "grignolino", "barbera"])
    frame = pd.DataFrame(P, columns=names)
    frame["cultivar"] = names[y]
    return frame


def _class_report(path, out, columns="barolo,grignolino,barbera"):
    return main(["report", "--scores", str(path), "--class-columns", columns, "--label-column",
                 "cultivar", "--resamples", "10", "--out", str(out)])


def test_class_without_or_with_few_labelled_rows_is_named(tmp_path, capsys, wine_probabilities):
    """Before, a class of --class-columns with no labelled row (or one) passed without a word;
    the page only showed a share of 0.0%."""
    frame = wine_probabilities
    absent = frame[frame.cultivar != "barbera"]
    one = pd.concat([absent, frame[frame.cultivar == "barbera"].iloc[:1]])
    absent.to_csv(tmp_path / "absent.csv", index=False)
    one.to_csv(tmp_path / "one.csv", index=False)
    assert _class_report(tmp_path / "absent.csv", tmp_path / "a.html") == 0
    assert "class(es) 'barbera' have no labelled rows" in capsys.readouterr().err
    assert _class_report(tmp_path / "one.csv", tmp_path / "b.html") == 0
    assert "fewer than 5 labelled rows: 'barbera' (1)" in capsys.readouterr().err


def test_class_columns_named_otherwise_than_the_labels(tmp_path, capsys, wine_probabilities):
    frame = wine_probabilities.rename(columns=lambda c: c if c == "cultivar" else f"p {c}")
    frame.to_csv(tmp_path / "held.csv", index=False)
    assert _class_report(tmp_path / "held.csv", tmp_path / "r.html",
                         "p barolo,p grignolino,p barbera") == 1
    err = capsys.readouterr().err
    assert "--class-columns must list columns named as the labels" in err
    assert "(the file's labels: 'barolo', 'grignolino', 'barbera')" in err
    with pytest.raises(SystemExit) as info:
        _class_report(tmp_path / "held.csv", tmp_path / "r.html", "p barolo,p barolo,p barbera")
    assert info.value.code == 2
    assert "--class-columns names 'p barolo' more than once" in capsys.readouterr().err


@pytest.mark.parametrize("text, line", [
    ("risk,outcome\n0,42,yes\n0,17,no\n", 2),   # decimal commas: pandas took "0" as an index
    # one column, no separator in the header, a line that is no decimal-comma number (a
    # column of decimal commas alone is read as such since session 28:
    # tests/test_cli_spreadsheet_exports.py)
    ("risk\n0,42\n0,17,3\n", 2),
    ("risk,outcome\n0.42,yes\n0.17,no\n0,05,no\n", 4),  # a later row only
])
def test_row_with_more_fields_than_the_header_is_refused(tmp_path, capsys, text, line):
    """Rows with one field more than the header used to shift every column silently (the first
    field became pandas' row index): 0,42 was read as the score 42 or the label 42."""
    path = tmp_path / "comma.csv"
    path.write_text(text)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    header = text.split("\n")[0].count(",") + 1
    assert f"comma.csv: line {line} has {header + 1} fields but the header has {header}" in err
    assert "decimal comma" in err and "';'" in err


def test_trailing_separator_on_every_row_keeps_the_columns(tmp_path, capsys, table):
    """An empty last field that the header lacks (a separator at the end of each line) is
    dropped: the columns are read where the header puts them."""
    table.to_csv(tmp_path / "plain.csv", index=False)
    lines = (tmp_path / "plain.csv").read_text().splitlines()
    (tmp_path / "trailing.csv").write_text(
        "\n".join([lines[0], *(line + "," for line in lines[1:])]) + "\n")
    code_a, out_a, _ = _cutoff(capsys, tmp_path / "plain.csv")
    code_b, out_b, err_b = _cutoff(capsys, tmp_path / "trailing.csv")
    assert code_a == code_b == 0, err_b
    assert out_a.replace("plain.csv", "X") == out_b.replace("trailing.csv", "X")


@pytest.mark.parametrize("style", ["whole numbers first", "scientific"])
def test_semicolon_file_with_decimal_commas_found_past_the_first_rows(tmp_path, capsys, table,
                                                                      style):
    """A semicolon file was read with decimal commas only when one of its first five data lines
    held a plain "d,d" number: a sorted file starting with exact 1s, or Excel's scientific
    notation (4,757E-02), stopped with "'0,93' is not a finite number"."""
    frame = table.copy()
    if style == "whole numbers first":
        frame.loc[:39, "risk"] = 1.0
        frame = frame.sort_values("risk", ascending=False, kind="stable")
        text = [f"{r:.17g}" for r in frame["risk"]]
    else:
        text = [f"{r:.6E}" for r in frame["risk"]]
    frame["risk"] = [float(t) for t in text]  # what the file holds, read with a point
    frame.to_csv(tmp_path / "plain.csv", index=False, float_format="%.17g")
    lines = ["risk;outcome"] + [f"{t.replace('.', ',')};{o}"
                                for t, o in zip(text, frame["outcome"], strict=True)]
    (tmp_path / "eu.csv").write_text("\n".join(lines) + "\n")
    code_a, out_a, err_a = _cutoff(capsys, tmp_path / "plain.csv")
    code_b, out_b, err_b = _cutoff(capsys, tmp_path / "eu.csv")
    assert code_a == code_b == 0, err_b
    assert out_a.replace("plain.csv", "X") == out_b.replace("eu.csv", "X")
