"""Real-gas properties of the cylinder gases from CoolProp: density, compressibility, vapour pressure.

Oxygen, medical air and nitrous oxide by CoolProp's reference equations of state; amounts are
reported as free gas at the package reference (15 degC, 101.325 kPa): litres = moles x R T_ref / p_ref.
States inside the table of :mod:`estimator.physics.real_gas_table` (-45 to +70 degC; oxygen and air up to
325 bar absolute, nitrous oxide gas up to 6 bar and its two-phase range) are interpolated from
CoolProp values (within 1e-6 relative); any other state asks CoolProp itself, imported on first use,
so that the CLI and the app start fast.

References
----------
.. [1] Bell IH, Wronski J, Quoilin S, Lemort V. Pure and pseudo-pure fluid thermophysical property
   evaluation and the open-source thermophysical property library CoolProp. Ind Eng Chem Res
   2014;53:2498-508 (equations of state of Schmidt and Wagner 1985 for oxygen, Lemmon et al. 2000
   for air, Span and Wagner 2003 for nitrous oxide).

Examples
--------
>>> round(free_gas(Q_(1, "mol")).to("L").magnitude, 3)
23.645
"""

from __future__ import annotations

from typing import Any

import pint

from ..constants import GAS_CONSTANT
from ..errors import InputError
from ..units import Q_, REFERENCE_PRESSURE, REFERENCE_TEMPERATURE
from .real_gas_table import table_constant, table_pressure, table_saturation, table_z

#: CoolProp fluid names of the gases a cylinder may hold.
COOLPROP_FLUIDS = {"oxygen": "Oxygen", "air": "Air", "nitrous_oxide": "NitrousOxide"}


def props_si() -> Any:
    """CoolProp's PropsSI, imported lazily so that the app starts fast.

    Returns
    -------
    callable
        ``PropsSI(output, name1, value1, name2, value2, fluid)`` in SI units [K, Pa, mol/m^3].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).
    """
    from CoolProp.CoolProp import PropsSI

    return PropsSI


def fluid_name(gas: str, field_name: str = "gas") -> str:
    """CoolProp name of a cylinder gas; an InputError for any other gas.

    Parameters
    ----------
    gas : str
        ``"oxygen"``, ``"air"`` or ``"nitrous_oxide"`` (case and surrounding spaces ignored).
    field_name : str
        Name of the input field, for the error message.

    Returns
    -------
    str
        CoolProp fluid name.

    Examples
    --------
    >>> fluid_name("nitrous_oxide")
    'NitrousOxide'
    """
    key = str(gas).strip().lower()
    if key not in COOLPROP_FLUIDS:
        raise InputError(field_name, gas, "one of " + ", ".join(COOLPROP_FLUIDS))
    return COOLPROP_FLUIDS[key]


def gas_key(gas: str, field_name: str = "gas") -> str:
    """The package's key of a cylinder gas (lower case); an InputError for any other gas.

    Parameters
    ----------
    gas : str
        Cylinder gas name, any case.
    field_name : str
        Name of the input field, for the error message.

    Returns
    -------
    str
        ``"oxygen"``, ``"air"`` or ``"nitrous_oxide"``.

    Examples
    --------
    >>> gas_key(" Oxygen ")
    'oxygen'
    """
    fluid_name(gas, field_name)
    return str(gas).strip().lower()


def reference_molar_volume() -> pint.Quantity:
    """Ideal molar volume at the package reference, R T_ref / p_ref [L/mol].

    Returns
    -------
    pint.Quantity
        Molar volume at 15 degC and 101.325 kPa [L/mol].

    References
    ----------
    CODATA 2018 (Tiesinga E et al. Rev Mod Phys 2021;93:025010): molar gas constant R.

    Examples
    --------
    >>> round(reference_molar_volume().to("L/mol").magnitude, 3)
    23.645
    """
    t = REFERENCE_TEMPERATURE.to("K").magnitude
    p = REFERENCE_PRESSURE.to("Pa").magnitude
    return Q_(GAS_CONSTANT * t / p * 1000.0, "L/mol")


def molar_density(gas: str, temperature: pint.Quantity, pressure: pint.Quantity) -> pint.Quantity:
    """Real-gas molar density from CoolProp at a temperature and an *absolute* pressure [mol/L].

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    temperature : pint.Quantity [K]
    pressure : pint.Quantity [kPa], absolute

    Returns
    -------
    pint.Quantity
        Molar density [mol/L].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(molar_density("oxygen", Q_(15, "degC"), Q_(1, "atm")).to("mol/L").magnitude, 4)
    0.0423
    """
    fluid = fluid_name(gas)
    t, p = temperature.to("K").magnitude, pressure.to("Pa").magnitude
    z = table_z(gas_key(gas), t, p)
    rho = props_si()("Dmolar", "T", t, "P", p, fluid) if z is None else p / (z * GAS_CONSTANT * t)
    return Q_(rho / 1000.0, "mol/L")


def pressure_at(gas: str, temperature: pint.Quantity, density: pint.Quantity) -> pint.Quantity:
    """Absolute pressure of a gas at a temperature and a molar density [kPa] (single phase).

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    temperature : pint.Quantity [K]
    density : pint.Quantity [mol/L]

    Returns
    -------
    pint.Quantity
        Absolute pressure [kPa].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> rho = molar_density("oxygen", Q_(40, "degC"), Q_(200, "bar"))
    >>> round(pressure_at("oxygen", Q_(40, "degC"), rho).to("bar").magnitude, 6)
    200.0
    """
    fluid = fluid_name(gas)
    t, rho = temperature.to("K").magnitude, density.to("mol/m^3").magnitude
    p = table_pressure(gas_key(gas), t, rho)
    if p is None:
        p = props_si()("P", "T", t, "Dmolar", rho, fluid)
    return Q_(p / 1000.0, "kPa")


def compressibility(gas: str, temperature: pint.Quantity, pressure: pint.Quantity) -> float:
    """Compressibility factor Z = p / (rho R T) from CoolProp (absolute pressure).

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    temperature : pint.Quantity [K]
    pressure : pint.Quantity [kPa], absolute

    Returns
    -------
    float
        Z [-].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(compressibility("air", Q_(15, "degC"), Q_(300, "bar")), 3)
    1.101
    """
    rho = molar_density(gas, temperature, pressure).to("mol/m^3").magnitude
    return pressure.to("Pa").magnitude / (rho * GAS_CONSTANT * temperature.to("K").magnitude)


def vapour_pressure(gas: str, temperature: pint.Quantity) -> pint.Quantity | None:
    """Saturation (vapour) pressure from CoolProp, or None above the critical temperature [kPa].

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    temperature : pint.Quantity [K]

    Returns
    -------
    pint.Quantity or None
        Vapour pressure [kPa]; None at or above the critical temperature.

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(vapour_pressure("nitrous_oxide", Q_(20, "degC")).to("bar").magnitude, 1)
    50.5
    >>> vapour_pressure("nitrous_oxide", Q_(40, "degC")) is None
    True
    """
    t = temperature.to("K").magnitude
    if t >= critical_temperature(gas).to("K").magnitude:
        return None
    sat = table_saturation(gas_key(gas), t)
    p = props_si()("P", "T", t, "Q", 0, fluid_name(gas)) if sat is None else sat[0]
    return Q_(p / 1000.0, "kPa")


def saturated_density(gas: str, temperature: pint.Quantity, phase: str) -> pint.Quantity:
    """Molar density of the saturated ``"liquid"`` or ``"vapour"`` below the critical temperature [mol/L].

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    temperature : pint.Quantity [K], below the critical temperature
    phase : str
        ``"liquid"`` or ``"vapour"``.

    Returns
    -------
    pint.Quantity
        Molar density of the saturated phase [mol/L].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(saturated_density("nitrous_oxide", Q_(20, "degC"), "vapour").to("mol/L").magnitude, 3)
    3.59
    """
    quality = {"liquid": 0, "vapour": 1}[phase]
    t = temperature.to("K").magnitude
    sat = table_saturation(gas_key(gas), t)
    rho = props_si()("Dmolar", "T", t, "Q", quality, fluid_name(gas)) if sat is None else sat[1 + quality]
    return Q_(rho / 1000.0, "mol/L")


def critical_temperature(gas: str) -> pint.Quantity:
    """Critical temperature from CoolProp (tabulated) [K] (nitrous oxide about 309.5 K, 36.4 degC).

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}

    Returns
    -------
    pint.Quantity
        Critical temperature [K].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(critical_temperature("nitrous_oxide").to("degC").magnitude, 1)
    36.4
    """
    return Q_(table_constant(gas_key(gas), "critical_temperature"), "K")


def molar_mass(gas: str) -> pint.Quantity:
    """Molar mass from CoolProp (tabulated) [kg/mol].

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}

    Returns
    -------
    pint.Quantity
        Molar mass [kg/mol].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(molar_mass("nitrous_oxide").to("g/mol").magnitude, 3)
    44.013
    """
    return Q_(table_constant(gas_key(gas), "molar_mass"), "kg/mol")


def litres_per_kg(
    gas: str,
    temperature: pint.Quantity = REFERENCE_TEMPERATURE,
    pressure: pint.Quantity = REFERENCE_PRESSURE,
    real_gas: bool = False,
) -> pint.Quantity:
    """Free-gas volume of one kilogram [L/kg].

    With ``real_gas=False`` (the package convention, used for all contents) the volume is the ideal
    molar volume at (``temperature``, ``pressure``) over the molar mass; with ``real_gas=True`` it is
    1 kg over CoolProp's real-gas mass density at that state (nitrous oxide at 1 atm: Z about 0.994).

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    temperature : pint.Quantity [K], default 15 degC
    pressure : pint.Quantity [kPa], absolute; default 101.325 kPa
    real_gas : bool
        Real-gas density instead of the ideal molar volume.

    Returns
    -------
    pint.Quantity
        Free-gas volume per mass [L/kg].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp; the equations of state in the module notes).

    Examples
    --------
    >>> round(litres_per_kg("nitrous_oxide").to("L/kg").magnitude)
    537
    >>> round(litres_per_kg("nitrous_oxide", real_gas=True).to("L/kg").magnitude)
    534
    """
    m = molar_mass(gas).to("kg/mol").magnitude
    if real_gas:
        rho = molar_density(gas, temperature, pressure).to("mol/L").magnitude
        return Q_(1.0 / (m * rho), "L/kg")
    vm = GAS_CONSTANT * temperature.to("K").magnitude / pressure.to("Pa").magnitude * 1000.0
    return Q_(vm / m, "L/kg")


def free_gas(moles: pint.Quantity) -> pint.Quantity:
    """Moles as free gas at the package reference [L].

    Parameters
    ----------
    moles : pint.Quantity [mol]

    Returns
    -------
    pint.Quantity
        Ideal free-gas volume at 15 degC and 101.325 kPa [L].

    References
    ----------
    CODATA 2018 (Tiesinga E et al. Rev Mod Phys 2021;93:025010): molar gas constant R.

    Examples
    --------
    >>> round(free_gas(Q_(2, "mol")).to("L").magnitude, 2)
    47.29
    """
    return (moles * reference_molar_volume()).to("L")
