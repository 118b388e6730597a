"""The command line's prevalence bootstrap says what its resamples warned (was silenced).

``prevalence_from_source`` refits EM on every bootstrap resample; their warnings used to be
ignored wholesale. Now each distinct warning is raised once, with the number of resamples that
raised it, and the verb prints it on stderr like any other library warning.
"""

import warnings

import numpy as np

from probwrap.cli._prevalence import prevalence_from_source


def test_resample_warnings_are_counted_not_dropped():
    # every probability 0: class 1 gets no probability mass, in the point fit and in each of
    # the 30 resamples (em_prior warns about the empty column each time)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = prevalence_from_source(np.zeros(50), 0.3, n_resamples=30)
    messages = [str(w.message) for w in caught]
    assert out["prevalence"] == 0.0
    assert len(messages) == 2, messages
    assert messages[0].startswith("Class index(es) [1] get zero predicted probability mass")
    assert messages[1] == "in 30 of 30 bootstrap resamples: " + messages[0]


def test_quiet_resamples_add_nothing():
    p = np.r_[np.full(30, 0.1), np.full(20, 0.7)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        prevalence_from_source(p, 0.3, n_resamples=30)
