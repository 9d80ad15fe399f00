"""The printable case plan: leads with what is set, carries the caution, the same from CLI and app."""

from __future__ import annotations

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
    from app_helpers import page

    from estimator_app import demo

    at = page("case_planner", demo.scenario())
    assert "Case plan (printable HTML)" in {b.label for b in at.get("download_button")}


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
