"""Benchmark of the fresh-gas audit: a synthetic log of 1e6 rows, audited end to end.

Generates an invented log (5000 cases of 200 samples each, 30 s apart, ISO 8601 timestamps,
three agents, four rooms, end-tidal agent and patient age present), writes it to a temporary CSV,
then times ``estimator.planning.audit.audit`` from reading the file to the per-case, room and month tables
and KPIs. The target is 10 s on a 2-core machine.

Run: ``uv run python benchmarks/bench_audit.py [rows]``.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

TARGET_S = 10.0


def synthetic_log(rows: int = 1_000_000, per_case: int = 200, seed: int = 7) -> pd.DataFrame:
    """An invented audit log with ``rows`` samples (demo data, no real cases)."""
    rng = np.random.default_rng(seed)
    n_cases = rows // per_case
    case = np.repeat(np.arange(n_cases), per_case)
    k = np.tile(np.arange(per_case), n_cases)
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


def main(rows: int = 1_000_000) -> float:
    from estimator.accounts.costs import DEMO_PRICES
    from estimator.planning.audit import audit

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "log.csv"
        synthetic_log(rows).to_csv(path, index=False)
        t0 = time.perf_counter()
        result = audit(path, prices=DEMO_PRICES)
        elapsed = time.perf_counter() - t0
    print(f"rows {result.rows['read']}, used {result.rows['used']}, cases {len(result.cases)}")
    print(f"audit time {elapsed:.2f} s; ratio to the {TARGET_S:g} s target {elapsed / TARGET_S:.2f}")
    return elapsed


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
