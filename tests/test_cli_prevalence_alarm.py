"""``probwrap prevalence --batch-size/--batch-column``: per-batch prevalence and its alarm.

The CUSUM is checked against Brook & Evans (1972) in tests/test_shift_alarms.py; here the
command line's numbers are consistency-checked against the array core on the same estimates.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run
from probwrap.cli import main
from probwrap.cli._prevalence import prevalence_from_source
from probwrap.datasets import make_parcels
from probwrap.shift import cusum_alarms, cusum_run_length

BATCH = 1000


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Four weeks at the source prevalence, then three at twice it (true summer posteriors)."""
    root = tmp_path_factory.mktemp("alarm-cli")
    src = make_parcels(10, random_state=0).source_prior
    parts, weeks = [], []
    for i in range(7):
        prev = float(src[1]) * (1 if i < 4 else 2)
        b = make_parcels(BATCH, prevalence=prev, random_state=80 + i)
        back = b.true_proba * (src / b.prior)
        parts.append((back / back.sum(axis=1, keepdims=True))[:, 1])
        weeks += [f"w{i + 1}"] * BATCH
    p = np.concatenate(parts)
    pd.DataFrame({"week": weeks, "risk": p}).to_csv(root / "weeks.csv", index=False)
    return {"root": root, "p": p, "source": float(src[1])}


def test_json_alarm_equals_cusum_alarms_on_the_batch_estimates(files, capsys):
    code, out, err = run(capsys, "prevalence", "--unlabelled", files["root"] / "weeks.csv",
                         "--score-column", "risk", "--source-prevalence", files["source"],
                         "--batch-column", "week", "--resamples", 30, "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    batches = got["batches"]
    assert [b["batch"] for b in batches] == [f"w{i + 1}" for i in range(7)]
    # each batch's estimate is the verb's own estimate on that batch's rows (seed + 1 + i)
    first = prevalence_from_source(files["p"][:BATCH], files["source"], n_resamples=30, seed=1)
    assert batches[0]["prevalence"] == first["prevalence"]
    assert batches[0]["interval"] == first["interval"]
    assert batches[0]["shift_statistic"] == first["shift_statistic"]
    # consistency test: the alarm is cusum_alarms (defaults k=0.5, h=5) on the signed roots of
    # the batches' shift statistics (each a standard normal when nothing moved)
    est = np.array([b["prevalence"] for b in batches])
    z = np.sign(est - files["source"]) * np.sqrt([b["shift_statistic"] for b in batches])
    ref = cusum_alarms(z, 0.0, 1.0)
    a = got["alarm"]
    np.testing.assert_allclose(a["standardized"], z, rtol=0, atol=1e-12)
    # a source prevalence given as exact: no labelled rows' error, the classic run length
    assert a["labelled_share"] == 0.0 and a["warnings"] == []
    np.testing.assert_allclose(a["upper"], ref.upper, rtol=0, atol=1e-12)
    np.testing.assert_allclose(a["lower"], ref.lower, rtol=0, atol=1e-12)
    assert [x["index"] for x in a["alarms"]] == ref.alarms.tolist()
    assert (a["reference"], a["decision_interval"]) == (0.5, 5.0)
    assert a["in_control_run_length"] == cusum_run_length(0.0, two_sided=True)
    # the prevalence doubles from w5 on: the alarm fires upward after the change
    assert a["first_alarm"] in {"w5", "w6", "w7"}
    assert a["alarms"][0]["direction"] == "up"


def test_flags_set_k_and_h_and_text_names_the_alarm(files, capsys):
    args = ["prevalence", "--unlabelled", files["root"] / "weeks.csv", "--score-column", "risk",
            "--source-prevalence", files["source"], "--batch-size", BATCH, "--resamples", 30,
            "--alarm-reference", 1.0, "--alarm-decision-interval", 2.5]
    code, out, err = run(capsys, *args, "--format", "json")
    assert code == 0, err
    a = json.loads(out)["alarm"]
    assert (a["reference"], a["decision_interval"]) == (1.0, 2.5)
    assert a["in_control_run_length"] == cusum_run_length(0.0, reference=1.0,
                                                          decision_interval=2.5, two_sided=True)
    code, text, err = run(capsys, *args)
    assert code == 0, err
    if a["alarms"]:
        assert f"first alarm after batch {a['first_alarm']}" in text
        assert "ALARM (up)" in text
    assert "k = 1, h = 2.5" in text


def test_no_alarm_on_the_in_control_weeks(files, tmp_path, capsys):
    path = tmp_path / "calm.csv"
    pd.read_csv(files["root"] / "weeks.csv").iloc[:4 * BATCH].to_csv(path, index=False)
    code, out, err = run(capsys, "prevalence", "--unlabelled", path, "--score-column", "risk",
                         "--source-prevalence", files["source"], "--batch-column", "week",
                         "--resamples", 30)
    assert code == 0, err
    assert "no alarm" in out


def test_batches_need_intervals(files, capsys):
    with pytest.raises(SystemExit) as exc:
        main(["prevalence", "--unlabelled", str(files["root"] / "weeks.csv"), "--score-column",
              "risk", "--source-prevalence", "0.04", "--batch-size", "500", "--resamples", "0"])
    assert exc.value.code == 2
    assert "--resamples > 0" in capsys.readouterr().err
