"""Does ``auto``'s class-shares rule do harm? Draws where it changes what the wrapper predicts.

For two classes ``CalibrationWrapper(method="auto")`` scores the class shares (the
intercept-only map) on the same folds as its candidate maps. A frozen model whose every
eligible map scores above the class shares by more than the standard error of the paired
difference gets the class shares (``method_ == "class_shares"``); a cross-fitted model keeps
its map and warns. This script fits ``auto`` on many small draws, and where the rule acts it
fits ``auto`` again with the rule switched off (``_CLASS_SHARES_MARGIN_SE = inf``, the
behaviour before) and prints both test log losses beside scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` on the same rows.

Modes:

* ``--sets grid`` / ``--sets fresh``: the frozen draws of ``benchmarks/calibration_tiny.py``
  (``--sizes 20,40 --draws 3``; ``fresh`` needs ``pip install -e ".[sweep]"``);
* ``--sets tiny``: the cross-fitted cells of ``benchmarks/crossfit_sweep.py --only tiny``
  (binary sets, 27-60 training rows, eleven models, ``--seeds 0,1,2``); with ``--margin K`` the
  rule is measured at K standard errors as if it replaced the map on cross-fitted models too
  (``0``: whenever the class shares score lowest);
* ``--sets lifelines``: the two cases of docs/small_data.md (twentieth session) on 10 halves:
  lifelines' waltons (miR-137 against control from day and event; naive Bayes and a tree) and
  multicenter_aids_cohort (D from AIDSY, W, T; standardised logistic regression), with
  ``auto``'s choice, its temperature and the test log loss of ``auto``, the sigmoid and the
  model's own.

Run: ``nice python benchmarks/calibration_class_shares.py --sets grid`` (about 10 minutes on a
shared machine); docs/small_data.md, twenty-first session, has the numbers.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import KFold

sys.path.insert(0, str(Path(__file__).parent))

import probwrap._calibration_auto as A  # noqa: E402
from probwrap import CalibrationWrapper  # noqa: E402


def _loss(p: np.ndarray, y: np.ndarray) -> float:
    return float(np.mean(-np.log(np.clip(p[np.arange(len(y)), y], 1e-15, 1.0))))


def _gm(r) -> float:
    return float(np.exp(np.mean(np.log(r))))


def _summary(changed: list, n: int, what: str) -> None:
    print(f"\n{what}: {n} binary draws, the rule acts on {len(changed)}")
    if not changed:
        return
    c = np.array(changed)
    r = c[:, 1] / c[:, 0]
    print(f"  with the rule over without: geometric mean {_gm(r):.3f}, worst {r.max():.3f}, "
          f"best {r.min():.3f}")
    for j, lab in ((0, "without"), (1, "with")):
        s = c[:, j] / c[:, 2]
        print(f"  {lab:>7} over scikit-learn's sigmoid: {_gm(s):.3f}, worst {s.max():.3f}, "
              f"above 1.10: {int(np.sum(s > 1.10))}")


def _auto(make, X, y, seed, margin):
    A._CLASS_SHARES_MARGIN_SE = margin
    return make().fit(X, y)


def frozen(which: str, sizes, draws: int) -> None:
    import calibration_tiny as CT

    B = CT.B
    sets = {"grid": CT.grid_sets, "fresh": CT.fresh_sets}[which]()
    n, changed = 0, []
    for name, X, y in sets:
        X = np.asarray(X, float)
        classes, y_index = np.unique(y, return_inverse=True)
        if len(classes) != 2:
            continue
        for seed in range(draws):
            X_tr, y_tr, X_pool, y_pool, X_te, y_te = B._draw(X, y_index, seed)
            for model_name, model in B.base_models(False, seed):
                B._fit_base(model, X_tr, classes[y_tr])
                for n_cal in sizes:
                    cal = B._calibration_rows(X_pool, y_pool, n_cal, seed)
                    if cal is None:
                        continue
                    Xc, yc = cal[0], classes[cal[1]]

                    def make(model=model, seed=seed):
                        return CalibrationWrapper(FrozenEstimator(model), random_state=seed)

                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        try:
                            new = _auto(make, Xc, yc, seed, 1.0)
                        except ValueError:
                            continue
                        n += 1
                        if new.method_ != "class_shares":
                            continue
                        old = _auto(make, Xc, yc, seed, float("inf"))
                        sig = CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid",
                                                     cv=KFold(2)).fit(Xc, yc)
                    row = (B.log_loss(y_te, old.predict_proba(X_te)),
                           B.log_loss(y_te, new.predict_proba(X_te)),
                           B.log_loss(y_te, sig.predict_proba(X_te)))
                    changed.append(row)
                    print(f"{name} | {model_name} | {n_cal} | {seed}: without {old.method_} "
                          f"{row[0]:.4f}, with {row[1]:.4f}, sigmoid {row[2]:.4f}", flush=True)
    A._CLASS_SHARES_MARGIN_SE = 1.0
    _summary(changed, n, f"frozen ({which})")


def crossfit(seeds, margin: float) -> None:
    import crossfit_sweep as C

    n, changed = 0, []
    for name, X, y in C.tiny_sets():
        X = np.asarray(X, dtype=float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        if yi.max() != 1:
            continue
        sizes = (len(yi) // 2,) if len(yi) < 120 else C.TINY_ROWS
        for seed in seeds:
            for n_train in sizes:
                idx = np.random.default_rng(seed).permutation(len(yi))
                tr, te = idx[:n_train], idx[n_train:][:2000]
                if np.bincount(yi[tr], minlength=2).min() < 5:
                    continue
                for mname, model in C.tiny_models().items():
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        A._CLASS_SHARES_MARGIN_SE = margin
                        try:
                            old = CalibrationWrapper(clone(model), random_state=0).fit(
                                X[tr], yi[tr])
                        except ValueError:
                            continue
                        n += 1
                        if "class_shares" not in old.method_notes_:
                            continue
                        share = old._class_share(yi[tr] == 1, np.ones(len(tr)))
                        sig = CalibratedClassifierCV(clone(model), method="sigmoid", cv=5)
                        sig.fit(X[tr], yi[tr])
                    const = np.column_stack([np.full(len(te), 1 - share), np.full(len(te), share)])
                    row = (_loss(old.predict_proba(X[te]), yi[te]), _loss(const, yi[te]),
                           _loss(sig.predict_proba(X[te]), yi[te]))
                    changed.append(row)
                    print(f"{name} | {mname} | {n_train} | {seed}: map {old.method_} "
                          f"{row[0]:.4f}, class shares {row[1]:.4f}, sigmoid {row[2]:.4f}",
                          flush=True)
    A._CLASS_SHARES_MARGIN_SE = 1.0
    _summary(changed, n, f"cross-fitted (tiny), class shares in place of the map at {margin} SE")


def lifelines_cases() -> None:
    from lifelines import datasets as d
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.naive_bayes import GaussianNB
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeClassifier

    w = d.load_waltons()
    Xw, yw = w[["T", "E"]].to_numpy(float), (w.group == "miR-137").to_numpy(int)
    m = d.load_multicenter_aids_cohort_study()
    Xm, ym = m[["AIDSY", "W", "T"]].to_numpy(float), m.D.to_numpy(int)
    cases = {
        "waltons, naive Bayes": (Xw, yw, GaussianNB()),
        "waltons, tree": (Xw, yw, DecisionTreeClassifier(random_state=0)),
        "multicenter_aids_cohort, logistic": (
            Xm, ym, make_pipeline(StandardScaler(), LogisticRegression())),
    }
    for name, (X, y, model) in cases.items():
        rows = []
        for s in range(10):
            Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=s, stratify=y)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                cw = CalibrationWrapper(clone(model), random_state=0).fit(Xa, ya)
                sig = CalibratedClassifierCV(clone(model), method="sigmoid", cv=5).fit(Xa, ya)
                own = clone(model).fit(Xa, ya)
            r = (_loss(cw.predict_proba(Xb), yb), _loss(sig.predict_proba(Xb), yb),
                 _loss(own.predict_proba(Xb), yb))
            rows.append(r)
            t = getattr(cw.calibrator_, "temperature_", None)
            print(f"{name} half {s}: {cw.method_}{'' if t is None else f' T={t:.2f}'} "
                  f"{r[0]:.3f}, sigmoid {r[1]:.3f}, own {r[2]:.3f}", flush=True)
        r = np.array(rows)
        print(f"{name}: over the sigmoid {_gm(r[:, 0] / r[:, 1]):.3f} (worst "
              f"{(r[:, 0] / r[:, 1]).max():.2f}), over the model's own "
              f"{_gm(r[:, 0] / r[:, 2]):.3f} (worst {(r[:, 0] / r[:, 2]).max():.2f})")


def main(argv: list[str]) -> None:
    opt = {a: argv[i + 1] for i, a in enumerate(argv[:-1]) if a.startswith("--")}
    which = opt.get("--sets", "grid")
    if which in ("grid", "fresh"):
        frozen(which, tuple(int(s) for s in opt.get("--sizes", "20,40").split(",")),
               int(opt.get("--draws", "3")))
    elif which == "tiny":
        crossfit(tuple(int(s) for s in opt.get("--seeds", "0,1,2").split(",")),
                 float(opt.get("--margin", "1")))
    elif which == "lifelines":
        lifelines_cases()
    else:
        raise SystemExit("--sets must be grid, fresh, tiny or lifelines")


if __name__ == "__main__":
    main(sys.argv[1:])
