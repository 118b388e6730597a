"""The multiclass report's class shares by batch and one prevalence alarm per class.

References: the array core run directly (:func:`probwrap.shift.prior_by_batch` on the same
fitted estimator, :func:`probwrap.shift.cusum_alarms` on each class's signed shift scores
:func:`probwrap.shift.signed_shift_scores`), whose CUSUM is checked against Brook & Evans
(1972) in tests/test_shift_alarms.py; with two classes and three actions the alarm must equal
the binary report's.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from probwrap.datasets import make_parcels
from probwrap.report import build_report
from probwrap.shift import cusum_alarms, signed_shift_scores

BATCH = 300


@pytest.fixture(scope="module")
def three_outcomes():
    """Invented parcels (intact / dented / broken): four summer batches, then four winter
    ones, their true posteriors carried back to the labelled rows' shares."""
    lab = make_parcels(1500, n_outcomes=3, random_state=3)
    parts = []
    for i in range(8):
        b = make_parcels(BATCH, n_outcomes=3, season="winter" if i >= 4 else "summer",
                         random_state=50 + i)
        back = b.true_proba * (lab.source_prior / b.prior)
        parts.append(back / back.sum(axis=1, keepdims=True))
    return lab, np.vstack(parts)


def _report(**kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        content, page = build_report(**kw)
    return content, page, [str(w.message) for w in caught]


def test_class_alarms_equal_the_cusum_on_each_class(three_outcomes):
    lab, q = three_outcomes
    content, page, caught = _report(y_true=lab.target, y_prob=lab.true_proba,
                                    unlabelled_prob=q, batch_size=BATCH, n_resamples=30)
    table = content.batch_table
    assert table.shape[0] == 8 and table["prior"].shape[1] == 3
    assert sorted(content.class_alarms) == [0, 1, 2]
    for j, alarm in content.class_alarms.items():
        z = signed_shift_scores(table, float(content.source_prior[j]), class_index=j)
        ref = cusum_alarms(z, 0.0, 1.0, reference=0.5, decision_interval=5.0)
        np.testing.assert_allclose(alarm.result.upper, ref.upper, rtol=1e-12)
        np.testing.assert_array_equal(alarm.result.alarms, ref.alarms)
    # winter moves the shares: the intact share falls, an alarm fires in the winter batches
    intact = content.class_alarms[0]
    assert intact.first_batch is not None and int(intact.first_batch) >= 4
    assert intact.result.direction[0] < 0
    assert 'id="class-batches"' in page and 'id="class-alarms"' in page
    assert 'id="fig-alarm-0"' in page
    assert "3 charts" in page and "union bound" in page
    # the labelled rows' shared error is one note under the alarm table, naming the classes
    alarm_text = page[page.index('id="class-alarms"'):]
    alarm_text = alarm_text[:alarm_text.index("</p>")]
    assert alarm_text.count("whose error takes") == 1
    assert "Note (0, 1, 2): every batch is compared" in alarm_text
    assert any("prevalence alarm of" in m for m in caught)


def test_alarm_settings_reach_the_class_alarms(three_outcomes):
    lab, q = three_outcomes
    content, _, _ = _report(y_true=lab.target, y_prob=lab.true_proba, unlabelled_prob=q,
                            batch_size=BATCH, n_resamples=20, alarm_reference=0.25,
                            alarm_decision_interval=50.0)
    for alarm in content.class_alarms.values():
        assert alarm.result.reference == 0.25 and alarm.result.decision_interval == 50.0
        assert alarm.first_batch is None
    assert "fig-alarm" not in build_report(
        y_true=lab.target, y_prob=lab.true_proba, unlabelled_prob=q, batch_size=BATCH,
        n_resamples=20, alarm_decision_interval=50.0)[1]


def test_two_classes_three_actions_alarm_equals_the_binary_report():
    lab = make_parcels(1200, random_state=4)
    parts = []
    for i in range(6):
        b = make_parcels(BATCH, season="winter" if i >= 3 else "summer", random_state=70 + i)
        back = b.true_proba * (lab.source_prior / b.prior)
        parts.append((back / back.sum(axis=1, keepdims=True))[:, 1])
    q = np.concatenate(parts)
    kw = dict(y_true=lab.target, y_prob=lab.true_proba[:, 1], unlabelled_prob=q,
              batch_size=BATCH, n_resamples=20, random_state=0)
    binary, _, _ = _report(**kw)
    general, page, _ = _report(**kw, costs=[[0.0, 2.0, 5.0], [30.0, 8.0, 5.0]],
                               action_names=["ship", "repack", "hold"])
    assert getattr(general, "kind", "") == "general"
    assert list(general.class_alarms) == [1]
    np.testing.assert_allclose(general.class_alarms[1].result.upper, binary.alarm.result.upper,
                               rtol=1e-9)
    np.testing.assert_allclose(general.batch_table["prior"], binary.batch_table["prior"],
                               rtol=1e-9)
    assert "1 charts" not in page and "union bound" not in page


def test_batch_size_without_unlabelled_rows_adds_nothing(three_outcomes):
    lab, _ = three_outcomes
    content, page, _ = _report(y_true=lab.target, y_prob=lab.true_proba, batch_size=BATCH,
                               n_resamples=10)
    assert content.batch_table is None and content.class_alarms == {}
    assert "class-batches" not in page


def test_cli_class_columns_batch_size(three_outcomes, tmp_path):
    import json
    import subprocess
    import sys

    import pandas as pd

    lab, q = three_outcomes
    names = ["intact", "dented", "broken"]
    pd.DataFrame(dict(zip(names, lab.true_proba.T, strict=True)),
                 ).assign(outcome=lab.target).to_csv(tmp_path / "lab.csv", index=False)
    pd.DataFrame(dict(zip(names, q.T, strict=True))).to_csv(tmp_path / "new.csv", index=False)
    argv = [sys.executable, "-m", "probwrap", "report", "--scores", str(tmp_path / "lab.csv"),
            "--class-columns", ",".join(names), "--label-column", "outcome", "--unlabelled",
            str(tmp_path / "new.csv"), "--batch-size", str(BATCH), "--resamples", "30",
            "--out", str(tmp_path / "r.html"), "--format", "json"]
    out = subprocess.run(argv, capture_output=True, text=True, check=True)
    first = json.loads(out.stdout)["first_alarms"]
    content, _, _ = _report(y_true=lab.target, y_prob=lab.true_proba, unlabelled_prob=q,
                            batch_size=BATCH, n_resamples=30, class_names=names)
    assert first == {names[j]: a.first_batch for j, a in content.class_alarms.items()}
    assert first["intact"] is not None
    assert 'id="class-alarms"' in (tmp_path / "r.html").read_text()
    # without the unlabelled file the flag has nothing to batch
    bad = subprocess.run(argv[:10] + argv[12:], capture_output=True, text=True)
    assert bad.returncode == 2 and "--batch-size needs --unlabelled" in bad.stderr
