"""Common machinery of the calibration maps."""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, clone
from sklearn.utils.validation import check_is_fitted

from .._validation import (
    check_binary_labels,
    check_labels,
    check_same_length,
    check_sample_weight,
    check_scores,
    plain,
    power_of_two_unit,
)

__all__ = [
    "CalibrationMap",
    "ExactZeroFloorWarning",
    "FewClassRowsWarning",
    "NONPARAMETRIC",
    "UnverifiedSharpeningWarning",
    "WeightScaleWarning",
    "one_vs_rest_copy",
]

#: ``complexity`` of maps whose number of free parameters grows with the data.
NONPARAMETRIC = 1e9


class WeightScaleWarning(UserWarning):
    """Weights summing to less than the number of rows met a count-based statistic.

    Raised by maps whose fit uses counts (smoothed targets, pseudo-counts, a prior worth a
    number of rows, a Venn-Abers test point of weight one) when ``sample_weight`` cannot be row
    frequencies because it sums to less than the number of rows it weights. The weights are
    then rescaled to sum to Kish's effective sample size (see :func:`count_weights`).

    Also raised where unequal whole-number weights share a factor above 1 and a step counts
    rows (they are read as relative weights, by Kish's size); where a reliability diagram's
    Wilson intervals or consistency bands (the plot's and the report's) read unequal weights
    that are not all whole numbers, or whole numbers sharing a factor, as relative (since
    5 December 2026); and where weights averaging below 1e-6 per row reach a model fitted inside
    a wrapper, which receives them as given (since 5 December 2026; the message names the
    model: scikit-learn's ``LogisticRegression`` and ``GaussianNB`` read that scale). Rescale
    such weights to sum to the number of rows, ``w * len(w) / w.sum()`` (docs/weights.md).
    """


class ExactZeroFloorWarning(UserWarning):
    """A multiclass model's exact-zero probabilities were floored from the number of rows.

    Raised once per fit by :class:`~probwrap.CalibrationWrapper` with ``clip=None`` when a
    model of more than two classes gives held-out probabilities of exactly 0 beside positive
    ones below ``2e-12`` (an isotonic-calibrated naive Bayes): half its smallest positive
    probability says nothing about how small a zero is, so ``clip_`` is half the
    Krichevsky-Trofimov (1981) floor of the ``N`` held-out rows, ``1 / (4 (N + 1) (k - 1))``,
    at fit and at predict. In memory and on Dask or Spark rows alike. A subclass of
    ``UserWarning``, so filters on ``UserWarning`` still catch it; pass ``clip=`` to choose
    the floor yourself (no warning then).
    """


class FewClassRowsWarning(UserWarning):
    """A class has only a handful of calibration rows for a map the user named.

    Raised by :class:`~probwrap.CalibrationWrapper` when a class has at least one but fewer
    than five held-out rows of weight > 0 (rows, not weights, so the scale of the weights
    cannot change it; five is the common-practice minimum count per cell of Cochran 1954, the
    same threshold as :class:`~probwrap.PriorShiftWrapper`'s warning about few labelled rows).
    The map's part for that class then rests on those rows and its regularisation. ``method=
    "auto"`` instead leaves the order-based maps out below 20 rows and, below 2, uses the most
    regularised map, with a warning of its own.

    Also raised by :class:`~probwrap.CostPolicyWrapper` with ``strategy="tuned"`` for the same
    count of held-out rows: its cutoff then rests on its anchor, which so few rows cannot
    choose with any confidence (docs/decisions.md).
    """


class UnverifiedSharpeningWarning(UserWarning):
    """A map fitted on few held-out rows that (nearly) separate the classes sharpens the scores.

    Raised by :class:`~probwrap.CalibrationWrapper` (any ``method``, two classes) when the map
    was fitted on fewer than 100 held-out rows of weight > 0, it sharpens the scores (a
    temperature below 1, or a Platt slope above 1), and the held-out scores rank at most 2 %
    of the (weighted) pairs of one row of each class the wrong way (an AUC of at least 0.98).
    So few rows cannot tell a set whose classes really are (nearly) separable from a draw that
    separates them by chance, so the sharpness is unverified: on DAAG's ``nsw74psidA``, 30
    cross-fitted rows, two draws in four were separated by chance and ``method="auto"`` kept
    temperatures of 0.41-0.53, 1.23-1.48 times scikit-learn's sigmoid's test log loss, while on
    scikit-learn's breast cancer the same sharpening was right (docs/calibration.md). The
    probabilities are unchanged; label more rows, or use ``method="platt"`` (its smoothed
    targets regularise the slope).

    Also raised for a temperature above 1 (softening) on such rows when their scores misrank at
    most 5 % of the pairs (since 5 December 2026): on separated rows where the fit stops is set by its
    prior, not by the rows, and naive Bayes or boosting log-odds are so wide that a softened
    map still leaves rows far more confident than the rows can check (``nsw74psidA``, 30 rows:
    temperatures of 3-8, 1.15-1.43 times the sigmoid's test log loss).
    """


#: the wrappers rescale weights whose largest entry lies outside [2**-256, 2**256] (about 1e-77
#: to 1e77): squares of the rescaled weights summed over a billion rows stay far inside the float
#: range
_WEIGHT_LOW = 2.0**-256
_WEIGHT_HIGH = 2.0**256


def weight_unit_of(largest: float) -> float:
    """The power of two extreme weights are divided by, from the largest weight of some rows:
    1.0 when it lies in about [1e-77, 1e77] (or is 0), else ``2**floor(log2(largest))``.

    Applied block by block and aligned at merges (the larger unit of two blocks with weight
    wins), it gives the unit of the largest weight of all rows, as in memory.

    Examples
    --------
    >>> weight_unit_of(3.0), weight_unit_of(2.0**1000 * 1.5) == 2.0**1000
    (1.0, True)
    """
    top = float(largest)
    if not top > 0.0 or _WEIGHT_LOW <= top <= _WEIGHT_HIGH or not math.isfinite(top):
        return 1.0
    return power_of_two_unit(np.array([top]))


def rescale_extreme_weights(
    sw: np.ndarray, owner: str, name: str = "sample_weight", stacklevel: int = 4
) -> np.ndarray:
    """Checked weights divided by a power of two (exact) when the largest lies outside about
    [1e-77, 1e77], with a :class:`~probwrap.calibration.WeightScaleWarning` naming ``owner``.

    The wrappers' steps sum squares of weights (Kish's size, variances, Newton steps), which
    overflow or underflow there: without this, weights of 2**1000 stopped ``method="auto"``
    with a ZeroDivisionError and gave ``PriorShiftWrapper`` a NaN prior. No data have that many
    (or that few) rows, so the weights are taken as relative ones; the ratios between rows are
    unchanged. The array-level maps and metrics keep such weights as given (frequencies).

    Examples
    --------
    >>> import warnings
    >>> import numpy as np
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     rescale_extreme_weights(np.array([2.0**300, 2.0**301]), "Demo").tolist()
    [0.5, 1.0]
    >>> [c.category.__name__ for c in caught]
    ['WeightScaleWarning']
    """
    top = float(sw.max()) if sw.size else 1.0
    unit = weight_unit_of(top)
    if unit == 1.0:
        return sw
    out = sw / unit
    warnings.warn(
        f"{owner}: `{name}` reaches {top:.3g}; weights this far from 1 overflow or underflow "
        f"the sums of squares the fit needs, so they are divided by 2**"
        f"{math.frexp(unit)[1] - 1} (exact; the ratios between rows are unchanged, and as row "
        f"counts they now sum to {float(out.sum()):.4g}).",
        WeightScaleWarning,
        stacklevel=stacklevel,
    )
    return out


def count_weights(w: np.ndarray) -> tuple[np.ndarray, bool]:
    """Weights on the row-count scale used by count-based statistics.

    ``sample_weight`` means row frequencies: a row of weight 2 counts as two identical rows, so
    the weights are kept as they are when they sum to at least the number of rows of positive
    weight. Weights that sum to less (normalised weights summing to 1, or frequencies scaled by
    1e-3) cannot be frequencies; they are rescaled so that their total equals Kish's (1965)
    effective sample size ``(sum w)**2 / sum w**2``. Equal weights then become 1 each, and the
    result does not depend on the scale of the weights.

    Returns ``(weights, rescaled)``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration._base import count_weights
    >>> count_weights(np.full(4, 0.25))[0]
    array([1., 1., 1., 1.])
    >>> count_weights(np.array([2.0, 1.0, 1.0]))[1]
    False
    """
    with np.errstate(over="ignore"):  # a total beyond the largest double is inf: no rescaling
        total = float(w.sum())
    n_rows = int(np.count_nonzero(w))
    if total >= n_rows or total <= 0.0:
        return w, False
    # scale first so that the sum of squares cannot underflow for tiny weights
    u = w / w.max()
    out = u * (u.sum() / (u @ u))
    if np.allclose(out, w, rtol=1e-12, atol=0.0):
        # already on Kish's scale (a wrapper rescaled them before handing them on): nothing
        # changes, so nothing is said twice
        return w, False
    return out, True


def rule_of_succession_targets(y: np.ndarray, w: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Smoothed targets: the true class ``(N_y + 1) / (N_y + k)``, every other ``1 / (N_y + k)``.

    ``N_y`` is the total weight of the rows of class ``y``. For ``k = 2`` these are Platt's
    (1999) targets ``(N+ + 1) / (N+ + 2)`` and ``1 / (N- + 2)``; for ``k`` classes, Laplace's
    rule of succession under a uniform Dirichlet prior. Returns per-row arrays
    ``(target of the true class, target of each other class)``.
    """
    with np.errstate(over="ignore"):
        counts = np.bincount(y.astype(np.intp), weights=w, minlength=k)[y.astype(np.intp)]
    # (N + 1) / (N + k) is exactly 1 in doubles for any N above 2**53: capping counts that
    # overflow (weights near the largest double) changes no target
    counts = np.minimum(counts, 2.0**1000)
    return (counts + 1.0) / (counts + k), 1.0 / (counts + k)


def one_vs_rest_copy(template: CalibrationMap, n_classes: int) -> CalibrationMap:
    """An unfitted copy of the binary map ``template`` for one class of ``n_classes`` (fitted
    one-vs-rest): its label 0 stands for the ``n_classes - 1`` other classes.

    The regularisation that gives probability to the rest's side of a one-vs-rest map (the
    negatives' smoothed target ``1 / (N- + 2)``, the output floor ``1 / (N + 2)``, a bin's
    prior) is then shared by those ``k - 1`` classes: each map gets ``1 / (k - 1)`` of it, so
    the ``k - 1`` wrong classes of a row together keep about what the one wrong class of a
    binary map keeps, instead of ``k - 1`` times as much. With ``n_classes = 2`` the copy is an
    ordinary binary map.
    """
    m = clone(template)
    m._rest_classes = max(int(n_classes) - 1, 1)
    return m


class CalibrationMap(BaseEstimator):
    """Base class of every calibration map.

    A map is fitted on held-out scores and labels and turns new scores into probabilities.
    Binary maps take log-odds of shape (n,) and return positive-class probabilities of shape
    (n,); multiclass maps take logits or log-probabilities of shape (n, k) and return (n, k)
    probabilities whose rows sum to one.

    Subclasses implement ``_fit(scores, y, w)`` (``y`` as 0/1 floats for binary maps, integer
    class indices for multiclass ones; ``w`` the weights, never all zero) and
    ``_predict(scores)``; the base class validates inputs, stores ``classes_`` and
    ``n_classes_`` and makes the outputs finite.

    Regularised fits store ``floor_``: outputs are kept within ``[floor_, 1 - floor_]``
    (multiclass: every probability at least ``floor_`` before the rows are renormalised).
    ``boundary_`` is ``None`` or a short text saying that the fit reached a boundary of its
    parameter space (a search-range end, or a step fitted to classes the scores separate);
    ``CalibrationWrapper(method="auto")`` does not choose such fits.
    """

    #: whether the map accepts (n, k) scores with k > 2
    supports_multiclass: bool = False
    #: whether the map accepts (n,) log-odds for a binary problem
    supports_binary: bool = True
    #: rough number of free parameters, used to prefer simpler maps; nonparametric maps use
    #: :data:`NONPARAMETRIC` (a very large number) so that any parametric map counts as simpler
    complexity: float = 2.0
    #: number of classes the label 0 stands for: 1 for a binary problem, ``k - 1`` for a map
    #: fitted one-vs-rest for one of ``k`` classes (set by :func:`one_vs_rest_copy`)
    _rest_classes: int = 1

    @classmethod
    def _get_param_names(cls) -> list[str]:
        # scikit-learn reads the names from ``inspect.signature`` on every ``get_params`` and
        # ``clone`` (twice per clone); ``auto`` clones maps hundreds of times per fit, so the
        # names are read once per class (the same list, as a copy)
        names = cls.__dict__.get("_param_names_cache")
        if names is None:
            names = super()._get_param_names()
            cls._param_names_cache = names
        return list(names)

    def fit(self, scores: Any, y: Any, sample_weight: Any = None) -> CalibrationMap:
        """Fit the map.

        Parameters
        ----------
        scores : array-like of shape (n,) or (n, k)
            Held-out log-odds (binary) or logits / log-probabilities (multiclass).
        y : array-like of shape (n,)
            True labels.
        sample_weight : array-like of shape (n,), default=None
            Non-negative row weights; a weight of 2 counts as two identical rows.

        Returns
        -------
        self
        """
        s = self._check_scores(scores, fitting=True)
        y = np.asarray(y)
        if y.ndim == 0:
            raise ValueError(f"`y` must be 1-d of shape (n,); got a scalar {plain(y)!r}.")
        if y.dtype.kind == "f" and np.isnan(y).any():
            raise ValueError("`y` contains NaN; labels must be known for every row.")
        check_same_length(("scores", s), ("y", y))
        w = check_sample_weight(sample_weight, s.shape[0])
        # (no weights: ones, which are row counts and give every class present a positive
        # total, so the two weight passes below would change nothing)
        if sample_weight is not None and self._uses_counts():
            w, rescaled = count_weights(w)
            if rescaled:
                warnings.warn(
                    f"{type(self).__name__}: `sample_weight` sums to less than the number of "
                    "rows, so the weights cannot be row frequencies; they are rescaled to sum to "
                    f"Kish's effective sample size ({w.sum():.4g}) for the map's counts.",
                    WeightScaleWarning,
                    stacklevel=2,
                )
        self.boundary_ = None
        self.floor_ = 0.0
        if s.ndim == 1:
            y01, classes = check_binary_labels(y, name="y")
            # class totals (the weights are non-negative, so a total is 0 only when every
            # weight of the class is; a sum of positive doubles never rounds to 0)
            with np.errstate(over="ignore"):  # a total beyond the largest double is inf, > 0
                totals = (
                    (1.0, 1.0) if sample_weight is None
                    else (float(w @ (1.0 - y01)), float(w @ y01))
                )
            for k in (0, 1):
                if not totals[k] > 0:
                    raise ValueError(
                        f"`sample_weight` is zero for every row of class {plain(classes[k])!r}; "
                        "each of the two classes needs some positive weight."
                    )
            self.classes_ = classes
            self.n_classes_ = 2
            self.n_score_columns_ = 1
            self._fit(s, y01, w)
        else:
            idx, classes = check_labels(y, name="y")
            if classes.shape[0] > s.shape[1]:
                raise ValueError(
                    f"`y` has {classes.shape[0]} classes but `scores` has {s.shape[1]} columns."
                )
            # Labels name columns by their sorted order; allow classes absent from y only when
            # they are integer column indices.
            if classes.shape[0] < s.shape[1]:
                if classes.dtype.kind in "iu" and classes.min() >= 0 and classes.max() < s.shape[1]:
                    idx = classes[idx]
                    classes = np.arange(s.shape[1])
                else:
                    raise ValueError(
                        f"`y` has {classes.shape[0]} classes but `scores` has {s.shape[1]} "
                        "columns; pass integer column indices as labels when some classes are "
                        "absent."
                    )
            self.classes_ = classes
            self.n_classes_ = s.shape[1]
            self.n_score_columns_ = s.shape[1]
            self._fit(s, idx, w)
        return self

    def predict(self, scores: Any) -> np.ndarray:
        """Calibrated probabilities: shape (n,) for binary maps, (n, k) for multiclass ones."""
        check_is_fitted(self, "classes_")
        s = self._check_scores(scores, fitting=False)
        out = np.asarray(self._predict(s), dtype=float)
        floor = float(getattr(self, "floor_", 0.0))
        if out.ndim == 1:
            out = np.clip(out, floor, 1.0 - floor)
        else:
            out = np.clip(out, floor, None)
            out = out / out.sum(axis=1, keepdims=True)
        if not np.all(np.isfinite(out)):
            # never hand out a NaN or infinite probability; the maps guard against it, so this
            # means the fitted attributes were damaged
            raise ValueError(
                f"{type(self).__name__} produced non-finite probabilities for "
                f"{int(np.count_nonzero(~np.isfinite(out)))} value(s) of `scores`; its fitted "
                "attributes are not usable."
            )
        return out

    def _uses_counts(self) -> bool:
        """Whether the fit uses counts (and so needs weights on the row-count scale)."""
        return False

    def _set_floor(self, w: np.ndarray, k: int, rule: str = "laplace") -> None:
        """Output floor from the total weight ``n`` (rows) and the number of classes ``k``.

        ``rule="laplace"`` (maps fitted to smoothed targets): ``1 / (n + k)``, Laplace's rule of
        succession, the estimate for a class none of ``n`` rows fell in. ``rule="half"`` (maps
        regularised by a weak prior instead): ``1 / (2 (n + 1) (k - 1))``, the
        Krichevsky-Trofimov (1981) add-one-half estimate ``(0 + 1/2) / (n + 1)`` of the
        probability of an error after ``n`` rows without one, shared by the ``k - 1`` other
        classes. Either way a calibration set of ``n`` rows supports no probability more
        extreme than that. A binary map fitted one-vs-rest for one of ``c`` classes
        (``_rest_classes = c - 1``, see :func:`one_vs_rest_copy`) shares the Laplace floor with
        the other ``c - 1`` one-vs-rest maps: ``1 / ((n + 2) (c - 1))``, so that the ``c - 1``
        wrong classes of a row together keep at least ``1 / (n + 2)``, as the one wrong class of
        a binary map does.
        """
        with np.errstate(over="ignore"):  # a total beyond the largest double gives a floor of 0
            n = float(w.sum())
            if rule == "half":
                self.floor_ = float(1.0 / (2.0 * (n + 1.0) * (k - 1)))
            else:
                self.floor_ = float(1.0 / ((n + k) * self._rest_classes))

    # -- helpers ---------------------------------------------------------------------------
    def _check_scores(self, scores: Any, *, fitting: bool) -> np.ndarray:
        s = check_scores(scores, name="scores", ndim=None)
        if s.ndim == 2 and s.shape[1] == 1:
            s = s[:, 0]
        if s.ndim == 1 and not self.supports_binary:
            raise ValueError(
                f"`scores` must be 2-d of shape (n, k) for {type(self).__name__}; got shape "
                f"{s.shape}."
            )
        if s.ndim == 2 and not self.supports_multiclass:
            raise ValueError(
                f"`scores` must be 1-d log-odds of shape (n,) for {type(self).__name__}, a binary "
                f"map; got shape {s.shape}. For multiclass models use CalibrationWrapper, which "
                "applies binary maps one-vs-rest."
            )
        if not fitting:
            expected = self.n_score_columns_
            got = 1 if s.ndim == 1 else s.shape[1]
            if expected != got:
                raise ValueError(
                    f"`scores` has shape {s.shape} but the map was fitted on "
                    f"{'1-d log-odds' if expected == 1 else f'{expected} columns'}."
                )
        return s

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:  # pragma: no cover
        raise NotImplementedError

    def _predict(self, scores: np.ndarray) -> np.ndarray:  # pragma: no cover
        raise NotImplementedError
