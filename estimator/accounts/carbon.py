"""The one CO2e rule: CO2-equivalent of the agent and nitrous oxide released, on a chosen basis.

What is counted
---------------
* **Released agent** = agent delivered less the share the body metabolises: what the patient takes
  up is breathed out after the case and reaches the atmosphere, so uptake is *not* subtracted. The
  metabolised share is a fraction of uptake (``hepatic_extraction`` in ``agents.toml``), or, uptake not
  known, of the delivered agent (an upper bound: released is then low by at most it, 3 % for sevoflurane).
* **Released nitrous oxide** = all N2O delivered (its metabolism is negligible), over (1 - loss) for
  piped supply: Thomas et al. 2024 found 80-98 % lost in hospital manifolds; default 0 (cylinders).
* **Supply carbon** (optional) of oxygen and absorbent, and the rule applied to the engine's totals:
  :mod:`estimator.accounts.carbon_totals`.

CO2e = mass x GWP on the chosen basis (:data:`estimator.choices.CO2E_BASES`); every figure carries it.

Masses from gas volumes are ideal-gas (15 degC, 101.325 kPa unless stated): real vapours give up to
3 % more per mole (Anesth Analg 1979;58:322); N2O at 1 atm has Z about 0.994 (CoolProp).

References
----------
.. [1] IPCC AR6 WG1 (2021) Ch. 7 SM, Table 7.SM.7; IPCC AR5 WG1 (2013) Table 8.A.1 (both read); Sulbaek
   Andersen MP et al., Anesth Analg 2012;114:1081 (secondary): the GWP values in ``agents.toml``.
.. [2] Ryan SM, Nielsen CJ. Global warming potential of inhaled anesthetics: application to
   clinical use. Anesth Analg 2010;111:92 (CO2e per MAC-hour = agent mass x GWP).
.. [3] Thomas MAF et al., Br J Anaesth 2024;133:1427 (nitrous oxide manifold losses).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pint

from ..errors import InputError
from ..properties import AGENTS, CO2E_BASES, GASES
from ..units import Q_  # noqa: F401 (doctests)
from .accounting import liquid_to_mass, molar_volume, vapour_to_mass  # noqa: F401 (re-exported)

RELEASE_NOTE = (
    "released agent = agent delivered less the share metabolised; the agent taken up "
    "by the patient is breathed out after the case and is counted as released"
)
NITROUS_NOTE = "released nitrous oxide = all nitrous oxide delivered, plus manifold losses when piped"


def basis_label(basis: str) -> str:
    """Label of a CO2e basis key, or InputError naming the valid keys.

    Parameters
    ----------
    basis : str
        A key of :data:`estimator.choices.CO2E_BASES`.

    Returns
    -------
    str
        The label every CO2e figure shows beside its basis key.

    Raises
    ------
    InputError

    References
    ----------
    IPCC AR6 WG1 (2021) Ch. 7 Supplementary Material, Table 7.SM.7; IPCC AR5 WG1 (2013) Table 8.A.1;
    Sulbaek Andersen MP et al. Anesth Analg 2012;114:1081 (the tables the bases name).

    Examples
    --------
    >>> basis_label("ar6_gwp100")
    'IPCC AR6 GWP100'
    """
    if basis not in CO2E_BASES:
        raise InputError("co2e_basis", basis, "one of " + ", ".join(CO2E_BASES))
    return CO2E_BASES[basis][1]


def gwp(species: str, basis: str = "ar6_gwp100") -> float:
    """Global warming potential of an agent or of nitrous oxide on a basis [kg CO2e/kg].

    Parameters
    ----------
    species : str
        Agent key of ``agents.toml`` or ``nitrous_oxide``.
    basis : str
        A key of :data:`estimator.choices.CO2E_BASES`.

    Returns
    -------
    float [kg CO2e/kg]

    Raises
    ------
    InputError
        An unknown basis or species, or a basis without a value for the species.

    References
    ----------
    GWP of ``agents.toml``: IPCC AR6 WG1 (2021) Ch. 7 Supplementary Material, Table 7.SM.7; IPCC AR5 WG1
    (2013) Table 8.A.1; Sulbaek Andersen MP et al. Anesth Analg 2012;114:1081 (secondary); N2O on
    that basis IPCC AR4 WG1 (2007) Table 2.14.

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

    Parameters
    ----------
    mass : pint.Quantity [g]
        Released mass of the species (any mass unit).
    species, basis : str
        As :func:`gwp`.

    Returns
    -------
    pint.Quantity [kg]
        Mass x :func:`gwp`, kg CO2e.

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
    """Share of agent uptake the body metabolises [-] (``hepatic_extraction`` of ``agents.toml``).

    Parameters
    ----------
    agent_name : str
        Agent key of ``agents.toml``.

    Returns
    -------
    float [-]

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

    Parameters
    ----------
    delivered_g : float or numpy.ndarray [g]
        Agent delivered (vaporised).
    agent_name : str
        Agent key of ``agents.toml``.
    uptake_g : float or numpy.ndarray [g], optional
        Agent taken up by the patient; capped at the delivered agent.

    Returns
    -------
    numpy.ndarray [g]

    References
    ----------
    The metabolised share as :func:`metabolised_fraction` (Shiraishi 1990, Carpenter 1986, Eger 1992;
    from memory). Counting uptake as released is the package's rule (stated in the module notes).

    Examples
    --------
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

    Parameters
    ----------
    delivered_l : float or numpy.ndarray [L]
        Nitrous oxide delivered to the circuit, free gas at 15 degC and 101.325 kPa.
    manifold_loss : float [-]
        Share of supplied N2O lost before use (piped supply), 0 to below 1; 0 for cylinders.

    Returns
    -------
    numpy.ndarray [L]
        Free gas at 15 degC and 101.325 kPa; 0-d for a scalar.

    Raises
    ------
    InputError
        ``manifold_loss`` outside 0 to below 1.

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

    Parameters
    ----------
    agent_name : str or None
        Agent key of ``agents.toml``; None (or empty) counts no agent.
    basis : str
        A key of :data:`estimator.choices.CO2E_BASES`.
    delivered_g : float or numpy.ndarray [g]
        Agent delivered.
    nitrous_oxide_l : float or numpy.ndarray [L]
        Nitrous oxide delivered, free gas at 15 degC and 101.325 kPa.
    metabolised_g : float or numpy.ndarray [g], optional
        Agent metabolised, when known (the engine integrates it).
    uptake_g : float or numpy.ndarray [g], optional
        Agent taken up, used when ``metabolised_g`` is not given.
    manifold_loss : float [-]
        Share of supplied N2O lost before use, 0 to below 1.

    Returns
    -------
    dict of str to numpy.ndarray
        ``agent_delivered_g``, ``agent_metabolised_g``, ``agent_released_g``, ``nitrous_oxide_g`` [g];
        ``agent_co2e_kg``, ``nitrous_oxide_co2e_kg``, ``co2e_kg`` [kg CO2e].

    Raises
    ------
    InputError
        An unknown basis or agent, or a manifold loss outside 0 to below 1.

    References
    ----------
    Ryan SM, Nielsen CJ. Anesth Analg 2010;111:92 (CO2e = mass x GWP); GWP as :func:`gwp`; Thomas MAF
    et al. Br J Anaesth 2024;133:1427 (manifold loss); ideal-gas molar volume at 15 degC from the CODATA
    2018 gas constant (:func:`estimator.accounts.accounting.molar_volume`).

    Examples
    --------
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
