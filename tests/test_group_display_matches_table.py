"""GroupReliabilityDisplay's legend shows the number the by-group table shows, and marks the
groups the table does not judge.

Found on MASS birthwt by mother's race: the legend showed the 10-bin ECE (white 0.231) beside a
table showing the smooth ECE (0.153), both called "calibration error"; a group of 300 rows with 3
events was drawn solid although the table did not judge it. Reference: calibration_by_group's
own numbers (and the multiclass report's by-group table for class probabilities). Data:
scikit-learn's bundled breast-cancer set and iris.
"""

import warnings

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from sklearn.datasets import load_breast_cancer, load_iris  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402

from probwrap.metrics import calibration_by_group  # noqa: E402
from probwrap.plot import GroupReliabilityDisplay  # noqa: E402
from probwrap.report import build_report  # noqa: E402


def _cancer():
    d = load_breast_cancer()
    X = (d.data - d.data.mean(0)) / d.data.std(0)
    idx = np.random.default_rng(0).permutation(len(d.target))
    tr, te = idx[:150], idx[150:]
    p = LogisticRegression(C=0.05, max_iter=2000).fit(X[tr], d.target[tr]).predict_proba(
        X[te])[:, 1]
    size = np.where(d.data[te, 20] > 22, "large", np.where(d.data[te, 20] > 15, "mid", "small"))
    return d.target[te], p, size


@pytest.mark.parametrize("weighted", [False, True])
def test_binary_legend_and_marking_follow_calibration_by_group(weighted):
    y, p, size = _cancer()
    w = np.random.default_rng(3).integers(1, 4, size=len(y)) if weighted else None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = calibration_by_group(y, p, size, sample_weight=w, n_resamples=0)
        disp = GroupReliabilityDisplay.from_predictions(y, p, size, sample_weight=w)
    assert {c.group for c in table.groups} == set(disp.lines_)
    for c in table.groups:
        assert disp.calibration_errors[c.group] == pytest.approx(c.calibration_error, rel=1e-12)
        assert disp.effective_rows[c.group] == pytest.approx(c.effective_rows, rel=1e-12)
        assert disp.judged[c.group] == c.judged
        line = disp.lines_[c.group]
        assert (line.get_linestyle() == "--") == (not c.judged)
        assert ("too few rows to judge" in line.get_label()) == (not c.judged)
        assert f"error {c.calibration_error:.3f}" in line.get_label()
    # the one-class group ("large": all malignant) is not judged, for want of events
    assert not disp.judged["large"] and disp.effective_rows["large"] >= 50


def test_few_events_are_marked_like_the_table():
    # many benign rows, at most 3 malignant: enough rows, too few of a class (min_events)
    y, p, size = _cancer()
    g = np.where(size == "small", "small", "rest")
    keep = (g == "rest") | (y == 1) | (np.cumsum(g == "small") <= 3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = calibration_by_group(y[keep], p[keep], g[keep], n_resamples=0, min_rows=20)
        disp = GroupReliabilityDisplay.from_predictions(y[keep], p[keep], g[keep], min_rows=20)
    for c in table.groups:
        assert disp.judged[c.group] == c.judged
    small = next(c for c in table.groups if c.group == "small")
    assert not small.judged and small.effective_rows >= 100 and small.effective_negatives <= 3
    assert disp.lines_["small"].get_linestyle() == "--"


def test_class_probabilities_show_the_multiclass_tables_error():
    d = load_iris()
    P = LogisticRegression(max_iter=2000).fit(d.data[::2], d.target[::2]).predict_proba(d.data)
    g = np.where(d.data[:, 1] > 3.0, "wide", "narrow")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content, _ = build_report(y_true=d.target, y_prob=P, groups=g, n_resamples=10, n_bins=10)
        disp = GroupReliabilityDisplay.from_predictions(d.target, P, g, n_bins=10,
                                                        min_rows=100, min_events=10)
    for c in content.group_checks.groups:
        assert disp.calibration_errors[c.group] == pytest.approx(c.top_label_error, rel=1e-12)
        assert disp.judged[c.group] == c.judged
