"""One case set-up: simulate, reference_solve, the flow floor and the batch start from the same prepare().

Consistency checks of the code's structure, not validation: the patient and phase parameters every
user of the circuit model integrates are the ones :func:`estimator.simulation.case_setup.prepare` builds, the
totals of the single case and the batch come from the one function of :mod:`estimator.accounts.accounting`,
and the result assembly never reaches back up into the engine.
"""

from __future__ import annotations

import ast
import importlib.util
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from estimator.accounts import accounting
from estimator.inputs.scenario import scenario_from_dict
from estimator.physics import circuit as c
from estimator.planning import safety
from estimator.planning.floor_settings import settings_from
from estimator.simulation import assemble, batch, case_setup, engine

LAYER_PACKAGES = ("physics", "numerics", "accounts", "inputs", "simulation", "planning")


def _path(name: str) -> Path:
    """Source file of a package module given by its short name (``engine``, ``circuit``...)."""
    for layer in LAYER_PACKAGES:
        spec = importlib.util.find_spec(f"estimator.{layer}.{name}")
        if spec is not None:
            return Path(spec.origin)
    raise KeyError(name)


#: A case that exercises every set-up branch: altitude, flowmeter readings of concentrator O2 and
#: N2O, a dial phase, a phase of 0 min, an end-tidal hold and a room-air make-up ventilator.
SCENARIO = scenario_from_dict(
    {
        "patient": {"weight": "80 kg", "age": "70 years"},
        "agent": {"name": "isoflurane"},
        "site": {"elevation": "2500 m", "flowmeter_readings": True, "oxygen_source": "concentrator"},
        "circuit": {"deficit_makeup": "room_air"},
        "phases": [
            {"duration": "5 min", "oxygen": "2 L/min", "nitrous_oxide": "2 L/min", "vaporizer": "1.5 %"},
            {"duration": "0 min", "oxygen": "1 L/min", "air": "0.5 L/min", "vaporizer": "1 %"},
            {"duration": "20 min", "oxygen": "0.5 L/min", "nitrous_oxide": "0.3 L/min", "end_tidal_target": "1 MAC"},
        ],
    }
)


def _spy(monkeypatch, module) -> list[case_setup.CaseSetup]:
    """Record every set-up ``module`` builds through its ``prepare``."""
    seen: list[case_setup.CaseSetup] = []
    real = case_setup.prepare

    def spy(*args, **kwargs):
        out = real(*args, **kwargs)
        seen.append(out)
        return out

    monkeypatch.setattr(module, "prepare", spy)
    return seen


def _same(a: case_setup.CaseSetup, b: case_setup.CaseSetup) -> None:
    np.testing.assert_array_equal(a.base, b.base)
    np.testing.assert_array_equal(a.initial, b.initial)
    assert [(p.index, p.start, p.duration, p.true_flows) for p in a.phases] == [
        (p.index, p.start, p.duration, p.true_flows) for p in b.phases
    ]
    for p, q in zip(a.phases, b.phases, strict=True):
        np.testing.assert_array_equal(p.parameters, q.parameters)


def test_prepare_skips_empty_phases_unless_asked():
    case = case_setup.prepare(SCENARIO)
    assert [p.index for p in case.phases] == [0, 2]
    assert [p.start for p in case.phases] == [0.0, 5.0]
    every = case_setup.prepare(SCENARIO, every_phase=True)
    assert [p.index for p in every.phases] == [0, 1, 2]
    # flowmeter readings become true flows at the site once, in the set-up
    assert case.phases[0].true_flows != (2.0, 0.0, 2.0)


def test_simulate_and_reference_solve_integrate_the_one_setup(monkeypatch):
    ref = case_setup.prepare(SCENARIO)
    seen = _spy(monkeypatch, engine)
    result = engine.simulate(SCENARIO)
    engine.reference_solve(SCENARIO, method="RK45", rtol=1e-5, atol=1e-8)
    assert len(seen) == 2
    for case in seen:
        _same(case, ref)
    assert list(result.series["phase"].unique()) == [p.index for p in ref.phases]


def test_planner_trials_use_the_one_setup(monkeypatch):
    ref = case_setup.prepare(SCENARIO)
    seen = _spy(monkeypatch, safety)
    planner = safety.Planner(SCENARIO, settings_from(SCENARIO))
    assert seen == [planner.case]
    _same(planner.case, ref)
    np.testing.assert_array_equal(planner.y0, ref.initial)
    for ph in ref.phases:  # a trial at the planned flows is the planned phase
        np.testing.assert_array_equal(planner.case.parameters(ph.phase), ph.parameters)


def test_batch_template_is_fitted_to_the_one_setup(monkeypatch):
    seen = _spy(monkeypatch, batch)
    template = batch.case_template(SCENARIO)
    assert seen and all(len(case.phases) == len(SCENARIO.phases) for case in seen)
    for weight, age in ((80.0, 70.0), (23.0, 8.0)):
        sc = batch._scenario_at(SCENARIO, weight, age)
        ref = case_setup.prepare(sc, every_phase=True)
        got = batch.parameters(template, np.array([weight]), np.array([age]))[0]
        np.testing.assert_allclose(got, [p.parameters for p in ref.phases], rtol=1e-10, atol=1e-14)
        np.testing.assert_array_equal(template.true_flows, [p.true_flows for p in ref.phases])
    np.testing.assert_array_equal(template.initial, case_setup.prepare(SCENARIO).initial)


def test_single_case_and_batch_form_totals_with_one_function(monkeypatch):
    calls = []
    real = accounting.totals_from_deltas

    def spy(run, *args):
        calls.append(np.ndim(run["agent_delivered"]))
        return real(run, *args)

    monkeypatch.setattr(assemble, "totals_from_deltas", spy)
    monkeypatch.setattr(batch, "totals_from_deltas", spy)
    engine.simulate(SCENARIO)
    batch.run_batch(batch.case_template(SCENARIO), [80.0, 60.0], [70.0, 30.0], [25.0, 40.0])
    assert calls == [0, 1]  # one case (scalars), then a chunk of cases (arrays)


def test_totals_from_deltas_is_the_same_for_one_case_and_many():
    rng = np.random.default_rng(7)
    d = rng.uniform(0.0, 50.0, size=(3, c.NY))
    gas = rng.uniform(0.0, 100.0, size=(3, 3))
    many = accounting.totals_from_deltas(c.running_totals(d), gas, 42.0, "sevoflurane", 10.0)
    for i in range(3):
        one = accounting.totals_from_deltas(c.running_totals(d[i]), gas[i], 42.0, "sevoflurane", 10.0)
        assert one.keys() == many.keys() == accounting.DELTA_TOTAL_UNITS.keys()
        for key, value in one.items():
            assert np.ndim(value) == 0
            assert value == pytest.approx(many[key][i], rel=1e-15)


def _imports(path: Path) -> set[str]:
    """Short names of the package modules a source file imports anywhere (functions and TYPE_CHECKING
    included); every name imported from the package counts, so a module imported by name is seen."""
    out = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and (node.level or (node.module or "").startswith("estimator")):
            last = (node.module or "").split(".")[-1]
            if last and last not in LAYER_PACKAGES and last != "estimator":
                out.add(last)
            out |= {a.name for a in node.names}
        elif isinstance(node, ast.Import):
            out |= {a.name.split(".")[-1] for a in node.names if a.name.startswith("estimator.")}
    return out


def test_assemble_never_imports_the_engine():
    assert "engine" not in _imports(_path("assemble"))
    code = "import sys, estimator.simulation.assemble; print('estimator.simulation.engine' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_setup_modules_sit_below_the_engine():
    # The set-up, the kernel and the integrator import nothing that runs or reports a case.
    for name in ("case_setup", "case_site", "kernel_parameters", "dopri5", "circuit", "accounting"):
        assert not _imports(_path(name)) & {"engine", "assemble", "batch", "safety"}, name
    # The physics module loads on its own (the benchmarks' plain-Python speed reference).
    assert _imports(_path("circuit")) == set()


def test_the_set_up_is_written_once():
    # Only the set-up modules build parameter vectors and initial states; the engine, the result
    # assembly and the flow floor take them from prepare() (the batch builds a per-case initial state
    # from its own parameter model where the state depends on weight).
    builders = {"base_parameters", "phase_parameters", "initial_state", "patient_from_scenario"}
    for name in ("engine", "assemble", "safety", "floor_settings", "batch"):
        tree = ast.parse((_path(name)).read_text())
        called = {
            n.func.id if isinstance(n.func, ast.Name) else getattr(n.func, "attr", "")
            for n in ast.walk(tree)
            if isinstance(n, ast.Call)
        }
        allowed = {"initial_state"} if name == "batch" else set()
        assert not (called & builders) - allowed, name
