"""Writing the command line's output files: early checks that a path can be written, and
atomic writes (the complete new file or the untouched old one)."""

from __future__ import annotations

import argparse
import contextlib
import os
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

from ._common import (
    TABLE_SUFFIXES,
    DataError,
    is_standard_stream,
    one_line,
    require,
    table_kind,
)

__all__ = ["check_out_suffix", "check_writable", "write_atomic", "write_text", "write_table",
           "to_stdout", "output_separator"]


def to_stdout(out: Any) -> bool:
    """True when ``--out`` is ``-`` (or left out where that means standard output)."""
    return out is None or is_standard_stream(out)


def check_out_suffix(
    parser: argparse.ArgumentParser, out: str, suffixes: tuple[str, ...], flag: str = "--out",
    *, stdout: str | None = None,
) -> None:
    """A usage error (exit 2) unless ``out`` ends with one of ``suffixes``.

    ``stdout``: what ``-`` writes to standard output (e.g. "the table as CSV"); None: ``-`` is
    refused, saying why.
    """
    if out == "-":
        if stdout is not None:
            return
        parser.error(
            f"{flag} -: this verb does not write to standard output (it prints its summary "
            f"there); give a file name ending in {', '.join(suffixes)}"
        )
    if Path(out).name.lower() in suffixes:
        # ".json" is a name with no extension (a hidden file) to Python and to the user's shell
        parser.error(
            f"{flag} {out}: the file name is only the extension; give a name before it, such "
            f"as {'out' + Path(out).name.lower()}"
        )
    if Path(out).suffix.lower() not in suffixes:
        parser.error(
            f"{flag} {out}: unsupported file type {Path(out).suffix or '(none)'!s}; use one of "
            f"{', '.join(suffixes)}"
        )


def _no_folder(path: Path, folder: Path, exc: OSError) -> str:
    """The message for a folder that cannot be created, naming a file standing in its way
    (``--out scores.csv/map.json``: "the folder scores.csv cannot be created (File exists)"
    did not say that scores.csv is a file)."""
    for part in (folder, *folder.parents):
        try:
            if part.exists() and not part.is_dir():
                return (f"{path}: {part} is a file, not a folder, so nothing can be written "
                        "inside it; give another path")
        except OSError:
            break
    return f"{path}: the folder {folder} cannot be created ({exc.strerror or exc})"


def _prepare_folder(path: Path) -> None:
    if path.is_dir():
        raise DataError(f"{path}: is a folder; give a file name")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DataError(_no_folder(path, path.parent, exc)) from None


def check_writable(path: str | Path, *, folder: bool = False,
                   inputs: dict[str, Any] | None = None) -> None:
    """Fail early (before any long computation) when ``path`` cannot be written.

    ``folder=True``: ``path`` is a folder to write into (created when missing).
    ``inputs``: the files the command reads, by flag (``{"--scores": path}``); an output that
    is one of them (the same name, a link to it, another path to it) is refused, since writing
    it would replace what was read.
    """
    if to_stdout(path):
        return
    given_path = path
    for flag, given in (inputs or {}).items():
        if given is None or to_stdout(given) or not isinstance(given, (str, os.PathLike)):
            continue
        try:
            same = os.path.samefile(path, given)
        except OSError:  # one of them does not exist (yet), or cannot be looked at
            same = False
        if same:
            raise DataError(
                f"{path}: is also the input file {flag}; writing it would replace the file "
                "being read: give --out another file name")
    path = Path(path)
    if path.is_symlink():  # written through (see write_atomic): check the linked file's folder
        path = Path(os.path.realpath(path))
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
        raise DataError(_no_folder(path, target_dir, exc)) from None
    if not os.access(target_dir, os.W_OK | os.X_OK):
        raise DataError(f"{path}: cannot be written (the folder {target_dir} is read-only)")
    if not folder:
        _EXISTING[str(given_path)] = path.is_file()
    if not folder and path.is_file() and not os.access(path, os.W_OK):
        # the file is replaced by a rename, which a read-only file in a writable folder does
        # not stop: a file made read-only to keep it was replaced without a word
        raise DataError(f"{path}: is read-only; make it writable (chmod u+w) or give --out "
                        "another file name")


#: output paths checked by :func:`check_writable`: whether a file was there already
_EXISTING: dict[str, bool] = {}


def replaced_note(path: str | Path) -> str:
    """" (replaced the file that was there)" when :func:`check_writable` found a file at
    ``path`` before the run, else "": the summary line says that an older output (a map, a
    table, a page) is gone, which the write does without asking (see "How files are
    written" in docs/command_line.md).

    Examples
    --------
    >>> replaced_note("never-checked.json")
    ''
    """
    return " (replaced the file that was there)" if _EXISTING.get(str(path)) else ""


def write_atomic(path: str | Path, write: Callable[[Path], None]) -> None:
    """Write a file so that it is either the complete new file or the untouched old one.

    ``write(tmp)`` writes the content to a temporary file in the same folder; it is flushed
    and fsynced, then moved over ``path`` with :func:`os.replace` (atomic on POSIX and
    Windows). An error or an interruption (Ctrl-C, SIGTERM, a full disk) removes the
    temporary file and leaves any previous ``path`` as it was; of two runs writing the same
    path, the last to finish wins with its whole file. Missing parent folders are created. A
    symbolic link is written through: the file it points to is replaced, the link is kept.
    """
    path = Path(path)
    if path.is_symlink():
        # write through the link to the file it points to; replacing the link itself with a
        # plain file would leave the linked file stale without a word
        path = Path(os.path.realpath(path))
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
        raise DataError(f"{path}: cannot be written ({exc.strerror or one_line(exc)})") from None
    finally:
        with contextlib.suppress(OSError):
            tmp.unlink()
    with contextlib.suppress(OSError, AttributeError):
        dir_fd = os.open(path.parent, os.O_RDONLY)
        try:
            os.fsync(dir_fd)
        finally:
            os.close(dir_fd)


def _write_stdout(data: bytes) -> None:
    """Bytes to standard output, past any text already buffered there."""
    import sys

    sys.stdout.flush()
    target = getattr(sys.stdout, "buffer", None)
    if target is None:  # a text-only stream (rare): decode as written
        sys.stdout.write(data.decode("utf-8"))
    else:
        target.write(data)
        target.flush()


def write_text(path: str | Path, text: str) -> None:
    """Write UTF-8 text atomically (see :func:`write_atomic`); ``-``: to standard output."""
    if to_stdout(path):
        _write_stdout(text.encode("utf-8"))
        return
    write_atomic(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))


def output_separator(path: str | Path, sep: str, decimal: str = ".") -> str:
    """The separator of a CSV output file: the one its extension names.

    ``.tsv``: a tab, whatever the file read used (a decimal comma stays one: tab files with
    decimal commas are read as such). ``.csv``: a comma, or a semicolon where the numbers have
    decimal commas or the file read was separated by semicolons, as spreadsheets in
    decimal-comma locales write their "CSV" (a tab- or ``|``-separated input written to a
    ``.csv`` name kept its tabs or bars until 5 December 2026, and a spreadsheet opening it
    showed one column). ``sep``: the separator of the file read; ``decimal``: its decimal mark.

    Examples
    --------
    >>> output_separator("out.csv", "\\t"), output_separator("out.csv", "\\t", ",")
    (',', ';')
    >>> output_separator("out.tsv", ";"), output_separator("out.csv", ";")
    ('\\t', ';')
    """
    suffix = Path(path).suffix.lower()
    if suffix == ".tsv":
        return "\t"
    if suffix == ".csv":
        return ";" if decimal == "," or sep == ";" else ","
    return sep


def write_table(frame: Any, path: str | Path, *, dialect: dict[str, Any] | None = None) -> None:
    """Write a DataFrame atomically, as Parquet (``.parquet``/``.pq``) or CSV (``.csv``, or
    ``.tsv``: separated by tabs).

    ``dialect`` (CSV only): ``sep``, ``decimal``, ``bom``, ``newline`` and ``sep_line`` of the
    file the table was read from, so that a semicolon file with decimal commas is written back as one (numbers with a
    decimal comma), a file that started with a byte-order mark starts with one (spreadsheets
    read the encoding from it), a file with Windows line endings keeps them and a file that
    started with a spreadsheet's ``sep=X`` line starts with it.
    """
    dialect = dialect or {}
    if to_stdout(path):
        # standard output: CSV, written the way the input was (separator, decimal mark,
        # byte-order mark, line ends, a "sep=X" line)
        import io

        sep, newline = dialect.get("sep", ","), dialect.get("newline", "\n")
        buffer = io.StringIO()
        if dialect.get("sep_line"):
            buffer.write(f"sep={sep}{newline}")
        frame.to_csv(buffer, index=False, sep=sep, decimal=dialect.get("decimal", "."),
                     lineterminator=newline)
        _write_stdout(("\ufeff" if dialect.get("bom") else "").encode("utf-8")
                      + buffer.getvalue().encode("utf-8"))
        return
    path = Path(path)
    if path.suffix.lower() not in TABLE_SUFFIXES:
        raise DataError(f"{path}: unsupported file type; use one of {', '.join(TABLE_SUFFIXES)}")
    if table_kind(path) == "Parquet":
        require("pyarrow")
        write_atomic(path, lambda tmp: frame.to_parquet(tmp, index=False))
    else:
        sep, newline = dialect.get("sep", ","), dialect.get("newline", "\n")
        sep = output_separator(path, sep, dialect.get("decimal", "."))
        options = {"sep": sep, "decimal": dialect.get("decimal", "."), "lineterminator": newline}
        encoding = "utf-8-sig" if dialect.get("bom") else "utf-8"

        def write(tmp: Path) -> None:
            mode = "w"
            if dialect.get("sep_line"):
                with open(tmp, "w", encoding=encoding, newline="") as handle:
                    handle.write(f"sep={sep}{newline}")  # after the byte-order mark, if any
                mode = "a"  # (appending writes no second byte-order mark)
            frame.to_csv(tmp, index=False, mode=mode, encoding=encoding, **options)

        write_atomic(path, write)
