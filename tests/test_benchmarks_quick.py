"""The benchmarks' quick modes run to the end and print their figures (no timed assertion: speed is
judged by the full benchmarks on an idle machine, never by the test suite)."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

BENCH = Path(__file__).resolve().parent.parent / "benchmarks"


def test_bench_audit_quick_prints_its_figures():
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
