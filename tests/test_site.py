"""Site conditions against the standard atmosphere tables, CoolProp and respiratory physiology."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from validation import record

from estimator.errors import InputError
from estimator.physics.inspired_oxygen import (
    check_inspired_oxygen,
    fraction_for_sea_level_threshold,
    inspired_oxygen_partial_pressure,
    sea_level_equivalent_fraction,
)
from estimator.physics.site import pressure_altitude, site_from_inputs, standard_atmosphere
from estimator.units import Q_


@pytest.mark.validation
@pytest.mark.parametrize("height,kpa", [(0, 101.325), (1000, 89.875), (3000, 70.109), (5000, 54.020), (11000, 22.632)])
def test_pressure_against_iso2533_table(height, kpa):
    # ISO 2533:1975 / ICAO Doc 7488/3 tables by geopotential height (from memory; the same numbers
    # are quoted in the project's brief). The tables give 5 significant figures, so 0.6 Pa is
    # the rounding half-step plus a little.
    p, _ = standard_atmosphere(Q_(height, "m"), geopotential=True)
    record(
        f"standard atmosphere pressure at {height} m geopotential",
        p.to("kPa").magnitude,
        kpa,
        "ISO 2533:1975 / ICAO Doc 7488/3 table (from memory)",
        "abs 0.6 Pa",
        p.to("kPa").magnitude == pytest.approx(kpa, abs=6e-4),
        "kPa",
    )
    assert p.to("kPa").magnitude == pytest.approx(kpa, abs=6e-4)


@pytest.mark.validation
@pytest.mark.parametrize("height,pa", [(1000, 8.9876e4), (3000, 7.0121e4), (5000, 5.4048e4)])
def test_pressure_against_geometric_table(height, pa):
    # U.S. Standard Atmosphere 1976 (NOAA/NASA/USAF), table by geometric altitude, identical to
    # ISO 2533 below 32 km (from memory). 5 significant figures: half-step 5 Pa.
    p, _ = standard_atmosphere(Q_(height, "m"))
    record(
        f"standard atmosphere pressure at {height} m geometric",
        p.to("Pa").magnitude,
        pa,
        "U.S. Standard Atmosphere 1976 table (from memory)",
        "abs 5 Pa",
        p.to("Pa").magnitude == pytest.approx(pa, abs=5.0),
        "Pa",
    )
    assert p.to("Pa").magnitude == pytest.approx(pa, abs=5.0)


def test_temperature_lapse():
    # ISO 2533: 15 degC at sea level falling 6.5 K per geopotential km (exact by definition).
    _, t = standard_atmosphere(Q_(1000, "m"), geopotential=True)
    assert t.to("degC").magnitude == pytest.approx(8.5, abs=1e-9)


@given(st.floats(-500, 11000))
def test_pressure_altitude_inverts_the_standard(h):
    # Algebraic inverse of the same formula; 1 mm is far below any elevation anyone states.
    p, _ = standard_atmosphere(Q_(h, "m"))
    assert pressure_altitude(p).to("m").magnitude == pytest.approx(h, abs=1e-3)


def test_vectorised_matches_scalar():
    hs = np.array([0.0, 1500.0, 4000.0])
    p, _ = standard_atmosphere(Q_(hs, "m"))
    for h, val in zip(hs, p.magnitude, strict=True):
        assert standard_atmosphere(Q_(h, "m"))[0].magnitude == pytest.approx(val, rel=1e-14)


@pytest.mark.parametrize("elevation", ["-600 m", "11500 m", "12 km"])
def test_outside_troposphere_is_an_error_naming_the_range(elevation):
    with pytest.raises(InputError) as err:
        site_from_inputs(elevation=elevation)
    assert "site.elevation" in str(err.value)
    assert ("11000 m" if elevation.endswith(" m") else "11 km") in str(err.value)  # the range in the unit typed


def test_above_habitation_warns():
    # Highest permanent settlements are near 5100 m (common practice, no source): 6000 m warns.
    codes = [c for c, _ in site_from_inputs(elevation="6500 m").warnings]
    assert codes == ["SITE_ABOVE_HABITATION"]
    assert site_from_inputs(elevation="5000 m").warnings == ()
    assert [c for c, _ in site_from_inputs(ambient_pressure="40 kPa").warnings] == ["SITE_ABOVE_HABITATION"]


def test_defaults_and_measured_pressure():
    s = site_from_inputs()
    assert s.ambient_pressure.to("kPa").magnitude == pytest.approx(101.325)
    assert s.temperature.to("degC").magnitude == pytest.approx(20.0)
    # A barometer reading at 3000 m on a low-pressure day: used as given.
    s = site_from_inputs(elevation="3000 m", ambient_pressure="68.5 kPa", temperature="30 degC")
    assert s.ambient_pressure.to("kPa").magnitude == pytest.approx(68.5)
    assert s.basis == "measured pressure"
    assert s.temperature.to("K").magnitude == pytest.approx(303.15)


@pytest.mark.parametrize("pressure", ["101 kPa", "40 kPa"])
def test_pressure_inconsistent_with_elevation_is_an_error(pressure):
    # 101 kPa at 3000 m would be 44 % above the standard: a sea-level or gauge mistake.
    with pytest.raises(InputError) as err:
        site_from_inputs(elevation="3000 m", ambient_pressure=pressure)
    assert "site.ambient_pressure" in str(err.value) and "kPa" in str(err.value)


@pytest.mark.parametrize(
    "kw",
    [{"ambient_pressure": "0 kPa"}, {"ambient_pressure": "250 kPa"}, {"temperature": "70 degC"}, {"elevation": "3 kg"}],
)
def test_bad_values_are_errors(kw):
    with pytest.raises(InputError):
        site_from_inputs(**kw)


def test_unusual_room_temperature_warns():
    assert [c for c, _ in site_from_inputs(temperature="45 degC").warnings] == ["SITE_TEMPERATURE_UNUSUAL"]


@pytest.mark.validation
def test_water_vapour_at_37c_against_coolprop():
    # West's 47 mmHg (6.266 kPa, estimator.constants) against IAPWS-95 water in CoolProp at 37 degC
    # (6.2795 kPa); the 0.2 % difference is the rounding of 47 mmHg.
    import CoolProp.CoolProp as CP

    svp = CP.PropsSI("P", "T", 310.15, "Q", 0, "Water") / 1000.0
    dry = inspired_oxygen_partial_pressure(1.0, Q_(101.325, "kPa"), water_vapour=False).magnitude
    wet = inspired_oxygen_partial_pressure(1.0, Q_(101.325, "kPa")).magnitude
    record(
        "water vapour pressure at 37 degC used for PiO2",
        dry - wet,
        svp,
        "CoolProp (IAPWS-95 water)",
        "rel 0.5 %",
        dry - wet == pytest.approx(svp, rel=5e-3),
        "kPa",
    )
    assert dry - wet == pytest.approx(svp, rel=5e-3)


@pytest.mark.validation
def test_inspired_oxygen_at_sea_level_west():
    # West JB, Respiratory Physiology: PiO2 = 0.2093 x (760 - 47) = 149 mmHg (from memory);
    # 0.5 mmHg covers the rounding of the textbook figure.
    pio2 = inspired_oxygen_partial_pressure(0.2093, Q_(760, "mmHg"))
    record(
        "PiO2 breathing air at sea level",
        pio2.to("mmHg").magnitude,
        149.0,
        "West, Respiratory Physiology (from memory)",
        "abs 0.5 mmHg",
        pio2.to("mmHg").magnitude == pytest.approx(149.0, abs=0.5),
        "mmHg",
    )
    assert pio2.to("mmHg").magnitude == pytest.approx(149.0, abs=0.5)


def test_threshold_at_altitude():
    # Derived from PiO2 = FiO2 (PB - 6.3 kPa): at 3000 m (70.12 kPa) FiO2 0.30 has the PiO2 of
    # FiO2 0.20 at sea level, and 0.45 is needed to match 0.30 at sea level.
    p = standard_atmosphere(Q_(3000, "m"))[0]
    assert sea_level_equivalent_fraction(0.30, p) == pytest.approx(0.30 * 63.82 / 95.025, rel=1e-3)
    need = fraction_for_sea_level_threshold(0.30, p)
    assert need == pytest.approx(0.30 * 95.025 / 63.82, rel=1e-3)
    assert [c for c, _ in check_inspired_oxygen(0.35, 0.30, p)] == ["PIO2_BELOW_SEA_LEVEL_THRESHOLD"]
    assert check_inspired_oxygen(need + 1e-6, 0.30, p) == []
    assert check_inspired_oxygen(np.array([0.5, 0.6]), 0.30, p) == []
    assert check_inspired_oxygen(0.35, 0.30, Q_(101.325, "kPa")) == []


def test_threshold_unreachable_high_up():
    # At 9000 m (30.7 kPa) even pure O2 gives PiO2 24.4 kPa < 28.5 kPa (0.30 at sea level).
    p = standard_atmosphere(Q_(9000, "m"))[0]
    codes = [c for c, _ in check_inspired_oxygen(1.0, 0.30, p)]
    assert "PIO2_THRESHOLD_UNREACHABLE" in codes
