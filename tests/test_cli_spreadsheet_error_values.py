"""Spreadsheet error values in a number column: ``#DIV/0!``, ``#NAME?``, LibreOffice's
``Err:502``. Before, ``Err:502`` and ``#NAME?`` were refused as "not a finite number" without the
count of rows holding them, and ``#DIV/0!`` was called a possible mark for a missing value;
they are now named as what a failed formula leaves, with every row holding them.

Data: held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(``_cli_helpers.cancer_held_out``, 289 rows), with a weight column of row counts invented for
the demonstration.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import cancer_held_out
from _cli_helpers import run_cli as run

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def cancer():
    p, y = cancer_held_out()
    return pd.DataFrame({"id": np.arange(y.size), "score": np.round(p, 6), "y": y,
                         "w": np.arange(y.size) % 3 + 1})


@pytest.mark.parametrize("value", ["#DIV/0!", "#NAME?", "Err:502"])
@pytest.mark.parametrize("column", ["score", "w"])
def test_error_values_are_named_with_their_rows(cancer, tmp_path, capsys, value, column):
    frame = cancer.astype(object)
    frame.loc[[3, 10, 200], column] = value
    path = tmp_path / "sheet.csv"
    frame.to_csv(path, index=False)
    code, out, err = run(capsys, "cutoff", "--scores", path, "--score-column", "score",
                         "--label-column", "y", "--weight-column", "w", "--cost-fp", 1,
                         "--cost-fn", 5, "--resamples", 0)
    assert code == 1 and out == ""
    assert f"column '{column}'" in err
    assert f"3 of 289 rows hold '{value}': rows 5, 12 and 202" in err
    assert "the error value a spreadsheet formula leaves" in err
