"""Helpers shared by the tests of the ``probwrap`` command line (``tests/`` is on ``sys.path``
through ``pythonpath`` in pyproject.toml's pytest settings)."""

from __future__ import annotations

import numpy as np

from probwrap.cli import main


def _exact_float_options() -> dict:
    """Keyword arguments that make ``pandas.read_csv`` read every float exactly as written.

    pandas 2 parses floats with its fast ("high") parser unless ``float_precision="round_trip"``
    is given: about a third of 200,000 random ``repr`` values came back one unit in the last
    place off under pandas 2.3. pandas 3 parses them exactly by default (all 200,000) and
    deprecates the argument, so it is passed only before pandas 3.
    """
    try:
        import pandas as pd
    except ImportError:  # pragma: no cover - the CLI tests need pandas anyway
        return {}
    return {"float_precision": "round_trip"} if int(pd.__version__.split(".")[0]) < 3 else {}


#: ``pd.read_csv(path, **EXACT_FLOATS)``: the numbers of a CSV file exactly as written
EXACT_FLOATS = _exact_float_options()


def run_cli(capsys, *argv) -> tuple[int, str, str]:
    """Run ``probwrap`` in this process on ``argv`` (each item turned to text with ``str``).

    Returns the exit code and what it wrote to standard output and standard error, read through
    pytest's ``capsys`` fixture.
    """
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def cancer_held_out():
    """Held-out probabilities on scikit-learn's breast cancer set, and their labels.

    A scaled logistic regression (``C=0.1``) fitted on the first 280 rows of a seed-0
    permutation; the probabilities of the other 289 rows and those rows' labels (1 benign).
    """
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    order = np.random.default_rng(0).permutation(y.size)
    fit, held = order[:280], order[280:]
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1)).fit(X[fit], y[fit])
    return model.predict_proba(X[held])[:, 1], y[held]
