"""Patient spread on the case planner: patient count, P5-P95 totals and bands on the charts.

A control for the number of patients, P5-P95 beside the totals and a shaded P5-P95 band on the
time-course charts (``estimator.simulation.spread.simulate_spread``).
"""

from __future__ import annotations

from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import table as readable
from estimator.errors import InputError

from . import contracts, state
from .charts import PALETTE, show, time_course
from .common import show_error

#: Patients the page offers (0 = off); the default keeps the page as fast as without the band.
MAX_PATIENTS = 500
DEFAULT_PATIENTS = 0
#: Seed of the page's draws: the same plan shows the same band on every rerun.
SEED = 1
_LABELS = {
    "agent_liquid": "liquid agent",
    "oxygen": "oxygen",
    "nitrous_oxide": "nitrous oxide",
    "co2e": "CO2e (IPCC AR6 GWP100)",
}


@st.cache_data(max_entries=32, show_spinner="Simulating patients drawn from published variation...")
def run_spread(text: str, n: int, seed: int, calibration: str | None = None) -> Any:
    """Spread of a scenario's TOML text with a calibration's text, if any (cached on all four)."""
    from estimator.simulation.spread import simulate_spread

    return simulate_spread(contracts.load_scenario_text(text, calibration), n, seed=seed)


def control(calibration: str | None = None) -> Any:
    """The patients control and, when on, the spread of the current scenario with ``calibration`` (or None)."""
    n = st.number_input(
        "Patient spread: simulated patients (0 = off)",
        0,
        MAX_PATIENTS,
        DEFAULT_PATIENTS,
        10,
        key="case.spread.n",
        help="Runs the plan for this many patients drawn from published between-patient variation of cardiac "
        "output, metabolic rate, agent solubility and body fat (sources in the README); shows P5-P95.",
    )
    if not n:
        return None
    try:
        return run_spread(state.run_text(), int(n), SEED, calibration)
    except InputError as exc:
        show_error(exc)
        return None


def totals_table(band: Any) -> pd.DataFrame:
    """P5, P50 and P95 of the four totals with a spread."""
    from estimator.simulation.spread import SPREAD_TOTALS

    rows = []
    for key, unit in SPREAD_TOTALS.items():
        pc = band.percentiles(key)
        rows.append(
            {
                "quantity": _LABELS[key],
                "typical patient": band.typical[key],
                "P5": pc["p05"],
                "P50": pc["p50"],
                "P95": pc["p95"],
                "unit": unit,
            }
        )
    return pd.DataFrame(rows)


def show_totals(band: Any) -> None:
    """P5-P95 beside each total with a spread."""
    st.markdown(f"**P5-P95 over {band.n} simulated patients** (seed {band.seed})")
    st.dataframe(readable(totals_table(band)), hide_index=True, width="stretch")
    with st.expander("Between-patient distributions and their sources"):
        st.dataframe(distributions_table(band.agent), hide_index=True, width="stretch")


def distributions_table(agent: str) -> pd.DataFrame:
    """The factors drawn for each patient: CV, source and confidence (estimator/data/spread.toml)."""
    from estimator.properties import CONFIDENCE_CODES
    from estimator.simulation.spread import distributions, sources

    return pd.DataFrame(
        [
            {
                "factor": s.name.replace("_", " "),
                "CV": s.cv,
                "source": sources()[s.source],
                "confidence": f"{s.confidence} ({CONFIDENCE_CODES[s.confidence]})",
                "derivation": s.derivation,
            }
            for s in distributions(agent).values()
        ]
    )


def with_band(spec: dict[str, Any], band: Any, key: str, color: str = PALETTE[0]) -> dict[str, Any]:
    """A time-course spec with the P5-P95 band of series ``key`` shaded beneath its lines."""
    if band is None:
        return spec
    b = band.bands[key]
    values = [
        {"time": float(t), "lo": float(lo), "hi": float(hi)}
        for t, lo, hi in zip(band.time, b["p05"], b["p95"], strict=True)
    ]
    area = {
        "data": {"values": values},
        "mark": {"type": "area", "opacity": 0.22, "color": color},
        "encoding": {
            "x": {"field": "time", "type": "quantitative"},
            "y": {"field": "lo", "type": "quantitative"},
            "y2": {"field": "hi"},
            "tooltip": [
                {"field": "time", "type": "quantitative", "title": "time [min]", "format": ".3g"},
                {"field": "lo", "type": "quantitative", "title": "P5", "format": ".3g"},
                {"field": "hi", "type": "quantitative", "title": "P95", "format": ".3g"},
            ],
        },
    }
    return {**spec, "layer": [area, *spec["layer"]]}


def cumulative_chart(series: pd.DataFrame, band: Any, where: Any = None) -> None:
    """Cumulative liquid agent of the typical patient with the P5-P95 band."""
    spec = time_course(
        series, {"agent_liquid_cumulative [mL]": "liquid agent, typical patient"}, "cumulative liquid agent [mL]"
    )
    show(with_band(spec, band, "agent_liquid_cumulative"), where)
    st.caption("Shaded: P5-P95 of the simulated patients.")
