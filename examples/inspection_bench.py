"""
Inspection bench with limited capacity
======================================

(Invented parcel scenario; demo data only.)

A parcel-sorting hub scores each outgoing parcel for the risk that it arrives damaged. Pulling a
parcel to the inspection bench and repacking it costs 3 currency units; a damaged delivery costs
a refund plus reshipping, about 40. The bench can handle at most 6% of the parcels of a shift.

The script compares, on fresh parcels: the 0.5 cutoff of a plain classifier, the plug-in Bayes
cutoff on calibrated probabilities, a cutoff tuned on held-out predictions, and the same with the
bench's capacity -- and, because the demo data know each parcel's true damage probability, the
best any policy could do with the true probabilities.

Run: python examples/inspection_bench.py
"""

from __future__ import annotations

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.datasets import make_parcels
from probwrap.decision import bayes_actions, realised_cost

COSTS = {"fp": 3.0, "tp": 3.0, "fn": 40.0}  # inspect: 3 whatever the parcel; miss damage: 40
ACTIONS = ["ship", "inspect"]
CAPACITY = 0.06


def main() -> None:
    train = make_parcels(20_000, random_state=1)
    fresh = make_parcels(20_000, random_state=2)
    X, y, Xf, yf = train.data, train.target, fresh.data, fresh.target

    def model():
        return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))

    calibrated = CalibrationWrapper(model(), method="platt", random_state=0)
    policies = {
        "plain classifier (0.5)": CostPolicyWrapper(
            model(), strategy="fixed", cutoff=0.5, actions=ACTIONS
        ),
        "Bayes cutoff, calibrated": CostPolicyWrapper(calibrated, costs=COSTS, actions=ACTIONS),
        "tuned on held-out rows": CostPolicyWrapper(
            model(), costs=COSTS, strategy="tuned", actions=ACTIONS, random_state=0
        ),
        f"tuned, bench <= {CAPACITY:.0%}": CostPolicyWrapper(
            model(), costs=COSTS, strategy="tuned", capacity=CAPACITY, actions=ACTIONS,
            random_state=0,
        ),
    }
    print(f"damage rate: {y.mean():.2%} (training), {yf.mean():.2%} (fresh parcels)")
    print(f"{'policy':<28} {'cutoff':>7} {'inspected':>10} {'cost/parcel':>12}")
    for name, policy in policies.items():
        policy.fit(X, y)
        action = policy.predict(Xf)
        cost = realised_cost(yf, action, costs=COSTS, classes=[0, 1], actions=ACTIONS)
        print(f"{name:<28} {policy.cutoff_:>7.4f} {np.mean(action == 'inspect'):>10.2%} "
              f"{cost:>12.3f}")
    oracle = bayes_actions(fresh.true_proba, COSTS, actions=ACTIONS)
    cost = realised_cost(yf, oracle, costs=COSTS, classes=[0, 1], actions=ACTIONS)
    print(f"{'true probabilities (oracle)':<28} {'':>7} {np.mean(oracle == 'inspect'):>10.2%} "
          f"{cost:>12.3f}")

    tuned = policies["tuned on held-out rows"]
    ci = tuned.cutoff_interval_
    print(f"\ntuned cutoff {tuned.cutoff_:.4f}; 95% bootstrap interval [{ci.low:.4f}, "
          f"{ci.high:.4f}]; across the {ci.fold_cutoffs.size} folds "
          f"[{ci.fold_low:.4f}, {ci.fold_high:.4f}]")
    curve = tuned.cost_curve_
    print(f"held-out cost at the tuned cutoff {curve.cost:.3f} per parcel; flat optimum: "
          f"{curve.flat}; every cutoff in [{curve.interval[0]:.6f}, "
          f"{curve.interval[1]:.6f}) gives it")


if __name__ == "__main__":
    main()
