"""The class shares of ``CalibrationWrapper(method="auto")`` for more than two classes: the
constant prediction of the held-out class shares, scored on the same folds as the candidate
maps and used (frozen models) when every eligible map scores worse beyond a standard error.

The binary entry lives in :mod:`._calibration_auto` (``_AutoChoice._class_share``: the mean of
Platt's 1999 smoothed targets). Here the same rule for ``k`` classes: every row of class ``c``
(weighted count ``N_c``) has the smoothed target ``(N_c + 1) / (N_c + 2)`` on its class and
``1 / (N_c + 2)`` shared evenly among the other ``k - 1`` classes (the targets of
:class:`~probwrap.calibration.VectorScalingMap` with ``smooth_targets=True``; for two classes
exactly Platt's), and the class shares are the weighted means of those targets:

    share_j = (N_j (N_j + 1) / (N_j + 2) + sum_{c != j} N_c / ((N_c + 2) (k - 1))) / N

They differ from the weighted label frequencies ``N_j / N`` by less than ``1 / N`` and are never
0, so a class that a fold's other rows lack still gets a finite log loss.
"""

from __future__ import annotations

import warnings

import numpy as np

from .calibration._vector_scaling import VectorScalingMap

__all__: list[str] = []

#: ``method_notes_["class_shares"]`` when a class has no held-out rows (of weight > 0): the
#: class shares are then not scored. The rows say nothing about that class, and a class share
#: of about ``1 / N`` would replace the model's own probability for it, which the maps keep
#: (docs/calibration.md, "Multiclass").
ABSENT_CLASS_NOTE = (
    "not scored: a class has no held-out rows, so the class shares would say nothing about it "
    "(the maps keep the model's own probability for such a class)"
)


def smoothed_class_shares(y: np.ndarray, w: np.ndarray, k: int) -> np.ndarray:
    """The ``k`` class shares of rows ``y`` (class indices) with count-scale weights ``w``:
    weighted means of the smoothed targets (module docstring). Sums to 1.

    Examples
    --------
    >>> import numpy as np
    >>> smoothed_class_shares(np.array([0, 0, 1, 2]), np.ones(4), 3).round(4)
    array([0.4583, 0.2708, 0.2708])
    """
    y = np.asarray(y, dtype=np.intp)
    w = np.asarray(w, dtype=float)
    counts = np.bincount(y, weights=w, minlength=k)
    total = float(counts.sum())
    kept = counts * (counts + 1.0) / (counts + 2.0)  # each class's weight on its own class
    given = counts / (counts + 2.0) / (k - 1)  # ... and on each of the other classes
    shares = (kept + (given.sum() - given)) / total
    return shares / shares.sum()


def class_shares_losses(y: np.ndarray, w: np.ndarray, fold_masks, k: int) -> np.ndarray:
    """Out-of-fold log loss per row of the class shares fitted on each fold's other rows."""
    out = np.empty(y.shape[0])
    for _, test in fold_masks:
        shares = smoothed_class_shares(y[~test], w[~test], k)
        out[test] = -np.log(shares[y[test]])
    return out


def class_shares_map(scores: np.ndarray, y_index: np.ndarray, w: np.ndarray,
                     fit_map) -> VectorScalingMap:
    """A vector-scaling map held at the class shares: fitted by ``fit_map`` (the wrapper's
    ``_fit_map``) on the held-out rows for its bookkeeping, then every scale set to 0 and the
    intercepts to the centred logarithms of :func:`smoothed_class_shares`, so that every row
    gets the shares; saved and applied as any vector-scaling map."""
    k = scores.shape[1]
    with warnings.catch_warnings():
        # the fit's own warnings (scores that separate the classes) concern the scales, which
        # are then set to 0
        warnings.simplefilter("ignore")
        m = fit_map(VectorScalingMap(), scores, y_index, w)
    log_shares = np.log(smoothed_class_shares(y_index, w, k))
    m.scales_ = np.zeros(k)
    m.intercepts_ = log_shares - log_shares.mean()
    m.boundary_ = None
    return m
