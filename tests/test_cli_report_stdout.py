"""``report --out -`` writes the HTML page to standard output; ``demo --out -`` is refused.

Standard output then carries the page alone, byte for byte the file ``--out page.html`` writes
with the same arguments; the summary line and warnings go to stderr. ``--format json`` with
``--out -`` would put two things on standard output, and ``demo`` writes a folder of files:
both are usage errors (exit 2). Before 4 December 2026 ``report --out -`` was refused and
``demo --out -`` made a folder named ``-`` without a word.

Data: held-out probabilities of a logistic regression on scikit-learn's bundled breast cancer
set (Wolberg, Street & Mangasarian 1995).
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from probwrap.cli import main

ROOT = Path(__file__).resolve().parents[1]


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def scores(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(max_iter=5000).fit(X[:300, :5], y[:300])
    p = model.predict_proba(X[300:, :5])[:, 1]
    root = tmp_path_factory.mktemp("report_stdout")
    # 25 rows: the under-30-rows warning must go to stderr, not into the page
    frame = pd.DataFrame({"risk": p, "y": y[300:]})
    frame.to_csv(root / "held.csv", index=False)
    frame.iloc[:25].to_csv(root / "few.csv", index=False)
    return root


ARGS = ["--score-column", "risk", "--label-column", "y", "--cost-fp", "1", "--cost-fn", "4",
        "--resamples", "20"]


def _env() -> dict:
    return {**os.environ, "PYTHONPATH": str(ROOT), "OMP_NUM_THREADS": "1",
            "OPENBLAS_NUM_THREADS": "1", "MPLBACKEND": "Agg"}


def test_report_page_on_standard_output_is_the_file(scores, tmp_path):
    cli = [sys.executable, "-m", "probwrap.cli", "report", "--scores", str(scores / "few.csv"),
           *ARGS]
    to_file = subprocess.run([*cli, "--out", str(tmp_path / "page.html")], capture_output=True,
                             env=_env(), timeout=300)
    assert to_file.returncode == 0, to_file.stderr.decode()
    piped = subprocess.run([*cli, "--out", "-"], capture_output=True, env=_env(), timeout=300)
    assert piped.returncode == 0, piped.stderr.decode()
    page = (tmp_path / "page.html").read_bytes()
    assert piped.stdout == page  # the page alone, byte for byte
    assert piped.stdout.startswith(b"<!DOCTYPE html>")
    err = piped.stderr.decode()
    # what the verb says went to stderr: the warning and the summary line
    assert "warning:" in err and "only 25 labelled rows" in err
    assert "wrote the page to standard output: 25 labelled rows" in err
    assert b"wrote" not in piped.stdout and b"warning:" not in piped.stdout
    assert not (tmp_path / "-").exists()


def test_report_reads_and_writes_standard_streams(scores, capsys, monkeypatch, tmp_path):
    """``--scores -`` and ``--out -`` together: the page as from the file, bar the line that
    names the input ("standard input")."""
    import io

    code = main(["report", "--scores", str(scores / "held.csv"), *ARGS,
                 "--out", str(tmp_path / "page.html")])
    assert code == 0
    capsys.readouterr()
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(
        (scores / "held.csv").read_bytes())))
    code = main(["report", "--scores", "-", *ARGS, "--out", "-"])
    out, err = capsys.readouterr()
    assert code == 0, err
    page = (tmp_path / "page.html").read_text(encoding="utf-8")
    assert out == page.replace(str(scores / "held.csv"), "standard input")
    assert out != page
    assert err.startswith("wrote the page to standard output: 269 labelled rows")


def test_report_json_summary_with_page_on_standard_output_is_refused(scores, capsys):
    with pytest.raises(SystemExit) as info:
        main(["report", "--scores", str(scores / "held.csv"), *ARGS, "--out", "-",
              "--format", "json"])
    assert info.value.code == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert "--out - with --format json" in err and "cannot both go to standard output" in err


@pytest.mark.parametrize("variant", ["damage", "three-way"])
def test_demo_refuses_standard_output(capsys, monkeypatch, tmp_path, variant):
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SystemExit) as info:
        main(["demo", "--variant", variant, "--n-train", "500", "--out", "-"])
    assert info.value.code == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert "--out -: --out names the folder the demo writes into" in err
    assert "standard output cannot be a folder" in err
    assert not (tmp_path / "-").exists()  # no folder named "-"
