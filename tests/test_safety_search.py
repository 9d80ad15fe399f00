"""Flow-floor search: early-stopped failing trials give exactly what plain bisection gives.

Consistency checks of the search (no published values): the bisection that stops a failing trial at
its first certain failure must give the same floors, binding limits, schedule and margins as a plain
bisection that runs every trial to the end of its phase; a trial is only accepted as safe once run to
the end of its phase; a failure seen on the first part of a run is one the whole run also has; and
the verdicts are not monotone in the candidates, so no floor may be taken from a neighbouring grid
point's floor and the setting below it alone.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from estimator.inputs.scenario import load_scenario, scenario_from_dict
from estimator.planning import floor_settings, safety

DEMOS = Path(__file__).resolve().parents[1] / "demo_cases"
PLANS = ("kestrel_lap_chole", "kestrel_nitrous_dental", "highland_mobile_team", "kestrel_desflurane_bariatric")

LONG = {
    "title": "12 h: wash-in, maintenance O2/air with an end-tidal hold, emergence",
    "patient": {"weight": "70 kg", "age": "40 years"},
    "agent": {"name": "sevoflurane"},
    "phases": [
        {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "700 min", "oxygen": "0.6 L/min", "air": "0.4 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "10 min", "oxygen": "4 L/min", "vaporizer": "0 %"},
    ],
}
NITROUS_CONCENTRATOR = {
    "title": "O2/N2O from concentrator oxygen, label policy on, emergence",
    "patient": {"weight": "80 kg", "age": "55 years"},
    "agent": {"name": "sevoflurane"},
    "site": {"oxygen_source": "concentrator", "oxygen_purity": "93 %"},
    "phases": [
        {"duration": "10 min", "oxygen": "2 L/min", "nitrous_oxide": "4 L/min", "end_tidal_target": "1 MAC"},
        {
            "duration": "90 min",
            "oxygen_fraction": "40 %",
            "total_flow": "1.5 L/min",
            "balance": "nitrous_oxide",
            "end_tidal_target": "1 MAC",
        },
        {"duration": "8 min", "oxygen": "5 L/min", "vaporizer": "0 %"},
    ],
    "flow_floor": {"policies": ["sevoflurane_us_label"]},
}


def _plans():
    out = [(name, load_scenario(DEMOS / f"{name}.toml")) for name in PLANS]
    out += [("12 h", scenario_from_dict(LONG)), ("nitrous + concentrator", scenario_from_dict(NITROUS_CONCENTRATOR))]
    return out


class _Spy(safety.Planner):
    """A planner that keeps every trial it starts."""

    made: list = []

    def trial(self, *args, **kwargs):
        tr = super().trial(*args, **kwargs)
        _Spy.made.append(tr)
        return tr


@pytest.mark.parametrize(("name", "sc"), _plans(), ids=[n for n, _ in _plans()])
def test_early_stop_search_equals_plain_bisection_and_passes_only_whole_trials(name, sc, monkeypatch):
    plain = safety.flow_floor(sc, _search="bisect").to_json()
    _Spy.made = []
    monkeypatch.setattr(safety, "Planner", _Spy)
    fast = safety.flow_floor(sc).to_json()
    assert fast["grid"] == plain["grid"]  # floor and binding limit at every grid time
    assert fast == plain  # phases (floors, all binding limits, margins), schedule, comparison, warnings
    trials = _Spy.made
    assert trials and any(tr.failed for tr in trials)
    assert any(tr.accepted for tr in trials)
    for tr in trials:
        if tr.accepted or not tr.failed:  # never accepted as safe before its phase end
            assert tr.done and tr.n == len(tr.times) and tr.times[-1] == pytest.approx(tr.win.t1)
    stopped = [tr for tr in trials if not tr.done]
    assert all(tr.failed for tr in stopped)  # a trial stops early only on a failure
    assert stopped, "the early stop was never used"


@pytest.mark.parametrize(("name", "sc"), _plans()[:3] + _plans()[-1:], ids=[n for n, _ in _plans()[:3]] + ["n2o"])
def test_a_failure_on_part_of_a_run_is_a_failure_of_the_whole_run(name, sc, monkeypatch):
    monkeypatch.setattr(floor_settings, "FIRST_CHUNK", 1)  # judge the run after every minute
    monkeypatch.setattr(floor_settings, "CHUNK_GROWTH", 1)
    pl = safety.Planner(sc, safety.settings_from(sc))
    y, t, seen = pl.y0.copy(), 0.0, set()
    for ph in sc.phases:
        dur = ph.duration.to("min").magnitude
        for flows in pl.candidates(ph)[:6]:
            tr = pl.trial(ph, flows, y, t, t, t + dur)
            parts = [set(tr.failed)]
            while not tr.done:
                tr._advance()
                tr._judge()
                parts.append(set(tr.failed))
            whole = parts.pop()
            seen |= whole
            assert all(part <= whole for part in parts), (flows, parts, whole)
        y = pl.run(ph, y, t, t + dur).states[-1]
        t += dur
    assert seen & {"INSPIRED_O2", "WASH_OUT", "TARGET_REACH", "BASAL_O2", "O2_PROPORTION"}


def test_verdicts_are_not_monotone_so_a_neighbours_floor_is_no_shortcut():
    # Dental demo, 50 min (O2/N2O 40 %): 1.5 + 2.0 L/min passes, 1.5 + 2.5 L/min (more N2O, same O2)
    # fails on inspired O2 (from the plan's state at 50 min to the phase end). Keeping a neighbour's
    # floor because it passes and the setting below fails could report a floor with a failing setting
    # above it.
    sc = load_scenario(DEMOS / "kestrel_nitrous_dental.toml")
    pl = safety.Planner(sc, safety.settings_from(sc))
    first, ph = sc.phases[0], sc.phases[1]
    seg = pl.run(ph, pl.run(first, pl.y0, 0.0, 10.0).states[-1], 10.0, 60.0, 5.0)
    y50 = seg.states[list(seg.times).index(50.0)]
    verdict = {
        f: pl.trial(ph, f, y50, 50.0, 10.0, 60.0).fails() for f in [(1.0, 0.0, 1.5), (1.5, 0.0, 2.0), (1.5, 0.0, 2.5)]
    }
    assert verdict == {(1.0, 0.0, 1.5): True, (1.5, 0.0, 2.0): False, (1.5, 0.0, 2.5): True}
    # The floor on the grid is therefore searched at every grid time and replayed end to end, never
    # taken from the neighbour (tests/test_flow_floor_replay.py runs the replayed steps in the engine).


def test_mixes_reported_above_the_floor_really_fail():
    # The floor holds; each settable mix reported as failing above it has a higher total and breaks a
    # limit when run to the phase end (so "any setting above the floor is safe" is never implied wrongly).
    from estimator.inputs.scenario import load_scenario
    from estimator.planning.floor_settings import settings_from
    from estimator.planning.safety import Planner, failing_above, flow_floor

    sc = load_scenario(Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_nitrous_dental.toml")
    res = flow_floor(sc, grid=False)
    first = res.phases[0]
    assert first["failing_above"], "the demo's wash-in has a failing mix above its floor"
    pl = Planner(sc, settings_from(sc, None))
    ph = sc.phases[first["index"]]
    dur = ph.duration.to("min").magnitude
    floor = tuple(first["flows"][k].to("L/min").magnitude for k in ("oxygen", "air", "nitrous_oxide"))
    assert not pl.check(ph, floor, pl.y0, 0.0, 0.0, dur).failed
    for mix in failing_above(pl, ph, floor, pl.y0, 0.0, dur):
        assert sum(mix) > sum(floor) and pl.check(ph, mix, pl.y0, 0.0, 0.0, dur).failed
    assert any("SETTING_ABOVE_FLOOR_FAILS" == c for c, _ in res.warnings)
