"""Third trust sweep: probwrap on bundled data of packages the project had not used.

Data shipped inside the wheels of lifelines, palmerpenguins, pingouin, vega_datasets, sktime and
statsmodels (sets the first two rounds did not touch); nothing is downloaded: every loader used
here reads a file inside the installed package. Install them with ``pip install -e ".[sweep]"``.
Each task's target and how its label was made is named in :func:`fresh_data_sets` and in
``docs/small_data.md``.

Four parts:

* ``--only wrappers`` (default): the draws and checks of ``small_data_sweep.py --sets new`` (five
  base models; calibration sets of 20, 60 and 200 rows, a rare-class and a 5 % prevalence set;
  every wrapper, metric and decision function; scikit-learn's ``CalibratedClassifierCV`` on the
  same rows; ``PriorShiftWrapper.adapt`` on test rows resampled to 0.5x and 2x their prevalence)
  on these sets: this script hands its own data-set generator to that one.
* ``--only cost``: the cost sweep of ``small_data_sweep.py --only cost`` on these sets
  (``TunedThresholdClassifierCV(cv="prefit")`` on the same rows, plug-in and 0.5 cutoffs).
* ``--only user``: inputs as a user passes them — pandas frames with a shuffled non-default
  index, labels as strings with spaces and as categoricals, integer frequency weights against
  duplicated rows for each wrapper (fit and predictions), weights normalised to sum 1 and scaled
  by 1e-3, a frozen model whose ``classes_`` are not sorted, and the fixed and tuned cutoffs of
  ``CostPolicyWrapper`` beside scikit-learn's ``FixedThresholdClassifier`` and
  ``TunedThresholdClassifierCV(cv="prefit")`` on the same rows.
* ``--only cli``: score files written from these sets, run through ``probwrap`` subcommands as a
  user would type them (help, wrong column, wrong label, missing values, each method, report);
  exit codes, messages and output files are checked.

Run: ``nice python benchmarks/fresh_data_sweep.py --quick`` (under a minute: the user and
command-line parts on three sets), ``--only wrappers --seeds 1`` (about half an hour),
``--only cost --seeds 2``, ``--only user``, ``--only cli``.
"""

from __future__ import annotations

import collections
import os
import shlex
import subprocess
import sys
import tempfile
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
import small_data_sweep as S  # noqa: E402

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper  # noqa: E402


# --------------------------------------------------------------------------- data
def _frame_numeric(frame):
    """Features as floats: categorical columns one-hot coded (first level dropped), missing
    numbers filled with the column median."""
    import pandas as pd

    frame = frame.copy()
    for c in frame.columns:
        if frame[c].dtype.kind in "fi":
            frame[c] = frame[c].fillna(frame[c].median())
    return pd.get_dummies(frame, drop_first=True, dtype=float).to_numpy(float)


def _series(X3):
    """sktime's numpy3D panel (rows, channels, time) flattened to one row per series."""
    return np.asarray(X3, float).reshape(X3.shape[0], -1)


def fresh_data_sets(quick: bool = False, labels: bool = False):
    """Bundled data sets of packages the project had not used: (name, X, y).

    With ``labels=True`` ``y`` holds the data set's own labels (strings, some with spaces);
    otherwise integer codes (binary tasks: 1 = the event / the minority named in the name).

    lifelines (bundled CSVs): rossi (432 released prisoners; arrest within a year, 26 %, from
    financial aid, age, race, work experience, marriage, parole, prior convictions — the week of
    arrest left out, it gives the label away), kidney_transplant (863; death during follow-up,
    16 %, from age and sex/race indicators: a weak model at low prevalence), larynx (90; death,
    from stage and age: a tiny set), lung (228; alive at the end of follow-up, 28 %, with missing
    values in five columns, filled with the median), dd (1,808 heads of government; the regime,
    six classes whose names contain spaces such as "Civilian Dict" and "Parliamentary Dem", from
    continent, start year, duration and whether the spell ended — the democracy flag left out).
    palmerpenguins: species (3 classes, nearly separable from four body measurements) and sex
    (from measurements and species). pingouin's tips: the day of the visit (4 classes; Friday
    8 %). vega_datasets' local cars (origin, 3 classes) and seattle-weather (the weather word,
    5 classes; snow 1.6 %, drizzle 3.7 %, from precipitation, temperatures, wind and month).
    sktime's bundled time-series sets, each series flattened into one row of features:
    GunPoint (200, binary), ItalyPowerDemand (1,096, binary), ArrowHead (211, 3 classes),
    BasicMotions (80, 4 classes, 6 channels x 100 steps), OSULeaf (442, 6 classes).
    statsmodels' interest_inflation (106 quarters; inflation higher next quarter, from this
    quarter's inflation, interest rate and quarter: a weak model on a tiny set).
    """
    import lifelines.datasets as ld
    import palmerpenguins
    import pingouin

    def out(name, X, y_lab, event=None):
        y_lab = np.asarray(y_lab)
        if labels:
            return name, X, y_lab
        if event is not None:
            return name, X, (y_lab == event).astype(int)
        return name, X, np.unique(y_lab, return_inverse=True)[1]

    d = ld.load_rossi()
    yield out("rossi arrest", _frame_numeric(d.drop(columns=["week", "arrest"])),
              np.where(d["arrest"] == 1, "arrested", "not arrested"), "arrested")
    d = palmerpenguins.load_penguins().dropna(
        subset=["bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g"])
    yield out("penguins species", d[["bill_length_mm", "bill_depth_mm", "flipper_length_mm",
                                     "body_mass_g"]].to_numpy(float), d["species"])
    d = pingouin.read_dataset("tips")
    yield out("tips day (Fri 8%)", _frame_numeric(d.drop(columns="day")), d["day"])
    if quick:
        return
    d = ld.load_kidney_transplant()
    yield out("kidney_transplant death (16%)", _frame_numeric(d.drop(columns=["time", "death"])),
              np.where(d["death"] == 1, "died", "alive"), "died")
    d = ld.load_larynx()
    yield out("larynx death (90 rows)", _frame_numeric(d.drop(columns=["time", "death"])),
              np.where(d["death"] == 1, "died", "alive"), "died")
    d = ld.load_lung()
    yield out("lung alive (missing values)",
              _frame_numeric(d.drop(columns=["time", "status", "inst"])),
              np.where(d["status"] == 0, "alive at end", "died"), "alive at end")
    d = ld.load_dd()
    yield out("dd regime (6, names with spaces)",
              _frame_numeric(d[["un_continent_name", "start_year", "duration", "observed"]]),
              d["regime"])
    d = palmerpenguins.load_penguins().dropna()
    yield out("penguins sex", _frame_numeric(d.drop(columns=["sex", "year"])), d["sex"], "female")
    import vega_datasets as vd

    d = vd.local_data.cars()
    yield out("cars origin (3)", _frame_numeric(d.drop(columns=["Name", "Origin", "Year"]).assign(
        Year=d["Year"].dt.year)), d["Origin"])
    d = vd.local_data.seattle_weather()
    feats = d[["precipitation", "temp_max", "temp_min", "wind"]].assign(month=d["date"].dt.month)
    yield out("seattle weather (5, snow 1.6%)", feats.to_numpy(float), d["weather"])
    from sktime.datasets import (
        load_arrow_head,
        load_basic_motions,
        load_gunpoint,
        load_italy_power_demand,
        load_osuleaf,
    )

    for loader, name in ((load_gunpoint, "gunpoint (2)"),
                         (load_italy_power_demand, "italy power demand (2)"),
                         (load_arrow_head, "arrowhead (3)"),
                         (load_basic_motions, "basic motions (4, 80 rows)"),
                         (load_osuleaf, "osuleaf (6)")):
        X3, y = loader(return_X_y=True, return_type="numpy3D")
        yield out(name, _series(X3), y, "2" if "(2)" in name else None)
    import statsmodels.datasets.interest_inflation as ii

    d = ii.load_pandas().data
    up = (d["Dp"].shift(-1) > d["Dp"]).to_numpy()[:-1]
    yield out("interest_inflation up next q (106)", d[["Dp", "R", "quarter"]].to_numpy(float)[:-1],
              np.where(up, "up", "not up"), "up")


# --------------------------------------------------------------------------- user inputs
found: collections.Counter = collections.Counter()
found_first: dict = {}
found_auto: collections.Counter = collections.Counter()  # (chosen with weights, with copies)


def flag(kind: str, where: str, detail: str) -> None:
    found[kind] += 1
    if kind not in found_first:
        found_first[kind] = f"{where}: {detail}"[:400]
        print(f"  first {kind}: {found_first[kind]}", flush=True)


def _quiet(fn, *a, **k):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*a, **k)


def _close(a, b, rtol=1e-7, atol=1e-10) -> bool:
    a, b = np.asarray(a, float), np.asarray(b, float)
    return a.shape == b.shape and np.allclose(a, b, rtol=rtol, atol=atol)


class _Reordered:
    """A fitted classifier whose ``classes_`` are in a given (unsorted) order; predict_proba's
    columns follow that order — what a model from outside scikit-learn may do."""

    _estimator_type = "classifier"

    def __init__(self, model, order):
        self.model, self.order = model, np.asarray(order)
        self.classes_ = np.asarray(model.classes_)[self.order]
        self.n_features_in_ = model.n_features_in_

    def fit(self, X, y):
        return self

    def predict_proba(self, X):
        return self.model.predict_proba(X)[:, self.order]

    def predict(self, X):
        return self.classes_[np.argmax(self.predict_proba(X), 1)]

    def __sklearn_tags__(self):
        return self.model.__sklearn_tags__()

    def get_params(self, deep=True):
        return {"model": self.model, "order": self.order}


def user_checks(quick: bool, sets=None) -> None:
    """Pandas inputs, string labels, weights, unsorted classes, and the cost rules beside
    scikit-learn's threshold classifiers; counts what goes wrong (see the module docstring).
    ``sets``: a generator of data sets called as ``sets(quick, labels=True)`` (default
    :func:`fresh_data_sets`; ``wide_data_sweep.py`` passes its own)."""
    import pandas as pd
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.metrics import make_scorer
    from sklearn.model_selection import FixedThresholdClassifier, TunedThresholdClassifierCV
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    cost_ratio = collections.defaultdict(list)
    for name, X, y_lab in (sets or fresh_data_sets)(quick, labels=True):
        rng = np.random.default_rng(0)
        n = len(y_lab)
        idx = rng.permutation(n)
        n_fit = max(n // 3, 20)
        fit, rest = idx[:n_fit], idx[n_fit:]
        classes = np.unique(y_lab)
        k = len(classes)
        if len(np.unique(y_lab[fit])) < k:
            continue
        model = _quiet(make_pipeline(StandardScaler(), LogisticRegression(max_iter=3000)).fit,
                       X[fit], y_lab[fit])
        frozen = FrozenEstimator(model)
        cal = rest[: min(len(rest) // 2, 200)]
        test = rest[len(cal):]
        if len(np.unique(y_lab[cal])) < k or len(test) < 10:
            continue
        cols = [f"f {j}" for j in range(X.shape[1])]
        # a frame with a shuffled, non-default index, labels as strings and as a categorical
        # with its categories in reverse order
        Xc_df = pd.DataFrame(X[cal], columns=cols, index=rng.permutation(len(cal)) + 1000)
        frozen_df = FrozenEstimator(_quiet(make_pipeline(
            StandardScaler(), LogisticRegression(max_iter=3000)).fit,
            pd.DataFrame(X[fit], columns=cols), y_lab[fit]))
        y_str = pd.Series(y_lab[cal], index=Xc_df.index)
        y_cat = y_str.astype(pd.CategoricalDtype(classes[::-1]))
        Xt_df = pd.DataFrame(X[test], columns=cols)
        for comp, make in (
            ("CalibrationWrapper", lambda e: CalibrationWrapper(e, method="auto", random_state=0)),
            ("PriorShiftWrapper", lambda e: PriorShiftWrapper(e, random_state=0, n_resamples=20)),
            ("CostPolicyWrapper", lambda e, k=k: CostPolicyWrapper(
                e, costs=1.0 - np.eye(k), strategy="tuned", random_state=0, n_resamples=20)),
        ):
            where = f"{name}|{comp}"
            ref = None
            for label_kind, yy in (("str", y_str), ("categorical", y_cat)):
                X_before, y_before = Xc_df.copy(), yy.copy()
                try:
                    w = _quiet(make(frozen_df).fit, Xc_df, yy)
                    p = w.predict_proba(Xt_df)
                    pred = w.predict(Xt_df)
                except Exception as e:  # noqa: BLE001 - counting failures is the point
                    flag("pandas input fails", f"{where}|{label_kind}", f"{type(e).__name__}: {e}")
                    continue
                if not (Xc_df.equals(X_before) and yy.equals(y_before)):
                    flag("input modified", where, label_kind)
                if list(map(str, w.classes_)) != list(map(str, classes)):
                    flag("classes_ not the sorted labels", f"{where}|{label_kind}",
                         f"{list(w.classes_)}")
                if not set(map(str, np.unique(pred))) <= set(map(str, classes)):
                    flag("predict gives other labels", where, f"{np.unique(pred)}")
                if np.any(p <= 0) or np.any(p >= 1) or not np.allclose(p.sum(1), 1):
                    flag("probability 0/1 or rows off 1", f"{where}|{label_kind}", "")
                if ref is None:
                    ref = p
                elif not _close(p, ref):
                    flag("string vs categorical labels differ", where,
                         f"max diff {np.max(np.abs(p - ref)):.2g}")
        # frequency weights against duplicated rows, and scaled weights, on every wrapper
        Xc, yc = X[cal], y_lab[cal]
        wfreq = rng.integers(1, 4, len(cal))
        Xd, yd = np.repeat(Xc, wfreq, axis=0), np.repeat(yc, wfreq)
        for comp, make in (
            ("CalibrationWrapper[auto]", lambda f=frozen: CalibrationWrapper(
                f, method="auto", random_state=0)),
            ("CalibrationWrapper[platt]", lambda f=frozen: CalibrationWrapper(f, method="platt")),
            ("CalibrationWrapper[isotonic]", lambda f=frozen: CalibrationWrapper(
                f, method="isotonic")),
            ("PriorShiftWrapper.adapt", lambda f=frozen: PriorShiftWrapper(
                f, random_state=0, n_resamples=20)),
            ("CostPolicyWrapper[tuned]", lambda f=frozen, k=k: CostPolicyWrapper(
                f, costs=(1 - np.eye(k)) * (1 + np.arange(k))[:, None], strategy="tuned",
                random_state=0, n_resamples=20)),
        ):
            where = f"{name}|{comp}"
            try:
                fits = [_quiet(make().fit, Xc, yc, sample_weight=sw) for sw in (
                    wfreq.astype(float), wfreq / wfreq.sum(), wfreq * 1e-3)]
                dup = _quiet(make().fit, Xd, yd)
                if comp.endswith(".adapt"):
                    fits = [_quiet(f.adapt, X[test]) for f in fits]
                    dup = _quiet(dup.adapt, X[test])
            except Exception as e:  # noqa: BLE001
                flag(f"weights fail [{comp}]", where, f"{type(e).__name__}: {e}")
                continue
            if comp == "CalibrationWrapper[auto]" and dup.method_ != fits[0].method_:
                # auto's folds split duplicated rows, so a copy of a row is scored on itself and
                # flexible maps look better; weights keep a row in one fold. Not a defect of the
                # weights: compare the maps of the method chosen with weights
                found_auto[(fits[0].method_, dup.method_)] += 1
                dup = _quiet(CalibrationWrapper(frozen, method=fits[0].method_).fit, Xd, yd)
            ps = [f.predict_proba(X[test]) for f in fits + [dup]]
            choice = [getattr(f, "method_", None) or getattr(f, "cutoff_", None) for f in fits]
            if not _close(ps[0], ps[3], rtol=1e-6, atol=1e-9):
                flag(f"frequency weights != duplicated rows [{comp}]", where,
                     f"max diff {np.max(np.abs(ps[0] - ps[3])):.2g}")
            if not (_close(ps[1], ps[2], rtol=1e-6, atol=1e-9)
                    and len({repr(c) for c in choice[1:]}) == 1):
                flag(f"choice moves with the weights' scale (sum 1 vs x1e-3) [{comp}]", where,
                     f"{choice[1:]}, max diff {np.max(np.abs(ps[1] - ps[2])):.2g}")
        # a frozen model with classes_ in an unsorted order (binary: the positive class first)
        if k == 2:
            flipped = FrozenEstimator(_Reordered(model, [1, 0]))
            costs = {"fp": 1.0, "fn": 5.0}
            try:
                with warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always")
                    a = CostPolicyWrapper(flipped, costs=costs).fit(Xc, yc)
                b = _quiet(CostPolicyWrapper(frozen, costs=costs).fit, Xc, yc)
                same = np.array_equal(a.predict(X[test]), b.predict(X[test]))
                said = any("classes_" in str(m.message) for m in caught)
                if not same and not said:
                    flag("unsorted classes_: silent other positive class", name,
                         f"classes_ {list(flipped.classes_)}")
            except ValueError as e:
                if "classes_" not in str(e):
                    flag("unsorted classes_: unclear error", name, str(e))
        # the cost rules beside scikit-learn's threshold classifiers (binary; positive = minority)
        if k == 2:
            counts = collections.Counter(yc)
            pos = min(classes, key=lambda c: counts[c])
            neg = [c for c in classes if c != pos][0]
            yb = (yc == pos).astype(int)
            yt = (y_lab[test] == pos).astype(int)
            if yb.sum() < 3:
                continue
            mb = _quiet(make_pipeline(StandardScaler(), LogisticRegression(max_iter=3000)).fit,
                        X[fit], (y_lab[fit] == pos).astype(int))
            fb = FrozenEstimator(mb)
            for c_fn in (3.0, 10.0):
                costs = {"fp": 1.0, "fn": c_fn}
                mine = _quiet(CostPolicyWrapper(fb, costs=costs, strategy="tuned",
                                                random_state=0).fit, Xc, yb)
                scorer = make_scorer(lambda a, b, c=c_fn: -S._realised(np.asarray(a), b, c))
                sk = _quiet(TunedThresholdClassifierCV(mb, scoring=scorer, cv="prefit",
                                                       refit=False).fit, Xc, yb)
                fixed_mine = CostPolicyWrapper(fb, costs=costs, strategy="fixed",
                                               cutoff=1 / (1 + c_fn)).fit(Xc, yb)
                fixed_sk = FixedThresholdClassifier(fb, threshold=1 / (1 + c_fn)).fit(Xc, yb)
                if not np.array_equal(fixed_mine.predict(X[test]), fixed_sk.predict(X[test])):
                    flag("fixed cutoff differs from FixedThresholdClassifier", name, f"c={c_fn}")
                # the floor of small_data_sweep's cost ratios (a cost of exactly 0 on separable
                # data gave a ratio of 0, and a geometric mean of 0)
                r = (S._realised(yt, mine.predict(X[test]), c_fn) + S.COST_FLOOR) / (
                    S._realised(yt, sk.predict(X[test]), c_fn) + S.COST_FLOOR)
                cost_ratio[len(cal)].append(r)
            del neg
        print(f"user: {name} done", flush=True)
    print("\nUser inputs: problems found")
    for kind, c in sorted(found.items()):
        print(f"  {kind}: {c}  (first: {found_first[kind]})")
    if not found:
        print("  none")
    if found_auto:
        print("auto's choice, frequency weights -> the same rows duplicated (its folds split "
              "copies of a row): " + ", ".join(f"{a} -> {b}: {c}"
                                              for (a, b), c in sorted(found_auto.items())))
    allr = np.concatenate([np.asarray(v) for v in cost_ratio.values()]) if cost_ratio else []
    if len(allr):
        print(f"Tuned cutoff's test cost over TunedThresholdClassifierCV(cv='prefit') on the same "
              f"rows ({len(allr)} cells): geometric mean {np.exp(np.mean(np.log(allr))):.3f}, "
              f"worst {np.max(allr):.2f}")


# --------------------------------------------------------------------------- command line
def _probwrap(args: str, cwd: str):
    cmd = [sys.executable, "-m", "probwrap.cli", *shlex.split(args)]
    env = dict(os.environ, COLUMNS="100")
    return subprocess.run(cmd, cwd=cwd, capture_output=True, text=True, env=env, timeout=300)


def cli_checks(quick: bool, sets=None) -> None:
    """Score files from the fresh sets (or ``sets(quick, labels=True)``) through the command
    line, as a user would type it."""
    import pandas as pd
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.model_selection import cross_val_predict

    problems = []

    def expect(ok: bool, what: str, res) -> None:
        if not ok:
            problems.append(what)
            print(f"  PROBLEM: {what}\n    exit {res.returncode}; stderr: {res.stderr[-600:]}"
                  f"\n    stdout: {res.stdout[-300:]}", flush=True)

    with tempfile.TemporaryDirectory() as tmp:
        res = _probwrap("--help", tmp)
        expect(res.returncode == 0 and "cutoff" in res.stdout, "--help", res)
        for verb in ("cutoff", "calibrate", "prevalence", "report"):
            res = _probwrap(f"{verb} --help", tmp)
            expect(res.returncode == 0 and len(res.stdout) > 200, f"{verb} --help", res)
        for name, X, y_lab in (sets or fresh_data_sets)(quick, labels=True):
            classes, counts = np.unique(y_lab, return_counts=True)
            if len(classes) != 2:
                continue
            pos = classes[np.argmin(counts)]
            y01 = (y_lab == pos).astype(int)
            # out-of-fold forest probabilities: exact 0/1 included
            p = _quiet(cross_val_predict, RandomForestClassifier(50, random_state=0), X, y01,
                       cv=5, method="predict_proba")[:, 1]
            f = Path(tmp, "scores.csv")
            frame = pd.DataFrame({"risk score": p, "outcome": y_lab})
            frame.to_csv(f, index=False)
            tag = name.split()[0]
            q = shlex.quote(str(pos))
            res = _probwrap(f"cutoff --scores scores.csv --score-column 'risk score' --label-column outcome "
                            f"--positive-label {q} --cost-fp 1 --cost-fn 5 --resamples 50", tmp)
            expect(res.returncode == 0, f"{tag}: cutoff", res)
            res = _probwrap("cutoff --scores scores.csv --score-column risk --label-column outcome "
                            "--cost-fp 1 --cost-fn 5", tmp)
            expect(res.returncode != 0 and "risk score" in res.stderr,
                   f"{tag}: a wrong column name names the file's columns", res)
            res = _probwrap("cutoff --scores scores.csv --score-column 'risk score' --label-column "
                            "outcome --cost-fp 1 --cost-fn 5", tmp)
            expect(res.returncode != 0 and shlex.quote(str(pos)) in res.stderr,
                   f"{tag}: a missing --positive-label lists the labels, quoted", res)
            res = _probwrap("cutoff --scores scores.csv --score-column 'risk score' --label-column "
                            "outcome --positive-label nosuchlabel --cost-fp 1 --cost-fn 5", tmp)
            expect(res.returncode != 0 and "nosuchlabel" in res.stderr,
                   f"{tag}: an unknown --positive-label is named", res)
            frame.loc[3, "risk score"] = np.nan
            frame.to_csv(Path(tmp, "missing.csv"), index=False)
            res = _probwrap(f"cutoff --scores missing.csv --score-column 'risk score' --label-column "
                            f"outcome --positive-label {q} --cost-fp 1 --cost-fn 5", tmp)
            expect(res.returncode != 0 and "row" in res.stderr,
                   f"{tag}: a missing value gives its row", res)
            methods = ("auto", "isotonic") if quick else (
                "auto", "platt", "isotonic", "venn_abers", "binning")
            for method in methods:
                res = _probwrap(f"calibrate fit --scores scores.csv --score-column 'risk score' "
                                f"--label-column outcome --positive-label {q} --method {method} "
                                "--out map.json", tmp)
                expect(res.returncode == 0 and Path(tmp, "map.json").exists(),
                       f"{tag}: calibrate fit --method {method}", res)
                res = _probwrap("calibrate apply --scores scores.csv --score-column 'risk score' "
                                "--map map.json --output-column calibrated --out applied.csv", tmp)
                ok = res.returncode == 0 and Path(tmp, "applied.csv").exists()
                expect(ok, f"{tag}: calibrate apply ({method})", res)
                if ok:
                    applied = pd.read_csv(Path(tmp, "applied.csv"))
                    new = [c for c in applied.columns if c not in frame.columns]
                    vals = applied[new[0]].to_numpy(float) if new else np.array([np.nan])
                    expect(bool(new) and np.all((vals > 0) & (vals < 1)),
                           f"{tag}: applied {method} probabilities strictly inside (0, 1)", res)
                Path(tmp, "map.json").unlink(missing_ok=True)
            res = _probwrap(f"report --scores scores.csv --score-column 'risk score' --label-column "
                            f"outcome --positive-label {q} --cost-fp 1 --cost-fn 5 --resamples 50 "
                            "--out r.html", tmp)
            ok = res.returncode == 0 and Path(tmp, "r.html").exists()
            expect(ok, f"{tag}: report", res)
            if ok:
                page = Path(tmp, "r.html").read_text()
                expect("settl" in page or "Bayes cutoff" in page,
                       f"{tag}: the report names its cutoff rule", res)
                Path(tmp, "r.html").unlink()
            print(f"cli: {name} done ({len(problems)} problems so far)", flush=True)
    print(f"\nCommand line: {len(problems)} problems" + ("" if problems else " (none)"))
    for p in problems:
        print("  " + p)


# --------------------------------------------------------------------------- main
def main(argv: list[str]) -> None:
    quick = "--quick" in argv
    only = argv[argv.index("--only") + 1] if "--only" in argv else (
        "quick" if quick else "wrappers")
    # the other sweep's machinery runs on this script's data sets
    S.new_data_sets = fresh_data_sets
    if only == "quick":
        user_checks(True)
        cli_checks(True)
    elif only == "wrappers":
        S.main(["--sets", "new", *[a for a in argv if a not in ("--only", "wrappers")]])
    elif only == "cost":
        seeds = S.seed_range(argv, 2)
        S.cost_sweep(quick, seeds, True)
        S.cost_sweep_multiclass(quick, seeds, True)
    elif only == "user":
        user_checks(quick)
    elif only == "cli":
        cli_checks(quick)
    else:
        raise SystemExit(f"--only must be wrappers, cost, user or cli; got {only!r}")


if __name__ == "__main__":
    main(sys.argv[1:])
