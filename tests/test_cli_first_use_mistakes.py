"""Mistakes a new user makes on the first runs of the command line: a misspelt option, the
score and label columns given the wrong way round, an output file that already exists, and
library names in the warnings of a weighted report.

Files: held-out scores of scikit-learn's breast cancer (cross-validated logistic regression on
two features), saved as a user would (pandas ``to_csv`` with the index, labels as words).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict

from _cli_helpers import run_cli as run
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


def usage_error(capsys, *argv):
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    assert info.value.code == 2
    return capsys.readouterr().err


@pytest.fixture(scope="module")
def scores_file(tmp_path_factory):
    data = load_breast_cancer()
    X = data.data[:, [0, 1]]  # mean radius, mean texture
    y = data.target  # 1 = benign
    p = cross_val_predict(LogisticRegression(max_iter=1000), X, y, cv=5,
                          method="predict_proba")[:, 1]
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"prob": p, "benign": np.where(y == 1, "yes", "no"),
                          "benign01": y, "w": rng.uniform(0.5, 2.0, y.shape[0]).round(3)})
    path = tmp_path_factory.mktemp("first_use") / "held out.csv"
    frame.to_csv(path)  # with the index, as pandas writes by default
    return path


def test_misspelt_option_names_the_verb_and_the_option(capsys, scores_file):
    # before: the top-level usage ("probwrap [-h] [--version] VERB ...") and
    # "probwrap: error: unrecognized arguments: --capacty 0.1", no hint
    err = usage_error(capsys, "cutoff", "--scores", scores_file, "--score-column", "prob",
                      "--label-column", "benign", "--positive-label", "yes", "--cost-fp", 1,
                      "--cost-fn", 5, "--capacty", 0.1)
    assert "usage: probwrap cutoff" in err
    assert "probwrap cutoff: error: unrecognized arguments: --capacty 0.1" in err
    assert "did you mean --capacity?" in err
    # a nested verb: its own usage line and the nearest option only
    err = usage_error(capsys, "calibrate", "fit", "--scores", scores_file, "--score-column",
                      "prob", "--label-column", "benign01", "--methd", "auto", "--out",
                      scores_file.with_name("m.json"))
    assert "usage: probwrap calibrate fit" in err
    assert "did you mean --method?" in err
    # a stray file name: no guess, the verb's usage
    err = usage_error(capsys, "prevalence", "--unlabelled", scores_file, "other.csv",
                      "--score-column", "prob", "--source-prevalence", 0.6)
    assert "probwrap prevalence: error: unrecognized arguments: other.csv;" in err
    assert "did you mean" not in err


def test_score_column_of_words_says_the_columns_look_swapped(capsys, scores_file):
    # before: "'yes' is not a finite number", nothing more
    code, _, err = run(capsys, "cutoff", "--scores", scores_file, "--score-column", "benign",
                       "--label-column", "prob", "--positive-label", "yes",
                       "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1
    assert "is not a finite number" in err
    assert "the two values" in err and "swap the two column names" in err
    # a text column of more than two values is not called a label column
    frame = pd.read_csv(scores_file, index_col=0)
    frame["benign"] = np.where(frame.prob > 0.9, "yes", np.where(frame.prob > 0.1, "no",
                                                                   "maybe"))
    other = scores_file.with_name("three words.csv")
    frame.to_csv(other)
    code, _, err = run(capsys, "cutoff", "--scores", other, "--score-column", "benign",
                       "--label-column", "prob", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1 and "swap" not in err


def test_label_column_of_scores_says_the_columns_look_swapped(capsys, scores_file):
    # before: "must hold exactly two labels (binary outcome); it holds 569: 0.0..., ..."
    for verb in (["cutoff", "--cost-fp", 1, "--cost-fn", 5],
                 ["calibrate", "fit", "--out", scores_file.with_name("swap.json")]):
        code, _, err = run(capsys, *verb, "--scores", scores_file, "--score-column",
                           "benign01", "--label-column", "prob")
        assert code == 1
        assert "must hold exactly two labels" in err
        assert ("the two column names look swapped (give --score-column 'prob' "
                "--label-column 'benign01')") in err


def test_existing_output_file_is_named_as_replaced(capsys, scores_file):
    out = scores_file.with_name("map.json")
    out.unlink(missing_ok=True)
    args = ["calibrate", "fit", "--scores", scores_file, "--score-column", "prob",
            "--label-column", "benign01", "--method", "platt", "--out", out]
    code, first, _ = run(capsys, *args)
    assert code == 0 and "replaced" not in first
    # before: the same line, and the earlier map was gone without a word
    code, second, _ = run(capsys, *args)
    assert code == 0 and f"saved it to {out} (replaced the file that was there)" in second
    table = scores_file.with_name("calibrated.csv")
    table.unlink(missing_ok=True)
    apply = ["calibrate", "apply", "--map", out, "--scores", scores_file, "--score-column",
             "prob", "--out", table]
    code, first, _ = run(capsys, *apply)
    assert code == 0 and "replaced" not in first
    code, second, _ = run(capsys, *apply)
    assert code == 0 and second.rstrip().endswith("(replaced the file that was there)")


def test_weighted_report_warnings_speak_of_flags_not_python_names(capsys, scores_file):
    # before: "PriorEstimator.fit: the row weights (...) is read as row counts ... changes
    # that test's choice and calibrate_output ... pass them divided by their sum", and
    # "pass their group as `cells` (or `--cell-column`)"
    frame = pd.read_csv(scores_file, index_col=0)
    unlabelled = scores_file.with_name("batch.csv")
    frame[["prob"]].iloc[::3].to_csv(unlabelled, index=False)
    code, _, err = run(capsys, "report", "--scores", scores_file, "--score-column", "prob",
                       "--label-column", "benign01", "--cost-fp", 1, "--cost-fn", 5,
                       "--weight-column", "w", "--unlabelled", unlabelled, "--resamples", 20,
                       "--out", scores_file.with_name("page.html"))
    assert code == 0
    assert "read as row counts" in err  # the warning is there ...
    for python_name in ("PriorEstimator", "calibrate_output", "`cells`", "pass them",
                        "weights) is read"):
        assert python_name not in err  # ... in the command line's words
    assert "divide the column by its sum in the file" in err


def test_weight_column_of_the_reference_file_names_the_reference_option(capsys, scores_file):
    # before: "batch.csv: no column 'w' (given by --weight-column); the file has columns
    # 'prob'", with no word that --weight-column weights the unlabelled rows only
    frame = pd.read_csv(scores_file, index_col=0)
    unlabelled = scores_file.with_name("batch only scores.csv")
    frame[["prob"]].iloc[::3].to_csv(unlabelled, index=False)
    code, _, err = run(capsys, "prevalence", "--unlabelled", unlabelled, "--score-column",
                       "prob", "--reference", scores_file, "--label-column", "benign01",
                       "--weight-column", "w", "--resamples", 0)
    assert code == 1
    assert "--reference-weight-column 'w' instead" in err
    # the option it names works on the same files
    code, out, _ = run(capsys, "prevalence", "--unlabelled", unlabelled, "--score-column",
                       "prob", "--reference", scores_file, "--label-column", "benign01",
                       "--reference-weight-column", "w", "--resamples", 0)
    assert code == 0 and "reference weights: column 'w'" in out


def test_missing_column_message_explains_the_unnamed_index_column(capsys, scores_file):
    # before: "the file has columns 'Unnamed: 0', 'prob', ...": a name that is not in the file
    code, _, err = run(capsys, "cutoff", "--scores", scores_file, "--score-column", "Prob",
                       "--label-column", "benign01", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1
    assert ("'Unnamed: 0' is an empty header cell, such as the row numbers pandas' to_csv "
            "writes first") in err
