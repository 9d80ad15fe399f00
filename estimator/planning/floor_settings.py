"""Flow-floor settings and the flowmeter scale: settable flows, candidate settings, limits needing no run.

The scenario's ``[flow_floor]`` table as plain numbers (:class:`Settings`), every flow the
flowmeter scale can be set to, the settable (O2, air, N2O) candidates that keep a phase's
proportions, and the machine limits that are checked without a simulation (basal O2, O2 share
with N2O, the flowmeter's top, the sevoflurane label's minimum), and the judgement of a trial's
time series against every limit (:func:`judge`, also on a run not yet finished: then only the
failures no later minute can undo), and one :class:`Trial` run integrated chunk by chunk so that a
failing trial stops at its first certain failure; the search itself is :mod:`estimator.planning.safety`.

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
from typing import Any

import numpy as np

from ..errors import InputError
from ..inputs.scenario import PhaseInput, Scenario
from ..limits import (
    CODES,
    HYPOXIC_FRACTION,
    LABEL_MAC_HOURS,
    LABEL_MIDDLE_FLOW,
    LABEL_MINIMUM_FLOW,
    TARGET_BAND,
    codes_of,
)
from ..numerics.dopri5 import integrate_phase
from ..physics import circuit as c
from ..simulation.case_setup import phase_times
from ..simulation.case_site import site_state
from ..simulation.results import SETTLE  # inspired O2 is judged from this case time on [min]
from ..units import Q_

#: Default flowmeter scale: 0.1 L/min steps up to 1 L/min, 0.5 L/min above (common practice, from
#: memory, no source).
DEFAULT_SCALE = ((1.0, 0.1), (15.0, 0.5))
#: The binding limits in the order they are reported (the registry's binding codes, less the two
#: that only name why no limit failed: the scale's lowest setting and a phase without fresh gas).
LIMITS = tuple(k for k in codes_of("binding") if k not in ("FLOWMETER_MINIMUM", "NO_FRESH_GAS"))
#: Plain words for each binding code (the ``limits`` key of the JSON), from the registry.
LIMIT_TEXT = {k: CODES[k].meaning for k in (*LIMITS, "FLOWMETER_MINIMUM")}
CHECK_INTERVAL = 1.0  # [min] resolution of the limit checks
#: A trial is integrated in chunks, the first of this many check intervals, each next ``CHUNK_GROWTH``
#: times as long; after each chunk the series so far is judged, and a trial failed for good stops there.
FIRST_CHUNK = 16
CHUNK_GROWTH = 2


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
        from ..physics.inspired_oxygen import fraction_for_sea_level_threshold

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
        o2, air, n2o = (round_up(t * s, st.scale) if s > 0 else 0.0 for s in share)
        if o2 is None or air is None or n2o is None or (o2, air, n2o) in seen:
            continue
        f = (o2, air, n2o)
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


@dataclass(frozen=True)
class Window:
    """Where a trial runs: from ``t0`` to the phase end ``t1``, its phase starting at ``t_phase0`` [min].

    ``mac_before`` [MAC-hour]: MAC-hours already spent below the label's middle flow.
    """

    t0: float
    t_phase0: float
    t1: float
    mac_before: float = 0.0


def judge(times, ys, ws, p, flows, st: Settings, agent: str, win: Window, final: bool = True, amb: float | None = None):
    """Failed limits of a trial's series (``times`` [min], derived ``ws``), sorted as ``LIMITS``.

    ``ys`` holds the first and the latest state of the series (more rows may be given).

    With ``final`` False the series is the first part of a run: only failures that no later point
    can undo are reported (inspired O2 or a deficit seen, a deadline passed, a pinned dial, a label
    dose exceeded). With ``amb`` (gas [mmol/L] at ambient conditions) the margin left on each limit is
    also given. Returns (failed, margins or None, MAC-minutes of the series).
    """
    failed = static_failures(flows, st, agent)
    judged = times >= SETTLE
    fio2 = ws[judged, c.W_FI + c.O2] if judged.any() else ws[-1:, c.W_FI + c.O2]
    out: dict[str, tuple[float, str]] = {}  # margins as (value, unit); quantities only if asked for
    if amb is not None:
        out = {
            "INSPIRED_O2": (float(fio2.min() - st.threshold), "dimensionless"),
            "GAS_BALANCE": (float(ws[:, c.W_EX].min() / amb), "L/min"),
            "BASAL_O2": (flows[0] - st.basal_o2, "L/min"),
            "FLOWMETER_RANGE": (st.max_flow - max(flows), "L/min"),
        }
    if fio2.min() < st.threshold - 1e-9 and (final or judged.any()):
        failed.append("INSPIRED_O2")
    if ws[:, c.W_MAKEUP].max() > 1e-9:
        failed.append("GAS_BALANCE")
    past = times[-1]  # a deadline before this time is decided
    if p[c.P_MODE] == c.MODE_HOLD:
        et, tgt, u = ws[:, c.W_FET + c.AGENT], ws[:, c.W_TARGET], ws[:, c.W_U]
        ok = et >= (1 - TARGET_BAND) * tgt
        deadline = max(win.t_phase0 + st.reach_within, win.t0)
        if not ok.any() or times[int(np.argmax(ok))] > deadline + 1e-9:
            if final or past > deadline + 1e-9:
                failed.append("TARGET_REACH")
            out["TARGET_REACH"] = (float("nan"), "min")
        else:
            i = int(np.argmax(ok))
            out["TARGET_REACH"] = (float(deadline - times[i]), "min")
            after = slice(i, None)
            pinned = (u[after] >= p[c.P_UMAX] * (1 - 1e-9)) & ~ok[after]
            if pinned.any():
                failed.append("TARGET_HOLD")
            out["TARGET_HOLD"] = (float(100 * (p[c.P_UMAX] - u[after].max())), "percent")
    elif p[c.P_UFIXED] == 0.0 and p[c.P_CARRIER + c.N2O] == 0.0 and ws[0, c.W_MAC] > st.wash_out_to + 1e-9:
        # emergence: dial off, no N2O delivered, and agent (or N2O) left to wash out
        mac = ws[:, c.W_MAC]
        deadline = max(min(win.t_phase0 + st.wash_out_within, win.t1), win.t0)
        low = mac <= st.wash_out_to + 1e-9
        reached = int(np.argmax(low)) if low.any() else None
        kept = reached is not None and bool(low[reached:].all())
        if reached is None or times[reached] > deadline + 1e-9 or not kept:
            if final or reached is not None or past > deadline + 1e-9:
                failed.append("WASH_OUT")
            out["WASH_OUT"] = (float("nan"), "min")
        else:
            out["WASH_OUT"] = (float(deadline - times[reached]), "min")
    mac_min = float(ys[-1, c.Y_MACMIN] - ys[0, c.Y_MACMIN])
    if "sevoflurane_us_label" in st.policies and agent == "sevoflurane":
        total = sum(flows)
        mid = total < LABEL_MIDDLE_FLOW - 1e-9
        used = win.mac_before + (mac_min / 60 if mid else 0.0)
        out["LABEL_SEVOFLURANE_US"] = (
            (LABEL_MAC_HOURS - used, "MAC_hour") if mid else (total - LABEL_MINIMUM_FLOW, "L/min")
        )
        if mid and used > LABEL_MAC_HOURS + 1e-9 and "LABEL_SEVOFLURANE_US" not in failed:
            failed.append("LABEL_SEVOFLURANE_US")
    margins = {k: Q_(v, unit) for k, (v, unit) in out.items()} if amb is not None else None
    return sorted(set(failed), key=LIMITS.index), margins, mac_min


@dataclass
class Check:
    """Outcome of one trial run: failed limits and the margin left on each limit."""

    failed: list[str]
    margins: dict[str, Any]
    end_state: np.ndarray | None = None
    mac_minutes: float = 0.0


class Trial:
    """One trial: ``flows`` from state ``y`` at ``win.t0`` to the phase end, integrated chunk by chunk.

    The chunks land on the same check times whether the trial stops early or runs to the end, so a
    verdict does not depend on how far it was taken; a trial is only passed once run to the end.
    """

    def __init__(self, p: np.ndarray, flows, y: np.ndarray, win: Window, st: Settings, agent: str, atol):
        self.p, self.flows, self.win, self.st, self.agent, self.atol = p, flows, win, st, agent, atol
        self.times = phase_times(win.t0, win.t1 - win.t0, CHECK_INTERVAL)
        self.ends = np.stack([y, y])  # first and latest state
        self.ws = np.empty((len(self.times), c.NW))  # derived flows at the check times run so far
        self.ws[:1] = c.derived_series(self.ends[:1], self.p)
        self.n, self.h, self.size = 1, 0.0, FIRST_CHUNK
        self.done = len(self.times) == 1
        self.failed: list[str] = []  # failures no later point can undo (all failures once done)
        self.accepted = False  # passed: only ever set once run to the phase end
        self._judge()

    def _advance(self) -> None:
        i, j = self.n - 1, min(self.n - 1 + self.size, len(self.times) - 1)
        ys, stats, self.h = integrate_phase(self.ends[1], self.p, self.times[i : j + 1], 1e-6, self.atol, self.h, 10**6)
        if stats[0] < 0:
            raise RuntimeError("the circuit model failed to integrate a trial segment")
        self.ends[1] = ys[-1]
        self.ws[i + 1 : j + 1] = c.derived_series(ys[1:], self.p)
        self.n, self.size, self.done = j + 1, self.size * CHUNK_GROWTH, j == len(self.times) - 1

    def _judge(self, amb: float | None = None):
        n = self.n
        out = judge(
            self.times[:n], self.ends, self.ws[:n], self.p, self.flows, self.st, self.agent, self.win, self.done, amb
        )
        self.failed = out[0]
        return out

    def fails(self, stop: str | None = "any") -> bool:
        """Whether the trial fails; run until a failure is certain (``stop="any"``), until inspired O2
        (first of ``LIMITS``) is seen failing (``"first"``), or to the end (None)."""
        while not self.done:
            if self.failed and (stop == "any" or (stop == "first" and self.failed[0] == LIMITS[0])):
                return True
            self._advance()
            self._judge()
        self.accepted = not self.failed
        return bool(self.failed)

    def check(self, amb: float) -> Check:
        """The whole run judged, with the margin left on every limit (``amb``: gas [mmol/L] at ambient conditions)."""
        self.fails(None)
        failed, margins, mac_min = self._judge(amb)
        return Check(failed, margins, self.ends[1].copy(), mac_min)
