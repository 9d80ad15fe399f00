"""Write the README's screenshots, docs/case_planner.png and docs/flow_floor.png, from the live app.

Usage (from the repository root; needs Debian's chromium, never downloads a browser)::

    uv run python docs/make_screenshots.py

Starts ``streamlit run app.py`` on a free loopback port (tests/app_server.py), opens the case
planner and the flow floor on the built-in demo in headless chromium, waits for their charts, and
saves each page.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
import app_server  # noqa: E402

#: (url path, file, heading, charts to wait for, viewport height)
PAGES = (
    ("", "case_planner.png", "Case planner", 5, 1560),
    ("flow-floor", "flow_floor.png", "Flow floor", 1, 1500),
)
WAIT_MS = 120_000


def main() -> None:
    chromium = shutil.which("chromium")
    if chromium is None:
        raise SystemExit("chromium is not on the PATH (Debian: apt-get install chromium)")
    from playwright.sync_api import sync_playwright

    proc, url = app_server.start()
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=chromium, args=app_server.FLAGS, headless=True)
            for path, name, heading, charts, height in PAGES:
                page = browser.new_page(viewport={"width": 1440, "height": height})
                page.goto(f"{url}/{path}")
                page.get_by_role("heading", name=heading).first.wait_for(timeout=WAIT_MS)
                page.wait_for_function(f"document.querySelectorAll('.vega-embed').length >= {charts}", timeout=WAIT_MS)
                page.wait_for_timeout(1500)  # let the charts finish drawing
                out = ROOT / "docs" / name
                page.screenshot(path=str(out))
                print(f"wrote {out.relative_to(ROOT)}")
                page.close()
            browser.close()
    finally:
        app_server.stop(proc)


if __name__ == "__main__":
    main()
