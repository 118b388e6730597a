"""Shared test fixtures."""

import shutil
import subprocess

import pytest

_CHROMIUM_FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
    "--hide-scrollbars", "--window-size=1100,4200",
]

# Measures each figure's <svg> after layout and writes the result into the DOM. Added to a test
# copy of a page only; the report itself carries no script.
_FIGURE_PROBE = """<script>
window.addEventListener('load', function () {
  var out = [];
  document.querySelectorAll('figure.pw-figure').forEach(function (f) {
    var s = f.querySelector('svg'); var r = s ? s.getBoundingClientRect() : {width: 0, height: 0};
    var st = s ? getComputedStyle(s) : {};
    out.push(f.id + ':' + Math.round(r.width) + 'x' + Math.round(r.height) + ':' +
             st.visibility + ':' + st.display);
  });
  var p = document.createElement('pre'); p.id = 'probe'; p.textContent = out.join(';');
  document.body.appendChild(p);
});
</script>"""


class HeadlessChromium:
    """Runs Debian's headless Chromium with a fresh profile, loopback only."""

    probe = _FIGURE_PROBE

    def __init__(self, binary):
        self.binary = binary

    def run(self, args, tmp_path, name):
        profile = tmp_path / f"profile-{name}"
        profile.mkdir()
        return subprocess.run(
            [self.binary, *_CHROMIUM_FLAGS, f"--user-data-dir={profile}", *args],
            capture_output=True, text=True, timeout=90,
        )


@pytest.fixture(scope="session")
def chromium():
    binary = shutil.which("chromium") or shutil.which("chromium-browser")
    if binary is None:
        pytest.skip(
            "chromium is not on PATH: install the Debian package 'chromium' to run the report "
            "rendering tests"
        )
    return HeadlessChromium(binary)


@pytest.fixture(scope="session")
def client():
    """One two-worker Dask LocalCluster for the whole run, on loopback only."""
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=False, protocol="tcp", host="127.0.0.1",
        dashboard_address=None,
    )
    with distributed.Client(cluster) as c:
        yield c
    cluster.close()
