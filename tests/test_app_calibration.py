"""A department's calibration on the app's planning pages: loaded from an upload (text, never a path),
shared by the case planner, flow floor and demand forecast, shown with its codes, removable; a scenario
or case mix naming a calibration file asks for it and keeps the key when saved."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest
import tomli_w
from app_helpers import ROOT, assert_clean, capture_saves, metric, open_calibration_panel, page
from calibration_helpers import calibration_text

from estimator_app import demo

SCENARIO = "kestrel_lap_chole.toml"
CAL = "calibration.file"


def upload_calibration(at, text: str, name: str = "dept.toml"):
    open_calibration_panel(at)
    at.file_uploader(key="calibration.upload.0").set_value((name, text.encode(), "application/toml")).run()
    return at


def warnings_text(at) -> str:
    return " ".join(w.value for w in at.warning)


def test_case_planner_applies_an_uploaded_calibration_and_removes_it():
    at = page("case_planner")
    plain = metric(at, "Liquid agent")
    upload_calibration(at, calibration_text(1.4))
    assert_clean(at)
    assert at.session_state[CAL]["name"] == "dept.toml"
    assert float(metric(at, "Liquid agent").split()[0]) > float(plain.split()[0])  # more uptake, more agent
    shown = " ".join(c.value for c in at.caption)
    assert "Uptake factor 1.40 (95 % interval 1.33-1.47) from log.csv" in shown
    assert "SHA-256 000000000000" in shown  # the source log's digest, short
    table = next(d.value for d in at.dataframe if "uptake factor" in d.value.columns)
    assert list(table["agent"]) == ["sevoflurane"] and table["cases"].iloc[0] == 40
    at.button(key="calibration.remove.scenario").click().run()
    assert_clean(at)
    assert CAL not in at.session_state
    assert metric(at, "Liquid agent") == plain


def test_a_calibration_outside_the_supported_range_carries_its_code():
    at = upload_calibration(page("case_planner"), calibration_text(1.6))
    assert_clean(at)
    assert "UPTAKE_FACTOR_UNSUPPORTED" in warnings_text(at)
    table = next(d.value for d in at.dataframe if "uptake factor" in d.value.columns)
    assert table["code"].iloc[0] == "UPTAKE_FACTOR_UNSUPPORTED"


def test_an_agent_the_calibration_lacks_runs_at_one_and_says_so():
    at = upload_calibration(page("case_planner"), calibration_text(1.2, agent="isoflurane"))
    assert_clean(at)
    assert "CALIBRATION_AGENT_ABSENT" in warnings_text(at)


def test_a_bad_calibration_file_is_refused_with_the_field_named():
    at = upload_calibration(page("case_planner"), calibration_text(50.0))
    assert any("calibration.agents.sevoflurane" in e.value for e in at.error)
    assert CAL not in at.session_state


def test_flow_floor_shares_the_calibration_and_says_the_floor_used_one():
    at = page("flow_floor")
    plain = schedule(at)
    at.session_state[CAL] = {"name": "low.toml", "text": calibration_text(0.7)}  # loaded on another page
    at.run()
    assert_clean(at)
    assert any("FLOOR_FACTOR_RAISED" in e.value for e in at.error)  # a safety code: red, under Advisories
    shown = " ".join(c.value for c in at.caption)
    assert "Uptake factor 0.70" in shown and "1 used here (the safe side)" in shown
    assert "Codes of this run: FLOOR_FACTOR_RAISED" in shown
    assert schedule(at).equals(plain)  # the same schedule as the published model's


def schedule(at):
    return next(d.value for d in at.dataframe if "settable" in d.value.columns)


def test_a_scenario_naming_a_calibration_asks_for_it_and_keeps_the_key(monkeypatch):
    saved = capture_saves(monkeypatch)
    doc = demo.scenario()
    doc["calibration"] = "dept_calibration.toml"
    at = page("case_planner")
    at.sidebar.file_uploader(key="scenario.upload").set_value(
        ("named.toml", tomli_w.dumps(doc).encode(), "application/toml")
    )
    at.run()
    assert_clean(at)  # accepted: the file it names is the page's own upload
    assert 'calibration = "dept_calibration.toml"' in warnings_text(at)
    assert not at.metric  # no result until the file is loaded
    assert tomllib.loads(saved["named.toml"].decode())["calibration"] == "dept_calibration.toml"
    upload_calibration(at, calibration_text(1.3), "other.toml")
    assert_clean(at)
    assert any("names dept_calibration.toml" in i.value for i in at.info)  # another name: said
    assert metric(at, "Liquid agent")
    assert tomllib.loads(saved["named.toml"].decode())["calibration"] == "dept_calibration.toml"


def test_forecast_upload_with_the_calibration_it_names():
    mix = {
        "weeks": 2,
        "seed": 1,
        "calibration": "dept.toml",
        "case_types": [{"name": "lap chole", "per_week": 5, "count": "fixed", "scenario": "lap.toml"}],
    }
    scenario = (ROOT / "demo_cases" / SCENARIO).read_text(encoding="utf-8")
    at = page("demand_forecast")
    at.file_uploader(key="forecast.upload").set_value(
        [("mix.toml", tomli_w.dumps(mix).encode(), "application/toml"), ("lap.toml", scenario.encode(), "text/plain")]
    )
    at.run()
    assert_clean(at)
    assert 'calibration = "dept.toml"' in warnings_text(at) and not at.metric
    files = [
        ("mix.toml", tomli_w.dumps(mix).encode(), "application/toml"),
        ("lap.toml", scenario.encode(), "text/plain"),
        ("dept.toml", calibration_text(1.2).encode(), "text/plain"),
    ]
    at.file_uploader(key="forecast.upload").set_value(files).run()
    assert_clean(at)
    assert at.session_state[CAL]["name"] == "dept.toml"
    assert metric(at, "Cases a week (mean)") == "5.00"
    assert "Uptake factor 1.20" in " ".join(c.value for c in at.caption)
    assert at.session_state["forecast.doc"]["calibration"] == "dept.toml"
    # A bad calibration given with the mix refuses the upload, naming the field; what was loaded stays.
    mix["weeks"] = 3
    files[0] = ("mix.toml", tomli_w.dumps(mix).encode(), "application/toml")
    files[2] = ("dept.toml", calibration_text(50.0).encode(), "text/plain")
    at.file_uploader(key="forecast.upload").set_value(files).run()
    assert any("calibration.agents.sevoflurane" in e.value for e in at.error)
    assert at.session_state["forecast.doc"]["weeks"] == 2 and "factor = 1.2" in at.session_state[CAL]["text"]


def test_compare_plans_runs_the_planner_case_with_the_calibration_it_names():
    doc = demo.scenario()
    doc["calibration"] = "dept.toml"
    at = page("compare_plans", doc)
    assert_clean(at)
    assert 'calibration = "dept.toml"' in warnings_text(at) and not at.dataframe
    at.session_state[CAL] = {"name": "dept.toml", "text": calibration_text(1.3)}
    at.run()
    assert_clean(at)
    del doc["calibration"]
    plain = page("compare_plans", doc)
    assert not at.dataframe[0].value.equals(plain.dataframe[0].value)  # the planner's case at factor 1.3


def test_supply_runs_the_planner_case_with_the_calibration_it_names():
    inventory, _ = demo.document("highland_clinic_inventory.toml")
    inventory["demand"]["cases"][0]["scenario"] = "case planner"
    doc = demo.scenario()
    doc["calibration"] = "dept.toml"
    at = page("supply_duration", doc)
    at.session_state["supply.doc"] = inventory
    at.session_state["supply.doc.files"] = {}
    at.session_state["supply.version"] = 1  # the page's editors show the new document
    at.run()
    assert_clean(at)
    assert 'calibration = "dept.toml"' in warnings_text(at) and not at.metric
    at.session_state[CAL] = {"name": "dept.toml", "text": calibration_text(1.3)}
    at.run()
    assert_clean(at)
    assert metric(at, "Days of supply")


@pytest.mark.parametrize("module", ["case_planner", "flow_floor", "demand_forecast"])
def test_every_planning_page_offers_the_calibration(module):
    at = page(module)
    assert_clean(at)
    assert any(t.label == "Department calibration (uptake factor)" for t in at.toggle)
    assert not any(u.key == "calibration.upload.0" for u in at.get("file_uploader"))  # drawn only while open
    open_calibration_panel(at)
    assert at.file_uploader(key="calibration.upload.0") is not None
    assert any("published model (uptake factor 1)" in c.value for c in at.caption)


def test_named_message_names_the_key_and_the_file():
    from estimator_app.calibration_use import named_message

    text = named_message("a/b.toml", "case mix")
    assert 'calibration = "a/b.toml"' in text and "Load a/b.toml" in text and "case mix" in text
    assert Path("a/b.toml").name in text


def test_the_patient_spread_runs_with_the_calibration_as_case_spread_does():
    from estimator.inputs.calibration_file import calibration_from_text, with_calibration
    from estimator.inputs.scenario import scenario_from_text
    from estimator.simulation.spread import simulate_spread
    from estimator_app.contracts import toml_text
    from estimator_app.spread_view import run_spread

    text = toml_text(demo.scenario())
    cal = calibration_text(1.3)
    app = run_spread(text, 4, 1, cal).to_json()
    cli = simulate_spread(with_calibration(scenario_from_text(text), calibration_from_text(cal)), 4, seed=1).to_json()
    assert app == cli
    assert run_spread(text, 4, 1).to_json() != app
