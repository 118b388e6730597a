"""Per-bin intervals of the reliability diagram against outside references.

- Wilson (1927) score interval: statsmodels' ``proportion_confint(method="wilson")``.
- Bröcker & Smith (2007) consistency band: with every forecast in a bin equal to ``p``, the
  simulated observed frequency is Binomial(n, p) / n, so the band ends are the binomial
  quantiles of ``scipy.stats.binom`` divided by n; with row weights as frequencies, the exact
  distribution of a bin's count is the convolution of the rows' binomial pmfs.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import binom
from statsmodels.stats.proportion import proportion_confint

from probwrap.plot import consistency_band, wilson_interval


@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
def test_wilson_matches_statsmodels(level):
    k = np.array([0, 1, 3, 17, 50, 99, 100])
    n = np.array([10, 10, 10, 40, 100, 100, 100])
    low, high = wilson_interval(k, n, level)
    ref_low, ref_high = proportion_confint(k, n, alpha=1 - level, method="wilson")
    np.testing.assert_allclose(low, ref_low, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(high, ref_high, rtol=1e-12, atol=1e-14)


def test_consistency_band_matches_binomial_quantiles():
    p, n = 0.2, 200
    probs = np.concatenate([np.full(n, p), np.full(n, 0.7)])
    idx = np.repeat([0, 1], n)
    low, high = consistency_band(probs, idx, 2, n_draws=20000, random_state=3)
    # scipy.stats.binom: the 2.5% and 97.5% quantiles of the number of positives, divided by n.
    # The simulated quantiles are of an empirical distribution with 20000 draws, so they may land
    # one count away from the exact quantile at most.
    for j, pj in enumerate((0.2, 0.7)):
        q_lo, q_hi = binom.ppf([0.025, 0.975], n, pj) / n
        assert abs(low[j] - q_lo) <= 1.0 / n + 1e-12
        assert abs(high[j] - q_hi) <= 1.0 / n + 1e-12
        assert low[j] < pj < high[j]


def _exact_quantiles(p, w, level):
    """Quantiles of the weighted observed frequency of one bin under calibration, exactly.

    Reference: a row of whole weight m stands for m rows, so the bin's number of positives is
    the sum of independent Binomial(m_i, p_i) counts (scipy.stats.binom pmfs, convolved); the
    observed frequency is that count over the bin's total weight.
    """
    pmf = np.array([1.0])
    for pi, mi in zip(p, w, strict=True):
        pmf = np.convolve(pmf, binom.pmf(np.arange(int(mi) + 1), int(mi), pi))
    cdf = np.cumsum(pmf)
    alpha = 1.0 - level
    lo = int(np.searchsorted(cdf, alpha / 2.0))
    hi = int(np.searchsorted(cdf, 1.0 - alpha / 2.0))
    return lo / w.sum(), hi / w.sum()


def test_consistency_band_is_seeded_and_weights_are_row_frequencies():
    rng = np.random.default_rng(0)
    p = rng.uniform(size=300)
    idx = (p * 3).astype(int)
    a = consistency_band(p, idx, 3, random_state=1)
    b = consistency_band(p, idx, 3, random_state=1)
    np.testing.assert_array_equal(a[0], b[0])
    # weights all 1 are no weights (the same draws)
    c = consistency_band(p, idx, 3, sample_weight=np.ones(300), random_state=1)
    np.testing.assert_array_equal(c, a)
    # weights that cannot be frequencies (summing to 1) are rescaled to Kish's effective size,
    # equal weights to 1 each, with a warning: then the same band as without weights
    from probwrap.calibration import WeightScaleWarning

    with pytest.warns(WeightScaleWarning, match="Kish"):
        d = consistency_band(p, idx, 3, sample_weight=np.full(300, 1 / 300), random_state=1)
    np.testing.assert_allclose(d, a, rtol=1e-12)
    # frequencies: every row counted twice is twice the rows, a narrower band
    e = consistency_band(p, idx, 3, sample_weight=np.full(300, 2.0), random_state=1)
    assert np.all(e[1] - e[0] < a[1] - a[0])
    # an empty bin has no band
    low, high = consistency_band(p[idx < 2], idx[idx < 2], 3, random_state=0)
    assert np.isnan(low[2]) and np.isnan(high[2])


def test_consistency_band_with_whole_weights_matches_exact_binomial_sums():
    rng = np.random.default_rng(4)
    p = rng.uniform(0.05, 0.6, size=25)
    w = rng.integers(1, 9, size=25).astype(float)
    low, high = consistency_band(p, np.zeros(25, dtype=int), 1, sample_weight=w,
                                 n_draws=20000, random_state=5)
    ref_lo, ref_hi = _exact_quantiles(p, w, 0.95)
    # 20000 simulated draws: the empirical quantile may land one count away from the exact one
    assert abs(low[0] - ref_lo) <= 1.0 / w.sum() + 1e-12
    assert abs(high[0] - ref_hi) <= 1.0 / w.sum() + 1e-12


@settings(max_examples=10, deadline=None, derandomize=True)  # Monte Carlo: fixed examples
@given(seed=st.integers(0, 2**31 - 1), n=st.integers(3, 12))
def test_consistency_band_weight_two_is_a_duplicated_row(seed, n):
    # property: a row of weight m gives the band of m copies of the row (weight 1 each); the
    # two are simulated with different draws, so both are compared with the exact quantiles
    rng = np.random.default_rng(seed)
    p = rng.uniform(0.05, 0.95, size=n)
    w = rng.integers(1, 4, size=n).astype(float)
    weighted = consistency_band(p, np.zeros(n, dtype=int), 1, sample_weight=w, n_draws=3000,
                                random_state=seed % 1000)
    copies = consistency_band(np.repeat(p, w.astype(int)), np.zeros(int(w.sum()), dtype=int),
                              1, n_draws=3000, random_state=seed % 1000 + 1)
    ref = _exact_quantiles(p, w, 0.95)
    # 3000 draws: each empirical quantile within one count of the exact one (a quantile on
    # the edge of a count step can go either way), so the two bands within two counts
    step = 1.0 / w.sum()
    for band in (weighted, copies):
        assert abs(band[0][0] - ref[0]) <= step + 1e-12
        assert abs(band[1][0] - ref[1]) <= step + 1e-12
    assert abs(weighted[0][0] - copies[0][0]) <= 2 * step + 1e-12
    assert abs(weighted[1][0] - copies[1][0]) <= 2 * step + 1e-12


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"successes": [5], "n": [0]}, "`n`"),
        ({"successes": [5], "n": [3]}, "`successes`"),
        ({"successes": [1], "n": [3], "confidence_level": 1.5}, "`confidence_level`"),
    ],
)
def test_wilson_bad_input_names_argument(kwargs, match):
    with pytest.raises(ValueError, match=match):
        wilson_interval(**kwargs)


def test_consistency_bad_input_names_argument():
    with pytest.raises(ValueError, match="`bin_index`"):
        consistency_band([0.1, 0.2], [0], 1)
    with pytest.raises(ValueError, match="`n_draws`"):
        consistency_band([0.1], [0], 1, n_draws=1)
    with pytest.raises(ValueError, match="`y_prob`"):
        consistency_band([1.2], [0], 1)


def test_wilson_band_counts_weights_as_row_frequencies():
    # weight 2 is a duplicated row: the Wilson band of the weighted rows equals that of the
    # rows repeated (deterministic); weights summing to 1 cannot be frequencies and are
    # rescaled to Kish's effective size (equal weights: 1 each), with a warning, so they give
    # the unweighted band instead of intervals as wide as for a single row
    import matplotlib

    matplotlib.use("Agg")
    from probwrap.calibration import WeightScaleWarning
    from probwrap.plot import ReliabilityDiagram

    rng = np.random.default_rng(8)
    p = rng.uniform(size=400)
    y = (rng.uniform(size=400) < p).astype(int)
    w = rng.integers(1, 4, size=400).astype(float)
    weighted = ReliabilityDiagram.from_predictions(y, p, sample_weight=w, band="wilson")
    copies = ReliabilityDiagram.from_predictions(np.repeat(y, w.astype(int)),
                                                 np.repeat(p, w.astype(int)), band="wilson")
    np.testing.assert_allclose(weighted.band_low, copies.band_low, rtol=1e-12)
    np.testing.assert_allclose(weighted.band_high, copies.band_high, rtol=1e-12)
    plain = ReliabilityDiagram.from_predictions(y, p, band="wilson")
    with pytest.warns(WeightScaleWarning, match="Kish"):
        normalised = ReliabilityDiagram.from_predictions(y, p, sample_weight=np.full(400, 1 / 400),
                                                         band="wilson")
    # the rescaled totals equal the counts up to the rounding of sums of 1/400 (~1e-15)
    np.testing.assert_allclose(normalised.band_low, plain.band_low, rtol=1e-9)
    np.testing.assert_allclose(normalised.band_high, plain.band_high, rtol=1e-9)
