"""Cylinder contents against CoolProp, the ideal-gas figure and the weights of nitrous oxide."""

import pytest
from CoolProp.CoolProp import PropsSI
from validation import record

from estimator.errors import InputError
from estimator.physics.cylinders import (
    compressed_cylinder,
    compressibility,
    litres_per_kg,
    nitrous_oxide_cylinder,
    vapour_pressure,
)
from estimator.physics.real_gas_table import TABLE_TOLERANCE
from estimator.units import Q_

R = 8.314462618  # J/(mol K), CODATA 2018 (exact in the 2019 SI)
T_REF, P_REF = 288.15, 101325.0  # package reference, 15 degC and 101.325 kPa
FLUID = {"oxygen": "Oxygen", "air": "Air", "nitrous_oxide": "NitrousOxide"}


def coolprop_litres(gas, water_l, p_abs_pa, t_k):
    """Free-gas litres at the reference computed here directly from CoolProp (Bell et al. 2014)."""
    moles = PropsSI("Dmolar", "T", t_k, "P", p_abs_pa, FLUID[gas]) * water_l / 1000.0
    return moles * R * T_REF / P_REF * 1000.0


@pytest.mark.parametrize(
    "gas,bar,temp",
    [
        ("oxygen", 137, 15),
        ("oxygen", 200, 15),
        ("oxygen", 200, 35),
        ("air", 200, 15),
        ("air", 300, 15),
        ("air", 137, -10),
    ],
)
def test_contents_match_coolprop(gas, bar, temp):
    c = compressed_cylinder(gas, "10 L", f"{bar} bar", f"{temp} degC", "0 bar")
    expected = coolprop_litres(gas, 10.0, bar * 1e5 + 101325.0, temp + 273.15)
    got = c.contents.to("L").magnitude
    record(
        f"{gas} in a 10 L cylinder at {bar} bar, {temp} degC (free gas at 15 degC)",
        got,
        expected,
        "CoolProp (Bell et al. 2014), computed in the test",
        "rel 1e-6 (the real-gas table's interpolation bound)",
        got == pytest.approx(expected, rel=TABLE_TOLERANCE),
        "L",
    )
    # Same equation of state, same state: agreement to the table's interpolation bound.
    assert c.contents.to("L").magnitude == pytest.approx(expected, rel=TABLE_TOLERANCE)


@pytest.mark.parametrize("bar", [137, 200])
def test_oxygen_holds_more_than_ideal(bar):
    # CoolProp (Bell IH et al., Ind Eng Chem Res 2014;53:2498): O2 at 15 degC Z = 0.931 at 137 and 200 bar, so more than ideal.
    c = compressed_cylinder("oxygen", "10 L", f"{bar} bar", "15 degC")
    assert c.contents > c.ideal_contents
    assert c.contents.magnitude / c.ideal_contents.magnitude == pytest.approx(1 / 0.931, rel=3e-3)


@pytest.mark.parametrize("bar,z", [(200, 1.021), (300, 1.101)])
def test_air_holds_less_than_ideal(bar, z):
    # CoolProp (Bell et al. 2014): air at 15 degC Z = 1.021 at 200 bar, 1.101 at 300 bar. The table gives 3
    # digits at round pressures (gauge vs absolute differ by 1 bar): tolerance 3e-3.
    c = compressed_cylinder("air", "10 L", f"{bar} bar", "15 degC")
    assert c.contents < c.ideal_contents
    assert c.compressibility == pytest.approx(z, abs=3e-3)


@pytest.mark.parametrize(
    "gas,bar,z", [("oxygen", 137, 0.931), ("oxygen", 200, 0.931), ("oxygen", 300, 0.973), ("air", 137, 0.992)]
)
def test_compressibility_table(gas, bar, z):
    # CoolProp (Bell et al. 2014) Z values at 15 degC (3 digits, so +-0.002 covers rounding and gauge/absolute).
    zc = compressibility(gas, Q_(15, "degC"), Q_(bar, "bar"))
    record(
        f"compressibility Z of {gas} at {bar} bar, 15 degC",
        zc,
        z,
        "CoolProp (Bell et al., Ind Eng Chem Res 2014;53:2498)",
        "abs 0.002",
        zc == pytest.approx(z, abs=2e-3),
    )
    assert compressibility(gas, Q_(15, "degC"), Q_(bar, "bar")) == pytest.approx(z, abs=2e-3)


def test_reserve_is_respected():
    c = compressed_cylinder("oxygen", "10 L", "137 bar", "15 degC", "10 bar", count=3)
    per = coolprop_litres("oxygen", 10, 137e5 + P_REF, T_REF) - coolprop_litres("oxygen", 10, 10e5 + P_REF, T_REF)
    assert c.usable.to("L").magnitude == pytest.approx(3 * per, rel=TABLE_TOLERANCE)


def test_gauge_pressure_uses_site_ambient():
    # At 70 kPa ambient the same gauge reading holds less gas (absolute = gauge + ambient, Boyle).
    sea = compressed_cylinder("oxygen", "10 L", "1 bar", "15 degC")
    high = compressed_cylinder("oxygen", "10 L", "1 bar", "15 degC", ambient_pressure=Q_(70, "kPa"))
    assert high.contents < sea.contents
    assert high.contents.to("L").magnitude == pytest.approx(
        coolprop_litres("oxygen", 10, 1.7e5, T_REF), rel=TABLE_TOLERANCE
    )


@pytest.mark.parametrize("temp,ref", [(15, 534), (20, 543)])
def test_nitrous_oxide_litres_per_kg(temp, ref):
    t = temp + 273.15
    rho = PropsSI("D", "T", t, "P", P_REF, "NitrousOxide")  # kg/m3, computed here
    real = litres_per_kg("nitrous_oxide", Q_(temp, "degC"), real_gas=True).to("L/kg").magnitude
    assert real == pytest.approx(1000.0 / rho, rel=TABLE_TOLERANCE)
    # CoolProp (Bell et al. 2014): 534 L/kg at 15 C, 543 at 20 C (CoolProp, rounded to 1 L/kg).
    record(
        f"nitrous oxide free gas per kg at {temp} degC",
        real,
        ref,
        "CoolProp (rounded to 1 L/kg)",
        "abs 1 L/kg",
        real == pytest.approx(ref, abs=1.0),
        "L/kg",
    )
    assert real == pytest.approx(ref, abs=1.0)
    # The package convention (ideal molar volume) differs by the 1-atm Z of N2O, about 0.6 %.
    ideal = litres_per_kg("nitrous_oxide", Q_(temp, "degC")).to("L/kg").magnitude
    # 1e-5: CoolProp's equation of state carries its own (older) gas constant, 1e-6 off CODATA 2018.
    assert ideal / real == pytest.approx(1 / PropsSI("Z", "T", t, "P", P_REF, "NitrousOxide"), rel=1e-5)


def test_nitrous_oxide_contents_by_weight_not_gauge():
    m = PropsSI("M", "NitrousOxide")  # kg/mol
    a = nitrous_oxide_cylinder("8.5 kg", "5.0 kg", "15 degC", pressure="44 bar")
    b = nitrous_oxide_cylinder("8.5 kg", "5.0 kg", "15 degC", pressure="10 bar")
    assert a.usable == b.usable  # the gauge never enters the contents
    assert a.usable.to("L").magnitude == pytest.approx(3.5 / m * R * T_REF / P_REF * 1000, rel=1e-9)
    assert any(code == "NITROUS_OXIDE_GAUGE_LOW" for code, _ in b.warnings)
    # Vapour pressure about 44 bar gauge at 15 C (CoolProp, Bell et al. 2014; 1 bar rounding).
    vp = (a.vapour_pressure - Q_(101.325, "kPa")).to("bar").magnitude
    record(
        "nitrous oxide cylinder gauge pressure at 15 degC",
        vp,
        44.0,
        "CoolProp saturation pressure",
        "abs 0.5 bar",
        vp == pytest.approx(44, abs=0.5),
        "bar",
    )
    assert (a.vapour_pressure - Q_(101.325, "kPa")).to("bar").magnitude == pytest.approx(44, abs=0.5)
    assert vapour_pressure("nitrous_oxide", Q_(20, "degC")).to("bar").magnitude == pytest.approx(
        PropsSI("P", "T", 293.15, "Q", 0, "NitrousOxide") / 1e5, rel=TABLE_TOLERANCE
    )


def test_nitrous_oxide_above_critical_temperature():
    # Critical temperature 309.52 K (36.4 degC; Span and Wagner 2003 via CoolProp).
    c = nitrous_oxide_cylinder("8.5 kg", "5.0 kg", "40 degC", water_capacity="10 L")
    assert c.phase == "supercritical" and c.vapour_pressure is None
    assert any(code == "NITROUS_OXIDE_SUPERCRITICAL" for code, _ in c.warnings)
    p = PropsSI("P", "T", 313.15, "D", 350.0, "NitrousOxide")  # 3.5 kg in 10 L
    assert c.pressure.to("Pa").magnitude == pytest.approx(p, rel=1e-9)
    below = nitrous_oxide_cylinder("8.5 kg", "5.0 kg", "30 degC", water_capacity="10 L")
    assert below.phase == "liquid and vapour"


@pytest.mark.parametrize(
    "kwargs,field",
    [
        ({"pressure": "230 bar", "service_pressure": "200 bar"}, "cylinder.pressure"),
        ({"count": -1}, "cylinder.count"),
        ({"temperature": "90 degC"}, "cylinder.temperature"),
        ({"reserve_pressure": "-5 bar"}, "cylinder.reserve_pressure"),
    ],
)
def test_bad_compressed_input(kwargs, field):
    args = {"gas": "oxygen", "water_capacity": "10 L", "pressure": "137 bar"} | kwargs
    with pytest.raises(InputError) as err:
        compressed_cylinder(**args)
    assert err.value.field == field


def test_service_pressure_is_settled_at_15_c():
    # ISO 13769: working pressure is stated at 15 degC; a full 200 bar cylinder reads more when warm.
    warm = PropsSI("P", "T", 313.15, "Dmolar", PropsSI("Dmolar", "T", T_REF, "P", 200e5 + P_REF, "Oxygen"), "Oxygen")
    c = compressed_cylinder(
        "oxygen", "10 L", f"{(warm - P_REF) / 1e5 - 0.1:.2f} bar", "40 degC", service_pressure="200 bar"
    )
    assert c.contents.magnitude > 0


def test_bad_nitrous_oxide_input():
    with pytest.raises(InputError) as err:
        nitrous_oxide_cylinder("5 kg", "6 kg", field_prefix="cylinders[1]")
    assert err.value.field == "cylinders[1].tare_weight" and "6 kg" in str(err.value)
    with pytest.raises(InputError) as err:
        compressed_cylinder("nitrous_oxide", "10 L", "44 bar")
    assert err.value.field == "cylinder.gas"
    with pytest.raises(InputError):
        compressed_cylinder("helium", "10 L", "44 bar")
