"""Supply duration: how long the stocks of a site last under its planned work, and the bottleneck.

The inventory file (TOML, read by :func:`load_inventory`) lists the stocks (cylinders, bottles,
absorbent), the sources that do not run out (pipelines, oxygen concentrators while powered) and the
demand: case plans (scenario files run through the engine) times cases a day and working days a
week, plus continuous demands (ventilator drive gas, recovery oxygen, sample gas...).

Method. One week is laid out minute by minute from the start date: cases run back to back from
``day_start`` in each room, continuous demands and concentrators run their stated hours. At each
minute a gas demand is met by the sources in the priority order (default pipelines, then
concentrators, then cylinders); what falls to the cylinders is drawn from the cylinder entries of
that gas one after another, each down to its change-out reserve. Bottles meet the agent's liquid
demand, the absorbent stock the CO2 absorbed at its stated capacity. The week repeats, so run-out
times follow exactly from the weekly cumulative draw, however far away. A supply fails at the first
minute whose demand can no longer be met; the first supply to fail is the bottleneck.

References
----------
.. [1] Klemenzson GK, Perouansky M. Can J Anaesth 2004;51:616-20 (bellows ventilator drive gas).
.. [2] European Pharmacopoeia, Oxygen (93 per cent) (concentrator product 90-96 % O2, rest argon).

Examples
--------
>>> inv = inventory_from_text('''
... [[cylinders]]
... name = "O2 A"
... gas = "oxygen"
... water_capacity = "10 L"
... pressure = "137 bar"
... reserve_pressure = "10 bar"
... [[demand.continuous]]
... gas = "oxygen"
... flow = "2 L/min"
... ''')
>>> r = plan_supply(inv, start="2026-03-02")
>>> r.bottleneck, round(r.days_of_supply.to("day").magnitude, 2)
('O2 A', 0.47)
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import date, timedelta
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pint

from .accounting import absorbent_mass
from .contracts import named_file
from .cylinders import supply_data
from .errors import InputError
from .supply_file import (
    ARGON_PER_OXYGEN,
    GASES,
    SOURCE_KINDS,
    WEEK,
    CasePlan,
    Inventory,
    Pool,
    add_interval,
    clock_minutes,
    gas_name,
    inventory_from_text,
    load_inventory,
    minutes_per_day,
    parse_days,
    read_concentrators,
    read_stocks,
    site_ambient,
    start_date,
    whole_number,
)
from .units import (
    GAS_VOLUME_REFERENCE,
    Q_,
    check_range,
    parse_quantity,
)

__all__ = ["Inventory", "SupplyItem", "SupplyReport", "inventory_from_text", "load_inventory", "plan_supply"]


@dataclass(frozen=True)
class SupplyItem:
    """One inventory entry and how long it lasts.

    ``usable`` is free gas [L] for cylinders, liquid [mL] for bottles, [kg] of absorbent, product
    [L/day] for a concentrator and None for a pipeline. ``runtime`` [day] is the time from the start
    until the item is used up (None if it never is); ``status`` says which: ``"runs out"``,
    ``"not used"``, ``"empty"``, ``"renewable"``, ``"unlimited"``.
    """

    name: str
    kind: str
    supply: str
    usable: pint.Quantity | None
    runtime: pint.Quantity | None
    status: str
    draw_per_day: pint.Quantity | None = None
    details: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class SupplyReport:
    """Answer of :func:`plan_supply`; ``depletion`` has one row a day (start of the day), one column
    per stock item (remaining usable amount, units in the column name)."""

    title: str
    start: date
    items: list[SupplyItem]
    supplies: list[dict[str, Any]]
    bottleneck: str | None
    bottleneck_supply: str | None
    days_of_supply: pint.Quantity | None
    cases_possible: int | None
    cases_possible_by_plan: dict[str, int | None]
    reorder_by: date | None
    depletion: pd.DataFrame
    warnings: list[tuple[str, str]]
    gas_volume_reference: str = GAS_VOLUME_REFERENCE

    def to_json(self) -> dict[str, Any]:
        """JSON shape of ``lowflow supply --json`` (``depletion`` as columns)."""
        from .jsonout import jsonable

        cols = [c for c in self.depletion.columns if c != "date"]
        units = {re.sub(r" \[.*\]$", "", c): re.search(r"\[(.*)\]$", c).group(1) for c in cols}
        depletion = {
            "day": self.depletion.index.tolist(),
            "date": [d.isoformat() for d in self.depletion["date"]],
            "units": units,
            "remaining": {re.sub(r" \[.*\]$", "", c): self.depletion[c].tolist() for c in cols},
        }
        return jsonable(
            {
                "title": self.title,
                "start": self.start,
                "items": [
                    {
                        "name": i.name,
                        "kind": i.kind,
                        "supply": i.supply,
                        "usable": i.usable,
                        "runtime": i.runtime,
                        "status": i.status,
                        "draw_per_day": i.draw_per_day,
                        "details": i.details,
                    }
                    for i in self.items
                ],
                "supplies": self.supplies,
                "bottleneck": self.bottleneck,
                "bottleneck_supply": self.bottleneck_supply,
                "days_of_supply": self.days_of_supply,
                "cases_possible": self.cases_possible,
                "cases_possible_by_plan": self.cases_possible_by_plan,
                "reorder_by": self.reorder_by,
                "depletion": depletion,
                "warnings": [{"code": c, "message": m} for c, m in self.warnings],
                "gas_volume_reference": self.gas_volume_reference,
            }
        )


# ---------------------------------------------------------------------------------------------
# demand: one week, minute by minute


def _minute_ventilation(result: Any, plan: CasePlan, f: str) -> float:
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
        from .physiology import patient_parameters

        return (
            patient_parameters(spec.weight, getattr(spec, "age", None) or "40 year")
            .minute_ventilation.to("L/min")
            .magnitude
        )
    raise InputError(f"{f}.minute_ventilation", None, "a flow such as '6 L/min' (needed for drive gas)")


def _case_need(result: Any, plan: CasePlan, f: str) -> tuple[float, dict[str, float]]:
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
        mult = _multiplier(plan.drive_multiplier, f"{f}.drive_multiplier")
        need[drive] = need.get(drive, 0.0) + mult * _minute_ventilation(result, plan, f) * duration
    return duration, need


def _multiplier(value: float | None, f: str) -> float:
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


def _default_runner(path: str) -> Any:
    from .engine import simulate
    from .scenario import load_scenario

    return simulate(load_scenario(path))


def _demand_week(
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
        if runner is _default_runner:  # the file is read: a .toml file beside the inventory
            path = named_file(plan.scenario, inv.base_dir, f"{f}.scenario", (".toml",))
        else:  # a stand-in runner gets the name as a label, nothing is read here
            path = Path(inv.base_dir) / plan.scenario
        try:
            result = runner(str(path))
        except InputError as exc:  # an error inside the named scenario: say where it was named
            inner = "" if exc.field.split(" ")[0] == "scenario" else "." + exc.field
            raise InputError(f"{f}.scenario{inner}", exc.value, exc.expected) from None
        duration, per_case = _case_need(result, plan, f)
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
            rate = _multiplier(c.drive_multiplier, f"{f}.drive_multiplier") * _minute_ventilation(None, plan, f)
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


# ---------------------------------------------------------------------------------------------
# allocation and run-out times


def _cum_at(pool: Pool, t: np.ndarray) -> np.ndarray:
    """Cumulative draw at times ``t`` [min] from the start (the week repeats)."""
    cum = np.concatenate([[0.0], np.cumsum(pool.draw)])
    return np.floor(t / WEEK) * cum[-1] + np.interp(np.mod(t, WEEK), np.arange(WEEK + 1), cum)


def _time_of(pool: Pool, amount: float) -> float:
    """Minutes until the cumulative draw reaches ``amount`` (inf if nothing is drawn)."""
    cum = np.concatenate([[0.0], np.cumsum(pool.draw)])
    total = cum[-1]
    if total <= 0:
        return float("inf")
    if amount <= 0:
        return 0.0
    n = np.ceil(amount / total) - 1
    rest = amount - n * total
    i = int(np.clip(np.searchsorted(cum, rest, side="left"), 1, WEEK))
    step = cum[i] - cum[i - 1]
    return float(n * WEEK + (i - 1) + ((rest - cum[i - 1]) / step if step > 0 else 0.0))


def _failure(pool: Pool, exhausted: float) -> float:
    """First minute at or after ``exhausted`` whose demand the later sources cannot meet."""
    if not np.isfinite(exhausted):
        return float("inf")
    idx = np.flatnonzero(pool.unmet_after > 1e-9 * max(pool.unmet_after.max(), 1e-300))
    if idx.size == 0:
        return float("inf")
    base = exhausted - np.mod(exhausted, WEEK)
    m = int(np.floor(np.mod(exhausted, WEEK)))
    later = idx[idx >= m]
    return float(max(exhausted, base + later[0])) if later.size else float(base + WEEK + idx[0])


def _allocate(
    inv: Inventory,
    need: dict[str, np.ndarray],
    pools: dict[str, Pool],
    concs: list,
    ignore: set[str],
    warns: list[tuple[str, str]],
) -> list[SupplyItem]:
    """Meet each gas demand by priority; set each pool's draw; describe the renewable sources."""
    priority = [p.strip().lower() for p in inv.supply.priority]
    if sorted(priority) != sorted(SOURCE_KINDS):
        raise InputError("supply.priority", inv.supply.priority, "an ordering of " + ", ".join(SOURCE_KINDS))
    renewables: list[SupplyItem] = []
    pipes = []
    for k, p in enumerate(inv.pipelines):
        pipes.append((p, gas_name(p.gas, f"pipelines[{k}].gas")))
    limit = supply_data()["concentrator"]["purity_minimum"]
    for g in GASES:
        demand = need.get(g, np.zeros(WEEK))
        res, after, seen = demand.copy(), np.zeros(WEEK), False
        for kind in priority:
            if kind == "cylinders":
                draw, seen = res.copy(), True
                continue
            if kind == "pipelines":
                caps = [
                    (p.name or f"{gg} pipeline", np.full(WEEK, np.inf if p.available else 0.0), None, None)
                    for p, gg in pipes
                    if gg == g
                ]
            else:
                caps = [(n, cap, c, curve) for n, c, cap, curve in concs] if g == "oxygen" else []
            for name, cap, c, curve in caps:
                given = np.minimum(res if not seen else draw, cap)
                if seen:
                    after = after + cap
                else:
                    res = res - given
                if c is None:
                    continue
                per_unit = given / max(c.count, 1)
                purity = np.interp(per_unit, curve[0], curve[1])
                on = given > 0
                o2 = float((given * purity).sum()) / 7
                details = {
                    "standby_until_cylinders_run_out": seen,
                    "product_per_day": Q_(float(given.sum()) / 7, "L/day"),
                    "oxygen_per_day": Q_(o2, "L/day"),
                    "argon_per_day": Q_(o2 * ARGON_PER_OXYGEN, "L/day"),
                    "lowest_purity": float(purity[on].min()) if on.any() else None,
                }
                if on.any() and purity[on].min() < limit:
                    warns.append(
                        (
                            "CONCENTRATOR_PURITY_LOW",
                            f"{name}: product falls to "
                            f"{100 * purity[on].min():.1f} % O2 at its operating flow, below "
                            f"{100 * limit:.0f} % (Oxygen 93 per cent)",
                        )
                    )
                renewables.append(
                    SupplyItem(
                        name,
                        "concentrator",
                        "oxygen",
                        Q_(float(cap.sum()) / 7, "L/day"),
                        None,
                        "renewable",
                        None,
                        details,
                    )
                )
        for p, gg in pipes:
            if gg == g:
                renewables.append(
                    SupplyItem(
                        p.name or f"{g} pipeline",
                        "pipeline",
                        g,
                        None,
                        None,
                        "unlimited" if p.available else "unavailable",
                        None,
                        {},
                    )
                )
        if g in ignore:
            continue
        if g in pools or demand.sum() > 0:
            pool = pools.setdefault(g, Pool(g, "L"))
            pool.draw, pool.unmet_after = draw, np.maximum(draw - after, 0.0)
    for key, pool in pools.items():
        if key in GASES:
            continue
        if key == "absorbent":
            cap = pool.items[0][3]["co2_per_100g"].to("L").magnitude
            pool.draw = absorbent_mass(need.get("co2", np.zeros(WEEK)), cap)
        else:
            pool.draw = need.get(key, np.zeros(WEEK)).copy()
        pool.unmet_after = pool.draw
    for key in need:
        if key not in pools and key not in ignore and key != "co2" and need[key].sum() > 0:
            pools[key] = Pool(key, "mL", draw=need[key], unmet_after=need[key])
    for key in sorted(ignore):
        warns.append(("NOT_TRACKED", f"{key}: left out of the analysis (supply.ignore)"))
    if "absorbent" not in pools and "absorbent" not in ignore and need.get("co2", np.zeros(1)).sum() > 0:
        warns.append(
            (
                "ABSORBENT_NOT_TRACKED",
                "the cases load CO2 absorbent but the inventory lists none "
                "(add [absorbent] stock, or 'absorbent' to supply.ignore)",
            )
        )
    return renewables


def plan_supply(
    inv: Inventory, *, start: date | str | None = None, runner: Callable[[str], Any] | None = None
) -> SupplyReport:
    """Supply duration of every item, the bottleneck, cases possible and the reorder date.

    Parameters
    ----------
    inv : Inventory
        From :func:`load_inventory`.
    start : date or ISO text, optional
        First day of the plan; default ``plan.start`` of the file, else today.
    runner : callable, optional
        Scenario path -> engine result (``.totals``, ``.warnings``, ``.scenario``); default the
        engine (:func:`estimator.engine.simulate` of :func:`estimator.scenario.load_scenario`).

    Returns
    -------
    SupplyReport

    References
    ----------
    Klemenzson and Perouansky 2004 (drive gas); CoolProp (cylinder contents).
    """
    warns: list[tuple[str, str]] = []
    day0 = start_date(start if start is not None else inv.plan.start, "plan.start")
    lead = parse_days(inv.plan.lead_time, "plan.lead_time")
    safety = parse_days(inv.plan.safety_stock, "plan.safety_stock")
    table_days = whole_number(inv.plan.table_days, "plan.table_days", 1, 3650)
    ambient = site_ambient(inv.site, warns)
    names: set[str] = set()
    pools = read_stocks(inv, ambient, warns, names)
    concs = read_concentrators(inv, day0, names)
    need, ends = _demand_week(inv, day0, runner or _default_runner, warns)
    ignore = {i.strip().lower() for i in inv.supply.ignore}
    for key in ignore:
        pools.pop(key, None)
    renewables = _allocate(inv, need, pools, concs, ignore, warns)

    items: list[SupplyItem] = []
    supplies: list[dict[str, Any]] = []
    columns: dict[str, tuple[Pool, float, float, float]] = {}
    fail_at: dict[str, float] = {}
    for key, pool in pools.items():
        unit, scale = ("kg", 1e-3) if pool.unit == "g" else (pool.unit, 1.0)
        per_day = float(pool.draw.sum()) / 7
        total = sum(u for _, _, u, _ in pool.items)
        exhausted = _time_of(pool, total)
        fail_at[key] = _failure(pool, exhausted)
        lower = 0.0
        for name, kind, usable, details in pool.items:
            upper = lower + usable
            if usable <= 0:
                status, rt = "empty", 0.0
            elif per_day <= 0:
                status, rt = "not used", float("inf")
            else:
                status, rt = "runs out", _time_of(pool, upper)
            items.append(
                SupplyItem(
                    name,
                    kind,
                    key,
                    Q_(usable * scale, unit),
                    Q_(rt / 1440, "day") if np.isfinite(rt) else None,
                    status,
                    Q_(per_day * scale, f"{unit}/day") if usable > 0 and per_day > 0 else None,
                    details,
                )
            )
            columns[f"{name} [{unit}]"] = (pool, lower, upper, scale)
            lower = upper
        if not pool.items:
            warns.append(("NO_STOCK", f"{key}: the plan uses it but the inventory lists none"))
        fail = fail_at[key]
        row = {
            "name": key,
            "usable": Q_(total * scale, unit),
            "draw_per_day": Q_(per_day * scale, f"{unit}/day"),
            "stock_runs_out": Q_(exhausted / 1440, "day") if np.isfinite(exhausted) else None,
            "fails": Q_(fail / 1440, "day") if np.isfinite(fail) else None,
            "reorder_by": None,
            "items": [i[0] for i in pool.items],
        }
        if np.isfinite(fail):
            row["reorder_by"] = day0 + timedelta(days=int(np.floor(fail / 1440 - lead - safety)))
            if fail < 1440:
                warns.append(
                    (
                        "SUPPLY_UNDER_ONE_DAY",
                        f"{key}: the demand cannot be met for one day: the supply fails after {fail / 60:.1f} h",
                    )
                )
        elif np.isfinite(exhausted):
            warns.append(
                (
                    "STOCK_BACKED_UP",
                    f"{key}: the stock runs out on day {exhausted / 1440:.1f}; "
                    "the sources after it in the priority then meet the demand",
                )
            )
        supplies.append(row)
    items.extend(renewables)

    first = min(fail_at, key=lambda k: fail_at[k], default=None)
    t_b = fail_at[first] if first is not None else float("inf")
    if not np.isfinite(t_b):
        first = None
        warns.append(("NO_BOTTLENECK", "no supply runs out under this plan"))
    bottleneck = None
    if first is not None:
        stocked = [i[0] for i in pools[first].items if i[2] > 0] or [i[0] for i in pools[first].items]
        bottleneck = stocked[-1] if stocked else first
    by_plan: dict[str, int | None] = {}
    for label, e in ends.items():
        if not np.isfinite(t_b):
            by_plan[label] = None
            continue
        arr = np.asarray(e)
        n, rest = np.floor(t_b / WEEK), np.mod(t_b, WEEK)
        by_plan[label] = int(n * arr.size + np.count_nonzero(arr <= rest))
    cases = None if not np.isfinite(t_b) or not by_plan else sum(v or 0 for v in by_plan.values())
    reorder = None
    if np.isfinite(t_b):
        slack = t_b / 1440 - lead - safety
        reorder = day0 + timedelta(days=int(np.floor(slack)))
        if slack < 0:
            warns.append(
                (
                    "REORDER_OVERDUE",
                    f"order now: the bottleneck ({bottleneck}) runs out in "
                    f"{t_b / 1440:.1f} days, less than lead time plus safety stock ({lead + safety:g} days)",
                )
            )
    finite = [i.runtime.magnitude for i in items if i.runtime is not None]
    n_days = min(table_days, int(np.ceil(max(finite))) + 1) if finite else min(table_days, 28)
    t = np.arange(n_days + 1) * 1440.0
    table = {"date": [day0 + timedelta(days=int(d)) for d in range(n_days + 1)]}
    for col, (pool, lower, upper, scale) in columns.items():
        table[col] = np.clip(upper - _cum_at(pool, t), 0.0, upper - lower) * scale
    depletion = pd.DataFrame(table, index=pd.RangeIndex(n_days + 1, name="day"))
    return SupplyReport(
        inv.title,
        day0,
        items,
        supplies,
        bottleneck,
        first,
        Q_(t_b / 1440, "day") if np.isfinite(t_b) else None,
        cases,
        by_plan,
        reorder,
        depletion,
        warns,
    )
