"""PriorShiftWrapper's own calibration on 20-100 labelled rows, and floor rules before logarithms.

For many small labelled draws of bundled binary tasks, the test log loss over the frozen model's
own of

* ``PriorShiftWrapper(FrozenEstimator(model)).fit(labelled)`` with no target prior and no
  ``adapt`` (its calibrated posteriors: bias-corrected temperature scaling with a weak prior on
  the scale and the likelihood-ratio test that keeps the model's own probabilities);
* ``CalibrationWrapper(method="auto")`` and scikit-learn's
  ``CalibratedClassifierCV(FrozenEstimator(model), method="sigmoid")`` on the same rows;
* the same map with other features (``--floors``; all by default), fitted on the same rows
  through ``BiasCorrectedScaling.fit_log_proba``: ``flat`` (the flat floor of ``heldout_clip``
  always, the default before the eleventh session), ``compressed`` (the order beyond it kept,
  compressed logarithmically, always: ``probwrap.shift._calibration.compress_tail``) and the
  tenth session's floor rules; the wrapper (``psw``) chooses between ``flat`` and
  ``compressed`` by cross-validation (``choose_tail``), reproduced through
  ``BiasCorrectedScaling.fit`` on every draw.

Data: 17 binary tasks with at least 250 rows, no missing values and 30 rows of each class
(scikit-learn's breast cancer; the statsmodels, lifelines, palmerpenguins and sktime sets of
``benchmarks/small_data_sweep.py`` and ``benchmarks/fresh_data_sweep.py``; needs
``pip install -e ".[sweep]"``); three models (scaled logistic regression, Gaussian naive Bayes,
gradient boosting with 50 iterations) fitted on a quarter of the rows (at most 600) and frozen;
``--draws`` random labelled draws per cell (both classes present), the next 1,500 other rows
scored. Printed per size: geometric means over draws, the ratio to ``auto`` by model, the share
of draws above 1.10x the model's own, the worst draw, the worst cell (data set x model,
geometric mean) and, for each method, the cell it makes most worse than the flat floor (with
``--floors`` naming ``flat``).

Run: ``nice python benchmarks/shift_calibration_tiny.py`` (about 4 minutes on a shared 2-core
machine with the default 12 draws; ``--no-auto`` skips ``auto`` and the sigmoid, about 2).
"""

from __future__ import annotations

import sys
import time
import warnings
from collections import defaultdict
from pathlib import Path

import numpy as np
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

sys.path.insert(0, str(Path(__file__).parent))
import fresh_data_sweep as F  # noqa: E402
import small_data_sweep as S  # noqa: E402

from probwrap import CalibrationWrapper, PriorShiftWrapper  # noqa: E402
from probwrap.calibration._base import count_weights  # noqa: E402
from probwrap.calibration._logodds import clip_from_smallest, proba_to_log_proba  # noqa: E402
from probwrap.shift import BiasCorrectedScaling  # noqa: E402
from probwrap.shift._calibration import _floor, heldout_clip, tail_log_scores  # noqa: E402

SIZES = (20, 40, 100)
MODELS = {
    "logistic": lambda: make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
    "naive_bayes": GaussianNB,
    "boosting": lambda: HistGradientBoostingClassifier(max_iter=50, random_state=0),
}


def _row_bound(p: np.ndarray) -> float:
    """Half the map's output floor for the rows of ``p`` (the default floor's row bound)."""
    n_rows = float(count_weights(np.ones(p.shape[0]))[0].sum())
    return 0.5 * _floor(n_rows, p.shape[1])


def _smallest(p: np.ndarray) -> float:
    """Half the smallest non-zero probability, within [1e-12, 0.25] (the rule without bound)."""
    pos = p[p > 0]
    return clip_from_smallest(float(pos.min()) if pos.size else np.inf)


def _own_class(p: np.ndarray, y: np.ndarray) -> float:
    """The row bound, lowered to half the smallest probability of a row's own class."""
    own = float(p[np.arange(y.shape[0]), y].min())
    return max(_smallest(p), min(_row_bound(p), 0.5 * own))


#: floor rules before logarithms: name -> clip(held-out proba, held-out labels)
FLOORS = {
    "flat": lambda p, y: heldout_clip(p),
    "compressed": None,  # the order beyond the flat floor kept (tail_log_scores), always
    "no_row_bound": lambda p, y: _smallest(p),
    "squared_bound": lambda p, y: max(_smallest(p), _row_bound(p) ** 2),
    "own_class": _own_class,
    "own_class_sq": lambda p, y: max(_own_class(p, y), _smallest(p), _row_bound(p) ** 2),
}


def data_sets():
    """The 17 binary tasks (name, X, y as 0/1)."""
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer", X, y
    for gen in (S.data_sets(False), S.new_data_sets(False), F.fresh_data_sets()):
        for name, X, y in gen:
            if name == "breast_cancer":
                continue
            try:
                X = np.asarray(X, float)
            except (TypeError, ValueError):
                continue
            classes, yi = np.unique(np.asarray(y), return_inverse=True)
            if (classes.size != 2 or yi.shape[0] < 250 or np.isnan(X).any()
                    or np.bincount(yi).min() < 30):
                continue
            yield name, X, yi


def _log_loss(y: np.ndarray, p: np.ndarray) -> float:
    return float(-np.mean(np.log(np.clip(p[np.arange(y.shape[0]), y], 1e-300, 1))))


def run(draws: int, with_auto: bool, floors: tuple[str, ...]) -> None:
    methods = (("psw", "auto", "sigmoid") if with_auto else ("psw",)) + floors
    res = {n: {m: [] for m in methods} for n in SIZES}
    where = {n: [] for n in SIZES}
    rng = np.random.default_rng(5)
    t0 = time.time()
    for name, X, y in data_sets():
        for model_name, make in MODELS.items():
            order = rng.permutation(y.shape[0])
            n_fit = min(y.shape[0] // 4, 600)
            model = make().fit(X[order[:n_fit]], y[order[:n_fit]])
            frozen = FrozenEstimator(model)
            pool = order[n_fit:]
            for n in SIZES:
                for _ in range(draws):
                    perm = rng.permutation(pool)
                    lab, test = perm[:n], perm[n:][:1500]
                    if np.unique(y[lab]).size < 2:
                        continue
                    pt = model.predict_proba(X[test])
                    base = _log_loss(y[test], pt)
                    psw = PriorShiftWrapper(frozen, n_resamples=0).fit(X[lab], y[lab])
                    out = {"psw": psw.predict_proba(X[test])}
                    if with_auto:
                        out["auto"] = CalibrationWrapper(frozen, method="auto", random_state=0) \
                            .fit(X[lab], y[lab]).predict_proba(X[test])
                        out["sigmoid"] = CalibratedClassifierCV(frozen, method="sigmoid") \
                            .fit(X[lab], y[lab]).predict_proba(X[test])
                    pl = model.predict_proba(X[lab])
                    for f in floors:
                        if f == "compressed":
                            start = heldout_clip(pl)
                            tail = (min(_smallest(pl), start), start, abs(float(np.log(start))))
                            cal = BiasCorrectedScaling().fit_log_proba(
                                tail_log_scores(pl, *tail), y[lab], tail=tail)
                        else:
                            clip = FLOORS[f](pl, y[lab])
                            cal = BiasCorrectedScaling().fit_log_proba(
                                proba_to_log_proba(pl, clip=clip), y[lab], clip=clip)
                        out[f] = cal.predict_output(pt)
                    # the wrapper's own path, reproduced (where it kept BiasCorrectedScaling's
                    # output: not where it chose an output map on a small set, nor where it let
                    # a kept coarse grid give way to the map; probwrap/_prior_shift_output_map.py)
                    if psw.output_map_ is None and (psw.calibrator_.identity_kept_ or not
                                                    psw.calibrator_.identity_pvalue_ > 0.05):
                        np.testing.assert_allclose(
                            BiasCorrectedScaling().fit(pl, y[lab]).predict_output(pt),
                            out["psw"], atol=1e-9)
                    for m in methods:
                        res[n][m].append(_log_loss(y[test], out[m]) / base)
                    where[n].append((name, model_name))
        print(f"  {name} done ({time.time() - t0:.0f} s)", file=sys.stderr, flush=True)

    def geo(x):
        return float(np.exp(np.mean(np.log(x))))

    for n in SIZES:
        cells = defaultdict(list)
        for i, w in enumerate(where[n]):
            cells[w].append(i)
        ref = np.asarray(res[n]["auto" if with_auto else "psw"])
        psw = np.asarray(res[n]["flat" if "flat" in res[n] else "psw"])
        print(f"\n{n} labelled rows, {len(where[n])} draws; ratios: test log loss over the "
              f"model's own; '/ref': over {'auto' if with_auto else 'the wrapper'} on the draw")
        print(f"{'method':>14} {'geo':>6} {'/ref':>6} {'LR /ref':>8} {'NB /ref':>8} "
              f"{'GB /ref':>8} {'>1.10':>6} {'worst':>6} {'worst cell':>11}  "
              f"{'cell most worse than flat':>33}")
        for m in methods:
            v = np.asarray(res[n][m])
            by = {mm: geo(v[[i for i, w in enumerate(where[n]) if w[1] == mm]]
                          / ref[[i for i, w in enumerate(where[n]) if w[1] == mm]])
                  for mm in MODELS}
            cg = {c: geo(v[ix]) for c, ix in cells.items()}
            cr = {c: geo(v[ix]) / geo(psw[ix]) for c, ix in cells.items()}
            wc, wr = max(cg, key=cg.get), max(cr, key=cr.get)
            print(f"{m:>14} {geo(v):6.3f} {geo(v / ref):6.3f} {by['logistic']:8.3f} "
                  f"{by['naive_bayes']:8.3f} {by['boosting']:8.3f} {np.mean(v > 1.1):6.1%} "
                  f"{v.max():6.2f} {cg[wc]:11.3f}  {cr[wr]:6.3f} ({wr[0][:18]}, {wr[1]})")


if __name__ == "__main__":
    warnings.simplefilter("ignore")
    args = sys.argv[1:]
    n_draws = next((int(a.split("=")[1]) for a in args if a.startswith("--draws=")), 12)
    chosen = next((tuple(a.split("=")[1].split(",")) for a in args if a.startswith("--floors=")),
                  tuple(FLOORS))
    run(n_draws, "--no-auto" not in args, chosen)
