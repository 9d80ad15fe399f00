"""The circuit model checked against published data, closed-form laws and derivations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from engine_helpers import at_times, run, scenario
from validation import record

from estimator.physics import circuit as c
from estimator.properties import agent
from estimator.simulation.engine import R_GAS, simulate

AGENTS = ("desflurane", "sevoflurane", "isoflurane", "halothane")


def fa_fi(result, name: str, times) -> np.ndarray:
    et = np.array(at_times(result, f"end_tidal_{name} [%]", times))
    fi = np.array(at_times(result, f"inspired_{name} [%]", times))
    return et / fi


@pytest.fixture(scope="module")
def wash_in():
    """High fresh-gas flow (10 L/min O2, as in the Yasuda studies' open-circuit delivery)."""
    out = {}
    for name, dial in (("desflurane", "3 %"), ("sevoflurane", "1 %"), ("isoflurane", "0.6 %"), ("halothane", "0.4 %")):
        r = run(name, [{"duration": "30 min", "oxygen": "10 L/min", "vaporizer": dial}])
        out[name] = fa_fi(r, "agent", (5, 10, 30))
    r = run(
        "sevoflurane", [{"duration": "30 min", "oxygen": "3.5 L/min", "nitrous_oxide": "6.5 L/min", "vaporizer": "0 %"}]
    )
    out["nitrous_oxide"] = fa_fi(r, "nitrous_oxide", (5, 10, 30))
    return out


@pytest.mark.validation
def test_wash_in_ranking_yasuda_1991(wash_in):
    # Yasuda N et al., Anesth Analg 1991;72:316 and Anesthesiology 1991;74:489: FA/FI rises in the
    # order N2O >= desflurane > sevoflurane > isoflurane > halothane at every time. Ranking only; no
    # tolerance needed.
    names = ("nitrous_oxide", "desflurane", "sevoflurane", "isoflurane", "halothane")
    ranked = all(
        all(a >= b for a, b in zip(s, s[1:], strict=False)) for s in ([wash_in[n][i] for n in names] for i in range(3))
    )
    record(
        "wash-in FA/FI ranking at 5, 10, 30 min",
        "N2O >= des > sevo > iso > halo" if ranked else "other order",
        "N2O >= des > sevo > iso > halo",
        "Yasuda et al., Anesth Analg 1991;72:316",
        "ranking only",
        ranked,
    )
    for i in range(3):
        seq = [wash_in[n][i] for n in ("nitrous_oxide", "desflurane", "sevoflurane", "isoflurane", "halothane")]
        assert all(a >= b for a, b in zip(seq, seq[1:], strict=False)), seq


def test_wash_in_values_near_yasuda_1991():
    # Yasuda N et al., Anesthesiology 1991;74:489 (abstract): 8 volunteers, 65-70 % N2O throughout, FI
    # 2.0 % desflurane, 0.4 % isoflurane, 0.2 % halothane for 30 min; FA/FI at 30 min 0.90 +- 0.01,
    # 0.73 +- 0.03, 0.58 +- 0.04 (mean +- SD). These are the data the intertissue diffusion clearance
    # is fitted to (estimator/data/agents.toml, intertissue_rate), so this is a consistency check of
    # the fit, not validation. Tolerance 0.08 absolute as before the fit (tissue/blood values spread
    # 10-15 % between sources); the fit leaves desflurane 3 SD high (model 0.933), which the structure
    # cannot reach.
    published = {"desflurane": (0.90, "2.0 %"), "isoflurane": (0.73, "0.4 %"), "halothane": (0.58, "0.2 %")}
    gases = {"oxygen": "3.5 L/min", "nitrous_oxide": "6.5 L/min"}
    for name, (value, dial) in published.items():
        r = run(
            name,
            [{"duration": "30 min", **gases, "vaporizer": dial}],
            patient={"weight": "70 kg", "age": "25 years"},
            circuit={"inspiratory_fraction": 0.8},
        )
        got = fa_fi(r, "agent", (30,))[0]
        record(
            f"{name} FA/FI at 30 min, 65 % N2O (fit data of the intertissue clearance; consistency)",
            got,
            value,
            "Yasuda et al., Anesthesiology 1991;74:489, abstract",
            "abs 0.08",
            got == pytest.approx(value, abs=0.08),
        )
        assert got == pytest.approx(value, abs=0.08)


def test_wash_in_slows_as_vessel_rich_group_fills():
    # Yasuda 1991 figure caption: FA/FI rises steeply, then slows after 5-15 min as the vessel-rich
    # group (time constant about 3 min for sevoflurane) fills. The rise per minute after 15 min is less
    # than a fifth of that over the first 5 min (the early rise is the lung wash-in, the late one the
    # slow muscle and fat groups).
    r = run("sevoflurane", [{"duration": "30 min", "oxygen": "10 L/min", "vaporizer": "1 %"}])
    f1, f5, f15, f30 = fa_fi(r, "agent", (1, 5, 15, 30))
    assert (f30 - f15) / 15 < 0.2 * (f5 - f1) / 4


#: Published terms of Lowe's law, written here so that the check does not read the model's data file.
#: Blood/gas partition coefficients and MAC (30-55 years): Miller's Anesthesia, chapter "Inhaled
#: anesthetics", Table 1 (secondary, read); f = 1.3 and Q = 2 kg^0.75 dL/min: Lowe HJ, Ernst EA. The
#: Quantitative Practice of Anesthesia: Use of Closed Circuit. Williams & Wilkins 1981 (from memory).
LOWE_PUBLISHED = {"sevoflurane": (1.85, 0.65), "isoflurane": (1.15, 1.46), "desflurane": (6.0, 0.45)}
LOWE_F = 1.3
#: Between-patient coefficient of variation of measured closed-circuit agent requirement: isoflurane
#: 5.85 +- 1.32 mL in the first hour, n = 20 (tests/data/published/studies.toml, iso_closed_circuit);
#: the band is +-2 CV, the spread within which a patient of that study lies.
CLOSED_CIRCUIT_CV = 1.32 / 5.85


@pytest.mark.validation
@pytest.mark.parametrize(
    "name",
    [
        pytest.param(
            "sevoflurane",
            marks=pytest.mark.xfail(
                strict=True, reason="known gap, issue 15 open: sevoflurane uptake 10-90 min about 1.5 x Lowe's"
            ),
        ),
        "isoflurane",
        "desflurane",
    ],
)
def test_uptake_follows_lowe_square_root_of_time(name):
    # Lowe HJ, Ernst EA 1981: uptake rate = f MAC lambda_b/g Q t^-1/2 (mL/min; MAC in vol %, Q in
    # dL/min) with the alveolar concentration held at f x MAC, so the cumulative uptake between 10
    # and 90 min is 2 f MAC lambda Q (sqrt 90 - sqrt 10). The engine holds the same end-tidal
    # concentration (f x published MAC as a percentage, so its own MAC table does not enter). Band
    # +-2 CV of the measured closed-circuit requirement between patients (about +-45 %).
    mac, lam = LOWE_PUBLISHED[name]
    target = LOWE_F * mac
    r = run(name, [{"duration": "90 min", "oxygen": "2 L/min", "air": "2 L/min", "end_tidal_target": f"{target} %"}])
    t = r.series["time [min]"].to_numpy()
    u = r.series["agent_uptake [mL/min]"].to_numpy()
    sel = t >= 10
    model = np.trapezoid(u[sel], t[sel])
    q_dl = 2.0 * 70**0.75
    lowe = 2 * target * lam * q_dl * (math.sqrt(90) - math.sqrt(10))
    band = 2 * CLOSED_CIRCUIT_CV
    ok = model == pytest.approx(lowe, rel=band)
    record(
        f"{name} uptake 10-90 min at an end-tidal {target:.3g} % (f x MAC), 70 kg (engine vs Lowe)",
        model,
        lowe,
        "Lowe & Ernst 1981 (square-root law; f, Q from memory); MAC, blood/gas: Miller's Anesthesia, "
        "Inhaled anesthetics, Table 1 [S]",
        f"rel {band:.0%} (2 x CV {CLOSED_CIRCUIT_CV:.1%} of closed-circuit requirement, n = 20)",
        ok,
        "mL vapour",
    )
    assert ok, (model, lowe)


@pytest.mark.validation
def test_nitrous_oxide_uptake_severinghaus():
    # Severinghaus JW, J Clin Invest 1954;33:1183: N2O uptake about 1000 t^-1/2 mL/min for a 70 kg
    # adult at 65-75 % inspired (confirmed by Bengtson et al., Anaesthesia 1994). Band +-20 %: the
    # published curve is an average fit over patients; ours is at 15 degC rather than STPD (+5 %).
    r = run(
        "sevoflurane", [{"duration": "60 min", "oxygen": "3.5 L/min", "nitrous_oxide": "6.5 L/min", "vaporizer": "0 %"}]
    )
    for t, rate in zip((10, 20, 30, 60), at_times(r, "nitrous_oxide_uptake [mL/min]", (10, 20, 30, 60)), strict=True):
        record(
            f"N2O uptake rate at {t} min, 65 % inspired (engine)",
            rate,
            1000 / math.sqrt(t),
            "Severinghaus 1954; Bengtson et al. 1994",
            "rel 20 %",
            rate == pytest.approx(1000 / math.sqrt(t), rel=0.20),
            "mL/min",
        )
        assert rate == pytest.approx(1000 / math.sqrt(t), rel=0.20), t


@pytest.mark.parametrize(
    "name,dial,flow", [("sevoflurane", 0.02, 2.0), ("isoflurane", 0.012, 1.0), ("desflurane", 0.06, 3.0)]
)
def test_fixed_dial_liquid_matches_dion(name, dial, flow):
    # Dion P, Can J Anaesth 1992;39:633: liquid mL = C% x FGF x t x MW / (2412 x density), 2412 = 100 x
    # 24.12 L/mol (about 21 degC). With the vaporizer output carrier x D/(1-D), C% x FGF becomes
    # 100 D/(1-D) x carrier flow. Within 1 % (the molar volume at the model's 20 degC flowmeter
    # conditions, 24.06 L/mol, differs from Dion's 24.12 by 0.3 %).
    r = run(
        name,
        [{"duration": "60 min", "oxygen": f"{flow} L/min", "vaporizer": f"{100 * dial} %"}],
        site={"temperature": "20 degC"},
    )
    a = agent(name)
    dion = (
        100
        * dial
        / (1 - dial)
        * flow
        * 60
        * a.molar_mass.to("g/mol").magnitude
        / (2412 * a.liquid_density.to("g/mL").magnitude)
    )
    liquid = r.totals["agent_liquid"].to("mL").magnitude
    record(
        f"{name} liquid at {100 * dial:g} % dial, {flow:g} L/min for 60 min (engine)",
        liquid,
        dion,
        "Dion, Can J Anaesth 1992;39:633",
        "rel 1 %",
        liquid == pytest.approx(dion, rel=0.01),
        "mL",
    )
    assert r.totals["agent_liquid"].to("mL").magnitude == pytest.approx(dion, rel=0.01)


def test_non_absorbing_test_lung_washes_in_with_volume_over_flow():
    # A test lung that takes nothing up: the circuit plus lung washes in as 1 - exp(-t FGF / V), the
    # well-mixed-tank law (common practice, no source; derivable from a mass balance). We switch off
    # blood flow and metabolism in the parameter vector and compare the fitted time constant with
    # V / FGF within 2 % (the lung mixes with the circuit at 6 L/min, not instantly).
    from estimator.simulation import engine

    sc = scenario(
        "sevoflurane",
        [{"duration": "20 min", "oxygen": "1 L/min", "vaporizer": "2 %"}],
        circuit={"volume": "4 L", "sample_flow": "0 L/min"},
    )
    patient = engine.patient_from_scenario(sc)
    site = engine.site_state(sc)
    base = engine.base_parameters(sc, patient, site)
    base[c.P_Q] = 0.0
    base[c.P_VO2] = 0.0
    base[c.P_VCO2] = 0.0
    p = engine.phase_parameters(base, sc, sc.phases[0], site)
    y0 = engine.initial_state(sc, base, site)
    y0[c.Y_FA : c.Y_FA + c.NS] = y0[c.Y_FC : c.Y_FC + c.NS]
    times = np.linspace(0, 20, 41)
    ys, stats, _ = engine.integrate_phase(y0, p, times, 1e-9, engine.absolute_tolerance(), 0.0, 10**6)
    assert stats[0] > 0
    amount = base[c.P_NC] * ys[:, c.Y_FC + c.AGENT] + base[c.P_NL] * ys[:, c.Y_FA + c.AGENT]
    total = base[c.P_NC] + base[c.P_NL]
    d = 0.02
    fgf = p[c.P_CARRIER : c.P_CARRIER + c.NS].sum() / (1 - d)
    frac = amount / total / d
    sel = (times > 4) & (frac < 0.995)
    slope = np.polyfit(times[sel], np.log(1 - frac[sel]), 1)[0]
    record(
        "wash-in time constant of a non-absorbing test lung",
        -1 / slope,
        total / fgf,
        "well-mixed tank law V/FGF (common practice, no source)",
        "rel 2 %",
        -1 / slope == pytest.approx(total / fgf, rel=0.02),
        "min",
    )
    assert -1 / slope == pytest.approx(total / fgf, rel=0.02)


def test_steady_state_inspired_oxygen_matches_derived_balance():
    # Derived here, not published. At steady state with no agent, no leak and the sample returned:
    # N2 (with argon) in = N2 out in the exhaust and O2 in = VO2 + O2 out, so the exhaust, which is mixed
    # expired gas, has FE_O2 / FE_N2 = r = (FGF F_O2 - VO2) / (FGF F_N2). The lung balance with no
    # net N2 uptake gives VI FE_O2 = ... = VI FI_O2 - VO2 and VI FE_N2 = VI FI_N2 (per unit expired
    # flow), and FI_CO2 = 0 behind a fresh absorber, so FI_O2 = (r VI + VO2) / (VI (1 + r)).
    # After 24 h the body N2 stores are within 1 % of equilibrium (fat time constant about 4 h):
    # tolerance 0.5 % of the fraction.
    r = run(
        "sevoflurane",
        [{"duration": "1440 min", "oxygen": "0.5 L/min", "air": "0.5 L/min", "vaporizer": "0 %"}],
        output={"interval": "10 min"},
    )
    amb = 101.325 / (R_GAS * 293.15) * 1000
    vo2 = r.patient.oxygen_consumption.to("mL/min").magnitude / (R_GAS * 273.15 / 101.325)
    o2_in = 0.5 * amb + 0.5 * amb * 0.20946
    n2_in = 0.5 * amb * (1 - 0.20946)
    ratio = (o2_in - vo2) / n2_in
    from estimator.simulation.engine import P_H2O_BODY, T_BODY

    ca = (101.325 - P_H2O_BODY) / (R_GAS * T_BODY) * 1000
    vi = r.patient.minute_ventilation.to("L/min").magnitude * ca
    fio2 = (ratio * vi + vo2) / (vi * (1 + ratio))
    got = r.series["inspired_oxygen [%]"].iloc[-1] / 100
    record(
        "steady-state FiO2 at 0.5 L/min O2 + 0.5 L/min air, 24 h",
        got,
        fio2,
        "derived O2/N2 balance (derived here)",
        "rel 0.5 %",
        got == pytest.approx(fio2, rel=0.005),
    )
    assert r.series["inspired_oxygen [%]"].iloc[-1] / 100 == pytest.approx(fio2, rel=0.005)


def test_end_tidal_hold_reaches_and_holds_target():
    # Fact of the trade (common practice, no source): a target-controlled end-tidal hold reaches 1 MAC
    # within minutes at high flow and then holds it. The hold law is ours; we check the outcome:
    # within 2 % of target from the reported time to the end, and MAC-hours close to 1 per hour.
    r = run(
        "sevoflurane",
        [
            {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1 MAC"},
            {"duration": "110 min", "oxygen": "0.3 L/min", "air": "0.2 L/min", "end_tidal_target": "1 MAC"},
        ],
    )
    reached = r.phases[0]["target_reached"].to("min").magnitude
    assert reached < 10
    s = r.series
    later = s[s["time [min]"] >= reached]
    assert later["end_tidal_mac [MAC]"].between(0.98, 1.03).all()
    assert r.totals["mac_hours"].to("MAC_hour").magnitude == pytest.approx(120 / 60, rel=0.06)
    assert not [w for w in r.warnings if w[0].startswith("TARGET")]


def test_mac_target_counts_nitrous_oxide():
    # Nickalls and Mapleson 2003: MAC fractions add. With about 60 % end-tidal N2O (0.58 MAC at 40 years)
    # a 1 MAC total target asks for only about 0.42 MAC of sevoflurane.
    r = run(
        "sevoflurane",
        [{"duration": "60 min", "oxygen": "2 L/min", "nitrous_oxide": "4 L/min", "end_tidal_target": "1 MAC"}],
    )
    last = r.series.iloc[-1]
    n2o_mac = last["end_tidal_nitrous_oxide [%]"] / 104
    agent_mac = last["end_tidal_agent [%]"] / 1.80
    record(
        "end-tidal hold of 1 MAC with N2O: sum of MAC fractions",
        n2o_mac + agent_mac,
        1.0,
        "Nickalls & Mapleson 2003 (additivity)",
        "abs 0.02",
        n2o_mac + agent_mac == pytest.approx(1.0, abs=0.02),
        "MAC",
    )
    assert n2o_mac + agent_mac == pytest.approx(1.0, abs=0.02)
    assert agent_mac < 0.5


def test_unreachable_target_is_reported():
    # 2 MAC isoflurane through a 5 % vaporizer at 0.3 L/min cannot be reached in 20 min.
    r = run("isoflurane", [{"duration": "20 min", "oxygen": "0.3 L/min", "end_tidal_target": "2 MAC"}])
    assert "TARGET_NOT_REACHED" in [w[0] for w in r.warnings]


def test_volume_deficit_is_flagged_and_counted():
    # Fresh gas (0.15 L/min) below O2 uptake plus leak: the bag empties. The model must flag it and count
    # the make-up gas in the totals, never hide it.
    r = run(
        "sevoflurane",
        [{"duration": "30 min", "oxygen": "0.15 L/min", "vaporizer": "2 %"}],
        circuit={"leak": "0.1 L/min"},
    )
    codes = [w[0] for w in r.warnings]
    assert "VOLUME_DEFICIT" in codes
    assert r.totals["volume_deficit"].to("L").magnitude > 1.0
    assert max(r.mass_balance().values()) < 1e-6


def test_reference_solve_agrees_to_1e6():
    # Numerical check against scipy's DOP853 at rtol 1e-12 on the same right-hand side (scipy is the
    # reference library; the series and totals must agree within 1e-6 relative).
    from estimator.simulation import engine

    sc = scenario(
        "sevoflurane",
        [
            {"duration": "10 min", "oxygen": "6 L/min", "end_tidal_target": "1 MAC"},
            {"duration": "50 min", "oxygen": "0.5 L/min", "end_tidal_target": "1 MAC"},
        ],
    )
    ours = simulate(sc)
    derived, ref_y = engine.reference_solve(sc, method="DOP853", rtol=1e-12, atol=1e-14)
    ref_et = derived[:, c.W_FET + c.AGENT] * 100
    np.testing.assert_allclose(ours.series["end_tidal_agent [%]"].to_numpy(), ref_et, rtol=1e-6, atol=1e-9)
    agent_ref = ref_y[c.Y_FGIN + c.AGENT]
    from estimator.simulation.results import litres_per_mmol

    vap = ours.totals["agent_vapour"].to("L").magnitude
    record(
        "agent vapour of a 60 min case, engine vs scipy DOP853 (rtol 1e-12)",
        vap,
        agent_ref * litres_per_mmol(),
        "scipy.integrate.solve_ivp DOP853",
        "rel 1e-6",
        vap == pytest.approx(agent_ref * litres_per_mmol(), rel=1e-6),
        "L",
    )
    assert ours.totals["agent_vapour"].to("L").magnitude == pytest.approx(agent_ref * litres_per_mmol(), rel=1e-6)
