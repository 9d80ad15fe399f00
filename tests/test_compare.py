"""``lowflow compare``: plans side by side (consistency checks of one engine and one accounting)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from estimator.cli import app
from estimator.inputs.scenario import load_scenario
from estimator.planning.compare import compare_results
from estimator.simulation.engine import simulate

DEMO = Path(__file__).resolve().parent.parent / "demo_cases"
A, B = DEMO / "kestrel_lap_chole.toml", DEMO / "kestrel_desflurane_bariatric.toml"


def test_values_and_changes_are_the_cases_totals():
    ra, rb = simulate(load_scenario(A)), simulate(load_scenario(B))
    c = compare_results({"a": ra, "b": rb})
    liquid = next(r for r in c["rows"] if r["key"] == "agent_liquid")
    a, b = ra.totals["agent_liquid"].to("mL").magnitude, rb.totals["agent_liquid"].to("mL").magnitude
    assert liquid["values"] == {"a": pytest.approx(a), "b": pytest.approx(b)}
    assert liquid["change"]["b"] == pytest.approx(b - a) and liquid["change_percent"]["b"] == pytest.approx(
        100 * (b - a) / a
    )
    assert c["cost"]["values"]["b"] == pytest.approx(rb.cost["total"])  # both demo plans priced in one currency


def test_cli_text_and_json():
    out = CliRunner().invoke(app, ["compare", str(A), str(B)])
    assert out.exit_code == 0 and "B - A" in out.stdout and out.stdout.rstrip().endswith("clinical practice.")
    doc = json.loads(CliRunner().invoke(app, ["compare", str(A), str(B), "--json"]).stdout)
    assert doc["baseline"] == A.name and [i["name"] for i in doc["provenance"]["inputs"]] == [A.name, B.name]


def test_one_plan_or_two_plans_of_one_name_are_refused(tmp_path):
    assert CliRunner().invoke(app, ["compare", str(A)]).exit_code != 0
    other = tmp_path / A.name
    other.write_text(A.read_text(encoding="utf-8"), encoding="utf-8")
    assert CliRunner().invoke(app, ["compare", str(A), str(other)]).exit_code != 0
