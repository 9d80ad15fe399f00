"""Site and flowmeter: ambient pressure from elevation, true flow behind a reading, vaporizers at altitude."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import streamlit as st

from estimator.errors import InputError
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE, Q_

from .. import state
from ..charts import show, time_course
from ..common import downloads, flow_factor, show_error, show_warnings, unit
from ..editing import contract

GAS_CHOICES = ("oxygen", "air", "nitrous_oxide", "concentrator")


def site_inputs() -> Any:
    """The site calculator's inputs; ranges, the temperature default and help from the scenario's [site] contract."""
    from estimator.inputs.scenario import SiteInput
    from estimator.physics.site import site_from_inputs

    pu = unit("pressure")
    st.subheader("Site")
    c1, c2, c3 = st.columns(3)
    how = c1.radio("Ambient pressure from", ("elevation", "measured pressure"), key="site.how", horizontal=True)
    if how == "elevation":
        e = contract(SiteInput, "elevation", "Elevation", "m")
        elev = c2.number_input(e.title, e.low, e.high, 2400.0, 100.0, key="site.elevation", help=e.help)
        kwargs = {"elevation": f"{elev:g} m"}
    else:
        default = Q_(75.6, "kPa").to(pu).magnitude
        b = contract(SiteInput, "ambient_pressure", "Barometric pressure", pu)
        p = c2.number_input(
            f"{b.title} (absolute)", b.low, b.high, float(round(default, 2)), key=f"site.pressure.{pu}", help=b.help
        )
        kwargs = {"ambient_pressure": Q_(p, pu).to("kPa")}
    t = contract(SiteInput, "temperature", "Room temperature", "degC")
    temp = c3.number_input(t.title, t.low, t.high, t.default, 1.0, key="site.temperature", help=t.help)
    site = site_from_inputs(temperature=f"{temp:g} degC", **kwargs)
    m = st.columns(3)
    m[0].metric("Ambient pressure", f"{site.ambient_pressure.to(pu).magnitude:.3g} {pu}", help=site.basis)
    m[1].metric("Pressure altitude", f"{site.pressure_altitude.to('m').magnitude:,.0f} m")
    from estimator.physics.inspired_oxygen import inspired_oxygen_partial_pressure

    pio2 = inspired_oxygen_partial_pressure(0.21, site.ambient_pressure)
    m[2].metric(
        "Inspired PO2 breathing air",
        f"{pio2.to(pu).magnitude:.3g} {pu}",
        help="Humidified at 37 degC (water vapour 6.3 kPa)",
    )
    show_warnings(site.warnings)
    return site


def flowmeter_section(site: Any) -> dict[str, Any]:
    from estimator.physics.flowmeter import true_flow

    fu, ff = unit("flow"), flow_factor()
    st.subheader("True flow behind a flowmeter reading")
    c1, c2, c3, c4 = st.columns(4)
    reading = c1.number_input(f"Reading [{fu}]", 0.0, 100.0 * ff, 1.0 * ff, 0.1 * ff, key=f"fm.reading.{fu}")
    cal = c2.selectbox("Tube calibrated for", GAS_CHOICES[:3], key="fm.cal")
    use = c3.selectbox("Gas flowing", GAS_CHOICES, key="fm.use")
    purity = None
    if use == "concentrator":
        purity = f"{c4.number_input('Concentrator O2 [%]', 80.0, 95.7, 93.0, 0.5, key='fm.purity'):g} %"
    r = true_flow(Q_(reading / ff, "L/min"), cal, use, site, purity=purity)
    m = [*st.columns(2), *st.columns(2)]  # two rows of two: no metric cut off at 1440 px
    m[0].metric(
        "True flow at the site",
        f"{r.true_flow_ambient.to('L/min').magnitude * ff:.3g} {fu}",
        help="Ambient pressure and room temperature",
    )
    m[1].metric(
        "True flow, reference litres",
        f"{r.true_flow_standard.to('L/min').magnitude * ff:.3g} {fu}",
        help=GAS_VOLUME_REFERENCE,
    )
    m[2].metric("Flow regime", str(r.regime))
    lo, hi = (r.uncertainty[k].to("L/min").magnitude * ff for k in ("low", "high"))
    m[3].metric("Band from tube accuracy", f"{lo:.3g} to {hi:.3g} {fu}")
    show_warnings(r.warnings)
    grid = np.linspace(0.1, 10.0, 60)
    sweep = true_flow(Q_(grid, "L/min"), cal, use, site, purity=purity)
    x = f"reading [{fu}]"
    curve = pd.DataFrame(
        {x: grid * ff, "correction": np.asarray(sweep.correction, dtype=float), "regime": np.asarray(sweep.regime)}
    )
    chart = time_course(curve, {"correction": "true flow / reading"}, "true flow / reading [-]", height=220, x=x)
    chart["title"] = "Correction over the flowmeter scale"
    show(chart)
    st.caption(
        "Low on the scale the float reads by viscosity (laminar), high on it by density (turbulent); a "
        "tube used at altitude or with another gas reads wrong by that ratio."
    )
    return {
        "reading": Q_(reading / ff, "L/min"),
        "calibrated_for": cal,
        "gas": use,
        "true_flow_ambient": r.true_flow_ambient,
        "true_flow_standard": r.true_flow_standard,
        "regime": r.regime,
        "uncertainty": r.uncertainty,
        "warnings": [{"code": c, "message": m} for c, m in r.warnings],
        "sweep": curve,
    }


def vaporizer_section(site: Any) -> dict[str, Any]:
    from estimator.physics.mac import mac_at_age
    from estimator.physics.vaporizer import KINDS, delivered_fraction, dial_for_target
    from estimator.units import parse_quantity

    st.subheader("Vaporizer at the site")
    doc = state.document()
    names = sorted(AGENTS)
    agent_now = doc.get("agent", {}).get("name", "sevoflurane")
    c1, c2, c3, c4 = st.columns(4)
    agent = c1.selectbox("Agent", names, names.index(agent_now) if agent_now in names else 0, key="vap.agent")
    kinds = list(KINDS)
    kind = c2.selectbox(
        "Vaporizer",
        kinds,
        1 if agent == "desflurane" else 0,
        key=f"vap.kind.{agent}",
        format_func=lambda k: k.replace("_", " "),
    )
    dial = c3.number_input("Dial [%]", 0.0, 18.0, 2.0, 0.1, key="vap.dial")
    try:
        age = parse_quantity(doc.get("patient", {}).get("age", "40 years"), "patient.age", "age")
    except InputError:
        age = Q_(40, "year")
    target = c4.number_input(
        f"Target [MAC] (age {age.to('year').magnitude:.0f} from the case)", 0.1, 3.0, 1.0, 0.1, key="vap.target"
    )
    mac1 = mac_at_age(agent, age)
    f = float(delivered_fraction(dial / 100, kind, site.ambient_pressure))
    need = dial_for_target(target, mac1.mac, kind, site.ambient_pressure, agent)
    m = st.columns(4)
    m[0].metric("Delivered at the site", f"{100 * f:.2f} %", help="Volume fraction in the vaporizer output")
    m[1].metric("Agent partial pressure", f"{f * site.ambient_pressure.to('kPa').magnitude:.2f} kPa")
    m[2].metric(
        "1 MAC at the site",
        f"{float(need.mac_at_site.magnitude):.2f} %",
        help="MAC is a partial pressure: the same MAC is a larger volume % at lower pressure",
    )
    dial_need = float(need.dial.magnitude)
    m[3].metric(f"Dial for {target:g} MAC inspired", "not reachable" if np.isnan(dial_need) else f"{dial_need:.2f} %")
    show_warnings(need.warnings)
    return {
        "agent": agent,
        "kind": kind,
        "dial": Q_(dial, "percent"),
        "delivered": Q_(100 * f, "percent"),
        "mac_at_site": need.mac_at_site,
        "dial_for_target": need.dial,
        "target": Q_(target, "MAC"),
        "warnings": [{"code": c, "message": m} for c, m in need.warnings],
    }


def render() -> None:
    st.title("Site and flowmeter")
    st.caption(
        "Altitude changes what flowmeters and variable-bypass vaporizers deliver. Enter the site, read "
        "the true flow behind a reading and what a dial delivers."
    )
    try:
        site = site_inputs()
        fm = flowmeter_section(site)
        vap = vaporizer_section(site)
    except InputError as exc:
        show_error(exc)
        return
    sweep = fm.pop("sweep")
    doc = {
        "site": {
            "ambient_pressure": site.ambient_pressure,
            "temperature": site.temperature,
            "elevation": site.elevation,
            "basis": site.basis,
        },
        "flowmeter": fm,
        "vaporizer": vap,
        "gas_volume_reference": GAS_VOLUME_REFERENCE,
    }
    downloads(
        "site_and_flowmeter",
        {"flowmeter_sweep": sweep},
        doc,
        "site",
        title="Site and flowmeter",
        notes=[f"Gas volumes: {GAS_VOLUME_REFERENCE}."],
        warnings=site.warnings,
    )
