"""Low-flow anaesthesia gas-consumption and cost estimator.

The Python API (the same engine as the app and the ``lowflow`` command line):

>>> import estimator
>>> sc = estimator.scenario_from_text('''
... [patient]
... weight = "70 kg"
... [agent]
... name = "isoflurane"
... [[phases]]
... duration = "20 min"
... oxygen = "1 L/min"
... vaporizer = "1.5 %"
... ''')
>>> r = estimator.simulate(sc)
>>> sorted(k for k in r.totals if k.startswith("agent_l"))
['agent_leaked', 'agent_liquid']

``load_scenario(path)`` reads a file (its argument is always a path); ``scenario_from_text(text)``
parses TOML text; :func:`simulate` takes a validated scenario (or a dict), never a path.

>>> estimator.simulate("case.toml")
Traceback (most recent call last):
...
estimator.errors.InputError: scenario: got 'case.toml'; expected a Scenario or a dict; to run a file, call simulate(load_scenario(path))

Heavy modules (numba, pandas) load on first use, so ``import estimator`` stays quick.
"""

from __future__ import annotations

import os
from typing import Any

__version__ = "0.1.0"

_LAZY = {
    "load_scenario": ("estimator.inputs.scenario", "load_scenario"),
    "scenario_from_text": ("estimator.inputs.scenario", "scenario_from_text"),
    "scenario_from_dict": ("estimator.inputs.scenario", "scenario_from_dict"),
    "flow_floor": ("estimator.planning.safety", "flow_floor"),
    "simulate_spread": ("estimator.simulation.spread", "simulate_spread"),
    "load_calibration": ("estimator.inputs.calibration_file", "load_calibration"),
    "with_calibration": ("estimator.inputs.calibration_file", "with_calibration"),
    "InputError": ("estimator.errors", "InputError"),
}

__all__ = ["__version__", "simulate", *_LAZY]


def simulate(scenario: Any, **options: Any) -> Any:
    """Run one case through the engine (:func:`estimator.simulation.engine.simulate`).

    Parameters
    ----------
    scenario : Scenario or dict
        A validated scenario, or a parsed scenario document (validated here). A path or text is
        refused: read a file with :func:`~estimator.inputs.scenario.load_scenario`, parse text with :func:`~estimator.inputs.scenario.scenario_from_text`.
    **options
        Passed on (``rtol``, ``patient``).

    Returns
    -------
    CaseResult
    """
    from .errors import InputError
    from .inputs.scenario import Scenario, scenario_from_dict
    from .simulation.engine import simulate as run

    if isinstance(scenario, dict):
        scenario = scenario_from_dict(scenario)
    if not isinstance(scenario, Scenario):
        shown = os.fspath(scenario) if isinstance(scenario, str | os.PathLike) else type(scenario).__name__
        raise InputError(
            "scenario",
            shown,
            "a Scenario or a dict; to run a file, call simulate(load_scenario(path))",
        )
    return run(scenario, **options)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        return getattr(importlib.import_module(module), attr)
    raise AttributeError(f"module 'estimator' has no attribute {name!r}")
