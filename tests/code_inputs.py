"""Small inputs that produce warning codes, for tests/test_codes.py.

Each builder returns a function that runs one small input (a case, a flow floor, a calculator, a
supply plan, a forecast, an audit) and returns the set of codes it gave. Case and flow-floor runs are
made once per input however many codes they serve.
"""

from __future__ import annotations

from collections.abc import Callable
from types import SimpleNamespace

from engine_helpers import scenario

from estimator.units import Q_

START = "2026-03-02"
AUDIT_HEADER = "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting"


def warning_codes(warnings) -> set[str]:
    return {w["code"] if isinstance(w, dict) else w[0] for w in warnings}


# --- case engine and flow floor (each input run once, however many codes it serves) ------------------

_RUNS: dict[str, set[str]] = {}


def _once(key: tuple, run: Callable[[], set[str]]) -> set[str]:
    k = repr(key)
    if k not in _RUNS:
        _RUNS[k] = run()
    return _RUNS[k]


def case(agent: str, *phases: dict, **tables) -> Callable[[], set[str]]:
    """Codes of a simulated case."""

    def run():
        from estimator.simulation.engine import simulate

        return warning_codes(simulate(scenario(agent, list(phases), **tables)).warnings)

    return lambda: _once(("case", agent, phases, tables), run)


def floor(agent: str, *phases: dict, **tables) -> Callable[[], set[str]]:
    """Advisories and binding limits (every phase's ``binding_all``) of a flow floor."""

    def run():
        from estimator.planning.safety import flow_floor

        res = flow_floor(scenario(agent, list(phases), **tables), grid=False)
        out = warning_codes(res.warnings)
        for ph in res.phases:
            out |= set(ph["binding_all"] or [])
        return out

    return lambda: _once(("floor", agent, phases, tables), run)


HOLD = {"end_tidal_target": "1 MAC"}
LOW_O2 = {"duration": "60 min", "oxygen": "0.3 L/min", "nitrous_oxide": "0.7 L/min", **HOLD}
SAFE_O2 = {"duration": "60 min", "oxygen": "2 L/min", "air": "2 L/min", **HOLD}
EMERGENCE = (
    {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", **HOLD},
    {"duration": "50 min", "oxygen": "0.6 L/min", "air": "0.4 L/min", **HOLD},
    {"duration": "1 min", "oxygen": "3 L/min", "air": "3 L/min", "vaporizer": "0 %"},
)


# --- small calculators ------------------------------------------------------------------------------


def site(**kw):
    from estimator.physics.site import site_from_inputs

    return lambda: warning_codes(site_from_inputs(**kw).warnings)


def pio2(fio2, threshold, kpa):
    from estimator.physics.inspired_oxygen import check_inspired_oxygen

    return lambda: warning_codes(check_inspired_oxygen(fio2, threshold, Q_(kpa, "kPa")))


def dial(target, kpa, agent="sevoflurane", kind="variable_bypass"):
    from estimator.physics.mac import mac_at_age
    from estimator.physics.vaporizer import dial_for_target

    def run():
        mac = mac_at_age(agent, "40 years").mac
        return warning_codes(dial_for_target(target, mac, kind, Q_(kpa, "kPa"), agent).warnings)

    return run


def total(agent, mac, age, n2o):
    from estimator.physics.mac import end_tidal_for_total_mac

    return lambda: warning_codes(end_tidal_for_total_mac(agent, mac, age, n2o).warnings)


def flowmeter(reading, cal, use):
    from estimator.physics.flowmeter import true_flow
    from estimator.physics.site import site_from_inputs

    return lambda: warning_codes(true_flow(reading, cal, use, site_from_inputs()).warnings)


def closed(fn: str, *args, **kw):
    from estimator.physics import closed_form

    return lambda: warning_codes(getattr(closed_form, fn)(*args, **kw).warnings)


def patient(weight):
    from estimator.physics.physiology import patient_parameters

    return lambda: warning_codes(patient_parameters(weight, "40 years").warnings)


def carbon_supply(absorbent_g):
    from estimator.accounts.carbon_totals import case_carbon

    totals = {"agent_liquid": Q_(10, "mL"), "oxygen": Q_(100, "L"), "absorbent": Q_(absorbent_g, "g")}
    return lambda: warning_codes(case_carbon(totals, "sevoflurane", supply=True).warnings)


def o2_cylinder(pressure, reserve):
    from estimator.physics.cylinders import compressed_cylinder

    return lambda: warning_codes(compressed_cylinder("oxygen", "10 L", pressure, reserve_pressure=reserve).warnings)


def n2o_cylinder(gross, tare, temperature="15 degC", **kw):
    from estimator.physics.cylinders import nitrous_oxide_cylinder

    return lambda: warning_codes(nitrous_oxide_cylinder(gross, tare, temperature, **kw).warnings)


# --- supply ----------------------------------------------------------------------------------------

O2_CYL = '[[cylinders]]\nname = "A"\ngas = "oxygen"\nwater_capacity = "10 L"\npressure = "{bar} bar"\nreserve_pressure = "10 bar"\n'
#: Stand-in for an engine result (the interface the supply planner uses: totals, warnings, scenario),
#: shared by tests/test_codes.py and tests/test_supply.py.
SUPPLY_CASE = SimpleNamespace(
    totals={
        "duration": Q_(90, "min"),
        "oxygen": Q_(60, "L"),
        "air": Q_(20, "L"),
        "nitrous_oxide": Q_(0, "L"),
        "agent_liquid": Q_(12, "mL"),
        "co2_absorbed": Q_(18, "L"),
    },
    warnings=[],
    scenario=SimpleNamespace(
        agent=SimpleNamespace(name="sevoflurane"), patient=SimpleNamespace(weight=Q_(70, "kg"), age=Q_(40, "year"))
    ),
)


def supply(text: str):
    from estimator.inputs.inventory_file import inventory_from_text
    from estimator.planning.supply import plan_supply

    return lambda: warning_codes(
        plan_supply(inventory_from_text(text), start=START, runner=lambda _: SUPPLY_CASE).warnings
    )


CASES_ONLY = '[[demand.cases]]\nscenario = "x.toml"\nper_day = 1\n'
CONTINUOUS = '[[demand.continuous]]\ngas = "oxygen"\nflow = "{flow} L/min"\n'
PURITY = '[[concentrators]]\nrated_flow = "5 L/min"\npurity = [["0 L/min", "95 %"], ["5 L/min", "{low} %"]]\n'


# --- forecast --------------------------------------------------------------------------------------

#: One case type, two fixed cases a week; ``body`` holds its other keys, ``tail`` any later tables.
MIX = """
weeks = {weeks}
seed = 1
[[case_types]]
name = "list"
per_week = 2
count = "fixed"
agent = "sevoflurane"
{body}
{tail}
"""
PATIENT = 'weight_mean = "70 kg"\nage_mean = "50 years"\n'
FLOWS = 'wash_in_flow = "6 L/min"\nwash_in_time = "10 min"\nmaintenance_flow = "1 L/min"\n'


def forecast(body: str = FLOWS + PATIENT + 'duration = "60 min"', weeks: int = 3, tail: str = ""):
    """Warnings of a forecast of one case type (``body``: its keys)."""
    from estimator.planning.casemix import casemix_from_text
    from estimator.planning.forecast import forecast as run

    return lambda: warning_codes(run(casemix_from_text(MIX.format(weeks=weeks, body=body, tail=tail))).warnings)


def maintenance(flows: str, duration: str = "60 min") -> str:
    """A case-type body: 10 min wash-in at 6 L/min, then the given maintenance keys."""
    return 'wash_in_flow = "6 L/min"\nwash_in_time = "10 min"\n' + flows + PATIENT + f'duration = "{duration}"'


def casemix(body: str):
    """Load-time warnings of a case mix of one case type."""
    from estimator.planning.casemix import casemix_from_text

    return lambda: warning_codes(casemix_from_text(MIX.format(weeks=3, body=body, tail="")).warnings)


# --- audit -----------------------------------------------------------------------------------------


def audit(rows: str, header: str = AUDIT_HEADER, **kw):
    from estimator.inputs.audit_log import log_from_text
    from estimator.planning.audit import audit as run

    return lambda: warning_codes(run(log_from_text(f"{header}\n{rows}"), **kw).warnings)


def policy(rows: str, header: str, **kw):
    from estimator.inputs.audit_log import log_from_text
    from estimator.planning.audit import audit as run
    from estimator.planning.audit_policy import counterfactual, parse_policy

    def go():
        res = counterfactual(run(log_from_text(f"{header}\n{rows}")), parse_policy(kw))
        out = warning_codes(res["warnings"])
        for c in res["cases"]:
            out |= warning_codes(c["warnings"])
        return out

    return go


FULL = AUDIT_HEADER + ",end_tidal_agent,patient_age,patient_weight"
SEVO_ROWS = (
    "E,0,3,3,0,sevoflurane,3,1.0,50,75\nE,10,3,3,0,sevoflurane,2.2,1.6,50,75\nE,40,3,3,0,sevoflurane,2.2,1.6,50,75\n"
)
