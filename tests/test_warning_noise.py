"""Ordinary, healthy uses draw no warning, and a warning is said once per call.

A library that warns on ordinary use trains its users to ignore its warnings.
``benchmarks/warning_noise.py`` counts every warning over seeded draws of ordinary sets (500+
labelled rows, a scaled logistic regression); these tests pin the cells it found noisy and
fixed (docs/warnings.md):

- weights that are all equal (all 1) passed with a Pipeline, whose ``fit`` takes no
  ``sample_weight``: every fit warned that the model ignored them, though equal weights weight
  nothing;
- ``PriorShiftWrapper.monitor``: a warning of a batch's estimate came once per batch (up to six
  times in one call on carData's Cowles); now once per call, naming the batches;
- a report warned the same kind of warning once per number it touched (the slope and the
  calibration-in-the-large both clipping the same rows); now once per report.
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning
from probwrap.datasets import make_parcels
from probwrap.report import build_report
from probwrap.shift import BoundaryPriorWarning, ImprecisePriorWarning, RepeatedRowsWarning


@pytest.fixture(scope="module")
def cancer():
    return load_breast_cancer(return_X_y=True)


def _pipeline():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


WRAPPERS = {
    "platt": lambda: CalibrationWrapper(_pipeline(), method="platt", random_state=0),
    "auto": lambda: CalibrationWrapper(_pipeline(), method="auto", random_state=0),
    "bayes": lambda: CostPolicyWrapper(_pipeline(), costs={"fp": 1, "fn": 5}, random_state=0),
    "tuned": lambda: CostPolicyWrapper(_pipeline(), costs={"fp": 1, "fn": 5}, strategy="tuned",
                                       random_state=0, n_resamples=50),
    "shift": lambda: PriorShiftWrapper(_pipeline(), random_state=0, n_resamples=50),
}


@pytest.mark.parametrize("name", sorted(WRAPPERS))
def test_weights_of_one_on_a_pipeline_draw_no_warning(cancer, name):
    """569 rows of breast cancer, a scaled logistic regression: weights of 1 weight nothing, so
    a model that cannot take them loses nothing; before, every fit warned."""
    X, y = cancer
    with warnings.catch_warnings():
        warnings.simplefilter("error", UserWarning)  # every probwrap warning is a UserWarning
        weighted = WRAPPERS[name]().fit(X, y, sample_weight=np.ones(y.size))
    plain = WRAPPERS[name]().fit(X, y)
    # and the weights of 1 change nothing the wrapper fits
    np.testing.assert_allclose(weighted.predict_proba(X[:50]), plain.predict_proba(X[:50]),
                               rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("name", ["platt", "shift"])
def test_equal_normalised_weights_are_not_said_to_be_lost(cancer, name):
    """Weights of 1/n count one row each (Kish's effective size; the rescaling has its own
    WeightScaleWarning), so the model fitted without them loses nothing either."""
    X, y = cancer
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=".*does not accept", category=UserWarning)
        warnings.filterwarnings("ignore", category=WeightScaleWarning)
        WRAPPERS[name]().fit(X, y, sample_weight=np.full(y.size, 1 / y.size))


def test_unequal_weights_on_a_pipeline_still_warn_with_what_to_do(cancer):
    X, y = cancer
    w = np.where(np.arange(y.size) % 3 == 0, 2.0, 1.0)
    with pytest.warns(UserWarning, match=r"\(Pipeline\) does not accept sample_weight.*"
                                         r"enable_metadata_routing=True"):
        WRAPPERS["platt"]().fit(X, y, sample_weight=w)


@pytest.fixture(scope="module")
def parcels_shift():
    lab = make_parcels(2000, random_state=0)
    unl = make_parcels(2000, random_state=1)
    model = PriorShiftWrapper(LogisticRegression(max_iter=2000), random_state=0,
                              n_resamples=50).fit(lab.data, lab.target)
    return model, unl.data


def test_monitor_on_ordinary_batches_draws_no_warning(parcels_shift):
    """4 batches of 500 invented parcels, no shift: nothing to warn about."""
    model, X = parcels_shift
    with warnings.catch_warnings():
        for category in (UserWarning, BoundaryPriorWarning, ImprecisePriorWarning,
                         RepeatedRowsWarning):
            warnings.simplefilter("error", category)
        table = model.monitor(X, np.repeat(np.arange(4), 500))
    assert table.shape[0] == 4


def test_monitor_says_a_batch_warning_once_naming_the_batches(parcels_shift):
    """Two batches of 15 rows: each is 'Only 15 effective unlabelled rows'; before, one warning
    per batch (two here), now one that names both."""
    model, X = parcels_shift
    batches = np.r_[np.repeat(0, 980), np.repeat(1, 990), np.repeat(2, 15), np.repeat(3, 15)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model.monitor(X, batches)
    few = [w for w in caught if "Only 15 effective unlabelled rows" in str(w.message)]
    assert len(few) == 1, [str(w.message) for w in few]
    assert str(few[0].message).startswith("In 2 of 4 batches (batch 2, 3): first, batch 2: "
                                          "Only 15 effective unlabelled rows")
    # every named warning class at most once in the call
    named = [w.category for w in caught if w.category is not UserWarning]
    assert len(named) == len(set(named)), [str(w.message)[:80] for w in caught]


def test_report_warns_each_kind_once():
    """Five forecasts of 1e-18 among 400: the slope and the calibration-in-the-large both clip
    them; before, the report warned twice (once per number), now once (each number keeps its
    note)."""
    rng = np.random.default_rng(0)
    p = rng.uniform(0.05, 0.95, 400)
    y = (rng.uniform(size=400) < p).astype(int)
    p[:5], y[:5] = 1e-18, 0
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        content, _ = build_report(y_true=y, y_prob=p, n_resamples=20)
    clipped = [w for w in caught if "closer than `clip`" in str(w.message)]
    assert len(clipped) == 1, [str(w.message)[:80] for w in clipped]
    noted = {n.key for n in content.notes if "closer than `clip`" in n.message}
    assert {"metric:slope", "metric:intercept"} <= noted
