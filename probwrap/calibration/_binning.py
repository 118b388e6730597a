"""Equal-mass histogram binning with a smoothing prior per bin."""

from __future__ import annotations

import numbers

import numpy as np
from scipy.special import expit

from .._validation import plain, power_of_two_unit
from ._base import CalibrationMap
from ._isotonic import _pool_ties

__all__ = ["BinningMap"]

#: A group of tied scores whose cumulative-weight midpoint, in units of one bin's share, lies
#: within this of a bin boundary goes to the upper bin, as it would in exact arithmetic. The
#: rounding of weights rescaled from another scale is about 1e-16 per row and of the cumulative
#: sum at most about 1e-16 times the number of rows, far below it; a midpoint that lies truly
#: this close below a boundary needs about 10^9 rows per bin.
_EDGE_TOLERANCE = 1e-9


class BinningMap(CalibrationMap):
    """Histogram binning: the calibrated probability is the smoothed positive rate of a bin.

    The training scores are cut into ``n_bins`` bins holding (about) equal total weight
    (Zadrozny & Elkan 2001). Bins are defined on the weighted cumulative distribution of the
    scores, so a row of weight 2 acts exactly like the same row twice. Tied scores are never
    split across bins: each distinct score goes, with all its weight, to the bin that holds the
    midpoint of its share of the cumulative weight (a midpoint within 1e-9 of a bin's share below
    a boundary counts as on it and goes to the upper bin, as in exact arithmetic, so that weights
    rescaled from another scale cannot move it). A distinct score heavier than one bin's share
    can therefore leave a neighbouring bin empty; empty bins are dropped, so fewer than
    ``n_bins`` bins may be used (``n_bins_used_``).

    Each bin's estimate is shrunk towards the model's own mean probability in the bin,
    ``c = sum w * expit(s) / sum w`` over its rows (the scores are log-odds), with a Beta prior
    worth ``prior_strength`` rows: ``(sum w*y + c * prior_strength) / (sum w +
    prior_strength)``, as Naeini, Cooper & Hauskrecht (2015) centre each bin's Beta prior on the
    model's score in the bin (from memory). A thin bin thus keeps about what the model says
    unless its rows say otherwise, and the output floor ``floor_`` keeps it away from exact 0
    and 1.

    Bin edges lie half-way between the largest score of one bin and the smallest score of the
    next; a new score equal to an edge goes to the upper bin. Scores outside the training range
    fall into the first or last bin. The map is a step function and, unlike the others, is not
    guaranteed to be non-decreasing.

    Parameters
    ----------
    n_bins : int, default=10
        Number of equal-mass bins (at least 1).
    prior_strength : float, default=2.0
        Weight of the prior towards the model's own mean probability in the bin, in rows; 0
        gives the raw per-bin positive rate.

    Attributes
    ----------
    edges_ : ndarray of shape (n_bins_used_ - 1,)
        Inner bin edges on the score scale, increasing.
    values_ : ndarray of shape (n_bins_used_,)
        Calibrated probability of each bin.
    bin_weights_ : ndarray of shape (n_bins_used_,)
        Total training weight in each bin.
    n_bins_used_ : int
        Number of non-empty bins.
    floor_ : float
        Smallest output (0 when ``prior_strength=0``).
    classes_ : ndarray of shape (2,)
        The labels; the second one is the positive class.

    References
    ----------
    B. Zadrozny and C. Elkan (2001), "Obtaining calibrated probability estimates from decision
    trees and naive Bayesian classifiers", ICML.

    M. P. Naeini, G. F. Cooper and M. Hauskrecht (2015), "Obtaining well calibrated
    probabilities using Bayesian binning", AAAI.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import BinningMap
    >>> s = np.array([-2.0, -1.0, 0.0, 1.0, 2.0, 3.0])
    >>> y = np.array([0, 0, 1, 0, 1, 1])
    >>> m = BinningMap(n_bins=2, prior_strength=2.0).fit(s, y)
    >>> m.edges_
    array([0.5])
    >>> m.values_.round(4)  # (1 + 2 c) / (3 + 2), c = mean expit(s) of the bin: 0.2960, 0.8548
    array([0.3184, 0.7419])
    """

    def __init__(self, *, n_bins: int = 10, prior_strength: float = 2.0) -> None:
        self.n_bins = n_bins
        self.prior_strength = prior_strength

    @property
    def complexity(self) -> float:  # type: ignore[override]
        """Number of free parameters: one probability per bin."""
        return float(self.n_bins)

    def _check_params(self) -> None:
        if (
            isinstance(self.n_bins, bool)
            or not isinstance(self.n_bins, numbers.Integral)
            or self.n_bins < 1
        ):
            raise ValueError(f"`n_bins` must be an integer >= 1; got {plain(self.n_bins)!r}.")
        if (
            isinstance(self.prior_strength, bool)
            or not isinstance(self.prior_strength, numbers.Real)
            or not np.isfinite(self.prior_strength)
            or self.prior_strength < 0
        ):
            raise ValueError(
                f"`prior_strength` must be a finite number >= 0; got {plain(self.prior_strength)!r}."
            )

    def _uses_counts(self) -> bool:
        return bool(self.prior_strength != 0)

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        self._check_params()
        if self.prior_strength > 0:
            self._set_floor(w, 2)
        # work in weights divided by a power of two (exact), so that sums near the largest
        # double stay finite; the prior, counted in rows, is divided by the same unit (small
        # weights are left alone: the prior would overflow instead)
        unit = max(power_of_two_unit(w), 1.0)
        w = w / unit
        distinct, weight, label_sum = _pool_ties(scores, y, w)
        total = weight.sum()
        before = np.cumsum(weight) - weight
        midpoint_share = (before + 0.5 * weight) / total
        # a midpoint within _EDGE_TOLERANCE of a bin boundary counts as on it: weights given
        # on another scale (normalised to sum 1, or times 1e-3) differ in their last bits, and
        # a group whose midpoint lies exactly on a boundary (common with integer-ratio
        # weights) must not move to another bin with them
        bin_of_group = np.minimum(
            np.floor(self.n_bins * midpoint_share + _EDGE_TOLERANCE).astype(np.int64),
            self.n_bins - 1,
        )
        # renumber the non-empty bins 0, 1, ... (bin numbers rise with the score)
        new_bin = np.ones(distinct.shape[0], dtype=bool)
        new_bin[1:] = bin_of_group[1:] != bin_of_group[:-1]
        used = np.cumsum(new_bin) - 1
        n_used = int(used[-1]) + 1
        bin_weight = np.bincount(used, weights=weight, minlength=n_used)
        bin_label = np.bincount(used, weights=label_sum, minlength=n_used)
        # each bin's prior is centred on the model's own mean probability in the bin (the
        # scores are log-odds): a thin bin keeps what the model says unless its rows say
        # otherwise. (Centred on the overall rate instead, ten bins over 40 rows of a 10-class
        # problem pulled every wrong class of a row toward 1/10 by a third, whatever the model
        # said.) One-vs-rest for one of k classes, the k maps' priors centred on the model's k
        # probabilities of a row add up to one prior worth prior_strength rows on the model's
        # own distribution; only the floor is shared by the k - 1 other classes.
        centre = np.bincount(used, weights=weight * expit(distinct), minlength=n_used) / bin_weight
        strength = float(self.prior_strength) / unit
        self.values_ = np.clip((bin_label + centre * strength) / (bin_weight + strength), 0.0, 1.0)
        upper_first = np.flatnonzero(new_bin)[1:]  # first distinct score of bins 1, 2, ...
        lo, hi = distinct[upper_first - 1], distinct[upper_first]
        mid = lo + 0.5 * (hi - lo)
        # adjacent floating-point scores: the midpoint may round onto the lower score
        self.edges_ = np.where(mid > lo, mid, hi)
        with np.errstate(over="ignore"):
            self.bin_weights_ = bin_weight * unit
        if not np.all(np.isfinite(self.bin_weights_)):
            raise ValueError(
                "`sample_weight` is too large: the total weight of a bin exceeds the largest "
                "double; divide all weights by one constant."
            )
        self.n_bins_used_ = n_used

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        return self.values_[np.searchsorted(self.edges_, scores, side="right")]
