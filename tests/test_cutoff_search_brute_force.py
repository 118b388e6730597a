"""The cutoff search as the tuned CostPolicyWrapper calls it (unit weights passed as one value
repeated, the curve thinned to the kept decisions), against a brute-force evaluation of every
candidate cutoff, on scikit-learn's bundled data sets.

Session 28 made that call cheaper (no copy of the unit weights, the runs of minimal cost found
once, the kept decisions deduplicated by a sort instead of NumPy's hashed ``np.unique``, fewer
and larger blocks); the results must not change. The brute force is the definition: the cost of
"act on the rows scoring above t" for each distinct score t (and below all of them), summed row
by row.
"""

from __future__ import annotations

import numpy as np
import pytest
from _memory_helpers import traced_peak
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict

from probwrap.decision import search_cutoff
from probwrap.decision._cutoff import _prepare, _search_cutoff, _thin_cost_curve

COSTS = np.array([[0.0, 1.0], [5.0, 0.0]])  # integer costs: every total is exact


def _held_out_probabilities(name: str, seed: int) -> tuple[np.ndarray, np.ndarray]:
    X, y = {
        "breast_cancer": lambda: load_breast_cancer(return_X_y=True),
        "digits": lambda: load_digits(return_X_y=True),
        "wine": lambda: load_wine(return_X_y=True),
        "iris": lambda: load_iris(return_X_y=True),
    }[name]()
    y = (y == y.max()).astype(int)  # the last class against the rest
    rng = np.random.default_rng(seed)
    rows = rng.choice(X.shape[0], size=int(0.8 * X.shape[0]), replace=False)
    X, y = X[rows], y[rows]
    X = (X - X.mean(axis=0)) / (X.std(axis=0) + 1e-12)
    p = cross_val_predict(LogisticRegression(C=0.05, max_iter=5000), X, y, cv=3,
                          method="predict_proba")[:, 1]
    if seed % 2:
        p = np.round(p, 2)  # ties across the classes
    return p, y


def _brute_force_costs(p: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean cost and flagged share of every decision: act on no row scoring at or below -inf,
    then at or below each distinct score in turn (the search's decisions 0..m)."""
    u = np.unique(p)
    thresholds = np.concatenate([[-np.inf], u])
    costs, shares = [], []
    for t in thresholds:
        act = p > t
        total = COSTS[y, act.astype(int)].sum()  # (integer costs: the sum is exact)
        costs.append(total / len(y))
        shares.append(act.sum() / len(y))
    return np.array(costs), np.array(shares)


@pytest.mark.parametrize("name", ["breast_cancer", "digits", "wine", "iris"])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_tuned_search_matches_brute_force_on_bundled_sets(name, seed):
    p, y = _held_out_probabilities(name, seed)
    n = p.shape[0]
    brute, shares = _brute_force_costs(p, y)
    full = search_cutoff(p, y, COSTS, score_bounds=(0.0, 1.0))
    np.testing.assert_array_equal(full.costs, brute)
    np.testing.assert_array_equal(full.flagged_share, shares)
    # the chosen cutoff gives the least cost of all candidates, and so does every cutoff in
    # its interval
    best = brute.min()
    for t in (full.cutoff, full.interval[0]):
        assert COSTS[y, (p > t).astype(int)].mean() == best
    # the wrapper's call: one-byte labels, unit weights as one value repeated (a broadcast
    # view), the curve kept at max_points decisions; it must be the full curve thinned
    unit = np.broadcast_to(np.float64(1.0), n)
    for max_points in (None, 9, 40):
        tuned = _search_cutoff(p, y.astype(np.int8), COSTS, unit, None, (0.0, 1.0),
                               max_points=max_points)
        ref = full if max_points is None else _thin_cost_curve(full, max_points)
        assert (tuned.cutoff, tuned.cost, tuned.interval, tuned.flat) == (
            full.cutoff, full.cost, full.interval, full.flat)
        for field in ("cutoffs", "costs", "flagged_share", "admissible"):
            np.testing.assert_array_equal(getattr(tuned, field), getattr(ref, field))
        if max_points is not None and brute.shape[0] > max_points:
            # the kept decisions, from their definition: evenly spaced ones, both ends of the
            # runs of least cost (first and last 64) and the two around the chosen cutoff
            least = np.flatnonzero(brute <= best + 1e-9 * np.abs(brute).max())
            breaks = np.flatnonzero(np.diff(least) > 1)
            ends = np.concatenate([least[np.r_[0, breaks + 1]], least[np.r_[breaks, -1]]])
            holder = int(np.searchsorted(full.cutoffs, full.cutoff))
            kept = np.unique(np.concatenate([
                np.linspace(0, brute.shape[0] - 1, max_points).round().astype(int),
                ends[:64], ends[-64:], [max(holder - 1, 0), holder],
            ]))
            assert tuned.costs.shape[0] < brute.shape[0]
            np.testing.assert_array_equal(tuned.costs, brute[kept])
            np.testing.assert_array_equal(tuned.flagged_share, shares[kept])
        # with a capacity the same, against the brute force's admissible decisions
        capped = _search_cutoff(p, y.astype(np.int8), COSTS, unit, 0.1, (0.0, 1.0),
                                max_points=max_points)
        admissible = shares <= 0.1 * (1 + 1e-12)
        assert capped.cost == brute[admissible].min()
        assert (p > capped.cutoff).mean() <= 0.1


def test_unit_weights_as_one_repeated_value_are_not_copied():
    # the tuned wrapper passes unit weights as a read-only view of one value; the search read
    # them through check_sample_weight, which copied them (8 bytes a row) and made four boolean
    # passes before dropping them. Fails on the code before session 28 (peak >= 8 bytes a row).
    n = 200_000
    rng = np.random.default_rng(0)
    p = rng.random(n)
    y = (rng.random(n) < 0.3).astype(np.int8)
    unit = np.broadcast_to(np.float64(1.0), n)
    peak, (_, _, w, _, _) = traced_peak(lambda: _prepare(p, y, COSTS, unit))
    assert w is None
    # the finite check of the scores takes one byte a row; the weights' copy took eight more
    assert peak < 2 * n
    # a view of another value, or ones as an ordinary array, keep the general reading
    assert _prepare(p, y, COSTS, np.broadcast_to(np.float64(2.0), n))[2] is not None
    assert _prepare(p, y, COSTS, np.ones(n))[2] is None
    with pytest.raises(ValueError, match="sample_weight"):
        _prepare(p, y, COSTS, np.broadcast_to(np.float64(np.nan), n))
    with pytest.raises(ValueError, match="sample_weight"):
        _prepare(p, y, COSTS, np.broadcast_to(np.float64(-1.0), n))


@pytest.mark.parametrize("n", [1, 5, (1 << 14) - 1, (1 << 14) + 1, 3 * (1 << 14) + 5])
def test_packed_order_of_signed_scores_matches_its_definition(n):
    # scores of both signs are turned back from their sorted keys block by block (session 28);
    # the result must be the scores in ascending order with the negatives first among ties
    # (np.lexsort's order), bit for bit, across block boundaries, with -0.0 read as 0.0
    from probwrap._packed_sort import packed_order

    rng = np.random.default_rng(n)
    s = np.round(rng.normal(size=n) * 3, 1)
    s[rng.random(n) < 0.05] = -0.0
    s[rng.random(n) < 0.02] = 1e-100  # (tiny, still exact once scaled)
    y = (rng.random(n) < 0.4).astype(np.intp)
    got_s, got_y = packed_order(s, y)
    order = np.lexsort((y, s + 0.0))
    np.testing.assert_array_equal(got_s.view(np.int64), (s[order] + 0.0).view(np.int64))
    np.testing.assert_array_equal(got_y, y[order])
