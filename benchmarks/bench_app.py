"""Benchmark of the app's first render and of a rerun (run: ``uv run python benchmarks/bench_app.py [--quick]``).

For each of ``--runs`` cold servers (a fresh ``streamlit run app.py`` process; numba's on-disk cache
is warm, as after the first run on any machine; the libraries' bytecode compiled at install, as
``[tool.uv] compile-bytecode`` in pyproject.toml makes ``uv sync`` do) it opens the case planner in Debian's chromium
(Playwright, never a downloaded browser) and measures, from the moment the browser asks for the page:

* the caution visible (the first useful content, target 5 s on a 2-core machine);
* the demo case's totals visible (the first page with its results), also counted from the command
  that starts the server;
* the server-side time of a rerun after one input changes (the maintenance O2 flow), read from the
  app's own timing line, against the 300 ms target.

Prints the medians and their ratios to the targets. Needs chromium on the PATH.
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
import app_server  # noqa: E402  the browser test's server start

FIRST_RENDER_TARGET = 5.0  # s
RERUN_TARGET = 0.300  # s


def _one_run(browser) -> tuple[float, float, float, float]:
    """Seconds to the caution and to the totals from the page request, the rerun, and seconds from
    the command (``streamlit run``) to the totals, as a user who starts the app meets them."""
    started = time.monotonic()
    proc, url = app_server.start()
    try:
        page = browser.new_page(viewport={"width": 1400, "height": 1800})
        t0 = time.monotonic()
        page.goto(url)
        page.get_by_text("Planning and audit aid only").first.wait_for(timeout=90_000)
        caution = time.monotonic() - t0
        page.locator('[data-testid="stMetric"]').filter(has_text="Liquid agent").first.wait_for(timeout=90_000)
        totals = time.monotonic() - t0
        command = time.monotonic() - started
        rerun = _rerun_seconds(page)
        page.close()
        return caution, totals, rerun, command
    finally:
        app_server.stop(proc)


def _rerun_seconds(page) -> float:
    """Server-side seconds of the rerun after the maintenance O2 flow changes (the app's timing line)."""
    from browser_helpers import edit_cell, metric, wait_for_run  # the browser tests' own cell editing
    from playwright.sync_api import expect

    stamp = page.get_by_text(re.compile(r"Page computed in \d+ ms")).first
    stamp.wait_for(timeout=90_000)
    wait_for_run(page)
    before = metric(page, "Liquid agent").inner_text()
    edit_cell(page, page.get_by_test_id("stDataFrame").first, 1, 2, "1.6")
    expect(metric(page, "Liquid agent")).not_to_have_text(before, timeout=60_000)  # the rerun that ran the engine
    wait_for_run(page)  # the stamp is the last element of the page
    return float(re.search(r"computed in (\d+) ms", stamp.inner_text()).group(1)) / 1000.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3, help="cold servers to start (default 3)")
    parser.add_argument("--quick", action="store_true", help="one cold server, no uncounted first start (CI)")
    args = parser.parse_args()
    if args.quick:
        args.runs = 1
    chromium = shutil.which("chromium")
    if chromium is None:
        raise SystemExit("chromium is not on the PATH (Debian: apt-get install chromium)")
    from playwright.sync_api import sync_playwright

    # One start first, not counted: it writes numba's on-disk cache if this machine never compiled
    # the kernels (10-20 s once, not what a user meets again).
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=app_server.FLAGS, headless=True)
        first = None if args.quick else _one_run(browser)
        runs = [_one_run(browser) for _ in range(args.runs)]
        browser.close()
    caution, totals, rerun, command = (statistics.median(x) for x in zip(*runs, strict=True))
    if first is not None:
        print(f"first start (not counted): caution {first[0]:5.2f} s, totals {first[1]:5.2f} s")
    print(f"cold servers: {args.runs}, {os.cpu_count()} cores")
    for k, (a, b, c, d) in enumerate(runs, 1):
        print(
            f"  run {k}: caution {a:5.2f} s, totals {b:5.2f} s (from the command {d:5.2f} s), rerun {1e3 * c:5.0f} ms"
        )
    print(
        f"first render to caution  median {caution:5.2f} s  target <= {FIRST_RENDER_TARGET:g} s  "
        f"ratio to target {caution / FIRST_RENDER_TARGET:5.2f}"
    )
    print(
        f"first render to totals   median {totals:5.2f} s  target <= {FIRST_RENDER_TARGET:g} s  "
        f"ratio to target {totals / FIRST_RENDER_TARGET:5.2f}"
    )
    print(f"command to totals        median {command:5.2f} s  (server start included; for information)")
    print(
        f"rerun after one input    median {1e3 * rerun:5.0f} ms target <= {1e3 * RERUN_TARGET:g} ms "
        f"ratio to target {rerun / RERUN_TARGET:5.2f}"
    )


if __name__ == "__main__":
    main()
