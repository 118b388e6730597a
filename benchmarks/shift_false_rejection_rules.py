"""Rules for a shift test that rejects on weak evidence (0.01 <= p < 0.05), measured on the
real row sets of ``shift_real_hunt27.py`` and ``shift_real_hunt28.py`` (session 29).

A no-shift draw whose shift test rejects just under 0.05 (a false rejection) moves its
predictions in full, and before session 29 with no word: ``HealthInsurance`` (frozen logistic
regression, 150 labelled rows, seed 2: 1.033 of no adjustment, p = 0.044) and digits (refit naive
Bayes: 1.092, p = 0.040). Neither the per-draw cap (from p >= 0.10) nor ``NoShiftHarmWarning``
(then from p >= 0.05) applied. This script rebuilds every row cell (``shift_real_hunt24.one``'s
split, labelled rows and batches; the weights-one wrapper only, no weight twins), records per
cell the shift test (p, statistic), the library's own no-shift harm pieces (``null_harm_scale``,
``null_move_ratio``), the evidence rule's weight before the per-draw cap, the weight applied,
``adapt``'s warnings, the share of batch rows whose feature row is also labelled, and the
adapted log loss over no adjustment at 41 weights 0, 0.025, ..., 1 (the same estimate). The
candidate rules are then scored from that grid (linear interpolation between its points; the
weight applied is scored exactly):

* ``current`` -- the library's rule;
* ``fade cap t^a`` -- for 0.01 <= p < 0.05 the 2 % per-draw cap (``draw_capped_weight``),
  faded out towards p = 0.01: ``w = w_cap + t (w_free - w_cap)``, ``t = (log(0.05/p)/log 5)^a``;
  a held move warns;
* ``limit 2%*(0.05/p)^e`` -- for p < 0.05 the cap at a limit that grows as p falls;
* ``warn ... harm>X`` -- the move made in full; ``NoShiftHarmWarning`` where 0.01 <= p < 0.05
  and the predicted no-shift harm of the move (``draw_harm``) exceeds X;
* ``refit repeat cap`` -- for refit models at p >= 0.10 the per-draw cap aiming at
  2 % x (1 - share of batch rows also labelled) (``azprocedure``'s coarse repeated rows);
  applied in the library since session 29 (``PriorEstimate.labelled_row_share``), so on that
  code ``current`` includes it and this rule changes nothing.

Printed per rule: no-shift cells above 1.02 (all; quiet, i.e. with no warning from ``adapt`` or
the rule), warnings the rule adds (on otherwise quiet cells; on cells without a
``NoShiftHarmWarning``; how many of those are shifted cells the move helped), shifted cells made
worse than by the current rule (mean and largest change of the log loss) and the share of the
summed gap to the oracle closed on shifted cells.

Run: nice python benchmarks/shift_false_rejection_rules.py --out F.csv [--n 40 150]
                                                    [--seeds 1 2] [--which 27|28|both]
     nice python benchmarks/shift_false_rejection_rules.py --summary F.csv [G.csv ...]
(seeds 1-2, 40 and 150 labelled rows, both set lists: 3,952 cells, about 26 minutes as one
nice'd process). Results: docs/evidence/prior_shift_log.md, "Quiet false rejections between
p = 0.01 and 0.05 (session 29)".
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
import shift_real_hunt24 as h24
import shift_real_hunt26  # noqa: F401  (patches shift_real_hunt24.make_model with boosting)
import shift_real_hunt27 as h27
import shift_real_hunt28 as h28
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap._prior_shift import _gate, moved_prior
from probwrap.shift._shift_tests import DRAW_HARM_LIMIT, draw_capped_weight, draw_harm

GRID = np.linspace(0.0, 1.0, 41)


def _keys(X) -> list:
    return [tuple(r) for r in np.asarray(X.astype(float), float).round(12).tolist()]


def record(sets: list, seeds: list, sizes: list, out: str) -> None:
    """Rebuild every cell and append its record to ``out`` (one write per model and size)."""
    first, t0 = True, time.time()
    for name, X, y, models in sets:
        for seed in seeds:
            for mname in models:
                classes = np.unique(y)
                k = len(classes)
                A, B, C = h24.split3(y, seed)
                model = h24.make_model(mname).fit(X.iloc[A], y[A])
                pool = np.concatenate([B, C])
                source = np.array([np.mean(y[pool] == c) for c in classes])
                kinds, _ = h24.kinds_for(source)
                rng_t = np.random.default_rng([seed, 11])
                shares = {kd: h24.target_shares(source, kd, _, rng_t) for kd in kinds}
                for n_lab in sorted({min(n, len(B)) for n in sizes}):
                    L = h24.labelled(B, y[B], classes, n_lab,
                                     np.random.default_rng([seed, 17, n_lab]))
                    U = np.setdiff1d(pool, L)
                    batches = {}
                    for i, kd in enumerate(kinds):
                        size = h24.draw_size(y[U], classes, shares[kd])
                        if size >= h24.MIN_UNLABELLED:
                            batches[kd] = U[h24.draw(y[U], classes, shares[kd], size,
                                                     np.random.default_rng([seed, 13, n_lab, i]))]
                    labelled_keys = set(_keys(X.iloc[L]))
                    rows = []
                    for vname in ("frozen", "refit"):
                        est = FrozenEstimator(model) if vname == "frozen" else h24.make_model(mname)
                        psw = PriorShiftWrapper(est, random_state=seed)
                        try:
                            with warnings.catch_warnings():
                                warnings.simplefilter("ignore")
                                psw.fit(X.iloc[L], y[L], sample_weight=np.ones(len(L)))
                        except Exception as e:  # noqa: BLE001
                            print(f"  CRASH fit {name}/{mname}/{vname}: {e}", flush=True)
                            continue
                        for kd, b in batches.items():
                            Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
                            with warnings.catch_warnings(record=True) as wa:
                                warnings.simplefilter("always")
                                try:
                                    psw.adapt(Xu, sample_weight=np.ones(len(b)))
                                except Exception as e:  # noqa: BLE001
                                    print(f"  CRASH adapt {name}/{mname}/{vname}/{kd}: {e}")
                                    continue
                            rows.append(_row(psw, Xu, yu, classes, wa, labelled_keys,
                                             dict(set=name, model=mname, variant=vname,
                                                  n_lab=len(L), seed=seed, kind=kd, k=k)))
                    pd.DataFrame(rows).to_csv(out, mode="w" if first else "a", header=first,
                                              index=False)
                    first = False
                print(f"-- {name} s{seed} {mname} {time.time() - t0:.0f} s", flush=True)


def _row(psw, Xu, yu, classes, caught, labelled_keys, head) -> dict:
    res = psw.prior_estimate_
    w, _, free = _gate(res, len(classes), psw.max_harm, psw.min_evidence)
    col = np.searchsorted(classes, yu)
    P0 = np.asarray(psw._calibrated(Xu), float)
    src = np.asarray(psw.source_prior_, float)

    def ll(prior) -> float:
        q = P0 * (np.asarray(prior, float) / src)
        q /= q.sum(axis=1, keepdims=True)
        return float(-np.mean(np.log(np.clip(q[np.arange(len(col)), col], 1e-300, 1.0))))

    Pa = np.asarray(psw.predict_proba(Xu), float)
    l0 = ll(src)
    la = float(-np.mean(np.log(np.clip(Pa[np.arange(len(col)), col], 1e-300, 1.0))))
    truth = np.array([np.mean(yu == c) for c in classes])
    names = sorted({type(m.message).__name__ for m in caught})
    stat = res.shift_statistic
    return dict(**head, pvalue=float(psw.shift_pvalue_),
                stat=np.nan if stat is None else float(stat),
                scale=getattr(res, "null_harm_scale", np.nan),
                ratio=getattr(res, "null_move_ratio", np.nan), free=free, w=w,
                r_none=la / l0, r_oracle_none=ll(truth) / l0,
                rep=float(np.mean([r in labelled_keys for r in _keys(Xu)])),
                warn=";".join(names),
                **{f"g{i}": ll(moved_prior(src, res.prior, g)) / l0 for i, g in enumerate(GRID)})


def _harm(row, w: float) -> float:
    return draw_harm(row.scale, row.ratio, row.stat, w)


def _fade(a: float):
    def rule(row):
        p = row.pvalue
        if not (0.01 <= p < 0.05) or row.free <= 0:
            return row.w, False
        cap = draw_capped_weight(row.scale, row.ratio, row.stat, row.free, DRAW_HARM_LIMIT)
        w = cap + (np.log(0.05 / p) / np.log(5.0)) ** a * (row.free - cap)
        return w, w < row.free - 1e-12
    return rule


def _limit(e: float):
    def rule(row):
        p = row.pvalue
        if not p < 0.05 or row.free <= 0:
            return row.w, False
        w = draw_capped_weight(row.scale, row.ratio, row.stat, row.free,
                               DRAW_HARM_LIMIT * (0.05 / p) ** e)
        return w, w < row.free - 1e-12
    return rule


def _warn(x: float):
    def rule(row):
        return row.w, bool(0.01 <= row.pvalue < 0.05 and row.free > 0
                           and _harm(row, row.free) > x)
    return rule


def _repeat_cap(row):
    if row.variant == "refit" and row.pvalue >= 0.10 and row.free > 0 and row.rep > 0:
        cap = draw_capped_weight(row.scale, row.ratio, row.stat, row.free,
                                 DRAW_HARM_LIMIT * (1.0 - row.rep))
        return min(row.w, cap), False
    return row.w, False


def rules() -> dict:
    """The rules scored, by name (built on call: the guard test allows no work at import)."""
    return {"current": lambda row: (row.w, False),
            "fade cap t^1": _fade(1.0), "fade cap t^0.5": _fade(0.5),
            "limit 2%*(0.05/p)^1": _limit(1.0), "limit 2%*(0.05/p)^2": _limit(2.0),
            "limit 2%*(0.05/p)^3": _limit(3.0),
            "warn, harm > 2%": _warn(0.02), "warn, harm > 5%": _warn(0.05),
            "warn, harm > 10%": _warn(0.10),
            "refit repeat cap": _repeat_cap}


def summary(df: pd.DataFrame) -> None:
    """Score every rule of ``rules()`` on the saved cells."""
    df = df.reset_index(drop=True)
    df["warn"] = df.warn.fillna("")
    grid = df[[f"g{i}" for i in range(len(GRID))]].to_numpy()
    no = (df.kind == "x1").to_numpy()
    mv = ~no
    warned0 = (df.warn != "").to_numpy()
    had_nsh = df.warn.str.contains("NoShiftHarm").to_numpy()
    gap = 1.0 - df.r_oracle_none.to_numpy()
    r0 = df.r_none.to_numpy()
    print(f"{len(df)} cells ({int(no.sum())} without a shift), {df.set.nunique()} sets, "
          f"seeds {sorted(int(v) for v in df.seed.unique())}, labelled sizes up to {df.n_lab.max()}")
    for name, rule in rules().items():
        out = [rule(r) for r in df.itertuples()]
        w = np.array([o[0] for o in out])
        extra = np.array([o[1] for o in out])
        r = np.array([r0[i] if abs(w[i] - df.w.iat[i]) < 1e-12 else
                      float(np.interp(w[i], GRID, grid[i])) for i in range(len(df))])
        warned = warned0 | extra
        quiet = no & (r > 1.02) & ~warned
        d = np.log(r[mv]) - np.log(r0[mv])
        new_q = extra & ~warned0
        new_any = extra & ~had_nsh
        print(f"{name:22s} no shift > 1.02: {int((no & (r > 1.02)).sum()):3d}, quiet "
              f"{int(quiet.sum())} | warnings added: on quiet cells {int(new_q.sum())} "
              f"({int((new_q & no).sum())} no shift), on cells without one "
              f"{int(new_any.sum())} ({int((new_any & no).sum())} no shift; "
              f"{int((new_any & mv & (r < 1)).sum())} shifted cells the move helped) | shifted "
              f"worse {int((d > 1e-9).sum())} of {int(mv.sum())} (mean {np.expm1(d.mean()):+.2%},"
              f" largest {np.expm1(d.max()):+.1%}); gap closed "
              f"{np.sum(1 - r[mv]) / np.sum(gap[mv]):.1%}")
        for i in np.flatnonzero(quiet):
            c = df.iloc[i]
            print(f"    quiet: {c.set} {c.model} {c.variant} n{c.n_lab} s{c.seed} {r[i]:.4f} "
                  f"p = {c.pvalue:.3f}")
    band = ((df.pvalue >= 0.01) & (df.pvalue < 0.05) & (df.free > 0)).to_numpy()
    h = np.array([_harm(c, c.free) for c in df[band].itertuples()])
    if len(h):
        print(f"\ncells with 0.01 <= p < 0.05 and a move: {int(band.sum())} ({int((band & no).sum())}"
              f" without a shift); predicted no-shift harm of the move: min {h.min():.3f}, "
              f"median {np.median(h):.3f}; <= 2 %: {int((h <= 0.02).sum())}, <= 10 %: "
              f"{int((h <= 0.10).sum())}")
        cols = ["set", "model", "variant", "n_lab", "seed", "pvalue", "free", "r_none", "warn"]
        print(df[band & no][cols].to_string(float_format=lambda v: f"{v:.3f}", max_colwidth=40))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, nargs="*", default=[1, 2])
    ap.add_argument("--n", type=int, nargs="*", default=[40, 150])
    ap.add_argument("--sets", nargs="*", help="substrings of set names")
    ap.add_argument("--which", default="both", choices=("27", "28", "both"))
    ap.add_argument("--out")
    ap.add_argument("--summary", nargs="*")
    a = ap.parse_args()
    if a.summary:
        summary(pd.concat([pd.read_csv(f) for f in a.summary], ignore_index=True))
        return
    h28._install_models()
    sets = []
    if a.which in ("both", "27"):
        sets += [(n, X, y, ("lr", "nb", "rf", "gb")) for n, X, y in h27.sets()]
    if a.which in ("both", "28"):
        sets += [(n, X, y, h28.MODELS) for n, X, y in h28.sets()]
    if a.sets:
        sets = [s for s in sets if any(t in s[0] for t in a.sets)]
    record(sets, a.seeds, a.n, a.out)


if __name__ == "__main__":
    main()
