"""Starting the command line loads no heavy library: ``probwrap --help`` and the parsing of
any verb's options import neither scikit-learn, SciPy, pandas, pyarrow nor matplotlib (they are
imported where a verb computes or reads), and ``import probwrap`` imports the wrappers on first
use only. Before, ``probwrap --help`` took about 1.5 s of CPU, most of it importing
scikit-learn through ``probwrap/__init__.py``."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import probwrap

HEAVY = ("sklearn", "scipy", "pandas", "pyarrow", "matplotlib", "probwrap.calibration",
         "probwrap.shift", "probwrap.decision")

_PROBE = """
import json, sys
import probwrap.cli as cli
parser = cli.build_parser()
for argv in (["cutoff", "--help"], ["prevalence", "--help"], ["calibrate", "fit", "--help"],
             ["report", "--help"], ["demo", "--help"], ["--help"]):
    try:
        parser.parse_args(argv)
    except SystemExit:
        pass
print(json.dumps(sorted(m for m in HEAVY if m in sys.modules)))
"""


def _run(code: str) -> str:
    env = dict(os.environ)
    # the worktree's package, not an installed copy
    env["PYTHONPATH"] = str(Path(probwrap.__file__).parent.parent)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env=env, check=True, timeout=120)
    return done.stdout.strip().splitlines()[-1]


def test_parsing_every_verb_loads_no_heavy_library():
    loaded = json.loads(_run(f"HEAVY = {HEAVY!r}\n" + _PROBE))
    assert loaded == []


def test_import_probwrap_defers_the_wrappers_until_asked_for():
    code = (f"HEAVY = {HEAVY!r}\nimport json, sys, probwrap\n"
            "before = sorted(m for m in HEAVY if m in sys.modules)\n"
            "from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper\n"
            "after = 'sklearn' in sys.modules\n"
            "print(json.dumps([before, after, CalibrationWrapper.__name__,"
            " probwrap.PriorShiftWrapper.__module__, 'CostPolicyWrapper' in dir(probwrap)]))")
    before, after, name, module, listed = json.loads(_run(code))
    assert before == []
    assert after is True
    assert name == "CalibrationWrapper"
    assert module == "probwrap._prior_shift"
    assert listed is True


def test_unknown_attribute_of_probwrap_is_an_attribute_error():
    try:
        probwrap.NoSuchWrapper  # noqa: B018
    except AttributeError as exc:
        assert "NoSuchWrapper" in str(exc)
    else:  # pragma: no cover
        raise AssertionError("probwrap.NoSuchWrapper did not raise AttributeError")


def test_method_names_of_the_command_line_are_the_saved_map_names():
    from probwrap.calibration._serialize import MAP_NAMES
    from probwrap.cli._calibrate import METHODS

    assert METHODS == MAP_NAMES
