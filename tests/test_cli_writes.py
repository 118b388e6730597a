"""Every file the command line writes is replaced atomically: a failed or interrupted write
leaves the previous file byte for byte as it was, and no temporary file behind.

Failures are provoked for real: a file-size limit (``RLIMIT_FSIZE``, as ``ulimit -f`` sets it)
in a subprocess, SIGINT and SIGTERM sent to a subprocess in the middle of a write, and an
output path that is a folder or lies in a read-only folder.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main
from probwrap.cli._common import DataError
from probwrap.cli._files import write_atomic, write_text

pytestmark = pytest.mark.usefixtures("no_progress_lines")


posix_only = pytest.mark.skipif(os.name != "posix", reason="POSIX signals and resource limits")


def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


@pytest.fixture
def scores(tmp_path):
    rng = np.random.default_rng(0)
    p = rng.uniform(0.01, 0.99, size=3000)
    y = (rng.uniform(size=3000) < p).astype(int)
    pd.DataFrame({"risk": p, "damaged": y}).to_csv(tmp_path / "held.csv", index=False)
    return tmp_path


def _fit(folder, capsys=None):
    return main(["calibrate", "fit", "--scores", str(folder / "held.csv"), "--score-column",
                 "risk", "--label-column", "damaged", "--method", "platt",
                 "--out", str(folder / "map.json")])


# -- in-process ----------------------------------------------------------------------------------
def test_write_atomic_replaces_whole_file_and_keeps_the_old_one_on_error(tmp_path):
    target = tmp_path / "out.txt"
    write_text(target, "old content\n")
    assert target.read_text() == "old content\n"

    def broken(tmp):
        tmp.write_text("half of the new")
        raise OSError(28, "No space left on device")

    with pytest.raises(DataError, match="No space left on device"):
        write_atomic(target, broken)
    assert target.read_text() == "old content\n"
    assert _leftovers(tmp_path) == []

    def interrupted(tmp):
        tmp.write_text("half")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        write_atomic(target, interrupted)
    assert target.read_text() == "old content\n"
    assert _leftovers(tmp_path) == []
    write_text(target, "new content\n")
    assert target.read_text() == "new content\n"


def test_write_atomic_keeps_permissions_and_creates_folders(tmp_path):
    target = tmp_path / "a" / "b" / "out.txt"
    write_text(target, "x")
    assert target.read_text() == "x"
    os.chmod(target, 0o640)
    write_text(target, "y")
    assert target.stat().st_mode & 0o777 == 0o640


def test_apply_may_overwrite_its_own_input(scores, capsys):
    assert _fit(scores) == 0
    before = pd.read_csv(scores / "held.csv")
    code = main(["calibrate", "apply", "--map", str(scores / "map.json"), "--scores",
                 str(scores / "held.csv"), "--score-column", "risk",
                 "--out", str(scores / "held.csv")])
    assert code == 0, capsys.readouterr().err
    after = pd.read_csv(scores / "held.csv")
    assert after.shape == (3000, 3)
    np.testing.assert_array_equal(after["risk"].to_numpy(), before["risk"].to_numpy())
    assert _leftovers(scores) == []


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0,
                    reason="a read-only folder stops only non-root users")
def test_read_only_folder_is_a_one_line_error(scores, capsys):
    ro = scores / "ro"
    ro.mkdir()
    os.chmod(ro, 0o500)
    try:
        code = main(["calibrate", "fit", "--scores", str(scores / "held.csv"), "--score-column",
                     "risk", "--label-column", "damaged", "--method", "platt",
                     "--out", str(ro / "map.json")])
    finally:
        os.chmod(ro, 0o700)
    err = capsys.readouterr().err
    assert code == 1 and err.count("\n") == 1 and "cannot be written" in err


@pytest.mark.parametrize("verb", ["report", "demo", "fit", "apply"])
def test_output_path_that_is_a_folder_is_a_one_line_error(scores, capsys, verb):
    assert _fit(scores) == 0
    capsys.readouterr()
    folder = scores / ("x.html" if verb == "report" else "x.json" if verb == "fit" else "x.csv")
    folder.mkdir()
    if verb == "demo":
        (scores / "file").write_text("not a folder")
    argv = {
        "report": ["report", "--scores", str(scores / "held.csv"), "--score-column", "risk",
                   "--label-column", "damaged", "--resamples", "10", "--out", str(folder)],
        "demo": ["demo", "--out", str(scores / "file"), "--n-train", "500"],
        "fit": ["calibrate", "fit", "--scores", str(scores / "held.csv"), "--score-column",
                "risk", "--label-column", "damaged", "--method", "platt", "--out", str(folder)],
        "apply": ["calibrate", "apply", "--map", str(scores / "map.json"), "--scores",
                  str(scores / "held.csv"), "--score-column", "risk", "--out", str(folder)],
    }[verb]
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 1, err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert ("is a folder" in err) or ("is a file" in err)
    if verb == "demo":
        assert (scores / "file").read_text() == "not a folder"


# -- subprocesses: a size limit, SIGINT, SIGTERM -------------------------------------------------
_LIMITED = textwrap.dedent("""
    import resource, sys
    limit = int(sys.argv[1])
    resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    from probwrap.cli import main
    sys.exit(main(sys.argv[2:]))
""")


def _run_limited(limit, argv):
    return subprocess.run([sys.executable, "-c", _LIMITED, str(limit), *map(str, argv)],
                          capture_output=True, text=True, timeout=300)


@posix_only
@pytest.mark.parametrize("kind", ["csv", "parquet", "map", "report"])
def test_full_disk_leaves_the_previous_output_intact(scores, capsys, kind):
    held = scores / "held.csv"
    assert _fit(scores) == 0
    capsys.readouterr()
    if kind in ("csv", "parquet"):
        out = scores / f"today.{kind}"
        argv = ["calibrate", "apply", "--map", scores / "map.json", "--scores", held,
                "--score-column", "risk", "--out", out]
    elif kind == "map":
        out = scores / "map.json"
        argv = ["calibrate", "fit", "--scores", held, "--score-column", "risk",
                "--label-column", "damaged", "--method", "isotonic", "--out", out]
    else:
        out = scores / "report.html"
        argv = ["report", "--scores", held, "--score-column", "risk", "--label-column",
                "damaged", "--resamples", "10", "--out", out]
    if kind != "map":
        assert main([str(a) for a in argv]) == 0  # a good previous file
        capsys.readouterr()
    previous = out.read_bytes()
    proc = _run_limited(2048, argv)  # far less than any of these files
    assert proc.returncode == 1, proc.stderr
    assert "cannot be written" in proc.stderr and "File too large" in proc.stderr
    lines = [line for line in proc.stderr.splitlines()
             if ": warning: " not in line and ": step " not in line]  # progress on a slow day
    assert len(lines) == 1 and "Traceback" not in proc.stderr
    assert out.read_bytes() == previous
    assert _leftovers(scores) == []
    if kind == "map":  # the kept map still works
        assert json.loads(out.read_text())["method"] == "platt"


# A run started in the background by a non-interactive shell inherits SIGINT as ignored, and
# Python then installs no KeyboardInterrupt handler; the user's terminal gives the default one.
# The child restores it, so the test sees what a user pressing Ctrl-C sees wherever it runs.
_SLOW_WRITE = textwrap.dedent("""
    import signal, sys, time
    signal.signal(signal.SIGINT, signal.default_int_handler)
    import pandas as pd
    from probwrap.cli import main
    original = pd.DataFrame.to_csv
    def slow(self, path, *args, **kwargs):
        with open(path, "w") as handle:
            handle.write("partial,")
            handle.flush()
            print("WRITING", flush=True)
            time.sleep(60)
        return original(self, path, *args, **kwargs)
    pd.DataFrame.to_csv = slow
    sys.exit(main(sys.argv[1:]))
""")


@posix_only
@pytest.mark.parametrize(("sig", "code"), [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_interrupted_write_leaves_the_previous_output_intact(scores, capsys, sig, code):
    assert _fit(scores) == 0
    out = scores / "today.csv"
    argv = ["calibrate", "apply", "--map", str(scores / "map.json"), "--scores",
            str(scores / "held.csv"), "--score-column", "risk", "--out", str(out)]
    assert main(argv) == 0
    capsys.readouterr()
    previous = out.read_bytes()
    proc = subprocess.Popen([sys.executable, "-c", _SLOW_WRITE, *argv], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 120
        line = ""
        while "WRITING" not in line and time.monotonic() < deadline:
            line = proc.stdout.readline()
        assert "WRITING" in line
        assert _leftovers(scores), "the new content goes to a temporary file first"
        proc.send_signal(sig)
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == code, err
    assert "half-written" in err and "Traceback" not in err
    assert out.read_bytes() == previous
    assert _leftovers(scores) == []


@posix_only
def test_two_runs_writing_the_same_output_leave_one_whole_file(scores, capsys):
    assert _fit(scores) == 0
    out = scores / "today.csv"
    procs = []
    for column in ("first", "second"):
        argv = ["calibrate", "apply", "--map", str(scores / "map.json"), "--scores",
                str(scores / "held.csv"), "--score-column", "risk", "--output-column", column,
                "--out", str(out)]
        procs.append(subprocess.Popen([sys.executable, "-m", "probwrap.cli", *argv],
                                      stdout=subprocess.PIPE, stderr=subprocess.PIPE))
    for proc in procs:
        proc.communicate(timeout=120)
        assert proc.returncode == 0
    frame = pd.read_csv(out)
    assert frame.shape == (3000, 3)
    assert list(frame.columns) in (["risk", "damaged", "first"], ["risk", "damaged", "second"])
    assert _leftovers(scores) == []


@pytest.mark.parametrize("verb", ["report", "demo"])
def test_permission_denied_is_a_one_line_error(scores, capsys, monkeypatch, verb):
    # a read-only folder, as a non-root user meets it (root may write anywhere, so the
    # refusal is simulated at the operating-system call)
    import probwrap.cli._files as common

    def denied(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(common.os, "access", lambda *a, **k: True)
    monkeypatch.setattr(common.tempfile, "mkstemp", denied)
    argv = (["report", "--scores", str(scores / "held.csv"), "--score-column", "risk",
             "--label-column", "damaged", "--resamples", "10", "--out", str(scores / "r.html")]
            if verb == "report" else ["demo", "--out", str(scores / "demo"), "--n-train", "500"])
    code = main(argv)
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 1
    assert err[-1].startswith(f"probwrap {verb}: error: ") and "Permission denied" in err[-1]
    assert all("warning" in line or "step" in line for line in err[:-1])


def test_apply_csv_to_parquet_keeps_numbers_as_numbers(scores, capsys):
    assert _fit(scores) == 0
    out = scores / "today.parquet"
    assert main(["calibrate", "apply", "--map", str(scores / "map.json"), "--scores",
                 str(scores / "held.csv"), "--score-column", "risk", "--out", str(out)]) == 0
    frame = pd.read_parquet(out)
    assert frame["risk"].dtype == np.float64
    # the exact numbers of the CSV text (Python's float() rounds correctly; pandas' own
    # CSV parser is off by one unit in the last place for about a third of these in 2.1)
    text = (scores / "held.csv").read_text().splitlines()[1:]
    exact = np.array([float(line.split(",")[0]) for line in text])
    np.testing.assert_array_equal(frame["risk"].to_numpy(), exact)
