"""Batch engine: thousands of cases of the circle-system model at once, totals only.

The same equations as the single-case engine - :func:`estimator.physics.circuit.rhs`, the same compiled
function - integrated for many cases in parallel (``numba.prange`` over cases), in chunks so that
memory stays bounded: only the final state of each case is kept, never its series.

The integrator is RKC2 (:mod:`estimator.numerics.rkc`): a stabilised explicit Runge-Kutta-Chebyshev
method whose step is set by accuracy rather than by the fastest time constant.

Patient parameters are assembled without pint per case: every entry of a phase's parameter
vector is ``c + a kg**0.75 + b kg`` in body mass (the Brody power laws and volumes per kg of
:mod:`estimator.physics.physiology`), fitted exactly from the one case set-up
(:func:`estimator.simulation.case_setup.prepare`) at three weights and verified at four more; the MAC entries
scale with Mapleson's age factor. The totals are formed by
:func:`estimator.accounts.accounting.totals_from_deltas`, as in the single case.

References
----------
.. [1] Brody S. Bioenergetics and Growth. Reinhold 1945 (power laws of body mass).
.. [2] Mapleson WW. Br J Anaesth 1996;76:179-85 (age factor of MAC).

Examples
--------
>>> from estimator.inputs.scenario import scenario_from_dict
>>> hold = {"oxygen": "0.3 L/min", "air": "0.2 L/min", "end_tidal_target": "1 MAC"}
>>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
...                         "phases": [{**hold, "duration": "10 min", "air": "5 L/min"},
...                                    {**hold, "duration": "50 min"}]})
>>> t = case_template(s)
>>> out = run_batch(t, weights=[60.0, 90.0], ages=[40.0, 40.0], durations=[60.0, 120.0])
>>> bool(out["agent_liquid"][1] > out["agent_liquid"][0] > 0)
True
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..accounts.accounting import (  # noqa: F401 (litres_per_mmol re-exported)
    DELTA_TOTAL_UNITS,
    fresh_gas_litres,
    litres_per_mmol,
    totals_from_deltas,
)
from ..inputs.scenario import Scenario
from ..numerics.rkc import NCORE, integrate_cases
from ..physics import circuit as c
from ..physics.mac import mapleson_factor
from ..units import Q_
from .case_setup import CaseSetup, initial_state, prepare
from .case_site import SiteState, site_state

#: Default relative tolerance of the batch integrator: measured against the single-case engine
#: (rtol 1e-8) over a 180-case sweep (1 min to 24 h, 0.5 to 300 kg, dial and end-tidal hold, N2O,
#: altitude, leak, volume deficit) every total stays within 8.8e-4 relative, inside the 1e-3 agreement
#: target; the worst is the volume deficit of a 24-h desflurane case of 150 kg at 2000 m with a leak
#: (the 4-h benchmark case of bench_batch agrees within 7.1e-5).
RTOL = 1e-4
#: Absolute tolerances: fractions, amounts [mmol]. 1e-8 of a fraction is far below any analyser's
#: resolution (0.01 vol%) yet resolves the agent in blood and tissues in the first minute (at 1e-7
#: a 1-min case's uptake was off by 9e-4; measured); 1e-3 mmol is 0.02 mL of gas.
ATOL_FRACTION = 1e-8
ATOL_AMOUNT = 1e-3
#: Cases per chunk: parameters of a chunk take chunk x phases x NP (98) x 8 bytes (about 1.6 MB a phase).
CHUNK = 2048
#: Weights [kg] at which the parameter model is fitted, and at which it is verified.
FIT_WEIGHTS = (5.0, 60.0, 200.0)
CHECK_WEIGHTS = (0.5, 18.0, 110.0, 300.0)
#: Entries of the parameter vector that depend on age (through Mapleson's factor).
AGE_ENTRIES = (c.P_MAC_AGENT, c.P_MAC_N2O)
#: Output columns of :func:`run_batch` and their units.
TOTAL_UNITS = {"duration": "min", **DELTA_TOTAL_UNITS, "minimum_inspired_oxygen": "", "final_mac_ratio": ""}


# --- a scenario as a template for many patients ----------------------------------------------------
@dataclass(frozen=True)
class CaseTemplate:
    """A scenario prepared for the batch engine (see :func:`case_template`).

    Attributes
    ----------
    scenario : Scenario
    coefficients : float64[3, k, NP]
        Phase parameters = c + a kg**0.75 + b kg (rows c, a, b) at the reference age.
    reference_age : float [year]
    initial : float64[NY] or None
        Initial state (independent of weight for the Brody laws); None means per case.
    phase_durations : float64[k] [min] as in the scenario; the last one stretches.
    true_flows : float64[k, 3] (O2, air, N2O) [ambient L/min] per phase
    """

    scenario: Scenario
    site: SiteState
    coefficients: np.ndarray
    reference_age: float
    initial: np.ndarray | None
    phase_durations: np.ndarray
    true_flows: np.ndarray
    makeup_air: bool

    @property
    def fixed_duration(self) -> float:
        """Duration of every phase but the last [min]: shorter cases are cut."""
        return float(self.phase_durations[:-1].sum())


def _scenario_at(scenario: Scenario, weight: float, age: float) -> Scenario:
    pt = scenario.patient.model_copy(update={"weight": Q_(weight, "kg"), "age": Q_(age, "year")})
    return scenario.model_copy(update={"patient": pt})


def _setup(scenario: Scenario, site: SiteState, weight: float, age: float) -> CaseSetup:
    """The one case set-up of a patient of ``weight`` [kg] and ``age`` [year], every phase kept."""
    return prepare(_scenario_at(scenario, weight, age), site=site, every_phase=True)


def _engine_parameters(scenario: Scenario, site: SiteState, weight: float, age: float):
    """Phase parameters (k, NP) and initial state of one patient, from the one case set-up."""
    case = _setup(scenario, site, weight, age)
    return np.array([ph.parameters for ph in case.phases]), case.initial


def case_template(scenario: Scenario) -> CaseTemplate:
    """Prepare a scenario so that the batch engine can run it for any weight, age and duration.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    CaseTemplate
        Coefficients of ``c + a kg**0.75 + b kg`` per parameter entry [internal units], phase
        durations [min] and true flows [L/min].

    Raises
    ------
    RuntimeError
        If the engine's parameters are no longer ``c + a kg**0.75 + b kg`` (checked at seven
        weights to 1e-9 relative) or depend on age other than through the MAC entries.

    References
    ----------
    Brody S. Bioenergetics and Growth, 1945 (power laws of body mass; from memory); Mapleson WW. Br J
    Anaesth 1996;76:179-85 (age factor of MAC).

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> t = case_template(s)
    >>> t.phase_durations.tolist(), t.coefficients.shape[0]
    ([10.0], 3)
    """
    site = site_state(scenario)
    age = float(scenario.patient.age.to("year").magnitude)
    cases = [_setup(scenario, site, wt, age) for wt in FIT_WEIGHTS + CHECK_WEIGHTS]
    runs = [(np.array([ph.parameters for ph in case.phases]), case.initial) for case in cases]
    basis = np.array([[1.0, wt**0.75, wt] for wt in FIT_WEIGHTS])
    fit = np.stack([r[0] for r in runs[:3]])  # (3, k, NP)
    coef = np.linalg.solve(basis, fit.reshape(3, -1)).reshape(fit.shape)
    initial: np.ndarray | None = runs[0][1]
    for wt, (ph, y0) in zip(FIT_WEIGHTS + CHECK_WEIGHTS, runs, strict=True):
        model = coef[0] + coef[1] * wt**0.75 + coef[2] * wt
        if not np.allclose(model, ph, rtol=1e-9, atol=1e-12):
            raise RuntimeError(
                "phase parameters are not c + a kg^0.75 + b kg in body mass; the batch "
                "engine needs updating to the single-case engine"
            )
        if initial is not None and not np.allclose(y0, initial, rtol=1e-12, atol=1e-15):
            initial = None
    older, _ = _engine_parameters(scenario, site, 60.0, age + 30.0)
    younger = runs[1][0].copy()
    younger[:, list(AGE_ENTRIES)] *= mapleson_factor(age + 30.0) / mapleson_factor(age)
    if not np.allclose(older, younger, rtol=1e-12, atol=0.0):
        raise RuntimeError("phase parameters depend on age other than through the Mapleson factor of MAC")
    flows = np.array([ph.true_flows for ph in cases[0].phases])
    durations = np.array([ph.duration for ph in cases[0].phases])
    return CaseTemplate(
        scenario, site, coef, age, initial, durations, flows, scenario.circuit.deficit_makeup == "room_air"
    )


def single_case_scenario(template: CaseTemplate, weight: float, age: float, duration: float) -> Scenario:
    """The scenario the single-case engine would run for one case of the batch (for checks).

    Every phase is cut or stretched as in :func:`phase_durations`; phases of 0 min are kept (the
    engine skips them too).

    Parameters
    ----------
    template : CaseTemplate
    weight : float [kg]
    age : float [year]
    duration : float [min]

    Returns
    -------
    Scenario

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> one = single_case_scenario(case_template(s), 90.0, 60.0, 25.0)
    >>> float(one.patient.weight.to("kg").magnitude), float(one.phases[0].duration.to("min").magnitude)
    (90.0, 25.0)
    """
    sc = _scenario_at(template.scenario, weight, age)
    d = phase_durations(template, np.array([float(duration)]))[0]
    phases = [ph.model_copy(update={"duration": Q_(float(x), "min")}) for ph, x in zip(sc.phases, d, strict=True)]
    return sc.model_copy(update={"phases": phases})


def phase_durations(template: CaseTemplate, total: np.ndarray) -> np.ndarray:
    """Phase durations [min] of cases lasting ``total`` minutes: the last phase stretches, or
    shorter cases end part-way through the earlier phases (shape (n, k)).

    Parameters
    ----------
    template : CaseTemplate
        Only its ``phase_durations`` [min] are read.
    total : numpy.ndarray [min]
        Case durations.

    Returns
    -------
    numpy.ndarray, shape (n, k) [min]

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> phase_durations(SimpleNamespace(phase_durations=np.array([10.0, 50.0])), np.array([90.0, 6.0]))
    array([[10., 80.],
           [ 6.,  0.]])
    """
    d = np.broadcast_to(template.phase_durations, (len(total), len(template.phase_durations))).copy()
    d[:, -1] = 0.0
    end = np.cumsum(d, axis=1)
    start = end - d
    d = np.clip(np.minimum(end, total[:, None]) - start, 0.0, None)
    d[:, -1] = np.maximum(total - start[:, -1], 0.0)
    return d


def parameters(template: CaseTemplate, weights: np.ndarray, ages: np.ndarray) -> np.ndarray:
    """Phase parameter vectors of many patients, shape (n, k, NP).

    Parameters
    ----------
    template : CaseTemplate
    weights : numpy.ndarray [kg]
    ages : numpy.ndarray [year]

    Returns
    -------
    numpy.ndarray, shape (n, k, NP)
        In the internal units of :mod:`estimator.physics.circuit`.

    References
    ----------
    Brody S. Bioenergetics and Growth, 1945 (power laws of body mass; from memory); Mapleson WW. Br J
    Anaesth 1996;76:179-85 (age factor of MAC).

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> from estimator.simulation.case_setup import prepare
    >>> p = parameters(case_template(s), np.array([90.0]), np.array([40.0]))
    >>> one = prepare(single_case_scenario(case_template(s), 90.0, 40.0, 10.0)).phases[0].parameters
    >>> bool(np.allclose(p[0, 0], one, rtol=1e-9))
    True
    """
    kg = np.asarray(weights, dtype=float)[:, None, None]
    cf = template.coefficients
    p = cf[0][None] + cf[1][None] * kg**0.75 + cf[2][None] * kg
    ratio = mapleson_factor(np.asarray(ages, dtype=float)) / mapleson_factor(template.reference_age)
    p[:, :, list(AGE_ENTRIES)] *= np.asarray(ratio).reshape(-1, 1, 1)
    return p


def _initial_states(template: CaseTemplate, params: np.ndarray) -> np.ndarray:
    if template.initial is not None:
        return np.broadcast_to(template.initial, (params.shape[0], c.NY)).copy()
    return np.array([initial_state(template.scenario, p[0], template.site) for p in params])


def absolute_tolerance() -> np.ndarray:
    """Absolute tolerance per state of the batch integrator (fractions, then amounts [mmol]).

    Returns
    -------
    numpy.ndarray, float64[NY]
        ``ATOL_FRACTION`` [-] for the core states, ``ATOL_AMOUNT`` [mmol] for the running totals.

    Examples
    --------
    >>> a = absolute_tolerance()
    >>> bool(a[0] < a[-1])
    True
    """
    atol = np.full(c.NY, ATOL_AMOUNT)
    atol[:NCORE] = ATOL_FRACTION
    return atol


def run_batch(
    template: CaseTemplate,
    weights: Sequence[float],
    ages: Sequence[float],
    durations: Sequence[float],
    *,
    rtol: float = RTOL,
    chunk: int = CHUNK,
    progress: Callable[[float], None] | None = None,
    adjust: Callable[[np.ndarray, slice], np.ndarray] | None = None,
) -> dict[str, np.ndarray]:
    """Totals of many cases of one template.

    Parameters
    ----------
    template : CaseTemplate
    weights, ages, durations : sequence of float [kg], [year], [min]
        One entry per case (validated by the caller: the case-mix reader checks the ranges).
    rtol : float [-]
        Relative tolerance (default :data:`RTOL`).
    chunk : int
        Cases integrated at a time.
    progress : callable, optional
        Called with the fraction done after each chunk.
    adjust : callable, optional
        ``adjust(p, rows)`` returns the parameter arrays (shape (m, phases, NP)) of the cases ``rows``
        changed per patient (between-patient variation, :func:`estimator.simulation.spread.forecast_adjuster`).
        It must keep the ratios of alveolar ventilation, O2 consumption and CO2 production, on which
        the shared initial state depends (the spread factors scale all three together).

    Returns
    -------
    dict of numpy arrays
        The keys and units of :data:`TOTAL_UNITS` (gas litres free gas at 15 degC and 101.325 kPa,
        as in :func:`estimator.simulation.engine.simulate`), plus ``evaluations`` per case and ``steps``.

    References
    ----------
    Sommeijer BP et al. J Comput Appl Math 1998;88:315-26 (RKC); patient scaling as :func:`parameters`.
    """
    wt = np.asarray(weights, dtype=float)
    ag = np.asarray(ages, dtype=float)
    total = np.asarray(durations, dtype=float)
    n = len(wt)
    out = {k: np.empty(n) for k in TOTAL_UNITS}
    out["evaluations"] = np.empty(n, dtype=np.int64)
    out["steps"] = np.empty(n, dtype=np.int64)
    atol = absolute_tolerance()
    for lo in range(0, n, chunk):
        sl = slice(lo, min(n, lo + chunk))
        p = parameters(template, wt[sl], ag[sl])
        if adjust is not None:
            p = adjust(p, sl)
        d = phase_durations(template, total[sl])
        y0 = _initial_states(template, p)
        m = len(y0)
        y1, mk, extra = np.empty((m, c.NY)), np.zeros((m, d.shape[1])), np.empty((m, 2))
        st = np.zeros((m, 5), dtype=np.int64)
        integrate_cases(y0, p, np.ascontiguousarray(d), rtol, atol, y1, mk, extra, st)
        if st[:, 4].any():
            raise RuntimeError(
                f"the batch integrator failed (step size collapsed) in {int((st[:, 4] > 0).sum())} case(s)"
            )
        for key, v in _totals(template, p[:, 0], y0, y1, d, mk, total[sl]).items():
            out[key][sl] = v
        out["minimum_inspired_oxygen"][sl] = extra[:, 0]
        out["final_mac_ratio"][sl] = extra[:, 1]
        out["evaluations"][sl] = st[:, 2]
        out["steps"][sl] = st[:, 0] + st[:, 1]
        if progress is not None:
            progress(sl.stop / n)
    return out


def _totals(template, p0, y0, y1, d, mk, total) -> dict[str, np.ndarray]:
    """Totals as :func:`estimator.simulation.assemble.build_result` forms them, for many cases at once."""
    sc = template.scenario
    amb = template.site.mmol_per_litre
    gas_l = fresh_gas_litres(d, template.true_flows, mk, amb, template.makeup_air)  # (n, 3) ambient litres
    cap = sc.circuit.absorbent_capacity.to("L").magnitude
    return {"duration": total.copy(), **totals_from_deltas(c.running_totals(y1 - y0), gas_l, amb, sc.agent.name, cap)}
