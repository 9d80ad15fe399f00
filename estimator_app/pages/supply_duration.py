"""Supply duration: how long a site's stocks last under its plan, the bottleneck and the reorder date.

The page edits the loaded inventory in place (``estimator_app.editing``) and runs it through the
command line's loader and ``plan_supply``; each case plan runs the scenario file it names, given with
the inventory (or the case planner's case for ``scenario = "case planner"``), with the calibration file
that scenario names, given with them as ``lowflow supply`` reads it beside the scenario file.
"""

from __future__ import annotations

import copy
import datetime as dt
from pathlib import Path
from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import name as human_name
from estimator.display import table as readable
from estimator.display import text as shown
from estimator.display import unit_label
from estimator.inputs.inventory_file import (
    AbsorbentEntry,
    BottleEntry,
    CasePlan,
    ConcentratorEntry,
    ContinuousDemand,
    CylinderEntry,
    PlanOptions,
    Site,
)
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE

from .. import calibration_use, contracts, state
from ..charts import case_bars, date_marks, item_colours, show, time_course
from ..common import downloads, flag, metric, show_warnings, unit
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
        contract(CylinderEntry, "service_pressure", "service pressure", pu, low=0.0, read=gauge),
        contract(CylinderEntry, "gross_weight", "gross weight", mu),
        contract(CylinderEntry, "tare_weight", "tare weight", mu),
        contract(CylinderEntry, "reserve_weight", "change-out weight", mu),
    ]


#: A time of day as the inventory writes it ("08:00" or "8.5 h").
CLOCK_HELP = "A time of day, HH:MM (00:00 to 23:59), or hours after midnight such as '8.5 h'."
BOTTLE_FIELDS = [
    Field("name", "name", "text"),
    Field("agent", "agent", "select", options=tuple(sorted(AGENTS))),
    Field("count", "count", "integer", low=0, high=10000),
    contract(BottleEntry, "volume", "volume", "mL"),
    contract(BottleEntry, "opened", "opened bottle left", "mL"),
]
CONCENTRATOR_FIELDS = [
    Field("name", "name", "text"),
    contract(ConcentratorEntry, "rated_flow", "rated flow", "L/min"),
    contract(ConcentratorEntry, "hours_per_day", "hours a day", "h"),
    Field("start", "starts at", "text", help=CLOCK_HELP),
    Field(
        "purity",
        "O2 purity",
        dimension="fraction",
        unit="%",
        low=0.0,
        high=100.0,
        help="O2 share of the product; a purity curve ([flow, purity] pairs) is kept as loaded.",
    ),
    Field("count", "count", "integer", low=0, high=100),
]
PIPELINE_FIELDS = [
    Field("name", "name", "text"),
    Field("gas", "gas", "select", options=GASES),
    Field("available", "available", "bool", default=True),
]
VENTILATION = [
    Field("drive_gas", "ventilator drive gas", "select", options=("none", "oxygen", "air")),
    Field("drive_multiplier", "drive gas per L of ventilation", low=0.0, high=10.0),
]


def case_fields(names: list[str]) -> list[Field]:
    return [
        Field("name", "name", "text"),
        Field("scenario", "scenario file", "select", options=tuple(names)),
        Field("per_day", "cases a day", "integer", low=0, high=100),
        Field("days_per_week", "days a week", "integer", low=0, high=7),
        Field("rooms", "rooms", "integer", low=1, high=50, default=1),
        *VENTILATION,
        contract(CasePlan, "minute_ventilation", "minute ventilation", "L/min"),
    ]


CONTINUOUS_FIELDS = [
    Field("name", "name", "text"),
    Field("gas", "gas", "select", options=GASES),
    contract(ContinuousDemand, "flow", "flow", "L/min"),
    contract(ContinuousDemand, "hours_per_day", "hours a day", "h"),
    Field("days_per_week", "days a week", "integer", low=0, high=7, default=7),
    Field("start", "starts at", "text", help=CLOCK_HELP),
    contract(ContinuousDemand, "minute_ventilation", "minute ventilation", "L/min"),
    VENTILATION[1],
]
PLAN = [
    contract(PlanOptions, "lead_time", "Order lead time", "day", step=1.0),
    contract(PlanOptions, "safety_stock", "Safety stock", "day", step=1.0),
    Field("table_days", "Days in the depletion table", "integer", low=1, high=3650),
]
ABSORBENT = [
    contract(AbsorbentEntry, "stock", "CO2 absorbent stock", "kg"),
    contract(AbsorbentEntry, "co2_per_100g", "CO2 taken up per 100 g", "L"),
]
WORK = Field("working_days_per_week", "Working days a week", "integer", low=0, high=7)


@st.cache_data(max_entries=32, show_spinner="Laying out the week and the stocks...")
def run_supply(
    inventory_text: str, scenarios: tuple[tuple[str, str, str | None], ...], planner_calibration: str | None = None
) -> Any:
    """Supply report: the command line's loader and planner; each case plan runs the scenario it names with
    the calibration file that scenario names (:func:`estimator_app.contracts.case_runs`; the case planner's
    with the calibration loaded on a planning page)."""
    from estimator.planning.supply import plan_supply

    runs = {name: (text, cal) for name, text, cal in scenarios}

    def runner(path: str) -> Any:
        name = Path(path).name
        text, cal = runs[name]
        return state.run_case(text, planner_calibration if name in contracts.PLANNER_NAMES else cal)

    return plan_supply(contracts.load_inventory_text(inventory_text), runner=runner)


def inputs() -> dict[str, Any]:
    """The inventory as the editors now stand (untouched values as loaded, other keys kept)."""
    loaded = state.document(KIND)
    doc = copy.deepcopy(loaded)
    v, pu, mu = state.version(KIND), unit("pressure"), unit("mass")
    plan = doc.setdefault("plan", {})
    demand = doc.setdefault("demand", {})
    _text(st, doc, "title", "Title", f"supply.title.{v}")
    c1, c2, c3, c4 = st.columns(4)
    number(c1, demand, WORK, f"supply.days.{v}")
    start = c2.date_input("Start", plan.get("start"), key=f"supply.start.{v}", help="Blank: today")
    if start != plan.get("start") and not (start is None and plan.get("start") is None):
        plan["start"] = start if isinstance(start, dt.date) else plan.get("start")
    number(c3, plan, PLAN[0], f"supply.lead.{v}")
    number(c4, plan, PLAN[1], f"supply.safety.{v}")
    c1, c2, c3, c4 = st.columns(4)
    _text(c1, demand, "day_start", "Working day starts at", f"supply.daystart.{v}", CLOCK_HELP)
    number(c2, plan, PLAN[2], f"supply.tabledays.{v}")
    site = doc.get("site") if isinstance(doc.get("site"), dict) else {}
    number(c3, site, contract(Site, "elevation", "Site elevation", "m"), f"supply.elevation.{v}")
    absorbent = doc.get("absorbent") if isinstance(doc.get("absorbent"), dict) else {}
    with c4.popover("Absorbent, site and sources"):
        for f in ABSORBENT:
            number(st, absorbent, f, f"supply.absorbent.{f.key}.{v}")
        _text(st, absorbent, "name", "Absorbent name", f"supply.absorbent.name.{v}")
        number(st, site, contract(Site, "ambient_pressure", "Ambient pressure", "kPa"), f"supply.ambient.{v}")
        _sources(doc, v)
    if absorbent and "absorbent" not in doc:
        doc["absorbent"] = absorbent
    if site and "site" not in doc:
        doc["site"] = site
    st.markdown("**Case plans** - each runs the scenario file it names, given with the inventory")
    given = state.files(KIND)
    scenarios = set(given) - set(contracts.calibrations_named(given).values())  # not the calibration files
    names = sorted({*scenarios, *contracts.PLANNER_NAMES[:1], *contracts.referenced(KIND, loaded)})
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
    st.markdown("**Pipelines**")
    doc["pipelines"] = table(doc.get("pipelines", []), PIPELINE_FIELDS, f"supply.pipe.{v}")
    for key, parent in (("plan", doc), ("demand", doc)):
        if not parent[key] and key not in loaded:
            del parent[key]
    for key in ("cylinders", "bottles", "concentrators", "pipelines"):
        if not doc[key] and key not in loaded:
            del doc[key]
    for key in ("cases", "continuous"):
        if not demand[key] and key not in loaded.get("demand", {}):
            del demand[key]
    edited = ("cylinders", "bottles", "concentrators", "pipelines", "title", "absorbent")
    rest = {k: val for k, val in doc.items() if k not in edited}
    rest["plan"] = {k: val for k, val in plan.items() if k not in ("start", "lead_time", "safety_stock", "table_days")}
    rest["demand"] = {
        k: val for k, val in demand.items() if k not in ("cases", "continuous", "working_days_per_week", "day_start")
    }
    rest["site"] = {k: val for k, val in site.items() if k not in ("elevation", "ambient_pressure")}
    rest.pop("supply", None)
    kept_view({k: val for k, val in rest.items() if val != {}}, set())
    state.set_document(doc, KIND)
    return doc


def _sources(doc: dict[str, Any], v: int) -> None:
    """``[supply]``: the order the sources meet a demand, and the items left out; written only if changed."""
    from estimator.inputs.inventory_file import SOURCE_KINDS

    supply = doc.get("supply") if isinstance(doc.get("supply"), dict) else {}
    order = list(supply.get("priority", SOURCE_KINDS))
    chosen = st.multiselect(
        "Sources, first used first", list(SOURCE_KINDS), order, key=f"supply.priority.{v}", help="The order of use."
    )
    if chosen != order:
        supply["priority"] = chosen
    ignored = list(supply.get("ignore", []))
    options = list(dict.fromkeys([*GASES, *sorted(AGENTS), "absorbent", *ignored]))
    left_out = st.multiselect(
        "Supplies left out", options, ignored, key=f"supply.ignore.{v}", help="Not tracked by this plan."
    )
    if left_out != ignored:
        supply["ignore"] = left_out
    if supply and "supply" not in doc:
        doc["supply"] = supply


def _text(box: Any, doc: dict[str, Any], key: str, label: str, widget: str, help: str | None = None) -> None:
    """A text widget over ``doc[key]``: written back only when changed; blank removes the key."""
    raw = doc.get(key)
    value = box.text_input(label, "" if raw is None else str(raw), key=widget, help=help)
    if value != ("" if raw is None else str(raw)):
        if value.strip():
            doc[key] = value.strip()
        else:
            doc.pop(key, None)


def outputs(report: Any) -> None:
    days = report.days_of_supply
    m = st.columns([2, 1, 1, 1])
    m[0].metric("Bottleneck", report.bottleneck or "none", help=report.bottleneck_supply)
    short = flag(report.warnings, ("SUPPLY_UNDER_ONE_DAY", "REORDER_OVERDUE"))
    metric(m[1], "Days of supply", shown(days.to("day").magnitude, "days") if days else "no run-out", short)
    m[2].metric("Cases possible", "-" if report.cases_possible is None else f"{report.cases_possible} cases")
    reorder = report.reorder_text()
    m[3].metric(
        "Reorder",
        reorder if reorder == "Order now" or report.reorder_by is None else f"by {reorder}",
        help=None if report.reorder_by is None else f"reorder date {report.reorder_by.isoformat()}",
    )
    colours = item_colours([i.name for i in report.items])
    items = pd.DataFrame(
        [
            {
                "item": i.name,
                "kind": i.kind,
                "supply": human_name(i.supply),
                "usable": None if i.usable is None else float(i.usable.magnitude),
                "unit": "" if i.usable is None else unit_label(f"{i.usable.units}"),
                "draw a day": None if i.draw_per_day is None else float(i.draw_per_day.magnitude),
                "lasts [days]": None if i.runtime is None else float(i.runtime.to("day").magnitude),
                "status": i.status,
            }
            for i in report.items
        ]
    )
    st.dataframe(readable(items), hide_index=True, width="stretch")
    st.caption(f"Gas: {GAS_VOLUME_REFERENCE}. A cylinder's usable contents stop at its change-out pressure.")
    _charts(report, items, colours)
    st.subheader("Warnings")
    show_warnings(report.warnings, empty="No supply warnings.")
    downloads(
        "supply_duration",
        {"items": readable(items), "depletion": dep_table(report)},
        report.to_json,
        "supply",
        title="Supply duration",
        notes=[*report.headline(), f"Gas volumes: {GAS_VOLUME_REFERENCE}."],
        warnings=report.warnings,
    )


def dep_table(report: Any) -> pd.DataFrame:
    return readable(report.depletion.reset_index())


def _charts(report: Any, items: pd.DataFrame, colours: dict[str, str]) -> None:
    """Depletion with the reorder date, the lead time and the run-out marked; days each item lasts."""
    dep = report.depletion
    cols = [c for c in dep.columns if c != "date"]
    if not cols:
        return
    share = pd.DataFrame({"date": pd.to_datetime(dep["date"]).dt.date})
    labels = {}
    for c in cols:
        first = float(dep[c].iloc[0])
        labels[c] = c.rsplit(" [", 1)[0]
        share[c] = 100 * dep[c] / first if first > 0 else 0.0
    st.subheader("Depletion")
    named = {labels[c]: colours.get(labels[c], "#51607a") for c in cols}
    spec = time_course(
        share, labels, "stock remaining [% of start]", height=300, step=True, x="date", x_type="temporal", colours=named
    )
    for layer in spec["layer"]:  # headroom above 100 % for the date labels, so they never sit on a curve
        y = layer.get("encoding", {}).get("y", {})
        if y.get("field") == "value":
            y["scale"] = {"zero": True, "domain": [0, 140]}
            y["axis"] = {"values": [0, 20, 40, 60, 80, 100]}
    marks, band = [], None
    if report.reorder_by is not None:
        lead = dt.timedelta(days=float(report.lead_time_days or 0.0))
        arrives = report.reorder_by + lead
        marks.append((report.reorder_by.isoformat(), "reorder by" if not report.order_now() else "reorder (past)"))
        band = (report.reorder_by.isoformat(), arrives.isoformat(), f"lead time {shown(lead.days, 'days')}")
        marks.append((arrives.isoformat(), f"order arrives ({shown(lead.days, 'days')} lead)"))
    if report.days_of_supply is not None:
        out = report.start + dt.timedelta(days=float(report.days_of_supply.to("day").magnitude))
        marks.append((out.isoformat(), f"{report.bottleneck} runs out"))
    show(date_marks(spec, marks, band))
    lasts = items.dropna(subset=["lasts [days]"])
    if len(lasts):
        st.subheader("Days each item lasts")
        rows = lasts.assign(colour=lasts["item"])
        show(case_bars(rows, "item", "lasts [days]", "colour", "item", "lasts [days]", list(colours)))


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
        "Stocks, sources and demand as in the README, each scenario file its case plans name and the calibration "
        "file a scenario names; at most 20 MB each. A case plan with scenario = 'case planner' runs the case on "
        "the case planner page.",
        c2,
    )
    doc = inputs()
    state.save_button(st, KIND, doc)
    named = contracts.named_calibration(state.document())  # as lowflow supply reads the file a scenario names
    if named is not None and any(n in contracts.PLANNER_NAMES for n in contracts.referenced(KIND, doc)):
        if state.calibration() is None:
            st.warning(calibration_use.named_message(named, "scenario"), icon=":material/warning:")
            return
    files = state.files(KIND)
    scenarios = contracts.case_scenarios(doc, files, state.run_text())
    missing = contracts.missing_calibrations(scenarios, files)
    for scenario, cal in missing.items():  # as lowflow supply, never run without the file the scenario names
        st.warning(calibration_use.given_message(scenario, cal), icon=":material/warning:")
    if missing:
        return
    runs = contracts.case_runs(scenarios, files)
    current = (contracts.toml_text(doc), runs, state.calibration_text() if named is not None else None)
    report = run_supply(*current)
    if used := contracts.calibrations_named(scenarios):
        st.caption("Department calibration: " + "; ".join(f"{s} runs with {c}" for s, c in sorted(used.items())))
    outputs(report)
    from .compare_plans import stock_comparison

    stock_comparison(current, report, run_supply)
