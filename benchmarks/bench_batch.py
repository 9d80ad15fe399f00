"""Benchmark of the batch engine (run: ``uv run python benchmarks/bench_batch.py [--quick]``).

The case: 4 hours, 10 min at 6 L/min then 0.5 L/min of O2/air, end-tidal hold 1 MAC sevoflurane
(the single-case benchmark's case), for patients of random weight. Prints, measured in this run
(CPU time from ``time.process_time``, which adds up both cores' threads; wall time beside it):

* the first-call time: in a fresh process with an empty numba cache (a full compile of the model
  and the batch kernel; skipped by ``--quick``), and in this process (loading them from the cache);
* 10,000 cases (``--quick``: 500): wall time against the 2 s target, CPU time per case per core;
* the baselines, case by case on one core: ``scipy.integrate.solve_ivp`` LSODA and RK45 on the
  *same compiled* right-hand side, each at the loosest tolerance whose totals are as close to the
  single-case engine as the batch's (equal accuracy), and the batch's speed-up per core over the
  best of them and on both cores; plain-Python LSODA for information only (interpreted);
* the peak memory growth of 100,000 cases (``--quick``: 2,000) against 1 GB (``resource.getrusage``
  peak RSS, and tracemalloc's peak of the Python-side arrays);
* the largest relative deviation of the totals from :func:`estimator.simulation.engine.simulate` over a few
  cases, against the 1e-3 target;
* a demand forecast of 100,000 cases (``--quick``: 2,000) of the demo case mix, in a fresh process: CPU time per
  case including the start-up (interpreter, imports, loading the compiled kernels, reading the case mix and
  preparing its templates), against the 150 us target.

The batch's CPU time per case is the median of the repeats (the least beside it), with the load average: the
2-core machine is shared, and other jobs slow the caches and the clock of both cores.
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

from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.simulation import (
    batch,
    engine,  # noqa: E402
)


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


FORECAST = """
import dataclasses, sys, time
from pathlib import Path
from estimator.planning.casemix import load_casemix
from estimator.planning.forecast import forecast
mix = load_casemix(Path(sys.argv[1]))
cases, weeks = int(sys.argv[2]), int(sys.argv[3])
scale = cases / (weeks * sum(ct.mean_per_week for ct in mix.case_types))
types = tuple(dataclasses.replace(ct, mean_per_week=ct.mean_per_week * scale, fixed=True) for ct in mix.case_types)
start = time.process_time()
r = forecast(dataclasses.replace(mix, case_types=types), weeks=weeks, seed=1)
print(start, time.process_time() - start, r.solver["cases"])
"""
#: CPU-time target of a forecast, per case including the start-up [us].
FORECAST_TARGET_US = 150.0


def forecast_cpu(cases: int) -> tuple[float, float, int]:
    """CPU time of a forecast of ``cases`` cases of the demo case mix in a fresh process [s].

    Returns the whole process's CPU time (``RUSAGE_CHILDREN``: every thread, start-up included), the start-up's
    share (up to the forecast call) and the number of cases run. The numba cache is this checkout's (warm).
    """
    here = Path(__file__).resolve().parent
    mix = here.parent / "demo_cases" / "kestrel_case_mix.toml"
    weeks = max(1, cases // 100)
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    run = subprocess.run(
        [sys.executable, "-c", FORECAST, str(mix), str(cases), str(weeks)],
        env={**os.environ, "PYTHONPATH": str(here.parent)},
        capture_output=True,
        text=True,
        check=True,
    )
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    start, _, done = run.stdout.split()[-3:]
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return cpu, float(start), int(done)


TOTALS = ("agent_liquid", "oxygen", "air", "co2_absorbed", "mac_hours", "agent_uptake")


def baseline(scenarios, singles, dev_batch: float) -> dict[str, tuple[float, float, float]]:
    """Per method: (CPU s per case, rtol, deviation) of solve_ivp on the compiled rhs at equal accuracy.

    Accuracy is judged on what a forecast adds up: agent vapour delivered and CO2 absorbed at the
    end of the case, against the single-case engine, as the batch's deviation is.
    """
    from estimator.accounts.accounting import litres_per_mmol
    from estimator.physics import circuit as c

    lpm = litres_per_mmol()
    rows = {}
    for method in ("LSODA", "RK45"):
        for rtol in (1e-2, 1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8):
            t = time.process_time()
            dev = 0.0
            for sc, r in zip(scenarios, singles, strict=True):
                _, y = engine.reference_solve(sc, method=method, rtol=rtol, atol=rtol * 1e-3)
                dev = max(
                    dev,
                    abs(y[c.Y_FGIN + c.AGENT] * lpm / r.totals["agent_vapour"].to("L").magnitude - 1),
                    abs(y[c.Y_CO2ABS] * lpm / r.totals["co2_absorbed"].to("L").magnitude - 1),
                )
            cpu = (time.process_time() - t) / len(scenarios)
            if dev <= dev_batch:
                rows[method] = (cpu, rtol, dev)
                break
        else:
            rows[method] = (float("nan"), float("nan"), dev)
    return rows


def main(quick: bool = False) -> None:
    sc = scenario_from_dict(CASE)
    rng = np.random.default_rng(2024)
    t = time.perf_counter()
    template = batch.case_template(sc)
    batch.run_batch(template, [70.0], [40.0], [240.0])
    t_first = time.perf_counter() - t

    n = 500 if quick else 10_000
    weights = np.clip(rng.normal(75.0, 15.0, n), 40.0, 140.0)
    ages = np.full(n, 40.0)
    durations = np.full(n, 240.0)
    walls, cpus = [], []
    for _ in range(1 if quick else 5):
        t, c0 = time.perf_counter(), time.process_time()
        out = batch.run_batch(template, weights, ages, durations)
        walls.append(time.perf_counter() - t)
        cpus.append(time.process_time() - c0)
    t_batch, cpu_case, cpu_least = min(walls), float(np.median(cpus)) / n, min(cpus) / n

    k = 2 if quick else 3
    scenarios = [batch.single_case_scenario(template, float(weights[i]), 40.0, 240.0) for i in range(k)]
    singles = [engine.simulate(s_) for s_ in scenarios]
    dev = 0.0
    for i, r in enumerate(singles):
        for key in TOTALS:
            ref = r.totals[key].to(batch.TOTAL_UNITS[key]).magnitude
            dev = max(dev, abs(out[key][i] / ref - 1.0))
    rows = baseline(scenarios, singles, max(dev, 1e-9))
    best = min(rows, key=lambda m: rows[m][0] if rows[m][0] == rows[m][0] else float("inf"))

    plain = plain_python_model()
    t = time.process_time()
    engine.reference_solve(scenarios[0], method="LSODA", rtol=1e-6, atol=1e-9, model=plain)
    t_plain = time.process_time() - t

    big = 2_000 if quick else 100_000
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
        f"weights N(75, 15) kg in 40-140 kg{' (quick)' if quick else ''}"
    )
    if not quick:
        print(f"first call, fresh numba cache       {cold_first_call():8.2f} s   (compiles the model and the kernel)")
    print(f"first call, warm numba cache        {t_first:8.2f} s   (loads them from the cache)")
    print(
        f"{n:,} cases{'':<{22 - len(f'{n:,}')}}{t_batch:8.3f} s wall, {min(cpus):.3f} s CPU"
        + ("" if quick else f"   target <= 2 s    ratio to target {t_batch / 2.0:6.3f}")
    )
    print(
        f"per case, per core                  {1e6 * cpu_case:8.1f} us CPU median of {len(cpus)} "
        f"(least {1e6 * cpu_least:.1f}; {np.mean(out['evaluations']):.0f} right-hand-side evaluations, "
        f"{np.mean(out['steps']):.0f} steps; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores)"
    )
    for m, (cpu, rtol, d) in rows.items():
        print(
            f"baseline solve_ivp {m:5s} on the compiled rhs, rtol {rtol:.0e} (deviation {d:.1e}): "
            f"{1e3 * cpu:8.2f} ms CPU per case   batch speed-up per core {cpu / cpu_case:8.0f}x"
        )
    wall_case = t_batch / n
    print(
        f"best baseline: {best}; batch speed-up {rows[best][0] / cpu_case:.0f}x per core, "
        f"{rows[best][0] / wall_case:.0f}x on the machine's cores (wall) at equal accuracy"
    )
    print(f"for information, LSODA on interpreted Python (not a baseline): {1e3 * t_plain:8.1f} ms CPU per case")
    print(
        f"{big:,} cases{'':<{22 - len(f'{big:,}')}}{t_big:8.2f} s   peak RSS growth {growth:7.1f} MB, traced "
        f"peak {traced / 2**20:6.1f} MB   target <= 1024 MB"
    )
    print(f"max rel. deviation of totals from the single-case engine {dev:9.2e}   target <= 1e-3")
    cases = 2_000 if quick else 100_000
    cpu, start, done = forecast_cpu(cases)
    per_case = 1e6 * cpu / done
    print(
        f"forecast of {done:,} cases, fresh process: {cpu:.2f} s CPU (start-up {start:.2f} s), "
        f"{per_case:.1f} us CPU per case including start-up   target <= {FORECAST_TARGET_US:.0f} us   "
        f"ratio to target {per_case / FORECAST_TARGET_US:.3f}"
    )


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
