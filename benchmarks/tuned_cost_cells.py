"""The tuned-cost part of hunt23_sweep.one_cell (or of the same draws on hunt22_sweep's binary
sets) alone: ``CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned")`` on the
cross and frozen setups (unweighted), its mean test cost beside scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` with the plug-in cutoff 0.2, per cell. Prints the
geometric mean of the cell ratios (0.001 added to both costs), the worst cell, the cells above
1.10x and the ratio of mean costs; the CSV keeps the map behind the anchor
(``cutoff_anchor_map_``) and the cutoff of every cell.

Run: ``nice python benchmarks/tuned_cost_cells.py h23|h22 [SEEDS] [CSV]`` (defaults 2 seeds, no
CSV; about six minutes for h23 on the shared machine). docs/small_data.md, twenty-third session,
"the tuned cutoff's anchor with five or more rows per class".
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.frozen import FrozenEstimator

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt23_sweep as S  # noqa: E402

from probwrap import CostPolicyWrapper  # noqa: E402


def main(argv: list[str]) -> None:
    warnings.simplefilter("ignore")
    which = argv[0] if argv else "h23"
    seeds = int(argv[1]) if len(argv) > 1 else 2
    csv = argv[2] if len(argv) > 2 else ""
    if which == "h23":
        tasks = S.tasks()
    else:
        import hunt22_sweep as H2

        tasks = H2.tasks()
    rows = []
    for t in tasks:
        if t.kind == "kofn" or len(np.unique(t.y)) != 2:
            continue
        for mode in ("cross", "frozen"):
            for n in S.sizes_for(t, mode):
                for mname, m in S.models().items():
                    for seed in range(seeds):
                        tr, cal, te = S.draw(t, n, mode, seed)
                        X, y = t.X, t.y
                        Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                        Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                        classes = np.unique(yc)
                        if len(classes) != 2:
                            continue
                        try:
                            if mode == "frozen":
                                if len(np.unique(y[tr])) != 2:
                                    continue
                                base = FrozenEstimator(H._fit(
                                    clone(m), X.iloc[tr].reset_index(drop=True), y[tr], None, []))
                            else:
                                base = clone(m)
                            pol = CostPolicyWrapper(
                                base if mode == "frozen" else clone(m), costs={"fp": 1.0, "fn": 4.0},
                                strategy="tuned", random_state=seed,
                            ).fit(Xc, yc)
                        except Exception as e:  # noqa: BLE001
                            print("crash", t.name, mname, mode, n, seed, e)
                            continue
                        keep = np.isin(yt, classes)
                        Xt, yt = Xt[keep].reset_index(drop=True), yt[keep]
                        pos = yt == classes[1]

                        def tc(a, pos=pos):
                            miss = np.where(a & ~pos, 1.0, 0.0) + np.where(~a & pos, 4.0, 0.0)
                            return float(np.mean(miss))

                        sig = S._sig(base, Xc, yc, None, mode == "frozen")
                        rows.append(dict(
                            set=t.name, model=mname, mode=mode, n=n, seed=seed,
                            minority=int(np.bincount(np.searchsorted(classes, yc)).min()),
                            tuned=tc(pol.predict(Xt) == classes[1]),
                            sig=np.nan if sig is None else tc(sig.predict_proba(Xt)[:, 1] > 0.2),
                            map=pol.cutoff_anchor_map_, cutoff=pol.cutoff_,
                        ))
        if csv:  # kept set by set
            pd.DataFrame(rows).to_csv(csv, index=False)
    d = pd.DataFrame(rows).dropna(subset=["sig"])
    r = (d.tuned + 1e-3) / (d.sig + 1e-3)
    print(which, "cells", len(d), "geometric mean", round(float(np.exp(np.log(r).mean())), 4),
          "worst", round(float(r.max()), 3), "above 1.10x", int((r > 1.10).sum()),
          "ratio of mean costs", round(float(d.tuned.mean() / d.sig.mean()), 4))
    print(d.assign(r=r).sort_values("r").tail(8).to_string())


if __name__ == "__main__":
    main(sys.argv[1:])
