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
import warnings
from typing import Any

import numpy as np

from .._validation import plain
from ._tally import (
    DEFAULT_RESOLUTION,
    ZERO_WEIGHT,
    ScoreTally,
    _check_resolution,
    _combine,
    _tally_block,
    merge_tallies,
)

__all__ = [
    "SparkRows",
    "add_predictions",
    "is_spark_frame",
    "monitor_spark",
    "spark_tally_counts",
    "spark_tally_of_model",
    "spark_tally_scores",
]

#: Rows gathered from Arrow batches before one chunk is tallied (bounds an executor's memory at a
#: few tens of MB per task while keeping the number of merges per partition small).
CHUNK_ROWS = 1_000_000

#: Rows per block kept by ``SparkRows.persist`` (one cached row holds one pickled block: with k
#: classes about 16 (k + 1) bytes per row, so a few MB per cached row).
PERSIST_ROWS = 100_000


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


#: Values unpickled from broadcasts on this Python worker, by a key made when each was sent (the
#: few most recent: a worker process is reused across tasks and jobs).
_UNPICKLED: dict = {}


class _Shipped:
    """A value sent to the executors once as a broadcast of its cloudpickle bytes.

    Broadcast variables are pickled with the standard pickle, which cannot carry functions
    defined inside other functions or lambdas (a user's ``costs(X)`` often is one); cloudpickle
    (bundled with PySpark) can. Each Python worker unpickles the bytes once.
    """

    def __init__(self, broadcast: Any) -> None:
        import uuid

        self._broadcast = broadcast
        self._key = uuid.uuid4().hex

    @property
    def value(self) -> Any:
        key = self._key
        if key not in _UNPICKLED:
            if len(_UNPICKLED) >= 4:
                _UNPICKLED.pop(next(iter(_UNPICKLED)))
            _UNPICKLED[key] = pickle.loads(self._broadcast.value)
        return _UNPICKLED[key]


class _WorkerError:
    """An error raised on an executor (bad labels, weights or model output in a partition, or
    the model's own failure of any type), sent back to the driver as the partition's result: a
    failed Spark job would show the user a Java stack trace around the message (PySpark's
    ``PythonException``); the driver raises it as a ValueError, as in memory, naming the type
    of an error that was not a ValueError (as ``add_predictions`` does)."""

    def __init__(self, message: str) -> None:
        self.message = message


def _failure(exc: BaseException) -> bytes:
    detail = str(exc).strip() or type(exc).__name__
    if not isinstance(exc, ValueError):
        detail = (f"on the Spark executors the model (or a step there) raised "
                  f"{type(exc).__name__}: {detail}")
        if isinstance(exc, ImportError):
            detail += (" (the model's code must be importable on the executors: install its "
                       "package there, or ship it with SparkContext.addPyFile)")
    return pickle.dumps(_WorkerError(detail))


def _loaded(blob: Any) -> Any:
    """A partition's pickled result; a ValueError raised on the executor is raised here."""
    value = pickle.loads(bytes(blob))
    if isinstance(value, _WorkerError):
        raise ValueError(value.message)
    return value


def _kept_rows_share(frame: Any) -> int:
    """Rows a partition may send to the driver beside its result (a small set's rows, see
    probwrap.scale._tally.KEPT_ROWS): the limit divided by the number of partitions, so the
    driver never collects more than the limit however many partitions there are in a first
    pass. 0 where the number of partitions is unknown (Spark Connect). A small set whose rows a
    partition left out (spread very unevenly, or on Spark Connect) is passed over a second time
    with the whole limit once the total is known to be small (``_tally_partitions``,
    ``SparkRows.map_reduce``)."""
    from ._tally import kept_rows_limit

    try:
        n_parts = int(frame.rdd.getNumPartitions())
    except Exception:  # Spark Connect: no RDD
        return 0
    return kept_rows_limit() // max(n_parts, 1)


def _broadcast(frame: Any, value: Any) -> Any:
    """Send ``value`` to the executors once (a Spark broadcast variable)."""
    try:
        context = frame.sparkSession.sparkContext
    except Exception:  # Spark Connect: no SparkContext; the value travels with the function
        return _Held(value)
    from pyspark import cloudpickle

    return _Shipped(context.broadcast(cloudpickle.dumps(value)))


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
    kind = _type_name(frame, value)
    if what in _NUMBER_ROLES and kind not in _NUMBER_TYPES:
        raise ValueError(
            f"`{what}`={value!r} is a column of Spark type {kind}; {_NUMBER_ROLES[what]} must be "
            f"numbers. Turn it into numbers first, for example {_to_number_hint(value)} "
            "(values that are not numbers become null, which is then refused)."
        )
    if what not in _NUMBER_ROLES and kind in _NOT_SCALAR:
        raise ValueError(
            f"`{what}`={value!r} is a column of Spark type {kind}, which holds no single value "
            "per row; name a column of numbers, text or booleans."
        )
    return value


def _to_number_hint(column: str) -> str:
    """How to turn the Spark column ``column`` into numbers, for an error message: Spark's SQL
    ``try_cast`` (Spark 3.2+; the oldest supported PySpark is 3.5) gives null for a value that
    is not a number, in both modes — a plain ``cast`` raises on such a value under ANSI mode
    (``spark.sql.ansi.enabled``, the default since Spark 4). Valid Python for any column name.

    Examples
    --------
    >>> print(_to_number_hint("w"))
    frame.withColumn('w', F.expr('try_cast(`w` AS DOUBLE)'))
    """
    quoted = "`" + column.replace("`", "``") + "`"
    return f"frame.withColumn({column!r}, F.expr({f'try_cast({quoted} AS DOUBLE)'!r}))"


#: Spark type names (``DataType.typeName()``) of numbers; a weight, count or score column must
#: have one of them (checked on the driver, from the schema, before any job).
_NUMBER_TYPES = frozenset(
    {"byte", "short", "integer", "long", "float", "double", "decimal"}
)

#: Spark types whose values reach pandas as objects that no scikit-learn model reads as one
#: feature (lists, dicts, rows, bytes, vectors of Spark ML, a column without values).
_NOT_SCALAR = frozenset({"array", "map", "struct", "binary", "void", "udt"})

#: Arguments naming a column that must hold numbers, and what the message calls them.
_NUMBER_ROLES = {
    "sample_weight": "row weights",
    "successes": "counts of successes",
    "trials": "counts of trials",
}


def _type_name(frame: Any, column: str) -> str:
    """The Spark type of ``frame[column]`` as ``DataType.typeName()`` ("double", "string",
    "array", ...; "udt" for user-defined types such as Spark ML's vectors), from the schema."""
    from pyspark.sql.types import UserDefinedType

    data_type = frame.schema[column].dataType
    if isinstance(data_type, UserDefinedType):
        return "udt"
    return data_type.typeName()


def _check_feature_types(frame: Any, columns: list) -> None:
    """Refuse, on the driver before any job, feature columns whose Spark type no scikit-learn
    model can read (a Spark ML vector, an array, a map, a struct, bytes, a column of nulls):
    on the executors they would fail inside the model, row batch by row batch."""
    bad = [(c, _type_name(frame, c)) for c in columns]
    bad = [(c, k) for c, k in bad if k in _NOT_SCALAR]
    if not bad:
        return
    listed = ", ".join(f"{c!r} ({'vector or other user-defined type' if k == 'udt' else k})"
                       for c, k in bad[:5])
    raise ValueError(
        f"The model's feature column(s) {listed} of the Spark DataFrame hold no single number per "
        "row; the model needs one column per feature. Expand them into columns first (a Spark "
        "ML vector: pyspark.ml.functions.vector_to_array, then one column per element)."
    )


def _text_columns(frame: Any, columns: list) -> list:
    """Feature columns that reach the model as text (Spark strings): a model converts them to
    numbers only when every value is a number, so a failure names them."""
    return [c for c in columns if _type_name(frame, c) in ("string", "varchar", "char")]


#: the value put into a text feature column of one row to learn whether the model reads that
#: column as numbers (see :func:`_check_text_features`)
_NOT_A_NUMBER = "probwrap: not a number"


def _model_reads(estimator: Any, pdf: Any, columns: list, named: bool) -> BaseException | None:
    """The error the model raises on the rows ``pdf`` (None when it reads them)."""
    method = next((m for m in ("predict_proba", "decision_function", "predict")
                   if hasattr(estimator, m)), None)
    if method is None:
        return None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            getattr(estimator, method)(_features(pdf, columns, named))
    except Exception as exc:  # noqa: BLE001 - any failure is the model's answer
        return exc
    return None


def _check_text_features(estimator: Any, frame: Any, columns: list, named: bool) -> None:
    """Refuse, on the driver, text (Spark string) feature columns the model cannot read.

    A model converts a text column to numbers only when every value is one; a value such as
    "n/a" otherwise fails inside the model on some executor, with a message that names no
    column. Only when some feature column is text: the model scores one row of the frame on the
    driver (a failure there is raised with the text columns named); then, per text column, the
    same row with that column set to a word: a model that fails on it reads the column as
    numbers (a model with its own encoder for the column does not), and one Spark aggregate
    counts the column's values that are not numbers (Spark's cast to double gives null), which
    are refused naming the column, the count and one of them. Checked once per frame, model and
    columns.
    """
    text = _text_columns(frame, columns)
    if not text:
        return
    key = (id(estimator), tuple(columns))
    seen = getattr(frame, "_probwrap_text_checked", None)
    if isinstance(seen, set) and key in seen:
        return
    probe = frame.select(*columns).limit(1).toPandas()
    if len(probe) == 0:
        return
    listed = ", ".join(repr(c) for c in text[:5])
    error = _model_reads(estimator, probe, columns, named)
    if error is not None:
        raise ValueError(
            f"The model cannot score the first row of the Spark DataFrame "
            f"({type(error).__name__}: {str(error).strip()}); its feature column(s) {listed} "
            "are text (Spark strings): if the model expects numbers there, turn them into "
            f"numbers first, for example {_to_number_hint(text[0])} (values that are not "
            "numbers become null: missing values for the model)."
        )
    numeric = []
    for c in text:
        changed = probe.copy()
        changed[c] = _NOT_A_NUMBER
        if _model_reads(estimator, changed, columns, named) is not None:
            numeric.append(c)
    if numeric:
        from pyspark.sql import functions as F

        def not_number(c: str) -> Any:
            # try_cast: null for a value that is not a number, also under ANSI mode (Spark 4's
            # default, where cast raises)
            quoted = "`" + c.replace("`", "``") + "`"
            return F.col(c).isNotNull() & F.expr(f"try_cast({quoted} AS DOUBLE)").isNull()

        counts = frame.select(*[F.sum(not_number(c).cast("long")).alias(c)
                                for c in numeric]).first()
        bad = [(c, int(counts[c] or 0)) for c in numeric if counts[c]]
        if bad:
            c, n_bad = bad[0]
            example = frame.where(not_number(c)).select(c).first()[0]
            others = ", ".join(f"{o!r} ({n})" for o, n in bad[1:5])
            raise ValueError(
                f"The feature column {c!r} of the Spark DataFrame is text (a Spark string) and "
                f"the model reads it as numbers, but {n_bad} of its values are not numbers "
                f"(for example {plain(example)!r})"
                + (f"; so are values of the text column(s) {others}" if others else "")
                + ". Clean those values, or turn the column into numbers first (for example "
                f"{_to_number_hint(c)}, which makes them null: missing values for the model)."
            )
    try:
        frame._probwrap_text_checked = (seen if isinstance(seen, set) else set()) | {key}
    except Exception:  # noqa: BLE001 - a frame that takes no attribute is checked again
        pass


def _feature_columns(estimator: Any, frame: Any, exclude: list, *,
                     check_text: bool = True) -> tuple[list, bool]:
    """Columns handed to ``estimator`` and whether they go as a pandas DataFrame (named);
    ``check_text``: text feature columns checked on the driver (:func:`_check_text_features`;
    not for the lazy ``add_predictions``)."""
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
        _check_feature_types(frame, names)
        if check_text:
            _check_text_features(estimator, frame, names, True)
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
    _check_feature_types(frame, cols)
    if check_text:
        _check_text_features(estimator, frame, cols, False)
    return cols, False


def _features(pdf: Any, columns: list, named: bool) -> Any:
    part = pdf[columns]
    return part if named else part.to_numpy()


def _label_index(classes: np.ndarray, yb: np.ndarray) -> np.ndarray:
    """Indices of the labels ``yb`` in the sorted ``classes`` (refused as in memory)."""
    from ._blocks import block_label_index

    return block_label_index(classes, yb)


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

    from ._tally import kept_rows_limit

    shared = _broadcast(frame, payload)
    labelled_cols = n_labels

    def run(share: int) -> tuple[ScoreTally, bool]:
        """The merged tally, and whether a partition left out its kept rows (more than
        ``share`` of them)."""

        def tally_partition(batches):
            from pyspark import TaskContext

            context = TaskContext.get()
            part = context.partitionId() if context is not None else 0
            total = None
            held: list = []
            n_held = 0
            chunk = 0

            def flush():
                s = np.concatenate([h[0] for h in held])
                y = None if held[0][1] is None else np.concatenate([h[1] for h in held])
                w = None if held[0][2] is None else np.concatenate([h[2] for h in held])
                # the model's own outputs (tallies of a model: _convert_model), kept for small sets
                out = None if len(held[0]) < 4 else np.concatenate([h[3] for h in held])
                return _tally_block(
                    s, y, w, labelled_cols, resolution, n_replicates, [seed, stream, part, chunk],
                    out,
                )

            try:
                value = shared.value  # (unpickling the model can fail here: an ImportError)
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
            except Exception as exc:  # noqa: BLE001 - raised on the driver (see _WorkerError)
                _drain(batches)
                yield pd.DataFrame({"partition": [part], "tally": [_failure(exc)],
                                    "dropped": [False]})
                return
            if total is not None:
                dropped = total.kept_rows is not None and total.n_rows > share
                if dropped:
                    total.kept_rows = None  # the driver collects at most KEPT_ROWS rows in all
                yield pd.DataFrame({"partition": [part], "tally": [pickle.dumps(total)],
                                    "dropped": [dropped]})

        rows = frame.select(*columns).mapInPandas(
            tally_partition, "partition int, tally binary, dropped boolean"
        ).collect()
        if not rows:
            raise ValueError("The Spark DataFrame has no rows; a tally needs at least one row.")
        rows = sorted(rows, key=lambda r: r["partition"])
        return merge_tallies([_loaded(r["tally"]) for r in rows]), any(r["dropped"] for r in rows)

    limit = kept_rows_limit()
    share = _kept_rows_share(frame)
    tally, dropped = run(share)
    if dropped and tally.n_rows <= limit and share < limit:
        # a small set whose rows sat unevenly in many partitions (or on Spark Connect, where the
        # number of partitions is unknown): with the total now known to be small, a second pass
        # sends every partition's rows, so the fit is that of the rows, as in memory
        tally, _ = run(limit)
    return tally


def _drain(batches: Any) -> None:
    """Read the rest of a partition's batches after a refused batch (the tallies, the keys of
    ``spark_key_tallies``, and ``SparkRows.map_reduce`` / ``persist`` / ``SparkBlocks.reduce``).
    PySpark's worker is reused
    for the next task only when its input was read to the end (``pyspark/worker.py``: otherwise
    it tells the JVM not to reuse it and exits), so a user error that left rows unread made the
    next Spark job start new Python workers (about 8 s each under load on a 2-core machine;
    ``benchmarks/spark_refused_partition.py``, docs/evidence/prior_shift_log.md). Reading costs
    at most what the tally would have; a second failure while reading is left to the first
    one's report."""
    try:
        for _ in batches:
            pass
    except Exception:  # noqa: BLE001 - the first error is the one reported
        pass


def _score_values(pdf: Any, score: str) -> np.ndarray:
    """The score column of one Arrow batch as floats, refused with its column named when it
    holds nulls or NaN (the shared check would count the rows of one chunk of a partition)."""
    s = pdf[score].to_numpy(dtype=float, na_value=np.nan)
    missing = int(np.count_nonzero(np.isnan(s)))
    if missing:
        raise ValueError(
            f"`scores`: the Spark column {score!r} has {missing} NaN or null value(s) in a "
            "partition; every row needs a finite score (filter or fill them first)."
        )
    return s


def _convert_scores(pdf: Any, spec: tuple) -> tuple:
    from ._blocks import _decimal_labels

    score, label, weight = spec
    s = _score_values(pdf, score)
    y = None if label is None else _decimal_labels(pdf[label].to_numpy())
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
    kind = _type_name(frame, rest[0])
    if kind not in _NUMBER_TYPES:
        raise ValueError(
            f"The score column {rest[0]!r} of the Spark DataFrame given as `{what}` is of Spark "
            f"type {kind}; scores must be numbers. Turn it into numbers first, for example "
            f"{_to_number_hint(rest[0])} (values that are not numbers become null, which is "
            "then refused)."
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
        raise ValueError(ZERO_WEIGHT)
    return tally


def _count_values(pdf: Any, column: str, name: str) -> np.ndarray:
    """A count column of one Arrow batch as floats, refused with its column named (and its bad
    rows counted) when it holds nulls, NaN or infinities, as :func:`_score_values` does."""
    v = pdf[column].to_numpy(dtype=float, na_value=np.nan)
    bad = int(np.count_nonzero(~np.isfinite(v)))
    if bad:
        raise ValueError(
            f"`{name}`: the Spark column {column!r} has {bad} NaN, null or infinite value(s) in "
            "a partition; every group needs finite counts (filter or fill them first)."
        )
    return v


def _convert_counts(pdf: Any, spec: tuple) -> tuple:
    score, succ, trials, check = spec
    k, n = check(_count_values(pdf, succ, "successes"), _count_values(pdf, trials, "trials"))
    s = _score_values(pdf, score)
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
    outputs = np.asarray(getattr(estimator, response)(_features(pdf, features, named)), dtype=float)
    s = _binary_scores(outputs, response)
    y = None if label is None else _label_index(classes, pdf[label].to_numpy())
    w = None if weight is None else pdf[weight].to_numpy(dtype=float, na_value=np.nan)
    return s, y, w, outputs


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


# -- rows kept in Spark partitions, for the shared driver-side fits (see ._rows) --------------------
def _partition_id() -> int:
    from pyspark import TaskContext

    context = TaskContext.get()
    return context.partitionId() if context is not None else 0


def _chunks(batches: Any, rows: int) -> Any:
    """The Arrow batches of one partition regrouped into pandas frames of at least ``rows`` rows
    (the last one shorter)."""
    import pandas as pd

    held: list = []
    n_held = 0
    for pdf in batches:
        if len(pdf) == 0:
            continue
        held.append(pdf)
        n_held += len(pdf)
        if n_held >= rows:
            yield held[0] if len(held) == 1 else pd.concat(held, ignore_index=True)
            held, n_held = [], 0
    if held:
        yield held[0] if len(held) == 1 else pd.concat(held, ignore_index=True)


def _split(features: list, named: bool, label: str | None, weight: str | None, pdf: Any) -> tuple:
    """``(Xb, yb, wb)`` of one chunk of rows (``(Xb, wb)`` without a label column)."""
    Xb = _features(pdf, features, named)
    wb = None if weight is None else pdf[weight].to_numpy(dtype=float, na_value=np.nan)
    if label is None:
        return Xb, wb
    return Xb, pdf[label].to_numpy(), wb


def _gather(rows: list) -> Any:
    """Partial results of the partitions (rows of ``partition, value``) combined in partition
    order, so the sum does not depend on which task finished first."""
    if not rows:
        raise ValueError("The Spark DataFrame has no rows; at least one row is needed.")
    rows = sorted(rows, key=lambda r: r["partition"])
    values = [_loaded(r["value"]) for r in rows]  # (raises a partition's ValueError first)
    out = values[0]
    for v in values[1:]:
        out = _combine(out, v)
    return out


class SparkBlocks:
    """Blocks of values kept in a cached Spark DataFrame (see :meth:`SparkRows.persist`)."""

    def __init__(self, cached: Any) -> None:
        self._cached = cached

    def reduce(self, fn: Any, *args: Any) -> Any:
        """Sum over the kept blocks of ``fn(block, *args)`` (one small Spark job)."""
        import pandas as pd

        def reduce_partition(batches):
            total = None
            try:
                for pdf in batches:
                    for blob in pdf["block"]:
                        block = pickle.loads(blob)
                        if isinstance(block, _WorkerError):  # made when the block was kept
                            raise ValueError(block.message)
                        if block is None:  # an empty block
                            continue
                        r = fn(block, *args)
                        total = r if total is None else _combine(total, r)
            except Exception as exc:  # noqa: BLE001 - raised on the driver (see _WorkerError)
                _drain(batches)
                yield pd.DataFrame({"partition": [_partition_id()], "value": [_failure(exc)]})
                return
            if total is not None:
                yield pd.DataFrame({"partition": [_partition_id()], "value": [pickle.dumps(total)]})

        return _gather(
            self._cached.mapInPandas(reduce_partition, "partition int, value binary").collect()
        )

    def release(self) -> None:
        """Drop the cached blocks from the executors."""
        self._cached.unpersist()


class SparkRows:
    """The rows of a Spark DataFrame, with label and weight columns, for the shared fits.

    The twin of :class:`probwrap.scale._dask.DaskRows` (same three methods; see
    :mod:`probwrap.scale._rows`). Each partition's rows reach Python through ``mapInPandas`` and
    are handed on in chunks of up to ``CHUNK_ROWS`` rows; the function and its arguments go to
    the executors as one broadcast variable; partial results are combined on the driver in
    partition order. ``y`` and ``sample_weight`` name columns; the estimator receives its
    feature columns (``feature_names_in_``, else every other column in frame order).
    """

    engine = "Spark"

    def __init__(self, frame: Any, y: Any, sample_weight: Any, estimator: Any) -> None:
        _import_pyspark()
        self._frame = frame
        label = _column(frame, y, "y")
        weight = _column(frame, sample_weight, "sample_weight")
        named_cols = [c for c in (label, weight) if c is not None]
        features, named = _feature_columns(estimator, frame, named_cols)
        self._columns = [*features, *named_cols]
        self._split = (features, named, label, weight)

    def map_reduce(self, fn: Any, *args: Any, indexed: bool = False) -> Any:
        """The sum (``_combine``) of ``fn(*args, *chunk)`` over the partitions' chunks of
        rows, in partition order; with ``indexed`` ``fn(*args, key, *chunk)``, ``key`` the
        chunk's ``[partition, chunk]`` (a seed for draws that depend on the partitioning, not
        on scheduling, as the tallies' replicates; see ``DaskRows.map_reduce``)."""
        from ._tally import kept_rows_limit

        limit = kept_rows_limit()
        share = _kept_rows_share(self._frame)
        out, dropped = self._map_reduce(share, fn, args, indexed)
        if dropped and getattr(out, "n", limit + 1) <= limit and share < limit:
            # a small set's rows left out by partitions holding more than their share (rows
            # spread unevenly, or Spark Connect): the total is now known to be small, so a
            # second pass sends them all (see _tally_partitions)
            out, _ = self._map_reduce(limit, fn, args, indexed)
        return out

    def _map_reduce(self, share: int, fn: Any, args: tuple,
                    indexed: bool = False) -> tuple[Any, bool]:
        """The combined result, and whether a partition left out its rows (more than
        ``share``; results with ``without_rows_beyond`` only)."""
        import pandas as pd

        shared = _broadcast(self._frame, (fn, args))
        spec = self._split

        def map_partition(batches):
            total = None
            try:
                f, a = shared.value
                part = _partition_id()
                for j, pdf in enumerate(_chunks(batches, CHUNK_ROWS)):
                    key = [[part, j]] if indexed else []
                    r = f(*a, *key, *_split(*spec, pdf))
                    total = r if total is None else _combine(total, r)
            except Exception as exc:  # noqa: BLE001 - raised on the driver (see _WorkerError)
                _drain(batches)
                yield pd.DataFrame({"partition": [_partition_id()], "value": [_failure(exc)],
                                    "dropped": [False]})
                return
            dropped = False
            if hasattr(total, "without_rows_beyond"):
                # a small set's rows (multiclass first pass): at most KEPT_ROWS reach the driver
                capped = total.without_rows_beyond(share)
                dropped = capped.arrays is None and total.arrays is not None
                total = capped
            if total is not None:
                yield pd.DataFrame({"partition": [_partition_id()],
                                    "value": [pickle.dumps(total)], "dropped": [dropped]})

        rows = (
            self._frame.select(*self._columns)
            .mapInPandas(map_partition, "partition int, value binary, dropped boolean")
            .collect()
        )
        return _gather(rows), any(r["dropped"] for r in rows)

    def persist(self, make: Any, *args: Any) -> SparkBlocks:
        import pandas as pd

        shared = _broadcast(self._frame, (make, args))
        spec = self._split

        def make_blocks(batches):
            try:
                f, a = shared.value
                for pdf in _chunks(batches, PERSIST_ROWS):
                    yield pd.DataFrame({"block": [pickle.dumps(f(*a, *_split(*spec, pdf)))]})
            except Exception as exc:  # noqa: BLE001 - kept as a block, raised on the driver
                _drain(batches)
                yield pd.DataFrame({"block": [_failure(exc)]})

        cached = self._frame.select(*self._columns).mapInPandas(make_blocks, "block binary")
        return SparkBlocks(cached.cache())

    def shared(self, value: Any) -> Any:
        """``value`` as it is: the arguments of ``map_reduce`` / ``persist`` already go to the
        executors as one broadcast variable (the twin of ``DaskRows.shared``)."""
        return value

    def key_tallies(self, fn: Any, *args: Any, n_rows: int | None = None) -> tuple:
        """The rows grouped by the keys ``fn(*args, Xb, wb)`` gives each chunk's rows, added up
        by Spark (unlabelled rows; :func:`probwrap.scale._repeat_keys.spark_key_tallies`;
        ``n_rows`` is not needed)."""
        return spark_key_tallies(self._frame, self._columns, self._split, fn, args)

    def apply_first(self, fn: Any, *args: Any) -> Any:
        features, named, _, _ = self._split
        pdf = self._frame.select(*features).limit(1000).toPandas()
        if len(pdf) == 0:
            raise ValueError("The Spark DataFrame has no rows; at least one row is needed.")
        return fn(_features(pdf, features, named), *args)


def spark_key_tallies(frame: Any, columns: list, split_spec: tuple, fn: Any, args: tuple
                      ) -> tuple[int, int, float, float, float]:
    """Repeated rows (``RepeatedRowsWarning``): :func:`probwrap.shift._repeats.repeat_tallies`
    of the rows of a Spark DataFrame, keyed by
    ``fn(*args, Xb, wb)`` on the executors (chunks of each partition) and added up by one
    ``groupBy`` of the keys and one aggregate: five numbers reach the driver, and the three
    sums of :func:`probwrap.scale._repeat_keys.dask_key_tallies` for rows selected on a
    feature (0 where ``fn`` counts no labelled rows). A partition whose keys ``fn`` refuses
    (e.g. a NaN weight) is read to its end (:func:`_drain`) and sends its error as one more row;
    the driver raises the first refused partition's error as a ValueError, as in memory."""
    import pandas as pd
    from pyspark.sql import functions as F

    shared = _broadcast(frame, (fn, args))

    def keyed(batches):
        try:
            f, a = shared.value
            for pdf in _chunks(batches, CHUNK_ROWS):
                keys, w, at = f(*a, *_split(*split_spec, pdf))
                signed = np.ascontiguousarray(keys).view(np.int64)
                yield pd.DataFrame({"k0": signed[:, 0], "k1": signed[:, 1], "w": w,
                                    "a": np.zeros(w.shape[0]) if at is None else at,
                                    "part": -1, "e": None})
        except Exception as exc:  # noqa: BLE001 - raised on the driver (see _WorkerError)
            # the rest of the partition is read so that PySpark reuses this worker (_drain);
            # the refusal travels as one more row, its partition kept for a stable choice
            _drain(batches)
            yield pd.DataFrame({"k0": [0], "k1": [0], "w": [0.0], "a": [0.0],
                                "part": [_partition_id()], "e": [_failure(exc)]})

    keyed_rows = frame.select(*columns).mapInPandas(
        keyed, "k0 long, k1 long, w double, a double, part int, e binary")
    refused = F.when(F.col("e").isNotNull(), F.struct("part", "e"))
    groups = keyed_rows.groupBy("k0", "k1").agg(
        F.sum("w").alias("gw"), F.sum(F.col("w") * F.col("w")).alias("gq"),
        F.count(F.lit(1)).alias("gn"), F.sum(F.col("w") * F.col("a")).alias("ga"),
        F.max("a").alias("seen"), F.min(refused).alias("refused"))
    seen = F.col("seen") > 0
    row = groups.agg(
        F.count(F.lit(1)).alias("groups"), F.sum("gn").alias("rows"),
        F.sum(F.col("gw") * F.col("gw")).alias("group_sq"), F.sum("gw").alias("total"),
        F.sum("gq").alias("sq"), F.sum("ga").alias("meet"),
        F.sum(F.when(seen, F.col("gw") * F.col("gw")).otherwise(0.0)).alias("seen_group_sq"),
        F.sum(F.when(seen, F.col("gq")).otherwise(0.0)).alias("seen_sq"),
        F.min("refused").alias("refused")).collect()[0]
    if row["refused"] is not None:  # the first refused partition's ValueError, as in memory
        _loaded(row["refused"]["e"])
    if row["rows"] is None:
        return 0, 0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    return (int(row["rows"]), int(row["groups"]), float(row["group_sq"]), float(row["total"]),
            float(row["sq"]), float(row["meet"]), float(row["seen_group_sq"]),
            float(row["seen_sq"]))


# -- the wrappers' Spark path --------------------------------------------------------------------
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


def _refuse_missing_batch_labels(X: Any, batch_col: str, labels: list) -> None:
    """A ``ValueError`` when the batch column holds a missing label, as ``monitor`` refuses one
    in memory (:func:`probwrap.shift._by_batch._refuse_missing_batches`): null, or NaN in a
    float column (Spark keeps NaN apart from null; before, a NaN label failed on the executors
    as "Batch None: ... raised KeyError: nan"). ``labels``: the column's distinct values; the
    rows are counted only when one is missing. A Spark DataFrame's rows have no order, so no
    row number is named."""
    from ..metrics._groups import _missing_label

    if not any(_missing_label(v) for v in labels):
        return
    F, T = _import_pyspark()
    col = F.col(batch_col)
    missing = col.isNull()
    if isinstance(X.schema[batch_col].dataType, (T.FloatType, T.DoubleType)):
        missing = missing | F.isnan(col)
    n = X.filter(missing).count()
    raise ValueError(
        f"`batches`: the batch column {batch_col!r} contains {n} missing label(s) (null or NaN; "
        "a Spark DataFrame's rows have no order, so no row number can be named); give every "
        f"row its batch (e.g. its date), or leave those rows out "
        f"(X.dropna(subset=[{batch_col!r}]))."
    )


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
    _refuse_missing_batch_labels(X, batch_col, labels)
    labels = sorted(labels)
    rng = check_random_state(est.random_state)
    seeds = {lab: rng.randint(2**31 - 1) for lab in labels}
    source = getattr(owner, "_source_tally", None)
    # one broadcast: the model (with a refit base model's fold models), the estimator, seeds
    shared = _broadcast(X, (owner.estimator_, est, source, seeds, owner._fold_scorer(),
                            (owner._repeat_reference(by_rows=True),
                             owner._repeat_reference(),
                             getattr(owner, "_labelled_row_tally", None))))
    batch_type = X.schema[batch_col].dataType
    schema = T.StructType([
        T.StructField("batch", batch_type),
        T.StructField("n_rows", T.LongType()),
        T.StructField("n_effective", T.DoubleType()),
        T.StructField("prior", T.ArrayType(T.DoubleType())),
        T.StructField("lower", T.ArrayType(T.DoubleType())),
        T.StructField("upper", T.ArrayType(T.DoubleType())),
        T.StructField("shift_statistic", T.DoubleType()),
        T.StructField("shift_pvalue", T.DoubleType()),
        T.StructField("converged", T.BooleanType()),
        T.StructField("class_shift_score", T.ArrayType(T.DoubleType())),
        T.StructField("ml_prior", T.ArrayType(T.DoubleType())),
        T.StructField("pseudo_rows", T.DoubleType()),
        # the batch's repeated rows beyond chance (repeats_of_rows; empty: none)
        T.StructField("repeats", T.ArrayType(T.DoubleType())),
        T.StructField("weight_unit", T.DoubleType()),
        T.StructField("error", T.StringType()),
        # the batch's warnings (raised on the driver once per condition: warn_monitor_batches)
        T.StructField("warning_category", T.ArrayType(T.StringType())),
        T.StructField("warning_message", T.ArrayType(T.StringType())),
    ])

    def estimate_batch(pdf):
        import pandas as pd

        key = pdf[batch_col].iloc[0]
        try:
            return estimate(pdf, key)
        except Exception as exc:  # noqa: BLE001 - raised on the driver, as in memory
            message = str(exc) if isinstance(exc, ValueError) else (
                f"on the Spark executors the model (or a step there) raised "
                f"{type(exc).__name__}: {exc}")
            return pd.DataFrame({
                "batch": [key], "n_rows": [len(pdf)], "n_effective": [np.nan], "prior": [[]],
                "lower": [[]],
                "upper": [[]], "shift_statistic": [np.nan], "shift_pvalue": [np.nan],
                "converged": [False], "class_shift_score": [[]], "ml_prior": [[]],
                "pseudo_rows": [np.nan], "repeats": [[]], "weight_unit": [1.0],
                "error": [message], "warning_category": [[]], "warning_message": [[]],
            })

    def estimate(pdf, key):
        import pandas as pd

        from .._validation import check_sample_weight
        from ._dask import batch_repeat_reference, monitor_proba

        model, prior_est, src, seed_of, folds, counts = shared.value
        Xb = _features(pdf, features, named)
        proba = np.asarray(model.predict_proba(Xb), dtype=float)
        w = check_sample_weight(
            None if weight is None else pdf[weight].to_numpy(dtype=float, na_value=np.nan),
            proba.shape[0],
        )
        order = np.lexsort((w, *proba.T[::-1]))  # by class-0 probability, ..., then weight
        # a refit base model: the batch's rows scored by every fold model too, in the same order
        fold_proba = None if folds is None else [f[order] for f in folds.fold_proba(Xb)]
        counts, codes, selected = batch_repeat_reference(counts, Xb)
        if selected is not None:
            selected = (selected[0][order], selected[1])
        row, unit, caught, repeats = monitor_proba(prior_est, src, seed_of[key], proba[order],
                                                   w[order], fold_proba, counts,
                                                   None if codes is None else codes[order],
                                                   selected)
        n, n_eff, prior, lower, upper, stat, pvalue, conv, by_class, ml, pseudo = row
        return pd.DataFrame({
            "batch": [key], "n_rows": [int(n)], "n_effective": [float(n_eff)],
            "prior": [list(map(float, prior))],
            "lower": [list(map(float, lower))], "upper": [list(map(float, upper))],
            "shift_statistic": [float(stat) if stat is not None else np.nan],
            "shift_pvalue": [float(pvalue) if pvalue is not None else np.nan],
            "converged": [bool(conv)], "class_shift_score": [list(map(float, by_class))],
            "ml_prior": [list(map(float, ml))], "pseudo_rows": [float(pseudo)],
            "repeats": [[] if repeats is None else list(map(float, repeats))],
            "weight_unit": [float(unit)], "error": [None],
            "warning_category": [[f"{c.__module__}:{c.__qualname__}" for c, _ in caught]],
            "warning_message": [[m for _, m in caught]],
        })

    rows = X.select(*features, *named_cols).groupBy(batch_col).applyInPandas(
        estimate_batch, schema
    ).collect()
    failed = [r for r in rows if r["error"] is not None]
    if failed:
        failed = min(failed, key=lambda r: r["batch"])
        raise ValueError(f"Batch {plain(failed['batch'])!r}: {failed['error']}")
    by_label = {r["batch"]: r for r in rows}
    k = est.n_classes_
    label_arr = np.asarray(labels)
    dtype = [
        ("batch", label_arr.dtype),
        ("n_rows", np.int64),
        ("n_effective", float),
        ("prior", float, (k,)),
        ("lower", float, (k,)),
        ("upper", float, (k,)),
        ("shift_statistic", float),
        ("shift_pvalue", float),
        ("converged", bool),
        ("class_shift_score", float, (k,)),
        ("ml_prior", float, (k,)),
        ("pseudo_rows", float),
    ]
    table = np.zeros(len(labels), dtype=dtype)
    for i, lab in enumerate(labels):
        r = by_label[lab]
        table[i] = (lab, r["n_rows"], r["n_effective"], r["prior"], r["lower"], r["upper"],
                    r["shift_statistic"], r["shift_pvalue"], r["converged"],
                    r["class_shift_score"], r["ml_prior"], r["pseudo_rows"])
    from ._dask import warn_batch_repeats, warn_monitor_batches, warn_monitor_units

    warn_monitor_units([r["weight_unit"] for r in rows])
    warn_monitor_batches(
        [(lab, [(_warning_category(c), m) for c, m in zip(
            by_label[lab]["warning_category"] or [], by_label[lab]["warning_message"] or [],
            strict=True)]) for lab in labels],
        len(labels),
    )
    warn_batch_repeats([(lab, _repeats(by_label[lab]["repeats"])) for lab in labels],
                       len(labels), by_features=owner._repeat_reference(by_rows=True) is not None)
    return table


def _repeats(values: Any) -> tuple | None:
    """A batch's ``repeats`` column back as :func:`probwrap.shift._repeats.repeats_of_rows`
    gives it (None: empty)."""
    if not values:
        return None
    n, groups, observed, expected = values
    return int(n), int(groups), float(observed), float(expected)


def _warning_category(name: str) -> type:
    """The warning class named ``module:qualname`` on an executor (UserWarning if it cannot be
    imported on the driver)."""
    import importlib

    module, _, qualname = name.partition(":")
    try:
        obj: Any = importlib.import_module(module)
        for part in qualname.split("."):
            obj = getattr(obj, part)
    except (ImportError, AttributeError):
        return UserWarning
    return obj if isinstance(obj, type) and issubclass(obj, Warning) else UserWarning


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
        ``frame`` with the columns (all doubles but the action)

        * ``probability``: ``predict_proba`` — for a binary model one column, the probability
          of ``classes_[1]``; for a multiclass model one column per class,
          ``probability_<class>`` in ``classes_`` order (``probability_setosa``, ...). For a
          :class:`~probwrap.PriorShiftWrapper` these are the calibrated probabilities
          *before* the prior adjustment;
        * ``adjusted_probability`` (``adjusted_probability_<class>`` for a multiclass model;
          a :class:`~probwrap.PriorShiftWrapper` only): the probabilities re-weighted to its
          ``applied_prior_`` (its ``predict_proba``);
        * ``action``: ``predict`` (the action of a cost policy, otherwise the class).

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
    # (lazy: the text columns are not checked by a Spark job here; a batch that fails names
    # them, see _scoring_message)
    features, named = _feature_columns(
        model if getattr(model, "feature_names_in_", None) is not None else inner, frame, [],
        check_text=False,
    )
    def per_class(stem: str) -> list:
        # binary: one column (the probability of classes_[1]); multiclass: one per class
        return [prefix + stem] if binary else [f"{prefix}{stem}_{c}" for c in classes.tolist()]

    names = {"probability": per_class("probability"), "action": [prefix + "action"]}
    if adjusted:
        names["adjusted_probability"] = per_class("adjusted_probability")
    added = [n for group in names.values() for n in group]
    if len(set(added)) != len(added):
        raise ValueError(
            f"The class labels {classes.tolist()} give clashing column names {added}; relabel "
            "the classes."
        )
    taken = [n for n in added if n in frame.columns]
    if taken:
        raise ValueError(
            f"The Spark DataFrame already has column(s) {taken}; give a `prefix` for the added "
            "columns."
        )
    action_type = _spark_type(T, actions.dtype)
    fields = [T.StructField(n, T.DoubleType()) for n in names["probability"]]
    if adjusted:
        fields += [T.StructField(n, T.DoubleType()) for n in names["adjusted_probability"]]
    fields.append(T.StructField(names["action"][0], action_type))
    # a batch the model cannot score gives its rows this message instead of values; every added
    # column then raises it from the JVM (Spark's raise_error) when the row is evaluated
    schema = T.StructType([*fields, T.StructField(_SCORING_ERROR, T.StringType())])
    shared = _broadcast(frame, model)
    text = _text_columns(frame, features)
    who = type(model).__name__
    jvm_raise = _raises_user_errors()

    def put(out: dict, key: str, p: np.ndarray) -> None:
        _check_scored(p, who, key)
        if binary:
            out[names[key][0]] = p[:, 1]
        else:
            for j, name in enumerate(names[key]):
                out[name] = p[:, j]

    def compute(rows: pd.DataFrame) -> dict:
        fitted = shared.value
        X = rows if named else rows.to_numpy()
        if named:
            X = X[features]
        out = {}
        if adjusted:
            # the calibrated posteriors at the source prior, as predict_proba gives them before
            # adapt (of the refit model, or averaged over the fold models that predict)
            put(out, "probability", np.asarray(fitted._calibrated(X), dtype=float))
            put(out, "adjusted_probability", np.asarray(fitted.predict_proba(X), dtype=float))
        else:
            put(out, "probability", np.asarray(fitted.predict_proba(X), dtype=float))
        out[names["action"][0]] = _python_value(T, action_type, np.asarray(fitted.predict(X)))
        out[_SCORING_ERROR] = None
        return out

    def score(rows: pd.DataFrame) -> pd.DataFrame:
        try:
            return pd.DataFrame(compute(rows))
        except Exception as exc:  # noqa: BLE001 - every failure reaches the user as one message
            message = _scoring_message(exc, len(rows), who, text)
            if not jvm_raise:  # PySpark 3: the worker's traceback, but only this frame of it
                raise ValueError(message) from None
            out = {f.name: pd.Series([None] * len(rows), dtype=object) for f in fields}
            out[_SCORING_ERROR] = [message] * len(rows)
            return pd.DataFrame(out)

    score.__annotations__ = {"rows": pd.DataFrame, "return": pd.DataFrame}
    udf = F.pandas_udf(score, schema)
    tmp = "__probwrap_scored__"
    scored = frame.withColumn(tmp, udf(F.struct(*[F.col(c) for c in features])))
    failed = F.col(tmp).getField(_SCORING_ERROR)
    return scored.select(
        *[F.col(c) for c in frame.columns],
        *[
            F.when(failed.isNotNull(), F.raise_error(failed))
            .otherwise(F.col(tmp).getField(f.name))
            .alias(f.name)
            for f in fields
        ],
    )


#: The field of the scoring UDF's result that carries a failed batch's message.
_SCORING_ERROR = "__probwrap_error__"


def _raises_user_errors() -> bool:
    """Whether Spark's ``raise_error`` reaches the Python driver as the message alone (PySpark 4:
    a ``SparkRuntimeException`` "[USER_RAISED_EXCEPTION] <message>"). With PySpark 3.5 it
    reaches Python as a ``Py4JJavaError`` holding the whole Java stack trace, so there the
    scoring function raises the message itself (a ``PythonException`` whose Python traceback is
    one frame long)."""
    import pyspark

    try:
        return int(pyspark.__version__.split(".")[0]) >= 4
    except ValueError:  # pragma: no cover - a development build without a plain version
        return True


def _check_scored(p: np.ndarray, who: str, key: str) -> None:
    """Refuse NaN / infinite probabilities and probabilities outside [0, 1] on the rows scored by
    :func:`add_predictions` (any model: a wrapper refuses them itself, a plain model may not)."""
    from .._predictions import check_model_probabilities

    bad = ~np.isfinite(p).all(axis=1) if p.ndim == 2 else ~np.isfinite(p)
    if bad.any():
        raise ValueError(
            f"{who} returned NaN or infinite {key.replace('_', ' ')} for {int(bad.sum())} of "
            f"{p.shape[0]} rows; probabilities must be finite numbers in [0, 1]."
        )
    check_model_probabilities(p, "predict_proba", who, f"{p.shape[0]} rows")


def _scoring_message(exc: BaseException, n_rows: int, who: str, text: list) -> str:
    """The one message a user sees when a batch of :func:`add_predictions` cannot be scored: a
    first line naming probwrap, the step, the batch and the model's own error, then the rest of
    that error; no executor traceback (Spark raises it with ``raise_error``)."""
    part = _partition_id()
    detail = str(exc).strip() or type(exc).__name__
    if not isinstance(exc, ValueError):
        detail = f"{type(exc).__name__}: {detail}"
    message = (
        f"probwrap add_predictions: {who} could not score a batch of {n_rows} rows "
        f"(Spark partition {part}): {detail}"
    )
    if text:
        message += (
            f"\n(The feature column(s) {text[:5]} are text in the Spark DataFrame; the model reads "
            "them as numbers only when every value is one: turn them into numbers first, for "
            f"example {_to_number_hint(text[0])}, which makes the other values null: missing "
            "values for the model.)"
        )
    return message
