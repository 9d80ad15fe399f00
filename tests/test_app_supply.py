"""The supply page as a workbench (issue 19, item 7): every inventory field editable, "Order now" for a
reorder date that has passed, the reorder date and lead time on the depletion chart, one colour an item
on every chart, and reports that lead with the bottleneck, the days and the reorder date.

Consistency checks of the app and the command line against their own engine (not validation).
"""

from __future__ import annotations

import json
import tomllib
from datetime import date

import pandas as pd
import pytest
from app_helpers import assert_clean, capture_saves, edit_table, metric, number, page

from estimator.planning.supply_report import SupplyReport
from estimator.units import Q_
from estimator_app import demo

DEMO = "highland_clinic_inventory.toml"


def _report(reorder: date | None, days: float | None = 12.4) -> SupplyReport:
    return SupplyReport(
        "",
        date(2026, 4, 6),
        [],
        [],
        "iso" if days else None,
        "isoflurane",
        Q_(days, "day") if days else None,
        44,
        {},
        reorder,
        pd.DataFrame(),
        [],
        lead_time_days=10.0,
    )


def test_a_reorder_date_today_or_past_reads_order_now():
    today = date(2026, 5, 1)
    assert _report(date(2026, 4, 30)).reorder_text(today) == "Order now"
    assert _report(today).reorder_text(today) == "Order now"
    assert _report(date(2026, 5, 2)).reorder_text(today) == "2026-05-02"
    assert _report(None, None).reorder_text(today) == "no reorder needed"
    # The headline leads with the bottleneck, its days (with the unit) and the reorder.
    lines = _report(date(2026, 4, 30)).headline(today)
    assert lines[0].startswith("Bottleneck: iso") and lines[0].endswith("12.4 days")
    assert lines[1] == "Cases possible before then: 44 cases" and lines[2].startswith("Reorder: Order now")


def test_the_command_line_report_leads_with_the_answer(capsys):
    from estimator.cli import main

    with pytest.raises(SystemExit):
        main(["supply", str(demo.DEMO_DIR / DEMO)])
    out = capsys.readouterr().out
    assert out.index("Bottleneck:") < out.index("Reorder") < out.index("item ")


def _specs(at):
    return [json.loads(c.proto.spec) for c in at.get("vega_lite_chart")]


def test_page_metrics_carry_units_and_the_chart_marks_reorder_and_lead_time():
    at = page("supply_duration")
    assert_clean(at)
    assert metric(at, "Days of supply").endswith(" days")
    assert metric(at, "Cases possible").endswith(" cases")
    # The demo's plan starts 2026-04-06 and its reorder date is that day: past, so "Order now".
    assert metric(at, "Reorder") == "Order now" if date.today() >= date(2026, 4, 6) else True
    depletion, lasts = _specs(at)[:2]
    marks = [layer for layer in depletion["layer"] if layer["mark"]["type"] in ("rule", "rect")]
    labels = {v["label"] for layer in marks for v in layer["data"]["values"]}
    assert any(lab.startswith("order arrives (10 days lead)") for lab in labels)
    assert any(lab.startswith("lead time 10 days") for lab in labels)
    assert any(lab.endswith("runs out") for lab in labels)
    # One colour an item, the same on both charts (the depletion lines and the days each item lasts).
    line = next(layer for layer in depletion["layer"] if layer["mark"]["type"] == "line")
    scale_a = line["encoding"]["color"]["scale"]
    scale_b = lasts["encoding"]["color"]["scale"]
    colour_a = dict(zip(scale_a["domain"], scale_a["range"], strict=True))
    colour_b = dict(zip(scale_b["domain"], scale_b["range"], strict=False))
    assert colour_a and all(colour_b[k] == c for k, c in colour_a.items())


def test_every_inventory_field_is_editable_and_saved(monkeypatch):
    saved = capture_saves(monkeypatch)
    at = page("supply_duration")
    at = edit_table(at, "supply.conc.0", {"edited_rows": {"0": {"starts at": "07:30", "O2 purity [%]": 90.0}}})
    assert_clean(at)
    at = edit_table(at, "supply.cyl.0.bar.kg", {"edited_rows": {"0": {"temperature [degC]": 25.0}}})
    assert_clean(at)
    at.text_input(key="supply.daystart.0").set_value("07:00").run()
    at.number_input(key="supply.absorbent.stock.0").set_value(9.0).run()
    assert_clean(at)
    doc = tomllib.loads(saved[DEMO].decode())
    assert doc["concentrators"][0]["start"] == "07:30" and doc["concentrators"][0]["purity"] == "90 %"
    assert doc["cylinders"][0]["temperature"] == "25 degC"
    assert doc["demand"]["day_start"] == "07:00"
    assert doc["absorbent"]["stock"] == "9 kg"
    # Everything else as loaded.
    original = tomllib.loads((demo.DEMO_DIR / DEMO).read_text(encoding="utf-8"))
    for key in ("bottles", "plan", "supply", "site"):
        assert doc[key] == original[key]
    # More absorbent lasts longer: the edit reaches the engine.
    assert number(metric(at, "Days of supply")) > 0


def test_the_supply_report_of_the_page_leads_with_the_answer(monkeypatch):
    # The HTML report's first lines are the headline: bottleneck and days, cases, reorder (issue 19).
    from estimator_app.pages import supply_duration

    seen = {}
    monkeypatch.setattr(supply_duration, "downloads", lambda *a, **k: seen.update(k))
    at = page("supply_duration")
    assert_clean(at)
    assert seen["notes"][0].startswith("Bottleneck: isoflurane bottles 1") and seen["notes"][0].endswith("days")
    assert seen["notes"][1].endswith(" cases") and seen["notes"][2].startswith("Reorder")


def test_sources_and_left_out_items_are_editable(monkeypatch):
    saved = capture_saves(monkeypatch)
    at = page("supply_duration")
    assert "isoflurane" in metric(at, "Bottleneck").lower()
    # Leaving isoflurane out of the plan (supply.ignore): another item is the bottleneck.
    at.multiselect(key="supply.ignore.0").set_value(["isoflurane"]).run()
    assert_clean(at)
    assert "isoflurane" not in metric(at, "Bottleneck").lower()
    doc = tomllib.loads(saved[DEMO].decode())
    assert doc["supply"]["ignore"] == ["isoflurane"]
    assert doc["supply"]["priority"] == ["pipelines", "concentrators", "cylinders"]  # untouched, as loaded


def test_date_marks_follow_the_vega_lite_schema():
    from altair.utils.schemapi import validate_jsonschema
    from altair.vegalite.v6.schema.core import load_schema

    from estimator_app.charts import date_marks, time_course

    frame = pd.DataFrame({"date": pd.date_range("2026-04-06", periods=3).date, "s": [100.0, 60.0, 10.0]})
    spec = time_course(frame, {"s": "stock"}, "stock [%]", x="date", x_type="temporal", colours={"stock": "#0f6e6e"})
    marked = date_marks(
        spec, [("2026-04-06", "reorder by"), ("2026-04-07", "runs out")], ("2026-04-06", "2026-04-07", "lead")
    )
    validate_jsonschema(marked, load_schema())


def test_a_kept_stock_compares_with_the_stock_as_edited():
    # "This month's stock or next": keep the stock, add absorbent, and the page shows the kept stock
    # beside the edited one with the figures `lowflow compare --stock` gives (compare_stocks).
    at = page("supply_duration")
    assert_clean(at)
    at.button(key="supply.keep").click().run()
    before = number(metric(at, "Days of supply"))
    at.number_input(key="supply.absorbent.stock.0").set_value(20.0).run()
    assert_clean(at)
    table = at.dataframe[-1].value
    days = table[table["quantity"] == "days of supply"].iloc[0]
    assert number(str(days["kept"])) == pytest.approx(before, rel=0.01)
    assert number(str(days["now"])) >= number(str(days["kept"]))  # more absorbent never shortens the supply
    absorbent = table[table["quantity"].str.contains("absorbent")].iloc[0]
    assert number(str(absorbent["now"])) > number(str(absorbent["kept"]))
    at.button(key="supply.forget").click().run()
    assert_clean(at)
