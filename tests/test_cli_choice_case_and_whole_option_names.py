"""Choices are read whatever their case (``--method EM``, ``--format JSON``, ``--scale
Log_Odds``), and options must be written in full: an abbreviation (``--capac 0.1`` for
``--capacity``) is refused with the options it could mean, in every verb alike.

Before: ``--method EM`` stopped with "invalid choice: 'EM'"; ``--capac 0.1`` ran as
``--capacity 0.1`` without a word, while ``--cost-f 5`` stopped with argparse's "ambiguous
option" under the top-level usage; a misspelt required option (``--costfn 5``) gave "the
following arguments are required: --cost-fn" and no hint.

File: held-out scores of scikit-learn's breast cancer set (tests/_cli_helpers.py).
"""

from __future__ import annotations

import json

import pandas as pd
import pytest

from _cli_helpers import cancer_held_out, run_cli
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def held_out(tmp_path_factory):
    p, y = cancer_held_out()
    path = tmp_path_factory.mktemp("choices") / "held.csv"
    pd.DataFrame({"score": p, "benign": y}).to_csv(path, index=False)
    return path


def usage_error(capsys, *argv) -> str:
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    assert info.value.code == 2
    return capsys.readouterr().err


def cutoff_args(path):
    return ["cutoff", "--scores", path, "--score-column", "score", "--label-column", "benign",
            "--cost-fp", 1, "--cost-fn", 5, "--resamples", 0]


def test_choices_in_any_case_run_as_the_listed_choice(held_out, capsys):
    base = ["prevalence", "--unlabelled", held_out, "--score-column", "score",
            "--source-prevalence", 0.6, "--resamples", 0]
    code, out, _ = run_cli(capsys, *base, "--method", "EM", "--format", "JSON")
    assert code == 0
    upper = json.loads(out)
    assert upper["method"] == "em"
    code, out, _ = run_cli(capsys, *base, "--format", "json")
    assert code == 0
    assert json.loads(out)["prevalence"] == upper["prevalence"]
    # '_' for '-' and mixed case: the same log-odds reading as --scale log-odds
    code, out, _ = run_cli(capsys, *cutoff_args(held_out), "--scale", "PROBA", "--format", "Json")
    assert code == 0 and json.loads(out)["score_scale"] == "proba"


def test_a_wrong_choice_names_every_allowed_value_and_the_nearest(held_out, capsys):
    err = usage_error(capsys, "prevalence", "--unlabelled", held_out, "--score-column", "score",
                      "--source-prevalence", 0.6, "--method", "EMM")
    assert "usage: probwrap prevalence" in err
    assert "argument --method: invalid choice: 'EMM' (choose from em, bbse, acc, pacc" in err
    assert "did you mean em?" in err
    err = usage_error(capsys, *cutoff_args(held_out), "--guarantee", "Recal")
    assert "recall, precision, false_positive_rate, flagged_share" in err
    assert "did you mean recall?" in err


def test_choice_matcher_maps_case_and_separators():
    from probwrap.cli import choice_matcher

    match = choice_matcher(("venn_abers", "log-odds", "three-way"))
    assert match("VENN-ABERS") == "venn_abers"
    assert match("Log_Odds") == "log-odds"
    assert match(" three_way ") == "three-way"


def test_an_abbreviated_option_is_refused_with_what_it_may_mean(held_out, capsys):
    # ran as --capacity 0.1 before, without a word
    err = usage_error(capsys, *cutoff_args(held_out), "--capac", 0.1)
    assert "usage: probwrap cutoff" in err
    assert "unrecognized arguments: --capac 0.1" in err
    assert "--capac is not an option, and options are not abbreviated: did you mean " \
           "--capacity?" in err
    # a prefix of several options names them all
    err = usage_error(capsys, "cutoff", "--scores", held_out, "--score-column", "score",
                      "--label-column", "benign", "--cost", 5)
    assert "did you mean --cost-fp, --cost-fn, --cost-tp or --cost-tn?" in err
    # the same rule in a nested verb and at the top level
    err = usage_error(capsys, "calibrate", "fit", "--scores", held_out, "--score-column",
                      "score", "--label-column", "benign", "--meth", "platt", "--out",
                      held_out.with_name("m.json"))
    assert "usage: probwrap calibrate fit" in err and "did you mean --method?" in err
    err = usage_error(capsys, "--vers")
    assert "did you mean --version?" in err


def test_a_misspelt_required_option_gets_the_hint_not_only_required(held_out, capsys):
    err = usage_error(capsys, "cutoff", "--scores", held_out, "--score-column", "score",
                      "--label-column", "benign", "--cost-fp", 1, "--costfn", 5)
    assert "unrecognized arguments: --costfn 5" in err
    assert "--costfn: did you mean --cost-fn" in err
    assert "the following arguments are required" not in err
    # an option in the wrong case is named too
    err = usage_error(capsys, *cutoff_args(held_out), "--Capacity", 0.1)
    assert "--Capacity: did you mean --capacity?" in err


def test_values_that_look_like_options_are_left_to_argparse(held_out, capsys, tmp_path):
    # a negative cost and a title starting with dashes (argparse reads "--- a b" as a value)
    code, _, _ = run_cli(capsys, "cutoff", "--scores", held_out, "--score-column", "score",
                         "--label-column", "benign", "--cost-fp", 1, "--cost-fn", 5,
                         "--cost-tn", "-0.5", "--resamples", 0)
    assert code == 0
    code, _, _ = run_cli(capsys, "report", "--scores", held_out, "--score-column", "score",
                         "--label-column", "benign", "--cost-fp", 1, "--cost-fn", 5,
                         "--resamples", 10, "--title", "--- draft ---", "--out",
                         tmp_path / "r.html")
    assert code == 0
    assert "--- draft ---" in (tmp_path / "r.html").read_text(encoding="utf-8")
