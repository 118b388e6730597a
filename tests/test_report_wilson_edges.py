"""Wilson intervals at the edges (a bin with no positives, or only positives) and the reports
and demos that draw them.

Reference: statsmodels' ``proportion_confint(method="wilson")`` (Wilson 1927). At ``k = 0`` the
closed form's lower end is exactly 0 and at ``k = n`` its upper end is exactly 1 (the centre and
the half-width are then equal); statsmodels evaluates the same closed form in floating point
and returns e.g. 2.78e-17 for ``k = 0, n = 7``, so the comparison allows 1e-14 and the exact ends
are asserted separately.
"""

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest
from statsmodels.stats.proportion import proportion_confint

from probwrap.cli import main
from probwrap.plot import ReliabilityDiagram, wilson_interval

# bin sizes for which the unguarded closed form was a few ulp off at one end (found by search)
_N_LOW_OFF = np.array([3, 6, 7, 12, 14, 24, 25, 28, 35, 48])
_N_HIGH_OFF = np.array([10, 13, 25, 27, 28, 30, 34, 35, 38, 41])


@pytest.mark.parametrize("level", [0.8, 0.95, 0.99])
def test_wilson_edges_match_statsmodels_and_are_exact(level):
    n = np.concatenate([_N_LOW_OFF, _N_HIGH_OFF, [1, 2, 1000]])
    for k in (np.zeros_like(n), n):
        low, high = wilson_interval(k, n, level)
        ref_low, ref_high = proportion_confint(k, n, alpha=1 - level, method="wilson")
        np.testing.assert_allclose(low, ref_low, rtol=1e-12, atol=1e-14)
        np.testing.assert_allclose(high, ref_high, rtol=1e-12, atol=1e-14)
    low0, _ = wilson_interval(np.zeros_like(n), n, level)
    _, high1 = wilson_interval(n, n, level)
    assert np.all(low0 == 0.0)
    assert np.all(high1 == 1.0)


def test_wilson_interval_contains_the_observed_frequency():
    # weighted counts and every k of n = 1..60
    n = np.repeat(np.arange(1, 61), np.arange(1, 61) + 1).astype(float)
    k = np.concatenate([np.arange(m + 1) for m in range(1, 61)]).astype(float)
    for scale in (1.0, 0.37, 1e6):
        low, high = wilson_interval(k * scale, n * scale)
        p = k / n
        assert np.all(low <= p) and np.all(p <= high)
        ref_low, ref_high = proportion_confint(k * scale, n * scale, method="wilson")
        np.testing.assert_allclose(low, ref_low, rtol=1e-12, atol=1e-14)
        np.testing.assert_allclose(high, ref_high, rtol=1e-12, atol=1e-14)


def test_reliability_diagram_draws_a_bin_without_positives():
    # bin [0, 0.1) holds 7 rows and no positive: the unguarded lower end was 2.8e-17 > 0 and
    # matplotlib refused the negative error bar
    p = np.concatenate([np.full(7, 0.05), np.full(13, 0.95), np.full(20, 0.5)])
    y = np.concatenate([np.zeros(7), np.ones(13), np.arange(20) % 2])
    disp = ReliabilityDiagram.from_predictions(y, p, n_bins=10)
    assert disp.band_low[0] == 0.0 and disp.band_high[-1] == 1.0
    seg = disp.band_artist_.lines[2][0].get_segments()
    assert len(seg) == 3
    for s in seg:
        assert s[0][1] <= s[1][1]


def test_three_way_demo_runs_with_its_defaults(tmp_path, capsys):
    # the README's command `probwrap demo --out DIR --variant three-way`, default size and seed:
    # it failed 4 of 4 runs on a Wilson lower end of 5.55e-17 before the fix
    assert main(["demo", "--out", str(tmp_path), "--variant", "three-way"]) == 0
    page = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert page.count("<svg") >= 3
    assert "shift test p-value" in capsys.readouterr().out
