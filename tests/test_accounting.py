"""One accounting: the case, the batch and the forecast, the supply planner and the audit count the
same CO2e and absorbent for the same case (consistency checks of one rule, not validation)."""

from __future__ import annotations

import pytest
from engine_helpers import scenario

from estimator.accounts.accounting import absorbent_capacity
from estimator.accounts.carbon import released_co2e
from estimator.accounts.carbon_totals import case_carbon, totals_co2e
from estimator.inputs.audit_log import log_from_text
from estimator.inputs.inventory_file import inventory_from_text
from estimator.inputs.scenario import scenario_from_dict
from estimator.planning.audit import audit
from estimator.planning.audit_policy import case_scenarios, counterfactual, engine_runner, parse_policy
from estimator.planning.casemix import load_casemix
from estimator.planning.forecast import case_co2e, forecast
from estimator.planning.supply import plan_supply
from estimator.properties import AGENTS, GASES
from estimator.simulation import batch
from estimator.simulation.engine import simulate

#: Batch against single-case engine (tests/test_batch.py): 1e-3 relative.
AGREEMENT = 1e-3
PHASES = [
    {"duration": "10 min", "oxygen": "2 L/min", "air": "2 L/min", "vaporizer": "3 %"},
    {"duration": "50 min", "oxygen": "0.6 L/min", "nitrous_oxide": "0.4 L/min", "vaporizer": "2.5 %"},
]
SCENARIO_TOML = """
[patient]
weight = "70 kg"
age = "40 years"
[agent]
name = "sevoflurane"
[[phases]]
duration = "10 min"
oxygen = "2 L/min"
air = "2 L/min"
vaporizer = "3 %"
[[phases]]
duration = "50 min"
oxygen = "0.6 L/min"
nitrous_oxide = "0.4 L/min"
vaporizer = "2.5 %"
"""


@pytest.fixture(scope="module")
def case():
    return simulate(scenario("sevoflurane", PHASES))


def mag(q, unit):
    return float(q.to(unit).magnitude)


def test_case_co2e_is_mass_times_gwp_of_released_gas(case):
    # The definition (carbon.py module doc; Ryan and Nielsen 2010): released agent = delivered less
    # the metabolised agent the engine integrates; released N2O = all N2O delivered; x AR6 GWP100.
    t = case.totals
    sevo, n2o = AGENTS["sevoflurane"], GASES["nitrous_oxide"]
    vm = 8.314462618 * 288.15 / 101.325  # L/mol at 15 degC, 101.325 kPa
    delivered = mag(t["agent_liquid"], "mL") * mag(sevo.liquid_density, "g/mL")
    metabolised = mag(t["agent_metabolised"], "L") / vm * mag(sevo.molar_mass, "g/mol")
    n2o_g = mag(t["nitrous_oxide"], "L") / vm * mag(n2o.molar_mass, "g/mol")
    want = ((delivered - metabolised) * sevo.gwp["ar6_gwp100"] + n2o_g * n2o.gwp["ar6_gwp100"]) / 1000
    assert mag(t["co2e"], "kg") == pytest.approx(want, rel=1e-9)
    assert case_carbon(t, "sevoflurane").released_co2e.to("kg").magnitude == pytest.approx(want, rel=1e-9)


def test_absorbent_is_co2_over_the_one_capacity(case):
    # One capacity for every face: the scenario default, the supply planner's and the data file's.
    cap = mag(absorbent_capacity(), "L")
    assert mag(case.scenario.circuit.absorbent_capacity, "L") == cap
    assert mag(case.totals["absorbent"], "g") == pytest.approx(mag(case.totals["co2_absorbed"], "L") / cap * 100)


def test_batch_and_forecast_count_as_the_case(case, tmp_path):
    tpl = batch.case_template(case.scenario)
    tot = batch.run_batch(tpl, [70.0], [40.0], [60.0])
    t = case.totals
    # The same rule on the same numbers gives the same figure to rounding ...
    same = {k: mag(t[k], batch.TOTAL_UNITS[k]) for k in ("agent_liquid", "agent_metabolised", "nitrous_oxide")}
    assert float(totals_co2e(same, "sevoflurane")["co2e_kg"]) == pytest.approx(mag(t["co2e"], "kg"), rel=1e-12)
    # ... and the batch engine's totals give the case's CO2e and absorbent within the engines' agreement.
    assert case_co2e(tot, "sevoflurane", "ar6_gwp100")[0] == pytest.approx(mag(t["co2e"], "kg"), rel=AGREEMENT)
    assert tot["absorbent"][0] == pytest.approx(mag(t["absorbent"], "g"), rel=AGREEMENT)
    # The forecast, end to end: one fixed case a week of this scenario.
    (tmp_path / "case.toml").write_text(SCENARIO_TOML, encoding="utf-8")
    mix = tmp_path / "mix.toml"
    mix.write_text(
        'weeks = 1\nseed = 1\n[[case_types]]\nname = "one"\nper_week = 1\ncount = "fixed"\nscenario = "case.toml"\n',
        encoding="utf-8",
    )
    r = forecast(load_casemix(mix))
    assert r.weekly["co2e"][0] == pytest.approx(mag(t["co2e"], "kg"), rel=AGREEMENT)
    assert r.weekly["absorbent"][0] == pytest.approx(mag(t["absorbent"], "kg"), rel=AGREEMENT)


def test_supply_draws_the_case_absorbent(case):
    # One case on each of the 5 working days: the absorbent drawn is 5/7 of a case a day.
    inv = inventory_from_text(
        '[[demand.cases]]\nscenario = "x.toml"\nper_day = 1\n[absorbent]\nstock = "5 kg"\n'
        '[supply]\nignore = ["oxygen", "air", "nitrous_oxide", "sevoflurane"]\n'
    )
    r = plan_supply(inv, start="2026-03-02", runner=lambda _: case)
    item = next(i for i in r.items if i.kind == "absorbent")
    want = mag(case.totals["absorbent"], "g") * 5 / 7
    assert item.draw_per_day.to("g/day").magnitude == pytest.approx(want, rel=1e-9)


LOG = (
    "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent,patient_age,"
    "patient_weight\nC,0,3,3,0,sevoflurane,3,1.0,40,70\nC,10,3,3,0,sevoflurane,2.2,1.6,40,70\n"
    "C,40,0.6,0,0.4,sevoflurane,2.2,1.6,40,70\nC,70,0.6,0,0.4,sevoflurane,2.2,1.6,40,70\n"
)


def test_audit_counts_a_log_by_the_same_rule():
    # A log has no uptake: the same rule with the metabolised share taken of the delivered agent.
    r = audit(log_from_text(LOG))
    row = r.cases.iloc[0]
    delivered = row["agent_liquid_ml"] * mag(AGENTS["sevoflurane"].liquid_density, "g/mL")
    want = released_co2e("sevoflurane", delivered_g=delivered, nitrous_oxide_l=row["nitrous_oxide_l"])
    assert row["co2e_kg"] == pytest.approx(float(want["co2e_kg"]), rel=1e-12)


def test_policy_audit_counts_an_engine_case_as_the_case():
    # With an engine baseline both sides are engine runs, counted as the case counts itself.
    policy = parse_policy({"baseline": "engine", "fresh_gas_flow": "0.5 L/min", "block": "30 min"})
    result = audit(log_from_text(LOG))
    cf = counterfactual(result, policy)
    doc = case_scenarios(result, policy)[0][0]["recorded"]
    want = engine_runner(doc).totals["co2e"].to("kg").magnitude
    assert cf["cases"][0]["baseline"]["co2e"]["magnitude"] == pytest.approx(want, rel=1e-12)
    assert scenario_from_dict(doc).circuit.absorbent_capacity == absorbent_capacity()


def test_audit_of_the_case_log_gives_the_case_amounts():
    # The same case replayed as a log (room at the 15 degC gas reference, so the log's litres are the
    # case's): the same agent and N2O delivered, and CO2e by the same rule with what a log knows (no
    # uptake: the metabolised share is taken of the delivered agent, so the audit is at most 3 % of
    # the sevoflurane part lower than the case, never higher).
    case = simulate(scenario("sevoflurane", PHASES, site={"temperature": "15 degC"}))
    t = case.totals
    log = (
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting\n"
        "C,0,2,2,0,sevoflurane,3\nC,10,0.6,0,0.4,sevoflurane,2.5\nC,60,0.6,0,0.4,sevoflurane,2.5\n"
    )
    row = audit(log_from_text(log)).cases.iloc[0]
    assert row["agent_liquid_ml"] == pytest.approx(mag(t["agent_liquid"], "mL"), rel=1e-9)
    assert row["nitrous_oxide_l"] == pytest.approx(mag(t["nitrous_oxide"], "L"), rel=1e-9)
    delivered = mag(t["agent_liquid"], "mL") * mag(AGENTS["sevoflurane"].liquid_density, "g/mL")
    want = released_co2e("sevoflurane", delivered_g=delivered, nitrous_oxide_l=mag(t["nitrous_oxide"], "L"))
    assert row["co2e_kg"] == pytest.approx(float(want["co2e_kg"]), rel=1e-9)
    assert row["co2e_kg"] <= mag(t["co2e"], "kg")
