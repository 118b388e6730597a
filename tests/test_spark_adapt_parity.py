"""``PriorShiftWrapper.adapt`` on a Spark DataFrame beyond 20,000 rows (forced on few rows with
``tally_path``) gives what adapt on the same rows in memory gives, where the two used to
differ (the Dask twins: tests/test_distributed_no_shift_harm.py,
tests/test_distributed_refit_large.py). Runs on the session-scoped ``spark`` fixture
(conftest.py), one partition per frame so that the rows keep their order. Data:
scikit-learn's bundled digits.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper
from probwrap.shift import NoShiftHarmWarning

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


def _adapted(psw, X):
    psw = copy.deepcopy(psw)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        psw.adapt(X)
    return psw, [str(w.message) for w in caught if issubclass(w.category, NoShiftHarmWarning)]


def test_large_multiclass_spark_warns_of_no_shift_harm_as_in_memory(spark, tally_path):
    # digits, pixel columns 20-29, a frozen Gaussian naive Bayes; thirds at random (seed 7):
    # 599 labelled and 599 unlabelled rows with no shift. In memory p = 0.13, a third of the
    # move applied, predicted no-shift harm 4.2 %: NoShiftHarmWarning. Before 4 December 2026
    # the multiclass Spark sums did not give null_move_ratio and never warned
    X, y = load_digits(return_X_y=True)
    X = X[:, 20:30]
    a, b, c = np.array_split(np.random.default_rng(7).permutation(y.shape[0]), 3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(FrozenEstimator(GaussianNB().fit(X[a], y[a])),
                                random_state=0).fit(X[b], y[b])
    mem, caught = _adapted(psw, X[c])
    frame = spark.createDataFrame(pd.DataFrame(X[c])).coalesce(1)
    dist, dist_caught = _adapted(psw, frame)
    assert dist.prior_estimate_.n_rows == c.shape[0]
    assert dist.prior_estimate_.null_move_ratio == pytest.approx(
        mem.prior_estimate_.null_move_ratio, rel=1e-10)
    assert dist.prior_estimate_.null_harm_scale == pytest.approx(
        mem.prior_estimate_.null_harm_scale, rel=1e-10)
    assert len(dist_caught) == len(caught) == 1
    assert dist_caught[0] == caught[0]
