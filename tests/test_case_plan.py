"""The printable case plan: leads with what is set, carries the caution, the same from CLI and app."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest
from typer.testing import CliRunner

from estimator.caution import CAUTION
from estimator.cli import app
from estimator.inputs.scenario import load_scenario
from estimator.planning.case_plan import case_plan_html
from estimator.planning.safety import flow_floor
from estimator.simulation.engine import simulate

DEMO = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_lap_chole.toml"


def test_plan_leads_with_phases_and_dial_then_floor_totals_and_warnings():
    sc = load_scenario(DEMO)
    page = case_plan_html(simulate(sc), flow_floor(sc, grid=False))
    order = [
        page.index(h)
        for h in (
            "Phases, flows and the vaporizer dial",
            "Flow floor of each phase",
            "Totals",
            "Warnings",
            "Dial every 10 min",
        )
    ]
    assert order[:3] == sorted(order[:3]) and order[2] < order[4]
    assert "Monitor inspired O2 continuously" in page and "hold 1.0 MAC" in page


def test_cli_report_writes_the_plan(tmp_path):
    target = tmp_path / "plan.html"
    out = CliRunner().invoke(app, ["case", str(DEMO), "--report", str(target)])
    assert out.exit_code == 0
    text = target.read_text(encoding="utf-8")
    assert "Case plan" in text and CAUTION.split(":")[0] in text


def test_app_offers_the_plan():
    pytest.importorskip("streamlit")
    from app_helpers import page, show_view

    from estimator_app import demo

    at = show_view(page("case_planner", demo.scenario()), "Downloads")
    labels = [b.label for b in at.get("download_button")]
    assert "Case plan (printable HTML)" in labels
    # The PDF beside it when fpdf2 (the pdf extra) is installed, as in the checkout.
    assert ("Case plan (PDF)" in labels) == (importlib.util.find_spec("fpdf") is not None)
    if "Case plan (PDF)" in labels:  # what the button hands over when pressed
        from estimator_app.pages.case_planner import case_plan

        assert case_plan(simulate(load_scenario(DEMO)), pdf=True).startswith(b"%PDF-")


def test_the_printable_plan_ends_with_its_charts_as_inline_svg():
    # Issue 19 item 1: the charts after the tables, drawn as SVG in the page (no script, no library).
    import estimator
    from estimator.planning.case_plan import case_plan_html

    sc = estimator.scenario_from_dict(
        {
            "patient": {"weight": "70 kg"},
            "agent": {"name": "sevoflurane"},
            "phases": [{"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", "end_tidal_target": "1 MAC"}],
        }
    )
    page = case_plan_html(estimator.simulate(sc))
    charts = page[page.index("<h2>Charts</h2>") :]
    assert page.index("Dial every 10 min") < page.index("<h2>Charts</h2>")
    assert charts.count("<svg") == 4 and "<script" not in page
    for title in ("Agent: end-tidal, inspired and the vaporizer dial", "Oxygen: inspired and end-tidal"):
        assert title in charts


def test_the_html_plan_keeps_warnings_and_monitoring_before_the_dial_and_charts():
    # Issue 19 item 1: totals, warnings and monitoring advice, the dial table, then the charts.
    sc = load_scenario(DEMO)
    page = case_plan_html(simulate(sc), flow_floor(sc, grid=False))
    order = [
        page.index(h) for h in ("<h2>Totals", "<h2>Warnings", "<h2>Monitoring", "<h2>Dial every 10 min", "<h2>Charts")
    ]
    assert order == sorted(order)
    assert page.count("Monitor inspired O2 continuously") == 1


def _strings(pdf: bytes) -> str:
    """The text shown by an uncompressed PDF of fpdf2's built-in fonts: its (string) operands, joined."""
    import re

    return " ".join(m.decode("latin-1") for m in re.findall(rb"\(((?:[^()\\]|\\.)*)\)", pdf))


@pytest.fixture(scope="module")
def demo_plan():
    from estimator.planning.case_plan import case_plan

    sc = load_scenario(DEMO)
    return case_plan(simulate(sc), flow_floor(sc, grid=False))


def test_the_pdf_plan_shows_the_html_plans_content_in_its_order(demo_plan):
    pytest.importorskip("fpdf")
    from estimator.planning.case_plan import plan_html
    from estimator.planning.case_plan_pdf import plan_pdf

    pdf = plan_pdf(demo_plan, compress=False)
    assert pdf.startswith(b"%PDF-") and pdf.rstrip().endswith(b"%%EOF")
    pages = pdf.count(b"/Type /Page\n")
    assert pages >= 1
    shown = _strings(pdf)
    assert shown.startswith("Case plan: Kestrel Island")
    headings = [*demo_plan.tables, "Warnings", "Monitoring", *demo_plan.after, "Charts"]
    at = [shown.index(h) for h in headings]
    assert at == sorted(at), headings
    html = plan_html(demo_plan)
    assert [html.index(f"<h2>{h}</h2>") for h in headings] == sorted(html.index(f"<h2>{h}</h2>") for h in headings)
    # The caution under the title and in the footer of every page, with the page's number.
    assert shown.count("Planning and audit aid only: not a monitor") == pages + 1
    assert all(f"Page {n} of" in shown for n in range(1, pages + 1))
    # The dial of each hold phase and the charts' titles, as in the HTML plan.
    assert "hold 1.0 MAC:" in shown and "Monitor inspired O2 continuously" in shown
    for chart in demo_plan.charts:
        assert chart.title in shown


def test_the_pdf_plan_marks_safety_warnings_and_lists_each_once(demo_plan):
    pytest.importorskip("fpdf")
    from dataclasses import replace

    from estimator.planning.case_plan_pdf import plan_pdf

    assert any(c == "COMPOUND_A" for c, _ in demo_plan.warnings)  # a safety code of estimator.limits
    plan = replace(
        demo_plan, warnings=[*demo_plan.warnings, ("EXAMPLE_NOTE", "shown once"), ("EXAMPLE_NOTE", "shown once")]
    )
    shown = _strings(plan_pdf(plan, compress=False))
    assert "Safety: COMPOUND_A:" in shown
    assert shown.count("EXAMPLE_NOTE: shown once") == 1 and "Safety: EXAMPLE_NOTE" not in shown
    empty = _strings(plan_pdf(replace(demo_plan, warnings=[]), compress=False))
    assert empty[empty.index("Warnings") :].split("Monitoring")[0].strip().endswith("None.")


def test_the_pdf_plan_fits_long_text_in_its_columns_and_latin1():
    # A long cell wraps inside the page; text outside Latin-1 is written, not an error.
    pytest.importorskip("fpdf")
    import pandas as pd

    from estimator.planning.case_plan import CasePlan
    from estimator.planning.case_plan_pdf import column_widths, plan_pdf

    long = "why " * 120
    plan = CasePlan(
        "Case plan: CO\u2082 \u2265 5 \u2013 test",
        ["note"],
        {"Flow floor of each phase": pd.DataFrame({"phase": ["a"], "why": [long]})},
        [],
        "monitor",
    )
    shown = _strings(plan_pdf(plan, compress=False))
    assert "Case plan: CO2 >= 5 - test" in shown and shown.count("why") >= 120
    widths = column_widths([12.0, 900.0, 40.0], 180.0)
    assert widths == [12.0, 128.0, 40.0]  # only the column that does not fit is cut
