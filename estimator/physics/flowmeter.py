"""True flow from a variable-orifice (float) flowmeter read at the site, for any gas or mixture.

A float in a tapered tube rises until the pressure drop across it carries its weight:

.. math:: \\Delta p = \\frac{(\\rho_f - \\rho) V_f g}{A_f} \\quad\\text{(fixed by the float)}.

The gas passes the annulus between float rim and tube wall, a slot of width
:math:`w = \\pi D_f`, gap :math:`\\delta` (set by the float height, hence by the reading) and length
:math:`L`. Its pressure drop is the sum of a viscous term (plane Poiseuille flow, the slot form of
Hagen-Poiseuille) and an inertial term (orifice equation with discharge coefficient :math:`C_d`):

.. math:: \\Delta p = \\frac{12 \\mu L}{w \\delta^3} Q + \\frac{\\rho}{2 C_d^2 w^2 \\delta^2} Q^2
          = a \\mu Q + b \\rho Q^2 .

Calibration fixes the geometry: at reading :math:`R` the calibration gas
(:math:`\\mu_c, \\rho_c` at 20 degC, 101.325 kPa) flows :math:`Q = R`, which gives :math:`\\delta`
(a cubic in :math:`1/\\delta` with one positive root). Another gas, or the same gas at another
pressure or temperature, at the same float height then flows the positive root of the quadratic

.. math:: Q = \\frac{2 \\Delta p'}{a \\mu' + \\sqrt{(a \\mu')^2 + 4 b \\rho' \\Delta p'}},
          \\qquad \\Delta p' = \\Delta p \\frac{\\rho_f - \\rho'}{\\rho_f - \\rho_c}.

Its limits are the two textbook corrections: viscous (low range) :math:`Q/R = \\mu_c/\\mu'`;
inertial (high range) :math:`Q/R = \\sqrt{\\rho_c/\\rho'}` (each times the small buoyancy factor),
and between them the transition follows without a fitted blend. The Reynolds number of the annulus
(hydraulic diameter :math:`2\\delta`) is :math:`Re = 2 \\rho Q / (\\mu w)`; the two terms are equal at
:math:`Re^* = 48 C_d^2 L / \\delta`. In a long pipe the change comes near Re = 2000; a float annulus
is a short passage, so :math:`Re^*` is far lower (tens to a few hundred) and moves with the float
height: the narrow gap low in the tube is viscous, the wide gap high in the tube inertial. The
regime is therefore named from the viscous share of the pressure drop (laminar above 80 %,
turbulent below 20 %, transitional between), and both Reynolds numbers are reported.

Gas properties are at the conditions in the tube (site pressure plus any back pressure, room
temperature): density and viscosity of pure gases from CoolProp; nitrous oxide viscosity (which
CoolProp lacks) by Chapman-Enskog; mixtures take the molar mass average with real-gas Z and Wilke's
viscosity rule. Volumes are then given at ambient pressure and room temperature, and as free gas at
15 degC and 101.325 kPa (mass conserved, real gas).

References
----------
.. [1] White FM. Viscous Fluid Flow, 3rd ed. 2006 (plane Poiseuille flow between parallel plates).
.. [2] ISO 5167-1:2003 (orifice equation, discharge coefficient).
.. [3] Wilke CR. A viscosity equation for gas mixtures. J Chem Phys 1950;18:517-9.
.. [4] Neufeld PD, Janzen AR, Aziz RA. J Chem Phys 1972;57:1100 (collision integral), with
   Chapman-Enskog as in Poling, Prausnitz, O'Connell, The Properties of Gases and Liquids, 5th ed. 2001.
.. [5] Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp).

Examples
--------
>>> r = true_flow("10 L/min", "oxygen", "oxygen", site_from_inputs(elevation="3000 m"))
>>> r.regime, round(r.true_flow_ambient.to("L/min").magnitude, 1)
('turbulent', 12.0)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..limits import LOW_READING
from ..units import (
    GAS_VOLUME_REFERENCE,
    Q_,
    REFERENCE_PRESSURE,
    REFERENCE_TEMPERATURE,
    parse_quantity,
)
from ..units import check_range as _check_range
from .gas_mixtures import data_value, mixture_properties, resolve_gas
from .site import Site, site_from_inputs  # noqa: F401 (doctests)

#: Regime names from the viscous share of the float's pressure drop.
LAMINAR_SHARE, TURBULENT_SHARE = 0.8, 0.2
#: Readings [L/min] accepted; below LOW_READING a warning (sticking float, common practice).
READING_RANGE = (0.0, 100.0)
BACK_PRESSURE_RANGE = (0.0, 20.0)  # kPa gauge at the tube outlet


@dataclass(frozen=True)
class FlowmeterGeometry:
    """Float and annulus of the tube [SI units]. Defaults from ``data/flowmeter.toml``."""

    float_diameter: float = field(default_factory=lambda: data_value("geometry", "float_diameter", "m"))
    rim_length: float = field(default_factory=lambda: data_value("geometry", "rim_length", "m"))
    discharge_coefficient: float = field(default_factory=lambda: data_value("geometry", "discharge_coefficient", ""))
    pressure_drop: float = field(default_factory=lambda: data_value("geometry", "pressure_drop", "Pa"))
    float_density: float = field(default_factory=lambda: data_value("geometry", "float_density", "kg/m^3"))


# ---------------------------------------------------------------- the float model (plain SI floats)
def annulus_flow(
    reading: Any, cal: tuple[float, float], use: tuple[float, float], geometry: FlowmeterGeometry | None = None
) -> dict[str, np.ndarray]:
    """Solve the float balance: true volumetric flow in the tube at the float height of ``reading``.

    Parameters
    ----------
    reading : float or array [m3/s]
        Flow of the calibration gas at calibration conditions that puts the float at this height.
    cal, use : (density [kg/m3], viscosity [Pa s])
        Calibration gas at calibration conditions; gas in use at tube conditions.
    geometry : FlowmeterGeometry

    Returns
    -------
    dict with ``flow`` [m3/s at tube conditions], ``gap`` [m], ``viscous_share`` [-], ``reynolds``
    and ``transition_reynolds`` [-] (arrays).

    References
    ----------
    White FM. Viscous Fluid Flow, 3rd ed. 2006 (plane Poiseuille flow; from memory); ISO 5167-1:2003
    (orifice equation; from memory).

    Examples
    --------
    >>> out = annulus_flow(1e-4, (1.2, 1.8e-5), (1.2, 1.8e-5))
    >>> float(out["flow"])
    0.0001
    """
    g = geometry or FlowmeterGeometry()
    r = np.asarray(reading, dtype=float)
    w = math.pi * g.float_diameter
    a, b = 12.0 * g.rim_length / w, 1.0 / (2.0 * g.discharge_coefficient**2 * w**2)
    (rho_c, mu_c), (rho_u, mu_u) = cal, use
    dp_c = g.pressure_drop
    dp_u = dp_c * (g.float_density - rho_u) / (g.float_density - rho_c)
    live = r > 0
    rs = np.where(live, r, 1.0)
    # 1/gap from a mu_c R y^3 + b rho_c R^2 y^2 = dp_c: Newton from above (convex, increasing).
    c3, c2 = a * mu_c * rs, b * rho_c * rs**2
    y = np.minimum(np.cbrt(dp_c / c3), np.sqrt(dp_c / c2))
    for _ in range(60):
        step = (c3 * y**3 + c2 * y**2 - dp_c) / (3 * c3 * y**2 + 2 * c2 * y)
        y = y - step
        if np.all(np.abs(step) <= 1e-13 * y):
            break
    lin, quad = a * mu_u * y**3, b * rho_u * y**2
    q = 2.0 * dp_u / (lin + np.sqrt(lin**2 + 4.0 * quad * dp_u))
    share = lin * q / dp_u
    return {
        "flow": np.where(live, q, 0.0),
        "gap": np.where(live, 1.0 / y, 0.0),
        "viscous_share": np.where(live, share, 1.0),
        "reynolds": np.where(live, 2.0 * rho_u * q / (mu_u * w), 0.0),
        "transition_reynolds": np.where(live, 48.0 * g.discharge_coefficient**2 * g.rim_length * y, np.inf),
    }


def regime_of(viscous_share: Any) -> Any:
    """``"laminar"``, ``"transitional"`` or ``"turbulent"`` from the viscous share of the drop.

    Parameters
    ----------
    viscous_share : float or numpy.ndarray [-]
        Share of the float's pressure drop carried by the viscous term, 0 to 1.

    Returns
    -------
    str or numpy.ndarray of str
        Laminar at 80 % or more, turbulent at 20 % or less (the package's naming), else transitional.

    Examples
    --------
    >>> regime_of(0.9), regime_of(0.5), regime_of(0.1)
    ('laminar', 'transitional', 'turbulent')
    """
    s = np.asarray(viscous_share, dtype=float)
    out = np.where(s >= LAMINAR_SHARE, "laminar", np.where(s <= TURBULENT_SHARE, "turbulent", "transitional"))
    return str(out) if out.ndim == 0 else out


# ---------------------------------------------------------------- public API with units
@dataclass(frozen=True)
class TrueFlow:
    """True flow behind a flowmeter reading (the package's name: **true flow**).

    Attributes
    ----------
    true_flow_ambient : pint.Quantity [L/min]
        At ambient pressure and room temperature.
    true_flow_standard : pint.Quantity [L/min]
        Free gas at 15 degC and 101.325 kPa (``gas_volume_reference``).
    regime : str or array of str
    reynolds : float or array
        Annulus Reynolds number (hydraulic diameter twice the gap).
    uncertainty : dict
        ``low`` and ``high`` of ``true_flow_ambient`` from the tube's stated accuracy of reading.
    uncertainty_standard : dict
        The same band in standard litres.
    viscous_share, transition_reynolds : float or array
    correction : float or array
        ``true_flow_ambient / reading``.
    site : Site
    tube_pressure : pint.Quantity [kPa]
    composition, calibration_composition : dict
    warnings : tuple of (code, message)
    """

    true_flow_ambient: pint.Quantity
    true_flow_standard: pint.Quantity
    regime: Any
    reynolds: Any
    uncertainty: dict[str, pint.Quantity]
    uncertainty_standard: dict[str, pint.Quantity]
    viscous_share: Any
    transition_reynolds: Any
    correction: Any
    site: Site
    tube_pressure: pint.Quantity
    composition: dict[str, float]
    calibration_composition: dict[str, float]
    warnings: tuple[tuple[str, str], ...] = ()
    gas_volume_reference: str = GAS_VOLUME_REFERENCE


def _scalar(x: np.ndarray) -> Any:
    return float(x) if np.ndim(x) == 0 else x


def true_flow(
    reading: Any,
    calibrated_for: Any,
    gas_in_use: Any,
    site: Site,
    *,
    purity: Any = None,
    back_pressure: Any = None,
    geometry: FlowmeterGeometry | None = None,
    accuracy: Any = None,
) -> TrueFlow:
    """True flow of ``gas_in_use`` behind a reading on a tube calibrated for ``calibrated_for``.

    Parameters
    ----------
    reading : str or pint.Quantity [L/min]
        Scale reading; scalar or array; a bare number is L/min. 0 to 100 L/min.
    calibrated_for, gas_in_use : str or dict
        Gas names or mixtures, see :func:`~estimator.physics.gas_mixtures.resolve_gas`.
    site : Site
        Ambient pressure and room temperature (:func:`estimator.physics.site.site_from_inputs`).
    purity : str or float, optional [%]
        Oxygen fraction of ``"concentrator"`` product (default 93 %).
    back_pressure : str or pint.Quantity [kPa], optional
        Gauge pressure at the tube outlet above ambient, 0 to 20 kPa (default 0).
    geometry : FlowmeterGeometry, optional
    accuracy : str or float, optional [%]
        Accuracy of reading of the tube (default 2.5 %, common practice, no source).

    Returns
    -------
    TrueFlow

    References
    ----------
    See the module notes (Poiseuille slot flow, orifice equation, Wilke 1950, CoolProp).

    Examples
    --------
    >>> r = true_flow("5 L/min", "oxygen", "oxygen", site_from_inputs())
    >>> round(r.true_flow_ambient.to("L/min").magnitude, 6)
    5.0
    """
    if (
        isinstance(reading, pint.Quantity)
        and np.ndim(reading.magnitude) > 0
        and reading.check("[length] ** 3 / [time]")
    ):
        r_lpm = np.asarray(reading.to("L/min").magnitude, dtype=float)  # an array of readings
    else:
        r_lpm = np.asarray(parse_quantity(reading, "reading", "flow", "L/min").to("L/min").magnitude, dtype=float)
    if not np.all(np.isfinite(r_lpm)) or np.any(r_lpm < READING_RANGE[0]) or np.any(r_lpm > READING_RANGE[1]):
        raise InputError("reading", reading, f"{READING_RANGE[0]:g} to {READING_RANGE[1]:g} L/min")
    if purity is not None and "concentrator" not in f"{calibrated_for} {gas_in_use}".lower():
        raise InputError("purity", purity, "no purity unless a gas is 'concentrator'")
    cal_mix = resolve_gas(calibrated_for, purity, "calibrated_for")
    use_mix = resolve_gas(gas_in_use, purity, "gas")
    acc = (
        data_value("calibration", "accuracy", "")
        if accuracy is None
        else float(parse_quantity(accuracy, "accuracy", "fraction").to("").magnitude)
    )
    _check_range(Q_(acc, ""), "accuracy", 0.0, 0.5, value=accuracy)
    bp = Q_(0.0, "kPa") if back_pressure is None else parse_quantity(back_pressure, "back_pressure", "pressure", "kPa")
    _check_range(bp.to("kPa"), "back_pressure", *BACK_PRESSURE_RANGE, value=back_pressure)

    t_cal, p_cal = data_value("calibration", "temperature", "K"), data_value("calibration", "pressure", "Pa")
    t = float(site.temperature.to("K").magnitude)
    p_amb = float(site.ambient_pressure.to("Pa").magnitude)
    p_tube = p_amb + float(bp.to("Pa").magnitude)
    cal = mixture_properties(cal_mix, t_cal, p_cal)
    use = mixture_properties(use_mix, t, p_tube)
    rho_amb = mixture_properties(use_mix, t, p_amb)[0]
    rho_ref = mixture_properties(
        use_mix, float(REFERENCE_TEMPERATURE.to("K").magnitude), float(REFERENCE_PRESSURE.to("Pa").magnitude)
    )[0]
    per_si = 60000.0  # (L/min) per (m3/s)
    stacked = np.stack([r_lpm, r_lpm * (1 - acc), r_lpm * (1 + acc)]) / per_si
    out = annulus_flow(stacked, cal, use, geometry)
    q_amb = out["flow"] * per_si * use[0] / rho_amb
    q_std = out["flow"] * per_si * use[0] / rho_ref

    notes = list(site.warnings)
    if np.any((r_lpm > 0) & (r_lpm < LOW_READING)):
        notes.append(
            (
                "FLOWMETER_LOW_READING",
                f"reading below {LOW_READING:g} L/min: a float can stick and "
                "read wrong by tens of per cent at the bottom of the tube",
            )
        )
    if cal_mix != use_mix:
        notes.append(
            (
                "FLOWMETER_OTHER_GAS",
                f"tube calibrated for {_label(cal_mix)} used with {_label(use_mix)}: "
                "the true flow is a model correction, check it against a reference flowmeter",
            )
        )
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = np.where(r_lpm > 0, q_amb[0] / np.where(r_lpm > 0, r_lpm, 1.0), np.nan)
    return TrueFlow(
        true_flow_ambient=Q_(_scalar(q_amb[0]), "L/min"),
        true_flow_standard=Q_(_scalar(q_std[0]), "L/min"),
        regime=regime_of(out["viscous_share"][0]),
        reynolds=_scalar(out["reynolds"][0]),
        uncertainty={"low": Q_(_scalar(q_amb[1]), "L/min"), "high": Q_(_scalar(q_amb[2]), "L/min")},
        uncertainty_standard={"low": Q_(_scalar(q_std[1]), "L/min"), "high": Q_(_scalar(q_std[2]), "L/min")},
        viscous_share=_scalar(out["viscous_share"][0]),
        transition_reynolds=_scalar(out["transition_reynolds"][0]),
        correction=_scalar(corr),
        site=site,
        tube_pressure=Q_(p_tube / 1000.0, "kPa"),
        composition=use_mix,
        calibration_composition=cal_mix,
        warnings=tuple(notes),
    )


def _label(mix: dict[str, float]) -> str:
    if len(mix) == 1:
        return next(iter(mix))
    return " + ".join(f"{100 * x:.1f} % {g}" for g, x in mix.items())
