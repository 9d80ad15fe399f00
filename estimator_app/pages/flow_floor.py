"""Flow floor: the lowest safe fresh-gas flow over the planned case (``estimator.safety.flow_floor``)."""

from __future__ import annotations

import importlib
from typing import Any

import pandas as pd
import streamlit as st

from estimator.errors import InputError

from .. import state
from ..charts import time_course
from ..common import downloads, flow_factor, placeholder, show_error, show_warnings, unit


def model() -> Any:
    """``estimator.safety.flow_floor`` if the package has it, else None."""
    try:
        return getattr(importlib.import_module("estimator.safety"), "flow_floor", None)
    except ImportError:
        return None


@st.cache_data(max_entries=32, show_spinner="Searching the lowest safe flow...")
def run_floor(text: str) -> dict[str, Any]:
    """JSON document of the flow floor of a scenario's TOML text (cached on the text)."""
    from estimator.scenario import load_scenario

    result = model()(load_scenario(text))
    return result.to_json() if hasattr(result, "to_json") else dict(result)


def _mag(v: Any) -> Any:
    return v.get("magnitude") if isinstance(v, dict) else v


def render() -> None:
    st.title("Flow floor")
    st.caption("How low may the fresh-gas flow go, phase by phase, and which limit binds: inspired O2, "
               "a full bag (fresh gas covers uptake, leak and unreturned sample gas) or the vaporizer's reach.")
    if model() is None:
        placeholder("The flow floor", "estimator.safety",
                    "It will search, for the case on the planner page, the lowest fresh-gas flow at each moment "
                    "that keeps inspired O2 above the threshold, keeps the bag full and lets the vaporizer "
                    "hold the end-tidal target, and name the limit that binds.")
        return
    try:
        doc = run_floor(state.toml_text())
    except InputError as exc:
        show_error(exc)
        return
    fu, ff = unit("flow"), flow_factor()
    thr = _mag(doc.get("threshold_inspired_oxygen"))
    if thr is not None:
        st.metric("Inspired O2 threshold", f"{100 * float(thr):.0f} %")
    phases = pd.DataFrame([{
        "phase": int(p.get("index", i)) + 1, "start [min]": _mag(p.get("start")), "end [min]": _mag(p.get("end")),
        f"flow floor [{fu}]": float(_mag(p.get("floor"))) * ff if _mag(p.get("floor")) is not None else None,
        "binding limit": p.get("binding")} for i, p in enumerate(doc.get("phases", []))])
    st.subheader("Lowest safe flow per phase")
    st.dataframe(phases, hide_index=True, width="stretch")
    grid = doc.get("grid") or {}
    if grid.get("time") and grid.get("floor"):
        g = pd.DataFrame({"time [min]": grid["time"], "floor": [_mag(x) * ff if _mag(x) is not None else None
                                                               for x in grid["floor"]]})
        st.subheader("Flow floor over time")
        st.altair_chart(time_course(g, {"floor": "flow floor"}, f"fresh-gas flow [{fu}]", step=True),
                        width="stretch")
    st.subheader("Warnings")
    show_warnings(doc.get("warnings", []), empty="No flow-floor warnings.")
    downloads("flow_floor", {"phases": phases}, doc, "floor")
