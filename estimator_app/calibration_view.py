"""The audit page's prediction check and calibration: recorded against predicted agent, and the uptake factor."""

from __future__ import annotations

import hashlib
from typing import Any

import pandas as pd
import streamlit as st

from estimator.errors import InputError

from .charts import show
from .common import download_row, show_error, show_warnings


@st.cache_data(max_entries=8, show_spinner="Re-running each case on its recorded flows (engine, twice a case)...")
def run_calibration(_result: Any, key: tuple, log_name: str, log_text: str) -> dict[str, Any]:
    """The check and calibration of an audit (``key``: the audit's inputs, for the cache)."""
    from estimator.planning.calibration import check_and_calibrate, provenance, run_cases

    doc = check_and_calibrate(*run_cases(_result))
    digest = hashlib.sha256(log_text.encode("utf-8")).hexdigest()
    used = sum(rec["cases"] for rec in doc["calibration"]["agents"].values())
    doc["calibration"]["provenance"] = provenance(_result, log_name, digest, used)
    return doc


def scatter(frame: pd.DataFrame) -> Any:
    """Recorded against predicted liquid agent per case (log axes), with the line of identity."""
    import altair as alt

    lo = float(min(frame["predicted_ml"].min(), frame["recorded_ml"].min()))
    hi = float(max(frame["predicted_ml"].max(), frame["recorded_ml"].max()))
    scale = alt.Scale(type="log", domain=[0.9 * lo, 1.1 * hi])
    points = (
        alt.Chart(frame)
        .mark_circle(size=40, opacity=0.7)
        .encode(
            x=alt.X("predicted_ml:Q", title="predicted liquid agent [mL]", scale=scale),
            y=alt.Y("recorded_ml:Q", title="recorded liquid agent [mL]", scale=scale),
            color=alt.Color("agent:N", title="agent"),
            shape=alt.Shape("in_calibration:N", title="in the fit"),
            tooltip=["case_id", "agent", alt.Tooltip("ratio:Q", format=".2f")],
        )
    )
    line = (
        alt.Chart(pd.DataFrame({"x": [lo, hi], "y": [lo, hi]}))
        .mark_line(strokeDash=[4, 3], color="#888")
        .encode(x="x:Q", y="y:Q")
    )
    return (points + line).properties(height=360, title="Recorded against predicted (dashed: line of identity)")


def render_calibration(result: Any, key: tuple, log_name: str, log_text: str) -> dict[str, Any] | None:
    """The section of the audit page; returns the check and calibration when run (for the downloads)."""
    from estimator.planning.calibration import calibration_toml, quantities
    from estimator.planning.calibration_report import calibration_rows

    st.subheader("How well does the model predict our agent use?")
    st.caption(
        "Each case with end-tidal data re-run by the engine on its recorded flows (wash-in as recorded, then its "
        "recorded end-tidal held), predicted against recorded liquid agent; then each agent's uptake factor with "
        "its 95 % interval (bootstrap over cases, fixed seed)."
    )
    if not st.toggle("Check and calibrate the model", key="audit.calibrate"):
        return None
    try:
        doc = run_calibration(result, key, log_name, log_text)
    except InputError as exc:
        show_error(exc)
        return None
    check, cal = doc["prediction_check"], doc["calibration"]
    rows = [
        {
            "agent": r.agent,
            "cases checked": r.checked,
            "median recorded / predicted": r.median_ratio,
            "ratio 95 % interval": f"{r.ratio_low:.2f}-{r.ratio_high:.2f}" if r.ratio_low is not None else "n/a",
            "uptake factor (95 % interval)": f"{r.factor:.2f} ({r.low:.2f}-{r.high:.2f})"
            if r.factor is not None
            else f"not calibrated: {r.reason}",
            "cases in the fit": r.cases or 0,
        }
        for r in calibration_rows(doc)
    ]
    st.dataframe(pd.DataFrame(rows), hide_index=True, width="stretch")
    frame = pd.DataFrame(quantities(check))
    if len(frame):
        show(scatter(frame))
    show_warnings(cal["warnings"])
    if cal["agents"]:
        text = calibration_toml(cal, cal["provenance"])
        download_row(
            [("Calibration (TOML)", text.encode("utf-8"), "calibration.toml", "application/toml", None)], "cal"
        )
        if st.button(
            "Use this calibration for planning",
            key="audit.cal.use",
            help="The case planner, flow floor and demand forecast run with these uptake factors until it is removed.",
            icon=":material/input:",
        ):
            from . import state

            state.set_calibration("calibration.toml", text)
            st.success("The planning pages now use this calibration.", icon=":material/check:")
    return doc
