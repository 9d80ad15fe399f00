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

from collections.abc import Callable
from datetime import date, timedelta
from typing import Any

import numpy as np
import pandas as pd

from ..inputs.supply_file import (
    WEEK,
    Inventory,
    Pool,
    inventory_from_text,
    load_inventory,
    parse_days,
    read_concentrators,
    read_stocks,
    site_ambient,
    start_date,
    whole_number,
)
from ..units import Q_
from .supply_allocate import allocate, cum_at, failure, time_of
from .supply_demand import default_runner, demand_week
from .supply_report import SupplyItem, SupplyReport

__all__ = ["Inventory", "SupplyItem", "SupplyReport", "inventory_from_text", "load_inventory", "plan_supply"]


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
        engine (:func:`estimator.simulation.engine.simulate` of :func:`estimator.inputs.scenario.load_scenario`).

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
    need, ends = demand_week(inv, day0, runner or default_runner, warns)
    ignore = {i.strip().lower() for i in inv.supply.ignore}
    for key in ignore:
        pools.pop(key, None)
    renewables = allocate(inv, need, pools, concs, ignore, warns)

    items: list[SupplyItem] = []
    supplies: list[dict[str, Any]] = []
    columns: dict[str, tuple[Pool, float, float, float]] = {}
    fail_at: dict[str, float] = {}
    for key, pool in pools.items():
        unit, scale = ("kg", 1e-3) if pool.unit == "g" else (pool.unit, 1.0)
        per_day = float(pool.draw.sum()) / 7
        total = sum(u for _, _, u, _ in pool.items)
        exhausted = time_of(pool, total)
        fail_at[key] = failure(pool, exhausted)
        lower = 0.0
        for name, kind, usable, details in pool.items:
            upper = lower + usable
            if usable <= 0:
                status, rt = "empty", 0.0
            elif per_day <= 0:
                status, rt = "not used", float("inf")
            else:
                status, rt = "runs out", time_of(pool, upper)
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
        row: dict[str, Any] = {
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
    table: dict[str, Any] = {"date": [day0 + timedelta(days=int(d)) for d in range(n_days + 1)]}
    for col, (pool, lower, upper, scale) in columns.items():
        table[col] = np.clip(upper - cum_at(pool, t), 0.0, upper - lower) * scale
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
        lead_time_days=lead,
        safety_stock_days=safety,
    )
