"""Flow floor over time: the lowest settable flow at every grid time of a phase, checked by one replay.

Each phase of the user's plan is cut at the grid times (default every 5 min). Starting from the
state the plan reaches at the phase start, each grid step gets the lowest settable candidate (the
phase's gas proportions, every gas on its own scale) whose *look-ahead trial* holds every limit:
the candidate held from the step's start to the next grid time plus :data:`LOOK_AHEAD` (and at
least to the phase's reach and wash-out deadlines), capped at the phase end. The steps follow one
another, so the floors together are a schedule: "from this time, this flow is the lowest, if the
flows before it were the floor too".

A look-ahead trial cannot see a failure beyond its horizon (inspired O2 keeps falling for hours at
a low flow as the tissues take up less agent and N2O), so the schedule is never published on the
strength of the trials alone: every step is replayed from the state the steps before it left, and
the whole phase so far is judged after each step (:func:`~estimator.planning.floor_settings.judge`,
at the phase end with every limit final). A step whose replay breaks a limit is raised to the next
settable candidate and replayed; a step already at the top raises the step before it. Raises only
go up, so the repair ends. The published floor of every step is therefore one that the end-to-end
replay of the schedule holds; where no candidate holds, the step reports no floor and the limit
that fails. The cost is linear in the length of the phase: trials of bounded length per step and
one replay.

References
----------
.. [1] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37-44 (inspired O2
   threshold 0.30).

Examples
--------
>>> from estimator.inputs.scenario import scenario_from_dict
>>> from estimator.planning.safety import flow_floor
>>> sc = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
...     "phases": [{"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", "vaporizer": "2 %"}]})
>>> [(g["time"].magnitude, g["floor"].magnitude > 0) for g in flow_floor(sc).grid]
[(0.0, True), (5.0, True), (10.0, True), (15.0, True)]
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..inputs.scenario import PhaseInput
from ..limits import LABEL_MAC_HOURS, LABEL_MIDDLE_FLOW
from ..numerics.dopri5 import integrate_phase
from ..physics import circuit as c
from ..simulation.case_setup import phase_times
from ..units import Q_
from .floor_settings import CHECK_INTERVAL, Window, judge, static_failures

#: Look-ahead beyond the next grid time [min]. The breathing system's gas (circuit plus lungs, about
#: 6-8 L) is renewed with a time constant V / fresh gas flow: 3-4 min at 2 L/min, 12-16 min at
#: 0.5 L/min; 30 min covers about two time constants at the lowest flows of a low-flow plan. The
#: value only sets how often the replay has to raise a step (it does not make the floor safe: the
#: replay does); chosen as a round value, common practice, no source.
LOOK_AHEAD = 30.0
#: Raises allowed per grid step of a phase, plus twice the number of candidates, before the repair gives
#: up (the step then reports no floor): keeps the replay linear where no setting mends a phase (a
#: numerical bound, no source).
REPAIRS_PER_STEP = 4
_LABEL = "sevoflurane_us_label"


@dataclass
class _Step:
    """One grid step: candidate index (None: none holds), its replayed series and the limit that binds."""

    t0: float
    t1: float
    start: np.ndarray
    idx: int | None
    binding: str | None
    # the replay (set by ``_play``; empty until then)
    times: np.ndarray = dataclasses.field(default_factory=lambda: np.empty(0))
    ws: np.ndarray = dataclasses.field(default_factory=lambda: np.empty(0))
    end: np.ndarray = dataclasses.field(default_factory=lambda: np.empty(0))
    mac: float = 0.0  # MAC-minutes over the step


def flow_floor_grid(pl: Any, live: list[tuple[int, PhaseInput]]) -> list[dict[str, Any]]:
    """Rows ``{time, floor, binding}`` of the floor schedule of every phase, on the user's plan.

    ``pl`` is the flow floor's :class:`~estimator.planning.safety.Planner`; ``live`` the phases with
    a duration, with their index. Each phase starts from the state the *plan* reaches at its start.
    """
    out, y, t = [], pl.y0.copy(), 0.0
    for _, ph in live:
        dur = ph.duration.to("min").magnitude
        for s in PhaseGrid(pl, ph, y, t, t + dur).steps():
            flows = None if s.idx is None else pl.candidates(ph)[s.idx]
            out.append(
                {
                    "time": Q_(float(s.t0), "min"),
                    "floor": Q_(float(sum(flows)), "L/min") if flows else None,
                    "binding": s.binding,
                }
            )
        y = pl.run(ph, y, t, t + dur, dur).states[-1].copy()
        t += dur
    return out


class PhaseGrid:
    """The floor schedule of one phase from state ``y0`` at ``tp0`` to the phase end ``tp1`` [min]."""

    def __init__(self, pl: Any, phase: PhaseInput, y0: np.ndarray, tp0: float, tp1: float):
        self.pl, self.ph, self.tp0, self.tp1 = pl, phase, tp0, tp1
        self.cands = pl.candidates(phase)
        st = pl.st
        self.label = _LABEL in st.policies and pl.agent == "sevoflurane"
        self.replay_st = dataclasses.replace(st, policies=tuple(x for x in st.policies if x != _LABEL))
        edges = list(phase_times(tp0, tp1 - tp0, st.grid))
        self.edges = edges
        self.y0 = y0
        self.repairs = 0
        self.cap = REPAIRS_PER_STEP * len(edges) + 2 * len(self.cands)

    # -- the search of one step ------------------------------------------------------------------
    def _horizon(self, t1: float) -> float:
        """End of the look-ahead of a step ending at ``t1`` [min]."""
        st = self.pl.st
        return min(self.tp1, max(t1 + LOOK_AHEAD, self.tp0 + st.reach_within, self.tp0 + st.wash_out_within))

    def _search(self, y: np.ndarray, t0: float, t1: float, mac_low: float) -> tuple[int | None, str | None]:
        res = self.pl.floor(self.ph, y, t0, self.tp0, self._horizon(t1), mac_low, need="first")
        if res.flows is None:
            return None, res.binding[0] if res.binding else None
        return self.cands.index(res.flows), res.binding[0] if res.binding else None

    # -- the replay ------------------------------------------------------------------------------
    def _play(self, s: _Step) -> None:
        p = self.pl.parameters(self.ph, self._flows(s))
        s.times = phase_times(s.t0, s.t1 - s.t0, CHECK_INTERVAL)
        ys, stats, _ = integrate_phase(s.start, p, s.times, 1e-6, self.pl.atol, 0.0, 10**6)
        if stats[0] < 0:
            raise RuntimeError("the circuit model failed to integrate a grid step")
        s.ws = c.derived_series(ys, p)
        s.end = ys[-1].copy()
        s.mac = float(ys[-1, c.Y_MACMIN] - ys[0, c.Y_MACMIN])

    def _flows(self, s: _Step):
        """Flows of step ``s``; a step with no floor is played at the top candidate."""
        return self.cands[s.idx if s.idx is not None else len(self.cands) - 1]

    def _failures(self, steps: list[_Step], origin: int, final: bool) -> list[str]:
        """Limits broken by the replay of ``steps[origin:]`` (certain ones only unless ``final``)."""
        part = steps[origin:]
        # every step's own first row too: the flows switch there (a lower flow can open a deficit at once)
        times = np.concatenate([s.times for s in part])
        ws = np.concatenate([s.ws for s in part])
        ends = np.stack([part[0].start, part[-1].end])
        last = part[-1]
        p = self.pl.parameters(self.ph, self._flows(last))
        win = Window(part[0].t0, self.tp0, self.tp1)
        failed, _, _ = judge(times, ends, ws, p, self._flows(last), self.replay_st, self.pl.agent, win, final)
        if self._mac_low(steps) > LABEL_MAC_HOURS + 1e-9:
            failed.append("LABEL_SEVOFLURANE_US")
        return failed

    def _raise(self, s: _Step) -> bool:
        """Raise ``s`` to the next candidate above with no machine limit broken; False at the top."""
        if s.idx is None:
            return False
        for i in range(s.idx + 1, len(self.cands)):
            if not static_failures(self.cands[i], self.pl.st, self.pl.agent):
                s.idx = i
                return True
        return False

    def _mac_low(self, steps: list[_Step]) -> float:
        """MAC-hours spent so far in this phase below the label's middle flow (0 without the label policy)."""
        if not self.label:
            return 0.0
        return sum(s.mac for s in steps if sum(self._flows(s)) < LABEL_MIDDLE_FLOW - 1e-9) / 60

    def steps(self) -> list[_Step]:
        """Search, replay and repair every step in turn; returns the steps of the phase."""
        steps: list[_Step] = []
        origin, y, edges = 0, self.y0, self.edges
        if not self.cands:
            return [_Step(t0, t1, y, None, "NO_FRESH_GAS") for t0, t1 in zip(edges[:-1], edges[1:], strict=True)]
        for k in range(len(edges) - 1):
            t0, t1 = edges[k], edges[k + 1]
            idx, binding = self._search(y, t0, t1, self._mac_low(steps))
            s = _Step(t0, t1, y, idx, binding)
            self._play(s)
            steps.append(s)
            if idx is None:  # nothing holds from here: reported, and judging starts again after it
                origin, y = k + 1, s.end
                continue
            origin = self._repair(steps, origin, k == len(edges) - 2)
            y = steps[-1].end
        return steps

    def _repair(self, steps: list[_Step], origin: int, final: bool) -> int:
        """Raise steps until the replay from ``origin`` holds every limit; returns the new origin."""
        k = len(steps) - 1
        failed = self._failures(steps, origin, final)
        j = k
        while failed:
            self.repairs += 1
            if self.repairs <= self.cap and self._raise(steps[j]):
                steps[j].binding = failed[0]
                for i in range(j, k + 1):  # replay from the raised step with the later steps as they are
                    if i > j:
                        steps[i].start = steps[i - 1].end
                    self._play(steps[i])
                failed = self._failures(steps, origin, final)
                j = k
            elif self.repairs <= self.cap and j > origin and steps[j - 1].idx is not None:
                j -= 1
            else:  # no raise mends it: the last step reports no floor and judging starts after it
                steps[k].idx, steps[k].binding = None, failed[0]
                self._play(steps[k])
                return k + 1
        return origin
