"""
A promise to catch most damaged parcels, certified on held-out parcels
=======================================================================

(Invented parcel scenario; demo data only.)

The hub has promised its customers that the inspection bench catches at least 80 % of damaged
parcels. The least-cost cutoff does not promise anything, and a cutoff that catches 80 % of the
held-out damaged parcels can still catch fewer on new ones. ``guaranteed_cutoff`` picks the
cheapest cutoff that is *certified* to keep the promise with probability 0.9 (Learn-then-Test),
the cost policy can fit it directly, and the report shows it as a "guarantee" row. A promise the
held-out rows cannot support (99 % precision) is refused, never replaced by a rule without it.

Run: python examples/promise_to_catch_damage.py
"""

from __future__ import annotations

import tempfile
from pathlib import Path

from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split

from probwrap import CostPolicyWrapper
from probwrap.datasets import make_parcels
from probwrap.decision import GuaranteeUnreachableError, guaranteed_cutoff
from probwrap.report import write_report

COSTS = {"fp": 2.0, "fn": 35.0}  # an inspection costs 2, a missed damage 35
PROMISE = {"requirement": "recall", "target": 0.8, "confidence": 0.9}

parcels = make_parcels(12000, random_state=0)
X_fit, X_held, y_fit, y_held = train_test_split(parcels.data, parcels.target, test_size=0.5,
                                                random_state=0)
model = LogisticRegression(max_iter=1000).fit(X_fit, y_fit)
p_held = model.predict_proba(X_held)[:, 1]

g = guaranteed_cutoff(p_held, y_held, COSTS, **PROMISE)
print(f"least-cost cutoff      {g.unconstrained.cutoff:.4f}  cost {g.unconstrained.cost:.3f}")
print(f"certified cutoff       {g.cutoff:.4f}  cost {g.cost:.3f}  "
      f"(recall here {g.achieved:.3f}, guaranteed >= {g.bound:.3f}, p = {g.p_value:.3g})")

try:
    guaranteed_cutoff(p_held, y_held, COSTS, requirement="precision", target=0.99)
except GuaranteeUnreachableError as exc:
    print("precision 0.99 refused:", str(exc).split(":")[0])

policy = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                           actions=["ship", "inspect"], guarantee=PROMISE)
policy.fit(X_held, y_held)
print(f"policy cutoff          {policy.cutoff_:.4f} (the same certified cutoff)")

# the report of new parcels shows the policy's guarantee as a row of the decisions table
new = make_parcels(4000, random_state=1)
out = Path(tempfile.mkdtemp()) / "promise.html"
content = write_report(out, model=policy, X=new.data, y=new.target, n_resamples=30)
row = {r.key: r for r in content.rules}["guarantee"]
print(f"report: guarantee row '{row.label}', cost {row.mean_cost:.3f} per parcel, "
      f"{row.flagged_share:.1%} inspected -> {out.name}")
