"""The model chain for one case: set-up -> integration phase by phase -> result (:func:`simulate`).

The set-up is :func:`estimator.simulation.case_setup.prepare` (patient, site, phase parameters, initial
state), the integrator :func:`estimator.numerics.dopri5.integrate_phase` on the right-hand side of
:mod:`estimator.physics.circuit`, and :func:`estimator.simulation.assemble.build_result` reads the typed
:class:`~estimator.simulation.assemble.Segment` of each phase back into a :class:`~estimator.simulation.results.CaseResult`.
The set-up helpers are re-exported here under their old names.

Examples
--------
>>> from estimator.inputs.scenario import scenario_from_text
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

from collections.abc import Callable
from typing import Any

import numpy as np

from ..constants import BODY_TEMPERATURE_K as T_BODY
from ..constants import GAS_CONSTANT as R_GAS
from ..constants import WATER_VAPOUR_37C_KPA as P_H2O_BODY
from ..inputs.scenario import Scenario
from ..numerics.dopri5 import integrate_phase
from ..physics import circuit as c
from ..physics.physiology import Patient
from ..units import Q_
from .assemble import Segment, build_result
from .case_setup import CaseSetup, PhaseSetup, initial_state, patient_from_scenario, phase_times, prepare
from .case_site import SiteState, air_fractions, flowmeter_correction, site_state, true_flows
from .kernel_parameters import (
    HOLD_TAU_CIRCUIT,
    HOLD_TAU_LUNG,
    base_parameters,
    delivered_fraction,
    mac_at_age,
    phase_parameters,
    vaporizer_type,
)
from .results import CaseResult

#: Default integration tolerances (relative; absolute per state class).
RTOL = 1e-8
ATOL_FRACTION = 1e-12
ATOL_AMOUNT = 1e-9


def absolute_tolerance() -> np.ndarray:
    """Absolute tolerance per state: fractions versus accumulated amounts [mmol].

    Returns
    -------
    numpy.ndarray, float64[NY]
        ``ATOL_FRACTION`` [-] for the fractions, ``ATOL_AMOUNT`` [mmol] for the running totals.

    Examples
    --------
    >>> a = absolute_tolerance()
    >>> float(a[0]), float(a[-1])
    (1e-12, 1e-09)
    """
    atol = np.full(c.NY, ATOL_AMOUNT)
    atol[: c.Y_FGIN] = ATOL_FRACTION
    return atol


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
        A validated scenario (see :func:`estimator.inputs.scenario.load_scenario`).
    rtol : float [-]
        Relative tolerance of the integrator (default 1e-8).
    patient : Patient, optional
        Overrides the patient built from ``scenario.patient``.
    adjust : callable, optional
        Applied to the base parameter vector before integration and returning the vector to use:
        the between-patient variation hook of :mod:`estimator.simulation.spread` (solubility, flows, volumes).

    Returns
    -------
    CaseResult
        Totals as pint quantities, the series as a DataFrame, and warnings.

    References
    ----------
    Dormand JR, Prince PJ. J Comput Appl Math 1980;6:19-26 (the integrator); the model's sources are in
    :mod:`estimator.physics`.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> round(float(simulate(s).totals["agent_liquid"].to("mL").magnitude), 2)
    1.12
    """
    return simulate_setup(prepare(scenario, patient=patient, adjust=adjust), rtol=rtol)


def simulate_setup(case: CaseSetup, *, rtol: float = RTOL) -> CaseResult:
    """Run a prepared case (:func:`estimator.simulation.case_setup.prepare`) through the circle-system model.

    The body of :func:`simulate`, for callers that hold the set-up already (the flow floor).

    Parameters
    ----------
    case : CaseSetup
    rtol : float [-]

    Returns
    -------
    CaseResult

    References
    ----------
    Dormand JR, Prince PJ. J Comput Appl Math 1980;6:19-26 (the integrator); the model's sources are in
    :mod:`estimator.physics`.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> bool(simulate_setup(prepare(s)).totals["agent_liquid"] == simulate(s).totals["agent_liquid"])
    True
    """
    scenario = case.scenario
    y, h = case.initial, 0.0
    atol = absolute_tolerance()
    segments = []
    for ph in case.phases:
        times = ph.times(case.interval)
        ys, stats, h = integrate_phase(y, ph.parameters, times, rtol, atol, h, 2_000_000)
        if stats[0] < 0:
            raise RuntimeError(f"the circuit model failed to integrate phase {ph.index} (step size collapsed)")
        segments.append(Segment(ph, times, ys, c.derived_series(ys, ph.parameters), stats))
        y = ys[-1].copy()
    result = build_result(case, segments)
    if scenario.prices:
        from ..accounts.costs import case_cost

        result.cost = case_cost(result.totals, scenario.price_table, scenario.agent.name)
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
    rtol, atol : float [-], [fraction or mmol, as the state]
        Tolerances; ``atol`` is scaled by ``max(1, |y0|)`` per state entry.
    model : module, optional
        Provides ``rhs(y, p, w, dy)`` (default :mod:`estimator.physics.circuit`).

    Returns
    -------
    derived : numpy.ndarray
        Derived flows and fractions at the output times (rows as in ``CaseResult.series``; the ``W_*``
        layout of :mod:`estimator.physics.circuit`).
    y_end : numpy.ndarray
        The final state.

    References
    ----------
    Virtanen P et al. SciPy 1.0. Nat Methods 2020;17:261-72. Hairer E, Norsett SP, Wanner G. Solving
    Ordinary Differential Equations I, 2nd ed. Springer 1993 (DOP853).
    """
    from scipy.integrate import solve_ivp

    model = c if model is None else model
    case = prepare(scenario)
    y = case.initial
    w = np.zeros(c.NW)  # the hold dial's Newton starts from the last dial held here
    derived = []
    for ph in case.phases:
        p = ph.parameters
        t0, dur = ph.start, ph.duration

        def f(t: float, yy: np.ndarray, p: np.ndarray = p) -> np.ndarray:
            out = np.empty(c.NY)
            model.rhs(yy, p, w, out)
            return out

        sol = solve_ivp(
            f,
            (t0, t0 + dur),
            y,
            method=method,
            t_eval=ph.times(case.interval),
            rtol=rtol,
            atol=atol * np.maximum(1.0, np.abs(y)),
        )
        derived.append(c.derived_series(np.ascontiguousarray(sol.y.T), p))
        y = sol.y[:, -1].copy()
    return np.concatenate(derived), y


__all__ = [
    "ATOL_AMOUNT",
    "ATOL_FRACTION",
    "HOLD_TAU_CIRCUIT",
    "HOLD_TAU_LUNG",
    "P_H2O_BODY",
    "Q_",
    "RTOL",
    "R_GAS",
    "T_BODY",
    "CaseResult",
    "CaseSetup",
    "PhaseSetup",
    "Segment",
    "SiteState",
    "absolute_tolerance",
    "air_fractions",
    "base_parameters",
    "delivered_fraction",
    "flowmeter_correction",
    "initial_state",
    "integrate_phase",
    "mac_at_age",
    "patient_from_scenario",
    "phase_parameters",
    "phase_times",
    "prepare",
    "reference_solve",
    "simulate",
    "simulate_setup",
    "site_state",
    "true_flows",
    "vaporizer_type",
]
