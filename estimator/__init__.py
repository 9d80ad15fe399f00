"""Low-flow anaesthesia gas-consumption and cost estimator.

The Python API (the same engine as the app and the ``lowflow`` command line):

>>> import estimator
>>> sc = estimator.load_scenario('''
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

Heavy modules (numba, pandas) load on first use, so ``import estimator`` stays quick.
"""

from __future__ import annotations

from typing import Any

__version__ = "0.1.0"

_LAZY = {
    "simulate": ("estimator.engine", "simulate"),
    "load_scenario": ("estimator.scenario", "load_scenario"),
    "scenario_from_dict": ("estimator.scenario", "scenario_from_dict"),
    "flow_floor": ("estimator.safety", "flow_floor"),
    "simulate_spread": ("estimator.spread", "simulate_spread"),
    "InputError": ("estimator.errors", "InputError"),
}

__all__ = ["__version__", *_LAZY]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        return getattr(importlib.import_module(module), attr)
    raise AttributeError(f"module 'estimator' has no attribute {name!r}")
