"""Cell labels given as text with a gap are refused as *missing*, whatever marks the gap.

pandas 3 stores a text column in its string dtype, whose missing value is NaN: ``pd.Series(["a",
None])`` reaches NumPy as an object array holding ``nan`` where pandas 2 kept ``None``. The cell
checks of :func:`probwrap.metrics.calibration_by_group`, of the report's resampling unit and of
the prior-shift estimators all named only ``None`` (or ``None`` and NaN), so under pandas 3 the
same user input fell through to NumPy's sort and came back as "labels of one kind ('<' not
supported between 'float' and 'str')". Each check must now name the missing labels for None,
NaN and ``pd.NA`` alike, under pandas 2.1 and pandas 3.
"""

import numpy as np
import pandas as pd
import pytest

from probwrap.metrics import calibration_by_group
from probwrap.report._cells import resampling_unit
from probwrap.shift._cells import check_cells

N = 40


def _text_cells_with_gap(gap):
    labels = np.array([f"c{i % 5}" for i in range(N)], dtype=object)
    labels[7] = gap
    return labels


GAPS = [
    pytest.param(None, id="None"),
    pytest.param(np.nan, id="NaN"),
    pytest.param(pd.NA, id="NA"),
]


def _binary():
    rng = np.random.default_rng(3)
    p = rng.uniform(0.05, 0.95, N)
    y = (rng.uniform(size=N) < p).astype(int)
    return y, p


@pytest.mark.parametrize("gap", GAPS)
def test_calibration_by_group_names_the_missing_cell(gap):
    y, p = _binary()
    groups = np.where(np.arange(N) % 2 == 0, "north", "south")
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        calibration_by_group(y, p, groups, cells=_text_cells_with_gap(gap), n_resamples=5)


@pytest.mark.parametrize("gap", GAPS)
def test_report_resampling_unit_names_the_missing_cell(gap):
    y, _ = _binary()
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        resampling_unit(_text_cells_with_gap(gap), n=N, y_index=y, w=None)


@pytest.mark.parametrize("gap", GAPS)
def test_prior_shift_cell_check_names_the_missing_cell(gap):
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        check_cells(_text_cells_with_gap(gap), N)


def test_a_pandas_text_column_with_a_gap_is_missing_under_either_pandas():
    # the column as a user builds it: object dtype with None under pandas 2, the string dtype
    # with NaN under pandas 3; either way the message names the missing label
    y, p = _binary()
    column = pd.Series([f"c{i % 5}" for i in range(N)])
    column = pd.Series([None if i == 7 else v for i, v in enumerate(column)])
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        calibration_by_group(y, p, np.repeat(["a", "b"], N // 2), cells=column, n_resamples=5)
    with pytest.raises(ValueError, match="`cells` contains missing labels"):
        check_cells(column, N)


def test_text_cells_without_a_gap_still_give_their_codes():
    # the same labels complete: codes in sorted order of the labels (np.unique's inverse)
    labels = np.array([f"c{i % 5}" for i in range(N)], dtype=object)
    np.testing.assert_array_equal(check_cells(labels, N), np.arange(N) % 5)
    np.testing.assert_array_equal(check_cells(pd.Series(labels.tolist()), N), np.arange(N) % 5)
    y, _ = _binary()
    unit = resampling_unit(labels, n=N, y_index=y, w=None)
    np.testing.assert_array_equal(unit.codes, np.arange(N) % 5)
