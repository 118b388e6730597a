"""Where PriorShiftWrapper.adapt's estimate leans toward the source share (session 24).

One configuration of ``benchmarks/shift_real_hunt23.py`` (its sets, ``split3``, ``draw``,
``target_shares`` and ``make_model``) over many seeded splits; per split the default estimate
(``target_prior_``) and the same rows read with one component changed at a time:

* ``ml``: no pseudo-rows (``prior_estimate_.ml_prior``, ``prior_strength=0``);
* ``ml_refitmodel``: the refit model's posteriors through the calibration instead of the fold
  models' (the path before 4 December 2026);
* ``ml_raw``: the fold models' posteriors without the calibration;
* ``ml_oracle_iso`` / ``ml_oracle_platt``: a calibration fitted on the unlabelled pool's rows
  *with their labels* (isotonic / Platt on the log-odds; the batch is drawn from that pool);
* ``ml_lab_iso`` / ``ml_lab_platt``: isotonic / Platt fitted on the labelled held-out rows;
* ``applied``: ``applied_prior_`` (after the evidence gate and the per-draw caps).

Prints each variant's mean error against the batch's true share, its standard error over the
splits and the spread; also the calibration's mean on the labelled rows and on the pool.

Run: nice python benchmarks/shift_lean_source.py Mroz rf refit 100 220 x0.5 [OUT.csv]
     (set name, model lr/rf/nb, frozen/refit, first and last+1 seed, x0.5/x1/x2; about
     5 s a split for the refit forest under load)
"""

import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.frozen import FrozenEstimator
from sklearn.isotonic import IsotonicRegression
from sklearn.linear_model import LogisticRegression

sys.path.insert(0, str(Path(__file__).resolve().parent))
import shift_real_hunt23 as H  # noqa: E402

from probwrap import PriorShiftWrapper  # noqa: E402
from probwrap.shift._estimate import _solve_prior  # noqa: E402


def em(p, src, strength=0.0, w=None):
    w = np.ones(p.shape[0]) if w is None else w
    w = w * (p.shape[0] / w.sum()) if strength == 0 else w
    return float(_solve_prior(p, w, src, src, 1e-10, 5000, strength)[0][1])


def logit(q):
    q = np.clip(q, 1e-6, 1 - 1e-6)
    return np.log(q / (1 - q))


def main(argv=None):
    argv = sys.argv[1:] if argv is None else list(argv)
    setname = argv[0] if len(argv) > 0 else "Mroz"
    mname = argv[1] if len(argv) > 1 else "rf"
    variant = argv[2] if len(argv) > 2 else "refit"
    seeds = range(int(argv[3]), int(argv[4])) if len(argv) > 4 else range(100, 200)
    kind = argv[5] if len(argv) > 5 else "x0.5"
    out = argv[6] if len(argv) > 6 else None

    name, X, y = next((n, x, t) for n, x, t, _, _ in H.sets() if setname.lower() in n.lower())
    classes = np.unique(y)

    rows = []
    t0 = time.time()
    for seed in seeds:
        A, B, C = H.split3(y, seed)
        if variant == "refit":
            fit_rows = np.concatenate([A, B])
            psw = PriorShiftWrapper(H.make_model(mname), random_state=seed)
        else:
            model = H.make_model(mname).fit(X.iloc[A], y[A])
            fit_rows = B
            psw = PriorShiftWrapper(FrozenEstimator(model), random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw.fit(X.iloc[fit_rows], y[fit_rows])
        src_lab = np.array([np.mean(y[B] == c) for c in classes])
        shares = H.target_shares(src_lab, kind, np.random.default_rng([seed, 11]))
        size = H.draw_size(y[C], classes, shares)
        kinds = ["x0.5", "x1", "x2"]
        b = C[H.draw(y[C], classes, shares, size,
                     np.random.default_rng([seed, 13, kinds.index(kind)]))]
        Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
        truth = float(np.mean(yu == classes[1]))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw.adapt(Xu)
        res = psw.prior_estimate_
        est = psw.prior_estimator_
        src = np.asarray(psw.source_prior_, float)
        r = dict(seed=seed, n_unl=len(yu), truth=truth, src=src[1], est=float(res.prior[1]),
                 ml=float(res.ml_prior[1]), pseudo=float(res.pseudo_rows or 0),
                 applied=float(psw.applied_prior_[1]), lo=float(psw.target_prior_interval_[1][0]),
                 hi=float(psw.target_prior_interval_[1][1]), p=float(psw.shift_pvalue_),
                 weight=float(psw.adaptation_weight_), pred_with=psw.predicted_with_)
        # posteriors the estimate reads: stacked fold models (refit) or the frozen model
        folds = psw._fold_proba(Xu)
        if folds is not None:
            raw_u = np.concatenate(folds)
            kept = est._source_rows()
            from probwrap.shift._interval import fold_shares
            share = fold_shares(est._src_fold, kept[1], kept[2], len(folds))[0]
            wu = np.concatenate([s * np.ones(len(yu)) for s in share])
            # labelled rows' held-out raw posteriors (as the calibration saw them)
            lab_raw, lab_y = kept[0], kept[1]
            # pool C scored by every fold model (labels known): an oracle calibration set
            fc = psw._fold_proba(X.iloc[C])
            pool_raw = np.concatenate(fc)
            pool_y = np.tile(y[C] == classes[1], len(fc)).astype(int)
            refit_raw = psw._inner_output(Xu, "predict_proba")
        else:
            raw_u = psw._inner_output(Xu, "predict_proba")
            wu = np.ones(len(yu))
            lab_raw, lab_y = est._source_rows()[0], est._source_rows()[1]
            pool_raw = psw._inner_output(X.iloc[C], "predict_proba")
            pool_y = (y[C] == classes[1]).astype(int)
            refit_raw = raw_u
        cal_u = est.calibrate(raw_u)
        r["ml_check"] = em(cal_u, src, 0.0, wu)
        r["map_check"] = em(cal_u, src, 20.0, wu * (len(yu) / wu.sum()))
        r["ml_refitmodel"] = em(est.calibrate(refit_raw), src)
        r["ml_raw"] = em(np.clip(raw_u, 1e-6, 1 - 1e-6) / np.clip(raw_u, 1e-6, 1 - 1e-6).sum(1, keepdims=True), src, 0.0, wu)
        # calibration check: labelled held-out calibrated mean by class vs pool
        cal_l = est.calibrate(lab_raw)
        r["lab_mean_cal"] = float(cal_l[:, 1].mean())
        r["lab_pos"] = float(np.mean(lab_y == 1))
        cal_pool = est.calibrate(pool_raw)
        r["pool_mean_cal"] = float(cal_pool[:, 1].mean())
        r["pool_pos"] = float(pool_y.mean())
        # oracle calibration: isotonic and Platt fitted on the pool's rows with labels (the batch
        # is drawn from the pool); the source share is then the pool's
        s_pool = np.array([1 - pool_y.mean(), pool_y.mean()])
        iso = IsotonicRegression(y_min=1e-4, y_max=1 - 1e-4, out_of_bounds="clip").fit(
            logit(pool_raw[:, 1]), pool_y)
        q = iso.predict(logit(raw_u[:, 1]))
        r["ml_oracle_iso"] = em(np.column_stack([1 - q, q]), s_pool, 0.0, wu)
        lr = LogisticRegression(C=1e6).fit(logit(pool_raw[:, [1]]), pool_y)
        q = lr.predict_proba(logit(raw_u[:, [1]]))[:, 1]
        r["ml_oracle_platt"] = em(np.column_stack([1 - q, q]), s_pool, 0.0, wu)
        # isotonic fitted on the labelled held-out rows (a flexible map, no oracle)
        iso2 = IsotonicRegression(y_min=1e-4, y_max=1 - 1e-4, out_of_bounds="clip").fit(
            logit(lab_raw[:, 1]), (lab_y == 1).astype(int))
        q = iso2.predict(logit(raw_u[:, 1]))
        r["ml_lab_iso"] = em(np.column_stack([1 - q, q]), src, 0.0, wu)
        lr2 = LogisticRegression(C=1e6).fit(logit(lab_raw[:, [1]]), (lab_y == 1).astype(int))
        q = lr2.predict_proba(logit(raw_u[:, [1]]))[:, 1]
        r["ml_lab_platt"] = em(np.column_stack([1 - q, q]), src, 0.0, wu)
        # class-conditional: mean calibrated posterior of the batch by class vs labelled
        cu = cal_u[:, 1].reshape(-1, len(yu)).T if folds is not None else cal_u[:, 1][:, None]
        cu = cu @ (np.asarray(share) / np.sum(share)) if folds is not None else cu[:, 0]
        r["u_mean_pos"] = float(cu[yu == classes[1]].mean())
        r["u_mean_neg"] = float(cu[yu != classes[1]].mean())
        r["l_mean_pos"] = float(cal_l[lab_y == 1, 1].mean())
        r["l_mean_neg"] = float(cal_l[lab_y == 0, 1].mean())
        rows.append(r)
        print(seed, {k: (round(v, 3) if isinstance(v, float) else v) for k, v in r.items()
                     if k in ("truth", "src", "est", "ml", "ml_refitmodel", "ml_oracle_iso",
                              "ml_lab_iso", "ml_raw")}, f"{time.time()-t0:.0f}s", flush=True)
    df = pd.DataFrame(rows)
    if out:
        df.to_csv(out, index=False)
    cols = ["est", "ml", "ml_check", "map_check", "ml_refitmodel", "ml_raw", "ml_oracle_iso",
            "ml_oracle_platt", "ml_lab_iso", "ml_lab_platt", "applied"]
    print(f"\n{name} {mname} {variant} {kind}: {len(df)} seeds, truth {df.truth.mean():.3f}, "
          f"src {df.src.mean():.3f}, pred_with {df.pred_with.value_counts().to_dict()}")
    for c in cols:
        e = df[c] - df.truth
        print(f"  {c:16s} mean err {e.mean():+.4f} (se {e.std() / np.sqrt(len(e)):.4f}) sd {e.std():.4f}")
    print(f"  calibration: labelled mean cal {df.lab_mean_cal.mean():.4f} vs pos share {df.lab_pos.mean():.4f}; pool mean cal {df.pool_mean_cal.mean():.4f} vs pool pos {df.pool_pos.mean():.4f}")
    print(f"  class means: labelled pos {df.l_mean_pos.mean():.4f} neg {df.l_mean_neg.mean():.4f}; unlabelled pos {df.u_mean_pos.mean():.4f} neg {df.u_mean_neg.mean():.4f}")
    print(f"  coverage {np.mean((df.lo <= df.truth) & (df.truth <= df.hi)):.3f}, pseudo mean {df.pseudo.mean():.1f}")


if __name__ == "__main__":
    main()
