"""Scores written as percentages (0-100) are read with ``--scale percent``, which divides each
by 100: every verb then gives what it gives for the same scores written as probabilities.
Without it they stay refused, and the message names ``--scale percent``; nothing is rescaled
unless asked.

Before: ``--scale`` took proba and log-odds only, so a percent column had to be rewritten by
hand ("look like percentages: divide them by 100").

File: held-out scores of scikit-learn's breast cancer set (tests/_cli_helpers.py), written once
as probabilities and once as percentages (the same numbers times 100).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import cancer_held_out, run_cli

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    p, y = cancer_held_out()
    p = np.round(p, 4)  # so that the percentages (2 decimals) are the same numbers exactly
    root = tmp_path_factory.mktemp("percent")
    label = np.where(y == 1, "benign", "malignant")
    pd.DataFrame({"score": p, "diagnosis": label}).to_csv(root / "proba.csv", index=False)
    pd.DataFrame({"score": np.round(100 * p, 2), "diagnosis": label}).to_csv(
        root / "percent.csv", index=False)
    return root


def _json(capsys, *argv):
    code, out, err = run_cli(capsys, *argv, "--format", "json")
    assert code == 0, err
    return json.loads(out), err


def test_without_the_option_percentages_are_refused_naming_it(files, capsys):
    code, _, err = run_cli(capsys, "cutoff", "--scores", files / "percent.csv", "--score-column",
                           "score", "--label-column", "diagnosis", "--positive-label", "benign",
                           "--cost-fp", 5, "--cost-fn", 1)
    assert code == 1
    assert "look like percentages: give --scale percent, which divides every score by 100" in err


def test_cutoff_on_percentages_is_the_cutoff_on_probabilities(files, capsys):
    args = ["--score-column", "score", "--label-column", "diagnosis", "--positive-label",
            "benign", "--cost-fp", 5, "--cost-fn", 1, "--resamples", 50]
    proba, _ = _json(capsys, "cutoff", "--scores", files / "proba.csv", *args)
    percent, _ = _json(capsys, "cutoff", "--scores", files / "percent.csv", *args,
                       "--scale", "percent")
    assert percent["score_column_divided_by"] == 100
    for key in ("cutoff", "expected_cost", "flagged_share", "cutoff_range", "cutoff_interval"):
        np.testing.assert_allclose(percent[key], proba[key], rtol=1e-12, err_msg=key)
    code, out, _ = run_cli(capsys, "cutoff", "--scores", files / "percent.csv", *args,
                           "--scale", "percent")
    assert code == 0
    assert f"act when the score is above {100 * proba['cutoff']:.6g}" in out


def test_prevalence_and_a_map_on_percentages_match_probabilities(files, capsys, tmp_path):
    base = ["--score-column", "score", "--resamples", 0]
    ref = ["--label-column", "diagnosis", "--positive-label", "benign"]
    proba, _ = _json(capsys, "prevalence", "--unlabelled", files / "proba.csv", *base,
                     "--reference", files / "proba.csv", *ref)
    percent, _ = _json(capsys, "prevalence", "--unlabelled", files / "percent.csv", *base,
                       "--reference", files / "percent.csv", *ref, "--scale", "percent")
    assert percent["prevalence"] == pytest.approx(proba["prevalence"], rel=1e-9)
    # a map fitted on percentages takes probabilities (recorded as proba) ...
    fit = ["--score-column", "score", *ref, "--method", "platt"]
    assert run_cli(capsys, "calibrate", "fit", "--scores", files / "proba.csv", *fit,
                   "--out", tmp_path / "p.json")[0] == 0
    assert run_cli(capsys, "calibrate", "fit", "--scores", files / "percent.csv", *fit,
                   "--scale", "percent", "--out", tmp_path / "q.json")[0] == 0
    p_map = json.loads((tmp_path / "p.json").read_text())
    q_map = json.loads((tmp_path / "q.json").read_text())
    assert q_map["score_scale"] == "proba"
    # ... and, applied with --scale percent to the percent file, gives the same probabilities
    for name, src, extra in (("p", "proba.csv", []), ("q", "percent.csv", ["--scale", "percent"])):
        code, _, err = run_cli(capsys, "calibrate", "apply", "--map", tmp_path / f"{name}.json",
                               "--scores", files / src, "--score-column", "score", *extra,
                               "--out", tmp_path / f"{name}.csv")
        assert code == 0, err
    a = pd.read_csv(tmp_path / "p.csv")["calibrated_probability"]
    b = pd.read_csv(tmp_path / "q.csv")["calibrated_probability"]
    np.testing.assert_allclose(b, a, rtol=1e-9)
    assert p_map["method"] == q_map["method"] == "platt"


def test_percent_scale_refuses_values_outside_0_100_and_warns_on_probabilities(files, capsys,
                                                                                  tmp_path):
    frame = pd.read_csv(files / "percent.csv")
    frame.loc[3, "score"] = 140.0
    frame.to_csv(tmp_path / "bad.csv", index=False)
    code, _, err = run_cli(capsys, "prevalence", "--unlabelled", tmp_path / "bad.csv",
                           "--score-column", "score", "--source-prevalence", 0.6,
                           "--scale", "percent")
    assert code == 1
    assert "column 'score', row 5 (counting the header as row 1): 140.0 is not a percentage " \
           "in [0, 100]" in err
    # probabilities passed as percentages: a warning, the run goes on
    code, _, err = run_cli(capsys, "prevalence", "--unlabelled", files / "proba.csv",
                           "--score-column", "score", "--source-prevalence", 0.6,
                           "--scale", "percent", "--resamples", 0)
    assert code == 0
    assert "as probabilities do, but --scale percent divides them by 100" in err


def test_class_columns_refuse_the_percent_scale(files, capsys, tmp_path):
    with pytest.raises(SystemExit) as info:
        from probwrap.cli import main

        main(["report", "--scores", str(files / "proba.csv"), "--class-columns", "a,b",
              "--label-column", "diagnosis", "--scale", "percent", "--out",
              str(tmp_path / "r.html")])
    assert info.value.code == 2
    assert "--scale percent is for binary files" in capsys.readouterr().err


def test_report_on_percentages_gives_the_probability_file_cutoff(files, capsys, tmp_path):
    args = ["--score-column", "score", "--label-column", "diagnosis", "--positive-label",
            "benign", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 10]
    proba, _ = _json(capsys, "report", "--scores", files / "proba.csv", *args,
                     "--out", tmp_path / "p.html")
    percent, _ = _json(capsys, "report", "--scores", files / "percent.csv", *args,
                       "--scale", "percent", "--out", tmp_path / "q.html")
    assert percent["cutoff"] == pytest.approx(proba["cutoff"], rel=1e-9)
    assert percent["score_column_divided_by"] == 100 and "score_column_divided_by" not in proba
    code, out, _ = run_cli(capsys, "report", "--scores", files / "percent.csv", *args,
                           "--scale", "percent", "--out", tmp_path / "q.html")
    shown = percent.get("recommended_cutoff", percent["cutoff"])
    assert code == 0
    assert f"(cutoffs are probabilities: in the file's percentages {100 * shown:.4g})" in out
