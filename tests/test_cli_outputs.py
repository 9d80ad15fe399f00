"""Output files and option values of the ``lowflow`` verbs: an output never overwrites an input, every
file problem is exit status 2 naming the flag, and an option's bad value is named by the option."""

import shutil
from pathlib import Path

import pytest
from contract_helpers import SCENARIO, run

DATA = Path(__file__).parent / "data"


@pytest.fixture
def log(tmp_path):
    path = tmp_path / "log.csv"
    shutil.copy(DATA / "audit_two_rooms.csv", path)
    return path


def test_output_never_overwrites_an_input(log, capsys):
    before = log.read_bytes()
    code, _, err = run(capsys, "audit", str(log), "--csv", str(log))
    assert code == 2 and "--csv" in err and "LOG" in err
    assert log.read_bytes() == before


def test_output_never_overwrites_an_input_by_another_spelling(log, capsys, monkeypatch):
    monkeypatch.chdir(log.parent)
    code, _, err = run(capsys, "audit", "log.csv", "--report", "./sub/../log.csv")
    assert code == 2 and "--report" in err


def test_two_outputs_to_one_file_refused(log, capsys, tmp_path):
    out = tmp_path / "out.csv"
    code, _, err = run(capsys, "audit", str(log), "--csv", str(out), "--report", str(out))
    assert code == 2 and "--report" in err


@pytest.mark.parametrize(
    "flag,target",
    [
        ("--csv", "missing/folder/out.csv"),
        ("--report", "/proc/version"),
        ("--xlsx", "."),
    ],
)
def test_bad_output_targets_exit_2_naming_the_flag(log, capsys, tmp_path, monkeypatch, flag, target):
    monkeypatch.chdir(tmp_path)
    code, _, err = run(capsys, "audit", str(log), flag, target)
    assert code == 2 and flag in err and "internal error" not in err


def test_case_csv_carries_the_caution_generator_and_input_digest(tmp_path, capsys):
    # Issue 18: the series CSV leads with the caution, the program and version, and the scenario's digest.
    import hashlib

    from estimator.planning.exports import read_csv_export

    f = tmp_path / "s.toml"
    f.write_text(SCENARIO)
    code, _, _ = run(capsys, "case", str(f), "--csv", str(tmp_path / "series.csv"))
    assert code == 0
    lines = (tmp_path / "series.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("# caution: Planning and audit aid only")
    assert lines[1].startswith("# made by: lowflow-estimator ") and lines[1].endswith("(lowflow case)")
    assert (
        lines[2] == f"# input: s.toml (sha256 {hashlib.sha256(f.read_bytes()).hexdigest()}, {f.stat().st_size} bytes)"
    )
    series = read_csv_export(tmp_path / "series.csv")
    assert series.columns[0] == lines[3].split(",")[0] and len(series) > 10


def test_case_csv_into_a_missing_folder_names_the_flag(tmp_path, capsys):
    f = tmp_path / "case.toml"
    f.write_text(SCENARIO)
    code, _, err = run(capsys, "case", str(f), "--csv", str(tmp_path / "no" / "x.csv"))
    assert code == 2 and "--csv" in err


def test_case_csv_cannot_overwrite_its_scenario(tmp_path, capsys):
    f = tmp_path / "case.toml"
    f.write_text(SCENARIO)
    code, _, err = run(capsys, "case", str(f), "--csv", str(f))
    assert code == 2 and "--csv" in err
    assert f.read_text() == SCENARIO


@pytest.mark.parametrize("verb", ["case", "safe-flow", "supply"])
def test_deeply_nested_toml_is_a_file_error(tmp_path, capsys, verb):
    f = tmp_path / "deep.toml"
    f.write_text("a = " + "[" * 5000)
    code, _, err = run(capsys, verb, str(f))
    assert code == 2 and "internal error" not in err and "deep.toml" in err


@pytest.mark.parametrize("flag", ["--prices", "--policy"])
def test_deeply_nested_prices_or_policy_name_the_flag(log, tmp_path, capsys, flag):
    f = tmp_path / "deep.toml"
    f.write_text("a = " + "[" * 5000)
    code, _, err = run(capsys, "audit", str(log), flag, str(f))
    assert code == 2 and flag in err and "internal error" not in err


def test_an_unreadable_input_is_exit_2(tmp_path, capsys):
    code, _, err = run(capsys, "case", str(tmp_path))  # a folder, not a file
    assert code == 2 and "internal error" not in err


# ------------------------------------------------------------------ option values
def test_manifold_loss_follows_the_bare_number_rule_and_names_the_flag(log, capsys):
    code, _, err = run(capsys, "audit", str(log), "--manifold-loss", "50")
    assert code == 2 and "--manifold-loss" in err and "50 %" in err
    code, _, _ = run(capsys, "audit", str(log), "--manifold-loss", "85 %")
    assert code == 0


@pytest.mark.parametrize(
    "args,flag",
    [
        (["supply", str(DATA / "inventory_backup.toml"), "--start", "2026-13-01"], "--start"),
        (["forecast", str(DATA / "casemix_department.toml"), "--weeks", "0"], "--weeks"),
        (["forecast", str(DATA / "casemix_department.toml"), "--seed", "-1"], "--seed"),
        (["audit", str(DATA / "audit_two_rooms.csv"), "--maintenance-after", "1e300 min"], "--maintenance-after"),
    ],
)
def test_option_values_are_named_by_their_option(capsys, args, flag):
    code, _, err = run(capsys, *args)
    assert code == 2 and err.startswith(f"lowflow: error: {flag}:")


def test_safe_flow_threshold_follows_the_bare_number_rule(tmp_path, capsys):
    f = tmp_path / "case.toml"
    f.write_text(SCENARIO)
    code, _, err = run(capsys, "safe-flow", str(f), "--threshold", "30")
    assert code == 2 and "--threshold" in err and "30 %" in err
    code, _, err = run(capsys, "safe-flow", str(f), "--threshold", "10 %")
    assert code == 2 and "--threshold" in err and "21 to 100 %" in err
