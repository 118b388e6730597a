"""Unlabelled rows that repeat one another more often than independent draws do.

The shift test and the interval of the class priors count every unlabelled row as an independent
draw from the deployment population. Rows resampled with replacement from a finite pool (a
bootstrap of a batch, a batch re-weighted by drawing rows), or records copied several times,
are not: a batch of ``n`` rows drawn with replacement from ``N`` carries the pool's own deviation
from the population as well as its own, so the variance of its mean score is about
``s^2 / n + s^2 / N``, not ``s^2 / n``. Counting each group of identical rows as one cell, the
clustered (sandwich) variance of :mod:`probwrap.shift._cells` estimates that sum: with ``c_g``
copies of pool row ``g`` (``c_g`` about Poisson with mean ``n / N``), ``E sum_g c_g^2 (u_g -
u)^2 / n^2 = (1 + n / N) s^2 / n``.

Identical rows also arise by chance where the features are few and discrete. How often is read
from the labelled rows scored by one model: for each pair of classes ``c, c'`` the share of
pairs of rows of those classes whose posteriors agree exactly, an estimate of the probability
``C_cc' = sum_x f_c(x) f_c'(x)`` that independent draws of the two classes coincide (on the
diagonal Rényi's collision probability). Independent draws of a mix with shares ``pi`` coincide
with probability ``q = pi' C pi``, so the repeats expected of ``n`` independent unlabelled rows
give a design effect of about ``1 + (n - 1) q`` (:func:`collision_bound` takes each ``C_cc'`` at
its upper bound and ``adapt`` the larger ``q`` of the source shares and the rows' estimate).
Where the rows' own design effect of their repeats, ``sum_g W_g^2 / sum_i w_i^2`` (``W_g`` the
weight of a group of identical rows), is well above it, ``PriorShiftWrapper.adapt`` and
``monitor`` warn (:class:`RepeatedRowsWarning`, one rule for every path:
:func:`repeats_of_rows`; docs/evidence/prior_shift_log.md, "Confident misses on real sets");
``cells`` grouping the identical rows then count each group once. "Well above" allows for the
chance spread of the count of tied pairs, which is large where a few values hold many rows
(rounded or clipped scores): :func:`repeats_beyond_chance`, with how the labelled rows' identical
posteriors clump (:func:`labelled_clumps`; since 5 December 2026). Rows in memory selected on
their features (the young, where the other features are coarse) coincide more often than any
mix of the classes, in feature rows the labelled rows have: repeats held there are allowed up
to the rate at least implied by how often the rows meet the labelled rows
(:func:`selection_rate`; since 5 December 2026). Dask and Spark rows alike: how
often they meet the labelled rows is summed where they live (:func:`labelled_rows_at`,
:func:`selection_from_sums`), so the same batch gives the same answer on every path.

Rows in memory (a DataFrame or a numeric array, labelled and unlabelled alike) are identical
only where their features agree as well: ``PriorShiftWrapper`` passes codes of the rows'
features as one more block, to the labelled counts and clumps at ``fit`` and to
:func:`repeats_of_rows` (``row_codes``), since distinct rows share posteriors where a model
saturates at exactly 0 or 1 or a tree's leaves tie them (since 5 December 2026). Dask and Spark
rows are grouped alike, where they live: every row gets a 128-bit key (:func:`row_key_pairs`)
of its features (where the labelled rows' features were read at ``fit``; identical features
give identical posteriors) or else of its posteriors, and the engine counts the rows and sums
the weights of each key by a shuffle (:func:`key_tallies` on each share of the keys), so only
five numbers per share reach the client and every set is judged, not only sets of at most
20,000 rows (since 5 December 2026). Scores read from files are grouped by their
scores alone (they are all the file gives); a reference file of out-of-fold scores, which meets
none of the unlabelled rows' repeated scores, has its ties read over one fold's pairs
(:func:`scored_by_other_models`, :func:`within_model_counts`; since 5 December 2026).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "REPEAT_EXCESS",
    "RepeatedRowsWarning",
    "judge_repeats",
    "mixture_design_effect",
    "key_tallies",
    "ml_shares",
    "repeat_tallies",
    "row_key_pairs",
    "batch_repeats_message",
    "repeats_of_rows",
    "rows_repeat_message",
    "excess_repeats",
    "collision_bound",
    "identical_row_codes",
    "feature_row_keys",
    "labelled_row_share",
    "labelled_clumps",
    "labelled_repeat_counts",
    "repeats_beyond_chance",
    "selection_rate",
    "selection_from_sums",
    "identity_row_keys",
    "labelled_rows_at",
    "REFERENCE_MODELS",
    "scored_by_other_models",
    "within_model_counts",
]

#: The unlabelled rows' design effect of their repeats over the one independent draws give at
#: most (see the module docstring) above which ``adapt`` warns: at 1.25
#: the interval counting every row as independent is about 11 % too narrow or more.
REPEAT_EXCESS = 1.25


class RepeatedRowsWarning(UserWarning):
    """The unlabelled rows repeat one another (identical rows) far more often than independent
    draws of the labelled classes do, so the interval of their class shares and the shift test,
    which count every row as an independent draw, are too sure.

    Identical rows: rows in memory (a pandas DataFrame or a numeric NumPy array, on both the
    labelled rows at ``fit`` and the rows judged) are identical where their features and their
    posteriors agree exactly (since 5 December 2026: a model whose posteriors saturate at
    exactly 0 or 1, or a tree's leaves, give distinct rows the same posteriors, and a forest's
    tied vote shares hid copied rows); Dask and Spark rows alike, by a key of their features
    where they live, where the labelled rows were so read (since 5 December 2026).
    Other inputs (sparse matrices, object arrays, labelled rows fitted from Dask or Spark) and
    scores read from files (``probwrap prevalence --reference``) are grouped by their
    posteriors alone, the labelled rows' rate of coincidences read alike;
    ``probwrap prevalence --source-prevalence`` without reference rows is not judged (nothing
    tells how often independent scores coincide; docs/command_line.md).

    Raised by ``PriorShiftWrapper.adapt`` (no ``cells`` given; rows in memory, or Dask or
    Spark rows of any number, counted where they live) when the design effect of the
    rows' exact repeats is more than ``REPEAT_EXCESS`` (1.25) times the largest one that
    independent draws give, read from how often labelled rows coincide
    (:mod:`probwrap.shift._repeats`), and by ``PriorShiftWrapper.monitor`` once per call,
    naming the batches whose rows do so (each batch judged by the same rule, in memory, on a
    Dask worker or a Spark executor; since 5 December 2026). Not judged: labelled rows not
    kept as rows (more than 20,000, or fitted from more than 20,000 Dask or Spark rows; until
    5 December 2026 also ``adapt`` on more than 20,000 Dask or Spark rows).
    Rows resampled with replacement from a pool, or copied
    records, carry the pool's own sampling error, which an interval counting every row as an
    independent draw leaves out: on R's AER PhDPublications and survival nwtco, batches of 400
    rows drawn with replacement from half of the rows held the truth in 90-93 % and 84-94 % of
    100 draws at 95 %, and 93-97 % and 95-97 % with each group of identical rows passed as one
    cell (``adapt(X, cells=...)``; for a NumPy array, ``numpy.unique(X, axis=0,
    return_inverse=True)[1]``). The estimate, the interval and the test are not changed by the
    warning; passing ``cells`` (any) turns the check off.

    Distinct records selected on a feature can coincide more often than any mix of the labelled
    classes where the features are coarse; since 5 December 2026 the rows in memory are allowed
    the excess that their rate of meeting the labelled rows' feature rows implies
    (:func:`selection_rate`), so such batches warn less often, but not never: a selection that
    thins every feature row alike cannot be told from rows drawn with replacement (batches of
    distinct records cut on a feature, seven bundled sets: 24 of 311 warned before, 13 after;
    ``benchmarks/repeat_check_selected_rows.py``, docs/evidence/prior_shift_log.md, "Repeat
    check on batches selected on a feature"). Check such a batch with ``feature_check_rows=``.
    """


def _row_matrix(*blocks: np.ndarray) -> np.ndarray:
    """The blocks side by side as one C-contiguous float array, -0.0 read as 0.0."""
    n = int(np.asarray(blocks[0]).shape[0])
    m = np.concatenate([np.asarray(b, dtype=float).reshape(n, -1) for b in blocks], axis=1)
    return np.ascontiguousarray(m + 0.0)  # (-0.0 and 0.0 alike)


def _codes_of(m: np.ndarray) -> np.ndarray:
    if m.shape[0] == 0:
        return np.zeros(0, dtype=np.intp)
    keys = m.view(np.dtype((np.void, m.dtype.itemsize * m.shape[1]))).ravel()
    return np.asarray(np.unique(keys, return_inverse=True)[1], dtype=np.intp).ravel()


def identical_row_codes(*blocks: np.ndarray) -> np.ndarray:
    """Codes ``0 .. G - 1`` of the rows, equal where the rows agree exactly in every block
    (arrays of shape (n, ...) of floats: the posteriors of one or more models)."""
    return _codes_of(_row_matrix(*blocks))


def feature_row_keys(X) -> np.ndarray | None:
    """A 64-bit hash of every row's features, equal where two rows agree in every feature:
    numbers (a 2-d numeric NumPy array, or a DataFrame of numeric and boolean columns) read as
    float64 and hashed by :func:`probwrap._row_hash.row_hashes`, so a DataFrame and the same
    numbers as an array, or an integer and a float column of equal values, give equal keys;
    other DataFrames by pandas' row hash (equal only between frames of the same columns and
    dtypes). None for anything else (sparse matrices, object arrays, Dask or Spark rows).

    Examples
    --------
    >>> import numpy as np
    >>> import pandas as pd
    >>> keys = feature_row_keys(np.array([[1.0, 2.0], [1.0, 2.0], [2.0, 1.0]]))
    >>> bool(keys[0] == keys[1]), bool(keys[0] == keys[2])
    (True, False)
    >>> frame = pd.DataFrame({"a": [1, 1, 2], "b": [2, 2, 1]})   # integer columns
    >>> bool(np.array_equal(feature_row_keys(frame), keys))
    True
    """
    from .._row_hash import row_hashes as _row_hashes

    # Dask collections and Spark DataFrames (checked without importing either) are not hashed
    where_rows_live = hasattr(X, "__dask_graph__") or type(X).__module__.startswith("pyspark.sql")
    try:
        if hasattr(X, "iloc") and hasattr(X, "columns") and not where_rows_live:
            if all(getattr(d, "kind", "O") in "biuf" for d in np.atleast_1d(X.dtypes)):
                # by blocks of rows: a row's hash is its own, and no float copy of a large
                # frame is made at once
                step = 1 << 16
                return np.concatenate([
                    _row_hashes(X.iloc[i:i + step].to_numpy(dtype=float))
                    for i in range(0, X.shape[0], step)] or [np.zeros(0, dtype=np.uint64)])
            import pandas as pd

            return pd.util.hash_pandas_object(X, index=False).to_numpy(dtype=np.uint64)
        if isinstance(X, np.ndarray) and X.ndim == 2 and X.dtype.kind in "biuf":
            return _row_hashes(X)
    except (TypeError, ValueError):
        return None
    return None


def labelled_row_share(labelled_keys: np.ndarray | None, keys: np.ndarray | None,
                       sample_weight: np.ndarray | None = None) -> float | None:
    """The share of the rows (by weight; unit weights for None) whose feature row is also
    among the labelled rows: ``keys`` the rows' :func:`feature_row_keys`, ``labelled_keys``
    the labelled rows' distinct keys, sorted. None where either is None, there are no rows or
    their weights do not sum to a positive finite number.

    ``PriorShiftWrapper`` reads it for a model refit on the labelled rows, whose posteriors of
    a row it was fitted on are not the cross-fitted ones its calibration and the per-draw cap's
    predicted harm were read from (docs/evidence/prior_shift_log.md, the section on the per-draw
    cap on repeated rows).

    Examples
    --------
    >>> import numpy as np
    >>> labelled = np.unique(feature_row_keys(np.array([[0.0], [1.0]])))
    >>> labelled_row_share(labelled, feature_row_keys(np.array([[1.0], [2.0], [3.0], [1.0]])))
    0.5
    """
    if labelled_keys is None or keys is None or keys.shape[0] == 0:
        return None
    ref = np.asarray(labelled_keys)
    at = np.minimum(np.searchsorted(ref, keys), max(ref.shape[0] - 1, 0))
    seen = (ref[at] == keys) if ref.shape[0] else np.zeros(keys.shape[0], dtype=bool)
    if sample_weight is None:
        return float(np.mean(seen))
    w = np.asarray(sample_weight, dtype=float)
    total = float(w.sum())
    if not (np.isfinite(total) and total > 0):
        return None
    return float(w[seen].sum() / total)


def _rows_surely_distinct(m: np.ndarray) -> bool:
    """True where no two rows of ``m`` (from :func:`_row_matrix`) can be equal: their 64-bit
    hashes all differ (equal rows have equal bits, so equal hashes). False where two hashes
    agree, which equal rows or, with a chance of about 2**-64 a pair, a collision give.

    One plain sort of ``n`` integers, where the codes' ``np.unique`` of the rows as byte
    strings (an index sort comparing records) took 0.5 s of a 0.9 s ``adapt`` on 10^6 rows."""
    n, c = m.shape
    bits = m.view(np.uint64)
    acc = np.full(n, np.uint64(0xCBF29CE484222325))
    step = np.empty_like(acc)
    with np.errstate(over="ignore"):
        for j in range(c):
            acc ^= bits[:, j]
            acc *= (np.uint64(j) * np.uint64(0x9E3779B97F4A7C15)) | np.uint64(1)
            np.right_shift(acc, np.uint64(29), out=step)
            acc ^= step
    del step
    acc.sort()
    for start in range(0, max(n - 1, 0), 1 << 16):
        stop = min(start + (1 << 16), n - 1)
        if np.any(acc[start + 1:stop + 1] == acc[start:stop]):
            return False
    return True


def _tied_pairs(codes: np.ndarray) -> float:
    if codes.size < 2:
        return 0.0
    counts = np.bincount(codes)
    return float(np.sum(counts * (counts - 1.0)) / 2.0)


def labelled_repeat_counts(proba: np.ndarray, y_index: np.ndarray,
                           n_classes: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Tied pairs and pairs of labelled rows by their two classes, ``(tied, pairs)`` of shape
    (k, k): the pairs of rows of classes ``c`` and ``c'`` whose posteriors (one model's)
    agree exactly, and all such pairs (``n_c (n_c - 1) / 2`` on the diagonal, ``n_c n_c'``
    off it)."""
    p = np.asarray(proba, dtype=float)
    y = np.asarray(y_index).astype(int)
    k = int(n_classes) if n_classes is not None else int(y.max(initial=0)) + 1
    codes = identical_row_codes(p)
    g = int(codes.max(initial=-1)) + 1
    table = np.zeros((g, k))
    np.add.at(table, (codes, y), 1.0)
    tied = table.T @ table
    tied[np.diag_indices(k)] = np.sum(table * (table - 1.0), axis=0) / 2.0
    n = np.bincount(y, minlength=k).astype(float)
    pairs = np.outer(n, n)
    pairs[np.diag_indices(k)] = n * (n - 1.0) / 2.0
    return tied, pairs


def labelled_clumps(proba: np.ndarray, y_index: np.ndarray,
                    n_classes: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """How the labelled rows' identical posteriors clump, by class: ``(Q, S)`` with ``Q[c, c']
    = sum_g p_cg p_c'g`` and ``S[c, c', c''] = sum_g p_cg p_c'g p_c''g``, ``p_cg`` the share of
    class ``c``'s rows in group ``g`` of identical posteriors (plug-in; one model's posteriors).
    At class shares ``pi`` a draw of the mix falls in group ``g`` with ``f_g = sum_c pi_c
    p_cg``, so ``pi' Q pi = sum_g f_g^2`` and ``S[pi, pi, pi] = sum_g f_g^3``: the two sums the
    variance of the count of tied pairs among independent draws needs
    (:func:`repeats_beyond_chance`)."""
    p = np.asarray(proba, dtype=float)
    y = np.asarray(y_index).astype(int)
    k = int(n_classes) if n_classes is not None else int(y.max(initial=0)) + 1
    codes = identical_row_codes(p)
    g = int(codes.max(initial=-1)) + 1
    table = np.zeros((g, k))
    np.add.at(table, (codes, y), 1.0)
    share = table / np.maximum(table.sum(axis=0), 1.0)
    cube = np.empty((k, k, k))
    for c in range(k):
        cube[c] = (share[:, c:c + 1] * share).T @ share
    return share.T @ share, cube


def _clump_sums(clumps: tuple, shares: np.ndarray) -> tuple[float, float]:
    """``(sum_g f_g^2, sum_g f_g^3)`` of the mix with ``shares`` (:func:`labelled_clumps`)."""
    q, cube = clumps
    sh = np.asarray(shares, dtype=float)
    return float(sh @ q @ sh), float(np.einsum("ijk,i,j,k->", cube, sh, sh, sh))


#: How many models are taken to have scored reference rows that another model's scores do not
#: meet (:func:`scored_by_other_models`): 5, the folds of a cross-fit by default in probwrap
#: (``calibrate fit --folds``) and in scikit-learn (``cv=None``).
REFERENCE_MODELS = 5


def scored_by_other_models(reference: np.ndarray, scores: np.ndarray) -> bool:
    """Whether reference scores with ties of their own are not those of the model that gave
    ``scores`` (two 1-d arrays of one class's scores): none of the values that two or more of
    ``scores`` share (0 and 1 left out: any model saturates there) is among the reference
    scores. One model gives rows of equal features equal scores, so a reference scored by that
    model meets the repeated values of a coarse score distribution exactly; out-of-fold scores
    (a cross-fit's ``K`` fold models, the reference of ``probwrap prevalence`` made with
    ``cross_val_predict``) meet none of them, and tie only within a fold: about ``1 / K`` of
    the rate of the model that scored the rows (carData Cowles, 852 labelled rows, five folds:
    0.00039 of pairs tied against 0.00200 for the refit model; TitanicSurvival, 627 rows:
    0.00100 against 0.00523). False where the reference has no tied pair (continuous scores:
    nothing to correct) or ``scores`` repeat no value."""
    ref = np.asarray(reference, dtype=float).ravel()
    s = np.asarray(scores, dtype=float).ravel()
    values, counts = np.unique(s, return_counts=True)
    shared = values[(counts > 1) & (values > 0.0) & (values < 1.0)]
    if shared.size == 0 or np.unique(ref).size == ref.size:
        return False
    return not bool(np.isin(shared, ref).any())


def within_model_counts(counts: tuple, models: float) -> tuple:
    """:func:`labelled_repeat_counts` (and :func:`labelled_clumps`) of rows scored by
    ``models`` models of about equal shares, read as those of one model: only pairs scored by
    one model can tie, about ``1 / models`` of the pairs, so the pairs are divided by
    ``models``; a clump of identical rows is split among the models, so ``Q`` is multiplied by
    ``models`` and ``S`` by its square (equal splits; each at most 1)."""
    m = float(models)
    tied, pairs = np.asarray(counts[0], dtype=float), np.asarray(counts[1], dtype=float)
    out: tuple = (tied, pairs / m)
    if len(counts) >= 4:
        out += (np.minimum(np.asarray(counts[2], dtype=float) * m, 1.0),
                np.minimum(np.asarray(counts[3], dtype=float) * m * m, 1.0))
    return out


def collision_bound(tied: np.ndarray, pairs: np.ndarray, shares: np.ndarray) -> float:
    """How often two independent rows of a mix of the classes with ``shares`` coincide, at most:
    ``shares' C shares`` with each entry of the class-pair rate ``C`` at its upper bound
    ``(D + 2 sqrt(D) + 2) / P`` from ``D`` tied of ``P`` labelled pairs (about the one-sided
    95 % Poisson bound of a count, common practice; 1 where there are no pairs)."""
    t = np.asarray(tied, dtype=float)
    pr = np.asarray(pairs, dtype=float)
    c = np.where(pr > 0, (t + 2.0 * np.sqrt(t) + 2.0) / np.maximum(pr, 1.0), 1.0)
    c = np.minimum(c, 1.0)
    sh = np.asarray(shares, dtype=float)
    return float(sh @ c @ sh)


def repeats_beyond_chance(observed: float, expected: float, codes: np.ndarray,
                          sample_weight: np.ndarray | None,
                          clump: tuple[float, float] | None = None) -> bool:
    """Whether the rows' design effect of their repeats, ``observed``, is beyond what
    independent draws give (``expected``, see :func:`excess_repeats`): more than
    ``REPEAT_EXCESS`` times it, and the tied pairs beyond the expected count more than three
    standard deviations of it plus 3 (common practice for a count; the labelled rate is itself
    an estimate, and a few rows repeat by chance in a small batch).

    The standard deviation is that of the count of tied pairs among ``n`` independent draws,
    a U-statistic: ``Var T = C(n, 2) (q - q^2) + n (n - 1) (n - 2) (s - q^2)`` with ``q =
    sum_g f_g^2`` the rate at which two draws coincide and ``s = sum_g f_g^3`` (pairs sharing a
    row covary; Hoeffding 1948, the variance of a U-statistic of degree 2, from memory), the
    first term with ``q`` from ``expected`` and at least the Poisson count's, the second from
    ``clump`` = ``(q, s)`` read off the labelled rows (:func:`labelled_clumps`; None: left
    out, the rule before 5 December 2026). Where a few values hold many rows (scores rounded,
    or clipped at 0 and 1) the second term dominates: the count of ties then swings with how
    many rows fall on those values, which the Poisson count alone took for repeats beyond
    chance (``probwrap prevalence`` on breast-cancer scores rounded to 2 or 3 decimals flagged
    9 and 14 of 250 batches drawn without replacement; none with it)."""
    if observed <= REPEAT_EXCESS * expected:
        return False
    w = np.ones(np.asarray(codes).shape[0]) if sample_weight is None else np.asarray(
        sample_weight, dtype=float)
    return _beyond_chance(observed, expected, float(w.sum() ** 2 / np.dot(w, w)), clump)


def _beyond_chance(observed: float, expected: float, n: float,
                   clump: tuple[float, float] | None) -> bool:
    """:func:`repeats_beyond_chance` with Kish's count of the rows ``n`` given."""
    if observed <= REPEAT_EXCESS * expected:
        return False
    tied, chance = (observed - 1.0) * n / 2.0, (expected - 1.0) * n / 2.0
    var = chance
    if clump is not None:
        q, s3 = clump
        var += n * max(n - 1.0, 0.0) * max(n - 2.0, 0.0) * max(s3 - q * q, 0.0)
    return bool(tied > chance + 3.0 * np.sqrt(var) + 3.0)


def excess_repeats(codes: np.ndarray, sample_weight: np.ndarray | None,
                   rate: float) -> tuple[float, float]:
    """The unlabelled rows' design effect of their exact repeats, ``sum_g W_g^2 / sum_i w_i^2``,
    and the largest one independent draws give, ``1 + (n - 1) rate`` with ``n`` Kish's count.

    Examples
    --------
    >>> import numpy as np
    >>> codes = np.repeat(np.arange(100), 2)  # every row twice
    >>> excess_repeats(codes, None, 0.0)
    (2.0, 1.0)
    """
    c = np.asarray(codes, dtype=np.intp)
    w = np.ones(c.shape[0]) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    sq = float(np.dot(w, w))
    if c.size == 0 or sq <= 0:
        return 1.0, 1.0
    group = np.bincount(c, weights=w)
    observed = float(np.dot(group, group) / sq)
    n = float(w.sum() ** 2 / sq)
    return observed, float(1.0 + max(n - 1.0, 0.0) * max(rate, 0.0))


def selection_rate(labelled_keys: tuple, keys: np.ndarray,
                   sample_weight: np.ndarray | None = None) -> float | None:
    """How often two independent draws of rows like these coincide at least, read from how
    often they meet the labelled rows, for rows that may have been selected on their features;
    None where no row meets a labelled row, no two labelled rows coincide (or the weights do
    not sum to a positive finite number).

    Rows drawn from any distribution ``g`` of feature rows coincide with probability ``sum_x
    g(x)^2 >= (sum_x g(x) f(x))^2 / sum_x f(x)^2`` (Cauchy-Schwarz), ``f`` the labelled rows'
    distribution, with equality where ``g`` is ``f``: rows selected on a feature that
    concentrates them in feature rows common among the labelled rows (R's openintro acs12,
    the young) meet the labelled rows more often than the labelled rows meet one another, and
    coincide more often than any mix of the classes. Both sums are read without the rows'
    own repeats: ``sum_x g f`` is the rate at which a row meets a labelled row (pairs of a row
    and a labelled row with the same features over ``n m``, each row by its weight), which a
    row drawn twice from a pool leaves as it is, and ``sum_x f^2`` the labelled rows' own rate
    of tied pairs. A lower bound, so it never allows more coincidences than distinct rows
    give; rows selected on a feature independent of the rest (every feature row's share
    scaled alike) meet the labelled rows no more often and are not covered (carData Arrests,
    docs/evidence/prior_shift_log.md, "Repeat check on batches selected on a feature").

    ``labelled_keys``: ``(distinct keys, rows of each)`` of the labelled rows' features
    (``numpy.unique(keys, return_counts=True)``), ``keys``: the rows' (equal where the
    features agree; the same hash as the labelled rows').

    Examples
    --------
    >>> import numpy as np
    >>> per = np.array([2] * 5 + [8] * 5)                  # 50 labelled rows, 10 feature rows
    >>> labelled = (np.arange(10), per)
    >>> round(selection_rate(labelled, np.repeat(np.arange(10), per)), 4)  # as the labelled
    0.1562
    >>> round(selection_rate(labelled, np.arange(5, 10)), 4)  # the common half alone
    0.2162
    """
    ref, per = (np.asarray(a) for a in labelled_keys)
    k = np.asarray(keys)
    if ref.shape[0] == 0 or k.shape[0] == 0:
        return None
    w = np.ones(k.shape[0]) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    total, m = float(w.sum()), float(per.sum())
    if not (np.isfinite(total) and total > 0 and m > 1):
        return None
    own = float(np.sum(per * (per - 1.0)) / (m * (m - 1.0)))
    at = np.minimum(np.searchsorted(ref, k), ref.shape[0] - 1)
    seen = ref[at] == k
    if own <= 0 or not seen.any():
        return None
    meet = float(np.dot(w, np.where(seen, per[at], 0)) / (total * m))
    return float(min(meet * meet / own, 1.0))


def identity_row_keys(X) -> np.ndarray | None:
    """The 64-bit hash of every row's features that ``PriorShiftWrapper`` tallies the labelled
    rows by at ``fit`` and reads :func:`selection_rate` with: a pandas DataFrame by pandas' row
    hash, a numeric 2-d NumPy array by :func:`probwrap._row_hash.row_hashes`; None for other
    inputs (sparse matrices, object arrays, Dask or Spark collections). A Dask block or the
    chunk of a Spark partition (a DataFrame of the same columns and dtypes, or an array) is
    hashed alike where it lives, so its rows meet the labelled rows as in memory.

    Examples
    --------
    >>> import numpy as np
    >>> keys = identity_row_keys(np.array([[1.0, 2.0], [1.0, 2.0], [2.0, 1.0]]))
    >>> bool(keys[0] == keys[1]), bool(keys[0] == keys[2])
    (True, False)
    """
    from .._row_hash import row_hashes as _row_hashes

    where_rows_live = hasattr(X, "__dask_graph__") or type(X).__module__.startswith("pyspark.sql")
    try:
        if hasattr(X, "iloc") and hasattr(X, "columns") and not where_rows_live:
            import pandas as pd

            return pd.util.hash_pandas_object(X, index=False).to_numpy()
        if isinstance(X, np.ndarray) and X.ndim == 2 and X.dtype.kind in "biuf":
            return np.asarray(_row_hashes(X))
        return None
    except (TypeError, ValueError):
        return None


def labelled_rows_at(labelled_keys: tuple, keys: np.ndarray) -> np.ndarray:
    """How many labelled rows have each row's features (0 where none has): ``labelled_keys``
    ``(distinct keys, rows of each)`` of the labelled rows, ``keys`` the rows'
    (:func:`identity_row_keys`). Summed with the rows' weights where the rows live (Dask and
    Spark), the rate at which they meet the labelled rows (:func:`selection_from_sums`)."""
    ref, per = (np.asarray(a) for a in labelled_keys)
    k = np.asarray(keys)
    if ref.shape[0] == 0 or k.shape[0] == 0:
        return np.zeros(k.shape[0])
    at = np.minimum(np.searchsorted(ref, k), ref.shape[0] - 1)
    return np.where(ref[at] == k, per[at], 0).astype(float)


def selection_from_sums(labelled_keys: tuple, sums: tuple) -> tuple[float, float] | None:
    """``judge_repeats(selected=...)`` from sums read where Dask or Spark rows live, the
    rule of :func:`selection_rate` and of the repeats held in feature rows some labelled row
    has, as :func:`repeats_of_rows` reads them of rows in memory. ``sums``: ``(sum_i w_i a_i,
    sum_i w_i, sum_{g seen} W_g^2, sum_{i seen} w_i^2, sum_i w_i^2)``, ``a_i`` the labelled
    rows at row ``i``'s features (:func:`labelled_rows_at`), "seen" rows and groups of
    identical rows with ``a > 0``. None where :func:`selection_rate` gives None.

    Examples
    --------
    >>> import numpy as np
    >>> per = np.array([2] * 5 + [8] * 5)
    >>> labelled = (np.arange(10), per)
    >>> keys = np.arange(5, 10)
    >>> a = labelled_rows_at(labelled, keys)
    >>> rate, _ = selection_from_sums(labelled, (a.sum(), 5.0, 5.0, 5.0, 5.0))
    >>> bool(np.isclose(rate, selection_rate(labelled, keys)))
    True
    """
    per = np.asarray(labelled_keys[1], dtype=float)
    meet_sum, total, seen_group_sq, seen_sq, sq = (float(v) for v in sums)
    m = float(per.sum())
    if per.shape[0] == 0 or not (np.isfinite(total) and total > 0 and m > 1):
        return None
    own = float(np.sum(per * (per - 1.0)) / (m * (m - 1.0)))
    if own <= 0 or meet_sum <= 0:
        return None
    meet = meet_sum / (total * m)
    rate = float(min(meet * meet / own, 1.0))
    excess = float(max(seen_group_sq - seen_sq, 0.0) / sq) if sq > 0 else 0.0
    return rate, excess


def _seen_excess(labelled: np.ndarray, keys: np.ndarray, codes: np.ndarray,
                 sample_weight: np.ndarray | None) -> float:
    """The part of the rows' design effect of their repeats, less 1, held by groups of
    identical rows whose features some labelled row has: ``(sum_{g seen} W_g^2 - sum_{i seen}
    w_i^2) / sum_i w_i^2``."""
    ref = np.asarray(labelled)
    k = np.asarray(keys)
    w = np.ones(k.shape[0]) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    at = np.minimum(np.searchsorted(ref, k), max(ref.shape[0] - 1, 0))
    seen = (ref[at] == k) if ref.shape[0] else np.zeros(k.shape[0], dtype=bool)
    group = np.bincount(codes, weights=w)
    in_seen = np.bincount(codes, weights=seen.astype(float)) > 0
    sq = float(np.dot(w, w))
    return float(max(np.dot(group[in_seen], group[in_seen]) - np.dot(w[seen], w[seen]), 0.0)
                 / sq) if sq > 0 else 0.0


def repeats_of_rows(estimator, counts: tuple | None, proba: np.ndarray, fold_proba=None,
                    sample_weight: np.ndarray | None = None, *,
                    row_codes: np.ndarray | None = None, row_keys: np.ndarray | None = None,
                    labelled_keys: tuple | None = None
                    ) -> tuple[int, int, float, float] | None:
    """The check behind :class:`RepeatedRowsWarning` on one set of unlabelled rows: ``(rows,
    distinct rows, observed design effect, the largest one independent draws give)`` where the
    rows repeat one another beyond chance (:func:`repeats_beyond_chance`), None otherwise.

    One function for every path that judges rows (``adapt`` in memory and on the rows of a
    small Dask or Spark set, ``monitor`` per batch in memory, on a Dask worker or a Spark
    executor), so that the same rows give the same answer. ``estimator``: the fitted
    :class:`~probwrap.shift.PriorEstimator` (its calibration and source prior); ``counts``:
    ``labelled_repeat_counts`` of its labelled rows, followed by their :func:`labelled_clumps`
    (``(tied, pairs, Q, S)``; the first two alone: without the clumps' variance) or None (not
    kept as rows, nothing judged);
    ``fold_proba``: the fold models' posteriors of the same rows (identical rows agree in all);
    ``row_codes``: codes of the rows' features (equal where the rows agree in every feature),
    one more block in which identical rows agree, with ``counts`` read from the labelled rows
    grouped alike (``PriorShiftWrapper._repeat_reference(by_rows=True)``).
    The shares of the mix are the source's and the rows' maximum-likelihood estimate (the rate
    of coincidences differs by class; the larger of the two is taken). ``row_keys``: the
    rows' feature hashes, with ``labelled_keys`` the labelled rows' distinct ones and their
    counts: rows selected on their features coincide more often than any mix of the classes,
    in feature rows the labelled rows have (:func:`selection_rate`; since 5 December 2026;
    rows in memory, and each ``monitor`` batch on a Dask worker or Spark
    executor; ``adapt`` on Dask and Spark rows reads the same rule from sums:
    :func:`selection_from_sums`).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import PriorEstimator
    >>> rng = np.random.default_rng(0)
    >>> p1 = rng.uniform(0.05, 0.95, size=300)
    >>> proba = np.column_stack([1 - p1, p1])
    >>> y = (rng.uniform(size=300) < p1).astype(int)
    >>> est = PriorEstimator(n_resamples=20, random_state=0).fit(proba, y)
    >>> counts = (*labelled_repeat_counts(proba, y, 2), *labelled_clumps(proba, y, 2))
    >>> batch = proba[rng.integers(0, 100, size=200)]   # 200 draws from 100 rows
    >>> repeats_of_rows(est, counts, batch)[2] > 2.0
    True
    >>> repeats_of_rows(est, counts, proba[100:300]) is None   # no row repeats
    True
    """
    p = np.asarray(proba, dtype=float)
    if counts is None or getattr(estimator, "n_resamples", 0) == 0 or p.shape[0] < 2:
        return None
    blocks = [*(fold_proba or []), *(() if row_codes is None else (row_codes,))]
    m = _row_matrix(p, *blocks)
    if _rows_surely_distinct(m):
        return None  # no row repeats (the usual case, decided without the codes)
    codes = _codes_of(m)
    del m
    if int(codes.max()) + 1 == codes.shape[0]:
        return None  # no row repeats
    selected = None
    if row_keys is not None and labelled_keys is not None and (
            np.asarray(row_keys).shape[0] == p.shape[0]):
        rate = selection_rate(labelled_keys, row_keys, sample_weight)
        if rate is not None:
            selected = (rate, _seen_excess(labelled_keys[0], row_keys, codes, sample_weight))
    return judge_repeats(estimator, counts, ml_shares(estimator, p, sample_weight),
                         repeat_tallies(codes, sample_weight), selected=selected)


def ml_shares(estimator, proba: np.ndarray, sample_weight: np.ndarray | None) -> np.ndarray:
    """The rows' maximum-likelihood class shares (EM on the calibrated posteriors from the
    source prior; warnings of the EM kept quiet): one of the two mixes whose rate of
    coincidences :func:`judge_repeats` reads."""
    import warnings

    from ._estimate import em_prior

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return np.asarray(em_prior(estimator.calibrate(np.asarray(proba, dtype=float)),
                                   estimator.source_prior_, sample_weight=sample_weight).prior)


def repeat_tallies(codes: np.ndarray, sample_weight: np.ndarray | None
                   ) -> tuple[int, int, float, float, float]:
    """What the check reads of rows grouped into identical ones (``codes``): ``(rows, groups,
    sum_g W_g^2, sum_i w_i, sum_i w_i^2)``, ``W_g`` the weight of group ``g`` (unit weights
    for None). Sums of such tuples over disjoint shares of the groups are the tuple of all
    rows (how Dask and Spark rows are judged: :func:`key_tallies`)."""
    c = np.asarray(codes, dtype=np.intp)
    w = np.ones(c.shape[0]) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    group = np.bincount(c, weights=w) if c.size else np.zeros(0)
    return (int(c.shape[0]), int(np.count_nonzero(np.bincount(c))) if c.size else 0,
            float(np.dot(group, group)), float(w.sum()), float(np.dot(w, w)))


def row_key_pairs(X) -> np.ndarray | None:
    """A 128-bit key of every row, shape (n, 2) of uint64, equal where two rows agree exactly
    (-0.0 and 0.0 alike): a pandas DataFrame or Series by pandas' row hash under two hash keys,
    a NumPy array (or a SciPy sparse matrix, made dense: one block of rows) by two 64-bit
    multiply-xorshift hashes of its values as float64 with different constants; None for
    anything else. Two unequal rows share a key with a chance of about ``2**-128``; the keys are
    the same wherever a row is hashed (a Dask worker, a Spark executor, the client), so rows
    of different blocks group together.

    Examples
    --------
    >>> import numpy as np
    >>> keys = row_key_pairs(np.array([[1.0, 2.0], [1.0, 2.0], [2.0, 1.0]]))
    >>> keys.shape, bool((keys[0] == keys[1]).all()), bool((keys[0] == keys[2]).all())
    ((3, 2), True, False)
    """
    if hasattr(X, "iloc") and not hasattr(X, "__dask_graph__"):
        import pandas as pd

        return np.column_stack([
            pd.util.hash_pandas_object(X, index=False, hash_key=key).to_numpy(dtype=np.uint64)
            for key in ("probwrap-rows-a1", "probwrap-rows-b2")])
    if hasattr(X, "toarray") and hasattr(X, "shape"):
        X = X.toarray()
    if not isinstance(X, np.ndarray):
        return None
    if X.dtype.kind not in "biuf":
        import pandas as pd

        return row_key_pairs(pd.DataFrame(X.reshape(X.shape[0], -1)))
    m = np.asarray(X, dtype=np.float64).reshape(X.shape[0], -1) + 0.0
    bits = np.ascontiguousarray(m).view(np.uint64)
    out = np.empty((m.shape[0], 2), dtype=np.uint64)
    with np.errstate(over="ignore"):
        for col, (offset, step) in enumerate(((0xCBF29CE484222325, 0x9E3779B97F4A7C15),
                                              (0x84222325CBF29CE4, 0xC2B2AE3D27D4EB4F))):
            mult = (np.arange(1, m.shape[1] + 1, dtype=np.uint64) * np.uint64(step)) | np.uint64(1)
            acc = np.full(m.shape[0], np.uint64(offset))
            for j in range(m.shape[1]):
                acc = (acc ^ bits[:, j]) * mult[j]
                acc ^= acc >> np.uint64(31 - 2 * col)
            out[:, col] = acc
    return out


def _pair_groups(keys: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct keys (m, 2) and the weight of each (rows of one key summed)."""
    k = np.ascontiguousarray(np.asarray(keys, dtype=np.uint64).reshape(-1, 2))
    if k.shape[0] == 0:
        return k, np.zeros(0)
    uniq, inverse = np.unique(k.view(np.dtype((np.void, 16))).ravel(), return_inverse=True)
    weight = np.bincount(inverse.ravel(), weights=w, minlength=uniq.shape[0])
    return uniq.view(np.uint64).reshape(-1, 2), weight


def key_tallies(keys: np.ndarray, group_weight: np.ndarray) -> tuple[int, float]:
    """``(groups, sum_g W_g^2)`` of keyed groups given as pieces that may repeat a key (one
    share of the keys from every block: the pieces of one key are added first); ``keys`` (m,
    2) and the weight of each piece."""
    k, w = _pair_groups(keys, np.asarray(group_weight, dtype=float))
    return int(k.shape[0]), float(np.dot(w, w))


def judge_repeats(estimator, counts: tuple | None, ml: np.ndarray, tallies: tuple,
                  selected: tuple[float, float] | None = None
                  ) -> tuple[int, int, float, float] | None:
    """The rule of :func:`repeats_of_rows` on rows already grouped: ``tallies`` =
    :func:`repeat_tallies` (or their sums over shares of the keys, Dask and Spark), ``ml`` the
    rows' maximum-likelihood shares (:func:`ml_shares`; of a tally's binned rows beyond 20,000
    Dask or Spark rows). ``(rows, distinct rows, observed design effect, the largest one
    independent draws give)`` where the rows repeat beyond chance, None otherwise (and where
    the sums are not finite: weights beyond about 1e+-150). ``selected``: ``(rate of
    :func:`selection_rate`, the part of the observed design effect less 1 held by feature rows
    some labelled row has)``: where the rate is larger than the classes' mix gives, the
    expected design effect grows by ``(n - 1)`` times the difference, at most that part."""
    rows, groups, group_sq, total, sq = tallies
    if counts is None or getattr(estimator, "n_resamples", 0) == 0 or rows < 2:
        return None
    if groups >= rows or not (np.isfinite(group_sq) and np.isfinite(sq) and sq > 0):
        return None
    tied, pairs = counts[0], counts[1]
    rate = max(collision_bound(tied, pairs, estimator.source_prior_),
               collision_bound(tied, pairs, ml))
    observed = float(group_sq / sq)
    n = float(total ** 2 / sq)
    expected = float(1.0 + max(n - 1.0, 0.0) * max(rate, 0.0))
    clump = None
    if len(counts) >= 4:
        # the larger spread of the two mixes (how far the count of ties swings by chance)
        sums = [_clump_sums(counts[2:4], sh) for sh in (estimator.source_prior_, ml)]
        clump = max(sums, key=lambda qs: qs[1] - qs[0] ** 2)
    if selected is not None and selected[0] > rate:
        # rows selected on their features coincide more often than any mix of the classes
        # (selection_rate), but only in feature rows the labelled rows have: the excess
        # allowed is at most the repeats held there (ties among feature rows no labelled row
        # has, which a pool drawn with replacement gives, are judged as before); the clumps'
        # third sum grown as by a selection concentrating f by a factor W (sum g^2 = W sum
        # f^2, sum g^3 = W^2 sum f^3)
        allow = min(float(selected[1]), max(n - 1.0, 0.0) * (float(selected[0]) - rate))
        expected += allow
        grown = (expected - 1.0) / max(n - 1.0, 1.0)
        if clump is not None and clump[0] > 0 and grown > clump[0]:
            clump = (grown, clump[1] * (grown / clump[0]) ** 2)
    if not _beyond_chance(observed, expected, n, clump):
        return None
    return int(rows), int(groups), observed, expected


def mixture_design_effect(found: tuple[int, int, float, float] | None) -> float:
    """The design effect the mixture check (:func:`probwrap.shift.class_mixture_misfit`)
    divides the rows' effective number by, for rows that repeat one another beyond chance
    (``found`` from :func:`repeats_of_rows` or :func:`judge_repeats`; None: 1).

    Rows drawn with replacement, ``n`` of them from a pool of ``N``, carry the pool's deviation
    from the population in every bin share as well as their own: the covariance of the bin
    shares is ``(1 + n / N)`` times the multinomial one (Kish 1965, the design effect of
    cluster sampling, from memory), and ``1 + n / N`` is what the rows' design effect of their
    exact repeats estimates (module docstring). The part of it that independent draws of these
    classes give, ``expected - 1`` (their chance coincidences, which the multinomial covariance
    already holds), is taken off: ``1 + observed - expected``, at least 1.

    Examples
    --------
    >>> mixture_design_effect((400, 200, 2.1, 1.05))
    2.05
    >>> mixture_design_effect(None)
    1.0
    """
    if found is None:
        return 1.0
    observed, expected = float(found[2]), float(found[3])
    return float(max(1.0 + observed - expected, 1.0))


def rows_repeat_message(found: tuple[int, int, float, float], by_features: bool = False) -> str:
    """The numbers of :func:`repeats_of_rows` in words (one set of rows; ``by_features``: the
    rows were grouped by their features as well as their posteriors)."""
    n, groups, observed, expected = found
    same = "features and posteriors" if by_features else "posteriors"
    return (f"{n - groups} of the {n} unlabelled rows repeat another row exactly (the same "
            f"{same}; {groups} distinct rows), a design effect of {observed:.3g} where "
            f"independent draws of these classes give at most {expected:.3g} (from how often "
            "labelled rows coincide)")


def batch_repeats_message(found: list, n_batches: int, by_features: bool = False) -> str:
    """``monitor``'s :class:`RepeatedRowsWarning` for the batches whose rows repeat beyond
    chance, ``found`` = ``[(batch label, repeats_of_rows(...)), ...]`` in table order: the same
    words whether the batches were judged in memory, on Dask workers or Spark executors (rows
    in memory grouped by their features too: ``by_features``)."""
    names = ", ".join(str(b) for b, _ in found[:8]) + (", ..." if len(found) > 8 else "")
    first, numbers = found[0]
    return (
        f"monitor: in {len(found)} of {n_batches} batches (batch {names}) the rows repeat one "
        f"another far beyond chance; first, batch {first}: "
        f"{rows_repeat_message(numbers, by_features)}. "
        "Each batch's shift test and interval count every row as an independent draw; rows "
        "resampled with replacement from a pool, or copied records, are not, and those "
        "intervals are then too narrow (they can miss the share with no other warning). "
        "If the repeats are copies, monitor the distinct rows, or (rows in memory) pass "
        "cells= giving each group of identical rows one label (for a NumPy array X: "
        "numpy.unique(X, axis=0, return_inverse=True)[1]) so that each group counts once; "
        "Dask and Spark batches take no cells, collect a batch's rows for that "
        "(docs/prior_shift.md, 'Confident misses on real sets')."
    )
