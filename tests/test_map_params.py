"""The maps' parameter names (read once per class, see ``CalibrationMap._get_param_names``)
against Python's own ``inspect.signature`` of each ``__init__``, and ``clone`` round trips."""

from __future__ import annotations

import inspect

import pytest
from sklearn.base import clone

from probwrap._calibration_auto import CALIBRATION_METHODS
from probwrap.calibration import PlattMap


def _signature_names(cls) -> list[str]:
    if cls.__init__ is object.__init__:  # no parameters of its own (the identity map)
        return []
    return sorted(
        p.name for p in inspect.signature(cls.__init__).parameters.values()
        if p.name != "self" and p.kind not in (p.VAR_KEYWORD, p.VAR_POSITIONAL)
    )


@pytest.mark.parametrize("cls", sorted(set(CALIBRATION_METHODS.values()), key=lambda c: c.__name__))
def test_param_names_are_the_signature_names_and_clone_keeps_them(cls):
    m = cls()
    for _ in range(2):  # the second call reads the cached names
        assert sorted(m.get_params()) == _signature_names(cls)
    c = clone(m)
    assert type(c) is cls and c.get_params() == m.get_params()


def test_a_subclass_with_other_parameters_gets_its_own_names():
    PlattMap().get_params()  # fill the parent's names first

    class ScaledPlatt(PlattMap):
        def __init__(self, *, smooth_targets=True, factor=2.0):
            super().__init__(smooth_targets=smooth_targets)
            self.factor = factor

    assert sorted(ScaledPlatt().get_params()) == ["factor", "smooth_targets"]
    assert sorted(PlattMap().get_params()) == ["limit_scores", "smooth_targets"]
    assert clone(ScaledPlatt(factor=3.0)).factor == 3.0
