"""Benchmark of the single-case engine (run: ``uv run python benchmarks/bench_case.py``).

The case: 4 hours, 10 min at 6 L/min then 0.5 L/min of O2/air, end-tidal hold 1 MAC sevoflurane.
Prints, measured in this one run:

* the median wall time of :func:`estimator.simulate` (series and totals) against the 20 ms target;
* its largest relative deviation from a tight-tolerance reference solve (scipy DOP853, rtol 1e-12)
  against the 1e-6 target;
* the ratio of a straightforward ``scipy.integrate.solve_ivp`` (RK45, rtol 1e-6) of the same
  equations in plain Python (the model module loaded a second time with the compiler switched off)
  to the engine, against the 8x target.
"""

from __future__ import annotations

import importlib.util
import statistics
import sys
import time
import types
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from estimator import engine  # noqa: E402
from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.physics import circuit as c  # noqa: E402

CASE = {
    "title": "benchmark: 4 h, 10 min at 6 L/min then 0.5 L/min, end-tidal hold 1 MAC",
    "patient": {"weight": "70 kg", "age": "40 years"},
    "agent": {"name": "sevoflurane"},
    "phases": [
        {"duration": "10 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "230 min", "oxygen": "0.3 L/min", "air": "0.2 L/min", "end_tidal_target": "1 MAC"},
    ],
}


def plain_python_model() -> types.ModuleType:
    """The circuit module loaded again with numba's compiler replaced by the identity."""
    import numba

    spec = importlib.util.spec_from_file_location("circuit_plain", c.__file__)
    module = importlib.util.module_from_spec(spec)
    real = numba.njit
    numba.njit = lambda *a, **k: lambda f: f  # noqa: E731
    try:
        spec.loader.exec_module(module)
    finally:
        numba.njit = real
    return module


def main() -> None:
    sc = scenario_from_dict(CASE)
    engine.simulate(sc)  # load the compiled kernel
    times = []
    for _ in range(30):
        t = time.perf_counter()
        result = engine.simulate(sc)
        times.append(time.perf_counter() - t)
    median = statistics.median(times)

    ref_series, ref_y = engine.reference_solve(sc, method="DOP853", rtol=1e-12, atol=1e-14)
    ours_et = result.series["end_tidal_agent [%]"].to_numpy() / 100
    ours_fio2 = result.series["inspired_oxygen [%]"].to_numpy() / 100
    dev_series = max(
        np.max(
            np.abs(ours_et - ref_series[:, c.W_FET + c.AGENT]) / np.abs(ref_series[:, c.W_FET + c.AGENT]).clip(1e-6)
        ),
        np.max(np.abs(ours_fio2 - ref_series[:, c.W_FI + c.O2]) / ref_series[:, c.W_FI + c.O2]),
    )
    from estimator.simulation.results import litres_per_mmol

    ref_vapour = ref_y[c.Y_FGIN + c.AGENT] * litres_per_mmol()
    ref_co2 = ref_y[c.Y_CO2ABS] * litres_per_mmol()
    dev_totals = max(
        abs(result.totals["agent_vapour"].to("L").magnitude / ref_vapour - 1),
        abs(result.totals["co2_absorbed"].to("L").magnitude / ref_co2 - 1),
    )

    plain = plain_python_model()
    t = time.perf_counter()
    engine.reference_solve(sc, method="RK45", rtol=1e-6, atol=1e-9, model=plain)
    t_plain = time.perf_counter() - t

    print(f"case: {CASE['title']}")
    print(
        f"engine median time          {1e3 * median:8.2f} ms   target <= 20 ms   ratio to target {median / 0.020:6.3f}"
    )
    print(f"max rel. deviation, series  {dev_series:10.2e}   target <= 1e-6   ratio to target {dev_series / 1e-6:6.3f}")
    print(f"max rel. deviation, totals  {dev_totals:10.2e}   target <= 1e-6   ratio to target {dev_totals / 1e-6:6.3f}")
    print(f"solve_ivp RK45 plain Python {1e3 * t_plain:8.1f} ms   speed-up {t_plain / median:7.1f}x   target >= 8x")
    print(f"solver steps {result.solver}")


if __name__ == "__main__":
    main()
