"""Already-computed scores as a fitted binary "model", so that the wrappers can be run on them.

The command line calibrates score files and ``CostPolicyWrapper(strategy="tuned")`` recalibrates
held-out probabilities with :class:`probwrap.CalibrationWrapper` on a frozen model whose output
is the first column of ``X``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin

__all__ = ["LogOddsColumn", "ProbabilityColumn"]


class LogOddsColumn(ClassifierMixin, BaseEstimator):
    """A fitted "model" whose decision function is the first column of ``X`` (log-odds): its
    own output is not a probability, so ``auto`` does not offer to keep it."""

    def fit(self, X: Any = None, y: Any = None) -> LogOddsColumn:
        self.classes_ = np.array([0, 1])
        return self

    def decision_function(self, X: Any) -> np.ndarray:
        return np.asarray(X, dtype=float)[:, 0]


class ProbabilityColumn(ClassifierMixin, BaseEstimator):
    """A fitted "model" whose probability of class 1 is the first column of ``X``: ``auto`` can
    keep it (the ``identity`` map)."""

    def fit(self, X: Any = None, y: Any = None) -> ProbabilityColumn:
        self.classes_ = np.array([0, 1])
        self.n_features_in_ = 1
        return self

    def predict_proba(self, X: Any) -> np.ndarray:
        q = np.asarray(X, dtype=float)[:, 0]
        return np.column_stack([1.0 - q, q])

    def predict(self, X: Any) -> np.ndarray:
        return (np.asarray(X, dtype=float)[:, 0] > 0.5).astype(int)
