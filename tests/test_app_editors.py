"""The app's editors against a loaded document: number columns, keys kept, refusals as the CLI's, no tracebacks.

Issue 14 item 11 (a traceback from an empty concentrator table) and issue 16 (an app that dropped or
rewrote what it could not edit). The pages run in streamlit's AppTest with the real engine.
"""

from __future__ import annotations

import json
import tomllib

import pytest
import tomli_w
from app_helpers import ROOT, TIMEOUT, assert_clean, capture_saves, edit_table, metric, number, page
from streamlit.testing.v1 import AppTest

from estimator_app import demo


def faults(at) -> list[str]:
    """Error lines of a page run, the model's red safety warnings left out (estimator_app.common)."""
    return [e.value for e in at.error if not e.value.startswith("Safety:")]


@pytest.fixture
def saved(monkeypatch) -> dict[str, bytes]:
    """Bytes of every save button the app builds, by file name."""
    return capture_saves(monkeypatch)


def test_supply_page_more_cases_fewer_days():
    at = page("supply_duration")
    assert_clean(at)
    days = number(metric(at, "Days of supply"))
    assert metric(at, "Bottleneck") != "none"
    # Twice the cases a day draw the stocks down faster: fewer days (common practice, no source).
    at = edit_table(at, "supply.cases.0", {"edited_rows": {"0": {"cases a day": 8}}})
    assert_clean(at)
    assert number(metric(at, "Days of supply")) < days


def test_supply_inventory_upload_with_its_scenario_and_a_misspelt_key():
    at = page("supply_duration")
    inv, named = demo.document("highland_clinic_inventory.toml")
    inv["bottles"][0]["count"] = 40  # plenty of agent: the bottleneck must be another item
    scenario = [(n, t.encode(), "application/toml") for n, t in named.items()]
    at.get("file_uploader")[0].set_value([("inv.toml", tomli_w.dumps(inv).encode(), "application/toml"), *scenario])
    at.run()
    assert_clean(at)
    assert "isoflurane" not in metric(at, "Bottleneck").lower()
    # The same refusal as the command line's loader, with the field named; the loaded inventory stays.
    inv["cylinders"][0]["water_capacty"] = "50 L"
    at.get("file_uploader")[0].set_value([("bad.toml", tomli_w.dumps(inv).encode(), "application/toml"), *scenario])
    at.run()
    assert any("water_capacty" in e for e in faults(at))
    assert "isoflurane" not in metric(at, "Bottleneck").lower()
    # An inventory whose case plan names a file not given with it is refused, naming the file.
    at.get("file_uploader")[0].set_value([("alone.toml", tomli_w.dumps(demo.inventory()).encode(), "text/plain")])
    at.run()
    assert any("demand.cases (row 1).scenario" in e and "highland_mobile_team.toml" in e for e in faults(at))


def test_supply_empty_concentrator_table_takes_a_typed_rated_flow():
    # Issue 14 item 11: a row added to an empty "Oxygen concentrators" table, with a rated flow typed
    # in, gave a traceback. An empty table's columns are number columns too; the value the browser
    # sends as text is read as a number, and no traceback reaches the page.
    at = AppTest.from_string(
        "from estimator_app.shell import page_main\npage_main('supply_duration')", default_timeout=TIMEOUT
    )
    inv, named = demo.document("highland_clinic_inventory.toml")
    del inv["concentrators"]
    at.session_state["supply.doc"], at.session_state["supply.doc.files"] = inv, named
    at.session_state["supply.version"] = 0
    at.run()
    assert_clean(at)
    without = number(metric(at, "Days of supply"))
    for typed in ("10", 10):
        at = edit_table(at, "supply.conc.0", {"added_rows": [{"rated flow [L/min]": typed}]})
        assert_clean(at)
        # A 10 L/min concentrator (24 h a day by default) relieves the O2 cylinders: more days.
        assert number(metric(at, "Days of supply")) > without


@pytest.mark.parametrize("name", ["supply_duration", "demand_forecast", "flow_floor"])
def test_every_numeric_editor_column_is_a_number_column(name):
    # Issue 14 item 11: a column holding numbers (or a unit in its label) is a number column with a
    # lower bound, whether its table starts empty or not, so the browser never sends text for it.
    # (The case planner's phases are number boxes: tests/test_app_phase_boxes.py.)
    at = page(name)
    assert_clean(at)
    editors = [e for e in at.dataframe if e.key]
    for editor in editors:
        config = json.loads(editor.proto.columns)
        for title, frame_dtype in editor.value.dtypes.items():
            numeric = str(frame_dtype).startswith(("float", "int")) and title != "_row"
            if numeric or "[" in title:
                assert config[title]["type_config"]["type"] == "number", (editor.key, title)
                assert "min_value" in config[title]["type_config"], (editor.key, title)


def test_a_fault_in_a_page_is_one_line_never_a_traceback():
    # Any exception that is not an InputError is caught by the page shell and shown as one short
    # line; config.toml keeps error details off as a second guard.
    at = AppTest.from_string(
        "from estimator_app.shell import guarded\n"
        "from estimator.errors import InputError\n"
        "guarded(lambda: 1 / 0)\n"
        "guarded(lambda: (_ for _ in ()).throw(InputError('cylinders[0].pressure', '-3 bar', '0 to 300 bar')))\n",
        default_timeout=TIMEOUT,
    ).run()
    assert not at.exception
    assert len(faults(at)) == 2
    assert "ZeroDivisionError" in faults(at)[0] and "Traceback" not in faults(at)[0]
    assert "cylinders (row 1).pressure" in faults(at)[1] and "0 to 300 bar" in faults(at)[1]
    config = tomllib.loads((ROOT / ".streamlit" / "config.toml").read_text(encoding="utf-8"))
    assert config["client"]["showErrorDetails"] is False


def test_forecast_keeps_every_key_and_writes_only_the_edit(saved):
    # Issue 16: the page dropped balance, age_* and weight_min/max of the demo case mix.
    at = page("demand_forecast")
    assert_clean(at)
    at = edit_table(at, "forecast.types.0.L/min.kg", {"edited_rows": {"0": {"per week": 12}}})
    assert_clean(at)
    name = demo.DEFAULT["casemix"]
    doc = tomllib.loads(saved[name].decode())
    original = tomllib.loads((ROOT / "demo_cases" / name).read_text(encoding="utf-8"))
    original["case_types"][0]["per_week"] = 12.0
    assert doc == original


def test_forecast_upload_refuses_a_misspelt_key_as_the_cli_does():
    from estimator.errors import InputError
    from estimator.planning.casemix import casemix_from_text

    at = page("demand_forecast")
    mix = demo.casemix()
    mix["case_types"][0]["weigth_mean"] = mix["case_types"][0].pop("weight_mean")
    text = tomli_w.dumps(mix)
    with pytest.raises(InputError) as cli:
        casemix_from_text(text)
    at.file_uploader(key="forecast.upload").set_value([("mix.toml", text.encode(), "application/toml")])
    at.run()
    # The command line's error, rows counted from 1 as the page's tables show them.
    from estimator.display import field_path

    same = InputError(field_path(cli.value.field), cli.value.value, cli.value.expected)
    assert faults(at) == [f"Input not accepted: {same}"]
    assert "weigth_mean" in faults(at)[0]
    assert at.session_state["forecast.doc"] == demo.casemix()  # the loaded case mix stays


def test_planner_keeps_a_phase_given_by_oxygen_fraction_and_total_flow(saved):
    # Issue 16: the planner rewrote such a phase into plain flows. It stays as written, shown read-only.
    name = "kestrel_nitrous_dental.toml"
    at = page("case_planner")
    at.selectbox(key="scenario.demo").set_value(name).run()
    assert_clean(at)
    original = tomllib.loads((ROOT / "demo_cases" / name).read_text(encoding="utf-8"))
    k = next(i for i, p in enumerate(original["phases"]) if "total_flow" in p)
    kept = [c.value for c in at.caption if "kept as loaded:" in c.value]
    assert len(kept) == sum(1 for p in original["phases"] if "total_flow" in p)
    assert kept[0].startswith(f"Phase {k + 1} ({original['phases'][k]['label']}), kept as loaded:")
    assert f'total_flow = "{original["phases"][k]["total_flow"]}"' in kept[0] and "label =" not in kept[0]
    at.number_input(key="case.weight.1.kg").set_value(71.0).run()
    doc = tomllib.loads(saved[name].decode())
    assert doc["phases"] == original["phases"]
    assert doc["patient"]["weight"] == "71 kg"


def test_scenario_upload_with_an_unknown_key_is_refused_as_the_cli_refuses_it():
    from estimator.errors import InputError
    from estimator.inputs.scenario import scenario_from_text

    doc = demo.scenario()
    doc["circuit"]["volum"] = "5 L"
    text = tomli_w.dumps(doc)
    with pytest.raises(InputError) as cli:
        scenario_from_text(text)
    at = page("case_planner")
    at.sidebar.file_uploader(key="scenario.upload").set_value(("case.toml", text.encode(), "application/toml"))
    at.run()
    assert faults(at) == [f"Input not accepted: {cli.value}"]
    assert at.session_state["scenario"] == demo.scenario()


def test_an_edit_undone_gives_the_file_back(saved):
    # A cell changed and changed back is the loaded value again, written as it was read.
    at = page("case_planner")
    name = demo.DEFAULT["scenario"]
    original = tomllib.loads((ROOT / "demo_cases" / name).read_text(encoding="utf-8"))
    at.number_input(key="case.phases.0.L/min.1.oxygen").set_value(0.5).run()
    assert_clean(at)
    assert tomllib.loads(saved[name].decode())["phases"][1]["oxygen"] == "0.5 L/min"
    at.number_input(key="case.phases.0.L/min.1.oxygen").set_value(0.3).run()
    assert_clean(at)
    assert tomllib.loads(saved[name].decode()) == original


def test_forecast_upload_with_the_scenario_file_it_names():
    # A case type naming a scenario file runs that file's case when the file is uploaded with the mix;
    # a name outside the uploaded files (a path on the server) is refused, never opened.
    scenario = (ROOT / "demo_cases" / "kestrel_lap_chole.toml").read_text(encoding="utf-8")
    mix = {
        "weeks": 2,
        "seed": 1,
        "case_types": [{"name": "lap chole", "per_week": 5, "count": "fixed", "scenario": "lap.toml"}],
    }
    at = page("demand_forecast")
    files = [
        ("mix.toml", tomli_w.dumps(mix).encode(), "application/toml"),
        ("lap.toml", scenario.encode(), "text/plain"),
    ]
    at.file_uploader(key="forecast.upload").set_value(files)
    at.run()
    assert_clean(at)
    assert metric(at, "Cases a week (mean)") == "5.00"
    assert at.session_state["forecast.doc"] == mix
    mix["case_types"][0]["scenario"] = "../../etc/lap.toml"
    at.file_uploader(key="forecast.upload").set_value([("bad.toml", tomli_w.dumps(mix).encode(), "text/plain")])
    at.run()
    assert len(faults(at)) == 1 and "case_types (row 1).scenario" in faults(at)[0]


def test_empty_editor_cells_read_blank_not_none(monkeypatch):
    # Issue 19, item 6: a missing value in an editable table shows blank; the value stays missing.
    import streamlit

    calls = []
    real = streamlit.data_editor

    def spy(*args, **kwargs):
        calls.append(kwargs)
        return real(*args, **kwargs)

    monkeypatch.setattr(streamlit, "data_editor", spy)
    at = page("supply_duration")
    assert_clean(at)
    assert calls and all(kw.get("placeholder") == "" for kw in calls)
    at = page("case_planner")  # its phases are boxes: an absent value is an empty box
    assert not [t.key for t in at.text_input if t.value in ("None", "nan")]
    assert [n.value for n in at.number_input if n.key.endswith(".0.nitrous_oxide")] == [None]


def test_kept_keys_are_shown_as_toml_only_while_their_expander_is_open():
    # A code block makes the browser load its syntax highlighter (about 1.5 MB of script), so the
    # closed expander draws none; opened, it shows the keys as loaded (benchmarks/bench_app.py).
    at = page("case_planner")
    label = next(e.label for e in at.expander if e.label.startswith("Keys this page does not edit"))
    assert "kept as loaded and saved unchanged" in label and not at.code
    at.session_state["kept.Keys this page does not edit"] = True
    at.run(timeout=TIMEOUT)
    assert_clean(at)
    shown = tomllib.loads(at.code[0].value)
    assert shown["prices"] == demo.scenario()["prices"]
