"""Shared pieces of the command line.

Data errors, optional dependencies, reading score files exactly, binary labels with an explicit
positive class, atomic file writing, progress on long steps, and the flags every verb shares.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import re
import sys
import tempfile
import threading
import time
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import Any

import numpy as np

__all__ = [
    "DataError", "MissingExtraError", "OPTIONAL_MODULES", "require", "shown", "clean", "read_table",
    "numeric_column", "read_labels", "write_atomic", "write_table", "write_text",
    "check_out_suffix", "check_writable", "TABLE_SUFFIXES", "progress", "Stages", "warn_line", "check_ranking",
    "check_row_count", "FEW_ROWS", "MIN_RESAMPLES", "add_positive_label_flag",
    "add_format_flag", "add_resamples_flag", "whole_number",
]


class DataError(Exception):
    """A problem with the user's data: reported as one line, exit code 1, no traceback."""


class MissingExtraError(DataError):
    """An optional dependency of a verb is not installed (one line naming the extra; exit 1)."""


#: optional modules the command line may need, and the extra of ``pyproject.toml`` holding each
OPTIONAL_MODULES = {
    "pandas": "cli", "pyarrow": "cli", "tqdm": "cli", "matplotlib": "cli",
    "dask": "dask", "distributed": "dask",
}

#: fewer rows than this in a file draw a warning (common practice: 30 rows)
FEW_ROWS = 30
#: the least number of bootstrap resamples any verb accepts (0 means "no interval")
MIN_RESAMPLES = 10

#: table files: Parquet by these extensions, CSV by the rest of TABLE_SUFFIXES
PARQUET_SUFFIXES = (".parquet", ".pq")
TABLE_SUFFIXES = (".csv", *PARQUET_SUFFIXES)


def missing_extra_message(module: str) -> str:
    """The one-line message for an optional module that is not installed."""
    root = module.split(".")[0]
    extra = OPTIONAL_MODULES.get(root, "cli")
    return (
        f"this needs the Python package '{root}', which is not installed; install the "
        f"command-line extra: pip install \"probwrap[{extra}]\" (from a source folder: "
        f"pip install \".[{extra}]\")"
    )


def require(module: str) -> Any:
    """Import an optional module, or raise :class:`MissingExtraError` naming its extra."""
    try:
        return importlib.import_module(module)
    except ModuleNotFoundError as exc:
        root = (exc.name or module).split(".")[0]
        if root in OPTIONAL_MODULES:
            raise MissingExtraError(missing_extra_message(root)) from None
        raise


def shown(value: Any) -> str:
    """Text of a value for a one-line message: control characters escaped, plain numbers.

    NumPy scalars print as plain Python numbers (``nan``, not ``np.float64(nan)``); text is
    quoted, and any control byte (newline, escape, ...) is shown as an escape sequence.

    Examples
    --------
    >>> import numpy as np
    >>> shown(np.float64("nan")), shown("bad\\x1b[31mname"), shown(1.5)
    ('nan', "'bad\\\\x1b[31mname'", '1.5')
    """
    if hasattr(value, "item") and not isinstance(value, str | bytes):
        with contextlib.suppress(ValueError, TypeError):
            value = value.item()
    if isinstance(value, float | int | bool) or value is None:
        return str(value)
    return f"'{clean(str(value))}'"


_NUMPY_REPR = re.compile(r"np\.(?:float|int|uint|complex|bool_?|str_)\d*\(([^()]*)\)")


def clean(text: str) -> str:
    """``text`` for a one-line message: control characters escaped, NumPy reprs plain.

    Examples
    --------
    >>> print(clean("got np.float64(nan) in\\nrow"))
    got nan in\\nrow
    """
    text = _NUMPY_REPR.sub(r"\1", text)
    return "".join(
        ch if ch.isprintable() else ch.encode("unicode_escape").decode("ascii") for ch in text
    )


def _kind(path: Path) -> str:
    return "Parquet" if path.suffix.lower() in PARQUET_SUFFIXES else "CSV"


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split())


def read_table(path: str | Path, *, exact: Iterable[str] = ()) -> Any:
    """Read a CSV or Parquet file into a pandas DataFrame (Parquet by extension; CSV otherwise).

    The columns named in ``exact`` are read from CSV as text, so :func:`numeric_column` turns
    them into floats with a correctly rounded parser (a number written at full precision reads
    back as the same float, in every pandas version).
    """
    pd = require("pandas")
    path = Path(path)
    if not path.exists():
        raise DataError(f"{path}: file not found")
    if path.is_dir():
        raise DataError(f"{path}: is a folder, not a file")
    if _kind(path) == "Parquet":
        require("pyarrow")
    try:
        if _kind(path) == "Parquet":
            frame = pd.read_parquet(path)
        else:
            frame = pd.read_csv(path, dtype=dict.fromkeys(exact, str))
    except pd.errors.EmptyDataError:
        raise DataError(f"{path}: the file is empty") from None
    except (MemoryError, KeyboardInterrupt):
        raise
    except Exception as exc:  # parsing errors of any kind: report, do not trace back
        raise DataError(f"{path}: cannot be read as {_kind(path)} ({_one_line(exc)})") from None
    if frame.shape[0] == 0:
        raise DataError(f"{path}: the file has a header but no rows")
    return frame


def _columns_listed(frame: Any) -> str:
    names = [shown(str(c)) for c in frame.columns[:10]]
    more = ", ..." if frame.shape[1] > 10 else ""
    return ", ".join(names) + more


def no_column(frame: Any, column: str, path: str | Path, flag: str) -> DataError:
    """The error for a column that is not in the file."""
    return DataError(
        f"{path}: no column {shown(column)} (given by {flag}); the file has columns "
        f"{_columns_listed(frame)}"
    )


def _row(path: str | Path, column: str, row: int) -> str:
    return f"{path}: column {shown(column)}, row {row + 2} (counting the header as row 1)"


def numeric_column(frame: Any, column: str, path: str | Path, *, flag: str) -> np.ndarray:
    """One column as finite floats, or a DataError naming the file, column and first bad row.

    Text is converted with NumPy's correctly rounded parser (every float written with enough
    digits reads back exactly).
    """
    pd = require("pandas")
    if column not in frame.columns:
        raise no_column(frame, column, path, flag)
    series = frame[column]
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(
        series.dtype
    ):
        values = series.to_numpy(dtype=float, na_value=np.nan)
    else:
        raw = series.to_numpy(dtype=object)
        try:
            values = np.array(
                ["nan" if v is None or v is pd.NA or (isinstance(v, float) and v != v) else v
                 for v in raw], dtype=str,
            ).astype(float)
        except ValueError:
            values = np.array(
                pd.to_numeric(series, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
            )
            # text pandas cannot parse is already NaN; make sure nothing unparsed passes
            for i in np.flatnonzero(np.isfinite(values)):
                try:
                    values[i] = float(str(raw[i]))
                except ValueError:
                    values[i] = np.nan
    bad = ~np.isfinite(values)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raw_value = series.iloc[row]
        what = "the value is missing" if pd.isna(raw_value) else (
            f"{shown(raw_value)} is not a finite number"
        )
        raise DataError(f"{_row(path, column, row)}: {what}")
    return values


def probability_column(frame: Any, column: str, path: str | Path, *, flag: str) -> np.ndarray:
    """A column of probabilities in [0, 1], or a DataError naming the first bad row."""
    values = numeric_column(frame, column, path, flag=flag)
    bad = (values < 0.0) | (values > 1.0)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise DataError(
            f"{_row(path, column, row)}: {shown(values[row])} is not a probability in [0, 1] "
            "(use --scale log-odds for log-odds scores)"
        )
    return values


def _number(value: Any) -> float | None:
    if isinstance(value, bool | np.bool_):
        return float(value)
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if np.isfinite(out) else None


def read_labels(
    frame: Any, column: str, path: str | Path, *, positive: str | None = None,
    flag: str = "--label-column",
) -> tuple[np.ndarray, list[Any]]:
    """Binary labels as 0/1 and the two original labels ``[negative, positive]``.

    Labels 0/1 (as numbers or text) and booleans have the positive class 1 / True unless
    ``positive`` says otherwise. Any other pair of labels (text such as ``damaged``/``intact``,
    or numbers such as 1/2) needs ``positive`` (the ``--positive-label`` option): which class
    is "positive" is never guessed from the sort order.
    """
    pd = require("pandas")
    if column not in frame.columns:
        raise no_column(frame, column, path, flag)
    series = frame[column]
    missing = series.isna().to_numpy()
    if missing.any():
        row = int(np.flatnonzero(missing)[0])
        raise DataError(f"{_row(path, column, row)}: the label is missing")
    if pd.api.types.is_numeric_dtype(series.dtype) or pd.api.types.is_bool_dtype(series.dtype):
        values = series.to_numpy()
    else:
        values = series.astype(str).to_numpy(dtype=object)
    distinct = pd.unique(values)
    if distinct.shape[0] != 2:
        shown_labels = ", ".join(shown(v) for v in distinct[:6])
        more = ", ..." if distinct.shape[0] > 6 else ""
        raise DataError(
            f"{path}: column {shown(column)} must hold exactly two labels (binary outcome); it "
            f"holds {distinct.shape[0]}: {shown_labels}{more}"
        )
    numbers = [_number(v) for v in distinct]
    zero_one = sorted(n for n in numbers if n is not None) == [0.0, 1.0]
    if positive is not None:
        matches = [
            i for i, v in enumerate(distinct)
            if str(v) == positive or (numbers[i] is not None and _number(positive) == numbers[i])
        ]
        if len(matches) != 1:
            raise DataError(
                f"{path}: column {shown(column)} has no label {shown(positive)} (given by "
                f"--positive-label); its labels are {shown(distinct[0])} and {shown(distinct[1])}"
            )
        pos_index = matches[0]
    elif zero_one:
        pos_index = numbers.index(1.0)
    else:
        a, b = sorted(str(v) for v in distinct)
        raise DataError(
            f"{path}: column {shown(column)} holds the labels {shown(a)} and {shown(b)}, not 0/1; "
            f"say which one is the positive class (the class the scores are the probability of) "
            f"with --positive-label {clean(a)} or --positive-label {clean(b)}"
        )
    pos = distinct[pos_index]
    neg = distinct[1 - pos_index]
    y = (values == pos).astype(np.intp)
    plain = [v.item() if hasattr(v, "item") else v for v in (neg, pos)]
    return y, plain


# -- messages ------------------------------------------------------------------------------------
def warn_line(verb: str, message: str) -> None:
    """One warning line on stderr: ``probwrap VERB: warning: ...``."""
    print(f"probwrap {verb}: warning: {clean(' '.join(message.split()))}", file=sys.stderr)


def check_ranking(
    verb: str, scores: np.ndarray, y: np.ndarray, labels: list[Any], path: str | Path
) -> float | None:
    """Warn when the scores rank the positive class below the other (ROC AUC < 0.5).

    Returns the ROC AUC (None when one class is absent).
    """
    from sklearn.metrics import roc_auc_score

    if np.unique(y).shape[0] < 2:
        return None
    auc = float(roc_auc_score(y, scores))
    if auc < 0.5:
        warn_line(
            verb,
            f"{path}: the scores rank the positive class {shown(labels[1])} BELOW "
            f"{shown(labels[0])} (ROC AUC {auc:.3f} < 0.5); check --positive-label and that the "
            "score column is the positive class's score",
        )
    return auc


def check_row_count(verb: str, n_rows: int, path: str | Path, what: str = "rows") -> None:
    """Warn when a file has fewer than :data:`FEW_ROWS` rows (intervals and tests unreliable)."""
    if n_rows < FEW_ROWS:
        warn_line(
            verb,
            f"{path}: only {n_rows} {what}; with fewer than {FEW_ROWS} (common practice) "
            "intervals, tests and fitted maps are unreliable",
        )


# -- writing files -------------------------------------------------------------------------------
def check_out_suffix(
    parser: argparse.ArgumentParser, out: str, suffixes: tuple[str, ...], flag: str = "--out"
) -> None:
    """A usage error (exit 2) unless ``out`` ends with one of ``suffixes``."""
    if Path(out).suffix.lower() not in suffixes:
        parser.error(
            f"{flag} {out}: unsupported file type {Path(out).suffix or '(none)'!s}; use one of "
            f"{', '.join(suffixes)}"
        )


def _prepare_folder(path: Path) -> None:
    if path.is_dir():
        raise DataError(f"{path}: is a folder; give a file name")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DataError(
            f"{path}: the folder {path.parent} cannot be created ({exc.strerror or exc})"
        ) from None


def check_writable(path: str | Path, *, folder: bool = False) -> None:
    """Fail early (before any long computation) when ``path`` cannot be written.

    ``folder=True``: ``path`` is a folder to write into (created when missing).
    """
    path = Path(path)
    if folder:
        if path.exists() and not path.is_dir():
            raise DataError(f"{path}: is a file; --out names a folder")
        target_dir = path
    else:
        if path.is_dir():
            raise DataError(f"{path}: is a folder; give a file name")
        target_dir = path.parent
    try:
        target_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DataError(
            f"{path}: the folder {target_dir} cannot be created ({exc.strerror or exc})"
        ) from None
    if not os.access(target_dir, os.W_OK | os.X_OK):
        raise DataError(f"{path}: cannot be written (the folder {target_dir} is read-only)")


def write_atomic(path: str | Path, write: Callable[[Path], None]) -> None:
    """Write a file so that it is either the complete new file or the untouched old one.

    ``write(tmp)`` writes the content to a temporary file in the same folder; it is flushed
    and fsynced, then moved over ``path`` with :func:`os.replace` (atomic on POSIX and
    Windows). An error or an interruption (Ctrl-C, SIGTERM, a full disk) removes the
    temporary file and leaves any previous ``path`` as it was; of two runs writing the same
    path, the last to finish wins with its whole file. Missing parent folders are created.
    """
    path = Path(path)
    _prepare_folder(path)
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise DataError(f"{path}: cannot be written ({exc.strerror or exc})") from None
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        try:
            mode = path.stat().st_mode & 0o7777 if path.exists() else None
        except OSError:
            mode = None
        if mode is None:
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        write(tmp)
        with open(tmp, "rb+") as handle:
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, path)
    except OSError as exc:
        raise DataError(f"{path}: cannot be written ({exc.strerror or _one_line(exc)})") from None
    finally:
        with contextlib.suppress(OSError):
            tmp.unlink()
    with contextlib.suppress(OSError, AttributeError):
        dir_fd = os.open(path.parent, os.O_RDONLY)
        try:
            os.fsync(dir_fd)
        finally:
            os.close(dir_fd)


def write_text(path: str | Path, text: str) -> None:
    """Write UTF-8 text atomically (see :func:`write_atomic`)."""
    write_atomic(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))


def write_table(frame: Any, path: str | Path) -> None:
    """Write a DataFrame atomically, as Parquet (``.parquet``/``.pq``) or CSV (``.csv``)."""
    path = Path(path)
    if path.suffix.lower() not in TABLE_SUFFIXES:
        raise DataError(f"{path}: unsupported file type; use one of {', '.join(TABLE_SUFFIXES)}")
    if _kind(path) == "Parquet":
        require("pyarrow")
        write_atomic(path, lambda tmp: frame.to_parquet(tmp, index=False))
    else:
        write_atomic(path, lambda tmp: frame.to_csv(tmp, index=False))


# -- shared flags --------------------------------------------------------------------------------
def whole_number(minimum: int, *, or_zero: bool = False):
    """An argparse type: an integer of at least ``minimum`` (or 0 when ``or_zero``)."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if value < minimum and not (or_zero and value == 0):
            extra = " (or 0)" if or_zero else ""
            raise argparse.ArgumentTypeError(f"must be at least {minimum}{extra}; got {value}")
        return value

    return parse


def add_positive_label_flag(parser: argparse.ArgumentParser, what: str = "label") -> None:
    """The ``--positive-label`` flag: which label is the positive class."""
    parser.add_argument(
        "--positive-label", metavar="VALUE", default=None,
        help=f"which {what} is the positive class (the class the scores are the probability "
        "of); required unless the labels are 0/1 or True/False (then 1 / True)",
    )


def add_format_flag(parser: argparse.ArgumentParser) -> None:
    """The ``--format`` flag of verbs that print a summary."""
    parser.add_argument(
        "--format", choices=("text", "json"), default="text",
        help="how to print the summary: text for people (default) or one JSON object for "
        "programs",
    )


def add_resamples_flag(parser: argparse.ArgumentParser, *, allow_zero: bool = True) -> None:
    """The ``--resamples`` flag: bootstrap resamples, at least :data:`MIN_RESAMPLES`."""
    parser.add_argument(
        "--resamples", type=whole_number(MIN_RESAMPLES, or_zero=allow_zero), default=200,
        metavar="N",
        help=f"bootstrap resamples for the intervals (default 200, at least {MIN_RESAMPLES}"
        + ("; 0 skips the intervals)" if allow_zero else ")"),
    )


# -- progress ------------------------------------------------------------------------------------
#: seconds a step runs before progress is shown (terminal) or a line is printed (otherwise)
PROGRESS_DELAY = 2.0


def _terminal() -> bool:
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):
        return False


def progress(iterable: Iterable, *, desc: str, total: int | None = None) -> Iterator:
    """Iterate with a progress bar on a terminal once it runs for a moment; plain otherwise.

    Off a terminal a plain line is printed to stderr when the loop takes longer than
    :data:`PROGRESS_DELAY` seconds, and then at most every 10 seconds.
    """
    if _terminal():
        try:
            from tqdm import tqdm
        except ImportError:
            tqdm = None
        if tqdm is not None:
            yield from tqdm(iterable, desc=desc, total=total, leave=False, delay=PROGRESS_DELAY)
            return
    start = last = time.monotonic()
    printed = False
    for i, item in enumerate(iterable):
        now = time.monotonic()
        if now - start > PROGRESS_DELAY and (not printed or now - last > 10.0):
            of = f"/{total}" if total is not None else ""
            print(f"probwrap: {desc}: {i}{of} done ({now - start:.0f} s)", file=sys.stderr,
                  flush=True)
            printed, last = True, now
        yield item


class Stages:
    """Progress over a few named steps of uneven length.

    On a terminal: a bar (tqdm) that counts finished steps and names the running one, with the
    elapsed time ticking; no ETA, since the steps differ in length. Otherwise: a plain line on
    stderr for each step still running after :data:`PROGRESS_DELAY` seconds, repeated every 30
    seconds. Nothing is shown for quick runs.

    Examples
    --------
    >>> with Stages("demo", ["fitting", "writing"]) as stages:
    ...     stages.start("fitting")
    ...     stages.start("writing")
    """

    def __init__(self, verb: str, names: list[str]) -> None:
        self.verb, self.names = verb, list(names)
        self.done = 0
        self.current: str | None = None
        self._since = time.monotonic()
        self._stop = threading.Event()
        self._lock = threading.Lock()
        self._bar = None
        self._thread: threading.Thread | None = None
        self._printed_at: float | None = None
        self._detail: str | None = None

    def __enter__(self) -> Stages:
        if _terminal():
            try:
                from tqdm import tqdm
            except ImportError:
                tqdm = None
            if tqdm is not None:
                self._bar = tqdm(
                    total=len(self.names), desc=self.verb, leave=False, delay=PROGRESS_DELAY,
                    bar_format="{desc}: {bar} {n_fmt}/{total_fmt} steps [{elapsed}]",
                    file=sys.stderr,
                )
        self._thread = threading.Thread(target=self._tick, daemon=True)
        self._thread.start()
        return self

    def start(self, name: str) -> None:
        """Mark the previous step finished and ``name`` running."""
        with self._lock:
            if self.current is not None:
                self.done += 1
                if self._bar is not None:
                    self._bar.update(1)
            self.current = name
            self._detail = None
            self._since = time.monotonic()
            self._printed_at = None
            if self._bar is not None:
                self._bar.set_description_str(f"{self.verb}: {name}", refresh=False)

    def detail(self, step: str, done: int | None = None, total: int | None = None) -> None:
        """Name the part of the running step that is in progress (e.g. a report's section).

        Has the signature of the ``progress`` callbacks of the library
        (``progress(step, done, total)``), so it can be passed to them directly.
        """
        with self._lock:
            count = f" {done}/{total}" if done is not None and total else ""
            self._detail = f"{step}{count}"
            if self._bar is not None and self.current is not None:
                self._bar.set_description_str(
                    f"{self.verb}: {self.current}: {self._detail}", refresh=False
                )

    def _tick(self) -> None:
        while not self._stop.wait(0.5):
            with self._lock:
                if self._bar is not None:
                    self._bar.refresh()
                    continue
                if self.current is None:
                    continue
                now = time.monotonic()
                if now - self._since < PROGRESS_DELAY:
                    continue
                if self._printed_at is None or now - self._printed_at >= 30.0:
                    detail = f": {self._detail}" if self._detail else ""
                    print(
                        f"probwrap {self.verb}: step {self.done + 1}/{len(self.names)}: "
                        f"{self.current}{detail} ({now - self._since:.0f} s)",
                        file=sys.stderr, flush=True,
                    )
                    self._printed_at = now

    def __exit__(self, *exc: Any) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()
        with self._lock:
            if self._bar is not None:
                if exc[0] is None:
                    self._bar.update(len(self.names) - self._bar.n)
                self._bar.close()
