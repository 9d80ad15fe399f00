"""Compare plans: two or more cases side by side (``estimator.planning.compare``, as ``lowflow compare``).

Also, for the supply page, a kept stock beside the stock as it now stands (as ``lowflow compare --stock``)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import table as readable
from estimator.errors import InputError

from .. import calibration_use, contracts, demo, state
from ..common import downloads, show_error, show_warnings

PLANNER = "case planner"
#: Session key of the stock kept on the supply page: (inventory text, the scenario texts it names, the
#: calibration text of the case planner's scenario or None).
KEPT_STOCK = "supply.kept"


def letters(c: dict[str, Any]) -> dict[str, str]:
    """Plan name -> its letter (A the baseline), as ``lowflow compare`` letters them."""
    return {n: chr(ord("A") + i) for i, n in enumerate(c["plans"])}


def frame(c: dict[str, Any]) -> pd.DataFrame:
    """One row a total: the value of each plan, then each plan's change from the first (and in %); the
    change columns are headed by letters ("B - A"), so the table fits a 1440 px page."""
    names, key = c["plans"], letters(c)
    rows = []
    for r in [*c["rows"], *([c["cost"]] if c["cost"] else [])]:
        row = {"quantity": r["label"], "unit": r["unit"], **{n: _rounded(r["values"][n]) for n in names}}
        for n in names[1:]:
            row[f"{key[n]} - A"] = _rounded(r["change"][n])
            pct = r["change_percent"][n]
            row[f"{key[n]} - A [%]"] = None if pct is None else round(pct, 1)
        rows.append(row)
    return pd.DataFrame(rows)


def _rounded(v: float | None) -> float | None:
    return None if v is None else round(v, 2)


def stock_comparison(current: tuple[Any, ...], report: Any, run: Callable[..., Any]) -> None:
    """The supply page's comparison: keep the stock as it stands, change it (next month's deliveries, a
    cylinder more), and see days of supply, cases possible and each item's days beside the kept stock."""
    from estimator.planning.compare import compare_stocks

    st.subheader("Compare with a kept stock")
    c1, c2 = st.columns(2)
    if c1.button("Keep this stock for comparison", key="supply.keep"):
        st.session_state[KEPT_STOCK] = current
    kept = st.session_state.get(KEPT_STOCK)
    if kept is not None and c2.button("Forget the kept stock", key="supply.forget"):
        del st.session_state[KEPT_STOCK]
        kept = None
    if kept is None:
        st.caption("Keep the stock as it stands, change it (next month's deliveries), and the difference shows here.")
        return
    c = compare_stocks({"kept": run(*kept), "now": report})
    st.dataframe(readable(frame(c)), hide_index=True, width="stretch")
    st.caption(
        "A = kept, B = now. "
        + "; ".join(f"{n}: bottleneck {c['bottleneck'][n] or 'none'}, reorder {c['reorder'][n]}" for n in c["plans"])
        + ". The same supply plan as `lowflow supply` and `lowflow compare --stock`."
    )


def texts(chosen: list[str]) -> dict[str, str]:
    """TOML text of each chosen plan: the case planner's scenario (as the engine runs it) or a demo file."""
    return {n: state.run_text() if n == PLANNER else demo.text(n) for n in chosen}


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

    named = contracts.named_calibration(state.document())  # as lowflow compare reads the file a scenario names
    if PLANNER in chosen and named is not None and state.calibration() is None:
        st.warning(calibration_use.named_message(named, "scenario"), icon=":material/warning:")
        return
    own = state.calibration_text() if named is not None else None
    try:
        results = {n: state.run_case(text, own if n == PLANNER else None) for n, text in texts(chosen).items()}
        c = compare_results(results)
    except InputError as exc:
        show_error(exc)
        return
    table = frame(c)
    st.dataframe(readable(table), hide_index=True, width="stretch")
    st.caption(
        ", ".join(f"{k} = {n}" for n, k in letters(c).items())
        + ". Agents: "
        + ", ".join(f"{n}: {a}" for n, a in c["agents"].items())
        + ". Gas volumes: free gas at "
        "15 degC and 101.325 kPa. Cost only when every plan is priced in one currency."
    )
    for n, r in results.items():
        if r.warnings:
            st.markdown(f"**{n}**")
            show_warnings(r.warnings)
    downloads("plans_compared", {"comparison": table}, c, "compare", title="Plans compared")
