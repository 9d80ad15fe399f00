"""Load the engine (numba's compiled kernels) and the first page's modules, once per server process.

Streamlit runs every page script in the server's own process, so a module imported here is the one
the page uses, and a kernel loaded here is loaded for every session. Two starts:

* ``lowflow app`` (:mod:`estimator_app.serve`) runs it before the server listens, so the first
  browser that connects meets a warm engine (the first page's imports and the kernels' cache load,
  1-2 s, are no longer part of its wait).
* ``streamlit run app.py`` has no hook before the first page, so :func:`start` runs after that page
  is drawn (started before it, both would share one interpreter lock and the page would come later);
  the first change of an input is then answered as fast as later ones.

After the warm-up the objects alive then (modules, the engine's tables, the compiled kernels: about
200 000 objects, there for the life of the server) are moved out of the garbage collector's view
(``gc.freeze``): otherwise every full collection walks them all, a pause of about 110 ms that fell on
about one rerun in 40 (measured over 40 reruns of the case planner; after the freeze none).
"""

from __future__ import annotations

import gc
import importlib
import threading

_started = threading.Event()
_ready = threading.Event()
_settled = False

#: Modules the first page (the case planner) imports; loading them early is what the early start saves.
FIRST_PAGE = ("estimator_app.shell", "estimator_app.pages.case_planner")
#: Seconds after the first page before :func:`settle` collects and freezes (its messages are sent by then).
SETTLE_DELAY = 1.0


def _load() -> None:
    try:
        for module in FIRST_PAGE:
            importlib.import_module(module)
        from estimator.inputs.scenario import scenario_from_dict
        from estimator.simulation.engine import simulate

        from . import demo

        simulate(scenario_from_dict(demo.scenario()))  # loads each compiled kernel from numba's cache
        gc.collect()  # what the warm-up left behind, then the long-lived rest out of later collections
        gc.freeze()
        _ready.set()
    except Exception:  # noqa: BLE001 - a failed warm-up only costs time; the page reports real errors
        pass


def settle() -> None:
    """Once per process, after a page has been drawn with the engine loaded: collect, then freeze what
    is alive (the server's own objects and the first session's, made after the warm-up's freeze).

    Streamlit runs a full collection after every script run (its ``runner.postScriptGC``, on by
    default), while the run's last messages are still being sent; it walked those objects: 16-29 ms
    of every rerun of the case planner on a 2-core machine (measured with ``gc.callbacks``; after
    this, no collection over 3 ms in the reruns measured). Costs one such pass, once, a second after
    the page (in a timer thread, so not while the page's last messages are sent).
    """
    global _settled
    if _settled or not _ready.is_set():
        return
    _settled = True
    timer = threading.Timer(SETTLE_DELAY, _freeze)
    timer.daemon = True
    timer.start()


def _freeze() -> None:
    gc.collect()
    gc.freeze()


def ready() -> bool:
    """True once the warm-up has run the demo case: a case now takes milliseconds."""
    return _ready.is_set()


def run() -> None:
    """Run the warm-up in the calling thread, once per process (a later :func:`start` does nothing)."""
    if not _started.is_set():
        _started.set()
        _load()


def start() -> threading.Thread | None:
    """Start the warm-up in a thread, once per process; the thread, or None if it was started before."""
    if _started.is_set():
        return None
    _started.set()
    thread = threading.Thread(target=_load, name="lowflow-warmup", daemon=True)
    thread.start()
    return thread
