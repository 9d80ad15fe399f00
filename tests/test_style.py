"""The code base keeps its lint and format rules (ruff, configured in pyproject.toml), so that CI
catches drift rather than the next contributor."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def ruff(*args: str) -> subprocess.CompletedProcess:
    exe = shutil.which("ruff") or str(Path(sys.executable).with_name("ruff"))
    if not Path(exe).exists():
        pytest.skip("ruff is not installed (it is in the dev dependency group)")
    return subprocess.run([exe, *args], cwd=ROOT, capture_output=True, text=True)


def test_ruff_lint_passes():
    out = ruff("check", ".")
    assert out.returncode == 0, out.stdout[-3000:]


def test_ruff_format_is_applied():
    out = ruff("format", "--check", ".")
    assert out.returncode == 0, out.stdout[-3000:]
