"""The tuned cutoff's anchor when the map behind it orders no cutoff, before and after session 24.

``CostPolicyWrapper(strategy="tuned")`` settles its cutoff toward an anchor: the plug-in cutoff
carried through the map ``CalibrationWrapper(method="auto")`` picks on the held-out rows. When
that map is the class shares (the scores ranked nothing out of fold) or decreases, it orders
no cutoff; before session 24 the anchor was then the plug-in cutoff on the model's own
probabilities. Now, when the map puts every probability on one side of the plug-in value, the
anchor is that one decision (flag no row, or every row). This script fits
``CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned")`` on the draws of a sweep
(binary sets; cross, frozen and, for ``h24``, the 5 % positives setup), and refits with the old
rule (``probwrap._cost_policy_rules._CONSTANT_DECISION_ANCHOR = False``) wherever the new anchor
could come from the new branch. Prints the geometric mean of the cells' mean test cost over
scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` with the plug-in cutoff 0.2 (0.001
added to both), the worst cell, the cells above 1.10x, before and after, and every changed cell.

Run: ``nice python benchmarks/constant_anchor_cells.py h24|h23|h22 [SEEDS]`` (default 1 seed).
docs/evidence/small_data_log.md, "The session-24 hunt".
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

import probwrap._cost_policy_rules as R  # noqa: E402
from probwrap import CostPolicyWrapper  # noqa: E402


def _setup(which: str):
    if which == "h24":
        import hunt24_sweep as S

        return S, S.tasks(), S.models(), ("cross", "frozen", "rare")
    import hunt23_sweep as S

    if which == "h23":
        return S, S.tasks(), S.models(), ("cross", "frozen")
    import hunt22_sweep as H2

    return S, H2.tasks(), S.models(), ("cross", "frozen")


def _policy(base, Xc, yc, seed, new: bool):
    R._CONSTANT_DECISION_ANCHOR = new
    try:
        return CostPolicyWrapper(base, costs={"fp": 1.0, "fn": 4.0}, strategy="tuned",
                                 random_state=seed).fit(Xc, yc)
    finally:
        R._CONSTANT_DECISION_ANCHOR = True


def main(argv: list[str]) -> None:
    warnings.simplefilter("ignore")
    which = argv[0] if argv else "h24"
    seeds = int(argv[1]) if len(argv) > 1 else 1
    S, tasks, models, modes = _setup(which)
    rows = []
    for t in tasks:
        if getattr(t, "kind", "rows") == "kofn" or len(np.unique(t.y)) != 2:
            continue
        for mode in modes:
            if mode == "rare" and np.mean(t.y) < 2 * S.RARE:
                continue
            for n in S.sizes_for(t, mode):
                for mname, m in models.items():
                    for seed in range(seeds):
                        tr, cal, te = S.draw(t, n, mode, seed)
                        X, y = t.X, t.y
                        Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                        Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                        classes = np.unique(yc)
                        if len(classes) != 2 or (mode == "frozen" and len(np.unique(y[tr])) != 2):
                            continue
                        if mode == "frozen":
                            base = FrozenEstimator(H._fit(clone(m), X.iloc[tr].reset_index(drop=True), y[tr], None, []))
                        else:
                            base = clone(m)
                        new = _policy(base if mode == "frozen" else clone(m), Xc, yc, seed, True)
                        a = new.cutoff_anchor_
                        maybe = new.cutoff_anchor_map_ is not None and (a >= 1.0 or a < 0.0)
                        old = _policy(base if mode == "frozen" else clone(m), Xc, yc, seed, False) if maybe else new
                        keep = np.isin(yt, classes)
                        Xt, yt = Xt[keep].reset_index(drop=True), yt[keep]
                        pos = yt == classes[1]

                        def tc(flag, pos=pos):
                            return float(np.mean(np.where(flag & ~pos, 1.0, 0.0) + np.where(~flag & pos, 4.0, 0.0)))

                        sig = S._sig(base, Xc, yc, *(() if which == "h24" else (None,)), mode == "frozen")
                        rows.append({
                            "set": t.name, "model": mname, "mode": mode, "n": n, "seed": seed,
                            "positives": int(np.sum(yc == classes[1])),
                            "old": tc(old.predict(Xt) == classes[1]), "new": tc(new.predict(Xt) == classes[1]),
                            "sig": np.nan if sig is None else tc(sig.predict_proba(Xt)[:, 1] > 0.2),
                            "old_map": old.cutoff_anchor_map_, "new_map": new.cutoff_anchor_map_,
                            "old_anchor": old.cutoff_anchor_, "new_anchor": new.cutoff_anchor_,
                        })
        print(t.name, len(rows), flush=True)
    df = pd.DataFrame(rows)
    d = df.dropna(subset=["sig"])

    def stats(col):
        r = (d[col] + 1e-3) / (d["sig"] + 1e-3)
        return (f"{np.exp(np.log(r).mean()):.4f} | {r.max():.2f} | {int((r > 1.10).sum())} | "
                f"ratio of means {d[col].mean() / d['sig'].mean():.4f}")

    print(f"\n{which}, {len(d)} cells with a sigmoid: before {stats('old')}\n{' ' * (len(which) + 20)}after  {stats('new')}")
    ch = df[(df["old"] != df["new"]) | (df["old_map"] != df["new_map"])]
    print(f"{len(ch)} cells changed:")
    pd.set_option("display.width", 200)
    print(ch.to_string(index=False, float_format=lambda v: f"{v:.3f}"))


if __name__ == "__main__":
    main(sys.argv[1:])
