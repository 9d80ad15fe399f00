"""Scenario files: validation errors name field, value and range; the lowflow case verb."""

from __future__ import annotations

import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from estimator.cli import main
from estimator.errors import InputError
from estimator.inputs.scenario import scenario_from_dict, scenario_from_text

GOOD = """
title = "Harbourside test case (invented)"
[patient]
weight = "70 kg"
age = "55 years"
[agent]
name = "sevoflurane"
[circuit]
volume = "5 L"
[[phases]]
duration = "8 min"
oxygen = "2 L/min"
air = "4 L/min"
end_tidal_target = "1 MAC"
[[phases]]
duration = "52 min"
oxygen_fraction = "50 %"
total_flow = "0.6 L/min"
balance = "air"
end_tidal_target = "1 MAC"
"""


def cli(args):
    """Run the CLI in-process; returns the exit status."""
    try:
        main(args)
    except SystemExit as ex:
        return ex.code or 0
    return 0


def error_of(data) -> InputError:
    with pytest.raises(InputError) as err:
        scenario_from_dict(data)
    return err.value


def base(**phase):
    ph = {"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}
    ph.update(phase)
    return {"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"}, "phases": [ph]}


def test_good_file_loads_and_fraction_phase_splits_flows():
    sc = scenario_from_text(GOOD)
    o2, air, n2o = sc.phases[1].flows()
    # 50 % O2 in O2/air at 0.6 L/min: air = 0.6 (1 - 0.5) / (1 - 0.20946) (dry air O2 fraction,
    # CRC Handbook) and the O2 fraction of the mix is back to 0.5.
    assert air.to("L/min").magnitude == pytest.approx(0.6 * 0.5 / (1 - 0.20946))
    assert (o2 + 0.20946 * air).to("L/min").magnitude / 0.6 == pytest.approx(0.5)
    assert n2o.magnitude == 0


@pytest.mark.parametrize(
    "mutate,field,fragment",
    [
        (lambda d: d["patient"].update(weight="700 kg"), "patient.weight", "0.5 to 300"),
        (lambda d: d["patient"].update(wieght="70 kg"), "patient.wieght", "check the spelling"),
        (lambda d: d["agent"].update(name="xenon"), "agent.name", "sevoflurane"),
        (lambda d: d["phases"][0].update(oxygen="6 L"), "phases[0].oxygen", "flow"),
        (lambda d: d["phases"][0].update(oxygen="-1 L/min"), "phases[0].oxygen", "0 to 15"),
        (lambda d: d["phases"][0].update(end_tidal_target="1 MAC"), "phases[0].vaporizer", "exactly one"),
        (lambda d: d["phases"][0].update(duration="30 h"), "phases[0].duration", "0 to 24 h"),
        (lambda d: d.update(phases=[]), "phases", "at least one"),
        (lambda d: d["phases"][0].update(vaporizer="30 %"), "phases[0].vaporizer", "0 to 25 %"),
    ],
)
def test_errors_name_field_value_and_range(mutate, field, fragment):
    d = base()
    mutate(d)
    err = error_of(d)
    assert err.field == field, str(err)
    assert fragment in str(err)


def test_site_pressure_must_fit_elevation():
    # ISO 2533 gives 70.1 kPa at 3000 m; 101 kPa there is an inconsistent pair.
    from estimator.simulation.engine import simulate

    with pytest.raises(InputError) as err:
        simulate(scenario_from_dict({**base(), "site": {"elevation": "3000 m", "ambient_pressure": "101 kPa"}}))
    assert err.value.field == "site.ambient_pressure"


def test_vaporizer_above_agent_maximum_is_an_error():
    # Sevoflurane vaporizers stop at 8 % (common practice, no source).
    from estimator.simulation.engine import simulate

    with pytest.raises(InputError, match="vaporizer maximum"):
        simulate(scenario_from_dict(base(vaporizer="9 %")))


@settings(max_examples=60, deadline=None)
@given(
    st.dictionaries(
        st.sampled_from(["weight", "age", "frc", "oxygen_consumption", "bogus"]),
        st.one_of(st.text(max_size=12), st.floats(allow_nan=True), st.integers(), st.booleans()),
        min_size=1,
    )
)
def test_fuzzed_patient_tables_give_input_errors_only(patient):
    # Hardening: any garbage gives an InputError (or loads), never another exception.
    d = base()
    d["patient"] = patient
    try:
        scenario_from_dict(d)
    except InputError as err:
        assert str(err).startswith("patient")


def test_cli_case_json_contract(tmp_path, capsys):
    f = tmp_path / "case.toml"
    f.write_text(GOOD)
    csv = tmp_path / "series.csv"
    assert cli(["case", str(f), "--json", "--csv", str(csv)]) == 0
    out = json.loads(capsys.readouterr().out)
    for key in (
        "duration",
        "agent_liquid",
        "agent_vapour",
        "agent_uptake",
        "agent_vented",
        "oxygen",
        "air",
        "nitrous_oxide",
        "co2_absorbed",
        "co2e",
        "mac_hours",
    ):
        assert set(out["totals"][key]) == {"magnitude", "units"}, key
    assert set(out["minimum_inspired_oxygen"]) == {"magnitude", "units"}
    series = out["series"]
    n = len(series["time"])
    for key in (
        "inspired_oxygen",
        "end_tidal_agent",
        "inspired_agent",
        "end_tidal_mac",
        "vaporizer_setting",
        "fresh_gas_flow",
    ):
        assert len(series[key]) == n and key in series["units"]
    assert "15 degC" in out["gas_volume_reference"]
    assert isinstance(out["warnings"], list)
    from estimator.planning.exports import read_csv_export

    assert read_csv_export(csv).columns[0] == "time [min]"  # after the "# " caution and provenance lines


def test_cli_case_summary_and_errors(tmp_path, capsys):
    f = tmp_path / "case.toml"
    f.write_text(GOOD)
    assert cli(["case", str(f)]) == 0
    out = capsys.readouterr().out
    assert "liquid agent" in out and "not a monitor" in out
    bad = tmp_path / "bad.toml"
    bad.write_text(GOOD.replace('"70 kg"', '"70 L"'))
    with pytest.raises(SystemExit) as ex:
        main(["case", str(bad)])
    assert ex.value.code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "patient.weight" in err[0] and "'70 L'" in err[0]
    with pytest.raises(SystemExit) as ex:
        main(["case", str(tmp_path / "missing.toml")])
    assert ex.value.code == 2
