"""MAC of a gas mixture: total MAC with nitrous oxide, and the end-tidal agent for a requested total.

MAC (minimum alveolar concentration) falls with age by the same proportion for every agent,
about 6 % a decade (Mapleson 1996). Fractions of MAC add, nitrous oxide included (Nickalls and
Mapleson 2003). MAC is a partial pressure: at a lower ambient pressure the same MAC is a larger
volume percent. One agent's MAC at an age and ambient pressure is in :mod:`estimator.physics.mac_age`,
re-exported here.

All public functions take pint quantities or strings that pint parses (``"70 years"``,
``"67 %"``, ``"1.2 MAC"``) and return pint quantities, with fractions in percent. Ages may be a
numpy array (or a quantity with an array magnitude); the result then has the same shape.

References
----------
.. [1] Mapleson WW. Effect of age on MAC in humans: a meta-analysis. Br J Anaesth 1996;76:179-85
   (MAC(age) = MAC40 x 10^(-0.00269 (age - 40)); Table 2: MAC at 40 years).
.. [2] Nickalls RWD, Mapleson WW. Age-related iso-MAC charts for isoflurane, sevoflurane and
   desflurane in man. Br J Anaesth 2003;91:170-4 (MAC fractions add, nitrous oxide included).

Examples
--------
>>> round(mac_at_age("sevoflurane", "70 years").mac.to("percent").magnitude, 2)
1.49
>>> round(total_mac({"sevoflurane": "1.2 %", "nitrous_oxide": "50 %"}, 40).total.magnitude, 3)
1.147
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..limits import HYPOXIC_FRACTION
from ..properties import VolatileAgent, agent
from ..units import Q_, check_range, parse_quantity
from .mac_age import (
    AGE_RANGE,
    MAPLESON_REFERENCE_AGE,
    MAPLESON_SLOPE,
    AgeCorrectedMac,
    Warning,
    mac_at_age,
    mac_at_pressure,
    mapleson_factor,
    parse_age,
    parse_ambient_pressure,
    parse_fraction,
)

SOURCE = (
    "Mapleson WW. Br J Anaesth 1996;76:179 (age correction); Nickalls RWD, Mapleson WW. "
    "Br J Anaesth 2003;91:170 (MAC fractions add, nitrous oxide included); MAC as a partial "
    "pressure at other ambient pressures: common practice, no source"
)


@dataclass(frozen=True)
class TotalMac:
    """Sum of the MAC fractions of a gas mixture.

    Attributes
    ----------
    total : pint.Quantity [MAC]
    contributions : dict of name -> pint.Quantity [MAC]
    warnings : tuple of (code, message)
    """

    total: pint.Quantity
    contributions: dict[str, pint.Quantity]
    warnings: tuple[Warning, ...] = ()


@dataclass(frozen=True)
class EndTidalForTotal:
    """End-tidal agent fraction that, with the nitrous oxide given, makes a requested total MAC.

    Attributes
    ----------
    end_tidal : pint.Quantity [percent] or None
        None when nitrous oxide alone already exceeds the requested total.
    agent_mac : AgeCorrectedMac
    nitrous_oxide_mac : pint.Quantity [MAC]
        MAC fraction contributed by the nitrous oxide.
    total : pint.Quantity [MAC]
    warnings : tuple of (code, message)
    """

    end_tidal: pint.Quantity | None
    agent_mac: AgeCorrectedMac
    nitrous_oxide_mac: pint.Quantity
    total: pint.Quantity
    warnings: tuple[Warning, ...] = ()


def total_mac(end_tidal: dict[str, Any], age: Any, ambient_pressure: Any = None) -> TotalMac:
    """Total MAC of a mixture: the sum of F_ET,i / MAC_i(age), nitrous oxide included.

    Parameters
    ----------
    end_tidal : dict of name -> fraction
        End-tidal volume fractions, e.g. ``{"sevoflurane": "1.2 %", "nitrous_oxide": "50 %"}``.
        Each 0 to 100 %, and together at most 100 %.
    age : [year]
    ambient_pressure : optional [kPa], absolute; default 101.325 kPa.

    Returns
    -------
    TotalMac

    References
    ----------
    Nickalls RWD, Mapleson WW. Br J Anaesth 2003;91:170-4; Mapleson WW. Br J Anaesth 1996;76:179.

    Examples
    --------
    >>> round(total_mac({"isoflurane": "1.17 %"}, "40 years").total.magnitude, 6)
    1.0
    """
    if not end_tidal:
        raise InputError("end_tidal", end_tidal, "at least one agent with its end-tidal fraction")
    parts: dict[str, pint.Quantity] = {}
    notes: list[Warning] = []
    sum_fraction = 0.0
    for name, value in end_tidal.items():
        field = f"end_tidal.{name}"
        f = parse_fraction(value, field)
        sum_fraction += f
        m = mac_at_age(name, age, ambient_pressure, agent_field=field)
        parts[m.agent] = Q_(f / m.mac.to("dimensionless").magnitude, "MAC")
        notes.extend(w for w in m.warnings if w not in notes)
    if sum_fraction > 1.0 + 1e-12:
        raise InputError("end_tidal", end_tidal, "fractions that add up to at most 100 %")
    total = sum(parts.values(), Q_(0.0, "MAC"))
    return TotalMac(total, parts, tuple(notes))


def end_tidal_for_total_mac(
    name: Any,
    total: Any,
    age: Any,
    nitrous_oxide: Any = 0.0,
    ambient_pressure: Any = None,
    *,
    total_field: str = "total_mac",
    nitrous_field: str = "nitrous_oxide",
    age_field: str = "patient.age",
    agent_field: str = "agent.name",
) -> EndTidalForTotal:
    """End-tidal agent fraction that, together with the nitrous oxide, gives a requested total MAC.

    F_agent = (total - F_N2O / MAC_N2O(age)) x MAC_agent(age), both MACs at the ambient pressure.

    Parameters
    ----------
    name : str
        Volatile agent.
    total : str, float or pint.Quantity [MAC]
        Requested total, 0 to 3 MAC; a bare number is MAC.
    age : [year]
    nitrous_oxide : fraction, optional
        End-tidal nitrous oxide, 0 to 100 %; default none.
    ambient_pressure : optional [kPa], absolute.

    Returns
    -------
    EndTidalForTotal
        ``end_tidal`` is None (with a warning) when nitrous oxide alone exceeds the total. A
        warning also flags an end-tidal above the vaporizer's maximum dial (compared as volume
        percent, as on a sea-level dial) and a mixture leaving less than 21 % for oxygen.

    References
    ----------
    Nickalls RWD, Mapleson WW. Br J Anaesth 2003;91:170-4.

    Examples
    --------
    >>> r = end_tidal_for_total_mac("sevoflurane", 1.0, "40 years", "52 %")
    >>> round(r.end_tidal.to("percent").magnitude, 3)
    0.9
    """
    m = parse_quantity(total, total_field, "mac", default_unit="MAC")
    check_range(m, total_field, Q_(0, "MAC"), Q_(3, "MAC"), value=total)
    want = float(m.to("MAC").magnitude)
    f_n2o = parse_fraction(nitrous_oxide, nitrous_field)
    sp = name if isinstance(name, VolatileAgent) else agent(name, agent_field)  # volatile agents only
    am = mac_at_age(sp, age, ambient_pressure, age_field=age_field, agent_field=agent_field)
    if np.ndim(am.mac.magnitude):
        raise InputError(age_field, age, "a single age")
    nm = mac_at_age("nitrous_oxide", age, ambient_pressure, age_field=age_field)
    n2o_mac = f_n2o / nm.mac.to("dimensionless").magnitude
    notes = list(am.warnings)
    rest = want - n2o_mac
    if rest < -1e-12:
        notes.append(
            (
                "NITROUS_OXIDE_EXCEEDS_TOTAL",
                f"nitrous oxide alone gives {n2o_mac:.2f} MAC, more than the requested {want:g} MAC; "
                "no agent concentration can lower it",
            )
        )
        return EndTidalForTotal(None, am, Q_(n2o_mac, "MAC"), Q_(want, "MAC"), tuple(notes))
    f_agent = max(rest, 0.0) * am.mac.to("dimensionless").magnitude
    if sp.vaporizer_max is not None and f_agent > sp.vaporizer_max.to("dimensionless").magnitude:
        notes.append(
            (
                "END_TIDAL_ABOVE_VAPORIZER_MAX",
                f"{100 * f_agent:.2f} % end-tidal {sp.name} is above the vaporizer's maximum dial "
                f"{sp.vaporizer_max.to('percent').magnitude:g} %; it cannot be reached",
            )
        )
    if f_agent + f_n2o > 1.0:
        notes.append(
            (
                "MIXTURE_ABOVE_100_PERCENT",
                f"{100 * f_agent:.1f} % agent and {100 * f_n2o:.1f} % nitrous oxide add up to more "
                "than 100 %; this total MAC cannot be given with this nitrous oxide",
            )
        )
    elif f_agent + f_n2o > 1.0 - HYPOXIC_FRACTION:
        notes.append(
            (
                "OXYGEN_BELOW_AIR",
                f"{100 * f_agent:.1f} % agent and {100 * f_n2o:.1f} % nitrous oxide leave less than 21 % for oxygen",
            )
        )
    return EndTidalForTotal(
        Q_(f_agent, "dimensionless").to("percent"), am, Q_(n2o_mac, "MAC"), Q_(want, "MAC"), tuple(notes)
    )


__all__ = [
    "AGE_RANGE",
    "MAPLESON_REFERENCE_AGE",
    "MAPLESON_SLOPE",
    "SOURCE",
    "AgeCorrectedMac",
    "EndTidalForTotal",
    "TotalMac",
    "end_tidal_for_total_mac",
    "mac_at_age",
    "mac_at_pressure",
    "mapleson_factor",
    "parse_age",
    "parse_ambient_pressure",
    "parse_fraction",
    "total_mac",
]
