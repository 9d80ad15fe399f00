"""Plans side by side: the totals of two or more cases and their differences from the first.

Answers "what does 0.5 L/min save over 1 L/min", "sevoflurane or desflurane": liquid agent, gases,
absorbent, CO2e, MAC-hours and cost of each plan, the change from the first plan (the baseline) and
the change in per cent. Every plan runs through the same engine and the same accounting as
``lowflow case``.

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
        change = {n: values[n] - values[base] for n in names[1:]}
        pct = {n: (100.0 * change[n] / values[base] if values[base] else None) for n in names[1:]}
        return {"key": key, "label": label, "unit": unit, "values": values, "change": change, "change_percent": pct}

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


def compare_text(c: dict[str, Any]) -> list[str]:
    """The comparison as text: plans lettered A, B, ... (A the baseline), a column each, then each
    plan's change from A with the change in per cent."""
    names = c["plans"]
    letters = [chr(ord("A") + i) for i in range(len(names))]
    lines = [f"  {k} = {n}" for k, n in zip(letters, names, strict=True)]
    head = f"  {'':<30}" + "".join(f"{k:>11}" for k in letters)
    head += "".join(f"{k + ' - A':>22}" for k in letters[1:])
    lines.append(head)
    for r in [*c["rows"], *([c["cost"]] if c["cost"] else [])]:
        text = f"  {r['label'] + ' [' + r['unit'] + ']':<30}" + "".join(f"{r['values'][n]:>11.2f}" for n in names)
        for n in names[1:]:
            pct = r["change_percent"][n]
            text += f"{r['change'][n]:>+11.2f}" + (f" ({pct:+.0f} %)" if pct is not None else "").ljust(11)
        lines.append(text.rstrip())
    return lines
