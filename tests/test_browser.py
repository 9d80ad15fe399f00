"""The app in a real browser: Debian's chromium driven by Playwright against a live Streamlit server.

Starts ``streamlit run app.py`` on a free loopback port (the session fixture ``app_url``), opens the
case planner, changes the first phase's O2 flow in its number box, and checks that the totals
change the way the model says they must (more flow, more agent delivered); then opens every page.
With CI=true the tests must run; elsewhere they are skipped when chromium is missing. Never downloads
a browser. Waits are Playwright's auto-waiting locators and ``expect`` (tests/browser_helpers.py).
"""

from __future__ import annotations

import time

import pytest
from browser_helpers import (
    edit_box,
    metric,
    metric_text,
    new_page,
    number,
    open_page,
    phase_box,
    phase_rows,
    require_chromium,
    wait_for_run,
)

pytestmark = pytest.mark.browser
require_chromium()


def test_change_a_fresh_gas_flow_and_see_the_totals_change(app_url, chromium_browser, tmp_path):
    from playwright.sync_api import expect

    page = new_page(chromium_browser, 1800)
    t0 = time.monotonic()
    open_page(page, app_url, "Case planner", ready="Liquid agent")
    first_totals = time.monotonic() - t0
    before_agent_text = metric_text(page, "Liquid agent")
    before_agent, before_o2 = number(before_agent_text), number(metric_text(page, "Oxygen"))
    phases = phase_rows(page, ("O2 [L/min]",))
    assert phases == [
        {"phase": "wash-in", "O2 [L/min]": "3"},
        {"phase": "maintenance", "O2 [L/min]": "0.3"},
        {"phase": "emergence", "O2 [L/min]": "6"},
    ]
    # The wash-in's O2 box (the first phase): 3 -> 6 L/min. Dion 1992, Baum and Aitkenhead 1995: at the
    # same end-tidal hold more fresh gas delivers and vents more agent.
    t1 = time.monotonic()
    box = phase_box(page, 0, "O2 [L/min]")
    edit_box(page, box, "6")
    expect(box).to_have_value("6")
    expect(metric(page, "Liquid agent")).not_to_have_text(before_agent_text, timeout=120_000)
    wait_for_run(page)
    rerun = time.monotonic() - t1
    after_agent = number(metric_text(page, "Liquid agent"))
    assert after_agent > before_agent
    assert number(metric_text(page, "Oxygen")) > before_o2
    # A box emptied removes its key (the contract's default, no air): the maintenance's 0.2 L/min of air
    # over 70 min (14 L at the flowmeter) leave the air total, which is shown in whole litres of free gas
    # at 15 degC and 101.325 kPa (the rounding of two shown values and a few per cent of conversion).
    before_air_text = metric_text(page, "Air")
    air = phase_box(page, 1, "air [L/min]")
    edit_box(page, air, "")
    expect(metric(page, "Air")).not_to_have_text(before_air_text, timeout=120_000)
    wait_for_run(page)
    expect(air).to_have_value("")
    assert number(metric_text(page, "Air")) == pytest.approx(number(before_air_text) - 14, abs=1.5)
    page.screenshot(path=str(tmp_path / "case_planner_after_edit.png"), full_page=True)
    print(
        f"first totals {first_totals:.2f} s, rerun after a flow edit {rerun:.2f} s "
        f"(liquid agent {before_agent} -> {after_agent} mL)"
    )
    page.close()


#: Metrics cut off at 1440 px (issue 19, item 6) that this test found and the app has not fixed yet.
CUT_OFF: dict[str, str] = {}
PAGES = (
    ("", "Case planner"),
    ("flow-floor", "Flow floor"),
    ("compare-plans", "Compare plans"),
    ("supply-duration", "Supply duration"),
    ("demand-forecast", "Demand forecast"),
    ("fresh-gas-audit", "Fresh-gas audit"),
    ("site-and-flowmeter", "Site and flowmeter"),
    ("methods-and-sources", "Methods and sources"),
)


@pytest.mark.parametrize(
    ("path", "title"),
    [
        pytest.param(
            path,
            title,
            marks=pytest.mark.xfail(path in CUT_OFF, reason=f"cut off: {CUT_OFF.get(path)}", strict=True),
            id=path or "case-planner",
        )
        for path, title in PAGES
    ],
)
def test_every_page_opens_with_the_caution_and_no_metric_cut_off(app_url, chromium_browser, path, title):
    page = new_page(chromium_browser)  # 1440 px wide
    open_page(page, f"{app_url}/{path}", title)  # the heading, the caution, the run done, no exception
    cut = page.evaluate(CUT_OFF_JS)
    page.close()
    assert not cut, cut


#: Each metric's label, value or delta whose text is wider than its box (shown with an ellipsis).
CUT_OFF_JS = """() => [...document.querySelectorAll('[data-testid=stMetric] *')]
    .filter(e => e.scrollWidth > e.clientWidth + 1 && e.innerText.trim())
    .map(e => e.innerText.trim())"""
