"""Checks applied when a map description is read back: plain JSON values, field types, and
fitted tables that make sense as a calibration map (see :mod:`._serialize` for the layout)."""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from typing import Any

import numpy as np

from .._validation import plain
from ._linear_softmax import _check_settings as _check_scaling_settings
from ._temperature import _valid_shrinkage

#: deepest nesting of lists and objects accepted in a description (the layout itself needs 3)
_MAX_DEPTH = 64
#: most values accepted under ``metadata`` (it is free-form, not a data store)
_MAX_NODES = 1_000_000
#: tolerance for monotone tables and ``p0 <= p1`` (floating-point rounding of the fit)
_ORDER_TOL = 1e-12


def _check_plain_tree(value: Any, where: str) -> None:
    """Refuse what JSON cannot hold as written: non-finite or odd numbers, non-string keys, and
    nesting deeper than ``_MAX_DEPTH`` (which also catches a structure that contains itself).
    Walked with an explicit stack, so no depth can exhaust Python's recursion limit."""
    stack: list[tuple[Any, str, int]] = [(value, where, 0)]
    visited = 0
    while stack:
        item, path, depth = stack.pop()
        visited += 1
        if visited > _MAX_NODES:
            raise ValueError(f"{where} holds more than {_MAX_NODES} values.")
        if item is None or isinstance(item, (bool, str, numbers.Integral)):
            continue
        if isinstance(item, numbers.Real):
            if not math.isfinite(float(item)):
                raise ValueError(f"{path} must hold finite numbers; got {float(item)!r}.")
            continue
        if not isinstance(item, (Mapping, list, tuple)):
            raise ValueError(
                f"{path} holds a value of type {type(item).__name__}; only objects, lists, "
                "strings, numbers, booleans and null can be saved."
            )
        if depth >= _MAX_DEPTH:
            raise ValueError(
                f"{where} is nested more than {_MAX_DEPTH} levels deep (or contains itself)."
            )
        if isinstance(item, Mapping):
            for key, sub in item.items():
                if not isinstance(key, str):
                    raise ValueError(f"{path} has a key {plain(key)!r} that is not a string.")
                stack.append((sub, f"{path}.{key}", depth + 1))
        else:
            stack.extend((sub, f"{path}[{i}]", depth + 1) for i, sub in enumerate(item))


def _numbers(value: Any, where: str) -> np.ndarray:
    """A 1-d list of finite numbers (booleans and numeric strings refused) as a float array."""
    if not isinstance(value, (list, tuple)) or any(isinstance(v, (bool, str)) for v in value):
        raise ValueError(f"field '{where}' must be a list of numbers; got {_short(value)}.")
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise ValueError(f"field '{where}' must be a list of numbers; got {_short(value)}.") from None
    if arr.ndim != 1:
        raise ValueError(f"field '{where}' must be a flat list of numbers.")
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"field '{where}' must hold finite numbers.")
    return arr


def _matrix(value: Any, where: str) -> np.ndarray:
    """A non-empty list of equally long lists of finite numbers as a 2-d float array."""
    if not isinstance(value, (list, tuple)) or not value:
        raise ValueError(f"field '{where}' must be a list of lists of numbers; got {_short(value)}.")
    rows = [_numbers(row, f"{where}[{i}]") for i, row in enumerate(value)]
    if len({row.shape[0] for row in rows}) != 1:
        raise ValueError(f"field '{where}' must hold rows of equal length.")
    return np.vstack(rows)


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _check_settings(method: str, m: Any) -> None:
    """Constructor settings as the map's own fit would accept them."""
    if method in ("platt", "beta", "temperature", "isotonic") and not isinstance(
        m.smooth_targets, bool
    ):
        raise ValueError(
            f"field 'settings.smooth_targets' must be true or false; got {plain(m.smooth_targets)!r}."
        )
    if method == "temperature":
        try:
            _valid_shrinkage(m.shrinkage)
        except ValueError as exc:
            raise ValueError(f"field 'settings': {exc}") from None
    if method in ("vector_scaling", "matrix_scaling"):
        try:
            _check_scaling_settings(m)
        except ValueError as exc:
            raise ValueError(f"field 'settings': {exc}") from None
    if method == "binning":
        try:
            m._check_params()
        except ValueError as exc:
            raise ValueError(f"field 'settings': {exc}") from None


def _check_probabilities(m: Any, attrs: tuple[str, ...]) -> None:
    for attr in attrs:
        values = getattr(m, attr)
        if values.size and (values.min() < 0.0 or values.max() > 1.0):
            raise ValueError(
                f"field 'fitted.{attr}' must hold probabilities in [0, 1]; got values from "
                f"{float(values.min()):.6g} to {float(values.max()):.6g}."
            )


def _check_non_decreasing(values: np.ndarray, field: str) -> None:
    drop = np.flatnonzero(np.diff(values) < -_ORDER_TOL)
    if drop.size:
        i = int(drop[0])
        raise ValueError(
            f"field {field} must be non-decreasing (a calibration map never gives a higher score "
            f"a lower probability); entry {i + 1} is {float(values[i + 1]):.6g} after "
            f"{float(values[i]):.6g}."
        )


def _check_meaning(method: str, m: Any) -> None:
    """Fitted tables must describe a calibration map: probabilities, in the right order."""
    if method == "isotonic":
        _check_probabilities(m, ("values_",))
        _check_non_decreasing(m.values_, "'fitted.values_'")
    elif method == "venn_abers":
        _check_probabilities(m, ("p0_at_", "p1_at_", "p0_between_", "p1_between_"))
        for where in ("at_", "between_"):
            gap = getattr(m, f"p0_{where}") - getattr(m, f"p1_{where}")
            if np.any(gap > _ORDER_TOL):
                i = int(np.argmax(gap))
                raise ValueError(
                    f"fields 'fitted.p0_{where}' and 'fitted.p1_{where}' must satisfy p0 <= p1; "
                    f"entry {i} has p0 = {float(getattr(m, f'p0_{where}')[i]):.6g} > p1 = "
                    f"{float(getattr(m, f'p1_{where}')[i]):.6g}."
                )
        for p in ("p0", "p1"):
            # below all thresholds, at the first, between the first two, at the second, ...
            seq = np.empty(2 * m.thresholds_.shape[0] + 1)
            seq[0::2] = getattr(m, f"{p}_between_")
            seq[1::2] = getattr(m, f"{p}_at_")
            _check_non_decreasing(seq, f"'fitted.{p}_between_' / 'fitted.{p}_at_' (interleaved)")
    elif method == "binning":
        _check_probabilities(m, ("values_",))
        if np.any(m.bin_weights_ < 0):
            raise ValueError("field 'fitted.bin_weights_' must hold non-negative weights.")
    elif method == "beta":
        for attr in ("a_", "b_"):
            if getattr(m, attr) < 0:
                raise ValueError(
                    f"field 'fitted.{attr}' must be >= 0 (beta calibration keeps a, b >= 0 so the "
                    f"map is non-decreasing); got {getattr(m, attr)!r}."
                )


def _need(d: Mapping[str, Any], key: str, where: str = "") -> Any:
    if key not in d:
        raise ValueError(f"the map description has no field '{where}{key}'.")
    return d[key]


def _check_shapes(method: str, m: Any) -> None:
    """Array lengths must agree with each other, as the map's predict relies on them."""
    if method in ("isotonic", "venn_abers"):
        m_len = m.thresholds_.shape[0]
        if m_len < 1 or np.any(np.diff(m.thresholds_) <= 0):
            raise ValueError("field 'fitted.thresholds_' must be non-empty and increasing.")
        pairs = (
            {"values_": m_len}
            if method == "isotonic"
            else {"p0_at_": m_len, "p1_at_": m_len, "p0_between_": m_len + 1,
                  "p1_between_": m_len + 1}
        )
        for attr, length in pairs.items():
            if getattr(m, attr).shape[0] != length:
                raise ValueError(f"field 'fitted.{attr}' must have {length} entries.")
    elif method == "binning":
        k = m.values_.shape[0]
        if k < 1 or k != m.n_bins_used_ or m.bin_weights_.shape[0] != k:
            raise ValueError(
                "fields 'fitted.values_', 'fitted.bin_weights_' and 'fitted.n_bins_used_' must "
                "agree on the number of bins."
            )
        if m.edges_.shape[0] != k - 1 or np.any(np.diff(m.edges_) <= 0):
            raise ValueError(
                "field 'fitted.edges_' must hold one increasing edge fewer than there are bins."
            )
    elif method in ("vector_scaling", "matrix_scaling"):
        k = max(m.n_score_columns_, 2)  # binary log-odds are read as two logit columns
        shapes = {"intercepts_": (k,)}
        shapes["scales_" if method == "vector_scaling" else "coef_"] = (
            (k,) if method == "vector_scaling" else (k, k)
        )
        for attr, shape in shapes.items():
            if getattr(m, attr).shape != shape:
                raise ValueError(f"field 'fitted.{attr}' must have shape {shape}.")
    elif method == "temperature" and not m.temperature_ > 0:
        raise ValueError("field 'fitted.temperature_' must be positive.")
