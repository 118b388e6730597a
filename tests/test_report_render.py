"""The report renders in headless Chromium: no console errors, every figure laid out and visible.

Skips when ``chromium`` is not on PATH (CI installs the Debian package; see .ci/run).
"""

import re

import numpy as np
import pytest

from probwrap.datasets import make_parcels
from probwrap.report import write_report


@pytest.fixture(scope="module")
def report_path(tmp_path_factory):
    train = make_parcels(2000, random_state=30)
    winter = make_parcels(1000, season="winter", random_state=31)
    src = train.source_prior
    back = winter.true_proba * (src / winter.prior)
    back /= back.sum(axis=1, keepdims=True)
    path = tmp_path_factory.mktemp("render") / "report.html"
    write_report(path, y_true=train.target, y_prob=train.true_proba[:, 1],
                 costs={"fp": 3.0, "fn": 40.0}, capacity=0.2, unlabelled_prob=back[:, 1],
                 batch_size=250, n_resamples=20)
    return path


def test_no_console_errors_and_screenshot_not_blank(report_path, tmp_path, chromium):
    shot = tmp_path / "shot.png"
    proc = chromium.run(["--enable-logging=stderr", "--v=0", f"--screenshot={shot}",
                 report_path.as_uri()], tmp_path, "shot")
    assert proc.returncode == 0, proc.stderr[-2000:]
    console = [line for line in proc.stderr.splitlines() if "CONSOLE" in line]
    assert console == [], console
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.image as mpimg

    img = mpimg.imread(shot)
    assert img.shape[0] > 1000 and img.shape[1] > 800
    # not blank: many distinct colours, and the figures' teal lines appear
    flat = (img[..., :3] * 255).round().astype(int).reshape(-1, 3)
    assert np.unique(flat[::7], axis=0).shape[0] > 200
    teal = np.array([0x0F, 0x6E, 0x74])
    assert np.sum(np.all(np.abs(flat - teal) <= 12, axis=1)) > 500


def test_every_figure_is_laid_out(report_path, tmp_path, chromium):
    page = report_path.read_text(encoding="utf-8")
    assert "<script" not in page
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", chromium.probe + "</body>"), encoding="utf-8")
    proc = chromium.run(["--dump-dom", probed.as_uri()], tmp_path, "dom")
    assert proc.returncode == 0, proc.stderr[-2000:]
    match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
    assert match, proc.stdout[-1000:]
    entries = match.group(1).split(";")
    ids = [e.split(":")[0] for e in entries]
    assert ids == ["fig-reliability", "fig-cost", "fig-decision-curve", "fig-prevalence",
                   "fig-alarm"]
    for entry in entries:
        fid, size, visibility, display = entry.split(":")
        w, h = (int(v) for v in size.split("x"))
        assert w > 200 and h > 150, entry
        assert visibility == "visible" and display != "none", entry


@pytest.fixture(scope="module")
def multiclass_report_path(tmp_path_factory):
    three = make_parcels(2000, n_outcomes=3, random_state=32)
    winter = make_parcels(1000, n_outcomes=3, season="winter", random_state=33)
    src = three.source_prior
    back = winter.true_proba * (src / winter.prior)  # the summer model's view of winter rows
    back /= back.sum(axis=1, keepdims=True)
    path = tmp_path_factory.mktemp("render-mc") / "report.html"
    write_report(path, y_true=three.target, y_prob=three.true_proba,
                 costs=[[0, 4, 12], [20, 4, 12], [60, 64, 12]],
                 action_names=["ship", "repack", "hold"], capacity={"hold": 0.03},
                 unlabelled_prob=back, class_names=three.target_names, n_resamples=20)
    return path


def test_multiclass_report_renders(multiclass_report_path, tmp_path, chromium):
    page = multiclass_report_path.read_text(encoding="utf-8")
    assert "<script" not in page
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", chromium.probe + "</body>"), encoding="utf-8")
    proc = chromium.run(["--enable-logging=stderr", "--v=0", "--dump-dom", probed.as_uri()], tmp_path,
                "mc")
    assert proc.returncode == 0, proc.stderr[-2000:]
    console = [line for line in proc.stderr.splitlines()
               if "CONSOLE" in line and "probe" not in line]
    assert console == [], console
    match = re.search(r'<pre id="probe">([^<]*)</pre>', proc.stdout)
    assert match, proc.stdout[-1000:]
    entries = match.group(1).split(";")
    assert [e.split(":")[0] for e in entries] == ["fig-reliability", "fig-actions",
                                                  "fig-class-prior"]
    for entry in entries:
        fid, size, visibility, display = entry.split(":")
        w, h = (int(v) for v in size.split("x"))
        assert w > 200 and h > 150, entry
        assert visibility == "visible" and display != "none", entry
