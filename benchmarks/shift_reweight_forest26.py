"""Why re-weighting a forest's calibrated probabilities hurt on SaratogaHouses (session 26).

The session-26 hunt (``shift_real_hunt26.py``) found mosaicData ``SaratogaHouses`` (new
construction, 5 %) with a random forest and 500 labelled rows worse after ``adapt`` than without
it in 8 of 48 moved cells, although the interval covered the true share every time. Two modes:

``mechanism VARIANT N_LABELLED SEED_FROM SEED_TO``
    Rebuilds the hunt's cells (``shift_real_hunt24``'s split, labelled draw and batches, same
    seeds) for the forest and, on each x2 and x4 batch, re-weights the wrapper's calibrated
    posteriors to the batch's TRUE share (Saerens, Latinne & Decaestecker 2002, eq. 2.4: the
    log-odds move by ``d = logit(true share) - logit(source share)``). It prints that move's
    log loss over no adjustment ("as fitted"), and the same after first correcting the calibrated
    log-odds by their error in the large on the unlabelled pool at the source prevalence
    (``citl``: the intercept of a logistic regression of the labels with the log-odds as offset;
    Cox 1958's recalibration with the slope held at 1) or by a full logistic recalibration there.
    The pool contains the batch (the x2 batch holds nearly every positive of it), so the corrected
    columns diagnose, they are no method. For the frozen forest also the forest's own
    probabilities (clipped to [0.001, 0.999]) and Platt scaling of them fitted on the labelled
    rows, each re-weighted from the labelled share (``source_prior_``). Also printed: the standard error of that intercept on
    the labelled rows (Fisher information of the offset intercept, ``1 / sqrt(sum p (1 - p))``;
    for the frozen forest its probabilities on the labelled rows are held out; for the refitted
    one they are not, read ``rule``'s column instead), and the log-loss change of the re-weighting
    split into positive and negative rows.

``rule SETS MODELS SEEDS OUT.csv``
    Runs ``shift_real_hunt24.one`` (labelled sizes 150 and 500) on the named sets of
    ``shift_real_hunt26.sets()`` plus scikit-learn's breast cancer (malignant) and ISLR
    ``Default`` (3 %), and adds to every two-class cell the intercept's standard error on the
    labelled rows' held-out calibrated posteriors (the ones ``adapt`` reads) and the log-odds move
    ``adapt`` applied. It then scores a candidate warning "the applied move is below ``c``
    standard errors of the calibration's own base rate" for ``c`` in 1.5, 2, 2.5, 3: how many
    moved cells it flags, and how many of those adaptation helped (false alarms).

Run:
    python benchmarks/shift_reweight_forest26.py mechanism frozen 500 2 10
    python benchmarks/shift_reweight_forest26.py mechanism refit 150 0 1 "breast cancer" lr x0.5,x2
    python benchmarks/shift_reweight_forest26.py mechanism frozen 150 0 10 "breast cancer" lr x0.5
    python benchmarks/shift_reweight_forest26.py rule "breast cancer" rf,lr 2,3,4,5,6,7,8,9 /tmp/bc.csv
    python benchmarks/shift_reweight_forest26.py rule "Saratoga|breast cancer|Default" rf,lr 0,1 /tmp/r1.csv
    python benchmarks/shift_reweight_forest26.py rule "wage1|Galton|fertil1|CPS1988|mgus|apple" rf,lr 0 /tmp/r2.csv
    python benchmarks/shift_reweight_forest26.py score /tmp/r1.csv /tmp/r2.csv
(each well under a minute on the loaded machine). Results: docs/evidence/prior_shift_log.md, "Re-weighting a
forest's calibrated probabilities (session 26)".
"""

from __future__ import annotations

import sys
import warnings

import numpy as np
import pandas as pd
import shift_real_hunt24 as h24
import shift_real_hunt26 as h26
import statsmodels.api as sm
from shift_real_hunt24 import (
    MIN_UNLABELLED,
    _r,
    _x,
    draw,
    draw_size,
    kinds_for,
    labelled,
    split3,
    target_shares,
)
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper


def _logit_cols(P: np.ndarray) -> np.ndarray:
    P = np.clip(np.asarray(P, float), 1e-9, 1 - 1e-9)
    return np.log(P[:, 1] / P[:, 0])


def _sig(t):
    return 1.0 / (1.0 + np.exp(-t))


def _ll(yy, p):
    p = np.clip(p, 1e-15, 1 - 1e-15)
    return -(yy * np.log(p) + (1 - yy) * np.log(1 - p))


def _offset_intercept(yy, z):
    fit = sm.GLM(yy, np.ones((len(yy), 1)), family=sm.families.Binomial(), offset=z).fit()
    return float(fit.params[0]), float(fit.bse[0])


def mechanism(variant: str, n_labelled: int, seeds, set_name: str = "SaratogaHouses",
              mname: str = "rf", kinds_wanted=("x2", "x4")) -> None:
    if "breast cancer" in set_name:
        b = load_breast_cancer(as_frame=True)
        X, y = b.data, np.asarray(b.target == 0)
    else:
        _, X, y = next(s for s in h26.sets() if s[0].startswith(set_name))
    ratios: dict = {}
    for seed in seeds:
        classes = np.unique(y)
        A, B, C = split3(y, seed)
        model = h24.make_model(mname).fit(X.iloc[A], y[A])
        pool = np.concatenate([B, C])
        source = np.array([np.mean(y[pool] == c) for c in classes])
        kinds, j = kinds_for(source)
        rng_t = np.random.default_rng([seed, 11])
        shares = {kd: target_shares(source, kd, j, rng_t) for kd in kinds}
        n_lab = min(n_labelled, len(B))
        L = labelled(B, y[B], classes, n_lab, np.random.default_rng([seed, 17, n_lab]))
        U = np.setdiff1d(pool, L)
        est = FrozenEstimator(model) if variant == "frozen" else h24.make_model(mname)
        psw = PriorShiftWrapper(est, random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw.fit(X.iloc[L], y[L])
        src = psw.source_prior_[1]
        zU, yU = _logit_cols(psw._calibrated(X.iloc[U])), (y[U] == classes[1]).astype(float)
        citl, _ = _offset_intercept(yU, zU)
        full = sm.GLM(yU, sm.add_constant(zU), family=sm.families.Binomial()).fit().params
        zL, yL = _logit_cols(psw._calibrated(X.iloc[L])), (y[L] == classes[1]).astype(float)
        citl_L, se_L = _offset_intercept(yL, zL)
        for i, kd in enumerate(kinds):
            if kd not in kinds_wanted:
                continue
            size = draw_size(y[U], classes, shares[kd])
            if size < MIN_UNLABELLED:
                continue
            b = U[draw(y[U], classes, shares[kd], size, np.random.default_rng([seed, 13, n_lab, i]))]
            yb = (y[b] == classes[1]).astype(float)
            t = yb.mean()
            d = np.log(t / (1 - t)) - np.log(src / (1 - src))
            zb = _logit_cols(psw._calibrated(X.iloc[b]))
            out = {}
            cands = [("as fitted", zb), ("+citl(pool)", zb + citl),
                     ("recalibrated(pool)", full[0] + full[1] * zb)]
            if variant == "frozen":  # other maps of the same forest, fitted on the labelled rows
                cands.append(("own", _logit_cols(np.clip(model.predict_proba(X.iloc[b]), 1e-3, 1))))
                platt = LogisticRegression(C=1e6).fit(model.predict_proba(X.iloc[L])[:, 1:], yL)
                cands.append(("Platt", platt.decision_function(model.predict_proba(X.iloc[b])[:, 1:])))
            for nm, zz in cands:
                l0, l1 = _ll(yb, _sig(zz)), _ll(yb, _sig(zz + d))
                out[nm] = l1.mean() / l0.mean()
                if nm == "as fitted":
                    dpos = (l1 - l0)[yb == 1].sum() / len(yb)
                    dneg = (l1 - l0)[yb == 0].sum() / len(yb)
            for k_, v_ in out.items():
                ratios.setdefault(k_, []).append(v_)
            print(f"{variant} n{n_lab} s{seed} {kd}: move d={d:.2f}  pool: citl {citl:+.2f} slope "
                  f"{full[1]:.2f}  labelled: citl {citl_L:+.2f} se {se_L:.2f}  identity kept "
                  f"{psw.calibrator_.identity_kept_}  true-share re-weighting / none: "
                  + " ".join(f"{k} {v:.3f}" for k, v in out.items())
                  + f"  log-loss change: positives {dpos:+.4f} negatives {dneg:+.4f}", flush=True)
    for k_, r in ratios.items():
        r = np.array(r)
        print(f"{k_}: cells {len(r)}; re-weighting to the true share worse than none in "
              f"{int((r > 1).sum())}; worst {r.max():.3f}; geometric mean {np.exp(np.log(r).mean()):.3f}")


def rule(want: str, models: str, seeds: str, out: str) -> None:
    stash: list = []
    orig = h24.adapt_pair

    def adapt_pair(pair, Xu):
        res = orig(pair, Xu)
        if not isinstance(res, str):
            psw = res[0]
            pe = psw.prior_estimator_
            p, _, w = pe._src  # the labelled rows' held-out posteriors and weights
            pc = np.asarray(pe.calibrate_output(p), float)
            if pc.shape[1] == 2:
                q = np.clip(pc[:, 1], 1e-12, 1 - 1e-12)
                se = 1 / np.sqrt(np.sum(w * q * (1 - q)) * (len(w) / np.sum(w)))
                lo = np.log(psw.applied_prior_[1] / (1 - psw.applied_prior_[1]))
                ls = np.log(psw.source_prior_[1] / (1 - psw.source_prior_[1]))
                stash.append((se, lo - ls))
            else:
                stash.append((np.nan, np.nan))
        return res

    class Rows(list):
        def append(self, r):
            r["se_citl"], r["d_applied"] = stash[-1]
            super().append(r)

    h24.adapt_pair = adapt_pair
    all_sets = h26.sets()
    b = load_breast_cancer(as_frame=True)
    all_sets.append(("sklearn breast cancer malignant", b.data, b.target == 0))
    d = _r("ISLR", "Default")
    all_sets.append(("ISLR Default (3%)", _x(d, ["default"]).assign(
        student=(d.student == "Yes").astype(float)), d["default"] == "Yes"))
    rows, crashes, skipped = Rows(), [], []
    for name, X, y in all_sets:
        if not any(s.lower() in name.lower() for s in want.split("|")):
            continue
        for s in (int(v) for v in seeds.split(",")):
            for m in models.split(","):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    h24.one(name, X, y, m, s, rows, crashes, skipped, (150, 500))
    pd.DataFrame(rows).to_csv(out, index=False)
    print("crashes", crashes)


def score(files) -> None:
    df = pd.concat([pd.read_csv(f) for f in files])
    df["warn"] = df.warn.fillna("")
    mv = df[(df.kind != "x1") & (df.k == 2)].copy()
    mv["ratio"] = mv.d_applied.abs() / mv.se_citl
    moved = mv.d_applied.abs() > 1e-9
    print(f"moved two-class cells {len(mv)}; adapt moved the prior in {int(moved.sum())}; worse "
          f"than none {int((mv.r_none > 1).sum())} (quiet {int(((mv.r_none > 1) & (mv.warn == '')).sum())})")
    print(mv[mv.r_none > 1][["set", "model", "variant", "n_lab", "seed", "kind", "r_none", "ratio",
                             "se_citl", "d_applied", "warn"]].round(3).to_string())
    for c in (1.5, 2.0, 2.5, 3.0):
        f = mv[moved & (mv.ratio < c)]
        print(f"c={c}: flagged {len(f)} of {int(moved.sum())}; adapting helped in "
              f"{int((f.r_none < 1).sum())}, hurt in {int((f.r_none > 1).sum())}; by set "
              f"{f.groupby('set').size().to_dict()}")


if __name__ == "__main__":
    mode = sys.argv[1]
    if mode == "mechanism":
        extra = sys.argv[6:]  # optional: set name prefix, model, kinds (comma-separated)
        mechanism(sys.argv[2], int(sys.argv[3]), range(int(sys.argv[4]), int(sys.argv[5])),
                  *(extra[:2]), *([tuple(extra[2].split(","))] if len(extra) > 2 else []))
    elif mode == "rule":
        rule(*sys.argv[2:6])
    else:
        score(sys.argv[2:])
