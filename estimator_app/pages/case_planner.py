"""Case planner: one planned case through the circle-system model (``estimator.simulation.engine.simulate``)."""

from __future__ import annotations

import copy
from collections.abc import Callable
from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import sentence
from estimator.display import table as readable
from estimator.planning.case_plan_pdf import pdf_available
from estimator.properties import AGENTS
from estimator.simulation.dial_schedule import dial_schedule, dial_table, dial_text
from estimator.simulation.totals_table import totals_rows
from estimator.units import GAS_VOLUME_REFERENCE

from .. import box_rows, calibration_use, spread_view, state
from ..charts import show, time_course
from ..common import download_row, downloads, flag, flow_factor, metric, show_warnings, unit
from ..editing import Field, contract, kept_view, merge, number


def phase_fields(fu: str) -> list[Field]:
    """Boxes of a phase (flows in ``fu``), ranges from the scenario contract; other phase keys
    (total_flow, oxygen_fraction, balance...) are kept and shown read-only."""
    from estimator.inputs.scenario import PhaseInput as P

    step = 50.0 if fu == "mL/min" else 0.05
    return [
        Field("label", "phase", "text"),
        contract(P, "duration", "duration", "min", step=1.0),
        contract(P, "oxygen", "O2", fu, step=step),
        contract(P, "air", "air", fu, step=step),
        contract(P, "nitrous_oxide", "N2O", fu, step=step),
        contract(P, "vaporizer", "dial", "%", step=0.1),
        contract(P, "end_tidal_target", "end-tidal hold", "MAC", dimension="mac", low=0.0, high=3.0, step=0.05),
    ]


def write(path: tuple[str | int, ...], rule: Callable[[dict[str, Any], Any], None], key: str) -> None:
    """A widget's change callback: ``rule(section, value)`` writes the widget's new value into the
    scenario's section at ``path`` before the page runs (the rule the page applies as it draws the
    widget), so the page can run the case and send the totals ahead of the inputs (:func:`render`)."""
    doc = copy.deepcopy(state.document())
    target: Any = doc
    for step in path:
        target = target.setdefault(step, {}) if isinstance(step, str) else target[step]
    rule(target, st.session_state.get(key))
    state.set_document(doc)


def box_rule(field: Field) -> Callable[[dict[str, Any], Any], None]:
    """A number box's rule (:func:`estimator_app.editing.merge`): a value unlike the one shown is written."""

    def rule(section: dict[str, Any], value: Any) -> None:
        raw = section.get(field.key)
        merge(section, field, raw, field.shown(raw), value)

    return rule


def edited_phase(row: int, field: Field, key: str) -> None:
    """A phase box's change callback (:func:`write` on the phase ``row`` as drawn)."""
    write(("phases", row), box_rule(field), key)


def set_title(doc: dict[str, Any], value: str) -> None:
    """The case title box's rule: a title unlike the file's is written (an emptied box writes "")."""
    if value != doc.get("title", ""):
        doc["title"] = value


def set_agent(agent: dict[str, Any], value: str) -> None:
    """The agent picker's rule: an agent other than the file's (sevoflurane when it names none) is written."""
    if value != str(agent.get("name", "sevoflurane")).lower():
        agent["name"] = value


def set_returned(circuit: dict[str, Any], value: bool) -> None:
    """The sample-return tick box's rule: a tick unlike the file's (or the contract's default) is written."""
    from estimator.inputs.scenario import CircuitInput

    if bool(value) != bool(circuit.get("sample_returned", CircuitInput.model_fields["sample_returned"].default)):
        circuit["sample_returned"] = bool(value)


def phases_key() -> str:
    """The phases' box rows (new boxes for a new document or a new flow unit)."""
    return f"case.phases.{state.version()}.{unit('flow')}"


def early(section: dict[str, Any], name: str, field: Field, key: str, fmt: str | None = None) -> None:
    """A number box of the scenario's ``name`` section whose edit reaches the scenario before the page runs."""
    changed = {"on_change": write, "args": ((name,), box_rule(field), key)}
    number(st, section, field, key, **changed, **({"format": fmt} if fmt else {}))


def inputs(loaded: dict[str, Any]) -> dict[str, Any]:
    """The planner's inputs; returns the scenario as the widgets now stand (other keys kept as loaded)."""
    from estimator.inputs.scenario import CircuitInput, PatientInput

    v, fu, mu = state.version(), unit("flow"), unit("mass")
    scale = 1000.0 if fu == "mL/min" else 1.0
    doc = copy.deepcopy(loaded)
    key = f"case.title.{v}"
    title = st.text_input("Case", doc.get("title", ""), key=key, on_change=write, args=((), set_title, key))
    set_title(doc, title)
    patient, agent, circuit = (doc.setdefault(k, {}) for k in ("patient", "agent", "circuit"))
    c1, c2, c3, c4 = st.columns([1, 1, 1, 1.2])
    with c1:
        st.markdown("**Patient**")
        early(
            patient,
            "patient",
            contract(PatientInput, "weight", "Weight", mu, step=1.0),
            f"case.weight.{v}.{mu}",
            "%.1f",
        )
        early(patient, "patient", contract(PatientInput, "age", "Age", "years", step=1.0), f"case.age.{v}", "%.0f")
    with c2:
        st.markdown("**Agent**")
        names = sorted(AGENTS)
        current = str(agent.get("name", "sevoflurane")).lower()
        key = f"case.agent.{v}"
        pick = st.selectbox(
            "Volatile agent",
            names,
            names.index(current) if current in names else 0,
            key=key,
            on_change=write,
            args=(("agent",), set_agent, key),
        )
        set_agent(agent, pick)
    with c3:
        st.markdown("**Circuit**")
        early(circuit, "circuit", contract(CircuitInput, "volume", "Circuit volume", "L", step=0.5), f"case.volume.{v}")
        early(circuit, "circuit", contract(CircuitInput, "leak", "Leak", fu, step=0.01 * scale), f"case.leak.{v}.{fu}")
    with c4:
        st.markdown("**Gas sampling**")
        sample = contract(CircuitInput, "sample_flow", "Sample flow", fu, step=0.01 * scale)
        early(circuit, "circuit", sample, f"case.sample.{v}.{fu}")
        returned = bool(circuit.get("sample_returned", CircuitInput.model_fields["sample_returned"].default))
        key = f"case.returned.{v}"
        ticked = st.checkbox(
            "Sample gas returned to the circuit",
            returned,
            key=key,
            on_change=write,
            args=(("circuit",), set_returned, key),
        )
        set_returned(circuit, ticked)
    for k in ("patient", "agent", "circuit"):
        if not doc[k] and k not in loaded:
            del doc[k]
    st.markdown(
        "**Phases** - fresh-gas flows per phase, and either a vaporizer dial or an end-tidal hold target; "
        "a blank box leaves the key out"
    )
    # Number boxes, not a table editor: a box sends its value on Enter at once, the table editor 150 ms later.
    doc["phases"] = box_rows.rows(doc.get("phases", []), phase_fields(fu), phases_key(), "phase", on_edit=edited_phase)
    # room for other views of the same scenario (e.g. a patient-spread band) below this line
    kept_view(doc, {"title", "patient", "agent", "circuit", "phases"})
    return doc


def totals_frame(result: Any) -> pd.DataFrame:
    """The totals table of ``lowflow case`` (estimator.simulation.totals_table), flows in the display unit."""
    rows = totals_rows(result, unit("flow"))
    return pd.DataFrame([{"quantity": sentence(r.label), "value": r.value, "unit": r.unit} for r in rows])


def case_plan(result: Any, pdf: bool = False) -> bytes:
    """The printable plan of ``lowflow case --report``, HTML or PDF (built when the button is pressed)."""
    from estimator.planning.case_plan import case_plan as gather
    from estimator.planning.case_plan import plan_html
    from estimator.planning.safety import flow_floor

    plan = gather(result, flow_floor(result.scenario, grid=False))
    if pdf:
        from estimator.planning.case_plan_pdf import plan_pdf

        return plan_pdf(plan)
    return plan_html(plan).encode("utf-8")


def dial_frame(result: Any) -> pd.DataFrame | None:
    """The dial of each end-tidal hold phase every 10 min (estimator.simulation.dial_schedule), or None."""
    table = dial_table(dial_schedule(result.series, result.phases))
    return table if len(table) else None


def outputs(result: Any, calibration: str | None = None) -> None:
    t = result.totals
    fu = unit("flow")
    cost = result.cost  # the engine prices the case at the scenario's [prices], as for lowflow case
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
    o2_flag = flag(result.warnings, ("HYPOXIC_INSPIRED_MIXTURE", "INSPIRED_OXYGEN_LOW"))
    metric(m[3], "Lowest inspired O2", f"{100 * result.minimum_inspired_oxygen.magnitude:.1f} %", o2_flag)
    m[4].metric("Absorbent used", f"{t['absorbent'].to('g').magnitude:.0f} g")
    st.caption(f"Gas volumes: {GAS_VOLUME_REFERENCE}. Flows: ambient litres at the site, as a flowmeter shows.")
    applied = calibration_use.notes(calibration, [(result.scenario.agent.name, result.scenario.uptake_factor)])
    calibration_use.show_applied(applied)
    band = spread_view.control(calibration)
    if band is not None:
        spread_view.show_totals(band)

    st.subheader("Warnings")
    show_warnings(result.warnings, empty="No model warnings for this case.")
    # Only the chosen view is drawn (a rerun when another is chosen): every element is one more
    # message the browser applies on each rerun, and these follow the totals (benchmarks/bench_app.py).
    tabs = st.tabs(list(VIEWS), key="case.view", on_change="rerun")
    for tab, draw in zip(tabs, VIEWS.values(), strict=True):
        if tab.open:
            with tab:
                draw(result, band, applied)


def time_course_view(result: Any, band: Any, applied: dict[str, Any]) -> None:
    """The time-course charts (with the patient-spread band when one is drawn)."""
    fu = unit("flow")
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


def phases_frame(result: Any) -> pd.DataFrame:
    """One row a phase: its label, start and end [min], agent control and when its target was reached."""
    return pd.DataFrame(
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


def phases_view(result: Any, band: Any, applied: dict[str, Any]) -> None:
    """The phases as run, and the dial of each end-tidal hold every 10 min."""
    st.dataframe(readable(phases_frame(result)), hide_index=True, width="stretch")
    schedule = dial_schedule(result.series, result.phases)
    if schedule:
        st.subheader("Vaporizer dial of the end-tidal holds")
        st.caption(" ".join(dial_text(schedule)))
        st.dataframe(readable(dial_table(schedule)), hide_index=True, width="stretch")


def totals_view(result: Any, band: Any, applied: dict[str, Any]) -> None:
    """Every total of ``lowflow case``, flows in the display unit."""
    st.dataframe(readable(totals_frame(result)), hide_index=True, width="stretch")


def downloads_view(result: Any, band: Any, applied: dict[str, Any]) -> None:
    """The printable plan (HTML, and PDF with the pdf extra) and the results as CSV, XLSX, HTML, JSON."""
    plans = [
        ("Case plan (printable HTML)", lambda: case_plan(result), "case_plan.html", "text/html", ":material/print:")
    ]
    if pdf_available():  # the pdf extra (fpdf2)
        plans.append(
            (
                "Case plan (PDF)",
                lambda: case_plan(result, pdf=True),
                "case_plan.pdf",
                "application/pdf",
                ":material/picture_as_pdf:",
            )
        )
    download_row(plans, "case.plan")
    downloads(
        "case_result",
        {"series": result.series, "totals": totals_frame(result), "phases": phases_frame(result)},
        lambda: {**result.to_json(), **({"calibration": next(iter(applied.values()))} if applied else {})},
        "case",
        title=f"Case plan: {result.scenario.title or result.scenario.agent.name}",
        notes=[
            f"Agent: {result.scenario.agent.name}. Gas volumes: {GAS_VOLUME_REFERENCE}.",
            "Series flows are ambient litres at the site, as a flowmeter shows them.",
        ],
        warnings=result.warnings,
    )


#: Session key: the page is running again after an edit its boxes' callbacks did not write.
AGAIN = "case.again"

#: The views below the warnings, one a tab; the first is shown when the page opens.
VIEWS = {
    "Time course": time_course_view,
    "Phases and dial": phases_view,
    "All totals": totals_view,
    "Downloads": downloads_view,
}


def render() -> None:
    st.title("Case planner")
    st.caption(
        "Plan one case: patient, agent, circuit and phases in; agent and gas use, inspired O2, "
        "end-tidal agent and MAC, the dial, cost and CO2e out."
    )
    doc = state.document()  # with this run's edit of an input already in (its change callback)
    boxes, below = st.container(), st.container()
    # The totals first (their messages reach the browser ahead of the boxes', bench_app.py), unless a
    # phase is being added or removed: that edit is made as the boxes are drawn, so they come first.
    first = not box_rows.pending(phases_key())
    if not first:
        with boxes:
            doc = inputs(doc)
        state.set_document(doc)
    with below:
        calibration, runs = calibration_use.panel("scenario")
        result = state.current_result(calibration) if runs else None
        if result is not None:
            outputs(result, calibration)
    if not first:
        st.session_state.pop(AGAIN, None)
        return
    with boxes:
        new = inputs(doc)
    if new == doc:
        st.session_state.pop(AGAIN, None)
        return
    # An edit no callback wrote (none is known): run again, so the totals on screen are always those
    # of the inputs on screen.
    state.set_document(new)
    if st.session_state.pop(AGAIN, False):
        raise RuntimeError("the case planner's inputs changed the scenario twice in a row")
    st.session_state[AGAIN] = True
    st.rerun()
