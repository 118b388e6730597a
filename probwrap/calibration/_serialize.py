"""Fitted calibration maps as plain dictionaries (JSON-ready), and back, without loss.

The dictionary holds only numbers, strings, booleans and lists of them, so ``json.dumps`` can
write it and nothing executable is ever read back (unlike pickle). Floats are kept as Python
floats, whose ``repr`` (what ``json`` writes) reads back to the identical double, so a map
rebuilt from its dictionary predicts exactly what the fitted map predicts.

Layout (``schema_version`` 1)::

    {
      "format": "probwrap-map",
      "schema_version": 1,
      "probwrap_version": "0.1.0",
      "method": "platt",                  # one of MAP_NAMES
      "settings": {"smooth_targets": true},   # constructor arguments
      "fitted": {"slope_": 1.7, "intercept_": -0.2},   # fitted attributes
      "classes": [0, 1],
      "classes_kind": "int",              # "int", "float", "bool" or "str"
      "n_score_columns": 1,               # 1 for binary log-odds, k for (n, k) scores
      "metadata": {...}                   # free-form, JSON-ready; ignored when loading
    }
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from typing import Any

import numpy as np

from ._base import CalibrationMap
from ._beta import BetaMap
from ._binning import BinningMap
from ._isotonic import IsotonicMap
from ._platt import PlattMap
from ._temperature import TemperatureMap
from ._vector_scaling import MatrixScalingMap, VectorScalingMap
from ._venn_abers import VennAbersMap

__all__ = ["map_to_dict", "map_from_dict", "MAP_FORMAT", "MAP_SCHEMA_VERSION"]

#: value of the ``"format"`` field
MAP_FORMAT = "probwrap-map"
#: version of the layout written by :func:`map_to_dict`
MAP_SCHEMA_VERSION = 1

#: method name -> (map class, constructor settings, fitted attributes with their kind).
#: Kinds: "float" (a finite number), "int", "array" (a 1-d list of finite numbers), "matrix"
#: (a 2-d list of lists of finite numbers).
_SPECS: dict[str, tuple[type[CalibrationMap], tuple[str, ...], dict[str, str]]] = {
    "temperature": (TemperatureMap, (), {"temperature_": "float"}),
    "platt": (PlattMap, ("smooth_targets",), {"slope_": "float", "intercept_": "float"}),
    "beta": (BetaMap, (), {"a_": "float", "b_": "float", "c_": "float"}),
    "binning": (
        BinningMap,
        ("n_bins", "prior_strength"),
        {"edges_": "array", "values_": "array", "bin_weights_": "array", "n_bins_used_": "int"},
    ),
    "isotonic": (IsotonicMap, (), {"thresholds_": "array", "values_": "array"}),
    "venn_abers": (
        VennAbersMap,
        (),
        {
            "thresholds_": "array",
            "p0_at_": "array",
            "p1_at_": "array",
            "p0_between_": "array",
            "p1_between_": "array",
        },
    ),
    "vector_scaling": (
        VectorScalingMap,
        ("shrinkage", "smooth_targets"),
        {"scales_": "array", "intercepts_": "array"},
    ),
    "matrix_scaling": (
        MatrixScalingMap,
        ("shrinkage", "smooth_targets"),
        {"coef_": "matrix", "intercepts_": "array"},
    ),
}

#: the method names, as accepted by ``CalibrationWrapper(method=...)``
MAP_NAMES = tuple(_SPECS)


def _method_of(cal_map: Any) -> str:
    for name, (cls, _, _) in _SPECS.items():
        if type(cal_map) is cls:
            return name
    own = ", ".join(spec[0].__name__ for spec in _SPECS.values())
    raise ValueError(
        f"`cal_map` must be one of probwrap's own maps ({own}); got {type(cal_map).__name__}."
    )


def _plain(value: Any, where: str) -> Any:
    """A JSON-ready copy of a setting: bool, int, finite float or str."""
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, numbers.Integral):
        return int(value)
    if isinstance(value, numbers.Real):
        if not math.isfinite(float(value)):
            raise ValueError(f"{where} must be finite to be saved; got {value!r}.")
        return float(value)
    if isinstance(value, str):
        return value
    raise ValueError(f"{where} has a value of type {type(value).__name__} that cannot be saved.")


def _classes_kind(classes: np.ndarray) -> str:
    kind = classes.dtype.kind
    if kind == "b":
        return "bool"
    if kind in "iu":
        return "int"
    if kind == "f":
        return "float"
    if kind in "UO" and all(isinstance(c, str) for c in classes.tolist()):
        return "str"
    raise ValueError(
        f"the map's classes must be integers, floats, booleans or strings to be saved; got "
        f"{classes.tolist()!r}."
    )


def map_to_dict(cal_map: CalibrationMap, **metadata: Any) -> dict[str, Any]:
    """Describe a fitted calibration map as a JSON-ready dictionary.

    Parameters
    ----------
    cal_map : CalibrationMap
        A fitted :class:`PlattMap`, :class:`IsotonicMap`, :class:`BetaMap`,
        :class:`TemperatureMap`, :class:`BinningMap`, :class:`VennAbersMap`,
        :class:`VectorScalingMap` or :class:`MatrixScalingMap`.
    **metadata
        Extra JSON-ready facts kept under ``"metadata"`` (for example the scale of the input
        scores); :func:`map_from_dict` ignores them.

    Returns
    -------
    dict
        See the module docstring for the layout.

    Examples
    --------
    >>> import json
    >>> from probwrap.calibration import PlattMap, map_to_dict, map_from_dict
    >>> m = PlattMap().fit([-2.0, -1.0, 0.0, 1.0, 2.0, 3.0], [0, 0, 1, 0, 1, 1])
    >>> d = map_to_dict(m, note="demo")
    >>> d["method"], sorted(d["fitted"])
    ('platt', ['intercept_', 'slope_'])
    >>> again = map_from_dict(json.loads(json.dumps(d)))
    >>> bool((again.predict([0.5, 4.0]) == m.predict([0.5, 4.0])).all())
    True
    """
    method = _method_of(cal_map)
    cls, setting_names, fitted_kinds = _SPECS[method]
    if not hasattr(cal_map, "classes_"):
        raise ValueError(f"`cal_map` ({cls.__name__}) is not fitted; call fit first.")
    from probwrap import __version__

    fitted: dict[str, Any] = {}
    for attr, kind in fitted_kinds.items():
        value = getattr(cal_map, attr)
        if kind == "array":
            arr = np.asarray(value, dtype=float)
            if arr.ndim != 1 or not np.all(np.isfinite(arr)):
                raise ValueError(f"`{attr}` of the map must be a 1-d array of finite numbers.")
            fitted[attr] = arr.tolist()
        elif kind == "matrix":
            arr = np.asarray(value, dtype=float)
            if arr.ndim != 2 or not np.all(np.isfinite(arr)):
                raise ValueError(f"`{attr}` of the map must be a 2-d array of finite numbers.")
            fitted[attr] = arr.tolist()
        elif kind == "int":
            fitted[attr] = int(value)
        else:
            fitted[attr] = _plain(float(value), f"`{attr}` of the map")
    classes = np.asarray(cal_map.classes_)
    kind = _classes_kind(classes)
    out: dict[str, Any] = {
        "format": MAP_FORMAT,
        "schema_version": MAP_SCHEMA_VERSION,
        "probwrap_version": __version__,
        "method": method,
        "settings": {
            name: _plain(getattr(cal_map, name), f"setting `{name}`") for name in setting_names
        },
        "fitted": fitted,
        "classes": [str(c) for c in classes.tolist()] if kind == "str" else classes.tolist(),
        "classes_kind": kind,
        "n_score_columns": int(cal_map.n_score_columns_),
    }
    if metadata:
        out["metadata"] = dict(metadata)
    return out


def _need(d: Mapping[str, Any], key: str, where: str = "") -> Any:
    if key not in d:
        raise ValueError(f"the map description has no field '{where}{key}'.")
    return d[key]


def map_from_dict(description: Mapping[str, Any]) -> CalibrationMap:
    """Rebuild a fitted calibration map from :func:`map_to_dict`'s dictionary.

    Parameters
    ----------
    description : mapping
        As written by :func:`map_to_dict` (possibly after a JSON round trip).

    Returns
    -------
    CalibrationMap
        A fitted map whose ``predict`` gives exactly the values of the map that was saved.

    Raises
    ------
    ValueError
        When the description is not a probwrap map, has an unknown ``schema_version`` or
        ``method``, or misses or mangles a field; the message names the field.

    Examples
    --------
    >>> from probwrap.calibration import IsotonicMap, map_to_dict, map_from_dict
    >>> m = IsotonicMap().fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1])
    >>> map_from_dict(map_to_dict(m)).predict([1.5])
    array([0.75])
    """
    if not isinstance(description, Mapping):
        raise ValueError(
            f"a map description must be a mapping (a JSON object); got {type(description).__name__}."
        )
    if description.get("format") != MAP_FORMAT:
        raise ValueError(
            f"field 'format' must be {MAP_FORMAT!r}; got {description.get('format')!r} (is this "
            "a probwrap map file?)."
        )
    version = _need(description, "schema_version")
    if version != MAP_SCHEMA_VERSION:
        raise ValueError(
            f"field 'schema_version' is {version!r}; this probwrap reads version "
            f"{MAP_SCHEMA_VERSION}."
        )
    method = _need(description, "method")
    if method not in _SPECS:
        raise ValueError(f"field 'method' must be one of {list(_SPECS)}; got {method!r}.")
    cls, setting_names, fitted_kinds = _SPECS[method]
    settings = _need(description, "settings")
    fitted = _need(description, "fitted")
    if not isinstance(settings, Mapping) or not isinstance(fitted, Mapping):
        raise ValueError("fields 'settings' and 'fitted' must be JSON objects.")
    unknown = sorted(set(settings) - set(setting_names))
    if unknown:
        raise ValueError(f"field 'settings' has unknown entries {unknown} for method {method!r}.")
    cal_map = cls(**{name: settings[name] for name in setting_names if name in settings})
    for attr, kind in fitted_kinds.items():
        value = _need(fitted, attr, "fitted.")
        try:
            if kind == "array":
                arr = np.asarray(value, dtype=float)
                if arr.ndim != 1:
                    raise ValueError
            elif kind == "matrix":
                arr = np.asarray(value, dtype=float)
                if arr.ndim != 2:
                    raise ValueError
            elif kind == "int":
                if isinstance(value, bool) or not isinstance(value, numbers.Integral):
                    raise ValueError
                arr = int(value)
            else:
                if isinstance(value, bool) or not isinstance(value, numbers.Real):
                    raise ValueError
                arr = float(value)
        except (TypeError, ValueError):
            what = {"array": "a list of numbers", "matrix": "a list of lists of numbers"}.get(
                kind, "a number"
            )
            raise ValueError(f"field 'fitted.{attr}' must be {what}; got {value!r}.") from None
        if not np.all(np.isfinite(arr)):
            raise ValueError(f"field 'fitted.{attr}' must hold finite numbers.")
        setattr(cal_map, attr, arr)
    kinds = {"int": np.int64, "float": float, "bool": bool, "str": str}
    classes_kind = _need(description, "classes_kind")
    if classes_kind not in kinds:
        raise ValueError(f"field 'classes_kind' must be one of {list(kinds)}; got {classes_kind!r}.")
    classes = _need(description, "classes")
    if not isinstance(classes, list) or len(classes) < 2:
        raise ValueError("field 'classes' must be a list of at least two labels.")
    cal_map.classes_ = np.asarray(classes, dtype=kinds[classes_kind])
    n_cols = _need(description, "n_score_columns")
    if isinstance(n_cols, bool) or not isinstance(n_cols, int) or n_cols < 1:
        raise ValueError(f"field 'n_score_columns' must be a positive integer; got {n_cols!r}.")
    if n_cols == 1 and len(classes) != 2:
        raise ValueError("field 'classes' must hold two labels for a binary map.")
    if n_cols > 1 and (len(classes) != n_cols or not cls.supports_multiclass):
        raise ValueError(
            f"field 'n_score_columns' is {n_cols} but the map is binary or has {len(classes)} "
            "classes."
        )
    cal_map.n_score_columns_ = n_cols
    cal_map.n_classes_ = len(classes)
    _check_shapes(method, cal_map)
    return cal_map


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
