"""The engine at a high site: PiO2, vaporizers at reduced pressure, flowmeter readings, flow floor."""

from __future__ import annotations

import pytest
from engine_helpers import at_times, run, scenario
from validation import record

from estimator.planning.safety import flow_floor

HIGH = {"elevation": "3000 m"}
#: ISO 2533 standard atmosphere at 3000 m geometric elevation [kPa] (estimator.physics.site, tested there).
P_3000 = 70.12


def test_pio2_series_and_altitude_warning():
    # PiO2 = FiO2 (PB - PH2O), PH2O 6.3 kPa at 37 degC (West, Respiratory Physiology). At 3000 m an
    # FiO2 of 0.35 gives a PiO2 below the sea-level PiO2 of 0.30 (0.30 x 95.0 = 28.5 kPa), which the
    # engine must say.
    r = run(
        "sevoflurane",
        [{"duration": "30 min", "oxygen": "0.4 L/min", "air": "0.6 L/min", "vaporizer": "2 %"}],
        site=HIGH,
        circuit={"initial": "oxygen"},
        patient={"weight": "70 kg", "initial": "preoxygenated"},
    )
    s = r.series
    pio2 = s["inspired_oxygen_partial_pressure [kPa]"]
    want = s["inspired_oxygen [%]"].iloc[-1] / 100 * (P_3000 - 6.3)
    record(
        "PiO2 at 3000 m (engine series vs FiO2 (PB - PH2O))",
        pio2.iloc[-1],
        want,
        "West, Respiratory Physiology; ISO 2533",
        "rel 1e-3",
        pio2.iloc[-1] == pytest.approx(want, rel=1e-3),
        "kPa",
    )
    assert pio2.iloc[-1] == pytest.approx(s["inspired_oxygen [%]"].iloc[-1] / 100 * (P_3000 - 6.3), rel=1e-3)
    assert "PIO2_BELOW_SEA_LEVEL_THRESHOLD" in [c for c, _ in r.warnings]
    assert "70.1 kPa" in r.to_json()["flow_reference"]


def test_variable_bypass_keeps_mac_multiple_at_altitude():
    # A variable-bypass vaporizer delivers a partial pressure and MAC is a partial pressure, so the
    # same dial gives about the same MAC multiple at 3000 m as at sea level (common practice, no
    # source). Within 3 %: water vapour (6.3 kPa) is a larger share of the alveolar pressure up high.
    ph = [{"duration": "30 min", "oxygen": "4 L/min", "vaporizer": "2 %"}]
    sea = at_times(run("sevoflurane", ph), "end_tidal_mac [MAC]", (30,))[0]
    high = at_times(run("sevoflurane", ph, site=HIGH), "end_tidal_mac [MAC]", (30,))[0]
    record(
        "variable-bypass dial 2 %: MAC multiple at 3000 m vs sea level",
        high,
        sea,
        "partial-pressure vaporizer (common practice, no source)",
        "rel 3 %",
        high == pytest.approx(sea, rel=0.03),
        "MAC",
    )
    assert high == pytest.approx(sea, rel=0.03)


def test_desflurane_type_vaporizer_needs_its_dial_raised_at_altitude():
    # A heated pressurised vaporizer delivers a volume fraction: at 3000 m the same dial gives a lower
    # partial pressure, hence a lower MAC multiple, by about p/p0 = 0.69 (common practice, no source).
    ph = [{"duration": "30 min", "oxygen": "4 L/min", "vaporizer": "6 %"}]
    sea = at_times(run("desflurane", ph), "end_tidal_mac [MAC]", (30,))[0]
    high = at_times(run("desflurane", ph, site=HIGH), "end_tidal_mac [MAC]", (30,))[0]
    record(
        "heated pressurised vaporizer: MAC ratio 3000 m / sea level",
        high / sea,
        P_3000 / 101.325,
        "volume-% vaporizer, p/p0 (common practice, no source)",
        "rel 3 %",
        high / sea == pytest.approx(P_3000 / 101.325, rel=0.03),
    )
    assert high / sea == pytest.approx(P_3000 / 101.325, rel=0.03)


def test_flowmeter_readings_become_true_flows():
    # An O2 tube at 3000 m reads low in its turbulent range: true flow about sqrt(p0/p) = 1.20 times the
    # reading at 6 L/min (density correction; Hagen-Poiseuille/orifice limits, estimator.physics.flowmeter).
    ph = [{"duration": "60 min", "oxygen": "6 L/min", "vaporizer": "0 %"}]
    as_true = run("sevoflurane", ph, site=HIGH)
    as_read = run("sevoflurane", ph, site={**HIGH, "flowmeter_readings": True})
    ratio = as_read.totals["oxygen"].magnitude / as_true.totals["oxygen"].magnitude
    assert 1.05 < ratio < (101.325 / P_3000) ** 0.5 + 0.01
    assert "FLOWMETER_ACCURACY" in [c for c, _ in as_read.warnings]
    band = as_read.totals["oxygen_band"]
    assert band["low"] < as_read.totals["oxygen"] < band["high"]


def test_high_site_needs_more_oxygen_for_the_same_pio2():
    # Issue check: at 3000 m the same inspired O2 partial pressure needs more O2 flow than at sea level.
    # With the threshold read as a sea-level PiO2 (0.30 x 95.0 kPa), the site needs FiO2 0.45.
    ph = [
        {"duration": "8 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "60 min", "oxygen": "0.5 L/min", "air": "0.5 L/min", "end_tidal_target": "1 MAC"},
    ]
    ff = {"threshold_basis": "partial_pressure", "scale": [{"up_to": "15 L/min", "step": "0.05 L/min"}]}
    sea = flow_floor(scenario("sevoflurane", ph, flow_floor=ff), grid=False)
    high = flow_floor(scenario("sevoflurane", ph, flow_floor=ff, site=HIGH), grid=False)
    o2 = lambda r: r.phases[1]["flows"]["oxygen"].to("L/min").magnitude  # noqa: E731
    assert high.phases[1]["floor"] is not None and o2(high) > o2(sea)
    want = 0.30 * (101.325 - 6.3) / (P_3000 - 6.3)
    record(
        "flow-floor FiO2 threshold at 3000 m for the sea-level PiO2 of 0.30",
        high.settings.threshold,
        want,
        "PiO2 = FiO2 (PB - 6.3 kPa), West; ISO 2533",
        "rel 0.2 %",
        high.settings.threshold == pytest.approx(want, rel=2e-3),
    )
    assert high.settings.threshold == pytest.approx(0.30 * (101.325 - 6.3) / (P_3000 - 6.3), rel=2e-3)
