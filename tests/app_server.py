"""Start and stop the app on a free loopback port: ``streamlit run app.py`` (the browser tests) or
``lowflow app`` (benchmarks/bench_app.py measures both)."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
#: Debian's chromium flags for a headless run that never reaches the network.
FLAGS = [
    "--no-sandbox",
    "--headless",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--disable-quic",
]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def command(port: int, via: str = "streamlit") -> list[str]:
    """The command that starts the app: ``streamlit run app.py``, or ``lowflow app`` (``via="lowflow"``,
    the README's command: the model is loaded before the server listens)."""
    if via == "lowflow":
        lowflow = Path(sys.executable).with_name("lowflow")
        return [str(lowflow), "app", "--no-browser", "--port", str(port)]
    return [sys.executable, "-m", "streamlit", "run", "app.py", "--server.headless", "true", "--server.port", str(port)]


def start(timeout: float = 90.0, poll: float = 0.1, via: str = "streamlit") -> tuple[subprocess.Popen, str]:
    """A fresh app server started by :func:`command` and its URL, once its health endpoint answers.

    Raises RuntimeError with the end of the server's output if it does not start within ``timeout``.
    """
    port = free_port()
    env = {
        **os.environ,
        "STREAMLIT_BROWSER_GATHER_USAGE_STATS": "false",
        "STREAMLIT_SERVER_ADDRESS": "127.0.0.1",
        "STREAMLIT_SERVER_FILE_WATCHER_TYPE": "none",
    }
    proc = subprocess.Popen(
        command(port, via),
        cwd=ROOT,
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
    )
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + timeout
    while True:
        try:
            with urllib.request.urlopen(f"{url}/_stcore/health", timeout=2) as r:
                if r.status == 200:
                    return proc, url
        except OSError:
            pass
        if proc.poll() is not None or time.monotonic() > deadline:
            proc.kill()
            out = proc.stdout.read().decode(errors="replace") if proc.stdout else ""
            raise RuntimeError(f"streamlit did not start on {url}:\n{out[-2000:]}")
        time.sleep(poll)


def stop(proc: subprocess.Popen) -> None:
    proc.terminate()
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()
