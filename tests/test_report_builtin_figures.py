"""The report's built-in SVG figures (no matplotlib): right numbers, inline-safe, rendered.

Drawn coordinates are mapped back through each panel's axis transform and compared with
probwrap.metrics / probwrap.decision / probwrap.shift, which are checked against outside
references elsewhere; the Wilson intervals are also checked against statsmodels.
"""

import importlib
import re
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from statsmodels.stats.proportion import proportion_confint

import probwrap.report
from probwrap.datasets import make_parcels
from probwrap.metrics import net_benefit, net_benefit_treat_all, reliability_table
from probwrap.report._builtin_figures import THRESHOLDS, builtin_figures
from probwrap.report._content import collect_content
from probwrap.report._html import render_html
from probwrap.report._svg_axes import pixel_to_data
from probwrap.report._svg_charts import Chart

SVG = "{http://www.w3.org/2000/svg}"
TOL = 1e-6


# -- helpers ----------------------------------------------------------------------------------
def _panels(svg):
    root = ET.fromstring(svg)
    return root, root.findall(f".//{SVG}g[@class='pw-panel']")


def _axes(panel):
    xlim = tuple(float(v) for v in panel.get("data-xlim").split())
    ylim = tuple(float(v) for v in panel.get("data-ylim").split())
    bx, by, bw, bh = (float(v) for v in panel.get("data-box").split())

    def to_x(px):
        return pixel_to_data(px, xlim, bx, bw)

    def to_y(py):
        return pixel_to_data(py, ylim, by, bh, flip=True)

    return to_x, to_y


def _series(panel, name):
    found = panel.findall(f".//{SVG}g[@data-series='{name}']")
    assert len(found) == 1, name
    return found[0]


def _polyline_data(panel, name):
    """Concatenated (x, y) data of every polyline piece of one series."""
    to_x, to_y = _axes(panel)
    pieces = _series(panel, name).findall(f"{SVG}polyline")
    pts = np.array([[float(v) for v in pair.split(",")]
                    for pl in pieces for pair in pl.get("points").split()])
    return to_x(pts[:, 0]), to_y(pts[:, 1]), len(pieces)


def _find_panel(panels, name):
    hits = [p for p in panels if p.findall(f".//{SVG}g[@data-series='{name}']")]
    assert len(hits) == 1, name
    return hits[0]


# -- fixtures ---------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def content():
    # 6,000 labelled rows: the shift test carries the labelled rows' error, and with fewer no
    # batch of 250 is flagged at 1 %
    train = make_parcels(6000, random_state=30)
    winter = make_parcels(1000, season="winter", random_state=31)
    src = train.source_prior
    back = winter.true_proba * (src / winter.prior)
    back /= back.sum(axis=1, keepdims=True)
    return collect_content(
        y_true=train.target, y_prob=train.true_proba[:, 1], costs={"fp": 3.0, "fn": 40.0},
        capacity=0.2, unlabelled_prob=back[:, 1], batch_size=250, n_resamples=20,
    )


@pytest.fixture(scope="module")
def figures(content):
    return builtin_figures(content)


# -- numbers ----------------------------------------------------------------------------------
def test_keys_match_the_report(content, figures):
    assert sorted(figures) == ["alarm", "cost", "decision_curve", "prevalence",
                               "reliability"]
    no_costs = collect_content(y_true=content.y_true, y_prob=content.y_prob, n_resamples=5)
    assert sorted(builtin_figures(no_costs)) == ["decision_curve", "reliability"]


def test_reliability_points_intervals_and_counts(content, figures):
    table = reliability_table(content.y_true, content.y_prob, n_bins=content.n_bins,
                              labels=[0.0, 1.0])
    _, panels = _panels(figures["reliability"])
    main = _find_panel(panels, "observed")
    x, y, _ = _polyline_data(main, "observed")
    np.testing.assert_allclose(x, table.mean_predicted, atol=TOL, rtol=0)
    np.testing.assert_allclose(y, table.observed_frequency, atol=TOL, rtol=0)
    # markers sit on the same points
    to_x, to_y = _axes(main)
    circles = _series(main, "observed").findall(f"{SVG}circle")
    np.testing.assert_allclose(to_y([float(c.get("cy")) for c in circles]),
                               table.observed_frequency, atol=TOL, rtol=0)
    # the diagonal
    dx, dy, _ = _polyline_data(main, "diagonal")
    np.testing.assert_allclose(dx, [0, 1], atol=TOL)
    np.testing.assert_allclose(dy, [0, 1], atol=TOL)
    # Wilson interval ends, against statsmodels' independent implementation
    ends = []
    for path in _series(main, "wilson").findall(f"{SVG}path"):
        m = re.match(r"M(\S+) (\S+) V(\S+)", path.get("d"))
        ends.append([float(m.group(1)), float(m.group(2)), float(m.group(3))])
    ends = np.array(ends)
    counts = np.round(table.observed_frequency * table.weight).astype(int)
    low, high = proportion_confint(counts, table.weight.astype(int), alpha=0.05,
                                   method="wilson")
    np.testing.assert_allclose(to_x(ends[:, 0]), table.mean_predicted, atol=TOL, rtol=0)
    np.testing.assert_allclose(to_y(ends[:, 1]), low, atol=TOL, rtol=0)
    np.testing.assert_allclose(to_y(ends[:, 2]), high, atol=TOL, rtol=0)
    # count histogram: one bar per used bin, height = rows in the bin, inside the bin
    hist = _find_panel(panels, "counts")
    hx, hy = _axes(hist)
    rects = _series(hist, "counts").findall(f"{SVG}rect")
    heights = [hy(float(r.get("y"))) - hy(float(r.get("y")) + float(r.get("height")))
               for r in rects]
    np.testing.assert_allclose(heights, table.weight, atol=1e-6 * table.weight.max())
    lefts = hx([float(r.get("x")) for r in rects])
    assert np.all(lefts >= table.lower - TOL) and np.all(lefts < table.upper)


def test_reliability_with_sample_weight_uses_weighted_bins():
    parcels = make_parcels(600, random_state=4)
    w = np.random.default_rng(0).uniform(0.5, 2.0, size=600)
    c = collect_content(y_true=parcels.target, y_prob=parcels.true_proba[:, 1],
                        sample_weight=w, n_resamples=5, n_bins=5)
    table = reliability_table(c.y_true, c.y_prob, n_bins=5, sample_weight=w,
                              labels=[0.0, 1.0])
    _, panels = _panels(builtin_figures(c)["reliability"])
    _, y, _ = _polyline_data(_find_panel(panels, "observed"), "observed")
    np.testing.assert_allclose(y, table.observed_frequency, atol=TOL, rtol=0)


def test_cost_curve_markers_and_capacity(content, figures):
    res = content.cost_curve
    _, panels = _panels(figures["cost"])
    panel = panels[0]
    adm = np.asarray(res.admissible, dtype=bool)
    assert not adm.all() and adm.any()  # the capacity of 0.2 excludes low cutoffs
    x, y, _ = _polyline_data(panel, "curve")
    np.testing.assert_allclose(x, res.cutoffs[adm], atol=TOL, rtol=0)
    np.testing.assert_allclose(y, res.costs[adm], atol=TOL, rtol=0)
    gx, gy, _ = _polyline_data(panel, "over-capacity")
    np.testing.assert_allclose(gx, res.cutoffs[~adm], atol=TOL, rtol=0)
    np.testing.assert_allclose(gy, res.costs[~adm], atol=TOL, rtol=0)
    for name, value in (("chosen", content.chosen_cutoff), ("plugin", content.plugin),
                        ("half", 0.5)):
        vx, _, _ = _polyline_data(panel, name)
        np.testing.assert_allclose(vx, [value, value], atol=TOL, rtol=0)
    to_x, _ = _axes(panel)
    rect = _series(panel, "interval").find(f"{SVG}rect")
    x0 = float(rect.get("x"))
    np.testing.assert_allclose(
        to_x([x0, x0 + float(rect.get("width"))]),
        [content.cost_interval.low, content.cost_interval.high], atol=TOL, rtol=0,
    )
    # the chosen cutoff is the least cost among admissible decisions
    assert content.chosen_cutoff == pytest.approx(res.cutoff)
    assert res.cost == pytest.approx(res.costs[adm].min())


def test_decision_curve_values(content, figures):
    _, panels = _panels(figures["decision_curve"])
    panel = panels[0]
    nb = net_benefit(content.y_true, content.y_prob, THRESHOLDS, labels=[0, 1])
    ta = net_benefit_treat_all(content.y_true, THRESHOLDS, labels=[0, 1])
    x, y, _ = _polyline_data(panel, "model")
    np.testing.assert_allclose(x, THRESHOLDS, atol=TOL, rtol=0)
    np.testing.assert_allclose(y, nb, atol=TOL, rtol=0)
    # the definition TP/n - FP/n * t/(1 - t) (Vickers & Elkin 2006), acting when p >= t
    y01, p = content.y_true, content.y_prob
    for j in (4, 19, 49):
        t = THRESHOLDS[j]
        act = p >= t
        expect = np.mean(y01 * act) - np.mean((1 - y01) * act) * t / (1 - t)
        assert y[j] == pytest.approx(expect, abs=TOL)
    _, ya, _ = _polyline_data(panel, "treat-all")
    np.testing.assert_allclose(ya, ta, atol=TOL, rtol=0)
    _, y0, _ = _polyline_data(panel, "treat-none")
    np.testing.assert_allclose(y0, 0.0, atol=TOL)
    mx, _, _ = _polyline_data(panel, "marked")
    np.testing.assert_allclose(mx, content.chosen_cutoff, atol=TOL)


def test_alarm_chart_draws_the_cusum(content, figures):
    # consistency: the drawn sums map back to the CUSUM of the report's batch table
    res = content.alarm.result
    _, panels = _panels(figures["alarm"])
    panel = panels[0]
    x, up, _ = _polyline_data(panel, "upper")
    np.testing.assert_allclose(x, np.arange(res.upper.shape[0]), atol=TOL)
    np.testing.assert_allclose(up, res.upper, atol=TOL, rtol=0)
    _, down, _ = _polyline_data(panel, "lower")
    np.testing.assert_allclose(down, res.lower, atol=TOL, rtol=0)
    _, hy, _ = _polyline_data(panel, "interval")
    np.testing.assert_allclose(hy, res.decision_interval, atol=TOL)


def test_prevalence_per_batch(content, figures):
    tab = content.batch_table
    _, panels = _panels(figures["prevalence"])
    panel = panels[0]
    x, y, _ = _polyline_data(panel, "prevalence")
    np.testing.assert_allclose(x, np.arange(tab.shape[0]), atol=TOL)
    np.testing.assert_allclose(y, tab["prior"][:, 1], atol=TOL, rtol=0)
    to_x, to_y = _axes(panel)
    poly = _series(panel, "interval").find(f"{SVG}polygon")
    pts = np.array([[float(v) for v in pair.split(",")] for pair in poly.get("points").split()])
    m = tab.shape[0]
    np.testing.assert_allclose(to_y(pts[:m, 1]), tab["upper"][:, 1], atol=TOL, rtol=0)
    np.testing.assert_allclose(to_y(pts[m:, 1])[::-1], tab["lower"][:, 1], atol=TOL, rtol=0)
    _, sy, _ = _polyline_data(panel, "source")
    np.testing.assert_allclose(sy, content.source_prevalence, atol=TOL)
    flagged = tab["shift_pvalue"] < 0.01
    assert flagged.any()
    rings = _series(panel, "flagged").findall(f"{SVG}circle")
    np.testing.assert_allclose(sorted(to_x([float(c.get("cx")) for c in rings])),
                               np.flatnonzero(flagged), atol=TOL)


def test_general_content_gives_top_label_reliability_only():
    three = make_parcels(1200, n_outcomes=3, random_state=3)
    c = collect_content(y_true=three.target, y_prob=three.true_proba,
                        costs=[[0, 4, 12], [20, 4, 12], [60, 64, 12]], n_resamples=5)
    assert getattr(c, "kind", "binary") == "general"
    figs = builtin_figures(c)
    assert list(figs) == ["reliability"]
    table = reliability_table(c.y_true, c.y_prob, n_bins=c.n_bins)
    assert table.top_label
    _, panels = _panels(figs["reliability"])
    x, y, _ = _polyline_data(_find_panel(panels, "observed"), "observed")
    np.testing.assert_allclose(x, table.mean_predicted, atol=TOL, rtol=0)
    np.testing.assert_allclose(y, table.observed_frequency, atol=TOL, rtol=0)
    assert "top label" in ET.fromstring(figs["reliability"]).find(f"{SVG}title").text


# -- inline safety ----------------------------------------------------------------------------
def test_ids_unique_prefixed_and_references_resolve(figures):
    all_ids = []
    for key, svg in figures.items():
        root = ET.fromstring(svg)
        assert root.tag == f"{SVG}svg"
        assert root.get("role") == "img"
        assert root.get("viewBox") == f"0 0 {root.get('width')} {root.get('height')}"
        assert root.find(f"{SVG}title").text
        prefix = root.get("data-key")
        ids = [el.get("id") for el in root.iter() if el.get("id")]
        assert ids and all(i.startswith(prefix + "-") for i in ids), key
        refs = re.findall(r"url\(#([^)]+)\)", svg)
        assert refs and set(refs) <= set(ids), key
        assert set(root.get("aria-labelledby").split()) <= set(ids)
        assert "<script" not in svg.lower() and "href" not in svg
        all_ids += ids
    assert len(all_ids) == len(set(all_ids))


def test_text_is_escaped():
    nasty = "costs <b>& \"q\" 'a'</b> ]]> <script>alert(1)</script>"
    chart = Chart("esc", title=nasty, description=nasty)
    chart.add_panel(xlim=(0, 1), ylim=(0, 1), xlabel=nasty, ylabel=nasty, title=nasty,
                    xticks=[0.5], xticklabels=[nasty]).line(
        [0, 1], [0, 1], label=nasty, name=nasty).legend()
    svg = chart.to_svg()
    assert "<script" not in svg and "<b>" not in svg
    root = ET.fromstring(svg)
    texts = [el.text for el in root.iter(f"{SVG}text")]
    assert texts.count(nasty) >= 5  # chart title, panel title, axis labels, tick, legend
    assert root.find(f"{SVG}title").text == nasty
    assert root.find(f".//{SVG}g[@class='pw-series pw-line']").get("data-series") == nasty
    with pytest.raises(ValueError, match="key"):
        Chart('x" onload="', title="t")


def test_axis_transform_and_nan_breaks():
    chart = Chart("t1", title="t", width=400, height=300)
    panel = chart.add_panel(xlim=(-2.0, 3.0), ylim=(10.0, 20.0))
    panel.line([-2, -1, np.nan, 1, 3], [10, 12, np.nan, 15, 20], name="l")
    _, panels = _panels(chart.to_svg())
    x, y, pieces = _polyline_data(panels[0], "l")
    assert pieces == 2
    np.testing.assert_allclose(x, [-2, -1, 1, 3], atol=1e-9)
    np.testing.assert_allclose(y, [10, 12, 15, 20], atol=1e-9)
    bx, by, bw, bh = (float(v) for v in panels[0].get("data-box").split())
    pl = panels[0].find(f".//{SVG}polyline")
    first = [float(v) for v in pl.get("points").split()[0].split(",")]
    assert first == pytest.approx([bx, by + bh])  # (xmin, ymin) is the lower-left corner


# -- no matplotlib ----------------------------------------------------------------------------
def test_works_with_matplotlib_blocked(monkeypatch, content):
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.setitem(sys.modules, name, None)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    for name in ("probwrap.report._builtin_figures", "probwrap.report._svg_charts",
                 "probwrap.report._svg_axes",
                 "probwrap.plot._intervals", "probwrap.plot._style"):
        if name in sys.modules:
            monkeypatch.delitem(sys.modules, name)
    with pytest.raises(ImportError):
        import matplotlib  # noqa: F401
    fresh = importlib.import_module("probwrap.report._builtin_figures")
    figs = fresh.builtin_figures(content)
    assert sorted(figs) == ["alarm", "cost", "decision_curve", "prevalence", "reliability"]
    for svg in figs.values():
        ET.fromstring(svg)
    # the whole page through the public entry point, figures from the built-in renderer
    monkeypatch.setattr(probwrap.report, "make_figures", fresh.builtin_figures)
    _, html = probwrap.report.build_report(
        y_true=content.y_true, y_prob=content.y_prob, costs={"fp": 3.0, "fn": 40.0},
        n_resamples=5,
    )
    assert html.count('class="pw-svg-chart"') == 3
    assert "matplotlib" not in sys.modules or sys.modules["matplotlib"] is None


# -- a whole page in headless Chromium --------------------------------------------------------
@pytest.fixture(scope="module")
def page(content, figures):
    return render_html(content, figures)


def test_build_report_with_builtin_figures(monkeypatch, content):
    monkeypatch.setattr(probwrap.report, "make_figures", builtin_figures)
    c, html = probwrap.report.build_report(
        y_true=content.y_true, y_prob=content.y_prob, costs={"fp": 3.0, "fn": 40.0},
        n_resamples=5,
    )
    assert html.count('class="pw-svg-chart"') == 3
    assert "<script" not in html


def test_page_renders_without_console_errors_and_every_figure_visible(page, tmp_path, chromium):
    assert "<script" not in page and page.count('class="pw-svg-chart"') == 5
    path = tmp_path / "report.html"
    path.write_text(page, encoding="utf-8")
    proc = chromium.run(["--enable-logging=stderr", "--v=0", f"--screenshot={tmp_path / 's.png'}",
                      path.as_uri()], tmp_path, "shot")
    assert proc.returncode == 0, proc.stderr[-2000:]
    console = [line for line in proc.stderr.splitlines() if "CONSOLE" in line]
    assert console == [], console
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", chromium.probe + "</body>"), encoding="utf-8")
    proc = chromium.run(["--dump-dom", probed.as_uri()], tmp_path, "dom")
    assert proc.returncode == 0, proc.stderr[-2000:]
    match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
    assert match, proc.stdout[-1000:]
    entries = match.group(1).split(";")
    assert [e.split(":")[0] for e in entries] == [
        "fig-reliability", "fig-cost", "fig-decision-curve", "fig-prevalence", "fig-alarm"]
    for entry in entries:
        _, size, visibility, display = entry.split(":")
        w, h = (int(v) for v in size.split("x"))
        assert w > 200 and h > 150, entry
        assert visibility == "visible" and display != "none", entry


def test_same_numbers_as_the_matplotlib_displays(content, figures):
    pytest.importorskip("matplotlib")
    from probwrap.plot import (
        CostCurveDisplay,
        DecisionCurveDisplay,
        PrevalenceDriftDisplay,
        ReliabilityDiagram,
    )

    rel = ReliabilityDiagram.from_predictions(
        content.y_true, content.y_prob, n_bins=content.n_bins, pos_label=1.0,
        confidence_level=content.confidence_level,
    )
    _, panels = _panels(figures["reliability"])
    main = _find_panel(panels, "observed")
    x, y, _ = _polyline_data(main, "observed")
    np.testing.assert_allclose(x, rel.line_.get_xdata(), atol=TOL, rtol=0)
    np.testing.assert_allclose(y, rel.line_.get_ydata(), atol=TOL, rtol=0)
    _, to_y = _axes(main)
    tops = [float(re.match(r"M\S+ \S+ V(\S+)", p.get("d")).group(1))
            for p in _series(main, "wilson").findall(f"{SVG}path")]
    np.testing.assert_allclose(to_y(tops), rel.band_high, atol=TOL, rtol=0)
    assert f"{rel.calibration_error:.4f}" in ET.fromstring(figures["reliability"]).find(
        f"{SVG}title").text

    cost = CostCurveDisplay(result=content.cost_curve, plugin_cutoff=content.plugin,
                            interval=content.cost_interval).plot()
    cx, cy, _ = _polyline_data(_panels(figures["cost"])[1][0], "curve")
    keep = np.isfinite(cost.line_.get_ydata())
    np.testing.assert_allclose(cx, cost.line_.get_xdata()[keep], atol=TOL, rtol=0)
    np.testing.assert_allclose(cy, cost.line_.get_ydata()[keep], atol=TOL, rtol=0)

    dc = DecisionCurveDisplay.from_predictions(content.y_true, content.y_prob, pos_label=1.0)
    dpanel = _panels(figures["decision_curve"])[1][0]
    dx, dy, _ = _polyline_data(dpanel, "model")
    np.testing.assert_allclose(dx, dc.thresholds, atol=TOL, rtol=0)
    np.testing.assert_allclose(dy, dc.net_benefit, atol=TOL, rtol=0)
    ylim = tuple(float(v) for v in dpanel.get("data-ylim").split())
    np.testing.assert_allclose(ylim, dc.ax_.get_ylim(), atol=1e-12)

    drift = PrevalenceDriftDisplay.from_table(content.batch_table,
                                              source_prevalence=content.source_prevalence)
    _, py, _ = _polyline_data(_panels(figures["prevalence"])[1][0], "prevalence")
    np.testing.assert_allclose(py, drift.prevalence, atol=TOL, rtol=0)


def test_write_report_without_matplotlib_uses_the_builtin_figures(monkeypatch, tmp_path):
    # A plain `pip install .` has no matplotlib: the report must still carry its figures.
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.setitem(sys.modules, name, None)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(ImportError):
        import matplotlib  # noqa: F401
    held = make_parcels(1500, random_state=3)
    p = held.true_proba[:, 1]
    out = tmp_path / "report.html"
    content = probwrap.report.write_report(
        out, y_true=held.target, y_prob=p, costs={"fp": 3.0, "fn": 40.0}, n_resamples=20,
        random_state=0,
    )
    page = out.read_text()
    assert page.count("<svg") == 3  # reliability, cost curve, decision curve
    assert 'id="fig-reliability"' in page and 'id="fig-cost"' in page
    # the numbers in the table still come from the library
    assert content.cost_curve.cutoff == pytest.approx(content.chosen_cutoff)
    three = make_parcels(1500, n_outcomes=3, random_state=4)
    out3 = tmp_path / "three.html"
    probwrap.report.write_report(
        out3, y_true=three.target, y_prob=three.true_proba,
        costs=[[0, 4, 12], [30, 4, 12], [60, 60, 12]], action_names=["ship", "repack", "hold"],
        n_resamples=20, random_state=0,
    )
    assert out3.read_text().count("<svg") == 1  # the top-label reliability diagram
