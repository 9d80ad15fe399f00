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


@pytest.fixture(scope="session")
def app_url():
    """URL of one live ``streamlit run app.py`` shared by the browser tests (tests/app_server.py); stopped at the end."""
    import app_server

    try:
        proc, url = app_server.start(120.0, poll=0.3)
    except RuntimeError as exc:
        pytest.fail(str(exc))
    yield url
    app_server.stop(proc)


@pytest.fixture(scope="session")
def chromium_browser():
    """Debian's chromium under Playwright, headless and off the network (never a downloaded browser)."""
    import shutil

    import app_server
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=shutil.which("chromium"), args=app_server.FLAGS, headless=True)
        yield browser
        browser.close()
