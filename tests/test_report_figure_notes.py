"""Warnings met while the report draws a figure land in a notes box under that figure.

Before, the report recorded the warnings of its numbers but drew its figures unguarded: a
warning of the reliability diagram (weights rescaled for its per-bin intervals) reached the
caller as a bare library warning and never the page. Now each figure is drawn with its warnings
recorded narrowly (``draw_figure``), kept in ``content.notes`` under ``"figure:<key>"``, listed
once in a box right under the figure and warned once more with the figure named.
"""

import re
import warnings

import numpy as np
import pytest

import probwrap.report
from probwrap.calibration import WeightScaleWarning
from probwrap.datasets import make_parcels
from probwrap.report import build_report
from probwrap.report._builtin_figures import builtin_figures
from probwrap.report._html import make_figures

#: weights that sum to one cannot be row frequencies: the per-bin Wilson intervals of the
#: reliability diagram rescale them to Kish's size and say so (WeightScaleWarning)
N = 600


@pytest.fixture(scope="module")
def parcels():
    return make_parcels(N, random_state=0)


def _box(page, box_id):
    m = re.search(rf'<aside class="pw-notes" id="{box_id}">(.*?)</aside>', page, re.S)
    return None if m is None else m.group(1)


def _build(**kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        content, page = build_report(n_resamples=20, **kw)
    return content, page, caught


@pytest.mark.parametrize("renderer", ["matplotlib", "builtin"])
def test_reliability_warning_goes_under_the_reliability_diagram(parcels, monkeypatch, renderer):
    if renderer == "builtin":
        monkeypatch.setattr(probwrap.report, "make_figures", builtin_figures)
    content, page, caught = _build(
        y_true=parcels.target, y_prob=parcels.true_proba[:, 1],
        sample_weight=np.full(N, 1.0 / N), costs={"fp": 3.0, "fn": 40.0})
    notes = [n for n in content.notes if n.key == "figure:reliability"]
    assert [(n.kind, n.count) for n in notes] == [("WeightScaleWarning", 1)]
    assert "Kish" in notes[0].message
    # the box sits right after the reliability figure, in the calibration section
    box = _box(page, "notes-fig-reliability")
    assert box is not None and "Kish" in box and "reliability diagram" in box
    after = page[page.index('id="fig-reliability"'):]
    assert after.index("</figure>") < after.index('id="notes-fig-reliability"') \
        < after.index("</section>")
    # the caller is told once, with the figure named; no bare warning escapes
    scale = [w for w in caught if issubclass(w.category, WeightScaleWarning)]
    assert [str(w.message)[:29] for w in scale] == ["report, reliability diagram: "]
    # no other figure got a note (the cost and decision curves read weights without warning)
    assert {n.key for n in content.notes if n.key.startswith("figure:")} == {
        "figure:reliability"}


def test_multiclass_reliability_warning_goes_under_its_figure():
    three = make_parcels(N, n_outcomes=3, random_state=3)
    content, page, caught = _build(y_true=three.target, y_prob=three.true_proba,
                                   sample_weight=np.full(N, 2.0 / N))
    assert [n.key for n in content.notes] == ["figure:reliability"]
    assert "Kish" in _box(page, "notes-fig-reliability")
    assert [str(w.message).split(":")[0] for w in caught
            if issubclass(w.category, WeightScaleWarning)] == ["report, reliability diagram"]


def test_drawing_again_does_not_repeat_a_note(parcels):
    content, _, _ = _build(y_true=parcels.target, y_prob=parcels.true_proba[:, 1],
                           sample_weight=np.full(N, 1.0 / N))
    before = list(content.notes)
    with pytest.warns(WeightScaleWarning, match="report, reliability diagram"):
        make_figures(content)
    assert content.notes == before


def test_no_figure_box_without_a_warning(parcels):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        content, page = build_report(y_true=parcels.target, y_prob=parcels.true_proba[:, 1],
                                     costs={"fp": 3.0, "fn": 40.0}, n_resamples=20)
    assert not any(n.key.startswith("figure:") for n in content.notes)
    assert 'id="notes-fig-' not in page


def test_figure_notes_box_renders_under_its_figure(parcels, tmp_path, chromium):
    _, page, _ = _build(y_true=parcels.target, y_prob=parcels.true_proba[:, 1],
                        sample_weight=np.full(N, 1.0 / N), costs={"fp": 3.0, "fn": 40.0})
    probe = (
        '<pre id="probe"></pre><script>'
        "const box = (id) => document.getElementById(id).getBoundingClientRect();"
        "const n = box('notes-fig-reliability'), f = box('fig-reliability'),"
        " d = box('decisions');"
        "const st = getComputedStyle(document.getElementById('notes-fig-reliability'));"
        "document.getElementById('probe').textContent = [n.top - f.bottom, n.height, n.width,"
        " st.visibility, st.display, d.top - n.bottom].join(';');"
        "</script>"
    )
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", probe + "</body>"), encoding="utf-8")
    proc = chromium.run(["--dump-dom", probed.as_uri()], tmp_path, "fignotes")
    assert proc.returncode == 0, proc.stderr[-2000:]
    match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
    assert match, proc.stdout[-1000:]
    gap, height, width, visibility, display, to_next = match.group(1).split(";")
    # directly under the figure (only the box's own margin between), laid out and visible,
    # and still inside the calibration section (above the decisions section)
    assert 0 <= float(gap) < 40, gap
    assert float(height) > 20 and float(width) > 300
    assert visibility == "visible" and display != "none"
    assert float(to_next) > 0
