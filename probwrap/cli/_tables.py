"""Reading the command line's input tables: CSV or Parquet files, numeric and probability
columns read exactly, and binary labels with an explicit positive class.

Every problem is a :class:`~._common.DataError` naming the file, the column and the first bad
row.
"""

from __future__ import annotations

import csv
import lzma
import re
import shlex
import zipfile
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import numpy as np

from ._common import (
    FREQUENCY_WEIGHT_LIMIT,
    DataError,
    StandardStream,
    clean,
    is_standard_stream,
    missing_count_text,
    not_found,
    one_line,
    require,
    row_number,
    rows_text,
    set_row_numbers,
    shown,
    table_kind,
    warn_line,
)

__all__ = ["read_table", "no_column", "refuse_repeated", "positions_text", "numeric_column", "probability_column", "read_labels",
           "read_weights"]


def read_table(path: str | Path, *, exact: Iterable[str] = (), as_text: bool = False,
               text: Iterable[str] = ()) -> Any:
    """Read a CSV or Parquet file into a pandas DataFrame (Parquet by extension; CSV otherwise).

    The columns named in ``exact`` are read from CSV as text, so :func:`numeric_column` turns
    them into floats with a correctly rounded parser (a number written at full precision reads
    back as the same float, in every pandas version).

    ``as_text=True`` (a table that is written out again, as by ``calibrate apply``): every CSV
    column is kept as the text it holds (and ``frame.attrs["csv_dialect"]`` records the
    separator, the decimal mark, whether the file started with a byte-order mark or a ``sep=X`` line, and its line end), with nothing taken for a missing value in the other
    columns (``NA``, ``None``, ``000123`` and ``12345678901234567890`` stay as written), and
    decimal commas stay commas (:func:`numeric_column` reads them); a Parquet file's index,
    when it has a named or non-default one, becomes an ordinary column so that it is written
    out too (a named index is a column in every reading, so that the options can name it). The columns in ``exact`` still read empty fields and pandas' usual missing-value
    words as missing.

    ``text``: columns read from CSV as the text they hold, nothing taken for a missing value
    but an empty field (group labels: ``01`` and ``1`` stay two labels, ``NA`` stays ``NA``);
    the other columns are read as usual.

    A name the header gives more than once (two ``notes`` columns of a spreadsheet export) is
    read: each of those columns is renamed ``name [column k]`` so that no option reaches one
    by the repeated name (:func:`refuse_repeated` refuses an option that names it, giving the
    positions), and ``frame.attrs["repeated_as"]`` keeps the names as written for
    ``calibrate apply`` to write back.
    """
    pd = require("pandas")
    if is_standard_stream(path):
        return _read_standard_input(path, exact=exact, as_text=as_text, text=text)
    path = Path(path)
    if not path.exists():
        raise DataError(not_found(path))
    if path.is_dir():
        raise DataError(f"{path}: is a folder, not a file")
    suffix = path.suffix.lower()
    if suffix in _NOT_TABLES:
        raise DataError(
            f"{path}: {_NOT_TABLES[suffix]} files are not read; save the table as CSV (UTF-8) "
            f"or Parquet (.csv, .parquet){_sheets_text(path)}"
        )
    if table_kind(path) == "CSV" and path.suffix.lower() not in _COMPRESSED:
        wrong = _not_text(path)
        if wrong is not None:
            raise DataError(wrong)
    if table_kind(path) == "Parquet":
        require("pyarrow")
    header: list[str] | None = None
    try:
        if table_kind(path) == "Parquet":
            frame, header = _read_parquet(pd, path)
            if not _plain_index(frame.index, pd) and (
                    as_text or any(name is not None for name in frame.index.names)):
                # a column a script made the index (df.set_index("score").to_parquet(...))
                # is stored as the index and read back as one: it is a column of the file
                # ("no column 'score'; the file has columns 'id', 'y'" before)
                frame = frame.reset_index()
            if not all(isinstance(c, str) for c in frame.columns):
                # names kept as numbers by pandas' metadata (a frame of predict_proba's
                # columns 0 and 1): the options name columns by text (since 5 December 2026;
                # before, "no column '1' ...; the file has columns '0', '1'")
                frame.columns = [str(c) for c in frame.columns]
        else:
            exact = list(exact)
            encoding = _csv_encoding(path)
            sep, decimal = _csv_dialect(path, encoding)
            text_options: dict[str, Any] = {}
            text = [] if as_text else list(text)
            dtype: Any = str if as_text else dict.fromkeys([*exact, *text], str)
            if as_text:
                # only the columns that are parsed know missing values; the rest pass through
                text_options = {"keep_default_na": False,
                                "na_values": {c: sorted(_MISSING_WORDS) for c in exact}}
            elif text:
                # the text columns keep every word as written ("" is read as missing); every
                # other column reads pandas' usual missing-value words as missing
                names = _csv_header(path, encoding, sep) or []
                text_options = {"keep_default_na": False, "na_values": {
                    c: (sorted(_MISSING_WORDS) if c not in text else [""]) for c in names}}
            if _has_sep_line(path, encoding):
                text_options["skiprows"] = 1
            frame = _read_csv(pd, path, dtype=dtype, sep=sep, decimal=decimal,
                              encoding=encoding, **text_options)
            all_rows, keep = frame.shape[0], _rows_before_empty_tail(pd, frame)
            if keep < all_rows:
                # read again without them, so that every column gets the type it has in
                # the file without the empty rows (0/1 labels stay whole numbers)
                frame = _read_csv(pd, path, dtype=dtype, sep=sep, decimal=decimal,
                                  encoding=encoding, nrows=keep, **text_options)
            if as_text:  # kept as written; numeric_column reads the decimal commas
                frame.attrs["decimal"] = decimal
                # how the file was written, so that a table written back (calibrate apply)
                # opens the same way in the same spreadsheet
                frame.attrs["csv_dialect"] = {"sep": sep, "decimal": decimal,
                                              "bom": (_starts_with_bom(path)
                                                      or chosen_encoding(encoding)),
                                              "newline": _line_end(path, encoding),
                                              "sep_line": _has_sep_line(path, encoding)}
            elif decimal == ",":  # columns read as text keep their decimal commas: make dots
                grouped = {}
                deferred = {}
                for column in set(exact) & set(frame.columns):
                    written = frame[column].to_numpy(dtype=object)
                    try:
                        fields, count, first = _plain_number_text(written, ",", path, column)
                    except DataError:
                        # 2.500: numeric_column settles it by --weight-dots (weights and
                        # times) or refuses it, naming the column's option
                        deferred[column] = written
                        continue
                    frame[column] = pd.Series(fields, index=frame.index, dtype=object)
                    if count:
                        grouped[column] = (count, first, str(written[first]))
                frame.attrs["grouped_numbers"] = grouped  # warned of by numeric_column
                frame.attrs["dots_deferred"] = deferred
            # the separator and decimal mark the file was read with (weights whose dots
            # the file cannot settle: _settle_dots)
            frame.attrs["csv_read"] = (sep, decimal)
            header = _csv_header(path, encoding, sep)
            if as_text and header is not None:
                # the names as written: an empty header cell (an index column a script wrote
                # out) is written back empty, not as pandas' "Unnamed: 0"
                frame.attrs["csv_header"] = list(header)
            if header is not None and len(header) == 1:
                frame = _blank_lines_as_missing(pd, frame, path, encoding, sep)
            # rows named in messages as a spreadsheet numbers them (blank lines that were
            # skipped counted; a one-column file's blank lines are rows already)
            set_row_numbers(path, _spreadsheet_rows(path, encoding, sep, frame.shape[0]))
            if keep < all_rows:
                _warn_empty_tail(path, np.arange(keep, all_rows))
            if header is not None:
                _check_unnamed_tail(frame, header, path, sep)
    except DataError:
        raise
    except pd.errors.EmptyDataError:
        raise DataError(f"{path}: the file is empty") from None
    except UnicodeDecodeError as exc:
        if _CHOSEN_ENCODING[0] is not None and not exc.encoding.lower().startswith("utf-8"):
            raise DataError(_not_chosen(path, exc, _CHOSEN_ENCODING[0])) from None
        raise DataError(_not_utf8(path, exc)) from None
    except (MemoryError, KeyboardInterrupt):
        raise
    except Exception as exc:  # parsing errors of any kind: report, do not trace back
        raise DataError(f"{path}: cannot be read as {table_kind(path)} ({one_line(exc)})") from None
    names = header if header is not None else [str(c) for c in frame.columns]
    # empty names (a trailing separator) become "Unnamed: k" and can be told apart
    repeated = sorted({c for c in names if c.strip() and names.count(c) > 1})
    if repeated:
        if header is not None and table_kind(path) == "CSV" and numbers_only_header(names):
            # a file without a header line: its first row of numbers was read as the names
            raise DataError(f"{path}: {_NO_HEADER}")
        if len(names) != frame.shape[1]:
            raise DataError(
                f"{path}: the header names the column(s) "
                f"{', '.join(shown(c) for c in repeated)} more than once; rename them so that "
                "each column has its own name")
        frame = _set_repeated_aside(frame, names, repeated)
        if table_kind(path) == "Parquet":  # messages: "the Parquet file names ..."
            frame.attrs["names_from"] = "the Parquet file"
    if frame.shape[0] == 0:
        raise DataError(f"{path}: the file has a header but no rows")
    return frame


def _set_repeated_aside(frame: Any, names: list[str], repeated: list[str]) -> Any:
    """``frame`` with every column of a name the header gives more than once renamed to
    ``name [column k]`` (k counting from 1), so that no option reaches one of them by the
    repeated name; ``frame.attrs["repeated_columns"]`` maps each repeated name to its
    positions and ``frame.attrs["repeated_as"]`` each new name to the name written.

    pandas reads ``notes,notes`` as ``notes`` and ``notes.1``: an option naming ``notes``
    took the first without a word, and ``notes.1`` named a column that is not in the file.
    Until 5 December 2026 such a file was refused even when no option named the column.
    """
    columns = [str(c) for c in frame.columns]
    positions = {name: [i + 1 for i, c in enumerate(names) if c == name] for name in repeated}
    for i, name in enumerate(names):
        # a name written once that pandas changed because it looked like a renamed repeat
        # ("notes,notes,notes.1"): its name as written
        if name.strip() and name not in positions:
            columns[i] = name
    taken = set(columns)
    aside: dict[str, str] = {}
    for name, where in positions.items():
        for k in where:
            label = f"{name} [column {k}]"
            while label in taken:
                label += "'"
            taken.add(label)
            columns[k - 1] = label
            aside[label] = name
    attrs = dict(frame.attrs)
    frame = frame.set_axis(columns, axis=1)
    frame.attrs.update(attrs)
    frame.attrs["repeated_columns"] = positions
    frame.attrs["repeated_as"] = aside
    return frame


def positions_text(where: list[int]) -> str:
    """Column positions as words: "columns 2 and 5" (counting from 1).

    Examples
    --------
    >>> positions_text([2, 5]), positions_text([1, 3, 4])
    ('columns 2 and 5', 'columns 1, 3 and 4')
    """
    numbers = [str(k) for k in where]
    return "columns " + (", ".join(numbers[:-1]) + " and " + numbers[-1])


def refuse_repeated(frame: Any, column: Any, path: str | Path, flag: str) -> None:
    """A DataError when ``column`` (given by ``flag``) is a name the file's header gives more
    than once: which of the columns the option means cannot be told, so none is picked."""
    where = frame.attrs.get("repeated_columns", {}).get(str(column))
    if where:
        raise DataError(
            f"{path}: {frame.attrs.get('names_from', 'the header')} names the column(s) "
            f"{shown(str(column))} more than once "
            f"({positions_text(where)}, counting from 1) and {flag} names it: which one is "
            "meant cannot be told; rename them so that each column has its own name")




#: the first bytes of the forms standard input may take, and the extension a file of that form
#: would have (so that it is read as that file would be)
_MAGIC = ((b"PAR1", ".parquet"), (b"\x1f\x8b", ".csv.gz"), (b"BZh", ".csv.bz2"),
          (b"\xfd7zXZ\x00", ".csv.xz"), (b"PK\x03\x04", ".zip"))


def _read_standard_input(name: Any, **options: Any) -> Any:
    """Read a table from standard input: CSV, compressed CSV or Parquet, told by its first
    bytes (Parquet files start with ``PAR1``, gzip with ``1f 8b``, ...).

    The stream is copied to a temporary file first (in blocks; the whole table is never held
    twice), since the CSV reader looks at the text more than once (separator, decimal mark,
    header) and Parquet needs to seek; the file is removed once the table is read. Messages
    name "standard input", and ``name.kind`` (a :class:`StandardStream`) records whether it
    held CSV or Parquet, so that rows are numbered as in a file of that kind.
    """
    import shutil
    import sys
    import tempfile

    stream = name if isinstance(name, StandardStream) else StandardStream()
    source = getattr(sys.stdin, "buffer", None)
    if sys.stdin is None or source is None:
        raise DataError(f"{stream}: there is no standard input to read")
    if sys.stdin.isatty():
        print("probwrap: reading the table from standard input (end it with Ctrl-D, or Ctrl-Z "
              "then Enter on Windows)", file=sys.stderr)
    with tempfile.TemporaryDirectory(prefix="probwrap-stdin-") as folder:
        raw = Path(folder) / "stdin"
        try:
            with open(raw, "wb") as handle:
                shutil.copyfileobj(source, handle, 1 << 20)
        except OSError as exc:
            raise DataError(f"{stream}: cannot be read ({exc.strerror or exc})") from None
        with open(raw, "rb") as handle:
            start = handle.read(8)
        if not start:
            raise DataError(f"{stream}: nothing was sent to it (it is empty)")
        suffix = next((s for magic, s in _MAGIC if start.startswith(magic)), ".csv")
        path = raw.rename(raw.with_name("stdin" + suffix))
        stream.kind = table_kind(path)
        try:
            frame = read_table(path, **options)
        except DataError as exc:
            raise DataError(str(exc).replace(str(path), str(stream))) from None
        # rows numbered as in the stream (blank lines between rows counted), as for a file
        from ._common import _ROW_NUMBERS, _row_key

        set_row_numbers(stream, _ROW_NUMBERS.get(_row_key(path)))
        set_row_numbers(path, None)
        return frame


#: least share of a probability column's values above 1 (and at least two of them) for the
#: message to read the column as percentages (our rule): one stray value above 1 among
#: probabilities is a typo, not a column written in percent
PERCENT_SHARE = 0.01

#: largest share of rows the labels beyond the two most common ones may hold for the message
#: to name their rows (our rule): a rare third label is a typo or a code to fix
RARE_LABEL_SHARE = 0.05

#: the words pandas reads as a missing value by default (its documented ``na_values`` list)
_MISSING_WORDS = frozenset({
    "", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND", "1.#QNAN",
    "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null",
})


def _read_parquet(pd: Any, path: Path) -> tuple[Any, list[str] | None]:
    """A Parquet file as a DataFrame, and its column names as stored when one is repeated
    (None otherwise).

    pyarrow writes a table that names a column twice (``pa.table(..., names=[..., "notes",
    ..., "notes"])``), but pandas' reader refuses it whole ("Multiple matches for
    FieldRef.Name(notes)"), even when no option names that column. Such a file is read
    column by column here; the caller sets the repeated columns aside as for a CSV header
    (:func:`_set_repeated_aside`).
    """
    import pyarrow.parquet as pq

    names = [str(name) for name in pq.read_schema(path).names]
    if len(set(names)) == len(names):
        return pd.read_parquet(path), None
    table = pq.ParquetFile(path).read()
    # the pandas metadata (written by pandas, which never writes a name twice) may name
    # index columns by a repeated name: the columns are read as they are stored
    table = table.replace_schema_metadata(None)
    positional = [f"{name} [column {k + 1}]" for k, name in enumerate(table.column_names)]
    frame = table.rename_columns(positional).to_pandas()
    frame.columns = names  # set back: the caller renames the repeated ones again
    return frame, names


def _plain_index(index: Any, pd: Any) -> bool:
    """True for the unnamed 0, 1, 2, ... index that holds no data of the file."""
    return (isinstance(index, pd.RangeIndex) and index.name is None and index.start == 0
            and index.step == 1)


def _read_csv(pd: Any, path: Path, **options: Any) -> Any:
    """``pandas.read_csv`` that refuses a row with more fields than the header.

    Left to itself pandas takes the first field of such rows as the row index and shifts every
    column by one (a one-column file written with decimal commas, ``0,42``, reads as 42). Extra
    fields that are all empty (a separator at the end of each line) are dropped.
    """
    import warnings

    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("error", message="Length of header",
                                    category=pd.errors.ParserWarning)
            if path.suffix.lower() == ".zip":
                # pandas refuses an archive with macOS Finder's extra members: the one table
                # inside is opened here (_open_bytes) and read from its stream
                with _open_bytes(path) as handle:
                    return pd.read_csv(handle, index_col=False, **options)
            return pd.read_csv(path, index_col=False, **options)
    except (pd.errors.ParserWarning, pd.errors.ParserError):
        _check_field_counts(path, options.get("sep", ","), options.get("encoding", "utf-8-sig"))
        raise


def _spreadsheet_rows(path: Path, encoding: str, sep: str, n_rows: int) -> np.ndarray | None:
    """The row a spreadsheet shows for each of the ``n_rows`` data rows of a CSV file (header =
    row 1) when blank lines between the rows were skipped, or None when the rows follow the
    header one by one (or the records cannot be matched to the rows).

    A blank line is a row in a spreadsheet; the reader skips it, so a message counting rows
    from the header named the row before the bad one for each blank line above it (a quoted
    field spanning lines stays one row, as in a spreadsheet).
    """
    try:
        with _open_text(path, encoding, errors="replace") as handle:
            text = handle.read(_SCAN_CHUNK)
            # cheap look first: no line holding only spaces between two line ends
            if not re.search(r"(?:\r\n|\n|\r)[ \t]*(?:\r\n|\n|\r)", text) and (
                    len(text) < _SCAN_CHUNK):
                return None
        with _open_text(path, encoding, errors="replace") as handle:
            blank = [len(record) <= 1 and not "".join(record).strip()
                     for record in _records(handle, sep)]
    except _UNREADABLE:
        return None
    filled = np.flatnonzero(~np.asarray(blank, dtype=bool))
    if filled.shape[0] != n_rows + 1:  # the header and one record per row, or no guess
        return None
    numbers = filled[1:] - filled[0] + 1
    if np.array_equal(numbers, np.arange(2, n_rows + 2)):
        return None
    return numbers


def _rows_before_empty_tail(pd: Any, frame: Any) -> int:
    """The number of rows of ``frame`` before the rows at its end whose every field is empty
    (``,,,``); all of them when there are none, or when every row is so.

    A spreadsheet saved as CSV writes such a line for every row below the table that was once
    formatted or cleared; pandas skips blank lines but reads these as rows of missing values,
    so every verb refused the file ("row 291: the value is missing") and ``calibrate apply``
    wrote the empty rows out (before 5 December 2026; see
    ``benchmarks/cli_awkward_files_second.py``). A row of empty fields between rows of data is
    not touched: it is refused or let through as a missing value, as before.
    """
    if frame.shape[1] < 2:
        return frame.shape[0]

    def empty(i: int) -> bool:
        return all(not v.strip() if isinstance(v, str) else bool(pd.isna(v))
                   for v in frame.iloc[i].tolist())

    keep = frame.shape[0]
    while keep > 0 and empty(keep - 1):
        keep -= 1
    return frame.shape[0] if keep == 0 else keep


def _warn_empty_tail(path: Path, dropped: np.ndarray) -> None:
    """The warning that the rows ``dropped`` (0-based) at the end held only empty fields."""
    from ._common import running_verb

    many = dropped.shape[0] > 1
    warn_line(running_verb(), (
        f"{path}: the last {dropped.shape[0]} row{'s' if many else ''}, "
        f"{rows_text(path, dropped)}, hold{'' if many else 's'} only empty fields, as a "
        "spreadsheet writes for rows below its table; left out (delete "
        f"{'them' if many else 'it'} to silence this warning)"))


def _blank_lines_as_missing(pd: Any, frame: Any, path: Path, encoding: str, sep: str) -> Any:
    """A one-column CSV file with its blank lines between rows put back as missing values.

    pandas skips blank lines, which is right where a row of several fields cannot be blank,
    but in a one-column file a blank line is how a missing value is written: skipping it
    silently would drop the row (and ``calibrate apply`` would write fewer rows than it read,
    out of line with the input). Blank lines before the header and after the last row are
    still ignored.
    """
    try:
        with _open_text(path, encoding) as handle:
            blank = [not any(field.strip() for field in record)
                     for record in _records(handle, sep)]
    except _UNREADABLE:
        return frame
    filled = [i for i, b in enumerate(blank) if not b]
    if len(filled) < 2:
        return frame
    blank = blank[filled[0] + 1:filled[-1] + 1]  # the lines between the header and last row
    if not any(blank) or len(blank) - sum(blank) != frame.shape[0]:
        return frame  # nothing skipped, or lines that do not map one to one onto rows
    position = np.flatnonzero(~np.asarray(blank, dtype=bool))
    out = frame.set_axis(position, axis=0).reindex(range(len(blank)))
    out.attrs = dict(frame.attrs)
    return out


def _check_field_counts(path: Path, sep: str, encoding: str) -> None:
    """A DataError naming the first line with more (non-empty) fields than the header.

    When that line is the first after the header and the lines after it have as many fields
    (up to :data:`_LOOK_AHEAD` looked at) and it holds no number, the "header" is most likely a
    title or a note above the real header (an export's "Scores from ..., 2026-12-01" line),
    and the message says so.
    """
    header: int | None = None
    header_line = 0
    data_rows = 0
    after: list[int] = []
    try:
        with _open_text(path, encoding) as handle:
            reader = csv.reader(handle, delimiter=sep)
            for row in reader:
                if not any(field.strip() for field in row) or (
                        reader.line_num == 1 and _SEP_LINE.fullmatch(sep.join(row))):
                    continue
                if header is None:
                    header, header_line = len(row), reader.line_num
                    continue
                data_rows += 1
                if len(row) > header and any(field.strip() for field in row[header:]):
                    break
            else:
                return
            line, fields = reader.line_num, len(row)
            if data_rows == 1:  # the first line after the header: look at the next ones
                for more in reader:
                    if any(field.strip() for field in more):
                        after.append(len(more))
                    if len(after) >= _LOOK_AHEAD:
                        break
    except _UNREADABLE:
        return
    names = all(_number(field) is None for field in row if field.strip())
    if data_rows == 1 and names and after and all(n == fields for n in after):
        # the line after the "header" holds no number: it is the header, below a title
        raise DataError(
            f"{path}: line {header_line} has {header} field{'s' if header != 1 else ''} but "
            f"the lines after it have {fields}, so it cannot be the header; if the file starts "
            "with a title or notes above the header line, delete them so that the column "
            "names come first"
        )
    hint = (
        "; a number written with a decimal comma in a comma-separated file (0,42) makes two "
        "fields: write it with a decimal point, or separate the fields with ';' (a "
        "semicolon-separated file may use decimal commas)"
        if sep == "," else ""
    )
    raise DataError(
        f"{path}: line {line} has {fields} fields but the header has {header}, so "
        f"the columns cannot be told apart{hint}"
    )


def _check_unnamed_tail(frame: Any, header: list[str], path: Path, sep: str) -> None:
    """A DataError when a field under the empty names at the end of the header (a separator
    at the end of each line) holds a value.

    Such a value is a row pushed one field to the right: in a comma-separated file ``1,234``
    (a thousands separator) or ``0,42`` (a decimal comma) makes two fields, and with the empty
    last column to take the spill the row had as many fields as the header, so it was read
    without a word with ``1`` as its last named field (until 5 December 2026).
    """
    tail = len(header)
    while tail and not header[tail - 1].strip():
        tail -= 1
    if tail == len(header) or tail == 0 or frame.shape[1] != len(header):
        return
    filled = np.zeros(frame.shape[0], dtype=bool)
    for j in range(tail, len(header)):
        values = frame.iloc[:, j]
        filled |= (values.notna() & (values.astype(str).str.strip() != "")).to_numpy()
    if not filled.any():
        return
    row = int(np.flatnonzero(filled)[0])
    spilled = [frame.iloc[row, j] for j in range(tail, len(header))
               if str(frame.iloc[row, j]).strip() and not _is_nan(frame.iloc[row, j])]
    hint = (" (in a comma-separated file a number written with a thousands separator, 1,234, "
            "or a decimal comma, 0,42, makes two fields and pushes the fields after it one "
            "column to the right: write numbers without separators, with a decimal point, or "
            "quote them)") if sep == "," else ""
    count = int(filled.sum())
    raise DataError(
        f"{path}: {count} of {frame.shape[0]} row{'s' if frame.shape[0] != 1 else ''} "
        f"{'has' if count == 1 else 'have'} a value beyond the last named column, where the "
        f"header ends with an empty name: {rows_text(path, np.flatnonzero(filled))}, the "
        f"first holding {shown(_plain_float(spilled[0]))} there; their fields are most likely "
        f"shifted{hint}; "
        "if that column holds data, give it a name in the header")


def _is_nan(value: Any) -> bool:
    return isinstance(value, float) and value != value


def _plain_float(value: Any) -> Any:
    """412.0 read by pandas from a field written 412, shown as written."""
    if isinstance(value, float | np.floating) and float(value).is_integer():
        return int(value)
    return value


#: lines after the first data line looked at to tell a title line above the header
_LOOK_AHEAD = 20


#: extensions of files that are not tables this command reads, and what they are
_NOT_TABLES = {
    ".xlsx": "Excel", ".xlsm": "Excel", ".xls": "Excel", ".ods": "OpenDocument spreadsheet",
    ".json": "JSON", ".feather": "Feather", ".arrow": "Arrow", ".pkl": "pickle",
    ".pickle": "pickle", ".h5": "HDF5", ".hdf5": "HDF5",
}


def _sheets_text(path: Path) -> str:
    """"" or, for an Excel workbook of several sheets, the names of its sheets and that a
    spreadsheet saves only the sheet shown as CSV (a best-effort look: "" when the file is not
    such a workbook); for an OpenDocument spreadsheet (.ods), how to save the sheet as CSV."""
    if path.suffix.lower() == ".ods":
        # the sheet names are in content.xml beside the whole table, and reading .ods needs
        # odfpy, which is no dependency: say how to save the sheet without naming the sheets
        return ("; a spreadsheet saves only the sheet shown as CSV: open the file, show the "
                "sheet holding the scores, then save a copy as Text CSV (.csv) with UTF-8 "
                "characters, commas between fields and a decimal point")
    if path.suffix.lower() not in (".xlsx", ".xlsm"):
        return ""
    try:
        with zipfile.ZipFile(path) as archive:
            book = archive.read("xl/workbook.xml").decode("utf-8", "replace")
    except (OSError, KeyError, zipfile.BadZipFile, RuntimeError, ValueError):
        return ""
    names = [clean(name) for name in re.findall(r'<(?:\w+:)?sheet\b[^>]*?\bname="([^"]*)"',
                                                 book)]
    if len(names) < 2:
        return ""
    listed = ", ".join(shown(name) for name in names[:10]) + (", ..." if len(names) > 10 else "")
    return (f"; the workbook has {len(names)} sheets ({listed}) and a spreadsheet saves only "
            "the sheet shown as CSV: show the one holding the scores, then save it")


#: errors of a best-effort look at a file (a damaged archive, bytes that are not text): the
#: look gives up and pandas' own reading reports the problem
_UNREADABLE = (OSError, EOFError, ValueError, UnicodeError, csv.Error, zipfile.BadZipFile,
               lzma.LZMAError)

#: compressed CSV files pandas reads by extension, and the module that opens them
_COMPRESSED = {".gz": "gzip", ".bz2": "bz2", ".xz": "lzma", ".zip": "zip"}


def _not_text(path: Path) -> str | None:
    """The message for a file read as CSV (by its extension) whose first bytes show another
    kind of file: Parquet, a compressed file, an Excel or OpenDocument workbook (a workbook
    renamed ``.csv`` or a file saved without its extension). Before, such files were refused as
    "not UTF-8 text", showing their first line of binary bytes and advising ``--encoding``."""
    try:
        with open(path, "rb") as handle:
            start = handle.read(8)
    except OSError:
        return None
    rename = f"rename it to end in {{}} (mv {shlex.quote(path.name)} {{}}) and give that name"
    if start.startswith(b"PAR1"):
        what = "a Parquet file (it starts with PAR1)"
        advice = rename.format(".parquet", shlex.quote(path.stem + ".parquet"))
    elif start.startswith(b"\xd0\xcf\x11\xe0"):
        what = "an Excel 97-2003 workbook (.xls)"
        advice = "open it in the spreadsheet and save the sheet as CSV UTF-8"
    elif start.startswith(b"PK\x03\x04"):
        try:
            with zipfile.ZipFile(path) as archive:
                names = set(archive.namelist())
        except _UNREADABLE:
            names = set()
        if "xl/workbook.xml" in names:
            what = "an Excel workbook (.xlsx)"
            advice = "open it in the spreadsheet and save the sheet as CSV UTF-8"
        elif "content.xml" in names and "mimetype" in names:
            what = "an OpenDocument spreadsheet (.ods)"
            advice = "open it in the spreadsheet and save the sheet as CSV UTF-8"
        else:
            what = "a .zip archive"
            advice = rename.format(".zip", shlex.quote(path.name + ".zip"))
    else:
        found = next((s for magic, s in _MAGIC[1:4] if start.startswith(magic)), None)
        if found is None:
            return None
        kind = {".csv.gz": "gzip", ".csv.bz2": "bzip2", ".csv.xz": "xz"}[found]
        ending = found[4:]  # ".gz", ...
        what = f"{kind}-compressed"
        advice = rename.format(ending, shlex.quote(path.name + ending))
    return (f"{path}: is {what}, though its name ends in {path.suffix or 'no extension'} and "
            f"so is read as CSV text; {advice}")


def _zip_extra(name: str) -> bool:
    """Whether a member of a .zip file is no table: a folder, or what macOS Finder's Compress
    adds beside the file (``__MACOSX/._scores.csv``, ``.DS_Store``; until 5 December 2026 such
    an archive of one CSV file was refused as holding 2 files)."""
    base = name.rstrip("/").rsplit("/", 1)[-1]
    return (name.endswith("/") or name.startswith("__MACOSX/") or base == ".DS_Store"
            or base.startswith("._"))


def _open_bytes(path: Path) -> Any:
    """The file opened for reading bytes, decompressed when its extension says it is
    compressed (``.gz``, ``.bz2``, ``.xz``, ``.zip`` holding one file), as pandas reads it: the
    separator, the header and the blank lines are then looked for in the CSV text itself, not in
    the compressed bytes."""
    kind = _COMPRESSED.get(path.suffix.lower())
    if kind is None:
        return open(path, "rb")
    if kind == "zip":
        archive = zipfile.ZipFile(path)
        names = [n for n in archive.namelist() if not _zip_extra(n)]
        if len(names) != 1:
            archive.close()
            listed = ", ".join(shown(n) for n in names[:5]) + (", ..." if len(names) > 5 else "")
            raise DataError(f"{path}: a .zip file must hold exactly one file (it holds "
                            f"{len(names)}{': ' + listed if names else ''})")
        return archive.open(names[0])
    import importlib

    return importlib.import_module(kind).open(path, "rb")


def _not_chosen(path: Path, exc: UnicodeDecodeError, encoding: str) -> str:
    """The message for a CSV file that the encoding given with ``--encoding`` cannot read: the
    first byte it has no character for, and its line (for encodings of one byte per
    character; pandas decodes in blocks, so the error's own position is within a block)."""
    byte, where = exc.object[exc.start], ""
    try:
        with _open_bytes(path) as handle:
            for number, line in enumerate(handle, start=1):
                try:
                    line.decode(encoding)
                except UnicodeDecodeError as bad:
                    byte = line[bad.start]
                    where = (f" at position {bad.start + 1} of line {number}"
                             f"{' (the header)' if number == 1 else ''}")
                    break
    except _UNREADABLE:
        pass
    return (f"{path}: cannot be read as {encoding} (given by --encoding): byte 0x{byte:02x}"
            f"{where} has no character in it; give the encoding the file was saved in (cp1252 "
            "for Windows in Western Europe, latin-1, cp1250 for Central Europe, ...), or leave "
            "--encoding out for UTF-8")


def _not_utf8(path: Path, exc: UnicodeDecodeError) -> str:
    """The message for a CSV file that is not UTF-8: the first byte that cannot be read, its
    line and column, the line as the Windows-1252 code page (Western Europe; ISO Latin-1
    differs only in characters no header uses) would show it, and how to save the file."""
    byte, position = exc.object[exc.start], exc.start
    where, shown_line = "", ""
    try:  # the first undecodable line, counted in the (decompressed) file itself
        with _open_bytes(path) as handle:
            offset = 0
            for number, line in enumerate(handle, start=1):
                try:
                    line.decode("utf-8")
                except UnicodeDecodeError as bad:
                    byte, position = line[bad.start], offset + bad.start
                    text = line.rstrip(b"\r\n").decode("cp1252", errors="replace")
                    where = f" in line {number}{' (the header)' if number == 1 else ''}"
                    shown_line = (f"; read as Windows-1252 (Western European), that line is "
                                  f"{shown(text[:120] + ('...' if len(text) > 120 else ''))}")
                    break
                offset += len(line)
    except _UNREADABLE:
        pass
    plain = (path.suffix.lower() not in (".gz", ".bz2", ".xz", ".zip")
             and not path.parent.name.startswith("probwrap-stdin-"))
    convert = (f", convert it (iconv -f WINDOWS-1252 -t UTF-8 {shlex.quote(path.name)} > "
               "utf8.csv)" if plain and shown_line else "")
    return (f"{path}: is not UTF-8 text (byte 0x{byte:02x} at position {position}{where} "
            f"cannot be read{shown_line}); the encoding is not guessed: name it with --encoding "
            "(--encoding cp1252 for a Windows spreadsheet in Western Europe), save it as CSV "
            "UTF-8 (a choice of the spreadsheet's Save As; UTF-16 with a byte-order mark is "
            f"read too){convert}, or save it as Parquet")


def _open_text(path: Path, encoding: str, errors: str = "strict") -> Any:
    """The (decompressed) file opened as text, line ends kept as written (for ``csv``)."""
    import io

    return io.TextIOWrapper(_open_bytes(path), encoding=encoding, errors=errors, newline="")


_CHOSEN_ENCODING: list[str | None] = [None]


def set_csv_encoding(name: str | None) -> None:
    """The encoding ``--encoding`` names for the CSV files of this command (None: UTF-8)."""
    _CHOSEN_ENCODING[0] = name


def chosen_encoding(encoding: str) -> bool:
    """True when ``encoding`` (as :func:`_csv_encoding` returned it) is one ``--encoding``
    chose and not a Unicode one: a table read with it is written back as UTF-8 with a
    byte-order mark, which spreadsheets read, so no character is lost."""
    import codecs

    return (_CHOSEN_ENCODING[0] is not None and encoding == _CHOSEN_ENCODING[0]
            and not codecs.lookup(encoding).name.startswith("utf"))


def _utf8_beyond_ascii(path: Path) -> bool:
    """True when the file holds bytes beyond ASCII and all of them decode as UTF-8."""
    beyond = False
    try:
        with _open_bytes(path) as handle:
            tail = b""
            while True:
                block = handle.read(1 << 20)
                if not block:
                    break
                block = tail + block
                if not beyond and max(block) < 0x80:
                    tail = b""
                    continue
                beyond = True
                cut = len(block)  # a character split by the block's end waits for the next
                while cut > 0 and cut > len(block) - 4 and 0x80 <= block[cut - 1] < 0xC0:
                    cut -= 1
                if cut > 0 and block[cut - 1] >= 0xC0:
                    cut -= 1
                block, tail = block[:cut], block[cut:]
                block.decode("utf-8")
            if tail:
                tail.decode("utf-8")
    except _UNREADABLE:
        return False
    return beyond


def _csv_encoding(path: Path) -> str:
    """UTF-16 when the file starts with a UTF-16 byte-order mark (spreadsheets' "Unicode text"),
    UTF-8 when it starts with a UTF-8 one; otherwise the encoding given with ``--encoding``
    (:func:`set_csv_encoding`), and without it UTF-16 when the file starts with two ASCII
    characters each followed (little-endian) or preceded (big-endian) by a zero byte, and UTF-8
    otherwise."""
    try:
        with _open_bytes(path) as handle:
            start = handle.read(4)
    except _UNREADABLE:
        return _CHOSEN_ENCODING[0] or "utf-8-sig"
    if start[:2] in (b"\xff\xfe", b"\xfe\xff"):
        return "utf-16"
    if start[:3] == b"\xef\xbb\xbf":
        return "utf-8-sig"  # a byte-order mark says UTF-8, whatever --encoding says
    if _CHOSEN_ENCODING[0] is not None:
        if chosen_encoding(_CHOSEN_ENCODING[0]) and _utf8_beyond_ascii(path):
            # one --encoding for every file of the command: a file that is UTF-8 beside one
            # saved in a code page would be read with its letters garbled ('bénin' as
            # 'bÃ©nin'), since every byte means something in cp1252 or latin-1
            from ._common import running_verb

            # standard input is read from a temporary copy: named as the stream
            name = (StandardStream() if path.parent.name.startswith("probwrap-stdin-")
                    else path)
            warn_line(running_verb(), (
                f"{name}: read as UTF-8, not {_CHOSEN_ENCODING[0]} (--encoding): every byte "
                "beyond ASCII in it forms a UTF-8 character, which text in a one-byte code page "
                "almost never does"))
            return "utf-8"
        return _CHOSEN_ENCODING[0]
    # UTF-16 without a byte-order mark (some database and script exports): a header of
    # ASCII letters shows every other byte zero; UTF-8 text holds no zero byte there (it was
    # read as one column named after the first letter, 's', and 'Unnamed: 1', ...)
    if len(start) == 4 and start[1] == start[3] == 0 and start[0] and start[2]:
        return "utf-16-le"
    if len(start) == 4 and start[0] == start[2] == 0 and start[1] and start[3]:
        return "utf-16-be"
    return "utf-8-sig"


def _starts_with_bom(path: Path) -> bool:
    """True when the file starts with a UTF-8 or UTF-16 byte-order mark."""
    try:
        with _open_bytes(path) as handle:
            start = handle.read(3)
    except _UNREADABLE:
        return False
    return start == b"\xef\xbb\xbf" or start[:2] in (b"\xff\xfe", b"\xfe\xff")


def _line_end(path: Path, encoding: str) -> str:
    """The end of the header line of a CSV file: "\\r\\n" (Windows) or "\\n"."""
    try:
        with _open_text(path, encoding, errors="replace") as handle:
            first = handle.readline()
            if _SEP_LINE.fullmatch(first.rstrip("\r\n")):
                first = handle.readline()  # the header's, not the "sep=X" line's
    except _UNREADABLE:
        return "\n"
    return "\r\n" if first.endswith("\r\n") else "\n"


def _csv_header(path: Path, encoding: str, sep: str) -> list[str] | None:
    """The column names as written in the first non-blank line of a CSV file (pandas renames
    repeated names, so they are read here once more)."""
    try:
        with _open_text(path, encoding) as handle:
            for row in _records(handle, sep):
                if any(field.strip() for field in row):
                    return row
    except _UNREADABLE:
        return None
    return None


#: a field that is a number written with a decimal comma: 0,42 or -1,25 or Excel's 4,757E-02
#: or a percentage 12,5 % (optionally in double quotes), between semicolons (tabs) or at the start or end of a line
_DECIMAL_COMMA = {
    ";": re.compile(
        r'(?:^|;)[ \t]*"?[ \t]*[-+\u2212]?\d+,\d+(?:[eE][-+]?\d+)?(?:[ \u00a0]?%)?[ \t]*"?[ \t]*'
        r'(?=;|\r?$)',
        re.MULTILINE),
    # a tab-separated file: spreadsheets' "text (tab-delimited)" export writes the locale's
    # decimal comma as the ';' export does (it was refused as "not a finite number")
    "\t": re.compile(
        r'(?:^|\t)[ ]*"?[ ]*[-+\u2212]?\d+,\d+(?:[eE][-+]?\d+)?(?:[ \u00a0]?%)?[ ]*"?[ ]*'
        r'(?=\t|\r?$)',
        re.MULTILINE),
}
#: characters read at a time when looking for decimal commas
_SCAN_CHUNK = 1 << 20


#: the first line some spreadsheets write (and read) to name the separator: sep=; or sep=,
_SEP_LINE = re.compile(r"[ \t]*sep=([,;\t|])[ \t]*")


def _has_sep_line(path: Path, encoding: str) -> bool:
    """True when the file's first line is a spreadsheet's ``sep=X`` line (skipped on reading)."""
    try:
        with _open_text(path, encoding, errors="replace") as handle:
            return bool(_SEP_LINE.fullmatch(handle.readline().rstrip("\r\n")))
    except _UNREADABLE:
        return False


def _records(handle: Any, sep: str) -> Any:
    """``csv.reader`` rows of an open CSV file, without a first ``sep=X`` line."""
    reader = csv.reader(handle, delimiter=sep)
    first = True
    for row in reader:
        if first and len(row) <= 2 and _SEP_LINE.fullmatch(sep.join(row)):
            first = False
            continue
        first = False
        yield row


#: a line of a one-column file holding a number written with a decimal comma (0,42, "0,42",
#: 4,757E-02), and a line holding a comma in any other form
_ONE_COLUMN_COMMA = re.compile(r'[ \t]*"?[ \t]*[-+\u2212]?\d+,(\d+)(?:[eE][-+]?\d+)?[ \t]*"?[ \t]*')


def _one_column_decimal_commas(handle: Any) -> bool:
    """Whether the rest of an open CSV file (after a header without a separator) is one column
    of numbers written with decimal commas: every line holding a comma is such a number, and
    at least one has three decimals or more (``0,1`` and ``1,0`` alone may be two whole-number
    columns under a header naming one, refused as before). Until 5 December 2026 such a file
    (scores for ``prevalence`` saved from a German spreadsheet) was refused as "line 2 has 2 fields
    but the header has 1", or, quoted, as "'0,42' is not a finite number"."""
    found = False
    while True:
        chunk = handle.read(_SCAN_CHUNK)
        if not chunk:
            return found
        chunk += handle.readline()
        for line in chunk.splitlines():
            if "," not in line:
                continue
            match = _ONE_COLUMN_COMMA.fullmatch(line)
            if not match:
                return False
            # a decimal part of three digits or more somewhere: "0,1" / "1,0" alone may be
            # two whole-number columns under a header naming one
            found = found or len(match.group(1)) >= 3


#: data lines read to tell the separator of a header holding a comma and another separator
_SEP_LOOK_LINES = 50


def _comma_in_a_name(path: Path, encoding: str, header: str) -> str:
    """The separator of a file whose header holds a comma: ``,``, unless the header holds a tab,
    ``;`` or ``|`` too and that separator splits the header and the next
    :data:`_SEP_LOOK_LINES` lines into the same number of fields (two or more; the most fields
    wins, then the order ``,``, tab, ``;``, ``|``). A column name with a comma in a ``;`` file
    (German spreadsheets' "Risiko, kalibriert") made the file read as comma-separated."""
    others = [c for c in ("\t", ";", "|") if c in header]
    if not others:
        return ","
    best, best_fields = ",", 0
    for sep in (",", *others):
        try:
            with _open_text(path, encoding, errors="replace") as handle:
                counts = []
                for row in _records(handle, sep):
                    if not any(field.strip() for field in row):
                        continue  # blank lines and lines of bare separators
                    counts.append(len(row))
                    if len(counts) > _SEP_LOOK_LINES:
                        break
        except _UNREADABLE:
            return ","
        if len(counts) >= 2 and counts[0] >= 2 and len(set(counts)) == 1 \
                and counts[0] > best_fields:
            best, best_fields = sep, counts[0]
    return best


def _csv_dialect(path: Path, encoding: str = "utf-8-sig") -> tuple[str, str]:
    """Separator and decimal mark of a CSV file.

    Comma-separated unless the header has no comma but a semicolon or a tab (spreadsheets in
    many European locales write ``;`` with decimal commas) or, with none of these, a ``|``
    (database exports), or as a first ``sep=X`` line says; a header with a comma and another
    separator is read with the one that splits it and the lines after it alike
    (:func:`_comma_in_a_name`).
    With ``;`` or a tab the decimal mark is a comma when any field of the file is a number written with one (``0,42``, ``4,757E-02``):
    the whole file is looked at, since a sorted file may start with many rows of whole numbers.
    """
    try:
        with _open_text(path, encoding, errors="replace") as handle:
            header = handle.readline()
            declared = _SEP_LINE.fullmatch(header.rstrip("\r\n"))
            if declared:  # a spreadsheet's "sep=;" line names the separator
                sep = declared.group(1)
                if sep not in _DECIMAL_COMMA:
                    return sep, "."
            else:
                while header and not header.strip():
                    header = handle.readline()
                if "," in header:
                    sep = _comma_in_a_name(path, encoding, header)
                    if sep == ",":
                        return ",", "."
                    if sep == "|":
                        return "|", "."
                if "\t" in header:
                    sep = "\t"
                elif ";" in header:
                    sep = ";"
                elif "|" in header:
                    # database and mainframe exports separate by '|' (read as one column
                    # named 'score|y|w' before); no decimal commas are looked for there
                    return "|", "."
                else:
                    # one column: a spreadsheet in a decimal-comma locale writes 0,42 with no
                    # separator to tell (since 5 December 2026)
                    return (";", ",") if _one_column_decimal_commas(handle) else (",", ".")
            while True:
                chunk = handle.read(_SCAN_CHUNK)
                if not chunk:
                    return sep, "."
                chunk += handle.readline()  # end the chunk at the end of a line
                if _DECIMAL_COMMA[sep].search(chunk):
                    return sep, ","
    except _UNREADABLE:
        return ",", "."


def _columns_listed(frame: Any) -> str:
    aside = frame.attrs.get("repeated_as", {})
    # a name the header gives more than once: as written, with its place (not the name it
    # was set aside under, which is not in the file)
    names = [f"{shown(aside[str(c)])} ({re.findall(r'column [0-9]+', str(c))[-1]})"
             if str(c) in aside else shown(str(c)) for c in frame.columns[:10]]
    more = ", ..." if frame.shape[1] > 10 else ""
    unnamed = [str(c) for c in frame.columns[:10] if _UNNAMED.fullmatch(str(c))]
    # pandas' name for an empty header cell, which is not in the file: say what it stands for
    note = (f" ({shown(unnamed[0])} is an empty header cell, such as the row numbers pandas' "
            "to_csv writes first)") if unnamed else ""
    return ", ".join(names) + more + note


#: a CSV file whose first line holds numbers only (since 5 December 2026)
_NO_HEADER = ("its first line holds numbers only, so the file has no header line (the first "
              "row of data was read as the column names); add a first line naming the columns, "
              "such as score,label, and give those names to the options")
#: the name pandas gives an empty header cell
_UNNAMED = re.compile(r"Unnamed: \d+")


def numbers_only_header(names: Iterable[Any]) -> bool:
    """Whether every name of a CSV header is a finite number (decimal commas allowed; empty
    cells left aside): a file written without a header line."""
    found = False
    for name in names:
        text = str(name).strip()
        if not text or _UNNAMED.fullmatch(text):
            continue
        try:
            value = float(text.replace(",", ".").replace("\u2212", "-"))
        except ValueError:
            return False
        if not np.isfinite(value):
            return False
        found = True
    return found


def no_column(frame: Any, column: str, path: str | Path, flag: str) -> DataError:
    """The error for a column that is not in the file (naming a column whose name differs only
    in surrounding spaces or in case, which is easy to miss in a spreadsheet, and a CSV file
    whose first line holds numbers only: a file without a header line)."""
    refuse_repeated(frame, column, path, flag)
    key = str(column).strip().casefold()
    near = [str(c) for c in frame.columns if str(c).strip().casefold() == key]
    hint = (f" (the column {shown(near[0])} differs only in spaces or case: give its exact name, "
            "in quotes)") if near else ""
    if not near and "csv_read" in frame.attrs and numbers_only_header(frame.columns):
        return DataError(f"{path}: no column {shown(column)} (given by {flag}); {_NO_HEADER}")
    return DataError(
        f"{path}: no column {shown(column)} (given by {flag}); the file has columns "
        f"{_columns_listed(frame)}{hint}"
    )


def _row(path: str | Path, column: str, row: int) -> str:
    return f"{path}: column {shown(column)}, {row_number(path, row)}"


def numeric_column(frame: Any, column: str, path: str | Path, *, flag: str,
                   infinite_hint: str = "", allow_missing: bool = False,
                   dots: str | None = None, percent_sign: bool = False) -> np.ndarray:
    """One column as finite floats, or a DataError naming the file, column and first bad row.

    ``infinite_hint`` is added to the message when the first bad value is an infinite number.
    ``allow_missing``: missing values (an empty field, ``NA``, a Parquet null) are NaN rather
    than an error; any other value that is not a finite number is still refused.
    ``dots`` (weights): how a dot is read in a semicolon-separated CSV file without decimal
    commas, where ``2.500`` may be 2500 (:func:`_settle_dots`): ``"ask"`` (settled by the
    column's other fields or refused), ``"decimal"``, ``"thousands"``; None: not looked at.

    ``percent_sign`` (scores read with ``--scale percent``): a ``%`` after a number
    (``12.5%``, as a spreadsheet shows a cell formatted as a percentage) is dropped, so the
    number before it is read; otherwise a percent sign is refused, naming the option.

    Text is converted with NumPy's correctly rounded parser (every float written with enough
    digits reads back exactly).
    """
    pd = require("pandas")
    if column not in frame.columns:
        raise no_column(frame, column, path, flag)
    series = frame[column]
    if series.dtype == object or pd.api.types.is_string_dtype(series.dtype):
        # (object under pandas 2, the string dtype under pandas 3)
        # a field of spaces only (a cell holding a typed space) is as empty as an empty
        # field: missing, not "' ' is not a finite number" (since 5 December 2026)
        spaces = series.map(lambda v: isinstance(v, str) and v != "" and not v.strip())
        if spaces.any():
            series = series.mask(spaces.astype(bool))
    grouped = None
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(
        series.dtype
    ):
        values = series.to_numpy(dtype=float, na_value=np.nan)
    else:
        raw = series.to_numpy(dtype=object)
        if percent_sign:
            # a file with decimal commas read for its numbers has them made points already,
            # but not in '85,27 %', which was no number then
            raw = _without_percent_sign(raw, commas="decimal" not in frame.attrs and (
                frame.attrs.get("csv_read", ("", "."))[1] == ","))
        # decimal commas of a table kept as written (read_table as_text) made points, and
        # thousands separators dropped where the form leaves no doubt (1.391,03 with decimal
        # commas, 3,703.50 with decimal points); an ambiguous 2.500 is refused
        written = raw
        dotted = (0, 0)
        deferred = frame.attrs.get("dots_deferred", {})
        if column in deferred:  # 2.500 with decimal commas: settled by dots, or refused
            raw, count, first = _plain_number_text(
                _without_percent_sign(deferred[column]) if percent_sign else deferred[column],
                ",", path, column, dots=dots, flag=flag)
        else:
            if dots is not None and frame.attrs.get("csv_read") in ((";", "."), ("\t", ".")):
                raw, *dotted = _settle_dots(raw, path, column, flag, dots)
            raw, count, first = _plain_number_text(raw, frame.attrs.get("decimal", "."), path,
                                                   column)
            if dotted[0]:
                count, first = dotted
        grouped = ((count, first, str(written[first])) if count else
                   frame.attrs.get("grouped_numbers", {}).get(column))
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
    if allow_missing and bad.any():
        bad &= ~series.isna().to_numpy()
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raw_value = series.iloc[row]
        hint = infinite_hint if np.isinf(values[row]) else ""
        what = ("the value is missing" + missing_count_text(path, series.isna().to_numpy())
                if pd.isna(raw_value) else
                f"{shown(raw_value)} is not a finite number"
                f"{hint or _percent_weights_hint(series, raw_value, path, flag)}"
                f"{'' if hint else _number_hint(raw_value, flag)}"
                f"{_marker_hint(series, raw_value, path)}"
                f"{_header_again_hint(frame, series, raw_value, path)}"
                f"{_units_line_hint(frame, series, row, raw_value)}"
                f"{_labels_hint(series, flag)}")
        raise DataError(f"{_row(path, column, row)}: {what}{_last_row_hint(bad)}")
    if grouped:
        _warn_grouped(path, column, flag, *grouped, values[grouped[1]])
    return values


def _without_percent_sign(raw: np.ndarray, commas: bool = False) -> np.ndarray:
    """Text fields with a ``%`` after a number (``12.5%``, ``12,5 %``) without the sign; other
    fields as they are (a new array). ``commas``: a decimal comma of such a field becomes a
    point."""
    out = raw.copy()
    for i, v in enumerate(raw):
        if isinstance(v, str) and _PERCENT_NUMBER.fullmatch(v.strip()):
            out[i] = v.strip()[:-1].rstrip()
            if commas and _is_number(out[i].replace(",", ".")):
                out[i] = out[i].replace(",", ".")
    return out


#: a number followed by a percent sign, as a spreadsheet shows a percentage cell
_PERCENT_NUMBER = re.compile(r"[-+\u2212]?[\d.,\s\u00a0]*\d\s*%")


#: thousands separated by dots and a decimal comma (1.391,03): read only where the file's
#: decimal mark is a comma
_DOT_GROUPS_COMMA = re.compile(r"[-+]?[1-9]\d{0,2}(?:\.\d{3})+,\d+")
#: thousands separated by dots and no decimals (2.500): 2500 or 2.5, which cannot be told apart
_DOT_GROUPS = re.compile(r"[-+]?[1-9]\d{0,2}(?:\.\d{3})+")
#: thousands separated by commas and a decimal point (3,703.50): read where the decimal mark
#: is a point
_COMMA_GROUPS_DOT = re.compile(r"[-+]?[1-9]\d{0,2}(?:,\d{3})+\.\d+")


#: the minus sign of typeset text (U+2212), which word processors, some statistics tools
#: formatted output and text copied from web pages write for negative numbers
#: (since 5 December 2026)
_MINUS_SIGN = "\u2212"


def _plain_number_text(raw: np.ndarray, decimal: str, path: str | Path,
                       column: str, *, dots: str | None = None,
                       flag: str | None = None) -> tuple[np.ndarray, int, int]:
    """Text fields of a number column with a decimal point and no thousands separators.

    ``decimal``: the file's decimal mark. With ``","`` every comma of a number becomes a point,
    and a field with dots between groups of three digits and a decimal comma (``1.391,03``)
    loses its dots; a field with such dots and no decimal comma (``2.500``: 2500, or 2.5
    written with a point) is refused, naming the row. With ``"."`` a field with commas between
    groups of three digits and a decimal point (``3,703.50``) loses its commas. In both, spaces
    between groups of three digits (``1 234,5``; French spreadsheets write a no-break space)
    are dropped, since a space is never a decimal mark. The minus sign U+2212 (``−2.05``)
    becomes a hyphen-minus. Any other field is left as written for
    the number parser to judge (and a message to show as written). Returns the fields, how many
    lost separators, and the first such row.

    ``dots`` (``--weight-dots``, for the weight and time columns ``flag`` names) settles a
    ``2.500`` in a file with decimal commas: ``"thousands"`` reads 2500, ``"decimal"`` 2.5;
    ``"ask"``: refused, the message naming the option. Two or more dot groups (``1.234.567``)
    can only be thousands, and lose their dots.
    """
    out = raw.copy()
    count, first = 0, 0
    mark = "." if decimal == "," else ","
    for i, value in enumerate(raw):
        if not isinstance(value, str):
            continue
        if _MINUS_SIGN in value:  # "−2,05": a minus sign, as typeset text writes it
            value = out[i] = value.replace(_MINUS_SIGN, "-")
        spaced = any(space in value for space in _GROUP_SPACES)
        if mark not in value and not spaced:
            if decimal == "," and "," in value:
                point = value.replace(",", ".")
                if _is_number(point):  # otherwise left as written, for the message
                    out[i] = point
            continue
        text = value.strip()
        if spaced and _SPACE_GROUPS[decimal].fullmatch(text):
            out[i] = re.sub(r"\s", "", text).replace(",", ".")
        elif decimal == ",":
            if _DOT_GROUPS_COMMA.fullmatch(text):
                out[i] = text.replace(".", "").replace(",", ".")
            elif _DOT_GROUPS.fullmatch(text):
                plain = text.replace(".", "")
                if dots == "decimal":
                    out[i] = text
                    continue
                if dots != "thousands" and not _DOT_GROUPS_MANY.fullmatch(text):
                    option = (f"; give --weight-dots thousands (read {plain}) or --weight-dots "
                              f"decimal (read {text}) ({flag})" if dots == "ask" else "")
                    raise DataError(
                        f"{_row(path, column, i)}: {shown(value)} could be {plain} (a dot "
                        f"between thousands, as written with the decimal comma this file uses) "
                        f"or {text} (a decimal point): it cannot be told which; write the "
                        f"column without thousands separators{option}"
                    )
                out[i] = plain
            else:
                if dots == "thousands" and "." in text and _is_number(text.replace(",", ".")):
                    raise DataError(
                        f"{_row(path, column, i)}: {shown(value)} is not a whole number with "
                        f"dots between thousands, as {flag} is read with --weight-dots "
                        "thousands")
                point = value.replace(",", ".")  # a point already there is left as written
                if _is_number(point):
                    out[i] = point
                continue
        elif _COMMA_GROUPS_DOT.fullmatch(text):
            out[i] = text.replace(",", "")
        else:
            continue
        if not count:
            first = i
        count += 1
    return out, count, first


#: one dot before exactly three digits, as a whole number with a thousands separator is
#: written (2.500): 2500, or 2.5 with a point
_ONE_DOT_GROUP = re.compile(r"[-+]?[1-9]\d{0,2}\.\d{3}")
#: two or more such dots (1.234.567): only thousands
_DOT_GROUPS_MANY = re.compile(r"[-+]?[1-9]\d{0,2}(?:\.\d{3}){2,}")
#: a whole number of four digits or more written without separators (2500)
_UNGROUPED_WHOLE = re.compile(r"[-+]?[1-9]\d{3,}")


def _settle_dots(raw: np.ndarray, path: str | Path, column: str, flag: str,
                 dots: str) -> tuple[np.ndarray, int, int]:
    """Weights of a semicolon-separated file without decimal commas, with their dots settled.

    Such a file is read with decimal points, but spreadsheets in many European locales write
    whole numbers with a dot between thousands and no decimals: ``2.500`` is then 2500, and
    a column of such weights shows no decimal comma to give the locale away. The column's
    own fields settle it (``dots="ask"``): a field with a dot that is not a thousands group
    (``2.5``, ``0.500``, ``2.5E+03``) or a whole number of four digits or more without one
    (``2500``) means decimal points; a field with two groups (``1.234.567``) means thousands
    (the dots are dropped, counted for the warning of dropped separators). A column whose
    dotted fields all have one dot before exactly three digits and nothing else to settle
    it is refused, naming the first such row, both readings and ``--weight-dots``, which
    settles it (``"decimal"``: read as written; ``"thousands"``: the dots dropped, and a dot
    anywhere else refused). Returns the fields, how many lost dots and the first such row.
    """
    if dots == "decimal":
        return raw, 0, 0
    fields = [(i, v.strip()) for i, v in enumerate(raw) if isinstance(v, str) and v.strip()]
    one = [i for i, t in fields if _ONE_DOT_GROUP.fullmatch(t)]
    many = [i for i, t in fields if _DOT_GROUPS_MANY.fullmatch(t)]
    if dots == "ask" and not one and not many:
        return raw, 0, 0
    grouped = set(one) | set(many)
    if dots == "thousands":
        stray = next((i for i, t in fields if "." in t and i not in grouped), None)
        if stray is not None:
            raise DataError(
                f"{_row(path, column, stray)}: {shown(raw[stray])} is not a whole number "
                f"with dots between thousands, as {flag} is read with --weight-dots thousands")
    else:
        settles = next((i for i, t in fields if i not in grouped and _is_number(t) and (
            "." in t or _UNGROUPED_WHOLE.fullmatch(t))), None)
        if settles is not None:
            return raw, 0, 0  # decimal points (a many-group field is then refused as text)
        if not many:
            i = one[0]
            text = fields[[j for j, _ in fields].index(i)][1]
            plain = text.replace(".", "")
            raise DataError(
                f"{_row(path, column, i)}: {shown(raw[i])} could be {plain} (a dot between "
                f"thousands, as spreadsheets in many European locales write whole numbers) or "
                f"{text} (a decimal point): in this semicolon- or tab-separated file without decimal "
                f"commas every value with a dot ({len(one)}) has exactly three digits after "
                "it, so nothing tells which. Give --weight-dots thousands (read "
                f"{plain}) or --weight-dots decimal (read {text}), or write the column "
                f"without thousands separators ({flag})")
    out = raw.copy()
    for i in sorted(grouped):
        out[i] = raw[i].strip().replace(".", "")
    first = min(grouped) if grouped else 0
    return out, len(grouped), first


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


#: spaces written between groups of digits: a space, a no-break space, a narrow no-break space
_GROUP_SPACES = (" ", "\u00a0", "\u202f")
#: thousands separated by spaces, with the file's decimal mark or no decimals: 1 234,5 / 1 234.5
_SPACE_GROUPS = {
    mark: re.compile(r"[-+]?[1-9]\d{0,2}(?:[ \u00a0\u202f]\d{3})+(?:" + re.escape(mark)
                     + r"\d+)?")
    for mark in (",", ".")
}


def _warn_grouped(path: str | Path, column: str, flag: str, count: int, first: int,
                  written: str, read: float) -> None:
    """The warning that thousands separators were dropped from a number column."""
    from ._common import running_verb

    warn_line(running_verb(), (
        f"{path}: column {shown(column)} ({flag}): {count} number{'s' if count > 1 else ''} "
        f"written with thousands separators, such as {shown(written.strip())} in "
        f"{row_number(path, first)}, read as {shown(read)} (only the separators are dropped)"))


#: a number written with a comma in it (a thousands separator or a decimal comma): 3,000 or
#: 0,42 or 1.234,5
_COMMA_NUMBER = re.compile(r"[-+]?[\d.]*\d,[\d.,]*\d(?:[eE][-+]?\d+)?")


#: what some exports write for a missing value that pandas does not read as missing ("?" in the
#: UCI files, "-" and "." in printed tables and SAS, spreadsheets' error values)
MISSING_MARKS = frozenset({"?", "-", "--", ".", "missing", "unknown", "#VALUE!", "#DIV/0!",
                           "#NUM!", "#REF!"})

#: the error values spreadsheet formulas leave in a cell (Excel's, and LibreOffice's "Err:502")
_SHEET_ERROR = re.compile(r"#(?:DIV/0!|VALUE!|REF!|NAME\?|NUM!|NULL!|SPILL!|CALC!|FIELD!)"
                          r"|Err:\d{3}")


def _is_mark(text: str) -> bool:
    """A missing-value mark pandas does not read as missing, or a spreadsheet's error value."""
    return text in MISSING_MARKS or _SHEET_ERROR.fullmatch(text) is not None


def _marker_hint(series: Any, value: Any, path: str | Path) -> str:
    """After "'?' is not a finite number": how many rows hold that missing-value mark and which,
    and how to write a missing value so that it is read as one; "" for other values. A
    spreadsheet's error value (``#DIV/0!``, ``Err:502``) is named as one: the formula behind
    it failed in those rows."""
    text = str(value).strip()
    if not _is_mark(text):
        return ""
    rows = np.flatnonzero(series.astype(str).str.strip().to_numpy() == text)
    found = (f"; {rows.shape[0]} of {series.shape[0]} rows hold {shown(text)}: "
             f"{rows_text(path, rows)}")
    if _SHEET_ERROR.fullmatch(text):
        return (found + "; it is the error value a spreadsheet formula leaves where it fails: "
                "correct the formula, or clear those cells if they have no value (an empty field "
                "is read as missing)")
    return (found + "; if it marks a missing value, fill those rows in or remove them (an "
            "empty field or NA is read as missing)")


def _header_again_hint(frame: Any, series: Any, value: Any, path: str | Path) -> str:
    """After "'score' is not a finite number": the header line written again below the first
    (files joined with their headers, as ``cat`` or a copy-paste of two exports does), with how
    many rows repeat it and which (since 5 December 2026); "" for other values."""
    if str(value).strip() != str(series.name).strip():
        return ""
    names = [str(c).strip() for c in frame.columns]
    text = frame.astype(str).apply(lambda column: column.str.strip())
    again = (text == names).all(axis=1).to_numpy() if names else np.zeros(0, bool)
    if not again.any():
        again = series.astype(str).str.strip().to_numpy() == str(value).strip()
        what = ("holds", "hold", "the column's name")
    else:
        what = ("repeats", "repeat", "the header line")
    rows = np.flatnonzero(again)
    verb = what[0] if rows.shape[0] == 1 else what[1]
    return (f"; {rows.shape[0]} of {series.shape[0]} rows {verb} {what[2]}: "
            f"{rows_text(path, rows)}; "
            "files joined with their headers repeat it: delete those lines")


def _units_line_hint(frame: Any, series: Any, row: int, value: Any) -> str:
    """After "'(probability)' is not a finite number" on the first row: a line of units or
    notes under the header (every field of it text, the rows after it numbers), which some
    exports write (since 5 December 2026); "" otherwise."""
    if row != 0 or frame.shape[0] < 2 or str(value).strip() == str(series.name).strip():
        return ""
    fields = [v for v in frame.iloc[0].tolist()
              if not _is_nan(v) and v is not None and str(v).strip()]
    if len(fields) < 2 or any(_number(v) is not None for v in fields):
        return ""
    if _number(str(series.iloc[1]).replace(",", ".")) is None:
        return ""
    return ("; no field of that row is a number: if it is a line of units or notes under the "
            "header, delete it (every row below the header is read as data)")


def _labels_hint(series: Any, flag: str) -> str:
    """After "'yes' is not a finite number" in a score column that holds two values only, and
    no number (``yes``/``no``): it is a column of labels, most likely given to
    ``--score-column`` and the scores to ``--label-column`` (the columns swapped)."""
    if flag != "--score-column":
        return ""
    distinct = series.dropna().astype(str).str.strip().unique()
    if distinct.shape[0] != 2 or any(_number(v) is not None for v in distinct):
        return ""
    return (f"; the column holds only the two values {shown(distinct[0])} and "
            f"{shown(distinct[1])}, as a column of labels does: if the scores are in the column "
            "given to --label-column, swap the two column names")


def _percent_weights_hint(series: Any, value: Any, path: str | Path, flag: str) -> str:
    """After "'65%' is not a finite number" in a weight column: how many rows hold a percent
    sign, which, and what to write. A weight is not read with its sign dropped: "65%" read as
    65 makes a column of whole numbers, which ``prevalence`` counts as a count table of cases
    (its interval narrowed to the cases'), while the share 0.65 is weighed by Kish's effective
    size, so the two readings give different intervals and tests (measured in
    benchmarks/cli_awkward_files_second.py, docs/evidence/command_line_log.md); "" for another
    column or value."""
    if "weight" not in flag or not str(value).strip().strip('"').strip().endswith("%"):
        return ""
    signed = series.map(lambda v: isinstance(v, str) and v.strip().strip('"').strip()
                        .endswith("%")).to_numpy(dtype=bool)
    text = str(value).strip().strip('"').strip()
    bare = text[:-1].strip()
    share = _number(bare)
    if share is None and re.fullmatch(r"[-+]?\d+,\d+", bare):
        share = _number(bare.replace(",", "."))  # 65,5 % (a decimal comma)
    written = f"{share / 100:.15g}" if share is not None else ""
    if "," in bare:
        written = written.replace(".", ",")  # the file's decimal comma
    example = f"{clean(text)} as {written}; " if written else ""
    return (f"; a percent sign is not read in a weight column ({int(signed.sum())} of "
            f"{signed.shape[0]} rows hold one: {rows_text(path, np.flatnonzero(signed))}): "
            f"write each weight as the share it stands for, without the sign ({example}only "
            "the ratios of weights matter), not as a whole number of percent, which prevalence "
            "would read as a count table of cases")


def _number_hint(value: Any, flag: str = "--score-column") -> str:
    """Why a field that looks like a number was not read as one, or "" (``flag``: the option
    naming the column; the percent advice speaks of scores only for a score column)."""
    text = str(value).strip().strip('"').strip()
    bare = text[:-1].strip()
    percent = _number(bare)
    if percent is None and re.fullmatch(r"[-+]?\d+,(?:\d{1,2}|\d{4,})", bare):
        percent = _number(bare.replace(",", "."))  # 85,27 % (a decimal comma, not thousands)
    if text.endswith("%") and percent is not None:
        if "weight" in flag:
            return ""  # said by _percent_weights_hint
        if "score" not in flag and "class-columns" not in flag:
            # a weight of "12%" was told to "write scores as probabilities"
            return (f"; a percent sign is not read: write the number without it ({clean(text)} "
                    f"as {percent / 100:.15g}, or as {clean(bare)} if the column counts in "
                    "percent)")
        return (f"; a percent sign is read only with --scale percent (which reads "
                f"{clean(text)} as {percent / 100:.15g}); give it, or write scores as "
                "probabilities in [0, 1]")
    if _COMMA_NUMBER.fullmatch(text):
        return ("; numbers are read without thousands separators and with a decimal point (a "
                "decimal comma is read only in a semicolon-separated file, where ';' separates "
                "the fields)")
    return ""


def probability_column(frame: Any, column: str, path: str | Path, *, flag: str,
                       allow_missing: bool = False, log_odds: bool = True) -> np.ndarray:
    """A column of probabilities in [0, 1], or a DataError naming the first bad row
    (``allow_missing``: missing values are NaN, as for :func:`numeric_column`;
    ``log_odds=False``: the option takes probabilities only, so ``--scale log-odds`` is not
    offered)."""
    values = numeric_column(frame, column, path, flag=flag, allow_missing=allow_missing)
    with np.errstate(invalid="ignore"):
        bad = (values < 0.0) | (values > 1.0)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        n_bad, n_read = int(bad.sum()), int(np.isfinite(values).sum())
        if (np.nanmin(values) >= 0.0 and np.nanmax(values) <= 100.0
                and n_bad >= max(2, PERCENT_SHARE * n_read)):
            # all in [0, 100] with some above 1: a share written in percent
            hint = (f"the column holds numbers from {shown(np.nanmin(values))} to "
                    f"{shown(np.nanmax(values))}, which look like percentages: give --scale "
                    "percent, which divides every score by 100, or divide the column by 100 "
                    "in the file; for log-odds scores use --scale log-odds")
        elif np.nanmin(values) >= 0.0:
            # one stray value above 1 among probabilities is no percentage column (dividing
            # every score by 100 was the advice): name how few they are
            hint = (f"{n_bad} of {n_read} values lie above 1, the others in [0, 1]: correct "
                    f"{'that row' if n_bad == 1 else 'those rows'} (a score above 1 is no "
                    "probability); for log-odds scores use --scale log-odds")
        else:
            hint = "use --scale log-odds for log-odds scores"
        if not log_odds:  # --class-columns: probabilities only (--scale log-odds is refused)
            hint = (hint.replace("; for log-odds scores use --scale log-odds", "")
                    .replace("give --scale percent, which divides every score by 100, or "
                             "divide the column by 100 in the file", "divide them by 100")
                    .replace("use --scale log-odds for log-odds scores",
                             f"{flag} take probabilities; log-odds are read for one "
                             "binary score column only"))
        raise DataError(
            f"{_row(path, column, row)}: {shown(values[row])} is not a probability in [0, 1] "
            f"({hint}){_last_row_hint(bad)}"
        )
    return values


def _last_row_hint(bad: np.ndarray) -> str:
    """After a message about a bad row: when the only bad row is the table's last one, that it
    may be a totals or notes row (spreadsheets add one below the data), or ""."""
    rows = np.flatnonzero(bad)
    if rows.shape[0] != 1 or rows[0] != bad.shape[0] - 1 or bad.shape[0] < 2:
        return ""
    return ("; it is the last row of the table: if it holds totals or notes, delete it (every "
            "row is read as data)")


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
    flag: str = "--label-column", score_column: str | None = None,
    score_flag: str = "--score-column",
) -> tuple[np.ndarray, list[Any]]:
    """Binary labels as 0/1 and the two original labels ``[negative, positive]``.

    Labels 0/1 (as numbers or text) and booleans have the positive class 1 / True unless
    ``positive`` says otherwise. Any other pair of labels (text such as ``damaged``/``intact``,
    or numbers such as 1/2) needs ``positive`` (the ``--positive-label`` option): which class
    is "positive" is never guessed from the sort order. ``score_column`` (given by
    ``score_flag``) may not be the label column itself.
    """
    pd = require("pandas")
    if column not in frame.columns:
        raise no_column(frame, column, path, flag)
    if score_column is not None and str(score_column) == str(column):
        raise DataError(
            f"{path}: {score_flag} and {flag} both name column {shown(column)}; the labels are "
            f"the outcome of each row and the scores the model's probabilities for it, so they "
            f"are two columns (the file has {', '.join(shown(c) for c in list(frame.columns)[:12])})")
    series = frame[column]
    missing = series.isna().to_numpy()
    if missing.any():
        row = int(np.flatnonzero(missing)[0])
        raise DataError(f"{_row(path, column, row)}: the label is missing"
                        + missing_count_text(path, missing) + _last_row_hint(missing))
    if pd.api.types.is_numeric_dtype(series.dtype) or pd.api.types.is_bool_dtype(series.dtype):
        values = series.to_numpy()
    else:
        values = series.astype(str).to_numpy(dtype=object)
    distinct = pd.unique(values)
    if distinct.shape[0] != 2:
        shown_labels = ", ".join(shown(v) for v in distinct[:6])
        more = ", ..." if distinct.shape[0] > 6 else ""
        tidy = {str(v).strip().casefold() for v in distinct}
        hint = ("; some differ only in spaces around them or in case, and are read as "
                "different labels: write each label one way") if (
            distinct.shape[0] > 2 and len(tidy) < distinct.shape[0]) else ""
        if hint and len(tidy) == 2:
            # 'benign' in 2 rows of 'Benign'/'Malignant': which rows (since 5 December 2026)
            counts = np.array([np.count_nonzero(values == v) for v in distinct])
            order = np.argsort(-counts, kind="stable")
            rare = distinct[order[2:]]
            flagged = np.isin(values, rare)
            hint += (f" ({', '.join(shown(v) for v in rare[:6])} in {int(flagged.sum())} of "
                     f"{values.shape[0]} rows: {rows_text(path, np.flatnonzero(flagged))})")
        marks = [v for v in distinct if _is_mark(str(v).strip())]
        if distinct.shape[0] > 2 and marks and not hint:
            # "?" for an unknown outcome (UCI files): read as a third label, with no row named
            flagged = np.isin(values.astype(str), [str(v) for v in marks])
            hint = (f"; {', '.join(shown(v) for v in marks)} looks like a mark for a missing "
                    f"label, in {int(flagged.sum())} of {values.shape[0]} rows: "
                    f"{rows_text(path, np.flatnonzero(flagged))}; rows without a label cannot "
                    "be used here: remove them")
        if distinct.shape[0] == 3 and not hint:  # a label found only on the last row
            if _last_row_hint(values == values[-1]):
                hint = (f"; {shown(values[-1])} is found only on the last row of the table: if "
                        "that row holds totals or notes, delete it (every row is read as data)")
        if distinct.shape[0] > 2 and not hint:
            # two common labels and a rare other one (a typo, a third outcome, a code for
            # "unknown"): name its rows, so that one look at the file finds them
            counts = np.array([np.count_nonzero(values == v) for v in distinct])
            order = np.argsort(-counts, kind="stable")
            rare = distinct[order[2:]]
            flagged = np.isin(values, rare)
            if flagged.sum() <= RARE_LABEL_SHARE * values.shape[0]:
                hint = (f"; {', '.join(shown(v) for v in rare[:6])}{more if rare.shape[0] > 6 else ''} "
                        f"{'is' if rare.shape[0] == 1 else 'are'} found in only "
                        f"{int(flagged.sum())} of {values.shape[0]} rows: "
                        f"{rows_text(path, np.flatnonzero(flagged))}; correct "
                        f"{'that row, or remove it' if flagged.sum() == 1 else 'those rows, or remove them'}"
                        " if their outcome is neither of the two "
                        f"({shown(distinct[order[0]])} and {shown(distinct[order[1]])})")
        if (distinct.shape[0] > 2 and not hint and score_column is not None
                and pd.api.types.is_numeric_dtype(series.dtype)
                and score_column in frame.columns):
            # the scores given to --label-column and the 0/1 labels to --score-column
            others = pd.unique(frame[score_column].dropna())
            if others.shape[0] == 2:
                hint = (f"; the column holds numbers, as a column of scores does, and "
                        f"{shown(score_column)} ({score_flag}) only the two values "
                        f"{shown(others[0])} and {shown(others[1])}, as a column of labels does: "
                        f"the two column names look swapped (give {score_flag} {shown(column)} "
                        f"{flag} {shown(score_column)})")
        if distinct.shape[0] == 1:  # "it holds 1: 1" read as a riddle
            raise DataError(
                f"{path}: column {shown(column)} ({flag}) must hold exactly two labels (binary "
                f"outcome); it holds one label only, {shown_labels}, in all {values.shape[0]} "
                "rows: both classes are needed (rows with and without the outcome)")
        raise DataError(
            f"{path}: column {shown(column)} ({flag}) must hold exactly two labels (binary "
            f"outcome); it holds {distinct.shape[0]}: {shown_labels}{more}{hint}"
        )
    numbers = [_number(v) for v in distinct]
    zero_one = sorted(n for n in numbers if n is not None) == [0.0, 1.0]
    if positive is not None:
        matches = [
            i for i, v in enumerate(distinct)
            if str(v) == positive or (numbers[i] is not None and _number(positive) == numbers[i])
        ]
        if len(matches) != 1:
            near = [v for v in distinct
                    if str(v).strip().casefold() == str(positive).strip().casefold()]
            hint = ""
            if len(near) == 1:  # "yes" for "Yes", "yes " for "yes": labels match exactly
                hint = (f"; labels are matched exactly, case and spaces included: give "
                        f"--positive-label {shlex.quote(clean(str(near[0])))}")
            raise DataError(
                f"{path}: column {shown(column)} has no label {shown(positive)} (given by "
                f"--positive-label); its labels are {shown(distinct[0])} and {shown(distinct[1])}"
                + hint
            )
        pos_index = matches[0]
    elif zero_one:
        pos_index = numbers.index(1.0)
    else:
        a, b = sorted(str(v) for v in distinct)
        raise DataError(
            f"{path}: column {shown(column)} holds the labels {shown(a)} and {shown(b)}, not 0/1; "
            f"say which one is the positive class (the class the scores are the probability of) "
            # shell-quoted: a label with a space ("not improved") must be pasted as one word
            f"with --positive-label {shlex.quote(clean(a))} or "
            f"--positive-label {shlex.quote(clean(b))}"
        )
    pos = distinct[pos_index]
    neg = distinct[1 - pos_index]
    y = (values == pos).astype(np.intp)
    plain = [v.item() if hasattr(v, "item") else v for v in (neg, pos)]
    return y, plain


def read_weights(frame: Any, column: str | None, path: str | Path,
                 verb: str, *, flag: str = "--weight-column",
                 relative: bool = False, dots: str | None = None) -> np.ndarray | None:
    """The ``--weight-column`` as finite weights >= 0 with a positive sum, or None; a
    DataError names the file, the column, the first bad row and ``flag``. ``relative``: the
    verb counts the weights by Kish's effective size (only their ratios matter), so large
    weights draw no warning. ``dots``: ``--weight-dots`` (None: settled by the column or
    refused, :func:`_settle_dots`; a semicolon-separated file without decimal commas only)."""
    if column is None:
        return None
    try:
        w = numeric_column(frame, column, path, flag=flag, dots=dots or "ask")
    except DataError as exc:  # a missing or non-number weight: say which option read it
        text = str(exc)
        raise DataError(text if flag in text else f"{text} ({flag})") from None
    bad = w < 0
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise DataError(f"{path}: column {shown(column)}, {row_number(path, row)}: "
                        f"{shown(w[row])} is a negative weight ({flag})")
    if not np.any(w > 0):
        raise DataError(f"{path}: column {shown(column)} ({flag}) holds no positive weight")
    if relative:
        return w
    n_rows = int(np.count_nonzero(w))
    with np.errstate(over="ignore"):
        total = float(w.sum())
    if total > FREQUENCY_WEIGHT_LIMIT * n_rows:
        # weights summing to at least the rows are row frequencies (the library's contract):
        # all weights 1e12 made cutoff's paired test see 9e13 rows and keep another cutoff
        warn_line(verb, (
            f"{path}: the weights of column {shown(column)} (--weight-column) average "
            f"{total / n_rows:.3g} per row; weights are read as row frequencies (a row of "
            "weight 2 counts as two identical rows), so the tests and the choices between "
            f"rules treat the file as {total:.3g} rows. If they are not counts (amounts, "
            "survey weights), divide them by their mean"))
    return w
