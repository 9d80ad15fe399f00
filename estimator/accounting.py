"""Masses from the volumes the engine, logs and files report, and the absorbent a CO2 load takes.

The carbon tally (:mod:`estimator.carbon`), the case, the batch, the forecast, the supply planner
and the audit convert gas and liquid volumes to masses, and absorbed CO2 to absorbent mass, with
these functions only; the absorbent's CO2 capacity is one value, read from
``estimator/data/supply.toml`` (``[absorbent] co2_per_100g``) with its source.

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

from .errors import InputError
from .properties import AGENTS, GASES
from .units import Q_, REFERENCE_PRESSURE, REFERENCE_TEMPERATURE


@cache
def absorbent_capacity() -> pint.Quantity:
    """CO2 taken up per 100 g of absorbent [L free gas], the package default (``supply.toml``).

    >>> absorbent_capacity()
    <Quantity(10, 'liter')>
    """
    from .cylinders import supply_data

    return Q_(supply_data()["absorbent"]["co2_per_100g"]).to("L")


def absorbent_mass(co2_l: Any, capacity_l: Any = None) -> np.ndarray:
    """Absorbent [g] exhausted by ``co2_l`` litres of CO2 at ``capacity_l`` litres per 100 g.

    ``capacity_l`` defaults to :func:`absorbent_capacity`; floats or arrays.
    """
    cap = absorbent_capacity().magnitude if capacity_l is None else capacity_l
    return np.asarray(co2_l, dtype=float) / cap * 100.0


def molar_volume(
    temperature: pint.Quantity = REFERENCE_TEMPERATURE, pressure: pint.Quantity = REFERENCE_PRESSURE
) -> pint.Quantity:
    """Ideal-gas molar volume RT/p [L/mol], by default at the package reference (15 degC, 101.325 kPa).

    >>> round(molar_volume().to("L/mol").magnitude, 3)
    23.645
    """
    from .closed_form import molar_volume as ideal_molar_volume

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
    temperature, pressure : Quantity
        Reference of the volume; default 15 degC and 101.325 kPa.

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

    >>> round(liquid_to_mass(Q_(250, "mL"), "desflurane").to("g").magnitude, 1)
    366.2
    """
    sp = AGENTS.get(agent_name)
    if sp is None:
        raise InputError("agent", agent_name, "one of " + ", ".join(sorted(AGENTS)))
    return (volume * sp.liquid_density).to("g")
