"""Shared test fixtures, and the CI skip policy.

With ``PROBWRAP_CI=1`` in the environment (``.ci/run`` sets it), a skipped test fails the run
unless its reason matches one of ``ALLOWED_SKIPS``: skips that depend on the installed versions
(a feature a dependency gained later) or that a docs block's ``not-run`` marker explains.
Everything else CI is meant to run — the Dask, Spark, pandas, statsmodels and matplotlib tests
and the rendering tests in headless Chromium — must run there.

With ``PROBWRAP_EXPECT_INSTALLED=1`` the run also fails unless every ``probwrap`` module it
imported came from an installed copy (site-packages), not from the source tree: CI sets it when
it tests the built wheel.
"""

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

# (pattern of the skip reason, why the skip is acceptable in CI)
ALLOWED_SKIPS = [
    (r"temperature scaling arrived in scikit-learn 1\.8", "version-gated: oldest environment"),
    (r"multiclass brier_score_loss needs scikit-learn >= 1\.7", "version-gated: oldest environment"),
    (r"docs marker not-run at ", "a docs block that cannot run here, with its reason"),
    (r"SCIPY_ARRAY_API is not set: not checking array_api input",
     "scikit-learn's estimator checks: probwrap does not claim array-API support"),
    (r"a read-only folder stops only non-root users",
     "environment: CI runs as root, for whom folder permissions do not apply"),
]

_SOURCE_TREE = Path(__file__).resolve().parents[1] / "probwrap"

# Tests that take more than a few seconds on one core: left out by `python -m pytest -m "not
# slow"` (the fast subset for development), always run by the README's command and by CI. Kept
# here, by node id prefix, so that marking needs no edit of the test files themselves.
SLOW_TESTS = (
    "tests/test_examples.py::",
    "tests/test_docs_code_blocks.py::test_python_blocks_run",
    "tests/test_docs_code_blocks.py::test_shell_blocks_run",
    "tests/test_report_render.py::",
    "tests/test_cli_demo.py::test_demo_subprocess_writes_report",
    "tests/test_cli_demo.py::test_demo_in_process_summary",
    "tests/test_cli_verbs.py::test_module_entry_point_in_a_subprocess",
    "tests/test_plot_displays.py::test_plot_package_does_not_import_matplotlib_at_import",
    "tests/test_scale_tally.py::test_core_imports_and_tallies_without_dask",
    "tests/test_prior_shift_wrapper.py::test_multiclass_adapt_and_monitor",
    "tests/test_prior_shift_wrapper.py::test_adapt_recovers_prior_and_true_posteriors_of_gaussian",
    "tests/test_scale_bootstrap.py::test_dask_prior_interval_agrees_with_in_memory",
    "tests/test_scale_bootstrap.py::test_tally_prior_interval_covers_like_the_in_memory_bootstrap",
    "tests/test_scale_bootstrap.py::test_dask_cutoff_interval_agrees_with_in_memory",
    "tests/test_datasets.py::test_winter_keeps_the_class_conditional_feature_distributions",
    "probwrap/report/__init__.py::probwrap.report.write_report",
)


# Test files that share one expensive session fixture: under pytest-xdist (``--dist loadgroup``,
# pyproject's addopts) each group runs on one worker, so the run starts one Spark JVM, not two.
XDIST_GROUPS = {
    "tests/test_spark_scale.py::": "spark",
    "tests/test_spark_multiclass.py::": "spark",
    "tests/test_spark_small_sets.py::": "spark",
    "tests/test_spark_user_messages.py::": "spark",
    "tests/test_spark_refit.py::": "spark",
    "tests/test_spark_driver_errors.py::": "spark",
    "tests/test_spark_adapt_parity.py::": "spark",
    "tests/test_spark_repeats_monitor.py::": "spark",
    "tests/test_spark_batch_labels_missing.py::": "spark",
    "tests/test_spark_mixture_check_repeats.py::": "spark",
    "tests/test_spark_repeat_check_feature_selected.py::": "spark",
    "tests/test_spark_refused_partition_workers.py::": "spark",
}


# tryfirst: the group marks must be on the items before xdist's own hook reads them
@pytest.hookimpl(tryfirst=True)
def pytest_collection_modifyitems(config, items):
    for item in items:
        if item.nodeid.startswith(SLOW_TESTS):
            item.add_marker(pytest.mark.slow)
        for prefix, group in XDIST_GROUPS.items():
            if item.nodeid.startswith(prefix):
                item.add_marker(pytest.mark.xdist_group(group))


# NumPy's global random state, reset to this value before each test's setup. A wrapper left at
# random_state=None (scikit-learn's convention) shuffles its folds from the global state, so
# without the reset a test's draw depended on which tests its xdist worker ran before it (and on
# the entropy each worker process started with). Tests whose assertions depend on the draw also
# pass a fixed random_state of their own; this reset covers the rest.
GLOBAL_NUMPY_SEED = 20261205


# tryfirst: before the item's fixtures are set up, so module- and session-scoped fixtures that
# the test is the first to request draw from the same state whatever ran earlier
@pytest.hookimpl(tryfirst=True)
def pytest_runtest_setup(item):
    import numpy as np

    np.random.seed(GLOBAL_NUMPY_SEED)  # noqa: NPY002 (the legacy global state is what is reset)


def _ci() -> bool:
    return os.environ.get("PROBWRAP_CI", "") not in ("", "0")


_SKIPS: list[tuple[str, str]] = []


def _record_skip(report) -> None:
    if report.skipped and not hasattr(report, "wasxfail"):
        longrepr = report.longrepr
        reason = longrepr[2] if isinstance(longrepr, tuple) else str(longrepr)
        _SKIPS.append((report.nodeid, reason))


def pytest_runtest_logreport(report):
    _record_skip(report)


def pytest_collectreport(report):
    # a module-level skip (importorskip) is a collection report, not a test report
    _record_skip(report)


def _unexpected_skips(skips):
    return [(node, reason) for node, reason in skips
            if not any(re.search(pattern, reason) for pattern, _ in ALLOWED_SKIPS)]


def _modules_from_source_tree():
    found = []
    for name, module in list(sys.modules.items()):
        if name == "probwrap" or name.startswith("probwrap."):
            origin = getattr(module, "__file__", None)
            if origin and Path(origin).resolve().is_relative_to(_SOURCE_TREE):
                found.append(f"{name} ({origin})")
    return found


def pytest_configure(config):
    # The library's modules are imported before collection. Under --import-mode=importlib a
    # module collected for its doctests is executed afresh from its file unless it is already in
    # sys.modules, and `import probwrap` loads the wrappers only on first use (PEP 562): a run
    # that collected probwrap/shift/_repeats.py's doctests before any test imported it held two
    # copies of that module, and the RepeatedRowsWarning the wrapper raised (from the copy its
    # function-level import found) was not the class the test had imported. The README's run
    # collects tests/ first, so only runs naming a module before the tests met it.
    import probwrap.calibration  # noqa: F401
    import probwrap.decision  # noqa: F401
    import probwrap.metrics  # noqa: F401
    import probwrap.shift  # noqa: F401
    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper  # noqa: F401


def _in_xdist_worker(config) -> bool:
    return hasattr(config, "workerinput")


# Under pytest-xdist the tests import probwrap in the worker processes, not in the controller
# that prints the summary: each worker sends the modules it imported from the source tree, and
# the controller checks them with its own (a run without xdist has only its own).
_WORKER_SOURCE_TREE_MODULES: list[str] = []
_WORKERS_IMPORTED: list[str] = []


@pytest.hookimpl(optionalhook=True)
def pytest_testnodedown(node, error):
    output = getattr(node, "workeroutput", None) or {}
    _WORKER_SOURCE_TREE_MODULES.extend(output.get("probwrap_source_tree_modules", []))
    if "probwrap_imported" in output:
        _WORKERS_IMPORTED.append(output["probwrap_imported"])


def pytest_sessionfinish(session, exitstatus):
    if _in_xdist_worker(session.config):
        # skips reach the controller as test reports; only the import check is per process
        import probwrap

        session.config.workeroutput["probwrap_source_tree_modules"] = _modules_from_source_tree()
        session.config.workeroutput["probwrap_imported"] = str(Path(probwrap.__file__).parent)
        return
    problems = []
    if _ci():
        bad = _unexpected_skips(_SKIPS)
        if bad:
            problems.append(f"{len(bad)} test(s) skipped that CI must run (PROBWRAP_CI=1):")
            problems += [f"  {node}: {reason}" for node, reason in bad]
    if os.environ.get("PROBWRAP_EXPECT_INSTALLED", "") not in ("", "0"):
        import probwrap

        local = _modules_from_source_tree() + _WORKER_SOURCE_TREE_MODULES
        if local:
            problems.append("probwrap was imported from the source tree, not the installed wheel:")
            problems += [f"  {m}" for m in local[:10]]
        else:
            places = sorted({str(Path(probwrap.__file__).parent), *_WORKERS_IMPORTED})
            print(f"\nprobwrap under test: {', '.join(places)}")
    if problems:
        print("\n" + "\n".join(problems), file=sys.stderr)
        if session.exitstatus == 0:
            session.exitstatus = 1

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


@pytest.fixture(scope="session")
def cancer_nb():
    """Naive Bayes on a third of scikit-learn's bundled breast cancer data (scores down to
    1e-200): ``(X, y, model, test rows, pool of labelled rows)``; the prior-shift tiny-set tests
    draw their labelled rows from the pool."""
    import numpy as np
    from sklearn.datasets import load_breast_cancer
    from sklearn.naive_bayes import GaussianNB

    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(0)
    idx = rng.permutation(y.shape[0])
    fit, rest = idx[:189], idx[189:]
    test, pool = rest[:190], rest[190:]
    model = GaussianNB().fit(X[fit], y[fit])
    return X, y, model, test, pool


@pytest.fixture(scope="session")
def report_page_parser():
    """tests/test_report_structure.py as a module, for its HTML page parser (``_Page``, ``_val``).

    The tests run in importlib mode without a package, so one test file cannot import another;
    the report tests of other files share the parser through this fixture.
    """
    import importlib.util

    path = Path(__file__).with_name("test_report_structure.py")
    spec = importlib.util.spec_from_file_location("_pw_test_report_structure", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture
def tally_path(monkeypatch):
    """Dask and Spark fits through the tallies and reductions even on a few thousand rows: the
    wrappers otherwise fit the rows of a set of at most ``probwrap.scale._tally.KEPT_ROWS`` rows
    as in memory (tests/test_distributed_small_sets.py). The test files written for the tally
    path use this, so that they keep checking it (the limit is read on the driver)."""
    import probwrap.scale._tally as tally_module

    monkeypatch.setattr(tally_module, "KEPT_ROWS", 0)


# Spark's Python workers (also those of the Spark docs blocks, run in subprocesses) use this
# interpreter, so they import the probwrap under test.
os.environ.setdefault("PYSPARK_PYTHON", sys.executable)


@pytest.fixture(scope="session")
def spark():
    """One local[2] Spark session for the whole run (tests/test_spark*.py), on loopback only.

    Small settings for a small machine: two shuffle partitions, no web UI, a modest driver heap.
    """
    pytest.importorskip(
        "pyspark", reason="pyspark is not installed: pip install '.[spark]' to run the Spark tests"
    )
    if shutil.which("java") is None and not os.environ.get("JAVA_HOME"):
        pytest.skip(
            "no Java runtime (java not on PATH, JAVA_HOME unset): install the Debian package "
            "'openjdk-17-jre-headless' to run the Spark tests"
        )
    from pyspark.sql import SparkSession

    session = (
        SparkSession.builder.master("local[2]")
        .appName("probwrap-tests")
        .config("spark.ui.enabled", "false")
        .config("spark.sql.shuffle.partitions", "2")
        .config("spark.default.parallelism", "2")
        .config("spark.driver.memory", "512m")
        .config("spark.driver.host", "127.0.0.1")
        .config("spark.driver.bindAddress", "127.0.0.1")
        .config("spark.sql.execution.arrow.pyspark.enabled", "true")
        .getOrCreate()
    )
    session.sparkContext.setLogLevel("ERROR")
    yield session
    session.stop()


@pytest.fixture
def no_progress_lines(monkeypatch):
    """In-process command-line runs: no progress lines, however slow the machine (the progress
    lines are tested on their own). Modules ask for it with
    ``pytestmark = pytest.mark.usefixtures("no_progress_lines")``."""
    import probwrap.cli._progress as progress

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)


@pytest.fixture(scope="module")
def star98_districts():
    """A logistic regression fitted on 150 districts' pupils (weights), and 40 other districts
    as a count table: a row of pupils above the median and one below per district
    (statsmodels' bundled star98 set; tests/test_count_table_dispersion.py and
    tests/test_prior_shift_count_dispersion.py). Returns the model, the table ``(X, y, weights)``
    and the 40 districts' counts above the median and tested."""
    sm = pytest.importorskip("statsmodels.api")
    import numpy as np
    from sklearn.linear_model import LogisticRegression

    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    idx = np.random.default_rng(0).permutation(k.shape[0])
    fit, cal = idx[:150], idx[150:190]

    def table(rows):
        return (np.repeat(X[rows], 2, axis=0), np.tile([1, 0], rows.shape[0]),
                np.column_stack([k[rows], n[rows] - k[rows]]).ravel())

    Xf, yf, wf = table(fit)
    model = LogisticRegression(max_iter=5000).fit(Xf, yf, sample_weight=wf)
    return model, table(cal), k[cal], n[cal]
