"""Do the unlabelled rows' *features* look like the labelled classes mixed at the new shares?

Prior shift says ``p_new(x | y) = p_labelled(x | y)``: only the class shares move. Then the
unlabelled rows' feature distribution is ``sum_c pi_new(c) p_labelled(x | c)``, which is the
labelled rows' distribution re-weighted row by row by ``pi_new(y) / pi_labelled(y)``. A
classifier trained to tell those re-weighted labelled rows from the unlabelled rows can then do
no better than chance on rows it did not see. :func:`feature_mixture_misfit` fits such a
classifier (the *discriminator*) by cross-fitting and tests whether its held-out scores rank the
unlabelled rows above the labelled ones: a classifier two-sample test (Lopez-Paz & Oquab 2017,
"Revisiting classifier two-sample tests", ICLR; used for dataset shift by Rabanser, Günnemann
& Lipton 2019, "Failing loudly", NeurIPS; both from memory), here with the labelled side
re-weighted to the class mixture, so that a change of class shares alone is not a difference.

The score checks on the model's predictions (``class_mixture_misfit``, the shift test) see the
rows only through one number each. A batch drawn from a subgroup that slides both classes'
scores the same way (breast cancer rows of high texture) looks to them like a change of share;
its features do not look like any mixture of the labelled classes, and this check sees them.

The statistic. In each of ``folds`` folds (stratified on the side, unlabelled or labelled) the
discriminator is fitted on the other folds and scores the fold's rows; the fold's weighted
Mann-Whitney statistic ``A_k`` is the weighted share of (unlabelled, labelled) pairs the scores
order correctly, ties counting one half, the labelled rows weighted by their importance weights.
Under the null its variance is that of the permutation distribution of the rank-sum (the
mid-ranks' variance over the pooled rows times ``(1/n_u + 1/n_l) N / (N - 1)``; Lehmann 1975,
"Nonparametrics", ch. 1, from memory), with Kish's effective counts ``n_u``, ``n_l`` and
``N = n_u + n_l`` in place of the row counts; with equal weights it is SciPy's
``mannwhitneyu(method="asymptotic", use_continuity=False)`` variance, ties corrected (tested).
The folds' statistics are pooled with inverse-variance weights ``c_k`` and referred to the
normal, one-sided (a discriminator worse than chance is no evidence against prior shift), with
``sum_k c_k sd_k`` as the pooled statistic's standard deviation. That is an upper bound whatever
the folds' correlation (Minkowski's inequality), and the folds *are* correlated: fold ``k``'s
discriminator learned from fold ``j``'s rows and the other way round, so under the null both
statistics carry the same product of the two folds' mean differences. Treating the folds as
independent (as van Elteren's 1960 stratified rank-sum test treats its strata) understated the
variance by a factor of 1.7-2.5 on Gaussian draws (5 and 10 folds, 2-30 features, logistic
regression and a random forest) and fired on 4-5 % of batches at 1 %. With two folds the two
statistics are nearly the same number, the bound is nearly tight (variance ratio 2.02 measured)
and the test holds its level; with a single held-out half instead (Lopez-Paz & Oquab's recipe)
the level is exact but the result depends on which half.

Which columns. The discriminator says *whether* the rows differ, not where. Beside it each
column is compared on its own (since 5 December 2026): the unlabelled rows' weighted
distribution of the column against the re-weighted labelled rows', by the two-sample
Kolmogorov-Smirnov distance
(the largest gap between the two weighted empirical distribution functions; a slide, a band
or a cut of the column all open one) with Smirnov's asymptotic p-value on Kish's effective
counts (with equal weights SciPy's ``ks_2samp(method="asymp")``, tested), and the p-values of
the columns corrected for their number by Holm's step-down (Holm 1979, "A simple sequentially
rejective multiple test procedure", Scand. J. Statist. 6, 65-70; statsmodels'
``multipletests(method="holm")``, tested). The labelled side is re-weighted class by class as
for the discriminator, so a change of class shares alone moves no column. Two effect sizes go
with each: the rank share (the weighted share of pairs in which the unlabelled row's value is
the higher, ties one half: above 0.5 the new rows lie higher) and the difference of the
weighted means in standard deviations of the re-weighted labelled column.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.stats import kstwo, norm

from .._validation import plain
from ._estimate import em_prior
from ._mixture_fit import _kish

__all__ = ["FeatureMixtureMisfit", "FeatureMixtureMisfitWarning", "FeatureCheckPowerWarning",
           "feature_mixture_misfit", "FEATURE_MISFIT_LEVEL"]

#: the default level at which :func:`feature_mixture_misfit` warns
FEATURE_MISFIT_LEVEL = 0.01
#: the reference effect of the power figure: one column of a normal feature slid by half a
#: standard deviation (Cohen's "medium" d = 0.5), which an ideal discriminator ranks with
#: AUC = Phi(d / sqrt(2)) (the binormal AUC of two equal-variance normals, from memory)
POWER_SLIDE_SD = 0.5
#: below this power against the reference effect the check is said to have essentially none
#: (it misses such a slide more often than it sees it)
LOW_POWER = 0.5


class FeatureCheckPowerWarning(UserWarning):
    """The feature check ran on too few effective rows to see a moderate difference.

    :func:`feature_mixture_misfit` (or ``PriorShiftWrapper.adapt`` / ``monitor`` with
    ``feature_check_rows``) found no misfit, but its rows could hardly have shown one: a rank
    test on its effective rows (Kish's counts of the unlabelled rows and of the labelled rows
    re-weighted to the estimated shares) would see one column slid by half a standard
    deviation with probability below one half (``power`` of the result; Noether 1987). This
    happens where the estimated shares lean on a class with few labelled rows (AER's ``HMDA``:
    100 labelled rows, 9 of them denied, re-weighted to a share of 0.97 denied count as about
    10 rows and gave ``combined_pvalue`` 1.0). The p-value is not evidence that the features
    fit. Measured in ``benchmarks/shift_natural_splits.py`` (docs/evidence/prior_shift_log.md,
    "The feature check's power on few labelled rows").
    """


class FeatureMixtureMisfitWarning(UserWarning):
    """The unlabelled rows' features differ from every re-weighting of the labelled classes.

    :func:`feature_mixture_misfit` (or ``PriorShiftWrapper.adapt`` with
    ``feature_check_rows``) found that a classifier tells the unlabelled rows from the
    labelled rows re-weighted to the estimated class shares better than chance would, or that
    a column on its own differs between them (``combined_pvalue`` below ``level``, 1 % by
    default); the message names the columns that differ most. Prior shift, which ``PriorShiftWrapper.adapt`` assumes,
    says only the class shares moved; here the rows of a class look different too (a batch
    drawn from a subgroup, a region, a new instrument), so the estimated shares and their
    interval may be off, by more than the interval says. Measured in
    ``benchmarks/shift_feature_check.py`` (docs/evidence/prior_shift_log.md, "Features that do not fit
    the class mixture").
    """


@dataclass(frozen=True)
class FeatureMixtureMisfit:
    """Result of :func:`feature_mixture_misfit`.

    Attributes
    ----------
    statistic : float
        The pooled standardized rank statistic (standard normal under prior shift; large when
        the discriminator tells the sides apart).
    pvalue : float
        Its upper-tail normal p-value.
    auc : float
        The pooled held-out weighted AUC of the discriminator, unlabelled rows against the
        re-weighted labelled rows (0.5: no better than chance).
    prior : ndarray of shape (k,)
        The unlabelled rows' class shares the labelled rows were re-weighted to (in the order
        of ``classes``).
    source_prior : ndarray of shape (k,)
        The labelled rows' weighted class shares.
    classes : ndarray of shape (k,)
        The classes, sorted.
    effective_rows : tuple of float
        Kish's effective counts of the unlabelled rows and of the re-weighted labelled rows.
    folds : int
        The number of folds.
    feature_names : tuple of str
        The columns' names: a DataFrame's column names or ``feature_names`` when given, else
        ``x0``, ``x1`` and so on.
    column_distance : ndarray of shape (d,)
        Per column: the Kolmogorov-Smirnov distance between the unlabelled rows' weighted
        distribution and the re-weighted labelled rows' (0: the same; 1: no overlap).
    column_pvalue : ndarray of shape (d,)
        Its two-sided p-value (Smirnov's asymptotic distribution on Kish's effective counts),
        one column at a time.
    column_pvalue_holm : ndarray of shape (d,)
        The same corrected for the number of columns by Holm's step-down (Holm 1979): a
        column with ``column_pvalue_holm < level`` differs at ``level`` whatever the others.
    column_rank_share : ndarray of shape (d,)
        The weighted share of (unlabelled, labelled) pairs in which the unlabelled row's value
        is the higher, ties one half (0.5: neither side higher; above: the new rows lie
        higher).
    column_mean_shift : ndarray of shape (d,)
        The unlabelled rows' weighted mean minus the re-weighted labelled rows', in standard
        deviations of the re-weighted labelled column (0 where the column is constant on both
        sides).
    flagged_columns : tuple of str
        The columns with ``column_pvalue_holm`` below ``column_level``, most significant first.
    column_level : float
        The level the columns were flagged at (``level``, or 1 % where ``level`` is None).
    combined_pvalue : float
        ``min(1, 2 min(pvalue, min(column_pvalue_holm)))``: the discriminator and the columns
        read together (Bonferroni over the two, so it holds its level whatever their
        dependence). The warning comes when it is below ``level`` (since 5 December 2026;
        before, when ``pvalue`` was): a batch that differs in one column is seen by that
        column's test on
        far fewer rows than the discriminator needs.
    power : float
        An upper figure for the check's power against a moderate difference: the chance that
        a one-sided rank test on the check's effective rows (``effective_rows``), at half the
        check's level (its share of the Bonferroni split), sees one normal column slid by half
        a standard deviation, read by an ideal discriminator (held-out AUC 0.638):
        ``Phi(0.138 / sqrt((1/n_u + 1/n_l) / 12) - z)``, the Mann-Whitney statistic's null
        spread as in Noether's sample-size formula (Noether 1987, "Sample size determination
        for some common nonparametric tests", JASA 82, 645-647, from memory). The check itself
        cross-fits and splits its rows, so its power is lower still.
    power_note : str
        Empty where ``power`` is at least 0.5; else why the check could hardly see a
        difference (the effective rows on each side, and the class whose few labelled rows
        carry the re-weighted side): read ``combined_pvalue`` then as no evidence either way.
    """

    statistic: float
    pvalue: float
    auc: float
    prior: np.ndarray
    source_prior: np.ndarray
    classes: np.ndarray
    effective_rows: tuple[float, float]
    folds: int
    feature_names: tuple[str, ...] = ()
    column_distance: np.ndarray = field(default_factory=lambda: np.empty(0))
    column_pvalue: np.ndarray = field(default_factory=lambda: np.empty(0))
    column_pvalue_holm: np.ndarray = field(default_factory=lambda: np.empty(0))
    column_rank_share: np.ndarray = field(default_factory=lambda: np.empty(0))
    column_mean_shift: np.ndarray = field(default_factory=lambda: np.empty(0))
    flagged_columns: tuple[str, ...] = ()
    column_level: float = FEATURE_MISFIT_LEVEL
    combined_pvalue: float = float("nan")
    power: float = float("nan")
    power_note: str = ""

    def column_order(self) -> np.ndarray:
        """The columns' indices from the most to the least significant (Holm-corrected
        p-value, then the distance, then the column's position)."""
        d = len(self.feature_names)
        return np.lexsort((np.arange(d), -np.asarray(self.column_distance),
                           np.asarray(self.column_pvalue_holm)))

    def describe_columns(self, top: int = 3) -> str:
        """One line naming the ``top`` columns that differ most, with their effect sizes.

        Examples
        --------
        >>> import numpy as np
        >>> from probwrap.shift import feature_mixture_misfit
        >>> rng = np.random.default_rng(0)
        >>> y = rng.integers(0, 2, 400)
        >>> X = rng.normal(y[:, None], 1.0, (400, 3))
        >>> X_new = rng.normal(rng.integers(0, 2, 300)[:, None], 1.0, (300, 3)) + [0, 0, 1.0]
        >>> res = feature_mixture_misfit(X, y, X_new, level=None)
        >>> res.flagged_columns
        ('x2',)
        >>> res.describe_columns(top=1).startswith("x2 (new rows higher")
        True
        """
        parts = []
        for j in self.column_order()[:top]:
            share = float(self.column_rank_share[j])
            way = "higher" if share > 0.5 else "lower" if share < 0.5 else "neither higher"
            parts.append(
                f"{self.feature_names[j]} (new rows {way}: mean {self.column_mean_shift[j]:+.2f} "
                f"SD, rank share {share:.2f}, distribution gap {self.column_distance[j]:.2f}, "
                f"Holm p = {self.column_pvalue_holm[j]:.2g})")
        return "; ".join(parts)


def _check_matrix(X: Any, name: str) -> np.ndarray:
    try:
        a = np.asarray(X, dtype=float)
    except (TypeError, ValueError) as err:
        raise ValueError(f"`{name}` must be a numeric 2-D array of features; {err}") from None
    if a.ndim == 1:
        raise ValueError(f"`{name}` must be 2-D (rows, features); got a 1-D array. "
                         "Reshape one feature with X.reshape(-1, 1).")
    if a.ndim != 2 or a.shape[0] == 0 or a.shape[1] == 0:
        raise ValueError(f"`{name}` must be a non-empty 2-D array; got shape {a.shape}.")
    if not np.all(np.isfinite(a)):
        raise ValueError(f"`{name}` has missing or infinite values; impute or drop them first.")
    return a


def _check_weights(w: Any, n: int, name: str) -> np.ndarray:
    if w is None:
        return np.ones(n)
    a = np.asarray(w, dtype=float)
    if a.shape != (n,):
        raise ValueError(f"`{name}` must have one weight per row ({n}); got shape {a.shape}.")
    if not np.all(np.isfinite(a)) or np.any(a < 0) or a.sum() <= 0:
        raise ValueError(f"`{name}` must be finite, non-negative and not all zero.")
    return a


def _weighted_auc(s_u: np.ndarray, w_u: np.ndarray, s_l: np.ndarray,
                  w_l: np.ndarray) -> tuple[float, float]:
    """Weighted Mann-Whitney share (ties one half) and its permutation variance under the null,
    on Kish's counts."""
    a = w_u / w_u.sum()
    b = w_l / w_l.sum()
    order = np.argsort(s_l, kind="stable")
    sl, cb = s_l[order], np.concatenate([[0.0], np.cumsum(b[order])])
    below = cb[np.searchsorted(sl, s_u, side="left")]
    upto = cb[np.searchsorted(sl, s_u, side="right")]
    auc = float(np.dot(a, 0.5 * (below + upto)))
    n_u, n_l = _kish(w_u), _kish(w_l)
    n = n_u + n_l
    # the pooled rows' mid-distribution (each side weighted by its effective count): the
    # variance of the rank-sum's projection (continuous scores without ties: 1/12)
    s = np.concatenate([s_u, s_l])
    p = np.concatenate([a * n_u, b * n_l]) / n
    o = np.argsort(s, kind="stable")
    ss, cp = s[o], np.concatenate([[0.0], np.cumsum(p[o])])
    mid = 0.5 * (cp[np.searchsorted(ss, s, side="left")] + cp[np.searchsorted(ss, s, "right")])
    v = float(np.dot(p, (mid - np.dot(p, mid)) ** 2))
    var = v * (1.0 / n_u + 1.0 / n_l) * n / max(n - 1.0, 1e-12)
    return auc, var


def _weighted_ks(x_u: np.ndarray, w_u: np.ndarray, x_l: np.ndarray,
                 w_l: np.ndarray) -> tuple[float, float]:
    """Two-sample Kolmogorov-Smirnov distance between two weighted samples of one column and
    its two-sided asymptotic p-value (Smirnov's distribution, ``kstwo`` at the rounded
    effective count ``n_u n_l / (n_u + n_l)`` on Kish's counts, as SciPy's
    ``ks_2samp(method="asymp")`` with equal weights)."""
    a = w_u / w_u.sum()
    b = w_l / w_l.sum()
    x = np.concatenate([x_u, x_l])
    order = np.argsort(x, kind="stable")
    xs = x[order]
    step = np.concatenate([a, -b])[order]
    gap = np.cumsum(step)
    last = np.concatenate([xs[1:] != xs[:-1], [True]])  # the end of each run of ties
    d = float(np.max(np.abs(gap[last]))) if gap.size else 0.0
    d = min(d, 1.0)
    n_u, n_l = _kish(w_u), _kish(w_l)
    en = max(float(np.round(n_u * n_l / (n_u + n_l))), 1.0)
    return d, float(np.clip(kstwo.sf(d, en), 0.0, 1.0))


def _holm(p: np.ndarray) -> np.ndarray:
    """Holm's (1979) step-down adjusted p-values: the ``i``-th smallest of ``m`` multiplied by
    ``m - i + 1`` (``i`` from 1), made non-decreasing in that order, at most 1."""
    p = np.asarray(p, dtype=float)
    m = p.size
    if m == 0:
        return p.copy()
    order = np.argsort(p, kind="stable")
    adj = np.minimum(1.0, np.maximum.accumulate(p[order] * (m - np.arange(m))))
    out = np.empty(m)
    out[order] = adj
    return out


def _weighted_mean_sd(x: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a = w / w.sum()
    mean = a @ x
    return mean, np.sqrt(np.maximum(a @ (x - mean) ** 2, 0.0))


def _column_tests(X_u: np.ndarray, w_u: np.ndarray, X_l: np.ndarray,
                  w_l: np.ndarray) -> tuple[np.ndarray, ...]:
    """Per column: the KS distance, its p-value, the rank share and the mean shift, between
    the unlabelled rows and the re-weighted labelled rows (rows of weight 0 take no part)."""
    ku, kl = w_u > 0, w_l > 0
    X_u, w_u, X_l, w_l = X_u[ku], w_u[ku], X_l[kl], w_l[kl]
    d = X_u.shape[1]
    dist, pval, share = np.empty(d), np.empty(d), np.empty(d)
    for j in range(d):  # one pass per column; the rows inside are vectorised
        dist[j], pval[j] = _weighted_ks(X_u[:, j], w_u, X_l[:, j], w_l)
        share[j] = _weighted_auc(X_u[:, j], w_u, X_l[:, j], w_l)[0]
    mean_u, _ = _weighted_mean_sd(X_u, w_u)
    mean_l, sd_l = _weighted_mean_sd(X_l, w_l)
    _, sd_all = _weighted_mean_sd(np.vstack([X_u, X_l]),
                                  np.concatenate([w_u / w_u.sum(), w_l / w_l.sum()]))
    # the labelled column's spread; where it is constant there, the pooled one
    scale = np.where(sd_l > 1e-12 * np.maximum(np.abs(mean_l), 1.0), sd_l, sd_all)
    diff = mean_u - mean_l
    shift = np.divide(diff, scale, out=np.zeros(d), where=scale > 0)
    return dist, pval, share, shift


def _column_names(X_labelled: Any, X_unlabelled: Any, feature_names: Any,
                  d: int) -> tuple[str, ...]:
    """A DataFrame's column names (both sides' must agree), ``feature_names``, or x0, x1, ..."""
    got = []
    for name, X in (("X_labelled", X_labelled), ("X_unlabelled", X_unlabelled)):
        cols = getattr(X, "columns", None)
        if cols is not None and hasattr(X, "iloc"):
            got.append((name, [str(c) for c in cols]))
    if len(got) == 2 and got[0][1] != got[1][1]:
        raise ValueError("`X_unlabelled`'s columns differ from `X_labelled`'s "
                         f"({got[1][1][:5]}... against {got[0][1][:5]}...); pass the same "
                         "columns in the same order.")
    if feature_names is not None:
        names = [str(c) for c in np.asarray(feature_names, dtype=object).ravel()]
        if len(names) != d:
            raise ValueError(f"`feature_names` must name each of the {d} columns; got "
                             f"{len(names)} names.")
        if got and got[0][1] != names:
            raise ValueError("`feature_names` differ from the DataFrame's column names "
                             f"({got[0][1][:5]}...); give one or the other.")
        return tuple(names)
    if got:
        return tuple(got[0][1])
    return tuple(f"x{j}" for j in range(d))


def _with_squares(Z_l, Z_u, w_l0, w_u):
    """Each standardized feature's square beside it (standardized the same way, constant
    columns left out): a band or a cut in one feature changes its spread, not its mean."""
    sq_l, sq_u = Z_l**2, Z_u**2
    pooled = np.vstack([sq_l[w_l0 > 0], sq_u[w_u > 0]])
    centre, spread = pooled.mean(axis=0), pooled.std(axis=0)
    keep = spread > 1e-9
    sq_l = (sq_l[:, keep] - centre[keep]) / spread[keep]
    sq_u = (sq_u[:, keep] - centre[keep]) / spread[keep]
    return np.hstack([Z_l, sq_l]), np.hstack([Z_u, sq_u])


def _scores(model: Any, X: np.ndarray) -> np.ndarray:
    if hasattr(model, "predict_proba"):
        p = np.asarray(model.predict_proba(X), dtype=float)
        return p[:, -1] if p.ndim == 2 else p
    return np.asarray(model.decision_function(X), dtype=float).ravel()


def _resolve_prior(prior: Any, classes: np.ndarray, Z_l: np.ndarray, y: np.ndarray,
                   w_l: np.ndarray, Z_u: np.ndarray, w_u: np.ndarray,
                   source: np.ndarray) -> np.ndarray:
    k = classes.shape[0]
    if prior is None:
        from sklearn.linear_model import LogisticRegression

        model = LogisticRegression(max_iter=2000)
        model.fit(Z_l, y, sample_weight=w_l * (w_l.size / w_l.sum()))
        proba = model.predict_proba(Z_u)
        return np.asarray(em_prior(proba, source, sample_weight=w_u).prior, dtype=float)
    if hasattr(prior, "target_prior_"):  # a PriorShiftWrapper after adapt
        got = np.asarray(getattr(prior, "classes_", classes))
        if got.shape != classes.shape or not np.array_equal(got, classes):
            raise ValueError("`prior`: the wrapper's classes_ "
                             f"{got.tolist()} differ from `y_labelled`'s {classes.tolist()}.")
        est = getattr(prior, "prior_estimate_", None)
        ml = getattr(est, "ml_prior", None)
        value = ml if ml is not None else prior.target_prior_
        return np.asarray(value, dtype=float)
    if hasattr(prior, "classes_"):
        raise ValueError("`prior` is an estimator without target_prior_: call adapt(X) on the "
                         "PriorShiftWrapper first, or pass the class shares as an array.")
    p = np.asarray(prior, dtype=float)
    if p.shape != (k,) or not np.all(np.isfinite(p)) or np.any(p < 0) or abs(p.sum() - 1) > 1e-6:
        raise ValueError(f"`prior` must be {k} non-negative class shares summing to 1 (in the "
                         f"order {classes.tolist()}); got {np.asarray(prior).tolist()!r}.")
    return p


def feature_mixture_misfit(
    X_labelled: Any,
    y_labelled: Any,
    X_unlabelled: Any,
    *,
    prior: Any = None,
    discriminator: Any = None,
    sample_weight: Any = None,
    labelled_sample_weight: Any = None,
    folds: int = 2,
    level: float | None = FEATURE_MISFIT_LEVEL,
    random_state: int | None = 0,
    feature_names: Any = None,
) -> FeatureMixtureMisfit:
    """Test whether unlabelled rows' features fit the labelled classes mixed at new shares.

    Under prior shift (only the class shares move) the labelled rows, each re-weighted by
    ``prior[y] / source_prior[y]``, have the unlabelled rows' feature distribution, so a
    classifier cannot tell the two apart on rows it did not see. This function cross-fits such
    a classifier and tests its held-out ranking of the two sides (a classifier two-sample test,
    Lopez-Paz & Oquab 2017; Rabanser et al. 2019, from memory), and warns with a
    :class:`FeatureMixtureMisfitWarning` when it does better than chance at ``level`` or a
    column on its own differs (``combined_pvalue`` below ``level``).

    Parameters
    ----------
    X_labelled : array-like of shape (m, d)
        The labelled rows' numeric features (the rows the model or wrapper was fitted or
        calibrated on, or any sample of the source population with its labels).
    y_labelled : array-like of shape (m,)
        Their classes (two or more).
    X_unlabelled : array-like of shape (n, d)
        The new rows' features, the same columns.
    prior : array-like of shape (k,), fitted PriorShiftWrapper, or None, default=None
        The unlabelled rows' class shares, in the sorted order of the classes. A
        ``PriorShiftWrapper`` after ``adapt``: its maximum-likelihood estimate
        (``prior_estimate_.ml_prior``, else ``target_prior_``). None: estimated here by
        maximum likelihood (Saerens et al. 2002, :func:`em_prior`) from a logistic regression
        of the class on the standardized features of the labelled rows.
    discriminator : classifier, default=None
        Tells the two sides apart; cloned and fitted once per fold with ``sample_weight`` (it
        must accept it), on features standardized by the pooled rows' mean and standard
        deviation. Its ``predict_proba`` (last column) or ``decision_function`` scores the
        held-out rows. None: ``LogisticRegression()`` on the standardized features and their
        squares (standardized too), so that a band or a cut in one feature, which changes its
        spread more than its mean, is seen as well as a slide.
    sample_weight : array-like of shape (n,), default=None
        Relative weights of the unlabelled rows (Kish's effective count is their number).
    labelled_sample_weight : array-like of shape (m,), default=None
        Relative weights of the labelled rows (multiplied by the class re-weighting).
    folds : int, default=2
        Folds of the cross-fitting (at least 2), stratified on the side. With two folds
        (each half trains the discriminator that scores the other) the bound on the pooled
        statistic's spread is nearly tight; more folds train on more rows but the bound
        grows conservative (docs/evidence/prior_shift_log.md, "Features that do not fit the class
        mixture").
    level : float or None, default=0.01
        Warn with :class:`FeatureMixtureMisfitWarning` when ``combined_pvalue`` (the
        discriminator's p-value and the smallest Holm-corrected column p-value, Bonferroni
        over the two) is below it, naming the columns flagged at it; None never warns.
    random_state : int or None, default=0
        Seeds the folds.
    feature_names : sequence of str, default=None
        The columns' names, for the result and the warning. None: a DataFrame's column names,
        else ``x0``, ``x1``, ...

    Returns
    -------
    FeatureMixtureMisfit
        The statistic, its p-value, the held-out AUC, the shares used and the effective
        counts; per column the Kolmogorov-Smirnov distance to the re-weighted labelled rows,
        its p-value raw and Holm-corrected, two effect sizes, and the columns flagged at
        ``level`` (1 % where ``level`` is None), which the warning names (three at most).

    Raises
    ------
    ValueError
        On arrays of the wrong shape, non-numeric or missing features, fewer than two classes,
        bad weights or shares, ``folds`` below 2 or above either side's rows of positive
        weight.
    TypeError
        If ``discriminator`` does not take ``sample_weight`` in ``fit``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import feature_mixture_misfit
    >>> rng = np.random.default_rng(0)
    >>> y = rng.integers(0, 2, 400)
    >>> X = rng.normal(y[:, None], 1.0, (400, 3))
    >>> y_new = (rng.uniform(size=300) < 0.7).astype(int)      # shares moved, nothing else
    >>> X_new = rng.normal(y_new[:, None], 1.0, (300, 3))
    >>> bool(feature_mixture_misfit(X, y, X_new).pvalue > 0.01)
    True
    >>> X_sub = X_new + np.array([0.0, 0.0, 1.0])                 # one feature slid within
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     bool(feature_mixture_misfit(X, y, X_sub).pvalue < 0.01)
    True
    """
    import warnings

    from sklearn.base import clone
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import StratifiedKFold
    from sklearn.utils.validation import has_fit_parameter

    X_l = _check_matrix(X_labelled, "X_labelled")
    X_u = _check_matrix(X_unlabelled, "X_unlabelled")
    if X_u.shape[1] != X_l.shape[1]:
        raise ValueError(f"`X_unlabelled` has {X_u.shape[1]} features, `X_labelled` "
                         f"{X_l.shape[1]}; pass the same columns.")
    names = _column_names(X_labelled, X_unlabelled, feature_names, X_l.shape[1])
    y = np.asarray(y_labelled)
    if y.ndim != 1 or y.shape[0] != X_l.shape[0]:
        raise ValueError(f"`y_labelled` must be 1-D with one label per row of `X_labelled` "
                         f"({X_l.shape[0]}); got shape {y.shape}.")
    w_u = _check_weights(sample_weight, X_u.shape[0], "sample_weight")
    w_l0 = _check_weights(labelled_sample_weight, X_l.shape[0], "labelled_sample_weight")
    classes, y_idx = np.unique(y, return_inverse=True)
    k = classes.shape[0]
    if k < 2:
        raise ValueError(f"`y_labelled` must hold at least two classes; got {classes.tolist()}.")
    source = np.bincount(y_idx, weights=w_l0, minlength=k) / w_l0.sum()
    if np.any(source <= 0):
        raise ValueError("`labelled_sample_weight`: every class of `y_labelled` needs rows of "
                         f"positive weight; class shares {source.tolist()}.")
    if isinstance(folds, bool) or not isinstance(folds, (int, np.integer)) or folds < 2:
        raise ValueError(f"`folds` must be an integer of at least 2; got {folds!r}.")
    if level is not None and not 0 < float(level) < 1:
        raise ValueError(f"`level` must lie strictly between 0 and 1, or be None; got {level!r}.")
    default_discriminator = discriminator is None
    if discriminator is None:
        discriminator = LogisticRegression(max_iter=2000)
    elif not has_fit_parameter(discriminator, "sample_weight"):
        raise TypeError(f"`discriminator` ({type(discriminator).__name__}) must accept "
                        "sample_weight in fit: the labelled rows are re-weighted to the new "
                        "class shares. Pass the classifier itself, not a Pipeline (the "
                        "features are standardized here).")

    # standardize on the pooled rows of positive weight (no side labels used, so nothing
    # leaks into held-out rows)
    pooled = np.vstack([X_l[w_l0 > 0], X_u[w_u > 0]])
    centre, spread = pooled.mean(axis=0), pooled.std(axis=0)
    spread[spread <= 1e-12 * np.maximum(np.abs(centre), 1.0)] = 1.0
    Z_l, Z_u = (X_l - centre) / spread, (X_u - centre) / spread

    p = _resolve_prior(prior, classes, Z_l, y_idx, w_l0, Z_u, w_u, source)
    if default_discriminator:
        Z_l, Z_u = _with_squares(Z_l, Z_u, w_l0, w_u)
    w_l = w_l0 * (p / source)[y_idx]

    # rows of weight 0 take part in nothing
    keep_l, keep_u = w_l > 0, w_u > 0
    Z = np.vstack([Z_u[keep_u], Z_l[keep_l]])
    side = np.concatenate([np.ones(int(keep_u.sum()), int), np.zeros(int(keep_l.sum()), int)])
    w = np.concatenate([w_u[keep_u] / w_u.sum(), w_l[keep_l] / w_l.sum()])
    if min(int(keep_u.sum()), int(keep_l.sum())) < folds:
        raise ValueError(f"`folds` ({folds}) exceeds the rows of positive weight on one side "
                         f"({int(keep_u.sum())} unlabelled, {int(keep_l.sum())} labelled "
                         "after re-weighting); pass fewer folds or more rows.")
    splitter = StratifiedKFold(n_splits=int(folds), shuffle=True, random_state=random_state)
    aucs, sds = [], []
    for train, test in splitter.split(Z, side):
        wt = w[train]
        fit_w = np.where(side[train] == 1, wt / wt[side[train] == 1].sum(),
                         wt / wt[side[train] == 0].sum()) * (train.size / 2.0)
        model = clone(discriminator).fit(Z[train], side[train], sample_weight=fit_w)
        s = _scores(model, Z[test])
        u, lab = side[test] == 1, side[test] == 0
        auc, var = _weighted_auc(s[u], w[test][u], s[lab], w[test][lab])
        if var <= 0:  # every held-out score tied: nothing told apart in this fold
            continue
        aucs.append(auc)
        sds.append(np.sqrt(var))
    if aucs:
        # inverse-variance pooling; the standard deviation of the pooled statistic is at most
        # the pooled standard deviations whatever the folds' correlation (Minkowski)
        c = 1.0 / np.square(sds)
        c /= c.sum()
        auc_all = float(np.dot(c, aucs))
        stat = (auc_all - 0.5) / float(np.dot(c, sds))
    else:
        stat, auc_all = 0.0, 0.5
    pvalue = float(norm.sf(stat))
    # each column on its own, on the raw values (ranks and standard deviations: unit-free)
    dist, col_p, share, shift = _column_tests(X_u, w_u, X_l, w_l)
    holm = _holm(col_p)
    col_level = float(level) if level is not None else FEATURE_MISFIT_LEVEL
    order = np.lexsort((np.arange(dist.size), -dist, holm))
    flagged = tuple(names[j] for j in order if holm[j] < col_level)
    n_u, n_l = _kish(w_u), _kish(w_l)
    power = check_power(n_u, n_l, col_level)
    result = FeatureMixtureMisfit(
        statistic=float(stat), pvalue=pvalue, auc=float(auc_all), prior=p,
        source_prior=source, classes=classes,
        effective_rows=(n_u, n_l), folds=int(folds),
        feature_names=names, column_distance=dist, column_pvalue=col_p,
        column_pvalue_holm=holm, column_rank_share=share, column_mean_shift=shift,
        flagged_columns=flagged, column_level=col_level,
        combined_pvalue=float(min(1.0, 2.0 * min(pvalue, float(np.min(holm))))),
        power=power, power_note=_power_note(power, n_u, n_l, classes, p, y_idx, w_l))
    if level is not None and result.combined_pvalue < level:
        warnings.warn(misfit_message("feature_mixture_misfit", result),
                      FeatureMixtureMisfitWarning, stacklevel=2)
    elif level is not None and result.power_note:
        warnings.warn(low_power_message("feature_mixture_misfit", result),
                      FeatureCheckPowerWarning, stacklevel=2)
    return result


def check_power(n_u: float, n_l: float, level: float) -> float:
    """The power figure of :class:`FeatureMixtureMisfit` (``power``): a one-sided rank test at
    ``level / 2`` on ``n_u`` and ``n_l`` effective rows against an ideal discriminator's AUC
    for one normal column slid by :data:`POWER_SLIDE_SD` standard deviations, on the
    Mann-Whitney statistic's null spread ``sqrt((1/n_u + 1/n_l) / 12)`` (Noether 1987)."""
    if not (n_u > 0 and n_l > 0):
        return 0.0
    effect = float(norm.cdf(POWER_SLIDE_SD / np.sqrt(2.0))) - 0.5
    sd = float(np.sqrt((1.0 / n_u + 1.0 / n_l) / 12.0))
    return float(norm.cdf(effect / sd - norm.isf(level / 2.0)))


def _power_note(power: float, n_u: float, n_l: float, classes: np.ndarray, p: np.ndarray,
                y_idx: np.ndarray, w_l: np.ndarray) -> str:
    """Why the power is low (empty where it is not): the two sides' effective rows and the
    labelled class that weighs most on the re-weighted side's effective count."""
    if not power < LOW_POWER:
        return ""
    rows = np.bincount(y_idx[w_l > 0], minlength=classes.size)
    load = np.where(rows > 0, p**2 / np.maximum(rows, 1), 0.0)  # each class's part of 1/n_l
    c = int(np.argmax(load))
    lean = (f" (re-weighted to the estimated shares: class {plain(classes[c])!r} carries "
            f"{p[c]:.0%} of the weight on {int(rows[c])} labelled row(s))" if n_l <= n_u else "")
    return (f"it rests on {n_u:.1f} effective new rows and {n_l:.1f} effective labelled "
            f"rows{lean}, where a rank test would see one column slid by {POWER_SLIDE_SD:g} "
            f"standard deviation with probability about {power:.2f} at most, so a large p-value "
            "is no evidence that the features fit")


def low_power_message(who: str, result: FeatureMixtureMisfit) -> str:
    """The :class:`FeatureCheckPowerWarning` text."""
    return (f"{who}: the feature check found no misfit (p = {result.combined_pvalue:.2g}), but "
            f"it could hardly have found one: {result.power_note}. Label more rows (of the "
            "class named, if one is) or check a larger batch; until then the check neither "
            "supports nor questions the adapted shares.")


def misfit_message(who: str, result: FeatureMixtureMisfit, top: int = 3) -> str:
    """The warning's text: the two readings, then the columns that differ most."""
    shares = ", ".join(f"{c}: {v:.3f}" for c, v in
                       zip(result.classes.tolist(), result.prior, strict=True))
    n_flag = len(result.flagged_columns)
    if n_flag:
        cols = (f"{n_flag} of {len(result.feature_names)} columns differ on their own "
                f"(Holm-corrected p below {result.column_level:g}); most: "
                f"{result.describe_columns(min(top, n_flag))}.")
    else:
        cols = (f"No single column differs at {result.column_level:g} after Holm's "
                "correction for the columns' number (the difference lies in how they combine, "
                f"or is spread thin); closest: {result.describe_columns(min(top, 2))}.")
    return (
        f"{who}: the unlabelled rows' features do not fit the labelled rows re-weighted to "
        f"the class shares ({shares}) (p = {result.combined_pvalue:.2g}; a classifier told "
        f"the two apart with held-out AUC {result.auc:.3f}, p = {result.pvalue:.2g}): the rows "
        "of a class look different from the labelled ones, not only the shares, so prior "
        "shift does not hold and the estimated shares may be off by more than their "
        f"interval. {cols} Look at how the rows were drawn; label some of them.")
