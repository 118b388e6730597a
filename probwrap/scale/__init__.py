"""Scale: mergeable score tallies, and Dask or Spark input to the wrappers.

A :class:`ScoreTally` holds weighted label counts per fine bin of the log-odds scale. Tallies of
disjoint chunks merge by addition, so data of any size — NumPy chunks, or Dask arrays and
DataFrames on a cluster, Spark DataFrames partition by partition — reduce to a tally that fits
in memory. :meth:`ScoreTally.to_rows`
turns it into weighted rows that the calibration maps, the cutoff search, the metrics and the
prior estimators accept through their ``sample_weight``.

The core of this module needs only NumPy; Dask or PySpark is imported only when such input is
given. :func:`add_predictions` scores a Spark DataFrame with a fitted wrapper.
"""

from .._validation import plain
from ._build import tally_scores
from ._tally import DEFAULT_RESOLUTION, BinnedFitWarning, ScoreTally, merge_tallies

__all__ = [
    "DEFAULT_RESOLUTION",
    "BinnedFitWarning",
    "ScoreTally",
    "add_predictions",
    "merge_tallies",
    "tally_model",
    "tally_scores",
]


def add_predictions(model, frame, *, prefix: str = ""):
    """Add a fitted classifier's probability and action columns to a Spark DataFrame.

    The model is broadcast to the executors once, and one pandas UDF scores the rows where they
    live, batch by batch; nothing is computed until Spark evaluates the returned frame.

    Parameters
    ----------
    model : fitted classifier
        A probwrap wrapper (or any fitted classifier with ``predict_proba`` and ``predict``).
    frame : pyspark.sql.DataFrame
        Rows to score; the model receives the columns named by its ``feature_names_in_`` or,
        without those, every column in order.
    prefix : str, default=""
        Put before the names of the added columns.

    Returns
    -------
    pyspark.sql.DataFrame
        ``frame`` with ``probability`` (binary: of ``classes_[1]``; multiclass: one double
        column per class, ``probability_<class>``, in ``classes_`` order; for a
        :class:`~probwrap.PriorShiftWrapper` calibrated but not adjusted),
        ``adjusted_probability`` (``adjusted_probability_<class>``; prior-shift wrappers only)
        and ``action`` (``predict``).

    Raises
    ------
    ValueError
        At the call, from the frame's schema: a feature column of the model is missing, the
        columns do not match ``n_features_in_``, or a feature column holds no single value per
        row (an array, map, struct, bytes or a Spark ML vector).
    pyspark.errors.PySparkException
        When Spark evaluates the frame (``collect``, ``write``, ...), for a batch of rows the
        model cannot score or whose probabilities are NaN, infinite or outside [0, 1]: one
        message starting "probwrap add_predictions: <model> could not score a batch of <n>
        rows", then the model's own error (PySpark 4: ``SparkRuntimeException``
        ``[USER_RAISED_EXCEPTION]``; PySpark 3.5: a ``PythonException`` with a one-frame
        traceback).

    Examples
    --------
    >>> from probwrap.scale import add_predictions
    >>> scored = add_predictions(policy, parcels)  # doctest: +SKIP
    >>> scored.select("probability", "action").show(3)  # doctest: +SKIP
    """
    from ._spark import add_predictions as _add

    return _add(model, frame, prefix=prefix)


def tally_model(estimator, X, y=None, *, sample_weight=None, response="predict_proba",
                resolution=DEFAULT_RESOLUTION) -> ScoreTally:
    """Tally a fitted binary classifier's log-odds on Dask or Spark rows ``X``, block by block.

    Parameters
    ----------
    estimator : fitted binary classifier
        Used as is (for example a :class:`~sklearn.frozen.FrozenEstimator`).
    X : dask array, dask DataFrame or Spark DataFrame
        Rows, in whatever form the estimator accepts per block. A Spark DataFrame is tallied
        partition by partition with ``mapInPandas``, the estimator broadcast once; it receives
        the columns of its ``feature_names_in_`` (or all columns but ``y`` and
        ``sample_weight``).
    y : dask array / Series or array-like, or str, default=None
        Labels (from ``estimator.classes_``), partitioned like ``X``; None for unlabelled rows.
        With a Spark DataFrame, the name of its label column.
    sample_weight : dask array / Series or array-like, or str, default=None
        Row weights (a column name with a Spark DataFrame); beyond about 1e+-77 they are
        tallied divided by a power of two (``weight_unit``), with a ``WeightScaleWarning``.
    response : {"predict_proba", "decision_function"}, default="predict_proba"
        Probabilities become log-odds ``log p1 - log p0``; decision values are used as they are.
    resolution : float, default=1e-3

    Returns
    -------
    ScoreTally
        Labels are indices into ``estimator.classes_``.
    """
    from ._dask import dask_tally_of_model, is_dask_collection
    from ._spark import is_spark_frame
    from ._tally import _check_resolution, warn_weight_unit

    spark = is_spark_frame(X)
    if not (spark or is_dask_collection(X)):
        raise ValueError(
            f"`X` must be a Dask array or DataFrame, or a Spark DataFrame; got {type(X).__name__}."
        )
    if response not in ("predict_proba", "decision_function"):
        raise ValueError(
            f"`response` must be 'predict_proba' or 'decision_function'; got {plain(response)!r}."
        )
    if len(getattr(estimator, "classes_", ())) != 2:
        raise ValueError("`estimator` must be a fitted binary classifier (two classes_).")
    if spark:
        from ._spark import spark_tally_of_model

        tally = spark_tally_of_model(
            estimator, response, X, y, sample_weight, resolution=_check_resolution(resolution)
        )
    else:
        tally = dask_tally_of_model(
            estimator, response, X, y, sample_weight, resolution=_check_resolution(resolution)
        )
    # weights beyond about 1e+-77 are tallied divided by a power of two (weight_unit)
    warn_weight_unit(tally.weight_unit, "tally_model", tally.total_weight, stacklevel=3)
    return tally
