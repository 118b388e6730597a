"""The ``calibrate``, ``cutoff`` and ``prevalence`` verbs end to end on generated score files.

The numbers the command line prints or writes are checked against the library functions called
directly on the same data, and malformed inputs against the exit code and one-line message.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from _cli_helpers import run_cli as run
from probwrap import CalibrationWrapper
from probwrap.calibration import IsotonicMap, map_from_dict, proba_to_log_odds
from probwrap.cli import main
from probwrap.datasets import make_parcels
from probwrap.decision import cutoff_interval, search_cutoff
from probwrap.shift import PriorEstimator, em_prior, shift_test

pytestmark = pytest.mark.usefixtures("no_progress_lines")


COSTS = {"fp": 3.0, "fn": 40.0}


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Held-out (labelled) and winter (unlabelled) score files from a parcel model."""
    root = tmp_path_factory.mktemp("scores")
    train = make_parcels(1500, random_state=0)
    held = make_parcels(1500, random_state=1)
    winter = make_parcels(800, season="winter", random_state=2)
    model = LogisticRegression(max_iter=1000).fit(train.data, train.target)
    p_held = model.predict_proba(held.data)[:, 1]
    frame = pd.DataFrame({"parcel": np.arange(1500), "risk": p_held, "damaged": held.target})
    frame.to_csv(root / "held.csv", index=False)
    frame.to_parquet(root / "held.parquet")
    pd.DataFrame({"risk": model.predict_proba(winter.data)[:, 1]}).to_csv(
        root / "winter.csv", index=False
    )
    return {"root": root, "model": model, "held": held, "p_held": p_held,
            "p_winter": model.predict_proba(winter.data)[:, 1]}


# -- calibrate ---------------------------------------------------------------------------------
def test_calibrate_auto_agrees_with_the_wrapper_on_the_model(files, capsys):
    root = files["root"]
    code, out, err = run(capsys, "calibrate", "fit", "--scores", root / "held.csv",
                         "--score-column", "risk", "--label-column", "damaged",
                         "--out", root / "auto.json")
    assert code == 0, err
    saved = json.loads((root / "auto.json").read_text())
    # the same choice as CalibrationWrapper on the already-fitted model itself
    held = files["held"]
    wrapper = CalibrationWrapper(FrozenEstimator(files["model"]), random_state=0)
    wrapper.fit(held.data, held.target)
    assert saved["method"] == wrapper.method_
    assert f"fitted a {wrapper.method_} map on 1500 rows" in out
    reloaded = map_from_dict(saved)
    np.testing.assert_allclose(
        reloaded.predict(proba_to_log_odds(files["p_held"])),
        wrapper.predict_proba(held.data)[:, 1], rtol=1e-6, atol=1e-9,
    )
    assert saved["score_scale"] == "proba"
    assert set(saved["metadata"]["auto_log_loss"]) == set(wrapper.method_scores_)


@pytest.mark.parametrize("out_name", ["applied.csv", "applied.parquet"])
def test_calibrate_apply_writes_what_the_fitted_map_predicts(files, capsys, out_name):
    root = files["root"]
    code, _, err = run(capsys, "calibrate", "fit", "--scores", root / "held.parquet",
                       "--score-column", "risk", "--label-column", "damaged",
                       "--method", "isotonic", "--out", root / "iso.json")
    assert code == 0, err
    fitted = IsotonicMap().fit(proba_to_log_odds(files["p_held"]), files["held"].target)
    code, out, err = run(capsys, "calibrate", "apply", "--map", root / "iso.json",
                         "--scores", root / "winter.csv", "--score-column", "risk",
                         "--out", root / out_name)
    assert code == 0, err
    if out_name.endswith("csv"):  # text read back with Python's correctly rounded float()
        written = pd.read_csv(root / out_name, dtype=str)
        got = np.array([float(v) for v in written["calibrated_probability"]])
    else:
        written = pd.read_parquet(root / out_name)
        got = written["calibrated_probability"].to_numpy()
    assert list(written.columns) == ["risk", "calibrated_probability"]
    expected = fitted.predict(proba_to_log_odds(files["p_winter"]))
    np.testing.assert_array_equal(got, expected)
    assert "wrote 800 rows" in out


def test_calibrate_log_odds_scale(files, capsys, tmp_path):
    s = proba_to_log_odds(files["p_held"])
    pd.DataFrame({"z": s, "y": np.where(files["held"].target == 1, "damaged", "intact")}).to_csv(
        tmp_path / "z.csv", index=False)
    code, _, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "z.csv",
                       "--score-column", "z", "--label-column", "y", "--scale", "log-odds",
                       "--positive-label", "damaged", "--method", "platt",
                       "--out", tmp_path / "m.json")
    assert code == 0, err
    saved = json.loads((tmp_path / "m.json").read_text())
    assert saved["metadata"]["labels"] == ["intact", "damaged"]
    from probwrap.calibration import PlattMap

    direct = PlattMap().fit(s, files["held"].target)
    assert saved["fitted"]["slope_"] == direct.slope_
    assert saved["fitted"]["intercept_"] == direct.intercept_


# -- cutoff ------------------------------------------------------------------------------------
@pytest.mark.parametrize("capacity", [None, 0.05])
def test_cutoff_equals_the_library(files, capsys, capacity):
    root = files["root"]
    extra = [] if capacity is None else ["--capacity", capacity]
    code, out, err = run(capsys, "cutoff", "--scores", root / "held.csv", "--score-column",
                         "risk", "--label-column", "damaged", "--cost-fp", 3, "--cost-fn", 40,
                         "--resamples", 40, "--format", "json", *extra)
    assert code == 0, err
    got = json.loads(out)
    p, y = files["p_held"], files["held"].target
    res = search_cutoff(p, y, COSTS, capacity=capacity, score_bounds=(0, 1))
    ci = cutoff_interval(p, y, COSTS, capacity=capacity, score_bounds=(0, 1), n_resamples=40,
                         random_state=0)
    assert got["cutoff"] == res.cutoff
    assert got["expected_cost"] == res.cost
    assert got["cutoff_range"] == list(res.interval)
    assert got["cutoff_interval"] == [ci.low, ci.high]
    assert got["flagged_share"] == np.mean(p > res.cutoff)
    if capacity is not None:
        assert got["flagged_share"] <= capacity
    # the reported cost is the realised mean cost of acting above the cutoff
    act = p > got["cutoff"]
    realised = np.where(act, np.where(y == 1, 0.0, 3.0), np.where(y == 1, 40.0, 0.0)).mean()
    assert got["expected_cost"] == pytest.approx(realised, rel=1e-12)
    assert got["bayes_cutoff"] == pytest.approx(3 / 43)
    # the cutoff CostPolicyWrapper(strategy="tuned") keeps on the same rows (the CLI's --seed
    # defaults to 0): a frozen "model" whose probabilities are the file's scores
    from sklearn.frozen import FrozenEstimator

    from probwrap import CostPolicyWrapper
    from probwrap._column_models import ProbabilityColumn

    pol = CostPolicyWrapper(FrozenEstimator(ProbabilityColumn().fit()), costs=COSTS,
                            strategy="tuned", capacity=capacity,
                            random_state=0).fit(p[:, None], y)
    kept = got["settled_cutoff"]
    assert kept["cutoff"] == pol.cutoff_
    assert kept["recalibrated_bayes_cutoff"] == pol.cutoff_anchor_
    assert kept["recalibration"] == pol.cutoff_anchor_map_
    assert kept["is_bayes_cutoff"] == (pol.cutoff_ == 3 / 43)


def test_cutoff_text_output(files, capsys):
    root = files["root"]
    code, out, _ = run(capsys, "cutoff", "--scores", root / "held.csv", "--score-column", "risk",
                       "--label-column", "damaged", "--cost-fp", 3, "--cost-fn", 40,
                       "--cost-tn", -0.5, "--resamples", 20)
    assert code == 0
    res = search_cutoff(files["p_held"], files["held"].target, {**COSTS, "tn": -0.5},
                        score_bounds=(0, 1))
    assert f"cutoff                {res.cutoff:.6g}" in out
    assert f"expected cost per row {res.cost:.6g}" in out


# -- prevalence --------------------------------------------------------------------------------
def test_prevalence_from_source_equals_em(files, capsys):
    root = files["root"]
    code, out, err = run(capsys, "prevalence", "--unlabelled", root / "winter.csv",
                         "--score-column", "risk", "--source-prevalence", 0.045,
                         "--resamples", 30, "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    p2 = np.column_stack([1 - files["p_winter"], files["p_winter"]])
    assert got["prevalence"] == em_prior(p2, [0.955, 0.045]).prior[1]
    test = shift_test(p2, [0.955, 0.045])
    assert got["shift_pvalue"] == test.pvalue
    lo, hi = got["interval"]
    assert lo <= got["prevalence"] <= hi and hi - lo > 0


@pytest.mark.filterwarnings("ignore:The confusion matrix is singular")
@pytest.mark.parametrize("method", ["em", "bbse"])
def test_prevalence_with_reference_equals_prior_estimator(files, capsys, method):
    root = files["root"]
    code, out, err = run(capsys, "prevalence", "--unlabelled", root / "winter.csv",
                         "--score-column", "risk", "--reference", root / "held.parquet",
                         "--label-column", "damaged", "--method", method, "--resamples", 15,
                         "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    p_held, p_new = files["p_held"], files["p_winter"]
    est = PriorEstimator(method, n_resamples=15, random_state=0).fit(
        np.column_stack([1 - p_held, p_held]), files["held"].target)
    res = est.estimate(np.column_stack([1 - p_new, p_new]))
    assert got["prevalence"] == res.prior[1]
    assert got["interval"] == res.interval[1].tolist()
    assert got["source_prevalence"] == files["held"].target.mean()
    assert got["shift_statistic"] == pytest.approx(res.shift_statistic, rel=1e-12)
    if method == "bbse":  # the library's warning reaches the user as one line on stderr
        assert all(line.startswith("probwrap prevalence: warning: ") for line in err.splitlines())


# -- malformed data: exit 1, one line naming the file and column or row ------------------------
def _bad_files(tmp_path):
    (tmp_path / "empty.csv").write_text("")
    (tmp_path / "header.csv").write_text("risk,damaged\n")
    (tmp_path / "text.csv").write_text("risk,damaged\n0.1,0\n0.2,1\nhigh,0\n")
    (tmp_path / "nan.csv").write_text("risk,damaged\n0.1,0\n,1\n0.3,0\n")
    (tmp_path / "three.csv").write_text("risk,damaged\n0.1,0\n0.2,1\n0.3,2\n")
    (tmp_path / "one.csv").write_text("risk,damaged\n0.1,0\n0.2,0\n")
    (tmp_path / "nolabel.csv").write_text("risk,damaged\n0.1,0\n0.2,\n0.3,1\n")
    (tmp_path / "range.csv").write_text("risk,damaged\n0.1,0\n1.7,1\n0.3,0\n")
    (tmp_path / "map.json").write_text("{not json")
    (tmp_path / "other.json").write_text('{"format": "another-tool"}')


CUTOFF = ["cutoff", "--score-column", "risk", "--label-column", "damaged", "--cost-fp", "3",
          "--cost-fn", "40", "--scores"]
FIT = ["calibrate", "fit", "--score-column", "risk", "--label-column", "damaged", "--out",
       "unused.json", "--scores"]


@pytest.mark.parametrize(
    ("argv", "fragments"),
    [
        (CUTOFF + ["missing.csv"], ["missing.csv", "file not found"]),
        (CUTOFF + ["empty.csv"], ["empty.csv", "empty"]),
        (CUTOFF + ["header.csv"], ["header.csv", "no rows"]),
        (CUTOFF + ["text.csv"], ["text.csv", "column 'risk'", "row 4", "'high'"]),
        (CUTOFF + ["nan.csv"], ["nan.csv", "column 'risk'", "row 3"]),
        (CUTOFF + ["three.csv"], ["three.csv", "column 'damaged'", "two labels", "3"]),
        (CUTOFF + ["one.csv"], ["one.csv", "column 'damaged'", "two labels"]),
        (CUTOFF + ["nolabel.csv"], ["nolabel.csv", "column 'damaged'", "row 3", "missing"]),
        (CUTOFF + ["range.csv"], ["range.csv", "row 3", "not a probability"]),
        (CUTOFF[:2] + ["score"] + CUTOFF[3:] + ["text.csv"], ["text.csv", "no column 'score'"]),
        (FIT + ["three.csv"], ["three.csv", "column 'damaged'"]),
        (FIT[:2] + ["--positive-label", "yes"] + FIT[2:] + ["one.csv"],
         ["one.csv", "two labels"]),
        (["calibrate", "apply", "--map", "map.json", "--scores", "text.csv", "--score-column",
          "risk", "--out", "o.csv"], ["map.json", "not a JSON file"]),
        (["calibrate", "apply", "--map", "other.json", "--scores", "text.csv", "--score-column",
          "risk", "--out", "o.csv"], ["other.json", "field 'format'"]),
        (["prevalence", "--unlabelled", "nan.csv", "--score-column", "risk",
          "--source-prevalence", "0.04"], ["nan.csv", "column 'risk'", "row 3"]),
        (["prevalence", "--unlabelled", "text.csv", "--score-column", "damaged",
          "--reference", "three.csv", "--reference-score-column", "risk",
          "--label-column", "damaged"],
         ["three.csv", "column 'damaged'", "two labels"]),
    ],
)
def test_data_errors(tmp_path, monkeypatch, capsys, argv, fragments):
    _bad_files(tmp_path)
    monkeypatch.chdir(tmp_path)
    code, out, err = run(capsys, *argv)
    assert code == 1
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith(f"probwrap {argv[0]}: error: ")
    for fragment in fragments:
        assert fragment in err


@pytest.mark.parametrize(
    "argv",
    [
        ["cutoff", "--scores", "a.csv", "--score-column", "risk", "--label-column", "y",
         "--cost-fp", "3"],
        ["cutoff", "--scores", "a.csv", "--score-column", "risk", "--label-column", "y",
         "--cost-fp", "3", "--cost-fn", "forty"],
        ["cutoff", "--scores", "a.csv", "--score-column", "risk", "--label-column", "y",
         "--cost-fp", "3", "--cost-fn", "40", "--capacity", "1.5"],
        ["cutoff", "--scores", "a.csv", "--score-column", "risk", "--label-column", "y",
         "--cost-fp", "3", "--cost-fn", "40", "--threshold", "0.5"],
        ["calibrate", "fit", "--scores", "a.csv", "--score-column", "r", "--label-column", "y",
         "--method", "magic", "--out", "m.json"],
        ["calibrate", "fit", "--scores", "a.csv", "--score-column", "r", "--label-column", "y",
         "--folds", "1", "--out", "m.json"],
        ["calibrate"],
        ["prevalence", "--unlabelled", "a.csv", "--score-column", "r"],
        ["prevalence", "--unlabelled", "a.csv", "--score-column", "r",
         "--source-prevalence", "0.04", "--reference", "b.csv"],
        ["prevalence", "--unlabelled", "a.csv", "--score-column", "r",
         "--source-prevalence", "1.2"],
        ["prevalence", "--unlabelled", "a.csv", "--score-column", "r",
         "--source-prevalence", "0.04", "--method", "bbse"],
        ["prevalence", "--unlabelled", "a.csv", "--score-column", "r", "--reference", "b.csv"],
    ],
)
def test_usage_errors_exit_2(capsys, argv):
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 2
    assert "usage:" in capsys.readouterr().err


def test_module_entry_point_in_a_subprocess(files):
    root = files["root"]
    proc = subprocess.run(
        [sys.executable, "-m", "probwrap.cli", "cutoff", "--scores", str(root / "held.csv"),
         "--score-column", "risk", "--label-column", "damaged", "--cost-fp", "3",
         "--cost-fn", "40", "--resamples", "10", "--format", "json"],
        capture_output=True, text=True, timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    got = json.loads(proc.stdout)
    res = search_cutoff(files["p_held"], files["held"].target, COSTS, score_bounds=(0, 1))
    assert got["cutoff"] == res.cutoff
    # off a terminal: no bar; at most plain step lines when the machine is slow
    assert all(line.startswith("probwrap cutoff: step ") for line in proc.stderr.splitlines())
    bad = subprocess.run(
        [sys.executable, "-m", "probwrap.cli", "cutoff", "--scores", str(root / "nope.csv"),
         "--score-column", "risk", "--label-column", "damaged", "--cost-fp", "3",
         "--cost-fn", "40"],
        capture_output=True, text=True, timeout=120,
    )
    assert bad.returncode == 1
    assert bad.stderr.strip().endswith("nope.csv: file not found")
    assert "Traceback" not in bad.stderr


def test_library_warnings_reach_stderr_as_single_lines(tmp_path, capsys):
    # scores that separate the labels perfectly: beta calibration warns that the fit is a step
    pd.DataFrame({"risk": [0.1, 0.2, 0.3, 0.6, 0.7, 0.8], "damaged": [0, 0, 0, 1, 1, 1]}).to_csv(
        tmp_path / "sep.csv", index=False)
    code, out, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "sep.csv",
                         "--score-column", "risk", "--label-column", "damaged",
                         "--method", "beta", "--out", tmp_path / "b.json")
    assert code == 0
    assert "separate the two classes perfectly" in err
    assert all(line.startswith("probwrap calibrate: warning: ") for line in err.splitlines())
    assert "fitted a beta map on 6 rows" in out


def test_report_summary_names_the_recommended_cutoff(tmp_path, capsys):
    # a score file whose least-cost cutoff is not the recommended one (the settled cutoff,
    # decision.settle_cutoff): the terminal line used to print only the least-cost cutoff
    from probwrap.decision import settle_cutoff

    rng = np.random.default_rng(11)  # the draw of tests/test_report_recommendation.py
    n = int(rng.integers(40, 200))
    t = rng.beta(1, 3, n)
    y = (rng.uniform(size=n) < t).astype(int)
    p = np.clip(t ** rng.uniform(0.4, 2.5), 1e-6, 1 - 1e-6)
    pd.DataFrame({"risk": p, "damaged": y}).to_csv(tmp_path / "s.csv", index=False)
    args = ["report", "--scores", tmp_path / "s.csv", "--score-column", "risk", "--label-column",
            "damaged", "--cost-fp", 1, "--cost-fn", 4, "--resamples", 10, "--out",
            tmp_path / "r.html"]
    code, out, err = run(capsys, *args, "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    # the report's own content on the same rows: settled toward its recalibrated Bayes cutoff
    from probwrap.report import build_report

    content, _ = build_report(y_true=y, y_prob=p, costs={"fp": 1.0, "fn": 4.0}, n_resamples=10)
    ref = settle_cutoff(p, y, {"fp": 1.0, "fn": 4.0}, anchor=content.anchor)
    assert got["cutoff"] == ref.least_cost and got["recommended_cutoff"] == ref.cutoff
    assert ref.cutoff != ref.least_cost
    code, out, err = run(capsys, *args)
    assert f"recommended cutoff {ref.cutoff:.4f}" in out and f"{ref.least_cost:.4f}" in out


def test_cutoff_text_explains_a_negative_cutoff(tmp_path, capsys):
    # a forest's scores of exactly 0 and a dear false negative: "act on every row" needs a
    # cutoff below 0, which the text says in words (a reader expects probabilities)
    p = np.array([0.0, 0.0, 0.0, 0.1, 0.2, 0.4, 0.6, 0.9])
    y = np.array([1, 0, 0, 1, 0, 1, 1, 1])
    pd.DataFrame({"risk": p, "hit": y}).to_csv(tmp_path / "f.csv", index=False)
    args = ["cutoff", "--scores", tmp_path / "f.csv", "--score-column", "risk", "--label-column",
            "hit", "--cost-fp", 1, "--cost-fn", 50, "--resamples", 0]
    code, out, err = run(capsys, *args, "--format", "json")
    assert code == 0, err
    assert json.loads(out)["cutoff"] < 0
    code, out, err = run(capsys, *args)
    assert "a cutoff below 0 acts on every row" in out
    # a cutoff inside (0, 1) whose exact-test range reaches below 0 too (8 rows cannot show
    # that acting on the three rows scored 0 costs more): the line is there for that range
    code, out, err = run(capsys, *args[:-4], "--cost-fn", 1, "--resamples", 0)
    assert code == 0 and "exact-test range      [-" in out and "below 0 acts on every" in out
    # zeros that are six negatives: every cutoff the text quotes lies in [0, 1], no such line
    p0 = np.array([0.0] * 6 + [0.1, 0.2, 0.4, 0.6, 0.9])
    y0 = np.array([0] * 6 + [1, 0, 1, 1, 1])
    pd.DataFrame({"risk": p0, "hit": y0}).to_csv(tmp_path / "g.csv", index=False)
    plain = ["cutoff", "--scores", tmp_path / "g.csv", "--score-column", "risk",
             "--label-column", "hit", "--cost-fp", 1, "--cost-fn", 1, "--resamples", 0]
    code, out, err = run(capsys, *plain, "--format", "json")
    got = json.loads(out)
    assert code == 0 and 0 <= got["cutoff"] and 0 <= got["cutoff_exact_range"][0]
    code, out, err = run(capsys, *plain)
    assert code == 0 and "below 0" not in out


def test_calibrate_auto_lists_every_candidate_and_the_sample(tmp_path, capsys):
    """On more than 20,000 rows the candidates are scored on a sample and the clearly worse ones
    are left out after the first fold; fit used to print the winner alone, and the map file to
    keep only its loss. Data: logistic-regression probabilities of "digit 8" on scikit-learn's
    bundled digits set, rows drawn with replacement."""
    from sklearn.datasets import load_digits
    from sklearn.model_selection import cross_val_predict

    from probwrap.cli._calibrate import fit_map

    X, digit = load_digits(return_X_y=True)
    y = (digit == 8).astype(int)
    p = cross_val_predict(LogisticRegression(C=0.01, max_iter=2000), X, y, cv=5,
                          method="predict_proba")[:, 1]
    rows = np.random.default_rng(0).integers(0, y.shape[0], 30_000)
    pd.DataFrame({"risk": p[rows], "y": y[rows]}).to_csv(tmp_path / "big.csv", index=False)
    code, out, err = run(capsys, "calibrate", "fit", "--scores", tmp_path / "big.csv",
                         "--score-column", "risk", "--label-column", "y",
                         "--out", tmp_path / "map.json")
    assert code == 0, err
    wrapper = fit_map(proba_to_log_odds(p[rows]), y[rows], method="auto", folds=5, seed=0)
    assert "sample of 20000 of 30000 rows" in wrapper.method_notes_["auto"]
    left_out = set(wrapper.method_notes_) - set(wrapper.method_scores_) - {"auto"}
    assert left_out  # the case this test is about: some candidates have no loss
    lines = out.splitlines()
    for name in set(wrapper.method_scores_) | left_out:
        line = next(line for line in lines if line.split()[:1] == [name])
        if name in left_out:
            assert "no loss: " + wrapper.method_notes_[name] in line
        else:
            assert f"{wrapper.method_scores_[name][0]:.5f}" in line
    assert f"  note: {wrapper.method_notes_['auto']}" in lines
    saved = json.loads((tmp_path / "map.json").read_text())["metadata"]
    assert saved["auto_notes"] == wrapper.method_notes_
    assert set(saved["auto_log_loss"]) == set(wrapper.method_scores_)


def test_cutoff_capacity_with_ties_at_the_top(tmp_path, capsys):
    """A fifth of the rows score exactly 1.0 and the capacity is 0.1: no cutoff acts on part of
    a tie, so no row is acted on. The verb printed the cutoff 1.00312 (above every probability)
    and said nothing about why nothing was flagged."""
    rng = np.random.default_rng(0)
    q = np.r_[np.ones(40), rng.uniform(0, 0.9, 160)]
    y = (rng.random(200) < q).astype(int)
    pd.DataFrame({"risk": q, "y": y}).to_csv(tmp_path / "ties.csv", index=False)
    argv = ["cutoff", "--scores", tmp_path / "ties.csv", "--score-column", "risk",
            "--label-column", "y", "--cost-fp", "3", "--cost-fn", "40", "--capacity", "0.1",
            "--resamples", "20"]
    code, out, err = run(capsys, *argv, "--format", "json")
    assert code == 0, err
    summary = json.loads(out)
    assert summary["cutoff"] == 1.0 and summary["flagged_share"] == 0.0
    assert summary["cutoff_range"] == [1.0, 1.0]
    assert max(summary["cutoff_interval"]) <= 1.0
    assert summary["settled_cutoff"]["cutoff"] <= 1.0
    assert summary["capacity_ties"] == {"score": 1.0, "rows": 40, "share": 0.2,
                                        "flagged_share_with_them": 0.2}
    assert ("probwrap cutoff: warning: the 40 rows with the top score 1 are 0.2 of the rows, "
            "more than the capacity 0.1") in err
    assert "no row is acted on" in err
    code, out, err = run(capsys, *argv)
    assert code == 0, err
    assert "  cutoff                1   (act when score > cutoff)" in out
    assert "  same cost for         1 only" in out  # a one-cutoff range says so
    assert "no row is acted on" in err
    # a capacity that holds the tie: no warning, the tied rows are acted on
    code, out, err = run(capsys, *argv, "--capacity", "0.2", "--format", "json")
    assert code == 0, err
    assert json.loads(out)["capacity_ties"] is None and "tie" not in err
    assert json.loads(out)["flagged_share"] >= 0.2


def test_cutoff_capacity_with_ties_below_the_cutoff(tmp_path, capsys):
    """A tie just below the cutoff that the capacity leaves out is named, with the share acted
    on (5 distinct top rows, then 10 rows tied at 0.8, capacity 0.1 of 100 rows)."""
    q = np.r_[[0.99, 0.98, 0.97, 0.96, 0.95], np.full(10, 0.8), np.linspace(0.01, 0.5, 85)]
    y = np.r_[np.ones(15, dtype=int), (np.arange(85) % 3 == 0).astype(int)]
    pd.DataFrame({"risk": q, "y": y}).to_csv(tmp_path / "ties.csv", index=False)
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "ties.csv", "--score-column",
                         "risk", "--label-column", "y", "--cost-fp", "3", "--cost-fn", "40",
                         "--capacity", "0.1", "--resamples", "0", "--format", "json")
    assert code == 0, err
    summary = json.loads(out)
    assert summary["flagged_share"] == 0.05
    assert summary["capacity_ties"] == {"score": 0.8, "rows": 10, "share": 0.1,
                                        "flagged_share_with_them": pytest.approx(0.15)}
    assert "10 rows tie at the score 0.8 just below the cutoff (0.1 of the rows)" in err
    assert "stays at 0.05" in err
