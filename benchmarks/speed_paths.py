"""CPU and wall time of the paths a user meets, for comparing versions of probwrap side by side.

Measured in one process, on the probwrap found first on ``sys.path`` (set ``PYTHONPATH`` to a
worktree of another commit to time that commit's code):

* ``adapt`` with the default interval on 10,000 unlabelled rows after ``fit`` on 2,000 labelled
  rows (issue 10, point 4: target <= 1 s), the same rows as ``benchmarks/shift.py
  --only=speed`` (a logistic regression trained on 20,000 Gaussian rows and frozen), beside
  the point estimate alone (``n_resamples=0``) and the base model refit here (5 folds);
* ``PriorShiftWrapper.fit`` on the 2,000 labelled rows plus ``predict_proba`` of the 10,000;
* ``CalibrationWrapper(method="auto").fit`` on 2,000 rows, frozen and cross-fitted;
* ``CostPolicyWrapper(strategy="tuned").fit`` on 2,000 rows, frozen and cross-fitted;
* scikit-learn's ``LogisticRegression.fit`` on the 2,000 rows and ``predict_proba`` of the
  10,000, as the load's yardstick (ratios to them move less with the load than times do).

Each line is the median of ``--repeat`` calls (one warm-up call first, which pays the imports
made at a process's first fit), CPU time by ``time.process_time`` (run with
``OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1``: one thread) and wall time by
``time.perf_counter``. Warnings are silenced while timing.

Run: ``nice python benchmarks/speed_paths.py`` (about 30 s of CPU) or, to compare commits
interleaved in the same minutes (each a checkout, e.g. ``git worktree add /tmp/old <rev>``)::

    nice python benchmarks/speed_paths.py --compare /tmp/old . --rounds 3

which runs this file once per checkout and round, alternating, with ``PYTHONPATH`` set to the
checkout, and prints the CPU medians of each checkout over its rounds (min-max across rounds).
Results of 5 December 2026: docs/evidence/prior_shift_log.md, "Speed of adapt re-measured".
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np


def _gaussian(n, prevalence, rng, delta=1.5):
    y = (rng.uniform(size=n) < prevalence).astype(int)
    return rng.normal(size=(n, 1)) + delta * y[:, None], y


def _median_times(fn, repeat):
    cpu, wall = [], []
    fn()  # warm-up: first-fit imports
    for _ in range(repeat):
        c, w = time.process_time(), time.perf_counter()
        fn()
        cpu.append(time.process_time() - c)
        wall.append(time.perf_counter() - w)
    return float(np.median(cpu)), float(np.median(wall))


def measure(repeat: int = 5) -> dict[str, tuple[float, float]]:
    """Time every path once in this process; returns {name: (cpu s, wall s)}."""
    import pandas as pd
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(3)
    X_tr, y_tr = _gaussian(20_000, 0.1, rng)
    lr = LogisticRegression().fit(X_tr, y_tr)
    model = FrozenEstimator(lr)
    X, y = _gaussian(2000, 0.1, rng)
    X_new, _ = _gaussian(10_000, 0.2, rng)
    costs = {"fp": 1.0, "fn": 5.0}
    # 20 features in a DataFrame (the repeat check hashes them) and three classes
    centres = rng.normal(size=(3, 20))
    y3_tr = rng.choice(3, size=20_000, p=[0.5, 0.3, 0.2])
    cols = [f"x{j}" for j in range(20)]
    X3_tr = pd.DataFrame(centres[y3_tr] + rng.normal(size=(20_000, 20)), columns=cols)
    lr3 = LogisticRegression(max_iter=500).fit(X3_tr, y3_tr)
    y3 = rng.choice(3, size=2000, p=[0.5, 0.3, 0.2])
    X3 = pd.DataFrame(centres[y3] + rng.normal(size=(2000, 20)), columns=cols)
    y3_new = rng.choice(3, size=10_000, p=[0.3, 0.3, 0.4])
    X3_new = pd.DataFrame(centres[y3_new] + rng.normal(size=(10_000, 20)), columns=cols)
    out = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # a fresh process's first fit and adapt: pays the imports made then
        c, w = time.process_time(), time.perf_counter()
        from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
        PriorShiftWrapper(model, random_state=0).fit(X, y).adapt(X_new)
        out["first import + fit + adapt in a process"] = (time.process_time() - c,
                                                          time.perf_counter() - w)
        model3 = FrozenEstimator(lr3)
        three = PriorShiftWrapper(model3, random_state=0).fit(X3, y3)
        default = PriorShiftWrapper(model, random_state=0).fit(X, y)
        point = PriorShiftWrapper(model, n_resamples=0, random_state=0).fit(X, y)
        refit = PriorShiftWrapper(LogisticRegression(), random_state=0).fit(X, y)
        paths = {
            "sklearn LogisticRegression.fit 2000": lambda: LogisticRegression().fit(X, y),
            "sklearn predict_proba 10000": lambda: lr.predict_proba(X_new),
            "adapt default interval": lambda: default.adapt(X_new),
            "adapt point estimate only": lambda: point.adapt(X_new),
            "adapt default, base model refit": lambda: refit.adapt(X_new),
            "adapt default, 3 classes x 20 features": lambda: three.adapt(X3_new),
            "PriorShiftWrapper fit + predict_proba, 3x20": lambda: PriorShiftWrapper(
                model3, random_state=0).fit(X3, y3).predict_proba(X3_new),
            "PriorShiftWrapper fit + predict_proba": lambda: PriorShiftWrapper(
                model, random_state=0).fit(X, y).predict_proba(X_new),
            "PriorShiftWrapper fit refit + predict_proba": lambda: PriorShiftWrapper(
                LogisticRegression(), random_state=0).fit(X, y).predict_proba(X_new),
            "CalibrationWrapper auto fit, frozen": lambda: CalibrationWrapper(
                model, method="auto").fit(X, y),
            "CalibrationWrapper auto fit, cross-fitted": lambda: CalibrationWrapper(
                LogisticRegression(), method="auto", random_state=0).fit(X, y),
            "CostPolicyWrapper tuned fit, frozen": lambda: CostPolicyWrapper(
                model, costs=costs, strategy="tuned", random_state=0).fit(X, y),
            "CostPolicyWrapper tuned fit, cross-fitted": lambda: CostPolicyWrapper(
                LogisticRegression(), costs=costs, strategy="tuned", random_state=0).fit(X, y),
        }
        for name, fn in paths.items():
            out[name] = _median_times(fn, repeat)
    return out


def compare(dirs: list[str], rounds: int, repeat: int) -> None:
    """Run :func:`measure` in one process per checkout and round, alternating."""
    results: dict[str, list[dict]] = {d: [] for d in dirs}
    for r in range(rounds):
        order = dirs if r % 2 == 0 else dirs[::-1]
        for d in order:
            env = dict(os.environ, PYTHONPATH=str(Path(d).resolve()), OMP_NUM_THREADS="1",
                       OPENBLAS_NUM_THREADS="1")
            proc = subprocess.run([sys.executable, __file__, "--json", "--repeat", str(repeat)],
                                  env=env, capture_output=True, text=True, check=True)
            run = json.loads(proc.stdout.strip().splitlines()[-1])
            where = run.pop("probwrap")[0]
            results[d].append(run)
            print(f"round {r + 1}: {where} done, load {os.getloadavg()[0]:.1f}", flush=True)
    names = list(results[dirs[0]][0])
    print("\nCPU ms, median over rounds (min-max of the rounds' medians); wall ms median")
    print(f"{'path':45}" + "".join(f"{Path(d).resolve().name[-22:]:>30}" for d in dirs))
    for name in names:
        cells = []
        for d in dirs:
            cpu = [run[name][0] * 1e3 for run in results[d]]
            wall = [run[name][1] * 1e3 for run in results[d]]
            cells.append(f"{np.median(cpu):7.1f} ({min(cpu):6.1f}-{max(cpu):6.1f}) "
                         f"w{np.median(wall):6.0f}")
        print(f"{name:45}" + "".join(f"{c:>30}" for c in cells))


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--json", action="store_true", help="print one JSON line (for --compare)")
    parser.add_argument("--compare", nargs="+", metavar="CHECKOUT")
    parser.add_argument("--rounds", type=int, default=2)
    args = parser.parse_args(argv)
    if args.compare:
        compare(args.compare, args.rounds, args.repeat)
        return
    res = measure(args.repeat)
    if args.json:
        import probwrap
        res["probwrap"] = (probwrap.__file__, 0.0)
        print(json.dumps(res))
        return
    for name, (cpu, wall) in res.items():
        print(f"{name:45} CPU {cpu * 1e3:8.1f} ms   wall {wall * 1e3:8.1f} ms")


if __name__ == "__main__":
    main()
