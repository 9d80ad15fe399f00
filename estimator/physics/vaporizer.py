"""Vaporizers at the site's ambient pressure: what a dial delivers, and the dial for a MAC target.

Two kinds, with different behaviour away from sea level:

``variable_bypass``
    Fresh gas splits between a bypass and a chamber where it leaves saturated with vapour at the
    saturated vapour pressure (SVP), which does not depend on ambient pressure (Dalton's law). With
    the dial's resistance at the chamber **outlet** (``control="outlet"``, the usual design; from memory) the
    split ratio k of outlet flows is fixed by the dial, so the output partial pressure is
    ``k/(1+k) x SVP`` whatever the ambient pressure: the dial sets a partial pressure. Calibrated at
    101.325 kPa, a dial D delivers a volume fraction

    .. math:: F = D \\, p_0 / p \\quad (\\le \\mathrm{SVP}/p).

    With the resistance at the chamber **inlet** (``control="inlet"``) the carrier split s is fixed
    instead; the chamber adds vapour ``s r`` per unit carrier, :math:`r = \\mathrm{SVP}/(p-\\mathrm{SVP})`, and

    .. math:: F = \\frac{s r}{1 + s r}, \\qquad s = \\frac{D}{r_0 (1 - D)},

    which delivers a slightly higher partial pressure at altitude for high-SVP agents and tends to
    the outlet-control result when SVP << p. Both assume laminar split resistances (their ratio
    does not change with gas density) and a temperature-compensated vaporizer at 20 degC (SVP at
    20 degC from the agent table).

``heated_pressurised``
    A heated, pressurised (desflurane-type) vaporizer meters vapour into the fresh gas as a fixed
    volume fraction: F = D at every ambient pressure, so the partial pressure falls with p.

MAC is a partial pressure: MAC as a volume fraction at the site is MAC(1 atm) x p0/p. Hence a
variable-bypass dial gives the same MAC multiple at every elevation, while a heated pressurised
vaporizer needs its dial raised by p0/p.

References
----------
.. [1] Dalton's law of partial pressures; saturated vapour pressure independent of the
   pressure of the carrier gas (ideal-gas mixture).
.. [2] SVP at 20 degC and vaporizer maximum dials: estimator/data/agents.toml (Biro 2014; Eger
   1992; common practice).
.. [3] MAC as a partial pressure at reduced ambient pressure: common practice, no source.

Examples
--------
>>> round(float(delivered_fraction(0.02, "variable_bypass", Q_(70.109, "kPa"))), 5)
0.0289
>>> float(delivered_fraction(0.06, "heated_pressurised", Q_(70.109, "kPa")))
0.06
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..properties import VolatileAgent, agent
from ..units import Q_, STANDARD_ATMOSPHERE

KINDS = ("variable_bypass", "heated_pressurised")
_KIND_ALIASES = {
    "variable_bypass": "variable_bypass",
    "bypass": "variable_bypass",
    "heated_pressurised": "heated_pressurised",
    "heated_pressurized": "heated_pressurised",
    "heated": "heated_pressurised",
    "desflurane_type": "heated_pressurised",
}
CONTROLS = ("outlet", "inlet")
#: Ambient pressures [kPa] accepted (ISO 2533 troposphere, 11 000 m to -500 m, rounded outwards).
PRESSURE_RANGE = (22.6, 108.5)
P0 = float(STANDARD_ATMOSPHERE.to("kPa").magnitude)


def vaporizer_kind(kind: str, field_name: str = "vaporizer.kind") -> str:
    """Canonical vaporizer kind name (``variable_bypass`` or ``heated_pressurised``).

    Parameters
    ----------
    kind : str
        A kind or one of its aliases (case, hyphens and spaces ignored).
    field_name : str
        Name of the input field, for the error message.

    Returns
    -------
    str
        ``"variable_bypass"`` or ``"heated_pressurised"``.

    Examples
    --------
    >>> vaporizer_kind("Variable-bypass")
    'variable_bypass'
    """
    key = str(kind).strip().lower().replace("-", "_").replace(" ", "_")
    if key not in _KIND_ALIASES:
        raise InputError(field_name, kind, "one of " + ", ".join(KINDS))
    return _KIND_ALIASES[key]


def _fraction(value: Any, field_name: str) -> np.ndarray:
    if isinstance(value, str):
        value = Q_(value.replace("%", "percent"))
    if isinstance(value, pint.Quantity):
        if not value.check("[]"):
            raise InputError(field_name, f"{value:~P}", "a volume fraction such as '2 %' or 0.02")
        value = value.to("").magnitude
    f = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(f)) or np.any(f < 0) or np.any(f >= 1):
        raise InputError(field_name, value, "a volume fraction from 0 to below 1 (0 to 100 %)")
    return f


def _pressure_kpa(ambient_pressure: Any) -> float:
    p = ambient_pressure if isinstance(ambient_pressure, pint.Quantity) else Q_(float(ambient_pressure), "kPa")
    if not p.check("[pressure]"):
        raise InputError("site.ambient_pressure", ambient_pressure, "a pressure such as '70 kPa'")
    kpa = float(p.to("kPa").magnitude)
    if not PRESSURE_RANGE[0] <= kpa <= PRESSURE_RANGE[1]:
        raise InputError("site.ambient_pressure", f"{p:~P}", f"{PRESSURE_RANGE[0]:g} to {PRESSURE_RANGE[1]:g} kPa")
    return kpa


def _svp_kpa(agent_spec: Any, p_kpa: float) -> float:
    sp = agent_spec if isinstance(agent_spec, VolatileAgent) else agent(agent_spec)
    svp = float(sp.vapour_pressure_20c.to("kPa").magnitude)
    if svp >= p_kpa:
        raise InputError(
            "vaporizer.kind",
            "variable_bypass",
            f"heated_pressurised for {sp.name}: its SVP {svp:g} kPa at 20 degC reaches the "
            f"ambient {p_kpa:.1f} kPa, so it boils in a variable-bypass chamber",
        )
    return svp


def _out(x: np.ndarray) -> Any:
    return float(x) if np.ndim(x) == 0 else x


def mac_fraction_at_site(mac_one_atmosphere: Any, ambient_pressure: Any) -> Any:
    """MAC as a volume fraction at the site: MAC(1 atm) x 101.325 kPa / p.

    Parameters
    ----------
    mac_one_atmosphere : float, str or pint.Quantity [fraction]
        MAC at 101.325 kPa (age-corrected by the caller, e.g. estimator.physics.mac).
    ambient_pressure : pint.Quantity [kPa]

    Returns
    -------
    float or numpy.ndarray [fraction]

    References
    ----------
    MAC as a partial pressure at reduced ambient pressure: common practice, no source.

    Examples
    --------
    >>> round(mac_fraction_at_site("1.8 %", Q_(70.109, "kPa")), 5)
    0.02601
    """
    return _out(_fraction(mac_one_atmosphere, "mac") * P0 / _pressure_kpa(ambient_pressure))


def delivered_fraction(
    dial: Any, kind: str, ambient_pressure: Any, agent_name: Any = None, control: str = "outlet"
) -> Any:
    """Volume fraction of agent in the vaporizer output at ``ambient_pressure``.

    Parameters
    ----------
    dial : float, array, str or pint.Quantity [fraction]
        Dial setting (volume fraction at the calibration pressure 101.325 kPa).
    kind : {"variable_bypass", "heated_pressurised"}
    ambient_pressure : pint.Quantity [kPa]
    agent_name : str or VolatileAgent, optional
        Needed for ``control="inlet"``; with it a variable-bypass dial at or above SVP/p0 is
        rejected (the chamber output cannot exceed saturation).
    control : {"outlet", "inlet"}
        Where the dial's resistance sits in a variable-bypass vaporizer (see module notes).

    Returns
    -------
    float or numpy.ndarray [fraction]

    Raises
    ------
    InputError
        Unknown kind or control, dial outside 0 to < 1, pressure outside 22.6 to 108.5 kPa, or a
        variable-bypass vaporizer whose agent would boil at this pressure.

    References
    ----------
    Dalton's law of partial pressures; SVP at 20 degC from ``data/agents.toml`` (Biro P. Acta Anaesthesiol
    Scand 2014;58:968; desflurane: Eger EI. Anesth Analg 1992;75(4 Suppl):S3); outlet control from memory.

    Examples
    --------
    >>> round(float(delivered_fraction("2 %", "variable_bypass", Q_(70.109, "kPa"), "sevoflurane",
    ...                                control="inlet")), 4)
    0.0323
    """
    d = _fraction(dial, "vaporizer.dial")
    p = _pressure_kpa(ambient_pressure)
    kind = vaporizer_kind(kind)
    if control not in CONTROLS:
        raise InputError("vaporizer.control", control, "one of " + ", ".join(CONTROLS))
    if kind == "heated_pressurised":
        return _out(d.copy())
    if control == "inlet":
        if agent_name is None:
            raise InputError("agent.name", None, "an agent (its SVP) for control='inlet'")
        svp = _svp_kpa(agent_name, min(p, P0))
        r0, r = svp / (P0 - svp), svp / (p - svp)
        s = d / (r0 * (1.0 - d))
        return _out(s * r / (1.0 + s * r))
    if agent_name is not None:
        svp = _svp_kpa(agent_name, min(p, P0))
        if np.any(d * P0 >= svp):  # beyond any marketed dial: the chamber output is saturated
            raise InputError("vaporizer.dial", dial, f"below {100 * svp / P0:.1f} % (SVP limit of the agent)")
    return _out(d * P0 / p)


def _dial_for_fraction(f: np.ndarray, kind: str, p: float, svp: float | None, control: str) -> np.ndarray:
    if kind == "heated_pressurised" or svp is None:  # svp is None for a heated vaporizer only
        return f
    if control == "inlet":
        r0, r = svp / (P0 - svp), svp / (p - svp)
        s = f / (r * (1.0 - f))
        return s * r0 / (1.0 + s * r0)
    return f * p / P0


@dataclass(frozen=True)
class DialSetting:
    """Dial needed for a MAC target at the site.

    Attributes
    ----------
    dial : pint.Quantity [%]
        Needed dial setting (never capped; see ``warnings``).
    delivered_fraction : pint.Quantity [%]
        Volume fraction in the output at the site.
    partial_pressure : pint.Quantity [kPa]
        Agent partial pressure of the output.
    mac_at_site : pint.Quantity [%]
        One MAC as a volume fraction at the site.
    warnings : tuple of (code, message)
    """

    dial: pint.Quantity
    delivered_fraction: pint.Quantity
    partial_pressure: pint.Quantity
    mac_at_site: pint.Quantity
    warnings: tuple[tuple[str, str], ...] = field(default=())


def dial_for_target(
    target: Any, mac_one_atmosphere: Any, kind: str, ambient_pressure: Any, agent_name: Any, control: str = "outlet"
) -> DialSetting:
    """Dial that delivers ``target`` MAC (as inspired = delivered fraction) at the site.

    Parameters
    ----------
    target : float, array, str or pint.Quantity [MAC]
        MAC multiple, e.g. ``"1 MAC"`` or 1.0.
    mac_one_atmosphere : float, str or pint.Quantity [fraction]
        MAC at 101.325 kPa for this patient (take it from estimator.physics.mac).
    kind, ambient_pressure, control
        As in :func:`delivered_fraction`.
    agent_name : str or VolatileAgent
        For the vaporizer maximum and the SVP.

    Returns
    -------
    DialSetting
        Warning ``DIAL_ABOVE_VAPORIZER_MAX`` where the needed dial exceeds the agent's maximum,
        ``DIAL_UNREACHABLE`` where no dial below 100 % delivers the target.

    References
    ----------
    As :func:`delivered_fraction`; vaporizer maximum dials from ``data/agents.toml`` (common practice).

    Examples
    --------
    >>> s = dial_for_target("1 MAC", "6.6 %", "heated_pressurised", Q_(70.109, "kPa"), "desflurane")
    >>> round(s.dial.to("percent").magnitude, 2), s.warnings
    (9.54, ())
    """
    if isinstance(target, str):
        target = Q_(target)
    if isinstance(target, pint.Quantity):
        if not target.check("[anaesthetic_potency]"):
            raise InputError("end_tidal_target", f"{target:~P}", "a MAC multiple such as '1 MAC'")
        target = target.to("MAC").magnitude
    t = np.asarray(target, dtype=float)
    if not np.all(np.isfinite(t)) or np.any(t < 0) or np.any(t > 5):
        raise InputError("end_tidal_target", target, "0 to 5 MAC")
    sp = agent_name if isinstance(agent_name, VolatileAgent) else agent(agent_name)
    kind = vaporizer_kind(kind)
    p = _pressure_kpa(ambient_pressure)
    mac_site = np.asarray(mac_fraction_at_site(mac_one_atmosphere, ambient_pressure))
    f = t * mac_site
    svp = _svp_kpa(sp, min(p, P0)) if kind == "variable_bypass" else None
    notes: list[tuple[str, str]] = []
    limit = 1.0 if svp is None else svp / p
    bad = f >= limit
    if np.any(bad):
        notes.append(
            (
                "DIAL_UNREACHABLE",
                f"{float(np.max(t)):g} MAC needs {100 * float(np.max(f)):.1f} % at "
                f"{p:.1f} kPa, more than this vaporizer can deliver ({100 * limit:.1f} %)",
            )
        )
    with np.errstate(divide="ignore", invalid="ignore"):
        dial = np.where(bad, np.nan, _dial_for_fraction(np.where(bad, 0.0, f), kind, p, svp, control))
    vmax = float(sp.vaporizer_max.to("").magnitude)
    if np.any(dial > vmax):
        notes.append(
            (
                "DIAL_ABOVE_VAPORIZER_MAX",
                f"{float(np.max(t)):g} MAC of {sp.name} needs a dial of "
                f"{100 * float(np.nanmax(dial)):.2f} % at {p:.1f} kPa, above the vaporizer maximum "
                f"of {100 * vmax:g} %",
            )
        )
    return DialSetting(
        dial=Q_(_out(dial * 100.0), "percent"),
        delivered_fraction=Q_(_out(f * 100.0), "percent"),
        partial_pressure=Q_(_out(f * p), "kPa"),
        mac_at_site=Q_(_out(mac_site * 100.0), "percent"),
        warnings=tuple(notes),
    )
