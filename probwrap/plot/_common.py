"""Helpers shared by the display objects."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import label_column, plain

__all__ = ["positive_proba", "binary_labels", "class_proba"]


def class_proba(estimator: Any, X: Any, *, name: str = "estimator") -> np.ndarray:
    """Class probabilities (n, k) from a fitted classifier, columns in ``classes_`` order."""
    if not hasattr(estimator, "predict_proba"):
        raise ValueError(
            f"`{name}` ({type(estimator).__name__}) has no predict_proba; wrap it in "
            "probwrap.CalibrationWrapper to turn its scores into probabilities."
        )
    proba = np.asarray(estimator.predict_proba(X), dtype=float)
    if proba.ndim != 2 or proba.shape[1] < 2:
        raise ValueError(
            f"`{name}`'s predict_proba must return (n, n_classes) probabilities; got shape "
            f"{proba.shape}."
        )
    return proba


def positive_proba(estimator: Any, X: Any, *, name: str = "estimator") -> np.ndarray:
    """Probability of the second class (``classes_[1]``) from a fitted binary classifier."""
    if not hasattr(estimator, "predict_proba"):
        raise ValueError(
            f"`{name}` ({type(estimator).__name__}) has no predict_proba; wrap it in "
            "probwrap.CalibrationWrapper to turn its scores into probabilities."
        )
    proba = np.asarray(estimator.predict_proba(X), dtype=float)
    if proba.ndim != 2 or proba.shape[1] != 2:
        raise ValueError(
            f"`{name}` must be a binary classifier; its predict_proba returned shape "
            f"{proba.shape}."
        )
    return proba[:, 1]


def binary_labels(y: Any, classes: Any = None, *, name: str = "y") -> np.ndarray:
    """Labels as 0/1 floats; ``classes[1]`` (or the larger of two labels) is positive."""
    arr = label_column(y, name)
    if classes is None:
        classes = np.unique(arr)
        if classes.shape[0] > 2:
            raise ValueError(
                f"`{name}` must hold two classes; got {classes.shape[0]}: {classes[:5].tolist()}."
            )
        if classes.shape[0] == 1:
            if classes[0] in (0, 1, True, False):
                return (arr == 1).astype(float)
            raise ValueError(f"`{name}` holds a single class {plain(classes[0])!r}; cannot tell which is positive.")
    classes = np.asarray(classes)
    unknown = ~np.isin(arr, classes)
    if unknown.any():
        raise ValueError(f"`{name}` holds labels not among the classes {classes.tolist()}.")
    return (arr == classes[1]).astype(float)


def estimator_classes(estimator: Any) -> Any:
    return getattr(estimator, "classes_", None)
