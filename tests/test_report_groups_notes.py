"""calibration_by_group: warnings met while checking a group are kept in its notes."""

import numpy as np


def test_warnings_met_per_group_land_in_the_notes():
    # a group whose forecasts include exact 0 and 1 with the opposite outcome: log loss floors
    # them and warns; that warning is recorded with the group named, not printed per group
    import warnings as _w

    from probwrap.metrics import calibration_by_group

    rng = np.random.default_rng(3)
    n = 400
    y = rng.integers(0, 2, n)
    p = np.clip(0.5 + 0.2 * (2 * y - 1) + rng.normal(0, 0.2, n), 0.01, 0.99)
    g = np.where(np.arange(n) < 200, "a", "b")
    p[0], y[0] = 0.0, 1  # group "a": a certain forecast that was wrong
    with _w.catch_warnings():
        _w.simplefilter("error", UserWarning)
        res = calibration_by_group(y, p, g, n_resamples=0)
    assert any(note.startswith("group 'a':") and "clip" in note for note in res.notes)
    assert not any(note.startswith("group 'b':") for note in res.notes)
