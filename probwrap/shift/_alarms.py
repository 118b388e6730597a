"""Prevalence alarms: a two-sided CUSUM on batch estimates and its average run length."""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import norm

from .._validation import plain

__all__ = [
    "CusumResult",
    "BaselineErrorRunLength",
    "cusum_alarms",
    "cusum_run_length",
    "baseline_error_run_length",
    "decision_interval_for_run_length",
    "labelled_share_of_variance",
    "batch_effective_rows",
    "signed_shift_scores",
]


@dataclass(frozen=True)
class CusumResult:
    """Result of :func:`cusum_alarms`.

    Attributes
    ----------
    upper, lower : ndarray of shape (n_batches,)
        The upward and downward CUSUM statistics after each batch (in standard errors).
    standardized : ndarray of shape (n_batches,)
        ``(estimate - baseline) / standard_error`` per batch.
    alarms : ndarray of int
        Indices of the batches after which an alarm fired.
    direction : ndarray of int
        +1 (prevalence went up) or -1 (down) for each alarm.
    reference, decision_interval : float
        The reference value ``k`` and decision interval ``h`` used.
    """

    upper: np.ndarray
    lower: np.ndarray
    standardized: np.ndarray
    alarms: np.ndarray
    direction: np.ndarray
    reference: float
    decision_interval: float


def _positive(value: Any, name: str, allow_zero: bool = False) -> float:
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    if not ok or value < 0 or (value == 0 and not allow_zero):
        bound = ">= 0" if allow_zero else "> 0"
        raise ValueError(f"`{name}` must be a finite number {bound}; got {plain(value)!r}.")
    return float(value)


def cusum_alarms(
    estimates: Any,
    baseline: float,
    standard_error: Any,
    *,
    reference: float = 0.5,
    decision_interval: float = 5.0,
    restart: bool = True,
) -> CusumResult:
    r"""Two-sided tabular CUSUM (Page 1954) on a series of batch estimates.

    Each batch estimate (for example the prevalence of one week from
    :func:`prior_by_batch`) is standardised against the in-control ``baseline``,
    :math:`z_i = (x_i - \mu_0) / \sigma_i`, and accumulated in two one-sided sums

    .. math::

        S^+_i = \max(0, S^+_{i-1} + z_i - k), \qquad S^-_i = \max(0, S^-_{i-1} - z_i - k),

    with :math:`S^\pm_0 = 0`. An alarm fires after batch :math:`i` when :math:`S^+_i > h`
    (the prevalence went up) or :math:`S^-_i > h` (down). The reference value :math:`k` is half
    the shift, in standard errors, that the chart is tuned to detect fastest (the usual choice,
    :math:`k = \delta / 2`, makes the CUSUM the sequential probability-ratio test between
    :math:`\mu_0` and :math:`\mu_0 \pm \delta\sigma`; Page 1954); the decision interval
    :math:`h` sets the false-alarm rate. The defaults ``k = 0.5, h = 5`` (tuned to a one-standard-
    error shift; common practice) give the two-sided chart an in-control average run length of
    about 465 batches and 10.4 batches for a one-standard-error shift (compute others with
    :func:`cusum_run_length`) when the baseline is exact. A baseline estimated from labelled
    rows that every batch is compared with makes the batches share its error; the run length
    is then much shorter and variable (:func:`baseline_error_run_length`). The standardisation
    assumes the batch estimates are roughly normal with the given standard errors; for the
    batches of :func:`prior_by_batch` chart :func:`signed_shift_scores` with ``baseline=0`` and
    ``standard_error=1``.

    Parameters
    ----------
    estimates : array-like of shape (n_batches,)
        Batch estimates, in arrival order.
    baseline : float
        The in-control value (for a prevalence: the source prevalence).
    standard_error : float or array-like of shape (n_batches,)
        Standard error of each estimate (for example the width of its 95 % interval divided by
        ``2 * 1.96``); must be positive.
    reference : float, default=0.5
        ``k``, in standard errors.
    decision_interval : float, default=5.0
        ``h``, in standard errors.
    restart : bool, default=True
        Whether both sums restart from 0 after an alarm (otherwise they keep accumulating and
        every later batch above ``h`` is an alarm too).

    Returns
    -------
    CusumResult

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import cusum_alarms
    >>> weekly = np.array([0.040, 0.043, 0.038, 0.041, 0.052, 0.055, 0.051, 0.054])
    >>> res = cusum_alarms(weekly, baseline=0.040, standard_error=0.004)
    >>> res.alarms.tolist(), res.direction.tolist()   # fires, restarts, fires again
    ([5, 7], [1, 1])
    """
    x = np.asarray(estimates, dtype=float)
    if x.ndim != 1 or x.shape[0] == 0 or not np.all(np.isfinite(x)):
        raise ValueError("`estimates` must be a non-empty 1-d array of finite numbers.")
    se = np.broadcast_to(np.asarray(standard_error, dtype=float), x.shape)
    if not np.all(np.isfinite(se)) or np.any(se <= 0):
        raise ValueError(
            "`standard_error` must be positive and finite (one number, or one per estimate)."
        )
    if not (isinstance(baseline, numbers.Real) and np.isfinite(baseline)):
        raise ValueError(f"`baseline` must be a finite number; got {plain(baseline)!r}.")
    k = _positive(reference, "reference", allow_zero=True)
    h = _positive(decision_interval, "decision_interval")
    z = (x - float(baseline)) / se
    upper, lower = np.empty_like(z), np.empty_like(z)
    alarms, direction = [], []
    s_up = s_down = 0.0
    for i, zi in enumerate(z):  # a recursion: each sum depends on the previous one
        s_up = max(0.0, s_up + zi - k)
        s_down = max(0.0, s_down - zi - k)
        upper[i], lower[i] = s_up, s_down
        if s_up > h or s_down > h:
            alarms.append(i)
            direction.append(1 if s_up > h else -1)
            if restart:
                s_up = s_down = 0.0
    return CusumResult(
        upper=upper, lower=lower, standardized=z, alarms=np.asarray(alarms, dtype=int),
        direction=np.asarray(direction, dtype=int), reference=k, decision_interval=h,
    )


def cusum_run_length(
    shift: float = 0.0,
    *,
    reference: float = 0.5,
    decision_interval: float = 5.0,
    two_sided: bool = False,
    n_states: int = 200,
    spread: float = 1.0,
) -> float:
    r"""Average run length of a CUSUM on normal observations, by the Markov chain of Brook & Evans.

    The one-sided sum :math:`S_i = \max(0, S_{i-1} + z_i - k)` with :math:`z_i \sim N(\delta, 1)`
    is approximated by a Markov chain on ``n_states`` states: state 0 is :math:`S = 0`, state
    :math:`j` stands for :math:`S \in ((j - \tfrac12)w, (j + \tfrac12)w)` with
    :math:`w = 2h / (2m - 1)`, and every value beyond :math:`h` is absorbing (Brook & Evans
    1972, section 2). With :math:`R` the transition matrix among the transient states, the
    average run lengths from each state are :math:`(I - R)^{-1}\mathbf 1`; the value from state 0
    is returned. The discretisation error falls as ``n_states`` grows.

    ``two_sided=True`` combines the two one-sided charts by
    :math:`1/L = 1/L^+ + 1/L^-` (shift ``+delta`` for the upper chart, ``-delta`` for the lower;
    an approximation that is close when the two sums rarely are non-zero together, as for
    ``k >= 0.5``; Lucas & Crosier 1982).

    Parameters
    ----------
    shift : float, default=0.0
        Mean of the standardised estimates, ``delta`` (0: in control).
    reference, decision_interval : float
        ``k`` and ``h`` of :func:`cusum_alarms`.
    two_sided : bool, default=False
    n_states : int, default=200
    spread : float, default=1.0
        Standard deviation of the standardised estimates about their mean. The chart on
        :math:`z_i \sim N(\delta, \sigma^2)` with ``k`` and ``h`` is the chart on
        :math:`z_i / \sigma \sim N(\delta / \sigma, 1)` with ``k / sigma`` and ``h / sigma``;
        this is how :func:`baseline_error_run_length` gets the run length given an estimated
        baseline (``spread < 1``: the share of the variance the baseline's error does not take).

    Returns
    -------
    float
        The average number of batches until an alarm; ``inf`` for a one-sided chart whose
        mean lies so far on the other side that it never sounds in double precision.

    Examples
    --------
    >>> from probwrap.shift import cusum_run_length
    >>> round(cusum_run_length(0.0, decision_interval=4.0, two_sided=True))
    168
    """
    k = _positive(reference, "reference", allow_zero=True)
    h = _positive(decision_interval, "decision_interval")
    if not (isinstance(shift, numbers.Real) and np.isfinite(shift)):
        raise ValueError(f"`shift` must be a finite number; got {plain(shift)!r}.")
    sd = _positive(spread, "spread")
    if sd != 1.0:
        k, h, shift = k / sd, h / sd, float(shift) / sd
    if not (isinstance(n_states, numbers.Integral) and n_states >= 2):
        raise ValueError(f"`n_states` must be an integer >= 2; got {plain(n_states)!r}.")
    if two_sided:
        up = cusum_run_length(shift, reference=k, decision_interval=h, n_states=n_states)
        down = cusum_run_length(-shift, reference=k, decision_interval=h, n_states=n_states)
        rate = 1.0 / up + 1.0 / down  # both sides infinite (a wide h): never sounds either
        return float(np.inf) if rate == 0.0 else float(1.0 / rate)
    m = int(n_states)
    w = 2.0 * h / (2.0 * m - 1.0)
    centre = np.arange(m) * w
    edges = (np.arange(1, m) - 0.5) * w  # lower edges of states 1..m-1
    # P(next state <= j | state i): next value centre_i + z - k below the upper edge of state j
    upper_edges = np.concatenate([edges, [h]])  # upper edges of states 0..m-1
    cdf = norm.cdf(upper_edges[None, :] - centre[:, None] + k - float(shift))
    r = np.diff(np.concatenate([np.zeros((m, 1)), cdf], axis=1), axis=1)
    try:
        arl = np.linalg.solve(np.eye(m) - r, np.ones(m))
    except np.linalg.LinAlgError:
        # a mean so far below -k that no state ever leaves for h in double precision (batches
        # many standard errors below the baseline, for the upward chart): it never sounds
        return float("inf")
    return float(arl[0]) if np.isfinite(arl[0]) and arl[0] >= 1.0 else float("inf")


def _share(value: Any) -> float:
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    if not ok or not 0.0 <= value < 1.0:
        raise ValueError(f"`labelled_share` must be a number in [0, 1); got {plain(value)!r}.")
    return float(value)


def _probability(value: Any, name: str) -> float:
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    if not ok or not 0.0 < value < 1.0:
        raise ValueError(f"`{name}` must be a number strictly between 0 and 1; got "
                         f"{plain(value)!r}.")
    return float(value)


def batch_effective_rows(table: np.ndarray) -> np.ndarray:
    """Kish's effective rows of each batch of a :func:`prior_by_batch` table (its
    ``n_effective`` field; ``n_rows`` for a table made before that field existed).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import batch_effective_rows
    >>> table = np.zeros(2, dtype=[("n_rows", np.int64), ("n_effective", float)])
    >>> table["n_rows"], table["n_effective"] = [4, 4], [4.0, 2.5]
    >>> batch_effective_rows(table).tolist()
    [4.0, 2.5]
    """
    names = getattr(getattr(table, "dtype", None), "names", None) or ()
    return np.asarray(table["n_effective"] if "n_effective" in names else table["n_rows"],
                      dtype=float)


def labelled_share_of_variance(batch_rows: Any, labelled_rows: float) -> np.ndarray:
    r"""Share of each batch's standardised shift that the labelled rows' error takes.

    The two-sample shift test of :meth:`PriorEstimator.estimate` compares a batch's mean score
    with the labelled rows' mean score, with one per-row variance pooled over both samples, so
    the variance of the difference is :math:`s^2 (1/n_b + 1/n_s)`; the labelled rows' part of
    it is :math:`V_s / (V_b + V_s) = n_b / (n_b + n_s)`. Every batch is compared with the
    *same* labelled rows, so this part is shared by all batches: given the labelled rows the
    standardised values of the batches scatter with variance :math:`1 - \rho` about a common
    offset, itself drawn with variance :math:`\rho`.

    With weights both sizes are Kish's (1965) effective numbers of rows,
    :math:`(\sum w)^2 / \sum w^2`, as the shift test counts them (``docs/weights.md``:
    relative weights): scaling all the weights of a batch or of the labelled rows leaves
    :math:`\rho` unchanged, and equal weights give the unweighted value.

    Parameters
    ----------
    batch_rows : float, array-like, or a :func:`prior_by_batch` table
        Effective rows of each batch. A table (from :func:`prior_by_batch` or
        :meth:`PriorShiftWrapper.monitor`) gives its ``n_effective`` field, Kish's size of each
        batch's weights; pass that rather than ``n_rows``, which counts rows whatever their
        weights.
    labelled_rows : float
        Effective labelled rows the baseline was estimated from (Kish's size of the labelled
        weights: ``PriorEstimator.n_source_effective_``; with labelled cells
        ``PriorEstimator.n_source_design_rows_``, Kish's size over the cells' design effect,
        as ``n_effective`` of a table made with ``cells``; ``np.inf``: a baseline taken as
        exact, share 0).

    Returns
    -------
    ndarray
        :math:`n_b / (n_b + n_s)` per batch.

    Examples
    --------
    >>> from probwrap.shift import labelled_share_of_variance
    >>> labelled_share_of_variance([200, 10], 150).round(3).tolist()
    [0.571, 0.062]
    """
    if getattr(getattr(batch_rows, "dtype", None), "names", None):
        batch_rows = batch_effective_rows(batch_rows)
    n_b = np.asarray(batch_rows, dtype=float)
    if not np.all(np.isfinite(n_b)) or np.any(n_b <= 0):
        raise ValueError("`batch_rows` must be positive and finite.")
    n_s = float(labelled_rows)
    if not n_s > 0:
        raise ValueError(f"`labelled_rows` must be > 0 (np.inf: an exact baseline); got "
                         f"{plain(labelled_rows)!r}.")
    if not np.isfinite(n_s):
        return np.zeros_like(n_b)
    return n_b / (n_b + n_s)


def signed_shift_scores(table: np.ndarray, baseline: float, *, class_index: int = 1) -> np.ndarray:
    r"""Standardised shift of each batch of a :func:`prior_by_batch` table, for the CUSUM.

    The signed square root of each batch's two-sample shift statistic (on the chi-square
    scale with one degree of freedom), positive where the batch's estimate lies above
    ``baseline``: the shift test's own standardisation, with the labelled rows' error and the
    batch's in its denominator, so that with nothing moved each value is roughly a standard
    normal at every batch size (the statistic is referred to Student's t with Welch-
    Satterthwaite degrees of freedom and mapped to the normal at the same tail probability).
    Unlike ``(prior - baseline) / se`` it does not mix an estimate shrunk toward the baseline
    (``prior_strength``) with the standard error of the unshrunk one, which in batches of
    5-20 rows spreads with a standard deviation of 0.2-0.4 instead of 1 and cannot sound.

    With more than two classes the shift statistic has ``k - 1`` degrees of freedom and no
    sign; the value of class ``class_index`` is then the signed root of its one-vs-rest test
    (the table's ``class_shift_score`` field, :func:`class_shift_scores`), positive where the
    class is more frequent than in the labelled rows. With two classes that is the value above.

    Parameters
    ----------
    table : structured array
        From :func:`prior_by_batch` or :meth:`PriorShiftWrapper.monitor` (two classes).
    baseline : float
        The source prevalence (of class ``class_index``); gives the sign of a two-class table's
        values (not used for more classes, whose sign comes from the one-vs-rest test).
    class_index : int, default=1

    Returns
    -------
    ndarray of shape (n_batches,)

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator, prior_by_batch, signed_shift_scores
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=600)
    >>> y = (rng.uniform(size=600) < p1).astype(int)
    >>> est = PriorEstimator(n_resamples=0).fit(np.column_stack([1 - p1[:300], p1[:300]]), y[:300])
    >>> table = prior_by_batch(est, np.column_stack([1 - p1[300:], p1[300:]]), batch_size=100)
    >>> signed_shift_scores(table, float(est.source_prior_[1])).shape
    (3,)
    """
    prior = np.asarray(table["prior"], dtype=float)
    if prior.ndim != 2 or prior.shape[1] < 2:
        raise ValueError("`table` must be a prior_by_batch table (a `prior` column per class).")
    if not (isinstance(baseline, numbers.Real) and np.isfinite(baseline)):
        raise ValueError(f"`baseline` must be a finite number; got {plain(baseline)!r}.")
    k = prior.shape[1]
    if not (isinstance(class_index, numbers.Integral) and -k <= class_index < k):
        raise ValueError(f"`class_index` must be an integer in [0, {k}); got "
                         f"{plain(class_index)!r}.")
    if k > 2:
        names = table.dtype.names or ()
        if "class_shift_score" not in names:
            raise ValueError("`table` of more than two classes has no `class_shift_score` "
                             "field (made before it existed): rebuild it with prior_by_batch.")
        z = np.asarray(table["class_shift_score"][:, class_index], dtype=float)
        if not np.all(np.isfinite(z)):
            raise ValueError("a batch's one-vs-rest shift score is not finite.")
        return z
    stat = np.asarray(table["shift_statistic"], dtype=float)
    if not np.all(np.isfinite(stat)):
        raise ValueError("a batch's shift statistic is not finite; no standardised shift.")
    return np.sign(prior[:, class_index] - float(baseline)) * np.sqrt(np.maximum(stat, 0.0))


@dataclass(frozen=True)
class BaselineErrorRunLength:
    """Result of :func:`baseline_error_run_length`.

    Attributes
    ----------
    labelled_share : float
        :math:`\\rho`, the labelled rows' share of the variance of each standardised value.
    probability : float
        The stated probability.
    assured : float
        In-control average run length the chart reaches or exceeds with ``probability`` over
        the draw of the labelled rows.
    median : float
        Its median over that draw.
    exact_baseline : float
        The in-control average run length if the baseline were exact (:math:`\\rho = 0`).
    below : float or None
        The stated run length, if any.
    below_probability : float or None
        Probability over the labelled rows that the in-control average run length is shorter
        than ``below``.
    """

    labelled_share: float
    probability: float
    assured: float
    median: float
    exact_baseline: float
    below: float | None
    below_probability: float | None


def baseline_error_run_length(
    labelled_share: float,
    *,
    reference: float = 0.5,
    decision_interval: float = 5.0,
    probability: float = 0.9,
    below: float | None = None,
    n_states: int = 200,
) -> BaselineErrorRunLength:
    r"""In-control run length of the two-sided CUSUM when its baseline was estimated.

    The standardised values of all batches share the error of the baseline (one labelled set):
    given it, :math:`z_i \sim N(\delta, \sigma^2)` with :math:`\sigma^2 = 1 - \rho` and
    :math:`\delta \sim N(0, \rho)`, where :math:`\rho = V_s / (V_b + V_s)` is the labelled
    rows' share of the variance (:func:`labelled_share_of_variance`). The average run length
    given the baseline, :math:`L(\delta)`, is :func:`cusum_run_length` at shift
    :math:`\delta` with ``spread`` :math:`\sigma` (Brook & Evans 1972). It is symmetric in
    :math:`\delta` and falls as :math:`|\delta|` grows, so
    :math:`P(L(\delta) < L) = 2\Phi(-\delta^*/\sqrt\rho)` with :math:`L(\delta^*) = L`, and the
    run length reached with probability :math:`p` is :math:`L(\sqrt\rho\,\Phi^{-1}((1+p)/2))`.
    This is the in-control performance *conditional on the estimated baseline* (the view of
    Gandy & Kvaløy 2013, Scand. J. Statist., cited from memory): the 465 batches of
    ``k = 0.5, h = 5`` hold only for :math:`\rho = 0`.

    Parameters
    ----------
    labelled_share : float
        :math:`\rho` in [0, 1).
    reference, decision_interval : float
        ``k`` and ``h`` of :func:`cusum_alarms`, in units of the standardised values.
    probability : float, default=0.9
    below : float, default=None
        A run length (batches) whose shortfall probability is wanted.
    n_states : int, default=200

    Returns
    -------
    BaselineErrorRunLength

    Examples
    --------
    >>> from probwrap.shift import baseline_error_run_length
    >>> res = baseline_error_run_length(0.0)
    >>> round(res.assured), round(res.exact_baseline)
    (465, 465)
    >>> res = baseline_error_run_length(0.5, below=50)
    >>> round(res.assured) < 50 < round(res.exact_baseline), round(res.below_probability, 2)
    (True, 0.44)
    """
    rho = _share(labelled_share)
    p = _probability(probability, "probability")
    k = _positive(reference, "reference", allow_zero=True)
    h = _positive(decision_interval, "decision_interval")
    sd = float(np.sqrt(1.0 - rho))

    def arl(delta: float) -> float:
        return cusum_run_length(delta, reference=k, decision_interval=h, two_sided=True,
                                n_states=n_states, spread=sd)

    exact = cusum_run_length(0.0, reference=k, decision_interval=h, two_sided=True,
                             n_states=n_states)
    scale = float(np.sqrt(rho))
    assured = arl(scale * float(norm.ppf(0.5 + p / 2.0)))
    median = arl(scale * float(norm.ppf(0.75)))
    short = None
    if below is not None:
        target = _positive(below, "below")
        top = arl(0.0)
        if rho == 0.0 or target > top:
            short = 1.0 if target > top else 0.0
        else:
            from scipy.optimize import brentq

            hi = 1.0
            while arl(hi) > target:  # L falls to about 1 as |delta| grows
                hi *= 2.0
            delta_star = brentq(lambda d: arl(d) - target, 0.0, hi, xtol=1e-8)
            short = float(2.0 * norm.sf(delta_star / scale))
    return BaselineErrorRunLength(
        labelled_share=rho, probability=p, assured=assured, median=median, exact_baseline=exact,
        below=None if below is None else float(below), below_probability=short,
    )


def decision_interval_for_run_length(
    run_length: float,
    *,
    labelled_share: float = 0.0,
    probability: float = 0.9,
    reference: float = 0.5,
    n_states: int = 200,
) -> float:
    r"""Decision interval ``h`` whose in-control run length is at least ``run_length`` with
    ``probability`` over the draw of the labelled rows.

    With ``labelled_share = 0`` (an exact baseline) the usual design: the ``h`` whose
    two-sided in-control average run length is ``run_length``. Otherwise the ``h`` with
    :math:`L(\sqrt\rho\,\Phi^{-1}((1+p)/2)) = ` ``run_length`` (see
    :func:`baseline_error_run_length`; guaranteed conditional performance in the sense of
    Gandy & Kvaløy 2013, cited from memory). The larger the labelled rows' share, the larger
    ``h`` and the slower the chart reacts to a real shift.

    Examples
    --------
    >>> from probwrap.shift import decision_interval_for_run_length
    >>> round(decision_interval_for_run_length(465.0), 2)
    5.0
    >>> decision_interval_for_run_length(465.0, labelled_share=0.1) > 5.0
    True
    """
    target = _positive(run_length, "run_length")
    if target <= 1.0:
        raise ValueError(f"`run_length` must exceed 1 batch; got {plain(run_length)!r}.")
    rho = _share(labelled_share)
    p = _probability(probability, "probability")
    k = _positive(reference, "reference", allow_zero=True)
    delta = float(np.sqrt(rho) * norm.ppf(0.5 + p / 2.0))
    sd = float(np.sqrt(1.0 - rho))

    def excess(log_h: float) -> float:
        return np.log(cusum_run_length(delta, reference=k, decision_interval=float(np.exp(log_h)),
                                       two_sided=True, n_states=n_states, spread=sd)) \
            - np.log(target)

    from scipy.optimize import brentq

    lo, hi = np.log(1e-3), np.log(10.0)
    while excess(hi) < 0:
        hi += np.log(4.0)
        if hi > np.log(1e6):
            raise ValueError("no decision interval below 1e6 reaches that run length.")
    if excess(lo) > 0:
        return float(np.exp(lo))
    return float(np.exp(brentq(excess, lo, hi, xtol=1e-10)))
