"""Should PriorShiftWrapper's own map be softer on 27-60 labelled rows? Rules for its scale.

``PriorShiftWrapper`` calibrates with ``softmax(a * z + b)`` (bias-corrected temperature
scaling, ``probwrap.shift.BiasCorrectedScaling``) fitted on the fold models' held-out
log-probabilities, the scale ``a`` held toward 1 by a gamma prior worth 5 rows. On a few weak
draws its test log loss before ``adapt`` is far above scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` (statsmodels' danish_data, a 100-tree forest, 27
rows: 1.18 against 0.86). This script measures, on the cells of
``benchmarks/crossfit_sweep.py --only tiny`` (27-60 training rows; scikit-learn's and
statsmodels' bundled sets, statsmodels' nile, elnino and danish_data, scikit-survival's cgvhd;
nine models with ``predict_proba``; seeds 0-2), what other rules for the output map's scale
would give. Every rule keeps the map's form: the scale is ``t`` times the fitted one
(``t`` in 0, 0.1, ..., 1; 0 is the class shares) and the biases are refitted by maximum
likelihood at that scale, so the mean calibrated held-out posterior stays the class shares
(the biases' score equations) and re-weighting by priors applies unchanged.

Rules (test log loss of ``predict_proba`` before ``adapt``, the wrapper's own predicting models
— the refit or the fold models' average, ``predicted_with_`` — behind the map):

* ``fitted``: the map as fitted (the default, ``t = 1``);
* ``cv_best``: ``t`` with the smallest cross-validated log loss on the held-out rows
  (leave-one-out, or 20 folds stratified by class; each fold fits the full map, prior on the
  scale included, then the biases at ``t`` times its scale);
* ``cv_1se``: the smallest ``t`` within one standard error (of the paired per-row difference)
  of ``cv_best`` — the one-standard-error rule toward the safer map (Breiman, Friedman, Olshen
  & Stone 1984, section 3.4.3);
* ``gate_1se``: ``cv_1se`` only where the cross-validated map does not beat the class shares,
  otherwise ``fitted``;
* ``platt``: the scale fitted to Platt's (1999) smoothed targets ``(N_c + 1) / (N_c + 2)`` for
  a row's own class (the rest shared evenly), the prior on the scale kept, then the biases
  refitted to the plain labels;
* ``oracle``: the best ``t`` for the test rows (a bound no rule that sees only the labelled
  rows can beat).

Printed: over scikit-learn's sigmoid, geometric mean | worst | cells above 1.10x, by size and
model; over ``fitted``, the geometric mean and the cells more than 2 % worse or better; and the
two named draws (danish_data, 100-tree forest, ``train_test_split(test_size=0.5,
random_state=0)``; cgvhd, Gaussian naive Bayes, the same split stratified by the label) with the
test and cross-validated log loss at each ``t``.

Run: ``nice python benchmarks/shift_map_scale.py`` (about 20 minutes on a shared 2-core
machine); ``--quick`` (seed 0 only, five sets, about 3 minutes).
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.optimize import minimize
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import RandomForestClassifier
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB

sys.path.insert(0, str(Path(__file__).parent))
sys.path.insert(0, str(Path(__file__).parent.parent))
import crossfit_sweep as C  # noqa: E402

from probwrap import PriorShiftWrapper  # noqa: E402
from probwrap.shift import BiasCorrectedScaling  # noqa: E402
from probwrap.shift._calibration import (  # noqa: E402
    _log_softmax,
    _newton,
    row_sum,
    tail_log_scores,
)

STEPS = np.linspace(0.0, 1.0, 11)
FOLDS = 20
RULES = ("fitted", "cv_best", "cv_1se", "gate_1se", "platt", "oracle")


def log_loss(p: np.ndarray, y: np.ndarray) -> float:
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y)), y], 1e-15, 1.0))))


def fit_biases(z, y, w, scale, bias0):
    """Maximum-likelihood biases of softmax(scale * z + b) at fixed scales (w sums to 1)."""
    n, k = z.shape
    onehot = np.zeros((n, k))
    onehot[np.arange(n), y] = 1.0
    base = z * scale

    def loss_grad(theta):
        logp = _log_softmax(base + np.concatenate([[0.0], theta]))
        resid = (np.exp(logp) - onehot) * w[:, None]
        return -float(np.sum(w * np.sum(onehot * logp, 1))), resid.sum(0)[1:]

    def hess(theta):
        p = np.exp(_log_softmax(base + np.concatenate([[0.0], theta])))
        pw = p * w[:, None]
        return (np.diag(pw.sum(0)) - pw.T @ p)[1:, 1:]

    theta, _ = _newton(loss_grad, hess, np.asarray(bias0, float)[1:], 0)
    return np.concatenate([[0.0], theta])


def output(cal, z, scale, bias):
    """softmax(scale * z + bias) floored at the map's output floor, rows renormalised."""
    out = np.maximum(_log_softmax(z * scale + bias), np.log(cal.floor_))
    return np.exp(out - np.log(row_sum(np.exp(out), True)))


def cv_losses(z, y, w, kind):
    """Per-row cross-validated log loss of the map at each multiple of its scale (or None)."""
    rows = np.flatnonzero(w > 0)
    k = z.shape[1]
    if np.any(np.bincount(y[rows], minlength=k) < 2):
        return None
    n_folds = min(FOLDS, rows.size)
    order = np.lexsort((rows, y[rows]))
    fold = np.empty(rows.size, dtype=int)
    fold[order] = np.arange(rows.size) % n_folds
    losses = np.zeros((STEPS.size, rows.size))
    for f in range(n_folds):
        test, train = rows[fold == f], rows[fold != f]
        cal = BiasCorrectedScaling(kind=kind, identity_level=None).fit_log_proba(
            z[train], y[train], w[train])
        bias = cal.bias_
        for i in range(STEPS.size - 1, -1, -1):
            bias = fit_biases(z[train], y[train], w[train] / w[train].sum(),
                              STEPS[i] * cal.scale_, bias)
            out = output(cal, z[test], STEPS[i] * cal.scale_, bias)
            losses[i, fold == f] = -np.log(out[np.arange(test.size), y[test]])
    return losses


def one_se(losses):
    mean = losses.mean(1)
    best = int(np.argmin(mean))
    for i in range(best + 1):
        d = losses[i] - losses[best]
        if d.mean() <= d.std() / np.sqrt(max(d.size - 1, 1)):
            return i
    return best  # pragma: no cover


def platt_scale(z, y, w, kind, cal):
    """The scale fitted to Platt's smoothed targets, the gamma prior on the scale kept."""
    n, k = z.shape
    n_scale = 1 if kind == "temperature" else k
    counts = np.bincount(y, weights=w * n / w.sum(), minlength=k)
    targets = np.zeros((n, k))
    for c in range(k):
        own = (counts[c] + 1.0) / (counts[c] + 2.0)
        targets[y == c] = (1.0 - own) / (k - 1)
        targets[y == c, c] = own
    wn = w / w.sum()
    lam = cal.shrinkage / float(np.sum(w > 0))

    def f(theta):
        a = np.broadcast_to(theta[:n_scale], (k,))
        b = np.concatenate([[0.0], theta[n_scale:]])
        logp = _log_softmax(z * a + b)
        resid = (np.exp(logp) - targets) * wn[:, None]
        g_a = (resid * z).sum(0)
        grad = np.concatenate([[g_a.sum()] if n_scale == 1 else g_a, resid.sum(0)[1:]])
        grad[:n_scale] += lam * (1.0 - 1.0 / theta[:n_scale])
        loss = -np.sum(wn * np.sum(targets * logp, 1)) + lam * np.sum(
            theta[:n_scale] - np.log(theta[:n_scale]) - 1.0)
        return float(loss), grad

    theta0 = np.concatenate([cal.scale_[:n_scale], cal.bias_[1:]])
    res = minimize(f, theta0, jac=True, method="L-BFGS-B",
                   bounds=[(1e-8, None)] * n_scale + [(None, None)] * (k - 1))
    return np.array(np.broadcast_to(res.x[:n_scale], (k,)), dtype=float)


def cell(model, X_tr, y_tr, X_te, y_te) -> dict:
    """Test log loss of every rule (and at every t) for one fitted wrapper, and the sigmoid's."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ps = PriorShiftWrapper(clone(model), random_state=0, n_resamples=0).fit(X_tr, y_tr)
        sk = CalibratedClassifierCV(clone(model), method="sigmoid", cv=5).fit(X_tr, y_tr)
    cal = ps.calibrator_
    p, y, w = ps.prior_estimator_._source_rows()[:3]
    z = tail_log_scores(p, cal.tail_floor_, cal.clip_, cal.tail_width_)
    wn = w / w.sum()
    if ps.predicted_with_ == "fold_models":
        test_z = [cal.log_scores(q) for q in ps._fold_proba(X_te)]
        share = ps._fold_share
    else:
        test_z = [cal.log_scores(ps._inner_output(X_te, "predict_proba"))]
        share = np.ones(1)

    def test_loss(scale):
        bias = cal.bias_ if np.array_equal(scale, cal.scale_) else fit_biases(
            z, y, wn, scale, cal.bias_)
        q = np.tensordot(share, np.stack([output(cal, t, scale, bias) for t in test_z]), 1)
        return log_loss(q, y_te)

    by_t = np.array([test_loss(t * cal.scale_) for t in STEPS])
    losses = cv_losses(z, y, w, cal.kind)
    pick = {"fitted": STEPS.size - 1, "oracle": int(np.argmin(by_t))}
    if losses is None:
        pick.update(cv_best=STEPS.size - 1, cv_1se=STEPS.size - 1, gate_1se=STEPS.size - 1)
    else:
        pick["cv_best"] = int(np.argmin(losses.mean(1)))
        pick["cv_1se"] = one_se(losses)
        beats = (losses[0] - losses[-1]).mean() > 0
        pick["gate_1se"] = STEPS.size - 1 if beats else pick["cv_1se"]
    out = {r: float(by_t[i]) for r, i in pick.items()}
    out["platt"] = test_loss(platt_scale(z, y, w, cal.kind, cal))
    return {"loss": out, "sk": log_loss(sk.predict_proba(X_te), y_te), "by_t": by_t,
            "cv_by_t": None if losses is None else losses.mean(1)}


def named_cases() -> None:
    import pandas as pd  # noqa: F401 - tiny_sets needs it
    sets = {n: (np.asarray(X, float), np.asarray(y)) for n, X, y in C.tiny_sets()}
    print("\nthe two named draws: test log loss (and cross-validated on the labelled rows) at "
          "t = 0, 0.1, ..., 1")
    for name, model, strat in (("danish rise", RandomForestClassifier(random_state=0), False),
                               ("cgvhd status not 1", GaussianNB(), True)):
        if name not in sets:
            continue
        X, y = sets[name]
        tr, te = train_test_split(np.arange(len(y)), test_size=0.5, random_state=0,
                                  stratify=y if strat else None)
        c = cell(model, X[tr], y[tr], X[te], y[te])
        print(f"  {name}, {type(model).__name__}, {len(tr)} rows: sigmoid {c['sk']:.3f}; "
              + ", ".join(f"{r} {v:.3f}" for r, v in c["loss"].items()))
        print("    test " + " ".join(f"{v:.3f}" for v in c["by_t"]))
        if c["cv_by_t"] is not None:
            print("    cv   " + " ".join(f"{v:.3f}" for v in c["cv_by_t"]))


def main(argv: list[str]) -> None:
    quick = "--quick" in argv
    seeds = (0,) if quick else (0, 1, 2)
    models = {k: m for k, m in C.tiny_models().items() if hasattr(m, "predict_proba")}
    keep = ("breast_cancer", "diabetes>median", "anes96 vote", "danish rise",
            "cgvhd status not 1")
    cells, t0 = [], time.time()
    for name, X, y in C.tiny_sets():
        if quick and name not in keep:
            continue
        X = np.asarray(X, dtype=float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        k = int(yi.max()) + 1
        sizes = (len(yi) // 2,) if len(yi) < 120 else C.TINY_ROWS
        for seed in seeds:
            for n_train in sizes:
                idx = np.random.default_rng(seed).permutation(len(yi))
                tr, te = idx[:n_train], idx[n_train:][:2000]
                if np.bincount(yi[tr], minlength=k).min() < 5:
                    continue
                for mname, model in models.items():
                    try:
                        c = cell(model, X[tr], yi[tr], X[te], yi[te])
                    except ValueError:  # a fold too small for the model (25 neighbours)
                        continue
                    c.update(set=name, model=mname, rows=n_train)
                    cells.append(c)
        print(f"  {name} done ({time.time() - t0:.0f} s)", file=sys.stderr, flush=True)

    def gm(x):
        return float(np.exp(np.mean(np.log(x))))

    for label, lo, hi in (("27-40", 27, 40), ("41-60", 41, 60), ("all", 0, 10**9)):
        sub = [c for c in cells if lo <= c["rows"] <= hi]
        print(f"\n{label} training rows ({len(sub)} cells): over scikit-learn's sigmoid "
              "geo | worst | >1.10x; over 'fitted' geo | >2 % worse | >2 % better")
        for r in RULES:
            v = np.array([(c["loss"][r] + 1e-6) / (c["sk"] + 1e-6) for c in sub])
            o = np.array([c["loss"][r] / c["loss"]["fitted"] for c in sub])
            print(f"  {r:>9} {gm(v):.3f} | {v.max():5.2f} | {int(np.sum(v > 1.1)):3d}    "
                  f"{gm(o):.3f} | {int(np.sum(o > 1.02)):3d} | {int(np.sum(o < 0.98)):3d}")
    print("\nby model, over scikit-learn's sigmoid (geometric mean): " + ", ".join(RULES))
    for m in sorted({c["model"] for c in cells}):
        sub = [c for c in cells if c["model"] == m]
        print(f"  {m:>14} " + " ".join(f"{gm([c['loss'][r] / c['sk'] for c in sub]):.3f}"
                                        for r in RULES))
    gated = [c for c in cells if c["cv_by_t"] is not None and c["cv_by_t"][0] <= c["cv_by_t"][-1]]
    if gated:
        print(f"\ncells where the cross-validated map does not beat the class shares: {len(gated)}; "
              "there on the test rows, class shares over the fitted map "
              f"{gm([c['by_t'][0] / c['by_t'][-1] for c in gated]):.3f}")
    named_cases()


if __name__ == "__main__":
    main(sys.argv[1:])
