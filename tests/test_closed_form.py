"""Closed-form estimates: Lowe, Severinghaus, Dion, vaporizer output, vapour per mL of liquid."""

import numpy as np
import pytest
import scipy.constants
from scipy.integrate import quad
from validation import record

from estimator.errors import InputError
from estimator.physics.closed_form import (
    dion_cost,
    dion_liquid_volume,
    liquid_volume_at,
    lowe_cumulative_uptake,
    lowe_dose_times,
    lowe_unit_dose,
    lowe_uptake_coefficient,
    lowe_uptake_rate,
    molar_volume,
    severinghaus_cumulative_uptake,
    severinghaus_uptake_rate,
    vaporizer_vapour_output,
    vapour_per_liquid,
)
from estimator.units import Q_

# --- Lowe square-root-of-time ------------------------------------------------------------------


def test_lowe_coefficient_from_published_terms():
    # Lowe and Ernst 1981: k = f x MAC x lambda x Q (MAC vol %, Q dL/min). Terms from outside the
    # project: sevoflurane MAC40 1.80 % (Mapleson 1996 Table 2), blood/gas 0.65 (Katoh 1992),
    # Q = 2 x 70^0.75 dL/min (Brody, Lowe and Ernst 1981), f = 1.3. Float round-off only.
    q_dl = 2.0 * 70**0.75
    expected = 1.3 * 1.80 * 0.65 * q_dl
    k = lowe_uptake_coefficient("sevoflurane")
    record(
        "Lowe uptake coefficient f MAC lambda Q, sevoflurane, 70 kg",
        k.value.to("mL/min").magnitude,
        expected,
        "Lowe & Ernst 1981; Mapleson 1996; Katoh 1992",
        "rel 1e-12",
        k.value.to("mL/min").magnitude == pytest.approx(expected, rel=1e-12),
        "mL/min",
    )
    assert k.value.to("mL/min").magnitude == pytest.approx(expected, rel=1e-12)
    assert k.warnings == ()
    # MAC multiple and f multiply the target; age follows Mapleson (10^(-0.00269 x 30) at 70 years).
    k2 = lowe_uptake_coefficient("sevoflurane", mac_multiple=2.0, factor=1.0, age=70)
    assert k2.value.magnitude == pytest.approx(expected / 1.3 * 2.0 * 10 ** (-0.00269 * 30), rel=1e-12)


def test_lowe_rate_falls_with_square_root_of_time():
    # Lowe and Ernst 1981: rate = k t^-1/2; at 4, 9, 16 min it is k/2, k/3, k/4. Round-off only.
    k = lowe_uptake_coefficient("isoflurane", cardiac_output="5 L/min").value.magnitude
    r = lowe_uptake_rate("isoflurane", Q_(np.array([1.0, 4.0, 9.0, 16.0]), "min"), cardiac_output="5 L/min")
    assert r.value.to("mL/min").magnitude == pytest.approx(k / np.array([1, 2, 3, 4]), rel=1e-12)


def test_lowe_unit_dose_identity():
    # Lowe and Ernst 1981: equal unit doses in 0-1, 1-4, 4-9 ... min, so the cumulative uptake at
    # n^2 min is n unit doses. Float round-off only.
    unit = lowe_unit_dose("desflurane", weight="80 kg").value.to("mL").magnitude
    times = lowe_dose_times(6)
    assert times.to("min").magnitude.tolist() == [1, 4, 9, 16, 25, 36]
    cum = lowe_cumulative_uptake("desflurane", times, weight="80 kg").value.to("mL").magnitude
    assert cum == pytest.approx(unit * np.arange(1, 7), rel=1e-12)
    assert np.diff(np.concatenate([[0.0], cum])) == pytest.approx(np.full(6, unit), rel=1e-12)


def test_lowe_cumulative_is_integral_of_rate():
    # scipy quad integrates the t^-1/2 rate (integrable singularity at 0); quad's own error estimate
    # is below 1e-8 relative here, so rel 1e-6.
    k = lowe_uptake_coefficient("halothane").value.magnitude
    integral, _ = quad(lambda t: k / np.sqrt(t), 0.0, 37.0)
    cum = lowe_cumulative_uptake("halothane", "37 min").value.to("mL").magnitude
    assert cum == pytest.approx(integral, rel=1e-6)


def test_lowe_warnings_and_errors():
    # The law never saturates (Lowe & Ernst 1981: no tissue fills): long times are flagged, not clipped.
    r = lowe_cumulative_uptake("sevoflurane", "6 h")
    assert "SQUARE_ROOT_LAW_LONG" in [c for c, _ in r.warnings]
    assert r.value.magnitude > lowe_cumulative_uptake("sevoflurane", "4 h").value.magnitude
    # Brody outside the validated weights and Mapleson below 1 year pass their warnings on.
    codes = [c for c, _ in lowe_unit_dose("sevoflurane", weight="5 kg", age="6 months").warnings]
    assert codes == ["AGE_BELOW_MAPLESON_RANGE", "PATIENT_WEIGHT_OUTSIDE_VALIDATED"]
    with pytest.raises(InputError, match="more than 0 min"):
        lowe_uptake_rate("sevoflurane", "0 min")
    with pytest.raises(InputError, match="mac_multiple"):
        lowe_unit_dose("sevoflurane", mac_multiple=-1)
    with pytest.raises(InputError, match="patient.cardiac_output"):
        lowe_unit_dose("sevoflurane", cardiac_output="0 L/min")
    with pytest.raises(InputError, match="count"):
        lowe_dose_times(0)


# --- Severinghaus nitrous oxide --------------------------------------------------------------------


@pytest.mark.parametrize("t,rate", [(1, 1000.0), (4, 500.0), (25, 200.0), (100, 100.0)])
def test_severinghaus_rate(t, rate):
    # Severinghaus JW, J Clin Invest 1954;33:1183: about 1000 t^-1/2 mL/min (70 kg, 65-75 %
    # inspired): 1000 at 1 min, 200 at 25 min. The law itself, so round-off only.
    r = severinghaus_uptake_rate(f"{t} min")
    record(
        f"Severinghaus N2O uptake rate at {t} min (law)",
        r.value.to("mL/min").magnitude,
        rate,
        "Severinghaus, J Clin Invest 1954;33:1183",
        "rel 1e-12",
        r.value.to("mL/min").magnitude == pytest.approx(rate, rel=1e-12),
        "mL/min",
    )
    assert r.value.to("mL/min").magnitude == pytest.approx(rate, rel=1e-12)
    assert r.warnings == ()


def test_severinghaus_cumulative():
    # Severinghaus 1954: cumulative 2000 sqrt(t) mL: 2 L at 1 min, 20 L at 100 min.
    t = np.array([0.0, 1.0, 100.0])
    r = severinghaus_cumulative_uptake(Q_(t, "min"))
    assert r.value.to("mL").magnitude == pytest.approx(2000.0 * np.sqrt(t), rel=1e-12)


def test_severinghaus_scaling_is_ours_and_flagged():
    # Our scaling (stated in the docstring): by (kg/70)^0.75 and by F_I / 0.70.
    r = severinghaus_uptake_rate("1 min", weight="35 kg", inspired="35 %")
    assert r.value.magnitude == pytest.approx(1000.0 * 0.5**0.75 * 0.5, rel=1e-12)
    assert [c for c, _ in r.warnings] == ["SEVERINGHAUS_WEIGHT_SCALED", "SEVERINGHAUS_FRACTION_SCALED"]
    with pytest.raises(InputError, match="inspired_nitrous_oxide"):
        severinghaus_uptake_rate("1 min", inspired="120 %")
    with pytest.raises(InputError, match="patient.weight"):
        severinghaus_cumulative_uptake("1 min", weight="0.1 kg")


# --- Dion's formula ------------------------------------------------------------------------------


def test_dion_worked_example_isoflurane():
    # Dion P, Can J Anaesth 1992;39:633: liquid mL = C% x FGF (L/min) x t (min) x MW / (2412 x d).
    # Reconstructed example: 1 % isoflurane at 1 L/min for 60 min, MW 184.49 g/mol (CRC), d 1.50 g/mL:
    # 1 x 1 x 60 x 184.49 / (2412 x 1.50) = 11069.4 / 3618 = 3.0595 mL. Round-off only.
    v = dion_liquid_volume("1 %", "1 L/min", "60 min", "isoflurane")
    record(
        "Dion liquid isoflurane, 1 % at 1 L/min for 60 min",
        v.to("mL").magnitude,
        11069.4 / 3618.0,
        "Dion, Can J Anaesth 1992;39:633 (formula, worked here)",
        "rel 1e-12",
        v.to("mL").magnitude == pytest.approx(11069.4 / 3618.0, rel=1e-12),
        "mL",
    )
    assert v.to("mL").magnitude == pytest.approx(11069.4 / 3618.0, rel=1e-12)
    # Cost at an invented demo price of 0.25 per mL: 0.765.
    assert dion_cost("1 %", "1 L/min", "60 min", "isoflurane", 0.25) == pytest.approx(0.25 * 11069.4 / 3618.0)


@pytest.mark.validation
@pytest.mark.parametrize("name,per_percent_litre_hour", [("isoflurane", 3.0), ("sevoflurane", 3.3)])
def test_dion_against_published_rule_of_thumb(name, per_percent_litre_hour):
    # Dhulkhed V et al., Indian J Anaesth 2013;57:455: liquid mL/h ~ dial % x FGF (L/min) x 3
    # (sevoflurane 3.3); e.g. 2 % isoflurane at 1 L/min uses 6 mL/h. The rule is rounded to one or two
    # figures, so 5 %.
    v = dion_liquid_volume("2 %", "1 L/min", "1 h", name).to("mL").magnitude
    record(
        f"{name} liquid, 2 % at 1 L/min for 1 h (rule of thumb)",
        v,
        2 * per_percent_litre_hour,
        "Dhulkhed et al., Indian J Anaesth 2013;57:455",
        "rel 5 %",
        v == pytest.approx(2 * per_percent_litre_hour, rel=0.05),
        "mL",
    )
    assert v == pytest.approx(2 * per_percent_litre_hour, rel=0.05)


def test_exact_molar_volume_matches_dion_near_21_degc():
    # 24.12 L/mol = R T / p at 101.325 kPa gives T = 24.12e-3 x 101325 / R - 273.15 = 20.8 degC
    # (R from scipy.constants, CODATA). At that temperature the two forms agree to the 4 digits of 2412.
    t_c = 24.12e-3 * 101325.0 / scipy.constants.R - 273.15
    a = dion_liquid_volume("2 %", "0.5 L/min", "90 min", "desflurane").magnitude
    b = liquid_volume_at("2 %", "0.5 L/min", "90 min", "desflurane", Q_(t_c, "degC")).magnitude
    assert b == pytest.approx(a, rel=1e-9)
    # Colder gas is denser: at 0 degC the same flow carries 293.95/273.15 times more agent (ideal gas).
    cold = liquid_volume_at("2 %", "0.5 L/min", "90 min", "desflurane", "0 degC").magnitude
    assert cold / a == pytest.approx((t_c + 273.15) / 273.15, rel=1e-9)


@pytest.mark.validation
def test_molar_volume_against_codata():
    # CODATA 2018 molar volume of an ideal gas at 273.15 K, 101.325 kPa: 22.413969 L/mol.
    vm = molar_volume("0 degC").to("L/mol").magnitude
    record(
        "ideal-gas molar volume at 0 degC, 101.325 kPa",
        vm,
        22.413969,
        "CODATA 2018",
        "rel 1e-7",
        vm == pytest.approx(22.413969, rel=1e-7),
        "L/mol",
    )
    assert molar_volume("0 degC").to("L/mol").magnitude == pytest.approx(22.413969, rel=1e-7)
    with pytest.raises(InputError, match="temperature"):
        molar_volume("500 degC")


def test_dion_rejects_bad_input():
    with pytest.raises(InputError, match="concentration"):
        dion_liquid_volume("120 %", "1 L/min", "1 h", "isoflurane")
    with pytest.raises(InputError, match="fresh_gas_flow"):
        dion_liquid_volume("1 %", "1 L", "1 h", "isoflurane")
    with pytest.raises(InputError, match="price_per_ml"):
        dion_cost("1 %", "1 L/min", "1 h", "isoflurane", -1.0)


def test_vaporizer_output_correction():
    # Definition of volume fraction: vapour / (carrier + vapour) = D, so vapour = carrier x D/(1-D);
    # at D = 50 % vapour equals carrier. Round-off only.
    for d in (0.01, 0.06, 0.18, 0.5):
        v = vaporizer_vapour_output("2 L/min", Q_(d, "dimensionless")).to("L/min").magnitude
        assert v / (2.0 + v) == pytest.approx(d, rel=1e-12)
    with pytest.raises(InputError, match="vaporizer"):
        vaporizer_vapour_output("1 L/min", "100 %")


# --- Vapour per mL of liquid ---------------------------------------------------------------------


@pytest.mark.parametrize(
    "name,biro", [("sevoflurane", 184.0), ("isoflurane", 195.0), ("desflurane", 210.0), ("halothane", 229.0)]
)
@pytest.mark.validation
def test_vapour_per_liquid_against_biro(name, biro):
    # Biro P, Acta Anaesthesiol Scand 2014 (doi 10.1111/aas.12374): mL vapour from 1 mL liquid at
    # 20 degC. Real vapours give up to 3 % more than ideal (Anesth Analg 1979;58:322): 3 %.
    v = vapour_per_liquid(name, "20 degC").to("mL/mL").magnitude
    record(
        f"{name} vapour per mL of liquid at 20 degC",
        v,
        biro,
        "Biro, Acta Anaesthesiol Scand 2014",
        "rel 3 %",
        v == pytest.approx(biro, rel=0.03),
        "mL/mL",
    )
    assert v == pytest.approx(biro, rel=0.03)
