"""Write the README's screenshots (docs/*.png) from the live app.

Usage (from the repository root; needs Debian's chromium, never downloads a browser)::

    uv run python docs/make_screenshots.py

Starts ``streamlit run app.py`` on a free loopback port (tests/app_server.py), opens the case
planner, the flow floor, the compare, supply and audit pages on their built-in demo files in
headless chromium, waits until the app's run has finished and every chart is drawn
(tests/browser_helpers.py), and saves the visible part of each page (the supply and audit pages scrolled to their results).
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
import app_server  # noqa: E402
from browser_helpers import TIMEOUT_MS, open_page  # noqa: E402

#: (url path, file, heading, a text shown once the results are, charts to wait for, viewport height,
#: a selector of what to scroll to the top of the view, or None)
PAGES = (
    ("", "case_planner.png", "Case planner", "Liquid agent", 5, 2200, None),
    ("flow-floor", "flow_floor.png", "Flow floor", "Recommended schedule", 1, 1500, None),
    ("compare-plans", "compare.png", "Compare plans", "Agents:", 0, 900, None),
    (
        "supply-duration",
        "supply.png",
        "Supply duration",
        "Days of supply",
        2,
        1200,
        '[data-testid="stMetric"]:has-text("Bottleneck")',
    ),
    ("fresh-gas-audit", "audit.png", "Fresh-gas audit", "Mean maintenance flow", 2, 1200, "text=Prices (edit"),
)
#: Every chart has drawn its canvas or svg with a size.
DRAWN = """n => {
    const charts = [...document.querySelectorAll('.vega-embed')];
    return charts.length >= n && charts.every(c => {
        const mark = c.querySelector('canvas, svg');
        return mark && mark.getBoundingClientRect().width > 0;
    });
}"""


def main() -> None:
    chromium = shutil.which("chromium")
    if chromium is None:
        raise SystemExit("chromium is not on the PATH (Debian: apt-get install chromium)")
    from playwright.sync_api import sync_playwright

    proc, url = app_server.start()
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=chromium, args=app_server.FLAGS, headless=True)
            for path, name, heading, ready, charts, height, top in PAGES:
                page = browser.new_page(viewport={"width": 1440, "height": height})
                page.set_default_timeout(TIMEOUT_MS)
                open_page(page, f"{url}/{path}", heading, ready=ready)
                page.wait_for_function(DRAWN, arg=charts, timeout=TIMEOUT_MS)
                if top is not None:
                    page.locator(top).first.evaluate("e => e.scrollIntoView({block: 'start'})")
                page.evaluate("document.fonts.ready.then(() => new Promise(r => requestAnimationFrame(r)))")
                out = ROOT / "docs" / name
                page.screenshot(path=str(out), animations="disabled")
                print(f"wrote {out.relative_to(ROOT)} ({out.stat().st_size / 1e3:.0f} kB)")
                page.close()
            browser.close()
    finally:
        app_server.stop(proc)


if __name__ == "__main__":
    main()
