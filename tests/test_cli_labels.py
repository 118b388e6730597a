"""Text labels are never read the wrong way round, and scores that rank the positive class
below the other draw a warning.

The check values come from the library called on 0/1 labels that the test codes itself
(consistency tests), and from scikit-learn's ``roc_auc_score`` for the ranking warning.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import roc_auc_score

from _cli_helpers import run_cli as run
from probwrap.decision import search_cutoff

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def text_files(tmp_path_factory):
    root = tmp_path_factory.mktemp("labels")
    rng = np.random.default_rng(1)
    p = rng.beta(1.0, 12.0, size=2000)  # rare positives: about 7 %
    y = (rng.uniform(size=2000) < p).astype(int)
    frame = pd.DataFrame({"risk": p, "damaged": np.where(y == 1, "yes", "no"),
                          "status": np.where(y == 1, "damaged", "intact"), "y01": y})
    frame.to_csv(root / "held.csv", index=False)
    frame.to_parquet(root / "held.parquet")
    return root, p, y


@pytest.mark.parametrize("verb", ["cutoff", "calibrate", "report", "prevalence"])
def test_text_labels_without_positive_label_are_refused_naming_the_option(
    text_files, tmp_path, capsys, verb
):
    root, _, _ = text_files
    # 'intact' sorts after 'damaged': the old rule made 'intact' (93 % of rows) positive
    common = ["--score-column", "risk", "--label-column", "status"]
    argv = {
        "cutoff": ["cutoff", "--scores", root / "held.csv", *common, "--cost-fp", "3",
                   "--cost-fn", "40"],
        "calibrate": ["calibrate", "fit", "--scores", root / "held.csv", *common,
                      "--out", tmp_path / "m.json"],
        "report": ["report", "--scores", root / "held.csv", *common, "--out",
                   tmp_path / "r.html"],
        "prevalence": ["prevalence", "--unlabelled", root / "held.csv", "--score-column", "risk",
                       "--reference", root / "held.csv", "--label-column", "status"],
    }[verb]
    code, out, err = run(capsys, *argv)
    assert code == 1 and out == ""
    line = err.strip().splitlines()[-1]
    assert "--positive-label" in line and "'damaged'" in line and "'intact'" in line
    assert not (tmp_path / "m.json").exists() and not (tmp_path / "r.html").exists()


@pytest.mark.parametrize("name", ["held.csv", "held.parquet"])
def test_cutoff_with_text_labels_equals_the_cutoff_on_coded_labels(text_files, capsys, name):
    root, p, y = text_files
    code, out, err = run(capsys, "cutoff", "--scores", root / name, "--score-column", "risk",
                         "--label-column", "status", "--positive-label", "damaged",
                         "--cost-fp", "3", "--cost-fn", "40", "--resamples", "0",
                         "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    ref = search_cutoff(p, y, {"fp": 3.0, "fn": 40.0}, score_bounds=(0.0, 1.0))
    assert got["cutoff"] == ref.cutoff
    assert got["n_positive"] == int(y.sum())
    assert got["labels"] == {"negative": "intact", "positive": "damaged"}
    assert got["cutoff_interval"] is None


def test_choosing_the_wrong_positive_class_warns_with_the_auc(text_files, capsys):
    root, p, y = text_files
    code, out, err = run(capsys, "cutoff", "--scores", root / "held.csv", "--score-column",
                         "risk", "--label-column", "status", "--positive-label", "intact",
                         "--cost-fp", "3", "--cost-fn", "40", "--resamples", "0")
    assert code == 0
    auc = roc_auc_score(1 - y, p)  # scikit-learn's AUC of the chosen (wrong) class
    assert auc < 0.5
    assert f"ROC AUC {auc:.3f} < 0.5" in err
    assert "'intact' BELOW 'damaged'" in err and "--positive-label" in err
    # the right class: no warning
    code, _, err = run(capsys, "cutoff", "--scores", root / "held.csv", "--score-column",
                       "risk", "--label-column", "status", "--positive-label", "damaged",
                       "--cost-fp", "3", "--cost-fn", "40", "--resamples", "0")
    assert code == 0 and "BELOW" not in err


def test_report_accepts_text_labels_and_matches_coded_labels(text_files, tmp_path, capsys):
    root, p, y = text_files
    code, out, err = run(capsys, "report", "--scores", root / "held.csv", "--score-column",
                         "risk", "--label-column", "damaged", "--positive-label", "yes",
                         "--cost-fp", "3", "--cost-fn", "40", "--resamples", "10",
                         "--out", tmp_path / "text.html", "--format", "json")
    assert code == 0, err
    text = json.loads(out)
    code, out, err = run(capsys, "report", "--scores", root / "held.csv", "--score-column",
                         "risk", "--label-column", "y01", "--cost-fp", "3", "--cost-fn", "40",
                         "--resamples", "10", "--out", tmp_path / "coded.html",
                         "--format", "json")
    assert code == 0, err
    coded = json.loads(out)
    assert text["cutoff"] == coded["cutoff"]
    assert text["labels"] == {"negative": "no", "positive": "yes"}
    assert "(positive class: yes)" in (tmp_path / "text.html").read_text(encoding="utf-8")
    assert coded["labels"] == {"negative": 0, "positive": 1}


def test_calibrate_fit_records_the_positive_label(text_files, tmp_path, capsys):
    root, _, y = text_files
    code, out, err = run(capsys, "calibrate", "fit", "--scores", root / "held.csv",
                         "--score-column", "risk", "--label-column", "damaged",
                         "--positive-label", "yes", "--method", "platt",
                         "--out", tmp_path / "m.json")
    assert code == 0, err
    saved = json.loads((tmp_path / "m.json").read_text())
    assert saved["metadata"]["labels"] == ["no", "yes"]
    assert saved["metadata"]["n_positive"] == int(y.sum())
    assert f"({int(y.sum())} with label 'yes')" in out


@pytest.mark.parametrize(
    ("labels", "positive", "expected"),
    [
        ([0, 1], None, [0, 1]),
        ([True, False], None, [1, 0]),  # True is positive
        ([0, 1], "0", [1, 0]),  # an explicit choice wins over 0/1
        ([1, 2], "2", [0, 1]),
        (["ok", "failed"], "failed", [0, 1]),
    ],
)
def test_read_labels_rules(labels, positive, expected):
    from probwrap.cli._tables import read_labels

    frame = pd.DataFrame({"y": labels})
    y, _ = read_labels(frame, "y", "f.csv", positive=positive)
    assert y.tolist() == expected


@pytest.mark.parametrize("labels", [[1, 2], [-1, 1], ["ok", "failed"]])
def test_read_labels_needs_the_option_for_labels_other_than_0_1(labels):
    from probwrap.cli._common import DataError
    from probwrap.cli._tables import read_labels

    with pytest.raises(DataError, match="--positive-label"):
        read_labels(pd.DataFrame({"y": labels}), "y", "f.csv")


def test_report_on_log_odds_matches_the_report_on_probabilities(text_files, tmp_path, capsys):
    root, p, y = text_files
    pd.DataFrame({"score": np.log(p / (1 - p)), "y": y}).to_csv(tmp_path / "lo.csv", index=False)
    pd.DataFrame({"score": p, "y": y}).to_csv(tmp_path / "pr.csv", index=False)
    got = {}
    for name, scale in (("lo", "log-odds"), ("pr", "proba")):
        code, out, err = run(capsys, "report", "--scores", tmp_path / f"{name}.csv",
                             "--score-column", "score", "--label-column", "y", "--scale", scale,
                             "--cost-fp", "3", "--cost-fn", "40", "--resamples", "10",
                             "--out", tmp_path / f"{name}.html", "--format", "json")
        assert code == 0, err
        got[name] = json.loads(out)
    assert got["lo"]["cutoff"] == pytest.approx(got["pr"]["cutoff"], rel=1e-9)


def test_suggested_positive_label_with_a_space_can_be_pasted(tmp_path, capsys):
    # statsmodels' bundled spector data (Spector & Mazzeo 1980): GRADE 1 = improved; a label
    # with a space must be suggested shell-quoted, and pasting the suggestion must work
    import shlex

    import statsmodels.api as sm

    d = sm.datasets.spector.load_pandas().data
    frame = pd.DataFrame({"risk": d["GPA"] / 4.0,
                          "outcome": np.where(d["GRADE"] == 1, "improved", "not improved")})
    frame.to_csv(tmp_path / "spector.csv", index=False)
    base = ["calibrate", "fit", "--scores", tmp_path / "spector.csv", "--score-column", "risk",
            "--label-column", "outcome", "--method", "isotonic", "--out", tmp_path / "m.json"]
    code, _, err = run(capsys, *base)
    assert code == 1
    line = err.strip().splitlines()[-1]
    assert "--positive-label 'not improved'" in line and "--positive-label improved" in line
    suggested = shlex.split(line.split(" or ")[-1])  # ["--positive-label", "not improved"]
    code, out, _ = run(capsys, *base, *suggested)
    assert code == 0
    assert out.startswith("fitted an isotonic map on 32 rows (21 with label 'not improved')")
