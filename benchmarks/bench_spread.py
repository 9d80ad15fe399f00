"""Benchmark of the patient spread (run: ``uv run python benchmarks/bench_spread.py [--quick]``).

Times :func:`estimator.simulation.spread.simulate_spread` with 100 patients on three demo plans (after one warm
run, so numba's compiled model is loaded), the single case it repeats, and the demand forecast of the
demo case mix with and without ``patient_spread``. Prints the machine's load average beside the
figures: on the shared 2-core machine the times scale with it.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from estimator.inputs.scenario import load_scenario  # noqa: E402
from estimator.planning.casemix import load_casemix  # noqa: E402
from estimator.planning.forecast import forecast  # noqa: E402
from estimator.simulation.engine import simulate  # noqa: E402
from estimator.simulation.spread import simulate_spread  # noqa: E402

PLANS = ("kestrel_lap_chole.toml", "kestrel_desflurane_bariatric.toml", "kestrel_nitrous_dental.toml")
N = 100


def timed(fn, repeat: int = 1) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main(quick: bool = False) -> None:
    n, plans, weeks = (10, PLANS[:1], 4) if quick else (N, PLANS, 52)
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores{' (quick)' if quick else ''}")
    for name in plans:
        sc = load_scenario(ROOT / "demo_cases" / name)
        simulate_spread(sc, 2, seed=0)
        one = timed(lambda sc=sc: simulate(sc), 5)
        many = timed(lambda sc=sc, n=n: simulate_spread(sc, n, seed=1))
        r = simulate_spread(sc, n, seed=1)
        a = r.totals["agent_liquid"]
        print(
            f"{name}: one case {1000 * one:.1f} ms (the baseline); {n} patients {many:.2f} s "
            f"= {many / one:.0f} single runs; agent P5-P95 "
            f"{r.percentiles('agent_liquid')['p05']:.1f}-{r.percentiles('agent_liquid')['p95']:.1f} mL "
            f"(typical {r.typical['agent_liquid']:.1f}), CV {a.std(ddof=1) / a.mean():.3f}"
        )
    mix = load_casemix(ROOT / "demo_cases" / "kestrel_case_mix.toml")
    forecast(mix, weeks=4, seed=1)
    base = None
    for flag in (False, True):
        t = timed(lambda flag=flag: forecast(mix, weeks=weeks, seed=1, patient_spread=flag), 1 if quick else 2)
        base = t if base is None else base
        print(
            f"forecast {weeks} weeks, patient_spread={flag}: {t:.2f} s (ratio to the run without spread {t / base:.2f})"
        )


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
