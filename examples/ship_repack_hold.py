"""
Ship, repack or hold, with per-parcel values
============================================

(Invented parcel scenario; demo data only.)

Each parcel ends up intact, dented (repacking would have prevented it) or broken. Three actions:

* ship as is: free if it stays intact; a dent costs a partial refund (30% of the parcel's value)
  plus 5 for handling; a break costs the full value plus 8 for reshipping;
* repack (4): prevents dents; a broken parcel still breaks (value + 8, plus the 4 spent);
* hold for a manual check (12): nothing leaves damaged.

Costs depend on each parcel's value, so they are given as a function of X, which here is a
DataFrame holding the value next to the features; the model itself never sees the value column.
The hold area takes at most 3% of the parcels.

Run: python examples/ship_repack_hold.py
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.compose import ColumnTransformer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap.datasets import make_parcels, parcel_routing_costs
from probwrap.decision import bayes_actions

ACTIONS = ["ship", "repack", "hold"]


def parcel_costs(X: pd.DataFrame) -> np.ndarray:
    """(n, 3 outcomes, 3 actions) costs for each parcel, from its value."""
    return parcel_routing_costs(X["parcel_value"].to_numpy(dtype=float))


def load(n: int, seed: int) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    bunch = make_parcels(n, n_outcomes=3, random_state=seed, as_frame=True)
    X = bunch.data.copy()
    X["parcel_value"] = np.asarray(bunch.parcel_value)
    return X, np.asarray(bunch.target), np.asarray(bunch.true_proba)


def realised(costs: np.ndarray, y: np.ndarray, action_index: np.ndarray) -> float:
    return float(costs[np.arange(y.shape[0]), y, action_index].mean())


def main() -> None:
    X, y, _ = load(20_000, 1)
    Xf, yf, true_f = load(20_000, 2)
    features = [c for c in X.columns if c != "parcel_value"]
    model = make_pipeline(
        ColumnTransformer([("features", StandardScaler(), features)]),  # value column dropped
        LogisticRegression(max_iter=1000),
    )
    costs_f = parcel_costs(Xf)
    index = {a: i for i, a in enumerate(ACTIONS)}
    print(f"outcome shares (fresh): {np.bincount(yf, minlength=3) / yf.shape[0]}")
    print(f"{'policy':<26} {'ship':>7} {'repack':>7} {'hold':>7} {'cost/parcel':>12}")

    def show(name: str, actions: np.ndarray) -> None:
        shares = [np.mean(actions == a) for a in ACTIONS]
        cost = realised(costs_f, yf, np.vectorize(index.get)(actions))
        print(f"{name:<26} {shares[0]:>7.2%} {shares[1]:>7.2%} {shares[2]:>7.2%} {cost:>12.3f}")

    show("ship everything", np.full(yf.shape[0], "ship"))
    for name, kwargs in [
        ("Bayes rule", {}),
        ("tuned class offsets", {"strategy": "tuned"}),
        ("Bayes, hold <= 3%", {"capacity": {"hold": 0.03}}),
    ]:
        policy = CostPolicyWrapper(model, costs=parcel_costs, actions=ACTIONS, random_state=0,
                                   **kwargs).fit(X, y)
        show(name, policy.predict(Xf))
    show("true probabilities", bayes_actions(true_f, costs_f, actions=ACTIONS))

    policy = CostPolicyWrapper(model, costs=parcel_costs, actions=ACTIONS).fit(X, y)
    first = policy.expected_costs(Xf.iloc[:3])
    print("\nexpected cost of each action for the first three fresh parcels:")
    for value, row, action in zip(Xf["parcel_value"][:3], first, policy.predict(Xf.iloc[:3]),
                                  strict=True):
        print(f"  value {value:7.2f}: ship {row[0]:6.2f}  repack {row[1]:6.2f}  "
              f"hold {row[2]:6.2f}  -> {action}")


if __name__ == "__main__":
    main()
