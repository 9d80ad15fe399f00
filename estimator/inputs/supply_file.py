r"""Small parsers of the inventory's values, and its stock tables turned into supplies.

Cylinder contents come from :mod:`estimator.physics.cylinders`. The schema and loaders are in
:mod:`estimator.inputs.inventory_file` (re-exported here).

Examples
--------
>>> clock_minutes("08:30", "demand.day_start")
510
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date
from typing import Any

import numpy as np
import pint

from ..accounts.accounting import absorbent_capacity
from ..errors import InputError
from ..physics.cylinders import supply_data
from ..properties import AGENTS
from ..units import Q_, check_range, parse_quantity
from .cylinder_entry import cylinder_from_fields
from .inventory_file import (
    CLOCK,
    GASES,
    SOURCE_KINDS,
    CasePlan,
    ConcentratorEntry,
    Inventory,
    Site,
    inventory_from_text,
    load_inventory,
)

__all__ = [
    "ARGON_PER_OXYGEN",
    "GASES",
    "SOURCE_KINDS",
    "WEEK",
    "CasePlan",
    "Inventory",
    "inventory_from_text",
    "load_inventory",
]

WEEK = 7 * 1440  # minutes
#: Argon to oxygen ratio of dry air (0.934 / 20.946 % by volume, CRC Handbook); a zeolite sieve
#: does not separate argon from oxygen, so concentrator product keeps it (common practice, no source).
ARGON_PER_OXYGEN = 0.00934 / 0.20946


# ---------------------------------------------------------------------------------------------
# small parsers


def parse_days(value: Any, f: str) -> float:
    q = parse_quantity(value, f, "time", default_unit="day")
    check_range(q.to("day"), f, Q_(0, "day"), Q_(3650, "day"), value=value)
    return q.to("day").magnitude


def minutes_per_day(value: Any, f: str) -> float:
    q = parse_quantity(value, f, "time", default_unit="h")
    check_range(q.to("h"), f, Q_(0, "h"), Q_(24, "h"), value=value)
    return q.to("min").magnitude


def clock_minutes(value: Any, f: str) -> float:
    """Time of day in minutes after midnight from ``"08:30"`` or ``"8.5 h"``."""
    m = CLOCK.fullmatch(value) if isinstance(value, str) else None
    if m is not None and (int(m.group(1)) > 23 or int(m.group(2)) > 59):
        raise InputError(f, value, "a time of day HH:MM, 00:00 to 23:59, or hours such as '8.5 h'")
    q = Q_(int(m.group(1)) * 60 + int(m.group(2)), "min") if m else parse_quantity(value, f, "time", "h")
    check_range(q.to("h"), f, Q_(0, "h"), Q_(24, "h"), value=value)
    return q.to("min").magnitude % 1440


def whole_number(value: int, f: str, low: int, high: int) -> int:
    if not low <= value <= high:
        raise InputError(f, value, f"a whole number {low} to {high}")
    return value


def gas_name(value: str, f: str, allowed: tuple[str, ...] = GASES) -> str:
    key = str(value).strip().lower().replace(" ", "_").replace("-", "_")
    key = {"o2": "oxygen", "n2o": "nitrous_oxide", "nitrous": "nitrous_oxide"}.get(key, key)
    if key not in allowed:
        raise InputError(f, value, "one of " + ", ".join(allowed))
    return key


def start_date(value: Any, f: str) -> date:
    if value is None:
        return date.today()
    if isinstance(value, date):
        return value
    try:
        return date.fromisoformat(str(value).strip())
    except ValueError:
        raise InputError(f, value, "a date such as 2026-03-02 (ISO 8601)") from None


def site_ambient(site: Site, warns: list[tuple[str, str]]) -> pint.Quantity:
    """Ambient pressure of the site [kPa] (:func:`estimator.physics.site.site_from_inputs`: a measured
    ``ambient_pressure`` wins, ``elevation`` gives the ISO 2533 standard atmosphere)."""
    from ..physics.site import site_from_inputs

    s = site_from_inputs(elevation=site.elevation, ambient_pressure=site.ambient_pressure)
    warns.extend(s.warnings)
    return s.ambient_pressure.to("kPa")


def add_interval(arr: np.ndarray, t0: float, t1: float, rate: float) -> None:
    """Add ``rate`` [units/min] over [t0, t1) minutes to a weekly per-minute array (wraps)."""
    i0, i1 = int(np.floor(t0)), int(np.floor(t1))
    if i0 == i1:
        arr[i0 % WEEK] += rate * (t1 - t0)
        return
    arr[i0 % WEEK] += rate * (i0 + 1 - t0)
    arr[np.arange(i0 + 1, i1) % WEEK] += rate
    if t1 > i1:
        arr[i1 % WEEK] += rate * (t1 - i1)


def _purity_curve(entry: ConcentratorEntry, rated: float, f: str) -> tuple[np.ndarray, np.ndarray]:
    """Flow [L/min] and O2 fraction points of a concentrator's purity curve."""
    top = 1.0 / (1.0 + ARGON_PER_OXYGEN)  # all nitrogen removed: O2 + argon only
    if entry.purity is None:
        pts = supply_data()["concentrator"]["purity_curve"]
        flows, fr = np.array([p[0] * rated for p in pts]), np.array([p[1] for p in pts])
    elif isinstance(entry.purity, list):
        if len(entry.purity) < 2 or any(len(p) != 2 for p in entry.purity):
            raise InputError(f"{f}.purity", entry.purity, "a list of [flow, purity] pairs, at least two")
        flows = np.array(
            [
                parse_quantity(p[0], f"{f}.purity[{i}][0]", "flow", "L/min").to("L/min").magnitude
                for i, p in enumerate(entry.purity)
            ]
        )
        fr = np.array(
            [
                parse_quantity(p[1], f"{f}.purity[{i}][1]", "fraction").to("").magnitude
                for i, p in enumerate(entry.purity)
            ]
        )
        if flows[0] != 0 or flows[-1] < rated or np.any(np.diff(flows) <= 0):
            raise InputError(
                f"{f}.purity", entry.purity, f"flows rising from 0 L/min to at least the rated flow, {rated:g} L/min"
            )
    else:
        p = parse_quantity(entry.purity, f"{f}.purity", "fraction").to("").magnitude
        flows, fr = np.array([0.0, rated]), np.array([p, p])
    if np.any(fr <= 0.21) or np.any(fr > top + 1e-9):
        raise InputError(
            f"{f}.purity",
            entry.purity,
            f"O2 fractions above 21 % and at most {100 * top:.1f} % (the argon of air stays in the product)",
        )
    return flows, fr


# ---------------------------------------------------------------------------------------------
# stocks and sources


@dataclass
class Pool:
    """One supply: stock items drawn one after another, and the draw that falls on them."""

    name: str
    unit: str
    items: list[tuple[str, str, float, dict[str, Any]]] = field(default_factory=list)
    draw: np.ndarray = field(default_factory=lambda: np.zeros(WEEK))
    unmet_after: np.ndarray = field(default_factory=lambda: np.zeros(WEEK))


def _unique(name: str, taken: set[str], f: str) -> str:
    if name in taken:
        raise InputError(f"{f}.name", name, "a name not used by another item")
    taken.add(name)
    return name


def read_stocks(
    inv: Inventory, ambient: pint.Quantity, warns: list[tuple[str, str]], names: set[str]
) -> dict[str, Pool]:
    pools: dict[str, Pool] = {}
    for k, c in enumerate(inv.cylinders):
        f = f"cylinders[{k}]"
        g = gas_name(c.gas, f"{f}.gas")
        if g == "nitrous_oxide":
            options = {"water_capacity": c.water_capacity, "pressure": c.pressure}
        else:
            given = c.water_capacity is not None and c.pressure is not None  # a missing one is named first
            if given and (c.gross_weight is not None or c.tare_weight is not None):
                raise InputError(
                    f"{f}.gross_weight", c.gross_weight, "no weights for oxygen or air (counted by pressure)"
                )
            options = {"service_pressure": c.service_pressure}
        res = cylinder_from_fields(c, g, f, count=c.count, ambient_pressure=ambient, **options)
        name = _unique(c.name or f"{g.replace('_', ' ')} cylinders {k + 1}", names, f)
        warns.extend((code, msg.replace(f + ":", f"{name}:")) for code, msg in res.warnings)
        details = {"count": res.count, "contents_per_cylinder": res.contents, "phase": res.phase}
        for key in ("compressibility", "ideal_contents", "pressure", "vapour_pressure", "net_weight"):
            if getattr(res, key) is not None:
                details[key] = getattr(res, key)
        pools.setdefault(g, Pool(g, "L")).items.append((name, "cylinder", res.usable.to("L").magnitude, details))
    for k, b in enumerate(inv.bottles):
        f = f"bottles[{k}]"
        a = b.agent.strip().lower()
        if a not in AGENTS:
            raise InputError(f"{f}.agent", b.agent, "one of " + ", ".join(sorted(AGENTS)))
        whole_number(b.count, f"{f}.count", 0, 10000)
        vol = check_range(
            parse_quantity(b.volume, f"{f}.volume", "volume", "mL").to("mL"),
            f"{f}.volume",
            Q_(0, "mL"),
            Q_(5000, "mL"),
            low_inclusive=False,
            value=b.volume,
        )
        opened = 0.0
        if b.opened is not None:
            q = parse_quantity(b.opened, f"{f}.opened", "volume", "mL").to("mL")
            opened = check_range(q, f"{f}.opened", Q_(0, "mL"), vol, value=b.opened).magnitude
        name = _unique(b.name or f"{a} bottles {k + 1}", names, f)
        details = {"count": b.count, "volume": vol, "opened": Q_(opened, "mL")}
        pools.setdefault(a, Pool(a, "mL")).items.append((name, "bottle", b.count * vol.magnitude + opened, details))
    if inv.absorbent is not None:
        ab = inv.absorbent
        stock = parse_quantity(ab.stock, "absorbent.stock", "mass", "kg").to("g")
        check_range(stock, "absorbent.stock", Q_(0, "g"), Q_(10000, "kg"), value=ab.stock)
        cap = parse_quantity(ab.co2_per_100g or absorbent_capacity(), "absorbent.co2_per_100g", "volume", "L").to("L")
        check_range(cap, "absorbent.co2_per_100g", Q_(0, "L"), Q_(26, "L"), low_inclusive=False, value=ab.co2_per_100g)
        name = _unique(ab.name, names, "absorbent")
        pool = pools.setdefault("absorbent", Pool("absorbent", "g"))
        pool.items.append((name, "absorbent", stock.magnitude, {"co2_per_100g": cap}))
    return pools


def read_concentrators(
    inv: Inventory, start: date, names: set[str]
) -> list[tuple[str, ConcentratorEntry, np.ndarray, tuple[np.ndarray, np.ndarray]]]:
    out = []
    for k, c in enumerate(inv.concentrators):
        f = f"concentrators[{k}]"
        q = parse_quantity(c.rated_flow, f"{f}.rated_flow", "flow", "L/min").to("L/min")
        rated = check_range(
            q, f"{f}.rated_flow", Q_(0, "L/min"), Q_(100, "L/min"), low_inclusive=False, value=c.rated_flow
        ).magnitude
        whole_number(c.count, f"{f}.count", 0, 100)
        hours = minutes_per_day(c.hours_per_day, f"{f}.hours_per_day")
        t_on = 0.0 if hours >= 1440 else clock_minutes(c.start, f"{f}.start")
        cap = np.zeros(WEEK)
        for d in range(7):
            if hours > 0:
                add_interval(cap, d * 1440 + t_on, d * 1440 + t_on + hours, rated * c.count)
        name = _unique(c.name or f"concentrator {k + 1}", names, f)
        out.append((name, c, cap, _purity_curve(c, rated, f)))
    return out
