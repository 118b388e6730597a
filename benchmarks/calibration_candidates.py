"""What one candidate map adds to ``CalibrationWrapper(method="auto")`` on multiclass sets.

For every multiclass calibration draw, ``auto`` is fitted twice on the same rows: with its
default candidates plus the candidate named by ``--candidate`` (default ``beta``, one-vs-rest),
and with the default candidates without it; both are scored by test log loss beside
scikit-learn's ``CalibratedClassifierCV`` (sigmoid, isotonic and, from scikit-learn 1.8,
temperature) on the same rows, as in ``benchmarks/calibration.py``. Printed: how often ``auto``
chose the candidate; per cell (data set, base model, rows) the ratio of ``auto``'s mean test log
loss to scikit-learn's best method in hindsight, with and without the candidate (geometric mean,
worst cell, by size); and on the draws where the choice changed, the test log loss without the
candidate over the loss with it (geometric mean, worst, best). This is the evidence behind
leaving a candidate out of ``auto``'s defaults (docs/calibration.md, "Speed").

Data, all bundled with the packages (nothing downloaded):

* ``--sets grid`` (default): the multiclass sets of ``benchmarks/calibration.py`` (scikit-learn's
  iris, wine, digits; statsmodels' anes96 party id, randhie visits, modechoice), its five base
  models, 40, 100, 200 and 500 calibration rows, 10/10/3/3 draws (about 5 minutes of CPU);
* ``--sets fresh``: the multiclass sets of ``benchmarks/fresh_data_sweep.py`` (palmerpenguins,
  pingouin, lifelines, vega_datasets, sktime; needs ``pip install -e ".[sweep]"``), 100, 250
  and 500 rows, 4/3/3 draws (about 2 minutes).

Run: ``nice python benchmarks/calibration_candidates.py --sets fresh --candidate beta``.
"""

from __future__ import annotations

import sys
import warnings
from collections import Counter, defaultdict
from pathlib import Path

import numpy as np
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import KFold

sys.path.insert(0, str(Path(__file__).parent))
import calibration as B  # noqa: E402

from probwrap import CalibrationWrapper  # noqa: E402
from probwrap._calibration_auto import CALIBRATION_METHODS  # noqa: E402


def candidate_lists(frozen, n_rows: int, n_classes: int, extra: str) -> tuple[list, list]:
    """``auto``'s default candidates for these rows, with and without ``extra`` (in the order
    of ``CALIBRATION_METHODS``, which breaks ties of the one-standard-error rule)."""
    default = CalibrationWrapper(frozen)._auto_names(n_rows, n_classes)
    with_it = [nm for nm in CALIBRATION_METHODS if nm in default or nm == extra]
    return with_it, [nm for nm in with_it if nm != extra]


def sets_and_sizes(which: str):
    if which == "fresh":
        import fresh_data_sweep as F

        return F.fresh_data_sets(), {100: 4, 250: 3, 500: 3}
    return B.small_sets(False), dict(B.DRAWS)


def run(which: str, extra: str) -> list[dict]:
    sets, draws = sets_and_sizes(which)
    out = []
    for name, X, y in sets:
        classes, y_index = np.unique(y, return_inverse=True)
        if len(classes) < 3:
            continue
        for seed in range(max(draws.values())):
            X_tr, y_tr, X_pool, y_pool, X_te, y_te = B._draw(X, y_index, seed)
            for model_name, model in B.base_models(False, seed):
                B._fit_base(model, X_tr, classes[y_tr])
                frozen = FrozenEstimator(model)
                for n_cal, n_draws in draws.items():
                    cal = B._calibration_rows(X_pool, y_pool, n_cal, seed) if seed < n_draws else None
                    if cal is None:
                        continue
                    X_cal, y_cal = cal[0], classes[cal[1]]
                    rec = {"cell": (name, model_name, n_cal)}
                    lists = candidate_lists(frozen, len(y_cal), len(classes), extra)
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        try:  # scikit-learn's 2-fold split needs two rows of every class
                            for m in B.SK_METHODS:
                                sk = CalibratedClassifierCV(frozen, method=m, cv=KFold(2))
                                rec[m] = B.log_loss(y_te, sk.fit(X_cal, y_cal).predict_proba(X_te))
                        except ValueError:
                            continue
                        for key, names in zip(("with", "without"), lists, strict=True):
                            auto = CalibrationWrapper(
                                frozen, method="auto", candidates=names, random_state=seed
                            ).fit(X_cal, y_cal)
                            rec[key] = (auto.method_, B.log_loss(y_te, auto.predict_proba(X_te)))
                    out.append(rec)
        print(f"  {name}: {len(out)} draws so far", flush=True)
    return out


def report(recs: list[dict], extra: str) -> None:
    cells = defaultdict(list)
    for r in recs:
        cells[r["cell"]].append(r)
    print(f"\n{len(recs)} multiclass draws in {len(cells)} cells")
    for key in ("with", "without"):
        ratios = {}
        for cell, rs in cells.items():
            best = min(np.mean([r[m] for r in rs]) for m in B.SK_METHODS)
            ratios[cell] = np.mean([r[key][1] for r in rs]) / best
        worst = max(ratios, key=ratios.get)
        by_size = defaultdict(list)
        for cell, v in ratios.items():
            by_size[cell[2]].append(v)
        chosen = Counter(r[key][0] for r in recs)
        print(f"{key} {extra}: auto / scikit-learn's best, geometric mean "
              f"{B._gmean(list(ratios.values())):.4f}, worst cell {ratios[worst]:.3f} "
              f"({', '.join(map(str, worst))}); by rows "
              + ", ".join(f"{n}: {B._gmean(v):.4f}" for n, v in sorted(by_size.items()))
              + f"; chosen {dict(chosen.most_common())}")
    changed = [r for r in recs if r["with"][0] != r["without"][0]]
    if changed:
        lr = np.log([r["without"][1] / r["with"][1] for r in changed])
        print(f"choice changed on {len(changed)} draws: test log loss without / with {extra}: "
              f"geometric mean {np.exp(lr.mean()):.4f}, worst {np.exp(lr.max()):.3f}, best "
              f"{np.exp(lr.min()):.3f}; "
              + ", ".join(f"{a} -> {b} x{c}" for (a, b), c in Counter(
                  (r["with"][0], r["without"][0]) for r in changed).most_common()))


def main(argv: list[str]) -> None:
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else "grid"
    extra = argv[argv.index("--candidate") + 1] if "--candidate" in argv else "beta"
    if extra not in CALIBRATION_METHODS:
        raise SystemExit(f"--candidate must be one of {tuple(CALIBRATION_METHODS)}")
    print(f"auto with and without {extra!r}; sets: {which}")
    report(run(which, extra), extra)


if __name__ == "__main__":
    main(sys.argv[1:])
