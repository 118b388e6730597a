"""Sphinx configuration of the probwrap documentation site.

Build (warnings are errors, as in CI):

    python -m sphinx -W --keep-going -q -b html docs docs/_build/html
"""

from __future__ import annotations

import os
import re
import sys
from pathlib import Path

# The gallery runs the examples, which use OpenMP-heavy gradient boosting: one thread each keeps
# the build fast and quiet on small machines. Set before anything imports NumPy or scikit-learn.
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MPLBACKEND", "Agg")

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import probwrap  # noqa: E402

project = "probwrap"
author = "probwrap developers"
copyright = "probwrap developers"  # noqa: A001
release = probwrap.__version__
version = release

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.mathjax",
    "numpydoc",
    "myst_parser",
    "sphinx_gallery.gen_gallery",
]

source_suffix = {".rst": "restructuredtext", ".md": "markdown"}
exclude_patterns = ["_build", "Thumbs.db", ".DS_Store", "auto_examples/*.ipynb"]
root_doc = "index"

# -- API pages -------------------------------------------------------------------------------
autodoc_default_options = {"members": True, "inherited-members": False}
autodoc_typehints = "none"  # the numpydoc parameter lists already give the types
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False
numpydoc_validation_checks: set[str] = set()
numpydoc_xref_param_type = False

# -- gallery ---------------------------------------------------------------------------------
sphinx_gallery_conf = {
    "examples_dirs": str(ROOT / "examples"),
    "gallery_dirs": "auto_examples",
    "filename_pattern": r".*\.py$",  # execute every example (each runs in seconds)
    "download_all_examples": False,
    "write_computation_times": False,
    "show_memory": False,
    "plot_gallery": "True",
    "within_subsection_order": "FileNameSortKey",
    "remove_config_comments": True,
}

# -- Markdown guides -------------------------------------------------------------------------
myst_enable_extensions = ["dollarmath", "deflist"]
myst_heading_anchors = 3

# -- HTML ------------------------------------------------------------------------------------
html_theme = "furo"
html_title = f"probwrap {release}"
html_static_path: list[str] = []

# -- docstring hygiene (configuration only; the modules are not edited) ----------------------
_TYPE_LINE = re.compile(r"^(\s*[\w*, ]+ : )(.*)$")
_TRAILING_UNDERSCORE = re.compile(r"\b([A-Za-z]\w*?)_(?![\w`])")


def _escape_fitted_names(app, what, name, obj, options, lines) -> None:
    """In numpydoc type lines such as ``edges_ : ndarray of shape (n_bins_used_ - 1,)``, a word
    ending in "_" would be read by reST as a link; escape it (runs before numpydoc)."""
    for i, line in enumerate(lines):
        m = _TYPE_LINE.match(line)
        if m and not line.lstrip().startswith((">>>", "...")):
            lines[i] = m.group(1) + _TRAILING_UNDERSCORE.sub(r"\1\\_", m.group(2))


def _skip_generated_request_methods(app, what, name, obj, skip, options):
    """scikit-learn adds set_*_request methods (metadata routing) with its own cross-references;
    they are documented by scikit-learn, not here."""
    if name.startswith("set_") and name.endswith("_request"):
        return True
    return None


def setup(app):
    app.connect("autodoc-process-docstring", _escape_fitted_names, priority=400)
    app.connect("autodoc-skip-member", _skip_generated_request_methods)
