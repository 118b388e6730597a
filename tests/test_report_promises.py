"""The report's guarantee row and late-label note.

Reference checks: the guarantee's p-value against ``scipy.stats.binomtest`` (the Learn-then-Test
p-value of Angelopoulos et al. 2025 is the binomial tail of the held-out misses); the report's
prevalence under late labels against statsmodels' Kaplan–Meier estimate (Satten & Datta 2001:
the IPCW share of positives is 1 - S(h)). The rest are consistency tests with probwrap's own
``guaranteed_cutoff`` / ``labels_at_horizon`` and the behaviour the docs promise.
"""

import re
import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.stats import binomtest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper, PriorShiftWrapper
from probwrap.datasets import make_parcels
from probwrap.decision import guaranteed_cutoff
from probwrap.late_labels import labels_at_horizon
from probwrap.metrics import brier_score
from probwrap.report import build_report

COSTS = {"fp": 3.0, "fn": 40.0}


@pytest.fixture(scope="module")
def parcels():
    return make_parcels(3000, random_state=0)


def _row(page, key):
    m = re.search(rf'<tr data-rule="{key}"[^>]*>(.*?)</tr>', page, re.S)
    return None if m is None else m.group(1)


def _value(page, span_id):
    return float(re.search(rf'id="{span_id}" data-value="([^"]+)"', page).group(1))


def test_guarantee_row_shows_the_certified_cutoff_bound_and_pvalue(parcels):
    y, p = parcels.target, parcels.true_proba[:, 1]
    ask = {"requirement": "recall", "target": 0.9, "confidence": 0.9}
    content, page = build_report(y_true=y, y_prob=p, costs=COSTS, n_resamples=20,
                                 guarantee=ask)
    g = guaranteed_cutoff(p, y, [[0.0, 3.0], [40.0, 0.0]], score_bounds=(0.0, 1.0), **ask)
    s = content.guarantee
    assert (s.cutoff, s.achieved, s.bound, s.binding) == (g.cutoff, g.achieved, g.bound,
                                                         g.binding)
    # reference: the p-value is the binomial tail of the positives missed at the cutoff
    # (scipy.stats.binomtest, alternative "less", alpha = 1 - target)
    missed = int(np.sum((y == 1) & (p <= s.cutoff)))
    ref = binomtest(missed, int(np.sum(y == 1)), 0.1, alternative="less").pvalue
    assert s.p_value == pytest.approx(ref, rel=1e-10)
    assert s.p_value <= 0.1  # certified at confidence 0.9
    # the row in the decisions table, with the cost and share of its cutoff
    row = {r.key: r for r in content.rules}["guarantee"]
    assert row.cutoff == g.cutoff
    assert row.mean_cost == pytest.approx(g.cost, rel=1e-12)
    cells = _row(page, "guarantee")
    assert "recall \u2265 0.9 with probability 0.9" in cells
    assert f"{g.cutoff:.4f}" in cells
    # and the line under the table
    assert _value(page, "guarantee-bound") == g.bound
    assert _value(page, "guarantee-pvalue") == s.p_value
    assert 'data-status="certified"' in page


def test_unreachable_guarantee_is_said_not_replaced(parcels):
    y, p = parcels.target, parcels.true_proba[:, 1]
    with pytest.warns(UserWarning, match="report, guaranteed cutoff: not computed: No cutoff"):
        content, page = build_report(y_true=y, y_prob=p, costs=COSTS, n_resamples=20,
                                     guarantee={"requirement": "precision", "target": 0.99})
    s = content.guarantee
    assert s.cutoff is None and "No cutoff can be certified" in s.unreachable
    assert "guarantee" not in {r.key for r in content.rules}  # no rule in its place
    assert "unreachable" in _row(page, "guarantee")
    text = re.search(r'<p id="guarantee" data-status="unreachable">(.*?)</p>', page).group(1)
    assert "No cutoff can be certified" in text
    # said once: not repeated in the decisions notes box
    box = re.search(r'id="notes-decisions">(.*?)</aside>', page, re.S)
    assert box is None or "No cutoff can be certified" not in box.group(1)


def test_policy_guarantee_is_shown_from_the_fitted_wrapper():
    train = make_parcels(3000, random_state=1)
    held = make_parcels(3000, random_state=2)
    test = make_parcels(1500, random_state=3)
    model = LogisticRegression(max_iter=1000).fit(train.data, train.target)
    policy = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                               guarantee={"requirement": "recall", "target": 0.8}
                               ).fit(held.data, held.target)
    content, page = build_report(model=policy, X=test.data, y=test.target, n_resamples=20)
    s = content.guarantee
    assert s.cutoff == policy.guarantee_.cutoff == policy.cutoff_
    assert s.bound == policy.guarantee_.bound
    assert "held-out" in s.where
    assert _value(page, "guarantee-cutoff") == policy.cutoff_


def test_guarantee_needs_costs_and_a_binary_report(parcels):
    with pytest.raises(ValueError, match="`guarantee` needs `costs`"):
        build_report(y_true=parcels.target, y_prob=parcels.true_proba[:, 1], n_resamples=20,
                     guarantee={"requirement": "recall", "target": 0.9})
    with pytest.raises(ValueError, match="`guarantee` must be a dict"):
        build_report(y_true=parcels.target, y_prob=parcels.true_proba[:, 1], costs=COSTS,
                     n_resamples=20, guarantee={"target": 0.9})


def _late(n, seed):
    """Parcels whose damage claims arrive ~12 days after shipping, seen at day 0..60."""
    parcels = make_parcels(n, random_state=seed)
    rng = np.random.default_rng(seed)
    since = rng.uniform(0, 60, n)
    delay = rng.exponential(12.0, n)
    claimed = (parcels.target == 1) & (delay <= since)
    return parcels, np.where(claimed, delay, since), claimed.astype(int)


def test_late_labels_go_through_the_weights_and_the_note_counts_open_rows():
    parcels, time, event = _late(3000, 5)
    p = parcels.true_proba[:, 1]
    content, page = build_report(y_prob=p, time=time, event=event, horizon=30,
                                 costs=COSTS, n_resamples=20)
    hl = labels_at_horizon(time, event, 30)
    np.testing.assert_array_equal(content.y_true, hl.y)
    np.testing.assert_array_equal(content.sample_weight, hl.sample_weight)
    # reference: the report's prevalence is statsmodels' Kaplan-Meier 1 - S(30)
    km = sm.SurvfuncRight(time, event)
    s_h = km.surv_prob[np.searchsorted(km.surv_times, 30.0, side="right") - 1]
    assert content.prevalence == pytest.approx(1 - s_h, rel=1e-12)
    brier = {m.key: m for m in content.metrics}["brier"].value
    assert brier == pytest.approx(brier_score(hl.y, p, sample_weight=hl.sample_weight),
                                  rel=1e-12)
    note = re.search(r'<p class="pw-late" id="late-labels"([^>]*)>(.*?)</p>', page, re.S)
    n_open = int(hl.is_open.sum())
    assert n_open > 300  # the last 30 days' parcels without a claim yet
    assert f'data-open-rows="{n_open}"' in note.group(1)
    assert f"{n_open} of 3000 rows" in note.group(2)
    assert float(re.search(r'data-open-share="([^"]+)"', note.group(1)).group(1)) == \
        pytest.approx(n_open / 3000, rel=1e-12)


def test_horizon_labels_object_equals_time_event_and_no_censoring_is_plain(parcels):
    late, time, event = _late(1500, 6)
    p = late.true_proba[:, 1]
    hl = labels_at_horizon(time, event, 30)
    a, _ = build_report(y_prob=p, time=time, event=event, horizon=30, n_resamples=20)
    b, _ = build_report(y_prob=p, horizon_labels=hl, n_resamples=20)
    assert [m.value for m in a.metrics] == [m.value for m in b.metrics]
    # every event seen by day 5 and every other row observed past the horizon: all weights
    # are 1 and the report equals the plain one exactly
    y, q = parcels.target, parcels.true_proba[:, 1]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        c, _ = build_report(y_prob=q, time=np.where(y == 1, 5.0, 90.0), event=y, horizon=30,
                            costs=COSTS, n_resamples=20)
        plain, _ = build_report(y_true=y, y_prob=q, costs=COSTS, n_resamples=20)
    assert c.late_labels.open_share == 0.0
    np.testing.assert_array_equal(c.sample_weight, np.ones(3000))
    assert [m.value for m in c.metrics] == [m.value for m in plain.metrics]
    assert c.chosen_cutoff == plain.chosen_cutoff


def test_late_label_arguments_are_checked(parcels):
    p = parcels.true_proba[:, 1]
    with pytest.raises(ValueError, match="missing `horizon`"):
        build_report(y_prob=p, time=np.ones(3000), event=np.zeros(3000), n_resamples=20)
    with pytest.raises(ValueError, match="not both"):
        build_report(y_true=parcels.target, y_prob=p, time=np.ones(3000),
                     event=np.zeros(3000), horizon=1, n_resamples=20)


def test_recommendation_keeps_a_certified_promise(parcels):
    # a binding recall promise: the recommendation is the certified cutoff, not a cheaper rule
    y, p = parcels.target, parcels.true_proba[:, 1]
    ask = {"requirement": "recall", "target": 0.97, "confidence": 0.9}
    content, page = build_report(y_true=y, y_prob=p, costs=COSTS, n_resamples=20,
                                 guarantee=ask)
    r = content.recommendation
    assert content.guarantee.binding
    assert r.key == "guarantee" and r.cutoff == content.guarantee.cutoff
    assert "certified to keep it" in r.reasons[0]
    assert _value(page, "recommended-cutoff") == content.guarantee.cutoff
    # the promise holds on the rows the recommendation acts on
    assert np.mean(p[y == 1] > r.cutoff) >= 0.97


def test_recommendation_says_when_no_rule_keeps_the_promise(parcels):
    y, p = parcels.target, parcels.true_proba[:, 1]
    with pytest.warns(UserWarning, match="No cutoff"):
        content, _ = build_report(y_true=y, y_prob=p, costs=COSTS, n_resamples=20,
                                  guarantee={"requirement": "precision", "target": 0.99})
    r = content.recommendation
    assert r.key != "guarantee"
    assert "does NOT keep it" in r.reasons[0]


def test_recall_promise_is_not_moved_to_a_new_prevalence():
    # under a change of prevalence alone, the recall of a fixed cutoff is unchanged, so the
    # certified cutoff is kept rather than moved (Saerens et al. 2002 would move a cost cutoff)
    labelled = make_parcels(4000, random_state=11)
    winter = make_parcels(12000, season="winter", random_state=12)
    model = LogisticRegression(max_iter=1000).fit(labelled.data, labelled.target)
    shift = PriorShiftWrapper(FrozenEstimator(model), random_state=0, n_resamples=20)
    shift.fit(labelled.data, labelled.target).adapt(winter.data)
    p = model.predict_proba(labelled.data)[:, 1]
    q = model.predict_proba(winter.data)[:, 1]
    ask = {"requirement": "recall", "target": 0.9, "confidence": 0.9}
    content, _ = build_report(y_true=labelled.target, y_prob=p, costs=COSTS, n_resamples=20,
                              unlabelled_prob=q, prior_shift=shift, guarantee=ask)
    r = content.recommendation
    assert content.shift_pvalue < 0.05  # a weak model: p = 0.011 with the labelled rows' error
    assert r.key == "guarantee" and r.cutoff == content.guarantee.cutoff
    assert any("cutoff is not moved" in t for t in r.reasons)
