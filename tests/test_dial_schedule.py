"""The dial of each end-tidal hold as numbers, the same in the JSON, the text summary and the app."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from estimator.inputs.scenario import load_scenario
from estimator.simulation.dial_schedule import STEP_MIN, dial_schedule
from estimator.simulation.engine import simulate

DEMO = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_lap_chole.toml"


@pytest.fixture(scope="module")
def result():
    return simulate(load_scenario(DEMO))


def test_one_schedule_per_hold_phase_read_from_the_series(result):
    sched = dial_schedule(result.series, result.phases)
    holds = [p for p in result.phases if p["mode"] == "end_tidal_hold"]
    assert [d["index"] for d in sched] == [p["index"] for p in holds]
    s = result.series
    for d in sched:
        rows = s[s["phase"] == d["index"]]
        dial = rows["vaporizer_setting [%]"].to_numpy()
        assert d["dial_start"] == dial[0] and d["dial_end"] == dial[-1] and d["dial_median"] == np.median(dial)
        times = [r["time"] for r in d["table"]]
        assert times[0] == d["start"] and times[-1] == d["end"]
        assert all(b - a <= STEP_MIN + 1e-9 for a, b in zip(times, times[1:], strict=False))


def test_json_and_text_carry_the_schedule(result):
    from estimator.cli.case import summary

    doc = result.to_json()
    assert doc["dial_schedule"] == dial_schedule(result.series, result.phases)
    d = doc["dial_schedule"][-1]
    assert f"phase {d['index']} dial: {d['dial_start']:.3g} %" in summary(result)


def test_app_shows_the_table(result):
    pytest.importorskip("streamlit")
    from estimator_app.pages.case_planner import dial_frame

    frame = dial_frame(result)
    assert len(frame) == sum(len(d["table"]) for d in dial_schedule(result.series, result.phases))
