"""Report, plot and late-label inputs that gave silent wrong results or tracebacks: text labels
named by ``class_names``, ``labels=`` for 2-d probabilities by group, the rule behind the
report's group columns, a horizon beyond the data, a seed out of range. References:
scikit-learn's ``log_loss``; the late-label example of ``labels_at_horizon``'s docstring."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import cross_val_predict
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap.late_labels import labels_at_horizon
from probwrap.metrics import expected_calibration_error
from probwrap.plot import GroupReliabilityDisplay
from probwrap.report import write_report


@pytest.fixture(scope="module")
def wine_proba():
    X, y = load_wine(return_X_y=True)
    P = cross_val_predict(make_pipeline(StandardScaler(), LogisticRegression(C=0.05)), X, y,
                          cv=5, method="predict_proba")
    return y, P


def test_multiclass_report_matches_text_labels_through_class_names(tmp_path, wine_proba):
    """Column order intact, dented, broken (not alphabetical): the labels are matched to the
    columns through class_names, and the log loss is scikit-learn's."""
    y, P = wine_proba
    names = ["intact", "dented", "broken"]
    content = write_report(tmp_path / "r.html", y_true=np.array(names)[y], y_prob=P,
                           class_names=names, costs=[[0, 4, 12], [30, 4, 12], [60, 60, 12]],
                           n_resamples=20)
    shown = {m.key: float(m.value) for m in content.metrics}
    assert shown["log_loss"] == pytest.approx(sk_log_loss(y, P), rel=1e-9)


def test_group_reliability_uses_labels_for_two_dimensional_probabilities(wine_proba):
    y, P = wine_proba
    groups = np.where(np.arange(y.size) % 2 == 0, "even", "odd")
    keep = y < 2  # class 3 (code) absent from the labelled rows
    codes = y[keep] + 1
    disp = GroupReliabilityDisplay.from_predictions(codes, P[keep], groups[keep],
                                                    labels=[1, 2, 3])
    for g in ("even", "odd"):
        rows = groups[keep] == g
        assert disp.calibration_errors[g] == pytest.approx(
            expected_calibration_error(codes[rows], P[keep][rows], labels=[1, 2, 3]))
    names = np.array(["barolo", "grignolino", "barbera"])
    text = GroupReliabilityDisplay.from_predictions(names[y], P, groups, labels=names)
    assert set(text.calibration_errors) == {"even", "odd"}


def test_report_group_columns_are_for_the_recommended_rule(tmp_path):
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    p = cross_val_predict(make_pipeline(StandardScaler(), LogisticRegression(C=0.002)), X, y,
                          cv=5, method="predict_proba")[:, 1]
    groups = np.random.default_rng(1).choice(["small", "large"], y.size)
    content = write_report(tmp_path / "g.html", y_true=y, y_prob=p, costs={"fp": 3, "fn": 40},
                           groups=groups, n_resamples=20, random_state=0)
    rec = content.recommendation
    assert rec.cutoff is not None
    assert content.group_checks.cutoff == rec.cutoff
    # the case of the test: the recommended rule is not the least-cost search's cutoff
    assert rec.cutoff != content.chosen_cutoff


def test_horizon_beyond_the_longest_time_is_a_clear_error():
    # the docstring's example rows; the row observed longest (40) is still event-free there
    time, event = [5, 40, 12, 31, 3], [1, 0, 0, 0, 0]
    with pytest.raises(ValueError, match=r"No row was observed beyond `horizon`=45 .*longest "
                                         r"time observed is 40"):
        labels_at_horizon(time, event, horizon=45)
    with pytest.raises(ValueError, match="beyond `horizon`=40"):
        labels_at_horizon(time, event, horizon=40)
    ok = labels_at_horizon(time, event, horizon=30)  # the docstring's values
    np.testing.assert_allclose(ok.sample_weight, [1.25, 1.875, 0.0, 1.875, 0.0])


def test_seed_out_of_range_is_refused_not_a_silent_fallback():
    X, y = load_breast_cancer(return_X_y=True)
    model = GaussianNB().fit(X[:200], y[:200])
    for seed in (-1, 2**32):
        with pytest.raises(ValueError, match=r"`random_state` must be None, an int in \[0, "):
            CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 5},
                              strategy="tuned", random_state=seed).fit(X[200:], y[200:])


def test_prevalence_drift_display_refuses_a_class_index_by_name(wine_proba):
    from probwrap.plot import PrevalenceDriftDisplay
    from probwrap.shift import PriorEstimator

    y, P = wine_proba
    binary = y == 0
    P2 = np.c_[1 - P[:, 0], P[:, 0]]
    est = PriorEstimator().fit(P2, binary.astype(int))
    for bad in (2, -1, 1.0, True):
        with pytest.raises(ValueError, match=r"`class_index` must be a whole number in \[0, 2\)"):
            PrevalenceDriftDisplay.from_predictions(P2, est, batch_size=60, class_index=bad)
    shown = PrevalenceDriftDisplay.from_predictions(P2, est, batch_size=60, class_index=np.int64(1))
    assert shown.source_prevalence == pytest.approx(est.source_prior_[1])
