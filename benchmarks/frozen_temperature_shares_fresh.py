"""A check on fresh frozen draws of ``auto``'s rule that passes over a frozen model's temperature
scaling when the class shares beat it on the folds (``_PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES``
in ``probwrap/_calibration_auto.py``).

The rule was found on the frozen cells of ``benchmarks/hunt31_sweep.py`` (seeds 0-1, 30-200
labelled rows). Here every cell is frozen (``_hunt_loop.draw_cell``: the model fitted on 30 % of
the set, at most 300 rows, and wrapped in ``FrozenEstimator``) and drawn with seeds from
``--first-seed`` (default 2, so none of the draws the rule was chosen on), on the sets of
``tiny_platt_first_fresh.py`` (cats, crabs, ICU, infert, kyphosis, urine, Whickham),
``hunt29_sweep.py``, ``hunt30_sweep.py`` and ``hunt31_sweep.py`` (row sets with a 0/1 label and
no frequency weights), with ``hunt31_sweep.py``'s nine base models, 30, 80, 200 and 400
labelled rows where the set has room.

Per cell: held-out log loss of scikit-learn's ``CalibratedClassifierCV(method="sigmoid",
ensemble=False)`` and of ``CalibrationWrapper()`` with the switch on (NumPy's global state seeded
``1000 + seed`` before the fit, ``_hunt_loop.score_proba``). Where the rule fired (its words in
``method_notes_["temperature"]``: the cell is "touched") the wrapper is fitted again on the same
rows with the module constant set to ``False`` in-process and the same seeding; elsewhere the
switch changes nothing, so the "off" loss is the "on" loss.

Printed, for the touched cells: how many, how many moved (better / worse), the geometric mean of
``auto`` over the sigmoid with the switch off and on, cells above 1.10x and 0.01 nats (warned /
quiet) off and on, cells the rule made worse by more than 2 %, and the touched cells worst
first. Also the geometric mean over every cell, off and on.

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python
benchmarks/frozen_temperature_shares_fresh.py --quick`` (the seven small sets, five models, 30
and 80 rows, seed 2; a few minutes), ``nice python benchmarks/frozen_temperature_shares_fresh.py
--csv F`` (every source, model and size, seeds 2-3), ``--sources tiny,h29,h30,h31``,
``--sets``, ``--models``, ``--sizes``, ``--seeds``, ``--first-seed``, ``--from-csv A,B``.
Results: docs/evidence/small_data_log.md, "Frozen temperature over the class shares on fresh
draws (session 31)".
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

import probwrap._calibration_auto as auto_module
from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402

SIZES = (30, 80, 200, 400)
QUICK_MODELS = "svcdf,knn15,tree,lda,mlp"
RULE_WORDS = "above the class shares'"


def source_tasks(sources: list[str]) -> list:
    """The binary row sets of the named sources, each name prefixed by its source."""
    import hunt29_sweep
    import hunt30_sweep
    import hunt31_sweep
    import tiny_platt_first_fresh

    makers = {"tiny": tiny_platt_first_fresh.tasks, "h29": hunt29_sweep.tasks,
              "h30": hunt30_sweep.tasks, "h31": hunt31_sweep.tasks}
    out, seen = [], set()
    for s in sources:
        for t in makers[s]():
            if t.y is None or t.w is not None or len(np.unique(t.y)) != 2 or t.name in seen:
                continue
            seen.add(t.name)
            t.name = f"{s}:{t.name}"
            out.append(t)
    return out


def one_cell(rec: H.Rec, task, mname: str, model, n_cal: int, seed: int) -> None:
    tr, cal, te = L.draw_cell(task, n_cal, "frozen", seed)
    Xc, yc, Xt, yt, classes = L.split_cell(task.X, task.y, cal, te)
    if len(classes) < 2:
        return
    where = f"{task.name}/{mname}/frozen/n{n_cal}/s{seed}"
    row = {"set": task.name, "model": mname, "n_cal": len(cal), "seed": seed, "n_test": len(yt),
           "minority": int(np.bincount(yc).min())}
    try:
        base, own = L.base_and_own(model, task.X, task.y, tr, Xc, yc, None, L.fit_listing_warnings)
        if not np.array_equal(own.classes_, classes):
            return
        row["own"] = H.log_loss(yt, own.predict_proba(Xt), classes) if hasattr(own, "predict_proba") else np.nan
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    sig = L.sigmoid_reference(base, Xc, yc, None, True)
    row["sig"] = np.nan if sig is None else H.log_loss(yt, sig.predict_proba(Xt), classes)
    saved = auto_module._PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES
    try:
        auto_module._PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES = True
        est = L.score_proba(rec, row, where, "on", lambda: CalibrationWrapper(base), L.fit_listing_warnings,
                            Xc, yc, None, Xt, yt, classes, seed, crash_chars=200)
        if est is None:
            rec.rows.append(row)
            return
        row["map_on"] = est.method_
        row["touched"] = RULE_WORDS in (getattr(est, "method_notes_", {}) or {}).get("temperature", "")
        if row["touched"]:
            auto_module._PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES = False
            off = L.score_proba(rec, row, where, "off", lambda: CalibrationWrapper(base), L.fit_listing_warnings,
                                Xc, yc, None, Xt, yt, classes, seed, crash_chars=200)
            row["map_off"] = None if off is None else off.method_
        else:
            row["off"], row["off_warn"], row["map_off"] = row["on"], row["on_warn"], row["map_on"]
    finally:
        auto_module._PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES = saved
    rec.rows.append(row)


def _bad(g: pd.DataFrame, tag: str) -> tuple[int, int]:
    bad = (g[tag] > 1.10 * g["sig"]) & (g[tag] - g["sig"] > 0.01)
    w = g[f"{tag}_warn"].map(L.warned)
    return int((bad & w).sum()), int((bad & ~w).sum())


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    g = df[df["on"].notna() & df["off"].notna() & df["sig"].notna()].copy()
    g["touched"] = g["touched"].astype(str).eq("True")
    print(f"\n== {len(df)} frozen cells on {df['set'].nunique()} sets; scored against the sigmoid {len(g)}")
    print(f"all cells: auto / sigmoid off {L.geo_mean(g['off'] / g['sig']):.4f}, on {L.geo_mean(g['on'] / g['sig']):.4f};"
          f" above 1.10x warned/quiet off {_bad(g, 'off')}, on {_bad(g, 'on')}")
    t = g[g["touched"]].copy()
    if t.empty:
        print("no touched cells")
        return
    t["r_off"], t["r_on"], t["d"] = t["off"] / t["sig"], t["on"] / t["sig"], t["on"] / t["off"]
    moved = (t["on"] - t["off"]).abs() > 1e-12
    print(f"touched: {len(t)} ({int(moved.sum())} moved: {int((t['d'] < 1).sum())} better,"
          f" {int((t['d'] > 1).sum())} worse); auto / sigmoid off {L.geo_mean(t['r_off']):.4f},"
          f" on {L.geo_mean(t['r_on']):.4f}; worst off {t['r_off'].max():.3f}, on {t['r_on'].max():.3f}")
    print(f"  above 1.10x and 0.01 nats (warned, quiet): off {_bad(t, 'off')}, on {_bad(t, 'on')};"
          f" made worse by more than 2 %: {int((t['d'] > 1.02).sum())}, better by more than 2 %:"
          f" {int((t['d'] < 1 / 1.02).sum())}")
    for by in ("n_cal", "model"):
        col = t[by] if by == "model" else pd.cut(t[by], [0, 50, 120, 300, 10_000], labels=["30", "80", "200", "400"])
        print(f"  by {by}: " + "; ".join(f"{k} {len(h)} {L.geo_mean(h['r_off']):.3f}->{L.geo_mean(h['r_on']):.3f}"
                                          for k, h in t.groupby(col, observed=True)))
    print("  maps with the rule off -> on: " + ", ".join(
        f"{a}->{b} {n}" for (a, b), n in t.groupby(["map_off", "map_on"]).size().items()))
    print("touched cells, worst change first: on/off (auto off, on, sigmoid); maps off -> on")
    for _, x in t.sort_values("d", ascending=False).iterrows():
        print(f"  {x['set']}/{x['model']}/n{x['n_cal']}/s{x['seed']} {x['d']:.3f}"
              f" ({x['off']:.3f}, {x['on']:.3f}, {x['sig']:.3f}); {x['map_off']} -> {x['map_on']}")


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], seeds=2, modes="frozen")
    ap.add_argument("--sources", default="tiny,h29,h30,h31")
    ap.set_defaults(first_seed=2)
    a = ap.parse_args(argv)
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    import hunt31_sweep

    ms = hunt31_sweep.models()
    all_tasks = source_tasks(["tiny"] if a.quick and not a.sets else a.sources.split(","))
    names = a.sets.split(",") if a.sets else [t.name for t in all_tasks]
    mnames = (a.models or (QUICK_MODELS if a.quick else ",".join(ms))).split(",")
    sizes = {int(s) for s in a.sizes.split(",")} if a.sizes else set(SIZES[:2] if a.quick else SIZES)
    seeds = 1 if a.quick else a.seeds
    rec = H.Rec()
    t0 = time.time()
    warnings.simplefilter("ignore", FutureWarning)
    L.run_cells(rec, [t for t in all_tasks if t.name in names], ["frozen"],
                lambda t, mode: L.sizes_for(t, mode, SIZES), mnames,
                range(a.first_seed, a.first_seed + seeds),
                lambda t, m, n_cal, mode, s: one_cell(rec, t, m, ms[m], n_cal, s), t0=t0,
                keep_size=lambda n: n not in SIZES or n in sizes, csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
