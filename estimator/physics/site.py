"""Site conditions: ambient pressure from elevation (ISO 2533 standard atmosphere) and room temperature.

Ambient pressure follows the troposphere of the ISO 2533 / ICAO standard atmosphere,

.. math:: p = p_0 \\left(1 - \\frac{L H}{T_0}\\right)^{g_0 M / (R^* L)},

with :math:`p_0` = 101 325 Pa, :math:`T_0` = 288.15 K, lapse rate :math:`L` = 0.0065 K/m,
:math:`g_0` = 9.80665 m/s2, molar mass of air :math:`M` = 0.0289644 kg/mol and
:math:`R^*` = 8.31432 J/(mol K), so the exponent is 5.25588. :math:`H` is the *geopotential*
height, :math:`H = r h / (r + h)` of a geometric elevation h (earth radius :math:`r` = 6 356 766 m).
The formula holds from -500 m to 11 000 m (the tropopause); elevations outside are rejected, and
above 6000 m (no permanent habitation) a result carries a warning.

The standard atmosphere is a yearly mean (weather moves a site's pressure by a few per cent): give a
barometer reading as ``ambient_pressure`` where one is at hand. If both are given, the **pressure is
used** and the elevation is a check: a pressure outside 0.85 to 1.08 times the standard value there
(wider than the recorded sea-level extremes, about 870 to 1085 hPa) is rejected as a likely mistake.
The room temperature (default 20 degC, the flowmeters' calibration temperature) is that of the gas in
the machine, not the outside air's standard-atmosphere temperature.

The oxygen the patient receives at the site's pressure (PiO2) is in
:mod:`estimator.physics.inspired_oxygen`.

References
----------
.. [1] ISO 2533:1975 Standard Atmosphere (troposphere, geopotential height, constants; from memory).
.. [2] ICAO Doc 7488/3, Manual of the ICAO Standard Atmosphere, 3rd ed. 1993 (same values to 32 km;
   from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..limits import HABITATION_LIMIT, TEMPERATURE_USUAL
from ..units import Q_, STANDARD_ATMOSPHERE, check_range, parse_quantity

#: ISO 2533:1975 constants (troposphere).
P0 = 101325.0  # Pa
T0 = 288.15  # K
LAPSE_RATE = 0.0065  # K/m
G0 = 9.80665  # m/s2
MOLAR_MASS_AIR = 0.02896442  # kg/mol
R_STAR = 8.31432  # J/(mol K), the standard's own value (not CODATA's GAS_CONSTANT: it defines the atmosphere)
EARTH_RADIUS = 6356766.0  # m
EXPONENT = G0 * MOLAR_MASS_AIR / (R_STAR * LAPSE_RATE)


def _out(x: Any) -> Any:
    """A 0-d array as a Python float, anything else unchanged (scalar in, scalar out)."""
    arr = np.asarray(x, dtype=float)
    return float(arr) if arr.ndim == 0 else arr


#: Elevations [m] the troposphere formula covers; above HABITATION_LIMIT a warning.
ELEVATION_RANGE = (-500.0, 11000.0)
#: Ambient pressures [kPa] accepted directly (the standard pressures at 11 000 m and -500 m,
#: rounded outwards; hyperbaric use is outside the model).
PRESSURE_RANGE = (22.6, 108.5)
#: Accepted ratio of a measured pressure to the standard value at the stated elevation.
PRESSURE_CONSISTENCY = (0.85, 1.08)
#: Room temperature [degC] accepted; outside TEMPERATURE_USUAL (estimator.limits) a warning.
TEMPERATURE_RANGE = (-20.0, 50.0)
DEFAULT_TEMPERATURE = Q_(20.0, "degC")


@dataclass(frozen=True)
class Site:
    """Conditions at the anaesthetic machine.

    Attributes
    ----------
    elevation : pint.Quantity [m] or None
        Geometric elevation above mean sea level as given (None when only a pressure was given).
    ambient_pressure : pint.Quantity [kPa]
        Absolute ambient (barometric) pressure used by the models.
    temperature : pint.Quantity [degC]
        Room and gas temperature.
    warnings : tuple of (code, message)
    basis : str
        ``"standard atmosphere"``, ``"measured pressure"`` or ``"sea level (default)"``.
    """

    elevation: pint.Quantity | None
    ambient_pressure: pint.Quantity
    temperature: pint.Quantity
    warnings: tuple[tuple[str, str], ...] = field(default=())
    basis: str = "standard atmosphere"

    @property
    def pressure_altitude(self) -> pint.Quantity:
        """Elevation of the standard atmosphere that has this pressure [m]."""
        return pressure_altitude(self.ambient_pressure)


def geopotential_height(h: Any) -> Any:
    """Geopotential height H = r h / (r + h) [m] of a geometric height h [m] (ISO 2533).

    Parameters
    ----------
    h : float or numpy.ndarray [m]
        Geometric height above mean sea level.

    Returns
    -------
    numpy.ndarray [m]
        Geopotential height, with the earth radius r = 6 356 766 m of the standard; a 0-d array for a
        scalar ``h``.

    References
    ----------
    ISO 2533:1975 Standard Atmosphere (geopotential height and earth radius); ICAO Doc 7488/3, 3rd ed.
    1993 (the same definition); both from memory.

    Examples
    --------
    >>> round(float(geopotential_height(3000.0)), 1)
    2998.6
    """
    h = np.asarray(h, dtype=float)
    return EARTH_RADIUS * h / (EARTH_RADIUS + h)


def standard_atmosphere(elevation: pint.Quantity, geopotential: bool = False) -> tuple[pint.Quantity, pint.Quantity]:
    """Pressure and temperature of the ISO 2533 standard troposphere.

    Parameters
    ----------
    elevation : pint.Quantity [m]
        Height above mean sea level; scalar or array. Geometric unless ``geopotential``.
    geopotential : bool
        Treat ``elevation`` as geopotential height (the argument of the ISO 2533 tables).

    Returns
    -------
    pressure : pint.Quantity [kPa]
        Absolute pressure of the standard troposphere; a plain float magnitude for a scalar elevation.
    temperature : pint.Quantity [K]
        Air temperature of the standard troposphere (288.15 K less 6.5 K per km of geopotential height).

    Raises
    ------
    InputError
        Outside -500 to 11 000 m.

    References
    ----------
    ISO 2533:1975 Standard Atmosphere (troposphere: constants, lapse rate, pressure formula); ICAO
    Doc 7488/3, Manual of the ICAO Standard Atmosphere, 3rd ed. 1993 (same values); both from memory.
    tests/test_site.py checks the result against the tables at 0 to 11 000 m.

    Examples
    --------
    >>> p, t = standard_atmosphere(Q_(0, "m"))
    >>> p.to("kPa").magnitude, t.to("degC").magnitude
    (101.325, 15.0)
    """
    h = np.asarray(elevation.to("m").magnitude, dtype=float)
    if np.any(h < ELEVATION_RANGE[0]) or np.any(h > ELEVATION_RANGE[1]):
        raise InputError(
            "site.elevation",
            f"{elevation:~P}",
            f"{ELEVATION_RANGE[0]:g} to {ELEVATION_RANGE[1]:g} m (ISO 2533 troposphere)",
        )
    big_h = h if geopotential else geopotential_height(h)
    temperature = T0 - LAPSE_RATE * big_h
    pressure = P0 * (temperature / T0) ** EXPONENT
    return Q_(_out(pressure / 1000.0), "kPa"), Q_(_out(temperature), "K")


def ambient_pressure_at(elevation_m: Any) -> Any:
    """Standard-atmosphere pressure [kPa, plain float or array] at a geometric elevation [m].

    The plain-number form of :func:`standard_atmosphere` for the engine's inner code.

    Parameters
    ----------
    elevation_m : float or numpy.ndarray [m]
        Geometric elevation above mean sea level, -500 to 11 000 m.

    Returns
    -------
    float or numpy.ndarray [kPa]
        Absolute pressure of the standard troposphere.

    Raises
    ------
    InputError
        As :func:`standard_atmosphere`.

    References
    ----------
    ISO 2533:1975 Standard Atmosphere; ICAO Doc 7488/3, 3rd ed. 1993 (both from memory), as
    :func:`standard_atmosphere`.

    Examples
    --------
    >>> round(ambient_pressure_at(3000.0), 3)
    70.121
    """
    return standard_atmosphere(Q_(elevation_m, "m"))[0].to("kPa").magnitude


def pressure_altitude(pressure: pint.Quantity) -> pint.Quantity:
    """Geometric elevation [m] at which the standard troposphere has ``pressure``.

    Parameters
    ----------
    pressure : pint.Quantity [kPa]
        Absolute pressure; scalar or array.

    Returns
    -------
    pint.Quantity [m]
        Geometric elevation: the troposphere formula inverted for geopotential height H, then
        h = r H / (r - H). Not range-checked (the callers check the pressure).

    References
    ----------
    ISO 2533:1975 Standard Atmosphere; ICAO Doc 7488/3, 3rd ed. 1993 (the pressure formula and the
    geopotential height, inverted here; both from memory).

    Examples
    --------
    >>> round(pressure_altitude(Q_(70.121, "kPa")).to("m").magnitude)
    3000
    """
    p = np.asarray(pressure.to("Pa").magnitude, dtype=float)
    big_h = T0 / LAPSE_RATE * (1.0 - (p / P0) ** (1.0 / EXPONENT))
    return Q_(_out(EARTH_RADIUS * big_h / (EARTH_RADIUS - big_h)), "m")


def _height_warning(elevation_m: float) -> list[tuple[str, str]]:
    if elevation_m > HABITATION_LIMIT:
        return [
            (
                "SITE_ABOVE_HABITATION",
                f"elevation {elevation_m:.0f} m is above {HABITATION_LIMIT:.0f} m: "
                "no permanent habitation; the site models are not validated there",
            )
        ]
    return []


def site_from_inputs(elevation: Any = None, ambient_pressure: Any = None, temperature: Any = None) -> Site:
    """Build a :class:`Site` from user inputs (strings, numbers or quantities).

    Parameters
    ----------
    elevation : str or pint.Quantity [m], optional
        Geometric elevation above mean sea level; a bare number is metres.
    ambient_pressure : str or pint.Quantity [kPa], optional
        Measured absolute barometric pressure; a bare number is kPa. Used in preference to the
        elevation when both are given (see the module notes for the consistency check).
    temperature : str or pint.Quantity [degC], optional
        Room and gas temperature, default 20 degC.

    Returns
    -------
    Site
        Ambient pressure [kPa], temperature [degC], warnings and basis. With neither elevation nor
        pressure: sea level, 101.325 kPa.

    Raises
    ------
    InputError
        Elevation outside -500 to 11 000 m, pressure outside 22.6 to 108.5 kPa, a pressure that
        does not fit the given elevation, or a temperature outside -20 to 50 degC.

    References
    ----------
    ISO 2533:1975 Standard Atmosphere; ICAO Doc 7488/3, 3rd ed. 1993 (pressure from elevation; both from
    memory). The accepted ranges and the consistency band are the package's (see the module notes).

    Examples
    --------
    >>> site_from_inputs(ambient_pressure="70 kPa").ambient_pressure
    <Quantity(70.0, 'kilopascal')>
    >>> site_from_inputs().basis
    'sea level (default)'
    >>> round(site_from_inputs(elevation="2400 m").ambient_pressure.to("kPa").magnitude, 1)
    75.6
    """
    notes: list[tuple[str, str]] = []
    temp = DEFAULT_TEMPERATURE
    if temperature is not None:
        temp = parse_quantity(temperature, "site.temperature", "temperature", "degC")
    t_lo, t_hi = (Q_(t, "degC") for t in TEMPERATURE_RANGE)
    check_range(temp.to("degC"), "site.temperature", t_lo, t_hi, value=temperature)
    t_c = float(temp.to("degC").magnitude)
    if not TEMPERATURE_USUAL[0] <= t_c <= TEMPERATURE_USUAL[1]:
        notes.append(
            (
                "SITE_TEMPERATURE_UNUSUAL",
                f"room temperature {t_c:g} degC is outside "
                f"{TEMPERATURE_USUAL[0]:g} to {TEMPERATURE_USUAL[1]:g} degC, the usual operating range of "
                "anaesthetic equipment",
            )
        )
    elev = None
    if elevation is not None:
        elev = parse_quantity(elevation, "site.elevation", "length", "m")
        check_range(elev.to("m"), "site.elevation", *ELEVATION_RANGE, value=elevation)
    pres = None
    if ambient_pressure is not None:
        pres = parse_quantity(ambient_pressure, "site.ambient_pressure", "pressure", "kPa").to("kPa")
        check_range(pres, "site.ambient_pressure", *PRESSURE_RANGE, value=ambient_pressure)

    if pres is None:
        if elev is None:
            return Site(None, STANDARD_ATMOSPHERE.to("kPa"), temp, tuple(notes), "sea level (default)")
        p_std, _ = standard_atmosphere(elev)
        notes += _height_warning(float(elev.to("m").magnitude))
        return Site(elev, Q_(float(p_std.magnitude), "kPa"), temp, tuple(notes), "standard atmosphere")
    if elev is not None:
        p_elev = float(standard_atmosphere(elev)[0].magnitude)
        lo, hi = (p_elev * k for k in PRESSURE_CONSISTENCY)
        if not lo <= float(pres.magnitude) <= hi:
            raise InputError(
                "site.ambient_pressure",
                ambient_pressure,
                f"{lo:.1f} to {hi:.1f} kPa to fit elevation {elev:~P} (standard {p_elev:.1f} kPa); "
                "give an absolute pressure, or only one of the two",
            )
    notes += _height_warning(float(pressure_altitude(pres).magnitude))
    return Site(elev, pres, temp, tuple(notes), "measured pressure")
