"""The exact range of a cutoff interval (``exact_low`` / ``exact_high``) on every path.

Below 100 rows of equal weight, :func:`probwrap.decision.cutoff_interval` gives the cutoffs that
no one-sided exact binomial test shows dearer than another. These tests check that the same
numbers reach the ``probwrap cutoff`` JSON and text (also with ``--resamples 0``, where no
bootstrap interval is drawn), the tallied intervals (``tally_cutoff_interval``, and a
``CostPolicyWrapper`` fitted on Dask through its tally) and the HTML report.

References (outside the project): scikit-learn's bundled breast cancer data (Wolberg, Street &
Mangasarian 1995, UCI; malignant = 1), 40 held-out rows scored by scikit-learn's
LogisticRegression fitted on 300 others; the range is rebuilt pair of cutoffs by pair with
SciPy's ``scipy.stats.binomtest`` (one-sided, at the positive share fp / (fp + fn) where two
cutoffs cost the same) and the least-cost cutoffs with scikit-learn's ``confusion_matrix``.
"""

from __future__ import annotations

import json
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import logit
from scipy.stats import binomtest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix

from probwrap.cli import main
from probwrap.decision import CutoffIntervalCoverageWarning, cutoff_interval
from probwrap.scale import tally_scores
from probwrap.scale._bootstrap import tally_cutoff_interval

COSTS = {"fp": 1.0, "fn": 4.0}


@pytest.fixture(scope="module")
def forty():
    """40 held-out breast-cancer rows: model, features, probabilities and labels."""
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    X = X[:, :5]
    idx = np.random.default_rng(0).permutation(y.shape[0])
    train, held = idx[:300], idx[300:340]
    model = LogisticRegression(max_iter=5000).fit(X[train], y[train])
    return model, X[held], y[held], model.predict_proba(X[held])[:, 1]


def _quiet_interval(p, y, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CutoffIntervalCoverageWarning)
        return cutoff_interval(p, y, COSTS, score_bounds=(0, 1), **kw)


def _brute_exact(p, y, fp, fn, level):
    """The range rebuilt pair by pair with binomtest; the tied range with confusion_matrix."""
    u = np.unique(p)
    lower = np.concatenate([[0.0], u])  # decision j acts on rows above lower[j] ...
    upper = np.concatenate([u, [1.0]])  # ... as does any cutoff up to upper[j]
    acts = [p > lo for lo in lower]
    costs = []
    for act in acts:
        _, n_fp, n_fn, _ = confusion_matrix(y, act.astype(int), labels=[0, 1]).ravel()
        costs.append(fp * n_fp + fn * n_fn)
    costs = np.array(costs)
    tied = np.flatnonzero(np.isclose(costs, costs.min()))
    even = fp / (fp + fn)
    kept = []
    for j, act_j in enumerate(acts):
        dropped = False
        for act_k in acts:
            between = act_j != act_k
            r, c = int(between.sum()), int(y[between].sum())
            if r == 0:
                continue
            side = "less" if act_j[between].all() else "greater"
            if binomtest(c, r, even, alternative=side).pvalue < 1.0 - level:
                dropped = True
                break
        if not dropped:
            kept.append(j)
    kept = np.array(kept, dtype=int)
    return (min(lower[kept].min(), lower[tied].min()), max(upper[kept].max(), upper[tied].max()))


def _cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out, err


@pytest.fixture
def forty_csv(forty, tmp_path):
    _, _, y, p = forty
    path = tmp_path / "forty.csv"
    pd.DataFrame({"p": p, "y": y, "w": 2.5, "w_uneven": np.linspace(1.0, 2.0, y.shape[0])}
                 ).to_csv(path, index=False, float_format="%.17g")
    return path


def _cutoff_args(path, *extra):
    return ["cutoff", "--scores", path, "--score-column", "p", "--label-column", "y",
            "--cost-fp", COSTS["fp"], "--cost-fn", COSTS["fn"], *extra]


@pytest.mark.parametrize("resamples", [40, 0])
def test_cli_json_carries_the_exact_range(capsys, forty, forty_csv, resamples):
    _, _, y, p = forty
    got = json.loads(_cli(capsys, *_cutoff_args(forty_csv, "--resamples", resamples,
                                                "--format", "json"))[0])
    ci = _quiet_interval(p, y, n_resamples=40, random_state=0)
    assert np.isfinite(ci.exact_low)
    # the numbers of the Python interval, whether or not the bootstrap ran
    assert got["cutoff_exact_range"] == [ci.exact_low, ci.exact_high]
    assert got["cutoff_exact_range_note"] is None
    # and those of the exact tests done pair by pair with SciPy
    assert got["cutoff_exact_range"] == pytest.approx(list(_brute_exact(p, y, 1.0, 4.0, 0.95)),
                                                      abs=1e-12)
    assert (got["cutoff_interval"] is None) == (resamples == 0)


def test_cli_text_prints_the_exact_range(capsys, forty, forty_csv):
    _, _, y, p = forty
    for resamples in (40, 0):
        text = _cli(capsys, *_cutoff_args(forty_csv, "--resamples", resamples))[0]
        line = re.search(r"^  exact-test range\s+\[(\S+), (\S+)\]", text, re.M)
        assert line is not None, text
        ci = _quiet_interval(p, y, n_resamples=20, random_state=0)
        assert float(line.group(1)) == pytest.approx(ci.exact_low, rel=1e-5)
        assert float(line.group(2)) == pytest.approx(ci.exact_high, rel=1e-5)


def test_cli_equal_weights_keep_it_unequal_weights_say_why(capsys, forty, forty_csv):
    _, _, y, p = forty
    plain = json.loads(_cli(capsys, *_cutoff_args(forty_csv, "--format", "json"))[0])
    equal = json.loads(_cli(capsys, *_cutoff_args(forty_csv, "--weight-column", "w",
                                                  "--format", "json"))[0])
    assert equal["cutoff_exact_range"] == plain["cutoff_exact_range"]
    assert equal["cutoff_exact_range_counts"] == "rows"
    # unequal weights: computed since 4 December 2026, on Kish's effective rows between two
    # cutoffs (tests/test_cutoff_exact_weighted.py); null with a note before
    uneven = json.loads(_cli(capsys, *_cutoff_args(forty_csv, "--weight-column", "w_uneven",
                                                   "--format", "json"))[0])
    assert uneven["cutoff_exact_range"] is not None
    assert uneven["cutoff_exact_range_counts"] == "kish_effective_rows"
    capped = json.loads(_cli(capsys, *_cutoff_args(forty_csv, "--capacity", 0.3,
                                                   "--format", "json"))[0])
    assert capped["cutoff_exact_range"] is None and "capacity" in capped["cutoff_exact_range_note"]
    text = _cli(capsys, *_cutoff_args(forty_csv, "--capacity", 0.3))[0]
    assert re.search(r"^  exact-test range\s+not computed: a capacity limit", text, re.M)


def test_cli_many_rows_note_and_no_text_line(capsys, tmp_path):
    X, y = load_breast_cancer(return_X_y=True)
    p = LogisticRegression(max_iter=5000).fit(X[:300, :5], 1 - y[:300]).predict_proba(
        X[300:, :5])[:, 1]
    path = tmp_path / "many.csv"
    pd.DataFrame({"p": p, "y": 1 - y[300:]}).to_csv(path, index=False, float_format="%.17g")
    got = json.loads(_cli(capsys, *_cutoff_args(path, "--resamples", 20, "--format", "json"))[0])
    assert got["cutoff_exact_range"] is None
    assert got["cutoff_exact_range_note"].startswith("not computed: 100 or more")
    assert "exact-test range" not in _cli(capsys, *_cutoff_args(path, "--resamples", 20))[0]


def _tally(p, y, w=None):
    # one distinct probability per bin (log-odds bins of 1e-3): the tally keeps every row apart
    assert np.unique(np.round(logit(p) / 1e-3)).shape[0] == np.unique(p).shape[0]
    return tally_scores(logit(p), y, sample_weight=w, n_replicates=60, random_state=0)


def test_tally_interval_equals_the_row_interval(forty):
    _, _, y, p = forty
    rows = _quiet_interval(p, y, n_resamples=20, random_state=0)
    with pytest.warns(CutoffIntervalCoverageWarning, match="exact binomial test"):
        tallied = tally_cutoff_interval(_tally(p, y), COSTS)
    assert tallied.exact_low == pytest.approx(rows.exact_low, abs=1e-12)
    assert tallied.exact_high == pytest.approx(rows.exact_high, abs=1e-12)
    # equal weights of any size: the same counts of rows
    with pytest.warns(CutoffIntervalCoverageWarning):
        weighted = tally_cutoff_interval(_tally(p, y, np.full(y.shape[0], 3.0)), COSTS)
    assert (weighted.exact_low, weighted.exact_high) == (tallied.exact_low, tallied.exact_high)
    # unequal weights: the range of the rows with the same weights (Kish's effective rows
    # between two cutoffs; NaN before 4 December 2026), quoted in the coverage warning
    w = np.linspace(1.0, 2.0, y.shape[0])
    with pytest.warns(CutoffIntervalCoverageWarning, match="exact binomial"):
        uneven = tally_cutoff_interval(_tally(p, y, w), COSTS)
    on_rows = _quiet_interval(p, y, n_resamples=20, random_state=0, sample_weight=w)
    assert uneven.exact_low == pytest.approx(on_rows.exact_low, abs=1e-12)
    assert uneven.exact_high == pytest.approx(on_rows.exact_high, abs=1e-12)
    # a capacity: none either
    with pytest.warns(CutoffIntervalCoverageWarning):
        capped = tally_cutoff_interval(_tally(p, y), COSTS, capacity=0.3)
    assert np.isnan(capped.exact_low)


@pytest.mark.parametrize("weight", [None, 2.0])
def test_dask_tally_fit_carries_the_exact_range(forty, tally_path, weight):
    da = pytest.importorskip("dask.array")
    from sklearn.frozen import FrozenEstimator

    from probwrap import CostPolicyWrapper

    model, X, y, p = forty
    w = None if weight is None else np.full(y.shape[0], weight)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CutoffIntervalCoverageWarning)
        memory = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned", random_state=0,
                                   n_resamples=30).fit(X, y, sample_weight=w).cutoff_interval_
    policy = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned", random_state=0,
                               n_resamples=30)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the BinnedFitWarning of a small set fitted from bins
        policy.fit(da.from_array(X, chunks=20), da.from_array(y, chunks=20),
                   sample_weight=None if w is None else da.from_array(w, chunks=20))
    # unweighted rows: drawn from the tally's bins when read; weighted: replicates tallied
    assert policy._interval_inputs[0] == ("summary" if weight is None else "tally")
    with pytest.warns(CutoffIntervalCoverageWarning, match="exact binomial test"):
        ci = policy.cutoff_interval_
    assert np.isfinite(memory.exact_low)
    assert ci.exact_low == pytest.approx(memory.exact_low, abs=1e-12)
    assert ci.exact_high == pytest.approx(memory.exact_high, abs=1e-12)


def test_report_shows_the_policy_exact_range(forty):
    from sklearn.frozen import FrozenEstimator

    from probwrap import CostPolicyWrapper
    from probwrap.report import build_report

    model, X, y, p = forty
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        policy = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned", random_state=0,
                                   n_resamples=30).fit(X, y)
        content, html = build_report(model=policy, X=X, y=y, n_resamples=30)
    ci = content.cost_interval
    span = re.search(r'id="cutoff-exact-range" data-low="([^"]+)" data-high="([^"]+)"', html)
    assert span is not None
    assert (float(span.group(1)), float(span.group(2))) == (ci.exact_low, ci.exact_high)
    # the interval's coverage warning is a note beside it, as for an interval computed there
    assert any(n.kind == "CutoffIntervalCoverageWarning" and "exact binomial" in n.message
               for n in content.notes)


def test_no_interval_asked_for_reads_as_none(forty, tally_path):
    # n_resamples=0 (the docs' "no interval" setting for a cheap Dask fit): reading the interval
    # raised a ValueError in memory and an IndexError from the Dask tally; now it is None, and a
    # report of the policy shows no interval instead of failing
    da = pytest.importorskip("dask.array")
    from sklearn.frozen import FrozenEstimator

    from probwrap import CostPolicyWrapper
    from probwrap.report import build_report

    model, X, y, p = forty
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        memory = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                                   n_resamples=0).fit(X, y)
        tallied = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                                    n_resamples=0).fit(da.from_array(X, chunks=20),
                                                       da.from_array(y, chunks=20))
        assert memory.cutoff_interval_ is None and tallied.cutoff_interval_ is None
        content, html = build_report(model=memory, X=X, y=y, n_resamples=30)
    assert content.cost_interval is None and 'id="cutoff-interval"' not in html


def test_cli_text_notes_an_exact_range_below_zero(capsys, tmp_path):
    """A forest's exact-zero scores: when only the exact range reaches below 0 (acting on every
    row is not shown dearer), the text still says what a cutoff below 0 does, and the Bayes
    cutoff's cost lines up with the other costs (breast cancer, 2 columns, 30 rows to fit a
    10-tree forest, 40 held-out rows; false negatives cost 10)."""
    from sklearn.ensemble import RandomForestClassifier

    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    idx = np.random.default_rng(4).permutation(y.shape[0])
    train, held = idx[:30], idx[300:340]
    forest = RandomForestClassifier(n_estimators=10, random_state=0).fit(X[train, :2], y[train])
    p = forest.predict_proba(X[held, :2])[:, 1]
    assert (p == 0).sum() >= 5  # the case: many rows scored exactly 0
    path = tmp_path / "forest.csv"
    pd.DataFrame({"p": p, "y": y[held]}).to_csv(path, index=False, float_format="%.17g")
    args = ["cutoff", "--scores", path, "--score-column", "p", "--label-column", "y",
            "--cost-fp", 1, "--cost-fn", 10, "--resamples", 40]
    got = json.loads(_cli(capsys, *args, "--format", "json")[0])
    # only the exact range reaches below 0 here: the cutoff and the bootstrap interval do not
    assert got["cutoff_exact_range"][0] < 0 <= min(got["cutoff"], got["cutoff_interval"][0])
    text = _cli(capsys, *args)[0]
    assert "a cutoff below 0 acts on every row" in text
    lines = text.splitlines()
    half = next(t for t in lines if t.startswith("  at cutoff 0.5 "))
    bayes = next(t for t in lines if t.startswith("  at Bayes cutoff "))
    value_at = len(half) - len(half[len("  at cutoff 0.5"):].lstrip())
    assert bayes[value_at - 1] == " " and bayes[value_at] != " ", (half, bayes)
    assert f"(cutoff {got['bayes_cutoff']:.4g}; " in bayes  # fp / (fp + fn) = 1 / 11
    assert got["bayes_cutoff"] == pytest.approx(1 / 11)
