"""The record of a cylinder entry's contents, and the checks of its temperature and count.

Shared by the compressed-gas and nitrous oxide cylinders of :mod:`estimator.physics.cylinders` and by the
inventory schema (:mod:`estimator.inputs.inventory_file`), which bounds its fields with these ranges.

Examples
--------
>>> cylinder_count(3, "cylinders[0].count"), TEMPERATURE_RANGE
(3, (-40.0, 65.0))
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pint

from ..errors import InputError
from ..units import Q_, check_range, parse_quantity

COMPRESSED_GASES = ("oxygen", "air")
#: Cylinder temperatures accepted [degC]: the service range of medical gas cylinders, -40 to 65 degC
#: (common practice, no source); outside it the reading is rejected, not extrapolated.
TEMPERATURE_RANGE = (-40.0, 65.0)
#: Largest gauge pressure accepted without a stated service pressure [bar]: 300 bar is the highest
#: working pressure of medical cylinders in use (common practice, no source).
MAX_PRESSURE_BAR = 300.0


@dataclass(frozen=True)
class CylinderContents:
    """Contents of one cylinder entry (``count`` identical cylinders).

    Attributes
    ----------
    gas : str
    count : int
    contents : pint.Quantity [L] free gas in one cylinder now
    usable : pint.Quantity [L] free gas of all ``count`` cylinders above the change-out reserve
    compressibility : float or None
        Z at the cylinder state (compressed gases, or nitrous oxide above its critical temperature).
    ideal_contents : pint.Quantity or None [L], ideal-gas figure for one cylinder (compressed gases)
    pressure : pint.Quantity or None [kPa] absolute: the reading (compressed) or the pressure the
        contents imply (nitrous oxide)
    vapour_pressure : pint.Quantity or None [kPa] (nitrous oxide below its critical temperature)
    phase : str
        ``"gas"``, ``"liquid and vapour"``, ``"vapour only"`` or ``"supercritical"``.
    warnings : tuple of (code, message)
    """

    gas: str
    count: int
    contents: pint.Quantity
    usable: pint.Quantity
    compressibility: float | None = None
    ideal_contents: pint.Quantity | None = None
    pressure: pint.Quantity | None = None
    vapour_pressure: pint.Quantity | None = None
    net_weight: pint.Quantity | None = None
    phase: str = "gas"
    warnings: tuple[tuple[str, str], ...] = field(default=())


def cylinder_temperature(value: Any, field_name: str) -> pint.Quantity:
    """A cylinder temperature [K], within ``TEMPERATURE_RANGE`` (given in degC).

    Parameters
    ----------
    value : pint.Quantity, str or float
        Temperature of the cylinder [degC] when given without a unit.
    field_name : str
        Name of the input field, for the error message.

    Returns
    -------
    pint.Quantity
        Temperature [K].

    Raises
    ------
    InputError
        Outside -40 to 65 degC (service range of medical gas cylinders: common practice, no source).

    Examples
    --------
    >>> round(cylinder_temperature("20 degC", "cylinder.temperature").magnitude, 2)
    293.15
    """
    t = parse_quantity(value, field_name, "temperature", default_unit="degC")
    lo, hi = TEMPERATURE_RANGE
    check_range(t.to("degC"), field_name, Q_(lo, "degC"), Q_(hi, "degC"), value=value)
    return t.to("K")


def cylinder_count(value: Any, field_name: str) -> int:
    """A number of cylinders: a whole number, 0 or more (``True`` is not a number here).

    Parameters
    ----------
    value : int
        Number of identical cylinders [-].
    field_name : str
        Name of the input field, for the error message.

    Returns
    -------
    int
        The count, unchanged [-].

    Examples
    --------
    >>> cylinder_count(2, "cylinders[0].count")
    2
    """
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise InputError(field_name, value, "a whole number of cylinders, 0 or more")
    return value
