"""Closed-form uptake laws: quick answers and cross-checks for the circuit model.

* Lowe's square-root-of-time law of volatile agent uptake, its cumulative form and unit dose.
* Severinghaus's nitrous oxide uptake, 1000 t^-1/2 mL/min for an adult.

The uptake laws never saturate, so they overstate uptake after a few hours compared with a
compartment model. The liquid-agent and vapour volumes (Dion's formula, molar volume, vaporizer
output D / (1 - D), vapour per mL of liquid) are in :mod:`estimator.physics.liquid_agent`, re-exported here.

References
----------
.. [1] Lowe HJ, Ernst EA. The Quantitative Practice of Anesthesia: Use of Closed Circuit.
   Williams & Wilkins, Baltimore 1981 (square-root-of-time uptake, unit dose).
.. [2] Severinghaus JW. The rate of uptake of nitrous oxide in man. J Clin Invest 1954;33:1183-9.
.. [3] Dion P. Can J Anaesth 1992;39:633-4 (see :mod:`estimator.physics.liquid_agent`).

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

from ..errors import InputError
from ..limits import SQUARE_ROOT_LAW_LIMIT
from ..properties import VolatileAgent, agent
from ..units import Q_, check_range, parse_quantity
from .liquid_agent import (
    DION_CONSTANT,
    dion_cost,
    dion_liquid_volume,
    liquid_volume_at,
    molar_volume,
    vaporizer_vapour_output,
    vapour_per_liquid,
)
from .mac_age import mac_at_age, parse_fraction
from .physiology import SANE_WEIGHT, patient_parameters

#: Lowe's factor f (Lowe and Ernst 1981, from memory).
LOWE_FACTOR = 1.3
#: Severinghaus 1954: about 1000 mL/min at 1 min for about 70 kg at 65-75 % inspired nitrous oxide.
SEVERINGHAUS_RATE_1MIN = 1000.0
SEVERINGHAUS_WEIGHT = 70.0
SEVERINGHAUS_FRACTION = 0.70
SEVERINGHAUS_FRACTION_RANGE = (0.65, 0.75)
#: Weights [kg] treated as "about 70 kg" without a scaling warning (our choice).
SEVERINGHAUS_WEIGHT_RANGE = (60.0, 80.0)

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


def _agent(name: Any, field: str = "agent.name") -> VolatileAgent:
    return name if isinstance(name, VolatileAgent) else agent(name, field)


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
    mac_multiple : float [-]
        Multiple of MAC aimed at; multiplies f.
    factor : float [-]
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

    Parameters
    ----------
    name : str
        Volatile agent.
    t : pint.Quantity, str or array [min], time since the start of uptake, above 0
    **kw
        ``weight``, ``age``, ``cardiac_output``, ``mac_multiple``, ``factor`` as :func:`lowe_uptake_coefficient`.

    Returns
    -------
    Estimate
        ``value`` [mL/min], the shape of ``t``; warnings from the patient, age and time checks.

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

    Parameters
    ----------
    name : str
        Volatile agent.
    t : pint.Quantity, str or array [min], time since the start of uptake, 0 or more
    **kw
        ``weight``, ``age``, ``cardiac_output``, ``mac_multiple``, ``factor`` as :func:`lowe_uptake_coefficient`.

    Returns
    -------
    Estimate
        ``value`` [mL] of vapour, the shape of ``t``; warnings from the patient, age and time checks.

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

    Parameters
    ----------
    name : str
        Volatile agent.
    **kw
        ``weight``, ``age``, ``cardiac_output``, ``mac_multiple``, ``factor`` as :func:`lowe_uptake_coefficient`.

    Returns
    -------
    Estimate
        ``value`` [mL] of vapour; warnings from the patient, age and time checks.

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

    Parameters
    ----------
    count : int
        Number of intervals, 1 to 10000 [-].

    Returns
    -------
    pint.Quantity
        End times [min], an array of length ``count``.

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

    Parameters
    ----------
    t : pint.Quantity, str or array [min], time since the start of nitrous oxide, above 0
    weight : pint.Quantity or str [kg]
    inspired : pint.Quantity or str [%]
        Inspired nitrous oxide fraction.

    Returns
    -------
    Estimate
        ``value`` [mL/min], the shape of ``t``; scaling warnings.

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

    Parameters
    ----------
    t : pint.Quantity, str or array [min], time since the start of nitrous oxide, 0 or more
    weight : pint.Quantity or str [kg]
    inspired : pint.Quantity or str [%]
        Inspired nitrous oxide fraction.

    Returns
    -------
    Estimate
        ``value`` [mL], the shape of ``t``; scaling warnings.

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


__all__ = [
    "DION_CONSTANT",
    "LOWE_FACTOR",
    "Estimate",
    "dion_cost",
    "dion_liquid_volume",
    "liquid_volume_at",
    "lowe_cumulative_uptake",
    "lowe_dose_times",
    "lowe_unit_dose",
    "lowe_uptake_coefficient",
    "lowe_uptake_rate",
    "molar_volume",
    "severinghaus_cumulative_uptake",
    "severinghaus_uptake_rate",
    "vaporizer_vapour_output",
    "vapour_per_liquid",
]
