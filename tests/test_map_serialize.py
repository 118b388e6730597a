"""Saved calibration maps: exact JSON round trip for every map, and clear errors."""

from __future__ import annotations

import json

import numpy as np
import pytest

from probwrap._calibration_wrapper import CALIBRATION_METHODS
from probwrap.calibration import (
    BetaMap,
    BinningMap,
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    VennAbersMap,
    map_from_dict,
    map_to_dict,
)
from probwrap.calibration._serialize import MAP_NAMES

MAPS = [
    PlattMap(),
    PlattMap(smooth_targets=False),
    BetaMap(),
    TemperatureMap(),
    IsotonicMap(),
    BinningMap(n_bins=7, prior_strength=0.5),
    VennAbersMap(),
]


def _data(n=400, seed=0):
    rng = np.random.default_rng(seed)
    s = np.round(rng.normal(scale=2.0, size=n), 2)  # rounding makes ties
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-0.7 * s + 0.3))).astype(int)
    return s, y


def _through_json(d):
    return json.loads(json.dumps(d, allow_nan=False))


def test_method_names_match_the_wrapper():
    assert set(MAP_NAMES) == set(CALIBRATION_METHODS)
    for name in MAP_NAMES:
        fitted = CALIBRATION_METHODS[name]().fit(*_data(50))
        assert map_to_dict(fitted)["method"] == name


@pytest.mark.parametrize("cal_map", MAPS, ids=lambda m: repr(m))
def test_round_trip_predicts_identically(cal_map):
    s, y = _data()
    w = np.random.default_rng(1).integers(1, 4, size=s.shape[0]).astype(float)
    fitted = cal_map.fit(s, y, sample_weight=w)
    again = map_from_dict(_through_json(map_to_dict(fitted)))
    assert type(again) is type(fitted)
    assert again.get_params() == fitted.get_params()
    # training scores (ties, thresholds), points between them and far outside the range
    probe = np.concatenate([s, s + 1e-3, np.linspace(-40, 40, 801), [-1e6, 1e6]])
    np.testing.assert_array_equal(again.predict(probe), fitted.predict(probe))
    np.testing.assert_array_equal(again.classes_, fitted.classes_)
    if isinstance(fitted, VennAbersMap):
        np.testing.assert_array_equal(again.predict_interval(probe), fitted.predict_interval(probe))


def test_multiclass_temperature_and_string_classes():
    rng = np.random.default_rng(2)
    z = rng.normal(size=(300, 3)) * 3
    y = np.array(["hold", "repack", "ship"])[np.argmax(z + rng.gumbel(size=z.shape), axis=1)]
    fitted = TemperatureMap().fit(z, y)
    d = _through_json(map_to_dict(fitted))
    assert d["classes"] == ["hold", "repack", "ship"] and d["n_score_columns"] == 3
    again = map_from_dict(d)
    np.testing.assert_array_equal(again.predict(z), fitted.predict(z))
    assert again.classes_.tolist() == ["hold", "repack", "ship"]


def test_layout_and_metadata():
    s, y = _data()
    d = map_to_dict(PlattMap().fit(s, y + 1), score_scale="proba")
    assert d["format"] == "probwrap-map" and d["schema_version"] == 1
    assert d["classes"] == [1, 2] and d["classes_kind"] == "int"
    assert d["metadata"] == {"score_scale": "proba"}
    assert d["settings"] == {"smooth_targets": True}
    assert isinstance(d["fitted"]["slope_"], float)


def test_unfitted_and_foreign_maps_are_refused():
    with pytest.raises(ValueError, match="not fitted"):
        map_to_dict(PlattMap())

    class MyMap(PlattMap):
        pass

    with pytest.raises(ValueError, match="probwrap's own maps"):
        map_to_dict(MyMap().fit(*_data(50)))


@pytest.mark.parametrize(
    ("change", "message"),
    [
        (lambda d: d.update(format="something-else"), "field 'format'"),
        (lambda d: d.update(schema_version=99), "schema_version"),
        (lambda d: d.update(method="magic"), "field 'method'"),
        (lambda d: d["fitted"].pop("values_"), "fitted.values_"),
        (lambda d: d["fitted"].update(values_="high"), "fitted.values_"),
        (lambda d: d["fitted"]["values_"].pop(), "fitted.values_' must have"),
        (lambda d: d["fitted"]["thresholds_"].reverse(), "increasing"),
        (lambda d: d.update(classes=[0]), "field 'classes'"),
        (lambda d: d.update(classes_kind="complex"), "classes_kind"),
        (lambda d: d["settings"].update(colour="red"), "unknown entries"),
        (lambda d: d.pop("n_score_columns"), "n_score_columns"),
    ],
)
def test_malformed_descriptions_name_the_field(change, message):
    d = _through_json(map_to_dict(IsotonicMap().fit(*_data())))
    change(d)
    with pytest.raises(ValueError, match=message):
        map_from_dict(d)


def test_binning_shapes_checked():
    d = _through_json(map_to_dict(BinningMap(n_bins=5).fit(*_data())))
    d["fitted"]["edges_"] = d["fitted"]["edges_"][:-1]
    with pytest.raises(ValueError, match="edges_"):
        map_from_dict(d)
