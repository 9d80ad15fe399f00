"""MAC of one agent at an age and ambient pressure: Mapleson's age correction, MAC as a partial pressure.

MAC (minimum alveolar concentration) falls with age by the same proportion for every agent,
about 6 % a decade (Mapleson 1996). MAC is a partial pressure: at a lower ambient pressure the same
MAC is a larger volume percent (common practice, no source). Mixtures (total MAC with nitrous
oxide) are in :mod:`estimator.physics.mac`.

References
----------
.. [1] Mapleson WW. Effect of age on MAC in humans: a meta-analysis. Br J Anaesth 1996;76:179-85
   (MAC(age) = MAC40 x 10^(-0.00269 (age - 40)); Table 2: MAC at 40 years).

Examples
--------
>>> round(mac_at_age("sevoflurane", "70 years").mac.to("percent").magnitude, 2)
1.49
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..limits import MAPLESON_VALID_FROM, SANE_AGE
from ..properties import Species, agent, gas
from ..units import Q_, STANDARD_ATMOSPHERE, check_range, parse_quantity
from .site import site_from_inputs

#: Slope of log10(MAC) against age [1/year] (Mapleson 1996).
MAPLESON_SLOPE = 0.00269
#: Reference age of the tabulated MAC values [year] (Mapleson 1996, Table 2).
MAPLESON_REFERENCE_AGE = 40.0
#: Ages [year] accepted at all.
AGE_RANGE = SANE_AGE
Warning = tuple[str, str]


@dataclass(frozen=True)
class AgeCorrectedMac:
    """MAC of one agent at a given age and ambient pressure.

    Attributes
    ----------
    agent : str
    age : pint.Quantity [year]
    mac : pint.Quantity [percent]
        End-tidal volume fraction that is 1 MAC at ``age`` and ``ambient_pressure``.
    factor : float or numpy.ndarray
        Mapleson's age factor, 10^(-0.00269 (age - 40)).
    ambient_pressure : pint.Quantity [kPa]
    warnings : tuple of (code, message)
    """

    agent: str
    age: pint.Quantity
    mac: pint.Quantity
    factor: float | np.ndarray
    ambient_pressure: pint.Quantity
    warnings: tuple[Warning, ...] = ()


def _species(name: Any, field: str) -> Species:
    if isinstance(name, Species):
        return name
    key = str(name).strip().lower().replace(" ", "_").replace("-", "_")
    if key in ("nitrous_oxide", "n2o"):
        return gas("nitrous_oxide", field)
    return agent(name, field)


def parse_age(age: Any, field: str = "patient.age") -> tuple[np.ndarray, list[Warning]]:
    """Ages in years as a float array, checked against 0-120 years, with the below-1-year warning.

    Parameters
    ----------
    age : str, float, numpy.ndarray or pint.Quantity
        Age [year]; a bare number (or array) is years.
    field : str
        Field name for error messages.

    Returns
    -------
    (numpy.ndarray [year], list of (code, message))

    Raises
    ------
    InputError
        Outside 0 to 120 years, or not an age.

    References
    ----------
    Mapleson WW. Br J Anaesth 1996;76:179-85 (the age correction was fitted above 1 year).

    Examples
    --------
    >>> parse_age("70 years")[0]
    array(70.)
    >>> parse_age(0.5)[1][0][0]
    'AGE_BELOW_MAPLESON_RANGE'
    """
    if isinstance(age, np.ndarray | list | tuple) or (isinstance(age, pint.Quantity) and np.ndim(age.magnitude) > 0):
        q = age if isinstance(age, pint.Quantity) else Q_(np.asarray(age, dtype=float), "year")
        if not q.check("[time]"):
            raise InputError(field, age, "an age such as '55 years'")
        years = np.asarray(q.to("year").magnitude, dtype=float)
    else:
        years = np.asarray(parse_quantity(age, field, "age", default_unit="year").to("year").magnitude, dtype=float)
    bad = ~np.isfinite(years) | (years < AGE_RANGE[0]) | (years > AGE_RANGE[1])
    if bad.any():
        shown = age if years.ndim == 0 else f"{years[bad].flat[0]:g} year"
        raise InputError(field, shown, f"{AGE_RANGE[0]:g} to {AGE_RANGE[1]:g} years")
    notes: list[Warning] = []
    if (years < MAPLESON_VALID_FROM).any():
        notes.append(
            (
                "AGE_BELOW_MAPLESON_RANGE",
                f"age below {MAPLESON_VALID_FROM:g} year: Mapleson's age correction was fitted to "
                "ages above 1 year; MAC in infants is not predicted by it",
            )
        )
    return years, notes


def parse_ambient_pressure(pressure: Any, field: str = "site.ambient_pressure") -> tuple[float, list[Warning]]:
    """Absolute ambient pressure in kPa, checked as the site model checks it (None: 101.325 kPa).

    The range and the warning above the limit of habitation are those of
    :func:`estimator.physics.site.site_from_inputs`; errors name ``field``.

    Parameters
    ----------
    pressure : pint.Quantity, str, float or None [kPa]
        Absolute ambient pressure; None for 101.325 kPa.
    field : str
        Field name for error messages.

    Returns
    -------
    tuple of (float, list of (code, message))
        Pressure [kPa] and the site warnings.

    Examples
    --------
    >>> parse_ambient_pressure("70 kPa")
    (70.0, [])
    """
    if pressure is None:
        return STANDARD_ATMOSPHERE.to("kPa").magnitude, []
    try:
        site = site_from_inputs(ambient_pressure=pressure)
    except InputError as exc:
        raise InputError(field, exc.value, exc.expected) from None
    return float(site.ambient_pressure.to("kPa").magnitude), list(site.warnings)


def mapleson_factor(age_years: float | np.ndarray) -> float | np.ndarray:
    """Mapleson's age factor 10^(-0.00269 (age - 40)), the ratio MAC(age) / MAC(40 years).

    Parameters
    ----------
    age_years : float or numpy.ndarray [year]
        Plain numbers, no checks (see :func:`parse_age` for checked input).

    Returns
    -------
    float or numpy.ndarray

    References
    ----------
    Mapleson WW. Br J Anaesth 1996;76:179-85.

    Examples
    --------
    >>> round(mapleson_factor(50), 4)
    0.94
    >>> mapleson_factor(np.array([40.0, 80.0])).round(3)
    array([1.   , 0.781])
    """
    out = 10.0 ** (-MAPLESON_SLOPE * (np.asarray(age_years, dtype=float) - MAPLESON_REFERENCE_AGE))
    return out if np.ndim(out) else float(out)


def mac_at_pressure(mac_one_atmosphere: Any, ambient_pressure: Any) -> pint.Quantity:
    """MAC as a volume fraction at another ambient pressure: MAC_vol(p) = MAC_vol(1 atm) x 101.325 kPa / p.

    MAC is a partial pressure, so at altitude the same MAC needs a larger volume percent
    (common practice, no source). No limit is applied to the result: a value above 100 % means the
    agent cannot reach 1 MAC at that pressure.

    Parameters
    ----------
    mac_one_atmosphere : str or pint.Quantity [percent]
        MAC volume fraction at 101.325 kPa.
    ambient_pressure : str or pint.Quantity [kPa], absolute

    Returns
    -------
    pint.Quantity [percent]

    References
    ----------
    Common practice, no source (Dalton's law of partial pressures).

    Examples
    --------
    >>> round(mac_at_pressure("1.8 %", "70 kPa").to("percent").magnitude, 3)
    2.605
    """
    mac = parse_quantity(mac_one_atmosphere, "mac", "fraction")
    kpa, _ = parse_ambient_pressure(ambient_pressure)
    return (mac * STANDARD_ATMOSPHERE.to("kPa").magnitude / kpa).to("percent")


def mac_at_age(
    name: Any,
    age: Any,
    ambient_pressure: Any = None,
    *,
    age_field: str = "patient.age",
    agent_field: str = "agent.name",
    pressure_field: str = "site.ambient_pressure",
) -> AgeCorrectedMac:
    """Age-corrected MAC of an agent (or nitrous oxide), as a volume percent at the ambient pressure.

    Parameters
    ----------
    name : str or Species
        Agent name (``"sevoflurane"``...) or ``"nitrous_oxide"``.
    age : str, float, numpy.ndarray or pint.Quantity [year]
        0 to 120 years; below 1 year a warning (outside Mapleson's fit).
    ambient_pressure : str or pint.Quantity [kPa], optional
        Absolute ambient pressure; default 101.325 kPa.

    Returns
    -------
    AgeCorrectedMac

    References
    ----------
    Mapleson WW. Br J Anaesth 1996;76:179-85 (formula and Table 2).

    Examples
    --------
    >>> r = mac_at_age("isoflurane", np.array([20.0, 60.0]))
    >>> r.mac.to("percent").magnitude.round(3)
    array([1.324, 1.034])
    """
    sp = _species(name, agent_field)
    if sp.mac40 is None:
        raise InputError(agent_field, sp.name, "an agent with a tabulated MAC")
    years, notes = parse_age(age, age_field)
    kpa, pnotes = parse_ambient_pressure(ambient_pressure, pressure_field)
    factor = mapleson_factor(years)
    mac40 = sp.mac40.to("percent").magnitude
    mac = Q_(mac40 * factor * STANDARD_ATMOSPHERE.to("kPa").magnitude / kpa, "percent")
    return AgeCorrectedMac(
        sp.name, Q_(years if years.ndim else float(years), "year"), mac, factor, Q_(kpa, "kPa"), tuple(notes + pnotes)
    )


def parse_fraction(value: Any, field: str) -> float:
    """A volume fraction 0 to 100 % as a float 0 to 1, or InputError naming ``field``.

    Parameters
    ----------
    value : pint.Quantity, str or float [%]
        A bare number is a fraction [-].
    field : str
        Field name for error messages.

    Returns
    -------
    float
        Fraction [-], 0 to 1.

    Examples
    --------
    >>> parse_fraction("67 %", "nitrous_oxide")
    0.67
    """
    q = parse_quantity(value, field, "fraction")
    check_range(q.to("percent"), field, Q_(0, "percent"), Q_(100, "percent"), value=value)
    return float(q.to("dimensionless").magnitude)
