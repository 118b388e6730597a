"""Command-line flags for late labels (``cutoff``, ``report``, ``calibrate fit``), the guarantee
(``report``) and the prevalence alarm's k and h (``report``).

Reference check: the weighted prevalence the verbs print under late labels is statsmodels'
Kaplan–Meier estimate 1 - S(h) (Satten & Datta 2001). The rest are consistency tests: the
command line gives exactly what the array core gives on the same rows and weights.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from _cli_helpers import run_cli as run
from probwrap.calibration import map_from_dict
from probwrap.cli import main
from probwrap.cli._calibrate import fit_map, to_log_odds
from probwrap.datasets import make_parcels
from probwrap.decision import guaranteed_cutoff, search_cutoff
from probwrap.late_labels import labels_at_horizon
from probwrap.report._alarm_chart import batch_alarm

MATRIX = np.array([[0.0, 3.0], [40.0, 0.0]])


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Parcels shipped over 60 days; claims arrive ~12 days after shipping (invented)."""
    root = tmp_path_factory.mktemp("late-cli")
    s = make_parcels(3000, random_state=21)
    rng = np.random.default_rng(21)
    since = rng.uniform(0, 60, 3000)
    delay = rng.exponential(12.0, 3000)
    claimed = ((s.target == 1) & (delay <= since)).astype(int)
    days = np.round(np.where(claimed == 1, delay, since), 3)
    p = s.true_proba[:, 1]
    pd.DataFrame({"risk": p, "days": days, "claimed": claimed}).to_csv(root / "claims.csv",
                                                                       index=False)
    winter = make_parcels(2000, season="winter", random_state=22).true_proba[:, 1]
    pd.DataFrame({"risk": winter}).to_csv(root / "winter.csv", index=False)
    back = pd.read_csv(root / "claims.csv")  # the values as the verbs read them
    return {"root": root, "p": back["risk"].to_numpy(), "days": back["days"].to_numpy(),
            "claimed": back["claimed"].to_numpy(), "winter": winter}


LATE = ("--time-column", "days", "--event-column", "claimed", "--horizon", 30)


def test_cutoff_with_late_labels_equals_the_weighted_search(files, capsys):
    code, out, err = run(capsys, "cutoff", "--scores", files["root"] / "claims.csv",
                         "--score-column", "risk", *LATE, "--cost-fp", 3, "--cost-fn", 40,
                         "--resamples", 20, "--guarantee", "recall", "--guarantee-target", 0.8,
                         "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    hl = labels_at_horizon(files["days"], files["claimed"], 30)
    res = search_cutoff(files["p"], hl.y, MATRIX, sample_weight=hl.sample_weight,
                        score_bounds=(0.0, 1.0))
    # the scores went through a CSV file: pandas < 2.2 parses floats to within one unit in the
    # last place (its default parser is not round-trip exact), so the cutoff may differ there
    assert got["cutoff"] == pytest.approx(res.cutoff, rel=1e-12)
    assert got["expected_cost"] == pytest.approx(res.cost, rel=1e-12)
    g = guaranteed_cutoff(files["p"], hl.y, MATRIX, sample_weight=hl.sample_weight,
                          score_bounds=(0.0, 1.0), requirement="recall", target=0.8)
    assert got["guarantee"]["cutoff"] == pytest.approx(g.cutoff, rel=1e-12)  # CSV, as above
    assert got["guarantee"]["p_value"] == pytest.approx(g.p_value, rel=1e-12)
    late = got["late_labels"]
    assert late["open_rows"] == int(hl.is_open.sum()) > 0
    # reference: the weighted prevalence is statsmodels' Kaplan-Meier 1 - S(30)
    km = sm.SurvfuncRight(files["days"], files["claimed"])
    s_h = km.surv_prob[np.searchsorted(km.surv_times, 30.0, side="right") - 1]
    assert late["weighted_prevalence"] == pytest.approx(1 - s_h, rel=1e-12)
    assert got["labels"]["positive"] == "event within 30"


def test_report_json_has_guarantee_alarm_and_late_labels(files, capsys, tmp_path):
    out_file = tmp_path / "r.html"
    code, out, err = run(capsys, "report", "--scores", files["root"] / "claims.csv",
                         "--score-column", "risk", *LATE, "--cost-fp", 3, "--cost-fn", 40,
                         "--unlabelled", files["root"] / "winter.csv", "--batch-size", 250,
                         "--alarm-reference", 0.25, "--alarm-decision-interval", 3,
                         "--guarantee", "recall", "--guarantee-target", 0.8,
                         "--resamples", 20, "--out", out_file, "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    hl = labels_at_horizon(files["days"], files["claimed"], 30)
    g = guaranteed_cutoff(files["p"], hl.y, MATRIX, sample_weight=hl.sample_weight,
                          score_bounds=(0.0, 1.0), requirement="recall", target=0.8)
    # the scores went through a CSV file (last-place float parsing, see above)
    assert got["guarantee"]["cutoff"] == pytest.approx(g.cutoff, rel=1e-12)
    assert got["guarantee"]["bound"] == pytest.approx(g.bound, rel=1e-12)
    assert got["guarantee"]["unreachable"] is None
    assert got["alarm"]["reference"] == 0.25 and got["alarm"]["decision_interval"] == 3.0
    assert got["late_labels"]["open_rows"] == int(hl.is_open.sum())
    page = out_file.read_text(encoding="utf-8")
    assert 'id="late-labels"' in page and 'data-rule="guarantee"' in page
    assert 'id="fig-alarm"' in page


def test_report_alarm_settings_reach_the_chart(files):
    # the k and h the verb passes are those of batch_alarm on the report's own batch table
    from probwrap.report import build_report

    content, _ = build_report(y_true=(files["claimed"] == 1).astype(int), y_prob=files["p"],
                              unlabelled_prob=files["winter"], batch_size=250, n_resamples=20,
                              alarm_reference=0.25, alarm_decision_interval=3.0)
    ref = batch_alarm(content.batch_table, content.source_prevalence, reference=0.25,
                      decision_interval=3.0, labelled_rows=3000.0)
    assert content.alarm.in_control_run_length == ref.in_control_run_length
    np.testing.assert_array_equal(content.alarm.result.alarms, ref.result.alarms)
    with pytest.raises(ValueError, match="`alarm_decision_interval` must be a finite number > 0"):
        build_report(y_true=(files["claimed"] == 1).astype(int), y_prob=files["p"],
                     unlabelled_prob=files["winter"], batch_size=250, n_resamples=20,
                     alarm_decision_interval=0.0)


def test_calibrate_fit_with_late_labels_equals_the_weighted_map(files, capsys, tmp_path):
    out_file = tmp_path / "map.json"
    code, out, err = run(capsys, "calibrate", "fit", "--scores", files["root"] / "claims.csv",
                         "--score-column", "risk", *LATE, "--method", "platt",
                         "--out", out_file)
    assert code == 0, err
    assert "still open" in out
    saved = json.loads(out_file.read_text(encoding="utf-8"))
    hl = labels_at_horizon(files["days"], files["claimed"], 30)
    want = fit_map(to_log_odds(files["p"], "proba"), hl.y, method="platt", folds=5, seed=0,
                   sample_weight=hl.sample_weight).calibrator_
    got = map_from_dict(saved)
    grid = np.linspace(-6, 3, 13)
    np.testing.assert_allclose(got.predict(grid), want.predict(grid), rtol=1e-12)
    assert saved["metadata"]["late_labels"]["open_rows"] == int(hl.is_open.sum())


@pytest.mark.parametrize("argv, message", [
    (("cutoff", "--time-column", "days", "--cost-fp", 3, "--cost-fn", 40),
     "missing --event-column, --horizon"),
    (("cutoff", "--label-column", "claimed", *LATE, "--cost-fp", 3, "--cost-fn", 40),
     "not both"),
    (("cutoff", "--cost-fp", 3, "--cost-fn", 40), "give --label-column, or late labels"),
    (("report", *LATE, "--guarantee", "recall", "--guarantee-target", 0.9, "--out", "x.html"),
     "--guarantee needs costs"),
])
def test_usage_errors(files, capsys, argv, message):
    verb, *rest = argv
    with pytest.raises(SystemExit) as exc:
        main([str(a) for a in (verb, "--scores", files["root"] / "claims.csv",
                               "--score-column", "risk", *rest)])
    assert exc.value.code == 2
    assert message in capsys.readouterr().err
