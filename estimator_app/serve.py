"""The app's server with the engine loading as it starts: ``python -m estimator_app.serve [options]``.

``lowflow app`` runs this module: the same as ``streamlit run`` on :mod:`estimator_app.run` (the
options are ``streamlit run``'s), with :mod:`estimator_app.warmup` started in the server's process
before any browser connects, so the first page shows its results sooner.

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
    """Start the server (blocks until it stops); ``options`` are ``streamlit run``'s (default: the command line's)."""
    from streamlit.web import cli  # the server's own imports first, in this thread

    from . import warmup

    warmup.start(wait=True)  # once the server listens: its own start is not slowed
    sys.argv = ["streamlit", "run", str(SCRIPT), *(sys.argv[1:] if options is None else options)]
    cli.main(prog_name="streamlit")


if __name__ == "__main__":
    main()
