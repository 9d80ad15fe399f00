"""Supply duration: how long a site's stocks last under its plan, the bottleneck and the reorder date."""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

import altair as alt
import pandas as pd
import streamlit as st
import tomli_w

from estimator.errors import InputError
from estimator.properties import AGENTS
from estimator.units import GAS_VOLUME_REFERENCE, parse_quantity

from .. import demo, state
from ..charts import PALETTE, show
from ..common import downloads, show_error, show_warnings, unit

DOC, VERSION = "supply.doc", "supply.version"
PLANNER = "case planner"


def document() -> dict[str, Any]:
    return state.stored(DOC, VERSION, demo.inventory)


def _num(value: Any, dim: str, unit_: str, default: float | None = None) -> float | None:
    if value is None:
        return default
    try:
        return float(parse_quantity(value, "", dim, unit_).to(unit_).magnitude)
    except InputError:
        return default


def _pressure_gauge(value: Any, pu: str) -> float | None:
    from estimator.units import parse_pressure

    if value is None:
        return None
    return float(parse_pressure(value, "pressure").gauge().to(pu).magnitude)


def cylinder_frame(doc: dict[str, Any], pu: str, mu: str) -> pd.DataFrame:
    rows = [
        {
            "name": c.get("name", ""),
            "gas": c.get("gas", "oxygen"),
            "count": int(c.get("count", 1)),
            "water capacity [L]": _num(c.get("water_capacity"), "volume", "L"),
            "pressure": _pressure_gauge(c.get("pressure"), pu),
            "reserve": _pressure_gauge(c.get("reserve_pressure"), pu),
            "gross weight": _num(c.get("gross_weight"), "mass", mu),
            "tare weight": _num(c.get("tare_weight"), "mass", mu),
        }
        for c in doc.get("cylinders", [])
    ]
    return pd.DataFrame(
        rows,
        columns=["name", "gas", "count", "water capacity [L]", "pressure", "reserve", "gross weight", "tare weight"],
    )


def bottle_frame(doc: dict[str, Any]) -> pd.DataFrame:
    rows = [
        {
            "agent": b.get("agent", "sevoflurane"),
            "count": int(b.get("count", 0)),
            "volume [mL]": _num(b.get("volume", "250 mL"), "volume", "mL"),
            "opened bottle left [mL]": _num(b.get("opened"), "volume", "mL"),
        }
        for b in doc.get("bottles", [])
    ]
    return pd.DataFrame(rows, columns=["agent", "count", "volume [mL]", "opened bottle left [mL]"])


def concentrator_frame(doc: dict[str, Any]) -> pd.DataFrame:
    rows = [
        {
            "name": c.get("name", ""),
            "rated flow [L/min]": _num(c.get("rated_flow"), "flow", "L/min"),
            "hours a day": _num(c.get("hours_per_day", "24 h"), "time", "h"),
            "count": int(c.get("count", 1)),
        }
        for c in doc.get("concentrators", [])
    ]
    return pd.DataFrame(rows, columns=["name", "rated flow [L/min]", "hours a day", "count"])


def _blank(v: Any) -> bool:
    return v is None or (isinstance(v, float) and v != v) or v == ""


def build(
    doc: dict[str, Any],
    cyl: pd.DataFrame,
    bot: pd.DataFrame,
    conc: pd.DataFrame,
    pu: str,
    mu: str,
    extra: dict[str, Any],
) -> dict[str, Any]:
    """The inventory document from the editors; a blank required cell is an InputError naming it."""
    new = {k: v for k, v in doc.items() if k not in ("cylinders", "bottles", "concentrators")}
    cylinders = []
    for i, r in enumerate(cyl.to_dict("records")):
        c: dict[str, Any] = {"gas": r["gas"], "count": int(r["count"] if not _blank(r["count"]) else 1)}
        if not _blank(r["name"]):
            c["name"] = str(r["name"])
        if not _blank(r["water capacity [L]"]):
            c["water_capacity"] = f"{r['water capacity [L]']:g} L"
        if r["gas"] == "nitrous_oxide":
            for col, key in (("gross weight", "gross_weight"), ("tare weight", "tare_weight")):
                if _blank(r[col]):
                    raise InputError(f"cylinders[{i}].{key}", "(empty)", f"a weight in {mu} (N2O is counted by weight)")
                c[key] = f"{r[col]:g} {mu}"
        else:
            if _blank(r["pressure"]):
                raise InputError(f"cylinders[{i}].pressure", "(empty)", f"a gauge pressure in {pu}")
            c["pressure"] = f"{r['pressure']:g} {pu}"
            if not _blank(r["reserve"]):
                c["reserve_pressure"] = f"{r['reserve']:g} {pu}"
        cylinders.append(c)
    bottles = []
    for r in bot.to_dict("records"):
        b = {
            "agent": r["agent"],
            "count": int(r["count"] if not _blank(r["count"]) else 0),
            "volume": f"{r['volume [mL]'] if not _blank(r['volume [mL]']) else 250:g} mL",
        }
        if not _blank(r["opened bottle left [mL]"]):
            b["opened"] = f"{r['opened bottle left [mL]']:g} mL"
        bottles.append(b)
    concs = []
    for i, r in enumerate(conc.to_dict("records")):
        if _blank(r["rated flow [L/min]"]):
            raise InputError(f"concentrators[{i}].rated_flow", "(empty)", "a flow in L/min")
        c = {
            "rated_flow": f"{r['rated flow [L/min]']:g} L/min",
            "hours_per_day": f"{r['hours a day'] if not _blank(r['hours a day']) else 24:g} h",
            "count": int(r["count"] if not _blank(r["count"]) else 1),
        }
        if not _blank(r["name"]):
            c["name"] = str(r["name"])
        concs.append(c)
    new.update({"cylinders": cylinders, "bottles": bottles, "concentrators": concs})
    plan = dict(new.get("plan", {}))
    plan.update(
        {"start": extra["start"], "lead_time": f"{extra['lead']:g} days", "safety_stock": f"{extra['safety']:g} days"}
    )
    new["plan"] = plan
    demand = dict(new.get("demand", {}))
    demand["working_days_per_week"] = int(extra["days"])
    cases = [dict(c) for c in demand.get("cases", [])] or [{"name": "planned case", "scenario": PLANNER, "per_day": 0}]
    cases[0]["per_day"] = int(extra["per_day"])
    demand["cases"] = cases
    new["demand"] = demand
    return {k: v for k, v in new.items() if v != []}


@st.cache_data(max_entries=32, show_spinner="Laying out the week and the stocks...")
def run_supply(inventory_text: str, scenario_text: str) -> Any:
    """Supply report of an inventory; every case plan runs the planner's scenario."""
    from estimator.supply import inventory_from_text, plan_supply

    def runner(path: str) -> Any:
        return state.run_case(scenario_text)

    return plan_supply(inventory_from_text(inventory_text), runner=runner)


def _upload() -> None:
    from estimator.supply import inventory_from_text

    state.upload_toml(
        "Load an inventory (TOML)",
        "supply.upload",
        "Stocks, sources and demand as in the README; at most 20 MB. Case plans in it run the case "
        "on the case planner page.",
        DOC,
        VERSION,
        inventory_from_text,
    )


def inputs() -> dict[str, Any]:
    doc = document()
    v, pu, mu = st.session_state[VERSION], unit("pressure"), unit("mass")
    plan, demand = doc.get("plan", {}), doc.get("demand", {})
    c1, c2, c3, c4, c5 = st.columns(5)
    cases = demand.get("cases", [{}])
    extra = {
        "per_day": c1.number_input(
            "Planned cases a day", 0, 100, int(cases[0].get("per_day", 4)) if cases else 4, key=f"supply.per_day.{v}"
        ),
        "days": c2.number_input(
            "Working days a week", 0, 7, int(demand.get("working_days_per_week", 5)), key=f"supply.days.{v}"
        ),
        "start": c3.date_input("Start", _date(plan.get("start")), key=f"supply.start.{v}"),
        "lead": c4.number_input(
            "Order lead time [days]",
            0.0,
            365.0,
            _num(plan.get("lead_time"), "time", "day", 0.0),
            1.0,
            key=f"supply.lead.{v}",
        ),
        "safety": c5.number_input(
            "Safety stock [days]",
            0.0,
            365.0,
            _num(plan.get("safety_stock"), "time", "day", 0.0),
            1.0,
            key=f"supply.safety.{v}",
        ),
    }
    st.markdown(f"**Cylinders** - gauge pressure as read [{pu}]; nitrous oxide by weight [{mu}]")
    seeds = st.session_state.setdefault(
        f"supply.seeds.{v}.{pu}.{mu}",
        {"cyl": cylinder_frame(doc, pu, mu), "bot": bottle_frame(doc), "conc": concentrator_frame(doc)},
    )
    cyl = st.data_editor(
        seeds["cyl"],
        key=f"supply.cyl.{v}.{pu}.{mu}",
        num_rows="dynamic",
        hide_index=True,
        width="stretch",
        column_config={
            "gas": st.column_config.SelectboxColumn("gas", options=["oxygen", "air", "nitrous_oxide"], required=True),
            "count": st.column_config.NumberColumn("count", min_value=0, step=1, required=True),
            "pressure": st.column_config.NumberColumn(f"pressure [{pu}]", min_value=0.0),
            "reserve": st.column_config.NumberColumn(f"change-out at [{pu}]", min_value=0.0),
            "gross weight": st.column_config.NumberColumn(f"gross weight [{mu}]", min_value=0.0),
            "tare weight": st.column_config.NumberColumn(f"tare weight [{mu}]", min_value=0.0),
        },
    )
    a, b = st.columns(2)
    with a:
        st.markdown("**Agent bottles**")
        bot = st.data_editor(
            seeds["bot"],
            key=f"supply.bot.{v}",
            num_rows="dynamic",
            hide_index=True,
            width="stretch",
            column_config={
                "agent": st.column_config.SelectboxColumn("agent", options=sorted(AGENTS), required=True),
                "count": st.column_config.NumberColumn("count", min_value=0, step=1),
            },
        )
    with b:
        st.markdown("**Oxygen concentrators**")
        conc = st.data_editor(
            seeds["conc"], key=f"supply.conc.{v}", num_rows="dynamic", hide_index=True, width="stretch"
        )
    return build(doc, cyl, bot, conc, pu, mu, extra)


def _date(value: Any) -> dt.date:
    if isinstance(value, dt.date):
        return value
    try:
        return dt.date.fromisoformat(str(value))
    except ValueError:
        return dt.date.today()


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
        share = pd.DataFrame({"date": pd.to_datetime(dep["date"])})
        for c in cols:
            start = float(dep[c].iloc[0])
            share[c.rsplit(" [", 1)[0]] = 100 * dep[c] / start if start > 0 else 0.0
        long = share.melt("date", var_name="item", value_name="remaining")
        chart = (
            alt.Chart(long)
            .mark_line(strokeWidth=2.2, interpolate="step-after")
            .encode(
                x=alt.X("date:T", title="date"),
                y=alt.Y("remaining:Q", title="stock remaining [% of start]"),
                color=alt.Color(
                    "item:N", title=None, scale=alt.Scale(range=list(PALETTE)), legend=alt.Legend(orient="top")
                ),
                tooltip=["item:N", alt.Tooltip("date:T"), alt.Tooltip("remaining:Q", format=".0f")],
            )
            .properties(height=280)
        )
        st.subheader("Depletion")
        show(chart)
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
        "How many days the stocks last with the case on the planner page as the daily work, which one "
        "runs out first (the bottleneck) and when to reorder."
    )
    _upload()
    try:
        doc = inputs()
        text = tomli_w.dumps(doc)
        st.session_state["supply.current"] = doc
        report = run_supply(text, state.toml_text())
    except InputError as exc:
        show_error(exc)
        return
    plans = [c.get("scenario") for c in doc.get("demand", {}).get("cases", [])]
    if any(Path(str(p)).name != PLANNER for p in plans):
        st.info(
            "Every case plan of this inventory runs the case on the case planner page (load its scenario there).",
            icon=":material/info:",
        )
    st.download_button(
        "Save inventory (TOML)", text.encode("utf-8"), "inventory.toml", "application/toml", icon=":material/save:"
    )
    outputs(report)
