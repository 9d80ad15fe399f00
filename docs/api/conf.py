"""Sphinx configuration of the API reference: built from the numpydoc docstrings of ``estimator``.

Build (warnings are errors; about half a minute)::

    uv run --group docs sphinx-build -W --keep-going -b html docs/api docs/api/_build
"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from estimator import __version__  # noqa: E402

project = "lowflow-estimator"
author = "The lowflow-estimator developers"
copyright = "the lowflow-estimator developers, BSD-3-Clause"  # noqa: A001 - Sphinx's name
version = release = __version__

extensions = ["sphinx.ext.autodoc", "numpydoc", "myst_parser"]
source_suffix = {".rst": "restructuredtext", ".md": "markdown"}
exclude_patterns = ["_build"]
root_doc = "index"

# API pages list their members by hand (api.rst); numpydoc renders Parameters, Returns, Examples.
autodoc_member_order = "bysource"
autodoc_typehints = "none"  # the numpydoc sections carry the types, with their units
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False

# The Markdown pages (README, validation, references) link to repository files such as
# docs/schemas/ or tests/; those are not pages of this site, so a link to them is not a broken
# reference here (links between the site's own pages are still checked).
myst_heading_anchors = 3
# numpydoc "References" sections list the sources of a function or module as citations; the text
# does not cite each one by number, which Sphinx would report as an unreferenced citation.
suppress_warnings = ["myst.xref_missing", "ref.citation"]

# Every cross-reference must resolve (-n): a typo in :func:`...` or a renamed function fails the build.
# Other projects' objects (and the standard library's) are not part of this site: no network at build time for their inventories.
nitpicky = True
nitpick_ignore_regex = [
    (
        r"py:.*",
        r"(pint|numpy|np|pandas|pd|pydantic|scipy|typer|openpyxl|numba|pathlib|datetime|collections|typing)(\..*)?",
    )
]

html_theme = "alabaster"
html_title = f"lowflow-estimator {version}"
