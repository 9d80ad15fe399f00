"""Accounting of gas and liquid: volumes to masses, CO2 to absorbent, and running totals to case totals.

The carbon tally (:mod:`estimator.accounts.carbon`), the case, the batch, the forecast, the supply planner
and the audit convert gas and liquid volumes to masses, and absorbed CO2 to absorbent mass, with
these functions only; the absorbent's CO2 capacity is one value, read from
``estimator/data/supply.toml`` (``[absorbent] co2_per_100g``) with its source. The totals of a
case - the single case (:mod:`estimator.simulation.assemble`) and the batch (:mod:`estimator.simulation.batch`) alike -
are formed from the model's running totals by :func:`fresh_gas_litres` and
:func:`totals_from_deltas` only, on plain floats or arrays; units are attached by the caller.

References
----------
.. [1] Ideal-gas molar volume RT/p with R of CODATA 2018 (estimator.constants); real vapours give up
   to 3 % more vapour per mole (Anesth Analg 1979;58:322).
.. [2] Practical CO2 capacity of soda-lime-type absorbents, 10-15 L per 100 g (anaesthesia equipment
   texts, from memory; theoretical about 26 L per 100 g): the lower end is used, so a stock is
   not overstated (``supply.toml``).

Examples
--------
>>> round(float(absorbent_mass(10.0)), 1)
100.0
"""

from __future__ import annotations

from functools import cache
from typing import Any

import numpy as np
import pint

from ..constants import MOLAR_VOLUME_REFERENCE
from ..errors import InputError
from ..properties import AGENTS, GASES
from ..properties import agent as agent_properties
from ..units import Q_, REFERENCE_PRESSURE, REFERENCE_TEMPERATURE


def litres_per_mmol() -> float:
    """Free-gas litres at the package reference (15 degC, 101.325 kPa) per mmol, ideal gas.

    Returns
    -------
    float [L/mmol]

    References
    ----------
    Ideal gas, R of CODATA 2018 (Tiesinga E et al. Rev Mod Phys 2021;93:025010).

    Examples
    --------
    >>> round(litres_per_mmol(), 5)
    0.02365
    """
    return MOLAR_VOLUME_REFERENCE / 1000.0


@cache
def absorbent_capacity() -> pint.Quantity:
    """CO2 taken up per 100 g of absorbent [L free gas], the package default (``supply.toml``).

    Returns
    -------
    pint.Quantity [L] of CO2 per 100 g of absorbent

    References
    ----------
    Practical CO2 capacity of soda-lime-type absorbents, 10-15 L per 100 g: anaesthesia equipment texts,
    from memory (``supply.toml``, the lower end).

    Examples
    --------
    >>> absorbent_capacity()
    <Quantity(10, 'liter')>
    """
    from ..physics.cylinders import supply_data

    return Q_(supply_data()["absorbent"]["co2_per_100g"]).to("L")


def absorbent_mass(co2_l: Any, capacity_l: Any = None) -> np.ndarray:
    """Absorbent [g] exhausted by ``co2_l`` litres of CO2 at ``capacity_l`` litres per 100 g.

    Parameters
    ----------
    co2_l : float or numpy.ndarray [L]
        CO2 absorbed, free gas.
    capacity_l : float or numpy.ndarray, optional [L]
        CO2 per 100 g of absorbent; default :func:`absorbent_capacity`.

    Returns
    -------
    numpy.ndarray [g]

    References
    ----------
    Practical CO2 capacity of soda-lime-type absorbents, 10-15 L per 100 g: anaesthesia equipment texts,
    from memory (``supply.toml``, the lower end).

    Examples
    --------
    >>> float(absorbent_mass(30.0, 15.0))
    200.0
    """
    cap = absorbent_capacity().magnitude if capacity_l is None else capacity_l
    return np.asarray(co2_l, dtype=float) / cap * 100.0


def molar_volume(
    temperature: pint.Quantity = REFERENCE_TEMPERATURE, pressure: pint.Quantity = REFERENCE_PRESSURE
) -> pint.Quantity:
    """Ideal-gas molar volume RT/p [L/mol], by default at the package reference (15 degC, 101.325 kPa).

    Parameters
    ----------
    temperature : pint.Quantity [K]
    pressure : pint.Quantity [kPa], absolute

    Returns
    -------
    pint.Quantity [L/mol]

    References
    ----------
    Ideal gas, R of CODATA 2018 (Tiesinga E et al. Rev Mod Phys 2021;93:025010).

    Examples
    --------
    >>> round(molar_volume().to("L/mol").magnitude, 3)
    23.645
    """
    from ..physics.closed_form import molar_volume as ideal_molar_volume

    return ideal_molar_volume(temperature, pressure)


def vapour_to_mass(
    volume: pint.Quantity,
    species: str,
    temperature: pint.Quantity = REFERENCE_TEMPERATURE,
    pressure: pint.Quantity = REFERENCE_PRESSURE,
) -> pint.Quantity:
    """Mass [g] of an agent vapour or a gas volume at (temperature, pressure), ideal gas.

    Parameters
    ----------
    volume : Quantity [L] (scalar or array magnitude)
    species : str
        An agent of ``agents.toml`` or a gas (``nitrous_oxide``, ``oxygen``...).
    temperature, pressure : Quantity [K], [kPa]
        Reference of the volume; default 15 degC and 101.325 kPa.

    Returns
    -------
    pint.Quantity [g]

    References
    ----------
    Ideal gas, R of CODATA 2018; molar masses from ``data/agents.toml`` (CRC Handbook).

    Examples
    --------
    >>> round(vapour_to_mass(Q_(23.645, "L"), "nitrous_oxide").to("g").magnitude, 2)
    44.01
    """
    table = AGENTS.get(species) or GASES.get(species)
    if table is None:
        raise InputError("agent", species, "one of " + ", ".join([*sorted(AGENTS), *sorted(GASES)]))
    moles = volume.to("L").magnitude / molar_volume(temperature, pressure).magnitude
    return Q_(moles * table.molar_mass.to("g/mol").magnitude, "g")


def liquid_to_mass(volume: pint.Quantity, agent_name: str) -> pint.Quantity:
    """Mass [g] of liquid agent: volume x liquid density at 20 degC.

    Parameters
    ----------
    volume : pint.Quantity [mL]
    agent_name : str
        An agent of ``agents.toml``.

    Returns
    -------
    pint.Quantity [g]

    References
    ----------
    Liquid densities of ``data/agents.toml``: Biro P. Acta Anaesthesiol Scand 2014;58:968 (desflurane:
    Eger EI. Anesth Analg 1992;75(4 Suppl):S3, from memory).

    Examples
    --------
    >>> round(liquid_to_mass(Q_(250, "mL"), "desflurane").to("g").magnitude, 1)
    366.2
    """
    sp = AGENTS.get(agent_name)
    if sp is None:
        raise InputError("agent", agent_name, "one of " + ", ".join(sorted(AGENTS)))
    return (volume * sp.liquid_density).to("g")


#: Units of the totals :func:`totals_from_deltas` returns (gas litres: free gas at the package
#: reference, 15 degC and 101.325 kPa; ``volume_deficit``: ambient litres at the site).
DELTA_TOTAL_UNITS = {
    "agent_liquid": "mL",
    "agent_vapour": "L",
    "agent_uptake": "L",
    "agent_metabolised": "L",
    "oxygen": "L",
    "air": "L",
    "nitrous_oxide": "L",
    "nitrous_oxide_mass": "g",
    "co2_absorbed": "L",
    "absorbent": "g",
    "mac_hours": "MAC_hour",
    "volume_deficit": "L",
}


def fresh_gas_litres(
    durations: np.ndarray, flows: Any, makeup_mmol: np.ndarray, mmol_per_litre: float, makeup_air: bool
) -> np.ndarray:
    """O2, air and N2O drawn from the supply [ambient L] by cases of phases, shape (n, 3).

    Each phase's true flows over its duration, plus the deficit make-up gas of the phase shared in
    the proportions of its flows (none where the make-up is room air or no fresh gas flows).

    Parameters
    ----------
    durations : float64[n, k] [min]
        Phase durations of ``n`` cases.
    flows : sequence of k (O2, air, N2O) [ambient L/min]
        True flows of each phase.
    makeup_mmol : float64[n, k] [mmol]
        Make-up gas of each phase, agent excluded.
    mmol_per_litre : float
        Gas amount per ambient litre at the site [mmol/L].
    makeup_air : bool
        The make-up gas is room air (a ventilator that entrains air), not fresh gas.

    Returns
    -------
    numpy.ndarray, shape (n, 3) [L]
        O2, air and N2O at ambient conditions.

    Examples
    --------
    >>> fresh_gas_litres(np.array([[10.0, 50.0]]), [(1.0, 1.0, 0.0), (0.5, 0.0, 0.0)],
    ...                  np.array([[0.0, 42.0]]), 42.0, False).tolist()
    [[36.0, 10.0, 0.0]]
    """
    d = np.atleast_2d(durations)
    mk = np.atleast_2d(makeup_mmol)
    out = np.zeros((d.shape[0], 3))
    for k, phase_flows in enumerate(flows):
        carrier = sum(phase_flows)
        extra = mk[:, k] / mmol_per_litre if not makeup_air and carrier > 0 else 0.0
        for g, flow in enumerate(phase_flows):
            out[:, g] += flow * d[:, k] + (extra * flow / carrier if carrier > 0 else 0.0)
    return out


def totals_from_deltas(
    run: dict[str, Any], gas_litres: np.ndarray, mmol_per_litre: float, agent_name: str, capacity_l: float
) -> dict[str, Any]:
    """The totals every case reports, from the running totals of the model (plain floats or arrays).

    Parameters
    ----------
    run : dict
        What the running totals grew by over the case (:func:`estimator.physics.circuit.running_totals`):
        ``agent_delivered``, ``agent_uptake``, ``agent_metabolised``, ``nitrous_oxide_delivered``,
        ``co2_absorbed``, ``makeup`` [mmol] and ``mac_minutes`` [MAC x min].
    gas_litres : float64[3] or float64[n, 3] [ambient L]
        O2, air and N2O drawn (:func:`fresh_gas_litres`).
    mmol_per_litre : float [mmol/L]
        Gas amount per ambient litre at the site.
    agent_name : str
    capacity_l : float [L]
        CO2 the absorbent takes per 100 g [L].

    Returns
    -------
    dict
        The keys of :data:`DELTA_TOTAL_UNITS`, in those units, as floats or arrays like ``run``.

    References
    ----------
    Ideal gas, R of CODATA 2018; molar masses and liquid densities of ``data/agents.toml`` (CRC Handbook;
    Biro 2014); absorbent capacity as :func:`absorbent_capacity`.

    Examples
    --------
    >>> run = {"agent_delivered": 100.0, "agent_uptake": 40.0, "agent_metabolised": 1.0, "co2_absorbed": 500.0,
    ...        "nitrous_oxide_delivered": 0.0, "makeup": 0.0, "mac_minutes": 60.0}
    >>> t = totals_from_deltas(run, np.array([10.0, 5.0, 0.0]), 42.0, "sevoflurane", 10.0)
    >>> round(float(t["agent_vapour"]), 3), float(t["mac_hours"])
    (2.364, 1.0)
    """
    lpm = litres_per_mmol()
    ag = agent_properties(agent_name)
    agent_mmol = run["agent_delivered"]
    co2_l = run["co2_absorbed"] * lpm
    o2_l, air_l, n2o_l = np.asarray(gas_litres).T
    return {
        "agent_liquid": agent_mmol
        / 1000
        * ag.molar_mass.to("g/mol").magnitude
        / ag.liquid_density.to("g/mL").magnitude,
        "agent_vapour": agent_mmol * lpm,
        "agent_uptake": run["agent_uptake"] * lpm,
        "agent_metabolised": run["agent_metabolised"] * lpm,
        "oxygen": o2_l * mmol_per_litre * lpm,
        "air": air_l * mmol_per_litre * lpm,
        "nitrous_oxide": n2o_l * mmol_per_litre * lpm,
        "nitrous_oxide_mass": run["nitrous_oxide_delivered"]
        / 1000
        * GASES["nitrous_oxide"].molar_mass.to("g/mol").magnitude,
        "co2_absorbed": co2_l,
        "absorbent": absorbent_mass(co2_l, capacity_l),
        "mac_hours": run["mac_minutes"] / 60.0,
        "volume_deficit": run["makeup"] / mmol_per_litre,
    }
