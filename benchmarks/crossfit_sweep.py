"""The cross-fitted path as a new user meets it: ``CalibrationWrapper(model).fit(X, y)``.

Every other calibration benchmark hands the wrapper a model fitted elsewhere
(``FrozenEstimator``). This one gives it an unfitted model and all the training rows, as
``CalibratedClassifierCV(model)`` is most often used, and compares the two side by side on the
same rows: 100 or 300 training rows drawn from a real data set, the rest (at most 3,000) as test
rows. Nothing is downloaded.

Per cell (data set, base model, training rows) it records the test log loss of

* ``pw``: ``CalibrationWrapper(model)`` with its defaults (``method="auto"``, five stratified
  folds: the map is fitted on the out-of-fold predictions, and the model refitted on all rows
  predicts);
* ``pw_folds``: the twelfth session's proposal (now ``predict_with="fold_models"``, measured
  with ``--only fold-check``): the same fitted map applied to each of the five fold models (those whose out-of-fold predictions the map was fitted on) and the
  five calibrated probabilities averaged. It is built here from the fitted wrapper (its
  ``estimator_`` swapped for each fold model on a shallow copy), with the wrapper's folds
  (``StratifiedKFold(5)``);
* scikit-learn's ``CalibratedClassifierCV(model, method=m, cv=5, ensemble=e)`` for ``m`` in
  sigmoid, temperature (and isotonic with ``--isotonic``) and ``e`` True (its default: one
  calibrator per fold model, averaged) and False (refit on all rows, as ``pw``);
* ``raw``: the model fitted on all training rows, uncalibrated (models with ``predict_proba``);
* with ``--methods``, ``pw_<name>``: ``CalibrationWrapper(model, method=<name>)`` for Platt,
  temperature and beta scaling (two classes) or temperature and vector scaling (more), to see
  what ``auto``'s choice among them costs on this path.

It also counts crashes and probabilities of exactly 0 or 1 returned by ``pw``.

Data: ``--sets grid`` scikit-learn's and statsmodels' bundled sets of
``benchmarks/small_data_sweep.py`` (both of its lists; sets under 200 rows are left out at 100
training rows, under 400 at 300); ``--sets wide`` the R and econometrics sets of
``benchmarks/wide_data_sweep.py`` (``pip install -e ".[sweep]"``); ``--sets fresh`` the
lifelines, palmerpenguins, pingouin, vega_datasets, sktime and statsmodels sets of
``benchmarks/fresh_data_sweep.py`` (the same extra); ``--sets study`` the causaldata and
linearmodels sets of ``benchmarks/study_data_sweep.py`` (the same extra). Base models: logistic
regression and a linear SVM (margins) on standardised features, Gaussian naive Bayes, a random
forest and gradient boosting.

``--only fold-check`` measures ``CalibrationWrapper(predict_with=...)`` (nineteenth session):
on scikit-learn's and statsmodels' bundled sets (eight binary tasks, iris and wine), 30, 60,
150 and 400 training rows, two draws, eight base models (logistic regression, SGD with log
loss and with hinge loss (margins), an RBF SVM's margins, a forest, gradient boosting, naive
Bayes, 15 nearest neighbours), one fit per cell gives the test log loss of the refitted model
(``refit``) and of the fold models (``fold_models``) behind the same map, and the refit check's
statistic (``fold_spread_variation_``); ``auto`` is read from them for each limit; beside scikit-learn's
``CalibratedClassifierCV(model, method="sigmoid")``. ``--out FILE`` keeps the cells as JSON;
``--sets wide`` (or another group above) runs the same on that group's sets instead.

``--only tiny`` (twentieth session) measures both wrappers on 27-60 training rows against
scikit-learn's ``CalibratedClassifierCV(model, method="sigmoid")``: the fold-check sets above
at 30, 45 and 60 rows and statsmodels' nile, elnino and danish_data and scikit-survival's cgvhd
on half their rows (48, 30, 27, 50), three draws, the fold-check models and three whose fold
models can go constant on a few rows (a depth-3 tree and a forest with leaves of at least 10
rows, 25 nearest neighbours). Per cell: ``CalibrationWrapper`` and ``PriorShiftWrapper``
(before ``adapt``) with their defaults (``cw``, ``psw``), the same fits' map on the refitted
model and on the fold models (``cw_refit``, ``cw_folds``, ``psw_refit``, ``psw_folds``), and
the sigmoid; the summary gives the geometric mean ratio, the worst and the cells above 1.10x,
by size and by model (about half an hour; ``--models a,b`` for some models only, ``--seed K``
for one draw, ``--out FILE`` keeps the cells as JSON).

``--only cost-multiclass`` does the same on the sets with more than two classes (errors on
true class j cost j + 1): ``CostPolicyWrapper(model, C, strategy="tuned")``, the Bayes rule
on ``CalibrationWrapper(model)``, the Bayes rule on the model's own probabilities and the
model's ``predict``.

``--only cost`` compares the cost rules the same way, on the binary sets (the minority class
positive; a false alarm costs 1, a miss 3 or 10): the realised test cost per row of
``CostPolicyWrapper(model, costs, strategy="tuned")``, of the plug-in rule on
``CalibrationWrapper(model)`` (``pw_calibrated_bayes``), of scikit-learn's
``TunedThresholdClassifierCV(model, scoring=cost, cv=5)``, of the plug-in cutoff on the model's
own probabilities and of its ``predict``; linear SVM margins go through ``CalibrationWrapper``
for probwrap's rules (a few minutes for ``--sets grid``).

Run: ``nice python benchmarks/crossfit_sweep.py --sets grid`` (about ten minutes),
``--sets wide`` (about half an hour), ``--seed K`` for another draw of the training rows,
``--quick`` (breast cancer, two models: under a minute).
"""

from __future__ import annotations

import copy
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import LinearSVC

sys.path.insert(0, str(Path(__file__).parent))
import small_data_sweep as S  # noqa: E402

from probwrap import CalibrationWrapper  # noqa: E402


def base_models(quick: bool) -> dict:
    models = {
        "logistic": make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
        "naive_bayes": GaussianNB(),
        "forest": RandomForestClassifier(n_estimators=100, random_state=0),
        "boosting": HistGradientBoostingClassifier(max_iter=100, random_state=0),
        "svm_margins": make_pipeline(StandardScaler(), LinearSVC()),
    }
    return {k: models[k] for k in ("logistic", "naive_bayes")} if quick else models


def test_log_loss(p: np.ndarray, y: np.ndarray) -> float:
    # scikit-learn's probabilities can be exactly 0: floored at 1e-15 for the loss only
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y)), y], 1e-15, 1.0))))


def data(which: str, quick: bool):
    if which == "wide":
        import wide_data_sweep as W

        yield from W.wide_data_sets(quick)
        return
    if which == "fresh":
        import fresh_data_sweep as F

        yield from F.fresh_data_sets()
        return
    if which == "study":
        import study_data_sweep as D

        yield from D.study_data_sets(quick)
        return
    for name, X, y in [*S.data_sets(quick), *([] if quick else S.new_data_sets(False))]:
        if quick and name != "breast_cancer":
            continue
        yield name, X, y


def one_cell(model, X, y, tr, te, isotonic: bool, methods: bool = False) -> tuple[dict, dict]:
    out, info = {}, {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = time.perf_counter()
        pw = CalibrationWrapper(clone(model)).fit(X[tr], y[tr])
        out["pw"] = pw.predict_proba(X[te])
        info["seconds_pw"] = time.perf_counter() - t
        info["method"] = pw.method_
        info["exact01"] = bool(np.any((out["pw"] == 0.0) | (out["pw"] == 1.0)))
        # the proposal: the fitted map on each fold model, averaged
        total = np.zeros_like(out["pw"])
        for fit_rows, _ in StratifiedKFold(5).split(X[tr], y[tr]):
            member = copy.copy(pw)
            member.predicted_with_ = "refit"  # the swapped estimator_ below predicts
            member.estimator_ = clone(model).fit(X[tr][fit_rows], y[tr][fit_rows])
            total += member.predict_proba(X[te])
        out["pw_folds"] = total / 5
        if methods:  # probwrap's smooth maps by name, each cross-fitted as the default is
            names = ("platt", "temperature", "beta") if out["pw"].shape[1] == 2 else (
                "temperature", "vector_scaling")
            for m in names:
                out[f"pw_{m}"] = CalibrationWrapper(clone(model), method=m).fit(
                    X[tr], y[tr]).predict_proba(X[te])
        for m in ("sigmoid", "temperature", *(("isotonic",) if isotonic else ())):
            for ens in (True, False):
                key = f"sk_{m}" + ("" if ens else "_refit")
                t = time.perf_counter()
                try:
                    out[key] = CalibratedClassifierCV(clone(model), method=m, cv=5,
                                                      ensemble=ens).fit(X[tr], y[tr]) \
                        .predict_proba(X[te])
                except ValueError as exc:  # e.g. a class with fewer rows than folds
                    info[f"error_{key}"] = str(exc)[:80]
                if key == "sk_sigmoid":
                    info["seconds_sk"] = time.perf_counter() - t
        if hasattr(model, "predict_proba"):
            out["raw"] = clone(model).fit(X[tr], y[tr]).predict_proba(X[te])
    return {k: test_log_loss(v, y[te]) for k, v in out.items()}, info


def summary(cells: list) -> None:
    # a test log loss of exactly 0 (every test row given probability 1 for its class, on
    # separable data) would divide by zero: both sides get this floor (no effect above 1e-4)
    tiny = 1e-6

    def ratio(a, b, keep=lambda c: True):
        return np.array([(c["loss"][a] + tiny) / (c["loss"][b] + tiny) for c in cells
                         if a in c["loss"] and b in c["loss"] and keep(c)])

    pairs = [("pw", "sk_sigmoid"), ("pw", "sk_temperature"), ("pw", "sk_sigmoid_refit"),
             ("pw", "sk_temperature_refit"), ("pw", "raw"), ("pw_folds", "pw"),
             ("pw_folds", "sk_sigmoid"), ("pw_folds", "sk_temperature"), ("pw_folds", "raw"),
             ("sk_temperature", "sk_temperature_refit"), ("sk_sigmoid", "sk_sigmoid_refit")]
    for m in ("platt", "temperature", "beta", "vector_scaling"):
        if any(f"pw_{m}" in c["loss"] for c in cells):
            pairs += [(f"pw_{m}", "sk_sigmoid"), ("pw", f"pw_{m}")]
    if any("sk_isotonic" in c["loss"] for c in cells):
        pairs += [("pw", "sk_isotonic"), ("pw_folds", "sk_isotonic")]
    for rows in sorted({c["rows"] for c in cells}) + [None]:
        keep = (lambda c, r=rows: c["rows"] == r) if rows else (lambda c: True)
        print(f"\n{'all cells' if rows is None else f'{rows} training rows'} "
              f"({sum(map(keep, cells))} cells): test log loss ratio, geometric mean | worst | "
              "best | cells above 1.05")
        for a, b in pairs:
            r = ratio(a, b, keep)
            if r.size:
                print(f"  {a:>14} / {b:<22} {np.exp(np.mean(np.log(r))):6.3f} | {r.max():6.3f} | "
                      f"{r.min():6.3f} | {int(np.sum(r > 1.05))} of {r.size}")
    worst = sorted(cells, key=lambda c: -(c["loss"]["pw"] + tiny) / min(
        c["loss"].get(k, np.inf) + tiny for k in ("sk_sigmoid", "sk_temperature")))[:8]
    print("\nworst cells of pw against the better of scikit-learn's sigmoid and temperature:")
    for c in worst:
        shown = {k: round(v, 3) for k, v in c["loss"].items()}
        print(f"  {c['set']} | {c['model']} | {c['rows']} rows | auto chose {c['method']}: {shown}")
    t = np.array([c["seconds_pw"] / c["seconds_sk"] for c in cells if c.get("seconds_sk")])
    if t.size:
        print(f"\nfit and predict time, pw / scikit-learn's sigmoid: geometric mean "
              f"{np.exp(np.mean(np.log(t))):.2f}")
    near0 = [c for c in cells if min(c["loss"].values(), default=1.0) < 0.01]
    print(f"cells where some rule's test log loss is under 0.01 nats (nearly separable data: "
          f"their ratios compare tiny numbers): {len(near0)}")
    print(f"crashes: {sum(c.get('crash', 0) for c in cells)}; cells where pw returned a "
          f"probability of exactly 0 or 1: {sum(c['exact01'] for c in cells)}")


COST_FN = (3.0, 10.0)  # cost of a missed positive; a false alarm costs 1


def _minority_positive(y) -> np.ndarray | None:
    """Binary tasks only: 1 for the minority class."""
    _, yi = np.unique(np.asarray(y), return_inverse=True)
    if yi.max() != 1:
        return None
    return (yi == 1).astype(int) if yi.mean() <= 0.5 else (yi == 0).astype(int)


def _probwrap_cost_rules(model, X, y, X_test, costs, realised) -> dict:
    """Realised test cost of probwrap's two cost rules fitted on ``(X, y)``: the tuned rule and
    the plug-in (Bayes) rule on ``CalibrationWrapper(model)``. probwrap needs probabilities:
    margins go through the cross-fitted calibration for both."""
    from probwrap import CostPolicyWrapper

    margins = not hasattr(model, "predict_proba")
    inner = CalibrationWrapper(clone(model)) if margins else clone(model)
    cal = inner if margins else CalibrationWrapper(clone(model))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        tuned = CostPolicyWrapper(clone(inner), costs=costs, strategy="tuned", random_state=0)
        bayes = CostPolicyWrapper(clone(cal), costs=costs)
        return {"pw_tuned": realised(tuned.fit(X, y).predict(X_test)),
                "pw_calibrated_bayes": realised(bayes.fit(X, y).predict(X_test))}


def _print_cost_ratios(cells: list, pairs: list) -> None:
    """Per training size and overall: each pair's realised test cost ratio (geometric mean,
    worst, best, cells above 1.10), the floor of small_data_sweep's cost ratios on both sides."""
    floor = S.COST_FLOOR
    for rows in sorted({c["rows"] for c in cells}) + [None]:
        keep = [c for c in cells if rows is None or c["rows"] == rows]
        print(f"\n{'all cells' if rows is None else f'{rows} training rows'} ({len(keep)} "
              "cells): realised test cost ratio, geometric mean | worst | best | cells above "
              "1.10")
        for a, b in pairs:
            r = np.array([(c["loss"][a] + floor) / (c["loss"][b] + floor) for c in keep
                          if a in c["loss"] and b in c["loss"]])
            if r.size:
                print(f"  {a:>20} / {b:<20} {np.exp(np.mean(np.log(r))):6.3f} | {r.max():6.3f} "
                      f"| {r.min():6.3f} | {int(np.sum(r > 1.10))} of {r.size}")


def cost_cell(model, X, y, tr, te, c_fn: float) -> dict:
    """Realised test cost per row of each rule fitted on the training rows ``tr``."""
    from sklearn.metrics import make_scorer
    from sklearn.model_selection import TunedThresholdClassifierCV


    def realised(act) -> float:
        act = np.asarray(act).astype(int)
        return float(np.mean((act == 1) & (y[te] == 0)) + c_fn * np.mean((act == 0) & (y[te] == 1)))

    costs = {"fp": 1.0, "fn": c_fn}
    margins = not hasattr(model, "predict_proba")
    out = _probwrap_cost_rules(model, X[tr], y[tr], X[te], costs, realised)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scorer = make_scorer(lambda yy, pp: -float(
            np.mean((np.asarray(pp) == 1) & (np.asarray(yy) == 0))
            + c_fn * np.mean((np.asarray(pp) == 0) & (np.asarray(yy) == 1))))
        out["sk_tuned"] = realised(TunedThresholdClassifierCV(
            clone(model), scoring=scorer, cv=5, random_state=0).fit(X[tr], y[tr]).predict(X[te]))
        raw = clone(model).fit(X[tr], y[tr])
        if not margins:
            out["raw_bayes"] = realised(raw.predict_proba(X[te])[:, 1] > 1 / (1 + c_fn))
        out["half"] = realised(raw.predict(X[te]))
    return out


def cost_main(argv: list[str]) -> None:
    """``--only cost``: the cost rules cross-fitted beside ``TunedThresholdClassifierCV``."""
    quick = "--quick" in argv
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else "grid"
    seed = int(argv[argv.index("--seed") + 1]) if "--seed" in argv else 0
    cells = []
    for name, X, y in data(which, quick):
        y = _minority_positive(y)
        if y is None:
            continue
        X = np.asarray(X, dtype=float)
        for n_train in (100,) if quick else (100, 300):
            if len(y) < n_train + 100:
                continue
            idx = np.random.default_rng(seed).permutation(len(y))
            tr, te = idx[:n_train], idx[n_train:][:3000]
            if np.bincount(y[tr], minlength=2).min() < 5:
                continue
            for mname, model in base_models(quick).items():
                for c_fn in COST_FN:
                    try:
                        loss = cost_cell(model, X, y, tr, te, c_fn)
                    except Exception as exc:  # noqa: BLE001 - counted and shown
                        print(f"CRASH {name} | {mname} | {n_train} | {c_fn}: "
                              f"{type(exc).__name__}: {exc}")
                        continue
                    cells.append({"set": name, "model": mname, "rows": n_train, "c_fn": c_fn,
                                  "loss": loss})
                    print(f"{name} | {mname} | {n_train} rows | c_fn {c_fn:g}: "
                          + ", ".join(f"{a} {b:.4f}" for a, b in loss.items()), flush=True)
    pairs = [("pw_tuned", "sk_tuned"), ("pw_calibrated_bayes", "sk_tuned"),
             ("pw_tuned", "pw_calibrated_bayes"), ("pw_tuned", "raw_bayes"),
             ("sk_tuned", "raw_bayes"), ("pw_tuned", "half"), ("sk_tuned", "half")]
    _print_cost_ratios(cells, pairs)
    floor = S.COST_FLOOR  # a cell whose both costs are ~0 says nothing about the ratio
    worst = sorted(cells, key=lambda c: -(c["loss"]["pw_tuned"] + floor)
                   / (c["loss"]["sk_tuned"] + floor))[:8]
    print("\nworst cells of pw_tuned against scikit-learn's TunedThresholdClassifierCV:")
    for c in worst:
        print(f"  {c['set']} | {c['model']} | {c['rows']} rows | c_fn {c['c_fn']:g}: "
              + ", ".join(f"{k} {v:.4f}" for k, v in c["loss"].items()))


def cost_cell_multiclass(model, X, y, tr, te) -> dict:
    """Realised test cost per row of each multiclass rule (errors on true class j cost j + 1)."""

    k = int(y.max()) + 1
    C = (1 - np.eye(k)) * (1 + np.arange(k))[:, None]

    def realised(act) -> float:
        return float(C[y[te], np.asarray(act).astype(int)].mean())

    margins = not hasattr(model, "predict_proba")
    out = _probwrap_cost_rules(model, X[tr], y[tr], X[te], C, realised)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        raw = clone(model).fit(X[tr], y[tr])
        if not margins:
            out["raw_bayes"] = realised(np.argmin(raw.predict_proba(X[te]) @ C, axis=1))
        out["argmax"] = realised(np.searchsorted(raw.classes_, raw.predict(X[te])))
    return out


def cost_multiclass_main(argv: list[str]) -> None:
    """``--only cost-multiclass``: the multiclass cost rules cross-fitted, side by side."""
    quick = "--quick" in argv
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else "grid"
    seed = int(argv[argv.index("--seed") + 1]) if "--seed" in argv else 0
    cells = []
    for name, X, y in data(which, quick):
        _, y = np.unique(np.asarray(y), return_inverse=True)
        if y.max() < 2:
            continue
        X = np.asarray(X, dtype=float)
        for n_train in (100, 300):
            if len(y) < n_train + 100:
                continue
            idx = np.random.default_rng(seed).permutation(len(y))
            tr, te = idx[:n_train], idx[n_train:][:3000]
            if np.bincount(y[tr], minlength=y.max() + 1).min() < 5:
                continue
            for mname, model in base_models(quick).items():
                try:
                    loss = cost_cell_multiclass(model, X, y, tr, te)
                except Exception as exc:  # noqa: BLE001 - counted and shown
                    print(f"CRASH {name} | {mname} | {n_train}: {type(exc).__name__}: {exc}")
                    continue
                cells.append({"set": name, "model": mname, "rows": n_train, "loss": loss})
                print(f"{name} | {mname} | {n_train} rows: "
                      + ", ".join(f"{a} {b:.4f}" for a, b in loss.items()), flush=True)
    pairs = [("pw_tuned", "pw_calibrated_bayes"), ("pw_tuned", "raw_bayes"),
             ("pw_tuned", "argmax"), ("pw_calibrated_bayes", "argmax")]
    _print_cost_ratios(cells, pairs)


def fold_check_sets():
    """Eight binary tasks and two multiclass ones from scikit-learn's and statsmodels' bundled
    sets (the eighteenth session's tasks, docs/small_data.md)."""
    import statsmodels.api as sm
    from sklearn.datasets import (
        load_breast_cancer,
        load_diabetes,
        load_digits,
        load_iris,
        load_wine,
    )

    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer", X, y
    X, y = load_wine(return_X_y=True)
    yield "wine class 0", X, (y == 0).astype(int)
    yield "wine", X, y
    X, y = load_iris(return_X_y=True)
    yield "iris", X, y
    X, y = load_digits(return_X_y=True)
    yield "digits 8", X, (y == 8).astype(int)
    X, y = load_diabetes(return_X_y=True)
    yield "diabetes>median", X, (y > np.median(y)).astype(int)
    d = sm.datasets.fair.load_pandas().data
    yield "fair affair", d.drop(columns="affairs").to_numpy(float), \
        (d.affairs > 0).astype(int).to_numpy()
    d = sm.datasets.star98.load_pandas().data
    yield "star98 pass>40%", d.iloc[:, 2:].to_numpy(float), \
        (d.iloc[:, 0] / (d.iloc[:, 0] + d.iloc[:, 1]) > 0.4).astype(int).to_numpy()
    d = sm.datasets.anes96.load_pandas().data
    yield "anes96 vote", d.drop(columns=["vote"]).to_numpy(float), d.vote.astype(int).to_numpy()
    d = sm.datasets.randhie.load_pandas().data
    yield "randhie visits>2", d.drop(columns="mdvis").to_numpy(float), \
        (d.mdvis > 2).astype(int).to_numpy()


def fold_check_models() -> dict:
    from sklearn.linear_model import SGDClassifier
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.svm import SVC

    def scaled(m):
        return make_pipeline(StandardScaler(), m)

    return {
        "logistic": scaled(LogisticRegression(max_iter=2000)),
        "sgd_log": scaled(SGDClassifier(loss="log_loss", random_state=0)),
        "sgd_hinge": scaled(SGDClassifier(random_state=0)),
        "svc_margins": scaled(SVC()),
        "forest": RandomForestClassifier(n_estimators=50, random_state=0),
        "boosting": HistGradientBoostingClassifier(max_iter=50, random_state=0),
        "naive_bayes": GaussianNB(),
        "knn15": scaled(KNeighborsClassifier(15)),
    }


def fold_check_cell(model, X, y, tr, te) -> dict:
    """Test log loss of the refitted model and of the fold models behind one fitted map, the
    refit check's statistic, and scikit-learn's sigmoid (fold ensemble)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pw = CalibrationWrapper(clone(model), predict_with="fold_models", random_state=0)
        pw.fit(X[tr], y[tr])
        folds = pw.predict_proba(X[te])
        refit = copy.copy(pw)
        refit.predicted_with_ = "refit"
        loss = {"refit": test_log_loss(refit.predict_proba(X[te]), y[te]),
                "fold_models": test_log_loss(folds, y[te])}
        try:
            loss["sk_sigmoid"] = test_log_loss(CalibratedClassifierCV(
                clone(model), method="sigmoid", cv=5).fit(X[tr], y[tr]).predict_proba(X[te]),
                y[te])
        except ValueError:
            pass
    # the fold models' disagreement on the training rows, after the map: the mean over rows
    # (and classes) of the spread across fold models of the centred calibrated log-probabilities
    logq = np.stack([np.log(np.clip(pw._apply_map(pw.calibrator_, s), 1e-12, 1.0))
                     for s in pw._score_sets(X[tr])])
    logq -= logq.mean(axis=2, keepdims=True)
    refit_logq = np.log(np.clip(refit.predict_proba(X[tr]), 1e-12, 1.0))
    refit_logq -= refit_logq.mean(axis=1, keepdims=True)
    disagreement = float(logq.std(axis=0).mean())
    refit_gap = float(np.abs(refit_logq - logq.mean(axis=0)).mean())
    return {"loss": loss, "method": pw.method_,
            "variation": pw.fold_spread_variation_,
            "disagreement": disagreement, "refit_gap": refit_gap,
            "ratios": pw.refit_spread_ratios_.round(3).tolist()}


def fold_check_summary(cells: list, limits=(0.05, 0.075, 0.1, 0.15, 0.2, 0.3)):
    tiny = 1e-6

    def gm(r):
        return float(np.exp(np.mean(np.log(r))))

    def pick(c, lim):
        return c["loss"]["fold_models"] if c["variation"] > lim else c["loss"]["refit"]

    cells = [c for c in cells if "sk_sigmoid" in c["loss"]]
    for rows in sorted({c["rows"] for c in cells}) + [None]:
        keep = [c for c in cells if rows is None or c["rows"] == rows]
        sk = np.array([c["loss"]["sk_sigmoid"] + tiny for c in keep])
        ref = np.array([c["loss"]["refit"] + tiny for c in keep])
        fol = np.array([c["loss"]["fold_models"] + tiny for c in keep])
        print(f"\n{'all cells' if rows is None else f'{rows} training rows'} ({len(keep)} cells):"
              " test log loss over scikit-learn's sigmoid, geometric mean | worst | cells above "
              "1.10; over refit: geometric mean | worst | cells above 1.02")
        print(f"  {'refit':>16} {gm(ref / sk):6.3f} | {np.max(ref / sk):6.3f} | "
              f"{int(np.sum(ref / sk > 1.10)):3d}")
        print(f"  {'fold_models':>16} {gm(fol / sk):6.3f} | {np.max(fol / sk):6.3f} | "
              f"{int(np.sum(fol / sk > 1.10)):3d}   {gm(fol / ref):6.3f} | "
              f"{np.max(fol / ref):6.3f} | {int(np.sum(fol / ref > 1.02))}")
        for lim in limits:
            a = np.array([pick(c, lim) + tiny for c in keep])
            used = sum(c["variation"] > lim for c in keep)
            print(f"  {f'auto at {lim:g}':>16} {gm(a / sk):6.3f} | {np.max(a / sk):6.3f} | "
                  f"{int(np.sum(a / sk > 1.10)):3d}   {gm(a / ref):6.3f} | {np.max(a / ref):6.3f}"
                  f" | {int(np.sum(a / ref > 1.02))}   (fold models in {used})")
    print("\nby model, all sizes: refit / sk, fold_models / sk, fold_models / refit (gmean)")
    for m in sorted({c["model"] for c in cells}):
        keep = [c for c in cells if c["model"] == m]
        r = [(c["loss"]["refit"] + tiny) / (c["loss"]["sk_sigmoid"] + tiny) for c in keep]
        f = [(c["loss"]["fold_models"] + tiny) / (c["loss"]["sk_sigmoid"] + tiny) for c in keep]
        print(f"  {m:>12} {gm(r):6.3f} {gm(f):6.3f} {gm(np.array(f) / np.array(r)):6.3f} "
              f"median variation {np.median([c['variation'] for c in keep]):.3f}")


def fold_check_main(argv: list[str]) -> None:
    """``--only fold-check``: refit against fold models behind the same map (see above)."""
    import json

    seeds = (0, 1) if "--seed" not in argv else (int(argv[argv.index("--seed") + 1]),)
    sizes = (30, 60, 150, 400)
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else None
    cells = []
    for name, X, y in fold_check_sets() if which is None else data(which, False):
        X = np.asarray(X, dtype=float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        k = int(yi.max()) + 1
        for seed in seeds:
            for n_train in sizes:
                if len(yi) < n_train + 100:
                    continue
                idx = np.random.default_rng(seed).permutation(len(yi))
                tr, te = idx[:n_train], idx[n_train:][:2000]
                if np.bincount(yi[tr], minlength=k).min() < 5:
                    continue
                for mname, model in fold_check_models().items():
                    try:
                        c = fold_check_cell(model, X, yi, tr, te)
                    except Exception as exc:  # noqa: BLE001 - counted and shown
                        print(f"CRASH {name} | {mname} | {n_train}: {type(exc).__name__}: {exc}")
                        continue
                    c.update({"set": name, "model": mname, "rows": n_train, "seed": seed})
                    cells.append(c)
                    print(f"{name} | {mname} | {n_train} | seed {seed} | {c['method']} | "
                          f"variation {c['variation']:.3f}: "
                          + ", ".join(f"{a} {b:.4f}" for a, b in c["loss"].items()), flush=True)
    if "--out" in argv:
        Path(argv[argv.index("--out") + 1]).write_text(json.dumps(cells))
    fold_check_summary(cells)


def tiny_sets():
    """The fold-check sets (scikit-learn's and statsmodels' bundled sets) and four small sets
    named in docs/small_data.md (nineteenth session): statsmodels' nile (a low-flow year from
    the three before), elnino (December above its median from January-June) and danish_data
    (money stock rising next quarter), and scikit-survival's cgvhd (status other than 1,
    categorical columns one-hot coded)."""
    import pandas as pd
    import statsmodels.api as sm

    yield from fold_check_sets()
    v = sm.datasets.nile.load_pandas().data["volume"].to_numpy(float)
    yv = v[3:]
    yield "nile low", np.column_stack([v[2:-1], v[1:-2], v[:-3]]), \
        (yv < np.median(yv)).astype(int)
    d = sm.datasets.elnino.load_pandas().data
    yield "elnino dec", d[["JAN", "FEB", "MAR", "APR", "MAY", "JUN"]].to_numpy(float), \
        (d.DEC > d.DEC.median()).astype(int).to_numpy()
    d = sm.datasets.danish_data.load_pandas().data
    yield "danish rise", d.to_numpy(float)[:-1], \
        (np.diff(d.iloc[:, 0].to_numpy(float)) > 0).astype(int)
    try:
        from sksurv.datasets import load_cgvhd
    except ImportError:  # scikit-survival is a test extra
        return
    X, y = load_cgvhd()
    yield "cgvhd status not 1", pd.get_dummies(X, dtype=float).to_numpy(float), \
        (y["status"] != 1).astype(int)


def tiny_models() -> dict:
    """fold_check_models and three models whose fold models can go constant on a few rows."""
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.tree import DecisionTreeClassifier

    return {
        **fold_check_models(),
        "tree_leaf10": DecisionTreeClassifier(max_depth=3, min_samples_leaf=10, random_state=0),
        "forest_leaf10": RandomForestClassifier(n_estimators=50, min_samples_leaf=10,
                                                random_state=0),
        "knn25": make_pipeline(StandardScaler(), KNeighborsClassifier(25)),
    }


#: training rows of ``--only tiny``; sets of fewer than 120 rows train on half their rows
TINY_ROWS = (30, 45, 60)


def tiny_cell(model, X, y, tr, te) -> dict:
    """Test log loss of CalibrationWrapper and PriorShiftWrapper (before adapt) with their
    defaults, of the same fits' other predicting models, and of scikit-learn's sigmoid."""
    from probwrap import PriorShiftWrapper

    loss, info = {}, {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pw = CalibrationWrapper(clone(model), random_state=0).fit(X[tr], y[tr])
        loss["cw"] = test_log_loss(pw.predict_proba(X[te]), y[te])
        info.update(cw_with=pw.predicted_with_, method=pw.method_,
                    variation=float(pw.fold_spread_variation_),
                    ratios=pw.refit_spread_ratios_.round(3).tolist(),
                    capped="capped" in str(getattr(pw, "method_notes_", {}).get(
                        "temperature", "")))
        folds = CalibrationWrapper(clone(model), predict_with="fold_models",
                                   random_state=0).fit(X[tr], y[tr])
        loss["cw_folds"] = test_log_loss(folds.predict_proba(X[te]), y[te])
        refit = copy.copy(folds)
        refit.predicted_with_ = "refit"  # the same map on the refitted model (no cap)
        loss["cw_refit"] = test_log_loss(refit.predict_proba(X[te]), y[te])
        if hasattr(model, "predict_proba"):
            ps = PriorShiftWrapper(clone(model), random_state=0, n_resamples=0)
            ps.fit(X[tr], y[tr])
            loss["psw"] = test_log_loss(ps.predict_proba(X[te]), y[te])
            info["psw_with"] = getattr(ps, "predicted_with_", "refit")
            est = ps.prior_estimator_
            fold_proba = ps._fold_proba(X[te])
            if fold_proba is not None:
                loss["psw_folds"] = test_log_loss(np.mean(
                    [est.calibrate_output(f) for f in fold_proba], axis=0), y[te])
                own = est.calibrate_output(ps._inner_output(X[te], "predict_proba"))
                loss["psw_refit"] = test_log_loss(own, y[te])
        try:
            loss["sk_sigmoid"] = test_log_loss(CalibratedClassifierCV(
                clone(model), method="sigmoid", cv=5).fit(X[tr], y[tr]).predict_proba(X[te]),
                y[te])
        except ValueError:
            pass
    return {"loss": loss, **info}


def tiny_summary(cells: list) -> None:
    tiny = 1e-6

    def gm(r):
        return float(np.exp(np.mean(np.log(r))))

    cells = [c for c in cells if "sk_sigmoid" in c["loss"]]
    keys = ("cw", "cw_refit", "cw_folds", "psw", "psw_refit", "psw_folds")
    for rows in ("27-40", "41-60", None):
        keep = [c for c in cells if rows is None
                or (c["rows"] <= 40) == (rows == "27-40")]
        print(f"\n{'all cells' if rows is None else f'{rows} training rows'} ({len(keep)} "
              "cells): test log loss over scikit-learn's sigmoid, geometric mean | worst | "
              "cells above 1.10")
        for k in keys:
            r = np.array([(c["loss"][k] + tiny) / (c["loss"]["sk_sigmoid"] + tiny)
                          for c in keep if k in c["loss"]])
            if r.size:
                print(f"  {k:>10} {gm(r):6.3f} | {r.max():6.3f} | {int(np.sum(r > 1.10)):3d} "
                      f"of {r.size}")
    print("\nby model, all cells: over scikit-learn's sigmoid (geometric mean) of "
          + ", ".join(keys))
    for m in sorted({c["model"] for c in cells}):
        keep = [c for c in cells if c["model"] == m]
        row = []
        for k in keys:
            r = [(c["loss"][k] + tiny) / (c["loss"]["sk_sigmoid"] + tiny) for c in keep
                 if k in c["loss"]]
            row.append(f"{gm(r):6.3f}" if r else "     -")
        print(f"  {m:>14} " + " ".join(row))
    for k in ("cw", "psw"):
        worst = sorted((c for c in cells if k in c["loss"]),
                       key=lambda c: -c["loss"][k] / c["loss"]["sk_sigmoid"])[:6]
        print(f"\nworst cells of {k} against scikit-learn's sigmoid:")
        for c in worst:
            print(f"  {c['set']} | {c['model']} | {c['rows']} rows | seed {c['seed']}: "
                  + ", ".join(f"{a} {b:.3f}" for a, b in c["loss"].items()))


def tiny_main(argv: list[str]) -> None:
    """``--only tiny``: 27-60 training rows, both wrappers beside scikit-learn's sigmoid."""
    import json

    seeds = (0, 1, 2) if "--seed" not in argv else (int(argv[argv.index("--seed") + 1]),)
    models = tiny_models()
    if "--models" in argv:
        models = {k: models[k] for k in argv[argv.index("--models") + 1].split(",")}
    cells = []
    for name, X, y in tiny_sets():
        X = np.asarray(X, dtype=float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        k = int(yi.max()) + 1
        sizes = (len(yi) // 2,) if len(yi) < 120 else TINY_ROWS
        for seed in seeds:
            for n_train in sizes:
                idx = np.random.default_rng(seed).permutation(len(yi))
                tr, te = idx[:n_train], idx[n_train:][:2000]
                if np.bincount(yi[tr], minlength=k).min() < 5:
                    continue  # fewer rows of a class than scikit-learn's five folds
                for mname, model in models.items():
                    try:
                        c = tiny_cell(model, X, yi, tr, te)
                    except Exception as exc:  # noqa: BLE001 - counted and shown
                        print(f"CRASH {name} | {mname} | {n_train}: {type(exc).__name__}: {exc}")
                        continue
                    c.update({"set": name, "model": mname, "rows": n_train, "seed": seed})
                    cells.append(c)
                    print(f"{name} | {mname} | {n_train} | seed {seed} | {c['method']} "
                          f"{c['cw_with']}: "
                          + ", ".join(f"{a} {b:.4f}" for a, b in c["loss"].items()), flush=True)
    if "--out" in argv:
        Path(argv[argv.index("--out") + 1]).write_text(json.dumps(cells))
    tiny_summary(cells)


def main(argv: list[str]) -> None:
    if "--only" in argv and argv[argv.index("--only") + 1] == "tiny":
        tiny_main(argv)
        return
    if "--only" in argv and argv[argv.index("--only") + 1] == "fold-check":
        fold_check_main(argv)
        return
    if "--only" in argv and argv[argv.index("--only") + 1] == "cost":
        cost_main(argv)
        return
    if "--only" in argv and argv[argv.index("--only") + 1] == "cost-multiclass":
        cost_multiclass_main(argv)
        return
    quick = "--quick" in argv
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else "grid"
    seed = int(argv[argv.index("--seed") + 1]) if "--seed" in argv else 0
    cells = []
    for name, X, y in data(which, quick):
        X = np.asarray(X, dtype=float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        k = int(yi.max()) + 1
        for n_train in (100,) if quick else (100, 300):
            if len(yi) < n_train + 100:
                continue
            idx = np.random.default_rng(seed).permutation(len(yi))
            tr, te = idx[:n_train], idx[n_train:][:3000]
            if np.bincount(yi[tr], minlength=k).min() < 5:
                continue  # fewer rows of a class than folds: scikit-learn refuses
            for mname, model in base_models(quick).items():
                try:
                    loss, info = one_cell(model, X, yi, tr, te, "--isotonic" in argv,
                                          "--methods" in argv)
                except Exception as exc:  # noqa: BLE001 - counted and shown
                    print(f"CRASH {name} | {mname} | {n_train}: {type(exc).__name__}: {exc}")
                    cells.append({"set": name, "model": mname, "rows": n_train, "crash": 1,
                                  "loss": {}, "exact01": False, "method": "-"})
                    continue
                cells.append({"set": name, "model": mname, "rows": n_train, "loss": loss,
                              **info})
                print(f"{name} | {mname} | {n_train} rows | {info['method']}: "
                      + ", ".join(f"{a} {b:.4f}" for a, b in loss.items()), flush=True)
    summary([c for c in cells if c["loss"]] + [c for c in cells if not c["loss"]])


if __name__ == "__main__":
    main(sys.argv[1:])
