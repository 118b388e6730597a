"""
Damage claims that arrive late: "not yet" is not "no"
=====================================================

(Invented parcel scenario; demo data only.)

A damage claim reaches the hub about twelve days after shipping, on average. On the day the
model is recalibrated, the parcels shipped in the last weeks have no claim *yet*. Counting them
as undamaged makes the calibrated probabilities, the cutoff and the report too optimistic.
``labels_at_horizon`` turns "days observed so far" and "claimed or not" into the outcome
"claimed within 30 days" with inverse-probability-of-censoring weights (open parcels weigh 0),
and those weights go through the same path as any ``sample_weight``: the map, the cutoff search
and the report, whose calibration section says how many parcels are still open.

Run: python examples/late_damage_claims.py
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper
from probwrap.datasets import make_parcels
from probwrap.decision import search_cutoff
from probwrap.late_labels import labels_at_horizon
from probwrap.report import write_report

COSTS = [[0.0, 3.0], [40.0, 3.0]]  # rows: intact, damaged; columns: ship, inspect
n = 8000
parcels = make_parcels(n, random_state=1)
rng = np.random.default_rng(1)
days_since_shipping = rng.uniform(0, 60, n)  # shipped over the last 60 days
claim_delay = rng.exponential(12.0, n)  # days from shipping to the claim
damaged = parcels.target == 1
claimed = damaged & (claim_delay <= days_since_shipping)
time = np.where(claimed, claim_delay, days_since_shipping)

hl = labels_at_horizon(time, claimed, horizon=30)
truth = parcels.true_proba[:, 1] * (1 - np.exp(-30 / 12.0))  # P(claim within 30 days)
print(f"parcels still open at 30 days: {hl.open_share:.1%}")
print(f"claim rate within 30 days: true {truth.mean():.4f}, "
      f"'not yet = no' {np.mean(claimed & (time <= 30)):.4f}, "
      f"IPCW {np.average(hl.y, weights=hl.sample_weight):.4f}")

naive = CalibrationWrapper(LogisticRegression(max_iter=1000), method="platt", random_state=0)
naive.fit(parcels.data, claimed & (time <= 30))
ipcw = CalibrationWrapper(LogisticRegression(max_iter=1000), method="platt", random_state=0)
ipcw.fit(parcels.data, hl.y, sample_weight=hl.sample_weight)
for name, m in (("'not yet = no'", naive), ("IPCW", ipcw)):
    p = m.predict_proba(parcels.data)[:, 1]
    cut = search_cutoff(p, hl.y, COSTS, sample_weight=hl.sample_weight,
                        score_bounds=(0.0, 1.0)).cutoff
    print(f"{name:>14}: mean probability {p.mean():.4f} (true {truth.mean():.4f}), "
          f"least-cost cutoff {cut:.4f}")

out = Path(tempfile.mkdtemp()) / "late-claims.html"
p = ipcw.predict_proba(parcels.data)[:, 1]  # in-sample, for brevity: assess on held-out rows
content = write_report(out, y_prob=p, horizon_labels=hl, costs=COSTS, n_resamples=30)
print(f"report: {int(content.late_labels.is_open.sum())} open parcels noted, weighted claim "
      f"rate {content.prevalence:.4f} -> {out.name}")
