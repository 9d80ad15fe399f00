"""The audit as a workbench (issue 19): each agent's liquid apart, the prices named, the counterfactual
in the report, and a flow-class ramp of one hue with the class name on each bar.

Consistency checks of our own outputs (not validation against a published source).
"""

from __future__ import annotations

import colorsys
import dataclasses
import re
from pathlib import Path

import pytest

from estimator.accounts.costs import DEMO_PRICES
from estimator.planning.audit import audit
from estimator.planning.audit_policy import counterfactual, parse_policy
from estimator.planning.flow_classes import FLOW_CLASS_COLOURS, FLOW_CLASSES
from estimator.planning.html_report import report_html
from estimator.planning.svg_charts import luminance

DATA = Path(__file__).parent / "data"
TWO_AGENTS = DATA / "audit_two_rooms.csv"  # sevoflurane in one room, desflurane in the other


def _stand_in(doc):
    """An engine stand-in: every case uses half the recorded liquid (the policy halves the flow)."""
    from estimator.units import Q_

    @dataclasses.dataclass
    class Result:
        totals: dict
        warnings: list

    minutes = sum(float(ph["duration"].split()[0]) for ph in doc["phases"])
    return Result({"agent_liquid": Q_(0.1 * minutes, "mL"), "oxygen": Q_(0.5 * minutes, "L")}, [])


@pytest.fixture(scope="module")
def two_agents():
    return audit(TWO_AGENTS, prices=DEMO_PRICES)


def test_totals_keep_each_agent_apart(two_agents):
    t = two_agents.totals
    assert t["liquid_sevoflurane_ml"] > 0 and t["liquid_desflurane_ml"] > 0
    assert t["liquid_sevoflurane_ml"] + t["liquid_desflurane_ml"] == pytest.approx(t["agent_liquid_ml"])
    doc = two_agents.to_json()["totals"]["agent_liquid_by_agent"]
    assert doc["desflurane"]["magnitude"] == pytest.approx(t["liquid_desflurane_ml"])


def test_the_prices_used_are_named(two_agents):
    assert any(n.startswith("prices used: ") and DEMO_PRICES.currency in n for n in two_agents.notes)
    assert any(n.startswith("no prices given") for n in audit(TWO_AGENTS).notes)


def test_report_gives_each_agent_and_no_mixed_liquid_total(two_agents):
    page = report_html(two_agents)
    totals = page[page.index("<h2>Totals</h2>") : page.index("<h2>Key figures</h2>")]
    assert "Sevoflurane, liquid [mL]" in totals and "Desflurane, liquid [mL]" in totals
    assert "agent liquid [mL]" not in totals
    assert "Sevoflurane delivered per room" in page and "Desflurane delivered per room" in page
    # Numbers are rounded for reading (three figures): no long decimals in the report's tables.
    assert not re.search(r"<td>-?\d+\.\d{4,}</td>", page)


def test_report_carries_the_counterfactual_with_each_agent_and_cases(two_agents):
    cf = counterfactual(two_agents, parse_policy({"fresh_gas_flow": "0.5 L/min"}), runner=_stand_in, prices=DEMO_PRICES)
    page = report_html(dataclasses.replace(two_agents, counterfactual=cf))
    section = page[page.index("<h2>Counterfactual") :]
    assert "Sevoflurane, liquid [mL]" in section and "Desflurane, liquid [mL]" in section
    assert "Liquid agent saved per case" in section
    for case in cf["cases"]:
        assert f"{case['case_id']} ({case['agent']})" in section


def test_flow_class_ramp_is_one_hue_growing_darker_with_flow():
    # One hue (within 2 degrees) and falling luminance (WCAG 2.1): the order reads without colour vision.
    assert len(FLOW_CLASS_COLOURS) == len(FLOW_CLASSES)
    hues = [colorsys.rgb_to_hls(*(int(c[i : i + 2], 16) / 255 for i in (1, 3, 5)))[0] for c in FLOW_CLASS_COLOURS]
    assert max(hues) - min(hues) < 2 / 360
    lum = [luminance(c) for c in FLOW_CLASS_COLOURS]
    assert all(a > b for a, b in zip(lum, lum[1:], strict=False))


def test_report_flow_class_bars_use_the_ramp_and_carry_the_class_name(two_agents):
    page = report_html(two_agents)
    chart = page[page.index("Share of maintenance time per flow class") :]
    chart = chart[: chart.index("</svg>")]
    for (name, _), colour in zip(FLOW_CLASSES, FLOW_CLASS_COLOURS, strict=True):
        assert f'fill="{colour}"' in chart
        assert f"{name}</text>" in chart  # on the bar, or after the value of a short bar
    for old in ("#5b8c5a", "#a7b94f", "#c0392b"):  # the former green-to-red steps
        assert old not in page
