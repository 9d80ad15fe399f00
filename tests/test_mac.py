"""MAC: Mapleson's age correction, additivity with nitrous oxide, the inverse, MAC at altitude."""

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from validation import record

from estimator.errors import InputError
from estimator.physics.mac import (
    end_tidal_for_total_mac,
    mac_at_age,
    mac_at_pressure,
    mapleson_factor,
    parse_fraction,
    total_mac,
)
from estimator.properties import agent, gas
from estimator.units import Q_

# Mapleson WW, Br J Anaesth 1996;76:179, Table 2: MAC at 40 years [vol %].
MAPLESON_TABLE2 = {"halothane": 0.75, "isoflurane": 1.17, "sevoflurane": 1.80, "desflurane": 6.6}
MAPLESON_N2O = 104.0


def published_factor(age):
    # Mapleson 1996: MAC(age) = MAC40 x 10^(-0.00269 (age - 40)), written out independently here.
    return 10 ** (-0.00269 * (age - 40.0))


@pytest.mark.validation
@pytest.mark.parametrize("name,mac40", sorted(MAPLESON_TABLE2.items()))
def test_shipped_mac40_is_mapleson_table2(name, mac40):
    # Data file against Mapleson 1996 Table 2; exact, the table is copied to its printed digits.
    v = agent(name).mac40.to("percent").magnitude
    record(
        f"{name} MAC at 40 years",
        v,
        mac40,
        "Mapleson 1996, Table 2",
        "rel 1e-12",
        v == pytest.approx(mac40, rel=1e-12),
        "%",
    )
    assert agent(name).mac40.to("percent").magnitude == pytest.approx(mac40, rel=1e-12)


@pytest.mark.validation
def test_shipped_nitrous_oxide_mac40():
    # Mapleson 1996 Table 2: nitrous oxide 104 % at 40 years.
    v = gas("nitrous_oxide").mac40.to("percent").magnitude
    record(
        "nitrous oxide MAC at 40 years",
        v,
        MAPLESON_N2O,
        "Mapleson 1996, Table 2",
        "rel 1e-12",
        v == pytest.approx(MAPLESON_N2O, rel=1e-12),
        "%",
    )
    assert gas("nitrous_oxide").mac40.to("percent").magnitude == pytest.approx(MAPLESON_N2O, rel=1e-12)


@pytest.mark.parametrize("age", [1, 20, 40, 60, 80])
@pytest.mark.parametrize("name", sorted(MAPLESON_TABLE2))
def test_age_corrected_mac_follows_mapleson(name, age):
    # Mapleson 1996 formula and Table 2; same arithmetic, so float round-off only (rel 1e-12).
    r = mac_at_age(name, f"{age} years")
    assert r.mac.units == Q_(1, "percent").units
    assert r.mac.magnitude == pytest.approx(MAPLESON_TABLE2[name] * published_factor(age), rel=1e-12)
    assert r.warnings == ()


def test_decline_six_percent_per_decade():
    # Mapleson 1996 abstract: MAC falls by about 6 % per decade. The quoted
    # figure is rounded to a whole percent, so allow 0.5 percentage point.
    ages = np.arange(1.0, 111.0, 10.0)
    ratios = mapleson_factor(ages + 10.0) / mapleson_factor(ages)
    record(
        "MAC decline per decade of age",
        float(np.mean(1.0 - ratios)),
        0.06,
        "Mapleson 1996, abstract",
        "abs 0.005",
        bool(np.allclose(1.0 - ratios, 0.06, atol=0.005)),
    )
    assert np.allclose(1.0 - ratios, 0.06, atol=0.005)


@pytest.mark.parametrize("age,factor", [(1, 1.273), (20, 1.132), (40, 1.0), (60, 0.883), (80, 0.781)])
def test_mapleson_factors_at_ages(age, factor):
    # Factors from the published formula, hand-computed to 3 decimals (10^(0.00269 x 39) = 1.2733,
    # ...); tolerance half a unit in the third decimal.
    record(
        f"Mapleson age factor at {age} years",
        mapleson_factor(age),
        factor,
        "Mapleson 1996 formula, hand-computed",
        "abs 5e-4",
        mapleson_factor(age) == pytest.approx(factor, abs=5e-4),
    )
    assert mapleson_factor(age) == pytest.approx(factor, abs=5e-4)


def test_vectorised_ages_match_scalars():
    ages = np.array([2.0, 35.0, 90.0])
    r = mac_at_age("desflurane", ages)
    assert r.mac.magnitude.shape == (3,)
    # Element-wise identity with the scalar path; float round-off only.
    for a, m in zip(ages, r.mac.magnitude, strict=True):
        assert m == pytest.approx(mac_at_age("desflurane", float(a)).mac.magnitude, rel=1e-12)
    assert mac_at_age("desflurane", Q_(ages, "year")).mac.magnitude == pytest.approx(r.mac.magnitude)


def test_below_one_year_warns_and_outside_range_errors():
    # Mapleson 1996: the fit holds above 1 year; below it a warning, never a silent answer.
    r = mac_at_age("sevoflurane", "6 months")
    assert [c for c, _ in r.warnings] == ["AGE_BELOW_MAPLESON_RANGE"]
    assert r.mac.magnitude > 0
    for bad in ("-3", "121 years", "abc", "3 kg", float("nan")):
        with pytest.raises(InputError) as err:
            mac_at_age("sevoflurane", bad)
        assert "patient.age" in str(err.value)
    with pytest.raises(InputError, match="0 to 120 years"):
        mac_at_age("sevoflurane", np.array([30.0, 130.0]))


def test_unknown_agent_names_the_valid_ones():
    with pytest.raises(InputError, match="sevoflurane"):
        mac_at_age("chloroform", 40)


def test_additivity_with_nitrous_oxide():
    # Nickalls and Mapleson 2003: total MAC = sum of F_ET,i / MAC_i(age), nitrous oxide included.
    # At 40 years: 0.9 % sevoflurane = 0.5 MAC (1.80 % Table 2); 52 % nitrous oxide = 0.5 MAC (104 %).
    r = total_mac({"sevoflurane": "0.9 %", "nitrous_oxide": "52 %"}, "40 years")
    record(
        "total MAC of 0.9 % sevoflurane + 52 % N2O at 40 years",
        r.total.to("MAC").magnitude,
        1.0,
        "Nickalls & Mapleson 2003 (additivity); Mapleson 1996 Table 2",
        "rel 1e-12",
        r.total.to("MAC").magnitude == pytest.approx(1.0, rel=1e-12),
        "MAC",
    )
    assert r.total.to("MAC").magnitude == pytest.approx(1.0, rel=1e-12)
    assert r.contributions["nitrous_oxide"].magnitude == pytest.approx(0.5, rel=1e-12)
    # At 80 years both MACs fall by the same factor, so the same mixture is 1/0.781 MAC (Mapleson 1996).
    old = total_mac({"sevoflurane": "0.9 %", "nitrous_oxide": "52 %"}, 80)
    assert old.total.magnitude == pytest.approx(1.0 / published_factor(80), rel=1e-12)


def test_total_mac_rejects_impossible_mixtures():
    with pytest.raises(InputError, match="100 %"):
        total_mac({"desflurane": "30 %", "nitrous_oxide": "75 %"}, 40)
    with pytest.raises(InputError, match=r"end_tidal.sevoflurane"):
        total_mac({"sevoflurane": "-1 %"}, 40)
    with pytest.raises(InputError):
        total_mac({}, 40)


def test_inverse_known_value():
    # 1.2 MAC at 70 years with 67 % nitrous oxide, by the published formulae written out here:
    # F = (1.2 - 0.67 / (1.04 f)) x 0.018 f with f = 10^(-0.00269 x 30) (Mapleson 1996; Nickalls 2003).
    f = published_factor(70)
    expected = (1.2 - 0.67 / (1.04 * f)) * 0.018 * f * 100
    r = end_tidal_for_total_mac("sevoflurane", 1.2, "70 years", "67 %")
    record(
        "sevoflurane end-tidal for 1.2 MAC total with 67 % N2O at 70 years",
        r.end_tidal.to("percent").magnitude,
        expected,
        "Mapleson 1996; Nickalls & Mapleson 2003 (formula)",
        "rel 1e-12",
        r.end_tidal.to("percent").magnitude == pytest.approx(expected, rel=1e-12),
        "%",
    )
    assert r.end_tidal.to("percent").magnitude == pytest.approx(expected, rel=1e-12)
    assert r.nitrous_oxide_mac.magnitude == pytest.approx(0.67 / (1.04 * f), rel=1e-12)


def test_inverse_none_when_nitrous_oxide_alone_exceeds():
    r = end_tidal_for_total_mac("isoflurane", "0.5 MAC", 40, "70 %")
    assert r.end_tidal is None
    assert [c for c, _ in r.warnings] == ["NITROUS_OXIDE_EXCEEDS_TOTAL"]


def test_inverse_flags_unreachable_and_hypoxic():
    # Desflurane vaporizers stop at 18 % (common practice, no source): 2.5 MAC at 1 year needs
    # 2.5 x 6.6 x 1.273 = 21 % end-tidal, out of reach.
    r = end_tidal_for_total_mac("desflurane", 2.5, "1 year")
    codes = [c for c, _ in r.warnings]
    assert "END_TIDAL_ABOVE_VAPORIZER_MAX" in codes
    # 2 MAC at 40 with 75 % nitrous oxide: (2 - 75/104) x 6.6 = 8.4 % desflurane, leaving 16.6 %
    # for oxygen, below the 21 % of air.
    r = end_tidal_for_total_mac("desflurane", 2.0, 40, "75 %")
    assert "OXYGEN_BELOW_AIR" in [c for c, _ in r.warnings]
    # 3 MAC at 1 year with 80 % nitrous oxide: (3 - 80/(104 x 1.273)) x 6.6 x 1.273 = 20.1 % desflurane,
    # 100.1 % in all.
    r = end_tidal_for_total_mac("desflurane", 3.0, 1, "80 %")
    assert "MIXTURE_ABOVE_100_PERCENT" in [c for c, _ in r.warnings]
    with pytest.raises(InputError, match="agent.name"):
        end_tidal_for_total_mac("nitrous_oxide", 1.0, 40)


@settings(max_examples=60, deadline=None)
@given(
    age=st.floats(1.0, 120.0),
    n2o=st.floats(0.0, 0.8),
    extra=st.floats(0.0, 1.5),
    name=st.sampled_from(sorted(MAPLESON_TABLE2)),
)
def test_inverse_round_trip(age, n2o, extra, name):
    # Round trip through the additivity rule: the returned end-tidal gives back the total.
    n2o_mac = n2o / (1.04 * published_factor(age))
    want = min(n2o_mac + extra, 3.0)
    r = end_tidal_for_total_mac(name, want, age, n2o)
    f_agent = r.end_tidal.to("dimensionless").magnitude
    assume(f_agent + n2o <= 1.0)  # a mixture above 100 % is rejected by total_mac, tested above
    back = total_mac({name: r.end_tidal, "nitrous_oxide": n2o}, age)
    # Float round-off only; abs for totals near 0.
    assert back.total.magnitude == pytest.approx(want, rel=1e-9, abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(a=st.floats(0.0, 120.0), b=st.floats(0.0, 120.0), name=st.sampled_from(sorted(MAPLESON_TABLE2)))
def test_mac_decreases_with_age(a, b, name):
    # Mapleson 1996: MAC falls monotonically with age (negative slope of log MAC).
    lo, hi = sorted((a, b))
    m_lo = mac_at_age(name, lo).mac.magnitude
    m_hi = mac_at_age(name, hi).mac.magnitude
    assert m_hi <= m_lo
    if hi - lo > 1e-6:
        assert m_hi < m_lo


def test_mac_at_pressure_is_a_partial_pressure():
    # Dalton's law: at half an atmosphere the same partial pressure is twice the volume fraction
    # (common practice, no source). Exact arithmetic.
    assert mac_at_pressure("1.8 %", "50.6625 kPa").to("percent").magnitude == pytest.approx(3.6, rel=1e-12)
    # ICAO standard atmosphere (ISO 2533): 70.12 kPa at 3000 m; sevoflurane 1 MAC there is
    # 1.80 x 101.325 / 70.12 = 2.60 %; rel 1e-3 covers the 4-digit pressure.
    r = mac_at_age("sevoflurane", 40, "70.12 kPa")
    record(
        "sevoflurane 1 MAC as volume % at 70.12 kPa (3000 m)",
        r.mac.magnitude,
        2.60,
        "Dalton's law with ISO 2533 pressure at 3000 m",
        "rel 1e-3",
        r.mac.magnitude == pytest.approx(2.60, rel=1e-3),
        "%",
    )
    assert r.mac.magnitude == pytest.approx(2.60, rel=1e-3)
    assert r.warnings == ()
    # Above the limit of habitation (40 kPa is about 7000 m in the ISO 2533 atmosphere): a warning
    # from the site model; beyond what it covers: an error naming the field.
    assert [c for c, _ in mac_at_age("sevoflurane", 40, "40 kPa").warnings] == ["SITE_ABOVE_HABITATION"]
    with pytest.raises(InputError, match="site.ambient_pressure"):
        mac_at_age("sevoflurane", 40, "5 kPa")


def test_partial_pressure_keeps_total_mac_invariant():
    # Same partial pressures at another ambient pressure give the same MAC (definition of MAC as a
    # partial pressure). 0.9 % and 52 % at 1 atm are 1.8 % and 104 % partial-pressure equivalents
    # at half an atmosphere, which exceed 100 %: so check with a small mixture instead.
    sea = total_mac({"isoflurane": "0.5 %", "nitrous_oxide": "20 %"}, 50)
    high = total_mac({"isoflurane": "1.0 %", "nitrous_oxide": "40 %"}, 50, "50.6625 kPa")
    assert high.total.magnitude == pytest.approx(sea.total.magnitude, rel=1e-12)


def test_fraction_parsing():
    assert parse_fraction("67 %", "x") == pytest.approx(0.67)
    assert parse_fraction(0.5, "x") == 0.5
    with pytest.raises(InputError, match="0 to 100 %"):
        parse_fraction("150 %", "nitrous_oxide")
    assert math.isclose(parse_fraction(Q_(1.2, "percent"), "x"), 0.012)
