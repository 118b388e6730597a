"""Warning classes of the checks a cost policy makes on its own held-out decisions."""

from __future__ import annotations

__all__ = ["PlugInCostAboveOneActionWarning"]


class PlugInCostAboveOneActionWarning(UserWarning):
    """A frozen model's plug-in decisions cost more, on the rows given to ``fit``, than taking
    one action for every row (by more than two standard errors of the paired row differences).

    Raised by ``CostPolicyWrapper(FrozenEstimator(model), costs=...)`` with the default
    ``strategy="bayes"``: every row given to ``fit`` is held out from the frozen model, and on
    them the model's own probabilities led to costlier decisions than the simplest rule. The
    fitted rule is not changed.

    Examples
    --------
    >>> import warnings
    >>> from probwrap.decision import PlugInCostAboveOneActionWarning
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("error", PlugInCostAboveOneActionWarning)
    ...     issubclass(PlugInCostAboveOneActionWarning, UserWarning)
    True
    """
