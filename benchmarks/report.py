"""Time of a full binary report on many labelled rows plus batches of unlabelled rows.

Target (issue: the report on 10^6 labelled rows plus 10 unlabelled batches in at most 60 s on
two cores). Printed: the time of each step of the report (through its ``progress`` callback),
the total against the target, and, for scale, one ``np.sort`` of the labelled probabilities and
one scikit-learn ``brier_score_loss`` on them, in the same process.

Run: ``python benchmarks/report.py`` (10^6 rows, 10 batches of 10^4 unlabelled rows, 200
resamples); ``--rows N``, ``--batches B``, ``--batch-size M``, ``--resamples R`` change the
sizes. On a shared machine set ``OPENBLAS_NUM_THREADS=1``: a busy BLAS thread pool makes every
small dot product wait (seen here: 30 ms instead of 5 us for 2*10^4 elements).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from sklearn.metrics import brier_score_loss

from probwrap.report import build_report

TARGET_SECONDS = 60.0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--batches", type=int, default=10)
    ap.add_argument("--batch-size", type=int, default=10_000)
    ap.add_argument("--resamples", type=int, default=200)
    args = ap.parse_args()

    rng = np.random.default_rng(0)
    p = rng.beta(1.0, 12.0, size=args.rows)
    y = (rng.uniform(size=args.rows) < p).astype(np.int64)
    q = rng.beta(1.3, 12.0, size=args.batches * args.batch_size)

    t = time.perf_counter()
    np.sort(p)
    t_sort = time.perf_counter() - t
    t = time.perf_counter()
    brier_score_loss(y, p)
    t_brier = time.perf_counter() - t

    marks: list[tuple[str, float]] = []

    def progress(step: str, done: int, total: int) -> None:
        marks.append((step, time.perf_counter()))
        print(f"  [{done}/{total}] {step}", flush=True)

    print(f"report on {args.rows:,} labelled rows, {args.batches} batches of "
          f"{args.batch_size:,} unlabelled rows, {args.resamples} resamples")
    start = time.perf_counter()
    content, page = build_report(
        y_true=y, y_prob=p, costs={"fp": 3.0, "fn": 40.0}, capacity=0.25, unlabelled_prob=q,
        batch_size=args.batch_size, n_resamples=args.resamples, random_state=0,
        progress=progress,
    )
    total = time.perf_counter() - start
    print("step times:")
    for (name, t0), (_, t1) in zip(marks, marks[1:] + [("end", start + total)], strict=True):
        if name != "done":
            print(f"  {name:<24}{t1 - t0:8.1f} s")
    print(f"  {'figures and page':<24}{start + total - marks[-1][1]:8.1f} s")
    print(f"total {total:.1f} s (target <= {TARGET_SECONDS:.0f} s): "
          + ("met" if total <= TARGET_SECONDS else "NOT met"))
    print(f"for scale: np.sort of the probabilities {t_sort:.3f} s, scikit-learn "
          f"brier_score_loss {t_brier:.3f} s; report / sort = {total / t_sort:.0f}")
    print(f"page size {len(page) / 1e6:.1f} MB; recommended cutoff "
          f"{content.recommendation.cutoff:.4f}")


if __name__ == "__main__":
    main()
