"""Liquid agent and vapour volumes in closed form: Dion's formula, molar volume, vaporizer output.

* Dion's formula for the liquid agent (and its cost) delivered at a concentration and fresh gas
  flow, and the same with the molar volume at a stated temperature and pressure.
* The vaporizer output correction D / (1 - D).
* The vapour volume given by one millilitre of liquid agent (ideal gas).

Dion's formula gives what the vaporizer delivers, not what the patient takes up (at low flow far
less is used). The uptake laws are in :mod:`estimator.physics.closed_form`.

References
----------
.. [1] Dion P. The cost of anaesthetic vapours. Can J Anaesth 1992;39:633-4.
.. [2] Biro P. Calculation of volatile anaesthetics consumption from agent concentration and fresh
   gas flow. Acta Anaesthesiol Scand 2014;58:968-72 (vapour from 1 mL of liquid agent).

Examples
--------
>>> round(dion_liquid_volume("1 %", "1 L/min", "60 min", "isoflurane").to("mL").magnitude, 2)
3.06
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..properties import VolatileAgent, agent
from ..units import Q_, STANDARD_ATMOSPHERE, check_range, parse_quantity, ureg
from .mac_age import parse_fraction

#: Dion's constant: 100 (percent) x 24.12 L/mol, the molar volume of an ideal gas near 21 degC.
DION_CONSTANT = 2412.0


def _species(name: Any, field: str = "agent.name") -> VolatileAgent:
    return name if isinstance(name, VolatileAgent) else agent(name, field)


def _dion_inputs(concentration: Any, fresh_gas_flow: Any, duration: Any) -> tuple[float, float, float]:
    c = parse_fraction(concentration, "concentration")
    fgf = parse_quantity(fresh_gas_flow, "fresh_gas_flow", "flow", default_unit="L/min")
    check_range(fgf, "fresh_gas_flow", Q_(0, "L/min"), Q_(100, "L/min"), value=fresh_gas_flow)
    t = parse_quantity(duration, "duration", "time", default_unit="min")
    check_range(t, "duration", Q_(0, "min"), Q_(1e6, "min"), value=duration)
    return c, float(fgf.to("L/min").magnitude), float(t.to("min").magnitude)


def dion_liquid_volume(concentration: Any, fresh_gas_flow: Any, duration: Any, name: Any) -> pint.Quantity:
    """Liquid agent delivered, Dion's formula: C% x FGF x t x MW / (2412 x density) [mL].

    Delivered vapour, not uptake. 2412 = 100 x 24.12 L/mol, the ideal-gas molar volume near
    21 degC; for another temperature use :func:`liquid_volume_at`.

    Parameters
    ----------
    concentration : fraction (``"1 %"``)
    fresh_gas_flow : [L/min], the total flow carrying the vapour
    duration : [min]
    name : str
        Volatile agent (molar mass and liquid density from the data table).

    Returns
    -------
    pint.Quantity [mL] of liquid

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633-4.

    Examples
    --------
    >>> round(dion_liquid_volume("2 %", "1 L/min", "1 h", "sevoflurane").magnitude, 2)
    6.55
    """
    c, fgf, t = _dion_inputs(concentration, fresh_gas_flow, duration)
    sp = _species(name)
    mw = sp.molar_mass.to("g/mol").magnitude
    rho = sp.liquid_density.to("g/mL").magnitude
    return Q_(100.0 * c * fgf * t * mw / (DION_CONSTANT * rho), "mL")


def dion_cost(concentration: Any, fresh_gas_flow: Any, duration: Any, name: Any, price_per_ml: float) -> float:
    """Cost of the liquid agent by Dion's formula: liquid mL x price per mL (in the price's currency).

    Parameters
    ----------
    concentration : pint.Quantity or str [%]
        Delivered agent fraction (``"1 %"``).
    fresh_gas_flow : pint.Quantity or str [L/min]
    duration : pint.Quantity or str [min]
    name : str
        Volatile agent.
    price_per_ml : float [currency/mL]

    Returns
    -------
    float
        Cost [currency].

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633-4.

    Examples
    --------
    >>> round(dion_cost("1 %", "1 L/min", "60 min", "isoflurane", 0.25), 3)
    0.765
    """
    if (
        isinstance(price_per_ml, bool)
        or not isinstance(price_per_ml, int | float)
        or not (np.isfinite(price_per_ml) and price_per_ml >= 0)
    ):
        raise InputError("price_per_ml", price_per_ml, "a price per mL of 0 or more")
    return float(dion_liquid_volume(concentration, fresh_gas_flow, duration, name).magnitude * price_per_ml)


def molar_volume(temperature: Any = "20 degC", pressure: Any = STANDARD_ATMOSPHERE) -> pint.Quantity:
    """Ideal-gas molar volume R T / p [L/mol] at a stated temperature and absolute pressure.

    Parameters
    ----------
    temperature : pint.Quantity or str [degC], -100 to 100 degC
    pressure : pint.Quantity or str [kPa], absolute, 10 to 1000 kPa

    Returns
    -------
    pint.Quantity
        Molar volume [L/mol].

    References
    ----------
    Ideal gas law; R from the 2019 SI (CODATA).

    Examples
    --------
    >>> round(molar_volume("0 degC").magnitude, 3)
    22.414
    """
    temp = parse_quantity(temperature, "temperature", "temperature", default_unit="degC")
    check_range(temp.to("K"), "temperature", Q_(173.15, "K"), Q_(373.15, "K"), value=temperature)
    p = parse_quantity(pressure, "pressure", "pressure", default_unit="kPa")
    check_range(p, "pressure", Q_(10, "kPa"), Q_(1000, "kPa"), value=pressure)
    return (ureg.molar_gas_constant * temp.to("K") / p).to("L/mol")


def liquid_volume_at(
    concentration: Any,
    fresh_gas_flow: Any,
    duration: Any,
    name: Any,
    temperature: Any = "20 degC",
    pressure: Any = STANDARD_ATMOSPHERE,
) -> pint.Quantity:
    """Dion's formula with the molar volume at the temperature and pressure the flow is measured at.

    liquid = C x FGF x t / Vm(T, p) x MW / density, with Vm = R T / p (ideal gas). Dion's 2412
    is this with Vm = 24.12 L/mol (about 20.8 degC at 101.325 kPa).

    ``temperature`` [degC] and ``pressure`` [kPa, absolute] are those of the gas the flow is
    measured in; the other parameters as :func:`dion_liquid_volume`.

    Parameters
    ----------
    concentration : pint.Quantity or str [%]
        Delivered agent fraction (``"1 %"``).
    fresh_gas_flow : pint.Quantity or str [L/min]
    duration : pint.Quantity or str [min]
    name : str
        Volatile agent.
    temperature : pint.Quantity or str [degC]
    pressure : pint.Quantity or str [kPa], absolute

    Returns
    -------
    pint.Quantity
        Liquid agent [mL].

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633-4; ideal gas law.

    Examples
    --------
    >>> round(liquid_volume_at("1 %", "1 L/min", "60 min", "isoflurane", "20.8 degC").magnitude, 3)
    3.06
    """
    c, fgf, t = _dion_inputs(concentration, fresh_gas_flow, duration)
    sp = _species(name)
    vm = molar_volume(temperature, pressure).magnitude
    mw = sp.molar_mass.to("g/mol").magnitude
    rho = sp.liquid_density.to("g/mL").magnitude
    return Q_(c * fgf * t / vm * mw / rho, "mL")


def vaporizer_vapour_output(carrier_flow: Any, dial: Any) -> pint.Quantity:
    """Vapour flow leaving a vaporizer: carrier x D / (1 - D).

    A vaporizer set to D adds vapour to the carrier gas that enters it, so the vapour is
    D / (1 - D) of the carrier, not D of it: Dion's formula applied to a flowmeter reading
    understates the vapour by the factor 1 / (1 - D) (2 % at 2 %, 6.4 % at 6 %).

    Parameters
    ----------
    carrier_flow : pint.Quantity or str [L/min]
        Gas entering the vaporizer (the flowmeter total).
    dial : pint.Quantity or str [%]
        Dial setting, 0 to below 100 %.

    Returns
    -------
    pint.Quantity
        Vapour flow [L/min].

    References
    ----------
    Definition of volume fraction (Dalton's law); common practice, no source.

    Examples
    --------
    >>> round(vaporizer_vapour_output("1 L/min", "6 %").to("mL/min").magnitude, 2)
    63.83
    """
    fgf = parse_quantity(carrier_flow, "carrier_flow", "flow", default_unit="L/min")
    check_range(fgf, "carrier_flow", Q_(0, "L/min"), Q_(100, "L/min"), value=carrier_flow)
    d = parse_quantity(dial, "vaporizer", "fraction").to("dimensionless")
    if not 0 <= d.magnitude < 1:
        raise InputError("vaporizer", dial, "0 to below 100 %")
    return (fgf * d.magnitude / (1.0 - d.magnitude)).to("L/min")


def vapour_per_liquid(name: Any, temperature: Any = "20 degC", pressure: Any = STANDARD_ATMOSPHERE) -> pint.Quantity:
    """Vapour volume from 1 mL of liquid agent: density / MW x R T / p [mL vapour per mL liquid].

    Ideal gas. Real vapours give up to 3 % more (Anesth Analg 1979;58:322); the liquid density is
    taken at 20 degC whatever the gas temperature.

    Parameters
    ----------
    name : str
        Volatile agent.
    temperature : pint.Quantity or str [degC]
    pressure : pint.Quantity or str [kPa], absolute

    Returns
    -------
    pint.Quantity
        Vapour per liquid [mL/mL].

    References
    ----------
    Biro P. Acta Anaesthesiol Scand 2014;58:968 (sevoflurane 184, isoflurane 195, desflurane 210,
    halothane 229 mL at 20 degC).

    Examples
    --------
    >>> round(vapour_per_liquid("isoflurane").magnitude)
    196
    """
    sp = _species(name)
    vm = molar_volume(temperature, pressure)
    return (sp.liquid_density / sp.molar_mass * vm).to("mL/mL")
