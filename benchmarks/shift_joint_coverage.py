"""Coverage of the per-class and the all-classes-at-once intervals of ``PriorShiftWrapper.adapt``
for more than two classes (session 23).

``target_prior_interval_each_class_`` holds each class share with probability
``confidence_level``, one class at a time; ``target_prior_interval_all_classes_`` is built the same
way at the per-share level ``1 - (1 - level) / k`` (Bonferroni; Goodman 1965) so that all ``k``
shares are held at once. Both come from the same ``adapt`` call; this script measures, at 95 %:

* ``real``: the multiclass cells of ``benchmarks/shift_real_hunt22.py`` (Ecdat Yogurt, Cracker,
  Catsup, Heating, modeldata Sacramento, statsmodels' modechoice; logistic regression, forest or
  naive Bayes; frozen and refit wrappers; no shift and two Dirichlet moves), with the hunt's own
  splits and draws (its functions are imported);
* ``sim``: simulations with known priors at ``n_labelled, n_unlabelled`` in {500, 2000} (all
  four pairs), a frozen logistic regression, no shift and one shift:
  ``gauss4`` (four Gaussian classes in five dimensions, source shares 0.4/0.3/0.2/0.1, shifted
  to 0.1/0.2/0.3/0.4), ``wine`` (scikit-learn's wine data, three classes, shifted from the
  data's own shares to 0.6/0.25/0.15), ``digits`` (scikit-learn's digits, ten classes, the
  source shares uniform, shifted to a Dirichlet draw fixed by the seed). For wine and digits
  the model is fitted on a third of the rows and the labelled and unlabelled rows are both
  drawn *with replacement* from the same per-class pool of the other rows, so the class-
  conditional distributions of the two samples are exactly the pool's and the prior shift is
  exact (drawing only the unlabelled rows from a pool would add its own sampling error, see
  docs/prior_shift.md, the session-22 hunt).

Per cell: per-class coverage (mean over classes and the worst class), all-classes coverage,
of the unlabelled rows' own class shares (as the hunt scores them) and, in the simulations, also
of the shares they were drawn from (the population prior the intervals estimate),
mean width, and the share of cells where ``adapt`` warned.

Run: nice python benchmarks/shift_joint_coverage.py [--reps 300] [--seeds 4] [--only sim|real]
     [--out FILE.csv]
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.datasets import load_digits, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper

LEVEL = 0.95


def _record(psw, truth, population=None, **keys) -> dict:
    """Coverage of the unlabelled rows' own class shares ``truth`` (``each_*``, ``all_*``) and,
    in the simulations, of the shares they were drawn from (``pop_each_*``, ``pop_all_*``)."""
    each = np.asarray(psw.target_prior_interval_each_class_, float)
    every = np.asarray(psw.target_prior_interval_all_classes_, float)
    out = dict(keys)
    if population is not None:
        for name, iv in (("pop_each", each), ("pop_all", every)):
            held = (iv[:, 0] - 1e-9 <= population) & (population <= iv[:, 1] + 1e-9)
            out[f"{name}_cls"] = float(held.mean())
            out[f"{name}_joint"] = bool(held.all())
            out[f"{name}_rarest"] = bool(held[int(np.argmin(psw.source_prior_))])
    for name, iv in (("each", each), ("all", every)):
        held = (iv[:, 0] - 1e-9 <= truth) & (truth <= iv[:, 1] + 1e-9)
        out[f"{name}_cls"] = float(held.mean())          # share of classes held
        out[f"{name}_joint"] = bool(held.all())          # every class at once
        out[f"{name}_width"] = float(np.mean(iv[:, 1] - iv[:, 0]))
        out[f"{name}_rarest"] = bool(held[int(np.argmin(psw.source_prior_))])
        # would ImprecisePriorWarning's test (a share's interval reaching more than 0.25 from
        # the estimate) fire on this interval?
        est = np.asarray(psw.target_prior_, float)
        out[f"{name}_far"] = bool(np.max(np.maximum(est - iv[:, 0], iv[:, 1] - est)) > 0.25)
        for c in range(truth.shape[0]):
            out[f"{name}_held{c}"] = bool(held[c])
    out["k"] = truth.shape[0]
    return out


# -- simulations ----------------------------------------------------------------------------
def _gauss(rng_model):
    """Four Gaussian classes in five dimensions (means on a simplex-like layout, unit
    covariance); returns a sampler ``draw(counts, rng) -> (X, y)`` and a fitted model."""
    means = np.array([[0, 0, 0, 0, 0], [1.5, 0, 0, 0, 0], [0, 1.5, 0, 0, 0],
                      [0.75, 0.75, 1.2, 0, 0]], float)

    def draw(counts, rng):
        X = np.vstack([rng.normal(means[c], 1.0, size=(n, 5)) for c, n in enumerate(counts)])
        y = np.repeat(np.arange(len(counts)), counts)
        return X, y

    Xa, ya = draw([1000, 1000, 1000, 1000], rng_model)
    model = LogisticRegression(max_iter=2000).fit(Xa, ya)
    return draw, model


def _pooled(X, y, rng_model):
    """Model on a third of the rows (stratified); sampler drawing with replacement from the
    per-class pool of the other rows."""
    classes = np.unique(y)
    fit_rows, pool = [], {}
    for c in classes:
        idx = rng_model.permutation(np.flatnonzero(y == c))
        cut = len(idx) // 3
        fit_rows += idx[:cut].tolist()
        pool[c] = idx[cut:]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(
        X[fit_rows], y[fit_rows])

    def draw(counts, rng):
        idx = np.concatenate([rng.choice(pool[c], n, replace=True)
                              for c, n in zip(classes, counts, strict=True)])
        return X[idx], y[idx]

    return draw, model


def _counts(shares, n, rng):
    return rng.multinomial(n, shares)


def simulate(reps: int, rows: list) -> None:
    Xw, yw = load_wine(return_X_y=True)
    Xd, yd = load_digits(return_X_y=True)
    worlds = {
        "gauss4": (_gauss(np.random.default_rng(1)),
                   np.array([0.4, 0.3, 0.2, 0.1]), np.array([0.1, 0.2, 0.3, 0.4])),
        "wine": (_pooled(Xw, yw, np.random.default_rng(2)),
                 np.bincount(yw) / len(yw), np.array([0.6, 0.25, 0.15])),
        "digits": (_pooled(Xd, yd, np.random.default_rng(3)),
                   np.full(10, 0.1), np.random.default_rng(4).dirichlet(np.full(10, 3.0))),
    }
    for world, ((draw, model), src, shifted) in worlds.items():
        for n_lab in (500, 2000):
            for n_unl in (500, 2000):
                for kind, target in (("none", src), ("shift", shifted)):
                    t0 = time.time()
                    for rep in range(reps):
                        rng = np.random.default_rng([rep, n_lab, n_unl, len(src)])
                        # both samples multinomial draws of their class counts from the shares
                        Xl, yl = draw(_counts(src, n_lab, rng), rng)
                        Xu, yu = draw(_counts(target, n_unl, rng), rng)
                        truth = np.bincount(yu, minlength=len(src)) / len(yu)
                        psw = PriorShiftWrapper(FrozenEstimator(model), random_state=rep)
                        with warnings.catch_warnings(record=True) as ws:
                            warnings.simplefilter("always")
                            try:
                                psw.fit(Xl, yl).adapt(Xu)
                            except ValueError as e:  # a class missing from the labelled draw
                                print(f"  skip {world} {rep}: {e}"[:160])
                                continue
                        warned = any(not issubclass(x.category, DeprecationWarning) for x in ws)
                        rows.append(_record(psw, truth, target, part="sim", set=world, model="lr",
                                            variant="frozen", kind=kind, n_lab=n_lab,
                                            n_unl=n_unl, rep=rep, warned=warned))
                    g = pd.DataFrame([r for r in rows if r.get("set") == world
                                      and r["n_lab"] == n_lab and r["n_unl"] == n_unl
                                      and r["kind"] == kind])
                    print(f"{world:7s} lab {n_lab:4d} unl {n_unl:4d} {kind:5s} "
                          f"each: class {g.each_cls.mean():.3f} all {g.each_joint.mean():.3f} "
                          f"width {g.each_width.mean():.4f} | all-at-once: class "
                          f"{g.all_cls.mean():.3f} all {g.all_joint.mean():.3f} width "
                          f"{g.all_width.mean():.4f}; drawn-from shares: each {g.pop_each_cls.mean():.3f}"
                          f" all {g.pop_each_joint.mean():.3f} | all-at-once {g.pop_all_cls.mean():.3f}"
                          f" all {g.pop_all_joint.mean():.3f}  ({len(g)}, {time.time() - t0:.0f} s)",
                          flush=True)


# -- the session-22 hunt's multiclass cells -------------------------------------------------
def real(seeds: int, rows: list) -> None:
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import shift_real_hunt22 as h
    from sklearn.metrics import roc_auc_score

    for name, X, y, models, _weighted in h.sets():
        classes = np.unique(y)
        k = len(classes)
        if k <= 2:
            continue
        for seed in range(seeds):
            for mname in models:
                A, B, C = h.split3(y, seed)
                if min(np.sum(y[B] == c) for c in classes) < 1:
                    continue
                model = h.make_model(mname).fit(X.iloc[A], y[A])
                auc = float(roc_auc_score(y[C], model.predict_proba(X.iloc[C]),
                                          multi_class="ovr", labels=classes))
                rng_t = np.random.default_rng([seed, 11])
                kinds = ["none", "dir1", "dir2"]
                shares_of = {kd: None for kd in kinds}
                for vname, psw, fit_rows in (
                        ("frozen", PriorShiftWrapper(FrozenEstimator(model), random_state=seed), B),
                        ("refit", PriorShiftWrapper(h.make_model(mname), random_state=seed),
                         np.concatenate([A, B]))):
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        psw.fit(X.iloc[fit_rows], y[fit_rows])
                    for kd in kinds:
                        if shares_of[kd] is None:
                            shares_of[kd] = h.target_shares(
                                np.array([np.mean(y[B] == c) for c in classes]), kd, rng_t)
                        shares = shares_of[kd]
                        size = h.draw_size(y[C], classes, shares)
                        b = C[h.draw(y[C], classes, shares, size,
                                     np.random.default_rng([seed, 13, kinds.index(kd)]))]
                        yu = y[b]
                        truth = np.array([np.mean(yu == c) for c in classes])
                        with warnings.catch_warnings(record=True) as ws:
                            warnings.simplefilter("always")
                            psw.adapt(X.iloc[b].reset_index(drop=True))
                        warned = any(not issubclass(x.category, DeprecationWarning) for x in ws)
                        r = _record(psw, truth, part="real", set=name, model=mname,
                                    variant=vname, kind=kd, n_lab=len(fit_rows), n_unl=len(yu),
                                    rep=seed, warned=warned, auc=auc)
                        rows.append(r)
                        print(f"{name[:26]:26s} {mname} {vname:6s} s{seed} {kd:4s} "
                              f"each {r['each_cls']:.2f}/{str(r['each_joint'])[0]} "
                              f"w {r['each_width']:.3f} | all {r['all_cls']:.2f}/"
                              f"{str(r['all_joint'])[0]} w {r['all_width']:.3f}", flush=True)


def summarise(df: pd.DataFrame) -> None:
    def line(label, g):
        held = [c for c in g.columns if c.startswith("each_held")]
        # coverage of each class (column c: the class of index c) over the cells that have it
        worst = float(g[held].astype(float).mean().min())
        held_a = [c for c in g.columns if c.startswith("all_held")]
        worst_a = float(g[held_a].astype(float).mean().min())
        print(f"  {label:34s} n {len(g):4d} | each: per class {g.each_cls.mean():.3f} (worst "
              f"class {worst:.3f}) all at once {g.each_joint.mean():.3f} width "
              f"{g.each_width.mean():.4f} | all-at-once interval: per class "
              f"{g.all_cls.mean():.3f} (worst {worst_a:.3f}) all at once "
              f"{g.all_joint.mean():.3f} width {g.all_width.mean():.4f} "
              f"(x{g.all_width.mean() / g.each_width.mean():.2f}); rarest class "
              f"{g.each_rarest.astype(float).mean():.3f} / {g.all_rarest.astype(float).mean():.3f}"
              + ("" if "each_far" not in g else
                 f"; reach > 0.25 {g.each_far.astype(float).mean():.3f} / "
                 f"{g.all_far.astype(float).mean():.3f}"))
        if "pop_each_joint" in g and g.pop_each_joint.notna().any():
            print(f"  {'':34s}          drawn-from shares: each: per class "
                  f"{g.pop_each_cls.mean():.3f} all at once {g.pop_each_joint.astype(float).mean():.3f}"
                  f" rarest {g.pop_each_rarest.astype(float).mean():.3f} | all-at-once "
                  f"interval: per class {g.pop_all_cls.mean():.3f} all at once "
                  f"{g.pop_all_joint.astype(float).mean():.3f} rarest "
                  f"{g.pop_all_rarest.astype(float).mean():.3f}")

    print("\n== summary (95 %)")
    for part, g in df.groupby("part"):
        print(f"{part}:")
        line("all cells", g)
        for key, gg in g.groupby(["set"] if part == "real" else ["set", "n_lab", "n_unl"]):
            line(" ".join(str(x) for x in (key if isinstance(key, tuple) else (key,))), gg)
        for kd, gg in g.groupby("kind"):
            line(f"kind {kd}", gg)
        if part == "real":
            for v, gg in g.groupby("variant"):
                line(f"variant {v}", gg)
            miss = g[~g.all_joint.astype(bool)]
            print(f"  all-at-once misses {len(miss)}, without a warning "
                  f"{int((~miss.warned.astype(bool)).sum())}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--reps", type=int, default=300)
    ap.add_argument("--seeds", type=int, default=4)
    ap.add_argument("--only", choices=["sim", "real"])
    ap.add_argument("--out")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    a = ap.parse_args()
    if a.summary:
        summarise(pd.read_csv(a.summary))
        return
    rows: list[dict] = []
    t0 = time.time()
    if a.only != "sim":
        real(a.seeds, rows)
    if a.only != "real":
        simulate(a.reps, rows)
    df = pd.DataFrame(rows)
    if a.out:
        df.to_csv(a.out, index=False)
    summarise(df)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
