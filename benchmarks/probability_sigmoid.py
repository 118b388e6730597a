"""Platt scaling of the probability itself (not of its log-odds) as a candidate of
``CalibrationWrapper(method="auto")``: measured on real draws, not taken (docs/evidence/small_data_log.md,
"Probability-scale sigmoid for coarse scores").

scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` fits Platt's sigmoid on a model's
probability ``p`` when the model has no ``decision_function``; probwrap's Platt map fits it on
the log-odds ``logit(p)`` (clipped at ``clip_``). For a random forest, whose probabilities are
multiples of one over its number of trees and reach exactly 0 and 1, the two shapes differ most.
This script defines the probability-scale map (:class:`ProbabilityPlattMap`, benchmark-only)
and, on import, registers it as ``"platt_proba"`` among the methods ``auto`` can score and hooks
a rule into ``auto``'s default candidates (``MODE``):

* ``"off"``: as the library is;
* ``"always"``: a further candidate for every binary model with probability outputs (after
  Platt scaling in the simplicity order: two parameters each);
* ``"coarse"``: the same, only when the held-out probabilities contain an exact 0 or 1;
* ``"replace"``: then in place of Platt scaling of the log-odds.

Run (from the repository root, ``pip install -e ".[sweep]"``):

* ``python benchmarks/probability_sigmoid.py h23 2 /tmp/h23.csv`` — the binary sets of
  ``hunt23_sweep.py`` (cross, frozen and weights setups, its draws), each cell's test log
  loss of ``auto`` under the four modes and of scikit-learn's sigmoid (with
  ``ensemble=False`` for the frozen model);
* ``python benchmarks/probability_sigmoid.py h22 3 /tmp/h22.csv`` — the binary sets of
  ``hunt22_sweep.py`` (cross-fitted, its draws);
* ``python benchmarks/probability_sigmoid.py tiny grid|fresh /tmp/tiny.csv`` — the frozen
  binary draws of ``calibration_tiny.py`` (20, 40 and 100 rows, 2 draws; models with
  probabilities), ``auto`` under the four modes and scikit-learn's sigmoid;
* ``python benchmarks/probability_sigmoid.py summary /tmp/h23.csv,/tmp/h22.csv`` — geometric
  mean | worst | cells above 1.10x of ``auto`` over the sigmoid per mode, by model and setup;
* ``python benchmarks/probability_sigmoid.py sweep MODE [small_data_sweep.py options]`` —
  ``small_data_sweep.py`` with ``auto`` in that mode;
* ``python benchmarks/calibration_tiny.py --platt-proba ...`` records the map among the
  candidates of its frozen draws; its ``platt_proba`` rules replay the modes
  (``--rule-set platt_proba --vs sigmoid --models forest``).
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.special import expit

import probwrap._calibration_auto as A
from probwrap.calibration._platt import PlattMap, _weighted_logistic

MODE = "off"
MODES = ("off", "always", "coarse", "replace")


class ProbabilityPlattMap(PlattMap):
    """Platt's sigmoid (smoothed targets, output floor ``1 / (N + 2)``) fitted on
    ``p = sigmoid(s)`` for the held-out log-odds ``s``: ``q = sigmoid(slope * p + intercept)``.
    ``CalibrationWrapper`` passes the log-odds clipped at ``clip_``, so ``p`` is the model's
    probability moved at most ``clip_`` off 0 and 1."""

    complexity = 2.0

    def __init__(self, *, smooth_targets: bool = True) -> None:
        super().__init__(smooth_targets=smooth_targets, limit_scores=False)

    @classmethod
    def _get_param_names(cls) -> list[str]:
        return ["smooth_targets"]

    def get_params(self, deep: bool = True) -> dict:
        return {"smooth_targets": self.smooth_targets}

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        self.limit_scores = False
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=r"PlattMap: every one of `scores`")
            x, t = self._prepare(expit(scores), y, w)
        self._set_solution(*_weighted_logistic(x[:, None], t, w))

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        return expit(self.slope_ * expit(scores) + self.intercept_)


def coarse(values: np.ndarray, w: np.ndarray) -> bool:
    """An exact 0 or 1 among the held-out probabilities of the rows of weight > 0."""
    p = values[:, 1] if values.ndim == 2 else values
    p = p[w > 0]
    return bool(np.any((p == 0.0) | (p == 1.0)))


_orig_choose = A._AutoChoice._choose
_orig_names = A._AutoChoice._auto_names


def _choose(self, ho, scores, w):
    self._pp_context = (ho, w)
    try:
        return _orig_choose(self, ho, scores, w)
    finally:
        del self._pp_context


def _auto_names(self, n_rows, n_maps=1):
    names = _orig_names(self, n_rows, n_maps)
    if self.candidates is None:  # registered below: not a default candidate of its own
        names = [nm for nm in names if nm != "platt_proba"]
    ctx = getattr(self, "_pp_context", None)
    if (ctx is None or MODE == "off" or n_maps != 1 or self.candidates is not None
            or getattr(self, "response_", "predict_proba") != "predict_proba"):
        return names
    ho, w = ctx
    if MODE != "always" and not coarse(ho.values, w):
        return names
    out = list(names)
    out.insert(out.index("platt") + 1 if "platt" in out else len(out), "platt_proba")
    if MODE == "replace" and "platt" in out:
        out.remove("platt")
    return out


A.CALIBRATION_METHODS.setdefault("platt_proba", ProbabilityPlattMap)
A._AutoChoice._choose = _choose
A._AutoChoice._auto_names = _auto_names


# --------------------------------------------------------------------------- the A/B runs
def _autos(base, Xc, yc, w, seed, Xt, yt, classes, row, log_loss) -> None:
    global MODE
    from probwrap import CalibrationWrapper

    for mode in MODES:
        MODE = mode
        est = CalibrationWrapper(base, method="auto", random_state=seed)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                est.fit(Xc, yc) if w is None else est.fit(Xc, yc, sample_weight=w)
            row[mode] = log_loss(yt, est.predict_proba(Xt), classes)
            row[mode + "_m"] = est.method_
        except Exception as e:  # noqa: BLE001
            row[mode], row[mode + "_m"] = np.nan, f"error {type(e).__name__}: {e}"[:80]
    MODE = "off"


def run(which: str, seeds: int, out: str, mnames=("lr", "rf", "nb"),
        setups=("cross", "frozen", "weights")) -> None:
    import pandas as pd
    from sklearn.base import clone
    from sklearn.frozen import FrozenEstimator

    sys.path.insert(0, str(Path(__file__).parent))
    import hunt21_sweep as H
    import hunt22_sweep as H22
    import hunt23_sweep as H23

    rows: list[dict] = []
    t0 = time.time()
    if which == "h23":
        ms = H23.models()
        for t in H23.tasks():
            if len(np.unique(t.y)) != 2:
                continue
            for setup in setups:
                for n_cal in H23.sizes_for(t, setup):
                    for m in mnames:
                        for s in range(seeds):
                            tr, cal, te = H23.draw(t, n_cal, setup, s)
                            X, y = t.X, t.y
                            Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
                            Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
                            classes = np.unique(yc)
                            if len(classes) < 2:
                                continue
                            w = None
                            if setup == "weights":
                                w = np.random.default_rng(500 + s).gamma(2.0, size=len(yc))
                                w = w / w.sum()
                            if setup == "frozen":
                                fitted = H._fit(clone(ms[m]), X.iloc[tr].reset_index(drop=True),
                                                y[tr], None, [])
                                if len(np.unique(y[tr])) != 2:
                                    continue
                                base = FrozenEstimator(fitted)
                            else:
                                base = clone(ms[m])
                            sig = H23._sig(base, Xc, yc, w, setup == "frozen")
                            if sig is None:
                                continue
                            row = dict(set=t.name, model=m, mode=setup, n_cal=n_cal, seed=s,
                                       sig=H.log_loss(yt, sig.predict_proba(Xt), classes))
                            _autos(base, Xc, yc, w, s, Xt, yt, classes, row, H.log_loss)
                            rows.append(row)
            print(t.name, len(rows), round(time.time() - t0), flush=True)
            pd.DataFrame(rows).to_csv(out, index=False)
        return
    ms = H.models()
    for t in H22.tasks():
        for m in mnames:
            for s in range(seeds):
                tr, te = H.split(t, s)
                Xtr, ytr, wtr = H.rows_of(t, tr)
                Xte, yte, wte = H.rows_of(t, te)
                classes = np.unique(ytr)
                if len(classes) != 2:
                    continue
                keep = np.isin(yte, classes)
                Xte, yte = Xte[keep].reset_index(drop=True), yte[keep]
                wte = None if wte is None else wte[keep]
                sig = H._sig(ms[m], Xtr, ytr, wtr)
                if sig is None:
                    continue

                def loss(yt, P, cl, wte=wte):
                    return H.log_loss(yt, P, cl, wte)

                row = dict(set=t.name, model=m, mode="cross", n_cal=len(tr), seed=s,
                           sig=loss(yte, sig.predict_proba(Xte), classes))
                _autos(clone(ms[m]), Xtr, ytr, wtr, s, Xte, yte, classes, row, loss)
                rows.append(row)
        print(t.name, len(rows), round(time.time() - t0), flush=True)
        pd.DataFrame(rows).to_csv(out, index=False)


def run_tiny(which: str, sizes=(20, 40, 100), n_draws: int = 2, out: str = "") -> None:
    """The frozen binary draws of ``calibration_tiny.py --sets grid|fresh`` (its sets, base
    models and rows), fitting only ``auto`` under each mode and scikit-learn's sigmoid
    (``cv=KFold(2)`` on the frozen model, as that script)."""
    import pandas as pd
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.frozen import FrozenEstimator
    from sklearn.model_selection import KFold

    sys.path.insert(0, str(Path(__file__).parent))
    import calibration as B
    import calibration_tiny as T

    sets = {"grid": T.grid_sets, "fresh": T.fresh_sets}[which]()
    rows: list[dict] = []
    for name, X, y in sets:
        X = np.asarray(X, float)
        classes, y_index = np.unique(y, return_inverse=True)
        if len(classes) != 2:
            continue
        for seed in range(n_draws):
            X_tr, y_tr, X_pool, y_pool, X_te, y_te = B._draw(X, y_index, seed)
            for model_name, model in B.base_models(False, seed):
                B._fit_base(model, X_tr, classes[y_tr])
                if not hasattr(model, "predict_proba"):
                    continue  # decision values: the map is for probabilities
                for n_cal in sizes:
                    cal = B._calibration_rows(X_pool, y_pool, n_cal, seed)
                    if cal is None:
                        continue
                    frozen = FrozenEstimator(model)
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        try:
                            sk = CalibratedClassifierCV(frozen, method="sigmoid", cv=KFold(2))
                            sk.fit(cal[0], classes[cal[1]])
                        except (ValueError, IndexError):
                            continue
                    p_cal = model.predict_proba(cal[0])[:, 1]
                    row = dict(set=name, model=model_name, mode="frozen", n_cal=n_cal,
                               seed=seed, sig=B.log_loss(y_te, sk.predict_proba(X_te)),
                               has01=bool(np.any((p_cal == 0) | (p_cal == 1))))

                    def loss(yt, P, cl):
                        return B.log_loss(yt, P)

                    _autos(frozen, cal[0], classes[cal[1]], None, seed, X_te, y_te, classes,
                           row, loss)
                    rows.append(row)
        print(f"  {name}: {len(rows)} draws so far", flush=True)
        if out:
            pd.DataFrame(rows).to_csv(out, index=False)


def summary(files: str, by=("model", "mode")) -> None:
    import pandas as pd

    df = pd.concat([pd.read_csv(f) for f in files.split(",")])

    def stat(g) -> str:
        parts = []
        for m in MODES:
            r = (g[m] / g["sig"]).replace([np.inf, -np.inf], np.nan).dropna()
            parts.append(f"{m} {np.exp(np.log(r).mean()):.4f}|{r.max():.3f}|{int((r > 1.10).sum())}")
        changed = {m: int((g[m + "_m"] != g["off_m"]).sum()) for m in MODES[1:]}
        return "  ".join(parts) + f"  choices changed {changed}"

    print(f"all n={len(df)}: " + stat(df))
    for key in by:
        for v, g in df.groupby(key):
            print(f"  {key}={v} n={len(g)}: " + stat(g))


def main(argv: list[str]) -> None:
    global MODE
    if argv[0] == "summary":
        summary(argv[1])
    elif argv[0] == "tiny":
        run_tiny(argv[1], out=argv[2])
    elif argv[0] == "sweep":
        MODE = argv[1]
        sys.path.insert(0, str(Path(__file__).parent))
        import small_data_sweep as S

        S.main(argv[2:])
    else:
        run(argv[0], int(argv[1]), argv[2],
            tuple(argv[3].split(",")) if len(argv) > 3 else ("lr", "rf", "nb"))


if __name__ == "__main__":
    main(sys.argv[1:])
