"""Write estimator/data/real_gas_table.npz: the cylinder gases' real-gas states tabulated from CoolProp.

Usage (from the repository root)::

    uv run python docs/make_real_gas_table.py

The table lets :mod:`estimator.physics.real_gas` answer the states a cylinder inventory normally has
without importing CoolProp (about 1.5 s of start-up); states outside the table still go to CoolProp.
It holds, for each cylinder gas, the compressibility factor Z = p / (rho R T) (R the package's CODATA 2018
gas constant, rho CoolProp's molar density) on a uniform grid of temperature and absolute pressure,
and for nitrous oxide the logarithms of the saturation pressure and of the saturated liquid and
vapour molar densities on a uniform grid of s = (1 - T/Tc)^(1/3) from the lowest table temperature
up to the critical point (s = 0, where the critical pressure and density are stored). The cube root
makes the densities smooth near the critical point, where they vary as (Tc - T)^beta. For the gases
of :mod:`estimator.physics.gas_mixtures` (flowmeter tubes) it holds Z and, where CoolProp has a viscosity
model, the viscosity at tube pressures (up to 1.5 bar). Interpolation
(:mod:`estimator.physics.real_gas_table`) is cubic in each variable; its error against CoolProp, measured by
tests/test_real_gas_table.py, is below 1e-6 relative. The CoolProp version that made the table is
stored in it (``coolprop_version``); re-run this script after a CoolProp upgrade.

References
----------
Bell IH, Wronski J, Quoilin S, Lemort V. Ind Eng Chem Res 2014;53:2498-508 (CoolProp).
"""

from __future__ import annotations

from pathlib import Path

import CoolProp
import numpy as np
from CoolProp.CoolProp import PropsSI

from estimator.constants import GAS_CONSTANT
from estimator.physics.gas_mixtures import COOLPROP_NAMES
from estimator.physics.real_gas import COOLPROP_FLUIDS

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "estimator" / "data" / "real_gas_table.npz"

#: Temperature grid [K]: -45 to +70 degC in 2.5 K steps (cylinder stores and rooms; the inputs
#: accept -40 to +65 degC).
TEMPERATURES = 273.15 + np.arange(-45.0, 70.0 + 1e-9, 2.5)
#: Absolute-pressure grid [Pa] per gas: 0 to 325 bar in 2.5 bar steps for the compressed gases
#: (gauges read up to 300 bar); nitrous oxide as a gas only up to 6 bar, below its vapour pressure at
#: -45 degC (about 7 bar), which covers the residual gas at ambient pressure. The node at p = 0
#: holds the limit Z(T, 0), evaluated at 1 Pa.
PRESSURES = {
    "oxygen": np.arange(0.0, 325.0 + 1e-9, 2.5) * 1e5,
    "air": np.arange(0.0, 325.0 + 1e-9, 2.5) * 1e5,
    "nitrous_oxide": np.arange(0.0, 6.0 + 1e-9, 0.25) * 1e5,
}
#: Absolute-pressure grid [Pa] of the flowmeter gases (density and viscosity in a flowmeter tube): 0 to
#: 1.5 bar in 0.25 bar steps (ambient 22.6 to 108.5 kPa plus up to 20 kPa back pressure).
FLOW_PRESSURES = np.arange(0.0, 1.5 + 1e-9, 0.25) * 1e5
#: Nodes of the saturation grid (uniform in s = (1 - T/Tc)^(1/3)).
SATURATION_NODES = 400


def z_grid(fluid: str, pressures: np.ndarray, output: str = "Z") -> np.ndarray:
    """Z = p / (rho R T) (or the viscosity [Pa s], ``output="V"``) on the temperature x pressure grid."""
    out = np.empty((TEMPERATURES.size, pressures.size))
    for i, t in enumerate(TEMPERATURES):
        for j, p in enumerate(pressures):
            p_eval = max(p, 1.0)
            if output == "V":
                out[i, j] = PropsSI("V", "T", t, "P", p_eval, fluid)
            else:
                out[i, j] = p_eval / (PropsSI("Dmolar", "T", t, "P", p_eval, fluid) * GAS_CONSTANT * t)
    return out


def has_viscosity(fluid: str) -> bool:
    """Whether CoolProp has a viscosity model for the fluid."""
    try:
        return np.isfinite(PropsSI("V", "T", 293.15, "P", 101325.0, fluid))
    except ValueError:
        return False


def saturation_grid(fluid: str) -> tuple[np.ndarray, np.ndarray]:
    """s nodes and log(p_sat [Pa]), log(rho_liquid), log(rho_vapour) [mol/m3] at each node."""
    tc = PropsSI("Tcrit", fluid)
    s = np.linspace(0.0, (1.0 - TEMPERATURES[0] / tc) ** (1.0 / 3.0), SATURATION_NODES)
    rho_c = PropsSI("rhomolar_critical", fluid)
    rows = [np.log([PropsSI("pcrit", fluid), rho_c, rho_c])]
    for x in s[1:]:
        t = tc * (1.0 - x**3)
        rows.append(
            np.log(
                [
                    PropsSI("P", "T", t, "Q", 0, fluid),
                    PropsSI("Dmolar", "T", t, "Q", 0, fluid),
                    PropsSI("Dmolar", "T", t, "Q", 1, fluid),
                ]
            )
        )
    return s, np.array(rows)


def build() -> dict[str, np.ndarray]:
    """All arrays of the table, keyed as :mod:`estimator.physics.real_gas_table` reads them."""
    data: dict[str, np.ndarray] = {
        "coolprop_version": np.array(CoolProp.__version__),
        "gas_constant": np.array(GAS_CONSTANT),
        "temperature": TEMPERATURES,
    }
    for gas, fluid in COOLPROP_FLUIDS.items():
        data[f"{gas}.pressure"] = PRESSURES[gas]
        data[f"{gas}.z"] = z_grid(fluid, PRESSURES[gas])
        data[f"{gas}.molar_mass"] = np.array(PropsSI("M", fluid))
        data[f"{gas}.critical_temperature"] = np.array(PropsSI("Tcrit", fluid))
    for name, fluid in COOLPROP_NAMES.items():
        data[f"flow.{name}.pressure"] = FLOW_PRESSURES
        data[f"flow.{name}.z"] = z_grid(fluid, FLOW_PRESSURES)
        if has_viscosity(fluid):
            data[f"flow.{name}.viscosity"] = z_grid(fluid, FLOW_PRESSURES, "V")
        data[f"flow.{name}.molar_mass"] = np.array(PropsSI("M", fluid))
    sat_min = PropsSI("P", "T", TEMPERATURES[0], "Q", 0, COOLPROP_FLUIDS["nitrous_oxide"])
    assert sat_min > PRESSURES["nitrous_oxide"][-1], "nitrous oxide grid would reach the two-phase region"
    s, logs = saturation_grid(COOLPROP_FLUIDS["nitrous_oxide"])
    data["nitrous_oxide.saturation_s"] = s
    data["nitrous_oxide.saturation_log"] = logs
    return data


if __name__ == "__main__":
    np.savez_compressed(OUT, **build())
    print(f"wrote {OUT.relative_to(ROOT)} (CoolProp {CoolProp.__version__}, {OUT.stat().st_size} bytes)")
