"""Speed of ``CalibrationWrapper(method="auto")`` beside scikit-learn's three methods together.

Both sides calibrate the same frozen model on the same held-out rows: probwrap's ``auto`` (which
cross-validates every candidate map and fits the chosen one) against the sum of the fit times of
scikit-learn's ``CalibratedClassifierCV`` with ``method="sigmoid"``, ``"isotonic"`` and
``"temperature"`` (the last one from scikit-learn 1.8 on). The frozen model is a precomputed
score table, so the model's own prediction costs nothing and only the calibration is timed.
Printed: rows, classes, both times, and the ratio beside its target (at most 1.5); where a
ratio is above the target, the measured reason (each candidate's time in ``auto``'s
cross-validation).

Times are CPU seconds of this process (``time.process_time``; BLAS limited to one thread), the
smallest of ``--repeats`` runs, with probwrap's and scikit-learn's runs interleaved so that both
see the same load on a shared machine.

Run: ``python benchmarks/calibration_speed.py`` (``--quick`` stops at 10^5 rows; the 10^6-row
cases take a few minutes on two cores). ``--sizes 1000,10000`` and ``--classes 5`` pick cells,
``--repeats 5`` sets the repeats at 10^4 rows and fewer (one above).
"""

from __future__ import annotations

import argparse
import os
import time
import warnings

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")  # CPU time of one thread on both sides

import numpy as np  # noqa: E402
import sklearn  # noqa: E402
from scipy.special import softmax  # noqa: E402
from sklearn.base import BaseEstimator, ClassifierMixin  # noqa: E402
from sklearn.calibration import CalibratedClassifierCV  # noqa: E402
from sklearn.frozen import FrozenEstimator  # noqa: E402

from probwrap import CalibrationWrapper  # noqa: E402

SK_VERSION = tuple(int(p) for p in sklearn.__version__.split(".")[:2])


class ScoreTable(ClassifierMixin, BaseEstimator):
    """A 'model' whose input is the row number and whose output is a stored probability row,
    so that both calibrators pay (almost) nothing for predictions."""

    def __init__(self, proba=None):
        self.proba = proba

    def fit(self, X, y):
        self.classes_ = np.unique(y)
        self.n_features_in_ = 1
        return self

    def predict_proba(self, X):
        return self.proba[np.asarray(X, dtype=np.intp).ravel()]

    def predict(self, X):
        return self.classes_[self.predict_proba(X).argmax(axis=1)]


def make_case(n: int, k: int, seed: int = 0):
    """Over-confident logits of a k-class model, and labels drawn from calibrated ones."""
    rng = np.random.default_rng(seed)
    z = rng.normal(size=(n, k)) * 1.5
    y = np.array([rng.choice(k, p=p) for p in softmax(z[:2000], axis=1)] if n <= 2000 else [])
    if n > 2000:  # draw labels in NumPy: inverse-CDF per row
        cdf = np.cumsum(softmax(z, axis=1), axis=1)
        y = (rng.random(n)[:, None] > cdf).sum(axis=1).clip(0, k - 1)
    proba = softmax(2.0 * z, axis=1)  # the model is over-confident (temperature 1/2)
    X = np.arange(n).reshape(-1, 1)
    model = ScoreTable(proba).fit(X, y)
    return model, X, y


#: the target of issue 9, point 5: auto's fit costs at most this many times scikit-learn's
#: three methods together
TARGET = 1.5


def sk_methods(k: int) -> list[str]:
    """scikit-learn's methods compared (temperature from scikit-learn 1.8 on)."""
    return ["sigmoid", "isotonic"] + (["temperature"] if SK_VERSION >= (1, 8) else [])


def timed(fn):
    t = time.process_time()
    fn()
    return time.process_time() - t


def run(n: int, k: int, repeats: int) -> tuple[float, float, str, dict[str, list[float]]]:
    model, X, y = make_case(n, k)
    methods = sk_methods(k)
    chosen = ""
    per_candidate: dict[str, list[float]] = {}

    def ours():
        nonlocal chosen
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            m = CalibrationWrapper(FrozenEstimator(model), method="auto", random_state=0).fit(X, y)
        chosen = m.method_

    def ours_by_candidate():
        """One more auto fit, timing each candidate's fold fits (to say where the time goes)."""
        from probwrap import _calibration_wrapper as cw

        original = cw.CalibrationWrapper._score_fold

        def timed_fold(self, name, *args):
            t = time.process_time()
            out = original(self, name, *args)
            per_candidate.setdefault(name, []).append(time.process_time() - t)
            return out

        original_fit = cw.CalibrationWrapper._fit_map

        def counted_fit(self, *args, **kwargs):
            # one-vs-rest fits return one binary map per class (fitted together)
            out = original_fit(self, *args, **kwargs)
            n_maps = len(out) if isinstance(out, list) else 1
            per_candidate["map fits"] = per_candidate.get("map fits", 0) + n_maps
            return out

        own = "_score_fold" in vars(cw.CalibrationWrapper)
        cw.CalibrationWrapper._score_fold = timed_fold
        cw.CalibrationWrapper._fit_map = counted_fit
        try:
            ours()
        finally:
            cw.CalibrationWrapper._fit_map = original_fit
            if own:
                cw.CalibrationWrapper._score_fold = original
            else:  # defined on a base class: remove the override
                del cw.CalibrationWrapper._score_fold

    def theirs():
        for method in methods:
            CalibratedClassifierCV(FrozenEstimator(model), method=method).fit(X, y)

    runs_ours, runs_sk = [], []
    for _ in range(repeats):  # interleaved: both sides see the same load
        runs_ours.append(timed(ours))
        runs_sk.append(timed(theirs))
    t_ours, t_sk = min(runs_ours), min(runs_sk)
    if t_ours > TARGET * t_sk:
        ours_by_candidate()
    return t_ours, t_sk, chosen, per_candidate


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="stop at 10^5 rows")
    parser.add_argument("--sizes", help="comma-separated row counts (default 10^3 to 10^6)")
    parser.add_argument("--classes", default="2,5", help="comma-separated class counts")
    parser.add_argument("--repeats", type=int, default=3,
                        help="runs per side at 10^4 rows and fewer (1 above); the fastest counts")
    args = parser.parse_args(argv)
    if args.sizes:
        sizes = [int(float(v)) for v in args.sizes.split(",")]
    else:
        sizes = [1_000, 10_000, 100_000] + ([] if args.quick else [1_000_000])
    print(f"scikit-learn {sklearn.__version__}; scikit-learn methods: sigmoid, isotonic"
          + (", temperature" if SK_VERSION >= (1, 8) else "") + "; CPU seconds")
    print(f"{'rows':>9} {'classes':>7} {'auto s':>8} {'sklearn s':>9} {'ratio':>6} {'target':>7}"
          "  chosen")
    ratios = []
    for k in (int(v) for v in args.classes.split(",")):
        for n in sizes:
            repeats = args.repeats if n <= 10_000 else 1
            t_ours, t_sk, chosen, per_candidate = run(n, k, repeats)
            ratios.append(t_ours / t_sk)
            print(f"{n:>9} {k:>7} {t_ours:>8.3f} {t_sk:>9.3f} {t_ours / t_sk:>6.2f} "
                  f"{'<= ' + str(TARGET):>7}  {chosen}", flush=True)
            if per_candidate:
                # the measured reason for a ratio above the target: where auto's time goes,
                # candidate by candidate (seconds over its fold fits; one-vs-rest maps fit k
                # binary maps per fold), and how many maps each side fits: scikit-learn fits
                # one sigmoid and one isotonic map per class (one for two classes) and one
                # temperature map, in each of its 5 folds
                fits = per_candidate.pop("map fits", 0)
                sk_fits = 5 * (2 * (1 if k == 2 else k) + (1 if len(sk_methods(k)) > 2 else 0))
                total = sum(sum(v) for v in per_candidate.values())
                print(f"{'':>18}auto's cross-validation {total:.3f} s: " + ", ".join(
                    f"{name} {sum(v):.3f} s/{len(v)} folds" for name, v in
                    sorted(per_candidate.items(), key=lambda item: -sum(item[1]))), flush=True)
                print(f"{'':>18}maps fitted: auto {fits} ({1e3 * t_ours / fits:.2f} ms each), "
                      f"scikit-learn {sk_fits} ({1e3 * t_sk / sk_fits:.2f} ms each)", flush=True)
    print(f"largest ratio: {max(ratios):.2f} (target <= {TARGET})")


if __name__ == "__main__":
    main()
