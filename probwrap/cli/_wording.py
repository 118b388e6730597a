"""Library warnings in the words of the command line.

The verbs pass the library's warnings through to stderr. Some name what only a Python caller
can change (``clip``, ``prior_strength``, ``max_iter``, ``smooth_targets``), a function's
docstring, or arguments by their Python names (``sample_weight``, ``cv``, ``y_prob``); a
command-line user can act on none of these. :func:`cli_wording` rewrites them to the flags the
user has, or says that no flag changes it.
"""

from __future__ import annotations

import re

__all__ = ["cli_wording"]

_WEIGHTS = "the row weights (--weight-column, or the late-label weights)"

#: (pattern, replacement), applied in order
_RULES: list[tuple[re.Pattern[str], str]] = [(re.compile(a), b) for a, b in [
    # metrics that floor probabilities at 0 and 1 (log loss, calibration slope)
    (r"give the observed class a probability below `clip`; they were moved to (\S+) "
     r"\(see the `clip` note in the docstring\)\.",
     r"give the observed class a probability below \1 (a score of 0 for what happened would "
     r"make the log loss infinite); they were moved to \1. Scores of exactly 0 or 1 claim a "
     r"certainty the rows rarely bear out: `probwrap calibrate fit` maps them inside (0, 1)."),
    (r"of `y_prob` lie closer than `clip` to 0 or 1; they were moved to (\S+) "
     r"\(see the `clip` note in the docstring\)\.",
     r"of the scores lie closer than \1 to 0 or 1, where their log-odds are infinite; they "
     r"were moved to \1 from the edge. Scores of exactly 0 or 1 claim a certainty the rows "
     r"rarely bear out: `probwrap calibrate fit` maps them inside (0, 1)."),
    (r"\s*\(see the `clip` note in the docstring\)", ""),
    (r"The classes in `y_true` do not overlap in (?:logit\(`y_prob`\)|`log_odds`)",
     "The two labels do not overlap in the log-odds of the scores"),
    (r"Every forecast in `log_odds` is the same", "Every score is the same"),
    # prior shift: settings the command line does not expose
    (r"The reported prior is shrunk toward the source prior \(prior_strength\);",
     "The reported prevalence is shrunk toward the source prevalence (by the estimator's "
     "default pseudo-rows; no option changes it);"),
    (r"within max_iter=(\d+) (?:iterations|corrections)", r"within \1 iterations"),
    # prior shift: the command line says "prevalence" (its verb, options and output) where the
    # library says "prior"; "prior shift" itself stays, as the name of the assumption
    (r"\bPrior estimation did not converge", "The prevalence estimate did not converge"),
    (r"cannot identify the class priors", "cannot identify the prevalence"),
    (r"\b([Tt])he source prior is returned", r"\1he source prevalence is returned"),
    (r"use method='em' with", "use --method em with"),
    (r"No class prior is consistent with", "No prevalence is consistent with"),
    (r"The prior-shift assumption probably fails",
     "The prior-shift assumption (only the prevalence changed) probably fails"),
    (r"the single least-rejected prior\b", "the single least-rejected prevalence"),
    (r"the prior estimate is very uncertain", "the prevalence estimate is very uncertain"),
    (r"their estimated prior rests", "their estimated share rests"),
    (r"The interval of the class priors rests on", "The interval of the prevalence rests on"),
    (r"every estimate of its prior fragile", "every estimate of its share fragile"),
    (r"to estimate its prior\.", "to estimate its share."),
    (r"raise `max_iter`, or use `prior_strength`\.|Raise `max_iter`, or use `prior_strength`\.",
     "no option changes the iterations: read the interval rather than the point estimate."),
    # weights
    (r"every `sample_weight` is a multiple of", "every row weight (--weight-column) is a "
     "multiple of"),
    (r"`sample_weight` sums to less than the number of rows(?: it weights)?, so (?:it|the "
     r"weights) cannot be row frequencies",
     _WEIGHTS + " sum to less than the number of rows, so they cannot be row frequencies"),
    (r"(cannot be row frequencies); it was rescaled", r"\1; they were rescaled"),
    (r"`sample_weight`", _WEIGHTS),
    (r"(\(--weight-column, or the late-label weights\)) is read as", r"\1 are read as"),
    # the prevalence estimator's calibration step (report --weight-column with --unlabelled)
    (r"\bPriorEstimator\.fit: ", "prevalence estimate: "),
    (r"the calibration \(its test of whether calibrate_output keeps the model's own "
     r"probabilities, its scale prior and output floor\) counts",
     "its check of whether the scores are calibrated counts"),
    (r"that test's choice and calibrate_output, and through the calibrated posteriors the "
     r"estimate", "that check, and through it the estimate"),
    (r"pass them divided by their sum: they then count",
     "divide the column by its sum in the file: the weights then count"),
    # count tables: the report's resampling unit
    (r"pass their group as `cells` \(or `--cell-column`\)",
     "name each row's group with --cell-column"),
    # folds and maps
    (r"CalibrationWrapper\(method='auto'\): `cv`=(\d+) asks for more folds",
     r"--method auto: --folds \1 asks for more folds"),
    (r"CalibrationWrapper\(method='auto', chose '(\w+)'\)", r"--method auto (chose \1)"),
    (r"CalibrationWrapper\(method='(\w+)'\): class\(es\) with fewer",
     r"--method \1: class(es) with fewer"),
    (r"`scores` separate the two classes perfectly", "the scores separate the two classes "
     "perfectly"),
    (r"Use smooth_targets=True for a finite fit\.",
     "The file cannot tell how steep the map should be: --method auto chooses by "
     "cross-validated log loss, and more rows near the boundary help."),
    (r"Prefer PlattMap here\.", "Prefer --method platt here."),
    (r"\bBetaMap keeps", "the beta map keeps"),
    (r"\bPlattMap keeps", "Platt's map keeps"),
    (r"\b(?:CalibrationWrapper|guaranteed_cutoff): ", ""),
    # bootstrap intervals: `metric` is the Python argument of the number resampled
    (r"because `metric` could not be evaluated on them", "because the number could not be "
     "computed on them"),
    (r"`metric` could be evaluated on only", "the number could be computed on only"),
    (r"\s*\(interval_reliable=False\)", ""),
]]


def cli_wording(message: str) -> str:
    """``message`` with library-only names turned into the command line's words.

    Examples
    --------
    >>> print(cli_wording("CalibrationWrapper(method='auto'): `cv`=10 asks for more folds "
    ...                   "than the smallest class has rows (4)"))
    --method auto: --folds 10 asks for more folds than the smallest class has rows (4)
    """
    for pattern, replacement in _RULES:
        message = pattern.sub(replacement, message)
    return message
