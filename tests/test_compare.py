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


# --- stocks: "this month's stock or next" ----------------------------------------------------------
STOCK = DEMO / "highland_clinic_inventory.toml"


def _next_month(tmp_path: Path) -> Path:
    """The demo stock with two more isoflurane bottles (the case plan it names copied beside it)."""
    text = STOCK.read_text(encoding="utf-8")
    assert "\ncount = 2\n" in text  # the demo's isoflurane bottles
    (tmp_path / "highland_mobile_team.toml").write_bytes((DEMO / "highland_mobile_team.toml").read_bytes())
    out = tmp_path / "next_month.toml"
    out.write_text(text.replace("\ncount = 2\n", "\ncount = 4\n"), encoding="utf-8")
    return out


def test_stocks_compare_with_the_supply_plans_own_figures(tmp_path):
    # Consistency: every compared figure is the supply plan's (lowflow supply) for the same file and day.
    from estimator.planning.compare import compare_stocks
    from estimator.planning.supply import load_inventory, plan_supply

    nxt = _next_month(tmp_path)
    reports = {p.name: plan_supply(load_inventory(p), start="2026-04-01") for p in (STOCK, nxt)}
    c = compare_stocks(reports)
    rows = {r["key"]: r for r in c["rows"]}
    for name, rep in reports.items():
        assert rows["days_of_supply"]["values"][name] == pytest.approx(rep.days_of_supply.to("day").magnitude)
        assert rows["cases_possible"]["values"][name] == rep.cases_possible
        assert c["bottleneck"][name] == rep.bottleneck
        for item in rep.items:
            want = None if item.runtime is None else item.runtime.to("day").magnitude
            assert rows[f"item:{item.name}"]["values"][name] == (pytest.approx(want) if want is not None else None)
    # Two more bottles of the agent that ran out first: more days and more cases, never fewer.
    assert rows["days_of_supply"]["change"][nxt.name] > 0 and rows["cases_possible"]["change"][nxt.name] > 0


def test_cli_compares_stocks_in_text_and_json(tmp_path):
    nxt = _next_month(tmp_path)
    out = CliRunner().invoke(app, ["compare", "--stock", str(STOCK), str(nxt), "--start", "2026-04-01"])
    assert out.exit_code == 0, out.output
    assert "days of supply [day]" in out.stdout and "reorder:" in out.stdout and "bottleneck" in out.stdout
    doc = json.loads(CliRunner().invoke(app, ["compare", "--stock", str(STOCK), str(nxt), "--json"]).stdout)
    assert doc["rows"][0]["key"] == "days_of_supply" and set(doc["reorder"]) == {STOCK.name, nxt.name}
    assert doc["caution"] and [i["name"] for i in doc["provenance"]["inputs"]] == [STOCK.name, nxt.name]


def test_start_without_stock_and_a_plan_as_stock_are_refused(capsys):
    from estimator.cli import main

    for argv in (["compare", str(A), str(B), "--start", "2026-04-01"], ["compare", "--stock", str(A), str(B)]):
        with pytest.raises(SystemExit) as exc:
            main(argv)
        assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "--start" in err and "unknown key" in err  # a plan read as a stock names a key it does not know
