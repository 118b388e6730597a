"""Narrower rules for the multiclass interval's class-spread floor, measured on the session-28
hunt's multiclass row sets (``Exam``, ``UN``, ``hpc_cv``; ``shift_real_hunt24.one``'s cells).

Since session 29 each labelled class's per-row covariance of the shift test's score is scaled up
to the one the calibrated posteriors imply (``probwrap.shift._analytic.floor_class_spread``).
This script fits each cell's wrappers once and adapts the first of the pair once per rule, the
rule swapped in for the floor (the fit's raw moments are kept and the rule applied when the
interval reads them; a refit model's fold-weighted moments go through the same rule):

* ``own``: no floor (before session 29); ``floor``: today's (scale by the largest diagonal ratio);
* ``tA``: the floor only where a one-sided chi-square test of the class's variance against the
  implied one rejects at level A (statistic ``nu / f``, ``nu`` = the class's effective rows
  less 1, ``f`` the diagonal ratio; the smallest p times k - 1, Bonferroni);
* ``loA``: scale only up to the implied spread times the lower A / (k - 1) chi-square point over
  ``nu`` (the least spread the test would not reject);
* ``shN``: shrink toward the implied spread with weight ``n_c / (n_c + N)`` on the class's own
  (scaled up only); ``cA_N``: the larger of ``tA`` and ``shN``;
* ``diag``: raise only the coordinates below the implied (``S C S``, ``S`` = sqrt of the
  diagonal ratios above 1); ``eig``: the generalised-eigenvalue floor (own^1/2 V max(1, L) V^T
  own^1/2).

Coverage is of all class shares at once; the width is that of the reported share; a miss is
quiet when ``adapt`` warned nothing but ``NoShiftHarmWarning`` (which speaks of the move).

Run: nice python benchmarks/shift_class_spread_rules.py --seeds 1 2 --out R.csv   (about
     4 minutes per set group at load 12; ``--rules own floor t50`` to choose)
     python benchmarks/shift_class_spread_rules.py --summary R.csv
Results: docs/evidence/prior_shift_log.md, "Narrower class-spread floors, measured (session 30)".
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
import shift_real_hunt24 as h24
import shift_real_hunt28 as h28
from scipy import stats
from shift_real_hunt24 import (
    MIN_UNLABELLED,
    _warnings,
    draw,
    draw_size,
    fit_pair,
    kinds_for,
    labelled,
    split3,
    target_shares,
)
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap.shift import _analytic
from probwrap.shift import _estimator as est_mod


def _ratios(covs, implied, c):
    own = np.diag(covs[c])
    with np.errstate(divide="ignore", invalid="ignore"):
        return own, np.where(own > 0, np.diag(implied[c]) / np.maximum(own, 1e-300), 1.0)


def rule_own(m, implied):
    return m


def rule_floor(m, implied):
    return _analytic.floor_class_spread(m, implied)


def make_test(alpha, partial=False):
    def rule(m, implied):
        means, covs, n_c = m
        covs = np.array(covs, float, copy=True)
        for c in range(covs.shape[0]):
            own, r = _ratios(covs, implied, c)
            if not np.any(own > 0):
                covs[c] = implied[c]
                continue
            nu, f = max(float(n_c[c]) - 1.0, 1.0), float(np.max(r))
            if not (np.isfinite(f) and f > 1):
                continue
            if partial:
                g = f * stats.chi2.ppf(alpha / r.size, nu) / nu
                covs[c] = covs[c] * max(g, 1.0)
            elif min(1.0, stats.chi2.cdf(nu / f, nu) * r.size) < alpha:
                covs[c] = covs[c] * f
        return means, covs, n_c
    return rule


def make_shrink(n0):
    def rule(m, implied):
        means, covs, n_c = m
        covs = np.array(covs, float, copy=True)
        for c in range(covs.shape[0]):
            own, r = _ratios(covs, implied, c)
            if not np.any(own > 0):
                covs[c] = implied[c]
                continue
            lam = float(n_c[c]) / (float(n_c[c]) + n0)
            g = float(np.max(lam + (1 - lam) * r))
            if np.isfinite(g) and g > 1:
                covs[c] = covs[c] * g
        return means, covs, n_c
    return rule


def make_comb(alpha, n0):
    test, shrink = make_test(alpha), make_shrink(n0)

    def rule(m, implied):
        a, b = test(m, implied), shrink(m, implied)
        covs = np.array(a[1], float, copy=True)
        for c in range(covs.shape[0]):
            if np.trace(b[1][c]) > np.trace(covs[c]):
                covs[c] = b[1][c]
        return a[0], covs, a[2]
    return rule


def rule_diag(m, implied):
    means, covs, n_c = m
    covs = np.array(covs, float, copy=True)
    for c in range(covs.shape[0]):
        own, r = _ratios(covs, implied, c)
        if not np.any(own > 0):
            covs[c] = implied[c]
            continue
        s = np.sqrt(np.maximum(np.where(np.isfinite(r), r, 1.0), 1.0))
        covs[c] = covs[c] * np.outer(s, s)
    return means, covs, n_c


def rule_eig(m, implied):
    means, covs, n_c = m
    covs = np.array(covs, float, copy=True)
    for c in range(covs.shape[0]):
        vals, vecs = np.linalg.eigh(covs[c])
        if not np.all(vals > 1e-12 * max(vals.max(), 1e-300)):
            covs[c] = _analytic.floor_class_spread(m, implied)[1][c]
            continue
        half = vecs @ np.diag(np.sqrt(vals)) @ vecs.T
        inv_half = vecs @ np.diag(1 / np.sqrt(vals)) @ vecs.T
        lam, v = np.linalg.eigh(inv_half @ implied[c] @ inv_half)
        covs[c] = half @ v @ np.diag(np.maximum(lam, 1.0)) @ v.T @ half
    return means, covs, n_c


def rules() -> dict:
    """Every rule by name (built when first asked for)."""
    if not RULES:
        RULES.update({"own": rule_own, "floor": rule_floor, "diag": rule_diag, "eig": rule_eig})
        RULES.update({f"t{a:02d}": make_test(a / 100) for a in (5, 10, 25, 35, 50, 65)})
        RULES.update({f"lo{a:02d}": make_test(a / 100, partial=True) for a in (5, 25, 50)})
        RULES.update({f"sh{n}": make_shrink(n) for n in (10, 20, 40)})
        RULES.update({f"c{a}_{n}": make_comb(a / 100, n)
                      for a, n in ((25, 40), (10, 40), (25, 20))})
    return RULES


RULES: dict = {}
CURRENT = ["floor"]


def _floored(self, moments, weights=None):
    """``PriorEstimator._floored`` with the current rule; the fit's raw moments are kept."""
    source = self._source_rows()
    if moments is None or source is None:
        return moments
    w = source[2] if weights is None else weights
    implied = _analytic.implied_class_covs(self.calibrate(source[0]), w, self.source_prior_)
    if weights is None:
        self._rule_raw = (moments, implied)
    return rules()[CURRENT[0]](moments, implied)


_moments = est_mod.PriorEstimator._class_score_moments


def _class_score_moments(self):
    raw = getattr(self, "_rule_raw", None)
    return rules()[CURRENT[0]](*raw) if raw is not None else _moments(self)


def install() -> None:
    est_mod.PriorEstimator._floored = _floored
    est_mod.PriorEstimator._class_score_moments = _class_score_moments


def one(name, X, y, mname, seed, rows, n_labelled, rules):
    """``shift_real_hunt24.one``'s cells, every rule on each."""
    classes = np.unique(y)
    A, B, C = split3(y, seed)
    model = h24.make_model(mname).fit(X.iloc[A], y[A])
    pool = np.concatenate([B, C])
    source = np.array([np.mean(y[pool] == c) for c in classes])
    kinds, j = kinds_for(source)
    rng_t = np.random.default_rng([seed, 11])
    shares = {kd: target_shares(source, kd, j, rng_t) for kd in kinds}
    for n_lab in sorted({min(n, len(B)) for n in n_labelled}):
        L = labelled(B, y[B], classes, n_lab, np.random.default_rng([seed, 17, n_lab]))
        U = np.setdiff1d(pool, L)
        batches = {}
        for i, kd in enumerate(kinds):
            size = draw_size(y[U], classes, shares[kd])
            if size >= MIN_UNLABELLED:
                batches[kd] = U[draw(y[U], classes, shares[kd], size,
                                     np.random.default_rng([seed, 13, n_lab, i]))]
        for vname in ("frozen", "refit"):
            def make(vname=vname):
                base = FrozenEstimator(model) if vname == "frozen" else h24.make_model(mname)
                return PriorShiftWrapper(base, random_state=seed)
            pair = fit_pair(make, L, X, y)
            if isinstance(pair, str):
                print("CRASH", name, mname, vname, pair)
                continue
            psw = pair[0][0]
            for kd, b in batches.items():
                Xu, yu = X.iloc[b].reset_index(drop=True), y[b]
                truth = np.array([np.mean(yu == c) for c in classes])
                r = dict(set=name, model=mname, variant=vname, n_lab=len(L), seed=seed, kind=kd)
                for rn in rules:
                    CURRENT[0] = rn
                    with warnings.catch_warnings(record=True) as wa:
                        warnings.simplefilter("always")
                        psw.adapt(Xu, sample_weight=np.ones(len(Xu)))
                    iv = np.asarray(psw.target_prior_interval_, float)
                    r[f"cov_{rn}"] = bool(np.all((iv[:, 0] - 1e-9 <= truth)
                                                 & (truth <= iv[:, 1] + 1e-9)))
                    r[f"w_{rn}"] = float(iv[j, 1] - iv[j, 0])
                    r[f"warn_{rn}"] = _warnings(wa)
                rows.append(r)
                print(name[:10], mname, vname, len(L), seed, kd, " ".join(
                    f"{rn}:{int(r[f'cov_{rn}'])}/{r[f'w_{rn}']:.3f}" for rn in rules), flush=True)


def summary(df: pd.DataFrame) -> None:
    rules = [c[4:] for c in df.columns if c.startswith("cov_") and df[c].notna().all()]
    print(f"{len(df)} cells")
    for r in rules:
        cov = df[f"cov_{r}"].astype(bool)
        w = df[f"w_{r}"]
        quiet = df[f"warn_{r}"].fillna("").map(
            lambda x: set(x.split(",")) <= {"", "NoShiftHarmWarning"})
        by_set = " ".join(f"{s[:4]} {cov[df.set == s].mean():.1%}/{w[df.set == s].median():.3f}"
                          for s in df.set.unique())
        print(f"{r:7s} coverage {cov.mean():6.1%} misses {int((~cov).sum()):3d} quiet "
              f"{int((~cov & quiet).sum()):2d} median width {w.median():.3f} | {by_set}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sets", nargs="*", default=["Exam", "UN", "hpc_cv"])
    ap.add_argument("--seeds", nargs="*", type=int, default=[1, 2])
    ap.add_argument("--models", nargs="*", default=list(h28.MODELS))
    ap.add_argument("--n-labelled", nargs="*", type=int, default=[40, 150])
    ap.add_argument("--rules", nargs="*", default=list(rules()))
    ap.add_argument("--out")
    ap.add_argument("--summary", nargs="*", help="CSV files written by --out")
    a = ap.parse_args()
    if a.summary:
        summary(pd.concat([pd.read_csv(f) for f in a.summary], ignore_index=True))
        return
    h28._install_models()
    install()
    rows: list[dict] = []
    t0 = time.time()
    for name, X, y in h28.sets():
        if len(np.unique(y)) < 3 or not any(s.lower() in name.lower() for s in a.sets):
            continue
        for seed in a.seeds:
            for m in a.models:
                one(name, X, y, m, seed, rows, a.n_labelled, a.rules)
                if a.out:
                    pd.DataFrame(rows).to_csv(a.out, index=False)
    summary(pd.DataFrame(rows))
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
