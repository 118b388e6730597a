"""Where ``feature_mixture_misfit`` says it has no power, and its level where it has enough.

Batches drawn *by class* without replacement from bundled sets (prior shift holds: the check
should fire at about its 1 % level), as in ``benchmarks/shift_feature_check.py`` (its
``load_sets``, ``_shares`` and ``_draw_by_class``), at x0.5, x1 and x2 the labelled share of
one class, with the set's labelled rows and with few of them (40, at least 2 a class). Per cell:
the check's combined p-value, its ``power`` figure (a rank test on Kish's effective rows against
a half-SD slide of one column, Noether 1987) and whether ``FeatureCheckPowerWarning`` came.
Reported per set and labelled size: batches, the share with power below 0.5, the share warned,
whether the warning came exactly where power < 0.5 and nothing was found, and the share below
1 % among the batches with enough power (the p-values are those of the check before the power
figure was added: only fields and a warning were added).

Run from the repository root::

    nice python benchmarks/feature_check_power_level.py --draws 10 --quick
    nice python benchmarks/feature_check_power_level.py --draws 20

Results: docs/evidence/prior_shift_log.md, "The feature check's power on few labelled rows".
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

import numpy as np  # noqa: E402
from shift_feature_check import _draw_by_class, _shares, load_sets  # noqa: E402

from probwrap.shift import FeatureCheckPowerWarning, feature_mixture_misfit  # noqa: E402

FEW = 40


def _labelled(rng, y, n):
    idx = rng.permutation(y.size)
    first = np.concatenate([idx[y[idx] == c][:2] for c in np.unique(y)])
    rest = idx[~np.isin(idx, first)]
    lab = np.concatenate([first, rest[: n - first.size]])
    return lab, np.setdiff1d(idx, lab)


def run(sets: dict, draws: int) -> list[dict]:
    out = []
    for name, s in sets.items():
        X, y = s["X"], s["y"]
        for n_lab in (s["n_lab"], FEW):
            for size in s["sizes"]:
                for mult in (0.5, 1.0, 2.0):
                    for seed in range(draws):
                        rng = np.random.default_rng([seed, int(mult * 10), size, n_lab])
                        lab, pool = _labelled(rng, y, n_lab)
                        src = np.bincount(y[lab], minlength=y.max() + 1) / lab.size
                        b = _draw_by_class(rng, pool, y, _shares(src, s["target"], mult), size)
                        if b is None:
                            continue
                        with warnings.catch_warnings(record=True) as caught:
                            warnings.simplefilter("always")
                            r = feature_mixture_misfit(X[lab], y[lab], X[b])
                        out.append(dict(
                            set=name, n_lab=n_lab, size=size, mult=mult, p=r.combined_pvalue,
                            power=r.power, n_l=r.effective_rows[1],
                            warned=any(issubclass(w.category, FeatureCheckPowerWarning)
                                       for w in caught)))
    return out


def report(rows: list[dict]) -> None:
    import pandas as pd

    d = pd.DataFrame(rows)
    print("set | labelled rows | batches | power < 0.5 | warned | warned exactly there | "
          "p < 0.01 with power >= 0.5 | p < 0.01 with power < 0.5 | effective labelled rows")
    for (s, n), g in d.groupby(["set", "n_lab"], sort=False):
        low = g.power < 0.5
        exact = bool((g.warned == (low & (g.p >= 0.01))).all())
        ok = g[~low]
        print(f"{s} | {n} | {len(g)} | {low.mean():.3f} | {g.warned.mean():.3f} | {exact} | "
              f"{(ok.p < 0.01).mean() if len(ok) else float('nan'):.3f} ({len(ok)}) | "
              f"{(g[low].p < 0.01).mean() if low.any() else float('nan'):.3f} ({int(low.sum())}) | "
              f"{g.n_l.min():.1f}-{g.n_l.max():.1f}")
    low = d.power < 0.5
    print(f"all | | {len(d)} | {low.mean():.3f} | {d.warned.mean():.3f} | "
          f"{bool((d.warned == (low & (d.p >= 0.01))).all())} | {(d[~low].p < 0.01).mean():.4f} "
          f"({int((~low).sum())}) | {(d[low].p < 0.01).mean():.4f} ({int(low.sum())}) |")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--draws", type=int, default=20)
    ap.add_argument("--quick", action="store_true", help="breast cancer and Default only")
    a = ap.parse_args()
    t0 = time.perf_counter()
    report(run(load_sets(a.quick), a.draws))
    print(f"{time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
