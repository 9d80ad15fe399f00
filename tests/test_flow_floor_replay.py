"""The published flow floors, replayed end to end by the case engine, hold every limit (one-sided).

Consistency checks (no published values): the recommended schedule (each phase at its floor) and
the floor on the time grid (each phase of the plan cut at the grid times, every step at its grid
floor, from the state the plan reaches at the phase start) are run through ``estimator.simulate``,
the case engine, not the flow floor's own trials, and every limit is read from the engine's minute
series: inspired O2 at or above the threshold, no volume deficit, the end-tidal target reached in
time and never lost with the dial at its maximum, the wash-out reached in time and kept. The only
slack is the integration tolerance (1e-4 in a fraction, 1e-6 L/min): the floor may be conservative,
never below a limit.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_safety_search import DEMOS, LONG, NITROUS_CONCENTRATOR
from test_safety_search import PLANS as DEMO_PLANS

from estimator.inputs.scenario import load_scenario, scenario_from_dict
from estimator.limits import TARGET_BAND
from estimator.physics import circuit as c
from estimator.planning import floor_grid, floor_settings, safety
from estimator.planning.floor_settings import settings_from, with_flows
from estimator.simulation import engine
from estimator.simulation.case_setup import prepare
from estimator.simulation.results import SETTLE
from estimator.units import Q_

DAY_NITROUS = {
    "title": "24 h O2/N2O 50 % at 1 L/min with an end-tidal hold, then emergence",
    "patient": {"weight": "90 kg", "age": "60 years"},
    "agent": {"name": "isoflurane"},
    "phases": [
        {"duration": "10 min", "oxygen": "3 L/min", "nitrous_oxide": "3 L/min", "end_tidal_target": "0.6 MAC"},
        {"duration": "1420 min", "oxygen": "0.5 L/min", "nitrous_oxide": "0.5 L/min", "end_tidal_target": "0.6 MAC"},
        {"duration": "10 min", "oxygen": "6 L/min", "vaporizer": "0 %"},
    ],
}
DAY_AIR = {**LONG, "title": "24 h O2/air", "phases": [LONG["phases"][0], {**LONG["phases"][1], "duration": "1420 min"}]}


def _plans():
    out = [(n, load_scenario(DEMOS / f"{n}.toml")) for n in DEMO_PLANS]
    docs = (("12 h", LONG), ("nitrous + concentrator", NITROUS_CONCENTRATOR), ("24 h N2O", DAY_NITROUS))
    return out + [(n, scenario_from_dict(d)) for n, d in (*docs, ("24 h air", DAY_AIR))]


PLANS = _plans()


def _broken(sc, res, i: int, start: float, end: float, threshold: float, pieces: int = 1) -> list[str]:
    """Limits the engine's run breaks in phase ``i`` of ``sc`` (case time ``start`` to ``end``), run as
    the engine's phases ``i`` to ``i + pieces - 1``."""
    st, s = res.settings, res.series
    t, run_phase = s["time [min]"].to_numpy(), s["phase"].to_numpy()
    window = (run_phase >= i) & (run_phase < i + pieces)
    assert t[window][0] == pytest.approx(start) and t[window][-1] == pytest.approx(end)
    out = []
    fio2 = s["inspired_oxygen [%]"].to_numpy() / 100
    if (fio2[window & (t >= SETTLE)] < threshold - 1e-4).any():
        out.append("INSPIRED_O2")
    if (s["volume_deficit_flow [L/min]"].to_numpy()[window] > 1e-6).any():
        out.append("GAS_BALANCE")
    ph = sc.phases[i]
    tw, et = t[window], s["end_tidal_agent [%]"].to_numpy()[window]
    if ph.end_tidal_target is not None:
        ok = et >= (1 - TARGET_BAND) * s["end_tidal_target [%]"].to_numpy()[window] - 1e-4
        if not ok.any() or tw[np.argmax(ok)] > start + st.reach_within + 1e-9:
            out.append("TARGET_REACH")
        umax = 100 * prepare(sc).phases[0].parameters[c.P_UMAX]
        after = np.arange(len(ok)) >= np.argmax(ok)
        if ((s["delivered_agent [%]"].to_numpy()[window] >= umax * (1 - 1e-6)) & ~ok & after).any():
            out.append("TARGET_HOLD")
    elif ph.vaporizer is not None and ph.vaporizer.magnitude == 0 and ph.flows()[2].magnitude == 0:
        mac = s["end_tidal_mac [MAC]"].to_numpy()[window]
        if mac[0] > st.wash_out_to + 1e-9:
            low = mac <= st.wash_out_to + 1e-4
            i_low = int(np.argmax(low))
            if not low.any() or tw[i_low] > min(start + st.wash_out_within, end) + 1e-9 or not low[i_low:].all():
                out.append("WASH_OUT")
    return out


def _run(sc, phases):
    class R:
        pass

    r = R()
    r.series = engine.simulate(sc.model_copy(update={"phases": phases})).series
    r.settings = settings_from(sc)
    return r


@pytest.mark.parametrize(("name", "sc"), PLANS, ids=[n for n, _ in PLANS])
def test_recommended_schedule_replayed_by_the_engine_holds_every_limit(name, sc):
    res = safety.flow_floor(sc, grid=False)
    phases = list(sc.phases)
    for entry in res.phases:
        if entry["flows"] is not None:
            f = tuple(entry["flows"][k].to("L/min").magnitude for k in ("oxygen", "air", "nitrous_oxide"))
            phases[entry["index"]] = with_flows(phases[entry["index"]], f)
    run = _run(sc, phases)
    thr = res.settings.threshold
    rec = sc.model_copy(update={"phases": phases})
    for entry in res.phases:
        if entry["flows"] is None:
            continue
        start, end = entry["start"].to("min").magnitude, entry["end"].to("min").magnitude
        assert _broken(rec, run, entry["index"], start, end, thr) == [], (name, entry["label"])


@pytest.mark.parametrize(("name", "sc"), PLANS, ids=[n for n, _ in PLANS])
def test_floor_on_the_grid_replayed_by_the_engine_holds_every_limit(name, sc):
    res = safety.flow_floor(sc)
    pl = safety.Planner(sc, settings_from(sc))
    published = {round(g["time"].to("min").magnitude, 9): g for g in res.grid}
    y, t, checked = pl.y0.copy(), 0.0, 0
    for i, ph in enumerate(sc.phases):
        dur = ph.duration.to("min").magnitude
        if dur <= 0:
            continue
        steps = floor_grid.PhaseGrid(pl, ph, y, t, t + dur).steps()
        cands = pl.candidates(ph)
        pieces = []
        for s in steps:
            row = published[round(s.t0, 9)]
            assert (row["floor"] is None) == (s.idx is None)
            if s.idx is None:
                break
            assert row["floor"].to("L/min").magnitude == pytest.approx(sum(cands[s.idx]))
            piece = with_flows(ph, cands[s.idx]).model_copy(update={"duration": Q_(s.t1 - s.t0, "min")})
            pieces.append(piece)
        else:  # every step has a floor: the steps, replayed after the plan's earlier phases, hold every limit
            split = sc.model_copy(update={"phases": list(sc.phases[:i]) + pieces})
            run = _run(sc, split.phases)
            assert _broken(sc, run, i, t, t + dur, res.settings.threshold, len(pieces)) == [], (name, i)
            checked += 1
        y = pl.run(ph, y, t, t + dur, dur).states[-1].copy()
        t += dur
    assert checked >= 1


SHORT = [(n, sc) for n, sc in PLANS if n in ("kestrel_lap_chole", "kestrel_nitrous_dental", "nitrous + concentrator")]


def _grid_breaks(sc, monkeypatch_search=None):
    """(limits broken per phase by the engine's replay of the grid steps, repairs made)."""
    pl = safety.Planner(sc, settings_from(sc))
    y, t, broken, repairs = pl.y0.copy(), 0.0, [], 0
    for i, ph in enumerate(sc.phases):
        dur = ph.duration.to("min").magnitude
        if dur <= 0:
            continue
        grid = floor_grid.PhaseGrid(pl, ph, y, t, t + dur)
        steps = grid.steps()
        repairs += grid.repairs
        if all(s.idx is not None for s in steps):
            cands = pl.candidates(ph)
            pieces = [
                with_flows(ph, cands[s.idx]).model_copy(update={"duration": Q_(s.t1 - s.t0, "min")}) for s in steps
            ]
            run = _run(sc, list(sc.phases[:i]) + pieces)
            broken.append(_broken(sc, run, i, t, t + dur, pl.st.threshold, len(pieces)))
        y = pl.run(ph, y, t, t + dur, dur).states[-1].copy()
        t += dur
    return broken, repairs


@pytest.mark.parametrize(("name", "sc"), SHORT, ids=[n for n, _ in SHORT])
def test_the_replay_mends_a_search_that_goes_too_low(name, sc, monkeypatch):
    # Every step's search is replaced by the scale's lowest candidate: the replay must raise steps
    # until the whole phase holds every limit, which the engine then confirms.
    monkeypatch.setattr(floor_grid.PhaseGrid, "_search", lambda self, y, t0, t1, mac: (0, "FLOWMETER_MINIMUM"))
    broken, repairs = _grid_breaks(sc)
    assert repairs > 0
    assert broken and all(b == [] for b in broken), broken


def test_the_engine_check_catches_a_grid_left_unmended(monkeypatch):
    # The same too-low steps without the repair break limits, and the check above sees it (it can fail).
    monkeypatch.setattr(floor_grid.PhaseGrid, "_search", lambda self, y, t0, t1, mac: (0, "FLOWMETER_MINIMUM"))
    monkeypatch.setattr(floor_grid.PhaseGrid, "_repair", lambda self, steps, origin, final: origin)
    seen = set()
    for _, sc in SHORT:
        broken, repairs = _grid_breaks(sc)
        assert repairs == 0
        seen |= {code for b in broken for code in b}
    assert {"INSPIRED_O2", "TARGET_REACH"} <= seen, seen


def test_a_step_that_no_raise_mends_reports_no_floor_and_the_limit(monkeypatch):
    # With the search at the lowest setting and every raise refused, a failing step is not published
    # with a floor: it reports none and the limit its replay breaks, and judging starts after it.
    monkeypatch.setattr(floor_grid.PhaseGrid, "_search", lambda self, y, t0, t1, mac: (0, "FLOWMETER_MINIMUM"))
    monkeypatch.setattr(floor_grid.PhaseGrid, "_raise", lambda self, s: False)
    sc = dict(SHORT)["kestrel_lap_chole"]
    pl = safety.Planner(sc, settings_from(sc))
    ph = sc.phases[0]
    steps = floor_grid.PhaseGrid(pl, ph, pl.y0, 0.0, ph.duration.to("min").magnitude).steps()
    failed = [s for s in steps if s.idx is None]
    assert failed and all(s.binding in floor_settings.LIMITS for s in failed)
