"""Options with a fixed set of values are choices: ``--help`` lists them, a bad value is typer's clear
error (exit status 2, naming the option), and each set is tied to the module or data file that uses it."""

from __future__ import annotations

import tomllib
from importlib import resources
from pathlib import Path

import pytest
from contract_helpers import run

from estimator import choices

DATA = Path(__file__).parent / "data"
LOG = str(DATA / "audit_two_rooms.csv")


def test_each_choice_set_matches_its_user():
    from estimator.inputs.schemas import KINDS
    from estimator.planning.audit import QUADRATURES
    from estimator.properties import AGENTS, CO2E_BASES

    assert [b.value for b in choices.Basis] == list(CO2E_BASES)
    assert [q.value for q in choices.Quadrature] == list(QUADRATURES)
    assert [k.value for k in choices.FileKind] == list(KINDS)
    data = tomllib.loads(resources.files("estimator").joinpath("data/agents.toml").read_text(encoding="utf-8"))
    assert {a.value for a in choices.Agent} == set(data["agents"]) == set(AGENTS)


@pytest.mark.parametrize(
    "args,listed",
    [
        (["audit", "--help"], ["ar6_gwp100", "ar6_gwp20", "ar5_gwp100", "sulbaek2012_gwp100", "hold", "trapezoid"]),
        (["mac", "--help"], ["sevoflurane", "isoflurane", "desflurane", "halothane"]),
        (["schema", "--help"], ["scenario", "inventory", "case-mix", "prices", "policy"]),
    ],
)
def test_help_lists_the_choices(capsys, args, listed):
    code, out, _ = run(capsys, *args)
    assert code == 0
    assert all(name in out for name in listed), out


@pytest.mark.parametrize(
    "args,flag",
    [
        (["audit", LOG, "--basis", "ar7"], "--basis"),
        (["audit", LOG, "--quadrature", "simpson"], "--quadrature"),
        (["mac", "--agent", "xenon", "--age", "40"], "--agent"),
        (["schema", "spreadsheet"], "KIND"),
    ],
)
def test_a_value_outside_the_choices_is_a_clear_error(capsys, args, flag):
    code, _, err = run(capsys, *args)
    assert code == 2 and flag.lower() in err.lower() and "is not one of" in err and "internal error" not in err


def test_choices_keep_working(capsys):
    code, out, _ = run(capsys, "audit", LOG, "--basis", "ar5_gwp100", "--quadrature", "trapezoid", "--json")
    assert code == 0 and '"co2e_basis": "ar5_gwp100"' in out and '"quadrature": "trapezoid"' in out
    code, out, _ = run(capsys, "mac", "--agent", "Sevoflurane", "--age", "40")  # names are case-insensitive
    assert code == 0 and out.startswith("sevoflurane")
    code, out, _ = run(capsys, "schema", "case-mix")
    assert code == 0 and '"title"' in out


def test_output_paths_are_paths():
    # Output and input file options are typed as paths (typer shows <path>), not free strings.
    import inspect

    from estimator.cli.audit import audit_command
    from estimator.cli.case import case

    for fn, names in ((audit_command, ("log", "policy", "prices", "report", "xlsx", "csv_out")), (case, ("csv",))):
        params = inspect.signature(fn).parameters
        assert all("Path" in str(params[n].annotation) for n in names), fn.__name__
