"""A rehearsal of ``adapt``'s re-weighting on the labelled rows: does it predict the quiet harms?

Under prior (label) shift the class-conditional distributions stay put, so the labelled rows
re-weighted by class, row weight ``t_y / s_y`` (``t`` the class shares ``adapt`` applied, ``s``
the labelled shares), estimate the risk of any *fixed* predictor on the new population. The
rehearsal compares, on the labelled rows, the class-weighted log loss of

(a) the calibrated posteriors as they are, and
(b) the same posteriors re-weighted to ``t`` (Saerens, Latinne & Decaestecker 2002, eq. 2.4),

with the calibration **cross-fitted**: the map of ``prior_estimator_`` (bias-corrected
temperature scaling, its tail choice, the kept-identity decision of the full fit, or the
wrapper's ``output_map_`` where it has one) refitted on the labelled rows of K - 1 folds and
applied to the held-out fold's posteriors (the held-out posteriors the wrapper keeps: the
frozen model's, or the cross-fitting's fold models'). In-sample the map always gains from the
move (its biases make the mean posterior the class share), which says nothing. The estimate is
class-stratified: ``D = sum_c t_c mean_c(loss_b - loss_a)``, its standard error
``sqrt(sum_c t_c^2 var_c / n_c)``. A positive ``D`` says re-weighting to ``t`` would raise the
log loss of a population with these class-conditional rows at shares ``t``; that is the
"re-weighting to the *true* share hurts" of docs/prior_shift.md ("Digits and penguins, quiet
harms"), where the estimate is right and the interval covers.

Rules scored (flag where the applied prior moved and ...):

* ``D>0``: the rehearsal's point estimate says (b) is worse;
* ``D>-1se``, ``D>-2se``: (b) is not better by one / two standard errors;
* ``best``: the applied move shrunk to the share of it (0, 0.05, ..., 1) that minimises the
  rehearsal's loss (no flag; a hold-back everywhere).

Holding back a flagged cell returns the calibrated posteriors unadjusted (share 0 of the move).

Cells. (1) Real sets, ``shift_real_hunt27``'s row sets (digits "is a 7" and penguins are the
known quiet harms) with ``shift_real_hunt24.one``'s design: a three-way split, the model fitted
on A (frozen) or the wrapper refitting it on the labelled rows (refit), batches without
replacement at x0.5, x1, x2 the source prevalence and x4 under 0.15, a Dirichlet draw on
multiclass sets; labelled sizes 150 and 400. Printed: the confusion table of each rule on the
moved cells (flagged & adapting hurt / flagged & helped / missed harms), and what the hold-back
does to the summed gap to the oracle closed and the worst no-shift cell. (2) The evidence part
of ``benchmarks/shift.py --quick`` (Gaussian classes, frozen logistic regression, 2,000
labelled and 2,000 unlabelled rows, 25 repetitions, seed 0): the mean share of the gap closed
over shifted cells (the issue's target metric, 64.3 % there) and the worst no-shift cell
(1.013), with each rule's hold-back.

Also printed per real cell: ``pool``, the applied move's effect on the log loss of the whole
unlabelled pool (every row neither fitting the model nor labelled) weighted to the batch's true
shares -- the harm or gain to expect, free of the one batch's draw -- and how the rehearsal's
``D`` tracks it.

Run: nice python benchmarks/shift_rehearsal28.py --quick   (digits and penguins plus four other
                                                           sets, lr and nb, seed 0, 400 rows;
                                                           the Gaussian part with 10
                                                           repetitions; about 1 minute)
     nice python benchmarks/shift_rehearsal28.py --seeds 2 --no-gauss --out FILE.csv
                                                 (all 21 row sets, lr, nb and rf, 150 and 400
                                                 rows, seeds 0-1: 1,464 cells, 12 minutes at
                                                 load 13 on two cores)
     nice python benchmarks/shift_rehearsal28.py --no-real   (the Gaussian part, 25 repetitions
                                                             as shift.py --quick: 2 minutes)
     nice python benchmarks/shift_rehearsal28.py [--seed-start 0] [--seeds 1] [--sets NAME ...]
                                                 [--models lr nb rf] [--sizes 150 400]
     nice python benchmarks/shift_rehearsal28.py --summary FILE.csv
Results: docs/evidence/prior_shift_log.md, "A rehearsal on the labelled rows, measured and not kept (session 28)".
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
import shift_real_hunt24 as h24
import shift_real_hunt26  # noqa: F401  (patches shift_real_hunt24.make_model with boosting)
from shift_real_hunt24 import (
    draw,
    draw_size,
    kinds_for,
    labelled,
    split3,
    target_shares,
)
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap.shift import adjust_to_prior

EPS = 1e-12
FOLDS = 5
SHARES = np.linspace(0.0, 1.0, 21)
RULES = ("D>0", "D>-1se", "D>-2se")


def _folds(y_idx: np.ndarray, n_folds: int) -> np.ndarray:
    """Fold of each row: the rows of each class dealt to the folds in turn (fixed, no draw)."""
    fold = np.empty(y_idx.shape[0], dtype=int)
    for c in np.unique(y_idx):
        idx = np.flatnonzero(y_idx == c)
        fold[idx] = np.arange(idx.size) % n_folds
    return fold


def _row_loss(P: np.ndarray, y_idx: np.ndarray) -> np.ndarray:
    return -np.log(np.clip(P[np.arange(y_idx.shape[0]), y_idx], EPS, 1.0))


def rehearse(psw: PriorShiftWrapper, n_folds: int = FOLDS) -> dict | None:
    """The rehearsal of ``psw``'s last ``adapt`` on its labelled rows (see the module text).

    Returns ``D`` (rehearsal log loss of (b) minus (a), nats per row of the new population),
    its standard error, the share of the applied move minimising the rehearsal's loss and
    that minimum's gain, or None where the labelled rows were not kept."""
    from probwrap._prior_shift_output_map import fit_output_map

    est = psw.prior_estimator_
    src_rows = getattr(est, "_src", None)
    if src_rows is None or getattr(est, "_src_rows", None) is not None:
        return None
    p, y, w = (np.asarray(a) for a in src_rows)
    k = p.shape[1]
    s = np.asarray(psw.source_prior_, float)
    t = np.asarray(psw.applied_prior_, float)
    full = est.calibrator_
    counts = np.bincount(y, minlength=k)
    n_folds = int(min(n_folds, counts.min()))
    if n_folds < 2:
        return None
    fold = _folds(y, n_folds)
    P = np.empty_like(p, dtype=float)
    S = np.empty((p.shape[0], k))  # the fold's own class shares (its map's mean)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for f in range(n_folds):
            tr, te = fold != f, fold == f
            s_tr = np.bincount(y[tr], weights=w[tr], minlength=k) / w[tr].sum()
            S[te] = s_tr
            if full is None:
                P[te] = p[te]
                continue
            if getattr(psw, "output_map_", None) is not None:
                om = fit_output_map(p[tr], y[tr], None, 0, "rehearsal")
                P[te] = np.asarray(om.predict_proba(p[te]), float)
                continue
            cal = est._summarise(p[tr], y[tr], w[tr])[0]
            cal.identity_kept_ = bool(getattr(full, "identity_kept_", False))
            P[te] = cal.predict_output(p[te])
    la = _row_loss(P, y)
    # every share of the move at once: (rows, shares)
    moves = s[None, :] + SHARES[:, None] * (t - s)[None, :]
    lb_all = np.empty((p.shape[0], SHARES.size))
    for i, m in enumerate(moves):
        Q = P * (m[None, :] / S)
        Q /= Q.sum(axis=1, keepdims=True)
        lb_all[:, i] = _row_loss(Q, y)
    d = lb_all[:, -1] - la
    D, var = 0.0, 0.0
    curve = np.zeros(SHARES.size)
    for c in range(k):
        rows = y == c
        wc = w[rows] / w[rows].sum()
        mean_c = float(np.sum(wc * d[rows]))
        D += t[c] * mean_c
        n_c = float(w[rows].sum() ** 2 / np.sum(w[rows] ** 2))
        var += t[c] ** 2 * float(np.sum(wc * (d[rows] - mean_c) ** 2)) * n_c / max(n_c - 1, 1) / n_c
        curve += t[c] * (wc @ (lb_all[rows] - la[rows, None]))
    best = int(np.argmin(curve))
    return dict(D=float(D), se=float(np.sqrt(var)), best_share=float(SHARES[best]),
                best_gain=float(curve[best]))


def _ll(y_idx, P):
    return float(np.mean(_row_loss(np.asarray(P, float), y_idx)))


def flags(r: dict) -> dict:
    D, se = r["D"], r["se"]
    return {"D>0": D > 0, "D>-1se": D > -se, "D>-2se": D > -2 * se}


# -- (1) real sets ------------------------------------------------------------------------------
def real_cells(set_list, models, seeds, sizes, out_rows):
    for name, X, y in set_list:
        classes = np.unique(y)
        for mname in models:
            for seed in seeds:
                t0 = time.perf_counter()
                A, B, C = split3(y, seed)
                model = h24.make_model(mname).fit(X.iloc[A], y[A])
                pool = np.concatenate([B, C])
                source = np.array([np.mean(y[pool] == c) for c in classes])
                kinds, j = kinds_for(source)
                rng_t = np.random.default_rng([seed, 11])
                shares = {kd: target_shares(source, kd, j, rng_t) for kd in kinds}
                for n_lab in sorted({min(n, len(B)) for n in sizes}):
                    L = labelled(B, y[B], classes, n_lab, np.random.default_rng([seed, 17, n_lab]))
                    U = np.setdiff1d(pool, L)
                    batches = {}
                    for i, kd in enumerate(kinds):
                        size = draw_size(y[U], classes, shares[kd])
                        if size < 20:
                            continue
                        batches[kd] = U[draw(y[U], classes, shares[kd], size,
                                             np.random.default_rng([seed, 13, n_lab, i]))]
                    for vname in ("frozen", "refit"):
                        est = FrozenEstimator(model) if vname == "frozen" else h24.make_model(mname)
                        psw = PriorShiftWrapper(est, random_state=seed)
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            try:
                                psw.fit(X.iloc[L], y[L])
                            except Exception as e:  # noqa: BLE001
                                print(f"  fit failed {name}/{mname}/{vname}: {e}"[:200])
                                continue
                        # the whole unlabelled pool with its labels: the move's expected
                        # effect at a batch's true shares, free of the batch's draw
                        PU = np.asarray(psw._calibrated(X.iloc[U]), float)
                        yU = np.searchsorted(classes, y[U])
                        for kd, b in batches.items():
                            Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
                            with warnings.catch_warnings(record=True) as wa:
                                warnings.simplefilter("always")
                                psw.adapt(Xu)
                            warned = ",".join(sorted({type(x.message).__name__ for x in wa
                                                      if not issubclass(x.category,
                                                                        DeprecationWarning)}))
                            P0 = np.asarray(psw._calibrated(Xu), float)
                            Pa = np.asarray(psw.predict_proba(Xu), float)
                            truth = np.array([np.mean(yu == c) for c in classes])
                            src = np.asarray(psw.source_prior_, float)
                            applied = np.asarray(psw.applied_prior_, float)
                            yi = np.searchsorted(classes, yu)
                            ll0, lla = _ll(yi, P0), _ll(yi, Pa)
                            llo = _ll(yi, adjust_to_prior(P0, src, truth))
                            moved = bool(np.max(np.abs(applied - src)) > 1e-9)
                            dU = (_row_loss(adjust_to_prior(PU, src, applied), yU)
                                  - _row_loss(PU, yU))
                            pool_D = float(sum(truth[c] * dU[yU == c].mean()
                                               for c in range(len(classes)) if np.any(yU == c)))
                            r = rehearse(psw) if moved else None
                            row = dict(set=name, model=mname, variant=vname, n_lab=len(L),
                                       seed=seed, kind=kd, k=len(classes), truth=truth[j],
                                       src=src[j], applied=applied[j],
                                       est=float(psw.target_prior_[j]), moved=moved,
                                       ll_none=ll0, ll_adapt=lla, ll_oracle=llo, pool_D=pool_D,
                                       pvalue=float(psw.shift_pvalue_), warn=warned)
                            if r is not None:
                                row.update(r)
                                s_move = src + r["best_share"] * (applied - src)
                                row["ll_best"] = _ll(yi, adjust_to_prior(P0, src, s_move))
                            out_rows.append(row)
                print(f"{name[:28]:28s} {mname} s{seed} ({time.perf_counter() - t0:.0f} s)",
                      flush=True)


def _flag(mv: pd.DataFrame, rule: str) -> pd.Series:
    if rule == "best":
        return mv.best_share < 1.0
    return mv.apply(lambda r: flags(r)[rule], axis=1).astype(bool)


def summarise_real(df: pd.DataFrame) -> None:
    df = df.copy()
    df["warn"] = df["warn"].fillna("")
    mv = df[df.moved & df.D.notna()].copy()
    mv["hurt"] = mv.ll_adapt > mv.ll_none
    mv["quiet"] = mv.warn == ""
    sh_all = df.kind != "x1"
    gap = (df.ll_none - df.ll_oracle)[sh_all]
    print(f"\n== real cells: {len(df)} ({df.set.nunique()} sets), moved {int(df.moved.sum())}, "
          f"moved with a rehearsal {len(mv)}; adapting hurt (adapted / none > 1) in "
          f"{int(mv.hurt.sum())} ({int((mv.hurt & mv.quiet).sum())} quiet; shifted cells "
          f"{int((mv.hurt & (mv.kind != 'x1')).sum())})")
    print("   harmed cells above 1.02 x none, with the rehearsal (D: its estimate of re-weighted "
          "minus unadjusted, nats; pool: the same move's effect on the whole unlabelled pool at "
          "the batch's true shares):")
    for _, r in mv[mv.ll_adapt > 1.02 * mv.ll_none].sort_values(["set", "kind"]).iterrows():
        pool = f" pool {r.pool_D:+.4f}" if "pool_D" in r else ""
        print(f"     {r.set[:24]:24s} {r.model} {r.variant:6s} n{r.n_lab:<3d} s{r.seed} {r.kind:4s} "
              f"a/none {r.ll_adapt / r.ll_none:.3f} a/orc {r.ll_adapt / r.ll_oracle:.3f} "
              f"D {r.D:+.4f} se {r.se:.4f}{pool} best {r.best_share:.2f} {r.warn or 'quiet'}")
    base_gain = float((df.ll_none - df.ll_adapt)[sh_all].sum())
    x1 = df[~sh_all]
    print(f"   summed gap closed on shifted cells {base_gain / gap.sum():.1%} (oracle worse than "
          f"none in {int((gap < 0).sum())} of {int(sh_all.sum())}); worst no-shift adapted / none "
          f"{float((x1.ll_adapt / x1.ll_none).max()):.3f}; geometric mean adapted / none on "
          f"shifted cells {float(np.exp(np.log(df.ll_adapt / df.ll_none)[sh_all].mean())):.4f}")
    for label, part in (("shifted (x0.5, x2, x4, dir)", mv.kind != "x1"), ("no shift (x1)",
                                                                          mv.kind == "x1")):
        m = mv[part]
        print(f"   {label}: {len(m)} moved cells, hurt {int(m.hurt.sum())} "
              f"({int((m.hurt & m.quiet).sum())} quiet)")
        print(f"     {'rule':8s} {'flagged':>7s} {'&hurt':>6s} {'&helped':>7s} {'missed':>6s} "
              f"{'quiet hurt caught':>17s} {'gap closed':>10s} {'worst x1':>8s} "
              f"{'geo a/none':>10s} {'harm left':>9s}")
        for rule in (*RULES, "best"):
            flag = _flag(m, rule)
            new = (m.ll_best if rule == "best" else
                   pd.Series(np.where(flag, m.ll_none, m.ll_adapt), index=m.index))
            adj = df.ll_adapt.copy()
            adj.loc[m.index] = new
            closed = float((df.ll_none - adj)[sh_all].sum() / gap.sum())
            worst = float((adj / df.ll_none)[~sh_all].max())
            geo = float(np.exp(np.log(adj / df.ll_none)[sh_all].mean()))
            harm = float(np.clip(new - m.ll_none, 0, None).sum())
            print(f"     {rule:8s} {int(flag.sum()):7d} {int((flag & m.hurt).sum()):6d} "
                  f"{int((flag & ~m.hurt).sum()):7d} {int((~flag & m.hurt).sum()):6d} "
                  f"{int((flag & m.hurt & m.quiet).sum()):8d} of {int((m.hurt & m.quiet).sum()):<6d} "
                  f"{closed:10.1%} {worst:8.3f} {geo:10.4f} {harm:9.3f}")
    if "pool_D" in mv.columns:
        m = mv[mv.kind != "x1"]
        exp_hurt = m.pool_D > 0
        print(f"   shifted moved cells whose move hurts on the whole pool (expected harm, no batch "
              f"noise): {int(exp_hurt.sum())} of {len(m)}; rank correlation of D with that "
              f"effect {m.D.corr(m.pool_D, method='spearman'):.2f}; median |D - pool| / se "
              f"{float(np.median(np.abs(m.D - m.pool_D) / m.se.clip(lower=1e-12))):.2f}")
        for rule in RULES:
            flag = _flag(m, rule)
            print(f"     {rule:8s} flagged {int(flag.sum()):4d}: expected harm {int((flag & exp_hurt).sum())}"
                  f", expected gain {int((flag & ~exp_hurt).sum())}; expected harms missed "
                  f"{int((~flag & exp_hurt).sum())}")
    print("   per set (moved cells: hurt / flagged by D>-1se / both):")
    for name, g in mv.groupby("set"):
        f1 = _flag(g, "D>-1se")
        print(f"     {name[:34]:34s} {len(g):4d} moved  hurt {int(g.hurt.sum()):3d}  flagged "
              f"{int(f1.sum()):3d}  both {int((f1 & g.hurt).sum()):3d}")


# -- (2) shift.py --quick's evidence cells ------------------------------------------------------
def gauss_cells(reps: int, seed: int = 0) -> None:
    from shift import gaussian
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(seed)
    rows = []
    for mname, delta in {"weak": 0.74, "strong": 2.5}.items():
        for prev in (0.02, 0.05, 0.2, 0.5):
            X_tr, y_tr = gaussian(20_000, prev, rng, delta)
            model = FrozenEstimator(LogisticRegression().fit(X_tr, y_tr))
            for shift in (0.5, 1.0, 2.0):
                target = prev * shift
                if target >= 1.0:  # (as shift.py: no batch of one class)
                    continue
                for _ in range(reps):
                    X, y = gaussian(2000, prev, rng, delta)
                    Xn, yn = gaussian(2000, target, rng, delta)
                    psw = PriorShiftWrapper(model, random_state=0).fit(X, y)
                    none = psw.predict_proba(Xn)
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        psw.adapt(Xn)
                    ad = psw.predict_proba(Xn)
                    src = psw.source_prior_
                    orc = adjust_to_prior(none, src, [1 - target, target])
                    moved = bool(abs(psw.applied_prior_[1] - src[1]) > 1e-9)
                    r = rehearse(psw) if moved else None
                    row = dict(model=mname, prev=prev, shift=shift, ll_none=_ll(yn, none),
                               ll_adapt=_ll(yn, ad), ll_oracle=_ll(yn, orc), moved=moved)
                    if r is not None:
                        row.update(r)
                        m = src + r["best_share"] * (psw.applied_prior_ - src)
                        row["ll_best"] = _ll(yn, adjust_to_prior(none, src, m))
                    rows.append(row)
            print(f"  gauss {mname} {prev:.2f} done", flush=True)
    df = pd.DataFrame(rows)
    print(f"\n== shift.py --quick evidence cells ({reps} repetitions, seed {seed}); "
          f"moved {int(df.moved.sum())} of {len(df)} draws")
    for rule in ("none", *RULES, "best"):
        d = df.copy()
        if rule == "best":
            d["new"] = np.where(d.moved & d.D.notna(), d.get("ll_best"), d.ll_adapt)
            nflag = int((d.moved & (d.best_share < 1.0)).sum())
        elif rule == "none":
            d["new"], nflag = d.ll_adapt, 0
        else:
            f = d.moved & d.apply(lambda r, rule=rule: bool(r.moved) and flags(r)[rule], axis=1)
            d["new"] = np.where(f, d.ll_none, d.ll_adapt)
            nflag = int(f.sum())
        g = d.groupby(["model", "prev", "shift"])[["ll_none", "new", "ll_oracle"]].mean()
        sh = g.index.get_level_values("shift") != 1.0
        closed = ((g.ll_none - g.new) / (g.ll_none - g.ll_oracle))[sh]
        worst = float((g.new / g.ll_none)[~sh].max())
        fl = d.moved & (d.ll_adapt != d.new)
        hurt = d.ll_adapt > d.ll_none
        shifted = d["shift"] != 1.0
        print(f"   {rule:8s} flagged {nflag:4d} (shifted draws: {int((fl & shifted).sum())}, of "
              f"which adapting hurt {int((fl & shifted & hurt).sum())}, helped "
              f"{int((fl & shifted & ~hurt).sum())}; no-shift draws {int((fl & ~shifted).sum())}"
              f")  mean share closed {closed.mean():6.1%}  worst no-shift {worst:.3f}")
    m = df[df.moved & (df["shift"] != 1.0)]
    print(f"   moved shifted draws {len(m)}, adapting hurt in {int((m.ll_adapt > m.ll_none).sum())}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--seed-start", type=int, default=0)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*", default=["lr", "nb", "rf"])
    ap.add_argument("--sizes", nargs="*", type=int, default=[150, 400])
    ap.add_argument("--reps", type=int, default=25)
    ap.add_argument("--out")
    ap.add_argument("--summary")
    ap.add_argument("--no-gauss", action="store_true")
    ap.add_argument("--no-real", action="store_true")
    a = ap.parse_args()
    t0 = time.perf_counter()
    if a.summary:
        summarise_real(pd.read_csv(a.summary))
        return
    if not a.no_real:
        from shift_real_hunt27 import sets

        chosen = a.sets
        models, sizes = a.models, a.sizes
        if a.quick:
            chosen = chosen or ["digits", "penguins Gentoo", "OJ", "SwissLabor", "Arrests",
                                "Pima"]
            models, sizes = ["lr", "nb"], [400]
        all_sets = sets()
        if chosen:
            all_sets = [s for s in all_sets if any(c in s[0] for c in chosen)]
        rows: list = []
        real_cells(all_sets, models, range(a.seed_start, a.seed_start + a.seeds), sizes, rows)
        df = pd.DataFrame(rows)
        if a.out:
            df.to_csv(a.out, index=False)
        summarise_real(df)
    if not a.no_gauss:
        gauss_cells(10 if a.quick else a.reps)
    print(f"\n(total {time.perf_counter() - t0:.0f} s)")


if __name__ == "__main__":
    main()
