"""Vaporizers at altitude: partial-pressure behaviour, MAC scaling, dials, chamber mass balance."""

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from validation import record

from estimator.errors import InputError
from estimator.physics.vaporizer import delivered_fraction, dial_for_target, mac_fraction_at_site
from estimator.properties import agent
from estimator.units import Q_

P0 = Q_(101.325, "kPa")
P3000 = Q_(70.121, "kPa")  # ISO 2533 at 3000 m geometric (tests/test_site.py)
pressures = st.floats(30.0, 108.0)


@settings(max_examples=40, deadline=None)
@given(pressures)
def test_mac_volume_fraction_scales_inversely_with_pressure(p):
    # MAC is a partial pressure (common practice, no source): MAC% x p is constant.
    assert mac_fraction_at_site(0.018, Q_(p, "kPa")) * p == pytest.approx(0.018 * 101.325, rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(pressures, st.floats(0.001, 0.08))
def test_variable_bypass_gives_the_same_mac_multiple_everywhere(p, dial):
    # Constant output partial pressure (outlet-controlled split, Dalton): delivered% scales like
    # MAC%, so the MAC multiple of a dial does not depend on elevation.
    f = delivered_fraction(dial, "variable_bypass", Q_(p, "kPa"), "sevoflurane")
    assert f / mac_fraction_at_site(0.018, Q_(p, "kPa")) == pytest.approx(dial / 0.018, rel=1e-12)
    # ... and the dial for a MAC target is the sea-level dial.
    s = dial_for_target(1.3, 0.018, "variable_bypass", Q_(p, "kPa"), "sevoflurane")
    assert s.dial.to("").magnitude == pytest.approx(1.3 * 0.018, rel=1e-12)


def test_heated_pressurised_needs_dial_raised_by_p0_over_p():
    # Fixed volume % output (desflurane-type): the dial for 1 MAC is raised by p0/p.
    f = delivered_fraction(0.06, "heated_pressurised", P3000)
    assert f == pytest.approx(0.06, rel=1e-15)
    s = dial_for_target("1 MAC", "6.0 %", "heated_pressurised", P3000, "desflurane")
    record(
        "heated pressurised dial for 1 MAC desflurane at 3000 m",
        s.dial.to("").magnitude,
        0.06 * 101.325 / 70.121,
        "Dalton's law, p0/p (common practice, no source)",
        "rel 1e-12",
        s.dial.to("").magnitude == pytest.approx(0.06 * 101.325 / 70.121, rel=1e-12),
    )
    assert s.dial.to("").magnitude == pytest.approx(0.06 * 101.325 / 70.121, rel=1e-12)
    assert s.partial_pressure.to("kPa").magnitude == pytest.approx(0.06 * 101.325, rel=1e-12)
    assert s.warnings == ()


def test_inlet_control_against_chamber_mass_balance():
    # Hand mass balance: 1 L/min fresh gas, carrier share s through the chamber; the chamber gas
    # leaves saturated (vapour/total = SVP/p), so vapour = carrier x SVP/(p - SVP). Calibrate s to
    # 2 % at 101.325 kPa, then recompute at 70.121 kPa. Sevoflurane SVP 20.9 kPa at 20 degC (Biro 2014).
    svp = 20.9

    def output(s, p):
        carrier, bypass = s * 1.0, (1 - s) * 1.0
        vapour = carrier * svp / (p - svp)
        return vapour / (carrier + bypass + vapour)

    lo, hi = 0.0, 1.0
    for _ in range(200):  # bisection for the calibrated carrier share
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if output(mid, 101.325) < 0.02 else (lo, mid)
    expected = output(lo, 70.121)
    got = delivered_fraction(0.02, "variable_bypass", P3000, "sevoflurane", control="inlet")
    record(
        "inlet-controlled vaporizer at 3000 m, dial 2 % sevoflurane",
        got,
        expected,
        "chamber mass balance, SVP 20.9 kPa (Biro 2014), derived here",
        "rel 1e-9",
        got == pytest.approx(expected, rel=1e-9),
    )
    assert got == pytest.approx(expected, rel=1e-9)
    assert got * 70.121 > 0.02 * 101.325  # delivers more partial pressure than the outlet design


def test_inlet_control_tends_to_constant_partial_pressure_for_low_svp():
    # As SVP/p -> 0 the vapour adds no volume and both designs give F = D p0/p (limit of the formula).
    weak = replace(agent("sevoflurane"), vapour_pressure_20c=Q_(0.05, "kPa"))
    f_in = delivered_fraction(0.0001, "variable_bypass", P3000, weak, control="inlet")
    f_out = delivered_fraction(0.0001, "variable_bypass", P3000)
    assert f_in == pytest.approx(f_out, rel=2e-3)


@settings(max_examples=40, deadline=None)
@given(st.floats(47.0, 108.0), st.floats(0.1, 2.0), st.sampled_from(["outlet", "inlet"]))
def test_dial_for_target_inverts_delivered_fraction(p, target, control):
    # Round trip: the dial returned delivers exactly the target MAC at the site (inhabited
    # pressures; below about 32 kPa isoflurane, SVP 31.7 kPa, would boil).
    site_p = Q_(p, "kPa")
    s = dial_for_target(target, "1.17 %", "variable_bypass", site_p, "isoflurane", control=control)
    f = delivered_fraction(s.dial, "variable_bypass", site_p, "isoflurane", control=control)
    assert f == pytest.approx(target * mac_fraction_at_site(0.0117, site_p), rel=1e-9)


def test_dial_above_vaporizer_maximum_warns_and_is_not_capped():
    # 2 MAC desflurane (6.6 % at 1 atm, Mapleson 1996) at 3000 m needs 13.2 x 1.445 = 19.1 %,
    # above the 18 % maximum of the dial (common practice): warned, reported as needed.
    s = dial_for_target("2 MAC", "6.6 %", "heated_pressurised", P3000, "desflurane")
    assert s.dial.to("percent").magnitude == pytest.approx(13.2 * 101.325 / 70.121, rel=1e-12)
    assert [c for c, _ in s.warnings] == ["DIAL_ABOVE_VAPORIZER_MAX"]


def test_vectorised_dial():
    s = dial_for_target(np.array([0.5, 1.0, 1.5]), "1.8 %", "variable_bypass", P3000, "sevoflurane")
    assert s.dial.to("percent").magnitude == pytest.approx([0.9, 1.8, 2.7], rel=1e-12)


def test_desflurane_boils_in_a_variable_bypass_chamber_at_altitude():
    # SVP 89.2 kPa at 20 degC (Eger 1992) exceeds 70 kPa ambient: no variable-bypass operation.
    with pytest.raises(InputError) as err:
        delivered_fraction(0.06, "variable_bypass", P3000, "desflurane")
    assert "heated_pressurised" in str(err.value)


@pytest.mark.parametrize(
    "args",
    [
        (1.2, "tec", P0),
        ("120 %", "variable_bypass", P0),
        (0.02, "variable_bypass", Q_(10, "kPa")),
        (0.3, "variable_bypass", P0, "sevoflurane"),
    ],
)
def test_bad_inputs(args):
    with pytest.raises(InputError):
        delivered_fraction(*args)
