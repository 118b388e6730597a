"""``probwrap demo --out DIR``: the whole job on the invented parcel scenario."""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

__all__ = ["register", "run_demo"]

#: the scenario's costs (currency units): inspection and repacking ~3, a damaged delivery ~40
DEMO_COSTS = {"tp": 3.0, "fp": 3.0, "fn": 40.0, "tn": 0.0}
DEMO_CAPACITY = 0.25


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "demo",
        help="run the whole job on the built-in parcel scenario and write a report",
        description="Train a damage-risk model on invented summer parcels, calibrate it, choose "
        "inspect/ship actions under costs (inspection 3, damaged delivery 40) and a bench "
        "capacity, estimate the winter prevalence from unlabelled parcels, move the cutoff, "
        "print a summary and write DIR/report.html.",
    )
    parser.add_argument("--out", required=True, metavar="DIR", help="directory for report.html")
    parser.add_argument("--n-train", type=int, default=4000, metavar="N",
                        help="summer parcels for training (default 4000)")
    parser.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    parser.set_defaults(func=_handler)


def run_demo(out: str | Path, *, n_train: int = 4000, seed: int = 0) -> dict:
    """Run the demo and write ``out/report.html``; returns the summary numbers."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
    from probwrap.datasets import make_parcels
    from probwrap.report import write_report

    from ._common import progress

    if n_train < 500:
        raise ValueError("`--n-train` must be at least 500 (damage is rare).")
    steps = iter(progress(range(5), desc="demo", total=5))
    summer = make_parcels(n_train, random_state=seed)
    test = make_parcels(max(n_train // 2, 1000), random_state=seed + 1)
    winter = make_parcels(max(n_train // 2, 1000), season="winter", random_state=seed + 2)
    base = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))

    next(steps, None)
    calibrated = CalibrationWrapper(base, method="platt", cv=3)
    policy = CostPolicyWrapper(
        calibrated, costs=DEMO_COSTS, strategy="tuned", capacity=DEMO_CAPACITY,
        actions=["ship", "inspect"], cv=3, random_state=seed, n_resamples=100,
    ).fit(summer.data, summer.target)
    next(steps, None)
    shift = PriorShiftWrapper(
        CalibrationWrapper(base, method="platt", cv=3), cv=3, n_resamples=100,
        random_state=seed,
    ).fit(summer.data, summer.target)
    shift.adapt(winter.data)
    next(steps, None)
    out = Path(out)
    content = write_report(
        out / "report.html", model=policy, X=test.data, y=test.target,
        X_unlabelled=winter.data, prior_shift=shift, batch_size=max(len(winter.target) // 5, 1),
        n_resamples=100, random_state=seed,
        title="Parcel damage: inspect or ship (invented demo data)",
    )
    next(steps, None)
    rules = {r.key: r for r in content.rules}
    return {
        "content": content,
        "true_winter_prevalence": float(np.mean(winter.target)),
        "rules": rules,
        "report": out / "report.html",
    }


def _handler(args: argparse.Namespace) -> int:
    start = time.perf_counter()
    result = run_demo(args.out, n_train=args.n_train, seed=args.seed)
    c = result["content"]
    rules = result["rules"]
    print("probwrap demo: parcel damage, inspect (3) vs damaged delivery (40), "
          f"bench capacity {DEMO_CAPACITY:.0%}")
    print(f"  calibration map            {c.calibration_method}")
    metric = {m.key: m for m in c.metrics}
    ece = metric["ece"]
    print(f"  calibration error (ECE)    {ece.value:.4f}  [{ece.low:.4f}, {ece.high:.4f}]")
    iv = c.chosen_interval
    print(f"  chosen cutoff              {c.chosen_cutoff:.4f}  [{iv[0]:.4f}, {iv[1]:.4f}]")
    print(f"  {'rule':<34}{'cost/parcel':>12}{'inspected':>11}")
    for key in ("chosen", "plugin", "half", "none", "all"):
        if key in rules:
            r = rules[key]
            print(f"  {r.label:<34}{r.mean_cost:>12.3f}{100 * r.flagged_share:>10.1f}%")
    print(f"  summer prevalence          {c.source_prevalence:.4f}")
    ti = c.target_interval
    print(f"  winter prevalence (est.)   {c.target_prevalence:.4f}  [{ti[0]:.4f}, {ti[1]:.4f}]"
          f"  (true share in the invented sample {result['true_winter_prevalence']:.4f})")
    print(f"  shift test p-value         {c.shift_pvalue:.3g}")
    if c.adapted_cutoff is not None:
        print(f"  winter cutoff              {c.adapted_cutoff:.4f}")
    print(f"  report                     {result['report']}  "
          f"({time.perf_counter() - start:.1f} s)")
    return 0
