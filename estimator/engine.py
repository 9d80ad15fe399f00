"""The model chain for one case: scenario -> patient, site and phase parameters -> circuit model -> result.

Each step is a small function; the hot loop is :func:`estimator.circuit.integrate_phase`.

Examples
--------
>>> from estimator.scenario import scenario_from_text
>>> s = scenario_from_text('''
... [patient]
... weight = "70 kg"
... [agent]
... name = "sevoflurane"
... [[phases]]
... duration = "30 min"
... oxygen = "1 L/min"
... air = "1 L/min"
... end_tidal_target = "1 MAC"
... ''')
>>> r = simulate(s)
>>> bool(0.9 < r.series["end_tidal_mac [MAC]"].iloc[-1] < 1.1)
True
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np

from . import circuit as c
from .assemble import build_result
from .constants import BODY_TEMPERATURE_K as T_BODY
from .constants import GAS_CONSTANT as R_GAS
from .constants import MOLAR_VOLUME_STPD
from .constants import WATER_VAPOUR_37C_KPA as P_H2O_BODY
from .errors import InputError
from .physiology import COMPARTMENT_TISSUE, COMPARTMENTS, DIFFUSION_DONOR, Patient, patient_parameters
from .properties import Species, gas
from .properties import agent as agent_properties
from .results import CaseResult
from .scenario import PhaseInput, Scenario
from .units import Q_

#: Time constants of the end-tidal hold law [min]: alveolar and circuit tracking.
HOLD_TAU_LUNG = 1.0
HOLD_TAU_CIRCUIT = 0.5
#: Default integration tolerances (relative; absolute per state class).
RTOL = 1e-8
ATOL_FRACTION = 1e-12
ATOL_AMOUNT = 1e-9


@dataclass(frozen=True)
class SiteState:
    """Ambient conditions used by the model."""

    ambient_pressure_kpa: float
    temperature_k: float
    elevation_m: float | None
    oxygen_composition: tuple[float, float, float]  # O2, N2, Ar of the oxygen supply
    warnings: tuple[tuple[str, str], ...] = ()
    site: Any = None  # the estimator.site.Site it came from


def air_fractions() -> np.ndarray:
    """Dry room air as model species fractions (CO2 of air lumped with N2), sum 1."""
    rec = gas("air").records
    f = np.zeros(c.NS)
    f[c.O2] = rec["oxygen_fraction"].value
    f[c.AR] = rec["argon_fraction"].value
    f[c.N2] = 1.0 - f[c.O2] - f[c.AR]
    return f


def site_state(scenario: Scenario) -> SiteState:
    """Ambient pressure (ISO 2533 standard atmosphere from elevation), temperature, O2 supply make-up.

    Concentrator product defaults to 93 % O2 with argon in its air ratio to O2 and nitrogen the rest
    (estimator.gas_mixtures); cylinder and pipeline oxygen are pure unless a purity is given.
    """
    from .gas_mixtures import concentrator_composition
    from .site import site_from_inputs

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
    """True ambient flow per unit reading of a tube calibrated for its own gas (estimator.flowmeter)."""
    from .flowmeter import true_flow
    from .site import site_from_inputs

    site = site_from_inputs(ambient_pressure=Q_(ambient_kpa, "kPa"), temperature=Q_(temperature_k, "K"))
    use = "concentrator" if purity is not None else gas
    return float(true_flow(Q_(reading, "L/min"), gas, use, site, purity=purity).correction)


def true_flows(scenario: Scenario, phase: PhaseInput, site: SiteState) -> tuple[float, float, float]:
    """(O2, air, N2O) true flows at the site [ambient L/min] of a phase.

    Without ``site.flowmeter_readings`` the phase flows are taken as true flows already.
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
    return tuple(out)


def mac_at_age(species: Species, age_years: float) -> float:
    """MAC as a volume fraction at 1 atm, age-corrected (Mapleson 1996; estimator.mac)."""
    from .mac import mapleson_factor

    return species.mac40.to("").magnitude * mapleson_factor(age_years)


def vaporizer_type(scenario: Scenario) -> str:
    """Variable-bypass unless given, or desflurane (heated pressurised)."""
    if scenario.agent.vaporizer_type:
        return scenario.agent.vaporizer_type
    return "heated_pressurised" if scenario.agent.name == "desflurane" else "variable_bypass"


def delivered_fraction(dial: float, kind: str, ambient_kpa: float) -> float:
    """Volume fraction a vaporizer dial delivers at the site (estimator.vaporizer).

    A variable-bypass vaporizer delivers a partial pressure (dial x 101.325 kPa), a heated
    pressurised one a volume fraction.
    """
    from .vaporizer import delivered_fraction as at_site

    return float(at_site(dial, kind, Q_(ambient_kpa, "kPa")))


def base_parameters(scenario: Scenario, patient: Patient, site: SiteState) -> np.ndarray:
    """Parameters shared by all phases (patient, circuit, agent solubilities)."""
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
        p[c.P_LAMBDA + b] = sp.blood_gas
        for k, t in enumerate(COMPARTMENTS):
            p[c.P_LAMBDA_T + c.NT * b + k] = sp.tissue_blood[COMPARTMENT_TISSUE[t]]
    p[c.P_AIR : c.P_AIR + c.NS] = air_fractions()
    return p


def phase_parameters(base: np.ndarray, scenario: Scenario, phase: PhaseInput, site: SiteState) -> np.ndarray:
    """Copy of ``base`` with the phase's fresh-gas flows and vaporizer or hold settings."""
    p = base.copy()
    amb = site.ambient_pressure_kpa / (R_GAS * site.temperature_k) * 1000.0
    o2, air, n2o = (f * amb for f in true_flows(scenario, phase, site))
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
        if tgt.check("[anaesthetic_potency]"):
            p[c.P_TARGET_MAC] = tgt.to("MAC").magnitude
        else:
            p[c.P_TARGET_FRAC] = tgt.to("").magnitude
    return p


def initial_state(scenario: Scenario, base: np.ndarray, site: SiteState) -> np.ndarray:
    """Patient equilibrated with room air (lungs optionally pre-oxygenated); circuit of room air or O2."""
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


def absolute_tolerance() -> np.ndarray:
    """Absolute tolerance per state: fractions versus accumulated amounts [mmol]."""
    atol = np.full(c.NY, ATOL_AMOUNT)
    atol[: c.Y_FGIN] = ATOL_FRACTION
    return atol


def phase_times(start: float, duration: float, interval: float) -> np.ndarray:
    """Output times of a phase: every ``interval`` from ``start`` and its end [min]."""
    n = max(1, math.ceil(duration / interval - 1e-9))
    t = start + np.minimum(np.arange(n + 1) * interval, duration)
    return t


def simulate(
    scenario: Scenario,
    *,
    rtol: float = RTOL,
    patient: Patient | None = None,
    adjust: Callable[[np.ndarray], np.ndarray] | None = None,
) -> CaseResult:
    """Run one case through the circle-system model.

    Parameters
    ----------
    scenario : Scenario
        A validated scenario (see :func:`estimator.scenario.load_scenario`).
    rtol : float
        Relative tolerance of the integrator (default 1e-8).
    patient : Patient, optional
        Overrides the patient built from ``scenario.patient``.
    adjust : callable, optional
        Applied to the base parameter vector before integration and returning the vector to use:
        the between-patient variation hook of :mod:`estimator.spread` (solubility, flows, volumes).

    Returns
    -------
    CaseResult
        Totals as pint quantities, the series as a DataFrame, and warnings.
    """
    if patient is None:
        patient = patient_from_scenario(scenario)
    site = site_state(scenario)
    base = base_parameters(scenario, patient, site)
    if adjust is not None:  # between-patient variation (estimator.spread)
        base = adjust(base)
    y = initial_state(scenario, base, site)
    atol = absolute_tolerance()
    interval = scenario.output.interval.to("min").magnitude
    t0, h = 0.0, 0.0
    chunks = []
    for index, phase in enumerate(scenario.phases):
        dur = phase.duration.to("min").magnitude
        if dur <= 0.0:
            continue
        p = phase_parameters(base, scenario, phase, site)
        times = phase_times(t0, dur, interval)
        ys, stats, h = c.integrate_phase(y, p, times, rtol, atol, h, 2_000_000)
        if stats[0] < 0:
            raise RuntimeError(f"the circuit model failed to integrate phase {index} (step size collapsed)")
        chunks.append((index, times, ys, c.derived_series(ys, p), p, stats))
        y = ys[-1].copy()
        t0 += dur
    result = build_result(scenario, patient, site, base, chunks)
    if scenario.prices:
        from .costs import case_cost, parse_prices

        result.cost = case_cost(result.totals, parse_prices(scenario.prices), scenario.agent.name)
    return result


def reference_solve(
    scenario: Scenario, *, method: str = "DOP853", rtol: float = 1e-12, atol: float = 1e-14, model: Any = None
) -> tuple[np.ndarray, np.ndarray]:
    """The same model integrated phase by phase with :func:`scipy.integrate.solve_ivp`, for checks.

    The engine's own integrator is checked against this (tests and benchmarks/bench_case.py), and a
    plain-Python copy of the kernel passed as ``model`` gives the speed reference.

    Parameters
    ----------
    scenario : Scenario
    method : str
        A ``solve_ivp`` method (default ``"DOP853"``, Hairer's 8th-order Dormand-Prince).
    rtol, atol : float
        Tolerances; ``atol`` is scaled by ``max(1, |y0|)`` per state entry.
    model : module, optional
        Provides ``rhs(y, p, w, dy)`` (default :mod:`estimator.circuit`).

    Returns
    -------
    derived : numpy.ndarray
        Derived flows and fractions at the output times (rows as in ``CaseResult.series``; the ``W_*``
        layout of :mod:`estimator.circuit`).
    y_end : numpy.ndarray
        The final state.

    References
    ----------
    Virtanen P et al. SciPy 1.0. Nat Methods 2020;17:261-72. Hairer E, Norsett SP, Wanner G. Solving
    Ordinary Differential Equations I, 2nd ed. Springer 1993 (DOP853).
    """
    from scipy.integrate import solve_ivp

    model = c if model is None else model
    patient = patient_from_scenario(scenario)
    site = site_state(scenario)
    base = base_parameters(scenario, patient, site)
    y = initial_state(scenario, base, site)
    w = np.empty(c.NW)
    interval = scenario.output.interval.to("min").magnitude
    t0, derived = 0.0, []
    for phase in scenario.phases:
        dur = phase.duration.to("min").magnitude
        if dur <= 0.0:
            continue
        p = phase_parameters(base, scenario, phase, site)
        times = phase_times(t0, dur, interval)

        def f(t: float, yy: np.ndarray, p: np.ndarray = p) -> np.ndarray:
            out = np.empty(c.NY)
            model.rhs(yy, p, w, out)
            return out

        sol = solve_ivp(
            f, (t0, t0 + dur), y, method=method, t_eval=times, rtol=rtol, atol=atol * np.maximum(1.0, np.abs(y))
        )
        derived.append(c.derived_series(np.ascontiguousarray(sol.y.T), p))
        y = sol.y[:, -1].copy()
        t0 += dur
    return np.concatenate(derived), y


def patient_from_scenario(scenario: Scenario) -> Patient:
    """Brody-scaled patient with the scenario's overrides."""
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


__all__ = ["simulate", "Q_"]
