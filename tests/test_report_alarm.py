"""The report's prevalence alarm: the CUSUM chart and sentence on the prevalence section.

The CUSUM itself is checked against Brook & Evans (1972) and the published run-length table
in tests/test_shift_alarms.py; here: the alarm fires after the prevalence doubles and not when it
stays put, the report's numbers are cusum_alarms on the batch table (consistency), and the chart
renders in headless Chromium.
"""

import re

import numpy as np
import pytest

from probwrap.datasets import make_parcels
from probwrap.report import write_report
from probwrap.shift import baseline_error_run_length, cusum_alarms

BATCH = 1000


def _summer_view(parcels, source_prior):
    """Posteriors of the summer model for rows drawn at another prevalence (prior shift)."""
    back = parcels.true_proba * (source_prior / parcels.prior)
    return (back / back.sum(axis=1, keepdims=True))[:, 1]


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    train = make_parcels(3000, random_state=50)
    src = train.source_prior
    same = [make_parcels(BATCH, prevalence=float(src[1]), random_state=60 + i)
            for i in range(10)]
    doubled = [make_parcels(BATCH, prevalence=2 * float(src[1]), random_state=70 + i)
               for i in range(6)]
    stable_q = np.concatenate([_summer_view(b, src) for b in same])
    shifted_q = np.concatenate([_summer_view(b, src) for b in same[:4] + doubled])
    out = {}
    root = tmp_path_factory.mktemp("alarm")
    for name, q in (("stable", stable_q), ("shifted", shifted_q)):
        path = root / f"{name}.html"
        content = write_report(path, y_true=train.target, y_prob=train.true_proba[:, 1],
                               costs={"fp": 3.0, "fn": 40.0}, unlabelled_prob=q,
                               batch_size=BATCH, n_resamples=40)
        out[name] = (path, content)
    return out


def test_alarm_fires_after_the_prevalence_doubles(reports):
    path, c = reports["shifted"]
    alarm = c.alarm
    assert alarm.first_batch is not None
    # batches 0-3 are in control, 4-9 at twice the prevalence: the first alarm comes after
    # the change and upward (a doubling is several standard errors per batch of 1000 rows)
    assert int(alarm.first_batch) >= 4
    assert alarm.result.direction[0] == 1
    page = path.read_text(encoding="utf-8")
    assert f"Alarm after batch {alarm.first_batch}" in page
    assert 'id="fig-alarm"' in page


def test_no_alarm_when_the_prevalence_stays(reports):
    path, c = reports["stable"]
    assert c.alarm.first_batch is None
    assert c.alarm.result.alarms.size == 0
    page = path.read_text(encoding="utf-8")
    assert "No alarm" in page and 'data-n-alarms="0"' in page


def test_report_numbers_are_cusum_alarms_on_the_batch_table(reports):
    # consistency test: the report's chart is cusum_alarms with the documented defaults on the
    # signed roots of the batches' shift statistics (a standard normal each when nothing moved)
    for _, c in reports.values():
        t = c.batch_table
        z = np.sign(t["prior"][:, 1] - c.source_prevalence) * np.sqrt(t["shift_statistic"])
        ref = cusum_alarms(z, 0.0, 1.0)
        np.testing.assert_allclose(c.alarm.result.upper, ref.upper, rtol=0, atol=1e-12)
        np.testing.assert_allclose(c.alarm.result.lower, ref.lower, rtol=0, atol=1e-12)
        assert c.alarm.result.alarms.tolist() == ref.alarms.tolist()
        assert (c.alarm.result.reference, c.alarm.result.decision_interval) == (0.5, 5.0)
        # in-control ARL of the two-sided chart, k = 0.5, h = 5, with an exact baseline: 465
        # batches (Montgomery's table, values from memory; the Markov-chain computation is
        # checked in test_shift_alarms.py)
        assert round(c.alarm.exact_baseline_run_length) == 465
        # 3000 labelled rows against batches of 1000: the labelled rows take 1000 / 4000 of
        # each batch's variance, so the quoted run length is the one reached with
        # probability 0.9 over them, far below 465, and the report says so
        assert c.alarm.labelled_share == pytest.approx(0.25)
        assert c.alarm.in_control_run_length == baseline_error_run_length(0.25).assured
        assert c.alarm.in_control_run_length < 50
        assert any("same labelled rows" in w for w in c.alarm.warnings)


def test_alarm_chart_renders_in_chromium(reports, tmp_path, chromium):
    path, c = reports["shifted"]
    page = path.read_text(encoding="utf-8")
    # the ringed alarms are drawn: one ring per alarm in the chart's "alarms" series
    svg = page[page.index('id="fig-alarm"'):]
    svg = svg[:svg.index("</figure>")]
    group = re.search(r'data-series="alarms".*?</g>', svg, re.S)
    assert group and group.group(0).count("<circle") == c.alarm.result.alarms.size
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", chromium.probe + "</body>"), encoding="utf-8")
    proc = chromium.run(["--enable-logging=stderr", "--v=0", "--dump-dom", probed.as_uri()],
                        tmp_path, "alarm")
    assert proc.returncode == 0, proc.stderr[-2000:]
    console = [line for line in proc.stderr.splitlines()
               if "CONSOLE" in line and "probe" not in line]
    assert console == [], console
    match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
    assert match, proc.stdout[-1000:]
    entries = dict(e.split(":", 1) for e in match.group(1).split(";"))
    assert list(entries)[-2:] == ["fig-prevalence", "fig-alarm"]
    size, visibility, display = entries["fig-alarm"].split(":")
    w, h = (int(v) for v in size.split("x"))
    assert w > 200 and h > 150 and visibility == "visible" and display != "none"
    assert f"Alarm after batch {c.alarm.first_batch}" in proc.stdout
