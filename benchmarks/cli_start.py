"""Processor time to start the ``probwrap`` command line, beside importing scikit-learn.

Runs each command a few times in a fresh interpreter and prints the least user + system time
(resource.getrusage of the children), and its ratio to ``python -c "import sklearn"``:

- ``probwrap --help`` and a usage error (a misspelt option) should cost a small part of
  importing scikit-learn (they import none of scikit-learn, SciPy or pandas);
- a verb that computes (``cutoff`` on held-out breast cancer scores) imports scikit-learn, so
  it costs about that import plus its own work.

Usage: ``python benchmarks/cli_start.py [--repeats 3]`` from the repository root.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def cpu_seconds(argv: list[str], repeats: int) -> float:
    """The least processor time (user + system) of ``argv`` over ``repeats`` runs."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), PROBWRAP_PROGRESS="0",
               OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    best = float("inf")
    for _ in range(repeats):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run(argv, env=env, capture_output=True, check=False)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        used = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        best = min(best, used)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    import numpy as np
    import pandas as pd
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    order = np.random.default_rng(0).permutation(y.size)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1)).fit(
        X[order[:280]], y[order[:280]])
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "held.csv"
        pd.DataFrame({"score": model.predict_proba(X[order[280:]])[:, 1],
                      "benign": y[order[280:]]}).to_csv(path, index=False)
        py = [sys.executable]
        base = cpu_seconds(py + ["-c", "import sklearn"], args.repeats)
        rows = [
            ("probwrap --help", py + ["-m", "probwrap", "--help"]),
            ("usage error (--capacty)", py + ["-m", "probwrap", "cutoff", "--capacty", "0.1"]),
            ("cutoff (289 rows, --resamples 0)",
             py + ["-m", "probwrap", "cutoff", "--scores", str(path), "--score-column", "score",
                   "--label-column", "benign", "--cost-fp", "1", "--cost-fn", "5",
                   "--resamples", "0"]),
        ]
        print(f"{'command':36s} {'cpu s':>7s} {'/ import sklearn':>17s}")
        label = 'python -c "import sklearn"'
        print(f"{label:36s} {base:7.2f} {1.0:17.2f}")
        for name, argv in rows:
            t = cpu_seconds(argv, args.repeats)
            print(f"{name:36s} {t:7.2f} {t / base:17.2f}")


if __name__ == "__main__":
    main()
