"""Per-bin intervals of the reliability diagram against outside references.

- Wilson (1927) score interval: statsmodels' ``proportion_confint(method="wilson")``.
- Bröcker & Smith (2007) consistency band: with every forecast in a bin equal to ``p``, the
  simulated observed frequency is Binomial(n, p) / n, so the band ends are the binomial
  quantiles of ``scipy.stats.binom`` divided by n.
"""

import numpy as np
import pytest
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


def test_consistency_band_is_seeded_and_weights_act_as_documented():
    rng = np.random.default_rng(0)
    p = rng.uniform(size=300)
    idx = (p * 3).astype(int)
    a = consistency_band(p, idx, 3, random_state=1)
    b = consistency_band(p, idx, 3, random_state=1)
    np.testing.assert_array_equal(a[0], b[0])
    # weights: the simulated frequency is the weighted share of simulated positives, so scaling
    # every weight by a constant changes nothing (same draws)...
    c = consistency_band(p, idx, 3, sample_weight=np.full(300, 2.5), random_state=1)
    np.testing.assert_allclose(c, a, rtol=1e-12)
    # ...and unequal weights do change the band: a bin dominated by one row's draw is wider
    w = np.ones(300)
    w[np.flatnonzero(idx == 1)[0]] = 1000.0
    d = consistency_band(p, idx, 3, sample_weight=w, random_state=1)
    assert d[1][1] - d[0][1] > a[1][1] - a[0][1] + 0.2
    # an empty bin has no band
    low, high = consistency_band(p[idx < 2], idx[idx < 2], 3, random_state=0)
    assert np.isnan(low[2]) and np.isnan(high[2])


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
