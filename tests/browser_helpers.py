"""What the real-browser tests share: the skip rule, waiting for a Streamlit run, reading and editing
the data grids and the case planner's phase boxes, and the command line's JSON for the same demo file.

Every wait is a Playwright auto-waiting locator or ``expect`` with a generous timeout, never a sleep:
a page is ready when the app's script state is ``notRunning`` and a known element shows. A data grid
(a canvas) keeps an accessible table of its cells beside the canvas; the tests read cell text there
and, to edit, check which cell is selected before they type.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

ROOT = Path(__file__).resolve().parents[1]
CHROMIUM = shutil.which("chromium")
#: Generous waits [ms]: a cold server imports the engine and loads numba's compiled cache, and the
#: machine may be busy.
TIMEOUT_MS = 120_000
#: The caution every page opens with.
CAUTION = "Planning and audit aid only"
#: A number with a decimal point, as a table shows it (thousands set apart by a thin space).
DECIMAL = re.compile(r"\d[\d\u202f]*\.\d+")
#: Most significant figures a shown number with decimals may have: a table rounds to three
#: (estimator/display.py), an editor cell shows four (190 bar as 2756 psi, estimator_app/editing.py).
FIGURES = 4


def require_chromium() -> None:
    """Skip the calling module when chromium is missing; with CI=true fail instead (never download one)."""
    if CHROMIUM is not None:
        return
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail("CI=true but chromium is not installed: the browser tests must run in CI", pytrace=False)
    pytest.skip("chromium not installed", allow_module_level=True)


def wait_for_run(page: Any, timeout: float = TIMEOUT_MS) -> None:
    """Wait until the app is connected, its script has finished running and no widget is still a placeholder."""
    from playwright.sync_api import expect

    app = page.get_by_test_id("stApp")
    expect(app).to_have_attribute("data-test-connection-state", "CONNECTED", timeout=timeout)
    expect(app).to_have_attribute("data-test-script-state", "notRunning", timeout=timeout)
    expect(page.get_by_test_id("stSkeleton")).to_have_count(0, timeout=timeout)  # lazily loaded widgets drawn


def open_page(page: Any, url: str, heading: str, ready: str | None = None) -> None:
    """Go to ``url``, wait for its heading, an optional text ``ready`` and the end of the run; no exception shown."""
    from playwright.sync_api import expect

    page.goto(url)
    expect(page.get_by_role("heading", name=heading).first).to_be_visible(timeout=TIMEOUT_MS)
    expect(page.get_by_text(CAUTION).first).to_be_visible(timeout=TIMEOUT_MS)
    if ready is not None:
        expect(page.get_by_text(ready).first).to_be_visible(timeout=TIMEOUT_MS)
    wait_for_run(page)
    expect(page.get_by_test_id("stException")).to_have_count(0)


def metric(page: Any, label: str) -> Any:
    """The value locator of the first metric whose label starts with ``label``."""
    box = page.get_by_test_id("stMetric").filter(has=page.get_by_test_id("stMetricLabel").filter(has_text=label))
    return box.first.get_by_test_id("stMetricValue")


def metric_text(page: Any, label: str) -> str:
    """The shown value of a metric, once it is visible."""
    from playwright.sync_api import expect

    value = metric(page, label)
    expect(value).to_be_visible(timeout=TIMEOUT_MS)
    return value.inner_text().strip()


def expect_metric(page: Any, label: str, shown: str) -> None:
    """Wait until the metric ``label`` shows ``shown`` (spaces, thin ones included, compared as one space)."""
    from playwright.sync_api import expect

    expect(metric(page, label)).to_have_text(shown, timeout=TIMEOUT_MS)


def number(text: str) -> float:
    """The first number in a shown text (thousands separators, plain or thin spaces, removed)."""
    found = re.search(r"[-+]?\d[\d,\u202f\u00a0]*\.?\d*", text)
    assert found, text
    return float(re.sub(r"[,\u202f\u00a0]", "", found.group(0)))


def choose_tab(page: Any, label: str) -> None:
    """Choose the tab ``label`` of a page's views (drawn when chosen: a rerun) and wait for the run."""
    from playwright.sync_api import expect

    tab = page.get_by_role("tab", name=label)
    tab.click()
    expect(tab).to_have_attribute("aria-selected", "true", timeout=TIMEOUT_MS)
    wait_for_run(page)


def after(page: Any, heading: str, testid: str = "stDataFrame") -> Any:
    """The first element with ``testid`` after the heading ``heading`` (a table or chart under a subheader)."""
    head = page.get_by_role("heading", name=heading).first
    return head.locator(f'xpath=following::*[@data-testid="{testid}"][1]')


def chart_texts(chart: Any) -> list[str]:
    """The texts drawn in a chart's SVG (axis titles, labels, marks' text)."""
    return chart.locator("svg text").evaluate_all("ts => ts.map(t => t.textContent.trim())")


def grid_rows(grid: Any) -> list[dict[str, str]]:
    """The header and cell texts of a data grid's accessible table, one dict a row (the rows drawn)."""
    from playwright.sync_api import expect

    table = grid.locator("table[role=grid]")
    expect(table.locator("tbody tr").first).to_be_attached(timeout=TIMEOUT_MS)
    heads, rows = table.evaluate(
        """t => [
            [...t.querySelectorAll('thead th')].map(h => h.innerText.trim()),
            [...t.querySelectorAll('tbody tr')].map(r => [...r.querySelectorAll('td')].map(c => c.innerText.trim())),
        ]"""
    )
    return [dict(zip(heads, r, strict=False)) for r in rows]


def tables_text(page: Any) -> list[str]:
    """Every cell and header text of every data grid on the page (the rows drawn)."""
    return page.locator('[data-testid="stDataFrame"] table[role=grid]').evaluate_all(
        "ts => ts.flatMap(t => [...t.querySelectorAll('th, td')].map(c => c.innerText.trim()))"
    )


def figures(shown: str) -> int:
    """Significant figures of a shown number with decimals ("13539.889" has 8, "0.0450" has 3).

    >>> figures("13539.889"), figures("0.5449"), figures("0.0450"), figures("2\u202f756.5")
    (8, 4, 3, 5)
    """
    digits = shown.replace("\u202f", "").replace(".", "").lstrip("0")
    return len(digits)


def assert_tables_read_well(page: Any) -> None:
    """No table cell shows a long decimal (13539.889, 2755.717) or the word None (issue 19, item 6)."""
    cells = tables_text(page)
    assert cells, "no table on the page"
    bad = [c for c in cells if c == "None" or any(figures(n) > FIGURES for n in DECIMAL.findall(c))]
    assert not bad, bad


def edit_cell(page: Any, grid: Any, row: int, col: int, text: str, attempts: int = 4, commit: bool = True) -> None:
    """Type ``text`` into the cell of data row ``row`` and column ``col`` (both from 0) of a data editor;
    ``commit=False`` leaves the typed text in the open editor (the caller presses Enter).

    Selects the first cell, checks in the grid's accessible table that it is selected, moves with the
    arrow keys, checks the target is selected and that the cell editor opens on the target's text, then
    types. Each failed check presses Escape and starts again (nothing has changed yet, so a retry is safe).
    """
    from playwright.sync_api import expect

    target = f"glide-cell-{col + 1}-{row}"
    shown = grid.get_by_test_id(target).inner_text().strip()
    editor = page.locator("#portal textarea, #portal input").first
    for attempt in range(attempts):
        wait_for_run(page)
        grid.scroll_into_view_if_needed()
        box = grid.bounding_box()
        page.mouse.click(box["x"] + 90, box["y"] + 35 + 17)  # first data cell: past the row markers, header 35 px
        try:
            expect(grid.get_by_test_id("glide-cell-1-0")).to_have_attribute("aria-selected", "true", timeout=5_000)
            for _ in range(row):
                page.keyboard.press("ArrowDown")
            for _ in range(col):
                page.keyboard.press("ArrowRight")
            expect(grid.get_by_test_id(target)).to_have_attribute("aria-selected", "true", timeout=5_000)
            page.keyboard.press("Enter")  # open the cell's editor on its current value
            expect(editor).to_be_visible(timeout=5_000)
            assert editor.input_value().strip() == shown, (editor.input_value(), shown)
            break
        except AssertionError:
            if attempt == attempts - 1:
                raise
            page.keyboard.press("Escape")
    editor.fill(text)
    if commit:
        page.keyboard.press("Enter")


def phase_box(page: Any, row: int, heading: str) -> Any:
    """The number box under ``heading`` (e.g. "O2 [L/min]") of the case planner's phase ``row`` (from 0).

    Every phase row's boxes carry their column's heading as their accessible name (shown on the first row).
    """
    return page.get_by_role("spinbutton", name=heading, exact=True).nth(row)


def phase_rows(page: Any, headings: tuple[str, ...] = ()) -> list[dict[str, str]]:
    """The case planner's phases as shown: the phase label and the boxes under ``headings``, one dict a phase."""
    from playwright.sync_api import expect

    labels = page.get_by_role("textbox", name="phase", exact=True)
    expect(labels.first).to_be_visible(timeout=TIMEOUT_MS)
    rows = [{"phase": labels.nth(n).input_value()} for n in range(labels.count())]
    for n, row in enumerate(rows):
        row.update({h: phase_box(page, n, h).input_value() for h in headings})
    return rows


def edit_box(page: Any, box: Any, text: str, commit: bool = True) -> None:
    """Type ``text`` into a number box (its old text replaced); press Enter unless ``commit=False``."""
    wait_for_run(page)
    box.scroll_into_view_if_needed()
    box.fill(text)
    if commit:
        box.press("Enter")


def choose(page: Any, label: str, option: str) -> None:
    """Pick ``option`` in the select box labelled ``label`` and wait for the run it starts."""
    from playwright.sync_api import expect

    box = page.get_by_test_id("stSelectbox").filter(has_text=label).first
    box.locator("input").click()
    expect(page.get_by_role("option", name=option)).to_be_visible(timeout=TIMEOUT_MS)
    page.get_by_role("option", name=option).click()
    expect(box.get_by_role("combobox")).to_have_value(option, timeout=TIMEOUT_MS)
    wait_for_run(page)


def is_red(colour: str) -> bool:
    """Whether a CSS ``rgb(...)``/``rgba(...)`` colour is a red: red clearly above green and blue."""
    r, g, b = (int(v) for v in re.findall(r"\d+", colour)[:3])
    return r > 150 and r > g + 60 and r > b + 60


def cli_json(*argv: str) -> dict[str, Any]:
    """``lowflow ARGV --json`` (``python -m estimator``, the installed command line) run in the repository root."""
    done = subprocess.run(
        [sys.executable, "-m", "estimator", *argv, "--json"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
        check=False,
    )
    assert done.returncode == 0, done.stderr[-1000:]
    return json.loads(done.stdout)


def mag(q: dict[str, Any]) -> float:
    """Magnitude of a JSON quantity."""
    return float(q["magnitude"])


def new_page(browser: Any, height: int = 1400) -> Any:
    """A fresh page (its own browser context, so its own app session) with generous default timeouts."""
    page = browser.new_page(viewport={"width": 1440, "height": height}, accept_downloads=True)
    page.set_default_timeout(TIMEOUT_MS)
    return page
