"""Flow-floor settings and the flowmeter scale: settable flows, candidate settings, limits needing no run.

The scenario's ``[flow_floor]`` table as plain numbers (:class:`Settings`), every flow the
flowmeter scale can be set to, the settable (O2, air, N2O) candidates that keep a phase's
proportions, and the machine limits that are checked without a simulation (basal O2, O2 share
with N2O, the flowmeter's top, the sevoflurane label's minimum); the search itself is
:mod:`estimator.planning.safety`.

References
----------
.. [1] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37-44 (inspired O2
   threshold 0.30).

Examples
--------
>>> scale = settable_values([(1.0, 0.1), (15.0, 0.5)])
>>> round_up(0.33, scale), len(scale)
(0.4, 38)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..inputs.scenario import PhaseInput, Scenario
from ..limits import HYPOXIC_FRACTION, LABEL_MINIMUM_FLOW
from ..simulation.case_site import site_state
from ..units import Q_

#: Default flowmeter scale: 0.1 L/min steps up to 1 L/min, 0.5 L/min above (common practice, from
#: memory, no source).
DEFAULT_SCALE = ((1.0, 0.1), (15.0, 0.5))


@dataclass(frozen=True)
class Settings:
    """Plain-number settings of the flow floor (from the scenario's ``[flow_floor]`` table)."""

    threshold: float
    reach_within: float
    wash_out_to: float
    wash_out_within: float
    basal_o2: float
    min_o2_share: float
    max_flow: float
    grid: float
    scale: np.ndarray
    policies: tuple[str, ...]


def settings_from(scenario: Scenario, threshold: float | None = None) -> Settings:
    """Checked plain-number settings; the scale is the sorted list of settable flows [L/min]."""
    ff = scenario.flow_floor
    thr = ff.threshold_inspired_oxygen.to("").magnitude if threshold is None else float(threshold)
    if not HYPOXIC_FRACTION <= thr <= 1.0:
        raise InputError("flow_floor.threshold_inspired_oxygen", thr, "0.21 to 1 (never below room air)")
    if ff.threshold_basis == "partial_pressure":
        from ..physics.site import fraction_for_sea_level_threshold

        ambient = site_state(scenario).ambient_pressure_kpa
        at_site = float(fraction_for_sea_level_threshold(thr, Q_(ambient, "kPa")))
        if at_site > 1.0:
            raise InputError(
                "flow_floor.threshold_inspired_oxygen",
                thr,
                f"a PiO2 reachable at {ambient:.1f} kPa (even 100 % O2 gives less)",
            )
        thr = at_site
    bands = (
        [(b.up_to.to("L/min").magnitude, b.step.to("L/min").magnitude) for b in ff.scale]
        if ff.scale
        else list(DEFAULT_SCALE)
    )
    return Settings(
        thr,
        ff.reach_within.to("min").magnitude,
        ff.wash_out_to.to("MAC").magnitude,
        ff.wash_out_within.to("min").magnitude,
        ff.basal_oxygen_flow.to("L/min").magnitude,
        ff.minimum_oxygen_share.to("").magnitude,
        ff.maximum_flow.to("L/min").magnitude,
        ff.grid_interval.to("min").magnitude,
        settable_values(bands),
        tuple(ff.policies),
    )


def settable_values(bands: list[tuple[float, float]]) -> np.ndarray:
    """Every settable flow of a scale given as (up_to, step) bands [L/min], ascending.

    >>> settable_values([(1.0, 0.1), (3.0, 0.5)]).round(2).tolist()
    [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0, 1.5, 2.0, 2.5, 3.0]
    """
    values, low = [], 0.0
    for i, (up, step) in enumerate(sorted(bands)):
        if up <= low or step <= 0:
            raise InputError(
                f"flow_floor.scale[{i}]",
                f"up_to {up:g}, step {step:g}",
                "bands with increasing up_to and a step above 0",
            )
        n = int(math.floor((up - low) / step + 1e-9))
        values += [round(low + k * step, 9) for k in range(1, n + 1)]
        low = values[-1] if values else up
    return np.array(values)


def round_up(flow: float, scale: np.ndarray) -> float | None:
    """The smallest settable value at or above ``flow`` (None above the scale's top).

    >>> round_up(0.33, settable_values([(1.0, 0.1), (15.0, 0.5)]))
    0.4
    """
    if flow <= 0:
        return 0.0
    i = int(np.searchsorted(scale, flow - 1e-9))
    return float(scale[i]) if i < len(scale) else None


def candidates(phase: PhaseInput, st: Settings) -> list[tuple[float, float, float]]:
    """Settable (O2, air, N2O) flows keeping the phase's proportions, ascending in total."""
    flows = np.array([q.to("L/min").magnitude for q in phase.flows()])
    total = flows.sum()
    if total <= 0:
        return []
    share = flows / total
    seen, out = set(), []
    for t in st.scale:
        f = tuple(round_up(t * s, st.scale) if s > 0 else 0.0 for s in share)
        if None in f or f in seen:
            continue
        seen.add(f)
        out.append(f)
    return sorted(out, key=lambda f: (sum(f), f))


def with_flows(phase: PhaseInput, flows: tuple[float, float, float]) -> PhaseInput:
    o2, air, n2o = (Q_(v, "L/min") for v in flows)
    return phase.model_copy(
        update={
            "oxygen": o2,
            "air": air,
            "nitrous_oxide": n2o,
            "oxygen_fraction": None,
            "total_flow": None,
            "balance": None,
        }
    )


def static_failures(flows: tuple[float, float, float], st: Settings, agent_name: str) -> list[str]:
    """Limits that need no simulation: basal O2, O2 share with N2O, flowmeter range, label minimum."""
    o2, air, n2o = flows
    out = []
    if o2 < st.basal_o2 - 1e-9:
        out.append("BASAL_O2")
    if n2o > 0 and o2 / (o2 + n2o) < st.min_o2_share - 1e-9:
        out.append("O2_PROPORTION")
    if max(flows) > st.max_flow + 1e-9:
        out.append("FLOWMETER_RANGE")
    if "sevoflurane_us_label" in st.policies and agent_name == "sevoflurane" and sum(flows) < LABEL_MINIMUM_FLOW - 1e-9:
        out.append("LABEL_SEVOFLURANE_US")
    return out
