"""Estimates far from the truth say so: ``adapt`` raises ImprecisePriorWarning when a class
share's interval reaches more than 0.25 from ``target_prior_`` (issue 10; measured in
benchmarks/prior_far_off.py, docs/evidence/prior_shift_log.md 'Estimates far from the truth').

The draws are those of benchmarks/prior_far_off.py: a base model fitted on a quarter of the rows
(at most 600) and frozen, labelled rows drawn at random from the rest, 300 unlabelled rows
resampled from the remaining rows with the rarer class at a multiple of its share there. The
truth is the drawn rows' own share of the positive class, read from the bundled labels.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import (
    FewLabelledRowsWarning,
    ImprecisePriorWarning,
    PriorNotIdentifiedWarning,
)
from probwrap.shift._estimator import IMPRECISE_REACH
from probwrap.shift._repeats import RepeatedRowsWarning


def _randhie():
    sm = pytest.importorskip("statsmodels.api")
    d = sm.datasets.randhie.load_pandas().data
    return d.drop(columns="mdvis").to_numpy(dtype=float), (d.mdvis > 0).astype(int).to_numpy()


def _draw(X, y, seed, n_lab, factor):
    """(fit rows, labelled rows, unlabelled rows) as in benchmarks/prior_far_off.py."""
    rng = np.random.default_rng(seed)
    order = rng.permutation(y.shape[0])
    k = min(600, y.shape[0] // 4)
    fit_rows, order = order[:k], order[k:]
    lab, pool = order[:n_lab], order[n_lab:]
    share1 = y[pool].mean()
    rare = 1 if share1 <= 0.5 else 0
    rare_share = share1 if rare == 1 else 1 - share1
    target_rare = min(0.95, rare_share * factor)
    target1 = target_rare if rare == 1 else 1 - target_rare
    counts = rng.multinomial(300, [1 - target1, target1])
    unl = np.concatenate([rng.choice(pool[y[pool] == c], counts[c]) for c in (0, 1)])
    return fit_rows, lab, rng.permutation(unl)


def _adapt(X, y, seed, n_lab, factor):
    fit_rows, lab, unl = _draw(X, y, seed, n_lab, factor)
    base = make_pipeline(StandardScaler(), LogisticRegression(max_iter=500))
    base.fit(X[fit_rows], y[fit_rows])
    wrapper = PriorShiftWrapper(FrozenEstimator(base), random_state=seed).fit(X[lab], y[lab])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper.adapt(X[unl])
    kinds = [c.category for c in caught
             if not issubclass(c.category, (FutureWarning, DeprecationWarning))]
    return wrapper, float(y[unl].mean()), kinds


def test_far_off_estimate_on_randhie_warns_once():
    # statsmodels' randhie (RAND Health Insurance Experiment), any doctor visit (65 % of
    # people), a logistic regression fitted on 600 rows (held-out AUC about 0.65), 150 labelled
    # rows, the unlabelled rows' rarer class (no visit) at twice its share: a silent far-off
    # fit of the sweep (seed 100631), which before this warning raised nothing at all
    X, y = _randhie()
    wrapper, truth, kinds = _adapt(X, y, 100631, 150, 2.0)
    est = float(wrapper.target_prior_[1])
    lo, hi = wrapper.target_prior_interval_[1]
    assert abs(est - truth) > 0.25                      # far off: 0.689 against 0.407
    assert (lo, hi) == pytest.approx((0.254, 0.954), abs=0.01)
    assert lo <= truth <= hi                            # the interval holds the truth ...
    assert max(est - lo, hi - est) > IMPRECISE_REACH    # ... because it reaches that far
    assert kinds.count(ImprecisePriorWarning) == 1      # once per call
    assert set(kinds) <= {ImprecisePriorWarning, FewLabelledRowsWarning}
    # nothing moved: the shift test found no evidence, so predict_proba is unadjusted
    assert wrapper.adaptation_weight_ == 0.0


def test_warning_message_says_what_to_do():
    X, y = _randhie()
    fit_rows, lab, unl = _draw(X, y, 100631, 150, 2.0)
    base = make_pipeline(StandardScaler(), LogisticRegression(max_iter=500))
    base.fit(X[fit_rows], y[fit_rows])
    wrapper = PriorShiftWrapper(FrozenEstimator(base), random_state=0).fit(X[lab], y[lab])
    with pytest.warns(ImprecisePriorWarning) as record:
        wrapper.adapt(X[unl])
    msg = str(next(r.message for r in record if r.category is ImprecisePriorWarning))
    lo, hi = wrapper.target_prior_interval_[1]
    assert f"[{lo:.3g}, {hi:.3g}]" in msg and "Read the interval" in msg
    assert "label more rows" in msg and "adaptation_weight_ = 0" in msg


def test_good_fit_on_breast_cancer_does_not_warn():
    # scikit-learn's breast cancer (63 % benign), the same design (150 labelled rows, the
    # malignant class at twice its share): the model separates the classes well, the interval
    # is narrow and the estimate close to the drawn rows' share, with no warning
    data = load_breast_cancer()
    X, y = data.data, data.target
    wrapper, truth, kinds = _adapt(X, y, 5, 150, 2.0)
    est = float(wrapper.target_prior_[1])
    lo, hi = wrapper.target_prior_interval_[1]
    assert abs(est - truth) < 0.1
    assert max(est - lo, hi - est) <= IMPRECISE_REACH
    # the 300 unlabelled rows are drawn with replacement from a pool of 277 (222 of them from
    # its ~100 malignant rows), so they repeat one another far beyond chance: since 4 December
    # 2026 adapt counts the repeats as cells and says so (RepeatedRowsWarning); nothing else
    assert kinds == [RepeatedRowsWarning]


def test_no_second_warning_where_the_interval_spans_everything():
    # an interval spanning all of [0, 1] already draws PriorNotIdentifiedWarning: a model that
    # predicts the same probability for every row (one constant feature) cannot place the share
    rng = np.random.default_rng(0)
    y = rng.integers(0, 2, 200)
    X = np.ones((200, 1))
    base = LogisticRegression().fit(X, y)
    wrapper = PriorShiftWrapper(FrozenEstimator(base), random_state=0).fit(X[:150], y[:150])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper.adapt(X[150:])
    kinds = [c.category for c in caught]
    np.testing.assert_array_equal(wrapper.target_prior_interval_, [[0, 1], [0, 1]])
    assert PriorNotIdentifiedWarning in kinds
    assert ImprecisePriorWarning not in kinds
