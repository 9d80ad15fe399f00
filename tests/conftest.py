"""Shared test set-up.

pytest imports this file and the test modules of this folder with its default "prepend" import
mode: the folder has no ``__init__.py``, so pytest puts the folder itself on ``sys.path``. That is
how the tests import the helper modules beside them (``from engine_helpers import run``,
``from validation import record``) without installing them.
"""

from __future__ import annotations

from pathlib import Path

import pytest

#: The demo files shipped with the project (invented sites and prices).
DEMO_DIR = Path(__file__).resolve().parent.parent / "demo_cases"


@pytest.fixture(scope="session")
def demo_dir() -> Path:
    """Folder of the demo cases."""
    return DEMO_DIR
