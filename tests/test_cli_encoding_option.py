"""``--encoding``: CSV files a spreadsheet saved in its code page rather than UTF-8.

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows), written with a header and labels holding
accented letters, as Windows-1252 (Excel's "CSV (comma delimited)" in Western Europe) and as
UTF-8. Before the option the Windows-1252 file could only be refused (the encoding is not
guessed) and converted outside the program; each test failed on the code before.
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
def frame():
    p, y = cancer_held_out()
    return pd.DataFrame({"numéro": np.arange(y.size), "probabilité": np.round(p, 6),
                         "état": np.where(y == 1, "bénin", "malin")})


def _cutoff(capsys, path, *extra):
    return run(capsys, "cutoff", "--scores", path, "--score-column", "probabilité",
               "--label-column", "état", "--positive-label", "bénin", "--cost-fp", 1,
               "--cost-fn", 5, "--resamples", 0, "--format", "json", *extra)


def test_a_windows_1252_file_is_read_with_encoding(frame, tmp_path, capsys):
    utf8, cp = tmp_path / "utf8.csv", tmp_path / "export 1252.csv"
    frame.to_csv(utf8, index=False)
    frame.to_csv(cp, index=False, encoding="cp1252")
    code, out, err = _cutoff(capsys, cp)
    assert code == 1 and "is not UTF-8 text" in err and "--encoding cp1252" in err
    code, plain, err = _cutoff(capsys, utf8)
    assert code == 0, err
    code, out, err = _cutoff(capsys, cp, "--encoding", "cp1252")
    assert code == 0, err
    assert json.loads(out) == json.loads(plain)
    assert json.loads(out)["labels"] == {"negative": "malin", "positive": "bénin"}
    # the choice is read in any case and spelling Python's codecs know
    code, out, err = _cutoff(capsys, cp, "--encoding", "Windows-1252")
    assert code == 0 and json.loads(out) == json.loads(plain)


def test_apply_writes_a_windows_1252_file_back_as_utf8_with_a_byte_order_mark(
        frame, tmp_path, capsys):
    utf8, cp = tmp_path / "utf8.csv", tmp_path / "export.csv"
    frame.to_csv(utf8, index=False)
    frame.to_csv(cp, index=False, encoding="cp1252")
    map_path = tmp_path / "map.json"
    code, out, err = run(capsys, "calibrate", "fit", "--scores", cp, "--score-column",
                         "probabilité", "--label-column", "état", "--positive-label", "bénin",
                         "--method", "platt", "--encoding", "cp1252", "--out", map_path)
    assert code == 0, err
    outputs = {}
    for name, path, extra in (("utf8", utf8, ()), ("cp", cp, ("--encoding", "cp1252"))):
        outputs[name] = tmp_path / f"out-{name}.csv"
        code, out, err = run(capsys, "calibrate", "apply", "--map", map_path, "--scores", path,
                             "--score-column", "probabilité", "--out", outputs[name], *extra)
        assert code == 0, err
    raw = outputs["cp"].read_bytes()
    # UTF-8 with a byte-order mark, which spreadsheets read as UTF-8: no letter is lost
    assert raw.startswith("\ufeffnuméro,probabilité,état,".encode())
    back = pd.read_csv(outputs["cp"], encoding="utf-8-sig")
    plain = pd.read_csv(outputs["utf8"])
    assert list(back["état"]) == list(frame["état"])
    np.testing.assert_array_equal(back["calibrated_probability"],
                                  plain["calibrated_probability"])


def test_a_byte_the_encoding_lacks_and_an_unknown_encoding(frame, tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    text = frame.head(40).to_csv(index=False).encode("cp1252")
    lines = text.split(b"\n")
    lines[3] = lines[3] + b"\x81"  # a byte Windows-1252 leaves undefined
    bad.write_bytes(b"\n".join(lines))
    code, out, err = _cutoff(capsys, bad, "--encoding", "cp1252")
    assert code == 1 and out == ""
    assert "cannot be read as cp1252 (given by --encoding): byte 0x81" in err
    assert "of line 4" in err
    with pytest.raises(SystemExit) as info:
        _cutoff(capsys, bad, "--encoding", "klingon")
    err = capsys.readouterr().err
    assert info.value.code == 2 and "argument --encoding" in err and "cp1252" in err


def test_a_byte_order_mark_wins_over_encoding(frame, tmp_path, capsys):
    """A file that starts with a UTF-8 byte-order mark is UTF-8 whatever --encoding says (read
    as cp1252, the mark and every accented letter would become two or three letters)."""
    path = tmp_path / "bom.csv"
    frame.to_csv(path, index=False, encoding="utf-8-sig")
    code, out, err = _cutoff(capsys, path, "--encoding", "cp1252")
    assert code == 0, err
    assert json.loads(out)["labels"]["positive"] == "bénin"
    assert json.loads(out)["n_rows"] == len(frame)


def test_a_utf8_file_beside_a_windows_1252_one_is_read_as_utf8(frame, tmp_path, capsys):
    """One --encoding names every CSV file of a command; a UTF-8 reference beside a
    Windows-1252 batch was read as cp1252 ('bénin' as 'bÃ©nin': no label 'bénin'). A file
    whose bytes beyond ASCII all form UTF-8 characters is read as UTF-8, with a warning."""
    utf8, cp = tmp_path / "reference.csv", tmp_path / "batch.csv"
    frame.to_csv(utf8, index=False)
    frame.iloc[::2].to_csv(cp, index=False, encoding="cp1252")
    plain_batch = tmp_path / "batch-utf8.csv"
    frame.iloc[::2].to_csv(plain_batch, index=False)

    def prevalence(batch, *extra):
        return run(capsys, "prevalence", "--unlabelled", batch, "--score-column", "probabilité",
                   "--reference", utf8, "--label-column", "état", "--positive-label", "bénin",
                   "--resamples", 0, "--format", "json", *extra)

    code, expected, err = prevalence(plain_batch)
    assert code == 0, err
    code, out, err = prevalence(cp, "--encoding", "cp1252")
    assert code == 0, err
    assert json.loads(out) == json.loads(expected)
    assert f"{utf8}: read as UTF-8, not cp1252 (--encoding)" in err
    assert str(cp) + ":" not in err


def test_standard_input_in_a_code_page_and_in_utf8(frame, tmp_path, capsys, monkeypatch):
    """--encoding reads standard input too; the UTF-8 warning names "standard input", not the
    temporary copy it is read from."""
    import io
    import sys

    plain = tmp_path / "batch.csv"
    frame.to_csv(plain, index=False)

    def prevalence(data, *extra):
        monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(data)))
        return run(capsys, "prevalence", "--unlabelled", "-", "--score-column", "probabilité",
                   "--source-prevalence", 0.6, "--resamples", 0, "--format", "json", *extra)

    expected = json.loads(run(capsys, "prevalence", "--unlabelled", plain, "--score-column",
                              "probabilité", "--source-prevalence", 0.6, "--resamples", 0,
                              "--format", "json")[1])
    code, out, err = prevalence(frame.to_csv(index=False).encode("cp1252"),
                                "--encoding", "cp1252")
    assert code == 0, err
    assert json.loads(out) == expected
    code, out, err = prevalence(frame.to_csv(index=False).encode("utf-8"),
                                "--encoding", "cp1252")
    assert code == 0, err
    assert json.loads(out) == expected
    assert "standard input: read as UTF-8, not cp1252" in err and "probwrap-stdin" not in err
