"""Trust sweep: probwrap on small and awkward draws of real bundled data sets.

Data sets nobody on the project wrote: scikit-learn's bundled iris, wine, breast cancer and
digits and statsmodels' bundled sets (the loaders of ``benchmarks/calibration.py``). For each
data set and seed a base model (Gaussian naive Bayes, random forest — whose probabilities
include exact 0 and 1 —, a linear SVM wrapped in ``CalibrationWrapper`` for its margins) is
trained on one split and frozen; then small calibration sets are drawn:

* ``n20`` / ``n60``: stratified draws of 20 and 60 rows;
* ``rare``: one class kept at 1-3 rows (binary: a single positive);
* ``lowprev``: binary sets thinned to ~5 % prevalence (weak models at low prevalence).

On every draw the wrappers and the array-core functions are run and these problems counted:

* ``crash``: an exception other than a ValueError/TypeError whose message names an argument
  in backticks (a clear refusal is correct behaviour and not counted);
* ``nonfinite``, ``exact0/1``, ``rowsum``: probabilities that are not finite, exactly 0 or 1,
  or rows not summing to 1;
* ``inplace``: ``X``, ``y`` or ``sample_weight`` modified by a call;
* ``wscale``: a choice (auto's method, the tuned cutoff / offsets, the adapted prior, an array
  metric) that changes when all weights are normalised to sum 1 or scaled by 1e-3;
* ``freq``: integer frequency weights giving a different array-core result than duplicated rows,
  or weight 0 a different result than dropping the row;
* ``harm``: test log loss above 1.10 x the base model's (probabilities clipped at 1e-15), on
  test sets of at least 200 rows (smaller test sets are noise), for the random draws only (the
  rare/lowprev draws have other class shares than the test rows on purpose).

Printed: a table of problem counts by kind and component ("none" where none), then the
first problems with their draw.

Run: ``nice python benchmarks/small_data_sweep.py`` (three seeds; tens of minutes on a busy
machine), ``--seeds 1`` (``--first-seed K`` starts the seeds at ``K``: fresh draws), or ``--quick`` (iris, wine, breast cancer; naive Bayes and forest;
one seed; about half a minute). ``--sets new`` runs only the sets the first sweep did not use
(:func:`new_data_sets`; with them also: the five base models, 200-row draws, the test log loss
of scikit-learn's ``CalibratedClassifierCV`` with the comparable method on the same rows
(``vs_sk``), and ``PriorShiftWrapper.adapt`` on test rows resampled to 0.5x and 2x their
prevalence); ``--sets first`` only the first ones; ``--skip a,b`` leaves out sets whose names
contain ``a`` or ``b``; ``--only cost [--sets new]`` the cost rules.
"""

from __future__ import annotations

import collections
import re
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import LinearSVC

sys.path.insert(0, str(Path(__file__).parent))
from calibration import _statsmodels_sets  # noqa: E402
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, load_wine  # noqa: E402

from probwrap import (  # noqa: E402
    CalibrationWrapper,
    CostPolicyWrapper,
    PriorShiftWrapper,
    decision,
    metrics,
)

CAL_METHODS = ["auto", "platt", "isotonic", "beta", "temperature", "binning", "venn_abers"]
HARM_LIMIT = 1.10
MIN_TEST_FOR_HARM = 200
MIN_TEST_SMALL = 100  # the new, smaller sets: 100-199 test rows are counted apart
# probwrap's explicit maps beside scikit-learn's CalibratedClassifierCV method of the same kind
SK_SAME = {"platt": "sigmoid", "isotonic": "isotonic", "temperature": "temperature"}
CLEAR = re.compile(r"`[^`]+`")

problems: collections.Counter = collections.Counter()
examples: dict = {}
components: set = set()
ratios: dict = collections.defaultdict(list)  # (component, kind) -> test log-loss ratios


def note(component: str, kind: str, where: str, detail: str = "") -> None:
    problems[(component, kind)] += 1
    if (component, kind) not in examples:
        examples[(component, kind)] = f"{where}: {detail}"[:300]
        print(f"  first {kind} in {component}: {examples[(component, kind)]}", flush=True)


def run(component: str, where: str, fn, *args, **kwargs):
    """Call fn; count unclear exceptions and in-place modification of array arguments."""
    components.add(component)
    arrays = [a for a in list(args) + list(kwargs.values()) if isinstance(a, np.ndarray)]
    before = [a.copy() for a in arrays]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            out = fn(*args, **kwargs)
    except decision.GuaranteeUnreachableError:
        return None  # a documented, explained refusal
    except (ValueError, TypeError) as e:
        if not CLEAR.search(str(e)):
            note(component, "crash", where, f"{type(e).__name__}: {e}")
        return None
    except Exception as e:  # noqa: BLE001 - counting every other failure is the point
        note(component, "crash", where, f"{type(e).__name__}: {e}")
        return None
    for a, b in zip(arrays, before, strict=True):
        if a.shape != b.shape or not np.array_equal(a, b, equal_nan=True):
            note(component, "inplace", where)
    return out


def check_proba(component: str, where: str, p, k: int) -> bool:
    if p is None:
        return False
    p = np.asarray(p, float)
    if not np.all(np.isfinite(p)):
        note(component, "nonfinite", where)
        return False
    if np.any(p <= 0) or np.any(p >= 1):
        note(component, "exact0/1", where, f"{np.mean((p <= 0) | (p >= 1)):.1%} of entries")
    if p.ndim != 2 or p.shape[1] != k or not np.allclose(p.sum(1), 1, atol=1e-9):
        note(component, "rowsum", where)
    return True


def test_log_loss(y_index, p) -> float:
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y_index)), y_index], 1e-15, 1))))


def check_harm(component, where, y_index, p, base, kind="harm", against="base"):
    """Note test log loss above HARM_LIMIT x that of ``base`` (the base model's probabilities,
    or scikit-learn's comparable method with ``kind="vs_sk"``). Test sets of 100-199 rows are
    counted apart (``kind + "<200"``): noisier."""
    # only on random draws: the rare/lowprev draws change the class shares on purpose, so a
    # map fitted on them is fitted to another prevalence than the test rows'
    if (p is None or base is None or len(y_index) < MIN_TEST_SMALL
            or not where.split("|")[-1].startswith("n")):
        return
    r = test_log_loss(y_index, p) / max(test_log_loss(y_index, base), 1e-12)
    ratios[(component, kind)].append(r)
    if r > HARM_LIMIT:
        tier = "" if len(y_index) >= MIN_TEST_FOR_HARM else "<200"
        note(component, kind + tier, where,
             f"log loss {r:.2f} x {against} ({len(y_index)} test rows)")


def same(a, b) -> bool:
    if a is None or b is None:
        return True  # a failure was already counted
    if isinstance(a, str) or isinstance(b, str):
        return a == b
    a, b = np.asarray(a, float), np.asarray(b, float)
    return a.shape == b.shape and np.allclose(a, b, rtol=1e-6, atol=1e-9, equal_nan=True)


# --------------------------------------------------------------------------- data
def data_sets(quick: bool):
    """The data sets of the first sweep: (name, X, y)."""
    X, y = load_iris(return_X_y=True)
    yield "iris", X, y
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer", X, y
    X, y = load_wine(return_X_y=True)
    yield "wine", X, y
    if quick:
        return
    X, y = load_digits(return_X_y=True)
    yield "digits", X, y
    for name, X, y in _statsmodels_sets():
        yield "statsmodels " + name.split(":")[0].split()[-1] + name.split(":")[1][:12], X, y


def _above(values, q: float) -> np.ndarray:
    """1 where ``values`` lie above their ``q``-quantile: a minority share of about 1 - q."""
    values = np.asarray(values, float)
    return (values > np.quantile(values, q)).astype(int)


def _numeric(frame) -> np.ndarray:
    """A feature table as floats: categorical columns one-hot coded (first level dropped)."""
    import pandas as pd

    return pd.get_dummies(frame, drop_first=True, dtype=float).to_numpy(float)


def new_data_sets(quick: bool):
    """Bundled data sets the first sweep did not use: (name, X, y), the target named in the name.

    scikit-learn's diabetes (442 rows; disease progression a year later binarised at its 50 %,
    75 % and 90 % quantiles and cut into tertiles), statsmodels' engel (235 households; food
    share of income in the top quarter), grunfeld (220 firm-years; investment in the top third,
    from firm value, capital stock and year), macrodata (202 quarters; next quarter's real GDP
    growth in the bottom fifth, from this quarter's growth rates, inflation, unemployment and
    interest rates), cancer (301 counties; cancer rate above its median, from population — a weak
    model), sunspots (306 years; activity above its median from the three years before) and
    fertility (194 countries; fertility rate in 2010 above 3 births, from the rates of 1960-1990),
    and scikit-survival's bundled whas500 (500 heart-attack patients: death during follow-up,
    43 %), gbsg2 (686: recurrence, 44 %), aids (1,151: AIDS or death, 8 %) and flchain (7,874:
    death, 28 %) — all shipped inside the packages, none downloaded. The statsmodels sets of
    fewer than 150 rows (spector, scotland, ccard, heart, strikes, ...) are too small to train,
    calibrate and test on; :func:`score_file_sets` uses them as score files for the command line.
    """
    import statsmodels.api as sm
    from sklearn.datasets import load_diabetes

    X, t = load_diabetes(return_X_y=True)
    yield "diabetes progression>q50", X, _above(t, 0.5)
    yield "diabetes progression>q75", X, _above(t, 0.75)
    if quick:
        return
    yield "diabetes progression>q90", X, _above(t, 0.9)
    yield "diabetes progression tertile", X, np.digitize(t, np.quantile(t, [1 / 3, 2 / 3]))
    d = sm.datasets.engel.load_pandas().data
    yield "engel food share top quarter", d[["income"]].to_numpy(float), _above(
        d["foodexp"] / d["income"], 0.75)
    d = sm.datasets.grunfeld.load_pandas().data
    yield "grunfeld invest top third", d[["value", "capital", "year"]].to_numpy(float), _above(
        d["invest"], 2 / 3)
    d = sm.datasets.macrodata.load_pandas().data
    growth = np.log(d[["realgdp", "realcons", "realinv", "realgovt", "realdpi", "m1"]]).diff()
    feats = np.column_stack([growth.to_numpy(), d[["infl", "unemp", "tbilrate", "realint"]]])
    nxt = growth["realgdp"].shift(-1).to_numpy()
    keep = np.isfinite(feats).all(1) & np.isfinite(nxt)
    yield "macrodata gdp growth next q low fifth", feats[keep], (
        nxt[keep] < np.quantile(nxt[keep], 0.2)).astype(int)
    d = sm.datasets.cancer.load_pandas().data
    yield "cancer rate>median", np.log(d[["population"]].to_numpy(float)), _above(
        d["cancer"] / d["population"], 0.5)
    a = sm.datasets.sunspots.load_pandas().data["SUNACTIVITY"].to_numpy(float)
    lags = np.column_stack([a[2:-1], a[1:-2], a[:-3]])
    yield "sunspots activity>median", lags, _above(a[3:], 0.5)
    d = sm.datasets.fertility.load_pandas().data
    cols = [str(y) for y in range(1960, 1991, 5)]
    d = d.dropna(subset=cols + ["2010"])
    yield "fertility 2010>3", d[cols].to_numpy(float), (d["2010"] > 3).astype(int).to_numpy()
    import sksurv.datasets as ss

    for loader, event, label in ((ss.load_whas500, "fstat", "whas500 death"),
                                 (ss.load_gbsg2, "cens", "gbsg2 recurrence"),
                                 (ss.load_aids, "censor", "aids event (8%)"),
                                 (ss.load_flchain, "death", "flchain death")):
        Xf, yf = loader()
        # flchain's "chapter" is the cause of death, known only for the dead: it gives the label
        # away, so it is left out
        Xf = Xf.drop(columns=[c for c in ("chapter",) if c in Xf.columns])
        for c in Xf.columns:  # flchain has missing values in a few columns
            if Xf[c].dtype.kind == "f":
                Xf[c] = Xf[c].fillna(Xf[c].median())
        yield label, _numeric(Xf), yf[event].astype(int)


def base_models(quick: bool, seed: int):
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.linear_model import LogisticRegression

    yield "naive_bayes", GaussianNB()
    yield "forest", RandomForestClassifier(n_estimators=50, random_state=seed)
    if not quick:
        yield "svm_margins", make_pipeline(StandardScaler(), LinearSVC())
        yield "boosting", HistGradientBoostingClassifier(max_iter=100, random_state=seed)
        yield "logistic", make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))


def draws(y_index: np.ndarray, pool: np.ndarray, k: int, rng, sizes=(20, 60)):
    """(name, calibration rows) pairs of small and awkward calibration sets."""
    for n in sizes:
        if len(pool) >= n:
            yield f"n{n}", rng.choice(pool, n, replace=False)
    by_class = [pool[y_index[pool] == c] for c in range(k)]
    if min(len(b) for b in by_class) >= 3:
        rare = int(np.argmin([len(b) for b in by_class]))
        n_rare = 1 if k == 2 else int(rng.integers(1, 4))
        others = [rng.choice(b, min(len(b), 40 // (k - 1)), replace=False)
                  for c, b in enumerate(by_class) if c != rare]
        yield f"rare{n_rare}", np.concatenate([rng.choice(by_class[rare], n_rare, replace=False),
                                               *others])
    if k == 2:
        pos = by_class[1] if len(by_class[1]) < len(by_class[0]) else by_class[0]
        neg = by_class[0] if pos is by_class[1] else by_class[1]
        n_neg = min(len(neg), 95)
        n_pos = max(2, int(round(0.05 * n_neg)))
        if len(pos) >= n_pos:
            yield "lowprev", np.concatenate([rng.choice(pos, n_pos, replace=False),
                                             rng.choice(neg, n_neg, replace=False)])


def weight_variants(n: int, rng):
    """Weights that must give the same choice: integer weights normalised to sum 1 and scaled
    by 1e-3 (neither can be row frequencies), then unit weights and unit weights summing to 1."""
    w = rng.integers(1, 4, n).astype(float)
    return [(w / w.sum(), w * 1e-3), (np.ones(n), np.full(n, 1.0 / n))]


def all_weights(n: int, rng):
    return [sw for pair in weight_variants(n, rng) for sw in pair]


def pairs_differ(values) -> bool:
    return not (same(values[0], values[1]) and same(values[2], values[3]))


def weight_rules(comp, where, fn, args, dup_args, ws, w, value, equal=None):
    """Run ``fn(*args, sample_weight=...)`` under each weight scaling in ``ws`` (the choice must
    not move) and with frequency weights ``w`` against the rows duplicated (``fn(*dup_args)``,
    the same answer); note any difference. ``value`` reads the compared number from a result."""
    equal = same if equal is None else equal
    outs = [run(comp, where, fn, *args, sample_weight=sw.copy()) for sw in ws]
    vals = [None if o is None else value(o) for o in outs]
    if pairs_differ(vals):
        note(comp, "wscale", where, f"{vals}")
    fw = run(comp, where, fn, *args, sample_weight=w.copy())
    d = run(comp, where, fn, *dup_args)
    if d is not None and fw is not None and not equal(value(fw), value(d)):
        note(comp, "freq", where, f"{value(fw)} vs {value(d)}")
    return outs


# --------------------------------------------------------------------------- checks
def sklearn_calibrated(frozen, Xc, yc, Xt):
    """Test probabilities of scikit-learn's CalibratedClassifierCV methods on the same rows (a
    frozen model is not refitted, so the two folds only partition the rows)."""
    import sklearn
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.model_selection import KFold

    version = tuple(int(v) for v in sklearn.__version__.split(".")[:2])
    out = {}
    for m in ["sigmoid", "isotonic"] + (["temperature"] if version >= (1, 8) else []):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                out[m] = CalibratedClassifierCV(frozen, method=m, cv=KFold(2)).fit(
                    Xc, yc).predict_proba(Xt)
        except (ValueError, IndexError):  # a class missing from a fold (IndexError from
            pass  # scikit-learn 1.9's cross_val_predict when a fold lacks a class)
    return out


def sweep_calibration(frozen, Xc, yc, Xt, yt_i, base_t, k, where, rng, quick, sk=None):
    for meth in (CAL_METHODS[:3] if quick else CAL_METHODS):
        comp = f"CalibrationWrapper[{meth}]"
        w = run(comp, where, lambda meth=meth: CalibrationWrapper(
            frozen, method=meth, random_state=0).fit(Xc, yc))
        if w is None:
            continue
        p = run(comp, where, w.predict_proba, Xt)
        if check_proba(comp, where, p, k):
            check_harm(comp, where, yt_i, p, base_t)
            if sk:
                if meth == "auto":
                    best = min(sk, key=lambda m: test_log_loss(yt_i, sk[m]))
                    check_harm(comp, where, yt_i, p, sk[best], "vs_sk", f"sklearn {best}")
                elif SK_SAME.get(meth) in sk:
                    check_harm(comp, where, yt_i, p, sk[SK_SAME[meth]], "vs_sk",
                               f"sklearn {SK_SAME[meth]}")
        if meth == "auto":
            chosen = []
            for sw in all_weights(len(yc), rng):
                sw_in = sw.copy()
                m = run(comp, where, lambda sw_in=sw_in: CalibrationWrapper(
                    frozen, method="auto", random_state=0).fit(Xc, yc, sample_weight=sw_in))
                if not np.array_equal(sw, sw_in):
                    note(comp, "inplace", where, "sample_weight")
                chosen.append(None if m is None else m.method_)
            if pairs_differ(chosen):
                note(comp, "wscale", where, f"chose {chosen}")


def sweep_prior(frozen, Xc, yc, Xt, yt_i, base_t, k, where, rng):
    comp = "PriorShiftWrapper"
    ps = run(comp + ".fit", where, lambda: PriorShiftWrapper(
        frozen, random_state=0, n_resamples=30).fit(Xc, yc))
    if ps is None:
        return
    p0 = run(comp + ".predict_proba", where, ps.predict_proba, Xt)
    check_proba(comp + ".predict_proba", where, p0, k)
    ad = run(comp + ".adapt", where, ps.adapt, Xt)
    if ad is not None:
        p1 = run(comp + ".adapt", where, ad.predict_proba, Xt)
        if check_proba(comp + ".adapt", where, p1, k):
            check_harm(comp + ".adapt", where, yt_i, p1, base_t)
    run(comp + ".monitor", where, ps.monitor, Xt, batch_size=max(20, len(Xt) // 4))
    priors = []
    for sw in all_weights(len(Xt), rng):
        sw_in = sw.copy()
        m = run(comp + ".adapt", where, lambda sw_in=sw_in: PriorShiftWrapper(
            frozen, random_state=0, n_resamples=30).fit(Xc, yc).adapt(Xt, sample_weight=sw_in))
        if not np.array_equal(sw, sw_in):
            note(comp + ".adapt", "inplace", where, "sample_weight")
        priors.append(None if m is None else getattr(m, "target_prior_", None))
    if pairs_differ(priors):
        note(comp + ".adapt", "wscale", where, f"{priors}")


shift_cells: list = []  # (where, factor, true prior, estimate, adapted/base, gap closed)


def sweep_prior_shifted(frozen, Xc, yc, Xt, yt_i, k, where, rng, source_prior):
    """Binary: test rows resampled to 0.5x and 2x their prevalence (a real prior shift), then
    ``fit(Xc, yc).adapt`` on them; test log loss beside the base model and the oracle (the base
    model's probabilities re-weighted to the true prior, Saerens et al. 2002, eq. 2.4)."""
    if k != 2 or len(yt_i) < MIN_TEST_SMALL or not where.split("|")[-1].startswith("n"):
        return
    comp = "PriorShiftWrapper.adapt(shifted)"
    pos, neg = np.flatnonzero(yt_i == 1), np.flatnonzero(yt_i == 0)
    base_prev = len(pos) / len(yt_i)
    for factor in (0.5, 2.0):
        target = float(np.clip(factor * base_prev, 0.02, 0.9))
        n = len(yt_i)
        n_pos = int(round(target * n))
        rows = np.concatenate([rng.choice(pos, n_pos), rng.choice(neg, n - n_pos)])
        Xs, ys = Xt[rows], yt_i[rows]
        ad = run(comp, f"{where}|x{factor}", lambda Xs=Xs: PriorShiftWrapper(
            frozen, random_state=0, n_resamples=30).fit(Xc, yc).adapt(Xs))
        if ad is None:
            continue
        p = run(comp, where, ad.predict_proba, Xs)
        if not check_proba(comp, where, p, 2):
            continue
        base = frozen.predict_proba(Xs)
        ratio = np.array([n_pos / n, 1 - n_pos / n])[::-1] / np.asarray(source_prior)
        oracle = base * ratio
        oracle /= oracle.sum(1, keepdims=True)
        l_ad, l_base, l_or = (test_log_loss(ys, q) for q in (p, base, oracle))
        gap = (l_base - l_ad) / (l_base - l_or) if l_base - l_or > 1e-3 else float("nan")
        est = float(np.asarray(getattr(ad, "target_prior_", [np.nan, np.nan]))[1])
        if l_base < 1e-6:
            continue  # the base model is (nearly) perfect on these rows: no ratio to take
        shift_cells.append((where, factor, n_pos / n, est, l_ad / l_base, gap))
        if l_ad / l_base > HARM_LIMIT:
            note(comp, "harm", f"{where}|x{factor}",
                 f"log loss {l_ad / l_base:.2f} x base (oracle {l_or / l_base:.2f}); prior "
                 f"{n_pos / n:.3f}, estimate {est:.3f}")


def sweep_cost(frozen, Xc, yc, k, where, rng):
    costs = decision.zero_one_costs(k) * (1 + np.arange(k))[:, None]
    for strategy in ("bayes", "tuned"):
        comp = f"CostPolicyWrapper[{strategy}]"
        cp = run(comp, where, lambda strategy=strategy: CostPolicyWrapper(
            frozen, costs=costs, strategy=strategy, random_state=0, n_resamples=30).fit(Xc, yc))
        if cp is None:
            continue
        run(comp, where, cp.predict, Xc)
        if strategy == "tuned":
            if k == 2:
                run(comp + ".cutoff_interval_", where, lambda cp=cp: cp.cutoff_interval_)
            picks = []
            for sw in all_weights(len(yc), rng):
                sw_in = sw.copy()
                m = run(comp, where, lambda sw_in=sw_in: CostPolicyWrapper(
                    frozen, costs=costs, strategy="tuned", random_state=0,
                    n_resamples=30).fit(Xc, yc, sample_weight=sw_in))
                if not np.array_equal(sw, sw_in):
                    note(comp, "inplace", where, "sample_weight")
                picks.append(None if m is None else (
                    m.cutoff_ if k == 2 else getattr(m, "offsets_", None)))
            if pairs_differ(picks):
                note(comp, "wscale", where, f"{picks}")
    comp = "CostPolicyWrapper[fixed]"
    if k == 2:
        cp = run(comp, where, lambda: CostPolicyWrapper(
            frozen, costs=costs, strategy="fixed", cutoff=0.3).fit(Xc, yc))
        if cp is not None:
            run(comp, where, cp.predict, Xc)
    comp = "CostPolicyWrapper[guarantee]"
    g = ({"requirement": "recall", "target": 0.8} if k == 2
         else {"recall_floors": {0: 0.5}})
    run(comp, where, lambda: CostPolicyWrapper(
        frozen, costs=costs, strategy="tuned", guarantee=g, random_state=0,
        n_resamples=30).fit(Xc, yc))


METRICS = ["log_loss", "brier_score", "expected_calibration_error", "classwise_calibration_error",
           "brier_decomposition", "calibration_slope_intercept", "hosmer_lemeshow_test",
           "spiegelhalter_z_test", "smooth_calibration_error", "debiased_calibration_error",
           "corp_reliability"]


def summary(x):
    """A metric's numbers, for comparisons."""
    if x is None:
        return None
    if np.isscalar(x):
        return np.array([x], float)
    vals = []
    for f in getattr(x, "_fields", None) or getattr(x, "__dataclass_fields__", {}):
        if f == "n_iter":  # how a solver got there is not a result
            continue
        v = getattr(x, f)
        if np.isscalar(v) and not isinstance(v, str):
            vals.append(float(v))
    return np.array(vals)


def sweep_array_core(p, y, k, where, rng):
    """Metrics and decision functions on held-out probabilities ``p`` and labels ``y``."""
    binary = k == 2
    y_prob = p[:, 1] if binary else p
    ws = all_weights(len(y), rng)
    w = rng.integers(1, 4, len(y)).astype(float)  # integer frequencies
    dup = np.repeat(np.arange(len(y)), w.astype(int))
    for name in METRICS:
        comp = "metrics." + name
        fn = getattr(metrics, name)
        if name in ("calibration_slope_intercept", "hosmer_lemeshow_test", "spiegelhalter_z_test",
                    "corp_reliability") and not binary:
            continue
        outs = [summary(run(comp, where, fn, y, y_prob, sample_weight=s.copy())) for s in ws]
        if pairs_differ(outs):
            note(comp, "wscale", where, f"{outs}")
        fw = summary(run(comp, where, fn, y, y_prob, sample_weight=w.copy()))
        d = summary(run(comp, where, fn, y[dup], y_prob[dup]))
        if not same(fw, d):
            note(comp, "freq", where, f"weights {fw} vs duplicated {d}")
        # weight 0 means an absent row: the same as dropping it
        z = np.ones(len(y))
        z[::3] = 0.0
        kept = z > 0
        if len(np.unique(y[kept])) == len(np.unique(y)):
            fz = summary(run(comp, where, fn, y, y_prob, sample_weight=z))
            dz = summary(run(comp, where, fn, y[kept], y_prob[kept]))
            if fz is not None and not np.all(np.isfinite(fz)):
                note(comp, "nonfinite", where, f"zero weights: {fz}")
            elif not same(fz, dz):
                note(comp, "freq", where, f"zero weights {fz} vs dropped rows {dz}")
        run(comp, where, fn, y, y_prob.copy())
    costs = decision.zero_one_costs(k) * (1 + np.arange(k))[:, None]
    comp = "decision.bayes_actions"
    run(comp, where, decision.bayes_actions, p, costs)
    if binary:
        s = np.log(np.clip(p[:, 1], 1e-300, 1)) - np.log(np.clip(p[:, 0], 1e-300, 1))
        s = np.clip(s, -50, 50)
        comp = "decision.search_cutoff"
        weight_rules(comp, where, decision.search_cutoff, (s, y, costs), (s[dup], y[dup], costs),
                     ws, w, lambda o: o.cutoff)
        comp = "decision.cutoff_interval"
        ivs = [run(comp, where, decision.cutoff_interval, s, y, costs, sample_weight=sw.copy(),
                   n_resamples=30, random_state=0) for sw in ws[:2]]
        if all(iv is not None for iv in ivs) and not same(
                [ivs[0].low, ivs[0].high], [ivs[1].low, ivs[1].high]):
            note(comp, "wscale", where, f"{ivs}")
        sw0 = w.copy()
        sw0[: len(sw0) // 2] = 0.0
        run(comp, where, decision.cutoff_interval, s, y, costs, sample_weight=sw0,
            n_resamples=30, random_state=0)
        run("decision.guaranteed_cutoff", where, decision.guaranteed_cutoff, s, y, costs,
            requirement="recall", target=0.8)
        pp = p[:, 1]
        weight_rules("decision.settle_cutoff", where, decision.settle_cutoff, (pp, y, costs),
                     (pp[dup], y[dup], costs), ws, w, lambda o: o.cutoff)
    else:
        comp = "decision.tune_class_offsets"
        outs = [run(comp, where, decision.tune_class_offsets, p, y, costs, sample_weight=sw.copy())
                for sw in ws]
        offs = [None if o is None else getattr(o, "offsets", None) for o in outs]
        if pairs_differ(offs):
            note(comp, "wscale", where, f"{offs}")
        tuned = outs[0].offsets if outs[0] is not None else np.zeros(k)
        weight_rules("decision.settle_class_offsets", where, decision.settle_class_offsets,
                     (p, y, costs, tuned), (p[dup], y[dup], costs, tuned), ws, w,
                     lambda o: o.share, equal=lambda a, b: a == b)


# --------------------------------------------------------------------------- cost rules
# Realised test cost of CostPolicyWrapper's tuned cutoff, fitted on a small held-out set, beside
# scikit-learn's TunedThresholdClassifierCV (cv="prefit", the same cost as scoring, the same
# rows), the plug-in Bayes cutoff c_fp / (c_fp + c_fn) on the model's own probabilities
# (Elkan 2001) and the cutoff 0.5.
COST_FN = (3.0, 10.0)  # cost of a false negative; a false positive costs 1
COST_SIZES = (40, 100, 300)
COST_MINE = ("settled", "least_cost")


def _cost_binary_sets(quick: bool):
    """Binary tasks; the positive class is the minority."""
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer", X, (y == 0).astype(int)
    X, y = load_wine(return_X_y=True)
    yield "wine 1 vs rest", X, (y == 1).astype(int)
    X, y = load_iris(return_X_y=True)
    yield "iris virginica", X, (y == 2).astype(int)
    if quick:
        return
    X, y = load_digits(return_X_y=True)
    yield "digits 8 vs rest", X, (y == 8).astype(int)
    import statsmodels.api as sm

    d = sm.datasets.star98.load_pandas().data
    share = d["NABOVE"] / (d["NABOVE"] + d["NBELOW"])
    yield ("star98 top third", d.drop(columns=["NABOVE", "NBELOW"]).to_numpy(float),
           (share > share.quantile(2 / 3)).to_numpy(int))
    d = sm.datasets.anes96.load_pandas().data
    yield "anes96 vote", d.drop(columns="vote").to_numpy(float), d["vote"].to_numpy(int)
    d = sm.datasets.fair.load_pandas().data
    yield "fair any affair", d.drop(columns="affairs").to_numpy(float), (
        d["affairs"] > 0).to_numpy(int)


def _cost_models(quick: bool, seed: int):
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.linear_model import LogisticRegression

    yield "naive_bayes", GaussianNB()
    yield "forest", RandomForestClassifier(n_estimators=100, random_state=seed)
    if quick:
        return
    yield "logistic", make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    yield "svm_margins", make_pipeline(StandardScaler(), LinearSVC())
    yield "boosting", HistGradientBoostingClassifier(max_iter=100, random_state=seed)


def _realised(y, act, c_fn) -> float:
    """Mean cost per row: a false positive costs 1, a false negative c_fn."""
    act = np.asarray(act).astype(int)
    return float(np.mean((act == 1) & (y == 0)) + c_fn * np.mean((act == 0) & (y == 1)))


def _cost_new_binary_sets(quick: bool):
    """The binary tasks of :func:`new_data_sets`, the positive class made the minority."""
    for name, X, y in new_data_sets(quick):
        y = np.asarray(y)
        if len(np.unique(y)) == 2:
            yield name, X, (y == 1).astype(int) if y.mean() <= 0.5 else (y == 0).astype(int)


#: Added to both costs of a ratio (a cost per row; the costs here are 1 for a false alarm and 3
#: or 10 for a miss, so rules cost 0.05-1 a row on most cells): a cell where both rules cost
#: about 0 says nothing about their ratio (crossfit_sweep.py uses the same floor).
COST_FLOOR = 1e-3


def cost_sweep(quick: bool, seeds, new: bool = False) -> dict:
    from sklearn.metrics import make_scorer
    from sklearn.model_selection import TunedThresholdClassifierCV

    rules = ["settled", "least_cost", "sklearn_tuned", "plugin", "half"]
    cells: dict = collections.defaultdict(lambda: collections.defaultdict(list))
    for dname, X, y in (_cost_new_binary_sets(quick) if new else _cost_binary_sets(quick)):
        X = np.asarray(X, float)
        for seed in seeds:
            rng = np.random.default_rng(100 + seed)
            idx = rng.permutation(len(y))
            n_fit = min(len(idx) // 3, 600)
            fit_rows, rest = idx[:n_fit], idx[n_fit:]
            for mname, model in _cost_models(quick, seed):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    model.fit(X[fit_rows], y[fit_rows])
                margins = not hasattr(model, "predict_proba")
                for n in COST_SIZES:
                    if len(rest) - n < 100:
                        continue
                    held = rng.choice(len(rest), n, replace=False)
                    h_rows = rest[held]
                    t_rows = np.delete(rest, held)
                    Xh, yh, Xt, yt = X[h_rows], y[h_rows], X[t_rows], y[t_rows]
                    if np.bincount(yh, minlength=2).min() < 3:
                        continue  # too few of a class to tune anything on
                    for c_fn in COST_FN:
                        costs = {"fp": 1.0, "fn": c_fn}
                        inner = FrozenEstimator(model)
                        if margins:  # probabilities from a Platt map on the held-out rows
                            inner = CalibrationWrapper(inner, method="platt")
                        out = {}
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            cp = CostPolicyWrapper(inner, costs=costs, strategy="tuned",
                                                   random_state=seed).fit(Xh, yh)
                            out["settled"] = _realised(yt, cp.predict(Xt), c_fn)
                            # the plain least-cost cutoff (what "tuned" did before settling)
                            pt = cp.estimator_.predict_proba(Xt)[:, 1]
                            out["least_cost"] = _realised(yt, pt > cp.cost_curve_.cutoff, c_fn)
                            scorer = make_scorer(
                                lambda yy, pp, c=c_fn: -_realised(np.asarray(yy), pp, c))
                            sk = TunedThresholdClassifierCV(
                                model, scoring=scorer, cv="prefit", refit=False).fit(Xh, yh)
                            out["sklearn_tuned"] = _realised(yt, sk.predict(Xt), c_fn)
                            if margins:
                                pm = CostPolicyWrapper(inner, costs=costs).fit(Xh, yh)
                                out["plugin"] = _realised(yt, pm.predict(Xt), c_fn)
                                out["half"] = _realised(yt, model.decision_function(Xt) > 0, c_fn)
                            else:
                                pt = model.predict_proba(Xt)[:, 1]
                                out["plugin"] = _realised(yt, pt > 1 / (1 + c_fn), c_fn)
                                out["half"] = _realised(yt, pt > 0.5, c_fn)
                        key = (dname, mname, n, c_fn)
                        for r in rules:
                            cells[key][r].append(out[r])
            print(f"cost: {dname} seed {seed} done", flush=True)
    # ratios of the mean test cost over the seeds, per cell
    print("\nRealised test cost of a rule fitted on n held-out rows over that of another\n"
          "(geometric mean over cells | worst cell); sklearn_tuned: scikit-learn's "
          "TunedThresholdClassifierCV\n(cv='prefit', the cost as scoring), plugin: "
          "c_fp / (c_fp + c_fn) on the model's probabilities")
    summary_rows = {}
    for mine in COST_MINE:
        print(f" {mine}")
        for n in COST_SIZES + ("all",):
            keys = [k for k in cells if n == "all" or k[2] == n]
            if not keys:
                continue
            line = f"  n={n!s:>4} ({len(keys):3d} cells)"
            for other in [r for r in rules if r not in COST_MINE]:
                # COST_FLOOR added to both sides: a cell where a rule costs exactly 0 (separable
                # data) gave a ratio of 0 or 1e9, which swamped the geometric mean
                r = np.array([(np.mean(cells[k][mine]) + COST_FLOOR)
                              / (np.mean(cells[k][other]) + COST_FLOOR) for k in keys])
                worst = keys[int(np.argmax(r))]
                gm = float(np.exp(np.mean(np.log(r))))
                summary_rows[(mine, n, other)] = (gm, float(r.max()), worst)
                line += f"   vs {other}: {gm:5.3f} | {r.max():5.2f}"
            print(line)
        for other in [r for r in rules if r not in COST_MINE]:
            gm, worst, key = summary_rows[(mine, "all", other)]
            print(f"  worst vs {other}: {key} {worst:.2f}")
    return summary_rows


def _cost_multiclass_sets(quick: bool):
    X, y = load_iris(return_X_y=True)
    yield "iris", X, y
    X, y = load_wine(return_X_y=True)
    yield "wine", X, y
    if quick:
        return
    X, y = load_digits(return_X_y=True)
    yield "digits", X, y
    import statsmodels.api as sm

    d = sm.datasets.anes96.load_pandas().data
    yield "anes96 PID", d.drop(columns=["PID", "vote"]).to_numpy(float), d["PID"].to_numpy(int)


def cost_sweep_multiclass(quick: bool, seeds, new: bool = False) -> None:
    """Tuned class offsets (settled toward zero) against the Bayes rule and the argmax.

    Errors on true class j cost j + 1. ``tuned`` is CostPolicyWrapper(strategy="tuned") as
    fitted today; ``plain_tuned`` the offsets of tune_class_offsets before settling (models
    with predict_proba only)."""
    from probwrap.decision import tune_class_offsets

    cells: dict = collections.defaultdict(lambda: collections.defaultdict(list))
    multi = ([(d, X, y) for d, X, y in new_data_sets(quick) if len(np.unique(y)) > 2] if new
             else _cost_multiclass_sets(quick))
    for dname, X, y in multi:
        X = np.asarray(X, float)
        classes, y = np.unique(y, return_inverse=True)
        k = len(classes)
        C = (1 - np.eye(k)) * (1 + np.arange(k))[:, None]
        for seed in seeds:
            rng = np.random.default_rng(seed)
            idx = rng.permutation(len(y))
            n_fit = min(len(y) // 3, 600)
            fit, rest = idx[:n_fit], idx[n_fit:]
            for mname, model in _cost_models(quick, seed):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    model.fit(X[fit], y[fit])
                inner = FrozenEstimator(model)
                proba = hasattr(model, "predict_proba")
                if not proba:
                    inner = CalibrationWrapper(inner, method="temperature")
                for n in COST_SIZES:
                    if len(rest) - n < 60:
                        continue
                    h = rest[rng.choice(len(rest), n, replace=False)]
                    t = np.setdiff1d(rest, h)
                    if len(np.unique(y[h])) < k:
                        continue
                    out = {}
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        for strat in ("tuned", "bayes"):
                            cp = CostPolicyWrapper(inner, costs=C, strategy=strat).fit(X[h], y[h])
                            out[strat] = C[y[t], cp.predict(X[t])].mean()
                        out["argmax"] = C[y[t], model.predict(X[t])].mean()
                        if proba:
                            b = tune_class_offsets(model.predict_proba(X[h]), y[h], C).offsets
                            q = model.predict_proba(X[t]) * np.exp(b)
                            out["plain_tuned"] = C[y[t], np.argmin(q @ C, axis=1)].mean()
                    for r, v in out.items():
                        cells[(dname, mname, n)][r].append(v)
            print(f"cost (multiclass): {dname} seed {seed} done", flush=True)
    print("\nMulticlass, errors on class j cost j + 1: test cost of tuned class offsets over "
          "that of the Bayes rule\nand of the argmax (geometric mean | worst cell)")
    for mine in ("tuned", "plain_tuned"):
        for n in COST_SIZES:
            keys = [c for c in cells if c[2] == n and mine in cells[c]]
            if not keys:
                continue
            line = f"  {mine:11} n={n:4d} ({len(keys):3d} cells)"
            for other in ("bayes", "argmax"):
                r = np.array([(np.mean(cells[c][mine]) + COST_FLOOR)
                              / (np.mean(cells[c][other]) + COST_FLOOR) for c in keys])
                gm = float(np.exp(np.mean(np.log(r))))
                line += f"   vs {other}: {gm:5.3f} | {r.max():5.2f}"
            print(line)


# --------------------------------------------------------------------------- main
def seed_range(argv: list[str], default: int) -> range:
    """The seeds of a run: ``--seeds N`` of them (``default`` without it), from ``--first-seed
    K`` on (0 without it), so that draws no earlier run has looked at can be made."""
    n_seeds = int(argv[argv.index("--seeds") + 1]) if "--seeds" in argv else default
    first = int(argv[argv.index("--first-seed") + 1]) if "--first-seed" in argv else 0
    return range(first, first + n_seeds)


def main(argv: list[str]) -> None:
    quick = "--quick" in argv
    seeds = seed_range(argv, 1 if quick else 3)
    if "--only" in argv and argv[argv.index("--only") + 1] == "cost":
        new = "--sets" in argv and argv[argv.index("--sets") + 1] == "new"
        cost_sweep(quick, seeds, new)
        cost_sweep_multiclass(quick, seeds, new)
        return
    # --quick alone keeps to the first sets (about 30 s); --quick --sets new: diabetes only
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else ("first" if quick else "all")
    sets = []
    if which in ("all", "first"):
        sets += [(d, X, y, False) for d, X, y in data_sets(quick)]
    if which in ("all", "new"):
        sets += [(d, X, y, True) for d, X, y in new_data_sets(quick)]
    if "--skip" in argv:  # comma-separated parts of data-set names to leave out
        skip = argv[argv.index("--skip") + 1].split(",")
        sets = [s for s in sets if not any(part in s[0] for part in skip)]
    n_draws = 0
    try:
        n_draws = _sweep_sets(sets, seeds, quick)
    except KeyboardInterrupt:  # Ctrl-C (or kill -INT): the tables of the draws done so far
        print(f"\ninterrupted: the tables below count the {_done['draws']} draws done so far")
        n_draws = _done["draws"]
    _summary(n_draws)


_done = {"draws": 0}


def _sweep_sets(sets, seeds, quick) -> int:
    n_draws = 0
    for dname, X, y, new in sets:
        X = np.asarray(X, float)
        classes, y_index = np.unique(np.asarray(y), return_inverse=True)
        k = len(classes)
        for seed in seeds:
            rng = np.random.default_rng(seed)
            idx = rng.permutation(len(y_index))
            if new:
                # the new sets are small: a quarter trains the model; calibration sets are drawn
                # from the rest and every other row of the rest (at most 800) is a test row
                n_fit = min(len(idx) // 4, 600)
                fit_rows, rest = idx[:n_fit], idx[n_fit:]
                test_rows, pool = rest, rest
            else:
                n_fit = min(len(idx) // 3, 600)
                fit_rows, rest = idx[:n_fit], idx[n_fit:]
                n_test = min(len(rest) // 2, 1500)
                test_rows, pool = rest[:n_test], rest[n_test:]
            if len(np.unique(y_index[fit_rows])) != k:
                continue
            for mname, model in base_models(quick, seed):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    model.fit(X[fit_rows], y_index[fit_rows])
                if mname == "svm_margins":
                    # a margin model has no predict_proba: calibrate it on the fit rows first
                    model = CalibrationWrapper(FrozenEstimator(model), method="platt").fit(
                        X[fit_rows], y_index[fit_rows])
                frozen = FrozenEstimator(model)
                source_prior = np.bincount(y_index[fit_rows], minlength=k) / n_fit
                sizes = (20, 60, 200) if new else (20, 60)
                # the new sets' draws are made before the checks use the generator, so that
                # one draw can be rebuilt from (data set, seed, model) alone
                cal_draws = (list(draws(y_index, pool, k, np.random.default_rng([seed, 7]), sizes))
                             if new else draws(y_index, pool, k, rng, sizes))
                for draw, cal in cal_draws:
                    n_draws += 1
                    _done["draws"] = n_draws
                    where = f"{dname}|{mname}|seed{seed}|{draw}"
                    t_rows = test_rows[~np.isin(test_rows, cal)][:800] if new else test_rows
                    if len(t_rows) == 0:  # a tiny set (80 rows): the draw took every row
                        continue
                    Xt, yt = X[t_rows], y_index[t_rows]
                    base_t = model.predict_proba(Xt)
                    Xc, yc = X[cal].copy(), y_index[cal].copy()
                    Xc0, yc0 = Xc.copy(), yc.copy()
                    try:
                        sk = sklearn_calibrated(frozen, Xc, yc, Xt) if new else None
                        sweep_calibration(frozen, Xc, yc, Xt, yt, base_t, k, where, rng, quick,
                                          sk)
                        sweep_prior(frozen, Xc, yc, Xt, yt, base_t, k, where, rng)
                        if new:
                            sweep_prior_shifted(frozen, Xc, yc, Xt, yt, k, where, rng,
                                                source_prior)
                        sweep_cost(frozen, Xc, yc, k, where, rng)
                        sweep_array_core(model.predict_proba(Xc), yc, k, where, rng)
                    except Exception as e:  # noqa: BLE001 - a fault of this script: count it
                        note("(the sweep itself)", "crash", where, f"{type(e).__name__}: {e}")
                    if not (np.array_equal(Xc, Xc0) and np.array_equal(yc, yc0)):
                        note("wrappers", "inplace", where)
                print(f"{dname} {mname} seed {seed} done", flush=True)
    return n_draws


def _summary(n_draws: int) -> None:
    kinds = ["crash", "nonfinite", "exact0/1", "rowsum", "inplace", "wscale", "freq", "harm",
             "harm<200", "vs_sk", "vs_sk<200"]
    print(f"\n{n_draws} calibration draws\n")
    width = max(len(c) for c in components) + 2
    print("component".ljust(width) + "".join(k.rjust(10) for k in kinds))
    for comp in sorted(components):
        row = [problems.get((comp, kind), 0) for kind in kinds]
        cells = "".join((str(c) if c else "-").rjust(10) for c in row)
        print(comp.ljust(width) + cells + ("" if any(row) else "   none"))
    print(f"\ntotal problems: {sum(problems.values()) or 'none'}")
    for (comp, kind), ex in sorted(examples.items()):
        print(f"  {comp} {kind}: {ex}")
    if ratios:
        print("\nTest log-loss ratios on random draws (geometric mean | worst | cells)")
        for (comp, kind), r in sorted(ratios.items()):
            r = np.asarray(r)
            gm = float(np.exp(np.mean(np.log(np.maximum(r, 1e-12)))))
            print(f"  {comp:34} {kind:6} {gm:6.3f} | {r.max():6.2f} | {len(r)}")
    if shift_cells:
        r = np.array([c[4] for c in shift_cells])
        gap = np.array([c[5] for c in shift_cells])
        err = np.array([abs(c[3] - c[2]) for c in shift_cells])
        print(f"\nPrior shift made by resampling ({len(r)} cells): adapted/base log loss "
              f"geometric mean {np.exp(np.mean(np.log(r))):.3f}, worst {r.max():.2f}; "
              f"share of the gap to the oracle closed, median {np.nanmedian(gap):.2f}; "
              f"|estimate - true prior| mean {np.nanmean(err):.3f}")


if __name__ == "__main__":
    main(sys.argv[1:])
