"""How ``CalibrationWrapper(method="auto")`` chooses its map: the candidates, their folds, the
cross-validated log loss of each and the one-standard-error rule (a mixin of the wrapper)."""

from __future__ import annotations

import dataclasses
import numbers
import warnings
from typing import Any

import numpy as np
from sklearn.model_selection import StratifiedKFold
from sklearn.utils import check_random_state

from ._calibration_shares import ABSENT_CLASS_NOTE, class_shares_losses, smoothed_class_shares
from ._heldout import HeldOutPredictions, case_cells_of, keep_cells_together
from ._validation import plain
from ._weights import case_rows, choice_weights
from .calibration._base import CalibrationMap, WeightScaleWarning, count_weights
from .calibration._beta import BetaMap
from .calibration._binning import BinningMap
from .calibration._identity import IdentityMap
from .calibration._isotonic import IsotonicMap
from .calibration._platt import PlattMap, smoothed_binary_targets
from .calibration._temperature import TemperatureMap
from .calibration._vector_scaling import MatrixScalingMap, VectorScalingMap
from .calibration._venn_abers import VennAbersMap

__all__ = ["CALIBRATION_METHODS"]

#: Method names accepted by ``CalibrationWrapper(method=...)`` and the maps they stand for.
CALIBRATION_METHODS: dict[str, type[CalibrationMap]] = {
    "temperature": TemperatureMap,
    "platt": PlattMap,
    "beta": BetaMap,
    "binning": BinningMap,
    "isotonic": IsotonicMap,
    "venn_abers": VennAbersMap,
    "vector_scaling": VectorScalingMap,
    "matrix_scaling": MatrixScalingMap,
    "identity": IdentityMap,
}

#: Candidates of ``method="auto"`` that compete only for multiclass models: on binary log-odds
#: vector scaling is Platt scaling with a shrunken intercept.
_AUTO_MULTICLASS_ONLY = ("vector_scaling",)

#: Candidates of ``method="auto"`` that compete only for binary models: one-vs-rest beta costs
#: a quarter of ``auto``'s time on multiclass models (three parameters per class, fitted in
#: every fold) and is rarely chosen there; where it was, the map chosen without it was about as
#: good (benchmarks/calibration.py's multiclass draws and the fresh data sets; measured in
#: docs/calibration.md, "Speed"). Named in ``candidates``, it is scored.
_AUTO_BINARY_ONLY = ("beta",)

#: Methods that ``method="auto"`` leaves out unless named in ``candidates``: matrix scaling has
#: k^2 + k - 1 parameters and needs many rows per class; the identity (the model's own
#: probabilities), as the simplest candidate of the one-standard-error rule, was kept on too
#: many small sets where a map was better (benchmarks/calibration.py: geometric mean 0.972 ->
#: 0.981, cells above 1.10 four -> ten).
_AUTO_EXCLUDED_BY_DEFAULT = ("matrix_scaling", "identity")

#: ``method="auto"`` keeps Venn-Abers among its default candidates only while the number of
#: held-out rows times the number of binary maps (1, or k one-vs-rest) stays below this.
_VENN_ABERS_AUTO_MAX_ROWS = 1_000

#: ``method="auto"`` scores its candidates on at most this many rows: above it, on a
#: class-stratified sample of the rows (the chosen map is then fitted on all rows).
_SELECTION_MAX_ROWS = 20_000

#: ... and with its own folds, uses two instead of ``cv`` folds from this many rows times binary
#: maps (1 for two classes, k one-vs-rest) on.
_TWO_FOLD_CELLS = 20_000

#: ``method="auto"`` stops scoring a candidate after the first fold when its loss there is more
#: than this many paired standard errors above the best one's.
_RACE_SE = 4.0

#: After the first-fold race, a candidate left out against a map that is not eligible in the end
#: is scored on every fold after all (``_AutoChoice._fold_losses``); ``False`` switches this off
#: (for benchmarks/auto_small_separated.py's comparisons).
_RESUME_RACED = True

#: ``method="auto"``'s order-based candidates (binning, isotonic regression, Venn-Abers) are not
#: eligible when the smallest class has fewer than this many held-out rows (of weight > 0):
#: their levels near that class rest on a few of its rows per fold, and on such sets their
#: cross-validated score wins by luck more often than it predicts (step maps overfit small
#: calibration sets, Niculescu-Mizil & Caruana 2005). Was 8; 20 was measured on 1,450 draws of
#: 20-40 rows of 20 bundled scikit-learn and statsmodels sets (benchmarks/calibration_tiny.py)
#: and checked on the fresh sets and on benchmarks/calibration.py (docs/calibration.md, "Tiny
#: calibration sets"). Raised to 30 on 1,610 draws of 50 and 200 rows of 200 R data sets
#: enumerated automatically (benchmarks/calibration_tiny.py --sets unpicked): at 50 rows,
#: binning or isotonic regression chosen on 25 rows a class ended more than 10 % above
#: scikit-learn's sigmoid in about a third of such draws; draws above 1.10x the sigmoid 4.7 % ->
#: 3.4 % at 50 rows, unchanged at 200 (grid: worst-case cells above 1.10x scikit-learn's best
#: 9 -> 8).
_ORDER_MAPS_MIN_CLASS_ROWS = 30

_ORDER_BASED_NAMES = ("binning", "isotonic", "venn_abers")

#: When ``CalibrationWrapper`` cross-fits its model (not a ``FrozenEstimator``) on at most this
#: many labelled rows (of weight > 0), ``method="auto"`` leaves its order-based candidates out
#: unless they are named in ``candidates``. The map is fitted on the fold models' out-of-fold
#: scores but applied to the model refitted on all rows, whose scores differ most where rows
#: are few; a step map on the score scale carries that difference straight into its
#: probabilities, while a smooth map shifts them little. Measured with
#: benchmarks/crossfit_sweep.py at 100 and 300 training rows (550 cells of 61 bundled scikit-
#: learn, statsmodels, R and econometrics sets, five base models): geometric mean test log loss
#: 0.3-0.8 % lower, cells more than 5 % above scikit-learn's ``CalibratedClassifierCV`` sigmoid
#: 58 -> 45, worst cell against the old choice 1.11x (docs/evidence/small_data_log.md, the section
#: of 3 December 2026 on the cross-fitted path beside ``CalibratedClassifierCV``).
_CROSSFIT_ORDER_MAPS_MAX_ROWS = 300

#: When ``CalibrationWrapper`` cross-fits a binary model on at least this many labelled rows (of
#: weight > 0), ``method="auto"``'s one-standard-error rule tries Platt scaling before
#: temperature scaling (the scale alone, no bias term): where the two are within a standard
#: error on the folds, temperature scaling lacked the shift of the log-odds that naive Bayes or
#: a forest refitted on all rows needs (statsmodels' engel, naive Bayes, 100 rows: 0.621 test log
#: loss against Platt's 0.560 and scikit-learn's sigmoid's 0.538). Measured with
#: benchmarks/crossfit_sweep.py --methods at 100 and 300 rows, binary cells, test log loss over
#: scikit-learn's sigmoid (geometric mean / worst / cells above 1.05): scikit-learn's and
#: statsmodels' sets 0.954 / 1.24 / 13 -> 0.951 / 1.10 / 7 (130 cells), R and econometrics sets
#: 0.993 / 1.21 / 31 -> 0.989 / 1.16 / 19 (325 cells). Frozen models keep temperature first:
#: there, with 20-200 rows, Platt first was worse on benchmarks/calibration_tiny.py's fresh sets
#: (geometric mean 0.934 -> 0.937, draws above 1.05x the model's own 41 -> 44) and about even on
#: its grid sets (docs/evidence/small_data_log.md, the section of 3 December 2026 on Platt before
#: temperature).
_PLATT_FIRST_CROSSFIT_MIN_ROWS = 100

#: The multiclass counterpart: a model cross-fitted on at least this many rows of weight > 0
#: tries vector scaling (a scale and a bias per class) before temperature scaling (one scale).
#: A model refitted on all rows can shift the classes against each other, which one scale
#: cannot undo (causaldata's gapminder, continent from four columns, naive Bayes, 300 rows:
#: cross-validated log loss 1.264 +- 0.044 for temperature scaling against vector scaling's
#: 1.230, so temperature was kept; test log loss 1.426 against 1.304). Measured paired (the
#: same folds, old and new order) on the multiclass sets of benchmarks/crossfit_sweep.py's four
#: set groups: at 300 rows 80 cells, new over old 0.997 on average, worst 1.015, best 0.873
#: (scikit-learn's digits, linear SVM margins); at 100 rows about as good on average but one
#: cell 1.46x (statsmodels' modechoice, 100 of its 210 rows, linear SVM margins: eight
#: parameters on four small classes), hence the bound (docs/evidence/small_data_log.md, the section
#: of 4 December 2026 on a fifth round on the data of published studies).
_VECTOR_FIRST_CROSSFIT_MIN_ROWS = 300

#: A binary model whose held-out rows hold less than this share (by weight) of the rarer class
#: also tries Platt scaling before temperature scaling, frozen or cross-fitted, at any size.
#: Temperature scaling has no intercept: it can sharpen or soften the log-odds but not move
#: the base rate, and at low prevalence the base rate is what a model trained elsewhere most
#: often gets wrong (modeldata's car_prices, Saturn among 804 cars (7.5 %), a forest, 200
#: calibration rows: temperature kept within a standard error of Platt's score, mean
#: probability 0.057 for a prevalence of 0.074, test log loss 0.063 against Platt's 0.056 and
#: scikit-learn's sigmoid's 0.048). Measured on benchmarks/calibration_tiny.py --sets unpicked
#: (1,610 frozen draws of 50 and 200 rows on 200 automatically enumerated R data sets; on the
#: 1,388 draws where scikit-learn's best test log loss is at least 0.05): against scikit-learn's
#: sigmoid, geometric mean 0.9747 -> 0.9728, draws above 1.10x 3.6 % -> 2.8 %; checked on the
#: grid and fresh sets of 20-40 rows (cells above 1.10x scikit-learn's best 9 -> 6 and
#: 17 -> 16; docs/calibration.md, "Tiny calibration sets"). Cross-fitted on 60 rows of those R
#: tasks with a rare class (benchmarks/crossfit_rare_class.py, 296 cells): against
#: ``CalibratedClassifierCV(model)`` 0.921 -> 0.905, cells above 1.10x 10.8 % -> 3.4 %.
_PLATT_FIRST_MAX_MINORITY_SHARE = 0.20

#: For multiclass models, ``method="auto"``'s one-vs-rest candidates (a binary map per class:
#: Platt, beta and the order-based maps) are not eligible when the smallest class has fewer than
#: this many held-out rows (of weight > 0): that class's map then rests on one or two rows per
#: fold, while temperature and vector scaling share their parameters across the classes
#: (measured on the real-data sweep's 3-class diabetes set and benchmarks/calibration.py, see
#: docs/calibration.md).
_ONE_VS_REST_MIN_CLASS_ROWS = 8

#: The name under which ``method="auto"`` scores the class shares (the intercept-only map:
#: every row gets the share of each class among the rows it is fitted on, with Platt's
#: smoothed targets; for more than two classes see :mod:`._calibration_shares`) beside the
#: candidate maps. Not a method of its own
#: and never chosen by the one-standard-error rule: it replaces the chosen map only when it
#: beats every eligible candidate by more than that candidate's standard error (see
#: ``_AutoChoice._class_shares_beat_every_map``); the model's scores then carry no ranking that
#: holds out of fold on these rows. lifelines' waltons (naive Bayes on two columns, 81 rows,
#: fold models whose held-out probabilities point opposite ways): every map scored 0.57-0.70
#: against the class shares' 0.51 and ``auto`` kept a temperature (test log loss 1.93 times
#: scikit-learn's sigmoid; docs/evidence/small_data_log.md, the section of 4 December 2026 on
#: ``auto`` against the class shares on tiny sets).
CLASS_SHARES = "class_shares"

#: ... by more than this many standard errors of the paired difference (0: lower than every
#: eligible map's; ``inf`` switches the class shares off).
_CLASS_SHARES_MARGIN_SE = 1.0

#: Two classes: the one-standard-error rule passes over temperature scaling (the first map in
#: its order) when it is not the best map, its cross-validated log loss is above the class
#: shares' (see ``CLASS_SHARES``), and, fitted on all held-out rows, it softens (``T > 1``)
#: and gives every row a probability on the same side of the class share (so the mean of its
#: probabilities cannot equal the share): a scale without an intercept, softened where the
#: scores rank little, tends to 1/2 for every row, not to the base rate, and is then no simpler
#: account of the rows than the constant that beats it. (Not for sharpening temperatures:
#: fitted on near-constant fold scores they pass the same test while the refitted model, which
#: predicts, spreads its scores; passing them over cost up to 2.7x on
#: ``crossfit_sweep.py --only tiny``'s boosting and leaf-10 forest cells.) R's HSAUR::GHQ (11 groups of patients, k of n),
#: naive Bayes: temperatures of 40-260 kept within a standard error of Platt's score, test log
#: loss 1.2-1.85x scikit-learn's sigmoid. Measured in docs/evidence/small_data_log.md (the section
#: of 4 December 2026 on ``auto`` on the named tiny cases); ``False`` switches the rule off.
_PASS_OVER_TEMPERATURE_BELOW_SHARES = True

#: Two classes, a frozen model: the one-standard-error rule also passes over a temperature that
#: is not the best map and whose cross-validated log loss is above the class shares' (see
#: ``CLASS_SHARES``), whatever its side of the share and whether it softens or sharpens: a map
#: without an intercept that the constant beats on the folds is no simpler account of the rows
#: than the lower-scoring map with one. For a frozen model the scores the folds saw are the ones
#: that predict, so the caveat of the rule above (near-constant fold scores beside a refit that
#: spreads) does not arise. Stat2Data's FaithfulFaces (near chance), models fitted on 51 ratings
#: and frozen, 30 calibration rows: temperatures at 0.63-0.66 on the folds against the class
#: shares' 0.617, test log loss 1.10-1.25x scikit-learn's sigmoid (MLP, LDA, ridge, boosting);
#: on the 27 frozen cells of benchmarks/hunt31_sweep.py where the rule applies, 1.023 -> 1.002x
#: the sigmoid (geometric mean), quiet cells above 1.10x 4 -> 0
#: (docs/evidence/small_data_log.md, the calibration hunt of benchmarks/hunt31_sweep.py). ``False`` switches the
#: rule off.
_PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES = True

#: Probabilities are floored at this value when scoring candidate maps by log loss, so that a map
#: that predicts an exact 0 for an event that happens is heavily penalised but stays finite.
_LOG_LOSS_FLOOR = 1e-15

#: Two classes: where the one-standard-error rule would keep temperature scaling for being
#: simpler while Platt scaling scored lower on the folds (and is itself within a standard error
#: of the best map), Platt scaling is kept instead when the temperature, fitted on all held-out
#: rows, leaves their mean probability off their base rate by more than this many standard
#: errors (the mean-calibration test, calibration-in-the-large: Cox 1958; the standard error
#: under the fitted probabilities, sqrt(sum w_i^2 q_i (1 - q_i)) / sum w_i). Temperature
#: scaling has no intercept: its fit solves sum w_i (y_i - q_i) s_i = 0 for the scores s_i, not
#: sum w_i (y_i - q_i) = 0, so a model trained on another base rate keeps its shift. R's
#: carData::Greene, logistic regression fitted on 115 rows and frozen, 40 calibration rows:
#: temperature (T = 1.12) kept within a standard error of Platt's lower score, mean probability
#: 2.2 standard errors off, test log loss 0.676 against Platt's 0.604 and scikit-learn's
#: sigmoid's 0.608. Measured on the binary cells of benchmarks/hunt21-23_sweep.py
#: (docs/evidence/small_data_log.md, the section on temperature without an intercept); ``inf``
#: switches the rule off (and the one below, which widens it to any lower-scoring map).
_BASE_RATE_SE = 1.0

#: Two classes: the same base-rate test passes over a temperature that is not the best map on
#: the folds whichever map scored lower, and the one-standard-error rule goes on to the next map
#: in its order (Platt scaling, beta scaling, ...), keeping the first within a standard error
#: of the best: a temperature off the base rate is no simpler account of the rows than a map
#: with an intercept that scored lower. (The rule before 5 December 2026 did so only when Platt
#: scaling scored lower and was itself within a standard error of the best map; ``False``
#: restores that.) DAAG's nsw74psid1 (in a training programme, 7 %), Gaussian naive Bayes fitted
#: on 300 rows and frozen, 150 calibration rows: beta scaling best on the folds (0.108), the
#: temperature (T = 3.6, softening) within a standard error (0.116 +- 0.017), Platt scaling
#: (tried first: the rarer class holds under a fifth of the rows) not (0.123 +- 0.013); the
#: temperature's mean probability 1.9 standard errors under the base rate; test log loss 1.12x
#: scikit-learn's sigmoid, beta 0.93x. Measured on the cells of benchmarks/hunt22-23_sweep.py,
#: calibration_tiny.py (grid and fresh) and small_data_sweep.py (docs/evidence/small_data_log.md,
#: "auto cells above 1.10x").
_PASS_OVER_TEMPERATURE_OFF_BASE_RATE = True

#: Two classes: where Platt scaling is tried before temperature scaling (see
#: ``_PLATT_FIRST_CROSSFIT_MIN_ROWS`` and ``_PLATT_FIRST_MAX_MINORITY_SHARE``) and the
#: one-standard-error rule passes it over for scoring beyond a standard error of the best map,
#: temperature scaling, Platt scaling without its intercept, is passed over too and the rule goes
#: on to the next map in its order. The rule measures each map against the best one by the
#: standard error of their paired per-row difference: small for a map that nearly coincides with
#: the best (Platt beside beta scaling on few rows), wide for one that differs more, so the map
#: without the intercept that Platt-first asked for passed where Platt scaling did not, without
#: scoring better. stevedata's voteincome, voters thinned to 5 %, logistic regression
#: cross-fitted on 100 rows (5 voters): beta 0.1985 on the folds, Platt 0.1989 (standard error
#: 0.0003: passed over), temperature 0.1988 (standard error 0.0095: kept); test log loss 1.10x
#: scikit-learn's sigmoid, beta 0.96x. Measured on hunt24_sweep.py's draws and 24 redraws of its
#: named cells (docs/evidence/small_data_log.md, the section on auto on 40 cross-fitted rows);
#: ``False`` switches the rule off.
_PASS_OVER_TEMPERATURE_AFTER_PLATT = True

#: More than two classes: the one-standard-error rule passes over temperature scaling when it is
#: not the best map on the folds and, fitted on all held-out rows, it leaves the classes' mean
#: probabilities off their shares by more than ``_BASE_RATE_SE`` standard errors in mean square
#: over the classes (``mean_k gap_k^2 / se_k^2``, each class's calibration-in-the-large, Cox
#: 1958, as the binary test above; for two classes the mean square is the binary test's
#: square): a temperature has no per-class intercept, and a softening one pulls every class
#: toward 1/k, not toward its share, so it is no simpler account of the rows than the map that
#: scored lower (vector scaling). Ecdat's DoctorAUS (four insurance kinds, 2 of 40 rows in the
#: rarest), Gaussian naive Bayes cross-fitted on 40 rows: temperatures of 17-23 kept within a
#: standard error of vector scaling in 12 of 20 draws, the rarest kind's mean probability
#: 0.12-0.19 against its share 0.05; test log loss 1.241 against scikit-learn's sigmoid's
#: 1.162 over the 20 draws (docs/evidence/small_data_log.md, the hunt26_sweep.py hunt). ``False``
#: switches the rule off.
_PASS_OVER_TEMPERATURE_OFF_SHARES_MULTICLASS = True

#: Two classes, a frozen model: the one-standard-error rule passes over Platt scaling when,
#: fitted on all held-out rows, its slope is negative (the map decreases: higher scores get
#: lower probabilities) and its cross-validated log loss is not lower than that of another
#: eligible map (all of which are non-decreasing) by more than the standard error of their
#: paired difference; the rule goes on to the next map in its order. Such a map is kept (with
#: a warning) only when the folds show the reversal beyond their noise. ``False`` switches the
#: rule off. Measured in docs/calibration.md (the bullet on decreasing maps).
_PASS_OVER_DECREASING_PLATT = True

#: Two classes, a frozen model, fewer than this many held-out rows (of weight > 0): where the
#: one-standard-error rule keeps temperature or beta scaling, Platt scaling (the map of
#: scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``, with Platt's smoothed targets)
#: is kept instead unless the kept map's cross-validated log loss is lower than Platt's by more
#: than the standard error of their difference with the folds as the units (the per-fold mean
#: differences: the one-standard-error rule, Breiman et al. 1984, read over folds, as in the
#: k-fold paired comparison of two learners, Dietterich 1998; from memory). On a few dozen rows
#: the per-row standard error understates how much the winner of a fold race owes to the draw:
#: the rows of a fold share one fitted map, and a temperature (no intercept) or a beta map
#: (three parameters) that won there by less than the spread of its fold margins ended far
#: above the sigmoid more often than Platt's map did. Measured with
#: benchmarks/auto_small_separated.py (docs/evidence/small_data_log.md, the section on auto on
#: very few rows and on separated multiclass draws); ``0`` switches the rule off.
#: Off by default: on scikit-learn's breast cancer, a Gaussian naive Bayes fitted on 189 rows
#: and frozen, 20 calibration rows (tests/test_prior_shift_small_sets.py's draw), the rule
#: replaced a temperature at 0.52 times the model's own test log loss by a Platt map at 1.09
#: times it (1.31 times scikit-learn's sigmoid) — a harm where there was none, on the
#: overconfident model this rule was meant to protect; two other small-draw tests (a 20-row
#: naive Bayes in PriorShiftWrapper, the cost tally's cutoff anchor) moved the same way. The
#: rule stays available for measurement (benchmarks/auto_small_separated.py sets it to 100).
_PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS = 0

#: Two classes, a frozen model whose scores on the held-out rows (of weight > 0) take at most this
#: many distinct values: where the one-standard-error rule keeps temperature scaling, Platt scaling
#: is kept instead (also when the fold race left it out: on two values that race rewards a
#: temperature pushed to near 0/1 by a draw whose values hold one class each), unless its map,
#: fitted on all held-out rows, decreases. With two score values any non-decreasing map has two
#: free outputs, and the best it can give is each value's observed share, smoothed toward the
#: middle for small counts; Platt's two parameters reach that pair (each value gets the mean of
#: Platt's targets over its rows, (N+ + 1) / (N+ + 2) for a positive and 1 / (N- + 2) for a
#: negative, a Laplace-type smoothing: Platt 1999, section 2.2, from memory); a temperature, with
#: one parameter and no intercept, reaches it only by chance. Beta scaling (also exact on two
#: values, without the smoothing) is left as it is: replacing it lost on the same cells. Measured
#: with benchmarks/two_valued_frozen.py (docs/evidence/small_data_log.md, the section on frozen
#: models with two distinct scores); ``0`` switches the rule off.
_PLATT_FOR_FROZEN_MAX_DISTINCT = 2


def _boundary_of(cal: Any) -> str | None:
    """Why a fitted map (or any map of a one-vs-rest list) sits at a boundary, or None."""
    maps = cal if isinstance(cal, list) else [cal]
    for k, m in enumerate(maps):
        hit = getattr(m, "boundary_", None)
        if hit is not None:
            return hit if len(maps) == 1 else f"class {k}: {hit}"
    return None


def _cases_of(ho: HeldOutPredictions, cases: np.ndarray) -> HeldOutPredictions:
    """``ho``'s rows repeated by their whole-number counts (``cases``: the index of each case,
    :func:`probwrap._weights.case_rows`), each case of weight 1, in its row's fold; the cells
    that keep a choice's folds together are those the repeated rows would get (copies of a
    row: ``ho.case_cells``, counted in cases), not the table's success and failure rows of one
    cell."""
    copies = getattr(ho, "case_cells", None)
    if copies is not None:
        # per row, its cases' cell where the repeated rows are copies of a row, -1 where each
        # case is a cell of its own (:func:`probwrap._heldout.copied_case_cells`)
        copies = case_cells_of(copies, cases)
    out = dataclasses.replace(
        ho,
        y_index=np.asarray(ho.y_index)[cases],
        sample_weight=np.ones(cases.shape[0]),
        fold=np.asarray(ho.fold)[cases] if ho.n_folds else np.broadcast_to(
            np.array(-1, dtype=int), (cases.shape[0],)),
        cells=copies,
    )
    # folds given as `cv` (index pairs, a splitter) are folds of the table's rows: each case
    # joins its row's fold (``_selection_folds``)
    out.table_rows = (cases, np.asarray(ho.y_index))
    return out


def _drop_ineligible(names: list[str], drop: list[str], notes: dict, reason: str) -> list[str]:
    """``names`` without ``drop``, each dropped name noted with ``reason``; unchanged when that
    would leave ``auto`` without a candidate."""
    if len(drop) == len(names):
        return names
    for nm in drop:
        notes[nm] = reason
    return [nm for nm in names if nm not in drop]


class _AutoChoice:
    """The automatic choice of ``CalibrationWrapper``: scores every candidate map by
    cross-validated log loss and keeps the simplest one within one standard error of the best.
    Uses the wrapper's ``_fit_map``, ``_apply_map``, ``_one_vs_rest_scores`` and
    ``_make_splitter``."""

    def _candidate_names(self) -> list[str]:
        names = list(CALIBRATION_METHODS) if self.candidates is None else list(self.candidates)
        unknown = [c for c in names if c not in CALIBRATION_METHODS]
        if unknown or not names:
            raise ValueError(
                f"`candidates` must be a non-empty list drawn from {tuple(CALIBRATION_METHODS)}; "
                f"got {plain(self.candidates)!r}."
            )
        return names

    def _selection_rows(self, ho: HeldOutPredictions) -> np.ndarray | None:
        """Rows that score the candidates: all of them, or a class-stratified random sample of
        ``_SELECTION_MAX_ROWS`` rows when there are more (and the folds are not given as indices).
        The chosen map is always fitted on all rows."""
        y = ho.y_index
        # drawn among the rows of positive weight (since 5 December 2026): rows of weight 0
        # carry no information, and took places in the draw before
        w = np.asarray(ho.sample_weight)
        base = (np.flatnonzero(w > 0) if w.shape == y.shape and np.any(w > 0) and np.any(w == 0)
                else np.arange(y.shape[0]))
        n = base.shape[0]
        own_folds = ho.n_folds >= 2 or isinstance(
            self.cv if self.cv is not None else 5, numbers.Integral
        )
        if n <= _SELECTION_MAX_ROWS or not own_folds:
            return None
        rng = check_random_state(self.random_state)
        frac = _SELECTION_MAX_ROWS / n
        keep = []
        for k in np.unique(y[base]):
            rows = base[y[base] == k]
            take = min(rows.shape[0], max(int(round(frac * rows.shape[0])), 50))
            keep.append(rng.choice(rows, take, replace=False))
        return np.sort(np.concatenate(keep))

    def _selection_folds(self, ho: HeldOutPredictions, rows: np.ndarray | None,
                         weight: np.ndarray | None = None) -> np.ndarray:
        if ho.n_folds >= 2:
            return ho.fold if rows is None else ho.fold[rows]
        y = ho.y_index if rows is None else ho.y_index[rows]
        cv = self.cv if self.cv is not None else 5
        # rows of weight 0 take part in nothing fitted (docs/weights.md): the folds are drawn
        # among the weighted rows only, so that they are the folds of those rows alone (before,
        # the zero rows took places in the stratified draw and moved the choice against the
        # same rows dropped: breast cancer, 16 of 160 rows at 0, benchmarks/weight_scale_hunt.py)
        # (since 5 December 2026 a splitter object given as `cv` draws among them too, as
        # the cross-fitting does; folds given as index pairs keep the zero rows, which weigh
        # nothing in the maps fitted and scored there)
        drawn = isinstance(cv, numbers.Integral) or (
            hasattr(cv, "split") and getattr(ho, "table_rows", None) is None)
        weighted = None
        if (drawn and weight is not None
                and weight.shape[0] == y.shape[0] and np.any(weight > 0)
                and not np.all(weight > 0)):
            weighted = np.flatnonzero(weight > 0)
            y_all, y = y, y[weighted]
        if isinstance(cv, numbers.Integral):
            counts = np.bincount(y)
            smallest = int(counts[counts > 0].min())
            n_splits = int(min(cv, max(2, smallest)))
            # only a number of folds the user chose: the default 5 is lowered to the smallest
            # class's rows without a word (FewClassRowsWarning already names a tiny class; the
            # hunt29_sweep.py saw this warning on frozen models whose cv nobody had set)
            if self.cv is not None and int(cv) != 5 and n_splits < cv:
                warnings.warn(
                    f"CalibrationWrapper(method='auto'): `cv`={int(cv)} asks for more folds than "
                    f"the smallest class has rows ({smallest}); the candidate maps are scored on "
                    f"{n_splits} stratified folds instead.",
                    UserWarning,
                    stacklevel=4,
                )
            n_maps = 1 if len(self.classes_) == 2 else len(self.classes_)
            if y.shape[0] * n_maps >= _TWO_FOLD_CELLS:
                # each half holds > 10,000 rows (times maps): two folds estimate the losses
                # precisely enough, at two fifths of the cost of five
                n_splits = 2
            splitter = StratifiedKFold(n_splits, shuffle=True, random_state=self.random_state)
        else:
            if getattr(ho, "table_rows", None) is not None:
                # a count table's cases (``_cases_of``) with folds given for its rows (all
                # rows: no sample is drawn with folds given)
                y = ho.table_rows[1]
            splitter = self._make_splitter(y)
        fold = np.full(y.shape[0], -1)
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message="The least populated class")
            for i, (_, test) in enumerate(splitter.split(np.zeros((y.shape[0], 1)), y)):
                fold[test] = i
        if np.any(fold < 0):
            raise ValueError("`cv` must partition the rows to score the candidate maps.")
        if (not drawn and weight is not None and weight.shape[0] == y.shape[0]
                and np.any(weight > 0)):
            empty = [i for i in range(int(fold.max()) + 1) if not np.any(weight[fold == i] > 0)]
            if empty:
                raise ValueError(
                    f"Fold {empty[0] + 1} of {int(fold.max()) + 1} of `cv` holds only rows of "
                    "`sample_weight` 0: rows of weight 0 carry no information, so the candidate "
                    "maps could not be scored there. Give some of its rows a positive weight, "
                    "or pass folds that each hold weighted rows."
                )
        if weighted is not None:
            # the zero rows, spread over the folds in turn, weigh nothing in any of them
            full = np.arange(y_all.shape[0]) % int(fold.max() + 1)
            full[weighted] = fold
            fold, y = full, y_all
        if not isinstance(cv, numbers.Integral) and getattr(ho, "table_rows", None) is not None:
            fold = fold[ho.table_rows[0]]  # every case in its row's fold
        cells = getattr(ho, "cells", None)
        if cells is not None and isinstance(cv, numbers.Integral):
            # counts as a success and a failure row per group: keep a group's rows in one fold
            # (a map fitted on one of them alone is checked on the other's opposite label)
            kept = keep_cells_together(fold, cells if rows is None else cells[rows])
            if kept.max() >= 1:
                fold = kept
        return fold

    def _auto_names(self, n_rows: int, n_maps: int = 1) -> list[str]:
        """The candidates ``"auto"`` scores, in the order given (see ``candidates``)."""
        names = self._candidate_names()
        if self.candidates is None:
            names = [n for n in names if n not in _AUTO_EXCLUDED_BY_DEFAULT]
            if n_maps == 1:  # binary
                names = [n for n in names if n not in _AUTO_MULTICLASS_ONLY]
            else:
                names = [n for n in names if n not in _AUTO_BINARY_ONLY]
        if getattr(self, "response_", "predict_proba") == "decision_function":
            # decision values are not probabilities: there are none of the model's own to keep
            names = [n for n in names if n != "identity"] or names
        if self.candidates is None and n_rows * n_maps >= _VENN_ABERS_AUTO_MAX_ROWS:
            # Venn-Abers costs one to two orders of magnitude more to cross-validate than the
            # other maps (one hull-bridging search per insertion point and label, per class
            # one-vs-rest), while beyond a few hundred rows per class its merged probability
            # agrees with the smoothed isotonic fit to within about the 1/n of the smoothing.
            # By default it is a candidate only on small sets (pass `candidates` to include it).
            names = [n for n in names if n != "venn_abers"]
        return names

    def _simplicity_order(self, names: list[str], platt_first: bool = False,
                          vector_first: bool = False) -> list[str]:
        """Candidates from the fewest to the most parameters; on ties the order given, except
        that Venn-Abers comes before isotonic regression (it is only a default candidate on
        small sets, where its interval regularises more than the smoothed targets do). With
        ``platt_first``, Platt scaling comes just before temperature scaling (see
        ``_PLATT_FIRST_CROSSFIT_MIN_ROWS``); with ``vector_first``, vector scaling does (see
        ``_VECTOR_FIRST_CROSSFIT_MIN_ROWS``)."""
        first = CALIBRATION_METHODS["temperature"]().complexity - 0.5
        moved = {"platt"} if platt_first else set()
        if vector_first:
            moved.add("vector_scaling")

        def key(nm: str) -> tuple[float, int, int]:
            c = first if nm in moved else CALIBRATION_METHODS[nm]().complexity
            return (c, nm != "venn_abers", names.index(nm))

        return sorted(names, key=key)

    def _fallback_name(self, names: list[str], binary: bool) -> str:
        """The most regularised candidate: Platt scaling with smoothed targets (binary) or
        temperature scaling with its weak prior (multiclass) when listed, else the candidate
        with the fewest parameters."""
        for preferred in (("platt", "temperature") if binary else ("temperature", "platt")):
            if preferred in names:
                return preferred
        return min(names, key=lambda nm: (CALIBRATION_METHODS[nm]().complexity, names.index(nm)))

    def _score_fold(self, name, part, f, state) -> str | None:
        """Fit one candidate on the rows outside fold ``f`` and score the rows inside it.

        ``part`` holds the fold's rows, split once for all candidates: ``(train, test, mask)``
        with ``train = (scores, ovr, y, w)`` (``ovr`` the one-vs-rest scores or None),
        ``test = (scores, ovr, y)`` and ``mask`` the fold's rows among all. Fills
        ``state["per_row"]`` (log loss per row); warnings raised by the fit are collected in
        ``state["seen"]`` (not shown one by one) and a fit that reaches a boundary of its
        parameter space is recorded in ``state["boundary"]``. Returns the error text when the
        fit fails, else None.
        """
        (s_tr, ovr_tr, y_tr, w_tr), (s_te, ovr_te, y_te), mask = part
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                # one-vs-rest Platt and beta fits and vector scaling start from the previous
                # fold's parameters
                cal = self._fit_map(
                    CALIBRATION_METHODS[name](), s_tr, y_tr, w_tr, ovr_tr, state.get("last")
                )
            except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
                return f"failed in fold {f}: {exc}"
        for item in caught:
            if issubclass(item.category, WeightScaleWarning):
                continue  # the wrapper has already put the weights on the count scale
            text = str(item.message)
            if text not in state["seen"]:
                state["seen"].append(text)
        state["last"] = cal
        if state["boundary"] is None:
            hit = _boundary_of(cal)
            if hit is not None:
                state["boundary"] = f"fold {f}: {hit}"
        q = self._apply_map(cal, s_te, ovr_te)
        state["per_row"][mask] = -np.log(
            np.maximum(q[np.arange(q.shape[0]), y_te], _LOG_LOSS_FLOOR)
        )
        return None

    def _fold_losses(self, names, scores, ovr, y, w, fold_masks, notes):
        """Out-of-fold log loss per row of every candidate that could be scored.

        Candidates are scored fold by fold. After the first fold, a candidate whose loss on
        that fold's rows is more than :data:`_RACE_SE` paired standard errors above the best
        eligible candidate's is left out of the remaining folds (it cannot plausibly come back
        within one standard error); ``notes`` says so. If the candidate it was left out against
        is not eligible in the end (its fit reached a boundary in a later fold, or failed), the
        candidate is scored on every fold after all: a race lost to a map that cannot be chosen
        is no evidence against it (scikit-learn's digits 0/1/2/7, a frozen logistic regression,
        301 rows: temperature and Platt scaling were left out against vector scaling, which
        then separated the classes in the second fold, and binning, eight times vector
        scaling's cross-validated loss, was kept at 2.6x the test log loss of scikit-learn's
        sigmoid; benchmarks/auto_small_separated.py, docs/evidence/small_data_log.md, "Two
        large multiclass misses on wine and digits"). Returns ``{name: (per_row, boundary)}``.
        """
        raced: dict[str, str] = {}  # candidate left out after the first fold -> the map it lost to
        out = self._fold_losses_raced(names, scores, ovr, y, w, fold_masks, notes, raced)
        while True:
            kept = {nm for nm, (_, boundary) in out.items() if boundary is None}
            resume = [nm for nm in names if nm in raced and raced[nm] not in kept]
            if not resume or not _RESUME_RACED:
                return {nm: out[nm] for nm in names if nm in out}  # in the order given
            for nm in resume:
                del raced[nm]
                notes.pop(nm, None)
            out.update(self._fold_losses_raced(resume, scores, ovr, y, w, fold_masks, notes,
                                               raced))

    def _fold_losses_raced(self, names, scores, ovr, y, w, fold_masks, notes, raced):
        """One pass of :meth:`_fold_losses` over ``names``; candidates left out after the first
        fold are recorded in ``raced`` with the name of the map they were left out against."""
        states = {
            nm: {"per_row": np.empty(y.shape[0]), "boundary": None, "seen": []} for nm in names
        }
        active = list(names)
        for i, (f, test) in enumerate(fold_masks):
            train = ~test
            part = (
                (scores[train], None if ovr is None else ovr[train], y[train], w[train]),
                (scores[test], None if ovr is None else ovr[test], y[test]),
                test,
            )  # the fold's rows, copied once for all candidates
            for name in list(active):
                error = self._score_fold(name, part, f, states[name])
                if error is not None:
                    notes[name] = error
                    active.remove(name)
                    del states[name]
            if i == 0 and len(fold_masks) > 1 and len(active) > 1:
                wt = w[test]
                fine = [nm for nm in active if states[nm]["boundary"] is None]
                if not fine or wt.sum() <= 0:
                    continue
                for nm in [a for a in active if a not in fine]:
                    # not eligible whatever the other folds give: not scored further
                    notes[nm] = f"not eligible: the fit reached a boundary ({states[nm]['boundary']})"
                    active.remove(nm)
                    del states[nm]
                wn = wt / wt.sum()
                n_eff = float(wt.sum() ** 2 / (wt @ wt))
                loss = {nm: states[nm]["per_row"][test] for nm in active}
                best = min(fine, key=lambda nm: float(wn @ loss[nm]))
                for nm in [a for a in active if a != best]:
                    d = loss[nm] - loss[best]
                    dbar = float(wn @ d)
                    se = float(np.sqrt(max(float(wn @ (d - dbar) ** 2), 0.0) / max(n_eff - 1.0, 1.0)))
                    if dbar > _RACE_SE * se and dbar > 0:
                        notes[nm] = (
                            f"left out after fold {f}: log loss {dbar:.4g} above {plain(best)!r} there, "
                            f"{dbar / se if se > 0 else np.inf:.1f} standard errors"
                        )
                        raced[nm] = best
                        active.remove(nm)
                        del states[nm]
        out = {}
        for name in active:
            st = states[name]
            if st["boundary"] is not None:
                notes[name] = f"not eligible: the fit reached a boundary ({st['boundary']})"
            elif st["seen"]:
                notes[name] = "warnings in the fold fits: " + " | ".join(st["seen"])
            out[name] = (st["per_row"], st["boundary"])
        return out

    @staticmethod
    def _class_share(y01: np.ndarray, w: np.ndarray) -> float:
        """The intercept-only map's probability of the positive class: the weighted mean of
        Platt's (1999) smoothed targets on rows ``y01`` (1 for the positive class), weights on
        the count scale, as ``PlattMap`` holds a level (``PlattMap._hold_level``)."""
        wc = count_weights(np.asarray(w, dtype=float))[0]
        t = smoothed_binary_targets(np.asarray(y01, dtype=float), wc)
        return float(np.clip((wc @ t) / wc.sum(), 1e-300, 1.0 - 1e-16))

    def _class_shares_losses(self, y, w, fold_masks) -> np.ndarray:
        """Out-of-fold log loss per row of the class shares fitted on each fold's other rows."""
        out = np.empty(y.shape[0])
        for _, test in fold_masks:
            share = self._class_share(y[~test] == 1, w[~test])
            yt = y[test] == 1
            out[test] = -np.where(yt, np.log(share), np.log1p(-share))
        return out

    @staticmethod
    def _class_shares_beat_every_map(margins: dict[str, tuple[float, float]]) -> bool:
        """True when, for every eligible candidate, ``margins[name] = (d, se)`` has its
        cross-validated log loss above the class shares' by ``d`` > ``se``, the standard error
        of the paired per-row difference: the one-standard-error rule read the other way (a
        map is kept unless the constant is better beyond the folds' noise)."""
        k = _CLASS_SHARES_MARGIN_SE
        return bool(margins) and all(d > k * se for d, se in margins.values())

    def _choose(self, ho: HeldOutPredictions, scores: np.ndarray, w: np.ndarray):
        """Pick a map by cross-validated log loss (one-standard-error rule).

        Returns ``(name, scores, notes)``: ``scores[name] = (loss, se)`` for every candidate
        scored, ``notes[name]`` the reason a candidate was not eligible or could not be scored.
        """
        # (not for a cross-fitted model whose folds kept the table's cells together: its
        # held-out rows are predicted cell by cell, and the cells, not their cases, are the
        # units the folds hold out; nor where the caller says so, see
        # _cost_policy_rules.recalibrated_plugin_cutoff)
        leave_cells_out = ho.n_folds > 0 and getattr(ho, "cells", None) is not None
        cases = (None if getattr(ho, "from_tally", False) or leave_cells_out
                 or not getattr(self, "_count_table_cases", True) else case_rows(w))
        if ((getattr(ho, "table_row", None) is not None or getattr(ho, "tally_cases", False))
                and getattr(self, "_count_table_cases", True)):
            # a count table cross-fitted by its cases: the held-out rows are
            # (row, fold) pieces weighted by the cases held out there, whole numbers even when
            # they happen to share a factor; or a Dask or Spark tally of a count table's rows,
            # whose (bin, class) rows are weighted by their cases
            cases = np.repeat(np.arange(w.shape[0]), np.round(w).astype(np.int64))
        if cases is not None:
            # a count table (whole-number weights, some above 1): the choice scores its cases
            # one by one, as it scores the rows repeated by their counts (np.repeat): the same
            # folds, rows per class, row bounds and standard errors (counted by Kish's size of
            # the weights until 5 December 2026, so a table and its repeated rows could get
            # different maps; docs/aggregated_outcomes.md, "Count tables and choices")
            ho = _cases_of(ho, cases)
            scores, w = scores[cases], np.ones(cases.shape[0])
        else:
            # any other weights are relative for the choice: the candidates are fitted on them
            # rescaled to Kish's size, so their scale moves no choice (since 5 December 2026;
            # before, weights summing to at least the rows were counted as they stood, and x1,000
            # chose
            # another map on wine and iris)
            w = choice_weights(w, ho)
        y = ho.y_index
        binary = scores.ndim == 1
        names = self._auto_names(y.shape[0], 1 if binary else scores.shape[1])
        notes: dict[str, str] = {}
        if not binary and self.candidates is None:
            for nm in _AUTO_BINARY_ONLY:
                notes[nm] = (
                    "not a default candidate for multiclass models: one-vs-rest beta costs about "
                    "a quarter of auto's time and was rarely chosen, and then by little, on the "
                    "benchmarks' multiclass sets (docs/calibration.md, Speed); name it in "
                    "`candidates` to score it"
                )
        present = np.bincount(y[w > 0], minlength=len(self.classes_))
        present = present[present > 0]
        if present.shape[0] < 2 or present.min() < 2:
            fallback = self._fallback_name(names, binary)
            reason = (
                f"a class has only {int(present.min())} held-out row(s), too few to score "
                f"candidate maps by cross-validation; using {plain(fallback)!r}, "
                "the most regularised map"
            )
            warnings.warn(f"CalibrationWrapper(method='auto'): {reason}.", UserWarning, stacklevel=3)
            notes[fallback] = "chosen without cross-validation: " + reason
            return fallback, {}, notes
        smallest = int(present.min())
        if smallest < _ORDER_MAPS_MIN_CLASS_ROWS:
            names = _drop_ineligible(
                names, [nm for nm in names if nm in _ORDER_BASED_NAMES], notes,
                f"not eligible: the smallest class has {smallest} held-out row(s), fewer than "
                f"the {_ORDER_MAPS_MIN_CLASS_ROWS} an order-based map needs for a "
                "cross-validated score to be evidence",
            )
        n_rows = int(np.count_nonzero(w > 0))
        if (self.candidates is None and ho.n_folds > 0
                and n_rows <= _CROSSFIT_ORDER_MAPS_MAX_ROWS):
            names = _drop_ineligible(
                names, [nm for nm in names if nm in _ORDER_BASED_NAMES], notes,
                f"not eligible by default: the model is cross-fitted on {n_rows} row(s), at "
                f"most {_CROSSFIT_ORDER_MAPS_MAX_ROWS}, so the model refitted on all rows "
                "scores differently from the fold models the map is fitted on, and a step "
                "map passes that difference into its probabilities; name it in `candidates` "
                "to score it",
            )
        if not binary and smallest < _ONE_VS_REST_MIN_CLASS_ROWS:
            names = _drop_ineligible(
                names, [nm for nm in names if not CALIBRATION_METHODS[nm].supports_multiclass],
                notes,
                f"not eligible: the smallest class has {smallest} held-out row(s), fewer than "
                f"the {_ONE_VS_REST_MIN_CLASS_ROWS} a one-vs-rest map needs for its "
                "cross-validated score to be evidence",
            )
        rows = self._selection_rows(ho)
        if rows is not None:
            scores, y, w = scores[rows], y[rows], w[rows]
            notes["auto"] = (
                f"candidates scored on a class-stratified sample of {rows.shape[0]} of "
                f"{ho.y_index.shape[0]} rows; the chosen map is fitted on all rows"
            )
        fold = self._selection_folds(ho, rows, w)
        ovr = None
        if binary:
            # Shared sorted rows: every fold's part of the rows is then already in score order,
            # so the order-based maps' sorts are nearly free. Losses are per row, so the order
            # of the rows does not matter for the choice.
            order = np.argsort(scores, kind="stable")
            scores, y, w, fold = scores[order], y[order], w[order], fold[order]
        else:
            ovr = self._one_vs_rest_scores(scores)  # once, not once per fold and candidate
        fold_masks = [(f, fold == f) for f in np.unique(fold)]
        losses: dict[str, np.ndarray] = {}
        eligible: list[str] = []
        for name, (per_row, boundary) in self._fold_losses(
            names, scores, ovr, y, w, fold_masks, notes
        ).items():
            losses[name] = per_row
            if boundary is None:
                eligible.append(name)
        failed = {nm: txt for nm, txt in notes.items() if txt.startswith("failed in fold")}
        if failed and losses:
            warnings.warn(
                "CalibrationWrapper(method='auto'): candidate(s) "
                + "; ".join(f"{plain(nm)!r} {txt}" for nm, txt in failed.items())
                + "; they are left out of the choice (see method_notes_).",
                UserWarning,
                stacklevel=3,
            )
        if losses and binary:
            # the class shares, scored on the same folds (a reference, see CLASS_SHARES)
            losses[CLASS_SHARES] = self._class_shares_losses(y, w, fold_masks)
        elif losses and present.shape[0] == scores.shape[1]:
            losses[CLASS_SHARES] = class_shares_losses(y, w, fold_masks, scores.shape[1])
        elif losses:
            notes[CLASS_SHARES] = ABSENT_CLASS_NOTE
        wn = w / w.sum()
        # Kish's effective sample size: the standard error does not depend on the weights' scale
        n_eff = float(w.sum() ** 2 / (w @ w))
        means = {name: float(wn @ loss) for name, loss in losses.items()}
        scores_out: dict[str, tuple[float, float]] = {}

        def paired_se(a: np.ndarray, b: np.ndarray) -> float:
            d = a - b
            dbar = float(wn @ d)
            var = float(wn @ (d - dbar) ** 2) * n_eff / max(n_eff - 1.0, 1.0)
            return float(np.sqrt(var / n_eff))

        if eligible:
            best = min(eligible, key=means.get)
            for name, loss in losses.items():
                scores_out[name] = (means[name], paired_se(loss, losses[best]))
        else:
            scores_out = {name: (means[name], float("nan")) for name in losses}
        if CLASS_SHARES in losses and eligible:
            margins = {nm: (means[nm] - means[CLASS_SHARES],
                            paired_se(losses[nm], losses[CLASS_SHARES])) for nm in eligible}
            if self._class_shares_beat_every_map(margins):
                if ho.n_folds == 0:
                    # a frozen model: the rows scored are its own scores, which predict
                    return self._choose_class_shares(margins, means, y, w, scores_out, notes)
                # cross-fitted: the fold models failed, but the model refitted on all rows
                # predicts and may rank (measured: docs/calibration.md); the map is kept, warned
                self._warn_fold_models_rank_nothing(margins, means, notes)
        minority = (float(np.bincount(y, weights=w, minlength=2).min() / w.sum())
                    if binary else 0.5)
        platt_first = binary and (
            (ho.n_folds > 0 and n_rows >= _PLATT_FIRST_CROSSFIT_MIN_ROWS)
            or minority < _PLATT_FIRST_MAX_MINORITY_SHARE
        )
        vector_first = (not binary and ho.n_folds > 0
                        and n_rows >= _VECTOR_FIRST_CROSSFIT_MIN_ROWS)
        platt_beyond = False  # Platt scaling tried and passed over for its score
        decreasing_passed = False  # a decreasing Platt map passed over for a later map
        for name in self._simplicity_order(eligible, platt_first, vector_first):
            loss, se = scores_out[name]
            if (name == "temperature" and name != best
                    and (self._temperature_short_of_shares(means, scores, y, w, notes)
                         or (ho.n_folds == 0
                             and self._frozen_temperature_above_shares(means, scores, notes)))):
                continue
            if (name == "temperature" and binary and name != best and platt_beyond
                    and _PASS_OVER_TEMPERATURE_AFTER_PLATT):
                text = (
                    "passed over by the one-standard-error rule: temperature scaling is Platt "
                    "scaling without its intercept, and Platt scaling, tried before it, scored "
                    f"{means['platt']:.4g}, beyond a standard error "
                    f"({scores_out['platt'][1]:.3g}) of the best map ({plain(best)!r}, "
                    f"{means[best]:.4g})"
                )
                notes[name] = text if name not in notes else notes[name] + "; " + text
                continue
            platt_beyond = platt_beyond or (name == "platt" and loss - means[best] > se)
            if (name == "platt" and binary and ho.n_folds == 0 and loss - means[best] <= se
                    and self._platt_decreasing_by_little(eligible, losses, means, paired_se,
                                                         scores, y, w, notes)):
                decreasing_passed = True
                continue
            if loss - means[best] <= se:
                if (name == "temperature" and not binary and name != best
                        and _PASS_OVER_TEMPERATURE_OFF_SHARES_MULTICLASS
                        and self._temperature_off_shares(scores, y, w, notes, best, means)):
                    continue  # to the next map in order (vector scaling)
                if (name == "temperature" and binary and name != best
                        and (_PASS_OVER_TEMPERATURE_OFF_BASE_RATE or (
                            "platt" in eligible and scores_out["platt"][0] < loss
                            and scores_out["platt"][0] - means[best] <= scores_out["platt"][1]))
                        and self._temperature_off_shares(scores, y, w, notes, best, means)):
                    continue  # to the next map in order: Platt scaling when within an error
                if (name == "temperature" and binary and ho.n_folds == 0
                        and not decreasing_passed
                        and ("platt" in eligible
                             or notes.get("platt", "").startswith("left out after fold"))
                        and self._platt_for_few_scores(scores, y, w, notes)):
                    return "platt", scores_out, notes
                if (binary and ho.n_folds == 0 and name in ("temperature", "beta")
                        and n_rows < _PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS
                        and "platt" in eligible and not decreasing_passed
                        and self._platt_within_fold_spread(name, losses, w, fold_masks, means,
                                                           notes, scores, y)):
                    return "platt", scores_out, notes
                return name, scores_out, notes
        if decreasing_passed:
            # no later map was kept after all: Platt's map, within a standard error, stays
            notes["platt"] += "; kept all the same: no later map in the order was kept"
            return "platt", scores_out, notes
        fallback = self._fallback_name(names, binary)
        reason = (
            "no candidate map could be scored and used: "
            + "; ".join(f"{nm}: {txt}" for nm, txt in notes.items())
            + f"; using {plain(fallback)!r}, the most regularised map"
        )
        warnings.warn(f"CalibrationWrapper(method='auto'): {reason}.", UserWarning, stacklevel=3)
        notes.setdefault(fallback, "chosen as the fallback: no candidate was eligible")
        return fallback, scores_out, notes

    def _temperature_off_shares(self, scores, y, w, notes, best, means) -> bool:
        """True (and noted) when temperature scaling, fitted on all held-out rows, leaves the
        classes' mean probabilities off their shares: with two classes (binary ``scores``) the
        mean probability of the second class off its base rate by more than ``_BASE_RATE_SE``
        standard errors (see ``_PASS_OVER_TEMPERATURE_OFF_BASE_RATE``); with more (``scores``
        rows by classes) by more than ``_BASE_RATE_SE`` standard errors in mean square over the
        classes (see ``_PASS_OVER_TEMPERATURE_OFF_SHARES_MULTICLASS``). ``y`` are the class
        indices, ``w`` the weights, ``best`` the map with the lowest cross-validated log loss
        ``means[best]``. The standard errors use weights normalised to sum one, so the scale of
        the weights does not change the answer."""
        if not np.isfinite(_BASE_RATE_SE):
            return False
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                cal = self._fit_map(TemperatureMap(), scores, y, w)
            except (ValueError, FloatingPointError, np.linalg.LinAlgError):
                return False
            q = self._apply_map(cal, scores)
        wn = w / w.sum()
        t = np.zeros_like(q)
        t[np.arange(y.shape[0]), np.asarray(y, dtype=np.intp)] = 1.0
        gap = wn @ (t - q)
        se = np.sqrt((wn**2) @ (q * (1.0 - q)))
        lead = (
            f"passed over by the one-standard-error rule for the next map in order "
            f"({plain(best)!r} scored lower on the folds: {means[best]:.4g} against "
            f"{means['temperature']:.4g}): fitted on all held-out rows (temperature "
            f"{float(cal.temperature_):.3g}, "
        )
        if scores.ndim == 1:
            if not se[1] > 0 or abs(gap[1]) <= _BASE_RATE_SE * se[1]:
                return False
            text = lead + (
                f"no intercept) the mean probability of class {plain(self.classes_[1])!r} is "
                f"{float(wn @ q[:, 1]):.3g} against the base rate {float(wn @ t[:, 1]):.3g}, "
                f"{abs(gap[1]) / se[1]:.2f} standard errors off"
            )
        else:
            if not np.all(se > 0):
                return False
            z2 = float(np.mean((gap / se) ** 2))
            if z2 <= _BASE_RATE_SE**2:
                return False
            k = int(np.argmax(np.abs(gap) / se))
            text = lead + (
                f"no per-class intercept) the classes' mean probabilities are off their shares "
                f"by {np.sqrt(z2):.2f} standard errors in mean square (class "
                f"{plain(self.classes_[k])!r}: {float(wn @ q[:, k]):.3g} against "
                f"{float(wn @ t[:, k]):.3g})"
            )
        notes["temperature"] = text if "temperature" not in notes else (
            notes["temperature"] + "; " + text)
        return True

    def _platt_slope(self, scores, y, w) -> float | None:
        """Slope of Platt's map fitted on all the binary rows ``auto`` scored (a trial fit whose
        warnings are not the user's: the map itself is fitted again, with its warnings, if it is
        chosen), or None when it cannot be fitted."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                platt = self._fit_map(PlattMap(), scores, y, w)
            except (ValueError, FloatingPointError, np.linalg.LinAlgError):
                return None
        return float(getattr(platt, "slope_", 0.0))

    def _platt_for_few_scores(self, scores, y, w, notes) -> bool:
        """True (and noted) when a frozen model's binary ``scores`` take at most
        ``_PLATT_FOR_FROZEN_MAX_DISTINCT`` distinct values on the rows of weight > 0 and Platt's
        map fitted on all of them does not decrease: see ``_PLATT_FOR_FROZEN_MAX_DISTINCT``."""
        distinct = int(np.unique(scores[w > 0]).shape[0])
        if distinct > _PLATT_FOR_FROZEN_MAX_DISTINCT:
            return False
        slope = self._platt_slope(scores, y, w)
        if slope is None or not slope >= 0.0:
            return False  # never trade a map for a decreasing one (or one that failed to fit)
        text = (
            f"kept by the one-standard-error rule but replaced by 'platt': the frozen model's "
            f"scores take {distinct} distinct value(s) on the held-out rows, so the best "
            "non-decreasing map is each value's smoothed share, which Platt scaling's two "
            "parameters reach and a temperature (no intercept) does not"
        )
        notes["temperature"] = text if "temperature" not in notes else (
            notes["temperature"] + "; " + text)
        return True

    def _platt_within_fold_spread(self, name, losses, w, fold_masks, means, notes,
                                  scores, y) -> bool:
        """True (and noted) when the map ``name`` the one-standard-error rule kept does not beat
        Platt scaling on the folds by more than the standard error of the per-fold mean
        differences: see ``_PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS``."""
        if len(fold_masks) < 2:
            return False
        d = losses[name] - losses["platt"]
        per_fold = np.array([float(w[m] @ d[m] / w[m].sum()) for _, m in fold_masks
                             if w[m].sum() > 0])
        if per_fold.shape[0] < 2:
            return False
        se = float(per_fold.std(ddof=1) / np.sqrt(per_fold.shape[0]))
        margin = means["platt"] - means[name]
        if margin > se:
            return False
        slope = self._platt_slope(scores, y, w)
        if slope is None or not slope >= 0.0:
            return False  # never trade a map for a decreasing one (or one that failed to fit)
        text = (
            f"kept by the one-standard-error rule but replaced by 'platt': on {len(per_fold)} "
            f"folds of fewer than {_PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS} held-out rows of a "
            f"frozen model its cross-validated log loss {means[name]:.4g} is not lower than "
            f"Platt scaling's {means['platt']:.4g} by more than the standard error of their "
            f"per-fold differences ({se:.3g})"
        )
        notes[name] = text if name not in notes else notes[name] + "; " + text
        return True

    def _platt_decreasing_by_little(self, eligible, losses, means, paired_se, scores, y, w,
                                    notes) -> bool:
        """True (and noted) when the one-standard-error rule passes over Platt scaling: see
        ``_PASS_OVER_DECREASING_PLATT``. ``losses`` and ``means`` are the candidates' per-row
        and mean cross-validated log losses, ``paired_se(a, b)`` the standard error of a paired
        difference; ``scores``, ``y`` and ``w`` the binary rows ``auto`` scored."""
        others = [nm for nm in eligible if nm != "platt"]
        if not (_PASS_OVER_DECREASING_PLATT and scores.ndim == 1 and others):
            return False
        slope = self._platt_slope(scores, y, w)
        if slope is None or not slope < 0.0:
            return False
        margin = {nm: (means[nm] - means["platt"], paired_se(losses[nm], losses["platt"]))
                  for nm in others}
        close = [nm for nm, (d, se) in margin.items() if d <= se]
        if not close:
            return False
        nm = min(close, key=means.get)
        text = (
            f"passed over by the one-standard-error rule: fitted on all held-out rows its slope "
            f"is {slope:.3g} (the map decreases: higher scores get lower probabilities), and its "
            f"cross-validated log loss {means['platt']:.4g} is not lower than the non-decreasing "
            f"{plain(nm)!r}'s {means[nm]:.4g} by more than the standard error of the difference "
            f"({margin[nm][1]:.3g})"
        )
        notes["platt"] = text if "platt" not in notes else notes["platt"] + "; " + text
        return True

    @staticmethod
    def _frozen_temperature_above_shares(means, scores, notes) -> bool:
        """True (and noted) when the one-standard-error rule passes over a frozen model's
        temperature for scoring above the class shares: see
        ``_PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES``."""
        if not (_PASS_OVER_FROZEN_TEMPERATURE_ABOVE_SHARES and scores.ndim == 1
                and CLASS_SHARES in means and means["temperature"] > means[CLASS_SHARES]):
            return False
        text = (
            f"passed over by the one-standard-error rule: cross-validated log loss "
            f"{means['temperature']:.4g}, above the class shares' {means[CLASS_SHARES]:.4g}, "
            "on a frozen model's scores (a map without an intercept that the constant beats)"
        )
        notes["temperature"] = text if "temperature" not in notes else (
            notes["temperature"] + "; " + text)
        return True

    def _temperature_short_of_shares(self, means, scores, y, w, notes) -> bool:
        """True (and noted) when the one-standard-error rule passes over temperature scaling:
        see ``_PASS_OVER_TEMPERATURE_BELOW_SHARES``. ``scores`` are the binary held-out
        log-odds, ``y`` the class indices and ``w`` the weights of the rows ``auto`` scored."""
        if not (_PASS_OVER_TEMPERATURE_BELOW_SHARES and scores.ndim == 1
                and CLASS_SHARES in means and means["temperature"] > means[CLASS_SHARES]):
            return False
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                cal = self._fit_map(TemperatureMap(), scores, y, w)
            except (ValueError, FloatingPointError, np.linalg.LinAlgError):
                return False
            q = self._apply_map(cal, scores)[:, 1][w > 0]
        share = self._class_share(y == 1, w)
        if not float(cal.temperature_) > 1.0 or q.min() <= share <= q.max():
            return False  # sharpening, or probabilities on both sides of the share
        side = "above" if q.min() > share else "below"
        text = (
            f"passed over by the one-standard-error rule: cross-validated log loss "
            f"{means['temperature']:.4g}, above the class shares' {means[CLASS_SHARES]:.4g}, and "
            f"fitted on all held-out rows (temperature {float(cal.temperature_):.3g}) every "
            f"row's probability of class {plain(self.classes_[1])!r} is {side} the class share "
            f"{share:.3g}"
        )
        notes["temperature"] = text if "temperature" not in notes else (
            notes["temperature"] + "; " + text)
        return True

    @staticmethod
    def _no_ranking_reason(margins, means) -> str:
        best = min(margins, key=means.get)
        d, se = margins[best]
        return (
            "every candidate map scores a cross-validated log loss above the class shares' "
            f"{means[CLASS_SHARES]:.3g} by more than the standard error of the difference "
            f"(the lowest, {plain(best)!r}, {means[best]:.3g}: {d:.3g} above, standard error "
            f"{se:.3g})"
        )

    def _warn_fold_models_rank_nothing(self, margins, means, notes) -> None:
        """Cross-fitted: the class shares beat every map on the fold models' held-out scores.
        The map is still chosen among the candidates (the refitted model predicts); warns, and
        says so in ``method_notes_["class_shares"]``."""
        reason = (
            self._no_ranking_reason(margins, means)
            + ", so the fold models' held-out scores carry no ranking that holds from fold to "
            "fold on these rows; the map is still chosen among the candidates, for the model "
            "refitted on all rows, whose ranking these rows cannot check"
        )
        notes[CLASS_SHARES] = "not used: " + reason
        warnings.warn(
            f"CalibrationWrapper(method='auto'): {reason}. Check the model on more labelled "
            "rows (or pass a model fitted elsewhere inside sklearn.frozen.FrozenEstimator).",
            UserWarning,
            stacklevel=4,
        )

    def _choose_class_shares(self, margins, means, y, w, scores_out, notes):
        """``_choose``'s return when the class shares beat every eligible map on a frozen
        model's scores: warns, and notes the margins in ``method_notes_["class_shares"]``."""
        if len(self.classes_) == 2:
            given = (f"probability {self._class_share(y == 1, w):.3g} for class "
                     f"{plain(self.classes_[1])!r}")
        else:
            shares = smoothed_class_shares(y, w, len(self.classes_))
            given = "probabilities " + ", ".join(
                f"{s:.3g} for {plain(c)!r}" for c, s in zip(self.classes_, shares, strict=True))
        reason = (
            self._no_ranking_reason(margins, means)
            + ", so the model's scores carry no ranking that holds from fold to fold on these "
            "rows"
        )
        notes[CLASS_SHARES] = "chosen: " + reason
        warnings.warn(
            f"CalibrationWrapper(method='auto'): {reason}; every row gets the class share, "
            f"{given}. Check the model "
            "(and its folds) on more labelled rows.",
            UserWarning,
            stacklevel=4,
        )
        return CLASS_SHARES, scores_out, notes
