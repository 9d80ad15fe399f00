"""Flow floor: the lowest safe fresh-gas flow over a case, the limit that binds, and advisories.

For each phase of a plan, the **flow floor** is the lowest total fresh-gas flow, keeping the phase's
gas proportions and settable on the configured flowmeter scale (every gas on its own scale), at
which every limit holds from the start to the end of the phase:

* ``INSPIRED_O2``: inspired O2 at or above the threshold (default 0.30, Baum and Aitkenhead 1995;
  never below 0.21);
* ``GAS_BALANCE``: no volume deficit (fresh gas covers net uptake, leak and unreturned sample gas);
* ``TARGET_REACH`` / ``TARGET_HOLD``: an end-tidal hold target reached within ``reach_within`` of the
  phase start and then held with the dial at or below the vaporizer maximum;
* ``WASH_OUT``: in a phase with the dial at 0 that starts above ``wash_out_to`` end-tidal MAC (agent
  and N2O; default 0.3 MAC, about MAC-awake: Stoelting RK et al. Anesthesiology 1970;33:5, Katoh T
  et al. Anesthesiology 1993;79:1132 for sevoflurane, from memory), that value is reached within
  ``wash_out_within`` of the phase start (default 10 min, common practice, no source; or the phase
  end if sooner) and kept;
* ``BASAL_O2``, ``O2_PROPORTION``, ``FLOWMETER_RANGE``: machine limits (basal O2 flow, at least 25 %
  O2 in O2/N2O, ISO 80601-2-13 anti-hypoxic proportioning, from memory; the flowmeter's top);
* ``LABEL_SEVOFLURANE_US`` (optional policy): sevoflurane US label, fresh gas not below 1 L/min and
  at most 2 MAC-hours at 1 to < 2 L/min.

Phases are taken in order: each phase's floor starts from the state the previous phase left *at its
floor*, so the floors together form the recommended schedule. On a time grid (default 5 min) each
phase of the user's own plan gets a floor schedule (:mod:`estimator.planning.floor_grid`): from the
state the plan reaches at the phase start, the lowest setting at every grid time, each step found by
look-ahead trials and the whole phase then replayed end to end (a step whose replay breaks a limit
is raised), so the cost grows linearly with the case length.
Limits are monotone in total flow (more flow: less deficit, faster wash-in), so each floor is
found by bisection over the settable candidates; the binding limit is the one that fails at the
next setting below the floor. Inspired O2 is not always monotone along the candidates: rounding to
the scale can add N2O or air at the same O2 flow, so a setting may fail above one that passes (each
phase reports such settings in ``failing_above``). A failing trial is stopped at its first failure
no later minute can undo, a passing one always runs to the end of its phase (or its look-ahead).

References
----------
.. [1] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37-44.
.. [2] Brattwall M, Warren-Stomberg M, Hesselvik F, Jakobsson J. Brief review: theory and practice
   of minimal fresh gas flow anesthesia. Can J Anesth 2012;59:785-97 (flow classes).
.. [3] Sevoflurane US prescribing information (label), compound A and fresh-gas flow.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..inputs.scenario import PhaseInput, Scenario
from ..limits import LABEL_MIDDLE_FLOW
from ..numerics.dopri5 import integrate_phase
from ..physics import circuit as c
from ..simulation import engine
from ..simulation.assemble import Segment
from ..simulation.case_setup import prepare
from ..units import Q_
from .floor_grid import flow_floor_grid
from .floor_settings import (  # noqa: F401 (re-exported: the scale helpers, settings_from, Check, CHECK_INTERVAL)
    CHECK_INTERVAL,
    DEFAULT_SCALE,
    LIMIT_TEXT,
    LIMITS,
    Check,
    Settings,
    Trial,
    Window,
    candidates,
    round_up,
    settable_values,
    settings_from,
    with_flows,
)


@dataclass(frozen=True)
class Floor:
    """Floor of a phase from one time: settable flows (None: none passes), their check, binding limits, next below."""

    flows: tuple[float, float, float] | None
    check: Check | None
    binding: list[str]
    below: tuple[float, float, float] | None = None


@dataclass
class FloorResult:
    """Result of :func:`flow_floor`; ``to_json`` gives the ``lowflow safe-flow`` contract."""

    scenario: Scenario
    settings: Settings
    phases: list[dict[str, Any]]
    grid: list[dict[str, Any]]
    schedule: list[dict[str, Any]]
    comparison: dict[str, Any]
    warnings: list[tuple[str, str]] = field(default_factory=list)
    schedule_text: str = ""

    def to_json(self) -> dict[str, Any]:
        from ..jsonout import jsonable
        from ..units import GAS_VOLUME_REFERENCE

        return jsonable(
            {
                "threshold_inspired_oxygen": Q_(self.settings.threshold, "dimensionless"),
                "phases": self.phases,
                "grid": self.grid,
                "schedule": self.schedule,
                "schedule_text": self.schedule_text,
                "comparison": self.comparison,
                "warnings": [{"code": k, "message": m} for k, m in self.warnings],
                "limits": LIMIT_TEXT,
                "gas_volume_reference": GAS_VOLUME_REFERENCE,
            }
        )


class Planner:
    """Runs trial segments of a scenario on the circuit kernel (no pint in the loop)."""

    def __init__(self, scenario: Scenario, st: Settings, search: str = "stop"):
        self.sc = scenario
        self.st = st
        self.case = prepare(scenario)
        self.patient = self.case.patient
        self.site = self.case.site
        self.base = self.case.base
        self.y0 = self.case.initial
        self.atol = engine.absolute_tolerance()
        self.amb = self.case.mmol_per_litre
        self.agent = scenario.agent.name
        self.search = search  # "stop": a failing trial stops at its first certain failure; "bisect": runs to the end
        self._parameters: dict[tuple, tuple[PhaseInput, np.ndarray]] = {}
        self._candidates: dict[int, tuple[PhaseInput, list[tuple[float, float, float]]]] = {}

    def candidates(self, phase: PhaseInput) -> list[tuple[float, float, float]]:
        """Settable candidates of ``phase`` (:func:`~estimator.planning.floor_settings.candidates`), listed once."""
        key = id(phase)  # the phase is kept with its entry, so its id stays its own
        if key not in self._candidates:
            self._candidates[key] = (phase, candidates(phase, self.st))
        return self._candidates[key][1]

    def parameters(self, phase: PhaseInput, flows) -> np.ndarray:
        """Kernel parameters of ``phase`` at settable ``flows`` (set up once per phase and flows)."""
        key = (id(phase), *flows)
        if key not in self._parameters:  # the phase is kept with its entry, so its id stays its own
            self._parameters[key] = (phase, self.case.phase_setup(with_flows(phase, flows), 0.0, 0.0).parameters)
        return self._parameters[key][1]

    def run(self, phase: PhaseInput, y: np.ndarray, t0: float, t1: float, step: float = CHECK_INTERVAL) -> Segment:
        """States and derived flows every ``step`` from ``t0`` to ``t1`` for ``phase`` starting at state ``y``."""
        ph = self.case.phase_setup(phase, t0, t1 - t0)
        times = ph.times(step)
        ys, stats, _ = integrate_phase(y, ph.parameters, times, 1e-6, self.atol, 0.0, 10**6)
        if stats[0] < 0:
            raise RuntimeError("the circuit model failed to integrate a trial segment")
        return Segment(ph, times, ys, c.derived_series(ys, ph.parameters), stats)

    def trial(self, phase: PhaseInput, flows, y, t0, t_phase0, t1, mac_before: float = 0.0) -> Trial:
        """A trial of ``flows`` from ``t0`` to the phase end ``t1`` (not yet run)."""
        win = Window(t0, t_phase0, t1, mac_before)
        return Trial(self.parameters(phase, flows), flows, y, win, self.st, self.agent, self.atol)

    def check(self, phase: PhaseInput, flows, y, t0, t_phase0, t1, mac_before: float = 0.0) -> Check:
        """Run ``flows`` from ``t0`` to the phase end ``t1`` and test every limit."""
        return self.trial(phase, flows, y, t0, t_phase0, t1, mac_before).check(self.amb)

    def floor(self, phase, y, t0, t_phase0, t1, mac_before=0.0, *, need: str = "all") -> Floor:
        """The lowest candidate of ``phase`` at which every limit holds from ``t0``.

        Bisection over the candidates; a failing trial stops at its first certain failure (with the
        ``"bisect"`` search every trial runs to the phase end: the same verdicts, the same floor).
        ``need="first"``: only the first binding limit is wanted (the grid), and no check is kept.
        """
        cands = self.candidates(phase)
        if not cands:
            return Floor(None, None, ["NO_FRESH_GAS"])
        cache: dict[int, Trial] = {}
        plain = self.search == "bisect"

        def test(i: int) -> Trial:
            if i not in cache:
                cache[i] = self.trial(phase, cands[i], y, t0, t_phase0, t1, mac_before)
            return cache[i]

        def fails(i: int) -> bool:
            return test(i).fails(None if plain else "any")

        hi = len(cands) - 1
        if fails(hi):
            test(hi).fails(None if need == "all" else "first")
            return Floor(None, test(hi).check(self.amb) if need == "all" else None, test(hi).failed)
        lo = -1  # invariant: cands[lo] fails (or lo = -1), cands[hi] passes
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if fails(mid):
                lo = mid
            else:
                hi = mid
        return self._floor(cands, test, lo, hi, need)

    def _floor(self, cands, test, lo: int, hi: int, need: str) -> Floor:
        if lo >= 0:
            test(lo).fails(None if need == "all" else "first")
        binding = test(lo).failed if lo >= 0 else ["FLOWMETER_MINIMUM"]
        return Floor(
            cands[hi], test(hi).check(self.amb) if need == "all" else None, binding, cands[lo] if lo >= 0 else None
        )


def _flow_dict(flows) -> dict[str, Any]:
    return {k: Q_(v, "L/min") for k, v in zip(("oxygen", "air", "nitrous_oxide"), flows, strict=True)}


def lowest_oxygen_flow(pl: Planner, phase: PhaseInput, flows, y, t0, t1, mac_before=0.0) -> float | None:
    """At the chosen total, the lowest settable O2 flow (rest air or N2O) at which every limit holds.

    Only for two-gas carriers (O2/air or O2/N2O); None otherwise or when no split passes.
    """
    o2, air, n2o = flows
    if (air > 0) == (n2o > 0) or o2 <= 0:
        return None
    total = o2 + air + n2o
    opts = []
    for v in pl.st.scale[pl.st.scale <= total + 1e-9]:
        rest = round(total - float(v), 9)
        if rest == 0 or round_up(rest, pl.st.scale) == rest:
            opts.append((float(v), rest, 0.0) if air > 0 else (float(v), 0.0, rest))
    lo, hi = -1, len(opts) - 1
    while hi >= 0 and opts[hi][0] < o2 - 1e-9:
        hi -= 1
    if hi < 0 or pl.trial(phase, opts[hi], y, t0, t0, t1, mac_before).fails():
        return None
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if pl.trial(phase, opts[mid], y, t0, t0, t1, mac_before).fails():
            lo = mid
        else:
            hi = mid
    return opts[hi][0]


def failing_above(pl: Planner, phase: PhaseInput, floor, y, t0, t1, mac_before=0.0) -> list[tuple]:
    """Settable mixes above the floor's total that break a limit from ``t0`` to the phase end.

    The floor is found by bisection, which takes the limits as monotone in the total flow; rounding
    each gas to the flowmeter scale can give a higher total with a smaller O2 share (more air or N2O
    at the same O2), which can lower inspired O2. Every candidate above the floor with a smaller O2
    share than the floor's is run to the phase end (the others hold at least the floor's O2 share
    and flow), and those that fail are returned, lowest total first.
    """
    cands = pl.candidates(phase)
    share = floor[0] / max(sum(floor), 1e-12)
    total = sum(floor)
    risky = [f for f in cands if sum(f) > total + 1e-9 and f[0] / max(sum(f), 1e-12) < share - 1e-9]
    return sorted(
        (f for f in risky if pl.trial(phase, f, y, t0, t0, t1, mac_before).fails("any")), key=lambda f: sum(f)
    )


def _phase_label(i: int, n: int) -> str:
    return "wash-in" if i == 0 and n > 1 else ("maintenance" if i == n - 1 else f"phase {i}")


def flow_floor(
    scenario: Scenario, *, threshold: float | None = None, grid: bool = True, _search: str = "stop"
) -> FloorResult:
    """The flow floor of every phase, the floor on a time grid, and a recommended settable schedule.

    Parameters
    ----------
    scenario : Scenario
        The plan; its ``[flow_floor]`` table holds the settings (threshold, flowmeter scale, ...).
    threshold : float, optional
        Inspired O2 threshold overriding the scenario's (0.21 to 1).
    grid : bool
        Also compute the floor on the time grid of the user's plan.

    Returns
    -------
    FloorResult
    """
    from ..inputs.calibration_file import floor_side
    from .advisories import advisories
    from .audit import FLOW_CLASS_SOURCE, flow_class

    scenario, raised = floor_side(scenario)  # a department's uptake factor, never below 1 here
    st = settings_from(scenario, threshold)
    pl = Planner(scenario, st, _search)
    plan = engine.simulate_setup(pl.case)
    phases_out, schedule, grid_out = [], [], []
    y, t, mac_low = pl.y0.copy(), 0.0, 0.0
    live = [(i, ph) for i, ph in enumerate(scenario.phases) if ph.duration.to("min").magnitude > 0]
    new_phases = list(scenario.phases)
    for n, (i, ph) in enumerate(live):
        dur = ph.duration.to("min").magnitude
        res = pl.floor(ph, y, t, t, t + dur, mac_low)
        planned = tuple(q.to("L/min").magnitude for q in ph.flows())
        chosen = res.flows or planned
        chk = res.check if res.flows and res.check is not None else pl.check(ph, chosen, y, t, t, t + dur, mac_low)
        total = float(sum(chosen))
        entry = {
            "index": i,
            "label": ph.label or _phase_label(n, len(live)),
            "start": Q_(t, "min"),
            "end": Q_(t + dur, "min"),
            "floor": Q_(total, "L/min") if res.flows else None,
            "flows": _flow_dict(chosen) if res.flows else None,
            "binding": res.binding[0] if res.binding else None,
            "binding_all": res.binding,
            "binding_text": LIMIT_TEXT.get(res.binding[0], "") if res.binding else "",
            "margins": {k: v for k, v in (chk.margins if chk else {}).items() if k not in res.binding},
            "planned_total": Q_(float(sum(planned)), "L/min"),
            "flow_class": f"{flow_class(total)} flow ({FLOW_CLASS_SOURCE})" if res.flows else None,
            "lowest_oxygen_flow": None,
            "failing_above": [],
        }
        if res.flows:
            entry["failing_above"] = [_flow_dict(f) for f in failing_above(pl, ph, res.flows, y, t, t + dur, mac_low)]
            o2min = lowest_oxygen_flow(pl, ph, chosen, y, t, t + dur, mac_low)
            entry["lowest_oxygen_flow"] = Q_(o2min, "L/min") if o2min is not None else None
            new_phases[i] = with_flows(ph, chosen)
        phases_out.append(entry)
        schedule.append(
            {
                "index": i,
                "label": entry["label"],
                "start": Q_(t, "min"),
                "duration": Q_(dur, "min"),
                "total": Q_(total, "L/min"),
                **_flow_dict(chosen),
                "settable": bool(res.flows),
            }
        )
        if total < LABEL_MIDDLE_FLOW - 1e-9:
            mac_low += chk.mac_minutes / 60
        if chk.end_state is None:  # the chosen flows are always run to the phase end
            raise RuntimeError(f"flow floor: phase {i} was not run to its end at the chosen flows")
        y = chk.end_state
        t += dur
    if grid:
        grid_out = flow_floor_grid(pl, live)
    rec = scenario.model_copy(update={"phases": new_phases})
    rec_result = engine.simulate(rec)
    comparison = _compare(plan, rec_result)
    result = FloorResult(scenario, st, phases_out, grid_out, schedule, comparison)
    result.warnings = advisories(scenario, st, plan, phases_out) + raised
    result.schedule_text = schedule_text(schedule)
    return result


def _compare(plan, rec) -> dict[str, Any]:
    keys = ("agent_liquid", "oxygen", "air", "nitrous_oxide", "co2e", "mean_fresh_gas_flow", "mac_hours")
    return {
        "plan": {k: plan.totals[k] for k in keys},
        "recommended": {k: rec.totals[k] for k in keys},
        "saving": {k: plan.totals[k] - rec.totals[k] for k in keys},
        "recommended_warnings": [{"code": k, "message": m} for k, m in rec.warnings],
    }


def schedule_text(schedule: list[dict[str, Any]]) -> str:
    """A short reading of the schedule, e.g. "wash-in 4 L/min for 8 min, then 0.6 L/min".

    >>> schedule_text([{"label": "wash-in", "total": Q_(4, "L/min"), "duration": Q_(8, "min")},
    ...                {"label": "maintenance", "total": Q_(0.6, "L/min"), "duration": Q_(52, "min")}])
    'wash-in 4 L/min for 8 min, then 0.6 L/min'
    """
    parts = []
    for k, s in enumerate(schedule):
        flow = f"{s['total'].to('L/min').magnitude:g} L/min"
        if k == len(schedule) - 1:
            parts.append(flow if k else f"{flow} for {s['duration'].to('min').magnitude:g} min")
        else:
            parts.append(f"{s['label']} {flow} for {s['duration'].to('min').magnitude:g} min")
    return ", then ".join(parts)
