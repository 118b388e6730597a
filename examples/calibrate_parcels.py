"""
Calibrating a parcel-damage model
=================================

(Invented demo scenario.)

A sorting hub scores every outgoing parcel for the risk that it arrives damaged. A gradient
boosting model ranks parcels well, but are its probabilities right? The generator knows the true
damage probability of every parcel, so we can compare the model's probabilities, the calibrated
ones and the truth directly.

Run: ``python examples/calibrate_parcels.py``
"""

import numpy as np
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper
from probwrap.datasets import make_parcels
from probwrap.metrics import brier_decomposition, expected_calibration_error, log_loss


def summary(name, y, p, true_p):
    # Mean absolute gap to the known true probabilities: only possible with simulated data.
    gap = np.mean(np.abs(p - true_p))
    ece = expected_calibration_error(y, p, n_bins=15, strategy="quantile")
    ll = log_loss(y, np.column_stack([1 - p, p]))
    rel = brier_decomposition(y, p, n_bins=15).reliability
    print(f"{name:<34} log loss {ll:.4f}  ECE {ece:.4f}  reliability {rel:.5f}  |p - true| {gap:.4f}")


def main():
    train = make_parcels(6000, random_state=0)
    held_out = make_parcels(4000, random_state=1)  # labelled parcels the model never saw
    fresh = make_parcels(20000, random_state=2)  # next week's parcels
    truth = fresh.true_proba[:, 1]
    print(f"damage rate in training data: {train.target.mean():.3f}\n")

    for label, base in [
        ("gradient boosting", HistGradientBoostingClassifier(max_iter=150, random_state=0)),
        ("naive Bayes (outputs exact 0/1)", GaussianNB()),
    ]:
        base.fit(train.data, train.target)
        summary(f"{label}, raw", fresh.target, base.predict_proba(fresh.data)[:, 1], truth)
        # The model is already fitted: freeze it and calibrate on the held-out parcels.
        calibrated = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0)
        calibrated.fit(held_out.data, held_out.target)
        p = calibrated.predict_proba(fresh.data)[:, 1]
        summary(f"{label}, calibrated ({calibrated.method_})", fresh.target, p, truth)
        scores = ", ".join(f"{k} {v[0]:.4f}" for k, v in calibrated.method_scores_.items())
        print(f"   held-out log loss by map: {scores}\n")

    # Without a separate held-out set: cross-fitting does the same in one call.
    model = CalibrationWrapper(HistGradientBoostingClassifier(max_iter=150, random_state=0),
                               method="auto", cv=5, random_state=0)
    model.fit(np.vstack([train.data, held_out.data]), np.concatenate([train.target, held_out.target]))
    summary(f"cross-fitted ({model.method_})", fresh.target, model.predict_proba(fresh.data)[:, 1], truth)


if __name__ == "__main__":
    main()
