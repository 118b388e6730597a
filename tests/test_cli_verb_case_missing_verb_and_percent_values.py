"""First-use trips at the start of a command: a verb typed with capitals (``probwrap Cutoff``;
choices are read whatever their case, verbs now too), no verb at all (``probwrap``,
``probwrap calibrate``: "the following arguments are required: VERB", without the verbs), and a
share typed with a percent sign (``--source-prevalence 32%``: "'32%' is not a number"), and a
column name with a space left unquoted in the shell (``--score-column forest score``:
"unrecognized arguments: score", statsmodels' ``fair`` set scored by a forest)."""

from __future__ import annotations

import pandas as pd
import pytest

from _cli_helpers import cancer_held_out, run_cli
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


def usage_error(capsys, *argv) -> str:
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    assert info.value.code == 2
    return capsys.readouterr().err


@pytest.fixture(scope="module")
def held_out(tmp_path_factory):
    p, y = cancer_held_out()
    path = tmp_path_factory.mktemp("verbs") / "held.csv"
    pd.DataFrame({"score": p, "benign": y}).to_csv(path, index=False)
    return path


def test_a_verb_in_capitals_runs_as_the_verb(held_out, capsys, tmp_path):
    args = ["--scores", held_out, "--score-column", "score", "--label-column", "benign"]
    code, out, _ = run_cli(capsys, "Cutoff", *args, "--cost-fp", 1, "--cost-fn", 5,
                           "--resamples", 0)
    assert code == 0 and out.startswith("cost-optimal cutoff for ")
    code, out, _ = run_cli(capsys, "CALIBRATE", "Fit", *args, "--method", "platt", "--out",
                           tmp_path / "m.json")
    assert code == 0 and (tmp_path / "m.json").exists()


def test_no_verb_lists_the_verbs(capsys):
    err = usage_error(capsys)
    assert ("probwrap: error: give a VERB: one of demo, calibrate, cutoff, prevalence, report "
            "('probwrap --help' says what each does)") in err
    err = usage_error(capsys, "calibrate")
    assert "probwrap calibrate: error: give a STEP: one of fit, apply" in err
    # help and the version still answer without a verb
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.startswith("probwrap ")


def test_a_share_with_a_percent_sign_says_what_to_write(held_out, capsys):
    err = usage_error(capsys, "prevalence", "--unlabelled", held_out, "--score-column", "score",
                      "--source-prevalence", "32%")
    assert "argument --source-prevalence: '32%' is not a number (a percent sign is not read: " \
           "write 32% as 0.32)" in err
    err = usage_error(capsys, "cutoff", "--scores", held_out, "--score-column", "score",
                      "--label-column", "benign", "--cost-fp", 1, "--cost-fn", 5,
                      "--capacity", "12.5 %")
    assert "write 12.5 % as 0.125" in err


def test_a_name_with_a_space_left_unquoted_is_shown_quoted(held_out, capsys):
    err = usage_error(capsys, "cutoff", "--scores", held_out, "--score-column", "forest",
                      "score", "--label-column", "benign", "--cost-fp", 1, "--cost-fn", 5)
    assert ("unrecognized arguments: score (if 'forest score' is one value of --score-column, "
            'put it in quotes: --score-column "forest score")') in err
    err = usage_error(capsys, "report", "--scores", held_out, "--score-column", "score",
                      "--label-column", "benign", "--title", "Q3", "parcel", "risk", "--out",
                      "r.html")
    assert '--title "Q3 parcel risk"' in err
    # two whole file names where one is taken: no such hint
    err = usage_error(capsys, "prevalence", "--unlabelled", held_out, "other.csv",
                      "--score-column", "score", "--source-prevalence", 0.6)
    assert "unrecognized arguments: other.csv;" in err and "quotes" not in err
