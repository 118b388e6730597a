"""Estimator errors on small shifted batches (session 27, the "In short" check).

Breast cancer (first two columns) and wine (class 1 against the rest, three columns), logistic
regression and Gaussian naive Bayes cross-fitted (5 folds); 40 draws a cell: half of each class
labelled, a batch of 60 unlabelled rows at a positive share of 0.15, 0.30 or 0.50. Prints the mean
absolute error of each estimator's positive share: the default shrunk EM (20 pseudo-rows), the
maximum-likelihood EM (no pseudo-rows), PACC, BBSE, ACC and soft BBSE.

Run: ``python benchmarks/shift_estimator_errors27.py`` (about a minute).
"""
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift import PriorEstimator


def sets():
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast cancer (2 features)", X[:, :2], y
    X, y = load_wine(return_X_y=True)
    yield "wine 1 vs rest", X[:, :3], (y == 1).astype(int)


def main():
    warnings.simplefilter("ignore")
    for name, X, y in sets():
        for mname, m in (("lr", make_pipeline(StandardScaler(), LogisticRegression())),
                         ("nb", GaussianNB())):
            P = cross_val_predict(m, X, y, cv=5, method="predict_proba")
            errs = {k: [] for k in ("em", "pacc", "bbse", "acc", "bbse_soft")}
            rng = np.random.default_rng(0)
            i0, i1 = np.flatnonzero(y == 0), np.flatnonzero(y == 1)
            for d in range(40):
                rng.shuffle(i0)
                rng.shuffle(i1)
                nl0, nl1 = len(i0)//2, len(i1)//2
                lab = np.r_[i0[:nl0], i1[:nl1]]
                rest0, rest1 = i0[nl0:], i1[nl1:]
                share = [0.15, 0.3, 0.5][d % 3]
                n = 60
                n1 = int(round(share * n))
                n0 = n - n1
                unl = np.r_[rest0[:n0], rest1[:n1]]
                truth = n1 / n
                errs.setdefault("em_ml", [])
                for k in errs:
                    est = PriorEstimator(method=k.replace("_ml", ""),
                                         prior_strength=(0 if k == "em_ml" else 20),
                                         n_resamples=0, random_state=0).fit(P[lab], y[lab])
                    r = est.estimate(P[unl], interval=False)
                    errs[k].append(abs(r.prior[1] - truth))
            print(name, mname, {k: round(float(np.mean(v)), 4) for k, v in errs.items()})


if __name__ == "__main__":
    main()
