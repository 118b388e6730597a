"""Weights written with a percent sign, OpenDocument workbooks, and awkward files given to
``prevalence --reference``.

- A weight column of ``20%`` cells was refused with the advice "write 20% as 0.2, or as 20 if
  the column counts in percent". The second choice is harmful: a column of whole numbers is a
  count table, which ``prevalence`` counts as cases, so its interval and test of no shift
  change (on these 289 rows: p-value 0.053 for the shares, 2.6e-58 for the whole percentages).
  The refusal now counts and names the rows holding a sign and advises the share only.
- An ``.ods`` workbook is refused; the message now says how to save the sheet as CSV (reading
  .ods needs odfpy, which is no dependency, so its sheets are not named).
- ``prevalence --reference`` on a reference file written with ``;`` and decimal commas,
  labels ``Yes``/``No``, scores ``85.2784%`` with ``--scale percent`` and reference weights
  ``"1,234.25"`` gives the plain file's estimate (a guard: it did before too).

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows) with invented weights. Every expected value is the
verb's own result on the plain file, or Kish's effective size computed here.
"""

from __future__ import annotations

import json
import zipfile

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import EXACT_FLOATS, cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")

PREVALENCE = ("--score-column", "score", "--resamples", 0, "--format", "json")


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    # invented whole-percent weights, 20 to 100
    w = 20 + (np.arange(y.size) * 37) % 81
    return pd.DataFrame({"id": np.arange(y.size), "score": np.round(p, 6), "y": y, "w": w})


def test_weights_with_percent_signs_are_refused_naming_the_rows_and_the_share(cancer, tmp_path,
                                                                            capsys):
    path = tmp_path / "signed.csv"
    cancer.assign(w=cancer.w.map(lambda v: f"{v}%")).to_csv(path, index=False)
    first = cancer.w.iloc[0]
    for argv in (
        ("cutoff", "--scores", path, "--score-column", "score", "--label-column", "y",
         "--weight-column", "w", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 0),
        ("prevalence", "--unlabelled", path, *PREVALENCE, "--weight-column", "w",
         "--source-prevalence", 0.6),
        ("prevalence", "--unlabelled", path, *PREVALENCE, "--reference", path,
         "--label-column", "y", "--reference-weight-column", "w"),
    ):
        code, out, err = run(capsys, *argv)
        assert code != 0 and out == ""
        assert len(err.strip().splitlines()) == 1, err
        assert f"{path}: column 'w', row 2 (counting the header as row 1): '{first}%'" in err
        assert "289 of 289 rows hold one: rows 2, 3, 4, 5, 6, ..." in err
        assert f"({first}% as {first / 100:.15g}; only the ratios of weights matter)" in err
        assert "count table" in err
        assert "or as 20 if the column counts in percent" not in err


def test_one_weight_with_a_percent_sign_is_named_with_its_row(cancer, tmp_path, capsys):
    path = tmp_path / "one.csv"
    w = cancer.w.astype(str)
    w.iloc[149] = "12,5 %"
    cancer.assign(w=w).to_csv(path, index=False, sep=";")
    code, _, err = run(capsys, "prevalence", "--unlabelled", path, *PREVALENCE,
                       "--weight-column", "w", "--source-prevalence", 0.6)
    assert code != 0
    assert "row 151 (counting the header as row 1): '12,5 %' is not a finite number" in err
    assert "(1 of 289 rows hold one: row 151 (counting the header as row 1))" in err
    # the share written with the file's decimal comma
    assert "(12,5 % as 0,125; only the ratios of weights matter)" in err


def test_the_share_the_message_advises_is_weighed_by_kish_whole_percent_as_cases(
        cancer, tmp_path, capsys):
    """Why the advice names the share only: the same weights written as whole numbers of
    percent are a count table, whose cases the estimate counts."""
    shares, whole = tmp_path / "shares.csv", tmp_path / "whole.csv"
    cancer.assign(w=cancer.w / 100).to_csv(shares, index=False)
    cancer.to_csv(whole, index=False)
    got = {}
    for name, path in (("shares", shares), ("whole", whole)):
        code, out, err = run(capsys, "prevalence", "--unlabelled", path, *PREVALENCE,
                             "--weight-column", "w", "--source-prevalence", 0.6)
        assert code == 0, err
        got[name] = json.loads(out)
    w = cancer.w.to_numpy(dtype=float)
    # Kish (1965), effective sample size (sum w)^2 / sum w^2: unchanged by scaling the weights
    assert got["shares"]["weights"]["effective_rows"] == pytest.approx(
        w.sum() ** 2 / (w ** 2).sum(), rel=1e-12)
    assert got["shares"]["weights"]["cases"] is None
    assert got["whole"]["weights"]["cases"] == pytest.approx(w.sum())
    assert got["whole"]["prevalence"] == pytest.approx(got["shares"]["prevalence"], rel=1e-9)
    # counted as 16 000 or so cases, the test of no shift is far stronger than by Kish's size
    assert got["whole"]["shift_statistic"] > 10 * got["shares"]["shift_statistic"]


def _ods(path, frame):
    """A minimal OpenDocument spreadsheet of two sheets (the scores and notes)."""
    def table(name, rows):
        cells = "".join("<table:table-row>" + "".join(
            f'<table:table-cell office:value-type="string"><text:p>{v}</text:p>'
            "</table:table-cell>" for v in row) + "</table:table-row>" for row in rows)
        return f'<table:table table:name="{name}">{cells}</table:table>'
    ns = ('xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
          'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
          'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0"')
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("mimetype", "application/vnd.oasis.opendocument.spreadsheet")
        z.writestr("content.xml", (
            f"<office:document-content {ns}><office:body><office:spreadsheet>"
            + table("scores", [list(frame.columns)] + frame.astype(str).values.tolist())
            + table("notes", [["exported"]])
            + "</office:spreadsheet></office:body></office:document-content>"))


def test_an_ods_workbook_is_refused_saying_how_to_save_the_sheet(cancer, tmp_path, capsys):
    book = tmp_path / "scores.ods"
    _ods(book, cancer.head(20))
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", plain, "--score-column", "score",
                       "--label-column", "y", "--method", "platt", "--out", tmp_path / "m.json")
    assert code == 0, err
    for argv in (
        ("cutoff", "--scores", book, "--score-column", "score", "--label-column", "y",
         "--cost-fp", 1, "--cost-fn", 5),
        ("calibrate", "apply", "--map", tmp_path / "m.json", "--scores", book,
         "--score-column", "score", "--out", tmp_path / "a.csv"),
        ("prevalence", "--unlabelled", book, *PREVALENCE, "--source-prevalence", 0.6),
        ("prevalence", "--unlabelled", plain, *PREVALENCE, "--reference", book,
         "--label-column", "y"),
    ):
        code, out, err = run(capsys, *argv)
        assert code != 0 and out == ""
        assert len(err.strip().splitlines()) == 1, err
        assert f"{book}: OpenDocument spreadsheet files are not read" in err
        assert "show the sheet holding the scores, then save a copy as Text CSV (.csv)" in err
        assert "notes" not in err  # the sheets are not read, so not named


def test_prevalence_reference_reads_awkward_reference_files_as_the_plain_one(cancer, tmp_path,
                                                                            capsys):
    plain = tmp_path / "plain.csv"
    cancer.to_csv(plain, index=False)
    percent = tmp_path / "percent.csv"
    cancer.assign(score=(cancer.score * 100).map(lambda x: f"{x:.4f}")).to_csv(percent,
                                                                                index=False)

    def estimate(reference, unlabelled=plain, *extra):
        code, out, err = run(capsys, "prevalence", "--unlabelled", unlabelled, *PREVALENCE,
                             "--reference", reference, "--label-column", "y", *extra)
        assert code == 0, err
        return {k: v for k, v in json.loads(out).items() if k != "labels"}

    want = estimate(plain)
    want_weighted = estimate(plain, plain, "--reference-weight-column", "w")
    assert want_weighted["prevalence"] != want["prevalence"]

    european = tmp_path / "european.csv"
    cancer.to_csv(european, sep=";", decimal=",", index=False)
    assert estimate(european) == want
    words = tmp_path / "words.csv"
    cancer.assign(y=np.where(cancer.y == 1, "Yes", "No")).to_csv(words, index=False)
    assert estimate(words, plain, "--positive-label", "Yes") == want
    # weights of thousands written with separators: read as the same numbers written plain
    big, grouped = tmp_path / "big.csv", tmp_path / "grouped.csv"
    cancer.assign(w=cancer.w * 1000 + 0.25).to_csv(big, index=False)
    cancer.assign(w=(cancer.w * 1000 + 0.25).map(lambda v: f"{v:,.2f}")).to_csv(grouped,
                                                                              index=False)
    assert estimate(grouped, plain, "--reference-weight-column", "w") == estimate(
        big, plain, "--reference-weight-column", "w")
    signed = tmp_path / "signed.csv"
    cancer.assign(score=(cancer.score * 100).map(lambda x: f"{x:.4f}%")).to_csv(signed,
                                                                                index=False)
    assert estimate(signed, percent, "--scale", "percent") == estimate(
        percent, percent, "--scale", "percent")
    # the file read back holds the scores as written (nothing rewritten in place)
    back = pd.read_csv(plain, **EXACT_FLOATS)
    np.testing.assert_array_equal(back["score"].to_numpy(), cancer["score"].to_numpy())
