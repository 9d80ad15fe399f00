"""The demo cases run as tests: each through its verb, its headline numbers pinned, and beside each a
plausibility check against the world (a published law or table, CoolProp, scipy, a fact of the trade).

Pinned numbers are what the tool computes today. Their tolerance, 2 % unless said otherwise, is far
wider than the solver's (relative 1e-9) and far narrower than any published spread: a change of a
model that moves a demo by more than that must be looked at, and the demo numbers (and
demo_cases/README.md) updated on purpose.
"""

from __future__ import annotations

import io
import json
import math
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from validation import record

from estimator.cli import CAUTION, main

PIN = 0.02  # see the module docstring
#: Free gas at 15 degC per litre at the 20 degC flowmeter conditions (Charles's law).
T_REF_OVER_T_FLOWMETER = 288.15 / 293.15
#: STPD (0 degC) to the package's 15 degC reference (Charles's law).
STPD_TO_REF = 288.15 / 273.15
R = 8.314462618  # J/(mol K), CODATA 2018


def iso2533_kpa(elevation_m: float) -> float:
    """ISO 2533 troposphere, written out here: p = p0 (1 - L H / T0)^(g0 M / (R L)), H geopotential."""
    r_earth = 6356766.0
    h = r_earth * elevation_m / (r_earth + elevation_m)
    return 101.325 * (1 - 0.0065 * h / 288.15) ** 5.25588


class Runner:
    """Runs ``lowflow`` in-process once per argument list and keeps the outcome."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self._done: dict[tuple[str, ...], tuple[int, str, str]] = {}

    def __call__(self, *argv: str) -> tuple[int, str, str]:
        # A bare file name is a demo file; anything else is passed as given.
        args = tuple(str(self.folder / a) if a.endswith((".toml", ".csv")) and "/" not in a else a for a in argv)
        if args not in self._done:
            out, err = io.StringIO(), io.StringIO()
            code = 0
            with redirect_stdout(out), redirect_stderr(err):
                try:
                    main(list(args))
                except SystemExit as exc:
                    code = exc.code
            self._done[args] = (code, out.getvalue(), err.getvalue())
        return self._done[args]

    def json(self, *argv: str) -> dict:
        code, out, err = self(*argv, "--json")
        assert code == 0, err
        return json.loads(out)


@pytest.fixture(scope="module")
def cli(demo_dir) -> Runner:
    return Runner(demo_dir)


def check(quantity: str, computed, published, source: str, tolerance: str, passed: bool, unit: str = "") -> None:
    """Record a reference check for docs/VALIDATION.md, then assert it."""
    record(quantity, computed, published, source, tolerance, passed, unit)
    assert passed, f"{quantity}: computed {computed}, published {published} ({source}; {tolerance})"


def mag(doc: dict, key: str) -> float:
    return float(doc[key]["magnitude"])


def case_series(doc: dict) -> pd.DataFrame:
    s = doc["series"]
    return pd.DataFrame({k: v for k, v in s.items() if k != "units"})


def brody_vo2_ref(kg: float) -> float:
    """Brody O2 consumption at the 15 degC reference [L/min] (Lowe & Ernst 1981: 10 kg^0.75 mL/min STPD)."""
    return 10 * kg**0.75 / 1000 * STPD_TO_REF


# ------------------------------------------------------------------ the README's own commands
@pytest.mark.parametrize(
    "argv",
    [
        ("case", "kestrel_lap_chole.toml"),
        ("safe-flow", "kestrel_lap_chole.toml"),
        ("supply", "highland_clinic_inventory.toml"),
        ("forecast", "kestrel_case_mix.toml", "--weeks", "52", "--seed", "1"),
        ("audit", "kestrel_audit_log.csv"),
        ("case", "paediatric_infant_warning.toml"),
    ],
    ids=lambda a: a[0] + ":" + a[1],
)
def test_readme_commands_run_and_end_with_the_caution(cli, argv):
    code, out, err = cli(*argv)
    assert code == 0 and err == ""
    assert out.rstrip().endswith(CAUTION)


def test_audit_report_command_writes_html(cli, demo_dir, tmp_path):
    # README: uv run lowflow audit demo_cases/kestrel_audit_log.csv --report audit.html
    target = tmp_path / "audit.html"
    code, out, err = cli("audit", "kestrel_audit_log.csv", "--report", str(target))
    assert code == 0 and err == "" and target.stat().st_size > 1000


def end_tidal_to_fresh_gas(doc: dict, start: float, end: float) -> float:
    """Time-averaged end-tidal over delivered (fresh-gas) agent between two case times [min]."""
    s = case_series(doc)
    m = s[(s["time"] >= start) & (s["time"] <= end)]
    return float(np.trapezoid(m["end_tidal_agent"], m["time"]) / np.trapezoid(m["delivered_agent"], m["time"]))


# ------------------------------------------------------------------ headline numbers of the cases
#: file -> pinned totals, cost total (None: no prices), lowest inspired O2 (from the first minute on, as the
#: warnings judge it), warning codes.
HEADLINES = {
    "kestrel_lap_chole.toml": (
        {"agent_liquid": 13.47, "oxygen": 91.41, "air": 37.35, "co2e": 3.947, "mac_hours": 1.319},
        6.683,
        0.3375,
        [],
    ),
    "kestrel_desflurane_bariatric.toml": (
        {"agent_liquid": 43.12, "oxygen": 119.9, "co2e": 163.6},
        29.86,
        0.364,
        [],
    ),
    "kestrel_nitrous_dental.toml": (
        {"nitrous_oxide": 68.81, "oxygen": 74.70, "agent_liquid": 5.691, "co2e": 39.56},
        3.295,
        0.274,
        ["INSPIRED_OXYGEN_LOW"],
    ),
    "highland_mobile_team.toml": ({"agent_liquid": 13.22, "oxygen": 103.6}, None, 0.652, ["FLOWMETER_ACCURACY"]),
    "paediatric_4y_16kg.toml": ({"agent_liquid": 15.02, "oxygen": 60.45, "mac_hours": 0.945}, None, 0.556, []),
    "paediatric_infant_warning.toml": (
        {"agent_liquid": 9.147},
        None,
        0.586,
        ["PATIENT_WEIGHT_OUTSIDE_VALIDATED", "AGE_BELOW_MAPLESON_RANGE"],
    ),
}


@pytest.mark.parametrize("name", sorted(HEADLINES))
def test_case_headline(cli, name):
    totals, cost, lowest_o2, codes = HEADLINES[name]
    doc = cli.json("case", name)
    for key, value in totals.items():
        assert mag(doc["totals"], key) == pytest.approx(value, rel=PIN), key
    assert (doc["cost"] or {}).get("total") == (None if cost is None else pytest.approx(cost, rel=PIN))
    assert mag(doc, "minimum_inspired_oxygen") == pytest.approx(lowest_o2, rel=PIN)
    assert [w["code"] for w in doc["warnings"]] == codes


# ------------------------------------------------------------------ Kestrel Island: laparoscopic case
@pytest.fixture(scope="module")
def lap(cli):
    return cli.json("case", "kestrel_lap_chole.toml")


@pytest.mark.parametrize(
    "name,biro",
    [
        ("kestrel_lap_chole.toml", 184.0),
        ("kestrel_desflurane_bariatric.toml", 210.0),
        ("kestrel_nitrous_dental.toml", 195.0),
    ],
)
@pytest.mark.validation
def test_vapour_per_ml_biro(cli, name, biro):
    # Biro 2014: 1 mL of liquid gives 184 (sevoflurane), 195 (isoflurane), 210 mL (desflurane) of
    # vapour at 20 degC, times 288.15/293.15 at the 15 degC reference. Real vapours give up to 3 %
    # more than ideal (Anesth Analg 1979;58:322): rel 3 %.
    t = cli.json("case", name)["totals"]
    per_ml = mag(t, "agent_vapour") * 1000 / mag(t, "agent_liquid")
    want = biro * T_REF_OVER_T_FLOWMETER
    check(
        f"demo {name.removesuffix('.toml')}: vapour per mL of agent delivered",
        per_ml,
        want,
        f"Biro 2014 ({biro:g} mL/mL at 20 degC)",
        "rel 3 %",
        per_ml == pytest.approx(want, rel=0.03),
        "mL/mL",
    )


def test_lap_chole_oxygen_at_least_consumption(lap):
    # Lowe & Ernst 1981 (Brody): VO2 = 10 kg^0.75 mL/min STPD; the O2 supplied must cover it, and
    # the model's O2 consumed is that law over the case (rel 1 %: the law is applied per time step).
    t = lap["totals"]
    need = brody_vo2_ref(78) * mag(t, "duration")
    ok = mag(t, "oxygen_consumed") == pytest.approx(need, rel=0.01) and mag(t, "oxygen") >= need
    check(
        "demo lap chole: O2 consumed over 86 min, 78 kg",
        mag(t, "oxygen_consumed"),
        need,
        "Lowe & Ernst 1981 (Brody VO2)",
        "rel 1 %; O2 supplied >= it",
        ok,
        "L",
    )


@pytest.mark.validation
@pytest.mark.xfail(
    strict=True,
    reason="known gap (issue 15 open): the model takes up about 1.5 x Lowe's sevoflurane uptake "
    "between 10 min and the end of the hold",
)
def test_lap_chole_uptake_follows_lowe(lap):
    # Lowe & Ernst 1981: cumulative uptake between 10 min and the end of the hold (78 min) is
    # 2 C lambda Q (sqrt 78 - sqrt 10) for an alveolar concentration C held (their f x MAC), with Q =
    # 2 kg^0.75 dL/min. C is the end-tidal the case holds (a condition of the case); the sevoflurane
    # blood/gas 0.65 is the published term (Miller's Anesthesia, Inhaled anesthetics, Table 1 [S]),
    # not the model's data file. Band +-2 CV of measured closed-circuit requirement between patients
    # (isoflurane 5.85 +- 1.32 mL in the first hour, n = 20; tests/data/published/studies.toml).
    s = case_series(lap)
    sel = (s["time"] >= 10) & (s["time"] <= 78)
    model = float(np.trapezoid(s.loc[sel, "agent_uptake"], s.loc[sel, "time"]))
    held = float(s.loc[sel, "end_tidal_target"].mean())
    lowe = 2 * held * 0.65 * 2 * 78**0.75 * (math.sqrt(78) - math.sqrt(10))
    band = 2 * 1.32 / 5.85
    ok = model == pytest.approx(lowe, rel=band)
    check(
        "demo lap chole: sevoflurane uptake 10-78 min",
        model,
        lowe,
        "Lowe & Ernst 1981 (square-root law); blood/gas Miller's Anesthesia Table 1 [S]",
        f"rel {band:.0%} (2 CV of closed-circuit requirement)",
        ok,
        "mL vapour",
    )


def test_lap_chole_carbon_dioxide_and_absorbent(lap):
    # Brody (Lowe & Ernst 1981): VCO2 = 8 kg^0.75 mL/min STPD. The absorbent cannot take more than
    # the patient makes, and at minimal flow most of it (Zhong et al., Br J Anaesth 2020): more than
    # half over a case with 16 of 86 min at 6 L/min. Absorbent: practical capacity 10-15 L CO2 per
    # 100 g (anaesthesia equipment texts, no single source), so the grams used lie between CO2/15 and CO2/10 x 100.
    t = lap["totals"]
    made = 8 * 78**0.75 / 1000 * STPD_TO_REF * mag(t, "duration")
    co2 = mag(t, "co2_absorbed")
    ok = 0.5 * made <= co2 <= made * 1.001
    check(
        "demo lap chole: CO2 to the absorbent vs CO2 produced",
        co2,
        made,
        "Lowe & Ernst 1981 (Brody VCO2); Zhong et al. 2020",
        "between 50 % and 100 %",
        ok,
        "L",
    )
    grams = mag(t, "absorbent")
    assert co2 / 15 * 100 <= grams <= co2 / 10 * 100


def test_lap_chole_co2e_from_gwp(lap):
    # IPCC AR6 GWP100 of sevoflurane 195; liquid density 1.52 g/mL (Biro 2014). Emission = delivered
    # less the metabolised share of uptake (about 3 %, from memory), so 95-100 % of delivered x GWP.
    t = lap["totals"]
    upper = mag(t, "agent_liquid") * 1.52 * 195 / 1000
    ok = 0.95 * upper <= mag(t, "co2e") <= upper * 1.001
    check(
        "demo lap chole: CO2e vs delivered sevoflurane x GWP100",
        mag(t, "co2e"),
        upper,
        "IPCC AR6 WG1 Table 7.SM.7; Biro 2014 (density)",
        "95-100 %",
        ok,
        "kg",
    )


@pytest.fixture(scope="module")
def lap_floor(cli):
    return cli.json("safe-flow", "kestrel_lap_chole.toml")


def test_lap_chole_flow_floor(lap_floor):
    floors = [p["floor"]["magnitude"] for p in lap_floor["phases"]]
    assert floors == pytest.approx([2.0, 0.5, 2.5], abs=1e-9)  # settable scale steps: exact
    # Emergence (dial off) is set by washing out to 0.3 MAC within 10 min, not by O2 or gas balance.
    assert [p["binding"] for p in lap_floor["phases"]] == ["INSPIRED_O2", "INSPIRED_O2", "WASH_OUT"]
    # Baum & Aitkenhead 1995: minimal flow is 0.5 L/min; and no floor can be below the patient's O2
    # consumption (Brody, 0.28 L/min at the reference for 78 kg): gas balance.
    vo2 = brody_vo2_ref(78)
    ok = floors[1] <= 0.5 and min(floors) >= vo2
    check(
        "demo lap chole: flow floor in maintenance (minimal flow)",
        floors[1],
        0.5,
        "Baum & Aitkenhead 1995 (minimal flow); Brody VO2 as lower limit",
        "<= 0.5 and >= VO2",
        ok,
        "L/min",
    )


# ------------------------------------------------------------------ desflurane and nitrous oxide cases
@pytest.fixture(scope="module")
def des(cli):
    return cli.json("case", "kestrel_desflurane_bariatric.toml")


def test_desflurane_carbon_and_mac_hours(des):
    t = des["totals"]
    # IPCC AR6 GWP100 2590; density 1.465 g/mL (Eger EI, Anesth Analg 1992;75(4 Suppl):S3, from memory): 95-100 % as above.
    upper = mag(t, "agent_liquid") * 1.465 * 2590 / 1000
    assert 0.95 * upper <= mag(t, "co2e") <= upper * 1.01
    # An end-tidal hold of 1 MAC gives about 1 MAC-hour an hour of hold (6 + 100 min; the first
    # minutes are below target): within 5 % (fact of the trade, no source).
    assert mag(t, "mac_hours") == pytest.approx(106 / 60, rel=0.05)


@pytest.mark.validation
def test_desflurane_end_tidal_to_fresh_gas_ratio(des):
    # Coetzee JF, Stewart LJ, Br J Anaesth 2002;88:46 (abstract): desflurane end-tidal to fresh-gas
    # partial pressure ratio 0.8 at 3, 1 and 0.5 L/min, whatever the flow. No spread in the
    # abstract; the band 0.7-0.9 is the target set for this ratio in issue 15 (a band up to 1.0, the
    # physical ceiling, could not fail high).
    ratio = end_tidal_to_fresh_gas(des, 10, 106)
    ok = 0.7 <= ratio <= 0.9
    check(
        "demo desflurane: end-tidal / fresh-gas agent at 0.8 L/min",
        ratio,
        0.8,
        "Coetzee & Stewart, Br J Anaesth 2002;88:46",
        "0.7 to 0.9",
        ok,
    )


@pytest.fixture(scope="module")
def n2o(cli):
    return cli.json("case", "kestrel_nitrous_dental.toml")


def test_nitrous_oxide_litres_and_carbon(n2o):
    t = n2o["totals"]
    # The N2O set on the flowmeters (4 L/min for 10 min, 60 % of 1 L/min for 50 min) is free gas at
    # the flowmeters' 20 degC; at the 15 degC reference it is 288.15/293.15 of it (Charles's law).
    set_l = (4 * 10 + 0.6 * 50) * T_REF_OVER_T_FLOWMETER
    ok = mag(t, "nitrous_oxide") == pytest.approx(set_l, rel=1e-6)
    check(
        "demo N2O case: nitrous oxide litres at 15 degC",
        mag(t, "nitrous_oxide"),
        set_l,
        "Charles's law on the set flows",
        "rel 1e-6",
        ok,
        "L",
    )
    # CO2e = N2O mass x 273 + isoflurane delivered x 1.496 g/mL x 539 (IPCC AR6 GWP100; ideal-gas
    # molar volume at 15 degC from CODATA R; metabolised share of isoflurane about 0.2 %): rel 1 %.
    vm = R * 288.15 / 101325 * 1000
    want = (mag(t, "nitrous_oxide") / vm * 44.013 * 273 + mag(t, "agent_liquid") * 1.496 * 539) / 1000
    ok = mag(t, "co2e") == pytest.approx(want, rel=0.01)
    check(
        "demo N2O case: CO2e of nitrous oxide and isoflurane",
        mag(t, "co2e"),
        want,
        "IPCC AR6 WG1 Table 7.SM.7; CODATA R",
        "rel 1 %",
        ok,
        "kg",
    )


@pytest.mark.validation
def test_nitrous_oxide_uptake_severinghaus(n2o):
    # Severinghaus 1954: N2O uptake about 1000 t^-1/2 mL/min for 70 kg at 65-75 % inspired; the
    # dental case (68 kg) holds 65-69 % inspired from 5 to 40 min. Band 20 % as in test_engine_world.
    s = case_series(n2o).drop_duplicates("time", keep="last").set_index("time")
    for t_min in (10, 20, 40):
        rate = float(s.loc[t_min, "nitrous_oxide_uptake"])
        ok = rate == pytest.approx(1000 / math.sqrt(t_min), rel=0.20)
        check(
            f"demo N2O case: N2O uptake at {t_min} min",
            rate,
            1000 / math.sqrt(t_min),
            "Severinghaus, J Clin Invest 1954;33:1183",
            "rel 20 %",
            ok,
            "mL/min",
        )


# ------------------------------------------------------------------ Cairn Pass clinic, 2,800 m
@pytest.fixture(scope="module")
def high(cli):
    return cli.json("case", "highland_mobile_team.toml")


def test_high_site_flowmeter_readings_between_the_limits(high):
    # Readings of sea-level O2 flowmeters (4, 1, 4 L/min over 10, 60, 8 min = 132 L read). At the
    # site pressure p the true ambient flow lies between the reading (laminar range: viscosity does
    # not depend on pressure) and reading x sqrt(p0/p) (turbulent range: density); as free gas at
    # 15 degC and p0 that is reading x p/p0 to reading x sqrt(p/p0), times 288.15/291.15 for the
    # 18 degC site (Hagen-Poiseuille and orifice limits; common practice, no source).
    p = iso2533_kpa(2800) / 101.325
    read = 132 * 288.15 / 291.15
    lo, hi = read * p, read * math.sqrt(p)
    o2 = mag(high["totals"], "oxygen")
    ok = lo <= o2 <= hi
    check(
        "demo 2,800 m: O2 litres from flowmeter readings (between the limits)",
        o2,
        f"{lo:.1f} to {hi:.1f}",
        "Hagen-Poiseuille / orifice limits; ISO 2533 pressure",
        "inside the interval",
        ok,
        "L",
    )


def test_high_site_argon_accumulates(high):
    # Concentrator product of 93 % O2 carries argon in its air ratio to O2 (0.934/20.946 %, CRC), so
    # 4.15 % of the fresh gas; at 1 L/min it builds up in the circle above that (argon 0.934 % of dry air, CRC Handbook).
    s = case_series(high)
    m = s[(s["time"] >= 40) & (s["time"] <= 70)]
    fresh = 93 * 0.00934 / 0.20946
    ok = float(m["inspired_argon"].min()) > fresh
    check(
        "demo 2,800 m: inspired argon at 1 L/min of concentrator O2",
        float(m["inspired_argon"].min()),
        f"> {fresh:.2f}",
        "CRC Handbook dry-air argon ratio (from memory)",
        "above fresh gas",
        ok,
        "%",
    )


@pytest.mark.validation
def test_high_site_isoflurane_end_tidal_to_fresh_gas(high):
    # Coetzee & Stewart 2002: 0.3-0.7 end-tidal to fresh gas for the soluble agents (isoflurane).
    ratio = end_tidal_to_fresh_gas(high, 20, 70)
    ok = 0.3 <= ratio <= 0.7
    check(
        "demo 2,800 m: isoflurane end-tidal / fresh gas at 1 L/min",
        ratio,
        "0.3 to 0.7",
        "Coetzee & Stewart, Br J Anaesth 2002;88:46",
        "inside the range",
        ok,
    )


def test_high_site_flow_floor_threshold(cli):
    # threshold_basis = "partial_pressure": FiO2 that gives the sea-level PiO2 of 0.30, with PiO2 =
    # FiO2 (PB - 6.3 kPa) (West) and PB from ISO 2533 at 2,800 m: rel 1e-3.
    doc = cli.json("safe-flow", "highland_mobile_team.toml")
    want = 0.30 * (101.325 - 6.3) / (iso2533_kpa(2800) - 6.3)
    got = mag(doc, "threshold_inspired_oxygen")
    ok = got == pytest.approx(want, rel=1e-3)
    check(
        "demo 2,800 m: flow-floor FiO2 threshold for the sea-level PiO2 of 0.30",
        got,
        want,
        "West (PiO2); ISO 2533",
        "rel 1e-3",
        ok,
    )
    assert [p["floor"]["magnitude"] for p in doc["phases"]] == pytest.approx([2.0, 0.4, 2.5], abs=1e-9)
    codes = {w["code"] for w in doc["warnings"]}
    assert "ARGON_ACCUMULATION" in codes
    # The plan holds inspired O2 near 65 % from the first minute on (the room-air circuit of minute 0 is
    # not judged, as the case's own warnings do not judge it): no low-O2 advisory.
    assert "INSPIRED_OXYGEN_LOW" not in codes and mag(doc, "threshold_inspired_oxygen") < 0.65


# ------------------------------------------------------------------ paediatric list
def test_paediatric_4_year_old(cli):
    doc = cli.json("case", "paediatric_4y_16kg.toml")
    t = doc["totals"]
    # Mapleson 1996: 1 MAC of sevoflurane at 4 years = 1.80 x 10^(-0.00269 (4 - 40)) = 2.25 %; the
    # hold keeps end-tidal within its 2 % band at the end of maintenance (48 min).
    s = case_series(doc).drop_duplicates("time", keep="first").set_index("time")
    want = 1.80 * 10 ** (-0.00269 * (4 - 40))
    got = float(s.loc[48, "end_tidal_agent"])
    ok = got == pytest.approx(want, rel=0.02)
    check(
        "demo 4-year-old: end-tidal sevoflurane held at 1 MAC",
        got,
        want,
        "Mapleson 1996 (age 4 years)",
        "rel 2 %",
        ok,
        "%",
    )
    # Brody VO2 for 16 kg over 53 min (Lowe & Ernst 1981), rel 1 %.
    assert mag(t, "oxygen_consumed") == pytest.approx(brody_vo2_ref(16) * 53, rel=0.01)
    # The 3-min induction alone delivers 6 L/min x 0.08/0.92 x 3 min of vapour (vaporizer output),
    # 8.6 mL of liquid at 181 mL/mL (Biro 2014 at 15 degC): the case uses at least that.
    induction = 6 * 0.08 / 0.92 * 3 * 1000 / (184 * T_REF_OVER_T_FLOWMETER)
    assert mag(t, "agent_liquid") >= induction * 0.97


def test_infant_warning_case_names_the_age_limit(cli):
    # Mapleson 1996 fits MAC from 1 year up. At 5 months the formula gives 2.46 % sevoflurane, while
    # measured infant MAC is about 3.2 % (Lerman J et al., Anesthesiology 1994;80:814, from memory):
    # an answer outside the fit must carry a warning.
    doc = cli.json("case", "paediatric_infant_warning.toml")
    assert "AGE_BELOW_MAPLESON_RANGE" in [w["code"] for w in doc["warnings"]]


# ------------------------------------------------------------------ supply duration at the clinic
@pytest.fixture(scope="module")
def supply(cli):
    return cli.json("supply", "highland_clinic_inventory.toml")


def test_supply_headline(supply):
    assert supply["bottleneck"] == "isoflurane bottles 1"
    assert mag(supply, "days_of_supply") == pytest.approx(12.37, rel=PIN)
    assert supply["cases_possible"] == 44
    assert supply["reorder_by"] == "2026-04-06"


def test_supply_cylinders_against_coolprop(supply):
    # 3 x 10 L O2 at 190 bar gauge and 10 degC, changed at 20 bar gauge, at 2,800 m (ISO 2533
    # ambient): free gas at 15 degC, 101.325 kPa from CoolProp densities, computed here. rel 1e-5
    # (ambient pressure from the written-out ISO formula, 1e-6 off the module's).
    from CoolProp.CoolProp import PropsSI

    amb = iso2533_kpa(2800) * 1000
    moles = sum(s * PropsSI("Dmolar", "T", 283.15, "P", p * 1e5 + amb, "Oxygen") for s, p in ((1, 190), (-1, 20)))
    want = 3 * moles * 0.010 * R * 288.15 / 101325 * 1000
    item = next(i for i in supply["items"] if i["name"] == "O2 backup")
    ok = mag(item, "usable") == pytest.approx(want, rel=1e-5)
    check(
        "demo clinic: usable O2 in 3 x 10 L cylinders, 190 to 20 bar at 10 degC, 2,800 m",
        mag(item, "usable"),
        want,
        "CoolProp (Bell et al. 2014)",
        "rel 1e-5",
        ok,
        "L",
    )


def test_supply_bottleneck_follows_the_case(cli, supply):
    # The isoflurane stock (2 x 250 mL + 90 mL open) at 4 cases a day, 6 days a week, of the
    # highland case: cases possible = stock / liquid per case, rounded down.
    per_case = mag(cli.json("case", "highland_mobile_team.toml")["totals"], "agent_liquid")
    assert supply["cases_possible"] == math.floor(590 / per_case)
    conc = next(i for i in supply["items"] if i["kind"] == "concentrator")
    assert mag(conc, "usable") == pytest.approx(10 * 60 * 8, rel=1e-9)  # 10 L/min for 8 h


# ------------------------------------------------------------------ fresh-gas audit of the department
@pytest.fixture(scope="module")
def audit(cli):
    return cli.json(
        "audit", "kestrel_audit_log.csv", "--prices", "kestrel_prices.toml", "--policy", "kestrel_lowflow_policy.toml"
    )


def test_audit_headline(audit):
    assert audit["rows"] == {"read": 8198, "used": 8195, "rejected": 3}
    assert [r["line"] for r in audit["rejections"]] == [42, 402, 802]
    t = audit["totals"]
    assert t["cases"] == 452
    assert mag(t, "agent_liquid") == pytest.approx(9893, rel=PIN)
    assert mag(t, "co2e") == pytest.approx(14450, rel=PIN)
    assert t["cost"]["total"] == pytest.approx(4361, rel=PIN)
    k = audit["kpis"]
    assert mag(k, "mean_maintenance_flow") == pytest.approx(1.145, rel=PIN)
    saved = mag(audit["counterfactual"]["totals"]["savings"], "agent_liquid")
    assert saved == pytest.approx(2232, rel=PIN)
    assert audit["counterfactual"]["totals"]["cases"] == 452  # every case re-run by default


def test_audit_liquid_matches_dion_on_the_log(demo_dir, audit):
    # Recomputed here from the CSV: sample and hold, vapour = carrier x D/(1 - D) (vaporizer output),
    # liquid at Biro's vapour per mL scaled to 15 degC (Dion 1992; Biro 2014). 3 %: Biro's figures
    # against the module's ideal-gas conversion.
    log = pd.read_csv(demo_dir / "kestrel_audit_log.csv")
    log = log[pd.to_numeric(log["oxygen_flow [L/min]"], errors="coerce") >= 0]
    log = log[log["agent"].isin(["sevoflurane", "isoflurane", "desflurane"])]
    log = log[pd.to_datetime(log["time"], errors="coerce", utc=True).notna()].copy()
    log["t"] = pd.to_datetime(log["time"], utc=True)
    log = log.sort_values(["case_id", "t"])
    dt = log.groupby("case_id")["t"].diff(-1).dt.total_seconds().abs().fillna(0) / 60
    carrier = log[["oxygen_flow [L/min]", "air_flow [L/min]", "nitrous_oxide_flow [L/min]"]].astype(float).sum(axis=1)
    d = log["vaporizer_setting [%]"].astype(float) / 100
    vapour = carrier * d / (1 - d) * dt
    per_ml = log["agent"].map({"sevoflurane": 184.0, "isoflurane": 195.0, "desflurane": 210.0}) * T_REF_OVER_T_FLOWMETER
    want = float((vapour * 1000 / per_ml).sum())
    got = mag(audit["totals"], "agent_liquid")
    ok = got == pytest.approx(want, rel=0.03)
    check(
        "demo audit: liquid agent of 452 logged cases",
        got,
        want,
        "Dion 1992 on the log; Biro 2014",
        "rel 3 %",
        ok,
        "mL",
    )


def test_audit_nitrous_oxide_co2e_and_flow_class(audit):
    # N2O CO2e = litres / (R T / p at 15 degC) x 44.013 g/mol x 273 (IPCC AR6 GWP100), no manifold loss.
    t = audit["totals"]
    vm = R * 288.15 / 101325 * 1000
    want = mag(t, "nitrous_oxide") / vm * 44.013 * 273 / 1000
    ok = mag(t, "co2e_nitrous_oxide") == pytest.approx(want, rel=1e-4)
    check(
        "demo audit: CO2e of the logged nitrous oxide",
        mag(t, "co2e_nitrous_oxide"),
        want,
        "IPCC AR6 WG1 Table 7.SM.7; CODATA R",
        "rel 1e-4",
        ok,
        "kg",
    )
    # Brattwall et al. 2012: 1-2 L/min is medium flow; the shares of the classes cover all the time.
    k = audit["kpis"]
    assert 1.0 < mag(k, "mean_maintenance_flow") <= 2.0 and k["mean_maintenance_flow_class"] == "medium"
    assert sum(k["flow_class_shares"].values()) == pytest.approx(1.0, abs=1e-9)
    # Less fresh gas at the same end-tidal delivers less agent (fact of the trade; Baum & Aitkenhead).
    share = audit["counterfactual"]["totals"]["savings_share"]["agent_liquid"]
    assert 0 < share < 1


# ------------------------------------------------------------------ demand forecast of the department
@pytest.fixture(scope="module")
def forecast(cli):
    return cli.json("forecast", "kestrel_case_mix.toml", "--weeks", "52", "--seed", "1")


def test_forecast_headline(forecast):
    items = forecast["items"]
    assert items["cases"]["mean"]["magnitude"] == pytest.approx(25.62, rel=PIN)
    assert items["sevoflurane"]["mean"]["magnitude"] == pytest.approx(261.6, rel=PIN)
    assert items["sevoflurane"]["p95"]["magnitude"] == pytest.approx(356.8, rel=PIN)
    assert items["oxygen"]["mean"]["magnitude"] == pytest.approx(
        1415, rel=PIN
    )  # bariatric list at 1 L/min, 80 % O2 (issue 19)
    orders = {o["item"]: o["count"] for o in forecast["orders"]}
    assert orders["sevoflurane"] == 2 and orders["oxygen"] == 1


def test_forecast_weekly_cases_are_poisson(forecast):
    # Sum of Poisson counts is Poisson with the summed mean, 10 + 3 + 4 + 8 = 25 a week (scipy.stats).
    # The 52-week mean lies within 3 standard errors of it; the P95 within 2 cases of the Poisson P95
    # (the sampling spread of a 95th percentile from 52 weeks).
    from scipy.stats import poisson

    mean = forecast["items"]["cases"]["mean"]["magnitude"]
    ok = abs(mean - 25) <= 3 * math.sqrt(25 / 52)
    check(
        "demo forecast: mean cases a week over 52 weeks",
        mean,
        25.0,
        "Poisson law (scipy.stats)",
        "3 standard errors",
        ok,
    )
    p95 = forecast["items"]["cases"]["p95"]["magnitude"]
    assert abs(p95 - poisson.ppf(0.95, 25)) <= 2
