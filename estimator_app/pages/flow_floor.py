"""Flow floor: the lowest safe fresh-gas flow over the planned case (``estimator.planning.safety.flow_floor``)."""

from __future__ import annotations

import copy
import importlib
from typing import Any

import altair as alt
import pandas as pd
import streamlit as st

from estimator.display import table as readable
from estimator.errors import InputError
from estimator.planning.flow_classes import FLOW_CLASS_SOURCE
from estimator.units import GAS_VOLUME_REFERENCE

from .. import calibration_use, contracts, state
from ..charts import PALETTE, show
from ..common import downloads, flow_factor, placeholder, show_error, show_warnings, unit
from ..editing import Field, contract, number


def model() -> Any:
    """``estimator.planning.safety.flow_floor`` if the package has it, else None."""
    try:
        return getattr(importlib.import_module("estimator.planning.safety"), "flow_floor", None)
    except ImportError:
        return None


@st.cache_data(max_entries=32, show_spinner="Searching the lowest safe flow, phase by phase...")
def run_floor(text: str, calibration: str | None = None) -> Any:
    """Flow floor of a scenario's TOML text with a calibration's text, if any (cached on both), as
    ``lowflow safe-flow FILE --calibration CAL`` runs it."""
    return model()(contracts.load_scenario_text(text, calibration))


def fields(fu: str, scale: float) -> list[tuple[int, str, Field]]:
    """(column, widget key, field) of the ``[flow_floor]`` keys the page edits; defaults from the contract."""
    from estimator.inputs.scenario import FlowFloorInput as F

    wash = "Emergence (dial at 0, no N2O): end-tidal MAC to reach; about MAC-awake at 0.3"
    return [
        (
            0,
            "thr",
            contract(F, "threshold_inspired_oxygen", "Inspired O2 threshold", "%", step=1.0),
        ),
        (
            1,
            f"basal.{fu}",
            contract(F, "basal_oxygen_flow", "Machine basal O2 flow", fu, step=0.05 * scale),
        ),
        (
            2,
            "reach",
            contract(F, "reach_within", "Reach the end-tidal target within", "min", step=1.0),
        ),
        (
            3,
            "washto",
            contract(F, "wash_out_to", "Wash out to", "MAC", step=0.05, help=wash),
        ),
        (3, "washin", contract(F, "wash_out_within", "Wash out within", "min", step=1.0)),
    ]


def settings(doc: dict[str, Any]) -> dict[str, Any]:
    """The ``[flow_floor]`` table as the page's inputs now stand (untouched keys as loaded, saved with the scenario)."""
    ff_doc = copy.deepcopy(doc.get("flow_floor", {}))
    v, fu = state.version(), unit("flow")
    cols = st.columns(4)
    for col, widget, field in fields(fu, flow_factor()):
        number(cols[col], ff_doc, field, f"floor.{widget}.{v}")
    policies = list(ff_doc.get("policies", []))
    label = cols[2].checkbox(
        "Sevoflurane US label rule",
        "sevoflurane_us_label" in policies,
        key=f"floor.label.{v}",
        help=">= 1 L/min; <= 2 MAC-hours at 1 to < 2 L/min",
    )
    if label != ("sevoflurane_us_label" in policies):
        ff_doc["policies"] = (
            [*policies, "sevoflurane_us_label"] if label else [p for p in policies if p != "sevoflurane_us_label"]
        )
    return ff_doc


def phase_table(result: Any) -> pd.DataFrame:
    fu, f = unit("flow"), flow_factor()

    def flow(q: Any) -> float | None:
        return None if q is None else float(q.to("L/min").magnitude) * f

    rows = []
    for p in result.phases:
        fl = p.get("flows") or {}
        rows.append(
            {
                "phase": p["label"],
                "start [min]": p["start"].to("min").magnitude,
                "end [min]": p["end"].to("min").magnitude,
                f"planned [{fu}]": flow(p["planned_total"]),
                f"flow floor [{fu}]": flow(p["floor"]),
                f"O2 [{fu}]": flow(fl.get("oxygen")),
                f"air [{fu}]": flow(fl.get("air")),
                f"N2O [{fu}]": flow(fl.get("nitrous_oxide")),
                "binding limit": p["binding"] or "-",
                "flow class": p["flow_class"].split(" (")[0],  # the classes' source is in the caption
            }
        )
    return pd.DataFrame(rows)


#: Totals shown for the recommended schedule: key, label, unit, digits, help.
USE_METRICS = (
    ("agent_liquid", "Liquid agent", "mL", 1, None),
    ("oxygen", "Oxygen", "L", 0, GAS_VOLUME_REFERENCE),
    ("co2e", "CO2e", "kg", 2, "IPCC AR6 GWP100"),
)


def use_metric(cmp_: dict[str, Any], key: str, label: str, u: str, digits: int) -> tuple[str, str, str]:
    """(label, value at the schedule, change against the plan: "saved" or "extra") of one total."""
    used = cmp_["recommended"][key].to(u).magnitude
    saved = cmp_["saving"][key].to(u).magnitude
    change = f"{abs(saved):.{digits}f} {u} {'saved' if saved >= 0 else 'extra'} vs plan"
    return f"{label} at the schedule", f"{used:.{digits}f} {u}", change


def schedule_table(result: Any) -> pd.DataFrame:
    """The recommended schedule, one row a phase, flows in the display unit."""
    fu, f = unit("flow"), flow_factor()
    return pd.DataFrame(
        [
            {
                "phase": s["label"],
                "from [min]": round(s["start"].to("min").magnitude, 1),
                "for [min]": round(s["duration"].to("min").magnitude, 1),
                f"total [{fu}]": round(s["total"].to("L/min").magnitude * f, 3),
                f"O2 [{fu}]": round(s["oxygen"].to("L/min").magnitude * f, 3),
                f"air [{fu}]": round(s["air"].to("L/min").magnitude * f, 3),
                f"N2O [{fu}]": round(s["nitrous_oxide"].to("L/min").magnitude * f, 3),
                "settable": "yes" if s["settable"] else "no: planned flows kept",
            }
            for s in result.schedule
        ]
    )


def applied(doc: dict[str, Any], schedule: list[dict[str, Any]]) -> dict[str, Any]:
    """The scenario document with each settable phase's flows set to the schedule's (other keys kept)."""
    out = copy.deepcopy(doc)
    for s in schedule:
        if not s["settable"]:
            continue
        phase = out["phases"][s["index"]]
        for key in ("total_flow", "oxygen_fraction", "balance"):  # the flows below replace these forms
            phase.pop(key, None)
        for gas in ("oxygen", "air", "nitrous_oxide"):
            litres = s[gas].to("L/min").magnitude
            if litres > 0:
                phase[gas] = f"{litres:g} L/min"
            else:
                phase.pop(gas, None)
    return out


def chart(result: Any, plan: Any) -> alt.Chart:
    fu, f = unit("flow"), flow_factor()
    planned = pd.DataFrame(
        {
            "time": plan.series["time [min]"],
            "value": plan.series["fresh_gas_flow [L/min]"] * f,
            "series": "planned fresh-gas flow",
        }
    )
    grid = pd.DataFrame(
        [
            {
                "time": g["time"].to("min").magnitude,
                "value": None if g["floor"] is None else g["floor"].to("L/min").magnitude * f,
                "series": "floor schedule on the plan",
                "binding": g["binding"] or "-",
            }
            for g in result.grid
        ]
    )
    sched = []
    for s in result.schedule:
        t0 = s["start"].to("min").magnitude
        for t in (t0, t0 + s["duration"].to("min").magnitude):
            sched.append({"time": t, "value": s["total"].to("L/min").magnitude * f, "series": "recommended schedule"})
    data = pd.concat([planned, grid, pd.DataFrame(sched)], ignore_index=True)
    return (
        alt.Chart(data)
        .mark_line(strokeWidth=2.2, interpolate="step-after")
        .encode(
            x=alt.X("time:Q", title="time [min]"),
            y=alt.Y("value:Q", title=f"fresh-gas flow [{fu}]"),
            color=alt.Color(
                "series:N", title=None, scale=alt.Scale(range=list(PALETTE)), legend=alt.Legend(orient="top")
            ),
            tooltip=[
                alt.Tooltip("time:Q", title="time [min]"),
                "series:N",
                alt.Tooltip("value:Q", title=f"flow [{fu}]", format=".2f"),
                "binding:N",
            ],
        )
        .properties(height=300)
    )


def render() -> None:
    st.title("Flow floor")
    st.caption(
        "How low may the fresh-gas flow go, phase by phase, for the case on the planner page, and which "
        "limit binds: inspired O2, a full bag, reaching and holding the end-tidal target, machine limits."
    )
    if model() is None:
        placeholder(
            "The flow floor",
            "estimator.planning.safety",
            "It will search the lowest fresh-gas flow at each moment that keeps inspired O2 above the "
            "threshold, keeps the bag full and lets the vaporizer hold the end-tidal target.",
        )
        return
    doc = dict(state.document())
    doc["flow_floor"] = settings(doc)
    if not doc["flow_floor"] and "flow_floor" not in state.document():
        del doc["flow_floor"]
    state.set_document(doc)
    calibration, runs = calibration_use.panel("scenario")
    if not runs:
        return
    try:
        result = run_floor(state.run_text(), calibration)
        plan = state.run_case(state.run_text(), calibration)
    except InputError as exc:
        show_error(exc)
        return
    used = calibration_use.notes(calibration, [(result.scenario.agent.name, result.scenario.uptake_factor)])
    calibration_use.show_applied(used, result.warnings)
    st.success(f"Recommended schedule: {result.schedule_text}", icon=":material/trending_down:")
    cmp_ = result.comparison
    m = st.columns(4)
    fu, f = unit("flow"), flow_factor()
    mean_rec = cmp_["recommended"]["mean_fresh_gas_flow"].to("L/min").magnitude * f
    mean_plan = cmp_["plan"]["mean_fresh_gas_flow"].to("L/min").magnitude * f
    m[0].metric(
        "Mean flow at the floor",
        f"{mean_rec:.{2 if fu == 'L/min' else 0}f} {fu}",
        f"{mean_rec - mean_plan:+.{2 if fu == 'L/min' else 0}f} {fu} vs plan",
        delta_color="off",
    )
    for col, (key, label, u, digits, help_text) in zip(m[1:], USE_METRICS, strict=True):
        col.metric(*use_metric(cmp_, key, label, u, digits), delta_color="off", help=help_text)
    st.dataframe(readable(schedule_table(result)), hide_index=True, width="stretch")
    if st.button(
        "Use this schedule on the case planner",
        key="floor.apply",
        help="Replaces each settable phase's flows by the recommended ones (other keys kept); save the plan to keep it.",
        icon=":material/input:",
    ):
        state.set_document(applied(state.document(), result.schedule))
        st.success("The case planner now uses the recommended schedule.", icon=":material/check:")
    st.subheader("Lowest safe flow per phase")
    table = phase_table(result)
    st.dataframe(readable(table), hide_index=True, width="stretch")
    why = [f"{p['label']}: {p['binding_text']}" for p in result.phases if p.get("binding_text")]
    if why:  # the binding limit in words, under the table (a column of sentences would not fit 1440 px)
        st.caption("Why: " + "; ".join(why) + f". Flow classes: {FLOW_CLASS_SOURCE}.")
    st.subheader("Flow floor over time")
    show(chart(result, plan))
    st.caption(
        "The floor schedule on the plan: from the state the plan reaches at each phase start, the lowest "
        "setting at each grid time with the steps before it at their floor, every step replayed end to end. "
        "Flows are settable values on the flowmeter scale."
    )
    st.subheader("Advisories")
    show_warnings(result.warnings, empty="No flow-floor advisories.")
    if cmp_.get("recommended_warnings"):
        st.markdown("**At the recommended schedule the case model warns:**")
        show_warnings(cmp_["recommended_warnings"])
    grid = pd.DataFrame(
        [
            {
                "time [min]": g["time"].to("min").magnitude,
                f"floor [{fu}]": None if g["floor"] is None else g["floor"].to("L/min").magnitude * f,
                "binding": g["binding"],
            }
            for g in result.grid
        ]
    )
    downloads(
        "flow_floor",
        {"phases": table, "grid": grid},
        lambda: {**result.to_json(), **({"calibration": next(iter(used.values()))} if used else {})},
        "floor",
        title="Flow floor",
        notes=[
            f"Flows in {fu}: the lowest total fresh-gas flow that keeps every limit, per phase and over time.",
            f"Gas volumes: {GAS_VOLUME_REFERENCE}.",
        ],
        warnings=result.warnings,
    )
