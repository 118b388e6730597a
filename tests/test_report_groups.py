"""The report's "By group" section and the command line's --group-column (consistency: the page
shows the numbers of probwrap.metrics.calibration_by_group, whose own references are in
tests/test_groups_reference.py)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main
from probwrap.metrics import calibration_by_group
from probwrap.report import build_report


def _rows(n=3000, seed=0):
    rng = np.random.default_rng(seed)
    g = rng.choice(["north", "south", "east"], size=n, p=[0.5, 0.47, 0.03])
    p = rng.uniform(0.02, 0.5, size=n)
    y = (rng.uniform(size=n) < np.where(g == "south", np.clip(1.4 * p, 0, 1), p)).astype(int)
    return y, p, g


def test_report_by_group_section_shows_the_group_checks():
    y, p, g = _rows()
    content, page = build_report(y_true=y, y_prob=p, groups=g, costs={"fp": 3, "fn": 40},
                                 n_resamples=20)
    checks = content.group_checks
    ref = calibration_by_group(y, p, g, cutoff=content.chosen_cutoff,
                               costs=content.cost_matrix, n_resamples=0)
    assert [c.group for c in checks.groups] == [c.group for c in ref.groups]
    for ours, theirs in zip(checks.groups, ref.groups, strict=True):
        assert ours.calibration_slope == pytest.approx(theirs.calibration_slope, rel=1e-12)
        assert ours.false_negative_rate == pytest.approx(theirs.false_negative_rate, rel=1e-12)
    assert '<section id="by-group">' in page and 'href="#by-group"' in page
    assert 'data-group="east"' in page and "too small to judge" in page
    south = next(c for c in checks.groups if c.group == "south")
    assert f"{south.calibration_error:.4f}" in page
    assert checks.gaps[0].highest == "south"


def test_report_without_groups_has_no_section():
    y, p, _ = _rows(800)
    content, page = build_report(y_true=y, y_prob=p, n_resamples=20)
    assert content.group_checks is None and "by-group" not in page


def test_cli_group_column(tmp_path, capsys):
    y, p, g = _rows()
    src = tmp_path / "scores.csv"
    pd.DataFrame({"risk": p, "damaged": y, "depot": g}).to_csv(src, index=False)
    out = tmp_path / "report.html"
    code = main(["report", "--scores", str(src), "--score-column", "risk", "--label-column",
                 "damaged", "--group-column", "depot", "--cost-fp", "3", "--cost-fn", "40",
                 "--resamples", "20", "--out", str(out)])
    assert code == 0
    page = out.read_text()
    assert 'id="group-checks"' in page and 'data-group="south"' in page


def test_cli_group_column_errors(tmp_path, capsys):
    y, p, g = _rows(500)
    g = g.astype(object)
    g[7] = None
    src = tmp_path / "scores.csv"
    pd.DataFrame({"risk": p, "damaged": y, "depot": g}).to_csv(src, index=False)
    args = ["report", "--scores", str(src), "--score-column", "risk", "--label-column",
            "damaged", "--resamples", "20", "--out", str(tmp_path / "r.html")]
    assert main([*args, "--group-column", "depot"]) != 0
    assert "row 9" in capsys.readouterr().err
    assert main([*args, "--group-column", "region"]) != 0
    assert "--group-column" in capsys.readouterr().err
