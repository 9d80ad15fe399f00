"""Demand forecast: Monte-Carlo weekly demand of a department's case mix (``estimator.planning.forecast``)."""

from __future__ import annotations

import copy
import threading
from collections import OrderedDict
from collections.abc import Callable
from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import name as human_name
from estimator.display import table as readable
from estimator.display import text as shown
from estimator.display import unit_label
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE

from .. import calibration_use, contracts, state
from ..charts import histogram, show
from ..common import downloads, show_warnings, unit
from ..editing import Field, kept_view, number, table

KIND = "casemix"
INLINE = "(inline template)"


def case_fields(names: list[str], fu: str, mu: str) -> list[Field]:
    """Columns of the case-type table (flows in ``fu``, weights in ``mu``); other keys are kept."""
    flow = {"dimension": "flow", "unit": fu, "low": 0.0, "high": 15.0 * (1000 if fu == "mL/min" else 1)}
    minutes = {"dimension": "time", "unit": "min", "low": 0.0, "high": 1440.0}
    mass = {"dimension": "mass", "unit": mu, "low": 0.0, "high": 300.0 if mu == "kg" else 661.0}
    years = {"dimension": "age", "unit": "years", "low": 0.0, "high": 120.0}
    return [
        Field("name", "name", "text"),
        Field("per_week", "per week", low=0.0, high=1000.0),
        Field("count", "count", "select", options=("poisson", "fixed"), default="poisson"),
        Field("scenario", "scenario file", "select", options=tuple(names), help="Blank: the inline template"),
        Field("agent", "agent", "select", options=tuple(sorted(AGENTS))),
        Field("wash_in_flow", "wash-in flow", **flow),
        Field("wash_in_time", "wash-in", **minutes),
        Field("maintenance_flow", "maintenance flow", **flow),
        Field("oxygen_fraction", "O2", dimension="fraction", unit="%", low=21.0, high=100.0),
        Field("balance", "balance", "select", options=("air", "nitrous_oxide")),
        Field("end_tidal_target", "end-tidal target", dimension="mac", unit="MAC", low=0.0, high=3.0),
        Field("duration_median", "duration median", **minutes),
        Field("duration_p90", "duration P90", **minutes),
        Field("weight_mean", "weight mean", **mass),
        Field("weight_sd", "weight SD", **mass),
        Field("weight_min", "weight min", **mass),
        Field("weight_max", "weight max", **mass),
        Field("age_mean", "age mean", **years),
        Field("age_sd", "age SD", **years),
        Field("age_min", "age min", **years),
        Field("age_max", "age max", **years),
    ]


SETTINGS = [
    Field("weeks", "Weeks to simulate", "integer", low=1, high=1040, default=52, help="For the statistics"),
    Field(
        "horizon_weeks",
        "Planning horizon [weeks]",
        "integer",
        low=1,
        high=520,
        help="13 for a quarter: its totals and orders, apart from the weeks simulated. Blank: none.",
    ),
    Field("seed", "Random seed", "integer", low=0, high=2**31 - 1, help="The same seed gives the same weeks"),
    Field("cover", "Orders cover the percentile", dimension="fraction", unit="%", low=50.0, high=99.9, default=95.0),
]


#: Forecasts kept per server (the case mix and the planner's scenario as TOML text are the key).
MAX_KEPT = 16
_LOCK = threading.Lock()


@st.cache_resource
def _kept() -> OrderedDict[tuple[Any, ...], Any]:
    return OrderedDict()


def run_forecast(
    mix_text: str,
    named: tuple[tuple[str, str], ...],
    progress: Callable[[float], None] | None = None,
    calibration: str | None = None,
) -> Any:
    """Forecast of a case mix: the command line's loader and forecast; named files are the ones given with it,
    a calibration's text applied as ``lowflow forecast FILE --calibration CAL`` applies its file."""
    from estimator.planning.forecast import forecast
    from estimator.planning.forecast_horizon import plan_horizon

    files = dict(named)
    with contracts.folder(files, files.get(contracts.PLANNER_NAMES[0])) as base:
        mix = contracts.load_casemix_text(mix_text, base, calibration)
        return plan_horizon(forecast(mix, progress=progress), mix)


def named_files(doc: dict[str, Any]) -> tuple[tuple[str, str], ...]:
    """The files the case mix names, and the planner's case (for rows naming it), as a cache key."""
    files = dict(state.files(KIND))
    if any(n in contracts.PLANNER_NAMES for n in contracts.referenced(KIND, doc)):
        files[contracts.PLANNER_NAMES[0]] = state.run_text()
    return tuple(sorted(files.items()))


def cached_forecast(mix_text: str, named: tuple[tuple[str, str], ...], calibration: str | None = None) -> Any:
    """The forecast from the server's store, or computed with a progress bar and kept.

    Not ``st.cache_data``: a cached function cannot draw the progress bar of its own run.
    """
    store, key = _kept(), (mix_text, named, calibration)
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
        result = run_forecast(mix_text, named, progress=report, calibration=calibration)
    finally:
        bar.empty()
    with _LOCK:
        store[key] = result
        while len(store) > MAX_KEPT:
            store.popitem(last=False)
    return result


def inputs() -> dict[str, Any]:
    """The case mix as the editors now stand (untouched values as loaded, other keys kept)."""
    loaded = state.document(KIND)
    doc = copy.deepcopy(loaded)
    v, fu, mu = state.version(KIND), unit("flow"), unit("mass")
    cols = st.columns(len(SETTINGS))
    for box, field in zip(cols, SETTINGS, strict=True):
        number(box, doc, field, f"forecast.{field.key}.{v}")
    st.markdown(
        f"**Case types** - flows in {fu}, weights in {mu}; a row naming a scenario file takes its phases from "
        "it (*case planner*: the case on the case planner page), otherwise from its inline template"
    )
    names = sorted({*state.files(KIND), contracts.PLANNER_NAMES[0], *contracts.referenced(KIND, loaded)})
    doc["case_types"] = table(doc.get("case_types", []), case_fields(names, fu, mu), f"forecast.types.{v}.{fu}.{mu}")
    if not doc["case_types"] and "case_types" not in loaded:
        del doc["case_types"]
    kept_view(doc, {"weeks", "horizon_weeks", "seed", "cover", "case_types"})
    state.set_document(doc, KIND)
    return doc


def stats_table(items: dict[str, Any], units: dict[str, str]) -> pd.DataFrame:
    """Mean, P50, P95 and P99 of each item, human names, rounded for reading."""
    return readable(
        pd.DataFrame(
            [
                {
                    "item": human_name(k),
                    "unit": unit_label(units.get(k, "")) or ("bottles" if k.endswith("_bottles") else ""),
                    **{s: float(q[s].magnitude) for s in ("mean", "p50", "p95", "p99")},
                }
                for k, q in items.items()
            ]
        )
    )


def orders_table(orders: list[dict[str, Any]]) -> pd.DataFrame:
    """Whole cylinders, bottles and packs to order, with the need they cover."""
    return readable(
        pd.DataFrame(
            [
                {
                    "item": human_name(o["item"]),
                    "order": o.get("count"),
                    "unit": o.get("unit"),
                    "covers": o.get("covers"),
                    "need": None if o.get("need") is None else float(o["need"].magnitude),
                    "need unit": "" if o.get("need") is None else unit_label(f"{o['need'].units}"),
                    "each holds": None if o.get("per_unit") is None else float(o["per_unit"].magnitude),
                }
                for o in orders
            ]
        )
    )


def horizon(result: Any, currency: str) -> dict[str, pd.DataFrame]:
    """The planning horizon first: its totals and what to order for it (when the mix sets one)."""
    h = result.horizon
    if not h:
        return {}
    st.subheader(f"Planning horizon: {h['weeks']} weeks")
    st.caption(f"Totals over the horizon: {h['method']}.")
    m = st.columns(3)
    cases = h["items"]["cases"]
    m[0].metric(f"Cases in {h['weeks']} weeks (mean)", shown(cases["mean"].magnitude))
    m[1].metric(
        f"Cost over {h['weeks']} weeks, P95" + (f" [{currency}]" if h["cost"] else ""),
        shown(h["cost"]["p95"]) if h["cost"] else "no prices",
    )
    m[2].metric(f"CO2e over {h['weeks']} weeks (P95)", shown(h["items"]["co2e"]["p95"].to("kg").magnitude, "kg"))
    totals = stats_table(h["items"], result.units)
    totals.insert(0, "horizon [weeks]", h["weeks"])
    orders = orders_table(h["orders"])
    c1, c2 = st.columns([3, 2])
    c1.dataframe(totals, hide_index=True, width="stretch")
    c2.markdown(f"**Order for the {h['weeks']} weeks**")
    c2.dataframe(orders, hide_index=True, width="stretch")
    return {"horizon totals": totals, "horizon orders": orders}


def outputs(result: Any, calibration: str | None = None) -> None:
    currency = unit("currency") or (result.cost or {}).get("currency", "")
    planned = horizon(result, currency)
    items = stats_table(result.items, result.units)
    st.subheader(f"A week: statistics over {result.weeks} simulated weeks")
    m = st.columns(4)
    cases = result.items["cases"]
    m[0].metric("Cases a week (mean)", shown(cases["mean"].magnitude))
    p95 = float(cases["p95"].magnitude)
    m[1].metric("Cases in a P95 week", shown(int(p95) if p95.is_integer() else p95))  # a count: no decimals
    m[2].metric(
        f"Cost a week, P95 [{currency}]" if result.cost else "Cost a week, P95",
        shown(result.cost["p95"]) if result.cost else "no prices",
    )
    m[3].metric("CO2e a week (P95)", shown(result.items["co2e"]["p95"].to("kg").magnitude, "kg"))
    st.dataframe(items, hide_index=True, width="stretch")
    st.caption(f"Gas: {GAS_VOLUME_REFERENCE}. Nitrous oxide in kg (it is bought by weight).")
    choices = [k for k in result.weekly if k != "cases"]
    pick = st.selectbox(
        "Distribution over the simulated weeks of", choices, key="forecast.pick", format_func=human_name
    )
    unit_ = unit_label(result.units.get(pick, ""))
    title = f"{human_name(pick)} a week" + (f" [{unit_}]" if unit_ else "")
    show(histogram(result.weekly[pick], title, "weeks"))
    st.markdown("**Orders that cover a bad week**")
    orders = orders_table(result.orders)
    st.dataframe(orders, hide_index=True, width="stretch")
    st.subheader("Warnings")
    show_warnings(result.warnings, empty="No forecast warnings.")
    applied = calibration_use.notes(calibration, [(a, None) for a in sorted({c["agent"] for c in result.cases})])
    calibration_use.show_applied(applied)
    weekly = pd.DataFrame({"week": range(1, result.weeks + 1), **{k: v for k, v in result.weekly.items()}})
    notes = [f"{result.weeks} simulated weeks. Gas volumes: {GAS_VOLUME_REFERENCE}."]
    if result.horizon:
        notes.insert(0, f"Planning horizon: {result.horizon['weeks']} weeks ({result.horizon['method']}).")
    downloads(
        "demand_forecast",
        {**planned, "items": items, "orders": orders, "weekly": weekly},
        lambda: {**result.to_json(), **({"calibration": applied} if applied else {})},
        "forecast",
        title="Demand forecast",
        notes=notes,
        warnings=result.warnings,
    )


def render() -> None:
    st.title("Demand forecast")
    st.caption(
        "A department's case mix: cylinders, bottles and absorbent a week with P50 and P95, and the order "
        "that covers a bad week."
    )
    c1, c2 = st.columns([1, 2])
    state.demo_picker(KIND, c1)
    state.upload(
        KIND,
        "Load a case mix (TOML) with the files it names",
        "forecast.upload",
        "Case types as in the README, and each scenario file or case-types CSV it names; at most 20 MB each.",
        c2,
    )
    doc = inputs()
    state.save_button(st, KIND, doc)
    calibration, runs = calibration_use.panel(KIND)
    if runs:
        outputs(cached_forecast(contracts.run_text(doc), named_files(doc), calibration), calibration)
