"""``probwrap cutoff`` prints its same-cost range so that the two ends read differently.

The range ``[low, high)`` of cutoffs with the least cost was printed end by end with six
significant digits (or two of the distance to 1): on scikit-learn's bundled breast-cancer set
(Wolberg, Street & Mangasarian 1995; malignant positive), a standardised logistic regression
with C=10 puts the least-cost cutoff at 20 % capacity between two cross-validated
probabilities of about 0.9999993 that both printed ``0.999999``: ``same cost for [0.999999,
0.999999)``, a range with no cutoff in it (and scores 0.99999999811 / 0.99999999814 gave
``[0.9999999981, 0.9999999981)``). Now the cutoff and both ends get the digits that tell them
apart, and a range that is one cutoff says so.
"""
from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest

from probwrap._validation import cutoff_text, cutoff_texts
from probwrap.cli import main


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out


def _printed(text):
    cut = re.search(r"^  cutoff\s+(\S+)", text, re.M).group(1)
    same = re.search(r"^  same cost for\s+(.*)$", text, re.M).group(1)
    return cut, same


def test_texts_tell_close_ends_apart():
    assert cutoff_texts([0.99999999812, 0.99999999814, 0.99999999816]) == [
        "0.99999999812", "0.99999999814", "0.99999999816"]
    assert cutoff_texts([0.99999926, 0.99999929, 0.99999931]) == [
        "0.99999926", "0.99999929", "0.99999931"]
    # ordinary cutoffs keep six significant digits; equal values read alike
    assert cutoff_texts([0.1, 0.25, 0.4]) == ["0.1", "0.25", "0.4"]
    assert cutoff_texts([1.0, 1.0]) == ["1", "1"]
    with pytest.raises(ValueError, match="spec"):
        cutoff_texts([0.1], ".4f")


def test_range_of_close_scores_reads_as_a_range(capsys, tmp_path):
    # five rows, at most one acted on: the cutoff lies between the two top scores
    s = [0.2, 0.3, 0.99999999808, 0.99999999811, 0.99999999814]
    pd.DataFrame({"p": s, "y": [0, 0, 1, 1, 1]}).to_csv(tmp_path / "s.csv", index=False,
                                                         float_format="%.17g")
    args = ["cutoff", "--scores", tmp_path / "s.csv", "--score-column", "p", "--label-column",
            "y", "--cost-fp", 1, "--cost-fn", 5, "--capacity", 0.2, "--resamples", 20]
    exact = json.loads(run(capsys, *args, "--format", "json"))
    low, high = exact["cutoff_range"]
    assert (low, high) == (s[3], s[4])
    assert cutoff_text(low) == cutoff_text(high)  # the old text: [0.9999999981, 0.9999999981)
    cut, same = _printed(run(capsys, *args))
    assert same == "[0.99999999811, 0.99999999814)"
    assert low <= float(cut) < high  # the printed cutoff is one of the range


def test_a_one_cutoff_range_says_so(capsys, tmp_path):
    # probabilities of exactly 1 over the capacity: "act on none" is the cutoff 1 alone
    pd.DataFrame({"p": [0.1, 0.4, 1.0, 1.0], "y": [0, 1, 1, 1]}).to_csv(tmp_path / "s.csv",
                                                                       index=False)
    text = run(capsys, "cutoff", "--scores", tmp_path / "s.csv", "--score-column", "p",
               "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5, "--capacity", 0.25,
               "--resamples", 20)
    cut, same = _printed(text)
    assert (cut, same) == ("1", "1 only")  # was "[1, 1]"


@pytest.fixture(scope="module")
def breast_cancer_file(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    model = make_pipeline(StandardScaler(), LogisticRegression(C=10, max_iter=10000))
    p = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
    path = tmp_path_factory.mktemp("same") / "bc.csv"
    pd.DataFrame({"p": p, "y": y}).to_csv(path, index=False, float_format="%.17g")
    return path, p


def test_breast_cancer_ranges_read_as_ranges(capsys, breast_cancer_file):
    path, p = breast_cancer_file
    collapsed = 0
    for capacity in (0.05, 0.1, 0.2):
        args = ["cutoff", "--scores", path, "--score-column", "p", "--label-column", "y",
                "--cost-fp", 1, "--cost-fn", 5, "--capacity", capacity, "--resamples", 20]
        exact = json.loads(run(capsys, *args, "--format", "json"))
        low, high = exact["cutoff_range"]
        assert low < high
        collapsed += cutoff_text(low) == cutoff_text(high)
        cut, same = _printed(run(capsys, *args))
        lo_t, hi_t = re.fullmatch(r"\[(\S+), (\S+)[)\]]", same).groups()
        assert float(lo_t) <= float(cut) < float(hi_t)
        # the printed rule acts on the rows the exact cutoff acts on
        assert np.sum(p > float(cut)) == np.sum(p > exact["cutoff"])
    assert collapsed >= 1  # the case: at least one range the old text showed as a point
