"""Consistency tests: the one-vs-rest maps fitted together (probwrap.calibration._one_vs_rest)
against the same maps fitted one at a time, and the batched logistic solver against the
single-problem one. (Comparisons of probwrap with itself; the single-problem fits are checked
against statsmodels and scikit-learn in test_maps_reference.py.)"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from probwrap.calibration import BetaMap, BinningMap, IsotonicMap, PlattMap
from probwrap.calibration._base import one_vs_rest_copy
from probwrap.calibration._one_vs_rest import batched_weighted_logistic, fit_one_vs_rest
from probwrap.calibration._platt import _weighted_logistic

# Both solvers run the same Newton iteration to machine precision; only the order of some
# floating-point sums differs, so parameters agree to rounding (seen: below 1e-13 relative).
# 1e-9 leaves room for ill-conditioned (nearly separated) problems.
RTOL = 1e-9


def _close(a, b) -> bool:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    return bool(np.all(np.abs(a - b) <= RTOL * (1.0 + np.abs(b))))


def _problems(rng, kind: str, P: int, n: int, d: int):
    X = rng.normal(size=(P, n, d)) * rng.choice([0.05, 1.0, 40.0])
    eta = X.sum(axis=2)
    T = (rng.random((P, n)) < 1.0 / (1.0 + np.exp(-eta))).astype(float)
    T[:, 0], T[:, 1] = 0.0, 1.0  # both labels in every problem
    if kind == "separable":
        X[0, :, 0] = np.where(T[0] > 0.5, 3.0, -3.0) + 0.1 * rng.normal(size=n)
    if kind == "constant":
        X[-1, :, 0] = 2.5  # a column with no spread: solved alone, coefficient 0
    if kind != "raw":
        T = T * (1.0 - 2.0 / (n + 2)) + 1.0 / (n + 2)  # smoothed targets
    w = rng.integers(0, 4, size=n).astype(float) if kind == "weighted" else np.ones(n)
    w[:2] = 1.0
    return X, T, w


@pytest.mark.parametrize("kind", ["plain", "weighted", "separable", "constant", "raw"])
@pytest.mark.parametrize("d", [1, 2])
def test_batched_logistic_equals_one_problem_at_a_time(kind, d):
    rng = np.random.default_rng([d, len(kind)])
    for n, P in ((7, 3), (60, 5), (900, 4)):
        X, T, w = _problems(rng, kind, P, n, d)
        coef, intercept, converged = batched_weighted_logistic(X, T, w)
        for p in range(P):
            c1, b1, ok1 = _weighted_logistic(X[p], T[p], w)
            assert _close(coef[p], c1) and _close(intercept[p], b1), (kind, n, p)
            assert converged[p] == ok1


def _fitted(m) -> dict:
    return {k: v for k, v in vars(m).items() if k.endswith("_") and not k.startswith("_")}


def _same_map(a, b) -> None:
    assert type(a) is type(b) and a._rest_classes == b._rest_classes
    fa, fb = _fitted(a), _fitted(b)
    assert fa.keys() == fb.keys()
    for key, va in fa.items():
        vb = fb[key]
        if isinstance(vb, (str, type(None))) or key == "classes_":
            assert np.array_equal(va, vb) if key == "classes_" else va == vb, key
            if key == "classes_":
                assert np.asarray(va).dtype == np.asarray(vb).dtype
        else:
            assert _close(va, vb), (key, va, vb)


def _one_at_a_time(template, S, y, w, classes):
    return [
        one_vs_rest_copy(template, S.shape[1]).fit(S[:, k], (y == k).astype(int), sample_weight=w)
        for k in classes
    ]


def _caught(fn):
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        out = fn()
    return out, sorted((w.category.__name__, str(w.message)) for w in seen)


TEMPLATES = [
    PlattMap(),
    PlattMap(limit_scores=True),
    PlattMap(smooth_targets=False),
    BetaMap(),
    BetaMap(smooth_targets=False),
    IsotonicMap(),
    BinningMap(),
]


@pytest.mark.parametrize("template", TEMPLATES, ids=repr)
@pytest.mark.parametrize("case", ["random", "separable", "weighted", "small_weights", "tiny_class"])
def test_one_vs_rest_together_equals_one_at_a_time(template, case):
    rng = np.random.default_rng(len(case))
    n, k = 240, 4
    logits = rng.normal(size=(n, k)) * 2.0
    y = np.array([rng.choice(k, p=np.exp(r) / np.exp(r).sum()) for r in logits])
    if case == "separable":
        logits[np.arange(n), y] += 12.0  # every class above the rest on its own rows
    if case == "tiny_class":
        y[y == 3] = 0
        y[:2] = 3  # a class with two rows ...
        y[y == 2] = 1
        y[5] = 2  # ... and one with one row
    S = logits - np.log(np.exp(logits).sum(axis=1, keepdims=True))  # any finite scores
    w = np.ones(n)
    if case == "weighted":
        w = rng.integers(0, 5, size=n).astype(float)
        w[:6] = 1.0
    if case == "small_weights":
        w = rng.random(n) / n  # sums to less than the rows: rescaled, with a warning
    classes = [c for c in range(k) if 0 < w[y == c].sum() < w.sum()]
    together, seen_together = _caught(lambda: fit_one_vs_rest(template, S, y, w, classes))
    alone, seen_alone = _caught(lambda: _one_at_a_time(template, S, y, w, classes))
    assert len(together) == len(alone) == len(classes)
    for a, b in zip(together, alone, strict=True):
        _same_map(a, b)
        q = np.linspace(-30.0, 10.0, 41)
        assert _close(a.predict(q), b.predict(q))
    assert seen_together == seen_alone


def test_one_vs_rest_together_reports_bad_input_as_one_at_a_time():
    S = np.full((6, 3), -5.0)
    S[2, 1] = np.nan
    y = np.array([0, 1, 2, 0, 1, 2])
    with pytest.raises(ValueError, match="NaN"):
        fit_one_vs_rest(PlattMap(), S, y, np.ones(6), [0, 1, 2])
    # a class whose rows all have zero weight: the same error as its own fit raises
    w = np.array([1.0, 0.0, 1.0, 1.0, 0.0, 1.0])
    with pytest.raises(ValueError, match="zero for every row of class 1"):
        fit_one_vs_rest(BetaMap(), np.ones((6, 3)) * np.arange(6)[:, None], y, w, [1])


def test_one_vs_rest_scores_are_bit_identical_to_one_class_at_a_time():
    """The one-vs-rest log-odds come from one logsumexp over all classes; order-based maps
    (binning) are sensitive to their rounding, so they must equal the per-class computation
    ``s_k - logsumexp(s without column k)`` exactly, also across the row blocks."""
    from scipy.special import logsumexp

    from probwrap import CalibrationWrapper

    rng = np.random.default_rng(3)
    for n, k in ((50, 3), (70_000, 5), (300, 8), (300, 10)):
        p = rng.dirichlet(np.full(k, 0.3), size=n)
        p[::7, 1] = 0.0  # a forest's exact zeros
        p[::11] = np.round(p[::11], 2)  # ties
        s = np.log(np.maximum(p, np.nextafter(0.0, 1.0)))
        m = CalibrationWrapper(method="platt")
        m.response_ = "predict_proba"
        got = m._one_vs_rest_scores(s)
        want = np.column_stack(
            [s[:, j] - logsumexp(np.delete(s, j, axis=1), axis=1) for j in range(k)]
        )
        assert np.array_equal(got, want)


@pytest.mark.parametrize("template", TEMPLATES, ids=repr)
def test_one_vs_rest_predictions_in_one_pass_are_bit_identical(template):
    from probwrap.calibration._one_vs_rest import predict_one_vs_rest

    rng = np.random.default_rng(4)
    n, k = 300, 4
    S = rng.normal(size=(n, k)) * 3.0
    y = rng.integers(0, k, size=n)
    maps = fit_one_vs_rest(template, S, y, np.ones(n), range(k))
    T = np.concatenate([rng.normal(size=(200, k)) * 10.0, np.full((2, k), 700.0), -S[:5]])
    want = np.column_stack([m.predict(T[:, j]) for j, m in enumerate(maps)])
    assert np.array_equal(predict_one_vs_rest(maps, T), want)


def test_units_are_power_of_two_unit_per_column():
    from probwrap._validation import power_of_two_unit
    from probwrap.calibration._one_vs_rest import _powers_of_two_units

    X = np.random.default_rng(5).normal(size=(4, 30, 2)) * np.array([1e-300, 3.0])
    X[1, :, 0] = 0.0
    X[2, 3, 1] = 1.5e308
    want = [[power_of_two_unit(X[p, :, j]) for j in range(2)] for p in range(4)]
    assert np.array_equal(_powers_of_two_units(X), np.array(want))


@pytest.mark.parametrize("kind", ["random", "separable", "weighted"])
def test_fits_started_from_another_folds_parameters_equal_cold_fits(kind):
    """auto's cross-validation starts one-vs-rest Platt/beta fits and vector scaling from the
    previous fold's parameters: the same minimum as a fit from the usual start."""
    from probwrap.calibration import VectorScalingMap

    rng = np.random.default_rng(len(kind))
    n, k = 300, 4
    S = rng.normal(size=(n, k)) * 2.0
    y = np.array([rng.choice(k, p=np.exp(r) / np.exp(r).sum()) for r in S])
    if kind == "separable":
        S[np.arange(n), y] += 15.0
    w = rng.integers(1, 4, size=n).astype(float) if kind == "weighted" else np.ones(n)
    other = np.arange(n) % 5 != 0  # another fold: most of the same rows
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for template in (PlattMap(), PlattMap(limit_scores=True), BetaMap()):
            before = fit_one_vs_rest(template, S[other], y[other], w[other], range(k))
            warm = fit_one_vs_rest(template, S, y, w, range(k), before)
            for a, b in zip(warm, fit_one_vs_rest(template, S, y, w, range(k)), strict=True):
                _same_map(a, b)
        before = VectorScalingMap().fit(S[other], y[other], sample_weight=w[other])
        warm = VectorScalingMap()
        warm._start_from = before
        warm.fit(S, y, sample_weight=w)
        cold = VectorScalingMap().fit(S, y, sample_weight=w)
    assert not hasattr(warm, "_start_from")
    assert _close(warm.scales_, cold.scales_) and _close(warm.intercepts_, cold.intercepts_)
    assert warm.boundary_ == cold.boundary_



@pytest.mark.parametrize(
    "template", [PlattMap(), PlattMap(limit_scores=True), BetaMap()], ids=repr
)
@pytest.mark.parametrize("case", ["random", "weighted", "ties", "probability_like", "separable"])
def test_prepared_together_is_bit_identical_to_each_maps_prepare(template, case):
    """fit_one_vs_rest prepares the Platt/beta fits of all classes at once (targets, floor,
    score limits, beta's features): exactly the arrays and attributes of each map's own
    _prepare; where a class's _prepare would warn (scores in [0, 1] for Platt, separated
    classes for beta) it is left to it."""
    from probwrap.calibration import _one_vs_rest as ovr

    rng = np.random.default_rng(len(case) + 7)
    n, k = 200, 5
    S = rng.normal(size=(n, k)) * 3.0
    y = rng.integers(0, k, size=n)
    w = np.ones(n)
    if case == "weighted":
        w = rng.integers(0, 4, size=n).astype(float) * 1.7
        w[:k] = 1.0
        y[:k] = np.arange(k)
    if case == "ties":
        S = np.round(S)
    if case == "probability_like":
        S = rng.random((n, k))
    if case == "separable":
        S[np.arange(n), y] += 20.0
    classes = list(range(k))
    got = ovr._prepare_together(one_vs_rest_copy(template, k), S, y, w, classes)
    warns = (case == "probability_like" and isinstance(template, PlattMap)) or (
        case == "separable" and isinstance(template, BetaMap)
    )
    assert (got is None) == warns
    if got is None:
        return
    prepared, limits = got
    for i, c in enumerate(classes):
        m = one_vs_rest_copy(template, k)
        want = m._prepare(np.ascontiguousarray(S[:, c]), (y == c).astype(float), w)
        for a, b in zip(prepared[i], want, strict=True):
            assert a.shape == b.shape and np.array_equal(a, b)
        assert getattr(m, "score_limits_", None) == (None if limits is None else limits[i])
    # and the maps fitted through it equal those fitted with each map's own _prepare, exactly
    together = fit_one_vs_rest(template, S, y, w, classes)
    original = ovr._prepare_together
    try:
        ovr._prepare_together = lambda *args: None
        alone = fit_one_vs_rest(template, S, y, w, classes)
    finally:
        ovr._prepare_together = original
    for a, b in zip(together, alone, strict=True):
        assert vars(a).keys() == vars(b).keys()
        for key, va in vars(a).items():
            assert np.array_equal(va, vars(b)[key]) if key != "boundary_" else va == vars(b)[key]
