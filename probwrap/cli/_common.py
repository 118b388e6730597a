"""Shared pieces of the command line: data errors, optional dependencies, one-line messages
and warnings, and the flags every verb shares.

Reading input tables lives in :mod:`._tables`, writing files in :mod:`._files`, progress on
long steps in :mod:`._progress`.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import re
import sys
from pathlib import Path
from typing import Any

import numpy as np

from .._validation import plain

__all__ = [
    "DataError", "MissingExtraError", "OPTIONAL_MODULES", "require", "shown", "clean",
    "TABLE_SUFFIXES", "table_kind", "not_found", "one_line", "warn_line", "check_ranking", "check_row_count",
    "check_scores_vary",
    "FEW_ROWS", "MIN_RESAMPLES", "add_positive_label_flag", "add_format_flag",
    "add_resamples_flag", "whole_number", "add_seed_flag", "MAX_SEED", "add_weight_flag", "add_weight_dots_flag",
    "add_encoding_flag",
    "weight_summary", "not_a_number", "FREQUENCY_WEIGHT_LIMIT", "StandardStream",
    "is_standard_stream", "INPUT_OPTIONS", "NAMED_ROWS", "rows_text", "missing_count_text",
    "percent_hint",
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
#: weights averaging more than this per row draw a warning (a rule of thumb): read as row
#: frequencies, they make the file count as that many times more rows
FREQUENCY_WEIGHT_LIMIT = 100.0
#: the least number of bootstrap resamples any verb accepts (0 means "no interval")
MIN_RESAMPLES = 10

#: table files: Parquet by these extensions, CSV by the rest of TABLE_SUFFIXES
PARQUET_SUFFIXES = (".parquet", ".pq")
#: ``.tsv`` (tab-separated) is written with a tab, whatever the file read was separated by
TABLE_SUFFIXES = (".csv", ".tsv", *PARQUET_SUFFIXES)


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

def table_kind(path: Path) -> str:
    """"Parquet" by the file's extension (see :data:`PARQUET_SUFFIXES`), "CSV" otherwise; for
    standard input, what its first bytes showed (:class:`StandardStream`)."""
    if isinstance(path, StandardStream):
        return path.kind or "CSV"
    return "Parquet" if path.suffix.lower() in PARQUET_SUFFIXES else "CSV"


class StandardStream(str):
    """``-`` given for a file: standard input (or output), named so in messages.

    The command line swaps every input option given as ``-`` for one of these before a verb
    runs, so that the readers know to read standard input and every message names it as
    "standard input" rather than "-". ``kind`` is set once the stream is read: "CSV" or
    "Parquet", from its first bytes.

    Examples
    --------
    >>> name = StandardStream()
    >>> str(name), is_standard_stream(name), is_standard_stream("-"), is_standard_stream("a.csv")
    ('standard input', True, True, False)
    """

    kind: str | None = None

    def __new__(cls, text: str = "standard input") -> StandardStream:
        return super().__new__(cls, text)


def not_found(path: str | Path) -> str:
    """The message for a file that does not exist; a path starting with ``~`` adds that the
    shell did not expand it (it expands ``~`` only at the start of an unquoted word, so not in
    ``--scores=~/a.csv`` or ``"~/a.csv"``), naming the file it would have been."""
    text = f"{path}: file not found"
    if str(path).startswith("~"):
        home = Path(str(path)).expanduser()
        there = " (that file exists)" if home.exists() else ""
        text += (f"; the ~ was not turned into the home folder, as the shell does only at the "
                 f"start of an unquoted word (not after --option= or in quotes): give "
                 f"{shown(str(home))}{there}, or write the option and the path apart "
                 "(as in --scores ~/scores.csv)")
    return text


def is_standard_stream(path: Any) -> bool:
    """True for ``-`` or a :class:`StandardStream`: standard input or output."""
    return isinstance(path, StandardStream) or str(path) == "-"


#: the options that name a file to read, by their argparse destination
INPUT_OPTIONS = {"scores": "--scores", "unlabelled": "--unlabelled", "reference": "--reference",
                 "map": "--map"}


#: CSV files read whose data rows do not follow one another line by line (blank lines between
#: rows, which the reader skips): the row a spreadsheet shows for each data row, by file
_ROW_NUMBERS: dict[str, np.ndarray] = {}


def _row_key(path: Any) -> str:
    return "\0standard input" if isinstance(path, StandardStream) else os.path.abspath(
        os.fspath(path))


def set_row_numbers(path: Any, numbers: np.ndarray | None) -> None:
    """Record the spreadsheet row of each data row of the CSV file ``path`` (header = row 1),
    or forget it (``None``: rows follow the header line by line)."""
    if numbers is None:
        _ROW_NUMBERS.pop(_row_key(path), None)
    else:
        _ROW_NUMBERS[_row_key(path)] = np.asarray(numbers)


def row_number(path: str | Path, row: int) -> str:
    """Where the 0-based data row ``row`` of a table is, in a message: "row 7 (counting the
    header as row 1)" in a CSV file (as a spreadsheet numbers it, blank lines included), "row 6
    (counting the first row as row 1)" in a Parquet file (which has no header line)."""
    if table_kind(path if isinstance(path, StandardStream) else Path(path)) == "Parquet":
        return f"row {row + 1} (counting the first row as row 1)"
    numbers = _ROW_NUMBERS.get(_row_key(path))
    if numbers is not None and 0 <= row < numbers.shape[0]:
        return f"row {int(numbers[row])} (counting the header as row 1)"
    return f"row {row + 2} (counting the header as row 1)"


#: rows named in a message about missing values (the rest are counted)
NAMED_ROWS = 5


def rows_text(path: str | Path, rows: np.ndarray) -> str:
    """The first :data:`NAMED_ROWS` of ``rows`` (0-based data rows) as a message names them:
    "rows 3, 7 and 9 (counting the header as row 1)".

    Examples
    --------
    >>> import numpy as np
    >>> rows_text("a.csv", np.array([3, 50, 200]))
    'rows 5, 52 and 202 (counting the header as row 1)'
    """
    shown_rows = [row_number(path, int(r)).split(" ", 2)[1] for r in rows[:NAMED_ROWS]]
    counting = row_number(path, 0).split(" ", 2)[2]
    if rows.shape[0] > NAMED_ROWS:
        listed = ", ".join(shown_rows) + ", ..."
    elif len(shown_rows) > 1:
        listed = ", ".join(shown_rows[:-1]) + " and " + shown_rows[-1]
    else:
        listed = shown_rows[0]
    return f"{'row' if rows.shape[0] == 1 else 'rows'} {listed} {counting}"


def missing_count_text(path: str | Path, missing: np.ndarray) -> str:
    """After "row R: the value is missing": how many rows of the column have none and which,
    when more than one, so that a user fixing the file sees every such row at once, and what to
    do; "" when ``missing`` (a boolean mask over the rows) marks one row only.

    Examples
    --------
    >>> import numpy as np
    >>> print(missing_count_text("a.csv", np.array([False, True, False, True])))
    ; 2 of 4 rows have none in this column: rows 3 and 5 (counting the header as row 1); fill them in or remove those rows
    """
    rows = np.flatnonzero(missing)
    if rows.shape[0] < 2:
        return ""
    return (f"; {rows.shape[0]} of {missing.shape[0]} rows have none in this column: "
            f"{rows_text(path, rows)}; fill them in or remove those rows")


def one_line(exc: BaseException) -> str:
    """An exception's text on one line."""
    return " ".join(str(exc).split())

# -- messages ------------------------------------------------------------------------------------
#: the verb being run (set by the command line's main), for warnings given where the verb is
#: not passed down
_RUNNING = {"verb": ""}


def running_verb() -> str:
    """The verb being run ("" outside :func:`probwrap.cli.main`)."""
    return _RUNNING["verb"]


def set_running_verb(verb: str) -> None:
    """Record the verb being run (see :func:`running_verb`)."""
    _RUNNING["verb"] = verb


def warn_line(verb: str, message: str) -> None:
    """One warning line on stderr: ``probwrap VERB: warning: ...``."""
    print(f"probwrap {verb}: warning: {clean(' '.join(message.split()))}", file=sys.stderr)


def check_ranking(
    verb: str, scores: np.ndarray, y: np.ndarray, labels: list[Any], path: str | Path,
    sample_weight: np.ndarray | None = None,
) -> float | None:
    """Warn when the scores rank the positive class below the other (ROC AUC < 0.5).

    Returns the ROC AUC (None when one class is absent). ``sample_weight``: the rows' weights
    (counts expanded to a success and a failure row per group have an unweighted AUC of 0.5
    exactly, and a hair below it by rounding, since every score appears once with each label).
    """
    from sklearn.metrics import roc_auc_score

    if sample_weight is not None:
        keep = sample_weight > 0
        scores, y, sample_weight = scores[keep], y[keep], sample_weight[keep]
    if np.unique(y).shape[0] < 2:
        return None
    auc = float(roc_auc_score(y, scores, sample_weight=sample_weight))
    if auc < 0.5:
        warn_line(
            verb,
            f"{path}: the scores rank the positive class {shown(labels[1])} BELOW "
            f"{shown(labels[0])} (ROC AUC {auc:.3f} < 0.5); check --positive-label and that the "
            "score column is the positive class's score",
        )
    return auc


def check_scores_vary(verb: str, scores: np.ndarray, path: str | Path, column: str,
                      consequence: str, sample_weight: np.ndarray | None = None) -> bool:
    """Warn when every row (of weight > 0) holds the same score; returns True when they vary.

    Scores that do not vary tell no row from another: a cutoff then acts on every row or on
    none, a map gives one probability, a test of ranking or calibration slope has nothing to
    read. The verbs still give their numbers (they are what those rows support), and the
    warning names the file, the column and the one value, so that an export that wrote a
    default value (or rounded every score to one number) is not read without a word.
    ``consequence``: what the verb can then say, in its own words.
    """
    s = np.asarray(scores, dtype=float)
    if sample_weight is not None:
        s = s[np.asarray(sample_weight, dtype=float) > 0]
    if s.size < 2 or np.ptp(s) > 0:
        return True
    warn_line(verb, (
        f"{path}: column {shown(column)} holds one score, {float(s[0]):.6g}, in all {s.size} "
        f"rows{'' if sample_weight is None else ' of weight above 0'}: scores that do not vary "
        f"cannot tell the rows apart, so {consequence}; check that the column holds the "
        "model's scores (an export that wrote a default value, or rounded every score to one "
        "number?)"))
    return False


def check_row_count(verb: str, n_rows: int, path: str | Path, what: str = "rows",
                    sample_weight: np.ndarray | None = None,
                    counted: str = "the intervals count", hint: str = "") -> None:
    """Warn when a file has fewer than :data:`FEW_ROWS` rows (intervals and tests unreliable).

    ``hint``: added to the advice for whole-number weights (``prevalence --reference``:
    counts without their common factor are counted as cases).

    With whole-number weights summing to :data:`FEW_ROWS` or more (a table of counts), the
    warning says what to do: the parts named by ``counted`` (the verb's intervals, its choice
    between maps or its test) count the file's rows (or Kish's effective number), never the
    weights' sum, so counted rows must be repeated to be counted there.
    """
    if n_rows < FEW_ROWS:
        message = (f"{path}: only {n_rows} {what}; with fewer than {FEW_ROWS} (common practice) "
                   "intervals, tests and fitted maps are unreliable")
        if sample_weight is not None:
            w = np.asarray(sample_weight, dtype=float)
            total = float(w.sum())
            if total >= FEW_ROWS and np.all(w == np.round(w)):
                message += (
                    f". The weights sum to {total:.0f}, but {counted} the file's {n_rows} "
                    f"{what} (Kish's effective number when the weights vary), not the weights; "
                    "if each weight counts identical rows, repeat each row that many times to "
                    "have them counted" + hint
                )
        warn_line(verb, message)

# -- shared flags --------------------------------------------------------------------------------
def whole_number(minimum: int, *, or_zero: bool = False):
    """An argparse type: an integer of at least ``minimum`` (or 0 when ``or_zero``)."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{plain(text)!r} is not a whole number") from None
        if value < minimum and not (or_zero and value == 0):
            extra = " (or 0)" if or_zero else ""
            raise argparse.ArgumentTypeError(f"must be at least {minimum}{extra}; got {value}")
        return value

    return parse


#: the largest seed NumPy's and scikit-learn's random states take (seeds are 0 .. 2**32 - 1)
MAX_SEED = 2**32 - 1


def _seed(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{plain(text)!r} is not a whole number; give a seed from 0 to {MAX_SEED} (2**32 - 1)"
        ) from None
    if not 0 <= value <= MAX_SEED:
        raise argparse.ArgumentTypeError(
            f"must be from 0 to {MAX_SEED} (2**32 - 1); got {value}"
        )
    return value


def add_seed_flag(parser: argparse.ArgumentParser, what: str) -> None:
    """The ``--seed`` flag: a whole number from 0 to :data:`MAX_SEED` (default 0)."""
    parser.add_argument(
        "--seed", type=_seed, default=0, metavar="S",
        help=f"seed of {what}, from 0 to 2**32 - 1 (default 0)",
    )


def add_positive_label_flag(parser: argparse.ArgumentParser, what: str = "label") -> None:
    """The ``--positive-label`` flag: which label is the positive class."""
    parser.add_argument(
        "--positive-label", metavar="VALUE", default=None,
        help=f"which {what} is the positive class (the class the scores are the probability "
        "of); required unless the labels are 0/1 or True/False (then 1 / True)",
    )


def not_a_number(text: str) -> argparse.ArgumentTypeError:
    """The usage error for an option value that is not a number; a decimal comma (``0,04``,
    as typed in many European locales) is named, with the value written with a point.

    Examples
    --------
    >>> str(not_a_number("0,04"))
    "'0,04' is not a number (write the decimal mark as a point: 0.04)"
    >>> str(not_a_number("32%"))
    "'32%' is not a number (a percent sign is not read: write 32% as 0.32)"
    """
    hint = ""
    if re.fullmatch(r"\s*[-+]?\d*,\d+(?:[eE][-+]?\d+)?\s*", text):
        hint = f" (write the decimal mark as a point: {text.strip().replace(',', '.')})"
    percent = re.fullmatch(r"\s*([-+]?(?:\d+\.?\d*|\.\d+))\s*%\s*", text)
    if percent:
        hint = (f" (a percent sign is not read: write {text.strip()} as "
                f"{float(percent.group(1)) / 100:.15g})")
    return argparse.ArgumentTypeError(f"{plain(text)!r} is not a number{hint}")


def percent_hint(value: float) -> str:
    """For a share given in percent (``--capacity 10``, ``--source-prevalence 4``): a hint with
    the share to write; "" for other values.

    Examples
    --------
    >>> percent_hint(10.0), percent_hint(-1.0)
    ('; 10 looks like a percentage: write it as the share 0.1', '')
    """
    if 1.0 < value <= 100.0:
        return f"; {value:g} looks like a percentage: write it as the share {value / 100:g}"
    return ""


def add_weight_flag(parser: argparse.ArgumentParser) -> None:
    """The ``--weight-column`` flag: row weights for every number a verb computes (and
    ``--weight-dots``, :func:`add_weight_dots_flag`)."""
    parser.add_argument(
        "--weight-column", metavar="W", default=None,
        help="column of row weights: numbers >= 0, not all 0 (e.g. how many parcels a row "
        "stands for); every number is then weighted by them",
    )
    add_weight_dots_flag(parser)


def _encoding(text: str) -> str:
    """An argparse type: the name of a text encoding Python knows (``cp1252``, ``latin-1``)."""
    import codecs

    try:
        info = codecs.lookup(text)
    except LookupError:
        raise argparse.ArgumentTypeError(
            f"{shown(text)} is not an encoding Python knows: give one such as cp1252 (Windows, "
            "Western Europe), latin-1, cp1250 (Central Europe) or utf-16") from None
    if not getattr(info, "_is_text_encoding", True):
        raise argparse.ArgumentTypeError(f"{shown(text)} is not a text encoding")
    return text


def add_encoding_flag(parser: argparse.ArgumentParser) -> None:
    """The ``--encoding`` flag: the text encoding of the command's CSV files (pandas' own
    ``encoding`` option), for files a spreadsheet saved in its code page rather than UTF-8."""
    parser.add_argument(
        "--encoding", type=_encoding, default=None, metavar="NAME",
        help="text encoding of the CSV files read (default UTF-8; a file that starts with a "
        "byte-order mark is read by it), e.g. cp1252 for a CSV file a Windows spreadsheet "
        "saved in Western Europe; calibrate apply writes such a file back as UTF-8 with a "
        "byte-order mark",
    )


def add_weight_dots_flag(parser: argparse.ArgumentParser) -> None:
    """``--weight-dots``: how a dot in weights is read where the file cannot tell."""
    parser.add_argument(
        "--weight-dots", choices=("decimal", "thousands"), default=None,
        help="how a dot in the weights (and in --time-column) is read where 2.500 may be 2.5 "
        "or 2500 (European spreadsheets write whole numbers with dots between thousands): in "
        "a semicolon- or tab-separated file, with or without decimal commas; decimal reads "
        "2.5, thousands 2500; by default such a column is refused unless its other values "
        "settle it",
    )


def weight_summary(column: str, w: np.ndarray) -> dict[str, Any]:
    """The JSON block describing ``--weight-column``: its sum and Kish's effective rows."""
    with np.errstate(over="ignore"):
        total = float(w.sum())
    u = w / w.max()
    return {"column": column, "sum": total, "effective_rows": float(u.sum() ** 2 / (u @ u))}


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
