"""Cheap checks of the documentation sources (CI builds the site itself with ``sphinx -W``)."""

from __future__ import annotations

import ast
import importlib
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
EXAMPLES = sorted((ROOT / "examples").glob("*.py"))


@pytest.mark.parametrize("script", EXAMPLES, ids=[p.name for p in EXAMPLES])
def test_examples_have_a_gallery_title(script):
    doc = ast.get_docstring(ast.parse(script.read_text()), clean=True)
    assert doc, f"{script.name} needs a module docstring"
    lines = doc.splitlines()
    title, underline = lines[0], lines[1]
    assert title.strip() and re.fullmatch(r"=+", underline) and len(underline) >= len(title)


def test_gallery_header_exists():
    assert (ROOT / "examples" / "GALLERY_HEADER.rst").exists()


def _api_modules() -> list[str]:
    pages = sorted((DOCS / "api").glob("probwrap*.rst"))
    found = []
    for page in pages:
        found += re.findall(r"^\.\. automodule:: (\S+)$", page.read_text(), flags=re.M)
    return found


def test_api_pages_import_and_are_listed():
    index = (DOCS / "api" / "index.rst").read_text()
    modules = _api_modules()
    assert "probwrap" in modules and "probwrap.calibration" in modules
    for module in modules:
        importlib.import_module(module)
        assert f"   {module}\n" in index


def test_every_public_subpackage_has_an_api_page():
    package = ROOT / "probwrap"
    public = {
        f"probwrap.{p.stem}"
        for p in package.iterdir()
        if not p.name.startswith(("_", "."))
        and (p.is_dir() and (p / "__init__.py").exists() or p.suffix == ".py")
    }
    public.discard("probwrap.cli")  # documented as a guide page (command_line.md)
    assert public <= set(_api_modules())


def test_guide_pages_are_reachable_and_conf_has_no_intersphinx():
    index = (DOCS / "index.rst").read_text()
    assert "   *\n" in index  # the glob that takes in every guide page
    for page in ("calibration", "decisions", "prior_shift"):
        assert (DOCS / f"{page}.md").exists() and f"   {page}\n" in index
    conf = (DOCS / "conf.py").read_text()
    assert "intersphinx" not in conf  # no network during the build
    assert "which-method-when" in index  # the method-choice table is linked from the front page
    assert "## Which method when" in (DOCS / "calibration.md").read_text()
