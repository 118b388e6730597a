"""Labels that arrive late: IPCW against "not yet = no" and "drop the open rows".

Simulation with known truth. A score x ~ N(-1, 1.5); the event time is exponential with rate
-log(1 - sigmoid(x)) / h, so the true probability of an event within the horizon h is exactly
sigmoid(x). Rows enter uniformly over the last ``window`` days, so the newest are still open.
Three ways to build labels for the outcome "event within h" are compared, each followed by the
same Platt map on x:

- ``not yet = no``: an open row counts as negative;
- ``drop open``: open rows are left out (biased toward rows whose events came early);
- ``IPCW``: ``probwrap.late_labels.labels_at_horizon`` (Graf et al. 1999 weights).

Printed per observation window (shorter window = more open rows): the share of open rows, and
for each method the mean absolute error of the calibrated probability against the truth and
the estimated base rate against the true one. Run: ``python benchmarks/late_labels.py``.
"""

from __future__ import annotations

import argparse

import numpy as np

from probwrap.calibration import PlattMap
from probwrap.late_labels import labels_at_horizon


def one_run(rng, n, h, window):
    x = rng.normal(-1.0, 1.5, size=n)
    truth = 1 / (1 + np.exp(-x))
    T = rng.exponential(h / -np.log1p(-truth))
    C = rng.uniform(0, window, n)  # time observed so far
    t, e = np.minimum(T, C), (T <= C).astype(int)
    hl = labels_at_horizon(t, e, h)
    seen = ((t <= h) & (e == 1)).astype(int)
    out = {"open": hl.open_share}
    fits = {
        "not yet = no": (x, seen, None),
        "drop open": (x[~hl.is_open], seen[~hl.is_open], None),
        "IPCW": (x, hl.y, hl.sample_weight),
    }
    for name, (xs, ys, ws) in fits.items():
        p = PlattMap().fit(xs, ys, sample_weight=ws).predict(x)
        out[name] = (np.mean(np.abs(p - truth)), abs(np.mean(p) - np.mean(truth)))
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=50)
    ap.add_argument("--n", type=int, default=4000)
    args = ap.parse_args(argv)
    rng = np.random.default_rng(20261202)
    h = 30.0
    methods = ("not yet = no", "drop open", "IPCW")
    print(f"horizon {h:g} days, {args.n} rows, {args.reps} repetitions; mean |p - truth| "
          "(and |base-rate error|) of a Platt map on the score")
    print(f"{'window':>7s} {'open':>6s} " + " ".join(f"{m:>22s}" for m in methods))
    for window in (45, 60, 90, 180, 365):
        runs = [one_run(rng, args.n, h, window) for _ in range(args.reps)]
        cells = []
        for m in methods:
            mae = np.mean([r[m][0] for r in runs])
            rate = np.mean([r[m][1] for r in runs])
            cells.append(f"{mae:10.4f} ({rate:7.4f})")
        print(f"{window:7d} {np.mean([r['open'] for r in runs]):6.3f} " + " ".join(
            f"{c:>22s}" for c in cells))


if __name__ == "__main__":
    main()
