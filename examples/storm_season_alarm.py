"""
When has the damage rate moved? A prevalence alarm and the cost before the labels
==================================================================================

(Invented parcel scenario; demo data only.)

Week by week, the hub estimates the share of damaged parcels among the unlabelled parcels it
ships. Four summer weeks are followed by four weeks of the winter storm season, when damage
roughly doubles. A two-sided CUSUM of the weekly estimates (``cusum_alarms``, Page 1954; k = 0.5,
h = 5 standard errors) says after which week the rate has moved, and ``expected_cost_by_batch``
predicts each week's inspection cost per parcel from the probabilities moved to that week's
estimated rate, before a single claim has come in. The report draws the same alarm chart on its
prevalence section.

Run: python examples/storm_season_alarm.py
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.datasets import make_parcels
from probwrap.report import write_report
from probwrap.shift import cusum_alarms, cusum_run_length, expected_cost_by_batch

COSTS = {"fp": 3.0, "fn": 40.0}
CUTOFF = 3.0 / 43.0  # the Bayes cutoff of these costs

summer = make_parcels(6000, random_state=0)
model = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression()),
                          random_state=0).fit(summer.data, summer.target)

weeks = [make_parcels(1500, random_state=10 + i) for i in range(4)]
weeks += [make_parcels(1500, season="winter", random_state=20 + i) for i in range(4)]
X_new = np.vstack([w.data for w in weeks])
table = model.monitor(X_new, batch_size=1500)

se = (table["upper"][:, 1] - table["lower"][:, 1]) / (2 * 1.959964)  # 95 % intervals
chart = cusum_alarms(table["prior"][:, 1], model.source_prior_[1], se)
print(f"source damage rate {model.source_prior_[1]:.4f}; in control the chart sounds about once "
      f"every {cusum_run_length(0.0, two_sided=True):.0f} weeks")
for i, prev in enumerate(table["prior"][:, 1]):
    mark = "  <- ALARM" if i in chart.alarms else ""
    print(f"week {i + 1}: estimated rate {prev:.4f}, upper sum {chart.upper[i]:5.1f}{mark}")

# the expected cost per parcel of the rule in use, before the claims arrive
proba = model.estimator_.predict_proba(X_new)  # the model's probabilities (summer prior)
cost = expected_cost_by_batch(proba, COSTS, batch_size=1500, cutoff=CUTOFF,
                              source_prior=model.source_prior_, target_prior=table["prior"])
truth = [np.mean(np.where(w.target == 1, np.where(p > CUTOFF, 3.0, 40.0),
                          np.where(p > CUTOFF, 3.0, 0.0)))
         for w, p in zip(weeks, np.split(proba[:, 1], 8), strict=True)]
for i, row in enumerate(cost):
    print(f"week {i + 1}: expected cost {row['expected_cost']:.3f} "
          f"[{row['lower']:.3f}, {row['upper']:.3f}], realised later {truth[i]:.3f}")

out = Path(tempfile.mkdtemp()) / "storm.html"
held = make_parcels(3000, random_state=5)
content = write_report(out, model=model, X=held.data, y=held.target, costs=COSTS,
                       prior_shift=model.adapt(X_new), X_unlabelled=X_new, batch_size=1500,
                       n_resamples=30)
print(f"report: first alarm after batch {content.alarm.first_batch} (batches counted from 0) "
      f"-> {out.name}")
