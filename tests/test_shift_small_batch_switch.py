"""No jump at the small-batch switch of the score interval.

Below ``null_variance_below`` (100) effective unlabelled rows ``score_interval`` takes the
batch's variance under the tested prior (Wilson's form), from 100 rows the batch's own; and the
form under the tested prior needs 100 effective labelled rows. As a step at 100 rows either
count moved the interval's ends by as much as 0.55 between 99.99 and 100.01 rows
(benchmarks/small_batch_switch.py). Since then the two variances are blended, the weight of the
one under the tested prior falling linearly from ``null_variance_fade_from`` (default 50) to
``null_variance_below`` unlabelled rows and rising over the same range of labelled rows.
"""

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift import score_interval


@pytest.fixture(scope="module")
def breast_cancer_scores():
    """scikit-learn's breast cancer set: a logistic regression on mean radius and mean texture
    fitted on 190 rows, the next 190 rows labelled, a 100-row batch drawn by class at 0.3 from
    the rest (prior shift holds), all seeded."""
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, [0, 1]]
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    fit, lab, rest = order[:190], order[190:380], order[380:]
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(X[fit], y[fit])
    p_lab, p_rest = model.predict_proba(X[lab]), model.predict_proba(X[rest])
    labels = (rng.uniform(size=100) < 0.3).astype(int)
    batch = np.empty((100, 2))
    for c in (0, 1):
        pool = p_rest[y[rest] == c]
        batch[labels == c] = pool[rng.integers(0, pool.shape[0], np.sum(labels == c))]
    src = np.bincount(y[lab], minlength=2) / lab.size
    return batch, p_lab, y[lab], src


def test_unlabelled_count_switch_is_continuous(breast_cancer_scores):
    batch, p_s, y_s, src = breast_cancer_scores
    just_below, _ = score_interval(batch, p_s, y_s, src, effective_rows=99.99)
    just_above, _ = score_interval(batch, p_s, y_s, src, effective_rows=100.01)
    # before: a step (the upper end moved 0.445 -> 1 here: at a prior near 1 the rows' own
    # score variance is huge, so nothing is rejected); now a blend whose weight changes by
    # 0.0004 between the two counts
    assert np.max(np.abs(just_below - just_above)) < 2e-3


def test_labelled_count_switch_is_continuous(breast_cancer_scores):
    batch, p_s, y_s, src = breast_cancer_scores
    small = batch[:20]
    just_below, _ = score_interval(small, p_s, y_s, src, source_effective_rows=99.99)
    just_above, _ = score_interval(small, p_s, y_s, src, source_effective_rows=100.01)
    # before: 0.464 -> 1 on the upper end
    assert np.max(np.abs(just_below - just_above)) < 2e-3


def test_fade_keeps_both_ends_and_the_old_step_on_request(breast_cancer_scores):
    batch, p_s, y_s, src = breast_cancer_scores
    own = score_interval(batch, p_s, y_s, src, null_variance_below=0)[0]
    step = score_interval(batch, p_s, y_s, src, effective_rows=99.0,
                          null_variance_fade_from=100)[0]
    # up to fade_from rows the variance under the tested prior alone (as with a 100-row
    # threshold and no fade); from null_variance_below the rows' own alone (bit for bit)
    np.testing.assert_array_equal(
        score_interval(batch, p_s, y_s, src, effective_rows=50.0)[0],
        score_interval(batch, p_s, y_s, src, effective_rows=50.0, null_variance_below=100,
                       null_variance_fade_from=100)[0])
    np.testing.assert_array_equal(score_interval(batch, p_s, y_s, src)[0], own)
    # half-way (75 rows) the ends lie between those of the two forms at 75 rows
    mid = score_interval(batch, p_s, y_s, src, effective_rows=75.0)[0]
    a = score_interval(batch, p_s, y_s, src, effective_rows=75.0, null_variance_fade_from=100)[0]
    b = score_interval(batch, p_s, y_s, src, effective_rows=75.0, null_variance_below=0)[0]
    assert np.all(np.minimum(a, b) - 1e-9 <= mid) and np.all(mid <= np.maximum(a, b) + 1e-9)
    assert np.max(np.abs(step - own)) > 0.02  # the old step is there on request
    with pytest.raises(ValueError, match="null_variance_fade_from"):
        score_interval(batch, p_s, y_s, src, null_variance_fade_from=150)
