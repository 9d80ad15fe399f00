"""A phase with no fresh gas at all: the make-up gas enters every species' balance, no carrier no agent.

Without fresh gas the circuit still gives the ventilator its tidal volume: the bag empties and the
shortfall is drawn in as room air (the circuit's negative-pressure relief or a ventilator's
entrainment valve). These are consistency checks of the model's own balances, not validation.
"""

from __future__ import annotations

import numpy as np
import pytest
from engine_helpers import run, scenario

from estimator.simulation import batch

NO_FLOW = {"duration": "30 min", "oxygen": "0 L/min", "air": "0 L/min", "vaporizer": "2 %"}
WASH = {"duration": "10 min", "oxygen": "2 L/min", "air": "2 L/min", "vaporizer": "2 %"}
FINE = {"output": {"interval": "0.25 min"}}


@pytest.fixture(scope="module")
def no_flow():
    return run("sevoflurane", [WASH, NO_FLOW], **FINE)


def test_inspired_fractions_sum_to_one(no_flow):
    # Dry fractions of the six species of the model: they sum to 1 by definition (round-off only).
    s = no_flow.series
    cols = [c for c in s.columns if c.startswith("inspired_") and c.endswith("[%]")]
    assert len(cols) == 6
    assert np.abs(s[cols].sum(axis=1) - 100.0).max() < 1e-6


def test_deficit_total_equals_integral_of_its_series(no_flow):
    # The reported volume deficit is the integral of the deficit-flow series (trapezoid rule on a
    # 0.25-min grid of a flow smooth within each phase, integrated phase by phase: 1e-3 relative
    # covers the quadrature error.
    s = no_flow.series
    series = sum(np.trapezoid(g["volume_deficit_flow [L/min]"], g["time [min]"]) for _, g in s.groupby("phase"))
    total = no_flow.totals["volume_deficit"].to("L").magnitude
    assert series > 1.0
    assert total == pytest.approx(series, rel=1e-3)
    codes = [w[0] for w in no_flow.warnings]
    assert "VOLUME_DEFICIT" in codes


def test_vaporizer_without_carrier_delivers_nothing(no_flow):
    s = no_flow.series
    during = s[(s["phase"] == 1) & (s["time [min]"] > 10.0)]
    assert (during["delivered_agent [%]"] == 0.0).all()
    # all agent delivered came in the first phase: the whole case uses what the wash-in phase used
    first = run("sevoflurane", [WASH], **FINE).totals["agent_vapour"].to("L").magnitude
    assert no_flow.totals["agent_vapour"].to("L").magnitude == pytest.approx(first, rel=1e-6)


def test_mass_balance_holds_without_fresh_gas(no_flow):
    assert max(no_flow.mass_balance().values()) < 1e-6


def test_end_tidal_hold_without_fresh_gas_cannot_deliver():
    # the wash-in at 2 % reaches about 1.3 % end-tidal: a 0.6 MAC target is reached, then lost
    r = run("sevoflurane", [WASH, {**NO_FLOW, "vaporizer": None, "end_tidal_target": "0.6 MAC"}])
    s = r.series
    assert (s[(s["phase"] == 1) & (s["time [min]"] > 10.0)]["delivered_agent [%]"] == 0.0).all()
    held = [m for code, m in r.warnings if code == "TARGET_NOT_HELD"]
    assert held and "no fresh gas flows" in held[0]
    # a target above what the wash-in reached: never reached, and the reason is the missing carrier
    r = run("sevoflurane", [WASH, {**NO_FLOW, "vaporizer": None, "end_tidal_target": "1.5 MAC"}])
    missed = [m for code, m in r.warnings if code == "TARGET_NOT_REACHED"]
    assert missed and "no fresh gas flows" in missed[0]


def test_batch_engine_agrees_without_fresh_gas():
    # The batch engine integrates the same right-hand side: totals within its 1e-3 agreement target.
    template = batch.case_template(scenario("sevoflurane", [WASH, NO_FLOW]))
    out = batch.run_batch(template, [55.0, 90.0], [30.0, 70.0], [40.0, 40.0])
    for i, (w, a) in enumerate(((55.0, 30.0), (90.0, 70.0))):
        ref = run_single(template, w, a)
        for key in ("agent_liquid", "oxygen", "air", "volume_deficit"):
            want = ref[key].to(batch.TOTAL_UNITS[key]).magnitude
            assert out[key][i] == pytest.approx(want, rel=1e-3, abs=1e-6), key


def run_single(template, weight, age):
    from estimator.simulation.engine import simulate

    return simulate(batch.single_case_scenario(template, weight, age, 40.0)).totals
