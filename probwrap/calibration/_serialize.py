"""Fitted calibration maps as plain dictionaries (JSON-ready), and back, without loss.

The dictionary holds only numbers, strings, booleans and lists of them, so ``json.dumps`` can
write it and nothing executable is ever read back (unlike pickle). Floats are kept as Python
floats, whose ``repr`` (what ``json`` writes) reads back to the identical double, so a map
rebuilt from its dictionary predicts exactly what the fitted map predicts.

Layout (``schema_version`` 2)::

    {
      "format": "probwrap-map",
      "schema_version": 2,
      "probwrap_version": "0.1.0",
      "score_scale": "proba",             # what the saved scores are: "proba" or "log-odds"
      "method": "platt",                  # one of MAP_NAMES
      "settings": {"smooth_targets": true},   # constructor arguments
      "fitted": {"slope_": 1.7, "intercept_": -0.2},   # fitted attributes
      "classes": [0, 1],
      "classes_kind": "int",              # "int", "float", "bool" or "str"
      "n_score_columns": 1,               # 1 for binary log-odds, k for (n, k) scores
      "metadata": {...}                   # free-form JSON object; checked, otherwise ignored
    }

``score_scale`` is required: a map always takes log-odds, but a file is applied to a column of
scores, and probabilities read as log-odds give silently wrong answers. ``"proba"`` means the
scores are positive-class probabilities, turned into log-odds with
:func:`~probwrap.calibration.proba_to_log_odds` before the map; ``"log-odds"`` means they are
given to the map as they are. Version 1 files kept it (when at all) as ``metadata.score_scale``.

Reading checks meaning as well as shape: fitted tables must be finite, probabilities in [0, 1],
isotonic and Venn-Abers tables non-decreasing with ``p0 <= p1``, beta coefficients ``a, b >= 0``
and the temperature positive, so a hand-edited or damaged file is refused with a message naming
the field instead of being applied.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from typing import Any

import numpy as np

from .._validation import plain
from ._base import CalibrationMap
from ._beta import BetaMap
from ._binning import BinningMap
from ._identity import IdentityMap
from ._isotonic import IsotonicMap
from ._platt import PlattMap
from ._serialize_checks import (
    _check_meaning,
    _check_plain_tree,
    _check_settings,
    _check_shapes,
    _matrix,
    _need,
    _numbers,
    _short,
)
from ._temperature import TemperatureMap
from ._vector_scaling import MatrixScalingMap, VectorScalingMap
from ._venn_abers import VennAbersMap

__all__ = [
    "map_to_dict",
    "map_from_dict",
    "map_score_scale",
    "MAP_FORMAT",
    "MAP_SCHEMA_VERSION",
    "MAP_SCORE_SCALES",
]

#: value of the ``"format"`` field
MAP_FORMAT = "probwrap-map"
#: version of the layout written by :func:`map_to_dict`
MAP_SCHEMA_VERSION = 2
#: versions :func:`map_from_dict` reads
_READABLE_VERSIONS = (1, 2)
#: accepted values of the ``"score_scale"`` field
MAP_SCORE_SCALES = ("proba", "log-odds")

#: method name -> (map class, constructor settings, fitted attributes with their kind).
#: Kinds: "float" (a finite number), "int", "array" (a 1-d list of finite numbers), "matrix"
#: (a 2-d list of lists of finite numbers), "floor" (the output floor of a regularised map: a
#: number in [0, 0.5); 0 when absent, as written before maps had floors), "limits" (a pair
#: [low, high] of finite numbers with low < high, or null; when absent, as written before
#: Platt's limits were two-sided, the map recomputes the symmetric limit of its floor).
_SPECS: dict[str, tuple[type[CalibrationMap], tuple[str, ...], dict[str, str]]] = {
    "temperature": (
        TemperatureMap,
        ("smooth_targets", "shrinkage"),
        {"temperature_": "float", "floor_": "floor"},
    ),
    "platt": (
        PlattMap,
        ("smooth_targets", "limit_scores"),
        {"slope_": "float", "intercept_": "float", "floor_": "floor", "score_limits_": "limits"},
    ),
    "beta": (
        BetaMap,
        ("smooth_targets",),
        {"a_": "float", "b_": "float", "c_": "float", "floor_": "floor"},
    ),
    "binning": (
        BinningMap,
        ("n_bins", "prior_strength"),
        {
            "edges_": "array",
            "values_": "array",
            "bin_weights_": "array",
            "n_bins_used_": "int",
            "floor_": "floor",
        },
    ),
    "isotonic": (
        IsotonicMap,
        ("smooth_targets",),
        {"thresholds_": "array", "values_": "array", "floor_": "floor"},
    ),
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
    "identity": (IdentityMap, (), {"floor_": "floor"}),
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
            raise ValueError(f"{where} must be finite to be saved; got {plain(value)!r}.")
        return float(value)
    if isinstance(value, str):
        return value
    raise ValueError(f"{where} has a value of type {type(value).__name__} that cannot be saved.")


def _limits(value: Any, where: str) -> tuple[float, float] | None:
    """A saved ``[low, high]`` pair (or null) as a tuple of floats (or None)."""
    if value is None:
        return None
    pair = _numbers(value, where)
    if pair.shape != (2,) or not pair[0] < pair[1]:
        raise ValueError(f"field '{where}' must be null or a pair [low, high] with low < high; got {_short(value)}.")
    return float(pair[0]), float(pair[1])


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


def _check_scale(value: Any, where: str) -> str:
    if not isinstance(value, str) or value not in MAP_SCORE_SCALES:
        raise ValueError(f"{where} must be one of {list(MAP_SCORE_SCALES)}; got {plain(value)!r}.")
    return value


def map_to_dict(
    cal_map: CalibrationMap, *, score_scale: str | None = None, **metadata: Any
) -> dict[str, Any]:
    """Describe a fitted calibration map as a JSON-ready dictionary.

    Parameters
    ----------
    cal_map : CalibrationMap
        A fitted :class:`PlattMap`, :class:`IsotonicMap`, :class:`BetaMap`,
        :class:`TemperatureMap`, :class:`BinningMap`, :class:`VennAbersMap`,
        :class:`VectorScalingMap` or :class:`MatrixScalingMap`.
    score_scale : {"proba", "log-odds"}
        Required. What the scores that the saved map will be applied to are: ``"proba"`` for
        positive-class probabilities (turned into log-odds with
        :func:`~probwrap.calibration.proba_to_log_odds` before the map, as the map was fitted),
        ``"log-odds"`` for scores given to the map as they are. Multiclass maps take logits or
        log-probabilities; use ``"log-odds"`` for them.
    **metadata
        Extra JSON-ready facts kept under ``"metadata"`` (numbers must be finite; nesting at
        most 64 levels); :func:`map_from_dict` checks and otherwise ignores them.

    Returns
    -------
    dict
        See the module docstring for the layout.

    Examples
    --------
    >>> import json
    >>> from probwrap.calibration import PlattMap, map_to_dict, map_from_dict
    >>> m = PlattMap().fit([-2.0, -1.0, 0.0, 1.0, 2.0, 3.0], [0, 0, 1, 0, 1, 1])
    >>> d = map_to_dict(m, score_scale="log-odds", note="demo")
    >>> d["method"], d["score_scale"], sorted(d["fitted"])
    ('platt', 'log-odds', ['floor_', 'intercept_', 'score_limits_', 'slope_'])
    >>> again = map_from_dict(json.loads(json.dumps(d)))
    >>> bool((again.predict([0.5, 4.0]) == m.predict([0.5, 4.0])).all())
    True
    """
    method = _method_of(cal_map)
    cls, setting_names, fitted_kinds = _SPECS[method]
    if not hasattr(cal_map, "classes_"):
        raise ValueError(f"`cal_map` ({cls.__name__}) is not fitted; call fit first.")
    if score_scale is None:
        raise ValueError(
            f"`score_scale` is required: one of {list(MAP_SCORE_SCALES)}, saying whether the "
            "scores the saved map will be applied to are probabilities or log-odds."
        )
    _check_scale(score_scale, "`score_scale`")
    if method == "venn_abers" and getattr(cal_map, "_rest_classes", 1) != 1:
        # its merge shares the interval's width among the k - 1 other classes of the
        # one-vs-rest fit it belongs to; saved alone it would predict as a binary map
        raise ValueError(
            "`cal_map` is one class's map of a one-vs-rest Venn-Abers fit, whose merged "
            "probability depends on the other classes; only binary maps can be saved."
        )
    _check_plain_tree(dict(metadata), "`metadata`")
    from .._version import __version__

    fitted: dict[str, Any] = {}
    for attr, kind in fitted_kinds.items():
        value = getattr(cal_map, attr, 0.0) if kind == "floor" else getattr(cal_map, attr, None)
        if kind == "limits":
            fitted[attr] = None if value is None else [
                _plain(float(v), f"`{attr}` of the map") for v in value
            ]
        elif kind == "array":
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
        "score_scale": score_scale,
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


def map_score_scale(description: Mapping[str, Any], *, score_scale: str | None = None) -> str:
    """The score scale a saved map is to be applied on.

    Parameters
    ----------
    description : mapping
        As written by :func:`map_to_dict`.
    score_scale : {"proba", "log-odds"}, default=None
        The scale to use when the description does not state one (a version 1 file without
        ``metadata.score_scale``, or a hand-written one). When the description does state one,
        it must agree.

    Returns
    -------
    str
        ``"proba"`` or ``"log-odds"``.

    Raises
    ------
    ValueError
        When the description states no scale and none is given, when either is not one of
        ``MAP_SCORE_SCALES``, or when the two disagree.

    Examples
    --------
    >>> from probwrap.calibration import PlattMap, map_to_dict, map_score_scale
    >>> d = map_to_dict(PlattMap().fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1]), score_scale="proba")
    >>> map_score_scale(d)
    'proba'
    >>> del d["score_scale"]
    >>> map_score_scale(d, score_scale="log-odds")
    'log-odds'
    """
    if not isinstance(description, Mapping):
        raise ValueError(
            f"a map description must be a mapping (a JSON object); got {type(description).__name__}."
        )
    if score_scale is not None:
        _check_scale(score_scale, "`score_scale`")
    stated, field = description.get("score_scale"), "score_scale"
    metadata = description.get("metadata")
    if stated is None and description.get("schema_version") == 1 and isinstance(metadata, Mapping):
        # version 1 kept the scale (when the command line wrote the file) among the metadata
        stated, field = metadata.get("score_scale"), "metadata.score_scale"
    if stated is None:
        if score_scale is None:
            raise ValueError(
                "the map description has no field 'score_scale': it does not say whether the "
                f"scores are probabilities or log-odds; state it (one of {list(MAP_SCORE_SCALES)})."
            )
        return score_scale
    _check_scale(stated, f"field {plain(field)!r}")
    if score_scale is not None and score_scale != stated:
        raise ValueError(
            f"`score_scale` is {plain(score_scale)!r} but field {plain(field)!r} of the map says {plain(stated)!r}."
        )
    return stated


def map_from_dict(
    description: Mapping[str, Any], *, score_scale: str | None = None
) -> CalibrationMap:
    """Rebuild a fitted calibration map from :func:`map_to_dict`'s dictionary.

    Parameters
    ----------
    description : mapping
        As written by :func:`map_to_dict` (possibly after a JSON round trip).
    score_scale : {"proba", "log-odds"}, default=None
        Only for descriptions that do not state their score scale (see
        :func:`map_score_scale`); a description without one is refused unless it is given.

    Returns
    -------
    CalibrationMap
        A fitted map whose ``predict`` gives exactly the values of the map that was saved.

    Raises
    ------
    ValueError
        When the description is not a probwrap map, has an unknown ``schema_version`` or
        ``method``, states no score scale, or misses or mangles a field, or when a fitted table
        makes no sense as a calibration map (values outside [0, 1], a decreasing isotonic or
        Venn-Abers table, ``p0 > p1``, a negative beta coefficient, a non-positive temperature);
        the message names the field.

    Examples
    --------
    >>> from probwrap.calibration import IsotonicMap, map_to_dict, map_from_dict
    >>> m = IsotonicMap().fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1])
    >>> map_from_dict(map_to_dict(m, score_scale="log-odds")).predict([1.5])
    array([0.625])
    """
    if not isinstance(description, Mapping):
        raise ValueError(
            f"a map description must be a mapping (a JSON object); got {type(description).__name__}."
        )
    if description.get("format") != MAP_FORMAT:
        raise ValueError(
            f"field 'format' must be {plain(MAP_FORMAT)!r}; got {_short(description.get('format'))} (is "
            "this a probwrap map file?)."
        )
    version = _need(description, "schema_version")
    if isinstance(version, bool) or version not in _READABLE_VERSIONS:
        raise ValueError(
            f"field 'schema_version' is {_short(version)}; this probwrap reads versions "
            f"{list(_READABLE_VERSIONS)}."
        )
    if "metadata" in description:
        if not isinstance(description["metadata"], Mapping):
            raise ValueError(
                "field 'metadata' must be a JSON object; got "
                f"{type(description['metadata']).__name__}."
            )
        _check_plain_tree(description["metadata"], "field 'metadata'")
    map_score_scale(description, score_scale=score_scale)
    method = _need(description, "method")
    if not isinstance(method, str) or method not in _SPECS:
        raise ValueError(f"field 'method' must be one of {list(_SPECS)}; got {_short(method)}.")
    cls, setting_names, fitted_kinds = _SPECS[method]
    settings = _need(description, "settings")
    fitted = _need(description, "fitted")
    if not isinstance(settings, Mapping) or not isinstance(fitted, Mapping):
        raise ValueError("fields 'settings' and 'fitted' must be JSON objects.")
    unknown = sorted(str(k) for k in set(settings) - set(setting_names))
    if unknown:
        raise ValueError(f"field 'settings' has unknown entries {unknown} for method {plain(method)!r}.")
    for name in setting_names:
        if name in settings:
            value = settings[name]
            if not (value is None or isinstance(value, (bool, str, numbers.Real))) or (
                isinstance(value, float) and not math.isfinite(value)
            ):
                raise ValueError(f"field 'settings.{name}' must be a plain value; got {_short(value)}.")
    cal_map = cls(**{name: settings[name] for name in setting_names if name in settings})
    _check_settings(method, cal_map)
    for attr, kind in fitted_kinds.items():
        if kind == "floor" and attr not in fitted:
            setattr(cal_map, attr, 0.0)
            continue
        if kind == "limits":
            if attr in fitted:
                setattr(cal_map, attr, _limits(fitted[attr], f"fitted.{attr}"))
            continue
        value = _need(fitted, attr, "fitted.")
        if kind == "array":
            setattr(cal_map, attr, _numbers(value, f"fitted.{attr}"))
            continue
        if kind == "matrix":
            setattr(cal_map, attr, _matrix(value, f"fitted.{attr}"))
            continue
        if kind == "int":
            if isinstance(value, bool) or not isinstance(value, numbers.Integral):
                raise ValueError(f"field 'fitted.{attr}' must be a whole number; got {_short(value)}.")
            setattr(cal_map, attr, int(value))
            continue
        if isinstance(value, bool) or not isinstance(value, numbers.Real):
            raise ValueError(f"field 'fitted.{attr}' must be a number; got {_short(value)}.")
        if not math.isfinite(float(value)):
            raise ValueError(f"field 'fitted.{attr}' must hold finite numbers.")
        if kind == "floor" and not 0.0 <= float(value) < 0.5:
            raise ValueError(f"field 'fitted.{attr}' must be in [0, 0.5); got {_short(value)}.")
        setattr(cal_map, attr, float(value))
    kinds = {"int": np.int64, "float": float, "bool": bool, "str": str}
    kind_types = {
        "int": numbers.Integral, "float": numbers.Real, "bool": bool, "str": str,
    }
    classes_kind = _need(description, "classes_kind")
    if not isinstance(classes_kind, str) or classes_kind not in kinds:
        raise ValueError(
            f"field 'classes_kind' must be one of {list(kinds)}; got {_short(classes_kind)}."
        )
    classes = _need(description, "classes")
    if not isinstance(classes, list) or len(classes) < 2:
        raise ValueError("field 'classes' must be a list of at least two labels.")
    for c in classes:
        ok = isinstance(c, kind_types[classes_kind]) and (
            classes_kind == "bool" or not isinstance(c, bool)
        )
        if not ok or (isinstance(c, float) and not math.isfinite(c)):
            raise ValueError(
                f"field 'classes' must hold {classes_kind} labels (field 'classes_kind'); got "
                f"{_short(c)}."
            )
    cal_map.classes_ = np.asarray(classes, dtype=kinds[classes_kind])
    if np.unique(cal_map.classes_).shape[0] != len(classes):
        raise ValueError("field 'classes' must not repeat a label.")
    n_cols = _need(description, "n_score_columns")
    if isinstance(n_cols, bool) or not isinstance(n_cols, int) or n_cols < 1:
        raise ValueError(f"field 'n_score_columns' must be a positive integer; got {_short(n_cols)}.")
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
    _check_meaning(method, cal_map)
    return cal_map
