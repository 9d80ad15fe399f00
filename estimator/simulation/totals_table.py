"""The one table of a case's totals, read by ``lowflow case`` and by the app's case planner.

Both faces print the same rows, in the same order, labels and units, from
``CaseResult.totals`` (:class:`~estimator.simulation.results.CaseResult`); neither keeps its own list.
"""

from __future__ import annotations

from typing import Any, NamedTuple

from ..display import unit_label

#: key of ``CaseResult.totals``, label, unit shown (pint unit text).
TOTAL_ROWS: tuple[tuple[str, str, str], ...] = (
    ("agent_liquid", "liquid agent", "mL"),
    ("agent_vapour", "agent vapour delivered", "L"),
    ("agent_uptake", "agent taken up by the patient", "L"),
    ("agent_vented", "agent vented", "L"),
    ("oxygen", "oxygen", "L"),
    ("air", "air", "L"),
    ("nitrous_oxide", "nitrous oxide", "L"),
    ("co2_absorbed", "CO2 absorbed", "L"),
    ("absorbent", "absorbent used", "g"),
    ("mac_hours", "MAC-hours", "MAC_hour"),
    ("co2e", "CO2e (IPCC AR6 GWP100)", "kg"),
    ("duration", "duration", "min"),
)


class TotalRow(NamedTuple):
    """One row of the totals table: total key ('' for a derived row), label, value [unit], unit text."""

    key: str
    label: str
    value: float
    unit: str


def totals_rows(result: Any, flow_unit: str = "L/min") -> list[TotalRow]:
    """The totals of a case as rows, then the mean fresh-gas flow and the lowest inspired O2.

    Parameters
    ----------
    result : CaseResult
        A simulated case.
    flow_unit : str
        Unit of the mean fresh-gas flow row [pint unit text], default L/min.

    Returns
    -------
    list of TotalRow
        Values in the unit of each row; MAC-hours shown as "MAC-h", inspired O2 in %.

    Examples
    --------
    >>> import estimator
    >>> sc = estimator.scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "2 L/min", "vaporizer": "2 %"}]})
    >>> rows = totals_rows(estimator.simulate(sc))
    >>> rows[0].label, rows[0].unit, rows[-1].label
    ('liquid agent', 'mL', 'lowest inspired O2')
    """
    t = result.totals
    rows = [
        TotalRow(key, label, float(t[key].to(unit).magnitude), unit_label(unit))
        for key, label, unit in TOTAL_ROWS
        if key in t
    ]
    rows.append(
        TotalRow(
            "mean_fresh_gas_flow",
            "mean fresh-gas flow",
            float(t["mean_fresh_gas_flow"].to(flow_unit).magnitude),
            flow_unit,
        )
    )
    rows.append(TotalRow("", "lowest inspired O2", 100 * float(result.minimum_inspired_oxygen.magnitude), "%"))
    return rows
