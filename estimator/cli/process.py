"""Process-wide settings of the ``lowflow`` command when it runs as its own process (start-up cost).

A one-minute ``lowflow case`` spends most of its CPU loading libraries (numba, scipy, pint, pydantic),
not computing. Three settings of the *process* cut what that loading costs, without touching what the
libraries do (benchmarks/bench_startup.py measures the result):

* OpenBLAS is asked for one thread (:func:`single_threaded_blas`);
* the cyclic garbage collector pauses while a verb loads its modules and the compiled model
  (:func:`loading`), and what was loaded is then moved out of the collector's way (``gc.freeze``);
* at exit the collector does not walk the whole heap once more (:func:`finish`).

One ablation on a shared 2-core machine (CPU of a one-minute case, median of 11 interleaved runs,
load average 2-3; measured, no source): all three 0.91 s; without the BLAS setting 1.03 s; without the
pause and the freeze at exit 1.28 s; without any 1.58 s.

They act only when :func:`estimator.cli.main` is the process's entry point (the ``lowflow`` script or
``python -m estimator``, which pass no ``argv``); a program or a test calling ``main([...])`` in its own
process keeps its collector and its environment as they were.

Examples
--------
>>> with loading():  # not the process entry point here: the collector is left alone
...     import gc
...     gc.isenabled()
True
"""

from __future__ import annotations

import gc
import os
from collections.abc import Iterator
from contextlib import contextmanager

_entry = False


def begin() -> None:
    """Mark this process as a ``lowflow`` command that ends when the command does."""
    global _entry
    _entry = True
    single_threaded_blas()


def single_threaded_blas() -> None:
    """Ask OpenBLAS for one thread in this process, unless the user set ``OPENBLAS_NUM_THREADS``.

    numpy and scipy each load their own OpenBLAS, which starts a pool of worker threads at load; idle
    workers spin-wait before they sleep, and on a 2-core machine that spinning cost a one-minute
    ``lowflow case`` about 0.1-0.3 s of CPU (measured, no source). The command line does no large linear
    algebra (the model's arrays are a few dozen numbers; a batch's parallel loop uses numba's own
    threads, which this leaves alone), so one BLAS thread loses nothing. It acts only before numpy is
    first imported; the app's server, which ``lowflow app`` starts in this process's place, inherits it.
    """
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


@contextmanager
def loading() -> Iterator[None]:
    """Pause the cyclic garbage collector while a verb imports its modules and loads the compiled model.

    Loading creates about a million objects that live as long as the process (modules, numba's typing
    tables); the collector walked them again and again as they aged. With the collector paused they are created once and, at the end, frozen (``gc.freeze``:
    later collections skip them) and the collector is resumed, so a long run after loading collects its
    garbage as usual. Garbage made inside the block is bounded by one load and one model run. Only in a
    ``lowflow`` process (:func:`begin`); otherwise a no-op.
    """
    if not _entry or not gc.isenabled():
        yield
        return
    gc.disable()
    try:
        yield
    finally:
        gc.freeze()
        gc.enable()


def finish() -> None:
    """At the end of a ``lowflow`` process: skip the collector's last walk over the heap at exit.

    The interpreter collects once more while it shuts down, over every object still tracked; nothing is left to be freed that the operating system does not
    free with the process, so the objects are frozen instead. Only in a ``lowflow`` process.
    """
    if _entry:
        gc.freeze()
