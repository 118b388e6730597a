"""cutoff_interval on a few rows: never narrower than the rows' own range of equally cheap cutoffs.

References (outside the project): scikit-learn's bundled breast cancer data (Wolberg, Street &
Mangasarian 1995, UCI), drawn 5-60 rows at a time; the least-cost range is recomputed by brute
force over every distinct cutoff with NumPy, each cutoff's cost from scikit-learn's
``confusion_matrix``.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix
from sklearn.model_selection import train_test_split

from probwrap.cli import main
from probwrap.decision import CutoffIntervalCoverageWarning, cutoff_interval

COSTS = {"fp": 1.0, "fn": 4.0}


@pytest.fixture(scope="module")
def scored():
    """Held-out half of breast cancer (malignant = 1) scored on five features."""
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    Xa, Xb, ya, yb = train_test_split(X[:, :5], y, test_size=0.5, random_state=0, stratify=y)
    p = LogisticRegression(max_iter=5000).fit(Xa, ya).predict_proba(Xb)[:, 1]
    return p, yb


def _draw(p, y, n, seed):
    rng = np.random.default_rng(seed)
    while True:
        idx = rng.choice(p.shape[0], n, replace=False)
        if 0 < y[idx].sum() < n:
            return p[idx], y[idx]


def _brute_force_tie_range(p, y, fp, fn):
    """Widest run of least-cost cutoffs over [0, 1]: act when score > c, c from 0 and every
    distinct score; the cost of each from scikit-learn's confusion matrix."""
    cands = np.concatenate([[0.0], np.unique(p)])
    cost = np.empty(cands.shape[0])
    for i, c in enumerate(cands):
        tn, fp_n, fn_n, tp = confusion_matrix(y, (p > c).astype(int), labels=[0, 1]).ravel()
        cost[i] = (fp * fp_n + fn * fn_n) / y.shape[0]
    best = np.isclose(cost, cost.min(), rtol=1e-9, atol=0.0)
    ends = np.concatenate([cands[1:], [1.0]])  # the decision at cands[i] holds up to ends[i]
    runs, start = [], None
    for i, b in enumerate(best):
        if b and start is None:
            start = i
        if start is not None and (not b or i == best.shape[0] - 1):
            stop = i if b else i - 1
            runs.append((cands[start], ends[stop]))
            start = None
    return max(runs, key=lambda r: r[1] - r[0])


# (n, seed) draws where the plain bootstrap percentiles fell inside the tied range: the
# interval before this change was narrower than what the rows cannot tell apart
@pytest.mark.parametrize("n,seed", [(5, 0), (5, 3), (10, 1), (20, 4), (60, 1)])
def test_interval_contains_the_brute_force_tie_range(scored, n, seed):
    p, y = _draw(*scored, n, seed)
    lo, hi = _brute_force_tie_range(p, y, COSTS["fp"], COSTS["fn"])
    with pytest.warns(CutoffIntervalCoverageWarning, match=f"rests on {n} "):
        ci = cutoff_interval(p, y, COSTS, score_bounds=(0, 1), random_state=seed)
    assert (ci.tie_low, ci.tie_high) == pytest.approx((lo, hi), abs=1e-12)
    assert ci.low <= lo and ci.high >= hi
    # the percentiles alone (the old interval) missed part of it on these draws
    plain = np.quantile(ci.bootstrap_cutoffs, [0.025, 0.975])
    assert plain[0] > lo or plain[1] < hi
    assert ci.widened_to_ties


def test_many_rows_keep_the_plain_percentile_interval(scored):
    """On all 285 held-out rows the tie range lies inside the percentiles: nothing changes and
    no coverage warning."""
    p, y = scored
    with warnings.catch_warnings():
        warnings.simplefilter("error", CutoffIntervalCoverageWarning)
        ci = cutoff_interval(p, y, COSTS, score_bounds=(0, 1), random_state=0)
    lo, hi = _brute_force_tie_range(p, y, COSTS["fp"], COSTS["fn"])
    plain = np.quantile(ci.bootstrap_cutoffs, [0.025, 0.975])
    assert (ci.low, ci.high) == (plain[0], plain[1])
    assert not ci.widened_to_ties and plain[0] <= lo and plain[1] >= hi


def test_weighted_rows_warn_by_kish_size(scored):
    """120 rows, half of them weighted 10: Kish's effective size 660**2 / 6060 = 71.9 warns."""
    p, y = _draw(*scored, 120, 7)
    w = np.where(np.arange(120) < 60, 10.0, 1.0)
    kish = w.sum() ** 2 / np.dot(w, w)
    assert kish < 100
    with pytest.warns(CutoffIntervalCoverageWarning, match=f"rests on {kish:.3g} "):
        cutoff_interval(p, y, COSTS, sample_weight=w, score_bounds=(0, 1), random_state=0,
                        n_resamples=50)
    with warnings.catch_warnings():
        warnings.simplefilter("error", CutoffIntervalCoverageWarning)
        cutoff_interval(p, y, COSTS, score_bounds=(0, 1), random_state=0, n_resamples=50)


def test_cli_five_row_file_interval_holds_the_same_cost_range(scored, tmp_path, capsys,
                                                              monkeypatch):
    import probwrap.cli._progress as progress

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)
    p, y = _draw(*scored, 5, 3)
    path = tmp_path / "five.csv"
    pd.DataFrame({"score": p, "label": y}).to_csv(path, index=False)
    lo, hi = _brute_force_tie_range(p, y, COSTS["fp"], COSTS["fn"])
    argv = ["cutoff", "--scores", str(path), "--score-column", "score", "--label-column",
            "label", "--cost-fp", "1", "--cost-fn", "4"]
    assert main(argv + ["--format", "json"]) == 0
    out, err = capsys.readouterr()
    res = json.loads(out)
    assert res["cutoff_range"] == pytest.approx([lo, hi], abs=1e-12)
    assert res["cutoff_interval"][0] <= lo and res["cutoff_interval"][1] >= hi
    assert res["cutoff_interval_widened"] is True
    assert "rests on 5 (effective) rows" in err
    assert main(argv) == 0
    assert "widened to the same-cost range" in capsys.readouterr().out
