"""Benchmark of the batch engine (run: ``uv run python benchmarks/bench_batch.py``).

The case: 4 hours, 10 min at 6 L/min then 0.5 L/min of O2/air, end-tidal hold 1 MAC sevoflurane
(the single-case benchmark's case), for patients of random weight. Prints, measured in this run:

* the first-call time: in a fresh process with an empty numba cache (a full compile of the model
  and the batch kernel), and in this process (loading them from the cache);
* the wall time of 10,000 cases against the 2 s target;
* the time per case against ``scipy.integrate.solve_ivp`` (LSODA, rtol 1e-6) run case by case on
  the same equations in plain Python (the model module loaded again with numba switched off), a
  handful of cases timed and divided, against the 250x target;
* the peak memory growth of 100,000 cases against 1 GB (``resource.getrusage`` peak RSS, and
  tracemalloc's peak of the Python-side arrays);
* the largest relative deviation of the totals from :func:`estimator.simulation.engine.simulate` over a few
  cases, against the 1e-3 target.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_case import CASE, plain_python_model  # noqa: E402

from estimator import engine  # noqa: E402
from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.simulation import batch


def peak_rss_mb() -> float:
    """Peak resident set size of this process so far [MB] (Linux reports kB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


FIRST_CALL = """
import time
import numpy as np
from estimator.simulation import batch
from estimator.inputs.scenario import scenario_from_dict
from bench_case import CASE
t = time.perf_counter()
template = batch.case_template(scenario_from_dict(CASE))
batch.run_batch(template, np.array([70.0]), np.array([40.0]), np.array([240.0]))
print(time.perf_counter() - t)
"""


def cold_first_call() -> float:
    """First-call time in a fresh process with an empty numba cache: a full compile [s]."""
    here = Path(__file__).resolve().parent
    with tempfile.TemporaryDirectory() as cache:
        env = {**os.environ, "NUMBA_CACHE_DIR": cache, "PYTHONPATH": os.pathsep.join([str(here.parent), str(here)])}
        run = subprocess.run([sys.executable, "-c", FIRST_CALL], env=env, capture_output=True, text=True, check=True)
    return float(run.stdout.strip().splitlines()[-1])


def main() -> None:
    sc = scenario_from_dict(CASE)
    rng = np.random.default_rng(2024)
    t = time.perf_counter()
    template = batch.case_template(sc)
    batch.run_batch(template, [70.0], [40.0], [240.0])
    t_first = time.perf_counter() - t

    n = 10_000
    weights = np.clip(rng.normal(75.0, 15.0, n), 40.0, 140.0)
    ages = np.full(n, 40.0)
    durations = np.full(n, 240.0)
    times = []
    for _ in range(3):
        t = time.perf_counter()
        out = batch.run_batch(template, weights, ages, durations)
        times.append(time.perf_counter() - t)
    t_batch = min(times)
    per_case = t_batch / n

    plain = plain_python_model()
    k = 3
    t = time.perf_counter()
    for wt in weights[:k]:
        case = batch.single_case_scenario(template, float(wt), 40.0, 240.0)
        engine.reference_solve(case, method="LSODA", rtol=1e-6, atol=1e-9, model=plain)
    t_lsoda = (time.perf_counter() - t) / k

    dev = 0.0
    for i in range(3):
        r = engine.simulate(batch.single_case_scenario(template, float(weights[i]), 40.0, 240.0))
        for key in ("agent_liquid", "oxygen", "air", "co2_absorbed", "mac_hours", "agent_uptake"):
            ref = r.totals[key].to(batch.TOTAL_UNITS[key]).magnitude
            dev = max(dev, abs(out[key][i] / ref - 1.0))

    big = 100_000
    w_big = np.clip(rng.normal(75.0, 15.0, big), 40.0, 140.0)
    rss0 = peak_rss_mb()
    tracemalloc.start()
    t = time.perf_counter()
    batch.run_batch(template, w_big, np.full(big, 40.0), np.full(big, 240.0))
    t_big = time.perf_counter() - t
    _, traced = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    growth = peak_rss_mb() - rss0

    print(
        "case: 4 h, 10 min at 6 L/min then 0.5 L/min O2/air, end-tidal hold 1 MAC sevoflurane, "
        "weights N(75, 15) kg in 40-140 kg"
    )
    print(f"first call, fresh numba cache       {cold_first_call():8.2f} s   (compiles the model and the kernel)")
    print(f"first call, warm numba cache        {t_first:8.2f} s   (loads them from the cache)")
    print(
        f"10,000 cases                        {t_batch:8.3f} s   target <= 2 s    ratio to target {t_batch / 2.0:6.3f}"
    )
    print(
        f"per case                            {1e3 * per_case:8.3f} ms  "
        f"({np.mean(out['evaluations']):.0f} right-hand-side evaluations, {np.mean(out['steps']):.0f} steps)"
    )
    print(
        f"solve_ivp LSODA plain Python        {1e3 * t_lsoda:8.1f} ms per case   speed-up "
        f"{t_lsoda / per_case:8.0f}x   target >= 250x"
    )
    print(
        f"100,000 cases                       {t_big:8.2f} s   peak RSS growth {growth:7.1f} MB, traced "
        f"peak {traced / 2**20:6.1f} MB   target <= 1024 MB"
    )
    print(f"max rel. deviation of totals from the single-case engine {dev:9.2e}   target <= 1e-3")


if __name__ == "__main__":
    main()
