"""Expected cost per row of a decision rule on unlabelled batches, with an interval."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
from scipy.stats import norm

from .._validation import check_proba, check_sample_weight, costs_by_position, plain
from ..calibration._base import WeightScaleWarning, count_weights, rescale_extreme_weights
from ..decision._bayes import bayes_actions
from ..decision._costs import check_cost_matrix
from ._adjust import adjust_to_prior, check_prior

__all__ = ["expected_cost_by_batch"]

#: Points of the prior interval at which the outcome interval is evaluated (binary prior band).
PRIOR_GRID = 41
#: ``interval="auto"``: the exact interval for binary batches of at most this many (weighted)
#: rows; beyond, the normal one (its coverage is then within Monte Carlo error of nominal in
#: ``benchmarks/batch_cost.py``).
EXACT_ROWS = 2000
_INTERVALS = ("auto", "exact", "normal")
#: Below this degree the tree multiplies its factors directly, above by FFT (speed only).
_DIRECT_DEGREE = 16


def poisson_binomial_pmf(p: np.ndarray, counts: np.ndarray | None = None) -> np.ndarray:
    """Probabilities of 0 .. N successes among independent trials with success chances ``p``.

    ``counts`` (whole numbers) repeats trial ``i`` ``counts[i]`` times. The pmf is the
    coefficient vector of the product of the trials' generating polynomials ``1 - p_i + p_i x``,
    multiplied pairwise in a balanced tree, each level at once (direct convolution while the
    factors are short, FFT convolution beyond): the divide-and-conquer FFT method of Biscarri,
    Zhao & Brunner (2018, "A simple and fast method for computing the Poisson binomial
    distribution function", Comput. Stat. Data Anal. 122; reference recalled from memory).
    O(N log^2 N) operations instead of the O(N^2) of the DFT of the characteristic function
    (Hong 2013), which it matches to rounding (tests/test_shift_batch_cost.py).
    """
    p = np.asarray(p, dtype=float)
    if counts is not None:
        p = np.repeat(p, np.rint(np.asarray(counts, dtype=float)).astype(np.int64))
    n_total = p.shape[0]
    if n_total == 0:
        return np.ones(1)
    size = 1 << int(np.ceil(np.log2(n_total))) if n_total > 1 else 1
    polys = np.zeros((size, 2))
    polys[:, 0] = 1.0  # padding factors are the polynomial 1
    polys[:n_total, 0] = 1.0 - p
    polys[:n_total, 1] = p
    while polys.shape[0] > 1:
        left, right = polys[0::2], polys[1::2]
        degree = polys.shape[1] - 1
        length = 2 * degree + 1
        if degree < _DIRECT_DEGREE:
            out = np.zeros((left.shape[0], length))
            for j in range(degree + 1):
                out[:, j:j + degree + 1] += left[:, j:j + 1] * right
        else:
            out = np.fft.irfft(np.fft.rfft(left, n=length, axis=1)
                               * np.fft.rfft(right, n=length, axis=1), n=length, axis=1)
        polys = out
    pmf = np.maximum(polys[0, :n_total + 1], 0.0)  # FFT rounding can leave tiny negatives
    return pmf / pmf.sum()


def _outcome(spec: tuple, q: np.ndarray, mean: float, var: float) -> tuple[float, float]:
    """The outcome interval of one batch: exact, or normal kept within the possible range."""
    exact, matrix, act, w, level, z, floor, ceil = spec
    if exact:
        return _exact_interval(q, matrix, act, w, level)
    se = float(np.sqrt(var))
    return max(mean - z * se, floor), min(mean + z * se, ceil)


def _exact_interval(q: np.ndarray, matrix: np.ndarray, act: np.ndarray, w: np.ndarray,
                    level: float) -> tuple[float, float]:
    """Equal-tailed interval of the realised cost per row from its exact distribution (binary).

    Rows taking action ``a`` cost ``C[0, a] + (C[1, a] - C[0, a]) Y_i``; the number of positives
    among them is Poisson-binomial, the two actions independent. The interval is the smallest
    equal-tailed one with at most ``(1 - level) / 2`` probability beyond each end, so it covers
    at least ``level`` (conservative, like Clopper–Pearson's).
    """
    total = float(w.sum())
    const = 0.0
    values = np.zeros(1)
    probs = np.ones(1)
    for a in (0, 1):
        rows = act == a
        if not rows.any():
            continue
        const += float(w[rows].sum()) * matrix[0, a]
        pmf = poisson_binomial_pmf(q[rows, 1], w[rows])
        step = matrix[1, a] - matrix[0, a]
        values = (values[:, None] + step * np.arange(pmf.shape[0])[None, :]).ravel()
        probs = (probs[:, None] * pmf[None, :]).ravel()
    order = np.argsort(values, kind="stable")
    values, probs = (const + values[order]) / total, probs[order]
    tail = (1.0 - level) / 2.0
    below = np.concatenate([[0.0], np.cumsum(probs)[:-1]])  # P(T < v_j)
    above = np.concatenate([np.cumsum(probs[::-1])[::-1][1:], [0.0]])  # P(T > v_j)
    slack = 1e-12
    lo = values[np.flatnonzero(below <= tail + slack)[-1]]
    hi = values[np.flatnonzero(above <= tail + slack)[0]]
    return float(lo), float(hi)


def _batch_labels(n: int, batches: Any, batch_size: Any) -> np.ndarray:
    if (batches is None) == (batch_size is None):
        raise ValueError("Give exactly one of `batches` (a label per row) and `batch_size`.")
    if batch_size is not None:
        if not (isinstance(batch_size, numbers.Integral) and not isinstance(batch_size, bool)
                and batch_size >= 1):
            raise ValueError(f"`batch_size` must be a positive integer; got {plain(batch_size)!r}.")
        return np.arange(n) // int(batch_size)
    labels = np.asarray(batches)
    if labels.ndim != 1 or labels.shape[0] != n:
        raise ValueError(
            f"`batches` must be 1-d with one label per row ({n}); got shape {labels.shape}."
        )
    return labels.astype(str) if labels.dtype == object else labels


def _rule_actions(p: np.ndarray, matrix: np.ndarray, cutoff: Any, actions: Any) -> np.ndarray:
    n, k = p.shape
    if cutoff is not None and actions is not None:
        raise ValueError("Give at most one of `cutoff` and `actions` (the rule in use).")
    if cutoff is not None:
        ok = isinstance(cutoff, numbers.Real) and not isinstance(cutoff, bool)
        if not ok or not 0.0 <= float(cutoff) <= 1.0:
            raise ValueError(f"`cutoff` must be a number in [0, 1]; got {plain(cutoff)!r}.")
        if k != 2 or matrix.shape[1] != 2:
            raise ValueError(
                "`cutoff` is a binary rule (two classes, two actions); for other problems give "
                "`actions`, the column of `costs` taken for each row."
            )
        return (p[:, 1] > float(cutoff)).astype(np.intp)
    if actions is None:
        return bayes_actions(p, matrix).astype(np.intp)
    a = np.asarray(actions)
    if a.shape != (n,) or not (np.issubdtype(a.dtype, np.integer) or a.dtype == bool):
        raise ValueError(
            f"`actions` must be {n} integer column indices of `costs`, one per row; got shape "
            f"{a.shape} and dtype {a.dtype}."
        )
    if a.size and (a.min() < 0 or a.max() >= matrix.shape[1]):
        raise ValueError(
            f"`actions` must be column indices of `costs` in [0, {matrix.shape[1] - 1}]; got "
            f"values from {plain(a.min())} to {plain(a.max())}."
        )
    return a.astype(np.intp)


def _per_batch_prior(value: Any, n_batches: int, k: int, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim <= 1:
        return np.tile(check_prior(value, k, name=name), (n_batches, 1))
    if arr.shape != (n_batches, k):
        raise ValueError(
            f"`{name}` must be one prior for all batches or one per batch, shape "
            f"({n_batches}, {k}) in order of first appearance; got shape {arr.shape}."
        )
    return np.vstack([check_prior(row, k, name=f"{name}[{i}]") for i, row in enumerate(arr)])


def _moments(q: np.ndarray, matrix: np.ndarray, act: np.ndarray, w: np.ndarray) -> tuple[float, float]:
    """Weighted mean of the rows' expected costs and the variance of the realised mean."""
    c = matrix[:, act].T  # (n, k): cost of each class under the row's action
    mean_i = np.einsum("nk,nk->n", q, c)
    var_i = np.einsum("nk,nk->n", q, c * c) - mean_i**2
    # rounding can leave a variance a few ulps below zero for a row whose cost is certain
    var_i = np.maximum(var_i, 0.0)
    total = float(w.sum())
    return float(w @ mean_i) / total, float(w @ var_i) / total**2


def expected_cost_by_batch(
    proba: Any,
    costs: Any,
    batches: Any = None,
    *,
    batch_size: int | None = None,
    cutoff: float | None = None,
    actions: Any = None,
    source_prior: Any = None,
    target_prior: Any = None,
    target_interval: Any = None,
    sample_weight: Any = None,
    level: float = 0.95,
    interval: str = "auto",
) -> np.ndarray:
    r"""Expected cost per row of the rule in use on unlabelled batches, with an interval.

    Before the labels of a batch arrive, its cost per row can be predicted from calibrated
    probabilities. Row :math:`i` gets action :math:`a_i` from the rule in use; its cost is the
    random variable :math:`C[Y_i, a_i]` with :math:`Y_i \sim q_i` (the row's class
    probabilities), with mean and variance

    .. math::

        m_i = \sum_k q_{ik} C[k, a_i], \qquad
        v_i = \sum_k q_{ik} C[k, a_i]^2 - m_i^2 .

    The batch's expected cost per row is :math:`\bar m = \sum_i w_i m_i / W` and, the outcomes
    being independent given the probabilities, the realised cost per row has variance
    :math:`\sum_i w_i v_i / W^2` (:math:`W = \sum_i w_i`; for one cost per class and action this is
    the Poisson–binomial variance, Wang 1993; citation from memory).

    **Two intervals.** The *normal* one,
    :math:`\bar m \pm z_{(1+\text{level})/2}\, \mathrm{se}`, justified by the Lyapunov central
    limit theorem for independent bounded, non-identical summands (Billingsley, *Probability and
    Measure*, Theorem 27.3; theorem number from memory). The *exact* one (binary problems, whole
    weights): in a batch the number of positives among the rows taking each action is
    Poisson-binomial, computed exactly (product of the generating polynomials by FFT in a
    divide-and-conquer tree, Biscarri et al. 2018; see :func:`poisson_binomial_pmf`), and the
    interval is the equal-tailed one of that distribution with at most ``(1 - level) / 2``
    probability beyond each end, so it covers **at least** ``level`` whatever the batch size (it
    over-covers where the cost moves in large steps, like a Clopper–Pearson interval). The normal
    interval is rough in small batches with few rows of a rare, costly class; by default
    (``interval="auto"``) binary batches of up to 2,000 rows get the exact interval. Either is a
    **prediction interval for the realised cost** of the batch, not a confidence interval for a
    population mean.

    **What the interval covers.** The randomness of the outcomes given the probabilities. It
    assumes the probabilities are calibrated for the batch: either as given, or after re-weighting
    to the batch's prevalence with ``source_prior`` / ``target_prior`` (Bayes' rule,
    :func:`adjust_to_prior`; exact only under prior shift). With an estimated ``target_prior``,
    pass its interval as ``target_interval`` (binary problems): the fields ``lower_with_prior``
    and ``upper_with_prior`` then span the outcome intervals over the prior interval (41 points
    on it), a union whose coverage is at least ``level + prior level - 1`` by Bonferroni's
    inequality. **Not covered:** miscalibration of the probabilities, a shift that is not a prior
    shift, and (in the default fields) the error of an estimated prior. The normal interval's ends
    are kept within the range the realised cost per row can take (the weighted mean of each
    row's smallest and largest cost under its action), which cannot lower its coverage.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes) or (n,)
        Calibrated class probabilities of the unlabelled rows (1-d: positive-class probability of
        a binary problem), under ``source_prior`` when a ``target_prior`` is given. The rule's
        actions are computed from these probabilities as given.
    costs : mapping or array-like of shape (n_classes, n_actions)
        Cost matrix (rows: true classes, columns: actions) or the binary shorthand
        ``{"tp", "fp", "fn", "tn"}`` (see :func:`probwrap.decision.check_cost_matrix`).
    batches : array-like of shape (n,), default=None
        Batch label of each row; batches appear in the table in the order of their first row.
        Exactly one of ``batches`` and ``batch_size`` is given.
    batch_size : int, default=None
        Consecutive batches of this many rows (the last may be shorter), labelled 0, 1, ...
    cutoff : float, default=None
        Binary rule "take action 1 when ``proba[:, 1] > cutoff``".
    actions : array-like of int of shape (n,), default=None
        The column of ``costs`` the rule takes for each row (any rule, any number of classes).
        With neither ``cutoff`` nor ``actions`` the rule is the least-expected-cost action under
        ``proba`` as given (:func:`probwrap.decision.bayes_actions`).
    source_prior : array-like of shape (n_classes,) or float, default=None
        Class priors ``proba`` was learned under; needed with ``target_prior``.
    target_prior : array-like of shape (n_classes,) or (n_batches, n_classes), or float
        Class priors of the batches (one for all, or one row per batch in table order, for
        example ``prior_by_batch(...)["prior"]``); the expectations use ``proba`` re-weighted to
        them. The rule still acts on ``proba`` as given.
    target_interval : tuple (lower, upper), default=None
        Binary only: lower and upper ends of the interval of each batch's prior, each of shape
        (n_batches, 2) or (n_batches,) (positive class), for example
        ``(table["lower"], table["upper"])`` of :func:`prior_by_batch`.
    sample_weight : array-like of shape (n,), default=None
        Row frequencies: a row of weight 2 counts as two rows with the same probabilities and
        independent outcomes. Weights summing to less than the number of rows cannot be
        frequencies; they are rescaled to Kish's effective sample size with a
        ``WeightScaleWarning``.
    level : float, default=0.95
        Nominal coverage of the intervals, in (0, 1).
    interval : {"auto", "exact", "normal"}, default="auto"
        Which outcome interval (see above). ``"auto"``: exact for binary batches whose weights
        are whole numbers summing to at most 2,000, normal otherwise. ``"exact"`` raises where
        it cannot apply (more than two classes or actions, fractional weights).

    Returns
    -------
    numpy structured array with one record per batch and fields ``batch``, ``n_rows`` (int),
    ``expected_cost`` (per row), ``standard_error``, ``lower``, ``upper``, ``interval``
    (``"exact"`` or ``"normal"``); with ``target_interval`` also ``lower_with_prior`` and
    ``upper_with_prior``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import expected_cost_by_batch
    >>> p = np.array([0.01, 0.02, 0.30, 0.60, 0.03, 0.05, 0.10, 0.90])
    >>> table = expected_cost_by_batch(p, {"fp": 2.0, "fn": 35.0}, batch_size=4, cutoff=0.0541)
    >>> table["expected_cost"].round(3).tolist()
    [0.812, 1.2]
    """
    p = check_proba(proba, name="proba")
    if p.ndim == 1:
        p = np.column_stack([1.0 - p, p])
    n, k = p.shape
    matrix = check_cost_matrix(costs_by_position(costs, k), n_classes=k)
    w = check_sample_weight(sample_weight, n)
    if sample_weight is not None:
        w = rescale_extreme_weights(w, "expected_cost_by_batch", stacklevel=3)
    w, rescaled = count_weights(w)
    if rescaled:
        warnings.warn(
            "`sample_weight` sums to less than the number of rows, so it cannot be row "
            "frequencies; it was rescaled to Kish's effective sample size for the intervals.",
            WeightScaleWarning,
            stacklevel=2,
        )
    ok = isinstance(level, numbers.Real) and not isinstance(level, bool)
    if not ok or not 0.0 < float(level) < 1.0:
        raise ValueError(f"`level` must be a number in (0, 1); got {plain(level)!r}.")
    z = float(norm.ppf(0.5 + float(level) / 2.0))
    if interval not in _INTERVALS:
        raise ValueError(f"`interval` must be one of {list(_INTERVALS)}; got {plain(interval)!r}.")
    binary = k == 2 and matrix.shape[1] == 2
    whole = bool(np.all(w == np.round(w)))
    if interval == "exact" and not (binary and whole):
        raise ValueError(
            "`interval='exact'` needs a binary problem (two classes, two actions) and whole-"
            "number weights (row frequencies); use interval='normal' or 'auto'."
        )
    act = _rule_actions(p, matrix, cutoff, actions)
    labels = _batch_labels(n, batches, batch_size)
    uniq, first, inverse = np.unique(labels, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    inverse = inverse.ravel()
    n_batches = uniq.shape[0]

    if (target_prior is None) != (source_prior is None):
        raise ValueError(
            "Give both `source_prior` and `target_prior` to re-weight the probabilities, or "
            "neither to use them as given."
        )
    if target_interval is not None and target_prior is None:
        raise ValueError("`target_interval` needs `target_prior` and `source_prior`.")
    src = tgt = band = None
    if target_prior is not None:
        src = check_prior(source_prior, k, name="source_prior", strictly_positive=True)
        tgt = _per_batch_prior(target_prior, n_batches, k, "target_prior")
    if target_interval is not None:
        if k != 2:
            raise ValueError("`target_interval` is supported for binary problems only.")
        try:
            lo, hi = target_interval
        except (TypeError, ValueError) as exc:
            raise ValueError("`target_interval` must be a pair (lower, upper).") from exc
        ends = []
        for end, name in ((lo, "lower"), (hi, "upper")):
            e = np.asarray(end, dtype=float)
            e = e[:, 1] if e.ndim == 2 and e.shape[1] == 2 else e
            if e.shape != (n_batches,) or not np.all((e >= 0) & (e <= 1)):
                raise ValueError(
                    f"`target_interval` {name} ends must be {n_batches} prevalences in [0, 1] "
                    f"(or shape ({n_batches}, 2)); got shape {np.shape(end)}."
                )
            ends.append(e)
        band = np.column_stack(ends)
        if np.any(band[:, 0] > band[:, 1]):
            raise ValueError("`target_interval`: a lower end exceeds its upper end.")

    fields = [
        ("batch", uniq.dtype), ("n_rows", np.int64), ("expected_cost", float),
        ("standard_error", float), ("lower", float), ("upper", float), ("interval", "U6"),
    ]
    if band is not None:
        fields += [("lower_with_prior", float), ("upper_with_prior", float)]
    table = np.zeros(n_batches, dtype=fields)
    for row, b in enumerate(order):
        rows = inverse == b
        q, wb, ab = p[rows], w[rows], act[rows]
        if float(wb.sum()) <= 0:
            raise ValueError(f"batch {plain(uniq[b])!r} has zero total `sample_weight`.")
        if tgt is not None:
            q = adjust_to_prior(q, src, tgt[row])
        mean, var = _moments(q, matrix, ab, wb)
        se = np.sqrt(var)
        # the realised cost per row cannot leave [mean of row minima, mean of row maxima]
        col = matrix[:, ab]
        floor = float(wb @ col.min(axis=0)) / float(wb.sum())
        ceil = float(wb @ col.max(axis=0)) / float(wb.sum())
        exact = interval == "exact" or (
            interval == "auto" and binary and whole and float(wb.sum()) <= EXACT_ROWS
        )
        spec = (exact, matrix, ab, wb, float(level), z, floor, ceil)

        table["batch"][row] = uniq[b]
        table["n_rows"][row] = int(rows.sum())
        table["expected_cost"][row] = mean
        table["standard_error"][row] = se
        table["lower"][row], table["upper"][row] = _outcome(spec, q, mean, var)
        table["interval"][row] = "exact" if exact else "normal"
        if band is not None:
            lows, highs = [table["lower"][row]], [table["upper"][row]]
            for pi in np.linspace(band[row, 0], band[row, 1], PRIOR_GRID):
                qq = adjust_to_prior(p[rows], src, [1.0 - pi, pi])
                lo_pi, hi_pi = _outcome(spec, qq, *_moments(qq, matrix, ab, wb))
                lows.append(lo_pi)
                highs.append(hi_pi)
            table["lower_with_prior"][row] = max(min(lows), floor)
            table["upper_with_prior"][row] = min(max(highs), ceil)
    return table
