"""Session 27: the tuned cutoff's anchor rules replayed on recorded held-out predictions.

``CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned")`` is fitted once per cell
of the session-23 to session-26 hunts (their sets, draws, models and setups, imported from
``hunt23_sweep.py`` / ``hunt24_sweep.py``; unweighted); the held-out probabilities it searched,
their labels and the model's probabilities on the test rows are kept, and every anchor rule is
then replayed on them exactly as the library computes it (``recalibrated_plugin_cutoff`` and
``settle_cutoff`` with the rule's switches set), beside scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` with the plug-in cutoff 0.2 on the same rows:

* ``s25``: the rules of sessions 22-25 (``_PLATT_WHEN_OWN_KEPT = False``,
  ``_PLATT_WHEN_CROSSFIT = False``);
* ``s26``: with session 26's Platt anchor where it puts every held-out row on one side;
* ``s27``: with session 27's Platt anchor for a cross-fitted model whose fold probabilities
  ``auto`` kept (``_PLATT_WHEN_CROSSFIT``; docs/decisions.md, "Tuned cost: changes for few positives").

Prints per sweep the geometric mean of test cost over the sigmoid's (0.001 added to both), the
worst cell, the cells above 1.10x and the mean cost, and the cells whose cost changed between
s26 and s27; with ``--seeds`` above 1 also the paired difference from the sigmoid.

Run (from the repository root, ``pip install -e ".[sweep]"``, nothing downloaded):
``PYTHONPATH=$PWD nice python benchmarks/tuned_cost_replay.py h24`` (every set of the
session-24 hunt, seed 0), ``h23 --seeds 2`` (the cells of ``tuned_cost_cells.py h23 2``),
``h25 --sets lsat6,bwght2,twoclassexample,myeloid,insurancevote,mathplacement``,
``h26 --sets psid1976,azcabgptca,channinghouse,vlt,hepatocellular,ceosal1,diabetic``, and the
residual cells over 40 draws: ``h25 --sets insurancevote --models gb --modes rare --sizes 100
--seeds 40``, ``h26 --sets ceosal1 --models rf --modes rare --sizes 100 --seeds 40``, ``h26
--sets diabetic --models lr --modes cross --sizes 40 --seeds 40``, ``h23 --sets teachingratings
--models lr --modes frozen --seeds 40``. ``--save FILE`` keeps the recorded cells (pickle),
``--load FILE`` replays saved cells without refitting.
"""

from __future__ import annotations

import argparse
import importlib
import pickle
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.frozen import FrozenEstimator

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402

import probwrap._cost_policy_rules as R  # noqa: E402
from probwrap import CostPolicyWrapper  # noqa: E402
from probwrap.decision import settle_cutoff  # noqa: E402
from probwrap.decision._cutoff import _search_cutoff  # noqa: E402

M = np.array([[0.0, 1.0], [4.0, 0.0]])
RULES = {
    "s25": {"_PLATT_WHEN_OWN_KEPT": False, "_PLATT_WHEN_CROSSFIT": False},
    "s26": {"_PLATT_WHEN_OWN_KEPT": True, "_PLATT_WHEN_CROSSFIT": False},
    "s27": {"_PLATT_WHEN_OWN_KEPT": True, "_PLATT_WHEN_CROSSFIT": True},
}


def _setup(which: str):
    if which == "h23":
        S = importlib.import_module("hunt23_sweep")
        return S.tasks(), S.draw, S.sizes_for, S.models(), (lambda b, X, y, fr: S._sig(b, X, y, None, fr))
    mod = B if which == "h24" else importlib.import_module({"h25": "hunt25_sweep", "h26": "hunt26_sweep"}[which])
    return mod.tasks(), B.draw, B.sizes_for, B.models(), B._sig


def _cost(flag, pos) -> float:
    return float(np.mean(np.where(flag & ~pos, 1.0, 0.0) + np.where(~flag & pos, 4.0, 0.0)))


def record(a) -> list[dict]:
    tasks, draw, sizes_for, models, sig_fn = _setup(a.which)
    names = a.sets.split(",") if a.sets else None
    out: list[dict] = []
    t0 = time.time()
    for t in tasks:
        if (names and t.name not in names) or getattr(t, "kind", "rows") != "rows" or len(np.unique(t.y)) != 2:
            continue
        for mode in a.modes.split(","):
            if mode == "rare" and (a.which == "h23" or np.mean(t.y) < 2 * B.RARE):
                continue
            for n in sizes_for(t, mode):
                if a.sizes and n not in {int(s) for s in a.sizes.split(",")}:
                    continue
                for mname in [m for m in a.models.split(",") if m in models]:
                    for seed in range(a.seeds):
                        tr, cal, te = draw(t, n, mode, seed)
                        X, y = t.X, t.y
                        Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                        Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                        classes = np.unique(yc)
                        if len(classes) != 2 or (mode == "frozen" and len(np.unique(y[tr])) != 2):
                            continue
                        m = models[mname]
                        try:
                            base = (FrozenEstimator(H._fit(clone(m), X.iloc[tr].reset_index(drop=True), y[tr], None, []))
                                    if mode == "frozen" else clone(m))
                            pol = CostPolicyWrapper(base if mode == "frozen" else clone(m), costs={"fp": 1.0, "fn": 4.0},
                                                    strategy="tuned", random_state=seed).fit(Xc, yc)
                        except Exception as e:  # noqa: BLE001
                            print("crash", t.name, mname, mode, n, seed, e)
                            continue
                        sig = sig_fn(base, Xc, yc, mode == "frozen")
                        inputs = pol._interval_inputs
                        if sig is None or inputs is None or isinstance(inputs[0], str):
                            continue
                        keep = np.isin(yt, classes)
                        Xt, yt = Xt[keep].reset_index(drop=True), yt[keep]
                        out.append(dict(set=t.name, model=mname, mode=mode, n=n, seed=seed, p=inputs[0],
                                        y=inputs[1], w=inputs[3], crossfit=mode != "frozen",
                                        pt=pol.predict_proba(Xt)[:, 1], sigp=sig.predict_proba(Xt)[:, 1],
                                        pos=yt == classes[1]))
        print(f"{t.name}: {len(out)} cells, {time.time() - t0:.0f} s", flush=True)
    return out


def replay(rec: dict, flags: dict) -> float:
    old = {k: getattr(R, k) for k in flags}
    try:
        for k, v in flags.items():
            setattr(R, k, v)
        anchor, _ = R.recalibrated_plugin_cutoff(rec["p"], rec["y"], rec["w"], 0.2, rec["seed"],
                                                 crossfit=rec["crossfit"])
    finally:
        for k, v in old.items():
            setattr(R, k, v)
    res = _search_cutoff(rec["p"], rec["y"], M, rec["w"], None, (0.0, 1.0), max_points=None)
    return settle_cutoff(rec["p"], rec["y"], M, res, sample_weight=rec["w"], anchor=anchor).cutoff


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("which", choices=("h23", "h24", "h25", "h26"))
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,rf,nb,gb")
    ap.add_argument("--modes", default="cross,frozen,rare")
    ap.add_argument("--sizes", default="")
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--save", default="")
    ap.add_argument("--load", default="")
    a = ap.parse_args(argv)
    warnings.simplefilter("ignore")
    if a.load:
        with open(a.load, "rb") as f:
            recs = pickle.load(f)  # noqa: S301  (a file this script wrote)
    else:
        recs = record(a)
        if a.save:
            with open(a.save, "wb") as f:
                pickle.dump(recs, f)
    sig = np.array([_cost(r["sigp"] > 0.2, r["pos"]) for r in recs])
    costs = {}
    for name, flags in RULES.items():
        t = np.array([_cost(r["pt"] > replay(r, flags), r["pos"]) for r in recs])
        ratio = (t + 1e-3) / (sig + 1e-3)
        d = t - sig
        se = d.std(ddof=1) / np.sqrt(len(d)) if len(d) > 1 else 0.0
        print(f"{name}: {len(t)} cells | geometric mean {np.exp(np.log(ratio).mean()):.4f} | worst {ratio.max():.2f} | "
              f"above 1.10x {(ratio > 1.10).sum()} | mean {t.mean():.4f} (sigmoid {sig.mean():.4f}, "
              f"{d.mean():+.4f} +- {se:.4f})")
        costs[name] = t
    a26, a27 = costs["s26"], costs["s27"]
    ch = np.flatnonzero(np.abs(a26 - a27) > 1e-12)
    print(f"s26 -> s27: {len(ch)} cells changed, {(a27[ch] < a26[ch]).sum()} lower, {(a27[ch] > a26[ch]).sum()} higher")
    for i in ch:
        r = recs[i]
        print(f"  {r['set']} {r['model']} {r['mode']} {r['n']} seed {r['seed']}: {a26[i]:.3f} -> {a27[i]:.3f} "
              f"(sigmoid {sig[i]:.3f})")


if __name__ == "__main__":
    main(sys.argv[1:])
