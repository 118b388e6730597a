"""
The winter storm season, detected from unlabelled parcels
=========================================================

(Invented demo scenario.)

A sorting hub scores every outgoing parcel for the risk that it arrives damaged and pulls the
risky ones for inspection: an inspection costs 4 currency units, a damaged delivery 40 (refund
plus reshipping). The model was trained on summer parcels. In winter, damage roughly doubles
while damaged and intact parcels look as they did in summer — a pure prior shift.

Week by week, the hub estimates the damage rate from the parcels' features alone (labels only
arrive weeks later), tests whether it has moved, and once it has, adapts the probabilities and
lets the inspection rule move with them. The generator knows the true damage rates, so the demo
can print them beside the estimates.

Run: ``python examples/winter_season.py``
"""

import warnings

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import SplineTransformer, StandardScaler

from probwrap import CostPolicyWrapper, PriorShiftWrapper
from probwrap.datasets import make_parcels
from probwrap.shift import shift_cutoff

COSTS = {"tp": 4.0, "fp": 4.0, "fn": 40.0, "tn": 0.0}


def realised_cost(y, inspect):
    return float(np.mean(np.where(inspect, 4.0, np.where(y == 1, 40.0, 0.0))))


def main():
    summer = make_parcels(10_000, season="summer", random_state=0)
    base = make_pipeline(StandardScaler(), SplineTransformer(n_knots=4), LogisticRegression(C=1.0))
    policy = CostPolicyWrapper(
        PriorShiftWrapper(base, n_resamples=50, random_state=0), costs=COSTS, strategy="bayes"
    ).fit(summer.data, summer.target)
    shift = policy.estimator_
    print(f"summer damage rate in the training data: {shift.source_prior_[1]:.3%}")
    print(f"inspect when P(damaged) > {policy.cutoff_:.3f} (4 / 40, from the costs)\n")

    # Eight weeks of unlabelled parcels: four summer weeks, then the storm season.
    weeks = [make_parcels(3000, season="summer" if w < 4 else "winter", random_state=10 + w)
             for w in range(8)]
    X_weeks = np.vstack([w.data for w in weeks])
    week_no = np.repeat(np.arange(1, 9), 3000)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        table = shift.monitor(X_weeks, week_no)
    print("week  true rate  estimated  95% interval        shift p-value")
    for row, w in zip(table, weeks, strict=True):
        flag = "  <- shift" if row["shift_pvalue"] < 0.01 else ""
        print(
            f"{row['batch']:>4}  {w.target.mean():9.2%}  {row['prior'][1]:9.2%}  "
            f"[{row['lower'][1]:6.2%}, {row['upper'][1]:6.2%}]  {row['shift_pvalue']:13.2g}{flag}"
        )

    # Adapt on the first winter week, then score the rest of the season.
    shift.adapt(weeks[4].data)
    lo, hi = shift.target_prior_interval_[1]
    print(f"\nadapted on week 5: damage rate {shift.target_prior_[1]:.2%} "
          f"(95% interval {lo:.2%} to {hi:.2%}), p-value of no shift {shift.shift_pvalue_:.2g}")

    later = make_parcels(20_000, season="winter", random_state=99)
    p_summer = shift.calibrator_.predict(shift.estimator_.predict_proba(later.data))[:, 1]
    inspect_summer_rule = p_summer > policy.cutoff_
    inspect_adapted = policy.predict(later.data) == 1
    moved = shift_cutoff(policy.cutoff_, shift.source_prior_[1], shift.target_prior_[1])
    print(f"on the summer-scale probabilities the cutoff moves from {policy.cutoff_:.3f} "
          f"to {moved:.3f} (odds ratio of the priors)")
    print("\nrest of the winter (20,000 parcels, labels known only to the demo):")
    print(f"  summer rule:  inspect {inspect_summer_rule.mean():6.2%}, "
          f"cost per parcel {realised_cost(later.target, inspect_summer_rule):.3f}")
    print(f"  adapted rule: inspect {inspect_adapted.mean():6.2%}, "
          f"cost per parcel {realised_cost(later.target, inspect_adapted):.3f}")
    oracle = later.true_proba[:, 1] > policy.cutoff_
    print(f"  true probabilities (demo only): inspect {oracle.mean():6.2%}, "
          f"cost per parcel {realised_cost(later.target, oracle):.3f}")


if __name__ == "__main__":
    main()
