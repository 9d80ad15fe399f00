"""The real-gas table against CoolProp: a consistency check (the table is made from CoolProp), not validation.

States are drawn with a fixed seed, so they fall between the table's nodes; the bound is the
table's stated interpolation error (TABLE_TOLERANCE, 1e-6 relative). States outside the table go
to CoolProp itself and must give its value.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import CoolProp
import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI

from estimator.constants import GAS_CONSTANT
from estimator.physics import real_gas
from estimator.physics.gas_mixtures import COOLPROP_NAMES, pure_gas_properties
from estimator.physics.real_gas import (
    COOLPROP_FLUIDS,
    compressibility,
    molar_density,
    molar_mass,
    pressure_at,
    saturated_density,
    vapour_pressure,
)
from estimator.physics.real_gas_table import (
    TABLE_TOLERANCE,
    coolprop_version,
    table,
    table_flow_gas,
    table_pressure,
    table_saturation,
    table_z,
)
from estimator.units import Q_

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = 300


def draws(low: float, high: float, n: int = SAMPLES, seed: int = 0) -> np.ndarray:
    """n values drawn uniformly in [low, high] with a fixed seed."""
    return np.random.default_rng(seed).uniform(low, high, n)


def t_range() -> tuple[float, float]:
    grid = table()["temperature"]
    return float(grid[0]), float(grid[-1])


@pytest.mark.parametrize("gas", list(COOLPROP_FLUIDS))
def test_density_matches_coolprop_between_nodes(gas):
    p_max = float(table()[f"{gas}.pressure"][-1])
    ts, ps = draws(*t_range(), seed=1), draws(1e3, p_max, seed=2)
    worst = 0.0
    for t, p in zip(ts, ps, strict=True):
        got = molar_density(gas, Q_(t, "K"), Q_(p, "Pa")).to("mol/m^3").magnitude
        expected = PropsSI("Dmolar", "T", t, "P", p, COOLPROP_FLUIDS[gas])
        worst = max(worst, abs(got / expected - 1))
        assert table_z(gas, t, p) is not None  # the state is inside the table
    assert worst <= TABLE_TOLERANCE


@pytest.mark.parametrize("gas", ["oxygen", "air"])
def test_pressure_from_density_inverts_the_table(gas):
    ts, ps = draws(*t_range(), seed=3), draws(0.5e5, 300e5, seed=4)
    worst = 0.0
    for t, p in zip(ts, ps, strict=True):
        rho = PropsSI("Dmolar", "T", t, "P", p, COOLPROP_FLUIDS[gas])
        got = pressure_at(gas, Q_(t, "K"), Q_(rho, "mol/m^3")).to("Pa").magnitude
        worst = max(worst, abs(got / p - 1))
    # Z error e gives a pressure error e / (1 - p dZ/dp / Z); p dZ/dp / Z stays below 0.5 here.
    assert worst <= 2 * TABLE_TOLERANCE


def test_saturation_matches_coolprop_up_to_the_critical_point():
    tc = real_gas.critical_temperature("nitrous_oxide").to("K").magnitude
    ts = np.concatenate([draws(t_range()[0], tc - 0.01, seed=5), tc - draws(0.001, 0.5, 20, seed=6)])
    worst = np.zeros(3)
    for t in ts:
        fluid = COOLPROP_FLUIDS["nitrous_oxide"]
        expected = np.array(
            [
                PropsSI("P", "T", t, "Q", 0, fluid),
                PropsSI("Dmolar", "T", t, "Q", 0, fluid),
                PropsSI("Dmolar", "T", t, "Q", 1, fluid),
            ]
        )
        got = np.array(table_saturation("nitrous_oxide", t))
        worst = np.maximum(worst, np.abs(got / expected - 1))
    assert np.all(worst <= TABLE_TOLERANCE), worst
    liquid = saturated_density("nitrous_oxide", Q_(20, "degC"), "liquid").to("mol/m^3").magnitude
    assert liquid == pytest.approx(PropsSI("Dmolar", "T", 293.15, "Q", 0, "NitrousOxide"), rel=TABLE_TOLERANCE)


@pytest.mark.parametrize("name", list(COOLPROP_NAMES))
def test_flowmeter_gases_match_coolprop(name):
    ts, ps = draws(*t_range(), seed=7), draws(1e3, 1.5e5, seed=8)
    fluid = COOLPROP_NAMES[name]
    worst_z, worst_mu = 0.0, 0.0
    for t, p in zip(ts, ps, strict=True):
        z, mu, m = table_flow_gas(name, t, p)
        expected_z = p / (PropsSI("Dmolar", "T", t, "P", p, fluid) * GAS_CONSTANT * t)
        worst_z = max(worst_z, abs(z / expected_z - 1))
        if mu is not None:
            worst_mu = max(worst_mu, abs(mu / PropsSI("V", "T", t, "P", p, fluid) - 1))
        assert m == PropsSI("M", fluid)
    assert worst_z <= TABLE_TOLERANCE and worst_mu <= TABLE_TOLERANCE


def test_constants_are_coolprops():
    for gas, fluid in COOLPROP_FLUIDS.items():
        assert molar_mass(gas).to("kg/mol").magnitude == PropsSI("M", fluid)
        assert real_gas.critical_temperature(gas).to("K").magnitude == PropsSI("Tcrit", fluid)


def test_table_was_made_with_the_installed_coolprop():
    # After a CoolProp upgrade re-run docs/make_real_gas_table.py (the accuracy tests above would
    # also catch a changed equation of state).
    assert coolprop_version() == CoolProp.__version__


class Counting:
    """props_si stand-in that counts the CoolProp calls."""

    def __init__(self):
        self.calls = 0

    def __call__(self):
        self.calls += 1
        return PropsSI


@pytest.mark.parametrize(
    "gas,temp_c,bar",
    [("oxygen", 15, 400), ("air", 80, 200), ("air", -60, 100), ("nitrous_oxide", 20, 20), ("nitrous_oxide", 40, 70)],
)
def test_outside_the_table_coolprop_answers(monkeypatch, gas, temp_c, bar):
    counting = Counting()
    monkeypatch.setattr(real_gas, "props_si", counting)
    t, p = temp_c + 273.15, bar * 1e5
    assert table_z(gas, t, p) is None
    got = molar_density(gas, Q_(temp_c, "degC"), Q_(bar, "bar")).to("mol/m^3").magnitude
    assert counting.calls == 1
    assert got == pytest.approx(PropsSI("Dmolar", "T", t, "P", p, COOLPROP_FLUIDS[gas]), rel=1e-12)
    rho = Q_(got, "mol/m^3")
    assert table_pressure(gas, t, got) is None
    assert pressure_at(gas, Q_(t, "K"), rho).to("Pa").magnitude == pytest.approx(p, rel=1e-9)


def test_table_and_coolprop_fallback_agree_at_the_same_state(monkeypatch):
    # The same call answered by the table and, with the table switched off, by CoolProp.
    args = ("oxygen", Q_(10, "degC"), Q_(191.3, "bar"))
    table_rho, table_z_value = molar_density(*args), compressibility(*args)
    table_vp = vapour_pressure("nitrous_oxide", Q_(22, "degC"))
    monkeypatch.setattr(real_gas, "table_z", lambda *a: None)
    monkeypatch.setattr(real_gas, "table_saturation", lambda *a: None)
    assert molar_density(*args).magnitude == pytest.approx(table_rho.magnitude, rel=TABLE_TOLERANCE)
    assert compressibility(*args) == pytest.approx(table_z_value, rel=TABLE_TOLERANCE)
    assert vapour_pressure("nitrous_oxide", Q_(22, "degC")).magnitude == pytest.approx(
        table_vp.magnitude, rel=TABLE_TOLERANCE
    )


def test_flowmeter_gas_outside_the_table_uses_coolprop():
    rho, mu, m = pure_gas_properties("oxygen", 293.15, 3e5)  # 3 bar: above the 1.5 bar table
    assert rho == pytest.approx(PropsSI("D", "T", 293.15, "P", 3e5, "Oxygen"), rel=1e-12)
    assert mu == pytest.approx(PropsSI("V", "T", 293.15, "P", 3e5, "Oxygen"), rel=1e-12)


def test_supply_run_does_not_import_coolprop():
    # Structural check: the demo inventory's states are all inside the table.
    code = (
        "import sys\nfrom estimator.cli import main\n"
        "try:\n    main(['supply', 'demo_cases/highland_clinic_inventory.toml', '--json'])\n"
        "except SystemExit:\n    pass\n"
        "print('CoolProp' in sys.modules, file=sys.stderr)"
    )
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert run.stderr.strip().splitlines()[-1] == "False", run.stderr[-2000:]
    assert run.stdout.strip().startswith("{")
