"""Awkward Dask inputs against the in-memory fit, and the weights' scale on the tally path.

Part 1: for the three wrappers, the largest difference in ``predict_proba`` (and the tuned
cutoff, the adapted prior) between a Dask fit and the in-memory fit of the same rows, for
partitions with no rows, one class per partition, very uneven partitions, arrays of unknown
chunk sizes and label columns of pandas' categorical, nullable and decimal dtypes.

Part 2: the tuned cutoff fitted from a tally (the path of more than 20,000 rows, forced here on
fewer by setting ``probwrap.scale._tally.KEPT_ROWS`` to 0) with weights drawn from 0.5-2 and the
same weights times 1e3, 1e-3 and 1e-9, and whether a ``WeightScaleWarning`` is raised, next to
the in-memory fit.

Data: scikit-learn's breast cancer (a logistic regression fitted on the first 200 rows, 369
held out) and statsmodels' ``fair`` data (affairs > 0, rows shuffled with seed 0; naive Bayes fitted on 1,000
rows, the other 5,366 held out).

    python benchmarks/scale_edge_inputs.py [--quick]

``--quick`` runs part 2 on breast cancer only.
"""

from __future__ import annotations

import argparse
import decimal
import warnings


def _cancer():
    from sklearn.datasets import load_breast_cancer
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    data = load_breast_cancer(as_frame=True)
    X, y = data.data, data.target
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, max_iter=1000))
    model.fit(X.iloc[:200], y.iloc[:200])
    return (FrozenEstimator(model), X.iloc[200:].reset_index(drop=True),
            y.iloc[200:].reset_index(drop=True))


def _fair():
    import numpy as np
    import statsmodels.api as sm
    from sklearn.frozen import FrozenEstimator
    from sklearn.naive_bayes import GaussianNB

    d = sm.datasets.fair.load_pandas().data  # stored sorted by the label: shuffled first
    d = d.iloc[np.random.default_rng(0).permutation(len(d))].reset_index(drop=True)
    y = (d.pop("affairs") > 0).astype(int)
    model = GaussianNB().fit(d.iloc[:1000], y.iloc[:1000])
    return (FrozenEstimator(model), d.iloc[1000:].reset_index(drop=True),
            y.iloc[1000:].reset_index(drop=True))


def _wrappers(model):
    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

    return [("calibration (isotonic)", lambda: CalibrationWrapper(model, method="isotonic")),
            ("cost (tuned)", lambda: CostPolicyWrapper(model, costs={"fp": 1.0, "fn": 5.0},
                                                       strategy="tuned", n_resamples=0)),
            ("prior shift", lambda: PriorShiftWrapper(model, n_resamples=0))]


def _layouts(X, y):
    import dask
    import dask.dataframe as dd
    import pandas as pd

    df = X.assign(lab=y)
    cols = list(X.columns)

    def frame(parts, what):
        return dd.from_delayed([dask.delayed(p) for p in parts], meta=df.iloc[:0])[what]

    out = []
    for name, parts in [("empty partitions", [df.iloc[:0], df.iloc[:100], df.iloc[:0],
                                              df.iloc[100:], df.iloc[:0]]),
                        ("partitions of 1, 1, 358, 9 rows", [df.iloc[:1], df.iloc[1:2],
                                                             df.iloc[2:360], df.iloc[360:]]),
                        ("one class per partition", [df[df.lab == 0], df[df.lab == 1]])]:
        order = pd.concat(parts)
        out.append((name, frame(parts, cols), frame(parts, "lab"), order[cols], order["lab"]))
    whole = dd.from_pandas(df, npartitions=4)
    out.append(("unknown chunk sizes", whole[cols].to_dask_array(),
                whole["lab"].to_dask_array(), X, y))
    for dtype in ("category", "Int64", "boolean"):
        typed = dd.from_pandas(df.assign(lab=df.lab.astype(dtype)), npartitions=3)
        out.append((f"labels {dtype}", typed[cols], typed["lab"], X, y))
    with dask.config.set({"dataframe.convert-string": False}):
        dec = dd.from_pandas(df.assign(lab=[decimal.Decimal(int(v)) for v in y]), npartitions=3)
    out.append(("labels Decimal objects", dec[cols], dec["lab"], X, y))
    return out


def part_one() -> None:
    import dask
    import numpy as np

    model, X, y = _cancer()
    print("part 1: Dask fit minus in-memory fit (breast cancer, 369 held-out rows)")
    print(f"{'layout':34s} {'wrapper':24s} result")
    with dask.config.set({"scheduler": "synchronous", "dataframe.convert-string": False}):
        for name, Xd, yd, Xm, ym in _layouts(X, y):
            for wname, make in _wrappers(model):
                try:
                    remote, local = make().fit(Xd, yd), make().fit(Xm, np.asarray(ym, int))
                except ValueError as exc:
                    print(f"{name:34s} {wname:24s} refused: {str(exc)[:70]}")
                    continue
                diff = np.abs(np.asarray(remote.predict_proba(X))[:, 1]
                              - local.predict_proba(X)[:, 1]).max()
                extra = ""
                if hasattr(local, "cutoff_"):
                    extra = f" cutoff {remote.cutoff_:.4f} / {local.cutoff_:.4f}"
                if hasattr(local, "adapt"):
                    extra = (f" prior {remote.adapt(Xd).target_prior_[1]:.6f} / "
                             f"{local.adapt(Xm).target_prior_[1]:.6f}")
                print(f"{name:34s} {wname:24s} max |dp| {diff:.1e}{extra}")


def part_two(quick: bool) -> None:
    import dask
    import dask.dataframe as dd
    import numpy as np

    import probwrap.scale._tally as tally_module
    from probwrap import CostPolicyWrapper
    from probwrap.calibration import WeightScaleWarning

    print("\npart 2: tuned cutoff from a tally, weights 0.5-2 times a scale "
          "(Dask / in memory; W: WeightScaleWarning)")
    sets = [("breast cancer", _cancer)] + ([] if quick else [("fair (statsmodels)", _fair)])
    saved = tally_module.KEPT_ROWS
    tally_module.KEPT_ROWS = 0
    try:
        for name, load in sets:
            model, X, y = load()
            w = np.random.default_rng(0).uniform(0.5, 2.0, y.shape[0])
            cells = []
            for scale in (1.0, 1e3, 1e-3, 1e-9):
                frame = dd.from_pandas(X.assign(lab=y, w=w * scale), npartitions=3)
                out = []
                for Xf, yf, wf in ((frame[list(X.columns)], frame["lab"], frame["w"]),
                                   (X, y, w * scale)):
                    with warnings.catch_warnings(record=True) as caught, \
                            dask.config.set(scheduler="synchronous"):
                        warnings.simplefilter("always")
                        fit = CostPolicyWrapper(model, costs={"fp": 1.0, "fn": 5.0},
                                                strategy="tuned", n_resamples=0).fit(
                            Xf, yf, sample_weight=wf)
                    flag = "W" if any(issubclass(c.category, WeightScaleWarning)
                                      for c in caught) else "-"
                    out.append(f"{fit.cutoff_:.4f}{flag}")
                cells.append(f"x{scale:g}: {out[0]} / {out[1]}")
            print(f"{name:20s} " + "  ".join(cells))
    finally:
        tally_module.KEPT_ROWS = saved


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="part 2 on breast cancer only")
    args = parser.parse_args()
    warnings.filterwarnings("ignore", message="X does not have valid feature names")
    part_one()
    part_two(args.quick)


if __name__ == "__main__":
    main()
