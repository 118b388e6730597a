"""Scale: mergeable score tallies, and Dask input to the wrappers.

A :class:`ScoreTally` holds weighted label counts per fine bin of the log-odds scale. Tallies of
disjoint chunks merge by addition, so data of any size — NumPy chunks, or Dask arrays and
DataFrames on a cluster — reduce to a tally that fits in memory. :meth:`ScoreTally.to_rows`
turns it into weighted rows that the calibration maps, the cutoff search, the metrics and the
prior estimators accept through their ``sample_weight``.

The core of this module needs only NumPy; Dask is imported only when Dask input is given.
"""

from .._validation import plain
from ._build import tally_scores
from ._tally import DEFAULT_RESOLUTION, ScoreTally, merge_tallies

__all__ = ["DEFAULT_RESOLUTION", "ScoreTally", "merge_tallies", "tally_scores", "tally_model"]


def tally_model(estimator, X, y=None, *, sample_weight=None, response="predict_proba",
                resolution=DEFAULT_RESOLUTION) -> ScoreTally:
    """Tally a fitted binary classifier's log-odds on Dask rows ``X``, block by block.

    Parameters
    ----------
    estimator : fitted binary classifier
        Used as is (for example a :class:`~sklearn.frozen.FrozenEstimator`).
    X : dask array or dask DataFrame
        Rows, in whatever form the estimator accepts per block.
    y : dask array / Series or array-like, default=None
        Labels (from ``estimator.classes_``), partitioned like ``X``; None for unlabelled rows.
    sample_weight : dask array / Series or array-like, default=None
    response : {"predict_proba", "decision_function"}, default="predict_proba"
        Probabilities become log-odds ``log p1 - log p0``; decision values are used as they are.
    resolution : float, default=1e-3

    Returns
    -------
    ScoreTally
        Labels are indices into ``estimator.classes_``.
    """
    from ._dask import dask_tally_of_model, is_dask_collection
    from ._tally import _check_resolution

    if not is_dask_collection(X):
        raise ValueError(f"`X` must be a Dask array or DataFrame; got {type(X).__name__}.")
    if response not in ("predict_proba", "decision_function"):
        raise ValueError(
            f"`response` must be 'predict_proba' or 'decision_function'; got {plain(response)!r}."
        )
    if len(getattr(estimator, "classes_", ())) != 2:
        raise ValueError("`estimator` must be a fitted binary classifier (two classes_).")
    return dask_tally_of_model(
        estimator, response, X, y, sample_weight, resolution=_check_resolution(resolution)
    )
