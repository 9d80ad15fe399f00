"""The supply page runs a scenario file that names a calibration file with that file, uploaded beside the
inventory and its scenario files (as ``lowflow supply`` reads it beside the scenario file); a file not
given is named and nothing runs. The calibration's text is parsed once per distinct text, however often
the page reruns."""

from __future__ import annotations

import tomllib

import pytest
import tomli_w
from app_helpers import ROOT, assert_clean, metric, page
from calibration_helpers import calibration_text

from estimator.errors import InputError
from estimator_app import contracts

DEMO = ROOT / "demo_cases"
INVENTORY = "highland_clinic_inventory.toml"
SCENARIO = "highland_mobile_team.toml"  # the inventory's case plan; isoflurane


def named_scenario(calibration: str = "dept.toml") -> bytes:
    doc = tomllib.loads((DEMO / SCENARIO).read_text(encoding="utf-8"))
    doc["calibration"] = calibration
    return tomli_w.dumps(doc).encode()


def upload(at, *extra: tuple[str, bytes]):
    files = [(INVENTORY, (DEMO / INVENTORY).read_bytes()), (SCENARIO, named_scenario()), *extra]
    at.file_uploader(key="supply.upload").set_value([(n, b, "application/toml") for n, b in files])
    return at.run()


def warnings_text(at) -> str:
    return " ".join(w.value for w in at.warning)


def test_a_scenario_naming_a_calibration_runs_with_the_file_given_beside_it():
    plain = page("supply_duration")
    assert_clean(plain)
    at = upload(page("supply_duration"), ("dept.toml", calibration_text(1.3, "isoflurane").encode()))
    assert_clean(at)  # before the fix: "calibration file named in a scenario file read from disk"
    assert at.session_state["supply.doc.files"]["dept.toml"].startswith('method = "test"')
    assert float(metric(at, "Days of supply").split()[0]) < float(metric(plain, "Days of supply").split()[0])
    assert f"{SCENARIO} runs with dept.toml" in " ".join(c.value for c in at.caption)


def test_a_named_calibration_not_given_is_named_and_nothing_runs():
    at = upload(page("supply_duration"))
    assert_clean(at)
    said = warnings_text(at)
    assert f'The scenario file {SCENARIO} names a calibration file: calibration = "dept.toml"' in said
    assert "Load dept.toml together with the inventory" in said
    assert not at.metric  # never run without the department's factor


def test_a_bad_calibration_given_with_the_inventory_is_refused_naming_the_field():
    at = upload(page("supply_duration"), ("dept.toml", calibration_text(50.0, "isoflurane").encode()))
    assert any("calibration.agents.isoflurane" in e.value for e in at.error)
    assert "dept.toml" not in at.session_state["supply.doc.files"]  # the demo inventory stays


def test_the_contract_runs_a_named_calibration_never_without_it():
    text = named_scenario().decode()
    scenarios = {SCENARIO: text}
    cal = calibration_text(1.3, "isoflurane")
    assert contracts.calibrations_named({**scenarios, "dept.toml": cal}) == {SCENARIO: "dept.toml"}
    ((name, run, given),) = contracts.case_runs(scenarios, {SCENARIO: text, "dept.toml": cal})
    assert name == SCENARIO and given == cal and "calibration" not in tomllib.loads(run)
    assert contracts.missing_calibrations(scenarios, {}) == {SCENARIO: "dept.toml"}
    with pytest.raises(InputError, match="dept.toml"):
        contracts.case_runs(scenarios, {SCENARIO: text})
    # An inventory's upload keeps the calibration its scenario names, and nothing else.
    inventory = tomllib.loads((DEMO / INVENTORY).read_text(encoding="utf-8"))
    given = contracts.given_files("inventory", inventory, {SCENARIO: text, "dept.toml": cal, "other.toml": cal})
    assert set(given) == {SCENARIO, "dept.toml"}


def test_the_calibration_text_is_parsed_once_over_reruns(monkeypatch):
    import estimator.inputs.calibration_file as calibration_file

    calls = []
    real = calibration_file.calibration_from_text

    def counted(text: str):
        calls.append(text)
        return real(text)

    monkeypatch.setattr(calibration_file, "calibration_from_text", counted)
    contracts._calibration.cache_clear()
    text = calibration_text(1.37)
    at = page("case_planner")
    at.session_state["calibration.file"] = {"name": "dept.toml", "text": text}
    for _ in range(3):
        at.run()
        assert_clean(at)
    assert "Uptake factor 1.37" in " ".join(c.value for c in at.caption)  # the panel and the notes read it
    assert calls == [text]
    # Each reader gets its own copy: a change to one never reaches the shared parse.
    first = contracts.calibration_text(text)
    first.agents.clear()
    assert contracts.calibration_text(text).factor("sevoflurane") == 1.37 and calls == [text]
