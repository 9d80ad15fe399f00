"""The API reference (docs/api, Sphinx with numpydoc) covers every module of the package once.

The site itself is built by ``.ci/run`` with warnings as errors and every cross-reference resolved
(``sphinx-build -n -W``); this check is the fast part: a new module must be listed on a page, or a
reference to it would not resolve.
"""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
API = ROOT / "docs" / "api"


def _package_modules() -> set[str]:
    names = set()
    for path in (ROOT / "estimator").rglob("*.py"):
        parts = path.relative_to(ROOT).with_suffix("").parts
        if parts[-1] == "__init__":
            parts = parts[:-1]
        if parts[-1] == "__main__" or parts[:2] == ("estimator", "cli"):
            continue  # the command line is documented in the README (the user guide page)
        names.add(".".join(parts))
    return names


def test_every_module_is_on_one_page():
    listed = [
        m for page in ("api.rst", "internals.rst") for m in re.findall(r"automodule:: (\S+)", (API / page).read_text())
    ]
    assert len(listed) == len(set(listed)), "a module is listed twice"
    assert set(listed) == _package_modules()


def test_the_site_checks_its_references():
    conf = (API / "conf.py").read_text()
    assert "nitpicky = True" in conf and '"numpydoc"' in conf
    assert "sphinx-build -q -n -W" in (ROOT / ".ci" / "run").read_text()
