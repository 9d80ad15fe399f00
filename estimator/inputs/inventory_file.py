r"""The inventory file of ``lowflow supply``: its schema (unknown keys are errors) and its loaders.

Every table is a pydantic model with ``extra="forbid"``, so a misspelt key is caught and reported
with its place in the file (``cylinders[1].tare_wieght``) and the keys that are valid there. Every
quantity is a field of :func:`estimator.fields.quantity`: its dimension and range are checked here,
at load, and the value is kept as written; :mod:`estimator.planning.supply` parses each with its field name.

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
from datetime import date, datetime
from pathlib import Path
from typing import Annotated, Any

from pydantic import AfterValidator, BaseModel, BeforeValidator, ConfigDict, StrictBool, StrictInt, ValidationError

from ..contracts import input_error_from_validation, read_toml, toml_from_text
from ..errors import InputError
from ..fields import AsGiven, QuantitySpec, quantity
from ..physics.cylinder_state import MAX_PRESSURE_BAR, TEMPERATURE_RANGE
from ..physics.site import ELEVATION_RANGE, PRESSURE_RANGE

GASES = ("oxygen", "air", "nitrous_oxide")
SOURCE_KINDS = ("pipelines", "concentrators", "cylinders")

Value = str | int | float
#: Most items of one stock line (cylinders, bottles): a large hospital store holds hundreds; 10 000
#: catches a slip of the keyboard (practical limit, no source).
MAX_COUNT = 10_000
CLOCK = re.compile(r"\s*(\d{1,2}):(\d{2})\s*")


def _whole(low: int, high: int, what: str = "a whole number") -> AfterValidator:
    """The range check of a whole-number field, written ``Annotated[StrictInt, _whole(low, high)]``."""

    def check(value: int) -> int:
        if not low <= value <= high:
            raise ValueError(f"{what} {low} to {high}")
        return value

    return AfterValidator(check)


def clock_check(value: Any) -> Any:
    """A time of day for pydantic: "HH:MM" text is kept as given, anything else is checked as hours."""
    if isinstance(value, str) and ":" in value:
        m = CLOCK.fullmatch(value)
        if m is None or int(m.group(1)) > 23 or int(m.group(2)) > 59:
            raise ValueError("a time of day HH:MM, 00:00 to 23:59, or hours such as '8.5 h'")
        return value
    return _HOURS.validate(value)


_HOURS = QuantitySpec("time", 0.0, 24.0, "h", bare_unit="h", keep_text=True)
#: A time of day: "08:30" (00:00 to 23:59) or hours after midnight, "8.5 h".
Clock = Annotated[Value, BeforeValidator(clock_check)]
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


def _iso_date(value: Any) -> date | None:
    """``plan.start``: a TOML date or ISO 8601 text; a date with a time of day is refused."""
    if value is None or (isinstance(value, date) and not isinstance(value, datetime)):
        return value
    if isinstance(value, str):
        try:
            return date.fromisoformat(value.strip())
        except ValueError:
            pass
    raise ValueError("a date such as 2026-03-02 (ISO 8601)")


#: Hours of a day, 0 to 24 h.
Hours = Annotated[AsGiven, quantity("time", 0.0, 24.0, "h", bare_unit="h", keep_text=True, description="hours a day")]
#: Days of lead time or safety stock, 0 to 10 years (practical limit, no source).
Days = Annotated[AsGiven, quantity("time", 0.0, 3650.0, "day", bare_unit="day", keep_text=True)]
Count = Annotated[StrictInt, _whole(0, MAX_COUNT)]
#: Cylinder pressures: checked in full (gauge or absolute, against the service pressure) by
#: estimator.physics.cylinders; here the dimension and a bound of twice the highest working pressure.
Pressure = Annotated[AsGiven, quantity("pressure", 0.0, 2 * MAX_PRESSURE_BAR, "bar", keep_text=True)]
#: Water capacity of one cylinder: up to 100 L (the largest medical cylinders hold about 50 L).
WaterCapacity = Annotated[AsGiven, quantity("volume", 0.0, 100.0, "L", bare_unit="L", low_open=True, keep_text=True)]
#: Cylinder temperature: the service range of medical gas cylinders (estimator.physics.cylinders).
Temperature = Annotated[AsGiven, quantity("temperature", *TEMPERATURE_RANGE, "degC", bare_unit="degC", keep_text=True)]
#: Cylinder masses up to 200 kg (estimator.physics.cylinders).
Mass = Annotated[AsGiven, quantity("mass", 0.0, 200.0, "kg", bare_unit="kg", keep_text=True)]
#: A flow of ventilation or drive gas; 0 to 200 L/min (estimator.planning.supply).
SupplyFlow = Annotated[AsGiven, quantity("flow", 0.0, 200.0, "L/min", bare_unit="L/min", keep_text=True)]


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
    # A bottle holds up to 5 L of liquid agent (estimator.planning.supply).
    volume: Annotated[AsGiven, quantity("volume", 0.0, 5000.0, "mL", bare_unit="mL", low_open=True, keep_text=True)] = (
        "250 mL"
    )
    opened: Annotated[AsGiven, quantity("volume", 0.0, 5000.0, "mL", bare_unit="mL", keep_text=True)] | None = None


class ConcentratorEntry(_Strict):
    name: str | None = None
    # Rated product flow of one concentrator: above 0 to 100 L/min (bedside units give 5-10 L/min,
    # plant-size ones up to about 100; practical limit, no source).
    rated_flow: Annotated[
        AsGiven, quantity("flow", 0.0, 100.0, "L/min", bare_unit="L/min", low_open=True, keep_text=True)
    ]
    hours_per_day: Hours = "24 h"
    start: Clock = "0 h"
    count: Annotated[StrictInt, _whole(0, 100)] = 1
    purity: Annotated[Value | list[list[Value]], BeforeValidator(_purity_check)] | None = None


class PipelineEntry(_Strict):
    name: str | None = None
    gas: str
    available: StrictBool = True


class AbsorbentEntry(_Strict):
    name: str = "CO2 absorbent"
    # Up to 10 t of absorbent in stock (estimator.planning.supply).
    stock: Annotated[AsGiven, quantity("mass", 0.0, 10000.0, "kg", bare_unit="kg", keep_text=True)]
    # CO2 a 100 g of absorbent takes up: above 0 to 26 L (the scenario contract's bound).
    co2_per_100g: (
        Annotated[AsGiven, quantity("volume", 0.0, 26.0, "L", bare_unit="L", low_open=True, keep_text=True)] | None
    ) = None


class CasePlan(_Strict):
    name: str | None = None
    scenario: str
    per_day: Annotated[StrictInt, _whole(0, 100)]
    days_per_week: Annotated[StrictInt, _whole(0, 7)] | None = None
    rooms: Annotated[StrictInt, _whole(1, 50)] = 1
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
    days_per_week: Annotated[StrictInt, _whole(0, 7)] = 7
    start: Clock = "8 h"


class Demand(_Strict):
    working_days_per_week: Annotated[StrictInt, _whole(0, 7)] = 5
    day_start: Clock = "8 h"
    cases: list[CasePlan] = []
    continuous: list[ContinuousDemand] = []


class PlanOptions(_Strict):
    start: Annotated[date | None, BeforeValidator(_iso_date)] = None
    lead_time: Days = "0 day"
    safety_stock: Days = "0 day"
    table_days: Annotated[StrictInt, _whole(1, 3650)] = 365


class SupplyOptions(_Strict):
    priority: list[str] = list(SOURCE_KINDS)
    ignore: list[str] = []


class Site(_Strict):
    # The ISO 2533 troposphere, as in the scenario contract (estimator.physics.site).
    ambient_pressure: (
        Annotated[AsGiven, quantity("pressure", *PRESSURE_RANGE, "kPa", bare_unit="kPa", keep_text=True)] | None
    ) = None
    elevation: Annotated[AsGiven, quantity("length", *ELEVATION_RANGE, "m", bare_unit="m", keep_text=True)] | None = (
        None
    )


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
