"""Overdispersion or lack of fit of the map: which does the count-table check say (session 28)?

Session 27's check (``benchmarks/count_table_dispersion27.py``) warned that a count table's
groups "vary more than binomial" whenever Pearson's dispersion around a Platt map of the
held-out probabilities was above 2 (p < 0.001). It fired on 27 of 126 draws of sets whose cases
were drawn one by one, where the cause is lack of fit, not cases that share causes. Since
session 28 a flagged table is judged again around a flexible map (a natural cubic spline of the
held-out log-odds, ``table_dispersion(..., flexible=True)``; binomial there: lack of fit of the
map) and, if still flagged, with the table's numeric features beside it as linear terms
(``features=``; binomial then: lack of fit of the model); otherwise overdispersion. The warning
says which.

The same draws as session 27 (frozen logistic regression, Gaussian naive Bayes, depth-3 tree
fitted on 300 cases; 60, 300 or 1,000 other cases as a count table; two seeds; star98's
districts), each passed to ``CalibrationWrapper(method="auto")``; the warning's words are
counted. Known-truth tables, drawn on each draw's groups (their case counts and the model's
probabilities ``p``, log-odds ``t`` clipped to +-8; their features for the second step)
with a seeded generator:

- ``binomial``: binomial around ``p`` (nothing to find);
- ``lack of fit``: binomial around ``0.15 + 0.7 expit(2.5 t)``, a map a Platt map cannot
  follow (the cases independent: any "overdispersion" is wrong);
- ``beta-binomial``: around ``p`` with intra-group correlation 0.05 (overdispersed);
- ``both``: beta-binomial (0.05) around the map of ``lack of fit``.

Candidate flexible maps (``--candidates``): natural splines with 4, 5 (chosen) and 7 knots, an
isotonic fit (its level sets as parameters) and 8 bins of the log-odds; each line gives, of the
draws a Platt map flags, how many are still flagged around the candidate.

Run: ``nice python benchmarks/count_table_dispersion28.py [--candidates]``
(docs/aggregated_outcomes.md, "Overdispersion or lack of fit").
"""

from __future__ import annotations

import sys
import warnings

import numpy as np
import statsmodels.api as sm
from scipy import stats
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.isotonic import IsotonicRegression

sys.path.insert(0, __file__.rsplit("/", 1)[0])
from count_table_choices import SETS, table  # noqa: E402
from count_table_dispersion27 import load_more, models  # noqa: E402

from probwrap import CalibrationWrapper, _weights  # noqa: E402
from probwrap._heldout import feature_cells  # noqa: E402

OVER, FIT, MODEL = "vary more than binomial", "lack of fit of the map", "lack of fit of the model"


def said(caught) -> str:
    text = " ".join(str(c.message) for c in caught)
    return ("over" if OVER in text else "fit" if FIT in text else "model" if MODEL in text
            else "")


def wrapper_says(m, Xt, yt, wt) -> str:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(FrozenEstimator(m), method="auto", random_state=0).fit(
            Xt, yt, sample_weight=wt)
    return said(caught)


def check_says(p, y, w, g, features=None) -> str:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        _weights.warn_overdispersed_table(p, y, w, g, "Check", "its steps", features=features)
    return said(caught)


def groups_of(p, y, w, g, X):
    """One probability, case count and feature row per group (frozen model: one score per
    group)."""
    s, _, ww, gg, n_groups = _weights._table_arrays(p, y, w, g)
    n = np.bincount(gg, weights=ww, minlength=n_groups)
    pg = np.zeros(n_groups)
    pg[gg] = expit(s)
    Xg = np.zeros((n_groups, X.shape[1]))
    Xg[gg] = np.asarray(X, dtype=float)[np.asarray(w) > 0]
    return pg, np.round(n).astype(int), Xg


def redraw(pg, n, Xg, rate, rng, rho=None):
    if rho is not None:
        a, b = rate * (1 - rho) / rho, (1 - rate) * (1 - rho) / rho
        rate = rng.beta(np.maximum(a, 1e-3), np.maximum(b, 1e-3))
    k = rng.binomial(n, np.clip(rate, 0.0, 1.0))
    G = n.shape[0]
    w = np.concatenate([k, n - k]).astype(float)
    y = np.concatenate([np.ones(G), np.zeros(G)])
    g = np.concatenate([np.arange(G)] * 2)
    keep = w > 0
    return (np.concatenate([pg, pg])[keep], y[keep], w[keep], g[keep],
            np.concatenate([Xg, Xg])[keep])


def _pearson(q, y, w, g, n_params):
    G = int(g.max()) + 1
    o = np.bincount(g, weights=w * y, minlength=G)
    e = np.bincount(g, weights=w * q, minlength=G)
    v = np.bincount(g, weights=w * q * (1 - q), minlength=G)
    ok = v > 1e-12
    dof = int(ok.sum()) - n_params
    if dof < 3:
        return None
    x2 = float(np.sum((o[ok] - e[ok]) ** 2 / v[ok]))
    return x2 / dof, float(stats.chi2.sf(x2, dof))


def candidates(p, y, w, g):
    """Flagged (dispersion > 2, p < 0.001) around each candidate flexible map."""
    s, y, w, g, _ = _weights._table_arrays(p, y, w, g)
    out = {}
    distinct = np.unique(s)
    for K in (4, 5, 7):
        if distinct.shape[0] <= K:
            code = np.searchsorted(distinct, s)
            q = (np.bincount(code, weights=w * y) / np.bincount(code, weights=w))[code]
            out[f"spline{K}"] = _pearson(q, y, w, g, distinct.shape[0])
            continue
        knots = np.quantile(distinct, np.linspace(0, 1, K))
        basis = _weights.natural_spline_basis(s, knots)
        q = _weights._binomial_fit(basis, y, w)  # (the library's order: unpenalised first)
        if q is None:
            q = _weights._binomial_fit(basis, y, w, ridge=1e-9)
        out[f"spline{K}"] = None if q is None else _pearson(q, y, w, g, K)
    q = IsotonicRegression(out_of_bounds="clip").fit(s, y, sample_weight=w).predict(s)
    out["isotonic"] = _pearson(q, y, w, g, int(np.unique(q).shape[0]))
    if distinct.shape[0] > 8:
        edges = np.quantile(distinct, np.linspace(0, 1, 9))[1:-1]
        _, code = np.unique(np.searchsorted(edges, s, side="right"), return_inverse=True)
        q = (np.bincount(code, weights=w * y) / np.bincount(code, weights=w))[code]
        out["bins8"] = _pearson(q, y, w, g, int(code.max()) + 1)
    else:
        out["bins8"] = out["spline4"]
    return {k: v is not None and v[0] > 2 and v[1] < 1e-3 for k, v in out.items()}


KINDS = ("binomial", "lack of fit", "beta-binomial", "both")


def known_truth(pg, n, Xg, rng):
    t = np.clip(np.log(np.clip(pg, 1e-12, 1)) - np.log1p(-np.clip(pg, 0, 1 - 1e-12)), -8, 8)
    bent = 0.15 + 0.7 * expit(2.5 * t)
    return {"binomial": redraw(pg, n, Xg, expit(t), rng),
            "lack of fit": redraw(pg, n, Xg, bent, rng),
            "beta-binomial": redraw(pg, n, Xg, expit(t), rng, rho=0.05),
            "both": redraw(pg, n, Xg, bent, rng, rho=0.05)}


class Tally:
    def __init__(self):
        self.n, self.platt, self.over, self.fit, self.model = 0, 0, 0, 0, 0
        self.cand: dict[str, int] = {}

    def add(self, p, y, w, g, features=None, says=None, want_candidates=False):
        res = _weights.table_dispersion(p, y, w, g)
        flagged = _weights._flagged(res)
        says = check_says(p, y, w, g, features) if says is None else says
        self.n += 1
        self.platt += flagged
        self.over += says == "over"
        self.fit += says == "fit"
        self.model += says == "model"
        if want_candidates and flagged:
            for k, v in candidates(p, y, w, g).items():
                self.cand[k] = self.cand.get(k, 0) + v
        return says

    def line(self, label):
        cand = "".join(f", {k} {v}" for k, v in self.cand.items())
        return (f"{label}: {self.n} draws, Platt map flags {self.platt}; says overdispersion "
                f"{self.over}, lack of fit of the map {self.fit}, of the model {self.model}" + (f" | still flagged around{cand}"
                                                          if cand else ""))


def main() -> None:
    want = "--candidates" in sys.argv
    warnings.simplefilter("ignore")
    rng = np.random.default_rng(28)
    real, truth = Tally(), {k: Tally() for k in KINDS}
    still = []
    for name in SETS.split(",") + ["womensrole"]:
        X, y = load_more(name)
        here = Tally()
        for n_cal in (60, 300, 1000):
            if 300 + n_cal + 100 > len(y):
                continue
            for seed in (0, 1):
                idx = np.random.default_rng(seed).permutation(len(y))
                fit, cal = idx[:300], idx[300:300 + n_cal]
                Xt, yt, wt = table(X[cal], y[cal])
                for mname, m in models().items():
                    m.fit(X[fit], y[fit])
                    p = m.predict_proba(Xt)[:, 1]
                    g = feature_cells(Xt, wt, yt)
                    says = wrapper_says(m, Xt, yt, wt)
                    if g is None:  # (fewer than two groups: not judged)
                        here.n += 1
                        real.n += 1
                        continue
                    for t in (here, real):
                        t.add(p, yt, wt, g, says=says, want_candidates=want and t is real)
                    if says in ("over", "model"):
                        d = _weights.table_dispersion(p, yt, wt, g)
                        f = _weights.table_dispersion(p, yt, wt, g, flexible=True)
                        h = _weights.table_dispersion(p, yt, wt, g, flexible=True, features=Xt)
                        still.append(f"{name} n_cal={n_cal} seed={seed} {mname} says {says}: "
                                     f"Platt {d[0]:.3g}, flexible {f[0]:.3g}, with features "
                                     f"{'not judged' if h is None else format(h[0], '.3g')} "
                                     f"({f[2]} groups)")
                    pg, n, Xg = groups_of(p, yt, wt, g, Xt)
                    if pg.shape[0] < 10:
                        continue
                    for kind, drawn in known_truth(pg, n, Xg, rng).items():
                        truth[kind].add(*drawn, want_candidates=want)
        print(here.line(name), flush=True)
    print(real.line("all eight sets (cases drawn one by one)"))
    for kind in KINDS:
        print(truth[kind].line(f"known truth, {kind}"))
    print("flexible map still flagged on the eight sets:")
    for s in still:
        print("  " + s)
    s = sm.datasets.star98.load_pandas()
    k = s.endog["NABOVE"].to_numpy(float)
    n = (s.endog["NABOVE"] + s.endog["NBELOW"]).to_numpy(float)
    Xs = s.exog.to_numpy(float)
    star = Tally()
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
                p = m.predict_proba(Xt)[:, 1]
                star.add(p, yt, wt, feature_cells(Xt, wt, yt), says=wrapper_says(m, Xt, yt, wt),
                         want_candidates=want)
    print(star.line("star98 (districts: overdispersed)"))


if __name__ == "__main__":
    main()
