"""``lowflow app``: start the Streamlit app on the built-in demo (needs the ``app`` extra)."""

from __future__ import annotations

import typer

from ..errors import InputError
from . import app


@app.command("app")
def app_command(
    port: int = typer.Option(8501, "--port", help="Port of the local server (1024 to 65535)."),
    browser: bool = typer.Option(True, "--browser/--no-browser", help="Open a browser tab."),
) -> None:
    """Start the app (case planner, flow floor, supply, forecast, audit) on the built-in demo."""
    import importlib.util
    import os
    import sys
    from pathlib import Path

    if not 1024 <= port <= 65535:
        raise InputError("--port", port, "1024 to 65535")
    app_spec = importlib.util.find_spec("estimator_app")
    if importlib.util.find_spec("streamlit") is None or app_spec is None or app_spec.origin is None:
        raise InputError(
            "lowflow app",
            "not installed",
            "the app extra: pip install 'lowflow-estimator[app]' (or uv sync in a checkout)",
        )
    script = Path(app_spec.origin).parent / "run.py"
    # serve.py is `streamlit run` on that script, with the engine loading as the server starts.
    argv = [sys.executable, str(script.with_name("serve.py")), "--server.port", str(port)]
    argv += ["--server.headless", "false" if browser else "true"]
    # Streamlit reads .streamlit/config.toml (theme, upload cap, no error details, no usage
    # statistics) from the working folder: the checkout's root, or its copy in the installed package.
    root = script.parent.parent
    os.chdir(root if (root / ".streamlit" / "config.toml").is_file() else script.parent)
    os.execv(sys.executable, argv)  # the app's server replaces this process
