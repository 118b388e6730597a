"""The feature check run by ``PriorShiftWrapper.adapt`` (``feature_check_rows``).

``fit`` keeps a bounded, seeded, class-stratified sample of the labelled rows' numeric features
(at most ``feature_check_rows`` rows, 8 bytes a value); ``adapt`` then compares the new rows'
features (at most as many rows, drawn the same way) with that sample re-weighted to the
wrapper's maximum-likelihood class shares, by :func:`probwrap.shift.feature_mixture_misfit`,
stores the result as ``feature_check_`` and warns with
:class:`~probwrap.shift.FeatureMixtureMisfitWarning`, naming the columns that differ most, or,
where it found nothing on too few effective rows to see a moderate difference (``power`` below
0.5; the labelled side re-weighted to shares that lean on a class of few rows), with
:class:`~probwrap.shift.FeatureCheckPowerWarning`
(``benchmarks/shift_natural_splits.py``; docs/evidence/prior_shift_log.md, "The feature
check's power on few labelled rows").
"""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np

from ._heldout import _is_dask
from ._validation import plain
from .shift._feature_mix import (
    FEATURE_MISFIT_LEVEL,
    FeatureCheckPowerWarning,
    FeatureMixtureMisfitWarning,
    feature_mixture_misfit,
    low_power_message,
    misfit_message,
)

#: the fewest rows ``feature_check_rows`` may keep (each of the two folds needs rows of both
#: sides, and a class needs a few rows for its re-weighting to mean anything)
MIN_FEATURE_CHECK_ROWS = 20
#: at least this many kept rows of every class that has them (a stratified sample at
#: proportional allocation would keep none of a rare class)
MIN_CLASS_KEPT = 5


def check_feature_check_rows(value: Any) -> int | None:
    """Validate ``feature_check_rows``: None (off) or a whole number of at least 20."""
    if value is None:
        return None
    if (isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral)
            or value < MIN_FEATURE_CHECK_ROWS):
        raise ValueError(
            "`feature_check_rows` must be None (no feature check in adapt) or the number of "
            f"labelled rows to keep for it, a whole number of at least {MIN_FEATURE_CHECK_ROWS} "
            f"(2000 is a good start); got {plain(value)!r}.")
    return int(value)


def _seed(random_state: Any) -> int:
    if isinstance(random_state, numbers.Integral) and not isinstance(random_state, bool):
        return int(random_state) % (2**32)
    return 0


def _numeric_rows(X: Any, what: str, names: tuple[str, ...] | None = None
                  ) -> tuple[np.ndarray, tuple[str, ...] | None]:
    """The rows as a float matrix and a DataFrame's column names (None for arrays); a clear
    ValueError naming ``feature_check_rows`` where they are not numeric and finite."""
    import scipy.sparse as sp

    if sp.issparse(X):
        raise ValueError(
            f"`feature_check_rows`: {what} is a sparse matrix; the feature check compares "
            "dense numeric columns. Leave feature_check_rows=None, or run "
            "probwrap.shift.feature_mixture_misfit yourself on a few dense columns.")
    cols = None
    if hasattr(X, "iloc") and hasattr(X, "columns"):
        cols = tuple(str(c) for c in X.columns)
        if names is not None and cols != names and set(names) <= set(cols):
            by_name = {str(c): c for c in X.columns}  # the fit's columns, in the fit's order
            X = X[[by_name[n] for n in names]]
            cols = names
        bad = [str(c) for c in X.columns
               if not (np.issubdtype(np.asarray(X[c]).dtype, np.number)
                       or np.asarray(X[c]).dtype == bool)]
        if bad:
            raise ValueError(
                f"`feature_check_rows`: {what} has non-numeric columns {bad[:5]}; the feature "
                "check compares numeric columns. Encode them, or leave "
                "feature_check_rows=None.")
    try:
        a = np.asarray(X, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(
            f"`feature_check_rows`: {what} is not numeric; the feature check compares numeric "
            "columns. Encode them, or leave feature_check_rows=None.") from None
    if a.ndim != 2:
        raise ValueError(f"`feature_check_rows`: {what} must be 2-D (rows, columns); got "
                         f"shape {a.shape}.")
    if not np.all(np.isfinite(a)):
        where = np.flatnonzero(~np.all(np.isfinite(a), axis=0))
        label = [cols[j] if cols else f"x{j}" for j in where[:5]]
        raise ValueError(
            f"`feature_check_rows`: {what} has missing or infinite values in columns {label}; "
            "the feature check needs finite numbers. Impute them first, or leave "
            "feature_check_rows=None.")
    return a, cols


def keep_feature_rows(wrapper: Any, X: Any, y: Any, sample_weight: Any) -> None:
    """At ``fit``: keep at most ``feature_check_rows`` labelled rows (every class with rows of
    positive weight keeps at least ``MIN_CLASS_KEPT`` or all it has; the rest in proportion,
    uniformly within a class, seeded by ``random_state``), their labels and weights."""
    cap = check_feature_check_rows(wrapper.feature_check_rows)
    wrapper._feature_sample = None
    if cap is None:
        return
    A, cols = _numeric_rows(X, "X passed to fit")
    y = np.asarray(y)
    w = np.ones(A.shape[0]) if sample_weight is None else np.asarray(sample_weight, float)
    rows = np.flatnonzero(w > 0)
    if rows.size > cap:
        rng = np.random.default_rng(_seed(wrapper.random_state))
        labels, inverse = np.unique(y[rows], return_inverse=True)
        counts = np.bincount(inverse, minlength=labels.size)
        # every class first its floor (5 rows, or all it has; fewer where the classes are
        # many), then the rest of the cap in proportion to the rows each has left
        want = np.minimum(counts, max(1, min(MIN_CLASS_KEPT, cap // labels.size)))
        left = counts - want
        want += np.floor((cap - want.sum()) * left / max(left.sum(), 1)).astype(int)
        # hand out what rounding left (largest classes first), never beyond a class's rows
        for c in np.argsort(-counts, kind="stable"):
            extra = min(cap - int(want.sum()), int(counts[c] - want[c]))
            if extra > 0:
                want[c] += extra
        rows = np.sort(np.concatenate([
            rng.choice(rows[inverse == c], int(want[c]), replace=False)
            for c in range(labels.size)]))
    names = cols if cols is not None else tuple(f"x{j}" for j in range(A.shape[1]))
    wrapper._feature_sample = (A[rows].copy(), y[rows].copy(),
                               None if sample_weight is None else w[rows].copy(), names)


def refuse_distributed(wrapper: Any, X: Any, sample_weight: Any) -> None:
    """``adapt`` on Dask or Spark rows with the feature check on: a clear refusal."""
    if getattr(wrapper, "_feature_sample", None) is None:
        return
    if _is_dask(X) or _is_dask(sample_weight):
        raise ValueError(
            "`feature_check_rows` is set, but adapt got Dask or Spark rows: the feature check "
            "runs on rows in memory only. Pass the rows as a NumPy array or pandas DataFrame, "
            "or refit with feature_check_rows=None to adapt on Dask or Spark rows.")


def run_feature_check(wrapper: Any, X: Any, sample_weight: Any, cells: Any) -> None:
    """At the end of ``adapt``: the check, ``feature_check_`` and the warning."""
    kept = getattr(wrapper, "_feature_sample", None)
    wrapper.feature_check_ = None
    if kept is None:
        return
    X_l, y_l, w_l, names = kept
    if cells is not None:
        warnings.warn(
            "PriorShiftWrapper.adapt: the feature check (feature_check_rows) counts every row "
            "as independent, so it is not run with `cells`; feature_check_ is None. Run "
            "probwrap.shift.feature_mixture_misfit on one row per cell yourself.",
            UserWarning, stacklevel=3)
        return
    try:
        A, _ = _numeric_rows(X, "X passed to adapt", names)
        if A.shape[1] != X_l.shape[1]:
            raise ValueError(f"X passed to adapt has {A.shape[1]} columns, the kept labelled "
                             f"rows {X_l.shape[1]}.")
        w = None if sample_weight is None else np.asarray(sample_weight, float)
        cap = int(wrapper.feature_check_rows)
        if A.shape[0] > cap:  # at most as many new rows, drawn uniformly (seeded)
            rng = np.random.default_rng(_seed(wrapper.random_state) + 1)
            pick = np.sort(rng.choice(A.shape[0], cap, replace=False))
            A, w = A[pick], None if w is None else w[pick]
        result = feature_mixture_misfit(
            X_l, y_l, A, prior=wrapper, sample_weight=w, labelled_sample_weight=w_l,
            level=None, random_state=_seed(wrapper.random_state), feature_names=names)
    except ValueError as err:
        warnings.warn(
            f"PriorShiftWrapper.adapt: the feature check (feature_check_rows) could not run "
            f"on these rows ({err}); feature_check_ is None.", UserWarning, stacklevel=3)
        return
    wrapper.feature_check_ = result
    if result.combined_pvalue < FEATURE_MISFIT_LEVEL:
        warnings.warn(misfit_message("PriorShiftWrapper.adapt", result),
                      FeatureMixtureMisfitWarning, stacklevel=3)
    elif result.power_note:
        warnings.warn(low_power_message("PriorShiftWrapper.adapt", result),
                      FeatureCheckPowerWarning, stacklevel=3)


def _batch_labels(n: int, batches: Any, batch_size: Any) -> np.ndarray:
    """Each row's batch as :func:`probwrap.shift.prior_by_batch` reads it."""
    if batch_size is not None:
        return np.arange(n) // int(batch_size)
    labels = np.asarray(batches)
    return labels.astype(str) if labels.dtype == object else labels


def with_feature_fields(table: np.ndarray, pvalues: np.ndarray, results: list) -> np.ndarray:
    """``table`` with two more fields: ``feature_pvalue`` (each batch's combined p-value, NaN
    where the check did not run) and ``feature_check`` (its
    :class:`~probwrap.shift.FeatureMixtureMisfit`, or None)."""
    out = np.zeros(table.shape[0], dtype=table.dtype.descr + [("feature_pvalue", float),
                                                             ("feature_check", object)])
    for name in table.dtype.names:
        out[name] = table[name]
    out["feature_pvalue"] = pvalues
    for i, res in enumerate(results):
        out["feature_check"][i] = res
    return out


def monitor_feature_checks(wrapper: Any, X: Any, table: np.ndarray, batches: Any,
                           batch_size: Any, sample_weight: Any, cells: Any) -> np.ndarray:
    """``monitor`` with the feature check on (``feature_check_rows``; since 5 December 2026): each
    batch's rows against the kept labelled rows re-weighted to the batch's maximum-likelihood shares
    (``ml_prior``), as ``adapt`` checks its rows (at most ``feature_check_rows`` of them, drawn
    with ``adapt``'s seed, so a batch gets ``adapt``'s result on the same rows). Returns the
    table with ``feature_pvalue`` and ``feature_check`` (:func:`with_feature_fields`); warns
    once with :class:`~probwrap.shift.FeatureMixtureMisfitWarning`, naming the batches whose
    combined p-value is below 1 % and giving the first one's columns. The table is returned
    unchanged where the check is off."""
    kept = getattr(wrapper, "_feature_sample", None)
    if kept is None or table.shape[0] == 0:
        return table
    n_b = table.shape[0]
    none = np.full(n_b, np.nan), [None] * n_b
    if cells is not None:
        warnings.warn(
            "PriorShiftWrapper.monitor: the feature check (feature_check_rows) counts every "
            "row as independent, so it is not run with `cells`; the table's feature_pvalue is "
            "NaN. Run probwrap.shift.feature_mixture_misfit on one row per cell yourself.",
            UserWarning, stacklevel=3)
        return with_feature_fields(table, *none)
    X_l, y_l, w_l, names = kept
    try:
        A, _ = _numeric_rows(X, "X passed to monitor", names)
        if A.shape[1] != X_l.shape[1]:
            raise ValueError(f"X passed to monitor has {A.shape[1]} columns, the kept labelled "
                             f"rows {X_l.shape[1]}.")
    except ValueError as err:
        warnings.warn(
            f"PriorShiftWrapper.monitor: the feature check (feature_check_rows) could not run "
            f"on these rows ({err}); the table's feature_pvalue is NaN.", UserWarning,
            stacklevel=3)
        return with_feature_fields(table, *none)
    labels = _batch_labels(A.shape[0], batches, batch_size)
    w = None if sample_weight is None else np.asarray(sample_weight, float)
    cap = int(wrapper.feature_check_rows)
    seed = _seed(wrapper.random_state)
    pvalues, results = none[0].copy(), list(none[1])
    flagged, skipped, weak = [], [], []
    for i, b in enumerate(table["batch"]):
        rows = np.flatnonzero(labels == b)
        Ab, wb = A[rows], None if w is None else w[rows]
        if Ab.shape[0] > cap:  # as adapt draws from its rows
            pick = np.sort(np.random.default_rng(seed + 1).choice(Ab.shape[0], cap,
                                                                  replace=False))
            Ab, wb = Ab[pick], None if wb is None else wb[pick]
        prior = np.asarray(table["ml_prior"][i], float)
        if not np.all(np.isfinite(prior)):
            prior = np.asarray(table["prior"][i], float)
        try:
            res = feature_mixture_misfit(
                X_l, y_l, Ab, prior=prior, sample_weight=wb, labelled_sample_weight=w_l,
                level=None, random_state=seed, feature_names=names)
        except ValueError as err:
            skipped.append((b, str(err)))
            continue
        results[i], pvalues[i] = res, res.combined_pvalue
        if res.combined_pvalue < FEATURE_MISFIT_LEVEL:
            flagged.append((b, res))
        elif res.power_note:
            weak.append((b, res))
    if skipped:
        which = ", ".join(str(plain(b)) for b, _ in skipped[:5]) + (
            ", ..." if len(skipped) > 5 else "")
        warnings.warn(
            f"PriorShiftWrapper.monitor: the feature check (feature_check_rows) could not run "
            f"on {len(skipped)} of {n_b} batches (batch {which}; first: {skipped[0][1]}); their "
            "feature_pvalue is NaN.", UserWarning, stacklevel=3)
    if flagged:
        which = ", ".join(str(plain(b)) for b, _ in flagged[:8]) + (
            ", ..." if len(flagged) > 8 else "")
        b0, res0 = flagged[0]
        warnings.warn(misfit_message(
            f"PriorShiftWrapper.monitor: in {len(flagged)} of {n_b} batches (batch {which}) "
            f"the features do not fit the class mixture at {FEATURE_MISFIT_LEVEL:.0%} (each "
            "batch tested on its own: about one ordinary batch in a hundred is named by "
            f"chance); first, batch {plain(b0)}", res0), FeatureMixtureMisfitWarning,
            stacklevel=3)
    if weak:
        which = ", ".join(str(plain(b)) for b, _ in weak[:8]) + (
            ", ..." if len(weak) > 8 else "")
        b0, res0 = weak[0]
        warnings.warn(low_power_message(
            f"PriorShiftWrapper.monitor: in {len(weak)} of {n_b} batches (batch {which}) the "
            f"feature check's power is low; first, batch {plain(b0)}", res0),
            FeatureCheckPowerWarning, stacklevel=3)
    return with_feature_fields(table, pvalues, results)


def skip_distributed_monitor(wrapper: Any) -> None:
    """``monitor`` on Dask or Spark rows with the feature check on: said, not run (the check
    compares rows in memory; a batch's rows stay where they live)."""
    if getattr(wrapper, "_feature_sample", None) is None:
        return
    warnings.warn(
        "PriorShiftWrapper.monitor: the feature check (feature_check_rows) runs on rows in "
        "memory only and is not run on Dask or Spark rows; the table has no feature_pvalue. "
        "Collect a batch's rows and call monitor (or adapt) on them for it.",
        UserWarning, stacklevel=3)
