"""Gases and gas mixtures for the flowmeter model: composition, density and viscosity.

A gas is named (oxygen, air, nitrous_oxide, nitrogen, argon, helium, carbon_dioxide), given as
oxygen-concentrator product at a purity, or as a mixture of mole fractions. Pure-gas density and
viscosity come from CoolProp's reference equations; nitrous oxide viscosity, which CoolProp lacks,
from Chapman-Enskog with Lennard-Jones parameters; mixtures take the molar-mass average with
real-gas Z and Wilke's viscosity rule. Reference values live in ``data/flowmeter.toml``, each with
a source and confidence code, validated on first use.

References
----------
.. [1] Wilke CR. A viscosity equation for gas mixtures. J Chem Phys 1950;18:517-9.
.. [2] Neufeld PD, Janzen AR, Aziz RA. J Chem Phys 1972;57:1100 (collision integral), with
   Chapman-Enskog as in Poling, Prausnitz, O'Connell, The Properties of Gases and Liquids, 5th ed. 2001.
.. [3] Bell IH, Wronski J, Quoilin S, Lemort V. Ind Eng Chem Res 2014;53:2498 (CoolProp).

Examples
--------
>>> sorted(resolve_gas("concentrator"))
['argon', 'nitrogen', 'oxygen']
"""

from __future__ import annotations

import math
import tomllib
from functools import cache
from importlib import resources
from typing import Any

import numpy as np

from ..constants import GAS_CONSTANT
from ..errors import InputError
from ..properties import DataError, Sourced, gas
from ..units import Q_, parse_quantity
from ..units import check_range as _check_range

#: Gases the model knows, with their CoolProp fluid names.
COOLPROP_NAMES = {
    "oxygen": "Oxygen",
    "nitrogen": "Nitrogen",
    "argon": "Argon",
    "helium": "Helium",
    "nitrous_oxide": "NitrousOxide",
    "carbon_dioxide": "CarbonDioxide",
    "air": "Air",
}
_DIMS = {
    "temperature": "[temperature]",
    "pressure": "[pressure]",
    "accuracy": "[]",
    "float_diameter": "[length]",
    "rim_length": "[length]",
    "discharge_coefficient": "[]",
    "pressure_drop": "[pressure]",
    "float_density": "[mass] / [length] ** 3",
    "sigma": "[length]",
    "epsilon_over_k": "[temperature]",
    "molar_mass": "[mass] / [substance]",
    "argon_to_oxygen": "[]",
    "lowest_pharmacopoeial_purity": "[]",
}


@cache
def _data() -> dict[str, dict[str, Sourced]]:
    raw = tomllib.loads(resources.files("estimator").joinpath("data/flowmeter.toml").read_text("utf-8"))
    return load_records(raw)


def load_records(raw: dict[str, Any]) -> dict[str, dict[str, Sourced]]:
    """Validate the flowmeter data table: every value with a known source, a code and its dimension.

    Parameters
    ----------
    raw : dict
        The parsed TOML of ``data/flowmeter.toml`` (its ``[sources]`` table included).

    Returns
    -------
    dict of str -> dict of str -> Sourced
        Section -> property -> value (a pint quantity in the file's unit) with its source and code.

    Raises
    ------
    DataError
        On a missing or unknown source, a bad confidence code or a value of the wrong dimension.

    Examples
    --------
    >>> raw = {"sources": {"crc": "CRC Handbook"}, "concentrator": {"argon_to_oxygen": {
    ...     "value": 0.04459, "source": "crc", "confidence": "D"}}}
    >>> load_records(raw)["concentrator"]["argon_to_oxygen"].value.magnitude
    0.04459
    """
    sources = raw.get("sources", {})
    sections = {k: v for k, v in raw.items() if k not in ("sources", "lennard_jones")}
    sections.update({f"lennard_jones.{k}": v for k, v in raw.get("lennard_jones", {}).items()})
    out: dict[str, dict[str, Sourced]] = {}
    for name, props in sections.items():
        out[name] = {}
        for prop, rec in props.items():
            where = f"flowmeter.toml [{name}].{prop}"
            if not isinstance(rec, dict) or rec.get("source") not in sources:
                raise DataError(f"{where}: needs value and a source listed in [sources]")
            if rec.get("confidence") not in ("V", "S", "M", "D", "C"):
                raise DataError(f"{where}: confidence must be one of V S M D C")
            value = rec["value"]
            q = Q_(value.replace("%", "percent")) if isinstance(value, str) else Q_(float(value), "")
            if prop not in _DIMS or not q.check(_DIMS[prop]):
                raise DataError(f"{where}: unknown property or {value!r} has the wrong dimension")
            out[name][prop] = Sourced(q, rec["source"], rec["confidence"], rec.get("note", ""))
    return out


def data_value(section: str, prop: str, unit: str) -> float:
    """One value of ``data/flowmeter.toml`` as a plain float in ``unit``.

    Parameters
    ----------
    section : str
        Section of the file, e.g. ``"concentrator"`` or ``"lennard_jones.nitrous_oxide"``.
    prop : str
        Property name within the section.
    unit : str
        Unit of the result (``""`` for a dimensionless value).

    Returns
    -------
    float
        The value [unit].

    Examples
    --------
    >>> data_value("lennard_jones.nitrous_oxide", "epsilon_over_k", "K")
    232.4
    """
    return float(_data()[section][prop].value.to(unit).magnitude)


def concentrator_composition(purity: Any) -> dict[str, float]:
    """Oxygen concentrator product: O2 at ``purity``, argon in its air ratio to O2, rest nitrogen.

    Parameters
    ----------
    purity : pint.Quantity or str [%]
        Oxygen fraction of the product, 21 % to about 95.7 %.

    Returns
    -------
    dict of str -> float
        Mole fractions [-] of oxygen, argon and nitrogen.

    References
    ----------
    CRC Handbook of Chemistry and Physics (composition of dry air: Ar/O2 = 0.00934 / 0.20946 by volume).

    Examples
    --------
    >>> {k: round(v, 4) for k, v in concentrator_composition("93 %").items()}
    {'oxygen': 0.93, 'argon': 0.0415, 'nitrogen': 0.0285}
    """
    x = float(parse_quantity(purity, "purity", "fraction").to("").magnitude)
    ratio = data_value("concentrator", "argon_to_oxygen", "")
    top = 1.0 / (1.0 + ratio)
    if not 0.21 <= x <= top:
        raise InputError("purity", purity, f"21 to {100 * top:.1f} % oxygen (argon passes a concentrator with oxygen)")
    return {"oxygen": x, "argon": ratio * x, "nitrogen": 1.0 - x - ratio * x}


def resolve_gas(spec: Any, purity: Any = None, field_name: str = "gas") -> dict[str, float]:
    """Mole fractions of a gas given by name, as ``"concentrator"`` or as a mixture.

    ``spec`` is a name (oxygen, air, nitrous_oxide, nitrogen, argon, helium, carbon_dioxide,
    concentrator), a dict name -> fraction, or text ``"oxygen=30 %, nitrous_oxide=70 %"``. Mixture
    fractions must sum to 1 within 0.001 (they are then scaled to sum exactly); air in a mixture
    counts as its N2, O2 and Ar.

    Parameters
    ----------
    spec : str or dict of str -> fraction
        Gas name, ``"concentrator"``, or mixture of mole fractions [-] or [%].
    purity : pint.Quantity or str, optional [%]
        Oxygen purity of concentrator product; default 93 %.
    field_name : str
        Name of the input field, for the error message.

    Returns
    -------
    dict of str -> float
        Mole fractions [-] summing to 1.

    References
    ----------
    CRC Handbook of Chemistry and Physics (composition of dry air, for air inside a mixture).

    Examples
    --------
    >>> resolve_gas("oxygen=0.3, nitrous_oxide=70 %")
    {'oxygen': 0.3, 'nitrous_oxide': 0.7}
    """
    if isinstance(spec, str) and "=" in spec:
        pairs = [part.split("=", 1) for part in spec.split(",") if part.strip()]
        spec = {k.strip(): v.strip() for k, v in pairs}
    if isinstance(spec, str):
        key = spec.strip().lower().replace(" ", "_").replace("-", "_")
        if key in ("concentrator", "oxygen_93", "o2_93"):
            return concentrator_composition("93 %" if purity is None else purity)
        known = "one of " + ", ".join(sorted({*COOLPROP_NAMES, "concentrator"}))
        try:
            name = "helium" if key in ("helium", "he") else gas(key, field_name).name
        except InputError:
            raise InputError(field_name, spec, known) from None
        if name not in COOLPROP_NAMES:
            raise InputError(field_name, spec, known)
        return {name: 1.0}
    if not isinstance(spec, dict) or not spec:
        raise InputError(field_name, spec, "a gas name or a mixture such as 'oxygen=30 %, nitrous_oxide=70 %'")
    out: dict[str, float] = {}
    for key, frac in spec.items():
        x = float(parse_quantity(frac, f"{field_name}.{key}", "fraction").to("").magnitude)
        _check_range(Q_(x, ""), f"{field_name}.{key}", 0.0, 1.0, value=frac)
        parts = resolve_gas(key, purity, field_name)
        if parts == {"air": 1.0} and len(spec) > 1:
            air = gas("air").records
            parts = {g: air[f"{g}_fraction"].value for g in ("oxygen", "nitrogen", "argon")}
            parts["nitrogen"] += 1.0 - sum(parts.values())
        for g, y in parts.items():
            out[g] = out.get(g, 0.0) + x * y
    total = sum(out.values())
    if abs(total - 1.0) > 1e-3:
        raise InputError(field_name, spec, f"fractions that sum to 1 (these sum to {total:.4g})")
    return {g: y / total for g, y in out.items()}


def chapman_enskog_viscosity(t: float, sigma: float, epsilon_over_k: float, molar_mass: float) -> float:
    """Dilute-gas viscosity [Pa s] by Chapman-Enskog with a Lennard-Jones potential.

    Parameters
    ----------
    t : float [K]
    sigma : float [angstrom]
        Lennard-Jones collision diameter.
    epsilon_over_k : float [K]
        Lennard-Jones well depth over Boltzmann's constant.
    molar_mass : float [g/mol]

    Returns
    -------
    float
        Viscosity [Pa s].

    References
    ----------
    Poling, Prausnitz, O'Connell 2001, eq. 9-3.9; collision integral of Neufeld et al. 1972.

    Examples
    --------
    >>> round(chapman_enskog_viscosity(293.15, 3.467, 106.7, 31.999) * 1e6, 1)
    20.2
    """
    ts = t / epsilon_over_k
    omega = 1.16145 * ts**-0.14874 + 0.52487 * math.exp(-0.77320 * ts) + 2.16178 * math.exp(-2.43787 * ts)
    return 26.69e-7 * math.sqrt(molar_mass * t) / (sigma**2 * omega)


@cache
def pure_gas_properties(name: str, t: float, p: float) -> tuple[float, float, float]:
    """Density [kg/m3], viscosity [Pa s] and molar mass [kg/mol] of a pure gas at t [K], p [Pa].

    Parameters
    ----------
    name : str
        A key of ``COOLPROP_NAMES``.
    t : float [K]
    p : float [Pa], absolute

    Returns
    -------
    tuple of float
        Density [kg/m^3], viscosity [Pa s], molar mass [kg/mol].

    References
    ----------
    Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp); nitrous oxide viscosity by
    :func:`chapman_enskog_viscosity` with Lennard-Jones parameters of Svehla 1962 (NASA TR R-132).

    Examples
    --------
    >>> rho, mu, m = pure_gas_properties("oxygen", 293.15, 101325.0)
    >>> round(rho, 3), round(mu * 1e6, 2)
    (1.331, 20.27)
    """
    from .real_gas import props_si  # CoolProp, imported lazily: keeps the app start fast
    from .real_gas_table import table_flow_gas

    fluid = COOLPROP_NAMES[name]
    tabulated = table_flow_gas(name, t, p)  # CoolProp values tabulated (1e-6); None outside the table
    if tabulated is not None:
        z, mu_table, molar_mass = tabulated
        rho = p * molar_mass / (z * GAS_CONSTANT * t)
    else:
        rho, mu_table, molar_mass = props_si()("D", "T", t, "P", p, fluid), None, props_si()("M", fluid)
    if f"lennard_jones.{name}" in _data():  # CoolProp has no viscosity model for it
        lj = f"lennard_jones.{name}"
        mu = chapman_enskog_viscosity(
            t,
            data_value(lj, "sigma", "angstrom"),
            data_value(lj, "epsilon_over_k", "K"),
            data_value(lj, "molar_mass", "g/mol"),
        )
    elif mu_table is not None:
        mu = mu_table
    else:
        mu = props_si()("V", "T", t, "P", p, fluid)
    return rho, mu, molar_mass


def wilke_viscosity(x: Any, mu: Any, m: Any) -> float:
    """Viscosity of a gas mixture by Wilke's rule (Wilke 1950).

    Parameters
    ----------
    x : array_like [-]
        Mole fractions.
    mu : array_like [Pa s]
        Viscosities of the components.
    m : array_like [g/mol]
        Molar masses (any one unit: only their ratios enter).

    Returns
    -------
    float
        Mixture viscosity [Pa s].

    References
    ----------
    Wilke CR. J Chem Phys 1950;18:517-9.

    Examples
    --------
    >>> round(wilke_viscosity([1.0], [2e-5], [32.0]) * 1e5, 6)
    2.0
    """
    x, mu, m = (np.asarray(v, dtype=float) for v in (x, mu, m))
    phi = (1 + np.sqrt(mu[:, None] / mu[None, :]) * (m[None, :] / m[:, None]) ** 0.25) ** 2 / np.sqrt(
        8 * (1 + m[:, None] / m[None, :])
    )
    return float(np.sum(x * mu / (phi @ x)))


def mixture_properties(composition: dict[str, float], t: float, p: float) -> tuple[float, float]:
    """Density [kg/m3] and viscosity [Pa s] of a mixture at t [K], p [Pa].

    Density: molar mass average with the mole-fraction average of the components' Z (real gas,
    adequate at these pressures where Z - 1 is of order 1e-3); viscosity: Wilke (1950).

    Parameters
    ----------
    composition : dict of str -> float
        Mole fractions [-], as :func:`resolve_gas` returns them.
    t : float [K]
    p : float [Pa], absolute

    Returns
    -------
    tuple of float
        Density [kg/m^3] and viscosity [Pa s].

    References
    ----------
    Wilke CR. J Chem Phys 1950;18:517-9; Bell IH et al. Ind Eng Chem Res 2014;53:2498 (CoolProp).

    Examples
    --------
    >>> rho, mu = mixture_properties({"oxygen": 0.3, "nitrous_oxide": 0.7}, 293.15, 101325.0)
    >>> round(rho, 3), round(mu * 1e6, 2)
    (1.687, 15.87)
    """
    names = list(composition)
    if len(names) == 1:
        return pure_gas_properties(names[0], t, p)[:2]
    x = np.array([composition[n] for n in names])
    props = np.array([pure_gas_properties(n, t, p) for n in names])
    rho, mu, m = props.T
    z = p * m / (rho * GAS_CONSTANT * t)
    return float(p * np.dot(x, m) / (np.dot(x, z) * GAS_CONSTANT * t)), wilke_viscosity(x, mu, m)
