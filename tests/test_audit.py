"""Fresh-gas audit checked against independent integration (numpy/scipy), the ideal-gas law with
CODATA constants, Mapleson's age-MAC formula, the published flow classes, and the rejection rules."""

import dataclasses
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.constants
from scipy.integrate import trapezoid

from estimator.accounts.costs import DEMO_PRICES
from estimator.errors import InputError
from estimator.inputs.audit_log import log_from_text
from estimator.planning.audit import age_mac, flow_class
from estimator.planning.audit import audit as audit_of
from estimator.planning.audit_policy import counterfactual, parse_policy, policy_flows
from estimator.units import Q_

DATA = Path(__file__).parent / "data"
HEADER = "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting"
# Ideal-gas molar volume at the package reference (15 degC, 101.325 kPa), CODATA R via scipy.
VM = scipy.constants.R * 288.15 / 101325.0 * 1000.0
SEVO = {"molar_mass": 200.05, "density": 1.52}  # CRC; Biro 2014 (agents.toml)


def audit(source, **kw):
    """The audit of a log file (a Path) or of CSV text (a str in these tests is always CSV text)."""
    return audit_of(log_from_text(source) if isinstance(source, str) else source, **kw)


def _synthetic(rng: np.random.Generator, n_cases: int = 4) -> tuple[pd.DataFrame, dict]:
    """An invented log with irregular sampling; returns the frame and per-case sample arrays."""
    rows, truth = [], {}
    for k in range(n_cases):
        t = np.sort(np.concatenate([[0.0], rng.uniform(0, 120, 40)]))
        o2 = rng.uniform(0.2, 3.0, t.size).round(3)
        air = rng.uniform(0.0, 3.0, t.size).round(3)
        d = rng.uniform(0.0, 0.04, t.size).round(4)
        truth[f"S{k}"] = (t, o2, air, d)
        for i in range(t.size):
            rows.append((f"S{k}", t[i], o2[i], air[i], 0.0, "sevoflurane", d[i] * 100))
    return pd.DataFrame(rows, columns=HEADER.split(",")), truth


@pytest.mark.parametrize("rule", ["hold", "trapezoid"])
def test_totals_match_independent_integration(tmp_path, rule):
    # Trapezoid: scipy.integrate.trapezoid of the sampled flow. Hold (left rectangle): sum of each
    # sample times the interval after it, by numpy. Agent: carrier x D/(1-D), then ideal-gas moles
    # (CODATA R), molar mass and density. Tolerance 1e-9: the same arithmetic in another order.
    df, truth = _synthetic(np.random.default_rng(11))
    path = tmp_path / "log.csv"
    df.to_csv(path, index=False)
    r = audit(path, quadrature=rule)
    assert r.rows == {"read": len(df), "used": len(df), "rejected": 0}
    for case_id, (t, o2, air, d) in truth.items():
        vap = (o2 + air) * d / (1 - d)
        if rule == "trapezoid":
            o2_l, vap_l = trapezoid(o2, t), trapezoid(vap, t)
        else:
            o2_l, vap_l = np.sum(o2[:-1] * np.diff(t)), np.sum(vap[:-1] * np.diff(t))
        row = r.cases.set_index("case_id").loc[case_id]
        assert row["oxygen_l"] == pytest.approx(o2_l, rel=1e-9)
        assert row["agent_vapour_l"] == pytest.approx(vap_l, rel=1e-9)
        liquid = vap_l / VM * SEVO["molar_mass"] / SEVO["density"]
        assert row["agent_liquid_ml"] == pytest.approx(liquid, rel=1e-9)
    assert r.totals["oxygen_l"] == pytest.approx(r.cases["oxygen_l"].sum(), rel=1e-12)


def test_constant_dial_matches_dion_formula_with_vaporizer_output():
    # Dion 1992: liquid = C x FGF x t x MW / (Vm x 100 x density); with the vaporizer output
    # carrier x D/(1-D) and Vm at 15 degC. 2 % sevoflurane, 1 L/min carrier, 60 min.
    text = f"{HEADER}\nA,0,1,0,0,sevoflurane,2\nA,60,1,0,0,sevoflurane,2\n"
    r = audit(text)
    dion = 0.02 / 0.98 * 1.0 * 60 / VM * 200.05 / 1.52
    assert r.cases["agent_liquid_ml"].iloc[0] == pytest.approx(dion, rel=1e-9)


def test_header_units_are_honoured():
    # mL/min and seconds give the same totals as L/min and minutes (SI definitions).
    a = audit(f"{HEADER}\nA,0,1,0.5,0,isoflurane,1\nA,30,1,0.5,0,isoflurane,1\n")
    b = audit(
        "case_id,time [s],oxygen_flow [mL/min],air_flow [mL/min],nitrous_oxide_flow,agent,"
        "vaporizer_setting [1]\nA,0,1000,500,0,isoflurane,0.01\nA,1800,1000,500,0,isoflurane,0.01\n"
    )
    for c in ("oxygen_l", "air_l", "agent_liquid_ml", "duration_min"):
        assert a.cases[c].iloc[0] == pytest.approx(b.cases[c].iloc[0], rel=1e-12)


@pytest.mark.parametrize(
    "header,column",
    [
        ("case_id,time,oxygen_flow,air_flow,agent,vaporizer_setting", "nitrous_oxide_flow"),
        ("case_id,time,oxygen_flow [L/min],air_flow [L],nitrous_oxide_flow,agent,vaporizer_setting", "air_flow"),
        (
            "case_id,time,oxygen_flow [blorps per minute],air_flow,nitrous_oxide_flow,agent,vaporizer_setting",
            "oxygen_flow",
        ),
        ("case_id,time,oxygen_flow,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting", "oxygen_flow"),
        ("case_id [mL],time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting", "case_id"),
    ],
)
def test_file_level_errors_name_the_column(header, column):
    with pytest.raises(InputError) as err:
        audit(header + "\nA,0,1,1,0,sevoflurane,2\n")
    assert f"'{column}'" in str(err.value)


def test_malformed_rows_are_reported_with_line_and_reason():
    r = audit(DATA / "audit_malformed.csv")
    lines = dict(r.rejections)
    assert r.rows["read"] == r.rows["used"] + r.rows["rejected"] == 11
    assert r.rows["used"] == 2
    assert "time" in lines[3] and "yesterday" in lines[3]
    assert "oxygen_flow" in lines[4] and "-0.5" in lines[4]
    assert "agent" in lines[5] and "xenonflurane" in lines[5]
    assert "maximum dial 8 %" in lines[6]  # sevoflurane dial range (common practice)
    assert "air_flow" in lines[7] and "abc" in lines[7]
    assert "case_id: empty" in lines[8]
    assert "fields where the header has" in lines[9]
    assert lines[10] == "empty line"
    assert "agent: empty while vaporizer_setting" in lines[11]


def test_mixed_time_kinds_in_one_case_are_rejected():
    r = audit(
        f"{HEADER}\nA,0,1,1,0,sevoflurane,2\nA,2025-01-01T10:00:00,1,1,0,sevoflurane,2\nA,5,1,1,0,sevoflurane,2\n"
    )
    assert [line for line, _ in r.rejections] == [3]
    assert "mixes" in r.rejections[0][1]


def test_out_of_order_samples_are_sorted_and_warned():
    r = audit(f"{HEADER}\nA,10,1,1,0,sevoflurane,2\nA,0,2,2,0,sevoflurane,2\nA,20,1,1,0,sevoflurane,2\n")
    assert r.cases["oxygen_l"].iloc[0] == pytest.approx(2 * 10 + 1 * 10)
    assert any(code == "TIME_NOT_ORDERED" for code, _ in r.warnings)


def test_timestamps_rooms_and_months():
    r = audit(DATA / "audit_two_rooms.csv")
    assert sorted(r.rooms["room"]) == ["Theatre Alder", "Theatre Birch"]
    assert sorted(r.months["month"]) == ["2025-02", "2025-03"]
    k101 = r.cases.set_index("case_id").loc["K-101"]
    assert k101["duration_min"] == pytest.approx(90.0)
    assert k101["start"] == "2025-02-03T07:00:00+00:00"  # offset converted to UTC
    assert any(code == "LONG_SAMPLE_GAP" for code, _ in r.warnings)


@pytest.mark.parametrize(
    "flow,name",
    [
        (0.25, "metabolic"),
        (0.26, "minimal"),
        (0.5, "minimal"),
        (1.0, "low"),
        (1.5, "medium"),
        (2.0, "medium"),
        (4.0, "high"),
        (4.01, "very high"),
    ],
)
def test_flow_classes_brattwall_2012(flow, name):
    # Brattwall M et al., Can J Anesth 2012;59:785: metabolic <= 0.25, minimal 0.25-0.5, low 0.5-1,
    # medium 1-2, high 2-4, very high > 4 L/min (upper bounds inclusive, as Baum and Aitkenhead 1995
    # name 1.0 L/min low flow and 0.5 L/min minimal flow).
    assert flow_class(flow) == name


def test_maintenance_kpis():
    # 10 min wash-in at 6 L/min, then 50 min at 0.5 L/min: maintenance mean 0.5 L/min, all of it at
    # or below 0.5 and 1 L/min, class minimal (Baum and Aitkenhead 1995).
    r = audit(f"{HEADER}\nA,0,3,3,0,sevoflurane,3\nA,10,0.3,0.2,0,sevoflurane,2.5\nA,60,0.3,0.2,0,sevoflurane,0\n")
    k = r.kpis
    assert k["mean_maintenance_flow_l_min"] == pytest.approx(0.5)
    assert k["maintenance_share_le_0_5"] == pytest.approx(1.0) and k["maintenance_share_le_1"] == pytest.approx(1.0)
    assert k["flow_class_shares"]["minimal"] == pytest.approx(1.0)
    assert r.cases["flow_class"].iloc[0] == "minimal"
    r20 = audit(
        f"{HEADER}\nA,0,3,3,0,sevoflurane,3\nA,10,0.3,0.2,0,sevoflurane,2.5\nA,60,0.3,0.2,0,sevoflurane,0\n",
        maintenance_after="20 min",
    )
    assert r20.kpis["maintenance_time_min"] == pytest.approx(40.0)


def test_mac_hours_mapleson_1996():
    # Mapleson WW, Br J Anaesth 1996;76:179: MAC(age) = MAC40 x 10^(-0.00269 (age - 40)); sevoflurane
    # MAC40 1.80 %. At 70 years MAC = 1.80 x 10^(-0.0807) = 1.4948 %. Holding exactly that end-tidal
    # for 120 min is 2 MAC-hours; the hand value is exact to 1e-9.
    mac70 = 1.80 * 10 ** (-0.00269 * 30)
    assert float(age_mac("sevoflurane", 70)) * 100 == pytest.approx(mac70, rel=1e-12)
    text = (
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent,"
        f"patient_age\nA,0,1,1,0,sevoflurane,2,{mac70},70\nA,120,1,1,0,sevoflurane,2,{mac70},70\n"
    )
    r = audit(text)
    assert r.cases["mac_hours"].iloc[0] == pytest.approx(2.0, rel=1e-9)
    assert r.kpis["co2e_per_mac_hour_kg"] == pytest.approx(r.cases["co2e_kg"].iloc[0] / 2.0)


def test_mac_hours_missing_is_said():
    r = audit(f"{HEADER}\nA,0,1,1,0,sevoflurane,2\nA,60,1,1,0,sevoflurane,2\n")
    assert np.isnan(r.cases["mac_hours"].iloc[0])
    assert any(code == "MAC_HOURS_UNAVAILABLE" for code, _ in r.warnings)
    assert "end_tidal_agent" in r.cases["mac_hours_note"].iloc[0]


def test_costs_and_co2e_per_case():
    r = audit(DATA / "audit_two_rooms.csv", prices=DEMO_PRICES, basis="ar6_gwp20")
    k102 = r.cases.set_index("case_id").loc["K-102"]
    # CO2e = delivered mass x (1 - 0.0002 metabolised, agents.toml) x AR6 GWP20 7020 (IPCC AR6 Table 7.SM.7).
    grams = k102["agent_liquid_ml"] * 1.465
    assert k102["co2e_kg"] == pytest.approx(grams * (1 - 0.0002) * 7020 / 1000, rel=1e-9)
    assert k102["cost_agent"] == pytest.approx(k102["agent_liquid_ml"] * 0.55, rel=1e-12)
    assert r.totals["cost_total"] == pytest.approx(r.cases["cost_total"].sum())


def _stand_in(doc):
    """A stand-in for the engine: delivered vapour of each phase by closed form, at the dial that
    holds end-tidal = target with inspired = end-tidal (no uptake): vapour = carrier x D/(1-D)."""
    liquid = gases = 0.0
    for ph in doc["phases"]:
        minutes = float(ph["duration"].split()[0])
        flows = sum(float(ph.get(g, "0 L/min").split()[0]) for g in ("oxygen", "air", "nitrous_oxide"))
        d = float((ph.get("vaporizer") or ph.get("end_tidal_target")).split()[0]) / 100
        liquid += flows * d / (1 - d) * minutes / VM * 200.05 / 1.52
        gases += flows * minutes

    @dataclasses.dataclass
    class Result:
        totals: dict
        warnings: list

    return Result({"agent_liquid": Q_(liquid, "mL"), "oxygen": Q_(gases, "L")}, [("STAND_IN", "test stand-in")])


def test_counterfactual_savings_arithmetic_with_stand_in():
    text = (
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent\n"
        "A,0,2,2,0,sevoflurane,2,2\nA,10,2,2,0,sevoflurane,2,2\nA,70,2,2,0,sevoflurane,2,2\n"
        "B,0,1,1,0,sevoflurane,2,\nB,30,1,1,0,sevoflurane,2,\n"
    )
    r = audit(text, prices=DEMO_PRICES)
    policy = parse_policy({"policy": {"fresh_gas_flow": "0.5 L/min", "baseline": "engine"}})
    cf = counterfactual(r, policy, prices=DEMO_PRICES, runner=_stand_in)
    assert [s["case_id"] for s in cf["skipped"]] == ["B"]  # no end-tidal: said, not dropped
    case = cf["cases"][0]
    # Maintenance 60 min at 0.5 instead of 4 L/min; wash-in the same: saving = 3.5 x 60 L x 2/98 as vapour.
    saved_vapour = 3.5 * 60 * 0.02 / 0.98
    assert case["savings"]["agent_liquid"]["magnitude"] == pytest.approx(saved_vapour / VM * 200.05 / 1.52, rel=1e-9)
    assert case["savings"]["cost"]["total"] == pytest.approx(
        case["baseline"]["cost"]["total"] - case["policy"]["cost"]["total"]
    )
    assert cf["totals"]["savings"]["co2e"]["basis"] == "ar6_gwp100"
    assert any(w["code"] == "STAND_IN" for w in case["warnings"])
    few = counterfactual(audit(DATA / "audit_two_rooms.csv"), parse_policy({"max_cases": 1}), runner=_stand_in)
    assert few["totals"]["cases"] == 1 and "max_cases" in few["skipped"][0]["reason"]


def test_policy_flows_keep_oxygen_share():
    p = parse_policy({"fresh_gas_flow": "1 L/min", "minimum_oxygen_share": "50 %"})
    o2, air, n2o = policy_flows(1.0, 0.0, 3.0, p)
    assert o2 + air + n2o == pytest.approx(1.0) and o2 == pytest.approx(0.5)
    assert policy_flows(0.3, 0.2, 0.0, p) == (0.3, 0.2, 0.0)  # a lower recorded flow is kept
    with pytest.raises(InputError):
        parse_policy({"fresh_gas_flow": "0.5 L/min", "colour": "green"})


def test_counterfactual_through_the_engine():
    # The real engine (end-tidal hold): lowering maintenance flow from 6 to 0.5 L/min at the same
    # end-tidal must save agent (uptake is the same, less is vented: Baum and Aitkenhead 1995).
    text = (
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent,patient_age,"
        "patient_weight\nE,0,3,3,0,sevoflurane,3,1.0,50,75\nE,10,3,3,0,sevoflurane,2.2,1.6,50,75\n"
        "E,40,3,3,0,sevoflurane,2.2,1.6,50,75\n"
    )
    r = audit(text)
    cf = counterfactual(r, parse_policy({"fresh_gas_flow": "0.5 L/min", "block": "30 min"}))
    assert cf["totals"]["cases"] == 1
    saving = cf["totals"]["savings"]["agent_liquid"]["magnitude"]
    assert 0 < saving < r.cases["agent_liquid_ml"].iloc[0]


def test_all_rows_rejected_is_a_report_not_a_crash():
    r = audit(f"{HEADER}\nA,x,1,1,0,sevoflurane,2\nB,0,-1,1,0,sevoflurane,2\n")
    assert r.rows == {"read": 2, "used": 0, "rejected": 2}
    assert len(r.cases) == 0 and r.totals["cases"] == 0
    assert any(code == "NO_ROWS_USED" for code, _ in r.warnings)
    assert r.to_json()["rejections"][0]["line"] == 2


def test_nitrous_oxide_only_case():
    # No volatile: agent empty with dial 0 is valid; N2O CO2e = ideal-gas mass x AR6 GWP100 273.
    r = audit(f"{HEADER}\nA,0,1,0,3,,0\nA,60,1,0,3,,0\n")
    expected = 180.0 / VM * 44.013 / 1000 * 273
    assert r.cases["co2e_kg"].iloc[0] == pytest.approx(expected, rel=1e-4)
    assert r.cases["agent_liquid_ml"].iloc[0] == 0.0


def test_counterfactual_reports_progress_for_every_case():
    # Every case is re-run by default; progress(done, total) runs from 0 to the number re-run.
    calls = []
    r = audit(DATA / "audit_two_rooms.csv")
    cf = counterfactual(r, parse_policy({}), runner=_stand_in, progress=lambda d, t: calls.append((d, t)))
    n = cf["totals"]["cases"]
    assert n >= 2 and calls[0] == (0, n) and calls[-1] == (n, n)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)


def test_cli_progress_is_silent_when_piped(capsys):
    # A progress line is drawn only on a terminal: captured or piped stderr stays empty.
    from estimator.cli.outputs import terminal_progress

    show = terminal_progress("re-running")
    show(0, 3)
    show(3, 3)
    assert capsys.readouterr().err == ""


def test_audit_results_in_the_package_unit_convention():
    # Issue 18: results leave the API as pint Quantities (scalars) or tables with "name [unit]" columns,
    # as a case result does; the suffixed attributes and the JSON keys stay as they were (added, not renamed).
    from estimator.planning.audit import audit

    r = audit(DATA / "audit_two_rooms.csv")
    cases = r.table("cases")
    assert "co2e [kg]" in cases and "mean_maintenance_flow [L/min]" in cases and "co2e_kg" in r.cases
    assert (cases["co2e [kg]"].to_numpy() == r.cases["co2e_kg"].to_numpy()).all()
    assert not [c for c in r.table("rooms").columns if c.endswith(("_kg", "_l", "_ml", "_l_min"))]
    q = r.total_quantities()
    doc = r.to_json()["totals"]
    assert q["co2e"].to("kg").magnitude == doc["co2e"]["magnitude"] == r.totals["co2e_kg"]
    assert q["agent_liquid"].to("mL").magnitude == pytest.approx(r.totals["agent_liquid_ml"])
    assert q["cases"] == r.totals["cases"] == 2
    with pytest.raises(ValueError, match="cases, rooms, months"):
        r.table("totals")


def test_counterfactual_keeps_each_agents_liquid_apart():
    # Issue 19: millilitres of sevoflurane and desflurane are two stocks; the totals give each agent's
    # baseline, policy and saving, and they add up to the (kept) all-agent total.
    text = (
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent\n"
        "A,0,2,2,0,sevoflurane,2,2\nA,10,2,2,0,sevoflurane,2,2\nA,70,2,2,0,sevoflurane,2,2\n"
        "D,0,2,2,0,desflurane,6,5\nD,10,2,2,0,desflurane,6,5\nD,70,2,2,0,desflurane,6,5\n"
    )
    cf = counterfactual(audit(text), parse_policy({"fresh_gas_flow": "0.5 L/min"}), runner=_stand_in)
    t = cf["totals"]
    for side in ("baseline", "policy", "savings"):
        per = t[side]["agent_liquid_by_agent"]
        assert set(per) == {"sevoflurane", "desflurane"}
        assert sum(q["magnitude"] for q in per.values()) == pytest.approx(t[side]["agent_liquid"]["magnitude"])
    case_a = next(c for c in cf["cases"] if c["case_id"] == "A")
    assert t["savings"]["agent_liquid_by_agent"]["sevoflurane"]["magnitude"] == pytest.approx(
        case_a["savings"]["agent_liquid"]["magnitude"]
    )
