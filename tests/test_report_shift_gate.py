"""The report moves its rules exactly as far as PriorShiftWrapper moves its predictions (the
wrapper's evidence gate, ``adaptation_weight_``), not to the shrunk estimate outright."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.special import expit
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap.report._content import collect_content
from probwrap.shift import shift_cutoff

COSTS = {"tp": 3.0, "fp": 3.0, "fn": 40.0, "tn": 0.0}


class _GivenScores(ClassifierMixin, BaseEstimator):
    """A fitted model whose positive-class probability is its one feature: the wrapper then
    sees the very probabilities the report reads from a score file."""

    def fit(self, X, y):
        self.classes_ = np.array([0, 1])
        self.n_features_in_ = 1
        return self

    def predict_proba(self, X):
        x = np.asarray(X, dtype=float)[:, 0]
        return np.column_stack([1.0 - x, x])


def _scores(n, prevalence, rng):
    y = (rng.uniform(size=n) < prevalence).astype(int)
    return expit(-2.0 + 1.6 * y + rng.normal(size=n)), y


def _both(p, y, q):
    """The report's numbers from the score files, and the wrapper on the same probabilities."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # the numbers only (no page), few resamples: the gate does not depend on them
        content = collect_content(y_true=y, y_prob=p, costs=COSTS, unlabelled_prob=q,
                                  n_resamples=5, random_state=0)
        model = FrozenEstimator(_GivenScores().fit(p[:, None], y))
        wrapper = PriorShiftWrapper(model, n_resamples=0).fit(p[:, None], y).adapt(q[:, None])
    return content, wrapper


@pytest.mark.parametrize(("target", "moves"), [(0.2, False), (0.4, True)])
def test_report_moves_its_cutoff_as_far_as_the_wrapper(target, moves):
    # Consistency test between the report (which estimates the prevalence itself from score
    # files) and PriorShiftWrapper on the same probabilities: the same adaptation weight, the
    # same applied prevalence, and the cutoff moved to that prevalence (Saerens et al. 2002
    # through shift_cutoff). Without a shift (prevalence 0.2 in both samples) the gate keeps
    # the cutoff where it was, although the shrunk estimate differs from the source prevalence;
    # before, the report moved the cutoff to the shrunk estimate whatever the evidence.
    rng = np.random.default_rng(3)
    p, y = _scores(600, 0.2, rng)
    q, _ = _scores(600, target, rng)
    content, wrapper = _both(p, y, q)
    assert content.adaptation_weight == pytest.approx(wrapper.adaptation_weight_, abs=1e-9)
    assert content.applied_prevalence == pytest.approx(wrapper.applied_prior_[1], abs=1e-9)
    assert (wrapper.adaptation_weight_ > 0) is moves
    src = content.source_prevalence
    assert content.adapted_cutoff == pytest.approx(
        shift_cutoff(content.chosen_cutoff, src, wrapper.applied_prior_[1]), abs=1e-12)
    rec = content.recommendation
    if moves:
        assert 0 < wrapper.adaptation_weight_ < 1  # partly moved: not to the estimate itself
        # the recommended rule (the chosen cutoff or another rule's) moved to the same
        # applied prevalence
        assert rec.key.endswith("adapted")
        rules = {r.key: r for r in content.rules}
        base = (content.chosen_cutoff if rec.key == "adapted"
                else rules[rec.key.removesuffix("_adapted")].cutoff)
        assert rec.cutoff == pytest.approx(
            shift_cutoff(base, src, wrapper.applied_prior_[1]), abs=1e-12)
    else:
        assert abs(content.target_prevalence - src) > 1e-4  # the shrunk estimate did move
        assert content.adapted_cutoff == pytest.approx(content.chosen_cutoff, abs=1e-12)
        assert not rec.key.endswith("adapted")
