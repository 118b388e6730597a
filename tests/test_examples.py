"""Every script in examples/ runs to completion (smoke test)."""

import os
import subprocess
import sys
from pathlib import Path

import pytest

EXAMPLES = sorted((Path(__file__).resolve().parents[1] / "examples").glob("*.py"))


@pytest.mark.parametrize("script", EXAMPLES, ids=[p.name for p in EXAMPLES])
def test_example_runs(script, tmp_path):
    env = dict(os.environ, MPLBACKEND="Agg", OMP_NUM_THREADS="1")
    done = subprocess.run(
        [sys.executable, str(script)],
        cwd=tmp_path,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip(), "the example printed nothing"
    assert "Traceback" not in done.stderr


def test_there_are_examples():
    assert len(EXAMPLES) >= 1
