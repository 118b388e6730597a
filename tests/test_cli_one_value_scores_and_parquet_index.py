"""Score files as users have them: a score column holding one value in every row, and Parquet
files whose score column was made the index before saving.

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows). Each test failed on the code before this change
(see docs/command_line.md, "Scores that are all one value, Parquet indexes, code pages and misnamed files").
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")

ONE_VALUE = "holds one score"


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"id": np.arange(y.size), "score": np.round(p, 6), "y": y})


@pytest.fixture()
def one_value(cancer, tmp_path):
    """Every score exported as 0.5 (a default value written in place of the model's)."""
    path = tmp_path / "one value.csv"
    cancer.assign(score=0.5).to_csv(path, index=False)
    return path


def _costs(*extra):
    return ("--score-column", "score", "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5,
            *extra)


def test_cutoff_on_one_value_warns_and_says_it_acts_on_every_row(cancer, one_value, capsys):
    """Before: cutoff 0.25 and a settled cutoff of -0.5 on probabilities, without a word."""
    code, out, err = run(capsys, "cutoff", "--scores", one_value, *_costs("--resamples", 0,
                                                                          "--format", "json"))
    assert code == 0, err
    assert ONE_VALUE in err and "'score'" in err and "0.5, in all 289 rows" in err
    assert str(one_value) in err and "every row or on none" in err
    summary = json.loads(out)
    # every score 0.5 lies above the Bayes cutoff 1/(1+5) (Elkan 2001, eq. for the optimal
    # threshold c_fp / (c_fp + c_fn)), so the cutoff acts on every row: the cost is the share
    # of negatives times the false-positive cost
    negatives = float(np.mean(cancer["y"] == 0))
    assert summary["flagged_share"] == 1.0
    assert summary["expected_cost"] == pytest.approx(1.0 * negatives, rel=1e-12)
    code, out, err = run(capsys, "cutoff", "--scores", one_value, *_costs("--resamples", 0))
    assert code == 0
    # Platt scaling of one value gives every row one probability, the share of positives
    # (0.626 > 1/6), so the recalibrated Bayes cutoff is the "every row" cutoff below 0
    assert summary["settled_cutoff"]["cutoff"] < 0
    settled = next(line for line in out.splitlines() if "settled cutoff" in line)
    assert "below every probability: act on every row" in settled


def test_calibrate_fit_and_prevalence_on_one_value_warn(one_value, tmp_path, capsys):
    code, out, err = run(capsys, "calibrate", "fit", "--scores", one_value, "--score-column",
                         "score", "--label-column", "y", "--method", "platt", "--out",
                         tmp_path / "map.json")
    assert code == 0, err
    assert ONE_VALUE in err and "the map can learn one probability" in err
    code, out, err = run(capsys, "prevalence", "--unlabelled", one_value, "--score-column",
                         "score", "--source-prevalence", 0.6, "--resamples", 0)
    assert code == 0, err
    assert ONE_VALUE in err and "no mix of the two classes" in err
    # as a labelled reference it is named too, with the reference's own wording
    code, out, err = run(capsys, "prevalence", "--unlabelled", one_value, "--score-column",
                         "score", "--reference", one_value, "--label-column", "y",
                         "--resamples", 0)
    assert code == 0, err
    assert "the reference cannot show how the two classes' scores differ" in err


def test_report_on_one_value_warns_and_reads_a_negative_cutoff(one_value, tmp_path, capsys):
    """Before: "recommended cutoff -0.5000" in the summary line, a cutoff that reads as a
    probability below 0, with no warning naming the column."""
    code, out, err = run(capsys, "report", "--scores", one_value, *_costs(
        "--resamples", 10, "--out", tmp_path / "r.html", "--format", "json"))
    assert code == 0, err
    assert ONE_VALUE in err and "acting on every row or on none" in err
    summary = json.loads(out)
    code, out, err = run(capsys, "report", "--scores", one_value, *_costs(
        "--resamples", 10, "--out", tmp_path / "r.html"))
    assert code == 0, err
    assert summary["recommended_cutoff"] < 0
    assert "(below every probability: act on every row)" in out


def test_scores_that_vary_draw_no_one_value_warning(cancer, tmp_path, capsys):
    path = tmp_path / "plain.csv"
    cancer.to_csv(path, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", path, *_costs("--resamples", 0))
    assert code == 0 and ONE_VALUE not in err


def test_parquet_with_the_score_column_as_index_is_read(cancer, tmp_path, capsys):
    """``df.set_index("score").to_parquet(...)`` stores the column as the index; before:
    "no column 'score' (given by --score-column); the file has columns 'id', 'y'"."""
    plain, indexed = tmp_path / "plain.parquet", tmp_path / "indexed.parquet"
    cancer.to_parquet(plain)
    cancer.set_index("score").to_parquet(indexed)
    results = []
    for path in (plain, indexed):
        code, out, err = run(capsys, "cutoff", "--scores", path, *_costs(
            "--resamples", 0, "--format", "json"))
        assert code == 0, err
        results.append(json.loads(out))
    assert results[1]["cutoff"] == results[0]["cutoff"]
    assert results[1]["expected_cost"] == results[0]["expected_cost"]
    assert results[1]["n_rows"] == len(cancer)
    # an index of two named levels: both are columns
    two = tmp_path / "two.parquet"
    cancer.set_index(["id", "score"]).to_parquet(two)
    code, out, err = run(capsys, "prevalence", "--unlabelled", two, "--score-column", "score",
                         "--source-prevalence", 0.6, "--resamples", 0, "--format", "json")
    assert code == 0, err
    code, out2, err = run(capsys, "prevalence", "--unlabelled", plain, "--score-column",
                          "score", "--source-prevalence", 0.6, "--resamples", 0,
                          "--format", "json")
    assert json.loads(out) == json.loads(out2)
