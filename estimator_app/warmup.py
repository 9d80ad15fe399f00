"""Load the engine (numba's compiled kernels) in the background once the first page is drawn.

The first change of an input on any page is then answered as fast as later ones. Started after the
first page, not before it: both would share one interpreter lock, and the first page would come
later (measured in benchmarks/bench_app.py).
"""

from __future__ import annotations

import threading

_started = threading.Event()


def _load() -> None:
    try:
        from estimator.inputs.scenario import scenario_from_dict
        from estimator.simulation.engine import simulate

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
