"""The site of a case in plain numbers: ambient pressure, temperature, O2 supply make-up and true flows.

Read once per case by :func:`estimator.simulation.case_setup.prepare` from the scenario's ``[site]`` table
(ISO 2533 standard atmosphere from elevation: :mod:`estimator.physics.site`; concentrator product:
:mod:`estimator.physics.gas_mixtures`; float-flowmeter readings to true flows: :mod:`estimator.physics.flowmeter`).

Examples
--------
>>> from estimator.inputs.scenario import scenario_from_dict
>>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
...                         "site": {"elevation": "1500 m"},
...                         "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
>>> site = site_state(s)
>>> round(site.ambient_pressure_kpa, 1), true_flows(s, s.phases[0], site)
(84.6, (1.0, 0.0, 0.0))
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np

from ..constants import GAS_CONSTANT
from ..errors import InputError
from ..inputs.scenario import PhaseInput, Scenario
from ..physics import circuit as c
from ..properties import gas
from ..units import Q_


@dataclass(frozen=True)
class SiteState:
    """Ambient conditions used by the model.

    Attributes
    ----------
    ambient_pressure_kpa : float [kPa]
    temperature_k : float [K]
    elevation_m : float or None [m]
    oxygen_composition : (O2, N2, Ar) volume fractions of the oxygen supply
    warnings : (code, message) pairs of the site checks
    site : estimator.physics.site.Site it came from
    """

    ambient_pressure_kpa: float
    temperature_k: float
    elevation_m: float | None
    oxygen_composition: tuple[float, float, float]  # O2, N2, Ar of the oxygen supply
    warnings: tuple[tuple[str, str], ...] = ()
    site: Any = None  # the estimator.physics.site.Site it came from

    @property
    def mmol_per_litre(self) -> float:
        """Gas amount per ambient litre at the site [mmol/L] (ideal gas, p / RT)."""
        return self.ambient_pressure_kpa / (GAS_CONSTANT * self.temperature_k) * 1000.0


def air_fractions() -> np.ndarray:
    """Dry room air as model species fractions (CO2 of air lumped with N2), sum 1.

    Returns
    -------
    numpy.ndarray, float64[NS] [-]
        Fractions in the species order of :mod:`estimator.physics.circuit`.

    References
    ----------
    CRC Handbook of Chemistry and Physics (composition of dry air, ``data/agents.toml``).

    Examples
    --------
    >>> round(float(air_fractions().sum()), 12)
    1.0
    """
    rec = gas("air").records
    f = np.zeros(c.NS)
    f[c.O2] = rec["oxygen_fraction"].value
    f[c.AR] = rec["argon_fraction"].value
    f[c.N2] = 1.0 - f[c.O2] - f[c.AR]
    return f


def site_state(scenario: Scenario) -> SiteState:
    """Ambient pressure (ISO 2533 standard atmosphere from elevation), temperature, O2 supply make-up.

    Concentrator product defaults to 93 % O2 with argon in its air ratio to O2 and nitrogen the rest
    (estimator.physics.gas_mixtures); cylinder and pipeline oxygen are pure unless a purity is given.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    SiteState
        Pressure [kPa], temperature [K], elevation [m] and the oxygen supply's (O2, N2, Ar) fractions [-].

    References
    ----------
    ISO 2533:1975 Standard Atmosphere (from memory); dry-air argon to oxygen ratio of the CRC Handbook.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "site": {"elevation": "1500 m"}, "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> round(site_state(s).ambient_pressure_kpa, 1)
    84.6
    """
    from ..physics.gas_mixtures import concentrator_composition
    from ..physics.site import site_from_inputs

    st = scenario.site
    site = site_from_inputs(st.elevation, st.ambient_pressure, st.temperature)
    p = float(site.ambient_pressure.to("kPa").magnitude)
    if st.oxygen_purity is None and st.oxygen_source != "concentrator":
        comp = (1.0, 0.0, 0.0)
    else:
        purity = st.oxygen_purity if st.oxygen_purity is not None else Q_(93.0, "percent")
        mix = concentrator_composition(purity)
        comp = (mix["oxygen"], mix["nitrogen"], mix["argon"])
        if st.argon_fraction is not None:
            argon = st.argon_fraction.to("").magnitude
            if comp[0] + argon > 1.0 + 1e-12:
                raise InputError(
                    "site.argon_fraction",
                    f"{100 * argon:g} %",
                    f"at most 100 % - oxygen_purity = {100 * (1 - comp[0]):g} %",
                )
            comp = (comp[0], 1.0 - comp[0] - argon, argon)
    elevation = None if site.elevation is None else float(site.elevation.to("m").magnitude)
    return SiteState(p, float(site.temperature.to("K").magnitude), elevation, comp, tuple(site.warnings), site)


@lru_cache(maxsize=4096)
def flowmeter_correction(
    gas: str, reading: float, ambient_kpa: float, temperature_k: float, purity: float | None
) -> float:
    """True ambient flow per unit reading of a tube calibrated for its own gas (estimator.physics.flowmeter).

    Parameters
    ----------
    gas : {"oxygen", "air", "nitrous_oxide"}
    reading : float [L/min]
    ambient_kpa : float [kPa]
    temperature_k : float [K]
    purity : float or None [-]
        Oxygen fraction of concentrator product flowing in an oxygen tube; None for the tube's own gas.

    Returns
    -------
    float [-]
        True flow over reading.

    References
    ----------
    As :func:`estimator.physics.flowmeter.true_flow` (slot Poiseuille flow, orifice equation, Wilke 1950).

    Examples
    --------
    >>> round(flowmeter_correction("oxygen", 10.0, 70.0, 293.15, None), 3)
    1.198
    """
    from ..physics.flowmeter import true_flow
    from ..physics.site import site_from_inputs

    site = site_from_inputs(ambient_pressure=Q_(ambient_kpa, "kPa"), temperature=Q_(temperature_k, "K"))
    use = "concentrator" if purity is not None else gas
    return float(true_flow(Q_(reading, "L/min"), gas, use, site, purity=purity).correction)


def true_flows(scenario: Scenario, phase: PhaseInput, site: SiteState) -> tuple[float, float, float]:
    """(O2, air, N2O) true flows at the site [ambient L/min] of a phase.

    Without ``site.flowmeter_readings`` the phase flows are taken as true flows already.

    Parameters
    ----------
    scenario : Scenario
    phase : PhaseInput
    site : SiteState

    Returns
    -------
    tuple of float [L/min]
        O2, air and N2O at ambient conditions.

    References
    ----------
    As :func:`flowmeter_correction` when the flows are flowmeter readings.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "site": {"elevation": "1500 m"}, "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> true_flows(s, s.phases[0], site_state(s))
    (1.0, 0.0, 0.0)
    """
    flows = tuple(q.to("L/min").magnitude for q in phase.flows())
    if not scenario.site.flowmeter_readings:
        return flows
    purity = site.oxygen_composition[0] if scenario.site.oxygen_source == "concentrator" else None
    out = []
    for gas_name, reading in zip(("oxygen", "air", "nitrous_oxide"), flows, strict=True):
        pur = purity if gas_name == "oxygen" else None
        out.append(
            reading
            * flowmeter_correction(gas_name, round(reading, 9), site.ambient_pressure_kpa, site.temperature_k, pur)
            if reading > 0
            else 0.0
        )
    o2, air, n2o = out
    return o2, air, n2o
