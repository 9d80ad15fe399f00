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


def test_app_starts_its_server_with_the_engine_warm_up(monkeypatch):
    # lowflow app runs estimator_app.serve: `streamlit run` on the entry script, with the warm-up
    # started in the server's process (its effect is measured in benchmarks/bench_app.py).
    import os

    from estimator_app import serve

    started = []
    monkeypatch.setattr(os, "execv", lambda exe, argv: started.append(argv))
    monkeypatch.setattr(os, "chdir", lambda path: None)
    out = CliRunner().invoke(app, ["app", "--no-browser", "--port", "8600"])
    assert out.exit_code == 0, out.stdout
    argv = started[0]
    assert argv[1] == str(serve.SCRIPT.with_name("serve.py")) and argv[2:] == [
        "--server.port",
        "8600",
        "--server.headless",
        "true",
    ]
    assert serve.SCRIPT.name == "run.py" and serve.SCRIPT.is_file()


def test_warm_up_runs_the_demo_case_and_starts_once():
    from estimator_app import warmup

    warmup.run()  # in this thread, as lowflow app's server runs it
    assert warmup.ready()
    assert warmup.start() is None  # once per process: the page's later start does nothing
    # The objects alive after the warm-up are out of later full collections (estimator_app/warmup.py).
    import gc

    assert gc.get_freeze_count() > 0


def test_settle_collects_and_freezes_once_after_the_engine_is_loaded(monkeypatch):
    # After a page drawn with the engine loaded, one collection then a freeze, a second later and once
    # per process (estimator_app/warmup.py: Streamlit's collection after every run walked those objects).
    from estimator_app import warmup

    calls: list[str] = []
    timers: list[tuple[float, object]] = []

    class Timer:  # records what would run, runs it when the test says
        def __init__(self, delay: float, function) -> None:  # noqa: ANN001 - threading.Timer's signature
            timers.append((delay, function))
            self.daemon = False

        def start(self) -> None:
            pass

    monkeypatch.setattr(warmup, "_settled", False)
    monkeypatch.setattr(warmup.threading, "Timer", Timer)
    monkeypatch.setattr(warmup.gc, "collect", lambda: calls.append("collect"))
    monkeypatch.setattr(warmup.gc, "freeze", lambda: calls.append("freeze"))
    monkeypatch.setattr(warmup._ready, "is_set", lambda: False)
    warmup.settle()  # the engine not loaded yet: nothing
    assert timers == []
    monkeypatch.setattr(warmup._ready, "is_set", lambda: True)
    warmup.settle()
    warmup.settle()  # once per process
    assert [d for d, _ in timers] == [warmup.SETTLE_DELAY]
    timers[0][1]()
    assert calls == ["collect", "freeze"]
