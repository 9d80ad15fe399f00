"""Case planner: one planned case through the circle-system model (``estimator.engine.simulate``)."""

from __future__ import annotations

import math
from typing import Any

import pandas as pd
import streamlit as st

from estimator.errors import InputError
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE, parse_quantity

from .. import spread_view, state
from ..charts import show, time_course
from ..common import downloads, flow_factor, show_error, show_warnings, unit

CONTROLS = ("dial %", "end-tidal hold MAC", "end-tidal hold %")
TOTAL_ROWS = (  # key, label, unit shown
    ("agent_liquid", "liquid agent", "mL"),
    ("agent_vapour", "agent vapour delivered", "L"),
    ("agent_uptake", "agent taken up by the patient", "L"),
    ("agent_vented", "agent vented", "L"),
    ("oxygen", "oxygen", "L"),
    ("air", "air", "L"),
    ("nitrous_oxide", "nitrous oxide", "L"),
    ("co2_absorbed", "CO2 absorbed", "L"),
    ("absorbent", "absorbent used", "g"),
    ("mac_hours", "MAC-hours", "MAC_hour"),
    ("co2e", "CO2e (IPCC AR6 GWP100)", "kg"),
    ("duration", "duration", "min"),
)


def _q(value: Any, field: str, dimension: str, unit_: str, default: float) -> float:
    if value is None:
        return default
    try:
        return float(parse_quantity(value, field, dimension).to(unit_).magnitude)
    except InputError:
        return default


def phase_frame(doc: dict[str, Any], factor: float) -> pd.DataFrame:
    """Editor rows of the scenario's phases, flows in the display unit (``factor`` per L/min)."""
    rows = []
    for i, ph in enumerate(doc.get("phases", [])):
        flows = {}
        if "total_flow" in ph or "oxygen_fraction" in ph:
            try:
                from estimator.scenario import PhaseInput

                o2, air, n2o = PhaseInput.model_validate(ph).flows()
                flows = {"oxygen": o2.magnitude, "air": air.magnitude, "nitrous_oxide": n2o.magnitude}
            except Exception:  # noqa: BLE001 - shown as an error when the scenario runs
                flows = {}
        else:
            flows = {
                g: _q(ph.get(g), f"phases[{i}].{g}", "flow", "L/min", 0.0) for g in ("oxygen", "air", "nitrous_oxide")
            }
        if ph.get("vaporizer") is not None:
            control, setting = CONTROLS[0], _q(ph["vaporizer"], "vaporizer", "fraction", "percent", 0.0)
        else:
            target = str(ph.get("end_tidal_target", "1 MAC"))
            if "mac" in target.lower():
                control, setting = CONTROLS[1], _q(target, "end_tidal_target", "mac", "MAC", 1.0)
            else:
                control, setting = CONTROLS[2], _q(target, "end_tidal_target", "fraction", "percent", 2.0)
        rows.append(
            {
                "label": ph.get("label", ""),
                "duration [min]": _q(ph.get("duration"), "duration", "time", "min", 10.0),
                "oxygen": flows.get("oxygen", 0.0) * factor,
                "air": flows.get("air", 0.0) * factor,
                "nitrous_oxide": flows.get("nitrous_oxide", 0.0) * factor,
                "agent control": control,
                "setting": setting,
            }
        )
    return pd.DataFrame(
        rows, columns=["label", "duration [min]", "oxygen", "air", "nitrous_oxide", "agent control", "setting"]
    )


def phases_from_frame(frame: pd.DataFrame, factor: float, flow_unit: str) -> list[dict[str, Any]]:
    """Scenario phases from the editor rows; an incomplete row is an InputError naming it."""
    out = []
    for i, row in enumerate(frame.to_dict("records")):

        def num(col: str, required: bool, i: int = i, row: dict = row) -> float:
            v = row.get(col)
            if v is None or (isinstance(v, float) and math.isnan(v)):
                if required:
                    raise InputError(f"phases[{i}].{col.split(' [')[0]}", "(empty)", "a number in this cell")
                return 0.0
            return float(v)

        ph: dict[str, Any] = {}
        if row.get("label"):
            ph["label"] = str(row["label"])
        ph["duration"] = f"{num('duration [min]', True):g} min"
        for g in ("oxygen", "air", "nitrous_oxide"):
            ph[g] = f"{num(g, False) / factor:g} L/min"
        control = row.get("agent control") or CONTROLS[0]
        setting = num("setting", True)
        if control == CONTROLS[0]:
            ph["vaporizer"] = f"{setting:g} %"
        elif control == CONTROLS[1]:
            ph["end_tidal_target"] = f"{setting:g} MAC"
        else:
            ph["end_tidal_target"] = f"{setting:g} %"
        out.append(ph)
    if not out:
        raise InputError("phases", "(no rows)", f"at least one phase row (flows in {flow_unit})")
    return out


def inputs(doc: dict[str, Any]) -> dict[str, Any]:
    """The planner's inputs; returns the edited scenario document."""
    v, fu, mu = state.version(), unit("flow"), unit("mass")
    ff = flow_factor()
    new = {k: val for k, val in doc.items() if k not in ("patient", "agent", "circuit", "phases")}
    new["title"] = st.text_input("Case", doc.get("title", ""), key=f"case.title.{v}")
    patient = dict(doc.get("patient", {}))
    agent = dict(doc.get("agent", {}))
    circuit = dict(doc.get("circuit", {}))
    c1, c2, c3, c4 = st.columns([1, 1, 1, 1.2])
    with c1:
        st.markdown("**Patient**")
        w = st.number_input(
            f"Weight [{mu}]",
            0.5 if mu == "kg" else 1.1,
            300.0 if mu == "kg" else 661.0,
            _q(patient.get("weight"), "patient.weight", "mass", mu, 70.0),
            1.0,
            format="%.1f",
            key=f"case.weight.{v}.{mu}",
        )
        patient["weight"] = f"{w:g} {mu}"
        a = st.number_input(
            "Age [years]",
            0.0,
            120.0,
            _q(patient.get("age"), "patient.age", "age", "year", 40.0),
            1.0,
            format="%.0f",
            key=f"case.age.{v}",
        )
        patient["age"] = f"{a:g} years"
    with c2:
        st.markdown("**Agent**")
        names = sorted(AGENTS)
        current = str(agent.get("name", "sevoflurane")).lower()
        agent["name"] = st.selectbox(
            "Volatile agent", names, names.index(current) if current in names else 0, key=f"case.agent.{v}"
        )
    with c3:
        st.markdown("**Circuit**")
        vol = st.number_input(
            "Circuit volume [L]",
            0.5,
            15.0,
            _q(circuit.get("volume"), "circuit.volume", "volume", "L", 6.0),
            0.5,
            key=f"case.volume.{v}",
        )
        circuit["volume"] = f"{vol:g} L"
        leak = st.number_input(
            f"Leak [{fu}]",
            0.0,
            5.0 * ff,
            _q(circuit.get("leak"), "circuit.leak", "flow", "L/min", 0.0) * ff,
            0.01 * ff,
            key=f"case.leak.{v}.{fu}",
        )
        circuit["leak"] = f"{leak / ff:g} L/min"
    with c4:
        st.markdown("**Gas sampling**")
        sample = st.number_input(
            f"Sample flow [{fu}]",
            0.0,
            0.5 * ff,
            _q(circuit.get("sample_flow"), "circuit.sample_flow", "flow", "L/min", 0.2) * ff,
            0.01 * ff,
            key=f"case.sample.{v}.{fu}",
        )
        circuit["sample_flow"] = f"{sample / ff:g} L/min"
        circuit["sample_returned"] = st.checkbox(
            "Sample gas returned to the circuit", bool(circuit.get("sample_returned", True)), key=f"case.returned.{v}"
        )
    new["patient"], new["agent"], new["circuit"] = patient, agent, circuit

    st.markdown("**Phases** - fresh-gas flows per phase, and either a vaporizer dial or an end-tidal hold target")
    seed_key = f"case.seed.{v}.{fu}"
    if seed_key not in st.session_state:
        st.session_state[seed_key] = phase_frame(doc, ff)
    fcfg = {
        "min_value": 0.0,
        "max_value": 15.0 * ff,
        "step": 0.05 * ff if fu == "L/min" else 10.0,
        "format": "%.2f" if fu == "L/min" else "%.0f",
    }
    edited = st.data_editor(
        st.session_state[seed_key],
        key=f"case.phases.{v}.{fu}",
        num_rows="dynamic",
        width="stretch",
        hide_index=True,
        column_config={
            "label": st.column_config.TextColumn("phase", max_chars=40),
            "duration [min]": st.column_config.NumberColumn(
                "duration [min]", min_value=0.0, max_value=1440.0, step=1.0, format="%.0f", required=True
            ),
            "oxygen": st.column_config.NumberColumn(f"O2 [{fu}]", **fcfg),
            "air": st.column_config.NumberColumn(f"air [{fu}]", **fcfg),
            "nitrous_oxide": st.column_config.NumberColumn(f"N2O [{fu}]", **fcfg),
            "agent control": st.column_config.SelectboxColumn("agent control", options=list(CONTROLS), required=True),
            "setting": st.column_config.NumberColumn(
                "dial % / target", min_value=0.0, max_value=25.0, step=0.1, format="%.2f", required=True
            ),
        },
    )
    new["phases"] = phases_from_frame(edited, ff, fu)
    return new


def totals_frame(result: Any) -> pd.DataFrame:
    t = result.totals
    rows = [
        {"quantity": label, "value": float(t[k].to(u).magnitude), "unit": u.replace("MAC_hour", "MAC h")}
        for k, label, u in TOTAL_ROWS
        if k in t
    ]
    rows.append(
        {
            "quantity": "mean fresh-gas flow",
            "value": float(t["mean_fresh_gas_flow"].to(unit("flow")).magnitude),
            "unit": unit("flow"),
        }
    )
    rows.append(
        {"quantity": "lowest inspired O2", "value": 100 * float(result.minimum_inspired_oxygen.magnitude), "unit": "%"}
    )
    return pd.DataFrame(rows)


def case_cost(result: Any, doc: dict[str, Any]) -> dict[str, Any] | None:
    """Cost of the case at the scenario's [prices], or None without prices."""
    if not doc.get("prices"):
        return None
    from estimator.costs import case_cost as cost_of
    from estimator.costs import parse_prices

    return cost_of(result.totals, parse_prices(doc["prices"]), result.scenario.agent.name)


def outputs(result: Any, doc: dict[str, Any]) -> None:
    t = result.totals
    fu = unit("flow")
    try:
        cost = case_cost(result, doc)
    except InputError as exc:
        show_error(exc)
        cost = None
    currency = unit("currency") or (cost or {}).get("currency", "")
    st.subheader("Totals")
    m = st.columns(5)
    m[0].metric(
        "Liquid agent",
        f"{t['agent_liquid'].to('mL').magnitude:.1f} mL",
        help=f"{result.scenario.agent.name}, liquid drawn from the vaporizer",
    )
    m[1].metric("Oxygen", f"{t['oxygen'].to('L').magnitude:.0f} L", help=GAS_VOLUME_REFERENCE)
    m[2].metric("Air", f"{t['air'].to('L').magnitude:.0f} L", help=GAS_VOLUME_REFERENCE)
    m[3].metric("Nitrous oxide", f"{t['nitrous_oxide'].to('L').magnitude:.0f} L", help=GAS_VOLUME_REFERENCE)
    m[4].metric(
        "Mean fresh-gas flow", f"{t['mean_fresh_gas_flow'].to(fu).magnitude:.{2 if fu == 'L/min' else 0}f} {fu}"
    )
    m = st.columns(5)
    m[0].metric("MAC-hours", f"{t['mac_hours'].to('MAC_hour').magnitude:.2f}")
    m[1].metric("CO2e", f"{t['co2e'].to('kg').magnitude:.2f} kg", help="IPCC AR6 GWP100, agent and N2O released")
    m[2].metric(
        f"Cost [{currency}]" if cost else "Cost",
        f"{cost['total']:.2f}" if cost else "no prices",
        help="At the scenario's [prices] (the demo's prices are invented)",
    )
    m[3].metric("Lowest inspired O2", f"{100 * result.minimum_inspired_oxygen.magnitude:.1f} %")
    m[4].metric("Absorbent used", f"{t['absorbent'].to('g').magnitude:.0f} g")
    st.caption(f"Gas volumes: {GAS_VOLUME_REFERENCE}. Flows: ambient litres at the site, as a flowmeter shows.")
    band = spread_view.control()
    if band is not None:
        spread_view.show_totals(band)

    st.subheader("Warnings")
    show_warnings(result.warnings, empty="No model warnings for this case.")

    st.subheader("Time course")
    s = result.series.copy()
    s["fresh_gas_flow [display]"] = s["fresh_gas_flow [L/min]"] * flow_factor()
    c1, c2 = st.columns(2)
    o2_spec = time_course(
        s,
        {"inspired_oxygen [%]": "inspired O2"},
        "inspired O2 [%]",
        rule=30.0,
        rule_label="30 % usually kept at low flow",
    )
    show(spread_view.with_band(o2_spec, band, "inspired_oxygen"), c1)
    agent_spec = time_course(
        s,
        {
            "end_tidal_agent [%]": "end-tidal agent",
            "inspired_agent [%]": "inspired agent",
            "end_tidal_target [%]": "end-tidal hold target",
        },
        "agent [%]",
    )
    show(spread_view.with_band(agent_spec, band, "end_tidal_agent"), c2)
    show(time_course(s, {"end_tidal_mac [MAC]": "end-tidal MAC"}, "end-tidal [MAC]"), c1)
    show(time_course(s, {"vaporizer_setting [%]": "vaporizer dial"}, "dial [%]", step=True), c2)
    show(
        time_course(s, {"fresh_gas_flow [display]": "fresh-gas flow"}, f"fresh-gas flow [{fu}]", height=170, step=True)
    )
    if band is not None:
        spread_view.cumulative_chart(s, band)

    st.subheader("Phases")
    phases = pd.DataFrame(
        [
            {
                "phase": p["index"] + 1,
                "label": result.scenario.phases[p["index"]].label,
                "start [min]": p["start"].to("min").magnitude,
                "end [min]": p["end"].to("min").magnitude,
                "agent control": "end-tidal hold" if p.get("mode") == "end_tidal_hold" else "vaporizer dial",
                "target reached [min]": (
                    p["target_reached"].to("min").magnitude if p.get("target_reached") is not None else None
                ),
            }
            for p in result.phases
        ]
    )
    st.dataframe(phases, hide_index=True, width="stretch")
    totals = totals_frame(result)
    with st.expander("All totals"):
        st.dataframe(totals, hide_index=True, width="stretch")

    def document() -> dict[str, Any]:
        return {**result.to_json(), "cost": cost}

    st.subheader("Download the results")
    downloads(
        "case_result",
        {"series": result.series, "totals": totals, "phases": phases},
        document,
        "case",
        title=f"Case plan: {result.scenario.title or result.scenario.agent.name}",
        notes=[
            f"Agent: {result.scenario.agent.name}. Gas volumes: {GAS_VOLUME_REFERENCE}.",
            "Series flows are ambient litres at the site, as a flowmeter shows them.",
        ],
        warnings=result.warnings,
    )


def render() -> None:
    st.title("Case planner")
    st.caption(
        "Plan one case: patient, agent, circuit and phases in; agent and gas use, inspired O2, "
        "end-tidal agent and MAC, the dial, cost and CO2e out."
    )
    doc = state.document()
    try:
        new = inputs(doc)
    except InputError as exc:
        show_error(exc)
        return
    state.set_document(new)
    result = state.current_result()
    if result is not None:
        outputs(result, new)
