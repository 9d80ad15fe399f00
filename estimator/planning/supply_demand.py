"""Weekly demand of a site for supply planning: gases, agent liquid and CO2, minute by minute.

Case plans are run through the engine (one scenario file each) and laid out back to back from
``day_start`` in each room on their working days; continuous demands (ventilator drive gas, recovery
oxygen, sample gas...) run their stated hours. A bellows ventilator's drive gas is the minute
ventilation times a multiplier, at least 1 (Klemenzson and Perouansky 2004).

References
----------
.. [1] Klemenzson GK, Perouansky M. Can J Anaesth 2004;51:616-20 (bellows ventilator drive gas).

Examples
--------
>>> drive_multiplier(1.5, "demand.cases[0].drive_multiplier")
1.5
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import date
from pathlib import Path
from typing import Any

import numpy as np

from ..contracts import named_file
from ..errors import InputError
from ..inputs.supply_file import (
    GASES,
    WEEK,
    CasePlan,
    Inventory,
    add_interval,
    clock_minutes,
    gas_name,
    minutes_per_day,
    whole_number,
)
from ..physics.cylinders import supply_data
from ..units import Q_, check_range, parse_quantity


def minute_ventilation(result: Any, plan: CasePlan, f: str) -> float:
    """Minute ventilation [L/min] for drive gas: the plan's value, else the scenario's patient."""
    if plan.minute_ventilation is not None:
        q = parse_quantity(plan.minute_ventilation, f"{f}.minute_ventilation", "flow", "L/min")
        return check_range(
            q.to("L/min"), f"{f}.minute_ventilation", Q_(0, "L/min"), Q_(60, "L/min"), value=plan.minute_ventilation
        ).magnitude
    patient = getattr(result, "patient", None)
    if patient is not None and getattr(patient, "minute_ventilation", None) is not None:
        return Q_(patient.minute_ventilation).to("L/min").magnitude
    spec = getattr(getattr(result, "scenario", None), "patient", None)
    if spec is not None and getattr(spec, "weight", None) is not None:
        from ..physics.physiology import patient_parameters

        return (
            patient_parameters(spec.weight, getattr(spec, "age", None) or "40 year")
            .minute_ventilation.to("L/min")
            .magnitude
        )
    raise InputError(f"{f}.minute_ventilation", None, "a flow such as '6 L/min' (needed for drive gas)")


def case_need(result: Any, plan: CasePlan, f: str) -> tuple[float, dict[str, float]]:
    """Duration [min] and per-case need: gases [L], the agent's liquid [mL], CO2 absorbed [L]."""
    tot = result.totals
    duration = Q_(tot["duration"]).to("min").magnitude
    if duration <= 0:
        raise InputError(f"{f}.scenario", plan.scenario, "a case of positive duration")
    need = {g: Q_(tot[g]).to("L").magnitude for g in GASES if g in tot}
    name = str(result.scenario.agent.name).lower()
    need[name] = need.get(name, 0.0) + Q_(tot["agent_liquid"]).to("mL").magnitude
    need["co2"] = Q_(tot["co2_absorbed"]).to("L").magnitude if "co2_absorbed" in tot else 0.0
    drive = gas_name(plan.drive_gas, f"{f}.drive_gas", ("none", "oxygen", "air"))
    if drive != "none":
        mult = drive_multiplier(plan.drive_multiplier, f"{f}.drive_multiplier")
        need[drive] = need.get(drive, 0.0) + mult * minute_ventilation(result, plan, f) * duration
    return duration, need


def drive_multiplier(value: float | None, f: str) -> float:
    data = supply_data()["ventilator"]
    if value is None:
        return float(data["drive_multiplier"])
    if not data["drive_multiplier_minimum"] <= value <= 5:
        raise InputError(
            f,
            value,
            f"{data['drive_multiplier_minimum']:g} to 5 (a bellows ventilator uses at "
            "least the minute ventilation; Klemenzson and Perouansky 2004)",
        )
    return float(value)


def default_runner(path: str) -> Any:
    from ..inputs.scenario import load_scenario
    from ..simulation.engine import simulate

    return simulate(load_scenario(path))


def demand_week(
    inv: Inventory, start: date, runner: Callable[[str], Any], warns: list[tuple[str, str]]
) -> tuple[dict[str, np.ndarray], dict[str, list[float]]]:
    """Weekly per-minute demand of each resource and the case end times of each plan."""
    dem = inv.demand
    work = whole_number(dem.working_days_per_week, "demand.working_days_per_week", 0, 7)
    day_start = clock_minutes(dem.day_start, "demand.day_start")
    weekday = [(start.weekday() + d) % 7 for d in range(7)]
    need: dict[str, np.ndarray] = {}

    def arr(key: str) -> np.ndarray:
        return need.setdefault(key, np.zeros(WEEK))

    plans = []
    for k, plan in enumerate(dem.cases):
        f = f"demand.cases[{k}]"
        whole_number(plan.per_day, f"{f}.per_day", 0, 100)
        whole_number(plan.rooms, f"{f}.rooms", 1, 50)
        days = work if plan.days_per_week is None else whole_number(plan.days_per_week, f"{f}.days_per_week", 0, 7)
        if runner is default_runner:  # the file is read: a .toml file beside the inventory
            path = named_file(plan.scenario, inv.base_dir, f"{f}.scenario", (".toml",))
        else:  # a stand-in runner gets the name as a label, nothing is read here
            path = Path(inv.base_dir) / plan.scenario
        try:
            result = runner(str(path))
        except InputError as exc:  # an error inside the named scenario: say where it was named
            inner = "" if exc.field.split(" ")[0] == "scenario" else "." + exc.field
            raise InputError(f"{f}.scenario{inner}", exc.value, exc.expected) from None
        duration, per_case = case_need(result, plan, f)
        label = plan.name or Path(plan.scenario).stem
        warns.extend((c, f"case plan {label}: {m}") for c, m in getattr(result, "warnings", []))
        plans.append((k, label, plan, days, duration, per_case))
    ends: dict[str, list[float]] = {p[1]: [] for p in plans}
    for d in range(7):
        cursor: dict[int, float] = {}
        for k, label, plan, days, duration, per_case in plans:
            if weekday[d] >= days:
                continue
            for i in range(plan.per_day):
                room = i % plan.rooms
                t0 = cursor.get(room, day_start)
                cursor[room] = t0 + duration
                if cursor[room] - day_start > 1440:
                    raise InputError(
                        f"demand.cases[{k}].per_day",
                        plan.per_day,
                        f"cases that fit in 24 h in {plan.rooms} room(s) after the other plans",
                    )
                for key, amount in per_case.items():
                    if amount:
                        add_interval(arr(key), d * 1440 + t0, d * 1440 + t0 + duration, amount / duration)
                ends[label].append((d * 1440 + t0 + duration) % WEEK)
    for k, c in enumerate(dem.continuous):
        f = f"demand.continuous[{k}]"
        g = gas_name(c.gas, f"{f}.gas")
        if (c.flow is None) == (c.minute_ventilation is None):
            raise InputError(
                f,
                "flow" if c.flow is not None else "(neither)",
                "exactly one of flow or minute_ventilation (drive gas)",
            )
        if c.flow is not None:
            q = parse_quantity(c.flow, f"{f}.flow", "flow", "L/min").to("L/min")
            rate = check_range(q, f"{f}.flow", Q_(0, "L/min"), Q_(200, "L/min"), value=c.flow).magnitude
        else:
            plan = CasePlan(scenario="", per_day=0, minute_ventilation=c.minute_ventilation)
            rate = drive_multiplier(c.drive_multiplier, f"{f}.drive_multiplier") * minute_ventilation(None, plan, f)
        hours = minutes_per_day(c.hours_per_day, f"{f}.hours_per_day")
        t_on = clock_minutes(c.start, f"{f}.start")
        for d in range(7):
            if weekday[d] < whole_number(c.days_per_week, f"{f}.days_per_week", 0, 7) and hours > 0:
                add_interval(
                    arr(g),
                    d * 1440 + (0 if hours >= 1440 else t_on),
                    d * 1440 + (0 if hours >= 1440 else t_on) + hours,
                    rate,
                )
    return need, ends


__all__ = ["case_need", "default_runner", "demand_week", "drive_multiplier", "minute_ventilation"]
