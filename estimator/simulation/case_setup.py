"""The one set-up of a case: scenario -> patient, site, phase parameters and initial state (:func:`prepare`).

Every user of the circuit model starts here: the single case (:func:`estimator.simulation.engine.simulate`),
the scipy reference (:func:`estimator.simulation.engine.reference_solve`), the flow floor's trial runs
(:class:`estimator.planning.safety.Planner`) and the batch template (:func:`estimator.simulation.batch.case_template`).
The set-up is built once, as plain floats in the kernel's layout, and handed on as a frozen
:class:`CaseSetup` with one typed :class:`PhaseSetup` per phase.

Examples
--------
>>> from estimator.inputs.scenario import scenario_from_dict
>>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
...     "phases": [{"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1 MAC"},
...                {"duration": "0 min", "oxygen": "1 L/min", "vaporizer": "2 %"},
...                {"duration": "50 min", "oxygen": "0.3 L/min", "air": "0.2 L/min", "end_tidal_target": "1 MAC"}]})
>>> case = prepare(s)
>>> [(ph.index, ph.start, ph.duration, ph.true_flows) for ph in case.phases]
[(0, 0.0, 10.0, (3.0, 3.0, 0.0)), (2, 10.0, 50.0, (0.3, 0.2, 0.0))]
>>> len(prepare(s, every_phase=True).phases), case.initial.shape == (c.NY,)
(3, True)
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..inputs.scenario import PhaseInput, Scenario
from ..physics import circuit as c
from ..physics.physiology import Patient, patient_parameters
from .case_site import SiteState, air_fractions, site_state, true_flows
from .kernel_parameters import base_parameters, phase_parameters


@dataclass(frozen=True)
class PhaseSetup:
    """One phase ready for the kernel.

    Attributes
    ----------
    index : int
        Position in ``scenario.phases``.
    phase : PhaseInput
    start, duration : float [min]
        Case time at the phase start, and its length.
    true_flows : (O2, air, N2O) [ambient L/min]
        True flows at the site (flowmeter readings converted).
    parameters : float64[NP]
        The kernel's parameter vector of the phase (do not change it in place).
    """

    index: int
    phase: PhaseInput
    start: float
    duration: float
    true_flows: tuple[float, float, float]
    parameters: np.ndarray

    def times(self, interval: float) -> np.ndarray:
        """Output times of the phase every ``interval`` [min], its end included."""
        return phase_times(self.start, self.duration, interval)


@dataclass(frozen=True)
class CaseSetup:
    """A scenario prepared for the circuit kernel (see :func:`prepare`); arrays are not to be changed.

    Attributes
    ----------
    scenario : Scenario
    patient : Patient
    site : SiteState
    base : float64[NP]
        Parameters shared by all phases (patient, circuit, agent), after any ``adjust``.
    initial : float64[NY]
        State at the case start.
    phases : tuple of PhaseSetup
        The phases of more than 0 min in order (every phase with ``every_phase=True``).
    interval : float [min]
        Output interval of the series.
    """

    scenario: Scenario
    patient: Patient
    site: SiteState
    base: np.ndarray
    initial: np.ndarray
    phases: tuple[PhaseSetup, ...]
    interval: float

    @property
    def mmol_per_litre(self) -> float:
        """Gas amount per ambient litre at the site [mmol/L]."""
        return self.site.mmol_per_litre

    def parameters(self, phase: PhaseInput) -> np.ndarray:
        """Parameter vector of any phase (a trial setting of the flow floor) on this case's base."""
        return phase_parameters(self.base, self.scenario, phase, self.site)

    def phase_setup(self, phase: PhaseInput, start: float, duration: float, index: int = -1) -> PhaseSetup:
        """Set-up of any phase run from ``start`` for ``duration`` [min] (a trial of the flow floor)."""
        return _phase_setup(self.scenario, self.base, self.site, phase, index, start, duration)


def _phase_setup(
    scenario: Scenario, base: np.ndarray, site: SiteState, phase: PhaseInput, index: int, start: float, duration: float
) -> PhaseSetup:
    flows = true_flows(scenario, phase, site)
    return PhaseSetup(index, phase, start, duration, flows, phase_parameters(base, scenario, phase, site, flows))


def prepare(
    scenario: Scenario,
    *,
    patient: Patient | None = None,
    site: SiteState | None = None,
    adjust: Callable[[np.ndarray], np.ndarray] | None = None,
    every_phase: bool = False,
) -> CaseSetup:
    """Build the set-up of a case once: patient, site, base and phase parameters, initial state.

    Parameters
    ----------
    scenario : Scenario
    patient : Patient, optional
        Overrides the patient built from ``scenario.patient``.
    site : SiteState, optional
        The site if already read (the batch reads it once for many weights).
    adjust : callable, optional
        Applied to the base parameter vector before anything is built from it (between-patient
        variation, :mod:`estimator.simulation.spread`).
    every_phase : bool
        Also set up the phases of 0 min (the batch stretches and cuts phases); by default they are
        left out, as the engine skips them.

    Returns
    -------
    CaseSetup
        Parameters and state in the internal units of :mod:`estimator.physics.circuit` (mmol, L, min).

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> case = prepare(s)
    >>> case.phases[0].true_flows, case.interval
    ((1.0, 0.0, 0.0), 1.0)
    """
    if patient is None:
        patient = patient_from_scenario(scenario)
    if site is None:
        site = site_state(scenario)
    base = base_parameters(scenario, patient, site)
    if adjust is not None:
        base = adjust(base)
    phases, t0 = [], 0.0
    for index, phase in enumerate(scenario.phases):
        dur = phase.duration.to("min").magnitude
        if dur <= 0.0 and not every_phase:
            continue
        phases.append(_phase_setup(scenario, base, site, phase, index, t0, dur))
        t0 += dur
    initial = initial_state(scenario, base, site)
    interval = scenario.output.interval.to("min").magnitude
    return CaseSetup(scenario, patient, site, base, initial, tuple(phases), interval)


def patient_from_scenario(scenario: Scenario) -> Patient:
    """Brody-scaled patient with the scenario's overrides.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    Patient

    References
    ----------
    As :func:`estimator.physics.physiology.patient_parameters` (Brody 1945; Lowe and Ernst 1981; Eger 1974).

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> round(patient_from_scenario(s).cardiac_output.to("L/min").magnitude, 2)
    4.84
    """
    pt = scenario.patient
    return patient_parameters(
        pt.weight,
        pt.age,
        oxygen_consumption=pt.oxygen_consumption,
        carbon_dioxide_production=pt.carbon_dioxide_production,
        cardiac_output=pt.cardiac_output,
        alveolar_ventilation_=pt.alveolar_ventilation,
        minute_ventilation=pt.minute_ventilation,
        frc=pt.frc,
        target_paco2=pt.target_paco2,
        respiratory_rate=pt.respiratory_rate,
    )


def initial_state(scenario: Scenario, base: np.ndarray, site: SiteState) -> np.ndarray:
    """Patient equilibrated with room air (lungs optionally pre-oxygenated); circuit of room air or O2.

    Alveolar fractions are the steady state of the lungs' mass balance, F_A = (V_A F_I - uptake) /
    (V_A - VO2 + VCO2); blood and tissues start at the room-air alveolar fractions.

    Parameters
    ----------
    scenario : Scenario
    base : numpy.ndarray, float64[NP]
        From :func:`estimator.simulation.kernel_parameters.base_parameters` [internal units].
    site : SiteState

    Returns
    -------
    numpy.ndarray, float64[NY]
        Fractions [-] and running totals (0) [mmol] in the layout of :mod:`estimator.physics.circuit`.

    References
    ----------
    West JB. Respiratory Physiology: The Essentials (alveolar gas equation; from memory).

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> y = prepare(s).initial
    >>> round(float(y[c.Y_FA + c.CO2]), 4), float(y[c.Y_FC + c.O2]) < 0.21
    (0.0569, True)
    """
    y = np.zeros(c.NY)
    air = air_fractions()
    o2_supply = np.zeros(c.NS)
    o2_supply[c.O2], o2_supply[c.N2], o2_supply[c.AR] = site.oxygen_composition
    y[c.Y_FC : c.Y_FC + c.NS] = o2_supply if scenario.circuit.initial == "oxygen" else air

    def alveolar(fi: np.ndarray) -> np.ndarray:
        va, vo2, vco2 = base[c.P_VA], base[c.P_VO2], base[c.P_VCO2]
        up = np.zeros(c.NS)
        up[c.O2], up[c.CO2] = vo2, -vco2
        return (va * fi - up) / (va - vo2 + vco2)

    fa_air = alveolar(air)
    fa = alveolar(o2_supply) if scenario.patient.initial == "preoxygenated" else fa_air
    y[c.Y_FA : c.Y_FA + c.NS] = fa
    for b, s in enumerate(c.BODY):
        y[c.Y_BODY + c.NBODYSTATE * b : c.Y_BODY + c.NBODYSTATE * (b + 1)] = fa_air[s]
    return y


def phase_times(start: float, duration: float, interval: float) -> np.ndarray:
    """Output times of a phase: every ``interval`` from ``start`` and its end [min].

    Parameters
    ----------
    start, duration, interval : float [min]

    Returns
    -------
    numpy.ndarray [min]

    Examples
    --------
    >>> phase_times(10.0, 2.5, 1.0).tolist()
    [10.0, 11.0, 12.0, 12.5]
    """
    n = max(1, math.ceil(duration / interval - 1e-9))
    t = start + np.minimum(np.arange(n + 1) * interval, duration)
    return t
