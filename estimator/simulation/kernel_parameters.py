"""Parameter vectors of the circuit kernel: patient, circuit and agent (the base) and each phase's settings.

Plain floats in the layout of :mod:`estimator.physics.circuit`, from pint quantities once per case (the
base) and once per phase; :func:`estimator.simulation.case_setup.prepare` is the one caller in the model chain.

References
----------
.. [1] Mapleson WW. Effect of age on MAC in humans: a meta-analysis. Br J Anaesth 1996;76:179-85
   (the age factor of MAC, estimator.physics.mac).

Examples
--------
>>> from estimator.inputs.scenario import scenario_from_dict
>>> from estimator.simulation.case_site import site_state
>>> from estimator.simulation.case_setup import patient_from_scenario
>>> s = scenario_from_dict({"patient": {"weight": "70 kg", "age": "40 years"}, "agent": {"name": "sevoflurane"},
...                         "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
>>> site = site_state(s)
>>> base = base_parameters(s, patient_from_scenario(s), site)
>>> p = phase_parameters(base, s, s.phases[0], site)
>>> bool(p[c.P_MODE] == c.MODE_DIAL), round(float(p[c.P_UFIXED]), 4), base.shape == (c.NP,)
(True, 0.02, True)
"""

from __future__ import annotations

import numpy as np

from ..constants import BODY_TEMPERATURE_K as T_BODY
from ..constants import GAS_CONSTANT as R_GAS
from ..constants import MOLAR_VOLUME_STPD
from ..constants import WATER_VAPOUR_37C_KPA as P_H2O_BODY
from ..errors import InputError
from ..inputs.scenario import PhaseInput, Scenario
from ..physics import circuit as c
from ..physics.physiology import COMPARTMENT_TISSUE, COMPARTMENTS, DIFFUSION_DONOR, Patient
from ..properties import DataError, Species, gas
from ..properties import agent as agent_properties
from ..units import Q_
from .case_site import SiteState, air_fractions, true_flows

#: Time constants of the end-tidal hold law [min]: alveolar and circuit tracking.
HOLD_TAU_LUNG = 1.0
HOLD_TAU_CIRCUIT = 0.5


def mac_at_age(species: Species, age_years: float) -> float:
    """MAC as a volume fraction at 1 atm, age-corrected (Mapleson 1996; estimator.physics.mac).

    Parameters
    ----------
    species : Species
        An agent or gas of ``agents.toml`` with a MAC at 40 years.
    age_years : float [year]

    Returns
    -------
    float [-]

    References
    ----------
    Mapleson WW. Br J Anaesth 1996;76:179-85 (Table 2, MAC at 40 years; age factor).

    Examples
    --------
    >>> from estimator.properties import agent
    >>> round(mac_at_age(agent("sevoflurane"), 40.0), 4)
    0.018
    """
    from ..physics.mac import mapleson_factor

    if species.mac40 is None:
        raise DataError(f"agents.toml [{species.name}]: no mac40")
    return species.mac40.to("").magnitude * mapleson_factor(age_years)


def vaporizer_type(scenario: Scenario) -> str:
    """Variable-bypass unless given, or desflurane (heated pressurised).

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    str
        ``"variable_bypass"`` or ``"heated_pressurised"``.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "desflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "6 %"}]})
    >>> vaporizer_type(s)
    'heated_pressurised'
    """
    if scenario.agent.vaporizer_type:
        return scenario.agent.vaporizer_type
    return "heated_pressurised" if scenario.agent.name == "desflurane" else "variable_bypass"


def delivered_fraction(dial: float, kind: str, ambient_kpa: float) -> float:
    """Volume fraction a vaporizer dial delivers at the site (estimator.physics.vaporizer).

    A variable-bypass vaporizer delivers a partial pressure (dial x 101.325 kPa), a heated
    pressurised one a volume fraction.

    Parameters
    ----------
    dial : float [-]
    kind : {"variable_bypass", "heated_pressurised"}
    ambient_kpa : float [kPa]

    Returns
    -------
    float [-]

    References
    ----------
    Dalton's law of partial pressures (see :func:`estimator.physics.vaporizer.delivered_fraction`).

    Examples
    --------
    >>> round(delivered_fraction(0.02, "variable_bypass", 50.6625), 6)
    0.04
    """
    from ..physics.vaporizer import delivered_fraction as at_site

    return float(at_site(dial, kind, Q_(ambient_kpa, "kPa")))


def base_parameters(scenario: Scenario, patient: Patient, site: SiteState) -> np.ndarray:
    """Parameters shared by all phases (patient, circuit, agent solubilities).

    Parameters
    ----------
    scenario : Scenario
    patient : Patient
    site : SiteState

    Returns
    -------
    numpy.ndarray, float64[NP]
        In the layout and internal units of :mod:`estimator.physics.circuit` (mmol, L, min).

    References
    ----------
    Values of ``data/agents.toml``: blood/gas (Katoh T et al. Br J Anaesth 1992;69:259; Eger EI. Anesth
    Analg 1992;75:S3), tissue/blood (Yasuda N et al. Anesth Analg 1989;69:370; Eger EI II 1974, from
    memory), MAC at 40 years (Mapleson WW. Br J Anaesth 1996;76:179, Table 2); R of CODATA 2018.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "desflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "6 %"}]})
    >>> from estimator.simulation.case_setup import patient_from_scenario
    >>> from estimator.simulation.case_site import site_state
    >>> base = base_parameters(s, patient_from_scenario(s), site_state(s))
    >>> round(float(base[c.P_Q]), 2)
    4.84
    """
    p = np.zeros(c.NP)
    pamb = site.ambient_pressure_kpa
    t_amb = site.temperature_k
    ca = (pamb - P_H2O_BODY) / (R_GAS * T_BODY) * 1000.0  # mmol per L per unit fraction
    p[c.P_CA] = ca
    p[c.P_NC] = pamb * scenario.circuit.volume.to("L").magnitude / (R_GAS * t_amb) * 1000.0
    p[c.P_NL] = ca * patient.frc.to("L").magnitude
    va = patient.alveolar_ventilation.to("L/min").magnitude
    ve = patient.minute_ventilation.to("L/min").magnitude
    share = patient.alveolar_dead_space_share
    p[c.P_VA] = va * ca
    p[c.P_VDALV] = va * share / (1.0 - share) * ca
    p[c.P_VDANAT] = max(0.0, ve - va / (1.0 - share)) * ca
    p[c.P_Q] = patient.cardiac_output.to("L/min").magnitude
    p[c.P_VART] = patient.arterial_volume.to("L").magnitude
    p[c.P_VVEN] = patient.venous_volume.to("L").magnitude
    for k, t in enumerate(COMPARTMENTS):
        p[c.P_QT + k] = patient.tissue_flow[t].to("L/min").magnitude
        p[c.P_VT + k] = patient.tissue_volume[t].to("L").magnitude
        donor = DIFFUSION_DONOR.get(t)
        p[c.P_DONOR + k] = COMPARTMENTS.index(donor) if donor else -1.0
        p[c.P_DIFF + k] = patient.tissue_diffusion[t].to("L/min").magnitude if donor else 0.0
    p[c.P_QH] = patient.hepatic_flow.to("L/min").magnitude
    ag = agent_properties(scenario.agent.name)
    p[c.P_EH] = ag.hepatic_extraction
    p[c.P_VO2] = patient.oxygen_consumption.to("mL/min").magnitude / MOLAR_VOLUME_STPD
    p[c.P_VCO2] = patient.carbon_dioxide_production.to("mL/min").magnitude / MOLAR_VOLUME_STPD
    p[c.P_FINSP] = scenario.circuit.inspiratory_fraction.to("").magnitude
    amb = pamb / (R_GAS * t_amb) * 1000.0  # mmol per ambient litre
    p[c.P_LEAK] = scenario.circuit.leak.to("L/min").magnitude * amb
    p[c.P_SAMPLE] = (
        0.0 if scenario.circuit.sample_returned else scenario.circuit.sample_flow.to("L/min").magnitude * amb
    )
    p[c.P_MAKEUP_AIR] = 1.0 if scenario.circuit.deficit_makeup == "room_air" else 0.0
    age = patient.age.to("year").magnitude
    p[c.P_MAC_AGENT] = mac_at_age(ag, age) * 101.325 / pamb
    p[c.P_MAC_N2O] = mac_at_age(gas("nitrous_oxide"), age) * 101.325 / pamb
    p[c.P_TAU_L] = HOLD_TAU_LUNG
    p[c.P_TAU_C] = HOLD_TAU_CIRCUIT
    for b, sp in enumerate((gas("nitrogen"), gas("nitrous_oxide"), ag, gas("argon"))):
        # the department's uptake factor (estimator.inputs.calibration_file) scales the agent's uptake
        # into blood and tissues at every partial pressure; 1 without a calibration
        p[c.P_LAMBDA + b] = sp.blood_gas * (scenario.uptake_factor if sp is ag else 1.0)
        for k, t in enumerate(COMPARTMENTS):
            p[c.P_LAMBDA_T + c.NT * b + k] = sp.tissue_blood[COMPARTMENT_TISSUE[t]]
    p[c.P_AIR : c.P_AIR + c.NS] = air_fractions()
    return p


def phase_parameters(
    base: np.ndarray,
    scenario: Scenario,
    phase: PhaseInput,
    site: SiteState,
    flows: tuple[float, float, float] | None = None,
) -> np.ndarray:
    """Copy of ``base`` with the phase's fresh-gas flows and vaporizer or hold settings.

    Parameters
    ----------
    base : numpy.ndarray, float64[NP]
        From :func:`base_parameters` [internal units].
    scenario : Scenario
    phase : PhaseInput
    site : SiteState
    flows : tuple of float, optional [L/min]
        The phase's true (O2, air, N2O) flows at ambient conditions if already known
        (:func:`estimator.simulation.case_site.true_flows` otherwise).

    Returns
    -------
    numpy.ndarray, float64[NP]

    References
    ----------
    Vaporizer output as :func:`delivered_fraction`; dry-air fractions of the CRC Handbook.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "desflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "6 %"}]})
    >>> from estimator.simulation.case_site import site_state
    >>> p = phase_parameters(np.zeros(c.NP), s, s.phases[0], site_state(s))
    >>> round(float(p[c.P_UFIXED]), 4), round(float(p[c.P_CARRIER + c.O2]), 2)
    (0.06, 41.57)
    """
    p = base.copy()
    amb = site.mmol_per_litre
    if flows is None:
        flows = true_flows(scenario, phase, site)
    o2, air, n2o = (f * amb for f in flows)
    fo2, fn2, far = site.oxygen_composition
    airf = air_fractions()
    carrier = np.zeros(c.NS)
    carrier[c.O2] = o2 * fo2 + air * airf[c.O2]
    carrier[c.N2] = o2 * fn2 + air * airf[c.N2]
    carrier[c.AR] = o2 * far + air * airf[c.AR]
    carrier[c.N2O] = n2o
    p[c.P_CARRIER : c.P_CARRIER + c.NS] = carrier
    kind = vaporizer_type(scenario)
    ag = agent_properties(scenario.agent.name)
    dmax = (scenario.agent.vaporizer_max or ag.vaporizer_max).to("").magnitude
    p[c.P_UMAX] = min(delivered_fraction(dmax, kind, site.ambient_pressure_kpa), 0.99)
    if phase.vaporizer is not None:
        p[c.P_MODE] = c.MODE_DIAL
        dial = phase.vaporizer.to("").magnitude
        if dial > dmax + 1e-12:
            raise InputError("phases.vaporizer", f"{dial * 100:g} %", f"0 to {dmax * 100:g} % (the vaporizer maximum)")
        p[c.P_UFIXED] = delivered_fraction(dial, kind, site.ambient_pressure_kpa)
    else:
        p[c.P_MODE] = c.MODE_HOLD
        tgt = phase.end_tidal_target
        if tgt is None:  # the contract gives exactly one of vaporizer and end_tidal_target
            raise InputError("phases.end_tidal_target", None, "an end-tidal target where no vaporizer dial is given")
        if tgt.check("[anaesthetic_potency]"):
            p[c.P_TARGET_MAC] = tgt.to("MAC").magnitude
        else:
            p[c.P_TARGET_FRAC] = tgt.to("").magnitude
    return p
