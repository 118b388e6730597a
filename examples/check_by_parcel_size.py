"""
Is the damage risk equally trustworthy for light and heavy parcels?
===================================================================

(Invented parcel scenario; demo data only.)

The hub's damage model leaves out the parcel's weight (the scale at the intake belt is often
broken, so the column is unreliable). Overall its calibrated probabilities look fine — but heavy
parcels are damaged more often than light ones at the same score, so within each size class the
probabilities may be off, and the same inspection cutoff then treats the classes differently.

The script checks calibration overall (Hosmer-Lemeshow, Spiegelhalter's Z, smooth ECE, the CORP
decomposition of the Brier score) and then by parcel size with
``probwrap.metrics.calibration_by_group``: calibration error, slope and intercept, scores with
bootstrap intervals, and the inspection rule's share acted on, error rates and mean cost —
largest gaps between size classes first — and writes the same table as the "By group" section
of the HTML report (``write_report(..., groups=...)``).

Run: python examples/check_by_parcel_size.py
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper
from probwrap.datasets import make_parcels
from probwrap.metrics import (
    calibration_by_group,
    hosmer_lemeshow_test,
    score_decomposition,
    smooth_calibration_error,
    spiegelhalter_z_test,
)
from probwrap.report import write_report

COSTS = {"fp": 3.0, "tp": 3.0, "fn": 40.0, "tn": 0.0}  # inspect: 3; missed damage: 40
CUTOFF = 3.0 / 40.0  # the Bayes cutoff of these costs for calibrated probabilities


def size_class(weight_kg: np.ndarray) -> np.ndarray:
    return np.select([weight_kg < 1.5, weight_kg < 6.0], ["light", "medium"], "heavy")


train = make_parcels(6000, random_state=0)
test = make_parcels(6000, random_state=1)
without_weight = slice(1, None)  # column 0 is weight_kg

model = CalibrationWrapper(
    make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)), method="platt", cv=5,
).fit(train.data[:, without_weight], train.target)
p = model.predict_proba(test.data[:, without_weight])[:, 1]
y = test.target

print("Overall, held-out parcels")
hl = hosmer_lemeshow_test(y, p, setting="held_out")
z = spiegelhalter_z_test(y, p)
d = score_decomposition(y, p)
print(f"  Hosmer-Lemeshow C = {hl.statistic:.1f} on {hl.dof} df, p = {hl.pvalue:.3f}")
print(f"  Spiegelhalter Z = {z.statistic:+.2f}, p = {z.pvalue:.3f}")
print(f"  smooth ECE = {smooth_calibration_error(y, p):.4f}")
print(f"  Brier {d.total:.4f} = miscalibration {d.miscalibration:.4f} - discrimination "
      f"{d.discrimination:.4f} + uncertainty {d.uncertainty:.4f}")

checks = calibration_by_group(y, p, size_class(test.data[:, 0]), cutoff=CUTOFF, costs=COSTS,
                              n_resamples=100, random_state=0)
print(f"\nBy parcel size (inspect when p > {CUTOFF:.3f})")
print(f"  {'size':<8}{'rows':>6}{'judged':>8}{'obs':>7}{'mean p':>8}{'smECE':>7}{'slope':>7}"
      f"{'interc.':>8}{'Brier [95% CI]':>24}{'inspect':>9}{'FNR':>6}{'cost':>6}")
for c in [*checks.groups, checks.overall]:
    lo, hi = c.brier_interval
    print(f"  {c.group!s:<8}{c.weight:>6.0f}{'yes' if c.judged else 'NO':>8}"
          f"{c.observed_rate:>7.3f}{c.mean_forecast:>8.3f}{c.calibration_error:>7.3f}"
          f"{c.calibration_slope:>7.2f}{c.calibration_intercept:>+8.2f}"
          f"{c.brier:>9.4f} [{lo:.4f}, {hi:.4f}]{c.share_acted_on:>9.1%}"
          f"{c.false_negative_rate:>6.2f}{c.mean_cost:>6.2f}")
print("\nLargest gaps between size classes first")
for gap in checks.gaps[:4]:
    print(f"  {gap.metric:<22s} {gap.gap:.3f}  (highest: {gap.highest}, lowest: {gap.lowest})")
for note in checks.notes:
    print("  note:", note)

# the same table is the "By group" section of the HTML report
out = Path(tempfile.mkdtemp()) / "by-size.html"
content = write_report(out, y_true=y, y_prob=p, costs=COSTS, groups=size_class(test.data[:, 0]),
                       n_resamples=30)
print(f"\nreport with a 'By group' section ({len(content.group_checks.groups)} size classes) "
      f"-> {out.name}")
