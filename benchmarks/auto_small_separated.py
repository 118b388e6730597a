"""``CalibrationWrapper(method="auto")`` on very few binary rows and on separated multiclass
draws: what the fold scores said, and what the maps do on the test rows.

Two families of quiet harm left open by the hunts (docs/evidence/small_data_log.md):

* ``binary``: 30 and 80 labelled rows, where ``auto`` kept temperature scaling and ended above
  1.10x scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` with no warning. Choice
  cells: ``hunt31_sweep.py``'s fourteen sets and nine models, seeds 0-1 (``--part choice``,
  NumPy's global state seeded ``1000 + seed`` and ``random_state=None``, as that sweep does).
  Fresh cells: the binary row sets of ``tiny_platt_first_fresh.py``, ``hunt29_sweep.py`` and
  ``hunt30_sweep.py`` with the same nine models, seeds 6-7 (``--part fresh``).
* ``multi``: small multiclass draws that the model nearly separates, where a sharpening
  temperature or vector scaling was 1.12-1.35x the sigmoid. Choice cells:
  ``multiclass_hunt31.py``'s sets and models, seeds 0-3 (``random_state=seed``, as it does).
  Fresh cells: other bundled sets (palmerpenguins' penguins (species), dslabs' olive (region),
  MASS's crabs (species x sex) and fgl (glass type), scikit-learn's digits 0/1/2/7) and
  ``multiclass_hunt31.py``'s iris and wine at seeds 6-7.

Per cell (frozen: the model fitted on 30 % of the set, at most 300 rows; cross: the wrapper
cross-fits it): test log loss of ``auto``, of the sigmoid, of the maps named (binary:
temperature, Platt, beta; multiclass: temperature, vector scaling, Platt one-vs-rest), the map
``auto`` chose, and what its folds said: each candidate's cross-validated log loss, the
standard error of its paired per-row difference from the best map (the one ``auto`` uses) and
that of the per-fold mean differences (folds as the units), read by wrapping
``_AutoChoice._fold_losses`` (nothing in probwrap changes). The rules tried are read off these
columns in ``summarise`` (``RULES``); ``richer_needs_folds_frozen`` is the one probwrap took
(``_calibration_auto._PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS``). It is checked in the library by
running the same cells with ``--rule-off`` and without, then ``--compare OFF.csv,ON.csv``.

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python
benchmarks/auto_small_separated.py --quick`` (a few sets and models of both families, a few
minutes), ``--family binary --part choice --csv F``, ``--family multi --part fresh --csv F``,
``--seeds``, ``--modes``, ``--cross-models``, ``--rule-off``, ``--from-csv A,B``,
``--compare OFF,ON``. Results: docs/evidence/small_data_log.md, "auto on very few rows and on
separated multiclass draws".
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_data as D  # noqa: E402
import _hunt_loop as L  # noqa: E402

BINARY_NAMED = ("temperature", "platt", "identity")
MULTI_NAMED = ("temperature", "vector_scaling", "platt", "identity")
SIMPLE = {"temperature": 0, "platt": 1, "vector_scaling": 1, "beta": 2}
_CAPTURE: dict = {}


def _install_capture() -> None:
    """Wrap ``_AutoChoice._fold_losses`` so the last call's per-row losses and folds are kept."""
    from probwrap._calibration_auto import _AutoChoice

    if getattr(_AutoChoice._fold_losses, "_captures", False):
        return
    orig = _AutoChoice._fold_losses

    def wrapped(self, names, scores, ovr, y, w, fold_masks, notes):
        out = orig(self, names, scores, ovr, y, w, fold_masks, notes)
        # the model's own probabilities (T = 1) on the same folds, beside the candidates
        ident = orig(self, ["identity"], scores, ovr, y, w, fold_masks, {})
        _CAPTURE.clear()
        _CAPTURE.update(out=out, folds=[m for _, m in fold_masks], w=np.asarray(w, float),
                        identity=ident.get("identity", (None, None))[0])
        return out

    wrapped._captures = True
    _AutoChoice._fold_losses = wrapped


def fold_readings(row: dict) -> None:
    """Each candidate's cross-validated loss and standard errors against the best eligible one."""
    out, folds, w = _CAPTURE.get("out"), _CAPTURE.get("folds"), _CAPTURE.get("w")
    if not out:
        return
    wn = w / w.sum()
    n_eff = float(w.sum() ** 2 / (w @ w))
    eligible = {nm: v[0] for nm, v in out.items() if v[1] is None}
    if not eligible:
        return
    means = {nm: float(wn @ v) for nm, v in eligible.items()}
    best = min(means, key=means.get)
    row["cv_best_map"] = best
    extra = dict(eligible)
    if _CAPTURE.get("identity") is not None:
        extra["identity"] = _CAPTURE["identity"]
        means["identity"] = float(wn @ _CAPTURE["identity"])
    for nm, loss in extra.items():
        d = loss - eligible[best]
        dbar = float(wn @ d)
        se_row = float(np.sqrt(float(wn @ (d - dbar) ** 2) * n_eff / max(n_eff - 1.0, 1.0) / n_eff))
        fd = np.array([float(w[m] @ d[m] / w[m].sum()) for m in folds])
        se_fold = float(fd.std(ddof=1) / np.sqrt(len(fd))) if len(fd) > 1 else np.nan
        row[f"cv_{nm}"], row[f"se_{nm}"], row[f"fse_{nm}"] = means[nm], se_row, se_fold
        row[f"fwin_{nm}"] = int(np.sum(fd < 0))  # folds where this map beat the best overall


def binary_tasks(part: str) -> list:
    import frozen_temperature_shares_fresh as F
    import hunt31_sweep

    if part == "choice":
        return hunt31_sweep.tasks()
    return F.source_tasks(["tiny", "h29", "h30"])


class MTask:
    def __init__(self, name, X, y):
        self.name, self.X, self.y = name, np.asarray(X, float), np.asarray(y).astype(str)

    @property
    def units(self) -> int:
        return len(self.y)


def multi_tasks(part: str) -> list:
    import multiclass_hunt31 as M

    if part == "choice":
        return [MTask(t.name, t.X, t.y) for t in M.tasks()]
    from sklearn.datasets import load_digits

    out = [MTask(t.name, t.X, t.y) for t in M.tasks(["iris", "wine"])]
    d = D.rdata("palmerpenguins", "penguins")
    X, y = D.complete_rows(D.dummy_columns(d, ["species", "island", "year"]), d["species"])
    out.append(MTask("penguins", X.to_numpy(float), y))
    d = D.rdata("dslabs", "olive")
    X, y = D.complete_rows(D.dummy_columns(d, ["region", "area"]), d["region"])
    out.append(MTask("olive_region", X.to_numpy(float), y))
    d = D.rdata("MASS", "crabs")
    X, y = D.complete_rows(D.dummy_columns(d, ["sp", "sex", "index"]), d["sp"] + d["sex"])
    out.append(MTask("crabs4", X.to_numpy(float), y))
    d = D.rdata("MASS", "fgl")
    X, y = D.complete_rows(D.dummy_columns(d, ["type"]), d["type"])
    out.append(MTask("fgl", X.to_numpy(float), y))
    b = load_digits()
    keep = np.isin(b.target, [0, 1, 2, 7])
    out.append(MTask("digits0127", b.data[keep], b.target[keep]))
    return out


def log_loss(y, P, classes) -> float:
    P = np.clip(np.asarray(P, float), 1e-15, 1.0)
    col = np.searchsorted(classes, y)
    return float(np.mean(-np.log(P[np.arange(len(y)), col])))


def one_cell(rec, family: str, task, mname: str, model, n_cal: int, mode: str, seed: int) -> None:
    from sklearn.base import clone
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper

    binary = family == "binary"
    tr, cal, te = L.draw_cell(task, n_cal, mode, seed, rare=None)
    X, y = (task.X, task.y)
    Xc, yc = (X.iloc[cal].reset_index(drop=True), y[cal]) if binary else (X[cal], y[cal])
    classes = np.unique(yc)
    te = te[np.isin(y[te], classes)]
    Xt, yt = (X.iloc[te].reset_index(drop=True), y[te]) if binary else (X[te], y[te])
    if len(classes) < 2 or len(te) < 20:
        return
    counts = np.array([np.sum(yc == c) for c in classes])
    row = dict(family=family, set=task.name, model=mname, mode=mode, n_cal=len(cal), seed=seed,
               k=len(classes), min_rows=int(counts.min()), n_test=len(te))
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
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{task.name}/{mname}", f"model fails: {e}"[:150])
            return
    sig = L.sigmoid_reference(base, Xc, yc, None, frozen)
    row["sig"] = np.nan if sig is None else log_loss(yt, sig.predict_proba(Xt), classes)
    named = BINARY_NAMED if binary else MULTI_NAMED
    for meth in ("auto", *named):
        if binary:
            np.random.seed(1000 + seed)  # noqa: NPY002  (as hunt31_sweep.py: random_state=None)
            make = CalibrationWrapper(base if frozen else clone(model), method=meth)
        else:
            make = CalibrationWrapper(base if frozen else clone(model), method=meth, random_state=seed)
        caught: list = []
        _CAPTURE.clear()
        try:
            est = L.fit_listing_warnings(make, Xc, yc, None, caught)
            P = est.predict_proba(Xt)
        except Exception as e:  # noqa: BLE001
            row[f"{meth}_crash"] = f"{type(e).__name__}: {e}"[:150]
            continue
        row[f"t_{meth}"] = log_loss(yt, P, classes)
        row[f"{meth}_warn"] = ",".join(caught)
        if meth == "auto":
            row["method_"] = est.method_
            fold_readings(row)
        if meth == "temperature":
            row["T"] = float(getattr(est.calibrator_, "temperature_", np.nan))
        if meth == "vector_scaling":
            row["vs_mean_scale"] = float(np.mean(getattr(est.calibrator_, "scales_", np.nan)))
    rec.rows.append(row)


# --- rules read off the columns -------------------------------------------------------------

def _pick(x: pd.Series, kind: str) -> str:
    """The map a rule keeps in cell ``x`` (a name whose test loss ``t_<name>`` was measured), or
    ``"auto"`` where the rule keeps ``auto``'s own choice."""
    m = x.get("method_")
    if kind == "shipped":
        return "auto"
    if m not in SIMPLE:
        return "auto"
    cands = [nm for nm in SIMPLE if pd.notna(x.get(f"cv_{nm}"))]
    if not cands or m not in cands:
        return "auto"
    best = x["cv_best_map"]
    if kind in ("fold_1se", "fold_1se_sharp") and best not in cands:
        return "auto"
    if kind in ("fold_1se", "fold_1se_sharp"):
        # one-standard-error rule with the folds as units: simplest map whose per-fold mean
        # difference from the best is within one standard error of those fold differences
        if kind == "fold_1se_sharp" and not _sharpens(x, m):
            return "auto"
        within = [nm for nm in cands
                  if x[f"cv_{nm}"] - x[f"cv_{best}"] <= (x[f"fse_{nm}"] if nm != best else 0.0)]
        pick = min(within, key=lambda nm: (SIMPLE[nm], x[f"cv_{nm}"]))
        return "auto" if pick == m else pick
    if kind == "richer_needs_folds_frozen":
        return _pick(x, "richer_needs_folds") if x["mode"] == "frozen" else "auto"
    if kind == "richer_needs_folds":
        # auto's map is kept only where it wins the folds by more than their spread against
        # the map scikit-learn's sigmoid uses (Platt; one-vs-rest for more classes)
        if m == "platt" or "platt" not in cands or pd.isna(x.get("t_platt")):
            return "auto"
        d = x[f"cv_{m}"] - x["cv_platt"]
        se = x[f"fse_{m}"] if best != m else x["fse_platt"]
        return "auto" if -d > se else "platt"
    if kind in ("platt_anchor_sharp", "platt_anchor_sharp_fold",
         "richer_needs_folds_frozen"):
        # a sharpening map (temperature below 1, vector scaling's mean scale above 1) is kept
        # only where it beats Platt's map (scikit-learn's sigmoid's map) on the folds by more
        # than a standard error of their difference (per row, or with the folds as units)
        if (not _sharpens(x, m) or "platt" not in cands or pd.isna(x.get("t_platt"))):
            return "auto"
        d = x["cv_platt"] - x[f"cv_{m}"]
        col = "se_platt" if kind == "platt_anchor_sharp" else "fse_platt"
        se = x[col] if best == m else x[f"{col[:-5]}{m}"] if best == "platt" else x[col]
        return "auto" if d > se else "platt"
    if kind == "fold_majority":
        # auto's map is kept where it beat Platt's in a majority of the folds; else Platt
        if m == "platt" or "platt" not in cands or pd.isna(x.get("t_platt")):
            return "auto"
        return "auto" if x.get("fwin_platt", 0) <= 2 else "platt"
    if kind in ("sharp_vs_identity", "sharp_vs_identity_fold"):
        # one-standard-error rule with the model's own probabilities (T = 1, no parameter) as
        # the simpler map: a sharpening map is kept only where it beats them by more than a
        # standard error (per row, or with the folds as units)
        if not _sharpens(x, m) or pd.isna(x.get("cv_identity")) or pd.isna(x.get("t_identity")):
            return "auto"
        se = x["se_identity"] if kind == "sharp_vs_identity" else x["fse_identity"]
        return "identity" if x["cv_identity"] - x[f"cv_{m}"] <= se else "auto"
    raise ValueError(kind)


def _sharpens(x: pd.Series, m: str) -> bool:
    if m == "temperature":
        return bool(x.get("T", np.nan) < 1.0)
    if m == "vector_scaling":
        return bool(x.get("vs_mean_scale", np.nan) > 1.0)
    return False


RULES = ("shipped", "fold_1se", "fold_1se_sharp", "richer_needs_folds", "fold_majority",
         "sharp_vs_identity", "sharp_vs_identity_fold", "platt_anchor_sharp", "platt_anchor_sharp_fold",
         "richer_needs_folds_frozen")


def _loss(x: pd.Series, pick: str) -> float:
    return x["t_auto"] if pick == "auto" or pick == x.get("method_") else x.get(f"t_{pick}", np.nan)


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    g = df[df["t_auto"].notna() & df["sig"].notna()].copy()
    g["warned"] = g["auto_warn"].map(L.warned)
    print(f"\n== {len(g)} cells ({len(df)} run); sets {g['set'].nunique()}; maps chosen: "
          + ", ".join(f"{k} {v}" for k, v in g["method_"].value_counts().items()))
    for fam, h in g.groupby("family"):
        print(f"-- {fam} ({len(h)} cells)")
        base_bad = None
        for kind in RULES:
            picks = h.apply(lambda x, kind=kind: _pick(x, kind), axis=1)
            loss = pd.Series([_loss(x, p) for (_, x), p in zip(h.iterrows(), picks, strict=True)], index=h.index)
            loss = loss.fillna(h["t_auto"])
            r = loss / h["sig"]
            bad = (r > 1.10) & (loss - h["sig"] > 0.01)
            changed = (picks != "auto") & (picks != h["method_"])
            print(f"  {kind:20s} gm {L.geo_mean(r):.4f} worst {r.max():.3f} above 1.10x quiet "
                  f"{int((bad & ~h['warned']).sum()):3d} warned {int((bad & h['warned']).sum()):2d};"
                  f" map changed {int(changed.sum()):3d}, over shipped there "
                  f"{L.geo_mean(loss[changed] / h['t_auto'][changed]) if changed.any() else 1:.4f}")
            if kind == "shipped":
                base_bad = bad
            else:
                new = bad & ~base_bad
                if new.any():
                    print("     new above 1.10x: " + "; ".join(
                        f"{x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']} "
                        f"{x['method_']}->{picks[i]} {r[i]:.2f}" for i, x in h[new].iterrows()))
        r = h["t_auto"] / h["sig"]
        q = h[(r > 1.10) & (h["t_auto"] - h["sig"] > 0.01) & ~h["warned"]]
        print(f"  quiet cells above 1.10x (shipped): {len(q)}")
        for _, x in q.sort_values("n_cal").iterrows():
            m = x["method_"]
            print(f"    {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}"
                  f" {x['t_auto'] / x['sig']:.2f} {m} best-on-folds {x.get('cv_best_map')}"
                  f" T {x.get('T', np.nan):.2f}; cv {m} {x.get(f'cv_{m}', np.nan):.3f} platt "
                  f"{x.get('cv_platt', np.nan):.3f} (row se {x.get('se_platt', np.nan):.3f}, fold se"
                  f" {x.get('fse_platt', np.nan):.3f}, folds won {x.get('fwin_platt', np.nan)});"
                  f" test platt/sig {x.get('t_platt', np.nan) / x['sig']:.2f}")


def compare(pairs: list[tuple[str, str]]) -> None:
    """The library rule off against on (``--rule-off`` runs against plain runs of the same
    cells): frozen cells, test log loss over the sigmoid, the cells whose loss moved."""
    key = ["set", "model", "mode", "n_cal", "seed"]
    parts = []
    for off, on in pairs:
        a, b = pd.read_csv(off), pd.read_csv(on)
        parts.append(a[a["mode"] == "frozen"].merge(b[key + ["t_auto", "method_", "auto_warn"]], on=key,
                                                    suffixes=("", "_on")))
    m = pd.concat(parts, ignore_index=True)
    m = m[m["t_auto"].notna() & m["t_auto_on"].notna() & m["sig"].notna()]
    r0, r1 = m["t_auto"] / m["sig"], m["t_auto_on"] / m["sig"]
    w0, w1 = m["auto_warn"].fillna("").map(L.warned), m["auto_warn_on"].fillna("").map(L.warned)
    b0 = (r0 > 1.10) & (m["t_auto"] - m["sig"] > 0.01)
    b1 = (r1 > 1.10) & (m["t_auto_on"] - m["sig"] > 0.01)
    ch = ~np.isclose(m["t_auto"], m["t_auto_on"], rtol=1e-9)
    d = np.log(m["t_auto_on"][ch] / m["t_auto"][ch])
    print(f"== {len(m)} frozen cells on {m['set'].nunique()} sets: auto / sigmoid off {L.geo_mean(r0):.4f},"
          f" on {L.geo_mean(r1):.4f}; worst {r0.max():.3f} -> {r1.max():.3f}")
    print(f"above 1.10x and 0.01 nats: quiet {int((b0 & ~w0).sum())} -> {int((b1 & ~w1).sum())}, warned"
          f" {int((b0 & w0).sum())} -> {int((b1 & w1).sum())}; new above: {int((b1 & ~b0).sum())}")
    if ch.any():
        print(f"map changed in {int(ch.sum())}: on / off {np.exp(d.mean()):.4f} (standard error of the mean log"
              f" {d.std() / np.sqrt(len(d)):.4f}); better by > 2 % {int((d < -np.log(1.02)).sum())}, worse by"
              f" > 2 % {int((d > np.log(1.02)).sum())}; worst {np.exp(d.max()):.3f}, best {np.exp(d.min()):.3f}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--family", default="binary,multi")
    ap.add_argument("--part", default="choice")
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="")
    ap.add_argument("--modes", default="cross,frozen")
    ap.add_argument("--sizes", default="")
    ap.add_argument("--cross-models", default="",
                    help="models of the cross-fitted cells (default: those of --models)")
    ap.add_argument("--seeds", default="")
    ap.add_argument("--rule-off", action="store_true",
                    help="the rule off (0) for the run; otherwise it is switched on at 100 rows")
    ap.add_argument("--csv", default="")
    ap.add_argument("--from-csv", default="")
    ap.add_argument("--compare", default="",
                    help="OFF.csv,ON.csv[,OFF2.csv,ON2.csv]: the library rule off against on")
    a = ap.parse_args(argv)
    if a.compare:
        f = a.compare.split(",")
        compare(list(zip(f[::2], f[1::2], strict=True)))
        return
    if a.from_csv:
        summarise(pd.concat([pd.read_csv(f) for f in a.from_csv.split(",")], ignore_index=True))
        return
    _install_capture()
    import probwrap._calibration_auto as auto_module

    # the rule is off in the library by default (see its comment there); "on" here means 100 rows
    auto_module._PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS = 0 if a.rule_off else 100
    import hunt21_sweep as H
    import hunt31_sweep
    import multiclass_hunt31 as M

    rec = H.Rec()
    t0 = time.time()
    warnings.simplefilter("ignore", FutureWarning)
    for family in a.family.split(","):
        binary = family == "binary"
        if a.quick:
            sets = (["faithfulfaces", "pulse", "alito"] if binary and a.part == "choice" else
                    ["iris", "wine"] if not binary and a.part == "choice" else [])
            models = ["svcdf", "lda", "mlp"] if binary else ["lr", "rf", "knn"]
            seeds = [0] if a.part == "choice" else [6]
        else:
            sets, models = [], []
            seeds = ([0, 1] if binary else [0, 1, 2, 3]) if a.part == "choice" else [6, 7]
        if a.sets:
            sets = a.sets.split(",")
        if a.models:
            models = a.models.split(",")
        if a.seeds:
            seeds = [int(s) for s in a.seeds.split(",")]
        ts = binary_tasks(a.part) if binary else multi_tasks(a.part)
        if sets:
            ts = [t for t in ts if t.name in sets or t.name.split(":")[-1] in sets]
        if a.quick and not sets:
            ts = ts[:2]
        ms = hunt31_sweep.models() if binary else M.models()
        models = models or list(ms)
        wanted = tuple(int(s) for s in a.sizes.split(",")) if a.sizes else ((30, 80) if binary else (40, 100, 300))
        for t in ts:
            for mode in a.modes.split(","):
                sizes = (L.sizes_for(t, mode, wanted) if binary else M.sizes(t, mode, wanted))
                for n_cal in sizes:
                    for mname in models:
                        if mode == "cross" and a.cross_models and mname not in a.cross_models.split(","):
                            continue
                        for s in seeds:
                            one_cell(rec, family, t, mname, ms[mname], n_cal, mode, s)
            print(f"{family} {t.name}: {len(rec.rows)} cells, {time.time() - t0:.0f} s", flush=True)
            if a.csv:
                pd.DataFrame(rec.rows).to_csv(a.csv, index=False)
    df = pd.DataFrame(rec.rows)
    if a.csv:
        df.to_csv(a.csv, index=False)
    summarise(df)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
