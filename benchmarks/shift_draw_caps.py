"""Milder per-draw caps on the evidence gate, measured on the same draws (docs/evidence/prior_shift_log.md,
"Milder per-draw caps (twenty-third session)").

Step 1 runs a benchmark once with the library as it is and keeps, per ``adapt``, the
calibrated posteriors of the unlabelled rows, their labels, the estimate, the source prior and
the gate's inputs; step 2 scores candidate rules for the share ``w`` on those draws by
re-weighting the posteriors (the library's own ``w`` reproduces the benchmarks' adapted log
loss to 1e-15). Rules are written against the share *before* the session-23 cap
(``w0 = max(0, 1 - c (k - 1) / T)``), so run step 1 with either version of the library.

    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture evidence [SEED]
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture hunt22
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture unpicked 200 lr,nb
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture unpicked-mc 60 lr,nb
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture draws ad_data lr 120
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture hunt25 SET,SET|all SEEDS TAG
    PYTHONPATH=$PWD nice python benchmarks/shift_draw_caps.py capture hunt24 SET,SET|all SEEDS TAG
    PYTHONPATH=$PWD python benchmarks/shift_draw_caps.py score FILE.pkl [RULE ...]
    PYTHONPATH=$PWD python benchmarks/shift_draw_caps.py band FILE.pkl[+FILE.pkl] [...]

``hunt24`` / ``hunt25`` use the cells of ``benchmarks/shift_real_hunt24.py`` /
``shift_real_hunt25.py`` (the named sets in that order; the file is rewritten after every set).
``band`` scores the session-26 rules for weak evidence between p = 0.05 and 0.10 (a warning
only, caps tapering from 2 % at p = 0.10 to none at 0.05, a limit scaled by a Bayes-factor
bound, a hard cap at 0.05; docs/evidence/prior_shift_log.md, "Weak-evidence draws between p = 0.05 and 0.10
(session 26)").

Files go to ``--dir`` (default /tmp/shift_draw_caps). ``evidence`` repeats the draws of
``benchmarks/shift.py --quick --only=evidence``; ``hunt22`` / ``unpicked`` use the split and
cells of ``benchmarks/shift_real_hunt22.py`` (on ``benchmarks/unpicked_data.py``'s tasks for
the latter); ``draws`` those of ``benchmarks/shift_no_shift_draws.py``.
"""

from __future__ import annotations

import pickle
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift._shift_tests import DRAW_HARM_LIMIT, draw_cutoff, draw_harm

sys.path.insert(0, str(Path(__file__).parent))

EPS = 1e-12


def state(psw, k):
    res = psw.prior_estimate_
    return dict(src=np.asarray(psw.source_prior_, float), est=np.asarray(psw.target_prior_, float),
                stat=float(psw.shift_statistic_) if psw.shift_statistic_ is not None else np.nan,
                pvalue=float(psw.shift_pvalue_) if psw.shift_pvalue_ is not None else np.nan,
                scale=float(res.null_harm_scale or 0.0),
                ratio=getattr(res, "null_move_ratio", None),
                cutoff=float(psw.evidence_cutoff_), weight=float(psw.adaptation_weight_),
                identified=bool(getattr(res, "identified", True)), k=k,
                applied=np.asarray(psw.applied_prior_, float))


def evidence(seed=0, quick=True):
    import shift as sh
    reps = 25 if quick else 100
    n_lab = n_unl = 2000
    prevalences = (0.02, 0.05, 0.2, 0.5) if quick else (0.02, 0.05, 0.1, 0.2, 0.5)
    models = {"weak": 0.74, "strong": 2.5}
    rng = np.random.default_rng(seed)
    out = []
    for name, delta in models.items():
        for prev in prevalences:
            X_tr, y_tr = sh.gaussian(20_000, prev, rng, delta)
            model = FrozenEstimator(LogisticRegression().fit(X_tr, y_tr))
            for shift in (0.5, 1.0, 2.0):
                target = prev * shift
                if target >= 1.0:
                    continue
                for r in range(reps):
                    X, y = sh.gaussian(n_lab, prev, rng, delta)
                    X_new, y_new = sh.gaussian(n_unl, target, rng, delta)
                    wrapper = PriorShiftWrapper(model, random_state=0).fit(X, y)
                    none = wrapper.predict_proba(X_new)
                    with warnings.catch_warnings(record=True) as rec:
                        warnings.simplefilter("always")
                        wrapper.adapt(X_new)
                    adapted = wrapper.predict_proba(X_new)
                    d = state(wrapper, 2)
                    d.update(cell=(name, prev, shift), rep=r, y=y_new.astype(np.int8),
                             P0=none.astype(float), target=np.array([1 - target, target]),
                             warn=sorted({x.category.__name__ for x in rec}),
                             lla_check=float(-np.mean(np.log(np.clip(
                                 adapted[np.arange(len(y_new)), y_new], 1e-12, 1)))))
                    out.append(d)
            print(name, prev, time.strftime("%H:%M:%S"), flush=True)
    return out


def hunt(seeds=2, source=None, save=None):
    import shift_real_hunt22 as h
    recs = []
    orig = h.log_loss
    calls = {"n": 0}
    last = {}
    orig_adapt = PriorShiftWrapper.adapt

    def adapt(self, *a, **kw):
        r = orig_adapt(self, *a, **kw)
        last["psw"] = self
        return r

    PriorShiftWrapper.adapt = adapt

    def ll(y, P, classes, w=None):
        i = calls["n"] % 3
        calls["n"] += 1
        if i == 0:  # P0 first
            psw = last["psw"]
            d = state(psw, len(classes))
            d.update(y=np.searchsorted(classes, y).astype(np.int16), P0=np.asarray(P, float))
            recs.append(d)
        return orig(y, P, classes, w)

    h.log_loss = ll
    rows = []
    for name, X, y, models, weighted in (source or h.sets()):
        k = len(np.unique(y))
        kinds = ["x0.5", "x1", "x2"] if k == 2 else ["none", "dir1", "dir2"]
        for seed in range(seeds):
            for m in models:
                n0 = len(rows)
                nr0 = len(recs)
                h.one(name, X, y, m, seed, kinds, weighted and m == models[0], rows)
                assert len(rows) - n0 == len(recs) - nr0, (name, m, seed)
        print(name, time.strftime("%H:%M:%S"), flush=True)
        for r, d in zip(rows, recs, strict=True):
            d["row"] = r
        if save is not None:  # after every set, so that an interrupted run keeps what it has
            with open(save, "wb") as f:
                pickle.dump(recs, f)
    return recs


def hunt24(module="shift_real_hunt25", seeds=2, names=None, models=("lr", "rf", "nb"),
           save=None):
    """The cells of ``benchmarks/shift_real_hunt24.py`` (or ``shift_real_hunt25.py``, which runs
    the same cells on other sets): per cell the wrapper fitted with weights all one, its state,
    the unlabelled rows' calibrated posteriors and labels, and the cell's row of the hunt."""
    import importlib

    import shift_real_hunt24 as h24
    mod = importlib.import_module(module)
    recs, rows, crashes, skipped = [], [], [], []
    last, calls = {}, {"n": 0}
    orig_pair, orig_ll = h24.adapt_pair, h24.log_loss

    def adapt_pair(pair, Xu):
        res = orig_pair(pair, Xu)
        if not isinstance(res, str):
            last["d"] = state(res[0], len(res[0].classes_))
        return res

    def ll(y, P, classes):
        if calls["n"] % 3 == 0:  # P0 (no adjustment) comes first of the three
            d = dict(last["d"])
            d.update(y=np.searchsorted(classes, y).astype(np.int16), P0=np.asarray(P, float))
            recs.append(d)
        calls["n"] += 1
        return orig_ll(y, P, classes)

    h24.adapt_pair, h24.log_loss = adapt_pair, ll
    data = mod.sets()
    if names:  # in the order named
        data = [t for s in names for t in data if s.lower() in t[0].lower()]
    for name, X, y in data:
        for seed in range(seeds):
            for m in models:
                n0, nr0 = len(rows), len(recs)
                try:
                    h24.one(name, X, y, m, seed, rows, crashes, skipped)
                except Exception as e:  # noqa: BLE001 (the script's own draw)
                    print("script error", name, m, seed, e, flush=True)
                    del rows[n0:], recs[nr0:]
                assert len(rows) - n0 == len(recs) - nr0, (name, m, seed)
        print(name, time.strftime("%H:%M:%S"), flush=True)
        for r, d in zip(rows, recs, strict=True):
            d["row"] = r
        if save is not None:  # after every set, so that an interrupted run keeps what it has
            with open(save, "wb") as f:
                pickle.dump(recs, f)
    return recs


def draws(set_name="ad_data", model_name="lr", n=120):
    import shift_real_hunt22 as h
    name, X, y = next((nm, X, y) for nm, X, y, _, _ in h.sets() if set_name.lower() in nm.lower())
    classes = np.unique(y)
    A, B, C = h.split3(y, 1)
    model = h.make_model(model_name).fit(X.iloc[A], y[A])
    rest = np.concatenate([B, C])
    out = []
    for r in range(n):
        rng = np.random.default_rng([99, r])
        lab, unl = [], []
        for c in classes:
            idx = rng.permutation(rest[y[rest] == c])
            m = int(round(len(idx) * len(B) / len(rest)))
            lab += idx[:m].tolist()
            unl += idx[m:].tolist()
        lab, unl = np.array(lab), np.array(unl)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw = PriorShiftWrapper(FrozenEstimator(model), random_state=r, n_resamples=0)
            psw.fit(X.iloc[lab], y[lab]).adapt(X.iloc[unl])
        d = state(psw, len(classes))
        d.update(y=np.searchsorted(classes, y[unl]).astype(np.int16),
                 P0=psw._calibrated(X.iloc[unl]))
        out.append(d)
    return out


def ll_at(d, w):
    src, est, P0, y = d["src"], d["est"], d["P0"], d["y"]
    if w <= 0:
        moved = src
    else:
        moved = src + w * (est - src)
        moved = moved / moved.sum()
    q = P0 * (moved / src)
    q /= q.sum(axis=1, keepdims=True)
    return float(np.mean(-np.log(np.clip(q[np.arange(len(y)), y], EPS, 1.0))))


def ll_prior(d, prior):
    q = d["P0"] * (np.asarray(prior) / d["src"])
    q /= q.sum(axis=1, keepdims=True)
    return float(np.mean(-np.log(np.clip(q[np.arange(len(d["y"])), d["y"]], EPS, 1.0))))


def base_w(d, c=None):
    """The share before any per-draw rule: ``max(0, 1 - c (k - 1) / T)``."""
    stat = d["stat"]
    c = d["cutoff"] if c is None else c
    if not d["identified"] or not np.isfinite(stat) or stat <= 0:
        return 0.0
    thr = c * (d["k"] - 1)
    if thr == 0:
        return 1.0
    return max(0.0, 1.0 - thr / stat)


def harm(d, w):
    return draw_harm(d["scale"], d["ratio"], d["stat"], w)


def cap_w(d, w, bound):
    """Largest w' <= w with draw_harm(w') <= bound."""
    if w <= 0 or harm(d, w) <= bound:
        return w
    s, t, r = d["scale"], d["stat"], max(float(d["ratio"] or 0.0), 0.0)
    # s t (w^2 + 2 r w) = bound
    a = bound / (s * t)
    return float(min(w, -r + np.sqrt(r * r + a)))


def lin_cap_w(d, w, bound):
    """Cap only the first-order (null-gradient) term: s t 2 r w <= bound."""
    if w <= 0:
        return w
    s, t, r = d["scale"], d["stat"], max(float(d["ratio"] or 0.0), 0.0)
    if not (s and t and r) or not np.isfinite(s * t * r):
        return w
    return float(min(w, bound / (2 * s * t * r)))


def _quantile_cutoff(d, limit, level, p0=0.0):
    """Last session's rule: the cutoff raised until the no-shift draw at the ``level``
    quantile of T loses at most ``limit`` (only where p >= ``p0``)."""
    if d["pvalue"] < p0:
        return base_w(d)
    return base_w(d, draw_cutoff(d["scale"], d["ratio"], d["k"] - 1, limit, d["cutoff"], level))


def _cap(d, bound, p0=0.0):
    return cap_w(d, base_w(d), bound) if d["pvalue"] >= p0 else base_w(d)


def _lin_cap(d, bound):
    return lin_cap_w(d, base_w(d), bound)


def _shrink(d, bound, p0=0.0):
    w = base_w(d)
    if d["pvalue"] < p0:
        return w
    h = harm(d, w)
    return w * min(1.0, bound / h) if h > 0 else w


def make_rules():
    """Name -> rule (a record -> the share applied)."""
    from functools import partial

    rules = {"default": base_w}
    for h in (0.02, 0.03, 0.05):
        rules[f"drawcut {h:.0%}@95"] = partial(_quantile_cutoff, limit=h, level=0.95)
    for lev in (0.8, 0.9):
        rules[f"drawcut 2%@{lev:.0%}"] = partial(_quantile_cutoff, limit=0.02, level=lev)
    for b in (0.02, 0.03, 0.05):
        rules[f"cap {b:.0%}"] = partial(_cap, bound=b)
        rules[f"lincap {b:.0%}"] = partial(_lin_cap, bound=b)
        rules[f"shrink {b:.0%}"] = partial(_shrink, bound=b)
    for p0 in (0.1, 0.2, 0.3, 0.5):
        for b in (0.02, 0.03):
            rules[f"cap {b:.0%} if p>{p0}"] = partial(_cap, bound=b, p0=p0)
            rules[f"shrink {b:.0%} if p>{p0}"] = partial(_shrink, bound=b, p0=p0)
        rules[f"drawcut 2%@95 if p>{p0}"] = partial(_quantile_cutoff, limit=0.02, level=0.95,
                                                     p0=p0)
    for p0 in (0.05, 0.1, 0.15):
        for b in (0.01, 0.015, 0.02, 0.03):
            rules[f"pcap {b:.1%} p>={p0}"] = partial(_cap, bound=b, p0=p0)
    return rules


P_CAP, P_WEAK = 0.10, 0.05  # the cap's level since session 23; the band's lower end


def in_band(d):
    """Weak evidence below the cap's level: ``0.05 <= p < 0.10``."""
    p = d["pvalue"]
    return bool(np.isfinite(p) and P_WEAK <= p < P_CAP)


def kept_w(d):
    """The library's share since session 23: capped at 2 % where ``p >= 0.10``."""
    return _cap(d, DRAW_HARM_LIMIT, P_CAP)


def _limit_cap(d, limit_of_p):
    """Cap at ``limit_of_p(p)`` where ``p < 0.10`` (2 % at and above it, as kept)."""
    p = d["pvalue"]
    if not np.isfinite(p) or p >= P_CAP:
        return kept_w(d)
    lim = limit_of_p(p)
    return base_w(d) if not np.isfinite(lim) else cap_w(d, base_w(d), lim)


def taper_hyperbolic(p):
    """2 % at p = 0.10, rising as 1 / (p - 0.05) to no limit at 0.05."""
    return DRAW_HARM_LIMIT * (P_CAP - P_WEAK) / (p - P_WEAK) if p > P_WEAK else np.inf


def taper_log(p):
    """2 % at p = 0.10, rising as 1 / log(p / 0.05) to no limit at 0.05."""
    return DRAW_HARM_LIMIT * np.log(P_CAP / P_WEAK) / np.log(p / P_WEAK) if p > P_WEAK else np.inf


def _taper_share(d):
    """The share itself interpolated linearly in p between the capped share (p = 0.10) and the
    free one (p = 0.05)."""
    p, w0 = d["pvalue"], base_w(d)
    if not np.isfinite(p) or p >= P_CAP:
        return kept_w(d)
    if p <= P_WEAK:
        return w0
    wc = cap_w(d, w0, DRAW_HARM_LIMIT)
    return wc + (w0 - wc) * (P_CAP - p) / (P_CAP - P_WEAK)


def null_posterior_floor(p):
    """Sellke, Bayarri & Berger (2001, eq. 3): for p < 1/e the Bayes factor for the precise
    null is at least ``-e p ln p`` over a wide class of alternatives; with even prior odds the
    probability of "no shift" given the data is at least ``1 / (1 + 1 / B)``."""
    p = float(np.clip(p, 1e-300, np.exp(-1)))
    b = -np.e * p * np.log(p)
    return b / (1.0 + b)


def taper_bayes(p):
    """Expected harm under "no shift", weighted by the floor of its probability, held where
    the kept cap holds it at p = 0.10: ``2 % * pi0(0.10) / pi0(p)``."""
    return DRAW_HARM_LIMIT * null_posterior_floor(P_CAP) / null_posterior_floor(p)


def warn_kept(d, w):
    """NoShiftHarmWarning as the library raises it: on the share before the cap, p >= 0.10."""
    return warned_harm(d, base_w(d))


def warn_band(d, w):
    """The kept warning, and also where 0.05 <= p < 0.10 and the share before any cap would
    raise a no-shift draw's log loss by more than 2 %."""
    w0 = base_w(d)
    return warn_kept(d, w) or (in_band(d) and w0 > 0 and harm(d, w0) > DRAW_HARM_LIMIT)


def warn_from(d, w, p0):
    """The kept warning, and also where ``p0 <= p < 0.10`` and the share before any cap would
    raise a no-shift draw's log loss by more than 2 % (``p0 = 0.05``: :func:`warn_band`)."""
    p, w0 = d["pvalue"], base_w(d)
    return warn_kept(d, w) or bool(np.isfinite(p) and p0 <= p < P_CAP and w0 > 0
                                   and harm(d, w0) > DRAW_HARM_LIMIT)


def warn_band_applied(d, w):
    """As :func:`warn_band`, on the share applied (after the rule's own cap)."""
    return warn_kept(d, w) or (in_band(d) and w > 0 and harm(d, w) > DRAW_HARM_LIMIT)


def band_rules():
    """Name -> (share rule, warning rule) for the session-26 comparison (0.05 <= p < 0.10)."""
    from functools import partial

    out = {"kept (cap 2 % where p >= 0.10)": (kept_w, warn_kept),
           "(a) warn where 0.05 <= p < 0.10": (kept_w, warn_band),
           "(a') warn where 0.01 <= p < 0.10": (kept_w, partial(warn_from, p0=0.01)),
           "(b1) taper 2 %*0.05/(p-0.05)": (partial(_limit_cap, limit_of_p=taper_hyperbolic),
                                            warn_band),
           "(b2) taper 2 %*ln2/ln(p/0.05)": (partial(_limit_cap, limit_of_p=taper_log), warn_band),
           "(b3) share linear in p": (_taper_share, warn_band),
           "(c) Bayes-factor floor, p < 0.10": (partial(_limit_cap, limit_of_p=taper_bayes),
                                                warn_band),
           "hard cap 2 % where p >= 0.05": (partial(_cap, bound=DRAW_HARM_LIMIT, p0=P_WEAK),
                                            warn_band),
           "no cap (session 22)": (base_w, warn_kept)}
    return out


def score_band(recs, rules, evidence=False):
    """Per rule: no-shift cells above 1.02 (of them without any warning), worst, the warnings
    the rule adds on no-shift and on shifted cells, and the shifted cells' gap closed."""
    out = {}
    for name, (wrule, wwarn) in rules.items():
        no_r, no_unw, no_new, sh_new, sh_gap, sh_g, sh_t = [], [], 0, 0, [], 0.0, 0.0
        capped_sh = 0
        for d in recs:
            w = wrule(d)
            warned_rule = wwarn(d, w)
            new = warned_rule and not warn_kept(d, w)
            if evidence:
                no_shift, ll0 = d["cell"][2] == 1.0, ll_at(d, 0.0)
                llo, other = ll_prior(d, d["target"]), False
            else:
                row = d["row"]
                no_shift = row["kind"] in ("x1", "none")
                ll0, llo = row["ll_none"], row["ll_oracle"]
                other = bool(set(str(row["warn"]).split(",")) - {"", "nan",
                                                                   "NoShiftHarmWarning"})
            lla = ll_at(d, w)
            if no_shift:
                no_r.append(lla / ll0)
                no_unw.append(not (other or warned_rule))
                no_new += new
            else:
                sh_new += new
                capped_sh += w < kept_w(d) - 1e-12
                if ll0 - llo > 0.002:
                    sh_gap.append((ll0 - lla) / (ll0 - llo))
                    sh_g += ll0 - lla
                    sh_t += ll0 - llo
        no_r, no_unw = np.array(no_r), np.array(no_unw)
        out[name] = dict(worst=no_r.max(), above=int((no_r > 1.02).sum()),
                         above_unw=int(((no_r > 1.02) & no_unw).sum()), n_no=len(no_r),
                         mean_no=float(no_r.mean()), closed=float(np.mean(sh_gap)),
                         pooled=sh_g / sh_t, n_sh=len(sh_gap), new_no=no_new, new_sh=sh_new,
                         n_shifted=len(recs) - len(no_r), capped_sh=capped_sh)
    return out


def score_band_evidence(recs, rules):
    """shift.py --quick --only=evidence: per cell means, as the benchmark prints them."""
    res = score_evidence(recs, {k: v[0] for k, v in rules.items()})
    for name, (wrule, wwarn) in rules.items():
        new_no = new_sh = 0
        for d in recs:
            w = wrule(d)
            new = wwarn(d, w) and not warn_kept(d, w)
            if d["cell"][2] == 1.0:
                new_no += new
            else:
                new_sh += new
        res[name].update(new_no=new_no, new_sh=new_sh)
    return res


def warned_harm(d, w):
    p = d["pvalue"]
    return bool(w > 0 and np.isfinite(p) and p >= 0.10 and harm(d, w) > DRAW_HARM_LIMIT)


def score_evidence(recs, rules):
    cells = {}
    for d in recs:
        cells.setdefault(d["cell"], []).append(d)
    # precompute none/oracle
    base = {}
    for key, ds in cells.items():
        base[key] = (np.mean([ll_at(d, 0.0) for d in ds]), np.mean([ll_prior(d, d["target"]) for d in ds]))
    out = {}
    for name, rule in rules.items():
        closed, worst, nwarn, pooled_g, pooled_t = [], 0.0, 0, 0.0, 0.0
        for key, ds in cells.items():
            ws = [rule(d) for d in ds]
            la = np.mean([ll_at(d, w) for d, w in zip(ds, ws, strict=True)])
            n0, orc = base[key]
            nwarn += sum(warned_harm(d, w) for d, w in zip(ds, ws, strict=True))
            if key[2] == 1.0:
                worst = max(worst, la / n0)
            else:
                closed.append((n0 - la) / (n0 - orc))
                pooled_g += n0 - la
                pooled_t += n0 - orc
        out[name] = dict(closed=float(np.mean(closed)), pooled=pooled_g / pooled_t, worst=worst,
                         nwarn=nwarn)
    return out


def score_hunt(recs, rules):
    out = {}
    for name, rule in rules.items():
        no_r, no_unw, sh_gap, sh_g, sh_t = [], [], [], 0.0, 0.0
        for d in recs:
            row = d["row"]
            w = rule(d)
            lla = ll_at(d, w)
            ll0, llo = row["ll_none"], row["ll_oracle"]
            warn = set(str(row["warn"]).split(",")) - {"", "nan", "NoShiftHarmWarning"}
            if warned_harm(d, base_w(d)):  # the library warns on the pre-cap weight
                warn.add("NoShiftHarmWarning")
            if row["kind"] in ("x1", "none"):
                no_r.append(lla / ll0)
                no_unw.append(not warn)
            elif ll0 - llo > 0.002 and np.isfinite(row["gap"]):
                sh_gap.append((ll0 - lla) / (ll0 - llo))
                sh_g += ll0 - lla
                sh_t += ll0 - llo
        no_r, no_unw = np.array(no_r), np.array(no_unw)
        out[name] = dict(worst=no_r.max(), above=int((no_r > 1.02).sum()),
                         above_unw=int(((no_r > 1.02) & no_unw).sum()),
                         mean_no=float(no_r.mean()), closed=float(np.mean(sh_gap)), pooled=sh_g / sh_t,
                         n_sh=len(sh_gap))
    return out


def score_draws(recs, rules):
    out = {}
    for name, rule in rules.items():
        h = np.array([ll_at(d, rule(d)) / ll_at(d, 0.0) - 1 for d in recs])
        out[name] = dict(mean=h.mean(), q95=np.quantile(h, 0.95), worst=h.max(), above=np.mean(h > 0.02))
    return out


def main() -> None:
    """``capture ...`` or ``score FILE [RULE ...]`` (see the module docstring)."""
    args = [a for a in sys.argv[1:] if not a.startswith("--dir=")]
    out_dir = Path(next((a[6:] for a in sys.argv[1:] if a.startswith("--dir=")),
                        "/tmp/shift_draw_caps"))
    out_dir.mkdir(parents=True, exist_ok=True)
    if args[0] == "capture":
        t0 = time.time()
        mode = args[1]
        if mode == "evidence":
            seed = int(args[2]) if len(args) > 2 else 0
            res, fn = evidence(seed), f"evidence_s{seed}.pkl"
        elif mode == "hunt22":
            res, fn = hunt(2), "hunt_hunt22.pkl"
        elif mode in ("unpicked", "unpicked-mc"):
            import pandas as pd
            from unpicked_data import unpicked_data_sets, unpicked_multiclass_sets

            n_tasks, models = int(args[2]), tuple(args[3].split(","))
            sets = unpicked_data_sets if mode == "unpicked" else unpicked_multiclass_sets
            src = ((nm, pd.DataFrame(X), np.asarray(y).astype(str), models, False)
                   for nm, X, y in sets(n_tasks))
            res, fn = hunt(1, src), f"hunt_{mode}_{n_tasks}.pkl"
        elif mode in ("hunt24", "hunt25"):
            names = args[2].split(",") if len(args) > 2 and args[2] != "all" else None
            seeds = int(args[3]) if len(args) > 3 else 2
            tag = args[4] if len(args) > 4 else "all"
            fn = f"hunt_{mode}_{tag}.pkl"
            res = hunt24(f"shift_real_{mode}", seeds, names, save=out_dir / fn)
        else:
            res = draws(args[2], args[3], int(args[4]))
            fn = f"draws_{args[2]}_{args[3]}.pkl"
        with open(out_dir / fn, "wb") as f:
            pickle.dump(res, f)
        print("saved", out_dir / fn, len(res), f"{time.time() - t0:.0f} s")
        return
    if args[0] == "band":  # the session-26 comparison (docs/prior_shift.md)
        for fn in args[1:]:  # FILE+FILE pools the files' cells
            recs = []
            for part in fn.split("+"):
                with open(part, "rb") as f:
                    recs += pickle.load(f)
            print("==", fn, len(recs), "adapts")
            if Path(fn).name.startswith("evidence"):
                for k, v in score_band_evidence(recs, band_rules()).items():
                    print(f"{k:36s} closed {v['closed']:6.1%} pooled {v['pooled']:6.1%} worst "
                          f"no-shift {v['worst']:.4f} | new warnings: no-shift {v['new_no']}, "
                          f"shifted {v['new_sh']}")
            else:
                for k, v in score_band(recs, band_rules()).items():
                    print(f"{k:36s} no-shift worst {v['worst']:.4f} >1.02 {v['above']:2d} "
                          f"(quiet {v['above_unw']}) of {v['n_no']} mean {v['mean_no']:.4f} | "
                          f"shifted closed {v['closed']:6.1%} pooled {v['pooled']:6.1%} "
                          f"({v['n_sh']}) | new warnings: no-shift {v['new_no']}, shifted "
                          f"{v['new_sh']} of {v['n_shifted']}; moved less {v['capped_sh']}")
        return
    fn = args[1]
    rules = make_rules()
    if len(args) > 2:
        rules = {k: v for k, v in rules.items() if k in args[2:]}
    with open(fn, "rb") as f:
        recs = pickle.load(f)
    name = Path(fn).name
    if name.startswith("evidence"):
        res = score_evidence(recs, rules)
        for k, v in res.items():
            print(f"{k:28s} closed {v['closed']:6.1%} pooled {v['pooled']:6.1%} worst no-shift "
                  f"{v['worst']:.4f}")
    elif name.startswith("hunt"):
        res = score_hunt(recs, rules)
        for k, v in res.items():
            print(f"{k:28s} no-shift worst {v['worst']:.4f} >1.02 {v['above']:2d} (no warning "
                  f"{v['above_unw']}) mean {v['mean_no']:.4f} | shifted closed {v['closed']:6.1%} "
                  f"pooled {v['pooled']:6.1%} ({v['n_sh']})")
    else:
        res = score_draws(recs, rules)
        for k, v in res.items():
            print(f"{k:28s} mean {v['mean']:.4f} q95 {v['q95']:.4f} worst {v['worst']:.4f} "
                  f"share>2% {v['above']:.3f}")


if __name__ == "__main__":
    main()
