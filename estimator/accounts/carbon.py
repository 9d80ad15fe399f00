"""Carbon accounting: CO2-equivalent of the agent and nitrous oxide released, on a chosen basis.

What is counted
---------------
* **Released agent** = agent delivered less the share the body metabolises: what the patient takes
  up is breathed out after the case and reaches the atmosphere, so uptake is *not* subtracted. The
  metabolised share is a fraction of uptake (``hepatic_extraction`` in ``agents.toml``), or, uptake not
  known, of the delivered agent (an upper bound: released is then low by at most it, 3 % for sevoflurane).
* **Released nitrous oxide** = all N2O delivered (its metabolism is negligible), over (1 - loss) for
  piped supply: Thomas et al. 2024 found 80-98 % lost in hospital manifolds; default 0 (cylinders).
* **Supply carbon** (optional): making and delivering the oxygen and the absorbent, per unit, from
  ``estimator/data/carbon.toml`` or user factors. It is reported apart from the released gases.

CO2e = mass x GWP, with the GWP of the chosen basis (:data:`estimator.choices.CO2E_BASES`).
Every figure carries its basis key and label.

Masses from gas volumes are ideal-gas (15 degC, 101.325 kPa unless stated): real vapours give up to
3 % more per mole (Anesth Analg 1979;58:322); N2O at 1 atm has Z about 0.994 (CoolProp).

References
----------
.. [1] IPCC AR6 WG1 (2021) Ch. 7, Table 7.SM.7; IPCC AR5 WG1 (2013) Table 8.A.1; Sulbaek Andersen
   MP et al., Anesth Analg 2012;114:1081 (GWP values in ``agents.toml``).
.. [2] Ryan SM, Nielsen CJ. Global warming potential of inhaled anesthetics: application to
   clinical use. Anesth Analg 2010;111:92 (CO2e per MAC-hour = agent mass x GWP).
.. [3] Thomas MAF et al., Br J Anaesth 2024;133:1427 (nitrous oxide manifold losses).
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from importlib import resources
from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..properties import AGENTS, CO2E_BASES, GASES, Sourced, validate_records
from ..units import GAS_VOLUME_REFERENCE, Q_
from .accounting import liquid_to_mass, molar_volume, vapour_to_mass  # noqa: F401 (re-exported)

RELEASE_NOTE = (
    "released agent = agent delivered less the share metabolised; the agent taken up "
    "by the patient is breathed out after the case and is counted as released"
)
NITROUS_NOTE = "released nitrous oxide = all nitrous oxide delivered, plus manifold losses when piped"


@cache
def factors() -> dict[str, Sourced]:
    """Supply-carbon and manifold-loss factors of ``estimator/data/carbon.toml``, validated.

    >>> round(factors()["oxygen_supply"].value.to("kg/m**3").magnitude, 2)
    0.17
    """
    text = resources.files("estimator").joinpath("data/carbon.toml").read_text(encoding="utf-8")
    data = tomllib.loads(text)
    # Same record rules as agents.toml: a known source, a confidence code, a parsable unit.
    return validate_records({"sources": data["sources"], "gases": {"factors": data["factors"]}})["factors"]


def basis_label(basis: str) -> str:
    """Label of a CO2e basis key, or InputError naming the valid keys.

    >>> basis_label("ar6_gwp100")
    'IPCC AR6 GWP100'
    """
    if basis not in CO2E_BASES:
        raise InputError("co2e_basis", basis, "one of " + ", ".join(CO2E_BASES))
    return CO2E_BASES[basis][1]


def gwp(species: str, basis: str = "ar6_gwp100") -> float:
    """Global warming potential of an agent or of nitrous oxide on a basis (kg CO2e per kg).

    References
    ----------
    GWP of ``agents.toml``: IPCC AR6 WG1 Table 7.SM.7; IPCC AR5 WG1 Table 8.A.1; Sulbaek Andersen 2012.

    Examples
    --------
    >>> gwp("desflurane", "ar5_gwp100")
    1790.0
    """
    basis_label(basis)
    table = AGENTS.get(species) or GASES.get(species)
    if table is None:
        raise InputError("agent", species, "one of " + ", ".join([*sorted(AGENTS), "nitrous_oxide"]))
    if basis not in table.gwp:
        raise InputError("co2e_basis", basis, f"a basis with a GWP for {species}: " + ", ".join(sorted(table.gwp)))
    return float(table.gwp[basis])


def co2e(mass: pint.Quantity, species: str, basis: str = "ar6_gwp100") -> pint.Quantity:
    """CO2-equivalent [kg] of a released mass on a basis.

    References
    ----------
    Ryan SM, Nielsen CJ. Anesth Analg 2010;111:92 (CO2e = mass x GWP); GWP as :func:`gwp`.

    Examples
    --------
    >>> round(co2e(Q_(1, "kg"), "nitrous_oxide", "ar6_gwp100").to("kg").magnitude)
    273
    """
    return (mass * gwp(species, basis)).to("kg")


def metabolised_fraction(agent_name: str) -> float:
    """Share of agent uptake the body metabolises (``hepatic_extraction`` of ``agents.toml``).

    References
    ----------
    Shiraishi Y, Ikeda K. J Clin Anesth 1990;2:381 (sevoflurane); Carpenter RL et al. Anesthesiology
    1986;65:201 (isoflurane, halothane); Eger EI. Anesth Analg 1992;75:S3 (desflurane); all from memory.

    Examples
    --------
    >>> metabolised_fraction("sevoflurane")
    0.03
    """
    return float(AGENTS[agent_name].hepatic_extraction)


def released_agent_mass(delivered_g: Any, agent_name: str, uptake_g: Any = None) -> np.ndarray:
    """Released agent [g] = delivered - metabolised share of uptake (plain floats or arrays).

    Without ``uptake_g`` the metabolised share is taken of the delivered agent (upper bound).

    >>> round(float(released_agent_mass(100.0, "sevoflurane")), 1)
    97.0
    >>> round(float(released_agent_mass(100.0, "sevoflurane", uptake_g=20.0)), 1)
    99.4
    """
    delivered = np.asarray(delivered_g, dtype=float)
    base = delivered if uptake_g is None else np.minimum(np.asarray(uptake_g, dtype=float), delivered)
    return delivered - metabolised_fraction(agent_name) * base


def nitrous_oxide_released(delivered_l: Any, manifold_loss: float = 0.0) -> np.ndarray:
    """N2O reaching the atmosphere [L]: delivered / (1 - manifold loss).

    References
    ----------
    Thomas MAF et al. Br J Anaesth 2024;133:1427 (80-98 % lost in hospital manifolds).

    Examples
    --------
    >>> round(float(nitrous_oxide_released(100.0, 0.8)), 6)
    500.0
    """
    if not 0.0 <= manifold_loss < 1.0:
        raise InputError(
            "manifold_loss",
            manifold_loss,
            "a share of supplied N2O lost before use, 0 to below 1 (0.80-0.98 audited, Thomas 2024)",
        )
    return np.asarray(delivered_l, dtype=float) / (1.0 - manifold_loss)


@dataclass(frozen=True)
class CarbonResult:
    """CO2e of one case or period, every figure on one basis.

    Attributes
    ----------
    basis, basis_label : str
    agent : str or None
    agent_delivered, agent_metabolised, agent_released : Quantity [g]
    nitrous_oxide_released : Quantity [g]
    agent_co2e, nitrous_oxide_co2e, released_co2e : Quantity [kg] CO2e
    supply_co2e : dict of Quantity [kg] CO2e (oxygen, absorbent) when asked for
    total : Quantity [kg] CO2e, released plus supply
    notes : tuple of str
    """

    basis: str
    basis_label: str
    agent: str | None
    agent_delivered: pint.Quantity
    agent_metabolised: pint.Quantity
    agent_released: pint.Quantity
    nitrous_oxide_released: pint.Quantity
    agent_co2e: pint.Quantity
    nitrous_oxide_co2e: pint.Quantity
    released_co2e: pint.Quantity
    supply_co2e: dict[str, pint.Quantity] = field(default_factory=dict)
    total: pint.Quantity = Q_(0.0, "kg")
    notes: tuple[str, ...] = ()
    warnings: tuple[tuple[str, str], ...] = ()

    def to_json(self) -> dict[str, Any]:
        """JSON object; each CO2e figure is ``{magnitude, units, basis}``."""
        from ..jsonout import jsonable

        def lab(q: pint.Quantity) -> dict[str, Any]:
            return {**jsonable(q), "basis": self.basis}

        return {
            "basis": self.basis,
            "basis_label": self.basis_label,
            "agent": self.agent,
            "agent_delivered": jsonable(self.agent_delivered),
            "agent_metabolised": jsonable(self.agent_metabolised),
            "agent_released": jsonable(self.agent_released),
            "nitrous_oxide_released": jsonable(self.nitrous_oxide_released),
            "agent_co2e": lab(self.agent_co2e),
            "nitrous_oxide_co2e": lab(self.nitrous_oxide_co2e),
            "released_co2e": lab(self.released_co2e),
            "supply_co2e": {k: lab(v) for k, v in self.supply_co2e.items()},
            "total": lab(self.total),
            "notes": list(self.notes),
            "warnings": [{"code": c, "message": m} for c, m in self.warnings],
            "gas_volume_reference": GAS_VOLUME_REFERENCE,
        }


def _v(totals: Mapping[str, Any], key: str, unit: str) -> Any:
    """A total in ``unit`` as a float or array (a Quantity is converted; a plain number is taken as is)."""
    v = totals.get(key)
    if v is None:
        return None
    return v.to(unit).magnitude if isinstance(v, pint.Quantity) else np.asarray(v, dtype=float)


def released_co2e(
    agent_name: str | None,
    basis: str = "ar6_gwp100",
    *,
    delivered_g: Any = 0.0,
    nitrous_oxide_l: Any = 0.0,
    metabolised_g: Any = None,
    uptake_g: Any = None,
    manifold_loss: float = 0.0,
) -> dict[str, np.ndarray]:
    """The one CO2e rule of the package: released agent and nitrous oxide on a basis (floats or arrays).

    Released agent = delivered - metabolised. The metabolised amount is taken, in this order, as
    given (the engine integrates it), as the metabolised share of uptake, or as that share of the
    delivered agent (an upper bound, when uptake is not known). Released N2O = delivered /
    (1 - manifold loss), free gas at 15 degC and 101.325 kPa, converted to mass as an ideal gas.
    CO2e = mass x GWP of :func:`gwp` on ``basis``.

    Returns
    -------
    dict
        ``agent_delivered_g``, ``agent_metabolised_g``, ``agent_released_g``, ``nitrous_oxide_g``,
        ``agent_co2e_kg``, ``nitrous_oxide_co2e_kg``, ``co2e_kg``.

    Examples
    --------
    >>> r = released_co2e("sevoflurane", delivered_g=100.0, uptake_g=20.0)
    >>> round(float(r["agent_released_g"]), 1), round(float(r["co2e_kg"]), 2)
    (99.4, 19.38)
    """
    basis_label(basis)
    delivered = np.asarray(delivered_g, dtype=float)
    if agent_name:
        if metabolised_g is not None:
            released = delivered - np.asarray(metabolised_g, dtype=float)
        else:
            released = released_agent_mass(delivered, agent_name, uptake_g)
        agent_kg = released / 1000.0 * gwp(agent_name, basis)
    else:
        released = np.zeros_like(delivered)
        agent_kg = np.zeros_like(delivered)
    n2o_l = nitrous_oxide_released(nitrous_oxide_l, manifold_loss)
    n2o_g = n2o_l / molar_volume().to("L/mol").magnitude * GASES["nitrous_oxide"].molar_mass.to("g/mol").magnitude
    n2o_kg = n2o_g / 1000.0 * gwp("nitrous_oxide", basis)
    return {
        "agent_delivered_g": delivered,
        "agent_metabolised_g": delivered - released,
        "agent_released_g": released,
        "nitrous_oxide_g": n2o_g,
        "agent_co2e_kg": agent_kg,
        "nitrous_oxide_co2e_kg": n2o_kg,
        "co2e_kg": agent_kg + n2o_kg,
    }


def totals_co2e(
    totals: Mapping[str, Any], agent_name: str | None, basis: str = "ar6_gwp100", manifold_loss: float = 0.0
) -> dict[str, np.ndarray]:
    """:func:`released_co2e` of engine-style totals (one case as Quantities, or batch arrays).

    ``agent_liquid`` [mL] (or ``agent_vapour`` [L]); the metabolised agent from
    ``agent_metabolised`` [L vapour] when given, else from ``agent_uptake`` [L]; ``nitrous_oxide``
    [L]. Case, batch, forecast, supply and policy audit all count CO2e through this function.

    >>> r = totals_co2e({"agent_liquid": Q_(20, "mL"), "nitrous_oxide": Q_(0, "L")}, "sevoflurane")
    >>> round(float(r["co2e_kg"]), 2)
    5.75
    """
    delivered = 0.0
    metabolised = uptake = None
    if agent_name:
        liquid = _v(totals, "agent_liquid", "mL")
        if liquid is not None:
            delivered = liquid * AGENTS[agent_name].liquid_density.to("g/mL").magnitude
        else:
            delivered = _vapour_g(_v(totals, "agent_vapour", "L"), agent_name)
        metabolised = _vapour_g(_v(totals, "agent_metabolised", "L"), agent_name)
        uptake = _vapour_g(_v(totals, "agent_uptake", "L"), agent_name)
    n2o = _v(totals, "nitrous_oxide", "L")
    return released_co2e(
        agent_name,
        basis,
        delivered_g=delivered,
        nitrous_oxide_l=0.0 if n2o is None else n2o,
        metabolised_g=metabolised,
        uptake_g=uptake,
        manifold_loss=manifold_loss,
    )


def _vapour_g(litres: Any, species: str) -> Any:
    if litres is None:
        return None
    return vapour_to_mass(Q_(litres, "L"), species).magnitude


def case_carbon(
    totals: Mapping[str, Any],
    agent_name: str | None,
    basis: str = "ar6_gwp100",
    *,
    manifold_loss: float = 0.0,
    supply: bool = False,
    absorbent_factor: pint.Quantity | None = None,
    oxygen_factor: pint.Quantity | None = None,
) -> CarbonResult:
    """CO2e of one case from engine-style totals.

    Parameters
    ----------
    totals : mapping
        ``agent_liquid`` [mL] (preferred) or ``agent_vapour`` [L]; optional ``agent_uptake`` [L],
        ``nitrous_oxide`` [L], ``oxygen`` [L], ``absorbent`` [g]. Gas litres are free gas at
        15 degC and 101.325 kPa.
    agent_name : str or None
    basis : str
        A key of :data:`estimator.choices.CO2E_BASES`.
    manifold_loss : float [-]
        Share of supplied N2O lost before use (piped supply), 0 to below 1.
    supply : bool
        Also count supply carbon of oxygen (``carbon.toml``) and of absorbent (only with
        ``absorbent_factor`` [kg/kg], for which the package holds no sourced default).
    oxygen_factor : Quantity [kg/m**3], optional
        Overrides the oxygen supply factor.

    Returns
    -------
    CarbonResult

    Examples
    --------
    >>> r = case_carbon({"agent_liquid": Q_(20, "mL"), "nitrous_oxide": Q_(0, "L")}, "sevoflurane")
    >>> round(r.agent_released.to("g").magnitude, 2), round(r.total.to("kg").magnitude, 2)
    (29.49, 5.75)
    """
    label = basis_label(basis)
    warnings: list[tuple[str, str]] = []
    notes = [RELEASE_NOTE, NITROUS_NOTE, f"CO2e basis: {label}"]
    if agent_name and "agent_metabolised" not in totals and "agent_uptake" not in totals:
        notes.append("agent uptake not known: metabolised share taken of the delivered agent")
    if manifold_loss:
        notes.append(f"nitrous oxide includes a manifold loss of {manifold_loss:.0%} of supply")
    r = {k: float(v) for k, v in totals_co2e(totals, agent_name, basis, manifold_loss).items()}
    supply_out: dict[str, pint.Quantity] = {}
    if supply:
        f_o2 = oxygen_factor if oxygen_factor is not None else factors()["oxygen_supply"].value
        supply_out["oxygen"] = (Q_(float(_v(totals, "oxygen", "L") or 0.0), "L") * f_o2).to("kg")
        absorbent_g = float(_v(totals, "absorbent", "g") or 0.0)
        if absorbent_factor is not None:
            supply_out["absorbent"] = (Q_(absorbent_g, "g") * absorbent_factor).to("kg")
        elif absorbent_g > 0:
            msg = "no sourced supply-carbon factor for absorbent is held; give one to count it"
            warnings.append(("ABSORBENT_SUPPLY_NOT_COUNTED", msg))
        notes.append("supply carbon of air is not counted")
    total = r["co2e_kg"] + sum(v.magnitude for v in supply_out.values())
    return CarbonResult(
        basis=basis,
        basis_label=label,
        agent=agent_name,
        agent_delivered=Q_(r["agent_delivered_g"], "g"),
        agent_metabolised=Q_(r["agent_metabolised_g"], "g"),
        agent_released=Q_(r["agent_released_g"], "g"),
        nitrous_oxide_released=Q_(r["nitrous_oxide_g"], "g"),
        agent_co2e=Q_(r["agent_co2e_kg"], "kg"),
        nitrous_oxide_co2e=Q_(r["nitrous_oxide_co2e_kg"], "kg"),
        released_co2e=Q_(r["co2e_kg"], "kg"),
        supply_co2e=supply_out,
        total=Q_(total, "kg"),
        notes=tuple(notes),
        warnings=tuple(warnings),
    )
