"""Rows of weight 0 are absent rows in the CORP decomposition (consistency test).

Found by the small-data sweep (``benchmarks/small_data_sweep.py``): on scikit-learn's bundled
breast cancer data with Gaussian naive Bayes (whose probabilities reach exactly 0 and 1), giving
the misclassified rows weight 0 left the weighted rows perfectly separated, so the recalibrated
forecasts were 0 and 1; the zero-weight rows then entered the log loss as 0 * inf and the whole
log-loss decomposition came out NaN. ``sample_weight`` means row frequencies, so weight 0 must
give exactly the decomposition of the data without those rows.
"""

import numpy as np
from sklearn.datasets import load_breast_cancer
from sklearn.naive_bayes import GaussianNB

from probwrap.metrics import corp_reliability


def test_zero_weight_rows_equal_dropped_rows():
    X, y = load_breast_cancer(return_X_y=True)
    p = GaussianNB().fit(X[:300], y[:300]).predict_proba(X[300:])[:, 1]
    y_te = y[300:]
    wrong = (p >= 0.5) != (y_te == 1)
    assert wrong.any()  # the data give the case the test is about
    w = np.where(wrong, 0.0, 1.0)
    weighted = corp_reliability(y_te, p, sample_weight=w)
    dropped = corp_reliability(y_te[~wrong], p[~wrong])
    for score in ("brier", "log_loss"):
        a, b = getattr(weighted, score), getattr(dropped, score)
        got = [a.total, a.miscalibration, a.discrimination, a.uncertainty]
        want = [b.total, b.miscalibration, b.discrimination, b.uncertainty]
        assert np.all(np.isfinite(got)), (score, got)
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)  # same rows, same sums
