"""Warnings and expected failures met while computing a report's numbers reach the reader.

Each computation is run with its warnings recorded narrowly (only inside that call); they are
listed in a "notes" box beside the number they concern, kept in ``content.notes`` and warned once
more with the number named. Expected failures (a slope on separated classes) become a note and
an empty cell; any other exception propagates.
"""

import re
import warnings

import numpy as np
import pytest

from probwrap.metrics import calibration_slope_intercept
from probwrap.report import ReportNote, build_report
from probwrap.report._common import NoteLog


def test_note_log_records_narrowly_and_lets_unexpected_errors_through():
    log = NoteLog()

    def warns_twice():
        warnings.warn("first", RuntimeWarning, stacklevel=1)
        warnings.warn("first", RuntimeWarning, stacklevel=1)
        warnings.warn("second", UserWarning, stacklevel=1)
        return 7

    with pytest.warns(RuntimeWarning, match="report, the number: first"), \
            pytest.warns(UserWarning, match="report, the number: second"):
        assert log.compute("k", "the number", warns_twice) == 7
    assert log.notes[0] == ReportNote("k", "the number", "RuntimeWarning", "first", 2)
    assert log.notes[1] == ReportNote("k", "the number", "UserWarning", "second", 1)

    def fails():
        raise ValueError("too few rows")

    with pytest.warns(UserWarning, match="report, other: not computed: too few rows"):
        assert log.compute("m", "other", fails, expected=(ValueError,)) is None
    assert log.notes[-1] == ReportNote("m", "other", "not computed", "too few rows")
    with pytest.raises(ValueError, match="too few rows"):
        log.compute("m", "other", fails)  # not listed as expected: propagates
    with pytest.raises(TypeError):
        log.compute("m", "other", lambda: 1 + "a", expected=(ValueError,))
    # nothing is left filtered outside the call
    with pytest.warns(UserWarning):
        warnings.warn("outside", UserWarning, stacklevel=1)


def _notes_box(page, box_id):
    m = re.search(rf'<aside class="pw-notes" id="{box_id}">(.*?)</aside>', page, re.S)
    return None if m is None else m.group(1)


def test_separated_classes_slope_becomes_a_note_beside_the_metrics():
    # every positive above every negative: the calibration slope is unbounded (the library
    # returns NaN with a warning); the report shows an empty cell and says why, next to the table
    rng = np.random.default_rng(0)
    p = np.concatenate([rng.uniform(0.05, 0.4, 60), rng.uniform(0.6, 0.95, 40)])
    y = np.r_[np.zeros(60, int), np.ones(40, int)]
    with pytest.warns(UserWarning, match="do not overlap") as exc:
        calibration_slope_intercept(y, p)
    with pytest.warns(UserWarning):
        content, page = build_report(y_true=y, y_prob=p, n_resamples=20)
    slope = {m.key: m for m in content.metrics}["slope"]
    assert np.isnan(slope.value)
    notes = [n for n in content.notes if n.key == "metric:slope"]
    assert [n.kind for n in notes] == ["not computed"]
    assert notes[0].message == str(exc[0].message)
    box = _notes_box(page, "notes-calibration")
    assert box is not None and 'data-note="metric:slope"' in box
    assert "do not overlap" in box
    # the box follows the metrics table, and the slope's row links to it
    assert page.index('id="calibration-metrics"') < page.index('id="notes-calibration"')
    row = re.search(r'<tr data-metric="slope">(.*?)</tr>', page).group(1)
    assert 'href="#notes-calibration"' in row


def test_partial_resample_warning_reaches_the_reader():
    # two positives among 40 rows: many resamples hold no positive, the slope fails there and
    # bootstrap_interval warns how many resamples were left out
    rng = np.random.default_rng(1)
    p = rng.uniform(0.02, 0.3, 40)
    y = np.zeros(40, int)
    y[[3, 17]] = 1
    p[[3, 17]] = [0.05, 0.25]
    with pytest.warns(UserWarning, match="report, calibration slope"):
        content, page = build_report(y_true=y, y_prob=p, n_resamples=60, random_state=0)
    kinds = {n.kind for n in content.notes if n.key == "metric:slope"}
    assert kinds  # something was recorded about the slope
    msgs = " ".join(n.message for n in content.notes if n.key == "metric:slope")
    assert "resample" in msgs
    assert "resample" in _notes_box(page, "notes-calibration")


def test_no_notes_box_when_nothing_was_said():
    rng = np.random.default_rng(2)
    p = rng.uniform(0.05, 0.95, 400)
    y = (rng.uniform(size=400) < p).astype(int)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # and nothing was warned either
        content, page = build_report(y_true=y, y_prob=p, n_resamples=20)
    assert content.notes == []
    assert 'class="pw-notes"' not in page


def test_notes_box_renders_beside_its_table(tmp_path, chromium):
    rng = np.random.default_rng(0)
    p = np.concatenate([rng.uniform(0.05, 0.4, 60), rng.uniform(0.6, 0.95, 40)])
    y = np.r_[np.zeros(60, int), np.ones(40, int)]
    with pytest.warns(UserWarning):
        _, page = build_report(y_true=y, y_prob=p, costs={"fp": 3.0, "fn": 40.0},
                               n_resamples=20)
    probe = (
        '<pre id="probe"></pre><script>'
        "const box = (id) => document.getElementById(id).getBoundingClientRect();"
        "const n = box('notes-calibration'), t = box('calibration-metrics'),"
        " r = box('recommendation'), s = box('calibration');"
        "const st = getComputedStyle(document.getElementById('notes-calibration'));"
        "document.getElementById('probe').textContent = [n.top - t.bottom, n.height, n.width,"
        " st.visibility, st.display, r.top < s.top ? 'above' : 'below', r.height].join(';');"
        "</script>"
    )
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", probe + "</body>"), encoding="utf-8")
    proc = chromium.run(["--dump-dom", probed.as_uri()], tmp_path, "notes")
    assert proc.returncode == 0, proc.stderr[-2000:]
    match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
    assert match, proc.stdout[-1000:]
    gap, height, width, visibility, display, rec_pos, rec_height = match.group(1).split(";")
    # the notes box sits right under the metrics table (no figure or paragraph in between
    # taller than a line or two), is laid out and visible
    assert 0 <= float(gap) < 120, gap
    assert float(height) > 20 and float(width) > 300
    assert visibility == "visible" and display != "none"
    # the recommendation box is at the top, before the calibration section
    assert rec_pos == "above" and float(rec_height) > 40
