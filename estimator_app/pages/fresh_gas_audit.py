"""Fresh-gas audit: recorded cases in, agent, gas, CO2e and cost per case, room and month out, with KPIs."""

from __future__ import annotations

import dataclasses
import tempfile
from pathlib import Path
from typing import Any

import pandas as pd
import streamlit as st

from estimator.display import name as human_name
from estimator.display import table as readable
from estimator.display import text as shown
from estimator.errors import InputError
from estimator.properties import CO2E_BASES
from estimator.units import GAS_VOLUME_REFERENCE

from .. import contracts, demo, prices_editor, state
from ..charts import case_bars, class_bars, show
from ..common import (
    MAX_UPLOAD_BYTES,
    XLSX,
    download_row,
    flag,
    metric,
    read_upload,
    show_error,
    show_warnings,
    unit,
)
from ..editing import Field, number

SCENARIO_PRICES = "the scenario's [prices]"
NO_PRICES = "no prices"


@st.cache_data(max_entries=16, show_spinner="Auditing the log...")
def run_audit(text: str, prices_text: str, basis: str, quadrature: str, after: float) -> Any:
    """The audit of a log's text: the command line's ``audit`` call with the same options."""
    from estimator.planning.audit import audit

    return audit(
        contracts.load_log_text(text),
        prices=contracts.load_prices_text(prices_text),
        basis=basis,
        quadrature=quadrature,
        maintenance_after=f"{after:g} min",
    )


@st.cache_data(max_entries=8, show_spinner="Re-running each case at the policy flow (engine)...")
def run_counterfactual(
    text: str, prices_text: str, basis: str, quadrature: str, after: float, policy_text: str
) -> dict[str, Any]:
    from estimator.planning.audit_policy import counterfactual

    result = run_audit(text, prices_text, basis, quadrature, after)
    return counterfactual(
        result, contracts.load_policy_text(policy_text), prices=contracts.load_prices_text(prices_text)
    )


def _source(label: str, kind: str, key: str, extra: tuple[str, ...], box: Any) -> tuple[str, str]:
    """(name, text) of an input: an uploaded file, else the chosen demo file (or one of ``extra``)."""
    options = [*extra, *demo.files_of(kind)]
    default = demo.DEFAULT[kind]
    choice = box.selectbox(label, options, index=options.index(default), key=f"{key}.demo")
    up = box.file_uploader(
        f"or upload {label.lower()}",
        type=["csv"] if kind == "log" else ["toml"],
        key=f"{key}.upload",
        help=f"At most {MAX_UPLOAD_BYTES // 2**20} MB; parsed, never executed.",
    )
    if up is not None:
        return up.name, read_upload(up, label)
    if choice in extra:
        return choice, ""
    return choice, demo.text(choice)


def _prices_text(name: str, text: str) -> str:
    if name == SCENARIO_PRICES:
        p = state.document().get("prices")
        return contracts.toml_text({"prices": p}) if p else ""
    return text


def _flow_field(fu: str, ff: float) -> Field:
    return Field("fresh_gas_flow", "Policy fresh-gas flow", dimension="flow", unit=fu, low=0.1 * ff, high=15 * ff)


def _file(result: Any, kind: str, cf: dict[str, Any] | None = None) -> bytes:
    """One export of the audit (with its counterfactual, when run), built when its button is pressed."""
    import dataclasses

    from estimator.planning.exports import write_csv, write_xlsx
    from estimator.planning.html_report import report_html

    if kind == "html":
        return report_html(dataclasses.replace(result, counterfactual=cf), "Fresh-gas audit").encode("utf-8")
    with tempfile.TemporaryDirectory() as tmp:
        writer = write_csv if kind == "csv" else write_xlsx
        return writer(result, Path(tmp) / f"audit.{kind}", "lowflow app: fresh-gas audit").read_bytes()


def render() -> None:
    st.title("Fresh-gas audit")
    st.caption(
        "From recorded cases: how much agent, CO2e and money the fresh gas cost, and what a low-flow policy would save."
    )
    bases = list(CO2E_BASES)
    c1, c2, c3, c4 = st.columns(4)
    basis = c1.selectbox("CO2e basis", bases, format_func=lambda b: CO2E_BASES[b][1], key="audit.basis")
    quad = c2.selectbox(
        "Integration",
        ("hold", "trapezoid"),
        key="audit.quadrature",
        format_func=lambda q: {"hold": "sample and hold (dials)", "trapezoid": "trapezoid (measured)"}[q],
    )
    after = c3.number_input("Maintenance starts after [min]", 0.0, 600.0, 10.0, 1.0, key="audit.after")
    ff = 1000.0 if unit("flow") == "mL/min" else 1.0
    c1, c2, c3 = st.columns(3)
    name, text = _source("Fresh-gas log", "log", "audit.log", (), c1)
    prices_name, prices_text = _source("Prices", "prices", "audit.prices", (NO_PRICES, SCENARIO_PRICES), c2)
    policy_name, policy_text = _source("Low-flow policy", "policy", "audit.policy", (), c3)
    prices_text = prices_editor.edit(_prices_text(prices_name, prices_text), prices_name, st)
    policy_doc = contracts.parse_toml(policy_text, "--policy")
    table_ = policy_doc.setdefault("policy", {}) if "policy" in policy_doc or not policy_doc else policy_doc
    number(c4, table_, _flow_field(unit("flow"), ff), f"audit.policy.{policy_name}.{unit('flow')}")
    policy_text = contracts.toml_text(policy_doc)
    result = run_audit(text, prices_text, basis, quad, after)
    r = result.rows
    currency = unit("currency") or result.currency or ""
    st.subheader(f"{name}: {r['read']} rows read, {r['used']} used, {r['rejected']} rejected")
    if result.rejections:
        with st.expander(f"Rejected rows ({len(result.rejections)})", expanded=True):
            st.dataframe(pd.DataFrame(result.rejections, columns=["line", "reason"]), hide_index=True, width="stretch")
    k, t = result.kpis, result.totals
    _prices_line(name, prices_name, prices_text)
    agents = [c for c in t if c.startswith("liquid_") and c.endswith("_ml") and t[c] > 0]
    m = st.columns(3 + len(agents))
    m[0].metric("Cases", f"{t.get('cases', 0)}")
    for col, key in zip(m[1:], agents, strict=False):
        col.metric(f"{human_name(key[7:-3])} (liquid)", shown(t[key], "mL"))
    m[-2].metric("CO2e", shown(t.get("co2e_kg", 0), "kg"), help=CO2E_BASES[basis][1])
    m[-1].metric(
        f"Cost [{currency}]" if "cost_total" in t else "Cost",
        shown(t["cost_total"]) if "cost_total" in t else "no prices",
    )
    low_o2 = "min_inspired_oxygen" in result.cases
    m = [*st.columns(3), *st.columns(3)]  # two rows of three: no metric cut off at 1440 px
    if low_o2:  # the lowest recorded inspired O2 of all cases, flagged as its warning is
        lowest = result.cases["min_inspired_oxygen"].min()
        o2_flag = flag(result.warnings, ("INSPIRED_OXYGEN_LOW",))
        metric(m[5], "Lowest inspired O2", shown(100 * lowest, "%"), o2_flag, help="lowest recorded in any case")
    m[0].metric(
        "Mean maintenance flow",
        shown(k["mean_maintenance_flow_l_min"] * ff, unit("flow")),
        help=f"class: {k.get('mean_maintenance_flow_class')}",
    )
    share = "share of maintenance time at or below {} L/min"
    m[1].metric("Time at <= 1 L/min", shown(100 * k["maintenance_share_le_1"], "%"), help=share.format(1))
    m[2].metric("Time at <= 0.5 L/min", shown(100 * k["maintenance_share_le_0_5"], "%"), help=share.format(0.5))
    m[3].metric("MAC-hours", shown(k.get("mac_hours", 0)))
    m[4].metric("CO2e per MAC-hour", shown(k.get("co2e_per_mac_hour_kg"), "kg"))
    c1, c2 = st.columns(2)
    show(class_bars({n: 100 * v for n, v in k["flow_class_shares"].items()}, "maintenance time [%]"), c1)
    show(_liquid_per_case(result.cases), c2)
    from estimator.planning.exports import export_table

    tabs = st.tabs(["Cases", "Rooms", "Months"])
    for tab, frame in zip(tabs, (result.cases, result.rooms, result.months), strict=True):
        tab.dataframe(readable(export_table(frame, result, spreadsheet=False)), hide_index=True, width="stretch")
    st.caption(f"Gas: {GAS_VOLUME_REFERENCE}. CO2e basis: {CO2E_BASES[basis][1]}.")
    show_warnings(result.warnings)

    st.subheader("Counterfactual: the same cases at the policy flow")
    st.caption(
        "Each case re-run by the engine: wash-in as recorded, maintenance as an end-tidal hold at the "
        "recorded end-tidal agent with the policy's fresh-gas flow."
    )
    cf = None
    if st.toggle("Run the counterfactual", key="audit.cf"):
        try:
            cf = run_counterfactual(text, prices_text, basis, quad, after, policy_text)
        except InputError as exc:
            show_error(exc)
    if cf is not None:
        _counterfactual(cf, currency)
    from ..calibration_view import render_calibration

    calib = render_calibration(result, (text, prices_text, basis, quad, after), name, text)
    result = dataclasses.replace(result, calibration=calib) if calib else result  # in the downloads too
    st.subheader("Download the audit")
    from estimator.jsonout import dumps

    def as_json() -> bytes:
        doc = result.to_json()
        if cf is not None:
            doc["counterfactual"] = cf
        return dumps(doc).encode("utf-8")

    download_row(
        [
            ("Cases (CSV)", lambda: _file(result, "csv"), "audit_cases.csv", "text/csv", None),
            ("Workbook (XLSX)", lambda: _file(result, "xlsx"), "audit.xlsx", XLSX, None),
            ("Report (HTML)", lambda: _file(result, "html", cf), "audit_report.html", "text/html", None),
            ("JSON", as_json, "audit.json", "application/json", None),
        ],
        "audit",
    )


def _prices_line(log_name: str, prices_name: str, prices_text: str) -> None:
    """Say which prices cost the log, and warn when a log of one's own is costed at the invented demo prices."""
    prices = contracts.load_prices_text(prices_text)
    st.caption(prices_editor.describe(prices_name, prices))
    own_log = st.session_state.get("audit.log.upload") is not None
    if own_log and prices_name in demo.files_of("prices") and st.session_state.get("audit.prices.upload") is None:
        if contracts.parse_toml(prices_text, "prices") == contracts.parse_toml(demo.text(prices_name), "prices"):
            st.warning(
                f"{log_name} is costed at the demo's invented prices ({prices_name}): upload or edit your own "
                "prices above, or choose 'no prices'.",
                icon=":material/sell:",
            )


def _liquid_per_case(cases: pd.DataFrame) -> dict[str, Any]:
    """Each case's liquid agent, one colour an agent (cases of two agents show both bars)."""
    from estimator.properties import AGENTS

    cols = [c for c in cases.columns if c.startswith("liquid_") and c.endswith("_ml")]
    long = cases.reset_index().melt(["index", "case_id"], cols, var_name="agent", value_name="liquid [mL]")
    long = long.sort_values("index", kind="stable")  # the log's case order, not agent by agent
    long = long[long["liquid [mL]"] > 0].assign(agent=lambda f: f["agent"].str[7:-3])
    return case_bars(long, "case_id", "liquid [mL]", "agent", "case", "liquid agent [mL]", sorted(AGENTS))


def _counterfactual(cf: dict[str, Any], currency: str) -> None:
    """The policy's savings: each agent's liquid, fresh gas, CO2e and cost, then each case's saving."""
    from estimator.properties import AGENTS

    s, share = cf["totals"]["savings"], cf["totals"]["savings_share"]
    per_agent = s.get("agent_liquid_by_agent", {})
    m = st.columns(3 + len(per_agent))
    for col, (agent, q) in zip(m, per_agent.items(), strict=False):
        col.metric(f"{human_name(agent)} saved", shown(q["magnitude"], "mL"), help="liquid agent")
    m[-3].metric(
        "Fresh gas saved", shown(s["fresh_gas"]["magnitude"], "L"), shown(100 * (share.get("fresh_gas") or 0), "%")
    )
    m[-2].metric("CO2e saved", shown(s["co2e"]["magnitude"], "kg"), shown(100 * (share.get("co2e") or 0), "%"))
    if s.get("cost"):
        m[-1].metric("Cost saved", shown(s["cost"]["total"]), help=f"in {currency}")
    rows = pd.DataFrame(
        [
            {"case_id": c["case_id"], "agent": c["agent"], "saved [mL]": c["savings"]["agent_liquid"]["magnitude"]}
            for c in cf["cases"]
        ]
    )
    if len(rows):
        rows = rows.sort_values("saved [mL]", ascending=False)
        show(
            case_bars(
                rows,
                "case_id",
                "saved [mL]",
                "agent",
                "case (largest saving first)",
                "liquid agent saved [mL]",
                sorted(AGENTS),
            )
        )
    if cf["skipped"]:
        st.dataframe(readable(pd.DataFrame(cf["skipped"])), hide_index=True, width="stretch")
    show_warnings(cf["warnings"])
