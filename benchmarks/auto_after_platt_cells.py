"""Session 25: ``CalibrationWrapper(method="auto")`` choosing temperature scaling on a few dozen
cross-fitted rows, redrawn over many seeds, with the rule that passes over the temperature after
Platt scaling (``_PASS_OVER_TEMPERATURE_AFTER_PLATT``) off and on.

For each cell (a set of ``hunt24_sweep.py``, a base model, its ``cross`` or ``rare`` draw and a
number of rows) and seed, the draw is ``hunt24_sweep.draw`` with the sweep's global seed. ``auto``
is fitted once and its held-out scores recorded; its choice is then replayed under each setting
of the rule (for cross-fitted models ``auto`` scores its maps on the cross-fitting folds, so the
replay is exact; the script checks that the replay with the rule as fitted reproduces the fit),
and each choice costs the test log loss of that map fitted on the same held-out rows. Printed:
test log loss over scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` (mean, geometric
mean, worst, draws above 1.10x) per cell, with the temperature, Platt and beta maps by name, and
every changed choice. docs/evidence/small_data_log.md, "auto on 40 cross-fitted rows (session 25)".

Run: ``nice python benchmarks/auto_after_platt_cells.py --seeds 24`` (the seven named cells; about
20 minutes on the shared machine), ``--all-binary --sizes 40,100 --seeds 1`` (every binary task
of hunt24, cross-fitted and rare; about 25 minutes).
"""

from __future__ import annotations

import argparse
import sys
import warnings
from collections import defaultdict
from pathlib import Path

import numpy as np
from sklearn.base import clone

import probwrap._calibration_auto as A
from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as S  # noqa: E402

NAMED = [("monica", "lr", "cross", 40), ("ces11", "rf", "cross", 40), ("twoclassdat", "rf", "cross", 40),
         ("twoclassdat", "lr", "cross", 40), ("salaries", "rf", "cross", 40), ("gbsg", "lr", "cross", 40),
         ("voteincome", "lr", "rare", 100)]
BY_NAME = ("temperature", "platt", "beta")


class _Recording(CalibrationWrapper):
    """``auto`` that keeps the arguments of its choice, to replay it."""

    def _choose(self, ho, scores, w):
        self.choice_args_ = (ho, scores.copy(), w.copy())
        return super()._choose(ho, scores, w)


def _gm(a) -> float:
    return float(np.exp(np.mean(np.log(np.asarray(a, float)))))


def one(task, mname, model, mode, n, seed) -> dict | None:
    _, cal, te = S.draw(task, n, mode, seed)
    Xc, yc = task.X.iloc[cal].reset_index(drop=True), task.y[cal]
    Xt, yt = task.X.iloc[te].reset_index(drop=True), task.y[te]
    classes = np.unique(yc)
    sig = S._sig(clone(model), Xc, yc, False)
    if sig is None:
        return None
    est = _Recording(clone(model))
    np.random.seed(1000 + seed)  # noqa: NPY002  (as the sweep)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            est.fit(Xc, yc)
        except ValueError:
            return None
    if not hasattr(est, "choice_args_") or est.predicted_with_ == "frozen":
        return None
    ho, scores, w = est.choice_args_
    rec = {"cell": f"{task.name}/{mname}/{mode}/n{n}", "seed": seed, "method": est.method_,
           "sig": H.log_loss(yt, sig.predict_proba(Xt), classes),
           "test": {est.method_: H.log_loss(yt, est.predict_proba(Xt), classes)}}
    fitted = (est.method_, est.calibrator_)
    est._platt_range = est.platt_fit_range_  # as during the fit (Platt fitted within the refit's range)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for nm in BY_NAME:
            if nm not in rec["test"]:
                est.method_ = nm
                est.calibrator_ = est._fit_map(A.CALIBRATION_METHODS[nm](), scores, ho.y_index, w)
                rec["test"][nm] = H.log_loss(yt, est.predict_proba(Xt), classes)
        est.method_, est.calibrator_ = fitted
        keep = A._PASS_OVER_TEMPERATURE_AFTER_PLATT
        try:
            for on in (False, True):
                A._PASS_OVER_TEMPERATURE_AFTER_PLATT = on
                rec["on" if on else "off"] = est._choose(ho, scores, w)[0]
        finally:
            A._PASS_OVER_TEMPERATURE_AFTER_PLATT = keep
    if rec["on" if keep else "off"] != est.method_:
        print(f"  replay differs from the fit: {rec['cell']} s{seed}", flush=True)
    for key in ("off", "on"):
        if rec[key] not in rec["test"]:  # another map: fitted as auto fits it
            rec["test"][rec[key]] = np.nan
    return rec


def summarise(recs: list[dict]) -> None:
    cells = defaultdict(list)
    for r in recs:
        cells[r["cell"]].append(r)
    print("\ntest log loss over the sigmoid: mean | geometric mean | worst | draws above 1.10x")
    for cell, rs in cells.items():
        line = f"{cell:28s} {len(rs):3d}"
        for key in ("off", "on"):
            a = np.array([r["test"][r[key]] / r["sig"] for r in rs])
            line += f" | {key} {a.mean():.3f} {_gm(a):.3f} {a.max():.3f} {int(np.sum(a > 1.10))}"
        line += " | by name " + " / ".join(
            f"{np.nanmean([r['test'][nm] / r['sig'] for r in rs]):.3f}" for nm in BY_NAME)
        print(line)
    for key in ("off", "on"):
        a = np.array([r["test"][r[key]] / r["sig"] for r in recs])
        print(f"all {len(recs)} draws, rule {key}: {_gm(a):.4f} | {a.max():.3f} | {int(np.sum(a > 1.10))}")
    changed = [r for r in recs if r["off"] != r["on"]]
    print(f"changed: {len(changed)}")
    for r in changed:
        print(f"  {r['cell']} s{r['seed']} {r['off']} -> {r['on']}: "
              f"{r['test'][r['off']] / r['sig']:.3f} -> {r['test'][r['on']] / r['sig']:.3f}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seeds", type=int, default=24)
    ap.add_argument("--all-binary", action="store_true")
    ap.add_argument("--sizes", default="40,100")
    a = ap.parse_args(argv)
    tasks = {t.name: t for t in S.tasks()}
    models = S.models()
    cells = NAMED
    if a.all_binary:
        sizes = [int(s) for s in a.sizes.split(",")]
        cells = [(t.name, m, mode, n) for t in tasks.values() if len(np.unique(t.y)) == 2
                 for mode in ("cross", "rare") if mode == "cross" or np.mean(t.y) >= 2 * S.RARE
                 for n in S.sizes_for(t, mode) if n in sizes for m in ("lr", "rf", "nb", "gb")]
    recs = []
    for name, m, mode, n in cells:
        for seed in range(a.seeds):
            rec = one(tasks[name], m, models[m], mode, n, seed)
            if rec is not None:
                recs.append(rec)
        print(f"{name}/{m}/{mode}/n{n}: {len(recs)} draws so far", flush=True)
    summarise(recs)


if __name__ == "__main__":
    main(sys.argv[1:])
