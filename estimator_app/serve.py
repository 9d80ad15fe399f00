"""The app's server with the engine already loaded: ``python <package folder>/serve.py [options]``.

``lowflow app`` runs this file: :func:`estimator_app.warmup.run` (the first page's modules and numba's
compiled kernels, 1-2 s), then ``streamlit run`` on :mod:`estimator_app.run` in the same process (the
options are ``streamlit run``'s). Streamlit runs every page in the server's process, so the first
browser that connects meets a warm engine. Loaded before the server listens, not beside it: beside
it, the loading shared the interpreter lock with the server's answers to the browser's first
requests, and the first page's totals came no sooner (measured in benchmarks/bench_app.py).

>>> from estimator_app.serve import SCRIPT
>>> SCRIPT.name
'run.py'
"""

from __future__ import annotations

import sys
from pathlib import Path

#: The entry script the server runs for each page.
SCRIPT = Path(__file__).resolve().with_name("run.py")


def main(options: list[str] | None = None) -> None:
    """Load the engine, then start the server (blocks until it stops); ``options`` are ``streamlit run``'s
    (default: the command line's)."""
    from estimator_app import warmup

    print("lowflow app: loading the model before the server starts...", file=sys.stderr, flush=True)
    warmup.run()
    from streamlit.web import cli

    sys.argv = ["streamlit", "run", str(SCRIPT), *(sys.argv[1:] if options is None else options)]
    cli.main(prog_name="streamlit")


if __name__ == "__main__":
    main()
