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


ONE_MINUTE = '[patient]\nweight = "70 kg"\nage = "40 years"\n[agent]\nname = "sevoflurane"\n[[phases]]\n'
ONE_MINUTE += 'duration = "1 min"\noxygen = "2 L/min"\nvaporizer = "2 %"\n'
LAZY = ("pandas", "estimator.inputs.calibration_file", "estimator.planning.case_plan", "estimator.simulation.spread")


def _loaded_after_case(tmp_path, *options: str) -> set[str]:
    case = tmp_path / "one_minute.toml"
    case.write_text(ONE_MINUTE, encoding="utf-8")
    code = (
        "import sys\nfrom estimator.cli import main\ntry:\n"
        f"    main(['case', {str(case)!r}, *{list(options)!r}])\nexcept SystemExit as exc:\n"
        "    assert exc.code == 0, exc.code\n"
        f"print('MODULES', ' '.join(m for m in {LAZY!r} if m in sys.modules))"
    )
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return set(run.stdout.split("MODULES")[-1].split())


def test_a_plain_case_loads_neither_pandas_nor_the_calibration_code(tmp_path):
    # The summary, the warnings and --json read the series as arrays; the DataFrame, the calibration
    # file's code, the plan and the patient spread load only for the options that need them.
    assert _loaded_after_case(tmp_path) == set()
    assert _loaded_after_case(tmp_path, "--json") == set()


def test_the_frame_loads_with_the_option_that_needs_it(tmp_path):
    assert "pandas" in _loaded_after_case(tmp_path, "--csv", str(tmp_path / "series.csv"))


def test_the_series_frame_is_built_on_demand_from_the_columns():
    import tomllib

    import numpy as np

    from estimator.inputs.scenario import scenario_from_dict
    from estimator.simulation.engine import simulate

    result = simulate(scenario_from_dict(tomllib.loads(ONE_MINUTE)))
    assert result._frame is None  # nothing built yet
    frame = result.series
    assert result.series is frame and list(frame.columns) == list(result.columns)
    for name, values in result.columns.items():
        np.testing.assert_array_equal(frame[name].to_numpy(), values)
    frame2 = frame.assign(**{"time [min]": frame["time [min]"] + 1.0})
    result.series = frame2  # a new frame replaces both views
    assert result.series is frame2 and result.columns["time [min]"][0] == frame2["time [min]"].iloc[0]


_PROCESS = (
    "import gc, os, sys\nsys.argv = ['lowflow', '--version']\nfrom estimator.cli import main\n"
    "try:\n    main({argv})\nexcept SystemExit:\n    pass\n"
    "print('STATE', os.environ.get('OPENBLAS_NUM_THREADS'), gc.get_freeze_count() > 0, gc.isenabled())"
)


def _process_state(argv: str, env_blas: str | None) -> list[str]:
    import os

    env = {k: v for k, v in os.environ.items() if k != "OPENBLAS_NUM_THREADS"}
    if env_blas is not None:
        env["OPENBLAS_NUM_THREADS"] = env_blas
    code = _PROCESS.format(argv=argv)
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, env=env)
    return run.stdout.split("STATE")[-1].split()


def test_the_process_settings_apply_to_a_lowflow_process_only():
    # As the process's entry point (no argv): one OpenBLAS thread unless the user chose, the heap frozen at exit.
    assert _process_state("", None) == ["1", "True", "True"]
    assert _process_state("", "4") == ["4", "True", "True"]  # the user's own setting is kept
    # Called with argv inside another program (a test, a script): its environment and collector stay as they were.
    assert _process_state("['--version']", None) == ["None", "False", "True"]


def test_loading_pauses_the_collector_and_freezes_what_was_loaded_in_a_lowflow_process(monkeypatch):
    import gc

    from estimator.cli import process

    monkeypatch.setattr(process, "_entry", True)
    monkeypatch.setattr(gc, "freeze", lambda: frozen.append(True))  # keep this test process's heap as it is
    frozen: list[bool] = []
    with process.loading():
        assert not gc.isenabled()
    assert gc.isenabled() and frozen == [True]
    monkeypatch.setattr(process, "_entry", False)
    with process.loading():
        assert gc.isenabled()
