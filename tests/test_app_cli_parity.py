"""The app and the command line give the same headline numbers for every demo_cases/ file, and the app
saves the file it loaded unchanged (the same parsed document).

Each file is opened in the app the way a user opens it (the page's demo selector, AppTest) and run
through ``lowflow <verb> FILE --json`` (``estimator.cli.main``). Numbers are compared as the app
shows them: the command line's value formatted to the page's precision must give the same text. A
consistency check between two faces of one engine, not a validation against a published source.
"""

from __future__ import annotations

import contextlib
import io
import json
import sys
import tomllib
from datetime import date
from pathlib import Path

import pytest
import tomli_w

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # app.py runs from the repository root; estimator_app is not installed
    sys.path.insert(0, str(ROOT))

from app_helpers import capture_saves, open_calibration_panel  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

from estimator.cli import main  # noqa: E402
from estimator.display import name as human_name  # noqa: E402
from estimator.display import rounded  # noqa: E402
from estimator.display import text as shown  # noqa: E402
from estimator.units import Q_  # noqa: E402
from estimator_app import demo  # noqa: E402

DEMO = ROOT / "demo_cases"
TIMEOUT = 300


def cli_json(*argv: str) -> dict:
    """``lowflow ARGV --json`` in-process: its parsed JSON document."""
    out = io.StringIO()
    with contextlib.redirect_stdout(out), pytest.raises(SystemExit) as done:
        main([*argv, "--json"])
    assert done.value.code == 0, out.getvalue()[-500:]
    return json.loads(out.getvalue())


@pytest.fixture
def saved(monkeypatch) -> dict[str, bytes]:
    """Bytes of every save button the app builds, by file name."""
    return capture_saves(monkeypatch)


def open_page(module: str, picker: str | None = None, name: str | None = None) -> AppTest:
    at = AppTest.from_string(
        f"from estimator_app.shell import page_main\npage_main({module!r})", default_timeout=TIMEOUT
    ).run()
    if picker is not None:
        at.selectbox(key=picker).set_value(name).run()
    assert not at.exception, [e.value for e in at.exception]
    faults = [e.value for e in at.error if not e.value.startswith("Safety:")]  # safety warnings are red
    assert not faults, faults
    return at


def metric(at: AppTest, label: str) -> str:
    return next(m.value for m in at.metric if m.label.startswith(label))


def mag(q: dict) -> float:
    return float(q["magnitude"])


@pytest.mark.parametrize("name", demo.files_of("scenario"))
def test_case_planner_and_lowflow_case_agree(name, saved):
    at = open_page("case_planner", "scenario.demo", name)
    cli = cli_json("case", str(DEMO / name))
    assert_case_totals(at, cli)
    # Saving without an edit gives the file back: the same parsed document.
    assert tomllib.loads(saved[name].decode()) == tomllib.loads((DEMO / name).read_text(encoding="utf-8"))


def assert_case_totals(at: AppTest, cli: dict) -> None:
    """The planner's totals as ``lowflow case --json`` gives them, at the page's precision."""
    t = cli["totals"]
    assert metric(at, "Liquid agent") == f"{mag(t['agent_liquid']):.1f} mL"
    assert metric(at, "Oxygen") == f"{mag(t['oxygen']):.0f} L"
    assert metric(at, "Air") == f"{mag(t['air']):.0f} L"
    assert metric(at, "Nitrous oxide") == f"{mag(t['nitrous_oxide']):.0f} L"
    assert metric(at, "MAC-hours") == f"{mag(t['mac_hours']):.2f}"
    assert metric(at, "CO2e") == f"{mag(t['co2e']):.2f} kg"
    assert metric(at, "Absorbent used") == f"{Q_(mag(t['absorbent']), t['absorbent']['units']).to('g').magnitude:.0f} g"
    assert metric(at, "Lowest inspired O2") == f"{100 * mag(cli['minimum_inspired_oxygen']):.1f} %"
    if cli["cost"]:
        assert metric(at, "Cost") == f"{cli['cost']['total']:.2f}"


def load_calibration_upload(at: AppTest, path: Path) -> AppTest:
    """The page's calibration upload given a calibration file's bytes (as a browser sends them)."""
    open_calibration_panel(at)
    at.file_uploader(key="calibration.upload.0").set_value((path.name, path.read_bytes(), "application/toml"))
    return at.run()


@pytest.fixture
def calibration_file(tmp_path) -> Path:
    from calibration_helpers import calibration_text

    path = tmp_path / "dept_calibration.toml"
    path.write_text(calibration_text(1.3), encoding="utf-8")
    return path


def test_case_planner_with_a_calibration_and_lowflow_case_calibration_agree(calibration_file, saved):
    name = "kestrel_lap_chole.toml"
    cli = cli_json("case", str(DEMO / name), "--calibration", str(calibration_file))
    assert cli["calibration"]["applied"] == 1.3
    at = load_calibration_upload(open_page("case_planner", "scenario.demo", name), calibration_file)
    assert_case_totals(at, cli)
    assert cli_json("case", str(DEMO / name))["totals"] != cli["totals"]  # the factor changes the numbers
    # The page's JSON download carries the verb's calibration object.
    from estimator_app.calibration_use import notes

    assert notes(calibration_file.read_text(encoding="utf-8"), [("sevoflurane", 1.3)]) == {
        "sevoflurane": cli["calibration"]
    }
    # A scenario naming the file (its calibration key, beside it on disk): the same numbers once the
    # file is loaded in the app, and the key kept in the file saved.
    doc = tomllib.loads((DEMO / name).read_text(encoding="utf-8"))
    doc["calibration"] = calibration_file.name
    named = calibration_file.parent / "named.toml"
    named.write_text(tomli_w.dumps(doc), encoding="utf-8")
    at = open_page("case_planner")
    at.sidebar.file_uploader(key="scenario.upload").set_value(("named.toml", named.read_bytes(), "application/toml"))
    at = load_calibration_upload(at.run(), calibration_file)
    assert_case_totals(at, cli_json("case", str(named)))
    assert tomllib.loads(saved["named.toml"].decode()) == doc


def test_flow_floor_with_a_calibration_and_lowflow_safe_flow_calibration_agree(calibration_file):
    name = "kestrel_lap_chole.toml"
    cli = cli_json("safe-flow", str(DEMO / name), "--calibration", str(calibration_file))
    plain = cli_json("safe-flow", str(DEMO / name))
    assert cli["comparison"]["recommended"] != plain["comparison"]["recommended"]
    at = load_calibration_upload(open_page("flow_floor", "scenario.demo", name), calibration_file)
    rec = cli["comparison"]["recommended"]
    assert metric(at, "Mean flow at the floor") == f"{mag(rec['mean_fresh_gas_flow']):.2f} L/min"
    assert metric(at, "Liquid agent at the schedule") == f"{mag(rec['agent_liquid']):.1f} mL"
    assert metric(at, "Oxygen at the schedule") == f"{mag(rec['oxygen']):.0f} L"
    assert metric(at, "CO2e at the schedule") == f"{mag(rec['co2e']):.2f} kg"
    table = next(d.value for d in at.dataframe if "settable" in d.value.columns)
    assert list(table["total [L/min]"]) == [round(mag(s["total"]), 3) for s in cli["schedule"]]


def test_save_writes_exactly_what_is_on_screen(saved):
    # Issue 16: the scenario saved held the state from one edit earlier (90 kg shown, 85 kg saved).
    at = open_page("case_planner")
    for kg in (85.0, 90.0):
        at.number_input(key="case.weight.0.kg").set_value(kg).run()
        doc = tomllib.loads(saved[demo.DEFAULT["scenario"]].decode())
        assert doc["patient"]["weight"] == f"{kg:g} kg"
    # Everything else is the file as loaded.
    original = tomllib.loads((DEMO / demo.DEFAULT["scenario"]).read_text(encoding="utf-8"))
    original["patient"]["weight"] = "90 kg"
    assert doc == original


@pytest.mark.parametrize("name", demo.files_of("inventory"))
def test_supply_page_and_lowflow_supply_agree(name, saved):
    at = open_page("supply_duration", "supply.doc.demo", name)
    cli = cli_json("supply", str(DEMO / name))
    assert_supply_metrics(at, cli)
    reorder = date.fromisoformat(cli["reorder_by"])  # "Order now" once the date is today or past (issue 19)
    assert metric(at, "Reorder") == ("Order now" if reorder <= date.today() else f"by {cli['reorder_by']}")
    # Every key of the file survives the page: concentrator start and purity, cylinder temperature
    # and service pressure included.
    assert tomllib.loads(saved[name].decode()) == tomllib.loads((DEMO / name).read_text(encoding="utf-8"))


def assert_supply_metrics(at: AppTest, cli: dict) -> None:
    assert metric(at, "Bottleneck") == (cli["bottleneck"] or "none")
    assert metric(at, "Days of supply") == shown(mag(cli["days_of_supply"]), "days")
    assert metric(at, "Cases possible") == f"{cli['cases_possible']} cases"


def test_supply_page_with_the_calibration_a_scenario_names_and_lowflow_supply_agree(tmp_path):
    from calibration_helpers import calibration_text

    inventory, scenario = "highland_clinic_inventory.toml", "highland_mobile_team.toml"  # isoflurane cases
    doc = tomllib.loads((DEMO / scenario).read_text(encoding="utf-8"))
    doc["calibration"] = "dept_calibration.toml"
    (tmp_path / inventory).write_text((DEMO / inventory).read_text(encoding="utf-8"), encoding="utf-8")
    (tmp_path / scenario).write_text(tomli_w.dumps(doc), encoding="utf-8")
    (tmp_path / "dept_calibration.toml").write_text(calibration_text(1.3, "isoflurane"), encoding="utf-8")
    cli = cli_json("supply", str(tmp_path / inventory))
    plain = cli_json("supply", str(DEMO / inventory))
    assert mag(cli["days_of_supply"]) < mag(plain["days_of_supply"])  # the factor changes the numbers
    at = open_page("supply_duration")
    at.file_uploader(key="supply.upload").set_value(
        [(p.name, p.read_bytes(), "application/toml") for p in sorted(tmp_path.iterdir())]
    )
    at = at.run()
    assert not at.exception and not [e.value for e in at.error if not e.value.startswith("Safety:")]
    assert_supply_metrics(at, cli)
    items = next(d.value for d in at.dataframe if "lasts [days]" in d.value.columns)
    app = dict(zip(items["item"], items["lasts [days]"], strict=True))
    for item in cli["items"]:  # each item's days, as the page rounds them for reading
        if item["runtime"] is not None:
            assert app[item["name"]] == shown(mag(item["runtime"])), item["name"]


@pytest.mark.parametrize("name", demo.files_of("casemix"))
def test_forecast_page_and_lowflow_forecast_agree(name, saved):
    # The file's own weeks and seed: the same Monte Carlo draws, so the same weekly medians.
    at = open_page("demand_forecast", "forecast.doc.demo", name)
    cli = cli_json("forecast", str(DEMO / name))
    tables = [d.value for d in at.dataframe if "p50" in d.value.columns]
    weekly = next(t for t in tables if "horizon [weeks]" not in t.columns)
    app = dict(zip(weekly["item"], weekly["p50"], strict=True))
    for key, stats in cli["items"].items():  # as estimator.display rounds them for reading
        assert app[human_name(key)] == rounded(mag(stats["p50"])), key
    assert metric(at, "Cases a week (mean)") == shown(mag(cli["items"]["cases"]["mean"]))
    assert metric(at, "CO2e a week (P95)") == shown(mag(cli["items"]["co2e"]["p95"]), "kg")
    if cli["horizon"]:  # the planning horizon's totals, apart from the weeks simulated
        over = next(t for t in tables if "horizon [weeks]" in t.columns)
        app = dict(zip(over["item"], over["p95"], strict=True))
        for key, stats in cli["horizon"]["items"].items():
            assert app[human_name(key)] == rounded(mag(stats["p95"])), key
    assert tomllib.loads(saved[name].decode()) == tomllib.loads((DEMO / name).read_text(encoding="utf-8"))


def test_forecast_with_a_calibration_and_lowflow_forecast_calibration_agree(calibration_file):
    folder = calibration_file.parent
    mix = {
        "weeks": 3,
        "seed": 7,
        "case_types": [{"name": "lap chole", "per_week": 4, "count": "fixed", "scenario": "lap.toml"}],
    }
    (folder / "lap.toml").write_text((DEMO / "kestrel_lap_chole.toml").read_text(encoding="utf-8"), encoding="utf-8")
    (folder / "mix.toml").write_text(tomli_w.dumps(mix), encoding="utf-8")
    cli = cli_json("forecast", str(folder / "mix.toml"), "--calibration", str(calibration_file))
    assert cli["calibration"]["sevoflurane"]["applied"] == 1.3
    at = open_page("demand_forecast")
    at.file_uploader(key="forecast.upload").set_value(
        [(n, (folder / n).read_bytes(), "application/toml") for n in ("mix.toml", "lap.toml")]
    )
    at = load_calibration_upload(at.run(), calibration_file)
    weekly = next(d.value for d in at.dataframe if "p50" in d.value.columns)
    app = dict(zip(weekly["item"], weekly["p50"], strict=True))
    for key, stats in cli["items"].items():
        assert app[human_name(key)] == rounded(mag(stats["p50"])), key
    plain = cli_json("forecast", str(folder / "mix.toml"))
    assert plain["items"]["sevoflurane"] != cli["items"]["sevoflurane"]  # the factor changes the agent


def test_audit_page_and_lowflow_audit_agree():
    # The page opens on the demo log with the demo prices and the demo policy (their demo_cases files).
    at = open_page("fresh_gas_audit")
    assert at.selectbox(key="audit.log.demo").value == "kestrel_audit_log.csv"
    assert at.selectbox(key="audit.prices.demo").value == "kestrel_prices.toml"
    assert at.selectbox(key="audit.policy.demo").value == "kestrel_lowflow_policy.toml"
    policy = tomllib.loads((DEMO / "kestrel_lowflow_policy.toml").read_text(encoding="utf-8"))["policy"]
    flow = next(n for n in at.number_input if n.label.startswith("Policy fresh-gas flow"))
    assert f"{flow.value:g} L/min" == policy["fresh_gas_flow"]
    cli = cli_json("audit", str(DEMO / "kestrel_audit_log.csv"), "--prices", str(DEMO / "kestrel_prices.toml"))
    t, k = cli["totals"], cli["kpis"]
    assert list(next(d.value for d in at.dataframe if "line" in d.value.columns)["line"]) == [
        r["line"] for r in cli["rejections"]
    ]
    assert metric(at, "Cases") == str(t["cases"])
    # Each agent apart (issue 19: millilitres of two agents are two stocks), as estimator.display shows them.
    for agent, q in t["agent_liquid_by_agent"].items():
        assert metric(at, f"{agent.capitalize()} (liquid)") == shown(mag(q), "mL")
    assert metric(at, "CO2e") == shown(mag(t["co2e"]), "kg")
    assert metric(at, "Cost") == shown(t["cost"]["total"])
    assert metric(at, "Mean maintenance flow") == shown(mag(k["mean_maintenance_flow"]), "L/min")
    assert metric(at, "Time at <= 1 L/min") == shown(100 * k["maintenance_share_le_1"], "%")
    assert metric(at, "MAC-hours") == shown(mag(k["mac_hours"]))


def test_every_demo_file_is_covered():
    covered = {
        *demo.files_of("scenario"),
        *demo.files_of("inventory"),
        *demo.files_of("casemix"),
        "kestrel_audit_log.csv",
        "kestrel_prices.toml",
        "kestrel_lowflow_policy.toml",
    }
    inputs = {p.name for p in DEMO.iterdir() if p.suffix in (".toml", ".csv")}
    assert inputs == covered


def test_case_planner_totals_after_edits_are_those_of_the_saved_file(saved, tmp_path):
    """The page runs the case before it redraws its boxes (a box writes its edit in its change callback);
    an edit no callback writes (a phase added, the agent) makes the page run again. Either way the totals
    on screen are ``lowflow case`` on the file the page saves."""
    at = open_page("case_planner")
    name = "kestrel_lap_chole.toml"

    def agrees() -> None:
        assert not at.exception and not [e.value for e in at.error if not e.value.startswith("Safety:")]
        path = tmp_path / name
        path.write_bytes(saved[name])
        assert_case_totals(at, cli_json("case", str(path)))

    o2 = next(w for w in at.number_input if w.key.startswith("case.phases") and w.key.endswith(".oxygen"))
    before = metric(at, "Liquid agent")
    at.number_input(key=o2.key).set_value(1.2).run()  # the first maintenance box: a callback edit
    assert metric(at, "Liquid agent") != before
    agrees()
    weight = next(w for w in at.number_input if w.key.startswith("case.weight"))
    weight.set_value(95.0).run()
    agrees()
    at.selectbox(key=next(s.key for s in at.selectbox if s.key.startswith("case.agent"))).set_value("desflurane").run()
    assert metric(at, "Liquid agent").endswith("mL")
    agrees()
    at.button(key=next(b.key for b in at.button if b.key.endswith(".add"))).click().run()  # a phase added
    assert any("duration" in e.value for e in at.error)  # a new phase needs its duration: said, not run
    boxes = [w.key for w in at.number_input if w.key.startswith("case.phases")]
    at.number_input(key=[k for k in boxes if k.endswith(".duration")][-1]).set_value(10.0).run()
    at.number_input(key=[k for k in boxes if k.endswith(".oxygen")][-1]).set_value(1.0).run()
    at.number_input(key=[k for k in boxes if k.endswith(".vaporizer")][-1]).set_value(2.0).run()
    agrees()


def test_case_planner_that_keeps_changing_its_scenario_says_so(monkeypatch):
    """The page's guard: inputs that change the scenario on two runs in a row are a fault, not a loop."""
    from estimator_app.pages import case_planner

    real = case_planner.inputs

    def restless(loaded):  # noqa: ANN001, ANN202 - the page's own signature
        doc = real(loaded)
        doc["runs"] = int(doc.get("runs", 0)) + 1  # a key no widget shows, different on every run
        return doc

    monkeypatch.setattr(case_planner, "inputs", restless)
    at = AppTest.from_string(
        "from estimator_app.shell import page_main\npage_main('case_planner')", default_timeout=TIMEOUT
    ).run()
    assert any("internal error" in e.value for e in at.error), [e.value for e in at.error]
