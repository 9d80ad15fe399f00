r"""The inventory file of ``lowflow supply``: its schema (unknown keys are errors) and small parsers.

Every table is a pydantic model with ``extra="forbid"``, so a misspelt key is caught and reported
with its place in the file (``cylinders[1].tare_wieght``) and the keys that are valid there.
Quantities stay strings here; :mod:`estimator.supply` parses each with its field name.

Examples
--------
>>> inv = load_inventory('''
... [[bottles]]
... agent = "sevoflurane"
... count = 3
... ''')
>>> inv.bottles[0].count
3
>>> load_inventory('[[bottles]]\nagent = "sevoflurane"\ncont = 3')
Traceback (most recent call last):
...
estimator.errors.InputError: bottles[0].cont: got 3; expected a known key here: agent, count, name, opened, volume
"""

from __future__ import annotations

import re
import tomllib
from datetime import date
from pathlib import Path
from typing import Any

import pint
from pydantic import BaseModel, ConfigDict, StrictBool, StrictInt, ValidationError

from .errors import InputError
from .units import Q_, check_range, parse_quantity

GASES = ("oxygen", "air", "nitrous_oxide")
SOURCE_KINDS = ("pipelines", "concentrators", "cylinders")

Value = str | int | float


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class CylinderEntry(_Strict):
    name: str | None = None
    gas: str
    count: StrictInt = 1
    water_capacity: Value | None = None
    pressure: Value | None = None
    temperature: Value = "15 degC"
    reserve_pressure: Value | None = None
    service_pressure: Value | None = None
    gross_weight: Value | None = None
    tare_weight: Value | None = None
    reserve_weight: Value | None = None


class BottleEntry(_Strict):
    name: str | None = None
    agent: str
    count: StrictInt = 0
    volume: Value = "250 mL"
    opened: Value | None = None


class ConcentratorEntry(_Strict):
    name: str | None = None
    rated_flow: Value
    hours_per_day: Value = "24 h"
    start: Value = "0 h"
    count: StrictInt = 1
    purity: Value | list[list[Value]] | None = None


class PipelineEntry(_Strict):
    name: str | None = None
    gas: str
    available: StrictBool = True


class AbsorbentEntry(_Strict):
    name: str = "CO2 absorbent"
    stock: Value
    co2_per_100g: Value | None = None


class CasePlan(_Strict):
    name: str | None = None
    scenario: str
    per_day: StrictInt
    days_per_week: StrictInt | None = None
    rooms: StrictInt = 1
    drive_gas: str = "none"
    drive_multiplier: float | None = None
    minute_ventilation: Value | None = None


class ContinuousDemand(_Strict):
    name: str | None = None
    gas: str
    flow: Value | None = None
    minute_ventilation: Value | None = None
    drive_multiplier: float | None = None
    hours_per_day: Value = "24 h"
    days_per_week: StrictInt = 7
    start: Value = "8 h"


class Demand(_Strict):
    working_days_per_week: StrictInt = 5
    day_start: Value = "8 h"
    cases: list[CasePlan] = []
    continuous: list[ContinuousDemand] = []


class PlanOptions(_Strict):
    start: date | str | None = None
    lead_time: Value = "0 day"
    safety_stock: Value = "0 day"
    table_days: StrictInt = 365


class SupplyOptions(_Strict):
    priority: list[str] = list(SOURCE_KINDS)
    ignore: list[str] = []


class Site(_Strict):
    ambient_pressure: Value | None = None
    elevation: Value | None = None


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


def _loc(loc: tuple[Any, ...]) -> str:
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out


def _known_keys(loc: tuple[Any, ...]) -> list[str]:
    model: Any = Inventory
    for part in loc:
        if isinstance(part, int):
            continue
        ann = model.model_fields[part].annotation
        model = next((a for a in getattr(ann, "__args__", (ann,)) if isinstance(a, type)
                      and issubclass(a, BaseModel)), None)
        if model is None:
            for a in getattr(ann, "__args__", ()):
                inner = getattr(a, "__args__", ())
                model = next((i for i in inner if isinstance(i, type) and issubclass(i, BaseModel)), model)
        if model is None:
            return []
    return sorted(k for k in model.model_fields if k != "base_dir")


def load_inventory(source: str | Path) -> Inventory:
    """Read and validate an inventory file (a path, or TOML text); unknown keys are errors.

    Raises
    ------
    InputError
        Naming the field (e.g. ``cylinders[1].tare_wieght``), the value and what is accepted.
    """
    text, base = str(source), "."
    if isinstance(source, Path) or ("\n" not in text and "=" not in text):
        path = Path(source)
        text, base = path.read_text(encoding="utf-8"), str(path.parent)
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError("inventory", str(source)[:60], f"valid TOML ({exc})") from None
    if "base_dir" in raw:
        raise InputError("base_dir", raw["base_dir"], "no such key in an inventory file")
    try:
        return Inventory(**raw, base_dir=base)
    except ValidationError as exc:
        err = exc.errors()[0]
        where = _loc(err["loc"])
        if err["type"] == "extra_forbidden":
            raise InputError(where, err["input"], "a known key here: " + ", ".join(_known_keys(err["loc"][:-1]))) from None
        if err["type"] == "missing":
            raise InputError(where, "(missing)", "a value: this key is required") from None
        raise InputError(where, err["input"], err["msg"].lower()) from None


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
    m = re.fullmatch(r"\s*(\d{1,2}):(\d{2})\s*", value) if isinstance(value, str) else None
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
