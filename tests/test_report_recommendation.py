"""The report's "recommendation" box: the rule to use now, why, its cost and share acted on,
within the capacity at the estimated prevalence.

Consistency tests: every number of the box is recomputed here with the library's functions
(capacity_cutoff, shift_cutoff, adjust_to_prior, expected_costs, plugin_cutoff). The move of a
cutoff to a new prevalence is Saerens et al. (2002, eq. 2.4) and Elkan (2001, section 2).
"""

import re

import numpy as np
import pytest

from probwrap.decision import (
    capacity_cutoff,
    expected_costs,
    plugin_cutoff,
    search_cutoff,
    settle_cutoff,
)
from probwrap.report import build_report
from probwrap.shift import adjust_to_prior, shift_cutoff

COSTS = {"fp": 3.0, "fn": 40.0}
MATRIX = np.array([[0.0, 3.0], [40.0, 0.0]])


def _calibrated(n, prevalence_shape, seed):
    rng = np.random.default_rng(seed)
    p = rng.beta(1.0, prevalence_shape, size=n)
    return p, (rng.uniform(size=n) < p).astype(int)


@pytest.fixture(scope="module")
def shifted():
    p, y = _calibrated(4000, 12.0, 0)
    # unlabelled rows of a population with about three times the prevalence, seen through the
    # labelled population's model: the posteriors moved back to the labelled prevalence
    rng = np.random.default_rng(1)
    true = rng.beta(1.0, 3.5, size=3000)
    src = p.mean()
    q = adjust_to_prior(np.column_stack([1 - true, true]), [1 - true.mean(), true.mean()],
                        [1 - src, src])[:, 1]
    content, page = build_report(y_true=y, y_prob=p, costs=COSTS, capacity=0.25,
                                 unlabelled_prob=q, n_resamples=30, random_state=0)
    return p, y, q, content, page


def test_capacity_breaking_move_offers_the_capacity_cutoff(shifted):
    p, y, q, c, page = shifted
    r = c.recommendation
    assert c.shift_pvalue < 0.01
    # the prevalence the rules move to: the wrapper's evidence gate applied to the estimate
    assert 0 < c.adaptation_weight <= 1
    src, tgt = c.source_prevalence, c.applied_prevalence
    moved = float(shift_cutoff(r.base_cutoff, src, tgt))
    # the base rule is the settled cutoff of the labelled rows (the tuned policy's rule)
    ref = settle_cutoff(p, y, COSTS, search_cutoff(p, y, MATRIX, capacity=0.25,
                                                   score_bounds=(0, 1)))
    assert r.base_cutoff == ref.cutoff == c.settled.cutoff
    # the moved cutoff would act on more of the unlabelled rows than the capacity allows ...
    assert np.mean(q > moved) > 0.25
    # ... so the box offers the capacity cutoff on the unlabelled rows instead
    assert r.key == "capacity"
    assert r.cutoff == capacity_cutoff(q, 0.25, score_bounds=(0.0, 1.0))
    assert r.basis == "unlabelled" and r.within_capacity is True
    assert r.acted_share == np.mean(q > r.cutoff) <= 0.25
    E = expected_costs(adjust_to_prior(np.column_stack([1 - q, q]), [1 - src, src],
                                       [1 - tgt, tgt]), MATRIX)
    act = (q > r.cutoff).astype(int)
    assert np.isclose(r.expected_cost, E[np.arange(q.shape[0]), act].mean(), rtol=1e-12)
    # the same numbers in the page, and the rule is a row of the table, marked
    box = re.search(r'<aside class="pw-recommend".*?</aside>', page, re.S).group(0)
    assert f'data-value="{r.cutoff!r}"' in box and f'data-value="{r.expected_cost!r}"' in box
    assert "capacity" in box and "regulation" in box
    assert re.search(r'<tr data-rule="capacity" class="pw-recommended">', page)
    # "within capacity" is judged on the unlabelled share: the moved cutoff's row says no
    rows = {row.key: row for row in c.rules}
    assert rows["adapted"].within_capacity is (rows["adapted"].target_flagged_share <= 0.25)
    assert rows["adapted"].within_capacity is False
    assert rows["capacity"].within_capacity is True


def test_without_unlabelled_rows_the_rule_is_judged_on_the_labelled_rows():
    p, y = _calibrated(3000, 12.0, 5)
    content, _ = build_report(y_true=y, y_prob=p, costs=COSTS, n_resamples=20)
    r = content.recommendation
    assert r.basis == "labelled"
    assert r.cutoff in (content.chosen_cutoff, plugin_cutoff(MATRIX))
    realised = MATRIX[y, (p > r.cutoff).astype(int)].mean()
    assert np.isclose(r.expected_cost, realised, rtol=1e-12)
    assert r.acted_share == np.mean(p > r.cutoff)
    # the least-cost cutoff searched on these very rows against the Bayes cutoff: the box
    # says which was kept and why, with the per-row difference
    d = (MATRIX[y, (p > content.chosen_cutoff).astype(int)]
         - MATRIX[y, (p > plugin_cutoff(MATRIX)).astype(int)])
    assert f"{d.mean():+.4g}" in " ".join(r.reasons)


def test_bayes_cutoff_over_capacity_falls_back_to_the_capacity_cutoff():
    # calibrated probabilities, a capacity far below what the Bayes cutoff acts on
    p, y = _calibrated(3000, 4.0, 7)
    content, _ = build_report(y_true=y, y_prob=p, costs=COSTS, capacity=0.1, n_resamples=20)
    r = content.recommendation
    assert np.mean(p > plugin_cutoff(MATRIX)) > 0.1
    assert r.acted_share <= 0.1 and r.within_capacity is True
    ref = search_cutoff(p, y, MATRIX, capacity=0.1, score_bounds=(0, 1))
    assert r.cutoff in (ref.cutoff, capacity_cutoff(p, 0.1, score_bounds=(0.0, 1.0)))


def test_huge_finite_costs_give_the_same_cutoffs_as_scaled_ones():
    # the rule depends on the costs only up to a common factor; costs near the largest float
    # must not overflow into a wrong cutoff (issue: 1e308 gave 0.5 instead of 0.2)
    p, y = _calibrated(2000, 6.0, 9)
    big, _ = build_report(y_true=y, y_prob=p, costs={"fp": 2.5e307, "fn": 1e308},
                          n_resamples=20)
    small, _ = build_report(y_true=y, y_prob=p, costs={"fp": 1.0, "fn": 4.0}, n_resamples=20)
    assert np.isclose(big.plugin, 0.2, rtol=1e-12)
    assert big.chosen_cutoff == small.chosen_cutoff
    assert big.recommendation.cutoff == small.recommendation.cutoff
    assert np.isfinite(big.recommendation.expected_cost)
    assert np.isclose(big.recommendation.expected_cost,
                      small.recommendation.expected_cost * 2.5e307, rtol=1e-9)


def _miscalibrated(seed):
    # the draws of the sweep that found the two rules apart: probabilities bent by a power
    rng = np.random.default_rng(seed)
    n = int(rng.integers(40, 200))
    t = rng.beta(1, 3, n)
    y = (rng.uniform(size=n) < t).astype(int)
    return np.clip(t ** rng.uniform(0.4, 2.5), 1e-6, 1 - 1e-6), y


@pytest.mark.parametrize("seed", [0, 11, 5])
def test_score_file_recommendation_is_the_tuned_policys_settled_cutoff(seed):
    # one rule for a score file and for CostPolicyWrapper(strategy="tuned"): settle_cutoff.
    # Seed 11: the old two-standard-error rule recommended the Bayes cutoff, seed 0 the
    # least-cost cutoff; the settling test moves to a cutoff between the two in both
    p, y = _miscalibrated(seed)
    costs = {"fp": 1.0, "fn": 4.0}
    content, page = build_report(y_true=y, y_prob=p, costs=costs, n_resamples=10)
    # the policy settles toward the Bayes cutoff carried back through the map chosen on the
    # rows: p > anchor flags exactly the rows whose recalibrated probability exceeds 1/5
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper
    from probwrap._column_models import ProbabilityColumn

    if content.anchor_map in (None, "identity"):
        assert content.anchor == pytest.approx(0.2)
    else:
        cal = CalibrationWrapper(FrozenEstimator(ProbabilityColumn().fit()),
                                 method=content.anchor_map).fit(p[:, None], y)
        q = cal.predict_proba(p[:, None])[:, 1]
        np.testing.assert_array_equal(p > content.anchor, q > 0.2)
    ref = settle_cutoff(p, y, costs, anchor=content.anchor)
    r = content.recommendation
    assert r.cutoff == ref.cutoff
    if ref.kept_plugin:
        assert r.key == ("plugin" if content.anchor == ref.plugin else "recalibrated")
    elif ref.cutoff != content.chosen_cutoff:
        assert r.key == "settled"
        assert re.search(r'<tr data-rule="settled" class="pw-recommended">', page)
    assert "settle_cutoff" in " ".join(r.reasons)
    realised = MATRIX_14[y, (p > r.cutoff).astype(int)].mean()
    assert np.isclose(r.expected_cost, realised, rtol=1e-12)


MATRIX_14 = np.array([[0.0, 1.0], [4.0, 0.0]])


@pytest.mark.parametrize("seed", [0, 3, 11])
def test_report_and_cutoff_command_recommend_the_same_cutoff(seed):
    # both settle toward the Bayes cutoff carried back through the map chosen on the file's
    # rows; an int random_state seeds that map's folds as `probwrap cutoff --seed` does
    from probwrap.cli._cutoff import cutoff_summary

    p, y = _miscalibrated(seed)
    costs = {"fp": 1.0, "fn": 4.0}
    for s in (0, 5):
        content, _ = build_report(y_true=y, y_prob=p, costs=costs, n_resamples=10,
                                  random_state=s)
        kept = cutoff_summary(p, y, costs, n_resamples=10, seed=s)["settled_cutoff"]
        assert content.recommendation.cutoff == kept["cutoff"]
        assert content.anchor == kept["recalibrated_bayes_cutoff"]
        assert content.anchor_map == kept["recalibration"]
