"""Plans side by side: the totals of two or more cases and their differences from the first.

Answers "what does 0.5 L/min save over 1 L/min", "sevoflurane or desflurane": liquid agent, gases,
absorbent, CO2e, MAC-hours and cost of each plan, the change from the first plan (the baseline) and
the change in per cent. Every plan runs through the same engine and the same accounting as
``lowflow case``. Stocks compare the same way (:func:`compare_stocks`, "this month's stock or
next"): days of supply, cases possible, the bottleneck, the reorder date and how long each item lasts,
from the same supply plan as ``lowflow supply``.

Examples
--------
>>> import estimator
>>> base = {"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
...         "phases": [{"duration": "30 min", "oxygen": "1 L/min", "air": "1 L/min", "vaporizer": "2 %"}]}
>>> low = {**base, "phases": [{"duration": "30 min", "oxygen": "0.5 L/min", "vaporizer": "2 %"}]}
>>> c = compare_results({"2 L/min": estimator.simulate(base), "0.5 L/min": estimator.simulate(low)})
>>> c["baseline"], c["rows"][0]["key"], c["rows"][0]["change"]["0.5 L/min"] < 0
('2 L/min', 'agent_liquid', True)
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from ..display import unit_label
from ..errors import InputError

#: Totals compared, with the unit shown (keys of ``CaseResult.totals``).
COMPARED = (
    ("agent_liquid", "liquid agent", "mL"),
    ("oxygen", "oxygen", "L"),
    ("air", "air", "L"),
    ("nitrous_oxide", "nitrous oxide", "L"),
    ("absorbent", "absorbent", "g"),
    ("co2e", "CO2e (IPCC AR6 GWP100)", "kg"),
    ("mac_hours", "MAC-hours", "MAC_hour"),
    ("duration", "duration", "min"),
)


def compare_results(results: dict[str, Any]) -> dict[str, Any]:
    """Totals of each plan, their change from the first plan and the change in per cent.

    Parameters
    ----------
    results : dict
        Plan name -> :class:`~estimator.simulation.results.CaseResult`; the first is the baseline.

    Returns
    -------
    dict
        ``baseline`` (name), ``plans`` (names), ``rows``: one per total with ``key``, ``label``,
        ``unit``, ``values`` (plan -> value), ``change`` and ``change_percent`` (plan -> value, the
        baseline left out; per cent None where the baseline is 0); ``cost`` likewise when every plan
        is priced in one currency, else None; ``agents`` (plan -> agent).
    """
    if len(results) < 2:
        raise InputError("plans", len(results), "two or more plans to compare")
    names = list(results)
    base = names[0]

    def row(key: str, label: str, unit: str, values: dict[str, float]) -> dict[str, Any]:
        return _row(key, label, unit, values, names)

    rows = [
        row(
            key,
            label,
            unit_label(unit),
            {n: float(results[n].totals[key].to(unit).magnitude) for n in names},
        )
        for key, label, unit in COMPARED
    ]
    costs = [results[n].cost for n in names]
    cost = None
    if all(costs) and len({c["currency"] for c in costs}) == 1:
        cost = row("cost", "cost", costs[0]["currency"], {n: float(results[n].cost["total"]) for n in names})
    return {
        "baseline": base,
        "plans": names,
        "agents": {n: results[n].scenario.agent.name for n in names},
        "rows": rows,
        "cost": cost,
    }


def _row(key: str, label: str, unit: str, values: Mapping[str, float | None], names: list[str]) -> dict[str, Any]:
    """One compared quantity: its values, the change from the first name and the change in per cent
    (None where a value is missing, or for per cent where the baseline is 0)."""
    base = values[names[0]]

    def change(n: str) -> float | None:
        v = values[n]
        return None if v is None or base is None else v - base

    pct = {n: (100.0 * d / base if (d := change(n)) is not None and base else None) for n in names[1:]}
    return {
        "key": key,
        "label": label,
        "unit": unit,
        "values": values,
        "change": {n: change(n) for n in names[1:]},
        "change_percent": pct,
    }


def compare_stocks(reports: dict[str, Any]) -> dict[str, Any]:
    r"""Stocks side by side: days of supply, cases possible and how long each item lasts, with the
    change from the first stock; the bottleneck and the reorder date of each.

    Parameters
    ----------
    reports : dict
        Stock name -> :class:`~estimator.planning.supply_report.SupplyReport`; the first is the baseline.

    Returns
    -------
    dict
        ``baseline``, ``plans`` (the stock names), ``rows`` as in :func:`compare_results` (a value is
        None where the stock never runs out or has no such item), ``bottleneck`` and ``reorder``
        (name -> text), ``cost`` None.

    Examples
    --------
    >>> from estimator.planning.supply import inventory_from_text, plan_supply
    >>> o2 = '[[cylinders]]\nname = "O2"\ngas = "oxygen"\nwater_capacity = "10 L"\npressure = "{} bar"\n'
    >>> use = '[[demand.continuous]]\ngas = "oxygen"\nflow = "1 L/min"\n'
    >>> r = {b: plan_supply(inventory_from_text(o2.format(b) + use), start="2026-03-02") for b in (100, 200)}
    >>> c = compare_stocks({"half full": r[100], "full": r[200]})
    >>> c["rows"][0]["key"], c["rows"][0]["change"]["full"] > 0
    ('days_of_supply', True)
    """
    if len(reports) < 2:
        raise InputError("stocks", len(reports), "two or more stocks to compare")
    names = list(reports)

    def days(q: Any) -> float | None:
        return None if q is None else float(q.to("day").magnitude)

    rows = [
        _row("days_of_supply", "days of supply", "day", {n: days(reports[n].days_of_supply) for n in names}, names),
        _row("cases_possible", "cases possible", "cases", {n: reports[n].cases_possible for n in names}, names),
    ]
    items = list(dict.fromkeys(i.name for n in names for i in reports[n].items))
    for item in items:
        lasts = {n: next((days(i.runtime) for i in reports[n].items if i.name == item), None) for n in names}
        rows.append(_row(f"item:{item}", f"{item} lasts", "day", lasts, names))
    return {
        "baseline": names[0],
        "plans": names,
        "rows": rows,
        "cost": None,
        "bottleneck": {n: reports[n].bottleneck for n in names},
        "reorder": {n: reports[n].reorder_text() for n in names},
    }


def compare_text(c: dict[str, Any]) -> list[str]:
    """The comparison as text: plans lettered A, B, ... (A the baseline), a column each, then each
    plan's change from A with the change in per cent."""
    names = c["plans"]
    letters = [chr(ord("A") + i) for i in range(len(names))]
    lines = [f"  {k} = {n}" for k, n in zip(letters, names, strict=True)]
    rows = [*c["rows"], *([c["cost"]] if c["cost"] else [])]
    labels = [f"{r['label']} [{r['unit']}]" for r in rows]
    width = max([30, *(len(t) + 2 for t in labels)])
    head = f"  {'':<{width}}" + "".join(f"{k:>11}" for k in letters)
    head += "".join(f"{k + ' - A':>22}" for k in letters[1:])
    lines.append(head)
    for r, label in zip(rows, labels, strict=True):
        text = f"  {label:<{width}}" + "".join(_cell(r["values"][n], "") for n in names)
        for n in names[1:]:
            pct = r["change_percent"][n]
            text += _cell(r["change"][n], "+") + (f" ({pct:+.0f} %)" if pct is not None else "").ljust(11)
        lines.append(text.rstrip())
    return lines


def _cell(v: float | None, sign: str) -> str:
    """A number of the text table, 11 wide; "-" where there is none (a stock that never runs out)."""
    return f"{'-':>11}" if v is None else f"{v:>{sign}11.2f}"
