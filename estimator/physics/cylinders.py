"""Cylinder contents from real-gas properties: compressed oxygen and air, nitrous oxide by weight.

Compressed gases (oxygen, medical air) are counted from the gauge reading: the amount of gas in
the cylinder is the real-gas molar density at the cylinder's temperature and absolute pressure,
taken from CoolProp's reference equations of state, times the water capacity. It is reported as
free gas at the package reference (15 degC, 101.325 kPa): litres = moles x R T_ref / p_ref. The
ideal-gas figure (water capacity x p / p_ref x T_ref / T) is returned beside it; oxygen holds more
than ideal at 137-200 bar (Z < 1), air less at 200-300 bar (Z > 1).

Nitrous oxide is stored as a liquid under its own vapour pressure, so the gauge says nothing about
the contents until the liquid is gone: contents come from the net weight (gross - tare) only. Above
the critical temperature (about 36.4 degC) no liquid can exist; the pressure then follows the gas
law (CoolProp density) and a warning says so.

References
----------
.. [1] Bell IH et al. Ind Eng Chem Res 2014;53:2498-508 (CoolProp; the equations of state are
   listed in :mod:`estimator.physics.real_gas`).
.. [2] ISO 13769, gas cylinders - stamp marking (water capacity and working pressure at 15 degC).

The real-gas properties are in :mod:`estimator.physics.real_gas` and the supply data file is read by
:mod:`estimator.physics.supply_values`; both are re-exported here.

Examples
--------
>>> c = compressed_cylinder("oxygen", "10 L", "200 bar", "15 degC", "0 bar")
>>> round(c.contents.to("L").magnitude, -1)
2130.0
>>> c.compressibility < 1
True
"""

from __future__ import annotations

from typing import Any

import pint

from ..errors import InputError
from ..limits import NITROUS_OXIDE_GAUGE_SHARE
from ..units import (
    Q_,
    REFERENCE_PRESSURE,
    REFERENCE_TEMPERATURE,
    STANDARD_ATMOSPHERE,
    check_range,
    parse_pressure,
    parse_quantity,
)
from .cylinder_state import (
    COMPRESSED_GASES,
    MAX_PRESSURE_BAR,
    TEMPERATURE_RANGE,
    CylinderContents,
    cylinder_count,
    cylinder_temperature,
)
from .real_gas import (
    COOLPROP_FLUIDS,
    compressibility,
    critical_temperature,
    fluid_name,
    free_gas,
    litres_per_kg,
    molar_density,
    molar_mass,
    pressure_at,
    props_si,
    reference_molar_volume,
    saturated_density,
    vapour_pressure,
)
from .supply_values import supply_data


def compressed_cylinder(
    gas: str,
    water_capacity: Any,
    pressure: Any,
    temperature: Any = "15 degC",
    reserve_pressure: Any = None,
    *,
    count: int = 1,
    service_pressure: Any = None,
    ambient_pressure: pint.Quantity = STANDARD_ATMOSPHERE,
    field_prefix: str = "cylinder",
) -> CylinderContents:
    """Contents and usable amount of compressed oxygen or air cylinders, by real-gas density.

    Parameters
    ----------
    gas : {"oxygen", "air"}
    water_capacity : [L] internal volume (marked on the cylinder).
    pressure : [bar] gauge as read (``"200 bar"``; ``"bar(a)"`` for absolute).
    temperature : [degC] of the cylinder, -40 to 65 degC.
    reserve_pressure : [bar] gauge at which the cylinder is changed out (local policy); None or 0
        means run to ambient pressure, with a warning.
    count : number of identical cylinders in this state.
    service_pressure : [bar] optional rated (working) pressure, settled at 15 degC; a reading whose
        gas would exceed it once settled to 15 degC is rejected.
    ambient_pressure : [kPa] for gauge to absolute.
    field_prefix : str, prefix of field names in error messages, e.g. ``"cylinders[0]"``.

    Returns
    -------
    CylinderContents

    References
    ----------
    CoolProp (Bell et al. 2014); free gas at 15 degC and 101.325 kPa as for cylinder contents.

    Examples
    --------
    >>> c = compressed_cylinder("air", "10 L", "300 bar", "15 degC", "10 bar", count=2)
    >>> c.contents < c.ideal_contents
    True
    """
    f = field_prefix
    if str(gas).strip().lower() not in COMPRESSED_GASES:
        raise InputError(
            f"{f}.gas", gas, "oxygen or air for a cylinder counted by pressure (nitrous_oxide is counted by weight)"
        )
    gas = str(gas).strip().lower()
    n = cylinder_count(count, f"{f}.count")
    wc = parse_quantity(water_capacity, f"{f}.water_capacity", "volume", default_unit="L")
    check_range(wc.to("L"), f"{f}.water_capacity", Q_(0, "L"), Q_(100, "L"), low_inclusive=False, value=water_capacity)
    t = cylinder_temperature(temperature, f"{f}.temperature")
    hi_bar = MAX_PRESSURE_BAR
    notes: list[tuple[str, str]] = []
    if service_pressure is not None:
        sp = parse_pressure(service_pressure, f"{f}.service_pressure").gauge(ambient_pressure)
        check_range(
            sp.to("bar"),
            f"{f}.service_pressure",
            Q_(0, "bar"),
            Q_(MAX_PRESSURE_BAR, "bar"),
            low_inclusive=False,
            value=service_pressure,
        )
        hi_bar = sp.to("bar").magnitude
    reading = parse_pressure(pressure, f"{f}.pressure")
    p_gauge = reading.gauge(ambient_pressure).to("bar")
    p_abs = reading.absolute(ambient_pressure).to("kPa")
    check_range(p_gauge, f"{f}.pressure", Q_(0, "bar"), Q_(MAX_PRESSURE_BAR, "bar"), value=pressure)
    rho = molar_density(gas, t, p_abs)
    if service_pressure is not None:
        settled = pressure_at(gas, REFERENCE_TEMPERATURE, rho)
        settled_gauge = (settled - ambient_pressure).to("bar").magnitude
        if settled_gauge > hi_bar * (1 + 1e-6):
            raise InputError(
                f"{f}.pressure",
                pressure,
                f"0 to {hi_bar:g} bar, the service pressure at 15 degC (this reading "
                f"settles to {settled_gauge:.1f} bar at 15 degC)",
            )
    if (
        reserve_pressure is None
        or parse_pressure(reserve_pressure, f"{f}.reserve_pressure").gauge(ambient_pressure).magnitude == 0
    ):
        notes.append(
            (
                "NO_RESERVE",
                f"{f}: no change-out reserve pressure set; usable contents assume "
                "the cylinder is run down to ambient pressure",
            )
        )
        r_abs = ambient_pressure.to("kPa")
    else:
        r = parse_pressure(reserve_pressure, f"{f}.reserve_pressure")
        check_range(
            r.gauge(ambient_pressure).to("bar"),
            f"{f}.reserve_pressure",
            Q_(0, "bar"),
            Q_(hi_bar, "bar"),
            value=reserve_pressure,
        )
        r_abs = r.absolute(ambient_pressure).to("kPa")
    contents = free_gas(rho * wc)
    residual = free_gas(molar_density(gas, t, r_abs) * wc)
    per = contents - residual
    if per.magnitude <= 0:
        notes.append(
            (
                "BELOW_RESERVE",
                f"{f}: the gauge reading is at or below the change-out reserve; nothing usable is counted",
            )
        )
        per = Q_(0.0, "L")
    ideal = (wc * p_abs / REFERENCE_PRESSURE * REFERENCE_TEMPERATURE.to("K") / t).to("L")
    return CylinderContents(
        gas=gas,
        count=n,
        contents=contents.to("L"),
        usable=(per * n).to("L"),
        compressibility=compressibility(gas, t, p_abs),
        ideal_contents=ideal,
        pressure=p_abs,
        phase="gas",
        warnings=tuple(notes),
    )


def nitrous_oxide_cylinder(
    gross_weight: Any,
    tare_weight: Any,
    temperature: Any = "15 degC",
    *,
    count: int = 1,
    water_capacity: Any = None,
    pressure: Any = None,
    reserve_weight: Any = None,
    ambient_pressure: pint.Quantity = STANDARD_ATMOSPHERE,
    field_prefix: str = "cylinder",
) -> CylinderContents:
    """Contents of nitrous oxide cylinders by weight; the gauge reading is never used for contents.

    Parameters
    ----------
    gross_weight, tare_weight : [kg] weighed cylinder and its stamped empty weight.
    temperature : [degC] of the cylinder.
    count : number of identical cylinders.
    water_capacity : [L] optional; gives the pressure above the critical temperature, the phase
        when nearly empty, and a check on the filling ratio.
    pressure : optional gauge reading, shown beside the vapour pressure, never used for contents.
    reserve_weight : [kg] optional net weight kept as a reserve (local policy).
    ambient_pressure : [kPa]
    field_prefix : str

    Returns
    -------
    CylinderContents
        ``usable`` is free gas at 15 degC and 101.325 kPa: net mass / molar mass x R T_ref / p_ref.

    References
    ----------
    CoolProp (Bell et al. 2014) with the equation of state of Span and Wagner (2003).

    Examples
    --------
    >>> c = nitrous_oxide_cylinder("8.5 kg", "5.0 kg")
    >>> round(c.usable.to("L").magnitude, -1)
    1880.0
    >>> c.phase, round(c.vapour_pressure.to("bar").magnitude)
    ('liquid and vapour', 45)
    """
    f = field_prefix
    n = cylinder_count(count, f"{f}.count")
    gross = parse_quantity(gross_weight, f"{f}.gross_weight", "mass", default_unit="kg").to("kg")
    check_range(gross, f"{f}.gross_weight", Q_(0, "kg"), Q_(200, "kg"), low_inclusive=False, value=gross_weight)
    tare = parse_quantity(tare_weight, f"{f}.tare_weight", "mass", default_unit="kg").to("kg")
    check_range(tare, f"{f}.tare_weight", Q_(0, "kg"), gross, low_inclusive=False, value=tare_weight)
    t = cylinder_temperature(temperature, f"{f}.temperature")
    net = gross - tare
    notes: list[tuple[str, str]] = []
    m = molar_mass("nitrous_oxide")
    tc = critical_temperature("nitrous_oxide")
    p_sat = vapour_pressure("nitrous_oxide", t)
    phase = "liquid and vapour" if p_sat is not None else "supercritical"
    p_state = p_sat
    z = None
    wc = None
    if water_capacity is not None:
        wc = parse_quantity(water_capacity, f"{f}.water_capacity", "volume", default_unit="L").to("L")
        check_range(wc, f"{f}.water_capacity", Q_(0, "L"), Q_(100, "L"), low_inclusive=False, value=water_capacity)
        density = (net / wc).to("kg/m^3").magnitude
        if p_sat is not None:
            vapour_density = (saturated_density("nitrous_oxide", t, "vapour") * m).to("kg/m^3").magnitude
            if density < vapour_density:
                phase = "vapour only"
        if phase != "liquid and vapour":
            p_state = pressure_at("nitrous_oxide", t, Q_(max(density, 1e-6), "kg/m^3") / m)
            z = compressibility("nitrous_oxide", t, p_state)
        ratio = Q_(supply_data()["nitrous_oxide"]["filling_ratio"]).to("kg/L").magnitude
        if (net / wc).to("kg/L").magnitude > ratio:
            notes.append(
                (
                    "NITROUS_OXIDE_OVERFILLED",
                    f"{f}: {(net / wc).to('kg/L').magnitude:.2f} kg/L "
                    f"is above the usual filling ratio of {ratio:g} kg/L (from memory); check the weights",
                )
            )
    if phase == "supercritical":
        msg = (
            f"{f}: at {t.to('degC').magnitude:.1f} degC the nitrous oxide is above its critical "
            f"temperature ({tc.to('degC').magnitude:.1f} degC): no liquid remains and the pressure "
            "follows the gas law; contents still from weight"
        )
        notes.append(("NITROUS_OXIDE_SUPERCRITICAL", msg))
    elif phase == "vapour only":
        notes.append(
            ("NITROUS_OXIDE_NO_LIQUID", f"{f}: the weight implies no liquid is left; the gauge now falls with use")
        )
    if pressure is not None and p_sat is not None and phase == "liquid and vapour":
        g = parse_pressure(pressure, f"{f}.pressure").absolute(ambient_pressure)
        if g.to("kPa").magnitude < NITROUS_OXIDE_GAUGE_SHARE * p_sat.magnitude:
            notes.append(
                (
                    "NITROUS_OXIDE_GAUGE_LOW",
                    f"{f}: gauge reads below the vapour pressure "
                    f"({p_sat.to('bar').magnitude:.1f} bar absolute): the weights may be wrong or "
                    "the cylinder colder than stated; contents are from weight",
                )
            )
    reserve = Q_(0.0, "kg")
    if reserve_weight is not None:
        reserve = parse_quantity(reserve_weight, f"{f}.reserve_weight", "mass", default_unit="kg").to("kg")
        check_range(reserve, f"{f}.reserve_weight", Q_(0, "kg"), Q_(200, "kg"), value=reserve_weight)
    residual = Q_(0.0, "kg")
    if wc is not None:  # the gas left at ambient pressure cannot be delivered
        residual = molar_density("nitrous_oxide", t, ambient_pressure) * m * wc
    keep = max(reserve, residual.to("kg"))
    usable_mass = max(net - keep, Q_(0.0, "kg"))
    if usable_mass.magnitude == 0:
        notes.append(("BELOW_RESERVE", f"{f}: net weight is at or below the reserve; nothing usable is counted"))
    contents = free_gas(net / m)
    return CylinderContents(
        gas="nitrous_oxide",
        count=n,
        contents=contents,
        usable=(free_gas(usable_mass / m) * n).to("L"),
        compressibility=z,
        pressure=p_state,
        vapour_pressure=p_sat,
        net_weight=net,
        phase=phase,
        warnings=tuple(notes),
    )


__all__ = [
    "COMPRESSED_GASES",
    "COOLPROP_FLUIDS",
    "MAX_PRESSURE_BAR",
    "TEMPERATURE_RANGE",
    "CylinderContents",
    "cylinder_count",
    "cylinder_temperature",
    "compressed_cylinder",
    "compressibility",
    "critical_temperature",
    "fluid_name",
    "free_gas",
    "litres_per_kg",
    "molar_density",
    "nitrous_oxide_cylinder",
    "props_si",
    "reference_molar_volume",
    "supply_data",
    "vapour_pressure",
]
