"""Start-up stays light: ``lowflow --help`` and ``--version`` load no numeric stack (a structural check;
no timed assertions). The heavy modules load in the verb that needs them."""

from __future__ import annotations

import subprocess
import sys

HEAVY = ("numpy", "pandas", "scipy", "numba", "pint", "CoolProp", "pydantic")


def test_cli_import_loads_no_numeric_stack():
    code = "import sys, estimator.cli; print(' '.join(m for m in " + repr(HEAVY) + " if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "", f"imported at start-up: {out.strip()}"


def test_version_runs_without_the_numeric_stack():
    code = (
        "import sys\nfrom estimator.cli import main\ntry:\n    main(['--version'])\nexcept SystemExit:\n    pass\n"
        "print(' '.join(m for m in " + repr(HEAVY) + " if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    lines = out.strip().splitlines()
    assert lines[0].startswith("lowflow ") and len(lines) == 1, out
