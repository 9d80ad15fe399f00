"""Benchmark of the flow floor (run: ``uv run python benchmarks/bench_flow_floor.py [--quick]``).

Times (CPU, ``time.process_time``) the flow floor of the 4-hour plan of ``bench_case.py`` (per phase,
on the 5-min grid, with the recommended schedule re-simulated) against the 1 s target and as a ratio
to one engine run of the same plan measured in the same process (the baseline: what one plain run of
the case costs); then the same plan lengthened to 24 hours, and the ratio of the two floors (target:
within 7x, about linear in case length), with a 12-hour plan in between. Also the trial-minutes
integrated in each floor, all and those of trials passed (the per-phase floors run their trials to
the phase end; the floor on the grid runs look-ahead trials of bounded length and one replay of its
steps, so both grow with the case length). ``--quick``: a 40-, 60- and 80-min plan, one repeat.
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_case import CASE, cpu  # noqa: E402

from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.planning import safety  # noqa: E402
from estimator.planning.safety import flow_floor  # noqa: E402
from estimator.simulation import engine  # noqa: E402


def plan(minutes: float) -> dict:
    """The benchmark plan with its maintenance phase set so the case lasts ``minutes``."""
    first = CASE["phases"][0]
    rest = {**CASE["phases"][1], "duration": f"{minutes - 10:g} min"}
    return {**CASE, "phases": [first, rest]}


def trial_minutes(sc) -> tuple[float, float]:
    """Minutes integrated by the trials of one flow floor of ``sc``: all trials, and the passed ones."""
    made = []

    class Counting(safety.Planner):
        def trial(self, *args, **kwargs):
            made.append(super().trial(*args, **kwargs))
            return made[-1]

    real, safety.Planner = safety.Planner, Counting
    try:
        flow_floor(sc)
    finally:
        safety.Planner = real
    run = [float(t.times[t.n - 1] - t.times[0]) for t in made]
    return sum(run), sum(r for r, t in zip(run, made, strict=True) if not t.failed)


def main(quick: bool = False) -> None:
    short, long = (40.0, 80.0) if quick else (240.0, 1440.0)
    repeat = 1 if quick else 3
    sc = scenario_from_dict(plan(short))
    engine.simulate(sc)
    flow_floor(sc)
    single, _ = cpu(lambda: engine.simulate(sc), 3 if quick else 10)
    median, res = cpu(lambda: flow_floor(sc), repeat)
    sc_long = scenario_from_dict(plan(long))
    t_long, res_long = cpu(lambda: flow_floor(sc_long), 1)
    middle = (short + long) / 2 if quick else 720.0
    t_mid, _ = cpu(lambda: flow_floor(scenario_from_dict(plan(middle))), 1)
    print(f"plan: {CASE['title']} ({short:g} min; then {long:g} min)")
    print(
        f"flow floor, {short:g} min plan       {median:7.3f} s CPU"
        + ("" if quick else f"   target <= 1 s   ratio to target {median / 1.0:6.3f}")
    )
    print(f"baseline: one engine run     {1e3 * single:7.2f} ms CPU  flow floor = {median / single:6.1f} engine runs")
    print(
        f"flow floor, {middle:g} min plan      {t_mid:7.3f} s CPU   ratio to the {short:g} min plan {t_mid / median:5.2f}"
    )
    print(
        f"flow floor, {long:g} min plan     {t_long:7.3f} s CPU   ratio to the {short:g} min plan "
        f"{t_long / median:5.2f} (length ratio {long / short:g}; target within 7x for 24 h / 4 h)"
    )
    print(f"grid points {len(res.grid)}, schedule: {res.schedule_text}")
    print(f"grid points {len(res_long.grid)} ({long:g} min)")
    (a, a_ok), (b, b_ok) = trial_minutes(sc), trial_minutes(sc_long)
    print(
        f"trial-minutes integrated: {a:,.0f} ({a_ok:,.0f} in passed trials), then {b:,.0f} ({b_ok:,.0f}); "
        f"ratio {b / a:.1f} ({b_ok / a_ok:.1f})"
    )


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
