"""The row checks run on every fit and adapt (feature hashes for repeated rows, the check that a
model ranks the held-out rows, the rounding check of predict_proba rows) rewritten to pass over
the rows in blocks: the same results as their direct definitions.

Consistency tests: the rewrites were made to use less memory and time (benchmarks/performance.py,
docs/performance.md "Row checks added since"), not to change a result, so these tests also pass
on the code before them; they fail if a rewrite departs from the definition.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from probwrap._cost_policy_rules import _some_fold_ranks
from probwrap._heldout import _row_hashes, feature_cells
from probwrap._predictions import _SUM_CHECK_ROWS, rows_summing_to_one

_MASK = (1 << 64) - 1


def _hash_by_definition(row: np.ndarray) -> int:
    """The row hash one row at a time in Python integers: start at 0xCBF29CE484222325; for
    feature j, xor its IEEE bits (-0.0 read as 0.0), multiply by (j * 0x9E3779B97F4A7C15) | 1
    modulo 2**64, then xor the value shifted right by 29."""
    acc = 0xCBF29CE484222325
    for j, value in enumerate(np.asarray(row, dtype=np.float64) + 0.0):
        bits = int(np.float64(value).view(np.uint64))
        mult = ((j * 0x9E3779B97F4A7C15) & _MASK) | 1
        acc = ((acc ^ bits) * mult) & _MASK
        acc ^= acc >> 29
    return acc


@pytest.mark.parametrize("shape", [(3, 1), (40, 7), (1500, 900), (2100, 600)])
def test_row_hashes_follow_their_definition_across_blocks(shape):
    # 900 and 600 features: blocks of 1,165 and 1,747 rows, so rows in later blocks are hashed
    rng = np.random.default_rng(shape[1])
    X = rng.normal(size=shape)
    X[::3, 0] = -0.0
    X[1::3, 0] = 0.0
    X[::5, -1] = np.inf
    rows = np.r_[0, 1, 2, shape[0] // 2, shape[0] - 1]
    small_ints = np.round(np.clip(np.nan_to_num(X), -3, 3) * 4).astype(np.int16)
    for A in (X, np.asfortranarray(X), X.astype(np.float32), small_ints):
        h = _row_hashes(A)
        assert h.dtype == np.uint64 and h.shape == (shape[0],)
        assert [int(h[i]) for i in rows] == [_hash_by_definition(A[i]) for i in rows]


def test_row_hashes_do_not_modify_the_rows():
    X = np.array([[-0.0, 1.0], [0.0, 1.0]])
    before = X.copy()
    h = _row_hashes(X)
    assert h[0] == h[1]
    assert np.array_equal(X, before) and np.signbit(X[0, 0])


def _ranks_by_sorting(q, fold, keep):
    f = fold if keep is None else fold[keep]
    order = np.lexsort((q, f))
    qs, fs = q[order], f[order]
    same = fs[1:] == fs[:-1]
    return bool(np.any(qs[1:][same] != qs[:-1][same]))


def test_some_fold_ranks_equals_the_sorted_definition():
    rng = np.random.default_rng(3)
    for trial in range(300):
        n = int(rng.integers(2, 60))
        n_folds = int(rng.choice([1, 2, 5, 100]))
        fold = rng.integers(-1, n_folds, size=n)
        # each fold constant, then a few rows of some folds moved (or 0.0 against -0.0)
        level = rng.random(n_folds + 1)
        q = level[fold + 1].copy()
        if trial % 3 == 0:
            q[rng.integers(0, n)] = rng.random()
        if trial % 7 == 0:
            q[q == q[0]] = 0.0
            q[0] = -0.0
        keep = None if trial % 2 else rng.random(n) < 0.7
        qq = q if keep is None else q[keep]
        if qq.size < 2:
            continue
        assert _some_fold_ranks(qq, fold, keep) == _ranks_by_sorting(qq, fold, keep)
    # a frozen model's folds: a view of one value
    one = np.broadcast_to(np.array(-1), (5,))
    assert not _some_fold_ranks(np.full(5, 0.3), one, None)
    assert _some_fold_ranks(np.array([0.3, 0.3, 0.4, 0.3, 0.3]), one, None)


def test_rounding_check_reads_every_block():
    n = 2 * _SUM_CHECK_ROWS + 10
    p = np.full((n, 2), 0.5)
    late = 2 * _SUM_CHECK_ROWS + 3  # in the third block
    p[late] = [0.3, 0.699995]
    with pytest.warns(UserWarning, match="1 row"):
        out = rows_summing_to_one(p, "predict_proba", "M")
    assert out is not p and out[late].sum() == pytest.approx(1.0, abs=1e-15)
    assert np.array_equal(np.delete(out, late, axis=0), np.delete(p, late, axis=0))
    assert p[late, 1] == 0.699995  # the input is not modified
    # NaN in a later block than a rounding miss: left to the checks, as with one reduction
    p[_SUM_CHECK_ROWS + 1, 0] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert rows_summing_to_one(p, "predict_proba", "M") is p
    # a miss beyond the rounding limit in the last block: no rounding, left as it is
    q = np.full((n, 2), 0.5)
    q[0] = [0.3, 0.699995]
    q[-1] = [0.3, 0.6]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert rows_summing_to_one(q, "predict_proba", "M") is q


@pytest.mark.parametrize("as_frame", [False, True])
def test_feature_cells_unchanged_by_the_in_place_sort(as_frame):
    rng = np.random.default_rng(8)
    X = np.round(rng.normal(size=(400, 3)), 6)
    y = rng.integers(0, 2, size=400)
    w = rng.integers(1, 4, size=400).astype(float)
    A = pd.DataFrame(X) if as_frame else X
    assert feature_cells(A, w, y) is None  # every row distinct
    Xc = np.vstack([X, X[:50]])
    yc = np.concatenate([y, 1 - y[:50]])  # the copies carry the other label: counts
    wc = np.concatenate([w, w[:50]])
    Ac = pd.DataFrame(Xc) if as_frame else Xc
    before = Xc.copy()
    cells = feature_cells(Ac, wc, yc.astype(np.uint8))
    _, expected = np.unique(_row_hashes(Xc) if not as_frame
                            else pd.util.hash_pandas_object(Ac, index=False).to_numpy(),
                            return_inverse=True)
    assert np.array_equal(cells, expected.ravel())
    assert np.array_equal(Xc, before)


def test_rows_surely_distinct_agrees_with_the_codes():
    from probwrap.shift._repeats import _codes_of, _row_matrix, _rows_surely_distinct

    rng = np.random.default_rng(11)
    for trial in range(60):
        n = int(rng.integers(2, 3000))
        p1 = np.round(rng.random(n), int(rng.integers(1, 6)))  # ties at few decimals
        blocks = [np.column_stack([1 - p1, p1])]
        if trial % 2:
            blocks.append(rng.integers(0, int(rng.integers(1, 4 * n)), size=n).astype(float))
        if trial % 5 == 0:
            blocks[0][0] = [-0.0, 1.0]
            blocks[0][-1] = [0.0, 1.0]  # -0.0 and 0.0: the same row
        m = _row_matrix(*blocks)
        distinct = int(_codes_of(m).max()) + 1 == n
        # never "surely distinct" where two rows are equal; distinct rows found so too
        # (a hash collision, about 2**-64 a pair, would only send them to the codes)
        assert _rows_surely_distinct(m) == distinct


def test_data_chosen_clip_is_half_the_smallest_positive_probability_of_kept_rows():
    from probwrap.calibration._logodds import clip_from_smallest
    from probwrap.shift._calibration import heldout_clip

    p = np.array([[1.0, 0.0], [0.99, 0.01], [0.5, 0.5], [1e-9, 1.0 - 1e-9]])
    # definition: half the smallest non-zero probability of the rows of weight > 0
    assert heldout_clip(p[:, :1].ravel()) == clip_from_smallest(1e-9)
    assert heldout_clip(p[:, :1].ravel(), np.array([1.0, 1.0, 1.0, 0.0])) \
        == clip_from_smallest(0.5)  # 1e-9 on a row of weight 0: not read
    assert heldout_clip(np.zeros(3)) == clip_from_smallest(np.inf)
    q = np.array([0.3, 0.0, 0.02, 0.7])
    before = q.copy()
    assert heldout_clip(q, np.array([1.0, 1.0, 0.0, 2.0])) == clip_from_smallest(0.3)
    assert heldout_clip(q, np.ones(4)) == clip_from_smallest(0.02)
    assert np.array_equal(q, before)
