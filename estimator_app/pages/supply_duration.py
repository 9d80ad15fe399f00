"""Supply duration: how long a site's stocks last under its plan, the bottleneck and the reorder date.

The page edits the loaded inventory in place (``estimator_app.editing``) and runs it through the
command line's loader and ``plan_supply``; each case plan runs the scenario file it names, given with
the inventory (or the case planner's case for ``scenario = "case planner"``).
"""

from __future__ import annotations

import copy
import datetime as dt
from pathlib import Path
from typing import Any

import pandas as pd
import streamlit as st

from estimator.inputs.inventory_file import BottleEntry, ConcentratorEntry, ContinuousDemand, CylinderEntry, PlanOptions
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE

from .. import contracts, state
from ..charts import show, time_course
from ..common import downloads, show_warnings, unit
from ..editing import Field, contract, kept_view, number, table

KIND = "inventory"
GASES = ("oxygen", "air", "nitrous_oxide")


def _gauge(pu: str) -> Any:
    from estimator.units import parse_pressure

    return lambda raw: parse_pressure(raw, "pressure").gauge().to(pu).magnitude


def cylinder_fields(pu: str, mu: str) -> list[Field]:
    """Columns of the cylinder table: ranges, defaults and help from the inventory contract."""
    gauge = _gauge(pu)
    return [
        Field("name", "name", "text"),
        Field("gas", "gas", "select", options=GASES),
        Field("count", "count", "integer", low=0, high=10000),
        contract(CylinderEntry, "water_capacity", "water capacity", "L"),
        contract(CylinderEntry, "pressure", "pressure (gauge)", pu, low=0.0, read=gauge),
        contract(CylinderEntry, "reserve_pressure", "change-out at", pu, low=0.0, read=gauge),
        contract(CylinderEntry, "temperature", "temperature", "degC"),
        contract(CylinderEntry, "gross_weight", "gross weight", mu),
        contract(CylinderEntry, "tare_weight", "tare weight", mu),
    ]


BOTTLE_FIELDS = [
    Field("agent", "agent", "select", options=tuple(sorted(AGENTS))),
    Field("count", "count", "integer", low=0, high=10000),
    contract(BottleEntry, "volume", "volume", "mL"),
    contract(BottleEntry, "opened", "opened bottle left", "mL"),
]
CONCENTRATOR_FIELDS = [
    Field("name", "name", "text"),
    contract(ConcentratorEntry, "rated_flow", "rated flow", "L/min"),
    contract(ConcentratorEntry, "hours_per_day", "hours a day", "h"),
    Field("count", "count", "integer", low=0, high=100),
]


def case_fields(names: list[str]) -> list[Field]:
    return [
        Field("name", "name", "text"),
        Field("scenario", "scenario file", "select", options=tuple(names)),
        Field("per_day", "cases a day", "integer", low=0, high=100),
        Field("days_per_week", "days a week", "integer", low=0, high=7),
        Field("rooms", "rooms", "integer", low=1, high=50, default=1),
    ]


CONTINUOUS_FIELDS = [
    Field("name", "name", "text"),
    Field("gas", "gas", "select", options=GASES),
    contract(ContinuousDemand, "flow", "flow", "L/min"),
    contract(ContinuousDemand, "hours_per_day", "hours a day", "h"),
    Field("days_per_week", "days a week", "integer", low=0, high=7, default=7),
]
PLAN = [
    contract(PlanOptions, "lead_time", "Order lead time", "day", step=1.0),
    contract(PlanOptions, "safety_stock", "Safety stock", "day", step=1.0),
]
WORK = Field("working_days_per_week", "Working days a week", "integer", low=0, high=7)


@st.cache_data(max_entries=32, show_spinner="Laying out the week and the stocks...")
def run_supply(inventory_text: str, scenarios: tuple[tuple[str, str], ...]) -> Any:
    """Supply report: the command line's loader and planner; each case plan runs the scenario it names."""
    from estimator.planning.supply import plan_supply

    texts = dict(scenarios)

    def runner(path: str) -> Any:
        return state.run_case(texts[Path(path).name])

    return plan_supply(contracts.load_inventory_text(inventory_text), runner=runner)


def inputs() -> dict[str, Any]:
    """The inventory as the editors now stand (untouched values as loaded, other keys kept)."""
    loaded = state.document(KIND)
    doc = copy.deepcopy(loaded)
    v, pu, mu = state.version(KIND), unit("pressure"), unit("mass")
    plan = doc.setdefault("plan", {})
    demand = doc.setdefault("demand", {})
    c1, c2, c3, c4 = st.columns(4)
    number(c1, demand, WORK, f"supply.days.{v}")
    start = c2.date_input("Start", plan.get("start"), key=f"supply.start.{v}", help="Blank: today")
    if start != plan.get("start") and not (start is None and plan.get("start") is None):
        plan["start"] = start if isinstance(start, dt.date) else plan.get("start")
    number(c3, plan, PLAN[0], f"supply.lead.{v}")
    number(c4, plan, PLAN[1], f"supply.safety.{v}")
    st.markdown("**Case plans** - each runs the scenario file it names, given with the inventory")
    names = sorted({*state.files(KIND), *contracts.PLANNER_NAMES[:1], *contracts.referenced(KIND, loaded)})
    demand["cases"] = table(demand.get("cases", []), case_fields(names), f"supply.cases.{v}")
    st.markdown("**Continuous use** - oxygen or air drawn through the day outside the cases (recovery, ventilators)")
    demand["continuous"] = table(demand.get("continuous", []), CONTINUOUS_FIELDS, f"supply.cont.{v}")
    st.markdown(f"**Cylinders** - gauge pressure as read [{pu}]; nitrous oxide by weight [{mu}]")
    doc["cylinders"] = table(doc.get("cylinders", []), cylinder_fields(pu, mu), f"supply.cyl.{v}.{pu}.{mu}")
    a, b = st.columns(2)
    with a:
        st.markdown("**Agent bottles**")
        doc["bottles"] = table(doc.get("bottles", []), BOTTLE_FIELDS, f"supply.bot.{v}")
    with b:
        st.markdown("**Oxygen concentrators**")
        doc["concentrators"] = table(doc.get("concentrators", []), CONCENTRATOR_FIELDS, f"supply.conc.{v}")
    for key, parent in (("plan", doc), ("demand", doc)):
        if not parent[key] and key not in loaded:
            del parent[key]
    for key in ("cylinders", "bottles", "concentrators"):
        if not doc[key] and key not in loaded:
            del doc[key]
    for key in ("cases", "continuous"):
        if not demand[key] and key not in loaded.get("demand", {}):
            del demand[key]
    rest = {k: val for k, val in doc.items() if k not in ("cylinders", "bottles", "concentrators")}
    rest["plan"] = {k: val for k, val in plan.items() if k not in ("start", "lead_time", "safety_stock")}
    rest["demand"] = {k: val for k, val in demand.items() if k not in ("cases", "continuous", "working_days_per_week")}
    kept_view({k: val for k, val in rest.items() if val != {}}, set())
    state.set_document(doc, KIND)
    return doc


def outputs(report: Any) -> None:
    m = st.columns([2, 1, 1, 1])
    m[0].metric("Bottleneck", report.bottleneck or "none", help=report.bottleneck_supply)
    m[1].metric(
        "Days of supply", f"{report.days_of_supply.to('day').magnitude:.1f}" if report.days_of_supply else "no run-out"
    )
    m[2].metric("Cases possible", "-" if report.cases_possible is None else f"{report.cases_possible}")
    m[3].metric("Reorder by", report.reorder_by.isoformat() if report.reorder_by else "-")
    items = pd.DataFrame(
        [
            {
                "item": i.name,
                "kind": i.kind,
                "supply": i.supply,
                "usable": None if i.usable is None else float(i.usable.magnitude),
                "unit": "" if i.usable is None else f"{i.usable.units:~P}",
                "draw a day": None if i.draw_per_day is None else float(i.draw_per_day.magnitude),
                "lasts [days]": None if i.runtime is None else float(i.runtime.to("day").magnitude),
                "status": i.status,
            }
            for i in report.items
        ]
    )
    st.dataframe(items, hide_index=True, width="stretch")
    st.caption(f"Gas: {GAS_VOLUME_REFERENCE}. A cylinder's usable contents stop at its change-out pressure.")
    dep = report.depletion
    cols = [c for c in dep.columns if c != "date"]
    if cols:
        share = pd.DataFrame({"date": pd.to_datetime(dep["date"]).dt.date})
        labels = {}
        for c in cols:
            first = float(dep[c].iloc[0])
            labels[c] = c.rsplit(" [", 1)[0]
            share[c] = 100 * dep[c] / first if first > 0 else 0.0
        st.subheader("Depletion")
        show(
            time_course(
                share, labels, "stock remaining [% of start]", height=280, step=True, x="date", x_type="temporal"
            )
        )
    st.subheader("Warnings")
    show_warnings(report.warnings, empty="No supply warnings.")
    downloads(
        "supply_duration",
        {"items": items, "depletion": dep.reset_index()},
        report.to_json,
        "supply",
        title="Supply duration",
        notes=[f"Gas volumes: {GAS_VOLUME_REFERENCE}."],
        warnings=report.warnings,
    )


def render() -> None:
    st.title("Supply duration")
    st.caption(
        "How many days the stocks last under the inventory's case plans and continuous use, which one runs "
        "out first (the bottleneck) and when to reorder."
    )
    c1, c2 = st.columns([1, 2])
    state.demo_picker(KIND, c1)
    state.upload(
        KIND,
        "Load an inventory (TOML) with the scenario files it names",
        "supply.upload",
        "Stocks, sources and demand as in the README, and each scenario file its case plans name; at most 20 MB "
        "each. A case plan with scenario = 'case planner' runs the case on the case planner page.",
        c2,
    )
    doc = inputs()
    state.save_button(st, KIND, doc)
    report = run_supply(
        contracts.toml_text(doc),
        tuple(sorted(contracts.case_scenarios(doc, state.files(KIND), state.toml_text()).items())),
    )
    outputs(report)
