"""Float-flowmeter true flow: gas properties against CoolProp, model limits against hand derivations."""

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from validation import record

from estimator.errors import InputError
from estimator.physics.flowmeter import FlowmeterGeometry, annulus_flow, true_flow
from estimator.physics.gas_mixtures import (
    chapman_enskog_viscosity,
    concentrator_composition,
    load_records,
    mixture_properties,
    pure_gas_properties,
    resolve_gas,
    wilke_viscosity,
)
from estimator.physics.site import site_from_inputs
from estimator.properties import DataError
from estimator.units import Q_

SEA = site_from_inputs()
HIGH = site_from_inputs(elevation="3000 m")


# ------------------------------------------------------------------ gas properties
@pytest.mark.parametrize(
    "name,fluid",
    [("oxygen", "Oxygen"), ("air", "Air"), ("nitrogen", "Nitrogen"), ("argon", "Argon"), ("helium", "Helium")],
)
@pytest.mark.parametrize("t,p", [(293.15, 101325.0), (303.15, 70121.0), (283.15, 54048.0)])
def test_pure_properties_are_coolprops(name, fluid, t, p):
    # CoolProp reference equations of state and viscosity models (Bell et al. 2014); the module
    # must pass them through unchanged, so the tolerance is round-off.
    import CoolProp.CoolProp as CP

    rho, mu, _ = pure_gas_properties(name, t, p)
    assert rho == pytest.approx(CP.PropsSI("D", "T", t, "P", p, fluid), rel=1e-12)
    assert mu == pytest.approx(CP.PropsSI("V", "T", t, "P", p, fluid), rel=1e-12)


@pytest.mark.validation
def test_chapman_enskog_against_coolprop_for_carbon_dioxide():
    # The method used for N2O, checked on its isoelectronic twin CO2 whose viscosity CoolProp has
    # (Laesecke & Muzny 2017 model). Lennard-Jones parameters of CO2: Svehla 1962 via Poling et al.
    # 2001 App. B, sigma 3.941 A, eps/k 195.2 K (from memory). Poling et al. report Chapman-Enskog
    # errors of 1-3 % for nonpolar gases; 2.5 % allowed.
    import CoolProp.CoolProp as CP

    for t in (283.15, 293.15, 313.15):
        ce = chapman_enskog_viscosity(t, 3.941, 195.2, 44.01)
        ref = CP.PropsSI("V", "T", t, "P", 101325, "CarbonDioxide")
        record(
            f"CO2 viscosity at {t:g} K by Chapman-Enskog",
            ce * 1e6,
            ref * 1e6,
            "CoolProp (Laesecke & Muzny 2017); Poling et al. 2001 error band",
            "rel 2.5 %",
            ce == pytest.approx(ref, rel=0.025),
            "uPa s",
        )
        assert ce == pytest.approx(CP.PropsSI("V", "T", t, "P", 101325, "CarbonDioxide"), rel=0.025)


@pytest.mark.validation
def test_nitrous_oxide_viscosity_against_handbook():
    # CRC Handbook, Viscosity of gases: N2O 15.0 uPa s at 300 K and 1 atm (from memory). 3 %:
    # the method's typical error plus the unverified memory of the table.
    _, mu, _ = pure_gas_properties("nitrous_oxide", 300.0, 101325.0)
    record(
        "N2O viscosity at 300 K, 1 atm",
        mu * 1e6,
        15.0,
        "CRC Handbook, viscosity of gases (from memory)",
        "rel 3 %",
        mu == pytest.approx(15.0e-6, rel=0.03),
        "uPa s",
    )
    assert mu == pytest.approx(15.0e-6, rel=0.03)


@pytest.mark.validation
def test_wilke_air_against_coolprop_air():
    # Wilke (1950) from the components of dry air (CRC composition) against CoolProp's air
    # (Lemmon & Jacobsen 2004). Poling et al. 2001 give Wilke errors below about 2 % for
    # nonpolar mixtures; 1.5 % allowed.
    import CoolProp.CoolProp as CP

    mix = resolve_gas({"air": 0.5, "nitrogen": 0.5})  # air in a mixture counts as N2, O2, Ar
    assert mix["argon"] == pytest.approx(0.5 * 0.00934, rel=1e-9)
    comps = {"nitrogen": 0.78084 + 0.00036, "oxygen": 0.20946, "argon": 0.00934}
    _, mu = mixture_properties(comps, 293.15, 101325.0)
    ref = CP.PropsSI("V", "T", 293.15, "P", 101325, "Air")
    record(
        "air viscosity at 20 degC by Wilke's rule from its components",
        mu * 1e6,
        ref * 1e6,
        "CoolProp air (Lemmon & Jacobsen 2004)",
        "rel 1.5 %",
        mu == pytest.approx(ref, rel=0.015),
        "uPa s",
    )
    assert mu == pytest.approx(CP.PropsSI("V", "T", 293.15, "P", 101325, "Air"), rel=0.015)


@pytest.mark.validation
def test_concentrator_density_and_viscosity_against_coolprop_mixture():
    # CoolProp's HEOS mixture (GERG-type mixing) for 93 % O2 product; density to 0.01 % (Z - 1 is
    # 1e-3 at 1 atm, so any sensible mixing rule agrees), viscosity to 1 % (Wilke's error band).
    import CoolProp.CoolProp as CP

    comp = concentrator_composition("93 %")
    fluid = "HEOS::" + "&".join(f"{k.capitalize()}[{v}]" for k, v in comp.items())
    rho, mu = mixture_properties(comp, 293.15, 101325.0)
    ref_rho = CP.PropsSI("D", "T", 293.15, "P", 101325, fluid)
    record(
        "density of 93 % concentrator oxygen at 20 degC",
        rho,
        ref_rho,
        "CoolProp HEOS mixture",
        "rel 1e-4",
        rho == pytest.approx(ref_rho, rel=1e-4),
        "kg/m3",
    )
    assert rho == pytest.approx(CP.PropsSI("D", "T", 293.15, "P", 101325, fluid), rel=1e-4)
    assert mu == pytest.approx(CP.PropsSI("V", "T", 293.15, "P", 101325, fluid), rel=0.01)


def test_wilke_reduces_to_pure_gas():
    # Wilke's rule with two identical components is the pure viscosity (algebraic identity).
    assert wilke_viscosity([0.3, 0.7], [2e-5, 2e-5], [32.0, 32.0]) == pytest.approx(2e-5, rel=1e-14)


def test_concentrator_composition():
    # Argon is not separated from oxygen by zeolite, so Ar/O2 stays 0.00934/0.20946 (CRC dry air);
    # top purity 1/(1 + 0.04459) = 95.7 % (Ph. Eur. Oxygen 93 % allows 90-96 %).
    comp = concentrator_composition(0.93)
    assert sum(comp.values()) == pytest.approx(1.0, abs=1e-12)
    assert comp["argon"] / comp["oxygen"] == pytest.approx(0.00934 / 0.20946, rel=1e-3)
    with pytest.raises(InputError) as err:
        concentrator_composition("99 %")
    assert "purity" in str(err.value) and "95.7" in str(err.value)


@pytest.mark.parametrize("spec", ["oxygen=0.5, nitrous_oxide=0.4", {"oxygen": "2"}, "xenon", {}])
def test_bad_gas_specs(spec):
    with pytest.raises(InputError):
        resolve_gas(spec)


# ------------------------------------------------------------------ the float model
CAL = (1.331, 2.027e-5)  # O2 at 20 degC, 1 atm (CoolProp, rounded)


def test_identity_same_gas_same_conditions():
    # Calibration conditions reproduce the reading exactly (the model is built from it).
    for gas in ("oxygen", "air", "nitrous_oxide", "concentrator"):
        r = true_flow(Q_(np.array([0.1, 0.3, 1.0, 4.0, 15.0]), "L/min"), gas, gas, SEA)
        assert r.true_flow_ambient.to("L/min").magnitude == pytest.approx([0.1, 0.3, 1.0, 4.0, 15.0], rel=1e-10)
        assert r.warnings == ()


def test_laminar_limit_is_viscosity_ratio():
    # Hand derivation: with only the viscous term, dp = a mu Q, so Q/R = (mu_c/mu) (dp'/dp) with
    # dp'/dp = (rho_f - rho)/(rho_f - rho_c) from the float's weight less buoyancy.
    g = replace(FlowmeterGeometry(), rim_length=1.0e6)  # viscous term dwarfs the inertial one
    use = (1.83, 1.46e-5)
    out = annulus_flow(1e-5, CAL, use, g)
    buoy = (g.float_density - use[0]) / (g.float_density - CAL[0])
    record(
        "flowmeter laminar limit: true/reading",
        float(out["flow"]) / 1e-5,
        CAL[1] / use[1] * buoy,
        "Hagen-Poiseuille viscosity ratio (hand derivation)",
        "rel 1e-6",
        float(out["flow"]) / 1e-5 == pytest.approx(CAL[1] / use[1] * buoy, rel=1e-6),
    )
    assert float(out["flow"]) / 1e-5 == pytest.approx(CAL[1] / use[1] * buoy, rel=1e-6)
    assert float(out["viscous_share"]) > 0.999999


def test_turbulent_limit_is_square_root_of_density_ratio():
    # Hand derivation: with only the inertial term, dp = b rho Q^2, so Q/R = sqrt(rho_c/rho x dp'/dp).
    g = replace(FlowmeterGeometry(), rim_length=1.0e-9, float_density=1.0e12)  # no viscous term, no buoyancy
    use = (0.93, 2.03e-5)
    out = annulus_flow(2e-4, CAL, use, g)
    record(
        "flowmeter turbulent limit: true/reading",
        float(out["flow"]) / 2e-4,
        math.sqrt(CAL[0] / use[0]),
        "orifice law, square root of density ratio (hand derivation)",
        "rel 1e-6",
        float(out["flow"]) / 2e-4 == pytest.approx(math.sqrt(CAL[0] / use[0]), rel=1e-6),
    )
    assert float(out["flow"]) / 2e-4 == pytest.approx(math.sqrt(CAL[0] / use[0]), rel=1e-6)
    assert float(out["viscous_share"]) < 1e-6


def test_geometry_follows_the_reynolds_number():
    # The inertial share grows with the annulus Reynolds number (common practice: low range
    # viscous, high range density-dependent), and the two terms are equal where Re = Re*.
    r = true_flow(Q_(np.geomspace(0.05, 15, 30), "L/min"), "oxygen", "oxygen", SEA)
    assert np.all(np.diff(r.reynolds) > 0) and np.all(np.diff(r.viscous_share) < 0)
    ratio = (1 - r.viscous_share) / r.viscous_share
    assert ratio == pytest.approx(r.reynolds / r.transition_reynolds, rel=1e-9)
    assert r.regime[0] == "laminar" and r.regime[-1] == "turbulent"


readings = st.floats(0.02, 20.0)
uses = st.tuples(st.floats(0.1, 3.0), st.floats(1.0e-5, 3.0e-5))


@settings(max_examples=60, deadline=None)
@given(readings, st.floats(1e-4, 0.05), uses)
def test_continuous_and_monotone_in_reading(r_lpm, rel_step, use):
    # Continuity: a small change of reading changes the flow by no more than the larger limit
    # ratio allows; monotonicity: a higher float means more flow.
    r = r_lpm / 60000.0
    q0 = float(annulus_flow(r, CAL, use)["flow"])
    q1 = float(annulus_flow(r * (1 + rel_step), CAL, use)["flow"])
    assert q1 > q0
    top = max(CAL[1] / use[1], math.sqrt(CAL[0] / use[0])) * 1.001
    assert (q1 - q0) / (r * rel_step) <= 2 * top


@settings(max_examples=60, deadline=None)
@given(readings, readings, uses)
def test_correction_between_limits_and_monotone_across_transition(ra, rb, use):
    # The correction moves monotonically from the viscosity ratio (bottom of the tube) to the
    # square root of the density ratio (top), never outside them (buoyancy made negligible).
    g = replace(FlowmeterGeometry(), float_density=1.0e12)
    lo_r, hi_r = sorted((ra / 60000.0, rb / 60000.0))
    c_lo = float(annulus_flow(lo_r, CAL, use, g)["flow"]) / lo_r
    c_hi = float(annulus_flow(hi_r, CAL, use, g)["flow"]) / hi_r
    lam, turb = CAL[1] / use[1], math.sqrt(CAL[0] / use[0])
    lo, hi = min(lam, turb) * (1 - 1e-9), max(lam, turb) * (1 + 1e-9)
    assert lo <= c_lo <= hi and lo <= c_hi <= hi
    if hi_r > lo_r:
        assert (c_hi - c_lo) * (turb - lam) >= -1e-9 * hi


def test_oxygen_at_altitude_reads_low_in_the_high_range():
    # Common practice, no source: at altitude a float flowmeter reads low at high flows (density
    # range), true/reading tending to sqrt(p0/p) (ideal gas, rho proportional to p), and is
    # nearly right at low flows (viscosity does not depend on pressure, Maxwell).
    r = true_flow(Q_(np.array([0.05, 15.0]), "L/min"), "oxygen", "oxygen", HIGH)
    limit = math.sqrt(101.325 / HIGH.ambient_pressure.to("kPa").magnitude)
    record(
        "O2 flowmeter at 3000 m, 15 L/min: true/reading",
        r.correction[1],
        limit,
        "density range sqrt(p0/p) (common practice, no source)",
        "rel 1 %",
        r.correction[1] == pytest.approx(limit, rel=0.01),
    )
    assert 1.0 < r.correction[1] < limit and r.correction[1] == pytest.approx(limit, rel=0.01)
    assert r.correction[0] == pytest.approx(1.0, abs=0.005)
    assert r.regime[1] == "turbulent" and r.regime[0] == "laminar"


def test_air_through_an_oxygen_tube():
    # Air reads low on an O2 tube: top of the tube sqrt(rho_O2/rho_air) = sqrt(31.999/28.965)
    # = 1.051, bottom mu_O2/mu_air = 20.27/18.21 = 1.113 (CoolProp at 20 degC). 1 % tolerance: at
    # 15 L/min and 0.05 L/min the other term still holds a few per cent of the pressure drop.
    r = true_flow(Q_(np.array([0.05, 15.0]), "L/min"), "oxygen", "air", SEA)
    record(
        "air on an O2 flowmeter at 15 L/min: true/reading",
        r.correction[1],
        1.051,
        "sqrt(rho_O2/rho_air), CoolProp properties",
        "rel 1 %",
        r.correction[1] == pytest.approx(1.051, rel=0.01),
    )
    record(
        "air on an O2 flowmeter at 0.05 L/min: true/reading",
        r.correction[0],
        1.113,
        "mu_O2/mu_air, CoolProp properties",
        "rel 1 %",
        r.correction[0] == pytest.approx(1.113, rel=0.01),
    )
    assert r.correction[1] == pytest.approx(1.051, rel=0.01)
    assert r.correction[0] == pytest.approx(1.113, rel=0.01)
    assert [c for c, _ in r.warnings] == ["FLOWMETER_LOW_READING", "FLOWMETER_OTHER_GAS"]


def test_nitrous_oxide_through_an_oxygen_tube_crosses_over():
    # N2O is denser but less viscous than O2: over-reads high, under-reads low (limits 0.853 and
    # about 1.39 from the property ratios), so the correction crosses 1 in the transition.
    r = true_flow(Q_(np.array([0.05, 15.0]), "L/min"), "oxygen", "nitrous_oxide", SEA)
    assert r.correction[1] < 0.87 and r.correction[0] > 1.3


def test_heliox_on_an_oxygen_tube():
    # Heliox 79/21 read on an O2 flowmeter: multiply the reading by about 1.8 at usual flows
    # (common practice, from memory; it is sqrt(rho_O2/rho_heliox) = sqrt(32.0/9.88)). 2 %: the
    # viscous remainder of the pressure drop at 15 L/min.
    r = true_flow("15 L/min", "oxygen", "oxygen=21 %, helium=79 %", SEA)
    record(
        "heliox 79/21 on an O2 flowmeter: true/reading",
        r.correction,
        1.8,
        "common practice (from memory)",
        "rel 2 %",
        r.correction == pytest.approx(1.8, rel=0.02),
    )
    assert r.correction == pytest.approx(1.8, rel=0.02)
    assert r.regime == "turbulent"


def test_standard_litres_and_back_pressure():
    # Same gas at 20 degC: free gas at 15 degC is 288.15/293.15 of the volume (Charles's law;
    # real-gas Z differs by < 1e-4 between the two temperatures).
    r = true_flow("5 L/min", "oxygen", "oxygen", SEA)
    assert r.true_flow_standard.magnitude == pytest.approx(5.0 * 288.15 / 293.15, rel=1e-4)
    # A back pressure raises the density in the tube; in the density range the flow in ambient
    # litres is sqrt(p_tube/p_amb) times the reading (hand derivation, ideal gas).
    g = replace(FlowmeterGeometry(), rim_length=1e-9, float_density=1e12)
    r = true_flow("10 L/min", "oxygen", "oxygen", SEA, back_pressure="10 kPa", geometry=g)
    assert r.correction == pytest.approx(math.sqrt(111.325 / 101.325), rel=1e-3)


def test_uncertainty_band():
    # +-2.5 % of reading (common practice, no source); with true = reading it is exactly the band.
    r = true_flow("8 L/min", "oxygen", "oxygen", SEA)
    record(
        "flowmeter accuracy band at 8 L/min, lower edge",
        r.uncertainty["low"].magnitude,
        7.8,
        "+-2.5 % of reading (common practice, no source)",
        "rel 1e-9",
        r.uncertainty["low"].magnitude == pytest.approx(7.8, rel=1e-9),
        "L/min",
    )
    assert r.uncertainty["low"].magnitude == pytest.approx(7.8, rel=1e-9)
    assert r.uncertainty["high"].magnitude == pytest.approx(8.2, rel=1e-9)
    r = true_flow("8 L/min", "oxygen", "helium", HIGH)
    assert r.uncertainty["low"] < r.true_flow_ambient < r.uncertainty["high"]


def test_zero_reading_and_vectorised_matches_scalar():
    arr = true_flow(Q_(np.array([0.0, 0.7, 6.0]), "L/min"), "air", "concentrator", HIGH, purity="92 %")
    assert arr.true_flow_ambient.magnitude[0] == 0.0
    for i, x in enumerate((0.7, 6.0), start=1):
        one = true_flow(f"{x} L/min", "air", "concentrator", HIGH, purity="92 %")
        assert one.true_flow_ambient.magnitude == pytest.approx(arr.true_flow_ambient.magnitude[i], rel=1e-12)
        assert one.regime == arr.regime[i]


@pytest.mark.parametrize(
    "kw",
    [
        {"reading": "-1 L/min"},
        {"reading": "150 L/min"},
        {"reading": "2 L"},
        {"purity": "93 %"},
        {"back_pressure": "50 kPa"},
    ],
)
def test_bad_inputs(kw):
    args = {"reading": "2 L/min", "calibrated_for": "oxygen", "gas_in_use": "oxygen", "site": SEA}
    extra = {k: kw.pop(k) for k in list(kw) if k in ("purity", "back_pressure")}
    args.update(kw)
    with pytest.raises(InputError):
        true_flow(**args, **extra)


def test_data_table_is_validated():
    good = {
        "sources": {"x": "a source"},
        "geometry": {"rim_length": {"value": "1 mm", "source": "x", "confidence": "C"}},
    }
    assert load_records(good)["geometry"]["rim_length"].value == Q_(1, "mm")
    for bad in (
        {"value": "1 mm", "source": "nope", "confidence": "C"},
        {"value": "1 mm", "source": "x", "confidence": "Z"},
        {"value": "1 kg", "source": "x", "confidence": "C"},
    ):
        with pytest.raises(DataError):
            load_records({"sources": {"x": "s"}, "geometry": {"rim_length": bad}})
