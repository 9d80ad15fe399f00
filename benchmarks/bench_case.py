"""Benchmark of the single-case engine (run: ``uv run python benchmarks/bench_case.py [--quick]``).

The case: 4 hours (``--quick``: 40 min), 10 min at 6 L/min then 0.5 L/min of O2/air, end-tidal hold
1 MAC sevoflurane. Prints, measured in this one run (CPU time of this process, ``time.process_time``,
so that other jobs on a shared machine count less; one core):

* the median CPU time of :func:`estimator.simulate` (series and totals) against the 20 ms target;
* its largest relative deviation from a tight-tolerance reference solve (scipy DOP853, rtol 1e-12)
  against the 1e-6 target;
* the baselines: ``scipy.integrate.solve_ivp`` (RK45 and LSODA) on the *same compiled* right-hand
  side, each at the loosest tolerance (1e-5 to 1e-10) whose deviation from the reference is no worse
  than the engine's (equal accuracy), and the engine's speed-up over the best of them;
* for information only, RK45 on the right-hand side in plain Python (interpreted: not a baseline);
* the median CPU time of the public :func:`estimator.simulate` on the demo case
  ``demo_cases/kestrel_lap_chole.toml`` (kernel, result assembly and pricing) against the 4 ms target.
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

from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.physics import circuit as c  # noqa: E402
from estimator.simulation import engine  # noqa: E402

DEMO = Path(__file__).resolve().parents[1] / "demo_cases" / "kestrel_lap_chole.toml"
#: Target for :func:`estimator.simulate` on the demo case [s] (kernel plus assembly plus pricing).
DEMO_TARGET = 0.004

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


def deviation(series: np.ndarray, ref: np.ndarray) -> float:
    """Largest relative deviation of end-tidal agent and inspired O2 (``W_*`` columns) from the reference."""
    et, fio2 = c.W_FET + c.AGENT, c.W_FI + c.O2
    return float(
        max(
            np.max(np.abs(series[:, et] - ref[:, et]) / np.abs(ref[:, et]).clip(1e-6)),
            np.max(np.abs(series[:, fio2] - ref[:, fio2]) / ref[:, fio2]),
        )
    )


def cpu(fn, repeat: int) -> tuple[float, object]:
    """Median CPU seconds of ``repeat`` calls, and the last result."""
    times, out = [], None
    for _ in range(repeat):
        t = time.process_time()
        out = fn()
        times.append(time.process_time() - t)
    return statistics.median(times), out


def baseline(sc, method: str, ref: np.ndarray, target: float, repeat: int) -> tuple[float, float, float]:
    """(CPU s, rtol, deviation) of ``solve_ivp(method)`` on the compiled right-hand side at equal accuracy."""
    for rtol in (1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10):
        series, _ = engine.reference_solve(sc, method=method, rtol=rtol, atol=rtol * 1e-3)
        dev = deviation(series, ref)
        if dev <= target:
            t, _ = cpu(lambda r=rtol: engine.reference_solve(sc, method=method, rtol=r, atol=r * 1e-3), repeat)
            return t, rtol, dev
    return float("nan"), float("nan"), dev


def main(quick: bool = False) -> None:
    case = dict(CASE)
    if quick:
        case["phases"] = [CASE["phases"][0], {**CASE["phases"][1], "duration": "30 min"}]
    sc = scenario_from_dict(case)
    engine.simulate(sc)  # load the compiled kernel
    median, result = cpu(lambda: engine.simulate(sc), 5 if quick else 30)

    ref_series, ref_y = engine.reference_solve(sc, method="DOP853", rtol=1e-12, atol=1e-14)
    ours = np.column_stack([np.zeros(len(ref_series))] * ref_series.shape[1])
    ours[:, c.W_FET + c.AGENT] = result.series["end_tidal_agent [%]"].to_numpy() / 100
    ours[:, c.W_FI + c.O2] = result.series["inspired_oxygen [%]"].to_numpy() / 100
    dev_series = deviation(ours, ref_series)
    from estimator.accounts.accounting import litres_per_mmol

    ref_vapour = ref_y[c.Y_FGIN + c.AGENT] * litres_per_mmol()
    ref_co2 = ref_y[c.Y_CO2ABS] * litres_per_mmol()
    dev_totals = max(
        abs(result.totals["agent_vapour"].to("L").magnitude / ref_vapour - 1),
        abs(result.totals["co2_absorbed"].to("L").magnitude / ref_co2 - 1),
    )
    # Equal accuracy: the baseline must be at least as close to the reference as the engine (never
    # looser than 1e-6, the accuracy target).
    target = max(dev_series, 1e-12)
    repeat = 1 if quick else 3
    rows = {m: baseline(sc, m, ref_series, target, repeat) for m in ("RK45", "LSODA")}
    best = min(rows, key=lambda m: rows[m][0] if rows[m][0] == rows[m][0] else float("inf"))

    plain = plain_python_model()
    t = time.process_time()
    engine.reference_solve(sc, method="RK45", rtol=1e-6, atol=1e-9, model=plain)
    t_plain = time.process_time() - t

    print(f"case: {case['title']}{' (quick: 40 min)' if quick else ''}")
    print(
        f"engine median CPU time      {1e3 * median:8.2f} ms   target <= 20 ms   ratio to target {median / 0.020:6.3f}"
    )
    print(f"max rel. deviation, series  {dev_series:10.2e}   target <= 1e-6   ratio to target {dev_series / 1e-6:6.3f}")
    print(f"max rel. deviation, totals  {dev_totals:10.2e}   target <= 1e-6   ratio to target {dev_totals / 1e-6:6.3f}")
    for m, (tm, rtol, dev) in rows.items():
        print(
            f"baseline solve_ivp {m:5s} on the compiled rhs, rtol {rtol:.0e} (deviation {dev:.1e}): "
            f"{1e3 * tm:8.2f} ms CPU   engine speed-up {tm / median:6.2f}x"
        )
    print(f"best baseline: {best}; engine speed-up {rows[best][0] / median:.2f}x at equal accuracy")
    print(f"for information, RK45 on interpreted Python (not a baseline): {1e3 * t_plain:8.1f} ms CPU")
    print(f"solver steps {result.solver}")

    import estimator

    demo = estimator.load_scenario(DEMO)
    estimator.simulate(demo)
    t_demo, _ = cpu(lambda: estimator.simulate(demo), 5 if quick else 50)
    print(
        f"estimator.simulate on the demo ({DEMO.name}): {1e3 * t_demo:6.2f} ms CPU median   "
        f"target <= {1e3 * DEMO_TARGET:.0f} ms   ratio to target {t_demo / DEMO_TARGET:6.3f}"
    )


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
