"""Closed-form estimates: quick answers and cross-checks for the circuit model.

* Lowe's square-root-of-time law of volatile agent uptake, its cumulative form and unit dose.
* Severinghaus's nitrous oxide uptake, 1000 t^-1/2 mL/min for an adult.
* Dion's formula for the liquid agent (and its cost) delivered at a concentration and fresh gas
  flow, the same with the molar volume at a stated temperature and pressure, and the vaporizer
  output correction D / (1 - D).
* The vapour volume given by one millilitre of liquid agent (ideal gas).

The uptake laws never saturate, so they overstate uptake after a few hours compared with a
compartment model; Dion's formula gives what the vaporizer delivers, not what the patient takes up
(at low flow far less is used).

References
----------
.. [1] Lowe HJ, Ernst EA. The Quantitative Practice of Anesthesia: Use of Closed Circuit.
   Williams & Wilkins, Baltimore 1981 (square-root-of-time uptake, unit dose).
.. [2] Severinghaus JW. The rate of uptake of nitrous oxide in man. J Clin Invest 1954;33:1183-9.
.. [3] Dion P. The cost of anaesthetic vapours. Can J Anaesth 1992;39:633-4.
.. [4] Biro P. Calculation of volatile anaesthetics consumption from agent concentration and fresh
   gas flow. Acta Anaesthesiol Scand 2014;58:968-72 (vapour from 1 mL of liquid agent).

Examples
--------
>>> round(dion_liquid_volume("1 %", "1 L/min", "60 min", "isoflurane").to("mL").magnitude, 2)
3.06
>>> round(severinghaus_uptake_rate("25 min").value.to("mL/min").magnitude)
200
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pint

from .errors import InputError
from .limits import SQUARE_ROOT_LAW_LIMIT
from .mac import mac_at_age, parse_fraction
from .physiology import SANE_WEIGHT, patient_parameters
from .properties import Species, agent
from .units import Q_, STANDARD_ATMOSPHERE, check_range, parse_quantity, ureg

#: Lowe's factor f (Lowe and Ernst 1981, from memory).
LOWE_FACTOR = 1.3
#: Severinghaus 1954: about 1000 mL/min at 1 min for about 70 kg at 65-75 % inspired nitrous oxide.
SEVERINGHAUS_RATE_1MIN = 1000.0
SEVERINGHAUS_WEIGHT = 70.0
SEVERINGHAUS_FRACTION = 0.70
SEVERINGHAUS_FRACTION_RANGE = (0.65, 0.75)
#: Weights [kg] treated as "about 70 kg" without a scaling warning (our choice).
SEVERINGHAUS_WEIGHT_RANGE = (60.0, 80.0)
#: Dion's constant: 100 (percent) x 24.12 L/mol, the molar volume of an ideal gas near 21 degC.
DION_CONSTANT = 2412.0

Warning = tuple[str, str]


@dataclass(frozen=True)
class Estimate:
    """A closed-form result with the warnings that qualify it.

    Attributes
    ----------
    value : pint.Quantity
    warnings : tuple of (code, message)
    """

    value: pint.Quantity
    warnings: tuple[Warning, ...] = ()


def _times(t: Any, field: str, *, allow_zero: bool) -> tuple[np.ndarray, list[Warning]]:
    if isinstance(t, pint.Quantity) and np.ndim(t.magnitude) > 0:
        if not t.check("[time]"):
            raise InputError(field, t, "a time such as '10 min'")
        minutes = np.asarray(t.to("min").magnitude, dtype=float)
    elif isinstance(t, np.ndarray | list | tuple):
        minutes = np.asarray(t, dtype=float)
    else:
        minutes = np.asarray(parse_quantity(t, field, "time", default_unit="min").to("min").magnitude, dtype=float)
    bad = ~np.isfinite(minutes) | ((minutes < 0) if allow_zero else (minutes <= 0))
    if bad.any():
        shown = t if minutes.ndim == 0 else f"{minutes[bad].flat[0]:g} min"
        raise InputError(field, shown, "0 min or more" if allow_zero else "more than 0 min")
    notes: list[Warning] = []
    if (minutes > SQUARE_ROOT_LAW_LIMIT).any():
        notes.append(
            (
                "SQUARE_ROOT_LAW_LONG",
                f"time beyond {SQUARE_ROOT_LAW_LIMIT:g} min: the square-root-of-time law never "
                "saturates and overstates uptake after a few hours",
            )
        )
    return minutes, notes


def _mag(values: np.ndarray) -> float | np.ndarray:
    return values if values.ndim else float(values)


def _agent(name: Any, field: str = "agent.name") -> Species:
    return name if isinstance(name, Species) else agent(name, field)


def lowe_uptake_coefficient(
    name: Any,
    *,
    weight: Any = "70 kg",
    age: Any = "40 years",
    cardiac_output: Any = None,
    mac_multiple: float = 1.0,
    factor: float = LOWE_FACTOR,
) -> Estimate:
    """Lowe's coefficient k = f x MAC x lambda_blood/gas x Q [mL vapour min^-1/2], the rate at 1 min.

    Parameters
    ----------
    name : str
        Volatile agent.
    weight : [kg]
        Used for Brody's cardiac output (2 kg^0.75 dL/min) when ``cardiac_output`` is not given.
    age : [year]
        For Mapleson's age-corrected MAC.
    cardiac_output : optional [L/min]
    mac_multiple : float
        Multiple of MAC aimed at; multiplies f.
    factor : float
        Lowe's f, about 1.3. The arterial target is f x mac_multiple x MAC(age).

    Returns
    -------
    Estimate
        ``value`` in mL/min (the rate at t = 1 min); warnings from the patient and age checks.

    References
    ----------
    Lowe HJ, Ernst EA 1981 (MAC in vol %, Q in dL/min, t in min).

    Examples
    --------
    >>> round(lowe_uptake_coefficient("sevoflurane", cardiac_output="5 L/min").value.magnitude, 2)
    76.05
    """
    if not (np.isfinite(factor) and factor > 0):
        raise InputError("factor", factor, "above 0 (Lowe's f, about 1.3)")
    if not (np.isfinite(mac_multiple) and 0 <= mac_multiple <= 3):
        raise InputError("mac_multiple", mac_multiple, "0 to 3 MAC")
    sp = _agent(name)
    m = mac_at_age(sp, age)
    notes = list(m.warnings)
    if cardiac_output is None:
        p = patient_parameters(weight, m.age)
        q_dl = p.cardiac_output.to("dL/min").magnitude
        notes.extend(p.warnings)
    else:
        q = parse_quantity(cardiac_output, "patient.cardiac_output", "flow", default_unit="L/min")
        check_range(
            q, "patient.cardiac_output", Q_(0, "L/min"), Q_(40, "L/min"), low_inclusive=False, value=cardiac_output
        )
        q_dl = q.to("dL/min").magnitude
    mac_pct = float(m.mac.to("percent").magnitude)
    k = factor * mac_multiple * mac_pct * sp.blood_gas * q_dl
    return Estimate(Q_(k, "mL/min"), tuple(notes))


def lowe_uptake_rate(name: Any, t: Any, **kw: Any) -> Estimate:
    """Agent uptake rate by Lowe's square-root-of-time law: f MAC lambda Q t^-1/2 [mL vapour/min].

    ``t`` [min] above 0, scalar or array; other keywords as :func:`lowe_uptake_coefficient`.

    References
    ----------
    Lowe HJ, Ernst EA 1981.

    Examples
    --------
    >>> k = lowe_uptake_coefficient("isoflurane").value.magnitude
    >>> round(lowe_uptake_rate("isoflurane", "9 min").value.magnitude * 3 / k, 6)
    1.0
    """
    minutes, notes = _times(t, "t", allow_zero=False)
    k = lowe_uptake_coefficient(name, **kw)
    return Estimate(Q_(_mag(k.value.magnitude / np.sqrt(minutes)), "mL/min"), tuple(list(k.warnings) + notes))


def lowe_cumulative_uptake(name: Any, t: Any, **kw: Any) -> Estimate:
    """Cumulative agent uptake by Lowe's law, 2 f MAC lambda Q sqrt(t) [mL vapour].

    References
    ----------
    Lowe HJ, Ernst EA 1981.

    Examples
    --------
    >>> u = lowe_unit_dose("sevoflurane").value.magnitude
    >>> round(lowe_cumulative_uptake("sevoflurane", "16 min").value.magnitude / u, 6)
    4.0
    """
    minutes, notes = _times(t, "t", allow_zero=True)
    k = lowe_uptake_coefficient(name, **kw)
    return Estimate(Q_(_mag(2.0 * k.value.magnitude * np.sqrt(minutes)), "mL"), tuple(list(k.warnings) + notes))


def lowe_unit_dose(name: Any, **kw: Any) -> Estimate:
    """Lowe's unit dose, the uptake in 0-1 min, 2 f MAC lambda Q [mL vapour].

    Equal unit doses are taken up in 0-1, 1-4, 4-9, ... min (the n-th ends at n^2 min; see
    :func:`lowe_dose_times`).

    References
    ----------
    Lowe HJ, Ernst EA 1981.

    Examples
    --------
    >>> round(lowe_unit_dose("sevoflurane", cardiac_output="5 L/min").value.magnitude, 1)
    152.1
    """
    k = lowe_uptake_coefficient(name, **kw)
    return Estimate(Q_(2.0 * k.value.magnitude, "mL"), k.warnings)


def lowe_dose_times(count: int) -> pint.Quantity:
    """End times n^2 min of the first ``count`` unit-dose intervals (1, 4, 9, ... min).

    References
    ----------
    Lowe HJ, Ernst EA 1981.

    Examples
    --------
    >>> lowe_dose_times(4).magnitude
    array([ 1.,  4.,  9., 16.])
    """
    if not isinstance(count, int | np.integer) or isinstance(count, bool) or not 1 <= count <= 10000:
        raise InputError("count", count, "a whole number 1 to 10000")
    return Q_(np.arange(1, count + 1, dtype=float) ** 2, "min")


def _severinghaus_scale(weight: Any, inspired: Any) -> tuple[float, list[Warning]]:
    w = parse_quantity(weight, "patient.weight", "mass", default_unit="kg")
    check_range(w, "patient.weight", Q_(SANE_WEIGHT[0], "kg"), Q_(SANE_WEIGHT[1], "kg"), value=weight)
    kg, frac = float(w.to("kg").magnitude), parse_fraction(inspired, "inspired_nitrous_oxide")
    notes: list[Warning] = []
    if not SEVERINGHAUS_WEIGHT_RANGE[0] <= kg <= SEVERINGHAUS_WEIGHT_RANGE[1]:
        notes.append(
            (
                "SEVERINGHAUS_WEIGHT_SCALED",
                f"Severinghaus measured adults of about 70 kg; scaled to {kg:g} kg by kg^0.75 (our scaling, not his)",
            )
        )
    if not SEVERINGHAUS_FRACTION_RANGE[0] <= frac <= SEVERINGHAUS_FRACTION_RANGE[1]:
        notes.append(
            (
                "SEVERINGHAUS_FRACTION_SCALED",
                f"Severinghaus measured 65-75 % inspired nitrous oxide; scaled to {100 * frac:g} % "
                "in proportion (our scaling, not his)",
            )
        )
    scale = (kg / SEVERINGHAUS_WEIGHT) ** 0.75 * frac / SEVERINGHAUS_FRACTION
    return scale, notes


def severinghaus_uptake_rate(t: Any, *, weight: Any = "70 kg", inspired: Any = "70 %") -> Estimate:
    """Nitrous oxide uptake rate about 1000 t^-1/2 mL/min (t [min] above 0), 70 kg, 70 % inspired.

    Scaled to other weights [kg] by (kg / 70)^0.75 and to other ``inspired`` fractions by F_I / 0.70.
    Both scalings are ours, not Severinghaus's; outside 60-80 kg or 65-75 % inspired the result
    carries a warning.

    References
    ----------
    Severinghaus JW. J Clin Invest 1954;33:1183-9.

    Examples
    --------
    >>> round(severinghaus_uptake_rate("1 min").value.magnitude)
    1000
    """
    minutes, notes = _times(t, "t", allow_zero=False)
    scale, snotes = _severinghaus_scale(weight, inspired)
    rate = SEVERINGHAUS_RATE_1MIN * scale / np.sqrt(minutes)
    return Estimate(Q_(_mag(rate), "mL/min"), tuple(snotes + notes))


def severinghaus_cumulative_uptake(t: Any, *, weight: Any = "70 kg", inspired: Any = "70 %") -> Estimate:
    """Cumulative nitrous oxide uptake about 2000 sqrt(t) mL, scaled as :func:`severinghaus_uptake_rate`.

    References
    ----------
    Severinghaus JW. J Clin Invest 1954;33:1183-9.

    Examples
    --------
    >>> round(severinghaus_cumulative_uptake("100 min").value.to("L").magnitude, 1)
    20.0
    """
    minutes, notes = _times(t, "t", allow_zero=True)
    scale, snotes = _severinghaus_scale(weight, inspired)
    total = 2.0 * SEVERINGHAUS_RATE_1MIN * scale * np.sqrt(minutes)
    return Estimate(Q_(_mag(total), "mL"), tuple(snotes + notes))


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
    sp = _agent(name)
    mw = sp.molar_mass.to("g/mol").magnitude
    rho = sp.liquid_density.to("g/mL").magnitude
    return Q_(100.0 * c * fgf * t * mw / (DION_CONSTANT * rho), "mL")


def dion_cost(concentration: Any, fresh_gas_flow: Any, duration: Any, name: Any, price_per_ml: float) -> float:
    """Cost of the liquid agent by Dion's formula: liquid mL x price per mL (in the price's currency).

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

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633-4; ideal gas law.

    Examples
    --------
    >>> round(liquid_volume_at("1 %", "1 L/min", "60 min", "isoflurane", "20.8 degC").magnitude, 3)
    3.06
    """
    c, fgf, t = _dion_inputs(concentration, fresh_gas_flow, duration)
    sp = _agent(name)
    vm = molar_volume(temperature, pressure).magnitude
    mw = sp.molar_mass.to("g/mol").magnitude
    rho = sp.liquid_density.to("g/mL").magnitude
    return Q_(c * fgf * t / vm * mw / rho, "mL")


def vaporizer_vapour_output(carrier_flow: Any, dial: Any) -> pint.Quantity:
    """Vapour flow leaving a vaporizer: carrier x D / (1 - D).

    A vaporizer set to D adds vapour to the carrier gas that enters it, so the vapour is
    D / (1 - D) of the carrier, not D of it: Dion's formula applied to a flowmeter reading
    understates the vapour by the factor 1 / (1 - D) (2 % at 2 %, 6.4 % at 6 %).

    ``carrier_flow`` [L/min] is the gas entering the vaporizer (the flowmeter total), ``dial`` a
    fraction 0 to below 100 %; returns the vapour flow [L/min].

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

    Parameters: agent ``name``, ``temperature`` [degC], ``pressure`` [kPa, absolute]; returns [mL/mL].

    References
    ----------
    Biro P. Acta Anaesthesiol Scand 2014;58:968 (sevoflurane 184, isoflurane 195, desflurane 210,
    halothane 229 mL at 20 degC).

    Examples
    --------
    >>> round(vapour_per_liquid("isoflurane").magnitude)
    196
    """
    sp = _agent(name)
    vm = molar_volume(temperature, pressure)
    return (sp.liquid_density / sp.molar_mass * vm).to("mL/mL")
