"""Costs given with Dask rows to ``CostPolicyWrapper``: the in-memory checks and messages.

A cost matrix (array, the tp/fp/fn/tn shorthand or a DataFrame read by its labels) is checked
after the held-out step by the same code for every input (``check_cost_matrix`` of
``costs_in_class_order``), and ``costs(X)`` by ``check_row_costs`` on each block: checked in
session 28 on scikit-learn's breast cancer and wine data (a wrong shape, NaN, a DataFrame in
another order or with other labels, a function returning one matrix or the wrong class count),
the Dask fit gave the in-memory error word for word, or the in-memory result. One message
differed: ``costs(X)`` is called block by block, so its shape error counted the block's rows
("must have shape (200, 2, 'n_actions')" for 569 rows in blocks of 200), which read as a wrong
row count; it now says it was one block. Negative costs are gains, allowed everywhere.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper

pytestmark = pytest.mark.usefixtures("tally_path")

da = pytest.importorskip("dask.array")
pytest.importorskip("distributed")

C3 = np.array([[0.0, 1.0, 2.0], [1.0, 0.0, 1.0], [4.0, 2.0, 0.0]])


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :4]
    return X, y, FrozenEstimator(LogisticRegression(max_iter=5000).fit(X, y))


@pytest.fixture(scope="module")
def wine():
    X, y = load_wine(return_X_y=True)
    return X, y, FrozenEstimator(LogisticRegression(max_iter=5000).fit(X, y))


def _outcome(make, X, y):
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            policy = make().fit(X, y)
    except ValueError as exc:
        return "error", str(exc)
    return "fitted", (policy.cost_matrix_.tolist(), policy.heldout_cost_)


MATRICES = {
    "3 x 2 for two classes": (2, np.array([[0, 1], [5, 0], [1, 1]])),
    "NaN": (2, [[0.0, np.nan], [5.0, 0.0]]),
    "shorthand with NaN": (2, {"fp": np.nan, "fn": 1.0}),
    "negative (a gain)": (2, [[-1.0, 2.0], [5.0, -3.0]]),
    "frame of other labels": (2, pd.DataFrame([[0.0, 1.0], [5.0, 0.0]], index=["a", "b"])),
    "frame named by actions, no actions": (
        2, pd.DataFrame([[0.0, 1.0], [5.0, 0.0]], columns=["ship", "inspect"])),
    "2 x 3 for three classes": (3, C3[:2]),
    "frame in another order": (3, pd.DataFrame(C3, index=[2, 0, 1], columns=[2, 0, 1])),
    "frame of other labels, three classes": (3, pd.DataFrame(C3, index=["x", "y", "z"])),
}


@pytest.mark.parametrize("case", list(MATRICES))
def test_cost_matrices_get_the_in_memory_checks(client, cancer, wine, case):
    k, costs = MATRICES[case]
    X, y, model = cancer if k == 2 else wine

    def make():
        return CostPolicyWrapper(model, costs=costs)

    memory = _outcome(make, X, y)
    dask = _outcome(make, da.from_array(X, chunks=(200, X.shape[1])),
                    da.from_array(y, chunks=200))
    assert dask[0] == memory[0]
    if memory[0] == "error":
        assert dask[1] == memory[1]
    else:  # the same matrix in classes_ order; the held-out cost to rounding of the sums
        assert dask[1][0] == memory[1][0]
        assert dask[1][1] == pytest.approx(memory[1][1], rel=1e-12)


def _one_matrix(X):
    return np.array([[0.0, 1.0], [5.0, 0.0]])


def _one_short(X):
    return np.tile([[0.0, 1.0], [5.0, 0.0]], (len(X) - 1, 1, 1))


def _with_nan(X):
    c = np.tile([[0.0, 1.0], [5.0, 0.0]], (len(X), 1, 1))
    c[-1, 0, 1] = np.nan
    return c


@pytest.mark.parametrize("fn, memory_message, dask_message", [
    (_one_matrix, "`costs(X)` must have shape (569, 2, 'n_actions') (one cost matrix per row); "
                  "got shape (2, 2).",
     "`costs(X)` must have shape (200, 2, 'n_actions') (one cost matrix per row); got shape "
     "(2, 2). (`costs` is called on the Dask or Spark rows block by block, here on a block of "
     "200 rows: it must return one cost matrix per row of the X it is given.)"),
    (_one_short, "`costs(X)` must have shape (569, 2, 'n_actions'); got shape (568, 2, 2).",
     "`costs(X)` must have shape (200, 2, 'n_actions'); got shape (199, 2, 2). (`costs` is "
     "called on the Dask or Spark rows block by block, here on a block of 200 rows"),
    (_with_nan, "`costs(X)` contains NaN or infinite costs; every cost must be finite.",
     "`costs(X)` contains NaN or infinite costs; every cost must be finite."),
])
def test_costs_of_x_name_the_block(client, cancer, fn, memory_message, dask_message):
    X, y, model = cancer
    kind, message = _outcome(lambda: CostPolicyWrapper(model, costs=fn), X, y)
    assert (kind, message) == ("error", memory_message)
    kind, message = _outcome(lambda: CostPolicyWrapper(model, costs=fn),
                             da.from_array(X, chunks=(200, 4)), da.from_array(y, chunks=200))
    assert kind == "error" and message.startswith(dask_message)
    if fn is _with_nan:  # nothing about the block to add to a NaN
        assert message == memory_message
