"""Consistency: every public function of the model layers has complete numpydoc docstrings.

The project standard (DEVELOPERS.md): Parameters and Returns with the unit in brackets, a References
section citing the source of the formula or values, and an Examples section with a doctest. A function
may go without a section only through ``ALLOWED`` below, with the reason beside it; an entry that is no
longer needed (the function is gone, or now has the section) fails, so the list stays short.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "estimator"
#: Layer folders whose public functions are held to the standard.
FOLDERS = ("physics", "accounts", "numerics", "simulation")

_KERNEL = "numba kernel of the hot loop: a doctest would compile it (seconds); the layout is in the module docstring"
_BOOKKEEPING = "bookkeeping, no published formula"
_ARRAYS = "numba kernel at the 400-line limit of circuit.py; arguments are the state and parameter arrays"

#: "folder/module.py:function" -> {section: reason it is left out}.
ALLOWED: dict[str, dict[str, str]] = {
    "physics/circuit.py:derived_series": {
        "Parameters": _ARRAYS,
        "Returns": _ARRAYS,
        "References": _ARRAYS,
        "Examples": _KERNEL,
    },
    "physics/circuit.py:flows": {"Parameters": _ARRAYS, "Returns": _ARRAYS, "References": _ARRAYS, "Examples": _KERNEL},
    "physics/circuit.py:rhs": {"Parameters": _ARRAYS, "Returns": _ARRAYS, "References": _ARRAYS, "Examples": _KERNEL},
    "physics/circuit.py:running_totals": {
        "Parameters": _ARRAYS,
        "Returns": _ARRAYS,
        "References": _ARRAYS,
        "Examples": _KERNEL,
    },
    "physics/cylinder_state.py:cylinder_count": {"References": _BOOKKEEPING + " (input check)"},
    "physics/cylinder_state.py:cylinder_temperature": {"References": _BOOKKEEPING + " (input check)"},
    "physics/flowmeter.py:regime_of": {
        "References": "naming of the package (80 % / 20 % viscous share), no published formula"
    },
    "physics/gas_mixtures.py:data_value": {"References": "data-file lookup; each value's source is in flowmeter.toml"},
    "physics/gas_mixtures.py:load_records": {"References": "data-file check; each value's source is in flowmeter.toml"},
    "physics/mac_age.py:parse_ambient_pressure": {"References": _BOOKKEEPING + " (input check)"},
    "physics/mac_age.py:parse_fraction": {"References": _BOOKKEEPING + " (input check)"},
    "physics/real_gas.py:fluid_name": {"References": _BOOKKEEPING + " (a name lookup)"},
    "physics/real_gas.py:gas_key": {"References": _BOOKKEEPING + " (a name lookup)"},
    "physics/real_gas.py:props_si": {"Examples": "imports CoolProp (about 2 s); tests/test_real_gas_table.py calls it"},
    "physics/supply_values.py:supply_data": {"References": "file reader; each value's source is in supply.toml"},
    "physics/vaporizer.py:vaporizer_kind": {"References": _BOOKKEEPING + " (a name lookup)"},
    "accounts/accounting.py:fresh_gas_litres": {"References": _BOOKKEEPING + " (flow x duration per phase)"},
    "accounts/costs.py:compare_costs": {"References": _BOOKKEEPING + " (differences of costs)"},
    "accounts/costs.py:period_cost": {"References": _BOOKKEEPING + " (sums of case costs)"},
    "accounts/prices.py:load_prices": {"References": _BOOKKEEPING + " (the prices contract)"},
    "accounts/prices.py:parse_prices": {"References": _BOOKKEEPING + " (the prices contract)"},
    "accounts/prices.py:prices_from_text": {"References": _BOOKKEEPING + " (the prices contract)"},
    "numerics/dopri5.py:integrate_phase": {"Examples": _KERNEL},
    "numerics/rkc.py:integrate_cases": {"Examples": _KERNEL},
    "numerics/rkc.py:rkc_phase": {"Examples": _KERNEL},
    "numerics/rkc.py:spectral_radius": {"Examples": _KERNEL},
    "simulation/assemble.py:build_result": {
        "References": _BOOKKEEPING + " (assembly; accounts/ cites the conversions)"
    },
    "simulation/batch.py:absolute_tolerance": {"References": _BOOKKEEPING + " (tolerance choice)"},
    "simulation/batch.py:phase_durations": {"References": _BOOKKEEPING + " (durations cut or stretched)"},
    "simulation/batch.py:run_batch": {"Examples": "the module docstring runs it (compiles the parallel RKC kernel)"},
    "simulation/batch.py:single_case_scenario": {"References": _BOOKKEEPING + " (a scenario for checks)"},
    "simulation/case_setup.py:phase_times": {"References": _BOOKKEEPING + " (output times)"},
    "simulation/case_setup.py:prepare": {"References": _BOOKKEEPING + " (the set-up; each value cites its own)"},
    "simulation/dial_schedule.py:dial_schedule": {"References": _BOOKKEEPING + " (a table of the series)"},
    "simulation/dial_schedule.py:dial_table": {"References": _BOOKKEEPING + " (a table of the series)"},
    "simulation/dial_schedule.py:dial_text": {"References": _BOOKKEEPING + " (text of the table)"},
    "simulation/engine.py:absolute_tolerance": {"References": _BOOKKEEPING + " (tolerance choice)"},
    "simulation/engine.py:reference_solve": {
        "Examples": "solve_ivp calling the kernel from Python takes about 0.2 s; tests/test_engine_world.py checks it"
    },
    "simulation/kernel_parameters.py:vaporizer_type": {"References": _BOOKKEEPING + " (a default)"},
    "simulation/results.py:judged_samples": {
        "References": "the settling time is the package's choice (estimator.limits)"
    },
    "simulation/spread.py:apply_factors": {"References": _BOOKKEEPING + " (factors applied to the parameters)"},
    "simulation/spread.py:sources": {"References": "file reader; the citations are what it returns"},
    "simulation/totals_table.py:totals_rows": {"References": _BOOKKEEPING + " (a table of the totals)"},
}

_SECTION = re.compile(r"^\s*([A-Z][A-Za-z ]+)\n\s*-{3,}\s*$", re.MULTILINE)
_NEEDED = ("Parameters", "Returns", "References", "Examples")


def _public_functions() -> list[tuple[str, ast.FunctionDef]]:
    out = []
    for folder in FOLDERS:
        for path in sorted((ROOT / folder).rglob("*.py")):
            for node in ast.parse(path.read_text(encoding="utf-8")).body:
                if isinstance(node, ast.FunctionDef) and not node.name.startswith("_"):
                    out.append((f"{path.relative_to(ROOT).as_posix()}:{node.name}", node))
    return out


def _sections(doc: str) -> dict[str, str]:
    """Section title -> body of a numpydoc docstring."""
    marks = list(_SECTION.finditer(doc))
    return {
        m.group(1).strip(): doc[m.end() : (marks[i + 1].start() if i + 1 < len(marks) else len(doc))]
        for i, m in enumerate(marks)
    }


def _missing(node: ast.FunctionDef) -> list[str]:
    doc = ast.get_docstring(node) or ""
    sections = _sections(doc)
    has_arguments = bool(node.args.args or node.args.kwonlyargs or node.args.vararg or node.args.kwarg)
    missing = []
    for name in _NEEDED:
        if name == "Parameters" and not has_arguments:
            continue
        if name == "Returns" and "Yields" in sections:
            continue
        if name == "Examples":  # a doctest, as the numpydoc Examples section or (older style) after the summary
            if ">>>" not in doc:
                missing.append(name)
        elif name not in sections:
            missing.append(name)
    return missing


FUNCTIONS = _public_functions()


@pytest.mark.parametrize(("name", "node"), FUNCTIONS, ids=[n for n, _ in FUNCTIONS])
def test_public_function_has_every_section(name: str, node: ast.FunctionDef) -> None:
    allowed = ALLOWED.get(name, {})
    missing = [s for s in _missing(node) if s not in allowed]
    assert not missing, f"{name}: docstring lacks {', '.join(missing)} (numpydoc; or allow-list it with a reason)"


def test_allow_list_is_current() -> None:
    known = dict(FUNCTIONS)
    for name, sections in ALLOWED.items():
        assert name in known, f"{name} is allow-listed but is no public function of {FOLDERS}"
        assert all(reason.strip() for reason in sections.values()), f"{name}: every entry needs a reason"
        stale = set(sections) - set(_missing(known[name]))
        assert not stale, f"{name} now has {', '.join(sorted(stale))}: remove it from ALLOWED"


_QUANTITY_TYPE = re.compile(r"\b(Quantity|float|ndarray)\b")
_UNIT = re.compile(r"\[[^\]]+\]|dimensionless")


@pytest.mark.parametrize(("name", "node"), FUNCTIONS, ids=[n for n, _ in FUNCTIONS])
def test_quantity_parameters_name_a_unit(name: str, node: ast.FunctionDef) -> None:
    body = _sections(ast.get_docstring(node) or "").get("Parameters", "")
    entries = re.split(r"\n(?=\S)", body.strip("\n")) if body.strip() else []
    for entry in entries:
        head = entry.splitlines()[0]
        if " : " in head and _QUANTITY_TYPE.search(head.split(" : ", 1)[1]):
            assert _UNIT.search(entry), f"{name}: parameter {head.split(' : ')[0].strip()!r} names no unit in brackets"
