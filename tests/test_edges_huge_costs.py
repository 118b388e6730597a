"""Binary costs near the largest float through the whole decision path (plug-in cutoff, the
`probwrap cutoff` summary, the cost wrapper's held-out cost, the report's cost curve).

Found by the real-data sweep: `probwrap cutoff --cost-fp 1e308 --cost-fn 1e308` printed
"overflow" warnings, a Bayes cutoff of 0 (it is 0.5 for equal costs) and costs of inf, and with
`--format json` stopped with a traceback (inf is not JSON). The checks rest on the identity that
the least-expected-cost rule does not change when the cost matrix is multiplied by a positive
constant, and its mean cost is multiplied by it (consistency tests); the data are scikit-learn's
bundled breast cancer set scored by a naive Bayes model.
"""

from __future__ import annotations

import json
import warnings

import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import CostPolicyWrapper
from probwrap.cli._cutoff import cutoff_summary
from probwrap.decision import plugin_cutoff, search_cutoff
from probwrap.report._builtin_figures import cost_svg

BIG = 2.0**1020  # multiplying by a power of two is exact; 4 * BIG is still finite


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    model = GaussianNB().fit(X[::2], y[::2])
    return model, X[1::2], y[1::2]


def test_plugin_cutoff_of_costs_near_the_largest_float():
    # Elkan (2001): cutoff = c_fp / (c_fp + c_fn); 0.5 for equal costs. The sum of two costs
    # of 1e308 overflowed and the cutoff came out 0.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert plugin_cutoff({"fp": 1e308, "fn": 1e308}) == 0.5
        assert plugin_cutoff({"fp": 1.7e308, "fn": 1e308}) == pytest.approx(1.7 / 2.7, rel=1e-15)


def test_cutoff_summary_scales_with_the_costs(cancer):
    model, X, y = cancer
    p = model.predict_proba(X)[:, 1]
    small = cutoff_summary(p, y, {"fp": 1.0, "fn": 3.0}, n_resamples=20)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        big = cutoff_summary(p, y, {"fp": BIG, "fn": 3.0 * BIG}, n_resamples=20)
    json.dumps(big, allow_nan=False)  # raised "Out of range float values" for inf costs
    for key in ("cutoff", "cutoff_range", "cutoff_interval", "flagged_share", "bayes_cutoff"):
        assert big[key] == small[key], key
    assert big["settled_cutoff"]["cutoff"] == small["settled_cutoff"]["cutoff"]
    for key in ("expected_cost", "cost_flag_none", "cost_flag_all", "cost_at_half",
                "cost_at_bayes_cutoff"):
        assert big[key] == pytest.approx(small[key] * BIG, rel=1e-12), key


def test_cost_wrapper_heldout_cost_with_huge_costs(cancer):
    model, X, y = cancer
    small = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1.0, "fn": 3.0}).fit(X, y)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # "overflow encountered in dot"
        big = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": BIG, "fn": 3.0 * BIG}).fit(X, y)
    assert big.cutoff_ == small.cutoff_
    assert big.heldout_cost_ == pytest.approx(small.heldout_cost_ * BIG, rel=1e-12)


def test_cost_curve_figure_with_huge_costs(cancer):
    model, X, y = cancer
    p = model.predict_proba(X)[:, 1]
    res = search_cutoff(p, y, {"fp": BIG, "fn": 3.0 * BIG}, score_bounds=(0.0, 1.0))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # "overflow encountered in multiply" (axis ticks)
        svg = cost_svg(res, plugin=0.25)
    assert "e+30" in svg and "nan" not in svg and "inf" not in svg.lower()


def test_matplotlib_cost_curve_with_huge_costs(cancer):
    # the report draws this one when matplotlib is installed: its tick search overflowed
    matplotlib = pytest.importorskip("matplotlib")
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from probwrap.plot import CostCurveDisplay

    model, X, y = cancer
    p = model.predict_proba(X)[:, 1]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        disp = CostCurveDisplay.from_predictions(y, p, {"fp": BIG, "fn": 3.0 * BIG})
        disp.figure_.canvas.draw()
    assert disp.ax_.get_ylabel() == "mean cost per row (x 1e307)"
    plt.close(disp.figure_)
