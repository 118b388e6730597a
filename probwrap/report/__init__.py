"""A single-file HTML report of calibration, decisions and prevalence (layer 3: writes files).

:func:`write_report` takes either a fitted classifier (a probwrap wrapper or any scikit-learn
classifier) with labelled evaluation rows, or plain arrays of labels and probabilities, plus
optional costs, a capacity and unlabelled rows from the deployment population. It writes one
HTML file with inline SVG figures, no scripts and no external files.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ._binary_rules import RuleRow
from ._common import Recommendation, ReportNote
from ._content import MetricRow, ReportContent, collect_content
from ._general import MulticlassReportContent
from ._general_rules import ActionRuleRow
from ._html import CAUTIONS, figure_to_svg, make_figures, render_html

__all__ = [
    "CAUTIONS",
    "ActionRuleRow",
    "MetricRow",
    "MulticlassReportContent",
    "Recommendation",
    "ReportContent",
    "ReportNote",
    "RuleRow",
    "build_report",
    "figure_to_svg",
    "write_report",
]


def build_report(**kwargs: Any) -> tuple[Any, str]:
    """Compute the report and return ``(content, html)`` without writing anything.

    Keyword arguments as for :func:`write_report` (without ``path``).
    """
    source = kwargs.pop("source", None)
    if source is not None and not isinstance(source, str):
        raise TypeError(f"source must be a str naming where the rows came from, got "
                        f"{type(source).__name__}")
    content = collect_content(**kwargs)
    content.source = source
    return content, render_html(content, make_figures(content))


def write_report(
    path: str | Path,
    *,
    y_true: Any = None,
    y_prob: Any = None,
    model: Any = None,
    X: Any = None,
    y: Any = None,
    sample_weight: Any = None,
    costs: Any = None,
    capacity: float | None = None,
    action_names: Any = None,
    unlabelled_prob: Any = None,
    X_unlabelled: Any = None,
    prior_shift: Any = None,
    batch_size: int | None = None,
    n_bins: int = 10,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    random_state: Any = 0,
    title: str = "probwrap report",
    row_costs: Any = None,
    class_names: Any = None,
    progress: Any = None,
    groups: Any = None,
    guarantee: Any = None,
    horizon_labels: Any = None,
    time: Any = None,
    event: Any = None,
    horizon: float | None = None,
    alarm_reference: float | None = None,
    alarm_decision_interval: float | None = None,
    cells: Any = None,
    score_scale: str = "proba",
    source: str | None = None,
    unlabelled_cells: Any = None,
) -> ReportContent | MulticlassReportContent:
    """Write a self-contained HTML report and return the numbers it shows.

    A "recommendation" box at the top names the rule to use now, why, and its cost and share
    acted on, within the capacity at the estimated prevalence (see ``Recommendation``); warnings
    met while computing a number are shown in a "notes" box beside it (``content.notes``) and
    warned once more with the number named; those met while drawing a figure, in a box under
    that figure (note keys ``"figure:<name>"``).

    Sections: calibration (Brier score, log loss, expected calibration error (bias-corrected,
    basic bootstrap interval), calibration slope and intercept, each with a bootstrap interval;
    reliability diagram), decisions (cost matrix,
    chosen cutoff with its interval, Bayes plug-in cutoff, mean cost of the chosen rule beside
    the plug-in rule, the 0.5 cutoff and acting on none or all rows, capacity; cost and decision
    curves), prevalence (source versus estimated target prevalence with interval and shift test,
    the cutoff moved to the new prevalence, prevalence by batch) and cautions.

    More than two classes, more than two actions (e.g. ship / repack / hold, or a reject
    action) or per-row costs give the general form instead: multiclass log loss and Brier
    score, top-label (Guo et al. 2017) and classwise (Kull et al. 2019) calibration error with
    bootstrap intervals and the top-label reliability diagram; the Bayes actions (least
    expected cost), a fitted policy's actions (tuned class offsets, capacity) and the
    alternatives (the most probable class as the action when the actions are the classes, the
    best action as if the most probable
    class were certain, one action for every row) with their realised cost and the share of
    each action, drawn as bars; per-class source and estimated target shares with intervals and
    the shift test. Cost and decision curves need one cutoff, so they are left out there.

    Parameters
    ----------
    path : str or Path
        The HTML file to write (parent directories are created).
    y_true, y_prob : array-like of shape (n,)
        Labels and positive-class probabilities of labelled evaluation rows (held-out rows:
        calibration measured on training rows is optimistic). Give these, or ``model``.
    model : fitted classifier
        Used with ``X`` and ``y`` instead of ``y_true``/``y_prob``. A
        :class:`~probwrap.CostPolicyWrapper` (possibly wrapping others) supplies the costs,
        capacity, action names and its tuned cutoff with interval; a
        :class:`~probwrap.CalibrationWrapper` inside supplies the map in use.
    X, y : labelled rows for ``model``.
    sample_weight : array-like of shape (n,), optional
        Weights of the labelled rows.
    costs : mapping or array-like of shape (n_classes, n_actions), optional
        ``{"tp", "fp", "fn", "tn"}`` (binary) or a matrix (rows true class in column order of
        the probabilities, columns actions). Without costs the decisions section shows only the
        decision curve (binary) or nothing (otherwise).
    capacity : float in (0, 1] or dict, optional
        Largest share of rows that may receive the second of two actions, or ``{action name:
        share}`` for one named action.
    action_names : sequence of str, optional
        Names of the actions, one per column of ``costs`` (binary default "no action", "act";
        otherwise the class names when there are as many actions as classes).
    unlabelled_prob : array-like of shape (m,), optional
        Positive-class probabilities of unlabelled deployment rows (or use ``X_unlabelled``
        with ``model``); their prevalence is estimated by EM (Saerens et al. 2002).
    X_unlabelled : unlabelled rows for ``model`` (and for ``prior_shift.monitor``).
    prior_shift : fitted and adapted :class:`~probwrap.PriorShiftWrapper`, optional
        Supplies the source and estimated target prevalence, interval and shift test instead.
    batch_size : int, optional
        Also estimate the prevalence per batch of this many unlabelled rows and draw it, with
        a prevalence alarm: a two-sided CUSUM of the batches' shift tests against the source
        prevalence (:func:`probwrap.shift.signed_shift_scores`,
        :func:`probwrap.shift.cusum_alarms`, k = 0.5, h = 5; see docs/prevalence_alarms.md).
        In the general form: the class shares per batch and one such alarm per class, on its
        signed shift score (``class_shift_score``; with two classes only the second class's);
        in ``content.batch_table`` and ``content.class_alarms``.
    alarm_reference, alarm_decision_interval : float, optional
        The alarm's reference value k and decision interval h, in standard deviations of the
        standardised batch shifts (defaults 0.5 and 5: about one false alarm in 465 in-control
        batches with an exact baseline; the report quotes the run length given the labelled
        rows, :func:`probwrap.shift.baseline_error_run_length`).
    n_bins : int, default=10
        Bins of the reliability diagram and the calibration error.
    n_resamples : int, default=200
        Bootstrap resamples for every interval, a whole number >= 2 (checked before anything
        is computed; every number of the report comes with its interval, so there is no
        "without intervals" setting here).
    confidence_level : float, default=0.95
    random_state : int, RandomState or None, default=0
        Seed of the bootstraps.
    title : str, default="probwrap report"
    source : str, optional
        Where the rows came from (a file and its columns), printed under the title so that a
        reader of the page can tell what it was made from; ``probwrap report`` fills it in
        with the input files and the columns it read. Kept as ``content.source``.
    row_costs : array-like of shape (n, n_classes, n_actions), optional
        One cost matrix per labelled row (e.g. from each parcel's value); the report shows
        their weighted mean. A :class:`~probwrap.CostPolicyWrapper` with costs given as a
        function of ``X`` supplies them itself.
    class_names : sequence of str, optional
        Display names of the classes, one per column of the probabilities (default: the class
        labels). Binary: ``(negative, positive)``, named in the cost table and wherever the
        text speaks of the positive class (default: the labels, or "negative"/"positive" for
        0/1 labels). General form: with ``y_true``/``y_prob``, labels are column indices
        ``0..k-1``, labels named in ``class_names`` (matched to the columns through it), or
        any labels whose sorted distinct values match the columns.
    progress : callable, optional
        ``progress(step, done, total)`` is called before each long step (``step`` names it:
        "calibration metrics", "decision rules", "prevalence", "prevalence by batch") and once
        more as ``("done", total, total)``; for a progress display.

    groups : array-like of shape (n,), optional
        A group label per labelled row; adds a "By group" section. Binary reports use
        :func:`probwrap.metrics.calibration_by_group` (calibration, scores with intervals and
        the chosen rule's share acted on, error rates and mean cost per group); the general
        form shows top-label and classwise calibration error, the largest class-share gap,
        Brier score and log loss with intervals, and the rule in use's mean cost and action
        shares. Largest gaps first, groups too small to judge marked. In
        ``content.group_checks``.
    guarantee : dict, optional
        Binary reports with costs: a promise to certify on the labelled rows, as for
        :func:`probwrap.decision.guaranteed_cutoff` (``{"requirement": "recall", "target":
        0.9, "confidence": 0.9, "method": "high_probability"}``; the last two optional). Adds a
        "guarantee" row to the decisions table (the least-cost certified cutoff, its cost and
        share acted on) and a line with the promise, the value on these rows, the certified
        bound and its p-value; when no cutoff can be certified, an "unreachable" row and the
        reason (and a ``UserWarning``), never a rule without the promise. Without it, a
        :class:`~probwrap.CostPolicyWrapper` fitted with ``guarantee=`` supplies its own
        ``guarantee_`` (certified on its held-out rows). In ``content.guarantee``.
    time, event, horizon : optional
        Labels that arrive late, instead of ``y_true`` / ``y``: how long each labelled row has
        been observed, whether its event happened (1) or not yet (0), and the horizon of the
        outcome "event within ``horizon``". The labels and inverse-probability-of-censoring
        weights of :func:`probwrap.late_labels.labels_at_horizon` (times ``sample_weight``,
        if given) are used for every number and figure, and the calibration section says how
        many rows are still open (see docs/late_labels.md). In ``content.late_labels``.
    horizon_labels : HorizonLabels, optional
        The same, already computed with :func:`~probwrap.late_labels.labels_at_horizon`
        (then ``sample_weight`` is not given again).
    cells : array-like of shape (n,), None or False, default=None
        What every bootstrap interval resamples. Outcomes that arrive as ``k`` of ``n``
        (:func:`probwrap.aggregated.expand_counts`, or a weighted frequency table) are rows
        that belong together: give the group of every labelled row here and whole groups are
        resampled (resampling the rows one by one breaks a group into its successes alone or
        its failures alone; on statsmodels' star98 that made the standard errors about twice
        the group-robust ones, docs/aggregated_outcomes.md). None: with ``model`` and ``X``,
        weighted rows with identical features and different labels are one cell each (the
        rule the wrappers' folds use) — but a frequency table (few levels per column, whole-
        number counts as weights, at most 200,000 cases) is read as its cases, the rows
        repeated by their counts, and cases are resampled, with a note — otherwise rows; with ``y_true``/``y_prob``, weighted rows
        with identical forecasts and different labels only earn a note asking for ``cells``
        (whole-number counts with at least half of them on such tied forecasts).
        False: always rows. The page says which unit was resampled and, for binary outcomes
        with whole-number weights, the cells' Pearson dispersion (a note when it is well above
        1). In ``content.resampling``. The report's own prevalence (class shares) estimate
        fits its :class:`~probwrap.shift.PriorEstimator` with the same cells, so its shift test
        and interval count the labelled cells as units (``content.prevalence_cells``).
    unlabelled_cells : array-like of shape (m,), optional
        The cell of every unlabelled row (``unlabelled_prob``, or ``X_unlabelled`` with
        ``model``): rows of one sampled unit (the pupils of one district, the parcels of one
        route and week) share causes, so they are not independent. The report's own prevalence
        (class shares) estimate then counts each cell as a unit on the unlabelled side, as
        :meth:`probwrap.shift.PriorEstimator.estimate` does with ``cells``: the shift test's and
        the interval's variance is clustered on the cells, and the rows are worth their count
        over the cells' design effect on the mean score (``content.unlabelled_cells``,
        ``content.unlabelled_effective_rows``); the batches (``batch_size``) count each batch's
        cells the same way (:func:`probwrap.shift.prior_by_batch`, ``n_effective``), and so does
        the prevalence alarm. With a fitted and adapted ``prior_shift`` the prevalence is the
        wrapper's own (give the cells to its ``adapt``); the cells then go to its ``monitor``
        for the batches only, and without batches they are refused. Default: every unlabelled
        row its own unit, as before.
    score_scale : {"proba", "log-odds"}, default="proba"
        What ``y_prob`` and ``unlabelled_prob`` hold (binary reports with ``y_true``/``y_prob``):
        probabilities, or log-odds (any finite number, e.g. ``decision_function`` values). The
        report turns log-odds into probabilities for everything that reads probabilities, and
        fits the calibration slope and intercept and computes the log loss on the log-odds as
        given: a probability is exactly 0 or 1 beyond log-odds of about +-36.7, and the
        slope and intercept on probabilities read every log-odds beyond +-27.6 as +-27.6.

    Returns
    -------
    ReportContent or MulticlassReportContent
        The numbers shown, for checking or further use.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sklearn.linear_model import LogisticRegression
    >>> from probwrap.datasets import make_parcels
    >>> from probwrap.report import write_report
    >>> train = make_parcels(2000, random_state=0)
    >>> test = make_parcels(1500, random_state=1)
    >>> winter = make_parcels(1500, season="winter", random_state=2)
    >>> model = LogisticRegression(max_iter=1000).fit(train.data, train.target)
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "report.html"
    >>> content = write_report(out, model=model, X=test.data, y=test.target,
    ...                        costs={"fp": 3.0, "fn": 40.0}, capacity=0.3,
    ...                        X_unlabelled=winter.data, n_resamples=30)
    >>> out.exists(), bool(content.target_prevalence > content.source_prevalence)
    (True, True)

    Three outcomes (intact / dented / broken) and three actions:

    >>> three = make_parcels(1500, n_outcomes=3, random_state=3)
    >>> costs = [[0.0, 4.0, 12.0], [20.0, 4.0, 12.0], [60.0, 64.0, 12.0]]
    >>> content = write_report(out, y_true=three.target, y_prob=three.true_proba, costs=costs,
    ...                        action_names=["ship", "repack", "hold"], n_resamples=20)
    >>> [r.key for r in content.rules][:3]
    ['chosen', 'certain', 'all:0']
    """
    content, page = build_report(
        y_true=y_true, y_prob=y_prob, model=model, X=X, y=y, sample_weight=sample_weight,
        costs=costs, capacity=capacity, action_names=action_names,
        unlabelled_prob=unlabelled_prob, X_unlabelled=X_unlabelled, prior_shift=prior_shift,
        batch_size=batch_size, n_bins=n_bins, n_resamples=n_resamples,
        confidence_level=confidence_level, random_state=random_state, title=title,
        row_costs=row_costs, class_names=class_names, progress=progress, groups=groups,
        guarantee=guarantee, horizon_labels=horizon_labels, time=time, event=event,
        horizon=horizon, alarm_reference=alarm_reference,
        alarm_decision_interval=alarm_decision_interval, cells=cells, score_scale=score_scale,
        source=source, unlabelled_cells=unlabelled_cells,
    )
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(page, encoding="utf-8")
    return content
