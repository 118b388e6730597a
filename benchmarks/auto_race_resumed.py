"""``CalibrationWrapper(method="auto")``: candidates left out after the first fold against a map
that is not eligible in the end, scored on every fold after all (``_RESUME_RACED``).

The cells are those of ``auto_small_separated.py`` (same draws, models, sizes and seeds). Per
cell ``auto`` is fitted once with the rule on, counting the scoring passes; only where a second
pass ran (a candidate was resumed) can the choice differ, and there ``auto`` is fitted again
with the rule off (``_calibration_auto._RESUME_RACED = False``) and scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` beside it. Elsewhere the two are the same fit.

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python
benchmarks/auto_race_resumed.py --family multi --part fresh --seeds 6,7,8,9`` (``--modes``,
``--models``, ``--sets``, ``--sizes``, ``--quick``: iris and digits 0/1/2/7, frozen, seed 7).
Results: docs/evidence/small_data_log.md, "Two large multiclass misses on wine and digits".
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import auto_small_separated as A  # noqa: E402


def one_cell(rows: list, family: str, task, mname: str, model, n_cal: int, mode: str,
             seed: int) -> None:
    from sklearn.base import clone
    from sklearn.frozen import FrozenEstimator

    import probwrap._calibration_auto as auto_module
    from probwrap import CalibrationWrapper

    binary = family == "binary"
    tr, cal, te = L.draw_cell(task, n_cal, mode, seed, rare=None)
    X, y = task.X, task.y
    Xc, yc = (X.iloc[cal].reset_index(drop=True), y[cal]) if binary else (X[cal], y[cal])
    classes = np.unique(yc)
    te = te[np.isin(y[te], classes)]
    Xt, yt = (X.iloc[te].reset_index(drop=True), y[te]) if binary else (X[te], y[te])
    if len(classes) < 2 or len(te) < 20:
        return
    frozen = mode == "frozen"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            if frozen:
                Xtr = X.iloc[tr].reset_index(drop=True) if binary else X[tr]
                fitted = clone(model).fit(Xtr, y[tr])
                if set(fitted.classes_) != set(classes):
                    return
                base = FrozenEstimator(fitted)
            else:
                base = clone(model)
        except Exception:  # noqa: BLE001
            return
    passes: list[int] = []
    orig = auto_module._AutoChoice._fold_losses_raced

    def counting(self, names, *args):
        passes.append(len(names))
        return orig(self, names, *args)

    def fit_auto() -> tuple[str, float]:
        if binary:
            np.random.seed(1000 + seed)  # noqa: NPY002  (as auto_small_separated.py)
            est = CalibrationWrapper(base if frozen else clone(model), method="auto")
        else:
            est = CalibrationWrapper(base if frozen else clone(model), method="auto",
                                     random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est.fit(Xc, yc)
        return est.method_, A.log_loss(yt, est.predict_proba(Xt), classes)

    row = dict(family=family, set=task.name, model=mname, mode=mode, n_cal=len(cal), seed=seed)
    auto_module._AutoChoice._fold_losses_raced = counting
    try:
        try:
            row["method_on"], row["t_on"] = fit_auto()
        except Exception as e:  # noqa: BLE001
            row["crash"] = f"{type(e).__name__}: {e}"[:120]
            rows.append(row)
            return
    finally:
        auto_module._AutoChoice._fold_losses_raced = orig
    row["resumed"] = len(passes) > 1
    if row["resumed"]:
        auto_module._RESUME_RACED = False
        try:
            row["method_off"], row["t_off"] = fit_auto()
        finally:
            auto_module._RESUME_RACED = True
        sig = L.sigmoid_reference(base, Xc, yc, None, frozen)
        row["sig"] = np.nan if sig is None else A.log_loss(yt, sig.predict_proba(Xt), classes)
    else:
        row["method_off"], row["t_off"] = row["method_on"], row["t_on"]
    rows.append(row)


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--family", default="multi")
    ap.add_argument("--part", default="fresh")
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="")
    ap.add_argument("--modes", default="frozen,cross")
    ap.add_argument("--cross-models", default="")
    ap.add_argument("--sizes", default="")
    ap.add_argument("--seeds", default="6,7,8,9")
    a = ap.parse_args(argv)
    import hunt31_sweep
    import multiclass_hunt31 as M

    if a.quick:
        a.sets, a.modes, a.seeds = "iris,digits0127", "frozen", "7"
    rows: list = []
    t0 = time.time()
    warnings.simplefilter("ignore", FutureWarning)
    binary = a.family == "binary"
    ts = A.binary_tasks(a.part) if binary else A.multi_tasks(a.part)
    if a.sets:
        ts = [t for t in ts if t.name in a.sets.split(",") or t.name.split(":")[-1] in a.sets.split(",")]
    ms = hunt31_sweep.models() if binary else M.models()
    models = a.models.split(",") if a.models else list(ms)
    wanted = tuple(int(s) for s in a.sizes.split(",")) if a.sizes else ((30, 80) if binary else (40, 100, 300))
    seeds = [int(s) for s in a.seeds.split(",")]
    for t in ts:
        for mode in a.modes.split(","):
            sizes = L.sizes_for(t, mode, wanted) if binary else M.sizes(t, mode, wanted)
            for n_cal in sizes:
                for mname in models:
                    if mode == "cross" and a.cross_models and mname not in a.cross_models.split(","):
                        continue
                    for s in seeds:
                        one_cell(rows, a.family, t, mname, ms[mname], n_cal, mode, s)
        print(f"{t.name}: {len(rows)} cells, {time.time() - t0:.0f} s", flush=True)
    summarise(rows)


def summarise(rows: list) -> None:
    ok = [r for r in rows if "crash" not in r]
    res = [r for r in ok if r["resumed"]]
    print(f"{len(ok)} cells ({len(rows) - len(ok)} crashed); a candidate resumed in {len(res)}; "
          f"map changed in {sum(r['method_on'] != r['method_off'] for r in res)}")
    for r in res:
        sig = r.get("sig", np.nan)
        print(f"  {r['set']}/{r['model']}/{r['mode']}/n{r['n_cal']}/s{r['seed']}: "
              f"{r['method_off']} -> {r['method_on']}, test log loss {r['t_off']:.4f} -> "
              f"{r['t_on']:.4f}, sigmoid {sig:.4f} (over the sigmoid {r['t_off'] / sig:.3f} -> "
              f"{r['t_on'] / sig:.3f})")
    if res:
        ratio = np.array([r["t_on"] / r["t_off"] for r in res])
        print(f"  where resumed: new over old, geometric mean {np.exp(np.mean(np.log(ratio))):.4f}, "
              f"worst {ratio.max():.3f}, better by > 2 % {np.sum(ratio < 0.98)}, "
              f"worse by > 2 % {np.sum(ratio > 1.02)}")


if __name__ == "__main__":
    main(sys.argv[1:])
