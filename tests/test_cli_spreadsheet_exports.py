"""The command line as a new user meets it: the session-28 pass over ugly real-world files.

Data: scikit-learn's breast cancer (a scaled logistic regression fitted on 280 rows, held-out
probabilities of the other 289 written to CSV as spreadsheets and other tools write them).
Every test here failed on the code before this session (see docs/command_line.md,
"Files as spreadsheets and other tools write them").
"""

from __future__ import annotations

import json

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


def _cutoff(capsys, path, *extra):
    return run(capsys, "cutoff", "--scores", path, "--score-column", "score", "--label-column",
               "y", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 0, "--format", "json", *extra)


@pytest.mark.parametrize("columns", [["id", "score", "y"], ["score", "y"]])
def test_file_without_a_header_line_is_named_as_such(cancer, tmp_path, capsys, columns):
    """A file written without its header: the first row became the names, and the message was
    "the header names the column(s) '0' more than once" (id 0 and label 0) or "no column
    'score'; the file has columns '0.0', '1'" - neither says that the header is missing."""
    path = tmp_path / "no-header.csv"
    cancer[columns].to_csv(path, index=False, header=False)
    code, out, err = _cutoff(capsys, path)
    assert code == 1 and out == ""
    assert "no header line" in err and "first line holds numbers only" in err
    assert "more than once" not in err
    # a header of numbers that names the columns asked for is read as it is written
    plain = tmp_path / "numbered.csv"
    cancer.rename(columns={"score": "2", "y": "3"}).to_csv(plain, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", plain, "--score-column", "2",
                         "--label-column", "3", "--cost-fp", 1, "--cost-fn", 5,
                         "--resamples", 0, "--format", "json")
    assert code == 0, err
    assert json.loads(out)["n_rows"] == len(cancer)


def test_a_rare_third_label_names_its_rows(cancer, tmp_path, capsys):
    """'maybe' in 3 of 289 rows of a yes/no column: the message listed the three labels and no
    row, so the rows had to be hunted for in the spreadsheet."""
    frame = cancer.assign(y=np.where(cancer["y"] == 1, "yes", "no"))
    frame.loc[[4, 50, 51], "y"] = "maybe"
    path = tmp_path / "third.csv"
    frame.to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path, "--positive-label", "yes")
    assert code == 1
    assert "'maybe' is found in only 3 of 289 rows: rows 6, 52 and 53" in err
    # a column of many labels is no rare typo: no rows listed
    frame = cancer.assign(y=cancer["y"] + cancer["id"] % 3)
    frame.to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1 and "it holds 4" in err and "found in only" not in err


@pytest.mark.parametrize(("sep", "decimal"), [(";", ","), (";", "."), ("\t", ".")])
def test_a_comma_in_a_column_name_keeps_the_separator(cancer, tmp_path, capsys, sep, decimal):
    """A ';' export from a German spreadsheet naming its column "Risiko, kalibriert" was read
    as comma-separated (the header holds a comma): "line 2 has 3 fields but the header has 2"
    or "no column 'Risiko, kalibriert'; the file has columns 'id;Risiko', ' kalibriert;y'"."""
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    code, out, err = _cutoff(capsys, plain)
    assert code == 0, err
    expected = json.loads(out)
    path = tmp_path / "export.csv"
    cancer.rename(columns={"score": "Risiko, kalibriert"}).to_csv(path, sep=sep,
                                                                  decimal=decimal, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", path, "--score-column",
                         "Risiko, kalibriert", "--label-column", "y", "--cost-fp", 1,
                         "--cost-fn", 5, "--resamples", 0, "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    assert got["n_rows"] == expected["n_rows"]
    assert got["cutoff"] == expected["cutoff"]
    assert got["expected_cost"] == expected["expected_cost"]
    # a comma-separated file whose names hold a ';' stays comma-separated
    path = tmp_path / "commas.csv"
    cancer.rename(columns={"score": "score;v2"}).to_csv(path, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score;v2",
                         "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5,
                         "--resamples", 0, "--format", "json")
    assert code == 0, err
    assert json.loads(out)["cutoff"] == expected["cutoff"]


def test_a_row_spilling_into_an_unnamed_last_column_is_refused(cancer, tmp_path, capsys):
    """A separator at the end of every line (header 'id,score,y,w,') and counts written with a
    thousands separator in some rows: '3,1,412,' read as w = 1 with '412' in the unnamed last
    column, without a word (weight sum 764,399 where the counts sum to 838,568)."""
    counts = np.random.default_rng(0).integers(500, 5000, len(cancer))
    lines = ["id,score,y,w,"]
    for i, (score, y, w) in enumerate(zip(cancer["score"], cancer["y"], counts, strict=True)):
        lines.append(f"{i},{score},{y},{w:,}" if i % 10 == 3 else f"{i},{score},{y},{w},")
    path = tmp_path / "counts.csv"
    path.write_text("\n".join(lines) + "\n")
    code, out, err = _cutoff(capsys, path, "--weight-column", "w")
    assert code == 1 and out == ""
    spilled = [i for i in range(len(cancer)) if i % 10 == 3 and counts[i] >= 1000]
    assert f"{len(spilled)} of {len(cancer)} rows have a value beyond the last named column" in err
    assert f"rows {spilled[0] + 2}, " in err and "thousands separator" in err
    # the same file with every count written plainly reads as the counts
    path.write_text("\n".join(["id,score,y,w,"] + [
        f"{i},{s},{y},{w}," for i, (s, y, w) in enumerate(zip(
            cancer["score"], cancer["y"], counts, strict=True))]) + "\n")
    code, out, err = _cutoff(capsys, path, "--weight-column", "w")
    assert code == 0, err
    assert json.loads(out)["weights"]["sum"] == int(counts.sum())


def test_a_header_repeated_below_names_the_joined_files(cancer, tmp_path, capsys):
    """Two exports joined with their headers ('cat a.csv b.csv'): "'score' is not a finite
    number" for the row of the second header, with nothing saying what that row is."""
    path = tmp_path / "joined.csv"
    path.write_text(cancer.iloc[:100].to_csv(index=False) + cancer.iloc[100:].to_csv(index=False))
    code, out, err = _cutoff(capsys, path)
    assert code == 1 and out == ""
    assert "row 102 (counting the header as row 1): 'score' is not a finite number" in err
    assert "1 of 290 rows repeats the header line: row 102" in err
    assert "delete those lines" in err


@pytest.mark.parametrize("quoted", [False, True])
def test_one_column_of_decimal_commas_is_read(cancer, tmp_path, capsys, quoted):
    """A column of scores saved alone by a spreadsheet in a decimal-comma locale ('score' and
    then 0,113899 ...: no separator anywhere to tell the file's form) was refused: "line 2 has
    2 fields but the header has 1", or, quoted, "'0,113899' is not a finite number"."""
    plain = tmp_path / "plain.csv"
    cancer[["score"]].to_csv(plain, index=False)
    path = tmp_path / "scores.csv"
    body = [str(v).replace(".", ",") for v in cancer["score"]]
    path.write_text("score\r\n" + "".join(
        (f'"{v}"' if quoted else v) + "\r\n" for v in body))

    def estimate(file):
        code, out, err = run(capsys, "prevalence", "--unlabelled", file, "--score-column",
                             "score", "--source-prevalence", 0.6, "--resamples", 0,
                             "--format", "json")
        assert code == 0, err
        return json.loads(out)

    expected, got = estimate(plain), estimate(path)
    assert got["n_rows"] == expected["n_rows"] == len(cancer)
    assert got["prevalence"] == expected["prevalence"]


@pytest.mark.parametrize(("sep", "decimal"), [(",", "."), (";", ",")])
def test_a_typeset_minus_sign_is_read(cancer, tmp_path, capsys, sep, decimal):
    """Log-odds copied from formatted output or a word processor write '−2.05' with the minus
    sign U+2212: "'−2.05' is not a finite number"; now read as the hyphen-minus file is."""
    score = cancer["score"].clip(1e-6, 1 - 1e-6)
    logit = np.log(score / (1 - score)).round(4)
    results = []
    for minus in ("-", "\u2212"):
        frame = cancer.assign(score=[f"{v:.4f}".replace(".", decimal).replace("-", minus)
                                     for v in logit])
        path = tmp_path / f"logit{len(results)}.csv"
        frame.to_csv(path, sep=sep, index=False, encoding="utf-8")
        code, out, err = _cutoff(capsys, path, "--scale", "log-odds")
        assert code == 0, err
        results.append(json.loads(out))
    assert (logit < 0).sum() > 50
    assert results[1]["cutoff"] == results[0]["cutoff"]
    assert results[1]["expected_cost"] == results[0]["expected_cost"]


def test_a_zip_from_macos_finder_is_read(cancer, tmp_path, capsys):
    """macOS Finder's Compress puts '__MACOSX/._scores.csv' (and at times '.DS_Store') beside
    the file: "a .zip file must hold exactly one file (it holds 2)"."""
    import zipfile

    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    code, out, err = _cutoff(capsys, plain)
    assert code == 0, err
    expected = json.loads(out)
    path = tmp_path / "scores.zip"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("scores/", b"")
        archive.writestr("scores/scores.csv", plain.read_bytes())
        archive.writestr("__MACOSX/scores/._scores.csv", b"\x00\x05\x16\x07\x00\x02\x00\x00")
        archive.writestr("scores/.DS_Store", b"\x00\x00\x00\x01Bud1")
    code, out, err = _cutoff(capsys, path)
    assert code == 0, err
    got = json.loads(out)
    assert (got["n_rows"], got["cutoff"]) == (expected["n_rows"], expected["cutoff"])
    # two tables: refused, naming them
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("a.csv", plain.read_bytes())
        archive.writestr("b.csv", plain.read_bytes())
    code, out, err = _cutoff(capsys, path)
    assert code == 1 and "must hold exactly one file (it holds 2: 'a.csv', 'b.csv')" in err


def test_labels_spelled_two_ways_name_the_rare_spelling_rows(cancer, tmp_path, capsys):
    """'benign' in 2 rows of a 'Benign'/'Malignant' column: the message said that some labels
    differ only in case, without a row to find them by."""
    frame = cancer.assign(y=np.where(cancer["y"] == 1, "Benign", "Malignant"))
    frame.loc[[3, 7], "y"] = "benign"
    path = tmp_path / "mixed-case.csv"
    frame.to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path, "--positive-label", "Benign")
    assert code == 1
    assert "differ only in spaces around them or in case" in err
    assert "('benign' in 2 of 289 rows: rows 5 and 9" in err


def test_a_field_of_spaces_is_a_missing_value(cancer, tmp_path, capsys):
    """A score cell holding a typed space: "' ' is not a finite number", and `calibrate apply`
    stopped where an empty field comes through with an empty calibrated probability."""
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", plain, "--score-column",
                       "score", "--label-column", "y", "--method", "platt", "--out",
                       tmp_path / "map.json")
    assert code == 0, err
    frame = cancer.astype({"score": object})
    frame.loc[3, "score"] = " "
    frame.loc[9, "score"] = "\t "
    path = tmp_path / "spaces.csv"
    frame.to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "row 5 (counting the header as row 1): the value is missing" in err
    assert "2 of 289 rows have no value" in err or "rows 5 and 11" in err
    out_path = tmp_path / "out.csv"
    code, _, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "map.json", "--scores",
                       path, "--score-column", "score", "--out", out_path)
    assert code == 0, err
    assert "2 of 289 rows have no score in column 'score': rows 5 and 11" in err
    written = pd.read_csv(out_path)
    assert written["calibrated_probability"].isna().sum() == 2
    assert written["calibrated_probability"].notna().sum() == 287


def test_parquet_with_number_column_names_is_read(cancer, tmp_path, capsys):
    """`pd.DataFrame(model.predict_proba(X)).to_parquet(...)` keeps the names 0 and 1 as
    numbers: "no column '1' (given by --score-column); the file has columns '0', '1' (the
    column '1' differs only in spaces or case ...)"."""
    proba = np.column_stack([1 - cancer["score"], cancer["score"]])
    path = tmp_path / "proba.parquet"
    pd.DataFrame(proba).to_parquet(path)
    assert pd.read_parquet(path).columns.tolist() == [0, 1]
    plain = tmp_path / "plain.csv"
    cancer[["score"]].to_csv(plain, index=False)
    results = []
    for file, column in ((plain, "score"), (path, "1")):
        code, out, err = run(capsys, "prevalence", "--unlabelled", file, "--score-column",
                             column, "--source-prevalence", 0.6, "--resamples", 0,
                             "--format", "json")
        assert code == 0, err
        results.append(json.loads(out))
    assert results[1]["prevalence"] == results[0]["prevalence"]
    assert results[1]["n_rows"] == len(cancer)


def test_percentages_given_as_log_odds_draw_a_warning(cancer, tmp_path, capsys):
    """Scores in percent (0-100) draw "look like percentages: give --scale percent, ...; for
    log-odds scores use --scale log-odds"; with --scale log-odds they were read without a word as
    probabilities of 0.5 to 1 for every row."""
    path = tmp_path / "percent.csv"
    cancer.assign(score=(100 * cancer["score"]).round(3)).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path, "--scale", "log-odds")
    assert code == 0
    assert "lies in [0, 100]" in err and "none negative, as percentages do" in err
    assert "if the column holds percentages, use --scale percent" in err
    # real log-odds (negative ones among them) draw nothing
    score = cancer["score"].clip(1e-6, 1 - 1e-6)
    cancer.assign(score=np.log(score / (1 - score))).to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path, "--scale", "log-odds")
    assert code == 0 and "percentages" not in err


def test_two_whole_number_columns_under_one_name_stay_refused(tmp_path, capsys):
    """'0,1' and '1,0' alone (a score and a label under a header naming one column) are not
    read as decimal commas: refused, naming the line, as before."""
    path = tmp_path / "pairs.csv"
    path.write_text("score\n" + "0,1\n1,0\n" * 20)
    code, _, err = run(capsys, "prevalence", "--unlabelled", path, "--score-column", "score",
                       "--source-prevalence", 0.5, "--resamples", 0)
    assert code == 1 and "line 2 has 2 fields but the header has 1" in err


def test_a_units_line_under_the_header_is_named(cancer, tmp_path, capsys):
    """Exports that write a line of units under the header ('(probability)', '(0/1)'): the
    message said only "'(probability)' is not a finite number" at row 2."""
    path = tmp_path / "units.csv"
    path.write_text("id,score,y\n,(probability),(0/1)\n" + cancer.to_csv(index=False,
                                                                          header=False))
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert "row 2 (counting the header as row 1): '(probability)' is not a finite number" in err
    assert "a line of units or notes under the header, delete it" in err
    # a bad value on the first row of an ordinary file is not called a units line
    frame = cancer.astype({"score": object})
    frame.loc[0, "score"] = "abc"
    frame.to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1 and "'abc' is not a finite number" in err and "units or notes" not in err
