"""The case planner's phases as rows of number boxes (estimator_app/box_rows.py) against a loaded scenario.

The rules of the table editor they replace (issue 16): an untouched value is saved as loaded, a blank box
removes the key, a loaded value outside a box's range is shown, never clamped, other keys are kept,
phases are added and removed in place; the boxes start again when a file is loaded or the unit changes.
The pages run in streamlit's AppTest with the real engine; the saved file is the save button's bytes.
"""

from __future__ import annotations

import tomllib

import pytest
from app_helpers import ROOT, assert_clean, capture_saves, metric, number, page

from estimator_app import demo

NAME = demo.DEFAULT["scenario"]
KEY = "case.phases.0.L/min"


@pytest.fixture
def saved(monkeypatch) -> dict[str, bytes]:
    return capture_saves(monkeypatch)


def original() -> dict:
    return tomllib.loads((ROOT / "demo_cases" / NAME).read_text(encoding="utf-8"))


def saved_doc(saved: dict[str, bytes]) -> dict:
    return tomllib.loads(saved[NAME].decode())


def labels(at) -> list[str]:
    return [t.value for t in at.text_input if t.key.startswith("case.phases")]


def test_every_phase_number_box_has_the_contract_range():
    # As the number columns of the table editor (issue 14 item 11): a lower bound on every box, help on each.
    at = page("case_planner")
    boxes = [n for n in at.number_input if n.key.startswith(KEY)]
    assert len(boxes) == 3 * 6  # three phases; duration, O2, air, N2O, dial, end-tidal hold
    assert all(n.min == 0.0 for n in boxes)
    assert {n.label for n in boxes} == {
        "duration [min]",
        "O2 [L/min]",
        "air [L/min]",
        "N2O [L/min]",
        "dial [%]",
        "end-tidal hold [MAC]",
    }


def test_an_edit_changes_the_totals_and_writes_only_that_key(saved):
    # Dion 1992, Baum and Aitkenhead 1995: at the same end-tidal hold, more fresh gas delivers more agent.
    at = page("case_planner")
    before = number(metric(at, "Liquid agent"))
    at.number_input(key=f"{KEY}.0.oxygen").set_value(6.0).run()
    assert_clean(at)
    assert number(metric(at, "Liquid agent")) > before
    want = original()
    want["phases"][0]["oxygen"] = "6 L/min"
    assert saved_doc(saved) == want


def test_a_blank_box_removes_the_key(saved):
    at = page("case_planner")
    at.number_input(key=f"{KEY}.1.air").set_value(None).run()
    assert_clean(at)
    want = original()
    del want["phases"][1]["air"]
    assert saved_doc(saved) == want


def test_a_loaded_value_outside_the_box_range_is_kept(saved):
    # The box's range (0-3 MAC) widens to show 3.5 MAC; nothing is clamped, the loader judges the value.
    doc = demo.scenario()
    doc["phases"][1]["end_tidal_target"] = "3.5 MAC"
    at = page("case_planner", doc)
    box = at.number_input(key=f"{KEY}.1.end_tidal_target")
    assert box.value == 3.5 and box.max == 3.5
    at.number_input(key="case.weight.0.kg").set_value(71.0).run()
    assert at.session_state["scenario"]["phases"][1]["end_tidal_target"] == "3.5 MAC"


def test_remove_and_add_phases_in_place(saved):
    at = page("case_planner")
    at.number_input(key=f"{KEY}.1.oxygen").set_value(0.5).run()
    at.button(key=f"{KEY}.0.remove").click().run()  # the wash-in goes; the maintenance keeps its edit
    assert_clean(at)
    assert labels(at) == ["maintenance", "emergence"]
    assert at.number_input(key=f"{KEY}.1.oxygen").value == 0.5
    want = original()
    want["phases"][1]["oxygen"] = "0.5 L/min"
    del want["phases"][0]
    assert saved_doc(saved)["phases"] == want["phases"]
    at.button(key=f"{KEY}.add").click().run()
    assert labels(at) == ["maintenance", "emergence", ""]
    at.text_input(key=f"{KEY}.3.label").set_value("recovery").run()
    at.number_input(key=f"{KEY}.3.duration").set_value(5.0).run()
    at.number_input(key=f"{KEY}.3.oxygen").set_value(2.0).run()
    at.number_input(key=f"{KEY}.3.vaporizer").set_value(0.0).run()
    assert_clean(at)
    want["phases"].append({"label": "recovery", "duration": "5 min", "oxygen": "2 L/min", "vaporizer": "0 %"})
    assert saved_doc(saved)["phases"] == want["phases"]


def test_the_boxes_start_again_for_a_new_unit_and_a_new_file(saved):
    at = page("case_planner")
    at.number_input(key=f"{KEY}.1.oxygen").set_value(0.5).run()
    at.selectbox(key="unit.flow").set_value("mL/min").run()
    assert_clean(at)
    assert at.number_input(key="case.phases.0.mL/min.1.oxygen").value == 500.0
    assert saved_doc(saved)["phases"][1]["oxygen"] == "0.5 L/min"  # shown in mL/min, saved as written
    at.selectbox(key="scenario.demo").set_value("kestrel_nitrous_dental.toml").run()
    assert_clean(at)
    dental = tomllib.loads((ROOT / "demo_cases" / "kestrel_nitrous_dental.toml").read_text(encoding="utf-8"))
    assert labels(at) == [p["label"] for p in dental["phases"]]
