"""Demand forecast: Monte-Carlo weekly demand of a department's case mix (``estimator.planning.forecast``)."""

from __future__ import annotations

import copy
import threading
from collections import OrderedDict
from collections.abc import Callable
from typing import Any

import pandas as pd
import streamlit as st

from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE

from .. import contracts, state
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
    Field("weeks", "Weeks to simulate", "integer", low=1, high=1040, default=52),
    Field("seed", "Random seed", "integer", low=0, high=2**31 - 1, help="The same seed gives the same weeks"),
    Field("cover", "Orders cover the percentile", dimension="fraction", unit="%", low=50.0, high=99.9, default=95.0),
]


#: Forecasts kept per server (the case mix and the planner's scenario as TOML text are the key).
MAX_KEPT = 16
_LOCK = threading.Lock()


@st.cache_resource
def _kept() -> OrderedDict[tuple[str, str], Any]:
    return OrderedDict()


def run_forecast(
    mix_text: str, named: tuple[tuple[str, str], ...], progress: Callable[[float], None] | None = None
) -> Any:
    """Forecast of a case mix: the command line's loader and forecast; named files are the ones given with it."""
    from estimator.planning.forecast import forecast

    files = dict(named)
    with contracts.folder(files, files.get(contracts.PLANNER_NAMES[0])) as base:
        return forecast(contracts.load_casemix_text(mix_text, base), progress=progress)


def named_files(doc: dict[str, Any]) -> tuple[tuple[str, str], ...]:
    """The files the case mix names, and the planner's case (for rows naming it), as a cache key."""
    files = dict(state.files(KIND))
    if any(n in contracts.PLANNER_NAMES for n in contracts.referenced(KIND, doc)):
        files[contracts.PLANNER_NAMES[0]] = state.toml_text()
    return tuple(sorted(files.items()))


def cached_forecast(mix_text: str, named: tuple[tuple[str, str], ...]) -> Any:
    """The forecast from the server's store, or computed with a progress bar and kept.

    Not ``st.cache_data``: a cached function cannot draw the progress bar of its own run.
    """
    store, key = _kept(), (mix_text, named)
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
        result = run_forecast(mix_text, named, progress=report)
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
    cols = st.columns(3)
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
    kept_view(doc, {"weeks", "seed", "cover", "case_types"})
    state.set_document(doc, KIND)
    return doc


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
    unit_ = result.units.get(pick, "")
    title = f"{pick.replace('_', ' ')} a week" + (f" [{unit_}]" if unit_ else "")
    show(histogram(result.weekly[pick], title, "weeks"))
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
    outputs(cached_forecast(contracts.toml_text(doc), named_files(doc)))
