"""Every warning, advisory and binding code is produced by a test, and every code is registered.

Each entry of ``PRODUCERS`` (keyed ``CODE``, or ``CODE/emitter`` when several modules emit the same
code) builds a small input that produces its code; safety codes also have a
safe counterpart in ``SAFE`` under which the code must go away (one-sided: the warning is given when
the limit is passed and not given when it is kept). The meta-tests check that the producers cover
the registry (:data:`estimator.limits.CODES`) and that every code literal in the package is
registered, so removing any code's emission, or adding an unregistered one, fails a test.
"""

from __future__ import annotations

import ast
from collections.abc import Callable
from pathlib import Path

import pytest
from calibration_helpers import audit_calibration_codes, calibration_codes, floor_codes
from code_inputs import (
    AUDIT_HEADER,
    CASES_ONLY,
    CONTINUOUS,
    EMERGENCE,
    FLOWS,
    FULL,
    HOLD,
    LOW_O2,
    O2_CYL,
    PATIENT,
    PURITY,
    SEVO_ROWS,
    audit,
    carbon_supply,
    case,
    casemix,
    closed,
    dial,
    floor,
    flowmeter,
    forecast,
    maintenance,
    n2o_cylinder,
    o2_cylinder,
    patient,
    pio2,
    policy,
    site,
    supply,
    total,
    warning_codes,
)
from engine_helpers import scenario

from estimator.limits import CODES, INSPIRED_OXYGEN_FLOOR, RENAMED

PACKAGE = Path(__file__).resolve().parent.parent / "estimator"

#: code -> builder returning the set of codes an input produces.
PRODUCERS: dict[str, Callable[[], set[str]]] = {
    # flow floor: binding limits
    "INSPIRED_O2": floor(
        "sevoflurane", {"duration": "40 min", "oxygen": "0.5 L/min", "air": "0.5 L/min", "vaporizer": "1 %"}
    ),
    "GAS_BALANCE": floor(
        "sevoflurane",
        {"duration": "30 min", "oxygen": "1 L/min", "vaporizer": "2 %"},
        flow_floor={"threshold_inspired_oxygen": "0.21"},
    ),
    "TARGET_REACH": floor(
        "sevoflurane",
        {"duration": "30 min", "oxygen": "1 L/min", "air": "1 L/min", **HOLD},
        flow_floor={"reach_within": "2 min"},
    ),
    "TARGET_HOLD": floor(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "6 L/min", "end_tidal_target": "2 MAC"},
        {"duration": "60 min", "oxygen": "1 L/min", "end_tidal_target": "2 MAC"},
        flow_floor={"threshold_inspired_oxygen": "0.21", "reach_within": "60 min"},
    ),
    "WASH_OUT": floor("sevoflurane", *EMERGENCE),
    "BASAL_O2": floor(
        "sevoflurane",
        {"duration": "20 min", "oxygen": "0.5 L/min", "air": "1.5 L/min", "vaporizer": "2 %"},
        flow_floor={"threshold_inspired_oxygen": "0.21", "basal_oxygen_flow": "1 L/min"},
    ),
    "O2_PROPORTION": floor(
        "sevoflurane",
        {"duration": "20 min", "oxygen": "0.5 L/min", "nitrous_oxide": "1.5 L/min", **HOLD},
        flow_floor={"threshold_inspired_oxygen": "0.21", "minimum_oxygen_share": "0.3"},
    ),
    "FLOWMETER_RANGE": floor(
        "sevoflurane",
        {"duration": "20 min", "oxygen": "0.2 L/min", "air": "9.8 L/min", **HOLD},
        flow_floor={"maximum_flow": "2 L/min"},
    ),
    "LABEL_SEVOFLURANE_US": floor(
        "sevoflurane",
        {"duration": "60 min", "oxygen": "1 L/min", "vaporizer": "2 %"},
        flow_floor={"threshold_inspired_oxygen": "0.21", "policies": ["sevoflurane_us_label"]},
    ),
    "FLOWMETER_MINIMUM": floor(
        "sevoflurane",
        {"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", **HOLD},
        flow_floor={"threshold_inspired_oxygen": "0.21", "scale": [{"up_to": "15 L/min", "step": "5 L/min"}]},
    ),
    "NO_FRESH_GAS": floor(
        "sevoflurane",
        {"duration": "20 min", "oxygen": "2 L/min", **HOLD},
        {"duration": "5 min", "oxygen": "0 L/min", "vaporizer": "0 %"},
    ),
    # flow floor: advisories
    "NO_SAFE_FLOOR": floor("sevoflurane", *EMERGENCE),
    "LABEL_RULE_BREACHED": floor(
        "sevoflurane",
        {"duration": "60 min", "oxygen": "0.3 L/min", "air": "0.2 L/min", **HOLD},
        flow_floor={"policies": ["sevoflurane_us_label"]},
    ),
    "COMPOUND_A": floor("sevoflurane", {"duration": "60 min", "oxygen": "1 L/min", **HOLD}),
    "CARBON_MONOXIDE_DRY_ABSORBENT": floor("desflurane", {"duration": "60 min", "oxygen": "1 L/min", **HOLD}),
    "NITROGEN_ACCUMULATION": floor(
        "sevoflurane",
        {"duration": "1 min", "oxygen": "2 L/min", **HOLD},
        {"duration": "60 min", "oxygen": "0.5 L/min", **HOLD},
    ),
    "ARGON_ACCUMULATION": floor(
        "desflurane", {"duration": "90 min", "oxygen": "0.5 L/min", **HOLD}, site={"oxygen_source": "concentrator"}
    ),
    # case engine
    "INSPIRED_OXYGEN_LOW": case(
        "sevoflurane", {"duration": "60 min", "oxygen": "0.3 L/min", "air": "0.7 L/min", "vaporizer": "2 %"}
    ),
    "HYPOXIC_INSPIRED_MIXTURE": case("sevoflurane", {"duration": "60 min", "air": "0.5 L/min", "vaporizer": "2 %"}),
    "VOLUME_DEFICIT": case("sevoflurane", {"duration": "30 min", "oxygen": "0.1 L/min", "vaporizer": "2 %"}),
    "TARGET_NOT_REACHED": case(
        "sevoflurane", {"duration": "10 min", "oxygen": "0.5 L/min", "end_tidal_target": "2 MAC"}
    ),
    "TARGET_NOT_HELD": case(
        "sevoflurane",
        {"duration": "15 min", "oxygen": "6 L/min", "end_tidal_target": "2.5 MAC"},
        {"duration": "60 min", "oxygen": "0.3 L/min", "end_tidal_target": "2.5 MAC"},
    ),
    "DIAL_AT_MAXIMUM": case(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "6 L/min", "end_tidal_target": "2 MAC"},
        {"duration": "60 min", "oxygen": "0.5 L/min", "end_tidal_target": "2 MAC"},
    ),
    "FLOWMETER_ACCURACY": case(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "2 L/min", "vaporizer": "2 %"},
        site={"flowmeter_readings": True},
    ),
    # site, vaporizer, MAC, flowmeter, closed forms, patient
    "SITE_ABOVE_HABITATION": site(elevation="7000 m"),
    "SITE_TEMPERATURE_UNUSUAL": site(temperature="45 degC"),
    "PIO2_BELOW_SEA_LEVEL_THRESHOLD": pio2(0.32, 0.30, 70.0),
    "PIO2_THRESHOLD_UNREACHABLE": pio2(0.32, 0.90, 50.0),
    "DIAL_UNREACHABLE": dial(5.0, 30.0, "desflurane", "heated_pressurised"),
    "DIAL_ABOVE_VAPORIZER_MAX": dial(5.0, 101.325),
    "AGE_BELOW_MAPLESON_RANGE": total("sevoflurane", 1.0, "0.5 years", 0.0),
    "NITROUS_OXIDE_EXCEEDS_TOTAL": total("sevoflurane", 0.5, "40 years", "70 %"),
    "END_TIDAL_ABOVE_VAPORIZER_MAX": total("desflurane", 3.0, "2 years", 0.0),
    "MIXTURE_ABOVE_100_PERCENT": total("desflurane", 3.0, "2 years", "90 %"),
    "OXYGEN_BELOW_AIR": total("sevoflurane", 1.5, "40 years", "78 %"),
    "FLOWMETER_LOW_READING": flowmeter(0.05, "oxygen", "oxygen"),
    "FLOWMETER_OTHER_GAS": flowmeter(1.0, "oxygen", "air"),
    "SQUARE_ROOT_LAW_LONG": closed("lowe_uptake_rate", "sevoflurane", "300 min"),
    "SEVERINGHAUS_WEIGHT_SCALED": closed("severinghaus_uptake_rate", "10 min", weight="100 kg"),
    "SEVERINGHAUS_FRACTION_SCALED": closed("severinghaus_uptake_rate", "10 min", inspired="50 %"),
    "PATIENT_WEIGHT_OUTSIDE_VALIDATED": patient("5 kg"),
    "ABSORBENT_SUPPLY_NOT_COUNTED": carbon_supply(100.0),
    # cylinders and supply
    "NO_RESERVE": o2_cylinder("137 bar", None),
    "BELOW_RESERVE": o2_cylinder("5 bar", "10 bar"),
    "NITROUS_OXIDE_OVERFILLED": n2o_cylinder("18 kg", "5 kg", water_capacity="10 L"),
    "NITROUS_OXIDE_SUPERCRITICAL": n2o_cylinder("8.5 kg", "5 kg", "40 degC"),
    "NITROUS_OXIDE_NO_LIQUID": n2o_cylinder("5.1 kg", "5 kg", water_capacity="10 L"),
    "NITROUS_OXIDE_GAUGE_LOW": n2o_cylinder("8.5 kg", "5 kg", pressure="20 bar"),
    "CONCENTRATOR_PURITY_LOW": supply(PURITY.format(low=85) + CONTINUOUS.format(flow=5)),
    "NOT_TRACKED": supply(CASES_ONLY + '[supply]\nignore = ["oxygen", "air", "absorbent"]\n'),
    "ABSORBENT_NOT_TRACKED": supply(CASES_ONLY + '[supply]\nignore = ["oxygen", "air"]\n'),
    "NO_STOCK": supply(CASES_ONLY + '[supply]\nignore = ["oxygen", "air", "absorbent"]\n'),
    "SUPPLY_UNDER_ONE_DAY": supply(O2_CYL.format(bar=137) + CONTINUOUS.format(flow=2)),
    "STOCK_BACKED_UP": supply(
        O2_CYL.format(bar=137)
        + '[[pipelines]]\ngas = "oxygen"\n[supply]\npriority = ["cylinders", "pipelines", "concentrators"]\n'
        + CONTINUOUS.format(flow=2)
    ),
    "NO_BOTTLENECK": supply('[[pipelines]]\ngas = "oxygen"\n' + CONTINUOUS.format(flow=2)),
    "REORDER_OVERDUE": supply('[plan]\nlead_time = "1 day"\n' + O2_CYL.format(bar=137) + CONTINUOUS.format(flow=2)),
    # forecast
    "DURATION_TRUNCATED": casemix(
        FLOWS + PATIENT + 'duration_median = "60 min"\nduration_p90 = "90 min"\nduration_max = "70 min"'
    ),
    "FEW_WEEKS": forecast(),
    "CASES_CUT_SHORT": forecast(FLOWS + PATIENT + 'duration = "5 min"'),
    "UNPRICED_ITEMS": forecast(tail='[prices]\ncurrency = "demo units"\noxygen_per_m3 = 3.0\n'),
    "ORDER_SIZE_EMPTY": forecast(
        tail='[orders]\noxygen_cylinder = { water_capacity = "10 L", pressure = "10 bar", reserve_pressure = "10 bar" }\n'
    ),
    # audit log, audit and policy
    "UNUSED_COLUMNS": audit("A,0,1,1,0,sevoflurane,2,x\nA,10,1,1,0,sevoflurane,2,x\n", AUDIT_HEADER + ",comment"),
    "TIME_NOT_ORDERED": audit("A,10,1,1,0,sevoflurane,2\nA,0,2,2,0,sevoflurane,2\nA,20,1,1,0,sevoflurane,2\n"),
    "DUPLICATE_TIME": audit("A,0,1,1,0,sevoflurane,2\nA,0,2,2,0,sevoflurane,2\nA,20,1,1,0,sevoflurane,2\n"),
    "LONG_SAMPLE_GAP": audit("A,0,1,1,0,sevoflurane,2\nA,200,1,1,0,sevoflurane,2\n"),
    "NO_ROWS_USED": audit("A,x,1,1,0,sevoflurane,2\n"),
    "SINGLE_SAMPLE_CASE": audit("A,0,1,1,0,sevoflurane,2\n"),
    "MAC_HOURS_UNAVAILABLE": audit("A,0,1,1,0,sevoflurane,2\nA,10,1,1,0,sevoflurane,2\n"),
    "MAC_HOURS_INCOMPLETE": audit(
        "A,0,1,1,0,sevoflurane,2,1.0,50\nA,10,1,1,0,sevoflurane,2,,50\n", AUDIT_HEADER + ",end_tidal_agent,patient_age"
    ),
    "PATIENT_DEFAULTS": policy(
        "E,0,3,3,0,sevoflurane,3,1.0\nE,10,3,3,0,sevoflurane,2.2,1.6\nE,40,3,3,0,sevoflurane,2.2,1.6\n",
        AUDIT_HEADER + ",end_tidal_agent",
        fresh_gas_flow="0.5 L/min",
        block="30 min",
    ),
    "POLICY_CASE_WARNINGS": policy(SEVO_ROWS, FULL, fresh_gas_flow="0.2 L/min", block="30 min"),
    "TIME_NOT_ELAPSED": audit("A,0,1,1,0,sevoflurane,2\nA,10,1,1,0,sevoflurane,2\nA,1700000000,1,1,0,sevoflurane,2\n"),
    "PATIENT_VALUE_VARIES": audit(
        "A,0,1,1,0,sevoflurane,2,70\nA,10,1,1,0,sevoflurane,2,80\n", AUDIT_HEADER + ",patient_weight"
    ),
    "CASES_SKIPPED": policy("A,0,1,1,0,,0\nA,60,1,1,0,,0\n", AUDIT_HEADER, fresh_gas_flow="0.5 L/min", block="30 min"),
    # The same code from its other emitters ("CODE/emitter"): each emission is produced by a test.
    "INSPIRED_OXYGEN_LOW/flow floor": floor("sevoflurane", LOW_O2),
    "INSPIRED_OXYGEN_LOW/forecast": forecast(maintenance('maintenance_flow = "1 L/min"\noxygen_fraction = "45 %"\n')),
    "INSPIRED_OXYGEN_LOW/audit": audit(
        "A,0,1,1,0,sevoflurane,2,25\nA,10,1,1,0,sevoflurane,2,25\n", AUDIT_HEADER + ",inspired_oxygen"
    ),
    "HYPOXIC_INSPIRED_MIXTURE/forecast": forecast(
        maintenance('maintenance_flow = "0.5 L/min"\noxygen_fraction = "25 %"\nbalance = "nitrous_oxide"\n')
    ),
    "VOLUME_DEFICIT/flow floor": floor(
        "sevoflurane", {"duration": "30 min", "oxygen": "0.1 L/min", "vaporizer": "2 %"}
    ),
    "VOLUME_DEFICIT/forecast": forecast(maintenance('maintenance_flow = "0.1 L/min"\noxygen_fraction = "100 %"\n')),
    "TARGET_NOT_REACHED/flow floor": floor(
        "sevoflurane", {"duration": "10 min", "oxygen": "0.5 L/min", "end_tidal_target": "2 MAC"}
    ),
    "TARGET_NOT_HELD/forecast": forecast(
        'wash_in_flow = "1 L/min"\nwash_in_time = "5 min"\nmaintenance_flow = "0.5 L/min"\n'
        'end_tidal_target = "2 MAC"\n' + PATIENT + 'duration = "15 min"'
    ),
    # A higher settable total with more N2O at the same O2 flow lowers inspired O2 (floor's mix passes).
    "SETTING_ABOVE_FLOOR_FAILS": floor(
        "isoflurane",
        {"duration": "10 min", "oxygen": "2 L/min", "nitrous_oxide": "4 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "50 min", "oxygen": "0.4 L/min", "nitrous_oxide": "0.6 L/min", "end_tidal_target": "1 MAC"},
    ),
    "DIAL_AT_MAXIMUM/flow floor": floor(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "6 L/min", "end_tidal_target": "2 MAC"},
        {"duration": "60 min", "oxygen": "0.3 L/min", "end_tidal_target": "2 MAC"},
    ),
    "PATIENT_WEIGHT_OUTSIDE_VALIDATED/case mix": casemix(
        FLOWS + 'weight_mean = "5 kg"\nage_mean = "1 year"\nduration = "60 min"'
    ),
    "AGE_BELOW_MAPLESON_RANGE/case mix": casemix(
        FLOWS + 'weight_mean = "10 kg"\nage_mean = "0.5 years"\nduration = "60 min"'
    ),
    "AGE_BELOW_MAPLESON_RANGE/case": case(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "2 L/min", "vaporizer": "2 %"},
        patient={"weight": "7 kg", "age": "0.5 years"},
    ),
    "PATIENT_WEIGHT_OUTSIDE_VALIDATED/case": case(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "2 L/min", "vaporizer": "2 %"},
        patient={"weight": "7 kg", "age": "1 year"},
    ),
    "BELOW_RESERVE/nitrous oxide": n2o_cylinder("5.5 kg", "5 kg", reserve_weight="1 kg"),
    "PIO2_BELOW_SEA_LEVEL_THRESHOLD/case": case(
        "sevoflurane",
        {"duration": "20 min", "oxygen": "1 L/min", "air": "3 L/min", "vaporizer": "2 %"},
        site={"elevation": "3000 m"},
    ),
    # calibration: a factor beyond the supported range (audit fit; a file in use), an agent the file lacks,
    # a factor below 1 raised to 1 for the flow floor
    "UPTAKE_FACTOR_UNSUPPORTED/calibration": lambda: audit_calibration_codes(1.8),
    "UPTAKE_FACTOR_UNSUPPORTED/calibration file": lambda: calibration_codes(2.0),
    "CALIBRATION_AGENT_ABSENT": lambda: calibration_codes(1.2, "isoflurane"),
    "FLOOR_FACTOR_RAISED": lambda: floor_codes(0.8),
    "SITE_ABOVE_HABITATION/case": case(
        "sevoflurane", {"duration": "10 min", "oxygen": "2 L/min", "vaporizer": "2 %"}, site={"elevation": "7000 m"}
    ),
}

#: Safety codes: the safe counterpart under which the code goes away (one-sided checks).
SAFE: dict[str, Callable[[], set[str]]] = {
    "INSPIRED_OXYGEN_LOW": case(
        "sevoflurane", {"duration": "60 min", "oxygen": "1 L/min", "air": "1 L/min", "vaporizer": "2 %"}
    ),
    "HYPOXIC_INSPIRED_MIXTURE": case(
        "sevoflurane", {"duration": "60 min", "oxygen": "1 L/min", "air": "1 L/min", "vaporizer": "2 %"}
    ),
    "VOLUME_DEFICIT": case("sevoflurane", {"duration": "30 min", "oxygen": "1 L/min", "vaporizer": "2 %"}),
    "COMPOUND_A": floor("sevoflurane", {"duration": "60 min", "oxygen": "1 L/min", "air": "1 L/min", **HOLD}),
    "CARBON_MONOXIDE_DRY_ABSORBENT": floor("sevoflurane", {"duration": "60 min", "oxygen": "1 L/min", **HOLD}),
    "NITROGEN_ACCUMULATION": floor(
        "sevoflurane",
        {"duration": "10 min", "oxygen": "6 L/min", **HOLD},
        {"duration": "60 min", "oxygen": "0.5 L/min", **HOLD},
    ),
    "ARGON_ACCUMULATION": floor("desflurane", {"duration": "90 min", "oxygen": "0.5 L/min", **HOLD}),
    "LABEL_RULE_BREACHED": floor(
        "sevoflurane",
        {"duration": "60 min", "oxygen": "1 L/min", "air": "1 L/min", **HOLD},
        flow_floor={"policies": ["sevoflurane_us_label"]},
    ),
    "NO_SAFE_FLOOR": floor("sevoflurane", *EMERGENCE[:2]),
    # O2 and air at a low total: no settable mix above the floor breaks a limit here.
    "SETTING_ABOVE_FLOOR_FAILS": floor(
        "isoflurane", {"duration": "60 min", "oxygen": "0.5 L/min", "air": "0.5 L/min", "end_tidal_target": "1 MAC"}
    ),
    "FLOOR_FACTOR_RAISED": lambda: floor_codes(1.2),
    "PIO2_BELOW_SEA_LEVEL_THRESHOLD": pio2(0.50, 0.30, 70.0),
    "PIO2_THRESHOLD_UNREACHABLE": pio2(0.50, 0.30, 70.0),
    "OXYGEN_BELOW_AIR": total("sevoflurane", 1.5, "40 years", "50 %"),
    "CONCENTRATOR_PURITY_LOW": supply(PURITY.format(low=93) + CONTINUOUS.format(flow=5)),
    "SUPPLY_UNDER_ONE_DAY": supply(O2_CYL.format(bar=137) + CONTINUOUS.format(flow=0.2)),
    "REORDER_OVERDUE": supply('[plan]\nlead_time = "1 day"\n' + O2_CYL.format(bar=200) + CONTINUOUS.format(flow=0.05)),
}


@pytest.mark.parametrize("key", sorted(PRODUCERS))
def test_code_is_produced(key):
    assert key.split("/")[0] in PRODUCERS[key]()


@pytest.mark.parametrize("code", sorted(SAFE))
def test_safety_code_goes_away_under_the_safe_counterpart(code):
    assert code not in SAFE[code]()


def test_every_registered_code_has_a_producer():
    produced = {k.split("/")[0] for k in PRODUCERS}
    assert set(CODES) - produced == set()
    assert produced - set(CODES) == set()


def test_every_safety_code_has_a_safe_counterpart():
    # Binding limits are held one-sided by test_floor_keeps_its_limits (the plan at the floor keeps them).
    safety = {k for k, c in CODES.items() if c.safety and c.severity != "binding"}
    assert safety - set(SAFE) == set()


def _code_literals() -> dict[str, list[str]]:
    """UPPER_SNAKE string literals in the package's modules (outside ``__all__``), with their files."""
    found: dict[str, list[str]] = {}
    for path in PACKAGE.rglob("*.py"):
        if path.name == "limits.py":  # the registry itself (current and former names)
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        skip = set()
        for node in ast.walk(tree):
            if isinstance(node, ast.Assign) and any(getattr(t, "id", "") == "__all__" for t in node.targets):
                skip |= {id(n) for n in ast.walk(node.value)}
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in skip:
                v = node.value
                if v.isupper() and "_" in v and v.replace("_", "").isalnum() and v[0].isalpha():
                    found.setdefault(v, []).append(path.name)
    return found


#: Upper-snake literals that are environment variables the package reads or sets, not codes.
ENVIRONMENT_NAMES = {"NUMBA_CACHE_DIR", "OPENBLAS_NUM_THREADS"}


def test_every_code_literal_in_the_package_is_registered():
    unregistered = {k: v for k, v in _code_literals().items() if k not in CODES and k not in ENVIRONMENT_NAMES}
    assert unregistered == {}


#: Upper-snake names the documents show that are constants, not codes.
NOT_CODES = {"CO2E_BASES", "GAS_VOLUME_REFERENCE", "P_QT", "P_VT", "P_DIFF", "P_DONOR"}


def test_every_code_the_documents_name_is_registered():
    import re

    root = PACKAGE.parent
    named = set()
    for doc in ("README.md", "DEVELOPERS.md", "demo_cases/README.md"):
        named |= set(re.findall(r"`([A-Z][A-Z0-9]*(?:_[A-Z0-9]+)+)`", (root / doc).read_text(encoding="utf-8")))
    assert named - NOT_CODES - set(CODES) - set(RENAMED) == set()
    assert set(RENAMED.values()) <= set(CODES)


def test_registry_entries_are_complete():
    for c in CODES.values():
        assert c.severity in ("binding", "advisory", "warning")
        assert c.meaning and c.source
    assert INSPIRED_OXYGEN_FLOOR == 0.30


FLOOR_PLANS = {
    "O2/N2O, basal O2, label policy": (
        "sevoflurane",
        [
            {"duration": "10 min", "oxygen": "2 L/min", "nitrous_oxide": "4 L/min", **HOLD},
            {"duration": "50 min", "oxygen": "0.5 L/min", "nitrous_oxide": "0.5 L/min", **HOLD},
        ],
        {"basal_oxygen_flow": "0.2 L/min", "policies": ["sevoflurane_us_label"]},
    ),
    "O2/air, higher threshold": (
        "desflurane",
        [
            {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", **HOLD},
            {"duration": "50 min", "oxygen": "0.5 L/min", "air": "0.5 L/min", **HOLD},
        ],
        {"threshold_inspired_oxygen": "0.35"},
    ),
    "3000 m, threshold as sea-level PiO2": (
        "isoflurane",
        [
            {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", **HOLD},
            {"duration": "50 min", "oxygen": "0.6 L/min", "air": "0.4 L/min", **HOLD},
        ],
        {"threshold_basis": "partial_pressure"},
    ),
}


@pytest.mark.parametrize("name", sorted(FLOOR_PLANS))
def test_floor_keeps_its_limits(name):
    # One-sided: the floor may be conservative, never below a limit. The recommended schedule, run
    # through the case engine (its own integration at rtol 1e-8, every integrator step, not the
    # planner's 1-min checks), keeps inspired O2 at or above the threshold from the settling minute
    # on, has no volume deficit, and keeps the machine limits (O2 share with N2O, basal O2, label).
    from estimator.planning.safety import flow_floor
    from estimator.simulation.engine import simulate
    from estimator.simulation.results import SETTLE

    agent, phases, settings = FLOOR_PLANS[name]
    site = {"elevation": "3000 m"} if "3000 m" in name else {}
    res = flow_floor(scenario(agent, phases, flow_floor=settings, site=site), grid=False)
    st = res.settings
    schedule = [dict(p) for p in phases]
    for p, entry in zip(schedule, res.phases, strict=True):
        assert entry["floor"] is not None
        flows = {k: v.to("L/min").magnitude for k, v in entry["flows"].items()}
        p.update({k: f"{v:g} L/min" for k, v in flows.items()})
        o2, n2o = flows["oxygen"], flows["nitrous_oxide"]
        assert o2 >= st.basal_o2 - 1e-9
        assert n2o == 0 or o2 / (o2 + n2o) >= st.min_o2_share - 1e-9
        if "sevoflurane_us_label" in st.policies:
            assert sum(flows.values()) >= 1.0 - 1e-9
    r = simulate(scenario(agent, schedule, flow_floor=settings, site=site))
    s = r.series
    judged = s["time [min]"].to_numpy() >= SETTLE
    assert s["inspired_oxygen [%]"].to_numpy()[judged].min() / 100 >= st.threshold
    assert r.totals["volume_deficit"].to("L").magnitude == pytest.approx(0.0, abs=1e-9)
    assert "VOLUME_DEFICIT" not in warning_codes(r.warnings)
