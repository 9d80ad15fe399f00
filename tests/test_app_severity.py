"""Severity that matches risk on the metrics (issue 19, item 5): a metric whose value breaks a clinical
safety limit of the registry (estimator.limits, Code.safety) is flagged red on the metric itself, with
the limit's plain meaning and code, as its warning is; a safe value carries no flag.

One-sided safety checks: the flag is there below the limit and gone under the safe counterpart.
"""

from __future__ import annotations

from app_helpers import page

from estimator_app import demo
from estimator_app.common import SAFETY_PREFIX


def _o2(at):
    return next(m for m in at.metric if m.label == "Lowest inspired O2")


def test_inspired_oxygen_metric_is_red_below_the_threshold_and_plain_above():
    low = demo.scenario()
    # Maintenance at 0.15 L/min O2 + 0.35 L/min air: O2 uptake of a 78-kg adult (about 250 mL/min,
    # Brody 1945 scaling) drains the circuit's O2 below the 30 % the plan keeps (Baum and Aitkenhead 1995).
    low["phases"][1].update(oxygen="0.15 L/min", air="0.35 L/min")
    at = page("case_planner", low)
    m = _o2(at)
    # Red with a falling arrow (a negative delta on Streamlit releases without coloured deltas).
    assert m.proto.delta.lstrip("-").startswith(SAFETY_PREFIX)
    assert "HYPOXIC_INSPIRED_MIXTURE" in m.proto.help or "INSPIRED_OXYGEN_LOW" in m.proto.help
    safe = demo.scenario()
    safe["phases"][1].update(oxygen="0.5 L/min", air="0 L/min")  # all O2: the safe counterpart
    at = page("case_planner", safe)
    assert _o2(at).proto.delta == ""


def test_supply_days_flagged_when_the_reorder_is_overdue():
    # The demo inventory lasts 12.4 days: a 10-day lead time plus 2 days of safety stock fits, 20 days does not.
    at = page("supply_duration")
    m = next(m for m in at.metric if m.label == "Days of supply")
    assert m.proto.delta == ""
    at.number_input(key="supply.lead.0").set_value(20.0).run()
    m = next(m for m in at.metric if m.label == "Days of supply")
    assert "REORDER_OVERDUE" in m.proto.help and m.proto.delta.lstrip("-").startswith(SAFETY_PREFIX)


def test_reports_mark_safety_warnings_as_the_pages_do():
    import pandas as pd

    from estimator.planning.html_report import tables_report_html

    page_ = tables_report_html(
        "t",
        {"a": pd.DataFrame({"v": [1.0]})},
        warnings=[("HYPOXIC_INSPIRED_MIXTURE", "x"), ("FEW_WEEKS", "y"), ("FEW_WEEKS", "y")],
    )
    assert '<li class="safety">Safety: <b>HYPOXIC_INSPIRED_MIXTURE</b>' in page_
    assert page_.count("<b>FEW_WEEKS</b>") == 1 and '<li class="warn"><b>FEW_WEEKS</b>' in page_


def test_audit_flags_the_lowest_recorded_inspired_oxygen():
    # The demo log records inspired O2 below 30 % in some cases on purpose (make_audit_log.py).
    at = page("fresh_gas_audit")
    m = next(m for m in at.metric if m.label == "Lowest inspired O2")
    assert m.proto.delta.lstrip("-").startswith(SAFETY_PREFIX) and "INSPIRED_OXYGEN_LOW" in m.proto.help
