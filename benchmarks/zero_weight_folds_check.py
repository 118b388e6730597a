"""Do rows of weight 0 move a wrapper with groups, with folds given in ``cv``, or around a
model whose ``fit`` takes no ``sample_weight``?

Each cell fits a wrapper on 150 rows of a bundled scikit-learn data set (breast cancer for
calibration, cost and prior shift; wine for calibration) with 10 % of the rows at weight 0,
and the same wrapper on the other rows alone (same groups, same splitter object, or the given
folds restricted to those rows and renumbered). It counts the cells where the choice (the
chosen map, the tuned cutoff, the adapted prior) or the probabilities (the wrapper's and the
refit model's) differ by more than 1e-9.

Run (about a minute; ``--quick``: two draws instead of five)::

    python benchmarks/zero_weight_folds_check.py --quick
"""
from __future__ import annotations

import argparse
import warnings

import numpy as np


def _rows(loader, seed, n=150):
    X, y = loader(return_X_y=True)
    rng = np.random.default_rng(seed)
    p = rng.permutation(len(y))
    X, y = X[p], y[p]
    zero = np.zeros(n, bool)
    zero[rng.choice(n, n // 10, replace=False)] = True
    from sklearn.preprocessing import StandardScaler

    scale = StandardScaler().fit(X[:n])
    return scale.transform(X[:n]), y[:n], zero, scale.transform(X[n:])


def _fit(kind, model, X, y, w, X_new, cv, **fit_params):
    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if kind == "calibration":
            m = CalibrationWrapper(model, method="auto", cv=cv, random_state=0).fit(
                X, y, sample_weight=w, **fit_params)
            choice = m.method_
        elif kind == "cost":
            m = CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned", cv=cv,
                                  random_state=0, n_resamples=20).fit(
                X, y, sample_weight=w, **fit_params)
            choice = m.cutoff_
        else:
            m = PriorShiftWrapper(model, cv=cv, random_state=0, n_resamples=20).fit(
                X, y, sample_weight=w, **fit_params).adapt(X_new)
            choice = m.target_prior_
    return choice, m.predict_proba(X_new), m.estimator_.predict_proba(X_new)


def _given(n, zero, seed):
    from sklearn.model_selection import KFold

    pairs = list(KFold(3, shuffle=True, random_state=seed).split(np.zeros((n, 1))))
    new = np.full(n, -1)
    new[~zero] = np.arange(int((~zero).sum()))
    return pairs, [(new[tr[~zero[tr]]], new[te[~zero[te]]]) for tr, te in pairs]


def _cell(case, kind, loader, seed):
    from sklearn.model_selection import GroupKFold, StratifiedKFold
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier

    X, y, zero, X_new = _rows(loader, seed)
    w = np.where(zero, 0.0, 1.0)
    model, kw_z, kw_r = GaussianNB(), {}, {}
    if case == "groups":
        groups = np.arange(len(y)) // 5
        cv_z = cv_r = GroupKFold(3)
        kw_z, kw_r = {"groups": groups}, {"groups": groups[~zero]}
    elif case == "splitter":
        cv_z = cv_r = StratifiedKFold(3, shuffle=True, random_state=seed)
    elif case == "given":
        cv_z, cv_r = _given(len(y), zero, seed)
    else:  # a model without sample_weight, cv a number
        model, cv_z, cv_r = KNeighborsClassifier(15), 3, 3
    a = _fit(kind, model, X, y, w, X_new, cv_z, **kw_z)
    b = _fit(kind, model, X[~zero], y[~zero], None, X_new, cv_r, **kw_r)
    moved_choice = (a[0] != b[0]) if isinstance(a[0], str) else bool(
        np.max(np.abs(np.asarray(a[0]) - np.asarray(b[0]))) > 1e-9)
    return moved_choice, float(np.max(np.abs(a[1] - b[1]))), float(np.max(np.abs(a[2] - b[2])))


def main(argv=None):
    from sklearn.datasets import load_breast_cancer, load_wine

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="two draws per cell instead of five")
    args = ap.parse_args(argv)
    seeds = range(2 if args.quick else 5)
    kinds = [("calibration", load_breast_cancer), ("calibration", load_wine),
             ("cost", load_breast_cancer), ("prior", load_breast_cancer)]
    print("case      cells  choice-moved  proba-moved  refit-moved  max|dp|")
    for case in ["groups", "splitter", "given", "no-weights-model"]:
        res = [_cell(case, kind, loader, s) for kind, loader in kinds for s in seeds]
        print(f"{case:17s} {len(res):3d} {sum(r[0] for r in res):8d} "
              f"{sum(r[1] > 1e-9 for r in res):12d} {sum(r[2] > 1e-9 for r in res):12d}  "
              f"{max(max(r[1], r[2]) for r in res):.3g}")


if __name__ == "__main__":
    main()
