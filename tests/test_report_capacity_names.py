"""The multiclass report's recommendation respects the capacity at the estimated class shares,
and the binary report names its two classes.

Outside check: the capacity-respecting actions are compared with the optimum of the linear
programme "least total expected cost with at most a given number of rows on the limited action"
solved by SciPy's HiGHS (``scipy.optimize.linprog``). Its constraint matrix is that of a
transportation problem (totally unimodular), so with an integer budget the programme has an
integral optimum and filling the budget greedily by saving must reach it. The rest are
consistency tests recomputing the numbers with the library's own functions.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from probwrap.datasets import make_parcels
from probwrap.decision import budget_actions, expected_costs, fit_action_budget
from probwrap.report import build_report
from probwrap.shift import adjust_to_prior

MATRIX = np.array([[0.0, 4.0, 12.0], [20.0, 4.0, 12.0], [60.0, 64.0, 12.0]])
ACTIONS = ["ship", "repack", "hold"]
CAP = 0.03  # 30 of the 1000 unlabelled rows: an integer budget


def _inputs():
    three = make_parcels(2000, n_outcomes=3, random_state=32)
    winter = make_parcels(1000, n_outcomes=3, season="winter", random_state=33)
    src = three.source_prior
    back = winter.true_proba * (src / winter.prior)  # the summer model's view of winter rows
    back /= back.sum(axis=1, keepdims=True)
    return dict(y_true=three.target, y_prob=three.true_proba, action_names=ACTIONS,
                capacity={"hold": CAP}, unlabelled_prob=back, class_names=three.target_names,
                n_resamples=20, random_state=0)


@pytest.fixture(scope="module")
def shifted():
    kw = _inputs()
    content, page = build_report(costs=MATRIX, **kw)
    return kw, content, page


def test_multiclass_capacity_is_judged_on_the_unlabelled_rows(shifted):
    kw, c, _ = shifted
    rows = {r.key: r for r in c.rules}
    assert c.shift_pvalue < 0.01
    for r in c.rules:  # every row: "within capacity" is the share of the unlabelled rows
        assert r.within_capacity is bool(r.target_shares[2] <= CAP * (1 + 1e-12)), r.key
    # the rule filled within capacity on the labelled rows keeps "hold" within 3% there but
    # not on the unlabelled rows, where the class needing it is more common: judged there
    assert rows["chosen"].shares[2] <= CAP < rows["chosen"].target_shares[2]
    assert rows["chosen"].within_capacity is False
    assert rows["adapted"].within_capacity is False


def test_multiclass_recommendation_offers_the_capacity_respecting_rule(shifted):
    kw, c, page = shifted
    r = c.recommendation
    q = kw["unlabelled_prob"]
    assert r.key == "capacity" and r.basis == "unlabelled" and r.within_capacity is True
    # recomputed: Bayes actions on the posteriors moved to the class shares the evidence gate
    # applies (as PriorShiftWrapper would), the "hold" action filled up to 3% of the
    # unlabelled rows by saving
    assert 0 < c.adaptation_weight <= 1
    E = expected_costs(adjust_to_prior(q, c.source_prior, c.applied_prior), MATRIX)
    budget = fit_action_budget(E, 2, CAP)
    acts = budget_actions(E, 2, budget.saving_threshold)
    shares = np.bincount(acts, minlength=3) / q.shape[0]
    np.testing.assert_array_equal(r.action_shares, shares)
    assert shares[2] <= CAP
    assert r.expected_cost == pytest.approx(E[np.arange(q.shape[0]), acts].mean(), rel=1e-12)
    # reference: the least expected cost of any assignment with at most 30 rows on "hold"
    linprog = pytest.importorskip("scipy.optimize").linprog
    n, a = E.shape
    eq = np.kron(np.eye(n), np.ones(a))  # each row takes exactly one action
    cap_row = np.tile([0.0, 0.0, 1.0], n)  # at most CAP * n rows on "hold"
    lp = linprog(E.ravel(), A_ub=cap_row[None], b_ub=[CAP * n], A_eq=eq, b_eq=np.ones(n),
                 bounds=(0, 1), method="highs")
    assert lp.status == 0
    # HiGHS stops at a relative optimality gap of about 1e-7 (its default tolerances)
    assert r.expected_cost == pytest.approx(lp.fun / n, rel=1e-7)
    # the box and the table say the same
    box = re.search(r'<aside class="pw-recommend".*?</aside>', page, re.S).group(0)
    assert 'data-rule="capacity"' in box and "within the capacity" in box
    assert "above the capacity of 3.0%" in box
    assert re.search(r'<tr data-rule="capacity" class="pw-recommended">', page)


def test_multiclass_costs_near_the_largest_float_stay_finite(shifted):
    # the rules depend on the costs only up to a common factor; 64 * 2**1017 is 2**1023, near
    # the largest double, and the sums over 1000 rows used to overflow to inf
    kw, small, _ = shifted
    big, _ = build_report(costs=MATRIX * 2.0**1017, **kw)
    assert [r.key for r in big.rules] == [r.key for r in small.rules]
    assert big.recommendation.key == small.recommendation.key
    for b, s in zip(big.rules, small.rules, strict=True):
        np.testing.assert_array_equal(b.shares, s.shares)
        np.testing.assert_array_equal(b.target_shares, s.target_shares)
        # scaling by a power of two is exact; the means differ only by the summation order
        assert b.mean_cost == pytest.approx(s.mean_cost * 2.0**1017, rel=1e-12)
        assert b.target_expected_cost == pytest.approx(s.target_expected_cost * 2.0**1017,
                                                       rel=1e-12)


def _binary(seed=3, n=1500):
    rng = np.random.default_rng(seed)
    p = rng.beta(1.0, 6.0, size=n)
    return p, rng.uniform(size=n) < p


def test_binary_report_names_its_classes():
    p, damaged = _binary()
    y = np.where(damaged, "damaged", "intact")
    with pytest.raises(ValueError, match="class_names=") as err:
        build_report(y_true=y, y_prob=p, n_resamples=20)
    assert "'damaged'" in str(err.value) and "'intact'" in str(err.value)
    c, page = build_report(y_true=y, y_prob=p, costs={"fp": 3.0, "fn": 40.0}, n_resamples=20,
                           class_names=("intact", "damaged"))
    # "damaged" is the positive class: the prevalence is its share, not that of "intact"
    assert c.prevalence == pytest.approx(damaged.mean(), rel=1e-12)
    assert c.class_names == ("intact", "damaged")
    table = re.search(r'<table id="cost-matrix">.*?</table>', page, re.S).group(0)
    assert '<tr data-class="negative"><td>&ldquo;intact&rdquo;</td>' in table
    assert '<tr data-class="positive"><td>&ldquo;damaged&rdquo;</td>' in table
    assert "share of &ldquo;damaged&rdquo;" in page
    # 0/1 labels keep "negative"/"positive" unless names are given
    c01, page01 = build_report(y_true=damaged.astype(int), y_prob=p, n_resamples=20)
    assert c01.class_names == ("negative", "positive")
    with pytest.raises(ValueError, match="`class_names`"):
        build_report(y_true=y, y_prob=p, n_resamples=20, class_names=("ok", "broken"))


def test_capacity_rule_and_class_names_render(shifted, tmp_path, chromium):
    _, _, page = shifted
    p, damaged = _binary()
    _, binary_page = build_report(y_true=damaged.astype(int), y_prob=p, n_resamples=20,
                                  costs={"fp": 3.0, "fn": 40.0},
                                  class_names=("intact", "damaged"))
    probe = (
        '<pre id="probe"></pre><script>'
        "const el = (s) => document.querySelector(s);"
        "const vis = (e) => { const r = e.getBoundingClientRect(), st = getComputedStyle(e);"
        " return [Math.round(r.width), Math.round(r.height), st.visibility, st.display]"
        ".join(','); };"
        "const rec = el('#recommendation'), row = el('tr.pw-recommended'),"
        " cost = el('#cost-matrix'); const out = [vis(rec), rec.dataset.rule, vis(row),"
        " row.dataset.rule];"
        "if (cost) { out.push(vis(cost), cost.innerText.replace(/\\s+/g, ' ')); }"
        "el('#probe').textContent = out.join(';');"
        "</script>"
    )
    results = []
    for name, html in (("mc", page), ("bin", binary_page)):
        probed = tmp_path / f"{name}.html"
        probed.write_text(html.replace("</body>", probe + "</body>"), encoding="utf-8")
        proc = chromium.run(["--dump-dom", probed.as_uri()], tmp_path, name)
        assert proc.returncode == 0, proc.stderr[-2000:]
        match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
        assert match, proc.stdout[-1000:]
        results.append(match.group(1).split(";"))

    def shown(box):
        w, h, visibility, display = box.split(",")
        return int(w) > 200 and int(h) > 10 and visibility == "visible" and display != "none"

    mc, binary = results
    assert shown(mc[0]) and mc[1] == "capacity" and shown(mc[2]) and mc[3] == "capacity"
    assert shown(binary[0]) and shown(binary[4])
    assert "“intact”" in binary[5] and "“damaged”" in binary[5]
