"""Start-up cost of ``lowflow case`` (run: ``uv run python benchmarks/bench_startup.py [--quick]``).

A one-minute case computes for a few milliseconds; what a user waits for is the loading of the
libraries. Prints, measured in this one run as the CPU time (user + system) of each child process,
median of 9 runs (``--quick``: 3), the runs interleaved so that other jobs on a shared machine weigh on
each figure alike:

* the baseline, ``python -c "import numpy, pandas"``, and ``lowflow case`` on a one-minute case (warm
  numba cache, compiled bytecode) with its ratio to the baseline (target: at most 2);
* the same baseline under the process settings ``lowflow`` gives itself (:mod:`estimator.cli.process`:
  one OpenBLAS thread, no collector walk at exit), so the ratio like for like is shown too;
* what no change of ours can remove (under the same process settings): one cached numba function
  called (numba's own fixed cost of loading compiled code: its import and its target set-up, which
  imports scipy.linalg), and that plus pint, pydantic and typer, the other libraries a case needs;
* ``lowflow --version`` and ``lowflow --help`` (target: under 0.3 s; they load no numeric stack);
* ``lowflow supply`` on the demo inventory (target: within 3x of the baseline; real-gas contents come
  from a table generated from CoolProp, so CoolProp is not imported at run time).

The package's bytecode is compiled first (``compileall``), as an installed copy has it.
"""

from __future__ import annotations

import compileall
import os
import resource
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PY = sys.executable
#: The demo inventory ``lowflow supply`` reads (its case plans name the demo scenarios).
INVENTORY = ROOT / "demo_cases" / "highland_clinic_inventory.toml"

CASE = """\
[patient]
weight = "70 kg"
age = "40 years"

[agent]
name = "sevoflurane"

[[phases]]
duration = "1 min"
oxygen = "2 L/min"
vaporizer = "2 %"
"""

#: A module with one cached compiled function: numba's fixed cost of loading compiled code.
NUMBA_FLOOR = """\
import numba


@numba.njit(cache=True)
def one(x):
    return x + 1.0
"""


def cpu(cmd: list[str], env: dict[str, str] | None = None) -> float:
    """CPU seconds (user + system) of one run of ``cmd`` as a child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, cwd=ROOT, env=env)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime


def main() -> None:
    quick = "--quick" in sys.argv
    runs = 3 if quick else 9
    compileall.compile_dir(ROOT / "estimator", quiet=1)
    with tempfile.TemporaryDirectory() as tmp:
        case = Path(tmp) / "one_minute.toml"
        case.write_text(CASE, encoding="utf-8")
        (Path(tmp) / "numba_floor.py").write_text(NUMBA_FLOOR, encoding="utf-8")
        like = dict(os.environ)
        like.setdefault("OPENBLAS_NUM_THREADS", "1")
        # Under lowflow's process settings too: the collector paused while loading, frozen at exit.
        floor = f"import gc, sys; gc.disable(); sys.path.insert(0, {tmp!r}); import numba_floor; numba_floor.one(1.0)"
        commands = {
            "baseline: import numpy, pandas": ([PY, "-c", "import numpy, pandas"], None),
            "baseline, lowflow's process settings": ([PY, "-c", "import gc, numpy, pandas; gc.freeze()"], like),
            "lowflow case (one-minute case)": ([PY, "-m", "estimator", "case", str(case)], None),
            "numba alone: one cached function": ([PY, "-c", floor + "; gc.freeze()"], like),
            "numba + pint, pydantic, typer": (
                [
                    PY,
                    "-c",
                    floor + "; import pint, pydantic, typer; pint.UnitRegistry(cache_folder=':auto:'); gc.freeze()",
                ],
                like,
            ),
            "lowflow --version": ([PY, "-m", "estimator", "--version"], None),
            "lowflow --help": ([PY, "-m", "estimator", "--help"], None),
            "lowflow supply (demo inventory)": ([PY, "-m", "estimator", "supply", str(INVENTORY)], None),
        }
        for cmd, env in commands.values():  # warm-up: numba's cache, pint's cache, the OS file cache
            cpu(cmd, env)
        times: dict[str, list[float]] = {name: [] for name in commands}
        for _ in range(runs):
            for name, (cmd, env) in commands.items():
                times[name].append(cpu(cmd, env))
    med = {name: statistics.median(t) for name, t in times.items()}
    base, like_base = med["baseline: import numpy, pandas"], med["baseline, lowflow's process settings"]
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    print(f"start-up CPU (user + system), median of {runs} runs; load average {load}")
    print(f"{'':40s}{'CPU [s]':>9}{'range':>15}{'ratio to the baseline':>24}")
    for name, t in times.items():
        print(f"{name:40s}{med[name]:9.3f}{min(t):7.3f}-{max(t):.3f}{med[name] / base:24.2f}")
    case_cpu = med["lowflow case (one-minute case)"]
    print(
        f"lowflow case: {case_cpu / base:.2f}x the numpy+pandas import (target <= 2); like for like {case_cpu / like_base:.2f}x"
    )
    print(
        f"lowflow --version: {med['lowflow --version']:.3f} s, --help: {med['lowflow --help']:.3f} s (target < 0.3 s)"
    )
    supply = med["lowflow supply (demo inventory)"]
    print(f"lowflow supply: {supply:.3f} s, {supply / base:.2f}x the numpy+pandas import (target <= 3)")


if __name__ == "__main__":
    main()
