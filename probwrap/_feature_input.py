"""Two shapes of ``X`` that scikit-learn refuses, said before any model is fitted.

The wrappers hand ``X`` to the inner estimator untouched, so a text pipeline still receives
its list of strings. When the estimator is one of scikit-learn's that validates ``X`` as a 2-d
array, two mistakes used to surface only through cross-fitting, as a long "Cross-fitting
`estimator` ... failed" message with the model's own message (and a printout of the array) at
its end:

* a 1-d ``X`` (one feature given as a flat array, Series or list): scikit-learn's
  ``check_array`` refuses every 1-d array ("Expected 2D array, got 1D array instead"), in
  1.6.1 and in the newest release alike;
* a DataFrame with duplicate column names: refused by newer scikit-learn (1.9.1: its
  feature-name check reads the columns through narwhals, "Expected unique column names");
  scikit-learn 1.6.1 accepts them, so they are refused here only where the installed
  scikit-learn refuses them (found once, by fitting a ``StandardScaler`` on a 2-column frame
  with one name twice: :func:`_sklearn_refuses_repeated_names`);
* the same frame given to a ``ColumnTransformer`` of a scikit-learn that accepts repeated
  names (1.6.1): given a DataFrame to transform it selects its columns by name, so a repeated
  name picked by position brings every column of that name, and the model fails on the
  held-out rows (a 671-character "Cross-fitting ... failed on that fold's held-out rows"
  message that spoke of rare categories); one picked by name fails its fit ("not unique in
  dataframe", in a 571-character cross-fitting message). :func:`_column_selection_breaks` fits a clone
  of the ``ColumnTransformer`` on ``X`` and transforms a few of the same rows; only where that
  fails or gives other columns (or the fit fails only for the names) is the frame refused. Selections by name (the same columns at
  fit and at transform) keep working.

:func:`check_feature_input` raises a short error naming ``X`` and what was expected, but only
where a step that receives ``X`` as it is given is a scikit-learn estimator that takes 2-d input
(its tags: ``two_d_array`` and not ``one_d_array``, ``string`` or ``dict``; a
``FunctionTransformer`` only with ``validate=True``). The steps are found as :func:`_first_step`
says, and inside a ``FeatureUnion``, a voting or a stacking ensemble every inner step is
followed (:func:`_steps_given_X`: scikit-learn fits each of them on the whole ``X``, so one
that refuses it fails the fit). Anything else (text vectorisers, dict vectorisers, a
``FunctionTransformer`` that reshapes, a model from another library, a step whose inner steps
cannot be told) gets ``X`` as before.
"""

from __future__ import annotations

import functools
import warnings
from typing import Any

import numpy as np
from sklearn.utils import get_tags

from ._validation import loaded_classes as _loaded_classes
from ._validation import plain

__all__ = ["check_feature_input"]


def _first_step(estimator: Any) -> Any:
    """The estimator that first receives ``X``, or None where that cannot be told.

    Followed through the steps that hand ``X`` on as it is: ``FrozenEstimator``, probwrap's
    wrappers, the first step of a ``Pipeline``, scikit-learn's parameter searches
    (``GridSearchCV``, ...), ``CalibratedClassifierCV`` and ``OneVsRestClassifier``. A
    scikit-learn ensemble of one estimator (forests, bagging, boosting) validates ``X`` itself
    and is judged by its own tags; so is a ``ColumnTransformer`` (it selects columns of a 2-d
    ``X``). A step that hands ``X`` to several inner steps (``FeatureUnion``, voting, stacking)
    is returned as it is: :func:`_steps_given_X` reads its parts. Any other step around an
    estimator: None, nothing is judged (a ``GridSearchCV`` or ``FeatureUnion`` of text
    vectorisers reports the tags of a 2-d model)."""
    # (classes of modules not imported yet are left out: nothing can be their instance)
    passing = (*_loaded_classes("sklearn.frozen", "FrozenEstimator"),
               *_loaded_classes("sklearn.calibration", "CalibratedClassifierCV"),
               *_loaded_classes("sklearn.multiclass", "OneVsRestClassifier"))
    judged = (*_loaded_classes("sklearn.ensemble", "BaseEnsemble"),
              *_loaded_classes("sklearn.compose", "ColumnTransformer"))
    pipeline = _loaded_classes("sklearn.pipeline", "Pipeline")

    for _ in range(20):  # nesting depth; a loop of references cannot hang the fit
        if isinstance(estimator, pipeline):
            steps = [s for _, s in estimator.steps if s is not None and s != "passthrough"]
            if not steps:
                return None
            estimator = steps[0]
        elif isinstance(estimator, passing) or (
                type(estimator).__module__.startswith(("probwrap.", "sklearn.model_selection."))
                and type(estimator).__name__.endswith(("Wrapper", "SearchCV"))
                and hasattr(estimator, "estimator")):
            estimator = estimator.estimator
        elif isinstance(estimator, judged):
            return estimator
        elif _parts_given_X(estimator) is not None:
            return estimator
        elif any(hasattr(estimator, name) for name in (
                "transformer_list", "transformers", "estimators")) or hasattr(
                getattr(estimator, "estimator", None), "fit"):
            return None
        else:
            return estimator
    return None


def _parts_given_X(step: Any) -> list | None:
    """The inner steps that each receive the whole ``X`` of a scikit-learn ``FeatureUnion``,
    ``VotingClassifier`` / ``VotingRegressor`` or ``StackingClassifier`` /
    ``StackingRegressor`` (dropped ones left out; a stack's final estimator sees the inner
    steps' predictions, not ``X``), or None for any other step."""
    if isinstance(step, _loaded_classes("sklearn.pipeline", "FeatureUnion")):
        parts = [s for _, s in step.transformer_list]
    elif isinstance(step, _loaded_classes("sklearn.ensemble", "VotingClassifier",
                                          "VotingRegressor", "StackingClassifier",
                                          "StackingRegressor")):
        parts = [s for _, s in step.estimators]
    else:
        return None
    return [s for s in parts if s is not None and not isinstance(s, str)]


def _steps_given_X(estimator: Any) -> list[tuple[Any, list[str]]]:
    """Every step that receives ``X`` as it is given to the wrapper, with the names of the
    composite steps (``FeatureUnion``, voting, stacking) it sits in.

    Each inner step of a ``FeatureUnion``, a voting or a stacking ensemble is fitted on the
    whole ``X``, so each is followed as :func:`_first_step` follows the estimator; a step that
    cannot be told adds nothing (the others are still judged: scikit-learn fits them all)."""
    found: list[tuple[Any, list[str]]] = []
    todo: list[tuple[Any, list[str]]] = [(estimator, [])]
    while todo and len(found) < 1000:  # a loop of references cannot hang the fit
        est, path = todo.pop(0)
        step = _first_step(est)
        if step is None:
            continue
        parts = _parts_given_X(step) if len(path) < 20 else None
        if parts is None:
            found.append((step, path))
        else:
            todo.extend((part, [*path, type(step).__name__]) for part in parts)
    return found


def _refusing_step(estimator: Any) -> tuple[Any, str] | None:
    """The first step given ``X`` as it is that takes 2-d input only (:func:`_takes_2d_only`),
    with its name as the error says it ("StandardScaler in FeatureUnion"), or None."""
    for step, path in _steps_given_X(estimator):
        if _takes_2d_only(step):
            name = type(step).__name__
            return step, " in ".join([name, *reversed(path)])
    return None


def _takes_2d_only(step: Any) -> bool:
    """Whether ``step`` is a scikit-learn estimator that validates ``X`` as a 2-d array."""
    if step is None or not type(step).__module__.startswith("sklearn."):
        return False
    if type(step).__name__ == "FunctionTransformer" and not getattr(step, "validate", False):
        return False
    try:
        tags = get_tags(step).input_tags
    except Exception:  # noqa: BLE001 - tags are a hint only; without them, say nothing
        return False
    return bool(tags.two_d_array and not (tags.one_d_array or tags.string or tags.dict))


def _ndim(X: Any) -> int | None:
    ndim = getattr(X, "ndim", None)
    if ndim is not None:
        try:
            return int(ndim)
        except (TypeError, ValueError):
            return None
    if isinstance(X, (list, tuple)):
        try:
            return int(np.ndim(X))
        except ValueError:  # ragged nesting: not a shape to judge here
            return None
    return None


def _duplicate_names(X: Any) -> list:
    columns = getattr(X, "columns", None)
    if columns is None or not hasattr(columns, "duplicated"):
        return []
    try:
        repeated = columns[columns.duplicated()]
    except Exception:  # noqa: BLE001 - a frame library of its own: leave it to the model
        return []
    return list(dict.fromkeys(plain(c) for c in repeated.tolist()))


@functools.lru_cache(maxsize=1)
def _sklearn_refuses_repeated_names() -> bool:
    """Whether the installed scikit-learn refuses a pandas DataFrame with repeated column names
    (1.9.1 does, "Expected unique column names"; 1.6.1 does not).

    Found once per process by its public behaviour: a ``StandardScaler`` fitted on a 2 x 2
    frame whose two columns share one name (the feature-name check every scikit-learn estimator
    runs in ``fit``). Without pandas there is no such frame to refuse: False.
    """
    try:
        import pandas as pd
        from sklearn.preprocessing import StandardScaler
    except ImportError:
        return False
    frame = pd.DataFrame([[0.0, 1.0], [1.0, 0.0]], columns=["a", "a"])
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            StandardScaler().fit(frame)
    except Exception as exc:  # noqa: BLE001 - narwhals' DuplicateError is a ValueError subclass
        return "unique" in str(exc) or "uplicate" in str(exc)
    return False


def _column_transformers(estimator: Any) -> list[tuple[Any, str]]:
    """The scikit-learn ``ColumnTransformer`` steps given ``X`` as it is, with their names as
    the errors say them ("ColumnTransformer in FeatureUnion")."""
    from sklearn.compose import ColumnTransformer

    return [(step, " in ".join([type(step).__name__, *reversed(path)]))
            for step, path in _steps_given_X(estimator) if isinstance(step, ColumnTransformer)]


#: rows of ``X`` transformed again after the fit in :func:`_column_selection_breaks`
_PROBE_ROWS = 5


def _later_repeats_renamed(X: Any) -> Any:
    """A copy of the frame ``X`` whose repeated column names, after their first column, get
    a suffix that no column has (the first column of each name keeps it)."""
    names = [str(c) for c in X.columns]
    taken = set(names)
    seen: set = set()
    new = []
    for c in X.columns:
        if c in seen:
            k = 2
            while f"{c}__{k}" in taken:
                k += 1
            c = f"{c}__{k}"
            taken.add(c)
        seen.add(c)
        new.append(c)
    return X.set_axis(new, axis=1)


def _column_selection_breaks(ct: Any, X: Any, y: Any, frozen: bool) -> bool:
    """Whether a ``ColumnTransformer`` fails on rows of the DataFrame ``X`` (repeated column
    names) that it was fitted on, or gives them other columns than its fit did.

    Inside a ``FrozenEstimator`` (``frozen``) it is used as fitted; otherwise a clone is fitted
    on all of ``X`` (with ``y``), as the wrapper will fit it. A fit that fails says nothing here (the model's own
    fit reports it), nor does a frame other than pandas'."""
    from sklearn.base import clone

    if not (hasattr(X, "iloc") and type(X).__module__.startswith("pandas")):
        return False  # (a Dask frame is not fitted twice here, nor its rows collected)
    head = X.iloc[:_PROBE_ROWS]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if frozen:
            if not hasattr(ct, "transformers_"):
                return False
            fitted, width = ct, None
        else:
            try:
                fitted = clone(ct)
                width = np.shape(fitted.fit_transform(X, y))[1]
            except Exception:  # noqa: BLE001 - the names, or what the model's own fit will say
                # a selection by a repeated name fails in fit ("not unique in dataframe"): the
                # names are the cause where the frame with its later repeats renamed fits
                try:
                    clone(ct).fit(_later_repeats_renamed(X), y)
                except Exception:  # noqa: BLE001 - not the names: the model's fit says why
                    return False
                return True
        try:
            again = fitted.transform(head)
        except Exception:  # noqa: BLE001 - any refusal of the rows it was fitted on
            return True
    return width is not None and np.shape(again)[1] != width


def check_feature_input(X: Any, estimator: Any, y: Any = None) -> None:
    """Refuse a 1-d ``X``, or a DataFrame with duplicate column names, where the estimator's
    first step is a scikit-learn estimator that would refuse it.

    Parameters
    ----------
    X : array-like, DataFrame, list, ...
        The rows given to a wrapper's ``fit``.
    estimator : estimator
        The wrapper's inner estimator.
    y : array-like, default=None
        The labels, for the trial fit of a ``ColumnTransformer`` on a frame with repeated
        column names (a scikit-learn that accepts such frames; see the module's notes).

    Raises
    ------
    ValueError
        Naming ``X``, what was expected, and the step that expects it.

    Examples
    --------
    >>> import numpy as np
    >>> from sklearn.linear_model import LogisticRegression
    >>> check_feature_input(np.zeros((4, 1)), LogisticRegression())  # 2-d: nothing to say
    >>> check_feature_input(np.zeros(4), LogisticRegression())
    Traceback (most recent call last):
    ...
    ValueError: `X` must be 2-d, shape (n_samples, n_features), for LogisticRegression (scikit-learn refuses 1-d input); got a 1-d ndarray of 4 values. For a single feature pass X.reshape(-1, 1), a one-column DataFrame (series.to_frame()) or [[v] for v in X].
    """
    repeated = _duplicate_names(X)
    shown = ", ".join(repr(c) for c in repeated[:5])
    more = f" and {len(repeated) - 5} more" if len(repeated) > 5 else ""
    if repeated and not _sklearn_refuses_repeated_names():
        from sklearn.frozen import FrozenEstimator

        frozen = isinstance(estimator, FrozenEstimator)
        for ct, ct_name in _column_transformers(estimator):
            if _column_selection_breaks(ct, X, y, frozen):
                raise ValueError(
                    f"`X` must have distinct column names for {ct_name} (this scikit-learn's "
                    "ColumnTransformer selects a DataFrame's columns by name, so a repeated "
                    "name brings all its columns and the model fails on them); "
                    f"got {len(repeated)} name(s) used more than once: {shown}{more}. Rename "
                    "or drop the repeated columns."
                )
    refusing = _refusing_step(estimator)
    if refusing is None:
        return
    name = refusing[1]
    if _ndim(X) == 1:
        try:
            n = len(X)
        except TypeError:
            n = None
        got = "" if n is None else f" of {n} values"
        raise ValueError(
            f"`X` must be 2-d, shape (n_samples, n_features), for {name} (scikit-learn refuses "
            f"1-d input); got a 1-d {type(X).__name__}{got}. "
            "For a single feature pass X.reshape(-1, 1), a one-column DataFrame "
            "(series.to_frame()) or [[v] for v in X]."
        )
    if repeated and _sklearn_refuses_repeated_names():
        raise ValueError(
            f"`X` must have distinct column names for {name} (this scikit-learn refuses "
            f"repeated ones); got {len(repeated)} name(s) used more than once: {shown}{more}. "
            "Rename or drop the repeated columns."
        )
