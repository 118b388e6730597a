"""``probwrap prevalence``'s small-batch note measures a move in standard errors of a batch at
the source prevalence (the baseline), as the HTML report does, not in the batches' own
intervals (wider once the prevalence has risen).

Outside references: the spread of the EM estimate over batches drawn at the baseline (Monte
Carlo truth, scipy-free) for the ``--source-prevalence`` formula; the report's own
:func:`probwrap.report._alarm_chart.baseline_batch_standard_error` on the same reference rows
for ``--reference``, where the command line must give the report's number.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main
from probwrap.cli._prevalence_numbers import source_baseline_standard_error
from probwrap.datasets import make_parcels
from probwrap.report import build_report
from probwrap.shift import cusum_run_length, em_prior

BATCH = 250


pytestmark = pytest.mark.usefixtures("no_progress_lines")


def _calibrated_for_source(n, prevalence, seed, src):
    """Invented parcels at ``prevalence`` with their true posteriors carried back to ``src``."""
    b = make_parcels(n, prevalence=prevalence, random_state=seed)
    back = b.true_proba * (src / b.prior)
    return (back / back.sum(axis=1, keepdims=True))[:, 1]


@pytest.fixture(scope="module")
def weeks(tmp_path_factory):
    """Three weeks at the source prevalence, then three at twice it."""
    root = tmp_path_factory.mktemp("small-batch")
    src = make_parcels(10, random_state=0).source_prior
    parts, labels = [], []
    for i in range(6):
        parts.append(_calibrated_for_source(BATCH, float(src[1]) * (1 if i < 3 else 2),
                                            40 + i, src))
        labels += [f"w{i + 1}"] * BATCH
    p = np.concatenate(parts)
    pd.DataFrame({"week": labels, "risk": p}).to_csv(root / "weeks.csv", index=False)
    return {"root": root, "p": p, "src": src}


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 0, err
    return json.loads(out)


def test_source_baseline_error_matches_the_spread_over_baseline_batches(weeks):
    src = weeks["src"]
    pooled = em_prior(np.column_stack([1 - weeks["p"], weeks["p"]]), src).prior[1]
    se = source_baseline_standard_error(weeks["p"], float(src[1]), pooled, BATCH)
    # Monte Carlo truth: EM on 400 fresh batches drawn at the source prevalence
    draws = []
    for seed in range(400):
        q = _calibrated_for_source(BATCH, float(src[1]), 1000 + seed, src)
        draws.append(em_prior(np.column_stack([1 - q, q]), src).prior[1])
    # the standard deviation of 400 draws is itself uncertain by about 3.5 %
    assert se == pytest.approx(np.std(draws, ddof=1), rel=0.12)
    # the pooled rows hold risen weeks; without the density ratio the information is that of
    # the pooled mixture, not of a batch at the baseline
    unweighted = 1 / np.sqrt(BATCH * np.mean(((weeks["p"] - src[1])
                                               / (src[1] * (1 - src[1]))) ** 2))
    assert abs(unweighted - np.std(draws, ddof=1)) > abs(se - np.std(draws, ddof=1))


def test_source_path_note_uses_the_baseline_error(weeks, capsys):
    src = float(weeks["src"][1])
    got = run(capsys, "prevalence", "--unlabelled", weeks["root"] / "weeks.csv",
              "--score-column", "risk", "--source-prevalence", src, "--batch-column", "week",
              "--resamples", 40, "--format", "json")
    a = got["alarm"]
    assert a["detection_standard_error"] == "baseline"
    se0 = source_baseline_standard_error(weeks["p"], src, got["prevalence"], BATCH)
    move = 0.5 * min(src, 1 - src)
    assert a["batches_to_detect"] == pytest.approx(
        cusum_run_length(move / se0, reference=0.5, decision_interval=5.0, two_sided=True),
        rel=1e-9)
    # the batches' own intervals (half of them at twice the prevalence) are wider: from them
    # the note would have said the chart is slower
    widths = [b["interval"][1] - b["interval"][0] for b in got["batches"]]
    own = float(np.median(widths)) / 3.919927969080108
    assert own > se0
    assert cusum_run_length(move / own, reference=0.5, decision_interval=5.0,
                            two_sided=True) > a["batches_to_detect"]


def test_reference_path_note_equals_the_reports(weeks, capsys, tmp_path):
    src = weeks["src"]
    ref = make_parcels(1500, random_state=7)
    ref_p = ref.true_proba[:, 1]
    pd.DataFrame({"risk": ref_p, "damaged": ref.target}).to_csv(tmp_path / "ref.csv",
                                                                index=False)
    got = run(capsys, "prevalence", "--unlabelled", weeks["root"] / "weeks.csv",
              "--score-column", "risk", "--reference", tmp_path / "ref.csv", "--label-column",
              "damaged", "--batch-size", BATCH, "--resamples", 40, "--format", "json")
    content, _ = build_report(y_true=ref.target, y_prob=ref_p, unlabelled_prob=weeks["p"],
                              batch_size=BATCH, n_resamples=40)
    assert got["alarm"]["detection_standard_error"] == "baseline"
    assert content.alarm.batches_to_detect is not None
    assert got["alarm"]["batches_to_detect"] == pytest.approx(
        content.alarm.batches_to_detect, rel=1e-6)
    assert float(src[1]) > 0  # the weeks are calibrated for the demo's source share
