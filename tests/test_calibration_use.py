"""A department's calibration in use: the audit's --calibrate, the file read by case, safe-flow and forecast,
the flow floor's safe side (one-sided), and the batch engine honouring the factor (consistency checks)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from calibration_helpers import synthetic_log
from engine_helpers import scenario

from estimator.cli import main
from estimator.errors import InputError
from estimator.inputs.calibration_file import FixedFactor, load_calibration, with_calibration
from estimator.planning.safety import flow_floor
from estimator.simulation import batch

FACTOR = 1.4
HOLD = {"end_tidal_target": "1 MAC"}
PLAN = [
    {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", **HOLD},
    {"duration": "50 min", "oxygen": "0.3 L/min", "air": "0.2 L/min", **HOLD},
]


def cli(args: list[str], capsys) -> str:
    try:
        main(args)
    except SystemExit as exc:
        assert exc.code in (0, None), capsys.readouterr().err
    return capsys.readouterr().out


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """A synthetic log (factor 1.4) and the calibration file the audit writes from it."""
    folder = tmp_path_factory.mktemp("dept")
    log = folder / "log.csv"
    log.write_text(synthetic_log(FACTOR), encoding="utf-8")
    out = folder / "dept_calibration.toml"
    try:
        main(["audit", str(log), "--calibrate", "--calibration-out", str(out), "--json"])
    except SystemExit as exc:
        assert exc.code in (0, None)
    return folder, log, out


def test_audit_calibrate_json_has_the_factor_interval_and_the_check(made, capsys):
    folder, log, _ = made
    doc = json.loads(cli(["audit", str(log), "--calibrate", "--json"], capsys))
    rec = doc["calibration"]["agents"]["sevoflurane"]
    assert set(rec) >= {"factor", "low", "high", "cases"}
    assert rec["low"] <= FACTOR <= rec["high"]
    assert doc["calibration"]["provenance"]["log_name"] == "log.csv"
    assert len(doc["calibration"]["provenance"]["log_sha256"]) == 64
    check = doc["prediction_check"]
    assert check["agents"]["sevoflurane"]["cases"] == 24
    first = check["cases"][0]
    assert set(first) >= {"case_id", "agent", "recorded", "predicted", "ratio"}
    assert first["recorded"]["units"] == "milliliter"
    assert "caution" in doc and "provenance" in doc  # the stamp of every JSON document
    assert "calibration" not in json.loads(cli(["audit", str(log), "--json"], capsys))


def test_audit_writes_a_calibration_file_with_its_provenance(made):
    _, log, out = made
    cal = load_calibration(out)
    import hashlib

    assert cal.provenance.log_sha256 == hashlib.sha256(log.read_bytes()).hexdigest()
    assert cal.provenance.cases == 24 and cal.provenance.first_case is None  # elapsed times: no dates
    assert cal.agents["sevoflurane"].low <= FACTOR <= cal.agents["sevoflurane"].high


def test_report_has_the_scatter(made, tmp_path):
    _, log, _ = made
    page = tmp_path / "audit.html"
    main_ok(["audit", str(log), "--calibrate", "--report", str(page)])
    html = page.read_text(encoding="utf-8")
    assert "Prediction check and calibration" in html and "line of identity" in html and "<circle" in html


def test_workbook_has_the_prediction_check_and_the_factors(made, tmp_path):
    # The XLSX export carries what the JSON and the report carry: one row a case checked, one an agent.
    import pandas as pd

    _, log, _ = made
    book = tmp_path / "audit.xlsx"
    main_ok(["audit", str(log), "--calibrate", "--xlsx", str(book)])
    sheets = pd.read_excel(book, sheet_name=None)
    check, agents = sheets["prediction check"], sheets["calibration"]
    assert len(check) == 24 and set(check["agent"]) == {"sevoflurane"}
    assert (check["recorded / predicted"] - check["recorded [mL]"] / check["predicted [mL]"]).abs().max() < 1e-9
    row = agents.set_index("agent").loc["sevoflurane"]
    assert row["factor, 95 % low"] <= FACTOR <= row["factor, 95 % high"] and row["cases in the fit"] == 24
    plain = tmp_path / "plain.xlsx"
    main_ok(["audit", str(log), "--xlsx", str(plain)])
    assert "calibration" not in pd.read_excel(plain, sheet_name=None)


def main_ok(args):
    try:
        main(args)
    except SystemExit as exc:
        assert exc.code in (0, None)


def test_case_takes_the_calibration_and_shows_the_interval(made, capsys):
    folder, _, out = made
    plan = folder / "plan.toml"
    plan.write_text(
        '[patient]\nweight = "70 kg"\n[agent]\nname = "sevoflurane"\n[[phases]]\nduration = "60 min"\n'
        'oxygen = "0.5 L/min"\nair = "0.5 L/min"\nend_tidal_target = "1 MAC"\n',
        encoding="utf-8",
    )
    plain = json.loads(cli(["case", str(plan), "--json"], capsys))
    doc = json.loads(cli(["case", str(plan), "--json", "--calibration", str(out)], capsys))
    cal = doc["calibration"]
    assert cal["low"] <= cal["factor"] <= cal["high"] and cal["applied"] == cal["factor"]
    assert cal["provenance"]["cases"] == 24
    assert doc["totals"]["agent_liquid"]["magnitude"] > plain["totals"]["agent_liquid"]["magnitude"]
    assert "calibration" not in plain
    assert {i["name"] for i in doc["provenance"]["inputs"]} == {"plan.toml", out.name}
    text = cli(["case", str(plan), "--calibration", str(out)], capsys)
    assert "95 % interval" in text
    named = folder / "named.toml"
    named.write_text(f'calibration = "{out.name}"\n' + plan.read_text(encoding="utf-8"), encoding="utf-8")
    assert json.loads(cli(["case", str(named), "--json"], capsys))["totals"] == doc["totals"]
    with pytest.raises(SystemExit):
        main(["case", str(named), "--calibration", str(out)])
    assert "not both" in capsys.readouterr().err


def test_forecast_takes_the_calibration_from_the_flag_and_the_file(made, capsys):
    folder, _, out = made
    mix = folder / "mix.toml"
    mix.write_text(
        'weeks = 3\nseed = 1\n[[case_types]]\nname = "lap"\nper_week = 5\nagent = "sevoflurane"\n'
        'wash_in_flow = "4 L/min"\nwash_in_time = "10 min"\nmaintenance_flow = "0.5 L/min"\n'
        'end_tidal_target = "1 MAC"\nweight_mean = "75 kg"\nduration = "60 min"\n',
        encoding="utf-8",
    )
    plain = json.loads(cli(["forecast", str(mix), "--json"], capsys))
    flag = json.loads(cli(["forecast", str(mix), "--json", "--calibration", str(out)], capsys))
    named = folder / "mix_named.toml"
    named.write_text(f'calibration = "{out.name}"\n' + mix.read_text(encoding="utf-8"), encoding="utf-8")
    key = json.loads(cli(["forecast", str(named), "--json"], capsys))
    sevo = lambda d: d["items"]["sevoflurane"]["mean"]["magnitude"]  # noqa: E731
    assert sevo(flag) == pytest.approx(sevo(key))
    assert sevo(flag) > sevo(plain)  # a factor above 1: more agent
    assert flag["calibration"]["sevoflurane"]["low"] <= flag["calibration"]["sevoflurane"]["factor"]


def test_batch_honours_the_factor():
    tpl1 = batch.case_template(scenario("sevoflurane", PLAN))
    tpl2 = batch.case_template(with_calibration(scenario("sevoflurane", PLAN), FixedFactor(1.6)))
    one = batch.run_batch(tpl1, [70.0], [40.0], [60.0])
    two = batch.run_batch(tpl2, [70.0], [40.0], [60.0])
    assert two["agent_liquid"][0] > 1.2 * one["agent_liquid"][0]


def _floors(result):
    return [ph["floor"].to("L/min").magnitude if ph["floor"] is not None else None for ph in result.phases]


@pytest.mark.parametrize("factor", [0.5, 0.8])
def test_a_factor_below_one_never_lowers_the_flow_floor(factor):
    """One-sided: with a department factor below 1 the floor runs at factor 1 (FLOOR_FACTOR_RAISED)."""
    plain = flow_floor(scenario("sevoflurane", PLAN), grid=False)
    low = flow_floor(with_calibration(scenario("sevoflurane", PLAN), FixedFactor(factor)), grid=False)
    assert _floors(low) == _floors(plain)
    assert "FLOOR_FACTOR_RAISED" in {c for c, _ in low.warnings}
    assert low.scenario.uptake_factor == 1.0


def test_a_factor_above_one_keeps_every_floor_at_or_above_the_published_model():
    """The department's higher factor is used; inspired O2 at the same flows is never higher (the
    direction that makes max(f, 1) the safe side for the O2 limits), and no floor falls."""
    from estimator.simulation.engine import simulate

    sc = scenario("sevoflurane", PLAN)
    high = with_calibration(sc, FixedFactor(1.8))
    o2 = [simulate(s).minimum_inspired_oxygen.magnitude for s in (sc, high)]
    assert o2[1] <= o2[0]
    plain, raised = flow_floor(sc, grid=False), flow_floor(high, grid=False)
    for a, b in zip(_floors(plain), _floors(raised), strict=True):
        assert b >= a
    assert "FLOOR_FACTOR_RAISED" not in {c for c, _ in raised.warnings}


def test_missing_calibration_file_names_the_flag(tmp_path, capsys):
    plan = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_lap_chole.toml"
    with pytest.raises(SystemExit):
        main(["case", str(plan), "--calibration", str(tmp_path / "none.toml")])
    assert "--calibration" in capsys.readouterr().err
    with pytest.raises(InputError):
        load_calibration(tmp_path / "none.toml")


def test_app_audit_page_checks_and_calibrates_an_uploaded_log():
    from app_helpers import assert_clean, page

    at = page("fresh_gas_audit")
    text = synthetic_log(FACTOR)
    at.file_uploader(key="audit.log.upload").set_value(("dept.csv", text.encode(), "text/csv"))
    at.selectbox(key="audit.prices.demo").set_value("no prices")
    at.run()
    at.toggle(key="audit.calibrate").set_value(True).run(timeout=300)
    assert_clean(at)
    table = next(df.value for df in at.dataframe if "uptake factor (95 % interval)" in df.value.columns)
    row = table.iloc[0]
    assert row["agent"] == "sevoflurane" and row["cases in the fit"] == 24
    low, high = (float(x) for x in row["uptake factor (95 % interval)"].split("(")[1].rstrip(")").split("-"))
    assert low <= FACTOR <= high
    assert "Calibration (TOML)" in {b.label for b in at.get("download_button")}
    # Offered to the planning pages: the same file, shared through the app's state.
    at.button(key="audit.cal.use").click().run(timeout=300)
    assert_clean(at)
    from estimator.inputs.calibration_file import calibration_from_text

    used = calibration_from_text(at.session_state["calibration.file"]["text"]).agents["sevoflurane"]
    assert used.low <= FACTOR <= used.high and used.cases == 24


def test_scatter_chart_is_a_valid_vega_lite_spec():
    import pandas as pd

    from estimator_app.calibration_view import scatter

    frame = pd.DataFrame(
        {
            "case_id": ["a", "b"],
            "agent": ["sevoflurane", "isoflurane"],
            "recorded_ml": [10.0, 20.0],
            "predicted_ml": [12.0, 18.0],
            "ratio": [0.83, 1.11],
            "in_calibration": [True, False],
        }
    )
    spec = scatter(frame).to_dict()  # altair validates against the Vega-Lite schema
    assert spec["layer"][0]["encoding"]["x"]["title"] == "predicted liquid agent [mL]"


def test_safe_flow_json_says_the_floor_used_factor_one(tmp_path, capsys):
    from calibration_helpers import calibration_text

    cal = tmp_path / "low.toml"
    cal.write_text(calibration_text(0.7), encoding="utf-8")
    plan = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_lap_chole.toml"
    doc = json.loads(cli(["safe-flow", str(plan), "--json", "--no-grid", "--calibration", str(cal)], capsys))
    plain = json.loads(cli(["safe-flow", str(plan), "--json", "--no-grid"], capsys))
    assert doc["calibration"]["factor"] == 0.7 and doc["calibration"]["applied"] == 1.0
    assert "FLOOR_FACTOR_RAISED" in {w["code"] for w in doc["warnings"]}
    assert [p["floor"] for p in doc["phases"]] == [p["floor"] for p in plain["phases"]]
    case = json.loads(cli(["case", str(plan), "--json", "--calibration", str(cal)], capsys))
    assert case["calibration"]["applied"] == 0.7  # the case itself runs at the department's factor
