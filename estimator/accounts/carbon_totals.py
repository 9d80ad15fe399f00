"""CO2e of engine totals (one case, or a batch as arrays) and of one case with its supply carbon.

The released agent and nitrous oxide and their CO2e follow the one CO2e rule,
:func:`estimator.accounts.carbon.released_co2e` (its module says what is counted). This module reads
the engine's totals into it and adds, for one case:

* :func:`totals_co2e`: the rule applied to engine-style totals (liquid or vapour agent, uptake or
  metabolised agent, nitrous oxide); case, batch, forecast, supply and policy audit all count CO2e
  through it.
* **Supply carbon** (optional, :func:`case_carbon`): making and delivering the oxygen, per unit volume
  of free gas, from ``estimator/data/carbon.toml`` (:func:`factors`) or a user factor; the absorbent
  only with a user factor (the package holds no sourced default). It is reported apart from the
  released gases.
* :class:`CarbonResult`: one case's figures, notes and warnings, with a JSON form in which every CO2e
  figure carries its basis.

References
----------
.. [1] Ryan SM, Nielsen CJ. Global warming potential of inhaled anesthetics: application to
   clinical use. Anesth Analg 2010;111:92 (CO2e = agent mass x GWP).
.. [2] Tariq M et al. J Clean Prod 2024 (supply carbon of bulk medical oxygen; read in a secondary
   source quoting it, volume and page not read).
.. [3] Thomas MAF et al. Br J Anaesth 2024;133:1427 (nitrous oxide manifold losses, 80-98 %).
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

from ..properties import AGENTS, Sourced, validate_records
from ..units import GAS_VOLUME_REFERENCE, Q_
from .accounting import vapour_to_mass
from .carbon import NITROUS_NOTE, RELEASE_NOTE, basis_label, released_co2e


@cache
def factors() -> dict[str, Sourced]:
    """Supply-carbon and manifold-loss factors of ``estimator/data/carbon.toml``, validated.

    Each record must name a known source, a confidence code and a unit pint parses (the rules of
    ``agents.toml``); the file is read once.

    Returns
    -------
    dict of str to Sourced
        ``oxygen_supply`` [kg/m**3] (kg CO2e per m3 of free oxygen), ``nitrous_oxide_manifold_loss_low``
        and ``nitrous_oxide_manifold_loss_high`` [-] (share of supplied N2O lost before use).

    References
    ----------
    Tariq M et al. J Clean Prod 2024 (supply carbon of bulk medical oxygen; read in a secondary source,
    volume and page not read); Thomas MAF et al. Br J Anaesth 2024;133:1427 (manifold losses, read).

    Examples
    --------
    >>> round(factors()["oxygen_supply"].value.to("kg/m**3").magnitude, 2)
    0.17
    """
    text = resources.files("estimator").joinpath("data/carbon.toml").read_text(encoding="utf-8")
    data = tomllib.loads(text)
    # Same record rules as agents.toml: a known source, a confidence code, a parsable unit.
    return validate_records({"sources": data["sources"], "gases": {"factors": data["factors"]}})["factors"]


def _v(totals: Mapping[str, Any], key: str, unit: str) -> Any:
    """A total in ``unit`` as a float or array (a Quantity is converted; a plain number is taken as is)."""
    v = totals.get(key)
    if v is None:
        return None
    return v.to(unit).magnitude if isinstance(v, pint.Quantity) else np.asarray(v, dtype=float)


def totals_co2e(
    totals: Mapping[str, Any], agent_name: str | None, basis: str = "ar6_gwp100", manifold_loss: float = 0.0
) -> dict[str, np.ndarray]:
    """The one CO2e rule of engine-style totals (one case as Quantities, or batch arrays).

    :func:`~estimator.accounts.carbon.released_co2e` of the agent and nitrous oxide in ``totals``.
    Case, batch, forecast, supply and policy audit all count CO2e through this function.

    Parameters
    ----------
    totals : mapping of str to pint.Quantity or numpy.ndarray
        ``agent_liquid`` [mL] (or ``agent_vapour`` [L]); the metabolised agent from
        ``agent_metabolised`` [L vapour] when given, else from ``agent_uptake`` [L];
        ``nitrous_oxide`` [L]. Quantities are converted; plain numbers are taken in those units.
    agent_name : str or None
        Agent key of ``agents.toml``; None counts no agent.
    basis : str
        A key of :data:`estimator.choices.CO2E_BASES`.
    manifold_loss : float [-]
        Share of supplied N2O lost before use, 0 to below 1.

    Returns
    -------
    dict of str to numpy.ndarray
        As :func:`~estimator.accounts.carbon.released_co2e`: masses [g] and CO2e [kg].

    References
    ----------
    As :func:`~estimator.accounts.carbon.released_co2e`; liquid agent to mass by the liquid density of
    ``agents.toml``, vapour to mass as an ideal gas (:func:`estimator.accounts.accounting.vapour_to_mass`).

    Examples
    --------
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
        Agent key of ``agents.toml``; None when the case gives no volatile agent.
    basis : str
        A key of :data:`estimator.choices.CO2E_BASES`.
    manifold_loss : float [-]
        Share of supplied N2O lost before use (piped supply), 0 to below 1.
    supply : bool
        Also count supply carbon of oxygen (``carbon.toml``) and of absorbent (only with
        ``absorbent_factor``, for which the package holds no sourced default).
    absorbent_factor : pint.Quantity [kg/kg], optional
        Supply carbon of the absorbent, kg CO2e per kg; without it absorbent is not counted
        (warning ``ABSORBENT_SUPPLY_NOT_COUNTED`` when some was used).
    oxygen_factor : pint.Quantity [kg/m**3], optional
        Overrides the oxygen supply factor (kg CO2e per m3 of free oxygen).

    Returns
    -------
    CarbonResult
        Masses [g] and CO2e [kg] on ``basis``, the supply carbon [kg] when asked for, the total [kg]
        (released plus supply), notes and warnings.

    Raises
    ------
    InputError
        An unknown basis, agent or a basis without a GWP for the agent, or a manifold loss outside 0 to
        below 1.

    References
    ----------
    Ryan SM, Nielsen CJ. Anesth Analg 2010;111:92 (CO2e = mass x GWP); the GWP tables as
    :func:`estimator.accounts.carbon.gwp`; Tariq M et al. J Clean Prod 2024 (oxygen supply carbon,
    secondary); Thomas MAF et al. Br J Anaesth 2024;133:1427 (manifold loss).

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
