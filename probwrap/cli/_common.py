"""Shared pieces of the command line: data errors, reading score files, progress bars."""

from __future__ import annotations

import sys
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["DataError", "read_table", "numeric_column", "progress"]


class DataError(Exception):
    """A problem with the user's data: reported as one line, exit code 1, no traceback."""


def read_table(path: str | Path) -> Any:
    """Read a CSV or Parquet file into a pandas DataFrame (by extension; CSV otherwise)."""
    import pandas as pd

    path = Path(path)
    if not path.exists():
        raise DataError(f"{path}: file not found")
    try:
        if path.suffix.lower() in (".parquet", ".pq"):
            frame = pd.read_parquet(path)
        else:
            # round_trip: floats read back exactly as written, in every pandas version
            frame = pd.read_csv(path, float_precision="round_trip")
    except pd.errors.EmptyDataError:
        raise DataError(f"{path}: the file is empty") from None
    except Exception as exc:  # parsing errors of any kind: report, do not trace back
        raise DataError(
            f"{path}: cannot be read as {'Parquet' if path.suffix.lower() in ('.parquet', '.pq') else 'CSV'} ({exc})"
        ) from None
    if frame.shape[0] == 0:
        raise DataError(f"{path}: the file has a header but no rows")
    return frame


def numeric_column(frame: Any, column: str, path: str | Path, *, flag: str) -> np.ndarray:
    """One column as finite floats, or a DataError naming the file, column and first bad row."""
    import pandas as pd

    if column not in frame.columns:
        raise DataError(
            f"{path}: no column '{column}' (given by {flag}); the file has columns "
            f"{', '.join(map(str, frame.columns[:10]))}"
        )
    values = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(values)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raw = frame[column].iloc[row]
        raise DataError(
            f"{path}: column '{column}', row {row + 2} (counting the header as row 1): "
            f"{raw!r} is not a finite number"
        )
    return values


def progress(iterable: Iterable, *, desc: str, total: int | None = None) -> Iterator:
    """A progress bar on a terminal (tqdm, when installed), plain iteration otherwise."""
    if sys.stderr.isatty():
        try:
            from tqdm import tqdm
        except ImportError:  # pragma: no cover - tqdm is in the cli extra
            return iter(iterable)
        return iter(tqdm(iterable, desc=desc, total=total, leave=False))
    return iter(iterable)
