"""The tuned cutoff's anchor for coarse scores (forests with exact 0/1 probabilities): the
library's rule beside a probability-scale sigmoid as the anchor's map, on the cost cells of
``tuned_cost_cells.py`` (hunt23 / hunt22 draws, cross and frozen) and ``cost_anchor_cells.py``.

One fit of ``CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned")`` per cell;
the held-out probabilities the fit saw are recorded (a wrapper around
``recalibrated_plugin_cutoff``), and every variant's cutoff is settled on them with the same
cutoff search (``settle_cutoff``), then applied to the test rows' probabilities of the fitted
policy (``predict_proba``, the rule of ``predict``). Variants (per cell, mean test cost):

* ``lib``: the library as it is (``pol.predict``);
* ``own``: the plug-in cutoff 0.2 on the model's own probabilities;
* ``sig``: scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` with the cutoff 0.2 (the
  baseline of the cost sweeps; for a forest the sigmoid is fitted on the probability);
* ``pp_coarse``: the anchor through a sigmoid fitted on the probability itself (Platt's targets,
  scikit-learn's private ``_sigmoid_calibration``: benchmark only) whenever the held-out probabilities contain an exact
  0 or 1, in place of the library's map;
* ``pp_ident``: the same, only where the library's anchor was the model's own probabilities
  (map ``identity``) or no map;
* ``pp_settle_off``: the probability-scale sigmoid's crossing itself, not settled (for scale);
* ``id_coarse``: the opposite rule, no map for coarse scores: the anchor is the plug-in cutoff on
  the model's own probabilities whenever the held-out probabilities contain an exact 0 or 1.

``newer`` / ``old``: the binary cells of ``cost_newer_sets.py`` (frozen models, a miss costing 3
or 10; its ``--sets old``), with scikit-learn's ``TunedThresholdClassifierCV(cv="prefit")``
beside (``sk_tuned``); lifelines, pingouin and scikit-survival are needed there.

Run: ``nice python benchmarks/frozen_forest_cost.py h23|h22|anchor|newer|old SEEDS CSV
[--sets a,b] [--models rf] [--modes frozen] [--sizes 150] [--first K]``; ``... summary CSV``
prints the summary of a saved run; ``... rules40 CSV [CSV ...]`` scores the 40-row rules of
``rules40`` on saved runs. docs/evidence/small_data_log.md, "Tuned cost for frozen
forests (session 24)".
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.special import logit
from sklearn.base import clone
from sklearn.calibration import _sigmoid_calibration
from sklearn.frozen import FrozenEstimator

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt23_sweep as S  # noqa: E402

import probwrap._cost_policy_rules as R  # noqa: E402
from probwrap import CostPolicyWrapper  # noqa: E402
from probwrap.decision import settle_cutoff  # noqa: E402

T0 = 0.2
_SEEN: dict = {}
_ORIGINAL = R.recalibrated_plugin_cutoff


def _recording(p, y, w, t0, random_state, **kw):
    out = _ORIGINAL(p, y, w, t0, random_state, **kw)
    _SEEN.update(p=np.array(p), y=np.array(y), w=np.array(w), lib=out, t0=t0)
    return out


R.recalibrated_plugin_cutoff = _recording


def proba_sigmoid_anchor(p, y, w, t0):
    """Cutoff on ``p`` where a sigmoid fitted on ``p`` itself reaches ``t0`` (None if the fitted
    map is not increasing)."""
    keep = w > 0
    a, b = _sigmoid_calibration(p[keep], y[keep], sample_weight=w[keep])
    if not a < 0:  # scikit-learn's map is expit(-(a p + b))
        return None
    # beyond the probabilities: flag none (1) or every row (below 0, as the library's anchor)
    return float(min(max((-logit(t0) - b) / a, -0.5), 1.0))


def variants(pol) -> dict:
    p, y, w = _SEEN["p"], _SEEN["y"], _SEEN["w"]
    lib_anchor, lib_map = _SEEN["lib"]
    coarse = bool(np.any((p[w > 0] <= 0) | (p[w > 0] >= 1)))
    pp = proba_sigmoid_anchor(p, y, w, _SEEN["t0"])
    res = pol.cost_curve_
    out = {"coarse": coarse, "lib_map": lib_map, "lib_anchor": lib_anchor, "pp_anchor": pp}
    settled = None if pp is None else settle_cutoff(p, y, pol.cost_matrix_, res, sample_weight=w, anchor=pp).cutoff
    out["cut_lib"] = pol.cutoff_
    out["cut_pp_coarse"] = settled if (coarse and pp is not None) else pol.cutoff_
    out["cut_pp_ident"] = (settled if (coarse and pp is not None and lib_map in (None, "identity"))
                           else pol.cutoff_)
    out["cut_pp_settle_off"] = pp if pp is not None else pol.cutoff_
    t0 = _SEEN["t0"]
    out["cut_id_coarse"] = (settle_cutoff(p, y, pol.cost_matrix_, res, sample_weight=w, anchor=t0).cutoff
                            if coarse else pol.cutoff_)
    return out


def cells_h(which: str, seeds: int, a):
    tasks = S.tasks() if which == "h23" else __import__("hunt22_sweep").tasks()
    for t in tasks:
        if t.kind == "kofn" or len(np.unique(t.y)) != 2:
            continue
        if a.sets and t.name not in a.sets.split(","):
            continue
        for mode in a.modes.split(","):
            for n in S.sizes_for(t, mode):
                if a.sizes and n not in [int(s) for s in a.sizes.split(",")]:
                    continue
                for mname in a.models.split(","):
                    m = S.models()[mname]
                    for seed in range(a.first, a.first + seeds):
                        tr, cal, te = S.draw(t, n, mode, seed)
                        X, y = t.X, t.y
                        Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                        Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                        if len(np.unique(yc)) != 2:
                            continue
                        if mode == "frozen":
                            if len(np.unique(y[tr])) != 2:
                                continue
                            base = FrozenEstimator(H._fit(
                                clone(m), X.iloc[tr].reset_index(drop=True), y[tr], None, []))
                        else:
                            base = clone(m)
                        sig = S._sig(base, Xc, yc, None, mode == "frozen")
                        own = base if mode == "frozen" else H._fit(clone(m), Xc, yc, None, [])
                        yield dict(set=t.name, model=mname, mode=mode, n=n, seed=seed), \
                            base, Xc, yc, None, Xt, yt, None, sig, own


def cells_anchor(seeds: int, a):
    import cost_anchor_cells as C
    import hunt22_sweep as H2

    alltasks = {t.name: t for t in H2.tasks() + H.tasks()}
    for sname in (a.sets or C.SETS).split(","):
        t = alltasks[sname]
        if t.kind != "kofn" and len(np.unique(t.y)) != 2:
            continue
        for mname in a.models.split(","):
            m = H.models()[mname]
            for s in range(a.first, a.first + seeds):
                tr, te = H.split(t, s)
                Xtr, ytr, wtr = H.rows_of(t, tr)
                Xte, yte, wte = H.rows_of(t, te)
                if len(np.unique(ytr)) != 2:
                    continue
                sig = H._sig(m, Xtr, ytr, wtr)
                own = H._fit(clone(m), Xtr, ytr, wtr, [])
                yield dict(set=sname, model=mname, mode="cross", n=len(ytr), seed=s), \
                    clone(m), Xtr, ytr, wtr, Xte, yte, wte, sig, own


def newer_sweep(a) -> None:
    """The binary cells of cost_newer_sets.py (frozen models fitted on a third of a set, 40/100/
    300 held-out rows, a miss costing 3 or 10) with the variants above, scikit-learn's
    TunedThresholdClassifierCV (cv="prefit") and the sigmoid (ensemble=False) at the plug-in
    cutoff. One row per draw; cells are (set, model, rows, miss cost), ratios of mean costs."""
    import cost_newer_sets as N
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.metrics import make_scorer
    from sklearn.model_selection import TunedThresholdClassifierCV
    from small_data_sweep import (
        COST_FN,
        COST_SIZES,
        _cost_binary_sets,
        _cost_models,
        _cost_new_binary_sets,
    )

    sets = (list(_cost_binary_sets(False)) + list(_cost_new_binary_sets(False))
            if a.which == "old" else list(N.newer_binary_sets()))
    rows = []
    for dname, X, y in sets:
        if a.sets and dname not in a.sets.split(","):
            continue
        X, y = np.asarray(X, float), np.asarray(y, int)
        for seed in range(a.first, a.first + a.seeds):
            rng = np.random.default_rng(100 + seed)
            idx = rng.permutation(len(y))
            n_fit = min(len(idx) // 3, 600)
            fit_rows, rest = idx[:n_fit], idx[n_fit:]
            for mname, model in _cost_models(False, seed):
                if mname in ("svm_margins",):  # wrapped in a Platt map: not the model's probabilities
                    continue
                model.fit(X[fit_rows], y[fit_rows])
                for n in COST_SIZES:
                    if len(rest) - n < N.MIN_TEST:
                        continue
                    h_rows = rest[rng.choice(len(rest), n, replace=False)]
                    t_rows = np.setdiff1d(rest, h_rows)
                    Xh, yh, Xt, yt = X[h_rows], y[h_rows], X[t_rows], y[t_rows]
                    if np.bincount(yh, minlength=2).min() < 3:
                        continue
                    for c_fn in COST_FN:
                        t0 = 1 / (1 + c_fn)
                        _SEEN.clear()
                        cp = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1.0, "fn": c_fn},
                                               strategy="tuned", random_state=seed).fit(Xh, yh)
                        v = variants(cp)
                        pt = cp.predict_proba(Xt)[:, 1]
                        row = dict(set=dname, model=mname, n=n, c_fn=c_fn, seed=seed, **v)
                        for k in ("lib", "pp_coarse", "pp_ident", "pp_settle_off", "id_coarse"):
                            row[k] = N._realised(yt, pt > v["cut_" + k], c_fn)
                        row["own"] = N._realised(yt, pt > t0, c_fn)
                        scorer = make_scorer(lambda yy, pp, c=c_fn: -N._realised(np.asarray(yy), pp, c))
                        sk = TunedThresholdClassifierCV(model, scoring=scorer, cv="prefit",
                                                        refit=False).fit(Xh, yh)
                        row["sk_tuned"] = N._realised(yt, sk.predict(Xt), c_fn)
                        sig = CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid",
                                                     ensemble=False).fit(Xh, yh) \
                            if np.bincount(yh).min() >= 5 else None
                        row["sig"] = np.nan if sig is None else N._realised(
                            yt, sig.predict_proba(Xt)[:, 1] > t0, c_fn)
                        rows.append(row)
            print(f"  {dname} seed {seed} done", flush=True)
            pd.DataFrame(rows).to_csv(a.csv, index=False)
    df = pd.DataFrame(rows)
    df.to_csv(a.csv, index=False)
    summary_newer(df)


def summary_newer(df: pd.DataFrame) -> None:
    cell = df.groupby(["set", "model", "n", "c_fn"])[
        [k for k in ("lib", "pp_coarse", "pp_ident", "id_coarse", "own", "sk_tuned", "sig") if k in df]].mean()
    cell["coarse"] = df.groupby(["set", "model", "n", "c_fn"]).coarse.mean()
    print("draws", len(df), "cells", len(cell), "draws coarse", int(df.coarse.sum()))
    for name, g in [("all", cell), *[(f"model {k}", v) for k, v in cell.groupby(level="model")]]:
        parts = []
        for k in ("lib", "pp_coarse", "pp_ident", "id_coarse"):
            if k not in g:
                continue
            for other in ("own", "sk_tuned", "sig"):
                gg = g.dropna(subset=[other])
                r = (gg[k] + 1e-3) / (gg[other] + 1e-3)
                parts.append(f"{k}/{other} {_gm(r):.4f}|{r.max():.3f}")
        print(f"{name:18s} n={len(g):4d} " + "  ".join(parts))


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("which")
    ap.add_argument("seeds", type=int)
    ap.add_argument("csv")
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,rf,nb")
    ap.add_argument("--modes", default="cross,frozen")
    ap.add_argument("--sizes", default="")
    ap.add_argument("--first", type=int, default=0)
    a = ap.parse_args(argv)
    warnings.simplefilter("ignore")
    if a.which in ("newer", "old"):
        newer_sweep(a)
        return
    gen = cells_anchor(a.seeds, a) if a.which == "anchor" else cells_h(a.which, a.seeds, a)
    rows = []
    for info, base, Xc, yc, wc, Xt, yt, wt, sig, own in gen:
        classes = np.unique(yc)
        _SEEN.clear()
        try:
            pol = CostPolicyWrapper(base, costs={"fp": 1.0, "fn": 4.0}, strategy="tuned",
                                    random_state=info["seed"])
            pol.fit(Xc, yc) if wc is None else pol.fit(Xc, yc, sample_weight=wc)
        except Exception as e:  # noqa: BLE001
            print("crash", info, e)
            continue
        if not _SEEN:
            continue
        keep = np.isin(yt, classes)
        Xt = Xt[keep].reset_index(drop=True)
        yt = yt[keep]
        wt = np.ones(len(yt)) if wt is None else np.asarray(wt)[keep]
        pos = yt == classes[1]

        def tc(act, pos=pos, wt=wt):
            miss = np.where(act & ~pos, 1.0, 0.0) + np.where(~act & pos, 4.0, 0.0)
            return float(np.sum(wt * miss) / np.sum(wt))

        v = variants(pol)
        q = pol.predict_proba(Xt)[:, 1]
        row = dict(info, **v)
        row["lib"] = tc(pol.predict(Xt) == classes[1])
        assert abs(row["lib"] - tc(q > v["cut_lib"])) < 1e-12
        for k in ("pp_coarse", "pp_ident", "pp_settle_off", "id_coarse"):
            row[k] = tc(q > v["cut_" + k])
        row["own"] = tc(own.predict_proba(Xt)[:, 1] > T0)
        row["sig"] = np.nan if sig is None else tc(sig.predict_proba(Xt)[:, 1] > T0)
        rows.append(row)
        if len(rows) % 20 == 0:
            pd.DataFrame(rows).to_csv(a.csv, index=False)
    df = pd.DataFrame(rows)
    df.to_csv(a.csv, index=False)
    summary(df)


def _gm(r):
    return float(np.exp(np.log(r).mean()))


def summary(df: pd.DataFrame) -> None:
    d = df.dropna(subset=["sig"])
    print("cells", len(d), "coarse", int(d.coarse.sum()))
    for name, g in [("all", d), *[(f"model {k}", v) for k, v in d.groupby("model")],
                    *[(f"mode {k}", v) for k, v in d.groupby("mode")]]:
        parts = []
        for k in ("lib", "pp_coarse", "pp_ident", "pp_settle_off", "id_coarse", "own"):
            if k not in g:
                continue
            r = (g[k] + 1e-3) / (g.sig + 1e-3)
            parts.append(f"{k} {_gm(r):.4f}|{r.max():.3f}|{g[k].mean() / g.sig.mean():.4f}")
        print(f"{name:14s} n={len(g):4d} " + "  ".join(parts))


def rules40(paths: list[str]) -> None:
    """Three rules for 40-row coarse scores, scored on saved runs (no refit): the cutoff of
    ``pp_coarse`` (the probability-scale sigmoid's anchor, settled) in place of the library's
    where the held-out probabilities are coarse and there are at most 40 rows (``A``), and only
    where the library's anchor was the model's own probabilities or no map (``B``), or only
    there and where that sigmoid flags every held-out row (anchor below 0, ``E``). Prints, per
    run, the geometric mean of cost over the sigmoid at the plug-in cutoff | the worst cell
    (draws; for newer/old runs cells of mean cost), with the number of draws changed.
    docs/evidence/small_data_log.md, "40-row frozen forests (session 24, third wave)"."""
    for path in paths:
        d = pd.read_csv(path)
        small = d.coarse.astype(bool) & (d.n <= 40)
        own_map = d.lib_map.isna() | (d.lib_map == "identity")
        rules = {"A": small, "B": small & own_map, "E": small & own_map & (d.pp_anchor < 0)}
        for k, m in rules.items():
            d[k] = np.where(m, d.pp_coarse, d.lib)
        if "c_fn" in d:
            g = d.groupby(["set", "model", "n", "c_fn"])[["lib", "sig", *rules]].mean()
        else:
            g = d
        g = g.dropna(subset=["sig"])
        parts = []
        for k in ("lib", *rules):
            r = (g[k] + 1e-3) / (g.sig + 1e-3)
            changed = "" if k == "lib" else f"({int(rules[k].sum())})"
            parts.append(f"{k}{changed} {_gm(r):.4f}|{r.max():.2f}")
        print(f"{Path(path).stem:16s} cells {len(g):4d}  " + "  ".join(parts))


if __name__ == "__main__":
    if sys.argv[1:2] == ["rules40"]:
        rules40(sys.argv[2:])
    elif sys.argv[1:2] == ["summary"]:
        d = pd.read_csv(sys.argv[2])
        summary_newer(d) if "c_fn" in d else summary(d)
    else:
        main(sys.argv[1:])
