"""Every code block in README.md and docs/*.md runs as written (consistency of the docs).

How blocks are treated (also in DEVELOPERS.md, "How we test"):

- The fence's language decides. ``python`` blocks and ``bash`` / ``sh`` / ``shell`` blocks are
  code and run; any other language (``text``, ``json``, MyST directives such as ``{glossary}``)
  is not code. A fence without a language is an error, so code cannot dodge the test.
- The ``python`` blocks of one file run top to bottom in ONE namespace (a reader pastes them in
  order), in a fresh interpreter whose working directory is an empty temporary folder. So a block
  may use names defined in an earlier block of the same file, never names defined nowhere.
- Each ``bash`` block runs with ``bash -e`` in an empty temporary folder where the input files the
  docs name (``heldout.csv``, ``this-week.csv``, ... see ``INPUT_FILES`` in
  ``tests/docs_blocks.py``) were first written from
  ``probwrap.datasets``. A doc that names a new input file adds it there. README blocks made
  only of ``probwrap`` commands are the exception: tests/test_cli_readme.py runs them as
  written (and checks their output files), so they are not run twice.
- Markers on the line(s) just before a fence (blank lines allowed between):

  ``<!-- not-run: reason -->``
      the block is not run; the reason is required and shows in the skip list. Use it only for
      what cannot run here (a cluster, a file system the reader has), never for a fragment.
  ``<!-- known-failure: reason -->``
      the block runs and is expected to fail because of an open bug named in the reason
      (a strict ``xfail``: once the block runs, the test fails until the marker is removed).
  ``<!-- fresh-venv: quickstart -->`` / ``<!-- fresh-venv: tests -->`` (README.md only)
      install commands; ``.ci/run`` runs them literally in fresh virtual environments
      (``tests/docs_blocks.py`` prints them), so this test does not run them in its own.

Running the blocks takes seconds each (the command line, Dask, cross-fitting), so they are marked
``slow``: ``python -m pytest -m "not slow"`` leaves them out, CI runs them.
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

_spec = importlib.util.spec_from_file_location(
    "probwrap_tests_docs_blocks", Path(__file__).with_name("docs_blocks.py"))
docs_blocks = importlib.util.module_from_spec(_spec)
sys.modules[_spec.name] = docs_blocks
_spec.loader.exec_module(docs_blocks)

ROOT = docs_blocks.ROOT
PYTHON, SHELL = docs_blocks.PYTHON, docs_blocks.SHELL
ALL_BLOCKS, CODE_BLOCKS = docs_blocks.ALL_BLOCKS, docs_blocks.CODE_BLOCKS
DOC_FILES = docs_blocks.DOC_FILES
parse_blocks, fresh_venv_blocks = docs_blocks.parse_blocks, docs_blocks.fresh_venv_blocks


# ------------------------------------------------------------------------------------- runners
_PY_RUNNER = """
import json, sys
blocks = json.load(open(sys.argv[1], encoding="utf-8"))
namespace = {"__name__": "__main__"}
for name, code in blocks:
    exec(compile(code, name, "exec"), namespace)
"""


def _env() -> dict[str, str]:
    env = dict(os.environ, MPLBACKEND="Agg", OMP_NUM_THREADS="1", PYTHONHASHSEED="0")
    # the interpreter running the tests comes first, so `probwrap` and `python` are this one
    env["PATH"] = os.pathsep.join([str(Path(sys.executable).parent), env.get("PATH", "")])
    return env


def _mark(block, *extra):
    marks = list(extra)
    if block.marker == "not-run":
        marks.append(pytest.mark.skip(reason=f"docs marker not-run at {block.name}: {block.reason}"))
    elif block.marker == "known-failure":
        marks.append(pytest.mark.xfail(reason=f"{block.name}: {block.reason}", strict=True))
    return marks


def _python_params():
    params = []
    for path in DOC_FILES:
        blocks = [b for b in CODE_BLOCKS if b.path == path and b.language in PYTHON]
        if blocks:
            params.append(pytest.param(blocks, id=str(path.relative_to(ROOT)), marks=pytest.mark.slow))
    return params


def _run_by_the_readme_test(block) -> bool:
    """README blocks made only of ``probwrap`` commands (and comments) are run as written, with
    their output files checked, by tests/test_cli_readme.py (the same command lines: its parser
    keeps exactly the lines whose ``&&`` parts all start with ``probwrap``). Running them here
    as well took about 20 s of CI time for no further check."""
    if block.path.name != "README.md" or block.marker is not None:
        return False
    lines = [line.strip() for line in block.code.replace("\\\n", " ").splitlines()]
    lines = [line for line in lines if line and not line.startswith("#")]
    return bool(lines) and all(
        part.strip().startswith("probwrap ") for line in lines for part in line.split("&&"))


def _shell_params():
    return [
        pytest.param(b, id=b.name, marks=_mark(b, pytest.mark.slow))
        for b in CODE_BLOCKS
        if b.language in SHELL and b.marker != "fresh-venv" and not _run_by_the_readme_test(b)
    ]


@pytest.mark.parametrize("blocks", _python_params())
def test_python_blocks_run(blocks, tmp_path):
    # Blocks marked not-run are left out (they are listed by test_markers_are_explained); a
    # known-failure block makes the file's run an expected failure.
    run = [b for b in blocks if b.marker != "not-run"]
    known = [f"{b.name}: {b.reason}" for b in run if b.marker == "known-failure"]
    if not _run_python(run, tmp_path, check=not known):
        pytest.xfail("; ".join(known))
    if known:
        pytest.fail(f"the blocks run now: remove their known-failure markers ({'; '.join(known)})")


def _run_python(blocks, tmp_path, check):
    spec = tmp_path / "blocks.json"
    spec.write_text(json.dumps([[f"{b.name} (python block)", b.code] for b in blocks]))
    work = tmp_path / "work"
    work.mkdir()
    done = subprocess.run([sys.executable, "-c", _PY_RUNNER, str(spec)], cwd=work, env=_env(),
                          capture_output=True, text=True, timeout=600)
    if check:
        assert done.returncode == 0, done.stderr[-3000:]
    return done.returncode == 0


@pytest.fixture(scope="module")
def input_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("doc-inputs")
    docs_blocks.write_input_files(folder)
    return folder


@pytest.mark.parametrize("block", _shell_params())
def test_shell_blocks_run(block, input_folder, tmp_path):
    work = tmp_path / "work"
    shutil.copytree(input_folder, work)
    done = subprocess.run(["bash", "-e", "-c", block.code], cwd=work, env=_env(),
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, (done.stdout[-1500:], done.stderr[-3000:])


def test_readme_command_blocks_left_out_here_are_run_by_the_readme_test():
    left_out = [b for b in CODE_BLOCKS if b.language in SHELL and _run_by_the_readme_test(b)]
    assert left_out  # the README's command-line tour
    spec = importlib.util.spec_from_file_location(
        "probwrap_tests_cli_readme", Path(__file__).with_name("test_cli_readme.py"))
    cli_readme = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(cli_readme)
    run_there = {" ".join(c.split()) for c in cli_readme.readme_commands()}
    for b in left_out:
        for line in b.code.replace("\\\n", " ").splitlines():
            line = line.strip()
            if line and not line.startswith("#"):
                assert " ".join(line.split()) in run_there, f"{b.name}: {line!r} is not run"


def test_every_fence_names_its_language():
    unnamed = [b.name for b in ALL_BLOCKS if not b.language]
    assert not unnamed, f"fences without a language (write ```python, ```bash, ```text): {unnamed}"


def test_markers_are_explained():
    for b in ALL_BLOCKS:
        if b.marker is not None:
            assert b.reason, f"{b.name}: a {b.marker} marker needs a reason after the colon"
            assert b.language in PYTHON | SHELL, f"{b.name}: a marker on a non-code block"
        if b.marker == "fresh-venv":
            assert b.path.name == "README.md" and b.language in SHELL, b.name
            assert b.reason in ("quickstart", "tests"), b.name


def test_readme_install_commands_are_marked_for_ci():
    # .ci/run runs these literally in fresh environments (python3 tests/docs_blocks.py).
    assert len(fresh_venv_blocks("quickstart")) == 1
    assert len(fresh_venv_blocks("tests")) == 1
    for b in fresh_venv_blocks("quickstart") + fresh_venv_blocks("tests"):
        assert "pip install" in b.code
    assert "tests/docs_blocks.py fresh-venv" in (ROOT / ".ci" / "run").read_text()


def test_parser_reads_fences_and_markers(tmp_path):
    # consistency test of the parser itself on a small hand-written page
    page = tmp_path / "page.md"
    page.write_text(
        "text\n\n```python\nx = 1\n```\n\n<!-- not-run: needs a cluster -->\n\n"
        "```bash\nfalse\n```\n````text\n```python\nnot code\n```\n````\n"
    )
    blocks = parse_blocks(page)
    assert [(b.line, b.language, b.marker, b.reason) for b in blocks] == [
        (3, "python", None, ""), (9, "bash", "not-run", "needs a cluster"), (12, "text", None, ""),
    ]
    assert blocks[0].code == "x = 1\n" and blocks[2].code == "```python\nnot code\n```\n"


