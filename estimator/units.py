"""The package's one pint unit registry, parsing of user strings and JSON (de)serialisation.

Every quantity that enters or leaves the package passes through here. Inside the hot loops the
engine works in plain floats in a fixed internal unit system (mmol, min, L, kPa, K); conversion
happens once, at the boundary.

Conventions
-----------
* Gas volumes are free gas at a stated reference. Unless an output says otherwise the reference is
  15 degC and 101.325 kPa, the convention for cylinder contents (``GAS_VOLUME_REFERENCE``).
* Pressures read off a gauge are *gauge* pressures. Strings may say so explicitly with ``bar(g)``,
  ``barg``, ``kPa(g)``, ``psig`` (gauge) or ``bar(a)``, ``bara``, ``psia`` (absolute). Gauge is never
  parsed as "bar times gram": the suffix is stripped before pint sees the unit.
* Temperatures are offset units: ``"15 degC"`` is 288.15 K, and a temperature is never multiplied.
* ``MAC`` is a unit of its own dimension (anaesthetic potency), so ``"1 MAC"`` and ``"2 %"`` are told
  apart by dimension.

Examples
--------
>>> parse_quantity("2 L/min", "oxygen", "flow").to("mL/min").magnitude
2000.0
>>> parse_quantity("15 degC", "temperature", "temperature").to("K").magnitude
288.15
>>> parse_pressure("137 bar(g)", "pressure").reference
'gauge'
>>> quantity_from_json(quantity_to_json(Q_(70, "kg")))
<Quantity(70.0, 'kilogram')>
"""

from __future__ import annotations

import functools
import math
import re
from dataclasses import dataclass
from typing import Any, Literal

import pint

from .constants import REFERENCE_TEMPERATURE_C, STANDARD_PRESSURE_KPA
from .errors import InputError


def _registry() -> pint.UnitRegistry:
    """The package's own registry; pint's global application registry is left alone.

    Pint's parsed definition files are cached in pint's user cache folder (about 0.1 s saved at every
    start); where that folder cannot be used the registry is built without a cache.
    """
    try:
        reg: pint.UnitRegistry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except Exception:  # noqa: BLE001 - an unusable cache folder must never stop a run
        reg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=None)
    reg.define("MAC = [anaesthetic_potency]")
    reg.define("MAC_hour = MAC * hour = MACh")
    reg.define("breath = [] = breaths")
    reg.formatter.default_format = "~P"
    _cache_unit_parsing(reg)
    return reg


def _cache_unit_parsing(reg: pint.UnitRegistry) -> None:
    """Parse each unit string once: pint parses ``"L/min"`` again at every ``Q_(x, "L/min")`` and
    ``.to("mL")`` (about 10 and 35 us), which dominated a case's set-up and totals. The cache is on
    this registry only, keyed by the exact arguments, so results are the same as without it."""
    parse = reg.parse_units_as_container

    @functools.lru_cache(maxsize=4096)
    def cached(text: str, as_delta: bool | None, case_sensitive: bool | None) -> Any:
        return parse(text, as_delta, case_sensitive)

    def parse_units_as_container(input_string: Any, as_delta: bool | None = None, case_sensitive: bool | None = None):
        if isinstance(input_string, str):
            return cached(input_string, as_delta, case_sensitive)
        return parse(input_string, as_delta, case_sensitive)

    # On this registry only, not its class (an instance attribute: mypy forbids assigning to a method).
    setattr(reg, "parse_units_as_container", parse_units_as_container)  # noqa: B010


ureg = _registry()
Q_ = ureg.Quantity
Quantity = pint.Quantity

#: Reference condition of every gas volume the package reports (cylinder-contents convention).
REFERENCE_TEMPERATURE = Q_(REFERENCE_TEMPERATURE_C, "degC")
REFERENCE_PRESSURE = Q_(STANDARD_PRESSURE_KPA, "kPa")
GAS_VOLUME_REFERENCE = "free gas at 15 degC and 101.325 kPa (dry)"
STANDARD_ATMOSPHERE = Q_(STANDARD_PRESSURE_KPA, "kPa")

#: Named dimensions accepted by :func:`parse_quantity`, with an example for error messages.
DIMENSIONS: dict[str, tuple[str, str]] = {
    "flow": ("[length] ** 3 / [time]", "a flow such as '2 L/min'"),
    "volume": ("[length] ** 3", "a volume such as '6 L'"),
    "mass": ("[mass]", "a mass such as '70 kg'"),
    "time": ("[time]", "a time such as '10 min'"),
    "age": ("[time]", "an age such as '55 years'"),
    "pressure": ("[mass] / [length] / [time] ** 2", "a pressure such as '137 bar'"),
    "temperature": ("[temperature]", "a temperature such as '15 degC'"),
    "fraction": ("[]", "a fraction such as '2 %' or '0.02'"),
    "mac": ("[anaesthetic_potency]", "a MAC multiple such as '1 MAC'"),
    "length": ("[length]", "a length such as '3000 m'"),
    "mass_flow": ("[mass] / [time]", "a mass flow such as '1 g/h'"),
    "rate": ("1 / [time]", "a rate such as '12 /min'"),
}

_NUMBER = r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?"
_SPLIT = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$")
_GAUGE = re.compile(
    r"^(?P<unit>bar|kPa|MPa|Pa|psi)\s*(?:\((?P<p>[ga])\)|(?P<s>[ga])|\s+(?P<w>gauge|absolute|abs))$", re.IGNORECASE
)
_UNIT_ALIASES = {
    "%": "percent",
    "years": "year",
    "yr": "year",
    "y": "year",
    "l/min": "L/min",
    "ml/min": "mL/min",
    "c": "degC",
    "°c": "degC",
    "deg c": "degC",
    "celsius": "degC",
}


def _unit_text(text: str) -> str:
    text = text.strip().replace("°C", "degC").replace("℃", "degC")
    if text.startswith("/"):
        text = "1" + text
    return _UNIT_ALIASES.get(text.lower(), text)


def _to_quantity(value: Any, field: str, expected: str) -> pint.Quantity:
    """Turn a string, number or Quantity into a Quantity without dimension checks."""
    if isinstance(value, pint.Quantity):
        return Q_(value.magnitude, value.units)
    if isinstance(value, bool):
        raise InputError(field, value, expected)
    if isinstance(value, int | float):
        return Q_(float(value), "dimensionless")
    if isinstance(value, dict) and set(value) == {"magnitude", "units"}:
        mag = value["magnitude"]
        if isinstance(mag, bool) or not isinstance(mag, int | float):
            raise InputError(field, value, f"{expected} (a JSON quantity needs a number as its magnitude)")
        return quantity_from_json(value, field)
    if not isinstance(value, str):
        raise InputError(field, value, expected)
    match = _SPLIT.match(value)
    if not match:
        raise InputError(field, value, expected)
    number, unit = match.groups()
    if _GAUGE.match(unit.strip()) or unit.strip().lower() in ("psig", "psia"):
        raise InputError(
            field, value, f"{expected}, without a gauge or absolute marker (those belong to cylinder pressures)"
        )
    try:
        magnitude = float(number)
        units = ureg.parse_units(_unit_text(unit)) if unit else ureg.dimensionless
    except Exception:  # noqa: BLE001 - pint's parser raises many kinds (TokenError, IndexError...) on odd text
        raise InputError(field, value, expected) from None
    return Q_(magnitude, units)


def parse_quantity(value: Any, field: str, dimension: str, default_unit: str | None = None) -> pint.Quantity:
    """Parse a user value into a pint Quantity of the named dimension.

    Parameters
    ----------
    value : str, float, int, dict or pint.Quantity
        ``"2 L/min"``, ``"70 kg"``, ``"2 %"``, ``"55 years"``, a JSON quantity, or a bare number
        (allowed only when ``default_unit`` is given, or the dimension is ``"fraction"``).
    field : str
        Field name used in the error message.
    dimension : str
        One of the keys of :data:`DIMENSIONS`.
    default_unit : str, optional
        Unit applied to a bare number.

    Returns
    -------
    pint.Quantity

    Raises
    ------
    InputError
        If the value does not parse, is not finite, or has the wrong dimension.

    Examples
    --------
    >>> parse_quantity("70 kg", "patient.weight", "mass")
    <Quantity(70.0, 'kilogram')>
    >>> parse_quantity("6 L", "phases[0].oxygen", "flow")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: phases[0].oxygen: got '6 L'; expected a flow such as '2 L/min' (got a volume)
    """
    dim, example = DIMENSIONS[dimension]
    q = _to_quantity(value, field, example)
    bare = q.units == ureg.dimensionless and not isinstance(value, pint.Quantity)
    if bare and default_unit:
        q = Q_(q.magnitude, default_unit)
    elif bare and dimension == "fraction" and math.isfinite(q.magnitude) and abs(q.magnitude) > 1:
        raise InputError(field, value, f"a fraction: write '{q.magnitude:g} %' or {q.magnitude / 100:g} ({BARE_RULE})")
    if not math.isfinite(float(q.magnitude)):
        raise InputError(field, value, f"a finite value ({example})")
    if not q.check(dim):
        raise InputError(field, value, f"{example} (got {_describe(q)})")
    return q


def _describe(q: pint.Quantity) -> str:
    for name, (dim, _) in DIMENSIONS.items():
        if name == "age":
            continue
        if q.check(dim):
            return {"fraction": "a dimensionless number", "mac": "a MAC multiple"}.get(
                name, f"a {name.replace('_', ' ')}"
            )
    return f"'{unit_label(q.units)}', a unit of another kind"


def check_range(
    q: pint.Quantity, field: str, low: Any, high: Any, *, value: Any = None, low_inclusive: bool = True
) -> pint.Quantity:
    """Check ``low <= q <= high`` (``low < q`` if not ``low_inclusive``) or raise InputError.

    The range is stated in the unit the user typed, when the value came with one.

    Examples
    --------
    >>> check_range(Q_(5, "L/min"), "oxygen", Q_(0, "L/min"), Q_(15, "L/min")).magnitude
    5
    >>> check_range(Q_(0.2, ""), "o2", 0.21, 1.0, value="20 %")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: o2: got '20 %'; expected 21 to 100 %
    """
    lo = low if isinstance(low, pint.Quantity) else Q_(low, q.units)
    hi = high if isinstance(high, pint.Quantity) else Q_(high, q.units)
    mag = q.to(lo.units).magnitude
    ok_low = mag >= lo.magnitude if low_inclusive else mag > lo.magnitude
    if not (ok_low and mag <= hi.to(lo.units).magnitude):
        unit = lo.units
        raise InputError(
            field,
            value if value is not None else f"{q:~P}",
            range_text(lo.magnitude, hi.to(unit).magnitude, unit, value, low_open=not low_inclusive),
        )
    return q


#: How a bare number is read where a fraction is expected (the rule every contract and option shares).
BARE_RULE = "a bare number is a fraction of 1: 0.7 means 70 %; write a percent with its sign, '70 %'"

#: Unit symbols shown to users: pint's short forms that readers misread, and their common names.
_LABELS = {"a": "years", "d": "days", "wk": "weeks", "l": "L", "ml": "mL", "dl": "dL", "kl": "kL", "MACh": "MAC-h"}


def unit_label(units: Any) -> str:
    """A unit as users write it: ``years`` not ``a``, ``L/min`` not ``l/min``.

    >>> unit_label(ureg.year), unit_label(ureg("mL/min").units), unit_label(ureg.percent)
    ('years', 'mL/min', '%')
    """
    text = f"{ureg.Unit(units):~P}" if not isinstance(units, str) else units
    return re.sub(r"[A-Za-z]+", lambda m: _LABELS.get(m.group(0), m.group(0)), text)


def _typed_unit(value: Any, fallback: Any) -> Any:
    """The unit of a user's string if it has the dimension of ``fallback``, else ``fallback``."""
    if not isinstance(value, str) or isinstance(value, bool):
        return fallback
    match = _SPLIT.match(value)
    if not match or not match.group(2):
        return fallback
    try:
        units = ureg.parse_units(_unit_text(match.group(2)))
    except Exception:  # noqa: BLE001 - any unparsable unit keeps the fallback
        return fallback
    return units if ureg.Quantity(1, units).check(ureg.Quantity(1, fallback).dimensionality) else fallback


def range_text(low: float, high: float, unit: Any, value: Any = None, *, low_open: bool = False) -> str:
    """``"0 to 120 years"``: a range in ``unit``, or in the unit of ``value`` when it has one.

    >>> range_text(0.21, 1.0, "dimensionless", "20 %")
    '21 to 100 %'
    >>> range_text(0, 120, "year", "130 years")
    '0 to 120 years'
    """
    units = ureg.Unit(unit) if isinstance(unit, str) else unit
    shown = _typed_unit(value, units)
    lo, hi = (float(Q_(x, units).to(shown).magnitude) for x in (low, high))
    label = unit_label(shown)
    return f"{'above ' if low_open else ''}{lo:.6g} to {hi:.6g}{' ' + label if label else ''}"


@dataclass(frozen=True)
class PressureReading:
    """A pressure with its reference made explicit.

    Attributes
    ----------
    quantity : pint.Quantity
        The number as read, in pressure units.
    reference : {"gauge", "absolute"}
        Gauge readings are relative to the ambient pressure where they are read.
    """

    quantity: pint.Quantity
    reference: Literal["gauge", "absolute"]

    def absolute(self, ambient: pint.Quantity = STANDARD_ATMOSPHERE) -> pint.Quantity:
        """Absolute pressure; a gauge reading adds the ambient pressure.

        >>> PressureReading(Q_(137, "bar"), "gauge").absolute().to("bar").magnitude
        138.01325
        """
        if self.reference == "absolute":
            return self.quantity
        return (self.quantity + ambient.to(self.quantity.units)).to(self.quantity.units)

    def gauge(self, ambient: pint.Quantity = STANDARD_ATMOSPHERE) -> pint.Quantity:
        """Gauge pressure relative to ``ambient``."""
        if self.reference == "gauge":
            return self.quantity
        return (self.quantity - ambient.to(self.quantity.units)).to(self.quantity.units)


def parse_pressure(
    value: Any, field: str, default_reference: Literal["gauge", "absolute"] = "gauge"
) -> PressureReading:
    """Parse a pressure, honouring an explicit gauge or absolute marker.

    ``"137 bar(g)"``, ``"137 barg"``, ``"137 bar gauge"`` and ``"20 psig"`` are gauge;
    ``"1 bar(a)"``, ``"1 bara"``, ``"14.7 psia"`` are absolute; a plain ``"137 bar"`` takes
    ``default_reference`` (gauge for anything read off a cylinder gauge).

    Examples
    --------
    >>> r = parse_pressure("137 bar(g)", "cylinders[0].pressure")
    >>> r.reference, r.quantity.to("bar").magnitude
    ('gauge', 137.0)
    >>> parse_pressure("2 bara", "p").reference
    'absolute'
    """
    example = "a pressure such as '137 bar', '137 bar(g)' or '1 bar(a)'"
    if isinstance(value, str):
        match = _SPLIT.match(value)
        if not match:
            raise InputError(field, value, example)
        number, unit = match.groups()
        unit = unit.strip()
        if unit.lower() in ("psig", "psia"):
            return PressureReading(
                parse_quantity(f"{number} psi", field, "pressure"), "gauge" if unit.lower() == "psig" else "absolute"
            )
        g = _GAUGE.match(unit)
        if g:
            marker = (g.group("p") or g.group("s") or g.group("w")).lower()
            reference: Literal["gauge", "absolute"] = "gauge" if marker.startswith("g") else "absolute"
            base = {"bar": "bar", "kpa": "kPa", "mpa": "MPa", "pa": "Pa", "psi": "psi"}[g.group("unit").lower()]
            return PressureReading(parse_quantity(f"{number} {base}", field, "pressure"), reference)
        if unit.lower().endswith(("g)", "a)")) or re.search(r"\bgram|\bg\b", unit):
            raise InputError(field, value, example)
    return PressureReading(parse_quantity(value, field, "pressure"), default_reference)


def quantity_to_json(q: pint.Quantity) -> dict[str, Any]:
    """Serialise a Quantity as ``{"magnitude": float, "units": str}``.

    Array magnitudes become lists. The unit string is pint's long form, which parses back.

    >>> quantity_to_json(Q_(2.5, "L/min"))
    {'magnitude': 2.5, 'units': 'liter / minute'}
    """
    mag = q.magnitude
    if hasattr(mag, "tolist"):
        mag = mag.tolist()
    else:
        mag = float(mag)
    return {"magnitude": mag, "units": format(q.units, "D")}


def quantity_from_json(data: dict[str, Any], field: str = "quantity") -> pint.Quantity:
    """Inverse of :func:`quantity_to_json`.

    >>> quantity_from_json({"magnitude": 2.5, "units": "liter / minute"}).to("mL/min").magnitude
    2500.0
    """
    try:
        return Q_(data["magnitude"], ureg.parse_units(data["units"]) if data["units"] else ureg.dimensionless)
    except Exception:  # noqa: BLE001 - pint's parser raises many kinds on odd unit text
        raise InputError(field, data, "an object {'magnitude': number, 'units': 'pint unit string'}") from None
