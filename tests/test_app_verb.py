"""``lowflow app``: help, refusals and the files the installed app needs (consistency checks)."""

from __future__ import annotations

from typer.testing import CliRunner

from estimator.cli import app


def test_app_help_works():
    out = CliRunner().invoke(app, ["app", "--help"])
    assert out.exit_code == 0 and "--port" in out.stdout


def test_app_refuses_a_privileged_port():
    out = CliRunner().invoke(app, ["app", "--port", "80"])
    assert out.exit_code != 0


def test_app_entry_script_and_its_files_are_found():
    # The entry script lives in the package; the demo and the validation report are found in the
    # checkout or in their copies inside the installed package.
    from pathlib import Path

    import estimator_app
    from estimator_app.contracts import DEMO_DIR
    from estimator_app.pages.methods import VALIDATION_REPORT

    assert (Path(estimator_app.__file__).parent / "run.py").is_file()
    assert any(DEMO_DIR.glob("*.toml")) and VALIDATION_REPORT.is_file()
