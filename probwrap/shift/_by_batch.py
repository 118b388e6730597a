"""Prior estimates batch by batch (week by week, depot by depot)."""

from __future__ import annotations

import numbers
import re
import warnings
from typing import Any

import numpy as np
from sklearn.utils import check_random_state

from .._validation import check_proba, check_sample_weight, plain
from ..calibration._base import rescale_extreme_weights
from ._cells import cell_design_rows, cell_mean_cov, check_cells
from ._estimate import PriorIntervalConflictWarning
from ._estimator import PriorEstimator, _current_source_score, _kish, _source_cells
from ._shift_tests import _mean_cov, _score_rows, _score_stat_moments

__all__ = ["HELD_MOVE", "prior_by_batch", "class_shift_scores", "held_near_source"]

#: A pull toward the source prior that moves a batch's share by at least this much marks the
#: batch as held near the source share for lack of evidence (our rule: the command line's
#: ``held`` mark and the HTML report's batch tables read it).
HELD_MOVE = 0.01


def held_near_source(table: np.ndarray) -> np.ndarray:
    """Which class shares of a :func:`prior_by_batch` (or ``monitor``) table were held near the
    source share for lack of evidence, shape (batches, k): the pull of the batch's
    ``pseudo_rows`` (more than 0) moved ``prior`` at least :data:`HELD_MOVE` from ``ml_prior``,
    the rows alone. All False for a table without those fields.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=400)
    >>> y = (rng.uniform(size=400) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> est = PriorEstimator(n_resamples=0).fit(proba[:300], y[:300])
    >>> high = proba[300:][proba[300:, 1] > 0.6]       # a batch with many positives
    >>> table = prior_by_batch(est, np.vstack([high[:10], proba[300:]]), batch_size=10)
    >>> bool(held_near_source(table)[0, 1])            # 10 rows: held near the source share
    True
    """
    names = table.dtype.names or ()
    prior = np.asarray(table["prior"], dtype=float)
    if "ml_prior" not in names or "pseudo_rows" not in names:
        return np.zeros(prior.shape, dtype=bool)
    pulled = np.asarray(table["pseudo_rows"], dtype=float) > 0
    moved = np.abs(prior - np.asarray(table["ml_prior"], dtype=float)) >= HELD_MOVE
    return moved & pulled[:, None]


def class_shift_scores(estimator: PriorEstimator, proba: Any, sample_weight: Any = None,
                       *, cells: Any = None) -> np.ndarray:
    r"""Signed root of each class's one-vs-rest shift test on one batch, shape (k,).

    The shift test of :meth:`PriorEstimator.estimate` compares the mean per-row score of the
    prior log-likelihood at the source prior, :math:`u_j = p_j/\pi_j - p_0/\pi_0`
    (:math:`j \ge 1`), between the batch and the labelled rows. Collapsing the classes to
    "class c" against "the rest", the two-class score is
    :math:`p_c/\pi_c - (1 - p_c)/(1 - \pi_c) = (q_c - 1)/(1 - \pi_c)` with
    :math:`q_c = p_c/\pi_c = u_c + 1 - \sum_{j\ge1} \pi_j u_j` (:math:`u_0 = 0`; from
    :math:`\sum_j \pi_j q_j = 1`): a fixed linear combination :math:`a_c^\top u`. Its test is the
    multiclass test projected on :math:`a_c` (same pooled variance, same degrees of freedom,
    one of them in the numerator), mapped to the normal at the same tail probability and
    signed by the direction of the difference: positive where class ``c`` is more frequent in
    the batch. With two classes the value of class 1 is the binary test's signed root
    (:func:`signed_shift_scores`) and that of class 0 its negative.

    :func:`prior_by_batch` (and ``monitor``) store these per batch in the field
    ``class_shift_score``; chart one class with :func:`signed_shift_scores` and
    :func:`cusum_alarms`.

    Parameters
    ----------
    estimator : PriorEstimator
        A fitted estimator.
    proba : array-like of shape (n, k)
        Posteriors of the batch's rows (before the estimator's calibration, as for
        :meth:`PriorEstimator.estimate`).
    sample_weight : array-like of shape (n,), default=None
        Relative weights (Kish's effective size counts the rows, as in the shift test).
    cells : array-like of shape (n,), default=None
        The cell of every row (rows of one aggregated group share one): the batch's mean
        score then has its variance clustered on the cells, and with cells on either side
        (here, or the estimator's labelled cells) the two means are compared with separate
        variances, as :meth:`PriorEstimator.estimate` compares them (since 4 December 2026;
        before, the one-vs-rest test always pooled, also against labelled cells).

    Returns
    -------
    ndarray of shape (k,)

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, class_shift_scores
    >>> rng = np.random.default_rng(0)
    >>> proba = rng.dirichlet([2.0, 2.0, 2.0], size=900)
    >>> y = np.array([rng.choice(3, p=row) for row in proba])
    >>> est = PriorEstimator(n_resamples=0).fit(proba[:600], y[:600])
    >>> class_shift_scores(est, proba[600:]).shape
    (3,)
    """
    p_raw = check_proba(proba, name="proba", ndim=2)
    w = check_sample_weight(sample_weight, p_raw.shape[0])
    p = estimator.calibrate(p_raw)
    src = np.asarray(estimator.source_prior_, dtype=float)
    k = src.shape[0]
    codes = check_cells(cells, p.shape[0])
    if codes is None:
        m_t, c_t, _ = _mean_cov(_score_rows(p, src), w)
        n_eff = _kish(w)
    else:
        m_t, c_t, n_eff = cell_mean_cov(_score_rows(p, src), w, codes)
    pooled = codes is None and _source_cells(estimator) is None
    source = _current_source_score(getattr(estimator, "_source_score", None))
    out = np.zeros(k)
    for c in range(k):
        a = -src[1:].copy()
        if c > 0:
            a[c - 1] += 1.0
        a /= 1.0 - src[c]
        target = (np.atleast_1d(a @ m_t), np.atleast_2d(a @ c_t @ a), n_eff)
        projected = None
        if source is not None:
            m_s, parts = source
            projected = (np.atleast_1d(a @ m_s),
                         tuple((np.atleast_2d(a @ np.atleast_2d(v) @ a), n) for v, n in parts))
        res = _score_stat_moments(target, projected, 2, pooled=pooled, source_prior=src)
        diff = float(target[0][0] - (projected[0][0] if projected is not None else 0.0))
        out[c] = np.sign(diff) * np.sqrt(max(res.statistic, 0.0))
    return out



def _refuse_missing_batches(labels: np.ndarray) -> None:
    """A ``ValueError`` when a batch label is missing (None, NaN, ``pd.NA`` or NaT), as the
    command line refuses an empty batch cell: until 5 December 2026 such rows silently formed a
    batch of their own ("nan"), placed in the table, and in a chart read off it, where its
    first row happened to fall."""
    from ..metrics._groups import _missing_label

    if labels.dtype.kind == "f":
        missing = np.flatnonzero(np.isnan(labels))
    elif labels.dtype.kind in "mM":
        missing = np.flatnonzero(np.isnat(labels))
    elif labels.dtype == object:
        missing = np.flatnonzero([_missing_label(v) for v in labels])
    else:
        return
    if missing.size:
        raise ValueError(
            f"`batches` contains {missing.size} missing label(s) (None, NaN, NA or NaT; first "
            f"at row {int(missing[0])}); give every row its batch (e.g. its date), or leave "
            "those rows out."
        )


def prior_by_batch(
    estimator: PriorEstimator,
    proba: Any,
    batches: Any = None,
    *,
    batch_size: int | None = None,
    sample_weight: Any = None,
    fold_proba: Any = None,
    cells: Any = None,
    repeat_design_effect: Any = None,
) -> np.ndarray:
    """Estimate the class priors batch by batch (for example week by week).

    Parameters
    ----------
    estimator : PriorEstimator
        A fitted estimator.
    proba : array-like of shape (n, k)
        Posteriors of the unlabelled rows, in arrival order.
    batches : array-like of shape (n,), default=None
        Batch label of each row (a week number, a date, a string); batches appear in the table
        in the order of their first row (numbers or dates whose rows are not in increasing
        order warn). Exactly one of ``batches`` and ``batch_size`` is given.
    batch_size : int, default=None
        Consecutive batches of this many rows (the last one may be shorter); labelled 0, 1, ...
    sample_weight : array-like of shape (n,), default=None
    fold_proba : sequence of array-like of shape (n, k), default=None
        The same rows' posteriors from each fold model of a cross-fitted model, for an
        estimator fitted with ``source_fold`` (see :meth:`PriorEstimator.estimate`).
    cells : array-like of shape (n,), default=None
        The cell of every row (aggregated counts: a group's success and failure rows, or the
        rows of one sampled unit, share one). Each batch's estimate then counts its cells as
        :meth:`PriorEstimator.estimate` does with ``cells`` (the shift test's variance
        clustered on the cells, the pull toward the source prior weighed against Kish's count
        over the cells' design effect), the one-vs-rest scores cluster the same way, and
        ``n_effective`` is that design-effective count. A cell should lie within one batch; a
        cell split over batches counts as one cell in each.
    repeat_design_effect : array-like of shape (n,), default=None
        Each batch's design effect of its rows' repeats beyond chance, given on every row of
        the batch (its first row's value is read; at least 1): the batch's mixture check
        counts its rows over it (:meth:`PriorEstimator.estimate`; ``PriorShiftWrapper.monitor``
        passes :func:`probwrap.shift._repeats.mixture_design_effect` of the batches that raise
        :class:`~probwrap.shift.RepeatedRowsWarning`; since 5 December 2026).

    Warns
    -----
    PriorIntervalConflictWarning
        Once per call (more than two classes), naming how many batches had their interval
        widened to reach the source shares and which came first; other warnings of the batch
        estimates pass through as raised.

    Returns
    -------
    numpy structured array with one record per batch and fields ``batch``, ``n_rows`` (int),
    ``n_effective`` (float: Kish's effective number of rows of the batch,
    ``(sum w)^2 / sum w^2``, the number of rows without weights; what the batch's shift test
    counts; with ``cells``, that count divided by the cells' design effect on the batch's mean
    score, :func:`probwrap.shift._cells.cell_design_rows`), ``prior``, ``lower``, ``upper`` (float, shape (k,) each), ``shift_statistic``,
    ``shift_pvalue`` (float), ``converged`` (bool) and ``class_shift_score`` (float, shape
    (k,): the signed root of each class's one-vs-rest shift test, :func:`class_shift_scores`;
    roughly a standard normal per batch when nothing moved, for charting one class of many),
    ``ml_prior`` (float, shape (k,): the batch's rows alone, the maximum-likelihood estimate
    without the pull toward the source prior; ``prior`` itself for methods other than EM) and
    ``pseudo_rows`` (float: the pseudo-rows of that pull used for ``prior``, 0 without one;
    ``PriorEstimate.pseudo_rows``). On a small batch ``prior`` is held near the source prior
    for lack of evidence (20 pseudo-rows by default against the batch's rows; since
    4 December 2026 the two fields say so), while ``lower`` and ``upper`` are the interval of
    the rows alone (the shares they allow), widened only to hold ``prior``.
    ``table["prior"][:, 1]`` is the series of positive-class prevalences of a binary problem.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=600)
    >>> y = (rng.uniform(size=600) < p1).astype(int)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> est = PriorEstimator(n_resamples=20, random_state=0).fit(proba[:300], y[:300])
    >>> table = prior_by_batch(est, proba[300:], batch_size=100)
    >>> table["n_rows"].tolist(), table.dtype.names[:3]
    ([100, 100, 100], ('batch', 'n_rows', 'n_effective'))
    """
    estimator._check_fitted()
    p = check_proba(proba, name="proba", ndim=2)
    n, k = p.shape
    w = check_sample_weight(sample_weight, n)
    if sample_weight is not None:
        # once for all batches (each batch's estimate does not change when its weights scale)
        w = rescale_extreme_weights(w, "prior_by_batch", stacklevel=3)
    if (batches is None) == (batch_size is None):
        raise ValueError("Give exactly one of `batches` (a label per row) and `batch_size`.")
    if batch_size is not None:
        if not (isinstance(batch_size, numbers.Integral) and batch_size >= 1):
            raise ValueError(f"`batch_size` must be a positive integer; got {plain(batch_size)!r}.")
        labels = np.arange(n) // int(batch_size)
    else:
        labels = np.asarray(batches)
        if labels.ndim != 1 or labels.shape[0] != n:
            raise ValueError(
                f"`batches` must be 1-d with one label per row ({n}); got shape {labels.shape}."
            )
        _refuse_missing_batches(labels)
        if labels.dtype == object:
            labels = labels.astype(str)
    codes = check_cells(cells, n)
    deff = None
    if repeat_design_effect is not None:
        deff = np.asarray(repeat_design_effect, dtype=float).ravel()
        if deff.shape[0] != n:
            raise ValueError(f"`repeat_design_effect` must have one value per row ({n}); got "
                             f"{deff.shape[0]}.")
    uniq, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    if batch_size is None and labels.dtype.kind in "iufmM" and np.any(np.diff(order) < 0):
        # numbers or dates whose first rows are not in increasing order: a chart read off the
        # table would run out of time order
        late = int(np.flatnonzero(np.diff(order) < 0)[0])
        warnings.warn(
            f"prior_by_batch: the batch labels are {'dates' if labels.dtype.kind in 'mM' else 'numbers'} "
            f"but their rows are not in increasing order (batch {uniq[order[late + 1]]} "
            f"first appears after batch {uniq[order[late]]}). The table follows the "
            "order of each batch's first row, so a chart on it would run out of order; sort the "
            "rows by batch first if the batches are times.",
            UserWarning,
            stacklevel=3,
        )
    dtype = [
        ("batch", uniq.dtype),
        ("n_rows", np.int64),
        ("n_effective", float),
        ("prior", float, (k,)),
        ("lower", float, (k,)),
        ("upper", float, (k,)),
        ("shift_statistic", float),
        ("shift_pvalue", float),
        ("converged", bool),
        ("class_shift_score", float, (k,)),
        ("ml_prior", float, (k,)),
        ("pseudo_rows", float),
    ]
    table = np.zeros(len(uniq), dtype=dtype)
    rng = check_random_state(estimator.random_state)
    conflicts: list[tuple[Any, str]] = []
    others: dict[tuple[type, str], list[tuple[Any, str]]] = {}
    for row, b in enumerate(order):
        rows = inverse.ravel() == b
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = estimator.estimate(
                p[rows], w[rows], random_state=rng.randint(2**31 - 1),
                fold_proba=None if fold_proba is None else [np.asarray(f)[rows] for f in fold_proba],
                cells=None if codes is None else codes[rows],
                repeat_design_effect=None if deff is None else float(deff[first[b]]),
            )
        for item in caught:
            if issubclass(item.category, PriorIntervalConflictWarning):
                conflicts.append((uniq[b], str(item.message)))
            else:  # every other warning once per table, naming its batches (below)
                # a named class (BoundaryPriorWarning, ...) once whatever its wording (which
                # names a class and a reason that vary by batch); a plain UserWarning once per
                # message that differs only in its numbers
                key = (item.category, _NUMBERS.sub("#", str(item.message))
                       if item.category is UserWarning else "")
                others.setdefault(key, []).append((uniq[b], str(item.message)))
        interval = res.interval
        if interval is None:
            interval = np.column_stack([res.prior, res.prior])
        n_eff = _kish(w[rows])
        if codes is not None:
            n_eff = cell_design_rows(
                _score_rows(estimator.calibrate(p[rows]), estimator.source_prior_), w[rows],
                codes[rows], n_eff)
        table[row] = (
            uniq[b], int(rows.sum()), n_eff, res.prior, interval[:, 0],
            interval[:, 1], res.shift_statistic, res.shift_pvalue, res.converged,
            class_shift_scores(estimator, p[rows], w[rows],
                               cells=None if codes is None else codes[rows]),
            res.prior if res.ml_prior is None else res.ml_prior,
            0.0 if res.pseudo_rows is None else float(res.pseudo_rows),
        )
    if conflicts:
        _warn_conflicts(conflicts, len(order))
    for (category, _), found in others.items():
        _warn_batches(category, found, len(order))
    return table


#: numbers in a warning's text: two batches' warnings that differ only in them are one kind
_NUMBERS = re.compile(r"-?\d+(\.\d+)?(e[-+]?\d+)?")


def _warn_batches(category: type, found: list[tuple[Any, str]], n_batches: int) -> None:
    """A warning the estimate of some batches gave, once for the whole table: as it came when
    one batch gave it; otherwise how many batches and which, then the first one's text (on
    ordinary data, e.g. 1,300 labelled Titanic passengers monitored in batches of 130, one
    ``monitor`` call gave the same warning once per batch, up to six times)."""
    if len(found) == 1 and n_batches == 1:
        warnings.warn(found[0][1], category, stacklevel=4)
        return
    names = ", ".join(str(plain(c[0])) for c in found[:5]) + (", ..." if len(found) > 5 else "")
    first = found[0][1]
    warnings.warn(
        f"In {len(found)} of {n_batches} batches (batch {names}): first, "
        f"batch {plain(found[0][0])}: " + first,
        category,
        stacklevel=4,
    )


def _warn_conflicts(conflicts: list[tuple[Any, str]], n_batches: int) -> None:
    """One :class:`PriorIntervalConflictWarning` for the whole table (more than two classes):
    how many batches had their interval widened, which ones first, and the first one's reason."""
    names = ", ".join(str(c[0]) for c in conflicts[:5]) + (", ..." if len(conflicts) > 5 else "")
    first = conflicts[0][1]
    warnings.warn(
        f"prior_by_batch: in {len(conflicts)} of {n_batches} batches (batch {names}) the "
        "interval of EM's estimate excluded a source share while the shift test found no "
        "evidence of a shift; those intervals were widened to reach the source shares, and "
        f"their estimates are unreliable. First, batch {conflicts[0][0]}: "
        + first[0].lower() + first[1:],
        PriorIntervalConflictWarning,
        stacklevel=3,
    )
