"""The answer of a supply-duration plan: each inventory item's run-out, and the JSON document.

:class:`SupplyReport` is what :func:`estimator.planning.supply.plan_supply` returns; :meth:`SupplyReport.to_json`
is the ``lowflow supply --json`` document.

Examples
--------
>>> item = SupplyItem("O2 A", "cylinder", "oxygen", None, None, "not used")
>>> item.status, item.details
('not used', {})
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import date
from typing import Any

import pandas as pd
import pint

from ..units import GAS_VOLUME_REFERENCE


@dataclass(frozen=True)
class SupplyItem:
    """One inventory entry and how long it lasts.

    ``usable`` is free gas [L] for cylinders, liquid [mL] for bottles, [kg] of absorbent, product
    [L/day] for a concentrator and None for a pipeline. ``runtime`` [day] is the time from the start
    until the item is used up (None if it never is); ``status`` says which: ``"runs out"``,
    ``"not used"``, ``"empty"``, ``"renewable"``, ``"unlimited"``.
    """

    name: str
    kind: str
    supply: str
    usable: pint.Quantity | None
    runtime: pint.Quantity | None
    status: str
    draw_per_day: pint.Quantity | None = None
    details: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class SupplyReport:
    """Answer of :func:`~estimator.planning.supply.plan_supply`; ``depletion`` has one row a day (start of the day), one column
    per stock item (remaining usable amount, units in the column name)."""

    title: str
    start: date
    items: list[SupplyItem]
    supplies: list[dict[str, Any]]
    bottleneck: str | None
    bottleneck_supply: str | None
    days_of_supply: pint.Quantity | None
    cases_possible: int | None
    cases_possible_by_plan: dict[str, int | None]
    reorder_by: date | None
    depletion: pd.DataFrame
    warnings: list[tuple[str, str]]
    gas_volume_reference: str = GAS_VOLUME_REFERENCE

    def to_json(self) -> dict[str, Any]:
        """JSON shape of ``lowflow supply --json`` (``depletion`` as columns)."""
        from ..jsonout import jsonable

        cols = [c for c in self.depletion.columns if c != "date"]
        units = {re.sub(r" \[.*\]$", "", c): m.group(1) if (m := re.search(r"\[(.*)\]$", c)) else "" for c in cols}
        depletion = {
            "day": self.depletion.index.tolist(),
            "date": [d.isoformat() for d in self.depletion["date"]],
            "units": units,
            "remaining": {re.sub(r" \[.*\]$", "", c): self.depletion[c].tolist() for c in cols},
        }
        return jsonable(
            {
                "title": self.title,
                "start": self.start,
                "items": [
                    {
                        "name": i.name,
                        "kind": i.kind,
                        "supply": i.supply,
                        "usable": i.usable,
                        "runtime": i.runtime,
                        "status": i.status,
                        "draw_per_day": i.draw_per_day,
                        "details": i.details,
                    }
                    for i in self.items
                ],
                "supplies": self.supplies,
                "bottleneck": self.bottleneck,
                "bottleneck_supply": self.bottleneck_supply,
                "days_of_supply": self.days_of_supply,
                "cases_possible": self.cases_possible,
                "cases_possible_by_plan": self.cases_possible_by_plan,
                "reorder_by": self.reorder_by,
                "depletion": depletion,
                "warnings": [{"code": c, "message": m} for c, m in self.warnings],
                "gas_volume_reference": self.gas_volume_reference,
            }
        )


__all__ = ["SupplyItem", "SupplyReport"]
