"""Tabulated real-gas states of the cylinder gases, so that common states need no CoolProp import.

The table (``data/real_gas_table.npz``, written by ``docs/make_real_gas_table.py`` from CoolProp,
whose version it records) holds Z = p / (rho R T) of oxygen, air and nitrous oxide on a grid of
temperature and absolute pressure, and nitrous oxide's saturation pressure and saturated densities
from -45 degC to the critical point. Values come from tensor-product cubic Lagrange interpolation
(numpy only); the error against CoolProp is below 1e-6 relative over the table (a consistency check
in tests/test_real_gas_table.py). Each function returns None for a state outside the table, and the
caller (:mod:`estimator.physics.real_gas`) then asks CoolProp; nothing is extrapolated.

References
----------
.. [1] Bell IH, Wronski J, Quoilin S, Lemort V. Ind Eng Chem Res 2014;53:2498-508 (CoolProp, the
   source of every tabulated value).

Examples
--------
>>> round(table_z("air", 288.15, 300e5), 3)
1.101
>>> table_z("air", 288.15, 400e5) is None
True
"""

from __future__ import annotations

from functools import cache
from importlib import resources
from typing import Any

import numpy as np

from ..constants import GAS_CONSTANT

#: Bound on the relative error of a tabulated value against CoolProp (Z, molar density, saturation
#: pressure and densities); measured in tests/test_real_gas_table.py, which fails above it.
TABLE_TOLERANCE = 1e-6

#: Relative margin for the ends of the grids (rounding in unit conversions must not push a node
#: state out of the table).
_EDGE = 1e-12


@cache
def table() -> dict[str, Any]:
    """The arrays of the table, loaded once.

    Returns
    -------
    dict of str -> numpy.ndarray
        Grids in SI units: temperature [K], pressure [Pa], Z [-], viscosity [Pa s], molar densities
        [mol/m^3], molar mass [kg/mol]; keyed ``"<gas>.<field>"``.

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> float(table()["gas_constant"])
    8.314462618
    """
    with resources.files("estimator").joinpath("data/real_gas_table.npz").open("rb") as fh:
        with np.load(fh, allow_pickle=False) as npz:
            data = {key: npz[key] for key in npz.files}
    if float(data["gas_constant"]) != GAS_CONSTANT:  # pragma: no cover - guards a stale table
        raise RuntimeError("real_gas_table.npz was made with another gas constant; re-run docs/make_real_gas_table.py")
    return data


def coolprop_version() -> str:
    """Version of CoolProp that made the table.

    Returns
    -------
    str
        CoolProp version, e.g. ``"8.0.0"``.

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> coolprop_version().count(".") >= 1
    True
    """
    return str(table()["coolprop_version"])


def _weights(x: float, nodes: np.ndarray) -> tuple[int, np.ndarray] | None:
    """First node index and the 4 cubic Lagrange weights at x on a uniform grid; None outside it."""
    x0, x1, n = float(nodes[0]), float(nodes[-1]), nodes.size
    span = (x1 - x0) * _EDGE
    if not (x0 - span <= x <= x1 + span):
        return None
    h = (x1 - x0) / (n - 1)
    i = min(max(int((x - x0) // h) - 1, 0), n - 4)
    xs = x0 + h * np.arange(i, i + 4)
    d = x - xs
    w = np.array(
        [
            d[1] * d[2] * d[3] / (-6.0 * h**3),
            d[0] * d[2] * d[3] / (2.0 * h**3),
            d[0] * d[1] * d[3] / (-2.0 * h**3),
            d[0] * d[1] * d[2] / (6.0 * h**3),
        ]
    )
    return i, w


def _grid(key: str, fields: tuple[str, ...], t: float, p: float) -> list[float | None] | None:
    """Bicubic values of ``key.field`` grids at t [K] and p [Pa] (None for a field not stored);
    None for a state outside the grid or a key not in the table."""
    data = table()
    if p <= 0.0 or f"{key}.pressure" not in data:
        return None
    wt = _weights(t, data["temperature"])
    wp = _weights(p, data[f"{key}.pressure"])
    if wt is None or wp is None:
        return None
    (i, a), (j, b) = wt, wp
    out: list[float | None] = []
    for field in fields:
        grid = data.get(f"{key}.{field}")
        out.append(None if grid is None else float(a @ grid[i : i + 4, j : j + 4] @ b))
    return out


def table_z(gas: str, t: float, p: float) -> float | None:
    """Z = p / (rho R T) of a gas at t [K] and absolute p [Pa] from the table; None outside it.

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    t : float [K]
    p : float [Pa], absolute

    Returns
    -------
    float or None
        Compressibility factor [-]; None outside the table.

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> round(table_z("oxygen", 288.15, 200e5), 4)
    0.9311
    """
    found = _grid(gas, ("z",), t, p)
    return None if found is None else found[0]


def table_flow_gas(name: str, t: float, p: float) -> tuple[float, float | None, float] | None:
    """Z, viscosity [Pa s] (None where CoolProp has no model) and molar mass [kg/mol] of a
    flowmeter gas (:mod:`estimator.physics.gas_mixtures`) at t [K] and p [Pa] up to 1.5 bar; None outside.

    Parameters
    ----------
    name : str
        Flowmeter gas name (``"oxygen"``, ``"nitrogen"``...).
    t : float [K]
    p : float [Pa], absolute

    Returns
    -------
    tuple of (float, float or None, float) or None
        Z [-], viscosity [Pa s] and molar mass [kg/mol]; None outside the table.

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> z, mu, m = table_flow_gas("oxygen", 293.15, 101325.0)
    >>> round(mu * 1e6, 2), round(m * 1000, 3)
    (20.27, 31.999)
    """
    found = _grid(f"flow.{name}", ("z", "viscosity"), t, p)
    if found is None or found[0] is None:
        return None
    return found[0], found[1], float(table()[f"flow.{name}.molar_mass"])


def table_pressure(gas: str, t: float, rho: float) -> float | None:
    """Absolute pressure [Pa] at t [K] and molar density rho [mol/m3] from the table; None outside it.

    Solves p = rho R T Z(T, p) by fixed-point iteration (a contraction: p dZ/dp is well below Z here).

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    t : float [K]
    rho : float [mol/m^3]

    Returns
    -------
    float or None
        Absolute pressure [Pa]; None outside the table.

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> p = table_pressure("oxygen", 288.15, 200e5 / (table_z("oxygen", 288.15, 200e5) * GAS_CONSTANT * 288.15))
    >>> round(p / 1e5, 9)
    200.0
    """
    if rho <= 0.0:
        return None
    ideal = rho * GAS_CONSTANT * t
    p = ideal
    for _ in range(200):
        z = table_z(gas, t, p)
        if z is None:
            return None
        p_next = ideal * z
        if abs(p_next - p) <= 1e-14 * p:
            return p_next if table_z(gas, t, p_next) is not None else None
        p = p_next
    return None  # pragma: no cover - the iteration contracts over the whole table


def table_saturation(gas: str, t: float) -> tuple[float, float, float] | None:
    """Saturation pressure [Pa] and saturated liquid and vapour molar densities [mol/m3] at t [K].

    None outside the tabulated two-phase range (below -45 degC, at or above the critical
    temperature) or for a gas without a saturation table.

    Parameters
    ----------
    gas : str
        ``"nitrous_oxide"`` (the one gas with a saturation table).
    t : float [K]

    Returns
    -------
    tuple of float or None
        Pressure [Pa], liquid and vapour molar densities [mol/m^3].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> p, liquid, vapour = table_saturation("nitrous_oxide", 293.15)
    >>> round(p / 1e5, 1), liquid > vapour
    (50.5, True)
    """
    data = table()
    key = f"{gas}.saturation_s"
    if key not in data:
        return None
    tc = float(data[f"{gas}.critical_temperature"])
    if t >= tc:
        return None
    found = _weights((1.0 - t / tc) ** (1.0 / 3.0), data[key])
    if found is None:
        return None
    i, w = found
    p, liquid, vapour = np.exp(w @ data[f"{gas}.saturation_log"][i : i + 4])
    return float(p), float(liquid), float(vapour)


def table_constant(gas: str, name: str) -> float:
    """A tabulated constant: ``molar_mass`` [kg/mol] or ``critical_temperature`` [K].

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    name : {"molar_mass", "critical_temperature"}

    Returns
    -------
    float
        The constant [kg/mol] or [K].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp, the source of every tabulated value).

    Examples
    --------
    >>> round(table_constant("nitrous_oxide", "critical_temperature"), 2)
    309.52
    """
    return float(table()[f"{gas}.{name}"])
