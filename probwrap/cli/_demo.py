"""``probwrap demo --out DIR``: the whole job on the invented parcel scenario."""

from __future__ import annotations

import argparse
import contextlib
import time
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from ._common import DataError, add_seed_flag, is_standard_stream, require, whole_number
from ._files import check_writable, write_text
from ._progress import Stages

__all__ = ["register", "run_demo", "run_three_way_demo", "parcel_costs"]

#: the scenario's costs (currency units): inspection and repacking ~3, a damaged delivery ~40
DEMO_COSTS = {"tp": 3.0, "fp": 3.0, "fn": 40.0, "tn": 0.0}
DEMO_CAPACITY = 0.25
#: three-way variant: actions, and the hold area's capacity (share of parcels)
THREE_WAY_ACTIONS = ("ship", "repack", "hold")
THREE_WAY_HOLD_CAPACITY = 0.03


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "demo",
        help="run the whole job on the built-in parcel scenario and write a report",
        description="Train a damage-risk model on invented summer parcels, calibrate it, choose "
        "inspect/ship actions under costs (inspection 3, damaged delivery 40) and a bench "
        "capacity, estimate the winter prevalence from unlabelled parcels, move the cutoff, "
        "print a summary and write DIR/report.html, with the score files the other verbs' "
        "examples use (DIR/heldout.csv, DIR/this-week.csv, DIR/winter.csv).",
    )
    parser.add_argument("--out", required=True, metavar="DIR",
                        help="folder for report.html and the example score files (not '-': "
                        "standard output cannot hold several files)")
    parser.add_argument("--n-train", type=whole_number(500), default=4000, metavar="N",
                        help="summer parcels for training (default 4000, at least 500)")
    add_seed_flag(parser, "the data, the folds and the bootstraps (the same seed gives the "
                  "same numbers and report)")
    parser.add_argument(
        "--variant", choices=("damage", "three-way"), default="damage",
        help="damage (default): inspect or ship; three-way: intact / dented / broken parcels "
        "routed to ship, repack (4) or hold (12, at most 3%% of parcels), with costs from each "
        "parcel's value",
    )
    parser.set_defaults(func=_handler, _parser=parser)


def _refuse_standard_output(args: argparse.Namespace) -> None:
    """``--out -`` is a usage error: the demo writes a folder of files (the page and, for the
    damage variant, three score files), which standard output cannot hold; before, a folder
    named "-" was made without a word."""
    if is_standard_stream(args.out):
        args._parser.error(
            "--out -: --out names the folder the demo writes into (report.html"
            + ("" if args.variant == "three-way" else ", heldout.csv, this-week.csv, winter.csv")
            + "), and standard output cannot be a folder; give a folder name, such as "
            "--out demo-output (for one page on standard output use 'probwrap report --out -')"
        )


def _write_page(out: Path, page: str) -> Path:
    if out.exists() and not out.is_dir():
        raise DataError(f"{out}: is a file; --out names a folder for report.html")
    target = out / "report.html"
    write_text(target, page)
    return target


def run_demo(
    out: str | Path, *, n_train: int = 4000, seed: int = 0, stages: Stages | None = None
) -> dict:
    """Run the demo and write ``out/report.html``; returns the summary numbers.

    Every random step (data, folds, bootstraps) is seeded from ``seed``: the same seed gives
    the same numbers.
    """
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
    from probwrap.datasets import make_parcels
    from probwrap.report import build_report

    if n_train < 500:
        raise ValueError("`--n-train` must be at least 500 (damage is rare).")
    step = (stages or _NoStages()).start
    step("making the invented parcels")
    summer = make_parcels(n_train, random_state=seed)
    test = make_parcels(max(n_train // 2, 1000), random_state=seed + 1)
    winter = make_parcels(max(n_train // 2, 1000), season="winter", random_state=seed + 2)
    base = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))

    step("calibrating and tuning the cutoff")
    calibrated = CalibrationWrapper(base, method="platt", cv=3, random_state=seed)
    policy = CostPolicyWrapper(
        calibrated, costs=DEMO_COSTS, strategy="tuned", capacity=DEMO_CAPACITY,
        actions=["ship", "inspect"], cv=3, random_state=seed, n_resamples=100,
    ).fit(summer.data, summer.target)
    step("estimating the winter prevalence")
    shift = PriorShiftWrapper(
        CalibrationWrapper(base, method="platt", cv=3, random_state=seed), cv=3,
        n_resamples=100, random_state=seed,
    ).fit(summer.data, summer.target)
    shift.adapt(winter.data)
    step("computing the report")
    content, page = build_report(
        **_report_progress(stages),
        model=policy, X=test.data, y=test.target,
        X_unlabelled=winter.data, prior_shift=shift, batch_size=max(len(winter.target) // 5, 1),
        n_resamples=100, random_state=seed,
        title="Parcel damage: inspect or ship (invented demo data)",
        source=f"the invented parcel scenario (probwrap.datasets.make_parcels, seed {seed})",
    )
    step("writing the report")
    target = _write_page(Path(out), page)
    files = _write_example_files(Path(out), base, summer, test, winter)
    rules = {r.key: r for r in content.rules}
    return {
        "content": content,
        "true_winter_prevalence": float(np.mean(winter.target)),
        "rules": rules,
        "report": target,
        "files": files,
    }


#: weight limits (kg) of the demo's size classes, for the files' "size" column
SIZE_LIMITS = (1.5, 6.0)
SIZE_NAMES = ("light", "medium", "heavy")


def _write_example_files(out: Path, base: Any, summer: Any, test: Any, winter: Any) -> list[Path]:
    """The score files the command-line pages use, next to the report.

    ``heldout.csv``: the held-out summer parcels with the uncalibrated model's ``risk``, the
    outcome ``damaged`` (yes/no) and the parcel's ``size`` class; ``this-week.csv`` and
    ``winter.csv``: the winter parcels with ``risk`` and ``size`` and no outcome, in arrival
    order. The model is the demo's logistic regression fitted on the summer training parcels,
    so ``probwrap calibrate fit --scores heldout.csv ...`` calibrates the same scores the wrappers
    calibrated.
    """
    from sklearn.base import clone

    model = clone(base).fit(summer.data, summer.target)

    def lines(bunch: Any, with_outcome: bool) -> str:
        risk = model.predict_proba(bunch.data)[:, 1]
        size = np.asarray(SIZE_NAMES)[np.searchsorted(SIZE_LIMITS, bunch.data[:, 0],
                                                      side="right")]
        head = "parcel,size,risk" + (",damaged" if with_outcome else "")
        rows = [f"{i + 1},{z},{r:.6f}" + ((",yes" if t else ",no") if with_outcome else "")
                for i, (z, r, t) in enumerate(zip(size, risk, bunch.target, strict=True))]
        return "\n".join([head, *rows]) + "\n"

    written = []
    for name, bunch, outcome in (("heldout.csv", test, True), ("this-week.csv", winter, False),
                                 ("winter.csv", winter, False)):
        write_text(out / name, lines(bunch, outcome))
        written.append(out / name)
    return written


def _report_progress(stages: Stages | None) -> dict:
    """``progress=stages.detail`` where the report accepts a progress callback."""
    from ._report_verb import _collect_parameters

    if stages is None or "progress" not in _collect_parameters():
        return {}
    return {"progress": stages.detail}


class _NoStages:
    def start(self, name: str) -> None:
        pass


#: the named steps of each demo variant (what the progress display counts)
DEMO_STEPS = {
    "damage": ["making the invented parcels", "calibrating and tuning the cutoff",
               "estimating the winter prevalence", "computing the report", "writing the report"],
    "three-way": ["making the invented parcels", "tuning the routing policy",
                  "estimating the winter class shares", "computing the report",
                  "writing the report"],
}


def parcel_costs(X) -> np.ndarray:
    """Per-parcel (n, 3 outcomes, 3 actions) costs of the three-way variant, from its value.

    Ship: free if intact, a dent costs 30% of the value plus 5, a break the value plus 8.
    Repack (4): prevents dents; a broken parcel still breaks. Hold (12): nothing leaves damaged.
    ``X`` is a DataFrame with a ``parcel_value`` column.

    Examples
    --------
    >>> import pandas as pd
    >>> parcel_costs(pd.DataFrame({"parcel_value": [100.0]}))[0].tolist()
    [[0.0, 4.0, 12.0], [35.0, 4.0, 12.0], [108.0, 112.0, 12.0]]
    """
    from probwrap.datasets import parcel_routing_costs

    return parcel_routing_costs(X["parcel_value"].to_numpy(dtype=float))


def _three_way_frame(n: int, seed: int, season: str = "summer"):
    from probwrap.datasets import make_parcels

    bunch = make_parcels(n, n_outcomes=3, season=season, random_state=seed, as_frame=True)
    X = bunch.data.copy()
    X["parcel_value"] = np.asarray(bunch.parcel_value)
    return X, np.asarray(bunch.target), bunch


def run_three_way_demo(
    out: str | Path, *, n_train: int = 4000, seed: int = 0, stages: Stages | None = None
) -> dict:
    """Ship / repack / hold with per-parcel costs; writes ``out/report.html``, returns numbers."""
    from sklearn.compose import ColumnTransformer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import CostPolicyWrapper, PriorShiftWrapper
    from probwrap.report import build_report

    if n_train < 500:
        raise ValueError("`--n-train` must be at least 500 (damage is rare).")
    require("pandas")
    step = (stages or _NoStages()).start
    step("making the invented parcels")
    X, y, summer = _three_way_frame(n_train, seed)
    Xt, yt, _ = _three_way_frame(max(n_train // 2, 1000), seed + 1)
    Xw, yw, _ = _three_way_frame(max(n_train // 2, 1000), seed + 2, season="winter")
    features = [c for c in X.columns if c != "parcel_value"]
    # the model never sees the value column; the costs do
    base = make_pipeline(ColumnTransformer([("features", StandardScaler(), features)]),
                         LogisticRegression(max_iter=1000))
    step("tuning the routing policy")
    policy = CostPolicyWrapper(
        base, costs=parcel_costs, actions=list(THREE_WAY_ACTIONS),
        capacity={"hold": THREE_WAY_HOLD_CAPACITY}, cv=3, random_state=seed,
    ).fit(X, y)
    step("estimating the winter class shares")
    shift = PriorShiftWrapper(base, cv=3, n_resamples=100, random_state=seed).fit(X, y)
    shift.adapt(Xw)
    step("computing the report")
    content, page = build_report(
        **_report_progress(stages),
        model=policy, X=Xt, y=yt, X_unlabelled=Xw, prior_shift=shift,
        class_names=summer.target_names, n_resamples=100, random_state=seed,
        title="Parcels: ship, repack or hold (invented demo data)",
        source=f"the invented parcel scenario (probwrap.datasets.make_parcels, seed {seed})",
    )
    step("writing the report")
    target = _write_page(Path(out), page)
    return {
        "content": content,
        "true_winter_shares": np.bincount(yw, minlength=3) / yw.shape[0],
        "rules": {r.key: r for r in content.rules},
        "report": target,
    }


def share_lines(c: Any, true_shares: Any) -> list[str]:
    """The winter class shares as the report shows them: the maximum-likelihood estimate with
    its own interval, then the shrunk estimate and the shares the rules move to."""
    level = f"{c.confidence_level:.0%}"
    ml, iv = c.ml_prior, c.ml_interval
    if ml is None:  # not EM: one estimate, with its interval
        ml, iv = c.target_prior, c.target_interval
    applied = c.applied_prior if getattr(c, "adaptation_weight", None) is not None else None
    head = (f"  {'class':<12}{'summer':>10}{'winter (ML)':>13}{level + ' interval':>22}"
            + (f"{'shrunk':>9}" if c.ml_prior is not None else "")
            + (f"{'applied':>9}" if applied is not None else "")
            + f"{'true share in the invented sample':>36}")
    lines = [head]
    for j, name in enumerate(c.class_names):
        span = f"[{iv[j, 0]:.4f}, {iv[j, 1]:.4f}]" if iv is not None else ""
        lines.append(
            f"  {name:<12}{c.source_prior[j]:>10.4f}{ml[j]:>13.4f}{span:>22}"
            + (f"{c.target_prior[j]:>9.4f}" if c.ml_prior is not None else "")
            + (f"{applied[j]:>9.4f}" if applied is not None else "")
            + f"{true_shares[j]:>36.4f}")
    if faded_note(c):
        lines.append("  (shrunk:" + faded_note(c)[3:])
    if applied is not None:
        w = c.adaptation_weight
        lines.append("  (shrunk: toward the summer shares; applied: what the rules use, "
                     + ("not moved: too little evidence of a shift)" if w <= 0 else
                        f"moved {100 * w:.0f}% of the way by the evidence)"))
    return lines


@contextlib.contextmanager
def _demo_warnings() -> Any:
    """Library warnings met while the demo runs, each printed once as a
    ``probwrap demo: warning:`` line (as the other verbs print theirs), not as Python's
    ``file.py:45: UserWarning:`` display with a source line."""
    from ._calibrate import report_warnings

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            yield
        finally:
            report_warnings("demo", caught)


def _three_way_handler(args: argparse.Namespace) -> int:
    _refuse_standard_output(args)
    start = time.perf_counter()
    check_writable(args.out, folder=True)
    with Stages("demo", DEMO_STEPS["three-way"]) as stages, _demo_warnings():
        result = run_three_way_demo(args.out, n_train=args.n_train, seed=args.seed,
                                    stages=stages)
    c = result["content"]
    print("probwrap demo (three-way): ship / repack (4) / hold (12), costs from each parcel's "
          f"value, hold capacity {THREE_WAY_HOLD_CAPACITY:.0%}")
    metric = {m.key: m for m in c.metrics}
    for key, label in (("ece_top", "top-label calibration error"),
                       ("ece_classwise", "classwise calibration error")):
        m = metric[key]
        print(f"  {label:<30}{m.value:.4f}  [{m.low:.4f}, {m.high:.4f}]")
    head = "".join(f"{a:>9}" for a in c.action_names)
    print(f"  {'rule':<58}{'cost/parcel':>12}{head}")
    for r in c.rules:
        shares = "".join(f"{100 * s:>8.1f}%" for s in r.shares)
        print(f"  {r.label:<58}{r.mean_cost:>12.3f}{shares}")
    for line in share_lines(c, result["true_winter_shares"]):
        print(line)
    print(f"  shift test p-value            {c.shift_pvalue:.3g}")
    print(f"  report                        {result['report']}  "
          f"({time.perf_counter() - start:.1f} s)")
    return 0


def faded_note(c: Any) -> str:
    """A note after the shrunk estimate when its pull toward the summer share(s) faded: the
    winter rows rejected the estimate with all ``prior_strength`` pseudo-rows, so fewer were
    used (``pseudo_rows``) and the shrunk value lies inside the interval; "" otherwise."""
    strength, used = getattr(c, "prior_strength", None), getattr(c, "pseudo_rows", None)
    if strength is None or used is None or used >= strength:
        return ""
    return (f"  (pull faded to {used:.2g} of {strength:g} rows: the winter rows reject the full "
            "pull; inside the interval)")


def prevalence_lines(c: Any, true_share: float) -> list[str]:
    """The winter prevalence as the report shows it: the maximum-likelihood estimate with its
    own interval, the shrunk estimate on its own line (never beside an interval widened to
    reach it), and the prevalence the rules move to after the evidence gate."""
    level = f"{c.confidence_level:.0%}"
    truth = f"(true share in the invented sample {true_share:.4f})"
    ml, iv = c.ml_prevalence, c.ml_interval
    if ml is None:  # not EM: one estimate, with its interval
        iv = c.target_interval
        ml = c.target_prevalence
    span = f"  [{iv[0]:.4f}, {iv[1]:.4f}] ({level})" if iv is not None else ""
    lines = [f"  winter prevalence (est.)   {ml:.4f}{span}  maximum likelihood  {truth}"]
    if c.ml_prevalence is not None:
        lines.append(f"  shrunk toward summer       {c.target_prevalence:.4f}" + faded_note(c))
    weight = getattr(c, "adaptation_weight", None)
    if weight is not None and c.applied_prevalence is not None:
        moved = ("not moved: too little evidence of a shift" if weight <= 0 else
                 f"moved {100 * weight:.0f}% of the way by the evidence")
        lines.append(f"  applied by the rules       {c.applied_prevalence:.4f}  ({moved})")
    return lines


def _handler(args: argparse.Namespace) -> int:
    if getattr(args, "variant", "damage") == "three-way":
        return _three_way_handler(args)
    _refuse_standard_output(args)
    start = time.perf_counter()
    check_writable(args.out, folder=True)
    with Stages("demo", DEMO_STEPS["damage"]) as stages, _demo_warnings():
        result = run_demo(args.out, n_train=args.n_train, seed=args.seed, stages=stages)
    c = result["content"]
    rules = result["rules"]
    print("probwrap demo: parcel damage, inspect (3) vs damaged delivery (40), "
          f"bench capacity {DEMO_CAPACITY:.0%}")
    print(f"  calibration map            {c.calibration_method}")
    metric = {m.key: m for m in c.metrics}
    ece = metric["ece"]
    print(f"  calibration error (ECE)    {ece.value:.4f}  [{ece.low:.4f}, {ece.high:.4f}]")
    iv = c.chosen_interval
    if c.interval_cutoff is None or c.interval_cutoff == c.chosen_cutoff:
        print(f"  chosen cutoff              {c.chosen_cutoff:.4f}  [{iv[0]:.4f}, {iv[1]:.4f}]")
    else:  # the interval belongs to the least-cost cutoff, not to the settled one
        print(f"  chosen cutoff              {c.chosen_cutoff:.4f}")
        print(f"  least-cost cutoff          {c.interval_cutoff:.4f}  [{iv[0]:.4f}, {iv[1]:.4f}]")
    print(f"  {'rule':<34}{'cost/parcel':>12}{'inspected':>11}")
    for key in ("chosen", "plugin", "half", "none", "all"):
        if key in rules:
            r = rules[key]
            print(f"  {r.label:<34}{r.mean_cost:>12.3f}{100 * r.flagged_share:>10.1f}%")
    print(f"  summer prevalence          {c.source_prevalence:.4f}")
    for line in prevalence_lines(c, result["true_winter_prevalence"]):
        print(line)
    print(f"  shift test p-value         {c.shift_pvalue:.3g}")
    if c.adapted_cutoff is not None:
        print(f"  winter cutoff              {c.adapted_cutoff:.4f}")
    print(f"  report                     {result['report']}  "
          f"({time.perf_counter() - start:.1f} s)")
    print("  files for the other verbs  " + ", ".join(p.name for p in result["files"])
          + " (see the command-line page)")
    return 0
