"""The audit page as a workbench (issue 19, item 9): the prices shown and editable, each agent's liquid
apart, a per-case counterfactual chart, and the counterfactual in the HTML report.

Consistency checks of the app against its own engine (not validation against a published source).
"""

from __future__ import annotations

import pytest
from app_helpers import assert_clean, edit_table, number, page

from estimator.accounts.costs import prices_from_text
from estimator_app import demo

SMALL_LOG = (
    "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting\n"
    "A,0,1,1,0,sevoflurane,2\nA,60,1,1,0,sevoflurane,2\n"
    "D,0,1,1,0,desflurane,6\nD,60,1,1,0,desflurane,6\n"
)


def metric(at, label: str) -> str:
    """A metric's text by the start of its label (the cost's label carries the currency)."""
    return next(m.value for m in at.metric if m.label.startswith(label))


def _specs(at):
    import json

    return [json.loads(c.proto.spec) for c in at.get("vega_lite_chart")]


def test_the_page_names_the_prices_it_costs_with():
    at = page("fresh_gas_audit")
    assert_clean(at)
    prices = prices_from_text(demo.text("kestrel_prices.toml"))
    assert any(f"prices of kestrel_prices.toml ({prices.currency}" in c.value for c in at.caption)


def test_an_uploaded_log_at_the_demo_prices_is_flagged_and_each_agent_shown_apart():
    at = page("fresh_gas_audit")
    at.file_uploader(key="audit.log.upload").set_value(("mine.csv", SMALL_LOG.encode(), "text/csv"))
    at.run()
    assert_clean(at)
    assert any("invented prices" in w.value for w in at.warning)
    # 2 % and 6 % of 2 L/min for 60 min (Dion 1992, as in test_app): each agent its own metric.
    assert number(metric(at, "Sevoflurane (liquid)")) == pytest.approx(13.6, abs=0.6)
    assert number(metric(at, "Desflurane (liquid)")) > 0
    at.selectbox(key="audit.prices.demo").set_value("no prices").run()
    assert not any("invented prices" in w.value for w in at.warning)
    assert metric(at, "Cost") == "no prices"


def test_editing_a_price_changes_the_cost():
    at = page("fresh_gas_audit")
    before = number(metric(at, "Cost"))
    key = "audit.prices.edit.kestrel_prices.toml"
    at.number_input(key=f"{key}.oxygen_per_m3").set_value(320.0).run()  # 100 times the demo's 3.2
    assert_clean(at)
    after = number(metric(at, "Cost"))
    # 36 750 L of O2 in the demo log: 36.75 m3 x (320 - 3.2) more.
    assert after - before == pytest.approx(36.75 * (320 - 3.2), rel=0.01)
    # An agent row without a name is refused with its row number, not dropped.
    at = edit_table(at, f"{key}.agents", {"added_rows": [{"Price per mL": 1.0}]})
    assert any("prices.agents row 4" in e.value for e in at.error)


ET_LOG = (
    "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent,patient_age,"
    "patient_weight\n"
    "S,0,3,3,0,sevoflurane,3,1.0,50,75\nS,10,1,1,0,sevoflurane,2.2,1.6,50,75\nS,40,1,1,0,sevoflurane,2.2,1.6,50,75\n"
    "D,0,3,3,0,desflurane,7,3.0,50,75\nD,10,1,1,0,desflurane,6,5.0,50,75\nD,40,1,1,0,desflurane,6,5.0,50,75\n"
)


def test_counterfactual_chart_per_case_and_in_the_report():
    from estimator_app import contracts
    from estimator_app.pages import fresh_gas_audit

    at = page("fresh_gas_audit")
    at.file_uploader(key="audit.log.upload").set_value(("mine.csv", ET_LOG.encode(), "text/csv"))
    at.toggle(key="audit.cf").set_value(True).run(timeout=300)
    assert_clean(at)
    # The demo policy (0.5 L/min) is below the recorded 2 L/min: each agent saves liquid.
    assert number(metric(at, "Sevoflurane saved")) > 0
    assert number(metric(at, "Desflurane saved")) > 0
    charts = [s for s in _specs(at) if s.get("encoding", {}).get("y", {}).get("title") == "liquid agent saved [mL]"]
    assert len(charts) == 1
    assert "sevoflurane" in charts[0]["encoding"]["color"]["scale"]["domain"]  # one colour an agent
    # The HTML report of the page (built when its button is pressed) carries the counterfactual.
    args = (ET_LOG, demo.text("kestrel_prices.toml"), "ar6_gwp100", "hold", 10.0)
    policy = contracts.toml_text(contracts.parse_toml(demo.text("kestrel_lowflow_policy.toml"), "policy"))
    html = fresh_gas_audit._file(
        fresh_gas_audit.run_audit(*args), "html", fresh_gas_audit.run_counterfactual(*args, policy)
    )
    html = html.decode("utf-8")
    section = html[html.index("<h2>Counterfactual") :]
    assert "Sevoflurane, liquid [mL]" in section and "Desflurane, liquid [mL]" in section
    assert "S (sevoflurane)" in section and "D (desflurane)" in section


def test_audit_chart_specs_follow_the_vega_lite_schema():
    # Hand-written specs are validated here (an open standard, its schema shipped with altair).
    import pandas as pd
    from altair.utils.schemapi import validate_jsonschema
    from altair.vegalite.v6.schema.core import load_schema

    from estimator.planning.flow_classes import FLOW_CLASS_COLOURS, FLOW_CLASSES
    from estimator_app.charts import case_bars, class_bars

    shares = {name: 10.0 * i for i, (name, _) in enumerate(FLOW_CLASSES)}
    spec = class_bars(shares, "maintenance time [%]")
    validate_jsonschema(spec, load_schema())
    # The flow-class ramp, in class order, and the class name written on each bar.
    assert spec["layer"][0]["encoding"]["color"]["scale"]["range"] == list(FLOW_CLASS_COLOURS)
    assert spec["layer"][1]["encoding"]["text"]["field"] == "class"
    frame = pd.DataFrame({"case_id": ["a", "b"], "saved [mL]": [2.0, 1.0], "agent": ["sevoflurane", "desflurane"]})
    validate_jsonschema(
        case_bars(frame, "case_id", "saved [mL]", "agent", "case", "saved [mL]", ["a", "b"]), load_schema()
    )
