"""Benchmark of the fresh-gas audit: an invented log of 1e6 rows, read and audited end to end.

Generates an invented log (5000 cases of 200 samples each, 30 s apart, ISO 8601 timestamps, three
agents, four rooms, end-tidal agent and patient age present), writes it to a temporary CSV and
measures, each in a fresh Python process so that one run's memory never counts in another's:

* ``baseline``: plain ``pandas.read_csv`` of the same file with explicit dtypes (categories for case
  id, agent and room, float64 for the numbers, text for the time), the best of two runs;
* ``read``: ``estimator.inputs.audit_log.read_log`` (validation, rejection report, samples);
* ``audit``: ``estimator.planning.audit.audit`` from the file to the per-case, room and month tables and KPIs.

Memory is the peak resident set size (RSS, from ``/proc/self/status``: VmHWM after resetting it
through ``/proc/self/clear_refs``, less VmRSS before the run) added by the run, per row of the log;
the peak traced by ``tracemalloc`` (Python and numpy allocations only) is printed beside it.
Where ``/proc`` is missing, only the tracemalloc figure is given. Each figure is also given as a
ratio to the baseline's. Targets for 1e6 rows: reading adds at most 200 B/row, and read and audit
take at most 2 s on an idle 2-core machine.

Run: ``uv run python benchmarks/bench_audit.py [rows]`` or ``... --quick`` (20 000 rows, a few
seconds, for CI; the figures are printed, never judged).
"""

from __future__ import annotations

import gc
import json
import os
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

TARGET_S = 2.0
TARGET_BYTES_PER_ROW = 200.0
QUICK_ROWS = 20_000
NUMBERS = (
    "oxygen_flow",
    "air_flow",
    "nitrous_oxide_flow",
    "vaporizer_setting",
    "end_tidal_agent",
    "patient_age",
    "patient_weight",
)
#: The baseline's explicit dtypes: categories for the labels, float64 for the numbers, text for the time.
BASELINE_DTYPES = {"case_id": "category", "agent": "category", "room": "category", "time": str} | dict.fromkeys(
    NUMBERS, "float64"
)


def synthetic_log(rows: int = 1_000_000, per_case: int = 200, seed: int = 7) -> pd.DataFrame:
    """An invented audit log with ``rows`` samples (demo data, no real cases)."""
    rng = np.random.default_rng(seed)
    n_cases = max(rows // per_case, 1)
    case = np.repeat(np.arange(n_cases), per_case)[:rows]
    k = np.tile(np.arange(per_case), n_cases)[:rows]
    start = np.datetime64("2025-01-06T07:30:00") + (np.arange(n_cases) * 97).astype("timedelta64[m]")
    stamp = start[case] + (k * 30).astype("timedelta64[s]")
    agents = np.array(["sevoflurane", "desflurane", "isoflurane"])[rng.integers(0, 3, n_cases)][case]
    dial = {"sevoflurane": 0.02, "desflurane": 0.06, "isoflurane": 0.012}
    wash = k < 20
    fgf = np.where(wash, 6.0, rng.choice([0.5, 1.0, 2.0], n_cases)[case])
    base = pd.Series(agents).map(dial).to_numpy()
    return pd.DataFrame(
        {
            "case_id": np.char.add("S", case.astype(str)),
            "time": stamp.astype(str),
            "oxygen_flow": np.round(fgf * 0.5, 3),
            "air_flow": np.round(fgf * 0.5, 3),
            "nitrous_oxide_flow": 0.0,
            "agent": agents,
            "vaporizer_setting": np.round(100 * base * np.where(wash, 1.5, 1.1), 3),
            "end_tidal_agent": np.round(100 * base * np.where(wash, 0.5, 0.85), 3),
            "room": np.array(["North 1", "North 2", "South 1", "South 2"])[case % 4],
            "patient_age": (30 + case % 50).astype(float),
            "patient_weight": 70.0,
        }
    )


# ------------------------------------------------------------------ one measurement (child process)
def _status(field: str) -> int | None:
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith(field):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None
    return None


def _reset_peak() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return _status("VmHWM:") is not None
    except OSError:
        return False


def _run(kind: str, path: str) -> object:
    if kind == "baseline":
        return pd.read_csv(path, dtype=BASELINE_DTYPES)
    if kind == "read":
        from estimator.inputs.audit_log import read_log

        return read_log(path)
    from estimator.accounts.costs import DEMO_PRICES
    from estimator.planning.audit import audit

    return audit(path, prices=DEMO_PRICES)


def measure(kind: str, path: str) -> dict[str, float | None]:
    """Seconds, peak RSS added [bytes] and peak traced [bytes] of one run of ``kind`` (a fresh process)."""
    if kind != "baseline":
        import estimator.planning.audit  # noqa: F401  (imports are not part of the run)
    gc.collect()
    rss = _reset_peak()
    before = _status("VmRSS:") if rss else None
    t0 = time.perf_counter()
    result = _run(kind, path)
    seconds = time.perf_counter() - t0
    peak = _status("VmHWM:") - before if rss and before is not None else None
    del result
    gc.collect()
    tracemalloc.start()
    result = _run(kind, path)
    traced = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    del result
    return {"seconds": seconds, "peak_rss": peak, "peak_traced": traced}


# ------------------------------------------------------------------ the benchmark (parent process)
def _child(kind: str, path: Path) -> dict[str, float | None]:
    out = subprocess.run(
        [sys.executable, __file__, "--measure", kind, str(path)], capture_output=True, text=True, check=True
    ).stdout
    return json.loads(out.strip().splitlines()[-1])


def _best(runs: list[dict[str, float | None]]) -> dict[str, float | None]:
    return {k: min((r[k] for r in runs if r[k] is not None), default=None) for k in runs[0]}


def _per_row(value: float | None, rows: int) -> str:
    return "n/a" if value is None else f"{value / rows:.0f} B/row"


def _ratio(value: float | None, base: float | None) -> str:
    return "n/a" if value is None or not base else f"{value / base:.2f}"


def main(rows: int = 1_000_000, quick: bool = False) -> dict[str, dict[str, float | None]]:
    """Measure the baseline, the reader and the audit on an invented log of ``rows`` rows; print the figures."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "log.csv"
        synthetic_log(rows).to_csv(path, index=False)
        size = path.stat().st_size
        runs = {"baseline": _best([_child("baseline", path) for _ in range(1 if quick else 2)])}
        runs["read"] = _child("read", path)
        runs["audit"] = _child("audit", path)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    base = runs["baseline"]
    print(f"log: {rows} rows, {size / rows:.0f} bytes/row; load average {load:.2f} (shared machine)")
    print("memory: peak RSS added per row (VmHWM - VmRSS before, fresh process); tracemalloc peak beside it")
    print(f"{'run':9} {'time':>8} {'x base':>7} {'peak RSS':>12} {'x base':>7} {'tracemalloc':>12} {'x base':>7}")
    for kind, r in runs.items():
        print(
            f"{kind:9} {r['seconds']:7.2f}s {_ratio(r['seconds'], base['seconds']):>7} "
            f"{_per_row(r['peak_rss'], rows):>12} {_ratio(r['peak_rss'], base['peak_rss']):>7} "
            f"{_per_row(r['peak_traced'], rows):>12} {_ratio(r['peak_traced'], base['peak_traced']):>7}"
        )
    scale = "" if rows == 1_000_000 else f" (targets are for 1e6 rows; this run has {rows})"
    print(
        f"targets: reading adds <= {TARGET_BYTES_PER_ROW:g} B/row, read and audit <= {TARGET_S:g} s{scale}; "
        f"read adds {_per_row(runs['read']['peak_rss'], rows)} (RSS), audit took {runs['audit']['seconds']:.2f} s"
    )
    return runs


if __name__ == "__main__":
    args = sys.argv[1:]
    if args[:1] == ["--measure"]:
        print(json.dumps(measure(args[1], args[2])))
    elif args[:1] == ["--quick"]:
        main(QUICK_ROWS, quick=True)
    else:
        main(int(args[0]) if args else 1_000_000)
