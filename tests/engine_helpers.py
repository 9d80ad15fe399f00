"""Small builders shared by the engine tests."""

from __future__ import annotations

from typing import Any

from estimator.inputs.scenario import scenario_from_dict
from estimator.simulation.engine import simulate


def scenario(agent: str = "sevoflurane", phases: list[dict[str, Any]] | None = None, **tables: Any):
    """A validated scenario from plain dicts (70 kg, 40 years unless ``patient`` is given)."""
    data: dict[str, Any] = {
        "patient": {"weight": "70 kg", "age": "40 years"},
        "agent": {"name": agent},
        "phases": phases or [{"duration": "60 min", "oxygen": "1 L/min", "air": "1 L/min", "vaporizer": "2 %"}],
    }
    data.update(tables)
    return scenario_from_dict(data)


def run(agent: str = "sevoflurane", phases=None, **tables):
    """Simulate :func:`scenario` and return the result."""
    return simulate(scenario(agent, phases, **tables))


def at_times(result, column: str, times) -> list[float]:
    """Values of a series column at the given times (first row at a repeated phase boundary)."""
    s = result.series.drop_duplicates("time [min]", keep="last").set_index("time [min]")[column]
    return [float(s.loc[t]) for t in times]
