"""Demand forecast: Monte-Carlo weekly demand of a department's case mix (``estimator.forecast``)."""

from __future__ import annotations

import importlib.util
import math
import tempfile
import threading
import tomllib
from collections import OrderedDict
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd
import streamlit as st
import tomli_w

from estimator.errors import InputError
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE, parse_quantity

from .. import demo, state
from ..charts import PALETTE, show
from ..common import (
    downloads,
    flow_factor,
    placeholder,
    show_error,
    show_warnings,
    unit,
)

DOC, VERSION = "forecast.doc", "forecast.version"
PLANNER = "case planner"
COLUMNS = [
    "name",
    "per week",
    "count",
    "template",
    "agent",
    "wash-in flow",
    "wash-in [min]",
    "maintenance flow",
    "O2 [%]",
    "target [MAC]",
    "duration median [min]",
    "duration P90 [min]",
    "weight mean",
    "weight SD",
]


def available() -> bool:
    return importlib.util.find_spec("estimator.forecast") is not None


def _num(value: Any, dim: str, unit_: str) -> float | None:
    if value is None:
        return None
    try:
        return float(parse_quantity(value, "", dim, unit_).to(unit_).magnitude)
    except InputError:
        return None


def case_frame(doc: dict[str, Any], ff: float, mu: str) -> pd.DataFrame:
    rows = []
    for c in doc.get("case_types", []):
        planner = c.get("scenario") is not None
        wf, mf = _num(c.get("wash_in_flow"), "flow", "L/min"), _num(c.get("maintenance_flow"), "flow", "L/min")
        rows.append(
            {
                "name": c.get("name", ""),
                "per week": c.get("per_week"),
                "count": c.get("count", "poisson"),
                "template": PLANNER if planner else "inline",
                "agent": c.get("agent"),
                "wash-in flow": None if wf is None else wf * ff,
                "wash-in [min]": _num(c.get("wash_in_time"), "time", "min"),
                "maintenance flow": None if mf is None else mf * ff,
                "O2 [%]": _num(c.get("oxygen_fraction"), "fraction", "percent"),
                "target [MAC]": _num(c.get("end_tidal_target"), "mac", "MAC"),
                "duration median [min]": _num(c.get("duration_median") or c.get("duration"), "time", "min"),
                "duration P90 [min]": _num(c.get("duration_p90"), "time", "min"),
                "weight mean": _num(c.get("weight_mean"), "mass", mu),
                "weight SD": _num(c.get("weight_sd"), "mass", mu),
            }
        )
    return pd.DataFrame(rows, columns=COLUMNS)


def _set(row: dict[str, Any], col: str) -> bool:
    v = row.get(col)
    return not (v is None or v == "" or (isinstance(v, float) and math.isnan(v)))


def case_types(frame: pd.DataFrame, ff: float, mu: str) -> list[dict[str, Any]]:
    """Case-mix rows from the editor; the planner's case is the template of rows marked so."""
    out = []
    for row in frame.to_dict("records"):
        c: dict[str, Any] = {"name": str(row["name"] or "case type"), "count": row["count"] or "poisson"}
        if _set(row, "per week"):
            c["per_week"] = float(row["per week"])
        if row["template"] == PLANNER:
            c["scenario"] = "case_planner.toml"
        else:
            for col, key, fmt in (
                ("agent", "agent", "{}"),
                ("wash-in [min]", "wash_in_time", "{:g} min"),
                ("O2 [%]", "oxygen_fraction", "{:g} %"),
                ("target [MAC]", "end_tidal_target", "{:g} MAC"),
            ):
                if _set(row, col):
                    c[key] = fmt.format(row[col])
            for col, key in (("wash-in flow", "wash_in_flow"), ("maintenance flow", "maintenance_flow")):
                if _set(row, col):
                    c[key] = f"{row[col] / ff:g} L/min"
        for col, key, u in (
            ("duration median [min]", "duration_median", "min"),
            ("duration P90 [min]", "duration_p90", "min"),
            ("weight mean", "weight_mean", mu),
            ("weight SD", "weight_sd", mu),
        ):
            if _set(row, col):
                c[key] = f"{row[col]:g} {u}"
        out.append(c)
    return out


#: Forecasts kept per server (the case mix and the planner's scenario as TOML text are the key).
MAX_KEPT = 16
_LOCK = threading.Lock()


@st.cache_resource
def _kept() -> OrderedDict[tuple[str, str], Any]:
    return OrderedDict()


def run_forecast(mix_text: str, scenario_text: str, progress: Callable[[float], None] | None = None) -> Any:
    """Forecast of a case mix; every scenario file it names is the planner's case."""
    from estimator.casemix import casemix_from_dict
    from estimator.forecast import forecast

    data = tomllib.loads(mix_text)
    with tempfile.TemporaryDirectory() as tmp:
        for c in data.get("case_types", []):
            if c.get("scenario"):
                target = Path(tmp) / Path(str(c["scenario"])).name
                target.write_text(scenario_text, encoding="utf-8")
                c["scenario"] = target.name
        return forecast(casemix_from_dict(data, base_dir=tmp), progress=progress)


def cached_forecast(mix_text: str, scenario_text: str) -> Any:
    """The forecast from the server's store, or computed with a progress bar and kept.

    Not ``st.cache_data``: a cached function cannot draw the progress bar of its own run.
    """
    store, key = _kept(), (mix_text, scenario_text)
    with _LOCK:
        if key in store:
            store.move_to_end(key)
            return store[key]
    bar = st.progress(0.0, text="Simulating the weeks: every case through the batch engine")
    shown = [-1]

    def report(fraction: float) -> None:
        percent = int(100 * min(max(fraction, 0.0), 1.0))
        if percent != shown[0]:  # one message per percent, not per batch step
            shown[0] = percent
            bar.progress(percent / 100, text=f"Simulating the weeks: {percent} % of the cases")

    try:
        result = run_forecast(mix_text, scenario_text, progress=report)
    finally:
        bar.empty()
    with _LOCK:
        store[key] = result
        while len(store) > MAX_KEPT:
            store.popitem(last=False)
    return result


def _upload() -> None:
    state.upload_toml(
        "Load a case mix (TOML)",
        "forecast.upload",
        "Case types as in the README; at most 20 MB. Scenario files it names run the case on the case planner page.",
        DOC,
        VERSION,
    )


def inputs() -> dict[str, Any]:
    doc = state.stored(DOC, VERSION, demo.casemix)
    v, fu, mu, ff = st.session_state[VERSION], unit("flow"), unit("mass"), flow_factor()
    c1, c2, c3 = st.columns(3)
    weeks = c1.number_input("Weeks to simulate", 1, 1040, int(doc.get("weeks", 52)), key=f"forecast.weeks.{v}")
    seed = c2.number_input(
        "Random seed",
        0,
        2**31 - 1,
        int(doc.get("seed") or 1),
        key=f"forecast.seed.{v}",
        help="The same seed gives the same weeks",
    )
    cover = c3.number_input(
        "Orders cover the percentile [%]",
        50.0,
        99.9,
        _num(doc.get("cover", "95 %"), "fraction", "percent") or 95.0,
        1.0,
        key=f"forecast.cover.{v}",
    )
    st.markdown(
        f"**Case types** - flows in {fu}, weights in {mu}; a row whose template is *{PLANNER}* takes its "
        "phases from the case planner page"
    )
    seed_key = f"forecast.seed_frame.{v}.{fu}.{mu}"
    if seed_key not in st.session_state:
        st.session_state[seed_key] = case_frame(doc, ff, mu)
    edited = st.data_editor(
        st.session_state[seed_key],
        key=f"forecast.types.{v}.{fu}.{mu}",
        num_rows="dynamic",
        hide_index=True,
        width="stretch",
        column_config={
            "count": st.column_config.SelectboxColumn("count", options=["poisson", "fixed"]),
            "template": st.column_config.SelectboxColumn("template", options=[PLANNER, "inline"], required=True),
            "agent": st.column_config.SelectboxColumn("agent", options=sorted(AGENTS)),
            "wash-in flow": st.column_config.NumberColumn(f"wash-in flow [{fu}]", min_value=0.0),
            "maintenance flow": st.column_config.NumberColumn(f"maintenance flow [{fu}]", min_value=0.0),
            "weight mean": st.column_config.NumberColumn(f"weight mean [{mu}]", min_value=0.0),
            "weight SD": st.column_config.NumberColumn(f"weight SD [{mu}]", min_value=0.0),
        },
    )
    new = {k: val for k, val in doc.items() if k not in ("case_types", "case_types_file")}
    new.update(
        {"weeks": int(weeks), "seed": int(seed), "cover": f"{cover:g} %", "case_types": case_types(edited, ff, mu)}
    )
    return new


def histogram(result: Any, item: str) -> dict[str, Any]:
    unit_ = result.units.get(item, "")
    title = f"{item.replace('_', ' ')} a week" + (f" [{unit_}]" if unit_ else "")
    values = [{"v": float(x)} for x in result.weekly[item]]
    return {
        "$schema": "https://vega.github.io/schema/vega-lite/v6.json",
        "height": 240,
        "data": {"values": values},
        "mark": {"type": "bar", "color": PALETTE[0]},
        "encoding": {
            "x": {"field": "v", "type": "quantitative", "bin": {"maxbins": 30}, "title": title},
            "y": {"aggregate": "count", "type": "quantitative", "title": "weeks"},
        },
    }


def outputs(result: Any) -> None:
    currency = unit("currency") or (result.cost or {}).get("currency", "")
    items = pd.DataFrame(
        [
            {
                "item": k.replace("_", " "),
                "unit": result.units.get(k, ""),
                **{s: float(q[s].magnitude) for s in ("mean", "p50", "p95", "p99")},
            }
            for k, q in result.items.items()
        ]
    )
    m = st.columns(4)
    cases = result.items["cases"]
    m[0].metric("Cases a week (mean)", f"{cases['mean'].magnitude:.1f}")
    m[1].metric("Cases in a P95 week", f"{cases['p95'].magnitude:.0f}")
    m[2].metric(
        f"Cost a week, P95 [{currency}]" if result.cost else "Cost a week, P95",
        f"{result.cost['p95']:.0f}" if result.cost else "no prices",
    )
    m[3].metric("CO2e a week (P95)", f"{result.items['co2e']['p95'].to('kg').magnitude:.0f} kg")
    st.subheader("Weekly demand")
    st.dataframe(items, hide_index=True, width="stretch")
    st.caption(f"Gas: {GAS_VOLUME_REFERENCE}. Nitrous oxide in kg (it is bought by weight).")
    choices = [k for k in result.weekly if k != "cases"]
    pick = st.selectbox(
        "Distribution over the simulated weeks of",
        choices,
        key="forecast.pick",
        format_func=lambda k: k.replace("_", " "),
    )
    show(histogram(result, pick))
    st.subheader("Orders")
    orders = pd.DataFrame(
        [
            {
                "item": o["item"].replace("_", " "),
                "order": o.get("count"),
                "unit": o.get("unit"),
                "covers": o.get("covers"),
                "need": None if o.get("need") is None else float(o["need"].magnitude),
                "need unit": "" if o.get("need") is None else f"{o['need'].units:~P}",
                "each holds": None if o.get("per_unit") is None else float(o["per_unit"].magnitude),
            }
            for o in result.orders
        ]
    )
    st.dataframe(orders, hide_index=True, width="stretch")
    st.subheader("Warnings")
    show_warnings(result.warnings, empty="No forecast warnings.")
    weekly = pd.DataFrame({"week": range(1, result.weeks + 1), **{k: v for k, v in result.weekly.items()}})
    downloads(
        "demand_forecast",
        {"items": items, "orders": orders, "weekly": weekly},
        result.to_json,
        "forecast",
        title="Demand forecast",
        notes=[f"{result.weeks} simulated weeks. Gas volumes: {GAS_VOLUME_REFERENCE}."],
        warnings=result.warnings,
    )


def render() -> None:
    st.title("Demand forecast")
    st.caption(
        "A department's case mix: cylinders, bottles and absorbent a week with P50 and P95, and the order "
        "that covers a bad week."
    )
    if not available():
        placeholder(
            "The demand forecast",
            "estimator.forecast",
            "It will draw weekly case counts from the case mix and report each item's weekly demand.",
        )
        return
    _upload()
    try:
        doc = inputs()
        text = tomli_w.dumps(doc)
        result = cached_forecast(text, state.toml_text())
    except InputError as exc:
        show_error(exc)
        return
    st.download_button(
        "Save case mix (TOML)", text.encode("utf-8"), "casemix.toml", "application/toml", icon=":material/save:"
    )
    outputs(result)
