"""Every benchmark runs to the end in its quick mode, so none can rot (no timed assertions).

Each script prints its figures and their ratios to the baseline measured in the same run; here only
that it finishes, exits 0 and prints them is checked. The figures themselves are read by people.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

BENCH = Path(__file__).resolve().parent.parent / "benchmarks"

#: script -> phrases its output must contain.
QUICK = {
    "bench_case.py": "engine speed-up",
    "bench_batch.py": ("batch speed-up", "us CPU per case including start-up", "ratio to target"),
    "bench_flow_floor.py": "ratio to the",
    "bench_spread.py": "ratio to the run without spread",
    "bench_startup.py": "x the numpy+pandas import",
}


@pytest.mark.parametrize("script", sorted(QUICK))
def test_benchmark_quick_mode_runs(script):
    run = subprocess.run(
        [sys.executable, str(BENCH / script), "--quick"], capture_output=True, text=True, timeout=600, cwd=BENCH.parent
    )
    assert run.returncode == 0, run.stderr[-2000:]
    phrases = QUICK[script] if isinstance(QUICK[script], tuple) else (QUICK[script],)
    assert all(p in run.stdout for p in phrases), run.stdout


@pytest.mark.skipif(shutil.which("chromium") is None, reason="the app benchmark drives Debian's chromium")
@pytest.mark.parametrize("options", [(), ("--via", "lowflow", "--browser", "returning")])
def test_app_benchmark_quick_mode_runs(options):
    pytest.importorskip("playwright")
    run = subprocess.run(
        [sys.executable, str(BENCH / "bench_app.py"), "--quick", *options],
        capture_output=True,
        text=True,
        timeout=600,
        cwd=BENCH.parent,
    )
    assert run.returncode == 0, run.stderr[-2000:]
    assert "rerun after one input" in run.stdout and "where it goes" in run.stdout, run.stdout


def test_bench_audit_quick_prints_its_figures():
    import re

    run = subprocess.run(
        [sys.executable, str(BENCH / "bench_audit.py"), "--quick"], capture_output=True, text=True, timeout=300
    )
    assert run.returncode == 0, run.stderr
    out = run.stdout
    assert "20000 rows" in out and "peak RSS" in out and "tracemalloc" in out
    for kind in ("baseline", "read", "audit"):
        row = re.search(rf"^{kind} +([0-9.]+)s +([0-9.]+) +(\S+ B/row|n/a)", out, re.MULTILINE)
        assert row, out
    assert re.search(r"^baseline +[0-9.]+s +1\.00 ", out, re.MULTILINE)  # ratios are to the baseline
