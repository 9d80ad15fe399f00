r"""The inventory file of ``lowflow supply``: its schema (unknown keys are errors), small parsers,
and the stock tables turned into supplies (cylinder contents from :mod:`estimator.cylinders`).

Every table is a pydantic model with ``extra="forbid"``, so a misspelt key is caught and reported
with its place in the file (``cylinders[1].tare_wieght``) and the keys that are valid there. Every
quantity is a field of :func:`estimator.fields.quantity`: its dimension and range are checked here,
at load, and the value is kept as written; :mod:`estimator.supply` parses each with its field name.

:func:`load_inventory` reads a file (its argument is always a path); :func:`inventory_from_text`
parses TOML text. A scenario named in ``[[demand.cases]]`` is a ``.toml`` file relative to the
inventory's folder.

Examples
--------
>>> inv = inventory_from_text('''
... [[bottles]]
... agent = "sevoflurane"
... count = 3
... ''')
>>> inv.bottles[0].count
3
>>> inventory_from_text('[[bottles]]\nagent = "sevoflurane"\ncont = 3')
Traceback (most recent call last):
...
estimator.errors.InputError: bottles[0].cont: got '(unknown key)'; expected a key valid here: agent, count, name, opened, volume; check the spelling
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import pint
from pydantic import AfterValidator, BaseModel, BeforeValidator, ConfigDict, StrictBool, StrictInt, ValidationError

from .contracts import input_error_from_validation, read_toml, toml_from_text
from .cylinders import MAX_PRESSURE_BAR, TEMPERATURE_RANGE, compressed_cylinder, nitrous_oxide_cylinder, supply_data
from .errors import InputError
from .fields import QuantitySpec, quantity
from .properties import AGENTS
from .site import ELEVATION_RANGE, PRESSURE_RANGE
from .units import Q_, check_range, parse_quantity

GASES = ("oxygen", "air", "nitrous_oxide")
SOURCE_KINDS = ("pipelines", "concentrators", "cylinders")

Value = str | int | float
WEEK = 7 * 1440  # minutes
#: Argon to oxygen ratio of dry air (0.934 / 20.946 % by volume, CRC Handbook); a zeolite sieve
#: does not separate argon from oxygen, so concentrator product keeps it (common practice, no source).
ARGON_PER_OXYGEN = 0.00934 / 0.20946
#: Most items of one stock line (cylinders, bottles): a large hospital store holds hundreds; 10 000
#: catches a slip of the keyboard (practical limit, no source).
MAX_COUNT = 10_000
_CLOCK = re.compile(r"\s*(\d{1,2}):(\d{2})\s*")


def _whole(low: int, high: int, what: str = "a whole number") -> Any:
    def check(value: int) -> int:
        if not low <= value <= high:
            raise ValueError(f"{what} {low} to {high}")
        return value

    return Annotated[StrictInt, AfterValidator(check)]


def _clock_check(value: Any) -> Any:
    if isinstance(value, str) and ":" in value:
        m = _CLOCK.fullmatch(value)
        if m is None or int(m.group(1)) > 23 or int(m.group(2)) > 59:
            raise ValueError("a time of day HH:MM, 00:00 to 23:59, or hours such as '8.5 h'")
        return value
    return _HOURS.validate(value)


_HOURS = QuantitySpec("time", 0.0, 24.0, "h", bare_unit="h", keep_text=True)
#: A time of day: "08:30" (00:00 to 23:59) or hours after midnight, "8.5 h".
Clock = Annotated[Value, BeforeValidator(_clock_check)]
#: Concentrator product: an O2 fraction, or [flow, fraction] points of its curve (flows as for
#: rated_flow); the curve's shape and the argon bound are checked with the rated flow (_purity_curve).
_PURITY = QuantitySpec("fraction", 0.0, 1.0, "dimensionless", keep_text=True)
_CURVE_FLOW = QuantitySpec("flow", 0.0, 100.0, "L/min", bare_unit="L/min", keep_text=True)


def _purity_check(value: Any) -> Any:
    if not isinstance(value, list):
        return _PURITY.validate(value)
    if len(value) < 2 or any(not isinstance(p, list) or len(p) != 2 for p in value):
        raise ValueError(
            "a list of [flow, purity] pairs, at least two, e.g. [['0 L/min', '95 %'], ['5 L/min', '90 %']]"
        )
    for i, (flow, fraction) in enumerate(value):
        for j, (spec, item) in enumerate(((_CURVE_FLOW, flow), (_PURITY, fraction))):
            try:
                spec.parse(item)
            except InputError as exc:
                raise ValueError(f"[{i}][{j}]: {exc.expected}") from None
    return value


#: Hours of a day, 0 to 24 h.
Hours = quantity("time", 0.0, 24.0, "h", bare_unit="h", keep_text=True, description="hours a day")
#: Days of lead time or safety stock, 0 to 10 years (practical limit, no source).
Days = quantity("time", 0.0, 3650.0, "day", bare_unit="day", keep_text=True)
Count = _whole(0, MAX_COUNT)
#: Cylinder pressures: checked in full (gauge or absolute, against the service pressure) by
#: estimator.cylinders; here the dimension and a bound of twice the highest working pressure.
Pressure = quantity("pressure", 0.0, 2 * MAX_PRESSURE_BAR, "bar", keep_text=True)
#: Water capacity of one cylinder: up to 100 L (the largest medical cylinders hold about 50 L).
WaterCapacity = quantity("volume", 0.0, 100.0, "L", bare_unit="L", low_open=True, keep_text=True)
#: Cylinder temperature: the service range of medical gas cylinders (estimator.cylinders).
Temperature = quantity("temperature", *TEMPERATURE_RANGE, "degC", bare_unit="degC", keep_text=True)
#: Cylinder masses up to 200 kg (estimator.cylinders).
Mass = quantity("mass", 0.0, 200.0, "kg", bare_unit="kg", keep_text=True)
#: A flow of ventilation or drive gas; 0 to 200 L/min (estimator.supply).
SupplyFlow = quantity("flow", 0.0, 200.0, "L/min", bare_unit="L/min", keep_text=True)


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True)


class CylinderEntry(_Strict):
    name: str | None = None
    gas: str
    count: Count = 1
    water_capacity: WaterCapacity | None = None
    pressure: Pressure | None = None
    temperature: Temperature = "15 degC"
    reserve_pressure: Pressure | None = None
    service_pressure: Pressure | None = None
    gross_weight: Mass | None = None
    tare_weight: Mass | None = None
    reserve_weight: Mass | None = None


class BottleEntry(_Strict):
    name: str | None = None
    agent: str
    count: Count = 0
    # A bottle holds up to 5 L of liquid agent (estimator.supply).
    volume: quantity("volume", 0.0, 5000.0, "mL", bare_unit="mL", low_open=True, keep_text=True) = "250 mL"
    opened: quantity("volume", 0.0, 5000.0, "mL", bare_unit="mL", keep_text=True) | None = None


class ConcentratorEntry(_Strict):
    name: str | None = None
    # Rated product flow of one concentrator: above 0 to 100 L/min (bedside units give 5-10 L/min,
    # plant-size ones up to about 100; practical limit, no source).
    rated_flow: quantity("flow", 0.0, 100.0, "L/min", bare_unit="L/min", low_open=True, keep_text=True)
    hours_per_day: Hours = "24 h"
    start: Clock = "0 h"
    count: _whole(0, 100) = 1
    purity: Annotated[Value | list[list[Value]], BeforeValidator(_purity_check)] | None = None


class PipelineEntry(_Strict):
    name: str | None = None
    gas: str
    available: StrictBool = True


class AbsorbentEntry(_Strict):
    name: str = "CO2 absorbent"
    # Up to 10 t of absorbent in stock (estimator.supply).
    stock: quantity("mass", 0.0, 10000.0, "kg", bare_unit="kg", keep_text=True)
    # CO2 a 100 g of absorbent takes up: above 0 to 26 L (the scenario contract's bound).
    co2_per_100g: quantity("volume", 0.0, 26.0, "L", bare_unit="L", low_open=True, keep_text=True) | None = None


class CasePlan(_Strict):
    name: str | None = None
    scenario: str
    per_day: _whole(0, 100)
    days_per_week: _whole(0, 7) | None = None
    rooms: _whole(1, 50) = 1
    drive_gas: str = "none"
    drive_multiplier: float | None = None
    minute_ventilation: SupplyFlow | None = None


class ContinuousDemand(_Strict):
    name: str | None = None
    gas: str
    flow: SupplyFlow | None = None
    minute_ventilation: SupplyFlow | None = None
    drive_multiplier: float | None = None
    hours_per_day: Hours = "24 h"
    days_per_week: _whole(0, 7) = 7
    start: Clock = "8 h"


class Demand(_Strict):
    working_days_per_week: _whole(0, 7) = 5
    day_start: Clock = "8 h"
    cases: list[CasePlan] = []
    continuous: list[ContinuousDemand] = []


class PlanOptions(_Strict):
    start: date | str | None = None
    lead_time: Days = "0 day"
    safety_stock: Days = "0 day"
    table_days: _whole(1, 3650) = 365


class SupplyOptions(_Strict):
    priority: list[str] = list(SOURCE_KINDS)
    ignore: list[str] = []


class Site(_Strict):
    # The ISO 2533 troposphere, as in the scenario contract (estimator.site).
    ambient_pressure: quantity("pressure", *PRESSURE_RANGE, "kPa", bare_unit="kPa", keep_text=True) | None = None
    elevation: quantity("length", *ELEVATION_RANGE, "m", bare_unit="m", keep_text=True) | None = None


class Inventory(_Strict):
    """The validated inventory file; ``base_dir`` resolves scenario paths."""

    title: str = ""
    site: Site = Site()
    plan: PlanOptions = PlanOptions()
    supply: SupplyOptions = SupplyOptions()
    demand: Demand = Demand()
    cylinders: list[CylinderEntry] = []
    bottles: list[BottleEntry] = []
    concentrators: list[ConcentratorEntry] = []
    pipelines: list[PipelineEntry] = []
    absorbent: AbsorbentEntry | None = None
    base_dir: str = "."


def inventory_from_text(text: str, base_dir: str | os.PathLike[str] | None = None) -> Inventory:
    """Parse and validate an inventory from TOML text (never read as a path).

    Parameters
    ----------
    text : str
        The TOML document.
    base_dir : str or os.PathLike, optional
        Folder that scenario paths in ``[[demand.cases]]`` are relative to (default: the working
        folder).

    Raises
    ------
    InputError
        Naming the field (e.g. ``cylinders[1].tare_wieght``), the value and what is accepted.
    """
    return _inventory(toml_from_text(text, "inventory"), "." if base_dir is None else os.fspath(base_dir))


def load_inventory(path: str | os.PathLike[str]) -> Inventory:
    """Read and validate an inventory file (always a path, never text); unknown keys are errors.

    Scenario paths in ``[[demand.cases]]`` resolve relative to the file's folder.

    Raises
    ------
    InputError
        Naming the field (e.g. ``cylinders[1].tare_wieght``), the value and what is accepted.
    """
    data = read_toml(path, "inventory", "an existing inventory TOML file")
    return _inventory(data, str(Path(os.fspath(path)).parent))


def _inventory(raw: dict[str, Any], base: str) -> Inventory:
    if "base_dir" in raw:
        raise InputError("base_dir", raw["base_dir"], "no such key in an inventory file")
    try:
        return Inventory(**raw, base_dir=base)
    except ValidationError as exc:
        raise input_error_from_validation(exc, "", Inventory) from None


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
    m = _CLOCK.fullmatch(value) if isinstance(value, str) else None
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
    """Ambient pressure of the site [kPa] (:func:`estimator.site.site_from_inputs`: a measured
    ``ambient_pressure`` wins, ``elevation`` gives the ISO 2533 standard atmosphere)."""
    from .site import site_from_inputs

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
            for key in ("gross_weight", "tare_weight"):
                if getattr(c, key) is None:
                    raise InputError(
                        f"{f}.{key}", "(missing)", "a mass such as '8.5 kg' (nitrous oxide is counted by weight)"
                    )
            res = nitrous_oxide_cylinder(
                c.gross_weight,
                c.tare_weight,
                c.temperature,
                count=c.count,
                water_capacity=c.water_capacity,
                pressure=c.pressure,
                reserve_weight=c.reserve_weight,
                ambient_pressure=ambient,
                field_prefix=f,
            )
        else:
            for key in ("water_capacity", "pressure"):
                if getattr(c, key) is None:
                    raise InputError(f"{f}.{key}", "(missing)", "a value: required for a compressed-gas cylinder")
            if c.gross_weight is not None or c.tare_weight is not None:
                raise InputError(
                    f"{f}.gross_weight", c.gross_weight, "no weights for oxygen or air (counted by pressure)"
                )
            res = compressed_cylinder(
                g,
                c.water_capacity,
                c.pressure,
                c.temperature,
                c.reserve_pressure,
                count=c.count,
                service_pressure=c.service_pressure,
                ambient_pressure=ambient,
                field_prefix=f,
            )
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
        cap = parse_quantity(
            ab.co2_per_100g or supply_data()["absorbent"]["co2_per_100g"], "absorbent.co2_per_100g", "volume", "L"
        ).to("L")
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
