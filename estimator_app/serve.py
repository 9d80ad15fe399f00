"""The app's server with the engine loading as it starts: ``python <package folder>/serve.py [options]``.

``lowflow app`` runs this file: the same as ``streamlit run`` on :mod:`estimator_app.run` (the options
are ``streamlit run``'s), and once the server listens, :func:`estimator_app.warmup.run` in a thread of
the server's process, before a browser connects. Run as a file, not as ``python -m``, so that even the
package's own import (pint's unit registry, about 0.3 s) waits for the server to listen.

>>> from estimator_app.serve import SCRIPT
>>> SCRIPT.name
'run.py'
"""

from __future__ import annotations

import sys
import threading
import time
from pathlib import Path

#: The entry script the server runs for each page.
SCRIPT = Path(__file__).resolve().with_name("run.py")


def _warm_when_listening(timeout: float = 10.0, poll: float = 0.02) -> None:
    """Wait until Streamlit's runtime has started (at most ``timeout`` seconds), then warm the engine."""
    from streamlit.runtime import Runtime

    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and not (Runtime.exists() and Runtime.instance().state.name != "INITIAL"):
        time.sleep(poll)
    from estimator_app import warmup

    warmup.run()


def main(options: list[str] | None = None) -> None:
    """Start the server (blocks until it stops); ``options`` are ``streamlit run``'s (default: the command line's)."""
    from streamlit.web import cli  # the server's own imports first

    threading.Thread(target=_warm_when_listening, name="lowflow-warmup", daemon=True).start()
    sys.argv = ["streamlit", "run", str(SCRIPT), *(sys.argv[1:] if options is None else options)]
    cli.main(prog_name="streamlit")


if __name__ == "__main__":
    main()
