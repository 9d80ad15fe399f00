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


def test_importing_the_package_leaves_pint_global_state_alone():
    # A user's own pint quantities must keep working beside ours: no application registry is set
    # and pint's default format is untouched (the app sets the registry in its own process only).
    code = (
        "import pint\nbefore = pint.get_application_registry().get()\n"
        "import estimator, estimator.units, estimator.simulation.engine\n"
        "after = pint.get_application_registry().get()\n"
        "try:\n    after.Unit('MAC')\n    known = True\nexcept Exception:\n    known = False\n"
        "print(before is after, known, after.formatter.default_format == before.formatter.default_format)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["True", "False", "True"], out


def test_first_compile_is_announced_on_a_terminal_only(monkeypatch, capsys):
    # The first run compiles the model for 10-20 s: said on a terminal, never in piped output.
    from pathlib import Path

    from estimator.cli import outputs

    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True)
    monkeypatch.setattr(Path, "glob", lambda self, pattern: iter(()))  # an empty cache
    outputs.announce_first_compile(["case", "x.toml"])
    assert "compiling the model once" in capsys.readouterr().err
    outputs.announce_first_compile(["mac", "--agent", "sevoflurane"])  # no model run: silent
    assert capsys.readouterr().err == ""
    monkeypatch.setattr(sys.stderr, "isatty", lambda: False)
    outputs.announce_first_compile(["case", "x.toml"])  # piped: silent
    assert capsys.readouterr().err == ""
