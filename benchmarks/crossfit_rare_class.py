"""Cross-fitted ``CalibrationWrapper(model)`` on 60 training rows where one class is rare.

On the tasks of ``benchmarks/unpicked_data.py`` (R data sets enumerated automatically; needs
``pip install -e ".[sweep]"``) whose prevalence is under 20 %: 60 stratified training rows
(two seeds), naive Bayes, a forest, boosting and logistic regression, the rest (at most 3,000)
as test rows. Paired on the same folds: ``auto`` as it is (Platt scaling before temperature
scaling below 20 % of the rarer class) against the order before (temperature first, by setting
the share to 0), and scikit-learn's default ``CalibratedClassifierCV(model)``. Test log loss
ratios are floored at 1e-3 nats a row. Run: ``nice python benchmarks/crossfit_rare_class.py``
(a few minutes).
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.metrics import log_loss

sys.path.insert(0, str(Path(__file__).parent))
import calibration as B  # noqa: E402
import unpicked_data as U  # noqa: E402

import probwrap._calibration_auto as A  # noqa: E402
from probwrap import CalibrationWrapper  # noqa: E402


def _gmean(a) -> float:
    return float(np.exp(np.mean(np.log(np.maximum(a, 1e-3)))))


def main() -> None:
    warnings.simplefilter("ignore")  # a sweep: the wrappers' warnings are counted elsewhere
    specs, _ = U.enumerate_all(0, verbose=False)
    sample = U.varied_sample(specs, 200, 0)
    rows = []
    for sp in sample:
        if sp["prevalence"] >= 0.2:
            continue
        try:
            X, y = U.task_data(sp)
        except Exception:  # noqa: BLE001
            continue
        for seed in range(2):
            rng = np.random.default_rng(seed)
            pos, neg = np.flatnonzero(y == 1), np.flatnonzero(y == 0)
            n_pos = max(3, int(round(60 * y.mean())))
            if len(pos) < n_pos + 10:
                continue
            tr = np.r_[rng.choice(pos, n_pos, replace=False), rng.choice(neg, 60 - n_pos, replace=False)]
            te = np.setdiff1d(np.arange(len(y)), tr)[:3000]
            for name, m in B.base_models(False, seed):
                if name == "linear SVM":
                    continue
                try:
                    new = CalibrationWrapper(clone(m), random_state=seed).fit(X[tr], y[tr])
                    A._PLATT_FIRST_MAX_MINORITY_SHARE = 0.0
                    old = CalibrationWrapper(clone(m), random_state=seed).fit(X[tr], y[tr])
                    A._PLATT_FIRST_MAX_MINORITY_SHARE = 0.2
                    sk = CalibratedClassifierCV(clone(m)).fit(X[tr], y[tr])
                except Exception as exc:  # noqa: BLE001
                    A._PLATT_FIRST_MAX_MINORITY_SHARE = 0.2
                    print("skip", sp["item"], name, type(exc).__name__, flush=True)
                    continue
                L = [log_loss(y[te], e.predict_proba(X[te])[:, 1]) for e in (new, old, sk)]
                rows.append((sp["item"], name, seed, new.method_, old.method_, *L))
        print(sp["item"], len(rows), flush=True)
    R = np.array([r[5:] for r in rows])
    chg = np.array([r[3] != r[4] for r in rows])
    print(f"{len(rows)} cells, choice changed in {chg.sum()}")
    print(f"new/old all {_gmean(np.maximum(R[:,0],1e-3)/np.maximum(R[:,1],1e-3)):.4f}; changed only {_gmean(np.maximum(R[chg,0],1e-3)/np.maximum(R[chg,1],1e-3)):.4f}, worst {np.max(R[chg,0]/R[chg,1]):.3f}, best {np.min(R[chg,0]/R[chg,1]):.3f}")
    print(f"vs sklearn: new {_gmean(np.maximum(R[:,0],1e-3)/np.maximum(R[:,2],1e-3)):.4f} old {_gmean(np.maximum(R[:,1],1e-3)/np.maximum(R[:,2],1e-3)):.4f}; >1.10: new {np.mean(R[:,0]>1.1*R[:,2]):.3f} old {np.mean(R[:,1]>1.1*R[:,2]):.3f}")
    bad = sorted((r for r, c in zip(rows, chg, strict=True) if c), key=lambda r: -r[5] / r[6])[:3]
    for r in bad:
        print("worst changed:", r)


if __name__ == "__main__":
    main()
