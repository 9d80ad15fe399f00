"""The planner's workbench (issue 19) in a real browser, one short step per item, against the command line.

Each test opens one page of the live app (Debian's chromium under Playwright, the session fixtures of
tests/conftest.py) on its demo file, checks that the item is on screen, that the page's tables show
rounded numbers (item 6: no 13539.889, no None), and compares one headline number with
``lowflow <verb> FILE --json`` for the same demo file, formatted by the page's rule
(estimator/display.py). A consistency check between two faces of one engine, not a validation.
Skipped when chromium is missing, except with CI=true. Never downloads a browser.
"""

from __future__ import annotations

from datetime import date

import pytest
from browser_helpers import (
    after,
    assert_tables_read_well,
    chart_texts,
    choose,
    choose_tab,
    cli_json,
    expect_metric,
    grid_rows,
    is_red,
    mag,
    metric,
    new_page,
    open_page,
    phase_rows,
    require_chromium,
    wait_for_run,
)

from estimator.display import rounded
from estimator.display import text as shown

pytestmark = pytest.mark.browser
require_chromium()

CASE = "demo_cases/kestrel_lap_chole.toml"
#: The text colour of an alert box as drawn.
ALERT_COLOUR = "e => getComputedStyle(e.querySelector('[data-testid=stAlertContainer]') || e).color"


@pytest.fixture
def page(chromium_browser):
    p = new_page(chromium_browser)
    yield p
    p.close()


def test_case_planner_dial_table_and_printable_plan(app_url, page):
    """Items 1 and 2: the dial schedule as a table, the printable plan as a download; the liquid agent as the CLI."""
    from playwright.sync_api import expect

    open_page(page, app_url, "Case planner", ready="Liquid agent")
    choose_tab(page, "Phases and dial")
    dial = grid_rows(after(page, "Vaporizer dial of the end-tidal holds"))
    assert dial, "no dial schedule rows"
    assert {r["phase"] for r in dial} == {"1", "2"}, dial  # the two end-tidal holds: wash-in, maintenance
    assert all(r["dial [%]"] for r in dial), dial
    assert_tables_read_well(page)
    choose_tab(page, "Downloads")
    button = page.get_by_role("button", name="Case plan (printable HTML)")
    expect(button).to_be_visible()
    with page.expect_download() as got:
        button.click()
    html = got.value.path().read_text(encoding="utf-8")
    assert got.value.suggested_filename == "case_plan.html"
    assert "<html" in html.lower() and "maintenance" in html
    cli = cli_json("case", CASE)
    expect_metric(page, "Liquid agent", f"{mag(cli['totals']['agent_liquid']):.1f} mL")


def test_compare_plans_table_as_lowflow_compare(app_url, page):
    """Item 3: two plans side by side; the planner's demo case and the second plan's liquid agent as the CLI."""
    open_page(page, f"{app_url}/compare-plans", "Compare plans")
    rows = {r["quantity"]: r for r in grid_rows(page.get_by_test_id("stDataFrame").first)}
    liquid = rows["liquid agent"]
    other = next(k for k in liquid if k.endswith(".toml"))
    cli = cli_json("compare", CASE, f"demo_cases/{other}")
    values = next(r for r in cli["rows"] if r["key"] == "agent_liquid")["values"]
    assert float(liquid["case planner"]) == rounded(round(values["kestrel_lap_chole.toml"], 2))
    assert float(liquid[other]) == rounded(round(values[other], 2))
    assert_tables_read_well(page)


def test_flow_floor_schedule_and_apply(app_url, page):
    """Item 4: the recommended schedule as a table, its use as the CLI's, and the button that applies it."""
    from playwright.sync_api import expect

    open_page(page, f"{app_url}/flow-floor", "Flow floor", ready="Recommended schedule")
    schedule = grid_rows(page.get_by_test_id("stDataFrame").first)
    assert [r["phase"] for r in schedule] == ["wash-in", "maintenance", "emergence"]
    cli = cli_json("safe-flow", CASE)
    mean = mag(cli["comparison"]["recommended"]["mean_fresh_gas_flow"])
    expect_metric(page, "Mean flow at the floor", f"{mean:.2f} L/min")
    assert_tables_read_well(page)
    page.get_by_role("button", name="Use this schedule on the case planner").click()
    expect(page.get_by_text("The case planner now uses the recommended schedule.")).to_be_visible()
    wait_for_run(page)
    page.get_by_test_id("stSidebarNav").get_by_role("link", name="Case planner").click()  # the same session
    expect(page.get_by_role("heading", name="Case planner").first).to_be_visible()
    wait_for_run(page)
    flows = ("O2 [L/min]", "air [L/min]", "N2O [L/min]")
    phases = phase_rows(page, flows)
    for s in cli["schedule"]:
        if s["settable"]:
            row = phases[s["index"]]
            total = sum(float(row[c] or 0) for c in flows)
            assert total == pytest.approx(mag(s["total"]), abs=1e-6), (row, s)


def test_safety_warning_in_red(app_url, page):
    """Item 5: the nitrous-oxide dental demo's low inspired O2, in red on its warning and on its metric."""
    from playwright.sync_api import expect

    cli = cli_json("case", "demo_cases/kestrel_nitrous_dental.toml")
    o2_codes = {w["code"] for w in cli["warnings"]} & {"HYPOXIC_INSPIRED_MIXTURE", "INSPIRED_OXYGEN_LOW"}
    assert o2_codes, cli["warnings"]
    open_page(page, app_url, "Case planner", ready="Liquid agent")
    choose(page, "Demo scenario", "kestrel_nitrous_dental.toml")
    expect_metric(page, "Lowest inspired O2", f"{100 * mag(cli['minimum_inspired_oxygen']):.1f} %")
    wait_for_run(page)
    for code in o2_codes:  # a plain-language title, the code in the text, in red
        alert = page.get_by_test_id("stAlert").filter(has_text=code).first
        expect(alert).to_contain_text("Safety:")
        assert is_red(alert.evaluate(ALERT_COLOUR)), alert.evaluate(ALERT_COLOUR)
    caution = page.get_by_test_id("stAlert").filter(has_text="Planning and audit aid only").first  # amber, not red
    assert not is_red(caution.evaluate(ALERT_COLOUR))
    box = page.get_by_test_id("stMetric").filter(has=page.get_by_test_id("stMetricLabel").filter(has_text="Lowest"))
    delta = box.first.get_by_test_id("stMetricDelta")
    expect(delta).to_contain_text("Safety:")
    assert is_red(delta.evaluate("e => getComputedStyle(e).color"))


def test_supply_order_now_and_depletion_chart(app_url, page):
    """Item 7: "Order now" for a past reorder date, the depletion chart with the reorder date, lead time and
    run-out marked; days of supply as the CLI."""
    from playwright.sync_api import expect

    open_page(page, f"{app_url}/supply-duration", "Supply duration", ready="Days of supply")
    cli = cli_json("supply", "demo_cases/highland_clinic_inventory.toml")
    reorder = date.fromisoformat(cli["reorder_by"])
    expect_metric(page, "Reorder", "Order now" if reorder <= date.today() else f"by {cli['reorder_by']}")
    expect_metric(page, "Days of supply", shown(mag(cli["days_of_supply"]), "days"))
    depletion = after(page, "Depletion", "stVegaLiteChart")
    expect(depletion.locator("svg").first).to_be_visible()
    marks = chart_texts(depletion)  # the reorder date, the lead time and the run-out marked on the chart
    assert any(t.startswith("reorder") for t in marks), marks
    assert any("lead" in t for t in marks), marks
    assert f"{cli['bottleneck']} runs out" in marks, marks
    assert_tables_read_well(page)


def test_forecast_planning_horizon(app_url, page):
    """Item 8: the planning horizon's totals apart from the weeks simulated; its P95 CO2e as the CLI."""
    cli = cli_json("forecast", "demo_cases/kestrel_case_mix.toml")
    weeks = cli["horizon"]["weeks"]
    open_page(page, f"{app_url}/demand-forecast", "Demand forecast", ready=f"Planning horizon: {weeks} weeks")
    co2e = mag(cli["horizon"]["items"]["co2e"]["p95"])
    expect_metric(page, f"CO2e over {weeks} weeks (P95)", shown(co2e, "kg"))
    totals = grid_rows(after(page, f"Planning horizon: {weeks} weeks"))
    assert {r["horizon [weeks]"] for r in totals} == {str(weeks)}
    assert_tables_read_well(page)


def test_audit_prices_liquid_per_agent_and_counterfactual(app_url, page):
    """Items 9 and 10: the prices input, the liquid of each agent as the CLI, the flow-class ramp, the
    counterfactual chart when asked."""
    from playwright.sync_api import expect

    open_page(page, f"{app_url}/fresh-gas-audit", "Fresh-gas audit", ready="Mean maintenance flow")
    page.get_by_text("Prices (edit to price the log at your own)").click()
    expect(page.get_by_role("spinbutton", name="Oxygen per m3")).to_be_visible()
    cli = cli_json("audit", "demo_cases/kestrel_audit_log.csv", "--prices", "demo_cases/kestrel_prices.toml")
    for agent, q in cli["totals"]["agent_liquid_by_agent"].items():
        expect_metric(page, f"{agent.capitalize()} (liquid)", shown(mag(q), "mL"))
    assert_tables_read_well(page)
    flow_classes(page)
    charts = page.get_by_test_id("stVegaLiteChart")
    before = charts.count()
    page.get_by_test_id("stCheckbox").filter(has_text="Run the counterfactual").locator("label").click()
    expect(metric(page, "Fresh gas saved")).to_be_visible(timeout=300_000)  # ~12 s on the demo log
    wait_for_run(page, timeout=300_000)
    expect(charts).to_have_count(before + 1)
    expect(after(page, "Counterfactual: the same cases at the policy flow", "stVegaLiteChart")).to_be_visible()


def flow_classes(page) -> None:
    """Item 10: the flow-class bars carry their class names and one hue, lighter to darker with the flow."""
    import colorsys

    chart = page.get_by_test_id("stVegaLiteChart").filter(has_text="flow class").first
    names = chart_texts(chart)
    assert {"metabolic", "minimal", "low", "medium", "high", "very high"} <= set(names), names
    fills = chart.locator("g.mark-rect path").evaluate_all("ps => ps.map(p => p.getAttribute('fill'))")
    hls = [colorsys.rgb_to_hls(*(int(f[i : i + 2], 16) / 255 for i in (1, 3, 5))) for f in fills]
    assert len(hls) == 6, fills
    hues = [360 * h for h, _, _ in hls]
    assert max(hues) - min(hues) < 30, fills  # one hue: no green-to-red traffic light
    lightness = [v for _, v, _ in hls]
    assert lightness == sorted(lightness, reverse=True), fills  # sequential: darker as the flow class rises
