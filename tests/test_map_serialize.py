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
    map_score_scale,
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
        assert map_to_dict(fitted, score_scale="log-odds")["method"] == name


@pytest.mark.parametrize("cal_map", MAPS, ids=lambda m: repr(m))
def test_round_trip_predicts_identically(cal_map):
    s, y = _data()
    w = np.random.default_rng(1).integers(1, 4, size=s.shape[0]).astype(float)
    fitted = cal_map.fit(s, y, sample_weight=w)
    again = map_from_dict(_through_json(map_to_dict(fitted, score_scale="log-odds")))
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
    d = _through_json(map_to_dict(fitted, score_scale="log-odds"))
    assert d["classes"] == ["hold", "repack", "ship"] and d["n_score_columns"] == 3
    again = map_from_dict(d)
    np.testing.assert_array_equal(again.predict(z), fitted.predict(z))
    assert again.classes_.tolist() == ["hold", "repack", "ship"]


def test_layout_and_metadata():
    s, y = _data()
    d = map_to_dict(PlattMap().fit(s, y + 1), score_scale="proba", source="held-out")
    assert d["format"] == "probwrap-map" and d["schema_version"] == 2
    assert d["score_scale"] == "proba"
    assert d["classes"] == [1, 2] and d["classes_kind"] == "int"
    assert d["metadata"] == {"source": "held-out"}
    assert d["settings"] == {"smooth_targets": True, "limit_scores": False}
    assert isinstance(d["fitted"]["slope_"], float)


def test_unfitted_and_foreign_maps_are_refused():
    with pytest.raises(ValueError, match="not fitted"):
        map_to_dict(PlattMap(), score_scale="log-odds")

    class MyMap(PlattMap):
        pass

    with pytest.raises(ValueError, match="probwrap's own maps"):
        map_to_dict(MyMap().fit(*_data(50)), score_scale="log-odds")


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
    d = _through_json(map_to_dict(IsotonicMap().fit(*_data()), score_scale="log-odds"))
    change(d)
    with pytest.raises(ValueError, match=message):
        map_from_dict(d)


def test_binning_shapes_checked():
    d = _through_json(map_to_dict(BinningMap(n_bins=5).fit(*_data()), score_scale="log-odds"))
    d["fitted"]["edges_"] = d["fitted"]["edges_"][:-1]
    with pytest.raises(ValueError, match="edges_"):
        map_from_dict(d)


# -- the score scale is a required field -----------------------------------------------------------
def test_score_scale_is_required_when_writing():
    with pytest.raises(ValueError, match="`score_scale` is required"):
        map_to_dict(PlattMap().fit(*_data(50)))
    with pytest.raises(ValueError, match="`score_scale` must be one of"):
        map_to_dict(PlattMap().fit(*_data(50)), score_scale="probability")


def test_a_file_without_score_scale_is_refused_unless_stated():
    fitted = IsotonicMap().fit(*_data())
    d = _through_json(map_to_dict(fitted, score_scale="proba"))
    del d["score_scale"]
    with pytest.raises(ValueError, match="no field 'score_scale'"):
        map_from_dict(d)
    with pytest.raises(ValueError, match="no field 'score_scale'"):
        map_score_scale(d)
    again = map_from_dict(d, score_scale="proba")
    np.testing.assert_array_equal(again.predict([-1.0, 0.3]), fitted.predict([-1.0, 0.3]))
    assert map_score_scale(d, score_scale="log-odds") == "log-odds"


def test_stated_and_given_score_scales_must_agree():
    d = _through_json(map_to_dict(IsotonicMap().fit(*_data()), score_scale="proba"))
    assert map_score_scale(d) == map_score_scale(d, score_scale="proba") == "proba"
    with pytest.raises(ValueError, match="says 'proba'"):
        map_from_dict(d, score_scale="log-odds")
    d["score_scale"] = "percent"
    with pytest.raises(ValueError, match="field 'score_scale' must be one of"):
        map_from_dict(d)


def test_version_1_files_keep_their_metadata_scale():
    d = _through_json(map_to_dict(PlattMap().fit(*_data()), score_scale="proba"))
    del d["score_scale"]
    d["schema_version"] = 1
    d["metadata"] = {"score_scale": "proba"}
    assert map_score_scale(d) == "proba"
    map_from_dict(d)
    del d["metadata"]  # a version 1 file written without it: refused, not read as log-odds
    with pytest.raises(ValueError, match="no field 'score_scale'"):
        map_from_dict(d)


# -- meaning is checked when reading ---------------------------------------------------------------
def _saved(cal_map, data=None):
    return _through_json(map_to_dict(cal_map.fit(*(data or _data())), score_scale="log-odds"))


def test_reversed_isotonic_table_is_refused():
    d = _saved(IsotonicMap())
    d["fitted"]["values_"].reverse()  # lowest score -> highest probability
    with pytest.raises(ValueError, match="'fitted.values_' must be non-decreasing"):
        map_from_dict(d)


@pytest.mark.parametrize("bad", [-0.25, 1.5])
@pytest.mark.parametrize("cal_map", [IsotonicMap(), BinningMap(n_bins=5)], ids=repr)
def test_probabilities_outside_zero_one_are_refused(cal_map, bad):
    d = _saved(cal_map)
    values = d["fitted"]["values_"]
    values[0 if bad < 0 else -1] = bad  # keeps an isotonic table non-decreasing
    with pytest.raises(ValueError, match=r"'fitted.values_' must hold probabilities in \[0, 1\]"):
        map_from_dict(d)


def test_venn_abers_with_p0_above_p1_is_refused():
    d = _saved(VennAbersMap())
    fitted = d["fitted"]
    fitted["p0_between_"], fitted["p1_between_"] = fitted["p1_between_"], fitted["p0_between_"]
    with pytest.raises(ValueError, match="p0 <= p1"):
        map_from_dict(d)


def test_venn_abers_table_out_of_order_is_refused():
    d = _saved(VennAbersMap())
    d["fitted"]["p1_at_"][0] = 1.0  # above the later p1 values
    with pytest.raises(ValueError, match="non-decreasing"):
        map_from_dict(d)


@pytest.mark.parametrize("attr", ["a_", "b_"])
def test_negative_beta_coefficient_is_refused(attr):
    d = _saved(BetaMap())
    d["fitted"][attr] = -0.5
    with pytest.raises(ValueError, match=f"'fitted.{attr}' must be >= 0"):
        map_from_dict(d)


@pytest.mark.parametrize(
    ("change", "message"),
    [
        (lambda d: d["fitted"].update(values_=["0.1", "0.2"]), "list of numbers"),
        (lambda d: d["fitted"].update(values_=[True] * len(d["fitted"]["values_"])),
         "list of numbers"),
        (lambda d: d["fitted"].update(values_=[[0.1]] * len(d["fitted"]["values_"])),
         "flat list"),
        (lambda d: d.update(classes=[[0], [1]]), "field 'classes' must hold int labels"),
        (lambda d: d.update(classes=[0, 0]), "must not repeat"),
        (lambda d: d.update(schema_version=True), "schema_version"),
        (lambda d: d.update(metadata=["not", "an", "object"]), "field 'metadata' must be a JSON"),
        (lambda d: d.update(metadata={"x": float("nan")}), "finite"),
    ],
)
def test_mangled_values_name_the_field(change, message):
    d = _saved(IsotonicMap())
    change(d)
    with pytest.raises(ValueError, match=message):
        map_from_dict(d)


def test_settings_are_checked_like_the_map_does():
    d = _saved(BinningMap(n_bins=5))
    d["settings"]["n_bins"] = -3
    with pytest.raises(ValueError, match="settings.*n_bins"):
        map_from_dict(d)
    d = _saved(PlattMap())
    d["settings"]["smooth_targets"] = "yes"
    with pytest.raises(ValueError, match="settings.smooth_targets"):
        map_from_dict(d)


def test_deep_or_self_containing_metadata_is_refused_without_recursion_error():
    deep: dict = {}
    node = deep
    for _ in range(100_000):  # far beyond Python's recursion limit
        node["x"] = {}
        node = node["x"]
    d = _saved(IsotonicMap())
    d["metadata"] = deep
    with pytest.raises(ValueError, match="nested more than 64 levels"):
        map_from_dict(d)
    loop: dict = {}
    loop["self"] = loop
    d["metadata"] = loop
    with pytest.raises(ValueError, match="contains itself"):
        map_from_dict(d)
    with pytest.raises(ValueError, match="contains itself"):
        map_to_dict(IsotonicMap().fit(*_data()), score_scale="proba", note=loop)
    with pytest.raises(ValueError, match="finite"):
        map_to_dict(IsotonicMap().fit(*_data()), score_scale="proba", note=[1.0, float("inf")])


def test_one_vs_rest_venn_abers_map_is_not_saved_alone():
    # its merge uses p0 + (p1 - p0) / (k - 1): saved alone it would predict as a binary map
    from probwrap.calibration._base import one_vs_rest_copy

    s = np.array([-2.0, -1.0, 0.0, 1.0, 2.0, 3.0])
    y = np.array([0, 0, 1, 0, 1, 1])
    m = one_vs_rest_copy(VennAbersMap(), 3).fit(s, y)
    with pytest.raises(ValueError, match="one-vs-rest Venn-Abers"):
        map_to_dict(m, score_scale="log-odds")
    binary = one_vs_rest_copy(VennAbersMap(), 2).fit(s, y)
    again = map_from_dict(map_to_dict(binary, score_scale="log-odds"))
    np.testing.assert_array_equal(again.predict(s), binary.predict(s))


def test_platt_score_limit_survives_a_round_trip():
    # consistency test: PlattMap(limit_scores=True) is restored with its limits
    rng = np.random.default_rng(0)
    s = np.r_[rng.normal(-2.0, 1.0, 15), 27.0, 26.0, 25.0, rng.normal(3.0, 1.0, 4)]
    y = np.r_[np.zeros(15), np.ones(7)].astype(int)
    m = PlattMap(limit_scores=True).fit(s, y)
    half = np.log(2 * 24 - 1)  # floor 1/(22 + 2); every negative lies below 0, so +-half
    assert m.score_limits_ == pytest.approx((-half, half))
    d = map_to_dict(m, score_scale="log-odds")
    assert d["fitted"]["score_limits_"] == pytest.approx([-half, half])
    r = map_from_dict(d)
    t = np.linspace(-30.0, 30.0, 13)
    np.testing.assert_array_equal(r.predict(t), m.predict(t))
    assert r.predict([27.0]) == m.predict([half])  # clipped at the limit
    # a description written before the limits were saved: the symmetric limit of the floor
    del d["fitted"]["score_limits_"]
    np.testing.assert_array_equal(map_from_dict(d).predict(t), m.predict(t))
    d["fitted"]["score_limits_"] = [1.0, -1.0]
    with pytest.raises(ValueError, match="score_limits_.*low < high"):
        map_from_dict(d)
