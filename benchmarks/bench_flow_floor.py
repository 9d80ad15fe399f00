"""Benchmark of the flow floor (run: ``uv run python benchmarks/bench_flow_floor.py``).

Times the flow floor of the 4-hour plan of ``bench_case.py`` (per phase, on the 5-min grid, with
the recommended schedule re-simulated) and prints it against the 1 s target and as a ratio to one
engine run measured in the same process.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_case import CASE  # noqa: E402

from estimator import engine  # noqa: E402
from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.planning.safety import flow_floor  # noqa: E402


def main() -> None:
    sc = scenario_from_dict(CASE)
    engine.simulate(sc)
    flow_floor(sc)
    runs = []
    for _ in range(10):
        t = time.perf_counter()
        engine.simulate(sc)
        runs.append(time.perf_counter() - t)
    single = statistics.median(runs)
    floors = []
    for _ in range(5):
        t = time.perf_counter()
        res = flow_floor(sc)
        floors.append(time.perf_counter() - t)
    median = statistics.median(floors)
    print(f"plan: {CASE['title']}")
    print(f"flow floor median            {median:7.3f} s   target <= 1 s   ratio to target {median / 1.0:6.3f}")
    print(f"engine single run            {1e3 * single:7.2f} ms  flow floor = {median / single:6.1f} engine runs")
    print(f"grid points {len(res.grid)}, schedule: {res.schedule_text}")


if __name__ == "__main__":
    main()
