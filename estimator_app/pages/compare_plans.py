"""Compare plans: two or more cases side by side (``estimator.planning.compare``, as ``lowflow compare``)."""

from __future__ import annotations

from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import table as readable
from estimator.errors import InputError

from .. import demo, state
from ..common import downloads, show_error, show_warnings

PLANNER = "case planner"


def frame(c: dict[str, Any]) -> pd.DataFrame:
    """One row a total: the value of each plan, then each plan's change from the first (and in %)."""
    names = c["plans"]
    rows = []
    for r in [*c["rows"], *([c["cost"]] if c["cost"] else [])]:
        row = {"quantity": r["label"], "unit": r["unit"], **{n: round(r["values"][n], 2) for n in names}}
        for n in names[1:]:
            row[f"{n} - {names[0]}"] = round(r["change"][n], 2)
            pct = r["change_percent"][n]
            row[f"{n} - {names[0]} [%]"] = None if pct is None else round(pct, 1)
        rows.append(row)
    return pd.DataFrame(rows)


def texts(chosen: list[str]) -> dict[str, str]:
    """TOML text of each chosen plan: the case planner's scenario or a demo file."""
    return {n: state.toml_text() if n == PLANNER else demo.text(n) for n in chosen}


def render() -> None:
    st.title("Compare plans")
    st.caption(
        "Two or more plans side by side: agent, gases, absorbent, CO2e, MAC-hours and cost, and how each "
        "differs from the first (the baseline). The same engine and accounting as `lowflow compare`."
    )
    options = [PLANNER, *demo.files_of("scenario")]
    default = [PLANNER, next(n for n in options[1:] if n != "kestrel_lap_chole.toml")]
    chosen = st.multiselect("Plans (the first is the baseline)", options, default=default, key="compare.plans")
    if len(chosen) < 2:
        st.info("Choose two or more plans.")
        return
    from estimator.planning.compare import compare_results

    try:
        results = {n: state.run_case(text) for n, text in texts(chosen).items()}
        c = compare_results(results)
    except InputError as exc:
        show_error(exc)
        return
    table = frame(c)
    st.dataframe(readable(table), hide_index=True, width="stretch")
    st.caption(
        "Agents: " + ", ".join(f"{n}: {a}" for n, a in c["agents"].items()) + ". Gas volumes: free gas at "
        "15 degC and 101.325 kPa. Cost only when every plan is priced in one currency."
    )
    for n, r in results.items():
        if r.warnings:
            st.markdown(f"**{n}**")
            show_warnings(r.warnings)
    downloads("plans_compared", {"comparison": table}, c, "compare", title="Plans compared")
