"""CostPolicyWrapper: turn a classifier's probabilities into least-expected-cost actions."""

from __future__ import annotations

import math
import numbers
import warnings
from collections.abc import Mapping
from typing import Any

import numpy as np
from sklearn.base import clone
from sklearn.utils import _safe_indexing, indexable
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import column_or_1d

from ._cost_policy_rules import _RuleFitting, _scalar_cutoff
from ._cost_policy_summary import (  # the prior-shift wrapper reads these two from here
    SMALL_HELDOUT_ROWS,  # noqa: F401
    SUMMARY_BINS,  # noqa: F401
    _summary_interval,
)
from ._feature_input import check_feature_input
from ._heldout import (
    HeldOutClassifierBase,
    HeldOutPredictions,
    _is_dask,
    _warn_weights_too_small_for_model,
    check_fitted,
    check_rows_match,
    is_frozen,
    params_of_rows,
    rows_for_models,
    warn_weightless_classes,
)
from ._predictions import _answers
from ._validation import (
    check_labels,
    check_sample_weight,
    check_target_labels,
    costs_in_class_order,
    plain,
    power_of_two_unit,
    warn_implied_positive,
)
from .decision import (
    PlugInCostAboveOneActionWarning,
    apply_class_offsets,
    budget_actions,
    check_capacity,
    check_cost_matrix,
    cutoff_interval,
    expected_costs,
    zero_one_costs,
)

__all__ = ["CostPolicyWrapper"]

_STRATEGIES = ("bayes", "tuned", "fixed")
_BINARY_ONLY = "Only binary classification is supported"


class CostPolicyWrapper(_RuleFitting, HeldOutClassifierBase):
    """Least-expected-cost actions from any classifier's probabilities.

    The wrapper reads the inner estimator's ``predict_proba`` and, for each row, takes the action
    with the least expected cost under a cost matrix, optionally with the decision rule tuned on
    held-out predictions, a capacity limit on one action, per-row costs and actions that differ
    from the classes (e.g. a reject / refer action).

    The plug-in rule is only as good as the probabilities: wrap a
    :class:`~probwrap.CalibrationWrapper` (``CostPolicyWrapper(CalibrationWrapper(model))``), or
    use ``strategy="tuned"``, which moves the cutoff (two classes) or per-class offsets (more
    classes) to the least cost on held-out predictions. Offsets multiply the probabilities, so
    they cannot move rows whose probability is exactly 0 or 1 and correct less than a
    calibration does for multiclass models: there, prefer
    ``CostPolicyWrapper(CalibrationWrapper(model))`` (docs/decisions.md).

    Decisions that affect people (credit, health, fraud) need validation on data like the
    deployment data, checks of error rates across groups, a route for contested decisions, and
    compliance with local regulation and licensed professional practice.

    Parameters
    ----------
    estimator : classifier
        Any classifier with ``predict_proba``. A :class:`~sklearn.frozen.FrozenEstimator` is used
        as fitted: nothing is refitted and every row passed to :meth:`fit` is held-out data.
    costs : None, mapping, array-like of shape (n_classes, n_actions) or callable, default=None
        Cost of each action (columns) when each class (rows, in ``classes_`` order) is true;
        negative entries are gains. A mapping is the binary shorthand with keys ``"tp"``,
        ``"fp"``, ``"fn"``, ``"tn"`` (missing keys cost 0); its positive class is
        ``classes_[1]`` (a warning says which label that is when the estimator's ``classes_``
        are not sorted). A callable ``costs(X)`` returns one
        matrix per row, shape (n, n_classes, n_actions), e.g. built from an amount column of
        ``X``. ``None`` means the 0-1 loss and no tuning: the wrapper is then the plain
        classifier (its predictions are the argmax of ``predict_proba``) unless ``cutoff`` or
        ``capacity`` asks otherwise; to tune for accuracy pass ``{"fp": 1, "fn": 1}``.
    strategy : {"bayes", "tuned", "fixed"}, default="bayes"
        ``"bayes"``: the plug-in rule, argmin over actions of ``sum_k p_k C[k, a]`` (binary: act
        when ``p > (c_fp - c_tn) / ((c_fp - c_tn) + (c_fn - c_tp))``, Elkan 2001; with a
        ``FrozenEstimator``, ``PlugInCostAboveOneActionWarning`` says when the rows given to
        :meth:`fit` show that rule to cost more than one action for every row).
        ``"tuned"``: binary with constant costs, the cutoff on ``p`` with the least cost on the
        out-of-fold predictions of all folds pooled (an exact search over every distinct held-out
        probability), settled toward the plug-in cutoff where the held-out rows do not show it
        costs more (:func:`probwrap.decision.settle_cutoff`; the plain minimiser is
        ``cost_curve_.cutoff``). With at most 20,000 held-out rows in memory, that plug-in
        cutoff is first carried back through a calibration map chosen on the held-out rows
        (the model's own probabilities unless a map fits them better by more than a standard
        error; on at most 300 held-out rows with at least 5 of each class, Platt scaling in
        their place where its fit increases and flags every held-out row or none at the
        plug-in cutoff; ``cutoff_anchor_``); otherwise per-class
        offsets on the log-probability scale fitted the same way. A tuned cutoff that acts on
        every held-out row or on none, where Platt scaling with the plug-in cutoff would not,
        is warned about. ``"fixed"``: use ``cutoff`` as given, so that a search can tune it.
    cutoff : float or array-like of shape (n_classes,), default=None
        With ``strategy="fixed"``: the probability cutoff (binary: the second action is taken when
        ``p > cutoff``), or, for more classes, actions or per-row costs, per-class offsets on the
        log-probability scale. Must be None for the other strategies.
    capacity : float in (0, 1] or dict, default=None
        Largest share of rows that may receive one action: a float limits the second action of a
        two-action problem (the costly one, e.g. "inspect"); ``{action: share}`` limits a named
        action. Rows are given the action in order of the cost they save. The limit holds exactly
        on the held-out rows and approximately on new rows from the same population.
    actions : array-like of shape (n_actions,), default=None
        Labels of the actions (columns of ``costs``) returned by :meth:`predict`. Default: the
        class labels, which needs as many actions as classes.
    cv : int, splitter or iterable of (train, test) pairs, default=5
        Folds for the held-out predictions (``"tuned"``, or any strategy with a capacity).
    n_jobs : int, default=None
        Parallel jobs for cross-fitting.
    random_state : int, RandomState or None, default=None
        Shuffling of the folds and seed of the bootstrap behind ``cutoff_interval_``.
    n_resamples : int, default=200
        Bootstrap resamples for ``cutoff_interval_``; 0 computes no interval
        (``cutoff_interval_`` is then None, as where there is no tuned cutoff).
    confidence_level : float, default=0.95
        Coverage of ``cutoff_interval_``.
    guarantee : dict or None, default=None
        Binary cutoff with ``strategy="tuned"`` only: a requirement the rule must meet on new
        rows, e.g. ``{"requirement": "recall", "target": 0.9, "confidence": 0.9}`` (keys as the
        arguments of :func:`probwrap.decision.guaranteed_cutoff`: ``requirement`` and
        ``target`` required, ``confidence`` default 0.9, ``method`` default
        ``"high_probability"``). The least-cost cutoff is then searched among the cutoffs
        certified on the held-out predictions; if none can be certified, :meth:`fit` raises
        :class:`~probwrap.decision.GuaranteeUnreachableError` (never an unconstrained rule).
        More than two classes or actions: per-class recall floors,
        ``{"recall_floors": {label: floor}, "confidence": 0.9}`` (see
        :func:`probwrap.decision.guaranteed_class_offsets`; no ``capacity`` then).
    tally_resolution : float, default=1e-3
        Bin width on the log-odds scale of the score tallies that the predictions are reduced
        to: for Dask input always (see :mod:`probwrap.scale`); for in-memory input only to
        summarise more than 20,000 held-out rows for ``cutoff_interval_`` (see ``keep_heldout``).
    keep_heldout : bool, default=False
        Keep every held-out prediction in the fitted wrapper. By default a ``"tuned"`` binary
        cutoff keeps them only up to 20,000 held-out rows; beyond that the fitted wrapper stays
        small (well under 1 MB pickled, whatever the number of rows): ``cost_curve_`` keeps about
        4,097 decisions (the optimum is exact and found on every row) and ``cutoff_interval_``
        resamples a tally of the held-out probabilities (bins of ``tally_resolution`` on the
        log-odds scale, at most 8,192 of them; a Poisson bootstrap of the bin counts, exact up
        to the binning for unit weights) with the fold cutoffs found on every row at fit time.
        ``True`` keeps the full curve and the row bootstrap at any size.

    Attributes
    ----------
    estimator_ : classifier
        Fitted inner estimator (refitted on all rows unless frozen).
    classes_ : ndarray of shape (n_classes,)
        Class labels.
    actions_ : ndarray of shape (n_actions,)
        Action labels.
    cost_matrix_ : ndarray of shape (n_classes, n_actions) or None
        Costs in use (None with per-row costs).
    cutoff_ : float or None
        Binary problems with constant costs and two actions: the second action is taken when the
        positive-class probability exceeds it. None otherwise.
    class_offsets_ : ndarray of shape (n_classes,) or None
        Log-probability offsets of the rule in the other cases (zeros for ``"bayes"``).
    cost_curve_ : CutoffSearchResult or None
        ``"tuned"`` binary cutoff: held-out cost at every distinct cutoff and the optimum (beyond
        20,000 held-out rows at about 4,097 of them unless ``keep_heldout=True``).
    cutoff_anchor_ : float or None
        ``"tuned"`` binary cutoff without ``guarantee`` (None otherwise): the cutoff kept unless the held-out rows
        show that the least-cost cutoff costs less — the probability ``p`` at which the
        calibration map chosen on the held-out rows reaches the plug-in cutoff
        ``(c_fp - c_tn) / ((c_fp - c_tn) + (c_fn - c_tp))`` (below 0 when the map lifts even a
        probability of 0 above it: every row flagged), or that plug-in cutoff itself.
    cutoff_anchor_map_ : str or None
        The map behind ``cutoff_anchor_`` (``"identity"``: the model's own probabilities, so the
        plain plug-in cutoff); with ``"class_shares"`` (the held-out scores ranked nothing
        out of fold), or a decreasing map that puts every probability on one side of the
        plug-in value, the anchor is that one decision: 1 to flag no row, below 0 to flag every
        row. None when none was used (more than 20,000 held-out rows, tallied Dask input, a
        class with too few held-out rows to choose a map by cross-validation, or a decreasing
        map that crosses the plug-in value).
    action_budget_ : ActionBudget or None
        Fitted capacity limit for the non-cutoff cases.
    heldout_cost_ : float or None
        Mean cost per row of the fitted policy on the held-out predictions (None when the
        strategy needed none: ``"bayes"`` / ``"fixed"`` without a capacity and not frozen).
    guarantee_ : GuaranteedCutoff, GuaranteedOffsets or None
        With ``guarantee``: the certified rules, the achieved value of the requirement on the
        held-out rows, its guaranteed bound and p-value (per floored class for recall floors).
    cutoff_interval_ : CutoffInterval or None
        ``"tuned"`` binary cutoff: bootstrap interval of the least-cost cutoff
        (``cost_curve_.cutoff``) and its spread across folds, computed on first access. None
        otherwise. It describes where the least-cost cutoff lies; ``cutoff_`` can lie outside it
        when the held-out rows do not show the least-cost cutoff to cost less than
        ``cutoff_anchor_`` (see ``strategy``), which is then kept.

    Examples
    --------
    >>> from sklearn.linear_model import LogisticRegression
    >>> from probwrap import CostPolicyWrapper
    >>> from probwrap.datasets import make_parcels
    >>> parcels = make_parcels(3000, random_state=0)
    >>> policy = CostPolicyWrapper(LogisticRegression(max_iter=1000),
    ...                            costs={"fp": 2.0, "fn": 35.0},
    ...                            actions=["ship", "inspect"])
    >>> policy.fit(parcels.data, parcels.target).predict(parcels.data[:3]).tolist()
    ['inspect', 'ship', 'ship']
    >>> round(policy.cutoff_, 4)
    0.0541
    """

    _heldout_response = "predict_proba"

    def __init__(
        self,
        estimator: Any = None,
        *,
        costs: Any = None,
        strategy: str = "bayes",
        cutoff: Any = None,
        capacity: Any = None,
        actions: Any = None,
        cv: Any = 5,
        n_jobs: int | None = None,
        random_state: Any = None,
        n_resamples: int = 200,
        confidence_level: float = 0.95,
        guarantee: Mapping[str, Any] | None = None,
        tally_resolution: float = 1e-3,
        keep_heldout: bool = False,
    ) -> None:
        self.estimator = estimator
        self.costs = costs
        self.strategy = strategy
        self.cutoff = cutoff
        self.capacity = capacity
        self.actions = actions
        self.cv = cv
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.n_resamples = n_resamples
        self.confidence_level = confidence_level
        self.guarantee = guarantee
        self.tally_resolution = tally_resolution
        self.keep_heldout = keep_heldout

    @property
    def _split_table_cases(self) -> bool:
        """A count table's cases are split into folds when the model is cross-fitted
        (since 5 December 2026), except with per-row costs, which are read for the rows of ``X``."""
        return not callable(self.costs)

    # -- parameter checks ------------------------------------------------------------------
    def _check_params(self) -> None:
        if not isinstance(self.keep_heldout, (bool, np.bool_)):
            raise ValueError(f"`keep_heldout` must be True or False; got {self.keep_heldout!r}.")
        if self.strategy not in _STRATEGIES:
            raise ValueError(f"`strategy` must be one of {_STRATEGIES}; got {plain(self.strategy)!r}.")
        if self.strategy == "fixed" and self.cutoff is None:
            raise ValueError(
                "`cutoff` must be given with strategy='fixed' (a probability cutoff, or "
                "per-class offsets); got None."
            )
        if self.strategy != "fixed" and self.cutoff is not None:
            raise ValueError(
                f"`cutoff` is only used with strategy='fixed'; got cutoff={plain(self.cutoff)!r} with "
                f"strategy={plain(self.strategy)!r}. Set cutoff=None or strategy='fixed'."
            )
        if isinstance(self.capacity, Mapping):
            if len(self.capacity) != 1:
                raise ValueError(
                    "`capacity` as a dict must name exactly one action, {action: share}; got "
                    f"{len(self.capacity)} entries."
                )
            check_capacity(next(iter(self.capacity.values())))
        else:
            check_capacity(self.capacity)
        if self.costs is not None and not (
            callable(self.costs) or isinstance(self.costs, Mapping)
        ):
            check_cost_matrix(self.costs)
        if self.guarantee is not None:
            self._guarantee_args()

    def _warn_unsorted_positive(self) -> None:
        """Binary shorthand or a single cutoff on a model whose ``classes_`` are not sorted.

        Both act on ``classes_[1]`` (scikit-learn's convention, the column of
        ``predict_proba[:, 1]``). scikit-learn's own classifiers sort their labels, so that is
        the larger label; a model from elsewhere may keep another order, and the positive class
        is then not the one a reader of scikit-learn's convention expects: say which it is.
        """
        if not self._binary_only() or self.classes_.shape[0] != 2:
            return
        try:
            ordered = bool(self.classes_[0] < self.classes_[1])
        except TypeError:  # labels of types that do not compare: nothing to expect
            return
        if ordered:
            what = ("binary cost shorthand (tp/fp/fn/tn)" if isinstance(self.costs, Mapping)
                    else "single `cutoff`")
            how = "fit on `y == {first}` (True is then the positive class)"
            if isinstance(self.costs, Mapping):
                how += (", or give the costs as a 2 x 2 matrix with one row per true class in "
                        "`classes_` order and one column per action")
            warn_implied_positive(self.classes_, what, how, stacklevel=4)
        if not ordered:
            first, second = (plain(c) for c in self.classes_)
            what = ("binary cost shorthand (tp/fp/fn/tn)" if isinstance(self.costs, Mapping)
                    else "single `cutoff`")
            warnings.warn(
                f"The {what} treats the second of the estimator's `classes_` as the positive "
                f"class: {second!r}. These `classes_` ({first!r}, {second!r}) are not in sorted "
                f"order, so the positive class is not the larger label {first!r} as for "
                "scikit-learn's own classifiers. If that is not meant, give the costs as a 2 x 2 "
                "matrix whose rows follow `classes_`.",
                UserWarning,
                stacklevel=3,
            )

    def _binary_only(self) -> bool:
        return isinstance(self.costs, Mapping) or (
            self.strategy == "fixed" and _scalar_cutoff(self.cutoff)
        )

    # -- fitting ---------------------------------------------------------------------------
    def _fit_without_heldout(self, X, y, sample_weight, fit_params) -> np.ndarray:
        """Fit the estimator once on all rows (strategies that need no held-out predictions)."""
        if self.estimator is None:
            raise ValueError("`estimator` must be a classifier; got None.")
        if y is None:
            raise ValueError(
                f"{type(self).__name__} requires y to be passed, but the target y is None."
            )
        y_arr = column_or_1d(y, warn=True)
        check_target_labels(y_arr, "y")
        check_classification_targets(y_arr)
        check_rows_match(X, y_arr.shape[0])
        check_feature_input(X, self.estimator, y_arr)
        sw = check_sample_weight(sample_weight, y_arr.shape[0]) if sample_weight is not None else None
        y_index, classes = check_labels(y_arr, name="y")
        if sw is not None:
            warn_weightless_classes(self, classes, y_index, sw, stacklevel=3)
        if not _answers(self.estimator, "predict_proba"):
            raise ValueError(
                f"`estimator` ({type(self.estimator).__name__}) has no predict_proba; wrap it in "
                "CalibrationWrapper, which turns decision_function scores into probabilities."
            )
        est_params, _ = self._route_fit_params(
            sw, dict(fit_params),
            weights_used_here=f"strategy={self.strategy!r} fits nothing else on these rows",
        )
        if any(k.endswith("sample_weight") for k in est_params):
            _warn_weights_too_small_for_model(sw, self.estimator, type(self).__name__,
                                              stacklevel=3)
        # rows of weight 0 carry no information: the model is the one fitted on the other rows
        # (before 5 December 2026 a model without sample_weight took them at weight 1 here)
        rows = rows_for_models(self, self.estimator, classes, y_index, sw, est_params)
        if rows is not None:
            X = _safe_indexing(indexable(X)[0], rows)
            est_params = params_of_rows(est_params, rows, y_arr.shape[0])
            y_arr = y_arr[rows]
        try:
            estimator = clone(self.estimator).fit(X, y_arr, **est_params)
        except ValueError as exc:  # as the held-out strategies report a fold that fails
            raise ValueError(self._all_rows_failure(y_index, classes, exc)) from exc
        self.estimator_ = estimator
        self.classes_ = np.asarray(estimator.classes_)
        if hasattr(estimator, "n_features_in_"):
            self.n_features_in_ = estimator.n_features_in_
        if hasattr(estimator, "feature_names_in_"):
            self.feature_names_in_ = estimator.feature_names_in_
        return y_index

    def fit(self, X: Any, y: Any, sample_weight: Any = None, **fit_params: Any) -> CostPolicyWrapper:
        """Fit the estimator and the decision rule.

        Parameters
        ----------
        X : array-like, DataFrame, sparse matrix, ...
            Whatever the wrapped estimator accepts; passed to it untouched.
        y : array-like of shape (n,)
            Class labels.
        sample_weight : array-like of shape (n,), default=None
            Row weights: passed to the estimator where it accepts them, and weighting the held-out
            costs and capacity shares.
        **fit_params : dict
            Further parameters for the estimator's ``fit`` (routed with metadata routing).

        Returns
        -------
        self
        """
        self._check_params()
        dask_input = _is_dask(X) or _is_dask(y) or _is_dask(sample_weight)
        if dask_input and (
            callable(self.costs)
            or (is_frozen(self.estimator) and len(getattr(self.estimator, "classes_", ())) > 2)
        ):
            return self._fit_rule_dask(X, y, sample_weight)
        needs_heldout = (
            self.strategy == "tuned"
            or self.capacity is not None
            or is_frozen(self.estimator)
            or dask_input
        )
        ho: HeldOutPredictions | None = None
        # Dask rows without weights: no replicate tallies at fit time (see _dask_replicates)
        self._replicates_when_read = dask_input and sample_weight is None
        if needs_heldout:
            ho = self._fit_heldout(X, y, sample_weight, fit_params, response="predict_proba")
        else:
            self._fit_without_heldout(X, y, sample_weight, fit_params)
        k = self.classes_.shape[0]
        if self._binary_only() and k != 2:
            raise ValueError(
                f"{_BINARY_ONLY} with binary costs (tp/fp/fn/tn) or a single cutoff; `y` has "
                f"{k} classes. Give an ({k}, n_actions) cost matrix, or per-class offsets as "
                "`cutoff`."
            )
        self._warn_unsorted_positive()

        row_costs = None
        if callable(self.costs):
            row_costs = self._row_costs(X, k)
            matrix = None
            n_actions = row_costs.shape[2]
        elif self.costs is None:
            matrix = zero_one_costs(k)
            n_actions = k
        else:
            # (a DataFrame's labelled rows and columns put in classes_ / actions order)
            matrix = check_cost_matrix(
                costs_in_class_order(self.costs, self.classes_, self.actions), n_classes=k)
            n_actions = matrix.shape[1]
        self.cost_matrix_ = matrix
        self.actions_ = self._resolve_actions(n_actions)
        self._plain = self.costs is None and self.capacity is None and self.strategy != "fixed"
        self._cutoff_mode = k == 2 and n_actions == 2 and matrix is not None
        budget_index, budget_share = self._resolve_capacity(n_actions)

        self.cutoff_ = None
        self.guarantee_ = None
        self.class_offsets_ = None
        self.cost_curve_ = None
        self.cutoff_anchor_ = None
        self.cutoff_anchor_map_ = None
        self.action_budget_ = None
        self.heldout_cost_ = None
        self._interval_inputs = None
        self._interval_cache = None

        proba = None if ho is None else self._check_heldout_proba(ho.values, k)
        if self.guarantee is not None:
            floors_form = "recall_floors" in self.guarantee
            if self._cutoff_mode and floors_form:
                raise ValueError(
                    "`guarantee` with two classes and two actions takes a requirement on the "
                    "cutoff, e.g. {'requirement': 'recall', 'target': 0.9}; 'recall_floors' is "
                    "for more classes or actions."
                )
            if not self._cutoff_mode and not floors_form:
                raise ValueError(
                    "`guarantee` with a requirement applies to a binary cutoff (two classes, two "
                    f"actions, constant costs); here there are {k} classes and {n_actions} "
                    "actions: give per-class recall floors, {'recall_floors': {label: floor}}."
                )
            if not self._cutoff_mode and (row_costs is not None or budget_share is not None):
                raise ValueError(
                    "`guarantee` with recall floors needs one cost matrix and no `capacity` (a "
                    "capacity limit would change the certified rules)."
                )
        if self._cutoff_mode:
            # only the second class's probabilities are read: kept as one contiguous column,
            # and the labels as one-byte codes, for the memory of large held-out sets
            if ho is not None:
                ho.y_index = ho.y_index.astype(np.int8)
            p = None if proba is None else np.ascontiguousarray(proba[:, 1])
            if ho is not None:
                ho.values = proba = None
            self._fit_cutoff(ho, p, matrix, budget_share)
        else:
            self._fit_offsets(ho, proba, matrix, row_costs, k, budget_index, budget_share)
        if ho is not None and ho.from_tally and self._interval_inputs is not None:
            # Tally rows (Dask input): their weights are row counts, not rows to resample; the
            # interval comes from the tally's Poisson-bootstrap replicates instead.
            tally = self.tally_
            if tally.n_replicates:
                self._interval_inputs = ("tally", tally, matrix, budget_share)
            else:
                # unweighted rows: the replicates are drawn from the tally when the interval is
                # read (a bin of c rows holds Poisson(c) rows of a Poisson resample)
                summary = {"weighted": tally, "rows": tally.counts, "folds": np.empty(0)}
                self._interval_inputs = ("summary", summary, matrix, budget_share)
        if ho is not None:
            if self._cutoff_mode:
                # the rule of _decide, p > cutoff_; each row's cost looked up by a one-byte
                # (class, action) code: the same values as matrix[y, chosen] without two
                # index arrays as long as the rows
                code = ho.y_index.astype(np.int8) * np.int8(2)
                code += p > self.cutoff_
                realised = np.take(matrix.ravel(), code)
                del code
            else:
                chosen = self._decide(proba, matrix if row_costs is None else row_costs)
                realised = (
                    matrix[ho.y_index, chosen]
                    if row_costs is None
                    else row_costs[np.arange(chosen.shape[0]), ho.y_index, chosen]
                )
            w = ho.sample_weight
            with np.errstate(over="ignore"):
                cost = float(np.dot(w, realised) / w.sum())
            if not math.isfinite(cost):
                # costs near the largest float: the sum overflowed; the same mean on the costs
                # divided by a power of two (exact), scaled back (finite: a mean of finite costs)
                unit = power_of_two_unit(realised)
                cost = float(np.dot(w / w.sum(), realised / unit)) * unit
            self.heldout_cost_ = cost
            if (self._cutoff_mode and self.strategy == "bayes" and budget_share is None
                    and self.guarantee is None and is_frozen(self.estimator)
                    and not ho.from_tally):
                self._warn_plugin_worse_than_one_action(realised, ho, matrix)
        return self

    def _warn_plugin_worse_than_one_action(self, realised, ho, matrix) -> None:
        """Frozen model, plug-in rule: say so when, on the rows given to ``fit`` (all held out
        from the model), the plug-in decisions cost more than taking one action for every row,
        by more than two standard errors of the paired row differences (rows counted as
        :func:`~probwrap.calibration._base.count_weights` counts them, so scaling weights that
        are not counts cannot change it). Those rows were in hand and showed the model's own
        probabilities to be unfit for the costs: ``benchmarks/hunt30_sweep.py``, Stat2Data's
        BlueJays, a gradient boosting frozen on 36 birds, plug-in cost 0.85-1.15 a row on the
        test rows where flagging every bird cost about 0.5 and scikit-learn's sigmoid 0.44-0.49,
        with no warning."""
        from .calibration._base import count_weights

        w = np.asarray(ho.sample_weight, dtype=float)
        keep = w > 0
        cw, _ = count_weights(w[keep])
        n = float(cw.sum())
        if n <= 1.0:
            return
        y = np.asarray(ho.y_index)[keep].astype(np.intp)
        # costs divided by a power of two (exact), so that sums of huge costs cannot overflow;
        # the comparison does not depend on the scale, the numbers shown are scaled back
        unit = power_of_two_unit(matrix)
        one_action = [matrix[y, a] / unit for a in range(2)]
        best = int(np.argmin([float(cw @ c) for c in one_action]))
        own = np.asarray(realised, dtype=float)[keep] / unit
        d = own - one_action[best]
        mean = float(cw @ d) / n
        se = math.sqrt(max(float(cw @ (d - mean) ** 2) / (n - 1.0), 0.0) / n)
        if not (mean > 0.0 and mean > 2.0 * se):
            return
        warnings.warn(
            f"{type(self).__name__}: on the {int(keep.sum())} rows given to fit (all held out "
            f"from the frozen model), the plug-in rule (cutoff {self.cutoff_:.4g} on the "
            f"model's own probabilities) costs {float(cw @ own) / n * unit:.4g} a row, more than "
            f"taking action {plain(self.actions_[best])!r} for every row "
            f"({float(cw @ one_action[best]) / n * unit:.4g}; difference {mean * unit:.3g} +- "
            f"{se * unit:.3g}): the "
            "model's probabilities do not fit these rows. Use strategy='tuned', or wrap a "
            "CalibrationWrapper: CostPolicyWrapper(CalibrationWrapper(model), ...).",
            PlugInCostAboveOneActionWarning,
            stacklevel=3,
        )

    def _fit_rule_dask(self, X: Any, y: Any, sample_weight: Any) -> CostPolicyWrapper:
        """Dask rows with a frozen estimator, for multiclass models or costs given as a function
        of ``X``: the plug-in (or fixed-offset) rule needs no fitting beyond the estimator, and
        ``heldout_cost_`` is a reduction over the blocks (``costs(X)`` evaluated per block)."""
        if not is_frozen(self.estimator):
            raise ValueError(
                "Dask input needs an already fitted estimator wrapped in "
                "sklearn.frozen.FrozenEstimator; got "
                f"{type(self.estimator).__name__}."
            )
        if self.strategy == "tuned" or self.capacity is not None:
            raise ValueError(
                "Dask input with a multiclass model or costs as a function of X supports "
                "strategy='bayes' or 'fixed' without a capacity; tuning or fitting a capacity "
                "on such rows needs them in memory."
            )
        from .scale._entry import first_block_row_costs, heldout_cost_dask

        est = self.estimator
        self.estimator_ = est
        self.classes_ = np.asarray(est.classes_)
        if hasattr(est, "n_features_in_"):
            self.n_features_in_ = est.n_features_in_
        if hasattr(est, "feature_names_in_"):
            self.feature_names_in_ = est.feature_names_in_
        k = self.classes_.shape[0]
        if self._binary_only() and k != 2:
            raise ValueError(
                f"{_BINARY_ONLY} with binary costs (tp/fp/fn/tn) or a single cutoff; `y` has "
                f"{k} classes. Give an ({k}, n_actions) cost matrix, or per-class offsets as "
                "`cutoff`."
            )
        self._warn_unsorted_positive()
        if callable(self.costs):
            matrix = None
            n_actions = first_block_row_costs(self, X, k, y, sample_weight).shape[2]
        else:
            matrix = zero_one_costs(k) if self.costs is None else check_cost_matrix(
                costs_in_class_order(self.costs, self.classes_, self.actions), n_classes=k
            )
            n_actions = matrix.shape[1]
        self.cost_matrix_ = matrix
        self.actions_ = self._resolve_actions(n_actions)
        self._plain = self.costs is None and self.strategy != "fixed"
        self._cutoff_mode = False
        self.cutoff_ = None
        self.cost_curve_ = None
        self.cutoff_anchor_ = None
        self.cutoff_anchor_map_ = None
        self.action_budget_ = None
        self._interval_inputs = None
        self._interval_cache = None
        self._fit_offsets(None, None, matrix, None, k, None, None)
        self.heldout_cost_ = heldout_cost_dask(self, X, y, sample_weight)
        return self

    # -- prediction ------------------------------------------------------------------------
    def _decide(self, proba: np.ndarray, costs: np.ndarray) -> np.ndarray:
        if self._plain:
            return np.argmax(proba, axis=1)
        if self._cutoff_mode:
            return (proba[:, 1] > self.cutoff_).astype(np.intp)
        E = expected_costs(apply_class_offsets(proba, self.class_offsets_), costs)
        if self.action_budget_ is not None:
            b = self.action_budget_
            return budget_actions(E, b.action, b.saving_threshold)
        return np.argmin(E, axis=1)

    def _costs_for(self, X: Any) -> np.ndarray:
        if self.cost_matrix_ is not None:
            return self.cost_matrix_
        return self._row_costs(X, self.classes_.shape[0])

    def predict_proba(self, X: Any) -> np.ndarray:
        """The wrapped estimator's class probabilities, unchanged, shape (n, n_classes).

        For Dask input the result is a Dask array, computed block by block.
        """
        check_fitted(self, "actions_")
        if _is_dask(X):
            return self._dask_predict(self.predict_proba, X, self.classes_.shape[0])
        return self._inner_output(X, "predict_proba")

    def predict(self, X: Any) -> np.ndarray:
        """Action for each row (labels from ``actions_``; a Dask array for Dask input)."""
        if _is_dask(X):
            check_fitted(self, "actions_")
            return self._dask_predict(self.predict, X, None, self.actions_.dtype)
        proba = self.predict_proba(X)
        costs = None if (self._plain or self._cutoff_mode) else self._costs_for(X)
        return self.actions_[self._decide(proba, costs)]

    def expected_costs(self, X: Any) -> np.ndarray:
        """Expected cost of every action under the wrapped model's probabilities, (n, n_actions).

        For Dask input the result is a Dask array computed block by block (costs given as a
        function of ``X`` are evaluated on each block, so the function must work row by row).
        """
        if _is_dask(X):
            check_fitted(self, "actions_")
            return self._dask_predict(self.expected_costs, X, self.actions_.shape[0])
        proba = self.predict_proba(X)
        return expected_costs(proba, self._costs_for(X))

    @property
    def cutoff_interval_(self) -> Any:
        """Bootstrap interval and fold spread of the tuned cutoff (None if there is none)."""
        check_fitted(self, "actions_")
        if self._interval_inputs is None:
            return None
        if isinstance(self.n_resamples, numbers.Integral) and int(self.n_resamples) == 0:
            # no interval asked for (reading it raised a ValueError in memory and an IndexError
            # from a Dask tally before 4 December 2026)
            return None
        if self._interval_cache is None and _is_text(self._interval_inputs[0], "summary"):
            _, summary, matrix, share = self._interval_inputs
            self._interval_cache = _summary_interval(summary, matrix, share, self)
        if self._interval_cache is None and isinstance(self._interval_inputs[0], str):
            from .scale._entry import tally_cutoff_interval

            _, tally, matrix, share = self._interval_inputs
            self._interval_cache = tally_cutoff_interval(
                tally, matrix, capacity=share, confidence_level=self.confidence_level
            )
        if self._interval_cache is None:
            p, y, matrix, w, fold, share = self._interval_inputs
            self._interval_cache = cutoff_interval(
                p, y, matrix, sample_weight=w, fold=fold, capacity=share,
                score_bounds=(0.0, 1.0), n_resamples=self.n_resamples,
                confidence_level=self.confidence_level, random_state=self.random_state,
            )
        return self._interval_cache

    def _dask_replicates(self) -> int:
        """Bootstrap replicates to tally on Dask input (for ``cutoff_interval_``).

        None for unweighted rows: a bin of ``c`` rows then holds Poisson(``c``) rows of a
        Poisson resample, which is drawn from the tally itself when ``cutoff_interval_`` is read,
        so the fit pays nothing for an interval nobody reads. Weighted rows need the per-row
        draws, tallied at fit time.
        """
        tuned = self.strategy == "tuned" and self.costs is not None and not callable(self.costs)
        if not tuned or getattr(self, "_replicates_when_read", False):
            return 0
        return int(self.n_resamples)

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        if self._binary_only():
            tags.classifier_tags.multi_class = False
        return tags



def _is_text(value: Any, text: str) -> bool:
    return isinstance(value, str) and value == text
