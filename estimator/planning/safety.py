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
floor*, so the floors together form the recommended schedule. On a time grid (default 5 min) the
floor at time t answers "from t, how low may I go until the phase ends?" on the user's own plan.
Limits are monotone in flow (more flow: more O2, less deficit, faster wash-in), so each floor is
found by bisection over the settable candidates; the binding limit is the one that fails at the
next setting below the floor.

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
from ..limits import (
    CODES,
    LABEL_MAC_HOURS,
    LABEL_MIDDLE_FLOW,
    LABEL_MINIMUM_FLOW,
    TARGET_BAND,
    codes_of,
)
from ..numerics.dopri5 import integrate_phase
from ..physics import circuit as c
from ..simulation import engine
from ..simulation.assemble import Segment
from ..simulation.case_setup import prepare
from ..units import Q_
from .floor_settings import (  # noqa: F401 (settable_values, round_up, DEFAULT_SCALE, settings_from re-exported)
    DEFAULT_SCALE,
    Settings,
    candidates,
    round_up,
    settable_values,
    settings_from,
    static_failures,
    with_flows,
)

#: The binding limits in the order they are reported (the registry's binding codes, less the two
#: that only name why no limit failed: the scale's lowest setting and a phase without fresh gas).
LIMITS = tuple(k for k in codes_of("binding") if k not in ("FLOWMETER_MINIMUM", "NO_FRESH_GAS"))
#: Plain words for each binding code (the ``limits`` key of the JSON), from the registry.
LIMIT_TEXT = {k: CODES[k].meaning for k in (*LIMITS, "FLOWMETER_MINIMUM")}
CHECK_INTERVAL = 1.0  # [min] resolution of the limit checks
from ..simulation.results import SETTLE  # noqa: E402  inspired O2 is judged from this case time on [min]


@dataclass
class Check:
    """Outcome of one trial run: failed limits and the margin left on each limit."""

    failed: list[str]
    margins: dict[str, Any]
    end_state: np.ndarray | None = None
    mac_minutes: float = 0.0


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

    def __init__(self, scenario: Scenario, st: Settings):
        self.sc = scenario
        self.st = st
        self.case = prepare(scenario)
        self.patient = self.case.patient
        self.site = self.case.site
        self.base = self.case.base
        self.y0 = self.case.initial
        self.atol = engine.absolute_tolerance()
        self.amb = self.case.mmol_per_litre

    def run(self, phase: PhaseInput, y: np.ndarray, t0: float, t1: float, step: float = CHECK_INTERVAL) -> Segment:
        """States and derived flows every ``step`` from ``t0`` to ``t1`` for ``phase`` starting at state ``y``."""
        ph = self.case.phase_setup(phase, t0, t1 - t0)
        times = ph.times(step)
        ys, stats, _ = integrate_phase(y, ph.parameters, times, 1e-6, self.atol, 0.0, 10**6)
        if stats[0] < 0:
            raise RuntimeError("the circuit model failed to integrate a trial segment")
        return Segment(ph, times, ys, c.derived_series(ys, ph.parameters), stats)

    def check(self, phase: PhaseInput, flows, y, t0, t_phase0, t1, mac_before: float = 0.0) -> Check:
        """Run ``flows`` from ``t0`` to the phase end ``t1`` and test every limit."""
        trial = with_flows(phase, flows)
        failed = static_failures(flows, self.st, self.sc.agent.name)
        seg = self.run(trial, y, t0, t1)
        times, ys, ws, p = seg.times, seg.states, seg.derived, seg.phase.parameters
        judged = times >= SETTLE
        fio2 = ws[judged, c.W_FI + c.O2] if judged.any() else ws[-1:, c.W_FI + c.O2]
        margins: dict[str, Any] = {
            "INSPIRED_O2": Q_(float(fio2.min() - self.st.threshold), "dimensionless"),
            "GAS_BALANCE": Q_(float(ws[:, c.W_EX].min() / self.amb), "L/min"),
            "BASAL_O2": Q_(flows[0] - self.st.basal_o2, "L/min"),
            "FLOWMETER_RANGE": Q_(self.st.max_flow - max(flows), "L/min"),
        }
        if fio2.min() < self.st.threshold - 1e-9:
            failed.append("INSPIRED_O2")
        if ws[:, c.W_MAKEUP].max() > 1e-9:
            failed.append("GAS_BALANCE")
        if p[c.P_MODE] == c.MODE_HOLD:
            et, tgt, u = ws[:, c.W_FET + c.AGENT], ws[:, c.W_TARGET], ws[:, c.W_U]
            ok = et >= (1 - TARGET_BAND) * tgt
            deadline = max(t_phase0 + self.st.reach_within, t0)
            if not ok.any() or times[int(np.argmax(ok))] > deadline + 1e-9:
                failed.append("TARGET_REACH")
                margins["TARGET_REACH"] = Q_(float("nan"), "min")
            else:
                i = int(np.argmax(ok))
                margins["TARGET_REACH"] = Q_(float(deadline - times[i]), "min")
                after = slice(i, None)
                pinned = (u[after] >= p[c.P_UMAX] * (1 - 1e-9)) & ~ok[after]
                if pinned.any():
                    failed.append("TARGET_HOLD")
                margins["TARGET_HOLD"] = Q_(float(100 * (p[c.P_UMAX] - u[after].max())), "percent")
        elif p[c.P_UFIXED] == 0.0 and p[c.P_CARRIER + c.N2O] == 0.0 and ws[0, c.W_MAC] > self.st.wash_out_to + 1e-9:
            # emergence: dial off, no N2O delivered, and agent (or N2O) left to wash out
            mac = ws[:, c.W_MAC]
            deadline = max(min(t_phase0 + self.st.wash_out_within, t1), t0)
            low = mac <= self.st.wash_out_to + 1e-9
            reached = int(np.argmax(low)) if low.any() else None
            kept = reached is not None and bool(low[reached:].all())
            if reached is None or times[reached] > deadline + 1e-9 or not kept:
                failed.append("WASH_OUT")
                margins["WASH_OUT"] = Q_(float("nan"), "min")
            else:
                margins["WASH_OUT"] = Q_(float(deadline - times[reached]), "min")
        mac_min = float(ys[-1, c.Y_MACMIN] - ys[0, c.Y_MACMIN])
        if "sevoflurane_us_label" in self.st.policies and self.sc.agent.name == "sevoflurane":
            total = sum(flows)
            mid = total < LABEL_MIDDLE_FLOW - 1e-9
            used = mac_before + (mac_min / 60 if mid else 0.0)
            margins["LABEL_SEVOFLURANE_US"] = (
                Q_(LABEL_MAC_HOURS - used, "MAC_hour") if mid else Q_(total - LABEL_MINIMUM_FLOW, "L/min")
            )
            if mid and used > LABEL_MAC_HOURS + 1e-9 and "LABEL_SEVOFLURANE_US" not in failed:
                failed.append("LABEL_SEVOFLURANE_US")
        return Check(sorted(set(failed), key=LIMITS.index), margins, ys[-1].copy(), mac_min)

    def floor(self, phase, y, t0, t_phase0, t1, mac_before=0.0) -> Floor:
        """Bisection for the lowest candidate of ``phase`` at which every limit holds from ``t0``."""
        cands = candidates(phase, self.st)
        if not cands:
            return Floor(None, None, ["NO_FRESH_GAS"])
        cache: dict[int, Check] = {}

        def test(i: int) -> Check:
            if i not in cache:
                cache[i] = self.check(phase, cands[i], y, t0, t_phase0, t1, mac_before)
            return cache[i]

        hi = len(cands) - 1
        if test(hi).failed:
            return Floor(None, test(hi), test(hi).failed)
        lo = -1  # invariant: cands[lo] fails (or lo = -1), cands[hi] passes
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if test(mid).failed:
                lo = mid
            else:
                hi = mid
        binding = test(lo).failed if lo >= 0 else ["FLOWMETER_MINIMUM"]
        return Floor(cands[hi], test(hi), binding, cands[lo] if lo >= 0 else None)


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
    if hi < 0 or pl.check(phase, opts[hi], y, t0, t0, t1, mac_before).failed:
        return None
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if pl.check(phase, opts[mid], y, t0, t0, t1, mac_before).failed:
            lo = mid
        else:
            hi = mid
    return opts[hi][0]


def _phase_label(i: int, n: int) -> str:
    return "wash-in" if i == 0 and n > 1 else ("maintenance" if i == n - 1 else f"phase {i}")


def flow_floor(scenario: Scenario, *, threshold: float | None = None, grid: bool = True) -> FloorResult:
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
    from .advisories import advisories
    from .audit import FLOW_CLASS_SOURCE, flow_class

    st = settings_from(scenario, threshold)
    pl = Planner(scenario, st)
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
        chk = res.check if res.flows else pl.check(ph, chosen, y, t, t, t + dur, mac_low)
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
        }
        if res.flows:
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
        y = chk.end_state
        t += dur
    if grid:
        grid_out = _grid(pl, scenario, live)
    rec = scenario.model_copy(update={"phases": new_phases})
    rec_result = engine.simulate(rec)
    comparison = _compare(plan, rec_result)
    result = FloorResult(scenario, st, phases_out, grid_out, schedule, comparison)
    result.warnings = advisories(scenario, st, plan, phases_out)
    result.schedule_text = schedule_text(schedule)
    return result


def _grid(pl: Planner, scenario: Scenario, live) -> list[dict[str, Any]]:
    """Floor from each grid time to the end of its phase, on the user's planned trajectory."""
    out, y, t = [], pl.y0.copy(), 0.0
    for _, ph in live:
        dur = ph.duration.to("min").magnitude
        seg = pl.run(ph, y, t, t + dur, pl.st.grid)
        times, ys = seg.times, seg.states
        for tg, yg in zip(times[:-1], ys[:-1], strict=True):
            res = pl.floor(ph, yg, tg, t, t + dur)
            out.append(
                {
                    "time": Q_(float(tg), "min"),
                    "floor": Q_(float(sum(res.flows)), "L/min") if res.flows else None,
                    "binding": res.binding[0] if res.binding else None,
                }
            )
        y, t = ys[-1].copy(), t + dur
    return out


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
