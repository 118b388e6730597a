"""Every ``probwrap`` command the README shows runs as written, with its defaults.

The commands are taken from the README itself (its ``bash`` blocks), on score files this test
writes first under the names the README uses, and run through ``bash -e`` with the installed
``probwrap`` script, as a user would paste them. Installing is CI's part (``.ci/run`` installs
with the README's install command in a fresh environment); here the install step is left out.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression

from probwrap.datasets import make_parcels

README = Path(__file__).resolve().parents[1] / "README.md"


def _bash_blocks(text: str) -> list[str]:
    return re.findall(r"```bash\n(.*?)```", text, flags=re.S)


def _commands(block: str) -> list[str]:
    """The block's commands: continuation lines joined, comments dropped, installs left out."""
    joined = block.replace("\\\n", " ")
    out = []
    for line in joined.splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        parts = [p.strip() for p in line.split("&&")]
        parts = [p for p in parts if not p.startswith("pip install")]
        if parts and all(p.startswith("probwrap") for p in parts):
            out.append(" && ".join(parts))
    return out


def readme_commands() -> list[str]:
    return [c for block in _bash_blocks(README.read_text(encoding="utf-8"))
            for c in _commands(block)]


def test_the_readme_shows_the_install_with_the_cli_extra():
    text = README.read_text(encoding="utf-8")
    quickstart = _bash_blocks(text)[0]
    assert quickstart.strip() == 'pip install ".[cli]" && probwrap demo --out demo-output'
    verbs = {c.split()[1] for c in readme_commands()}
    assert {"demo", "calibrate", "cutoff", "prevalence", "report"} <= verbs


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    """The files the README's commands read, from a model on the invented parcels."""
    root = tmp_path_factory.mktemp("readme")
    train = make_parcels(3000, random_state=10)
    held = make_parcels(2000, random_state=11)
    today = make_parcels(1500, random_state=12)
    week = make_parcels(1500, season="winter", random_state=13)
    model = LogisticRegression(max_iter=1000).fit(train.data, train.target)
    risk = model.predict_proba(held.data)[:, 1]
    pd.DataFrame({"parcel": np.arange(risk.shape[0]), "risk": risk,
                  "damaged": np.where(held.target == 1, "yes", "no")}).to_csv(
        root / "heldout.csv", index=False)
    pd.DataFrame({"risk": model.predict_proba(today.data)[:, 1]}).to_parquet(
        root / "today.parquet")
    pd.DataFrame({"risk": model.predict_proba(week.data)[:, 1]}).to_csv(
        root / "this-week.csv", index=False)
    return root


def _blocks_with_commands() -> list[list[str]]:
    blocks = [_commands(b) for b in _bash_blocks(README.read_text(encoding="utf-8"))]
    return [b for b in blocks if b]


@pytest.mark.parametrize("commands", _blocks_with_commands(),
                         ids=lambda c: c[0].split(" --")[0].replace(" ", "-"))
def test_readme_commands_run_as_written(workdir, commands):
    # one block at a time, in order, as pasted (apply reads the map that fit wrote)
    env = dict(os.environ)
    env["PATH"] = os.pathsep.join([str(Path(sys.executable).parent), env.get("PATH", "")])
    script = "\n".join(commands)
    proc = subprocess.run(["bash", "-e", "-c", script], cwd=workdir, env=env,
                          capture_output=True, text=True, timeout=900)
    assert proc.returncode == 0, f"{script}\n{proc.stderr}"
    assert "Traceback" not in proc.stderr
    for command in commands:
        for out in re.findall(r"--out (\S+)", command):
            target = workdir / out / "report.html" if " demo " in f" {command} " else workdir / out
            assert target.exists() and target.stat().st_size > 0, command
