"""Spark input: tallies built partition by partition, and scoring with pandas UDFs.

Everything here imports PySpark lazily; probwrap itself never needs it. The rows of a Spark
DataFrame reach Python in Arrow batches inside the executors (``mapInPandas``); each partition
turns its rows into one small :class:`~probwrap.scale.ScoreTally` there, and only those tallies
travel to the driver, where they are merged by addition. Fitted models go to the executors as
Spark broadcast variables (sent once, read once per Python worker).

With a Spark DataFrame ``X``, labels, weights and batch labels are *columns of* ``X`` named by a
string (Spark rows have no order, so a separate array could not be matched to them); the
estimator receives the columns named by its ``feature_names_in_`` or, without those, every other
column in frame order.
"""

from __future__ import annotations

import pickle
from typing import Any

import numpy as np

from ._tally import (
    DEFAULT_RESOLUTION,
    ScoreTally,
    _check_resolution,
    _tally_block,
    merge_tallies,
    replicate_seed,
)

__all__ = [
    "add_predictions",
    "heldout_from_spark",
    "is_spark_frame",
    "monitor_spark",
    "spark_tally_counts",
    "spark_tally_of_model",
    "spark_tally_scores",
    "unlabelled_proba_from_spark",
]

#: Rows gathered from Arrow batches before one chunk is tallied (bounds an executor's memory at a
#: few tens of MB per task while keeping the number of merges per partition small).
CHUNK_ROWS = 1_000_000


def is_spark_frame(obj: Any) -> bool:
    """Whether ``obj`` is a PySpark DataFrame (classic or Connect), without importing PySpark."""
    return type(obj).__module__.startswith("pyspark.sql") and hasattr(obj, "mapInPandas")


def _import_pyspark():
    try:
        import pyspark  # noqa: F401
        from pyspark.sql import functions as F
        from pyspark.sql import types as T
    except ImportError as exc:  # pragma: no cover - pyspark is installed in the test extra
        raise ImportError(
            "Spark input needs the optional dependency pyspark: pip install 'probwrap[spark]'."
        ) from exc
    return F, T


class _Held:
    """Stand-in for a broadcast variable where the session has no SparkContext (Spark Connect)."""

    def __init__(self, value: Any) -> None:
        self.value = value


def _broadcast(frame: Any, value: Any) -> Any:
    """Send ``value`` to the executors once (a Spark broadcast variable)."""
    try:
        context = frame.sparkSession.sparkContext
    except Exception:  # Spark Connect: no SparkContext; the value travels with the function
        return _Held(value)
    return context.broadcast(value)


def _column(frame: Any, value: Any, what: str, *, required: bool = False) -> str | None:
    """A column name of ``frame`` given for ``what`` (labels, weights, batches), validated."""
    if value is None:
        if required:
            raise ValueError(
                f"With a Spark DataFrame, `{what}` must name a column of it; got None."
            )
        return None
    if not isinstance(value, str):
        raise ValueError(
            f"With a Spark DataFrame, `{what}` must be the name of one of its columns (a str): "
            f"Spark rows have no order, so values given apart from the frame cannot be matched "
            f"to its rows; got {type(value).__name__}."
        )
    if value not in frame.columns:
        raise ValueError(
            f"`{what}`={value!r} is not a column of the Spark DataFrame; its columns are "
            f"{frame.columns}."
        )
    return value


def _feature_columns(estimator: Any, frame: Any, exclude: list) -> tuple[list, bool]:
    """Columns handed to ``estimator`` and whether they go as a pandas DataFrame (named)."""
    names = getattr(estimator, "feature_names_in_", None)
    if names is not None:
        names = [str(c) for c in names]
        missing = [c for c in names if c not in frame.columns]
        if missing:
            raise ValueError(
                f"The Spark DataFrame lacks the estimator's feature columns {missing[:5]}; "
                f"its columns are {frame.columns}."
            )
        clash = [c for c in exclude if c in names]
        if clash:
            raise ValueError(
                f"Column {clash[0]!r} is named as labels, weights or batches but is also one of "
                "the estimator's features."
            )
        return names, True
    cols = [c for c in frame.columns if c not in exclude]
    n_in = getattr(estimator, "n_features_in_", None)
    if n_in is not None and len(cols) != n_in:
        raise ValueError(
            f"The Spark DataFrame has {len(cols)} feature columns {cols[:5]}... besides the "
            f"named ones, but the estimator expects {n_in} features; select its feature columns "
            "(and the label / weight / batch columns) first."
        )
    if not cols:
        raise ValueError("The Spark DataFrame has no feature columns besides the named ones.")
    return cols, False


def _features(pdf: Any, columns: list, named: bool) -> Any:
    part = pdf[columns]
    return part if named else part.to_numpy()


def _label_index(classes: np.ndarray, yb: np.ndarray) -> np.ndarray:
    """Indices of the labels ``yb`` in the sorted ``classes`` (unknown labels are refused)."""
    pos = np.clip(np.searchsorted(classes, yb), 0, classes.shape[0] - 1)
    bad = classes[pos] != yb
    if np.any(bad):
        raise ValueError(
            f"`y` has labels {np.unique(yb[bad].astype(str))[:5].tolist()} that the frozen "
            f"estimator does not know; its classes are {classes.tolist()}."
        )
    return pos


# -- tallies partition by partition --------------------------------------------------------------
def _tally_partitions(
    frame: Any,
    columns: list,
    convert: Any,
    payload: Any,
    n_labels: int,
    resolution: float,
    n_replicates: int,
    seed: int,
    stream: int,
) -> ScoreTally:
    """Merge of one tally per partition of ``frame[columns]``.

    ``convert(pdf, payload_value)`` turns one Arrow batch (a pandas DataFrame) into arrays
    ``(scores, label_index or None, weights or None)``; batches are gathered into chunks of
    ``CHUNK_ROWS`` rows, and chunk ``j`` of partition ``p`` draws its bootstrap replicates from
    ``numpy.random.default_rng([seed, stream, p, j])``.
    """
    import pandas as pd

    shared = _broadcast(frame, payload)
    labelled_cols = n_labels

    def tally_partition(batches):
        from pyspark import TaskContext

        context = TaskContext.get()
        part = context.partitionId() if context is not None else 0
        value = shared.value
        total = None
        held: list = []
        n_held = 0
        chunk = 0

        def flush():
            s = np.concatenate([h[0] for h in held])
            y = None if held[0][1] is None else np.concatenate([h[1] for h in held])
            w = None if held[0][2] is None else np.concatenate([h[2] for h in held])
            return _tally_block(
                s, y, w, labelled_cols, resolution, n_replicates, [seed, stream, part, chunk]
            )

        for pdf in batches:
            if len(pdf) == 0:
                continue
            held.append(convert(pdf, value))
            n_held += len(pdf)
            if n_held >= CHUNK_ROWS:
                t = flush()
                total = t if total is None else total.merge(t)
                held, n_held, chunk = [], 0, chunk + 1
        if held:
            t = flush()
            total = t if total is None else total.merge(t)
        if total is not None:
            yield pd.DataFrame({"partition": [part], "tally": [pickle.dumps(total)]})

    rows = frame.select(*columns).mapInPandas(
        tally_partition, "partition int, tally binary"
    ).collect()
    if not rows:
        raise ValueError("The Spark DataFrame has no rows; a tally needs at least one row.")
    rows = sorted(rows, key=lambda r: r["partition"])
    return merge_tallies(pickle.loads(bytes(r["tally"])) for r in rows)


def _convert_scores(pdf: Any, spec: tuple) -> tuple:
    score, label, weight = spec
    s = pdf[score].to_numpy(dtype=float, na_value=np.nan)
    y = None if label is None else pdf[label].to_numpy()
    w = None if weight is None else pdf[weight].to_numpy(dtype=float, na_value=np.nan)
    return s, y, w


def _score_column(frame: Any, named: list, what: str) -> str:
    rest = [c for c in frame.columns if c not in named]
    if len(rest) != 1:
        raise ValueError(
            f"A Spark DataFrame given as `{what}` must hold exactly one column besides the named "
            f"label / weight columns: the scores. It has {rest}; select the score column and the "
            "named columns first, for example frame.select('log_odds', 'damaged')."
        )
    return rest[0]


def spark_tally_scores(
    frame: Any,
    y: Any,
    sample_weight: Any,
    n_labels: int,
    resolution: float,
    n_replicates: int = 0,
    seed: int = 0,
) -> ScoreTally:
    """Tally of a Spark DataFrame of scores (the one column not named by ``y`` / weights)."""
    _import_pyspark()
    label = _column(frame, y, "y")
    weight = _column(frame, sample_weight, "sample_weight")
    named = [c for c in (label, weight) if c is not None]
    score = _score_column(frame, named, "scores")
    tally = _tally_partitions(
        frame, [score, *named], _convert_scores, (score, label, weight),
        n_labels if label is not None else 1, resolution, n_replicates, seed, 0,
    )
    if tally.total_weight <= 0:
        raise ValueError("`sample_weight` is zero for every row; at least one must be positive.")
    return tally


def _convert_counts(pdf: Any, spec: tuple) -> tuple:
    score, succ, trials, check = spec
    k, n = check(pdf[succ].to_numpy(dtype=float, na_value=np.nan),
                 pdf[trials].to_numpy(dtype=float, na_value=np.nan))
    s = pdf[score].to_numpy(dtype=float, na_value=np.nan)
    return np.repeat(s, 2), np.tile([1, 0], k.shape[0]), np.column_stack([k, n - k]).ravel()


def spark_tally_counts(
    frame: Any, successes: Any, trials: Any, resolution: float, check: Any
) -> ScoreTally:
    """Tally of per-group scores and k-of-n counts held in a Spark DataFrame.

    ``check(successes, trials)`` validates the counts of each batch (as in memory).
    """
    _import_pyspark()
    succ = _column(frame, successes, "successes", required=True)
    tri = _column(frame, trials, "trials", required=True)
    score = _score_column(frame, [succ, tri], "scores")
    return _tally_partitions(
        frame, [score, succ, tri], _convert_counts, (score, succ, tri, check), 2,
        _check_resolution(resolution), 0, 0, 0,
    )


def _convert_model(pdf: Any, spec: tuple) -> tuple:
    from ._dask import _binary_scores

    estimator, response, classes, features, named, label, weight = spec
    s = _binary_scores(getattr(estimator, response)(_features(pdf, features, named)), response)
    y = None if label is None else _label_index(classes, pdf[label].to_numpy())
    w = None if weight is None else pdf[weight].to_numpy(dtype=float, na_value=np.nan)
    return s, y, w


def spark_tally_of_model(
    estimator: Any,
    response: str,
    frame: Any,
    y: Any = None,
    sample_weight: Any = None,
    *,
    resolution: float = DEFAULT_RESOLUTION,
    n_replicates: int = 0,
    seed: int = 0,
    stream: int = 0,
) -> ScoreTally:
    """Tally of a fitted binary model's log-odds on the rows of a Spark DataFrame.

    The model is broadcast once; each partition predicts its own rows and tallies them.
    """
    _import_pyspark()
    classes = np.asarray(estimator.classes_)
    if not np.array_equal(np.argsort(classes), np.arange(classes.shape[0])):
        raise ValueError("The frozen estimator's classes_ must be sorted (as scikit-learn sorts).")
    label = _column(frame, y, "y")
    weight = _column(frame, sample_weight, "sample_weight")
    named_cols = [c for c in (label, weight) if c is not None]
    features, named = _feature_columns(estimator, frame, named_cols)
    spec = (estimator, response, classes, features, named, label, weight)
    return _tally_partitions(
        frame, [*features, *named_cols], _convert_model, spec,
        2 if label is not None else 1, resolution, n_replicates, seed, stream,
    )


# -- the wrappers' Spark path --------------------------------------------------------------------
def _frozen_binary(owner: Any) -> Any:
    from sklearn.frozen import FrozenEstimator

    estimator = owner.estimator
    if not isinstance(estimator, FrozenEstimator):
        raise ValueError(
            "Spark input needs an already fitted estimator wrapped in "
            "sklearn.frozen.FrozenEstimator: the wrappers do not fit models on Spark data, they "
            f"only tally a frozen model's predictions; got {type(estimator).__name__}."
        )
    if len(getattr(estimator, "classes_", ())) != 2:
        raise ValueError(
            "Spark input is supported for binary classifiers; the frozen estimator has "
            f"{len(getattr(estimator, 'classes_', ()))} classes. Tally each class's one-vs-rest "
            "scores with probwrap.scale.tally_scores instead."
        )
    return estimator


def heldout_from_spark(owner: Any, X: Any, y: Any, sample_weight: Any, response: str):
    """Held-out predictions of a frozen binary estimator on a Spark DataFrame, as tally rows.

    ``y`` (and ``sample_weight``) name columns of ``X``. Same result object as the Dask path.
    """
    from ._dask import heldout_rows_from_tally

    estimator = _frozen_binary(owner)
    if y is None:
        raise ValueError(
            f"{type(owner).__name__} requires y to be passed, but the target y is None; with a "
            "Spark DataFrame give the name of its label column."
        )
    n_rep = int(owner._dask_replicates()) if hasattr(owner, "_dask_replicates") else 0
    seed = replicate_seed(getattr(owner, "random_state", None)) if n_rep else 0
    from ._dask import owner_resolution

    tally = spark_tally_of_model(
        estimator, response, X, _column(X, y, "y", required=True), sample_weight,
        resolution=owner_resolution(owner), n_replicates=n_rep, seed=seed, stream=0,
    )
    return heldout_rows_from_tally(owner, estimator, tally, response)


def unlabelled_proba_from_spark(
    estimator: Any,
    X: Any,
    sample_weight: Any = None,
    *,
    n_replicates: int = 0,
    random_state: Any = None,
    resolution: float = DEFAULT_RESOLUTION,
):
    """Binary posteriors of an unlabelled Spark DataFrame as tally rows: ``(proba, w, tally)``."""
    classes = np.asarray(estimator.classes_)
    if classes.shape[0] != 2:
        raise ValueError(
            f"Spark input is supported for binary classifiers; the estimator has "
            f"{classes.shape[0]} classes."
        )
    seed = replicate_seed(random_state) if n_replicates else 0
    tally = spark_tally_of_model(
        estimator, "predict_proba", X, None, sample_weight, resolution=resolution,
        n_replicates=n_replicates, seed=seed, stream=1,
    )
    if tally.total_weight <= 0:
        raise ValueError("`sample_weight` is zero for every row; at least one must be positive.")
    proba, w = tally.to_scores(proba=True)
    return proba, w, tally


def _spark_type(T: Any, dtype: np.dtype) -> Any:
    kind = np.dtype(dtype).kind
    if kind == "b":
        return T.BooleanType()
    if kind in "iu":
        return T.LongType()
    if kind == "f":
        return T.DoubleType()
    return T.StringType()


def _python_value(T: Any, spark_type: Any, values: np.ndarray) -> Any:
    if isinstance(spark_type, T.StringType):
        return values.astype(str)
    return values


def monitor_spark(owner: Any, X: Any, batches: Any, batch_size: Any, sample_weight: Any):
    """Per-batch prior estimates of an unlabelled Spark DataFrame, one batch per label of a column.

    ``batches`` names the batch column. Each batch is estimated on an executor (its rows
    gathered there by ``groupBy(...).applyInPandas``), its rows put in a canonical order (by
    predicted probability, then weight) so the result does not depend on how Spark partitions
    them. Batches are reported in sorted order of their labels, and the bootstrap seeds are drawn
    in that order as :func:`probwrap.shift.prior_by_batch` draws them, so the table equals
    ``monitor`` in memory on the rows sorted by batch and, within a batch, by probability.
    """
    from sklearn.utils import check_random_state

    _, T = _import_pyspark()
    if batch_size is not None:
        raise ValueError(
            "`batch_size` is not supported for a Spark DataFrame (its rows have no order); give "
            "`batches`, the name of the batch column (a week, a date, a shift)."
        )
    batch_col = _column(X, batches, "batches", required=True)
    weight = _column(X, sample_weight, "sample_weight")
    est = owner.prior_estimator_
    named_cols = [c for c in (batch_col, weight) if c is not None]
    features, named = _feature_columns(owner.estimator_, X, named_cols)
    labels = [r[0] for r in X.select(batch_col).distinct().collect()]
    if any(v is None for v in labels):
        raise ValueError(f"The batch column {batch_col!r} has missing values; label every row.")
    labels = sorted(labels)
    rng = check_random_state(est.random_state)
    seeds = {lab: rng.randint(2**31 - 1) for lab in labels}
    source = getattr(owner, "_source_tally", None)
    shared = _broadcast(X, (owner.estimator_, est, source, seeds))
    batch_type = X.schema[batch_col].dataType
    schema = T.StructType([
        T.StructField("batch", batch_type),
        T.StructField("n_rows", T.LongType()),
        T.StructField("prior", T.ArrayType(T.DoubleType())),
        T.StructField("lower", T.ArrayType(T.DoubleType())),
        T.StructField("upper", T.ArrayType(T.DoubleType())),
        T.StructField("shift_statistic", T.DoubleType()),
        T.StructField("shift_pvalue", T.DoubleType()),
        T.StructField("converged", T.BooleanType()),
    ])

    def estimate_batch(pdf):
        import pandas as pd

        from .._validation import check_sample_weight
        from ._dask import monitor_proba

        model, prior_est, src, seed_of = shared.value
        key = pdf[batch_col].iloc[0]
        proba = np.asarray(model.predict_proba(_features(pdf, features, named)), dtype=float)
        w = check_sample_weight(
            None if weight is None else pdf[weight].to_numpy(dtype=float, na_value=np.nan),
            proba.shape[0],
        )
        order = np.lexsort((w, *proba.T[::-1]))  # by class-0 probability, ..., then weight
        row = monitor_proba(prior_est, src, seed_of[key], proba[order], w[order])
        n, prior, lower, upper, stat, pvalue, conv = row
        return pd.DataFrame({
            "batch": [key], "n_rows": [int(n)], "prior": [list(map(float, prior))],
            "lower": [list(map(float, lower))], "upper": [list(map(float, upper))],
            "shift_statistic": [float(stat) if stat is not None else np.nan],
            "shift_pvalue": [float(pvalue) if pvalue is not None else np.nan],
            "converged": [bool(conv)],
        })

    rows = X.select(*features, *named_cols).groupBy(batch_col).applyInPandas(
        estimate_batch, schema
    ).collect()
    by_label = {r["batch"]: r for r in rows}
    k = est.n_classes_
    label_arr = np.asarray(labels)
    dtype = [
        ("batch", label_arr.dtype),
        ("n_rows", np.int64),
        ("prior", float, (k,)),
        ("lower", float, (k,)),
        ("upper", float, (k,)),
        ("shift_statistic", float),
        ("shift_pvalue", float),
        ("converged", bool),
    ]
    table = np.zeros(len(labels), dtype=dtype)
    for i, lab in enumerate(labels):
        r = by_label[lab]
        table[i] = (lab, r["n_rows"], r["prior"], r["lower"], r["upper"], r["shift_statistic"],
                    r["shift_pvalue"], r["converged"])
    return table


# -- scoring a Spark DataFrame -------------------------------------------------------------------
def add_predictions(model: Any, frame: Any, *, prefix: str = "") -> Any:
    """Add a fitted classifier's probability and action columns to a Spark DataFrame.

    The model (a fitted probwrap wrapper, or any fitted scikit-learn classifier) is broadcast
    to the executors once; one pandas UDF scores the rows where they live, batch by batch.
    Nothing is computed until Spark evaluates the returned frame (lazily, like any Spark
    transformation).

    Parameters
    ----------
    model : fitted classifier
        A :class:`~probwrap.CalibrationWrapper`, :class:`~probwrap.CostPolicyWrapper`,
        :class:`~probwrap.PriorShiftWrapper` (or a nesting of them), or any fitted classifier
        with ``predict_proba`` and ``predict``.
    frame : pyspark.sql.DataFrame
        Rows to score. The model receives the columns named by its ``feature_names_in_`` or,
        without those, every column of the frame in order.
    prefix : str, default=""
        Put before the names of the added columns (to avoid clashes).

    Returns
    -------
    pyspark.sql.DataFrame
        ``frame`` with the columns

        * ``probability``: ``predict_proba`` — for a binary model the probability of
          ``classes_[1]`` (a double), otherwise an array of the class probabilities in
          ``classes_`` order. For a :class:`~probwrap.PriorShiftWrapper` these are the
          calibrated probabilities *before* the prior adjustment;
        * ``adjusted_probability`` (a :class:`~probwrap.PriorShiftWrapper` only): the
          probabilities re-weighted to its ``applied_prior_`` (its ``predict_proba``);
        * ``action``: ``predict`` (the action of a cost policy, otherwise the class).

    Examples
    --------
    >>> from probwrap.scale import add_predictions
    >>> scored = add_predictions(policy, parcels)  # doctest: +SKIP
    >>> scored.select("probability", "action").show(3)  # doctest: +SKIP
    """
    F, T = _import_pyspark()
    import pandas as pd

    if not is_spark_frame(frame):
        raise ValueError(f"`frame` must be a Spark DataFrame; got {type(frame).__name__}.")
    if not isinstance(prefix, str):
        raise ValueError(f"`prefix` must be a str; got {type(prefix).__name__}.")
    classes = getattr(model, "classes_", None)
    if classes is None or not hasattr(model, "predict_proba"):
        raise ValueError(
            "`model` must be a fitted classifier with classes_ and predict_proba; fit it first."
        )
    classes = np.asarray(classes)
    binary = classes.shape[0] == 2
    adjusted = hasattr(model, "prior_estimator_") and hasattr(model, "source_prior_")
    actions = np.asarray(getattr(model, "actions_", classes))
    inner = getattr(model, "estimator_", model)
    features, named = _feature_columns(
        model if getattr(model, "feature_names_in_", None) is not None else inner, frame, []
    )
    names = {key: prefix + key for key in ("probability", "adjusted_probability", "action")}
    if not adjusted:
        names.pop("adjusted_probability")
    taken = [n for n in names.values() if n in frame.columns]
    if taken:
        raise ValueError(
            f"The Spark DataFrame already has column(s) {taken}; give a `prefix` for the added "
            "columns."
        )
    proba_type = T.DoubleType() if binary else T.ArrayType(T.DoubleType())
    action_type = _spark_type(T, actions.dtype)
    fields = [T.StructField(names["probability"], proba_type)]
    if adjusted:
        fields.append(T.StructField(names["adjusted_probability"], proba_type))
    fields.append(T.StructField(names["action"], action_type))
    schema = T.StructType(fields)
    shared = _broadcast(frame, model)

    def as_column(p: np.ndarray) -> Any:
        return p[:, 1] if binary else list(p)

    def score(rows: pd.DataFrame) -> pd.DataFrame:
        fitted = shared.value
        X = rows if named else rows.to_numpy()
        if named:
            X = X[features]
        out = {}
        if adjusted:
            raw = np.asarray(fitted.estimator_.predict_proba(X), dtype=float)
            out[names["probability"]] = as_column(fitted.prior_estimator_.calibrate(raw))
            out[names["adjusted_probability"]] = as_column(
                np.asarray(fitted.predict_proba(X), dtype=float)
            )
        else:
            out[names["probability"]] = as_column(np.asarray(fitted.predict_proba(X), dtype=float))
        out[names["action"]] = _python_value(T, action_type, np.asarray(fitted.predict(X)))
        return pd.DataFrame(out)

    score.__annotations__ = {"rows": pd.DataFrame, "return": pd.DataFrame}
    udf = F.pandas_udf(score, schema)
    tmp = "__probwrap_scored__"
    scored = frame.withColumn(tmp, udf(F.struct(*[F.col(c) for c in features])))
    return scored.select(
        *[F.col(c) for c in frame.columns],
        *[F.col(f"{tmp}.{f.name}").alias(f.name) for f in fields],
    )


def refuse_spark(what: str) -> None:
    """Raise the error for a Spark DataFrame given where only Dask or in-memory rows work."""
    raise ValueError(
        f"{what} is not supported for a Spark DataFrame: Spark input covers binary frozen "
        "models (fit, adapt, monitor by a batch column) and scoring with "
        "probwrap.scale.add_predictions; for multiclass models or costs as a function of X use "
        "Dask or in-memory rows."
    )

