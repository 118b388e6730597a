"""The score interval of a small batch: the unlabelled rows' variance under the tested prior.

Below ``null_variance_below`` (100) effective unlabelled rows, ``score_interval`` takes the
unlabelled side's variance at the tested prior from the labelled rows instead of from the few
rows themselves (Wilson 1927 against Wald). With posteriors that reveal the class, the test
is Wilson's score test of a proportion exactly, so the interval is Wilson's (checked against
statsmodels); with the rows' own variance it was a Wald-type interval, which collapses to the
point at 0 positives. On a rare class, 20 low-scoring rows now rule out a prevalence near 1.
"""

import numpy as np
import pytest
from scipy.stats import f as f_dist

from probwrap.shift import PriorEstimator, score_interval


def _revealing(n_pos, n):
    """Posteriors that reveal the class: ``n_pos`` rows at (0, 1), the rest at (1, 0)."""
    p = np.zeros((n, 2))
    p[:n_pos, 1] = 1.0
    p[n_pos:, 0] = 1.0
    return p


@pytest.fixture(scope="module")
def labelled():
    # many labelled rows at 0.3: their class means of the score carry no variance here
    # (the score is constant within a class), so only the unlabelled side's variance counts
    y = np.r_[np.ones(300, int), np.zeros(700, int)]
    return _revealing(300, 1000), y, np.array([0.7, 0.3])


@pytest.mark.parametrize("k, n", [(0, 20), (3, 20), (11, 20), (20, 20), (7, 50)])
def test_revealing_posteriors_give_wilson_interval(labelled, k, n):
    # (up to 50 rows, null_variance_fade_from; from there to 100 it blends toward the rows' own)
    sm = pytest.importorskip("statsmodels.stats.proportion")
    p_s, y_s, src = labelled
    (lo, hi), ok = score_interval(_revealing(k, n), p_s, y_s, src, small_sample=False)
    # Wilson (1927): {pi : n (k/n - pi)^2 <= z^2 pi (1 - pi)}; statsmodels' "wilson"
    w_lo, w_hi = sm.proportion_confint(k, n, alpha=0.05, method="wilson")
    assert ok
    assert lo == pytest.approx(w_lo, abs=1e-7) and hi == pytest.approx(w_hi, abs=1e-7)


def test_revealing_posteriors_small_sample_uses_t_with_n_minus_one(labelled):
    # with Student's t the cut-off is F(1, n - 1) at 0.95: Wilson's equation solved with
    # that cut-off in place of z^2 (the quadratic of Wilson 1927 with c = F quantile)
    p_s, y_s, src = labelled
    k, n = 3, 20
    (lo, hi), _ = score_interval(_revealing(k, n), p_s, y_s, src)
    c = f_dist.ppf(0.95, 1, n - 1)
    ph = k / n
    centre = (ph + c / (2 * n)) / (1 + c / n)
    half = np.sqrt(c * ph * (1 - ph) / n + c**2 / (4 * n**2)) / (1 + c / n)
    assert lo == pytest.approx(centre - half, abs=1e-7)
    assert hi == pytest.approx(centre + half, abs=1e-7)


def test_rows_own_variance_on_request_and_from_100_rows(labelled):
    # null_variance_below=0 gives the interval of before (the rows' own variance): with
    # revealing posteriors the Wald interval k/n +- z sqrt(p(1 - p) / (n - 1)), whose top
    # at 3 of 20 lies below Wilson's
    from scipy.stats import norm

    p_s, y_s, src = labelled
    (lo0, hi0), _ = score_interval(_revealing(3, 20), p_s, y_s, src, small_sample=False,
                                   null_variance_below=0)
    (lo1, hi1), _ = score_interval(_revealing(3, 20), p_s, y_s, src, small_sample=False)
    assert hi0 == pytest.approx(0.15 + norm.ppf(0.975) * np.sqrt(0.15 * 0.85 / 19), abs=1e-7)
    assert hi0 < hi1 - 0.04
    # from 100 rows on the rows' own variance is kept
    (lo2, hi2), _ = score_interval(_revealing(30, 200), p_s, y_s, src, small_sample=False)
    (lo3, hi3), _ = score_interval(_revealing(30, 200), p_s, y_s, src, small_sample=False,
                                   null_variance_below=0)
    assert (lo2, hi2) == (lo3, hi3)
    with pytest.raises(ValueError, match="null_variance_below"):
        score_interval(_revealing(3, 20), p_s, y_s, src, null_variance_below=-1)


def test_rare_class_twenty_low_rows_no_longer_reach_one():
    # a rare class (8 % of 1,500 labelled rows), scores that separate the classes by two
    # standard deviations, a batch of 20 rows of the other class only (before, 8 of 20 such
    # batches reached 1, now none; the benchmark below measures coverage). The rows' own score variance at a prior near 1 is huge (each row
    # argues against it), so before, no prevalence was rejected and the interval reached 1;
    # under the tested prior the variance is the labelled positives' and near 1 is rejected.
    rng = np.random.default_rng(5)

    def draw(n, prior):
        y = (rng.uniform(size=n) < prior).astype(int)
        z = rng.normal(size=n) + 2.0 * y - 2.5
        p1 = 1.0 / (1.0 + np.exp(-z))
        return np.column_stack([1 - p1, p1]), y

    p_s, y_s = draw(1500, 0.08)
    est = PriorEstimator(random_state=0).fit(p_s, y_s)
    batch = draw(20, 0.0)[0]
    with pytest.warns(UserWarning, match="effective unlabelled rows"):
        hi_now = est.estimate(batch).interval[1, 1]
    (lo_b, hi_b), _ = score_interval(est.calibrate(batch), est.calibrate(p_s), y_s,
                                     est.source_prior_, null_variance_below=0)
    assert hi_b > 0.999  # before: reaches 1
    assert hi_now < 0.5  # now: prevalences above one half are ruled out



def test_rare_class_batches_no_false_conflict():
    # twenty 20-row batches drawn at 0.02 under an exact prior shift (same score model as
    # above): with the rows' own variance, batches whose rows all score low have almost no
    # spread, so every prior was rejected ("no class prior is consistent", a false warning)
    # or only priors near 1 were kept; under the tested prior none conflicts and the
    # intervals hold 0.02
    rng = np.random.default_rng(5)

    def draw(n, prior):
        y = (rng.uniform(size=n) < prior).astype(int)
        z = rng.normal(size=n) + 2.0 * y - 2.5
        p1 = 1.0 / (1.0 + np.exp(-z))
        return np.column_stack([1 - p1, p1]), y

    p_s, y_s = draw(1500, 0.08)
    est = PriorEstimator(random_state=0).fit(p_s, y_s)
    src, ref = est.source_prior_, est.calibrate(p_s)
    old_conflicts = new_conflicts = old_cover = new_cover = 0
    for _ in range(20):
        cal = est.calibrate(draw(20, 0.02)[0])
        (lo, hi), ok = score_interval(cal, ref, y_s, src, null_variance_below=0)
        old_conflicts += not ok
        old_cover += lo <= 0.02 <= hi
        (lo, hi), ok = score_interval(cal, ref, y_s, src)
        new_conflicts += not ok
        new_cover += lo <= 0.02 <= hi
    assert old_conflicts >= 2 and old_cover <= 16  # before
    assert new_conflicts == 0 and new_cover >= 19


def test_few_labelled_rows_keep_the_rows_own_variance():
    # statsmodels' spector (32 students): with only 16 labelled rows their second moment is too
    # noisy to stand in for the batch's (benchmarks/prior_strong_evidence.py's spector cells
    # covered 8 and 9 of 10 with it, 10 and 10 without), so below 100 effective labelled rows
    # the interval is the rows' own-variance one; the same rows tiled to 112 labelled rows
    # (same shares and posteriors) take the variance under the tested prior again
    sm = pytest.importorskip("statsmodels.api")
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict

    data = sm.datasets.spector.load_pandas().data
    X, y = data[["GPA", "TUCE", "PSI"]].to_numpy(float), data["GRADE"].to_numpy(int)
    p = cross_val_predict(LogisticRegression(max_iter=1000), X, y, cv=4, method="predict_proba")
    lab, unl = np.arange(0, 32, 2), np.arange(1, 32, 2)
    src = np.bincount(y[lab], minlength=2) / lab.size
    got, _ = score_interval(p[unl], p[lab], y[lab], src)
    own, _ = score_interval(p[unl], p[lab], y[lab], src, null_variance_below=0)
    np.testing.assert_allclose(got, own, rtol=0, atol=1e-12)
    tiled = np.tile(lab, 7)
    many, _ = score_interval(p[unl], p[tiled], y[tiled], src)
    many_own, _ = score_interval(p[unl], p[tiled], y[tiled], src, null_variance_below=0)
    assert np.max(np.abs(many - many_own)) > 1e-3
