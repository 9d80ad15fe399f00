"""Start loading the engine (numba's compiled kernels) in the background the first time the app runs.

The page frame and the planner's inputs are drawn meanwhile, so the first totals come sooner.
"""

from __future__ import annotations

import threading

_started = threading.Event()


def _load() -> None:
    try:
        from estimator.engine import simulate
        from estimator.scenario import scenario_from_dict

        from . import demo

        doc = demo.scenario()
        doc["phases"] = [dict(doc["phases"][0], duration="1 min")]
        simulate(scenario_from_dict(doc))  # loads each compiled kernel from numba's cache
    except Exception:  # noqa: BLE001 - a failed warm-up only costs time; the page reports real errors
        pass


def start() -> None:
    """Start the warm-up once per server process."""
    if not _started.is_set():
        _started.set()
        threading.Thread(target=_load, name="lowflow-warmup", daemon=True).start()
