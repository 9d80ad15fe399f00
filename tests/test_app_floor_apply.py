"""The flow floor page: what the recommended schedule uses, and applying it to the case planner."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

pytest.importorskip("streamlit")

from app_helpers import assert_clean, page  # noqa: E402

from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.planning.safety import flow_floor  # noqa: E402

DEMO = Path(__file__).resolve().parent.parent / "demo_cases"


def test_applied_schedule_gives_the_recommended_flows_and_keeps_other_keys():
    from estimator_app.pages.flow_floor import applied

    doc = tomllib.loads((DEMO / "kestrel_nitrous_dental.toml").read_text(encoding="utf-8"))
    res = flow_floor(scenario_from_dict(doc), grid=False)
    new = applied(doc, res.schedule)
    sc = scenario_from_dict(new)  # still a valid scenario
    for s in res.schedule:
        got = [q.to("L/min").magnitude for q in sc.phases[s["index"]].flows()]
        want = [s[g].to("L/min").magnitude for g in ("oxygen", "air", "nitrous_oxide")]
        assert got == pytest.approx(want) if s["settable"] else True
        kept = {
            k: v
            for k, v in doc["phases"][s["index"]].items()
            if k not in ("oxygen", "air", "nitrous_oxide", "total_flow", "oxygen_fraction", "balance")
        }
        assert kept.items() <= new["phases"][s["index"]].items()
    assert new["patient"] == doc["patient"] and new.get("prices") == doc.get("prices")


def test_floor_page_shows_use_at_the_schedule_and_applies_it():
    from estimator_app import demo

    at = page("flow_floor", demo.scenario())
    assert_clean(at)
    labels = [m.label for m in at.metric]
    assert "Liquid agent at the schedule" in labels
    assert any(("saved" in m.delta or "extra" in m.delta) for m in at.metric if m.label.endswith("at the schedule"))
    at.button(key="floor.apply").click().run()
    assert_clean(at)
    doc = at.session_state["scenario"]
    res = flow_floor(scenario_from_dict(demo.scenario()), grid=False)
    sc = scenario_from_dict(doc)
    for s in res.schedule:
        if s["settable"]:
            assert sc.phases[s["index"]].flows()[0].to("L/min").magnitude == pytest.approx(
                s["oxygen"].to("L/min").magnitude
            )
