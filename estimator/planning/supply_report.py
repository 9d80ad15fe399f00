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
    lead_time_days: float = 0.0
    safety_stock_days: float = 0.0

    def order_now(self, today: date | None = None) -> bool:
        """True when the reorder date is today or already past: order now."""
        return self.reorder_by is not None and self.reorder_by <= (today or date.today())

    def reorder_text(self, today: date | None = None) -> str:
        """The reorder date as a reader needs it: "Order now" once it is today or past, else the date."""
        if self.reorder_by is None:
            return "no reorder needed"
        return "Order now" if self.order_now(today) else self.reorder_by.isoformat()

    def headline(self, today: date | None = None) -> list[str]:
        """The answer first: the bottleneck, its days of supply, the cases possible and the reorder date.

        >>> import pandas as pd
        >>> from estimator.units import Q_
        >>> r = SupplyReport("", date(2026, 4, 6), [], [], "isoflurane", "isoflurane", Q_(12.4, "day"), 44, {},
        ...                  date(2026, 4, 6), pd.DataFrame(), [])
        >>> r.headline(today=date(2026, 12, 3))
        ['Bottleneck: isoflurane (isoflurane) - runs out after 12.4 days', 'Cases possible before then: 44 cases', 'Reorder: Order now (the reorder date 2026-04-06 has passed or is today)']
        """
        from ..display import text

        if self.bottleneck is None or self.days_of_supply is None:
            return ["Bottleneck: none - no supply runs out under this plan"]
        lines = [
            f"Bottleneck: {self.bottleneck} ({self.bottleneck_supply}) - runs out after "
            f"{text(self.days_of_supply.to('day').magnitude, 'days')}"
        ]
        if self.cases_possible is not None:
            lines.append(f"Cases possible before then: {self.cases_possible} cases")
        if self.reorder_by is not None and self.order_now(today):
            lines.append(f"Reorder: Order now (the reorder date {self.reorder_by.isoformat()} has passed or is today)")
        elif self.reorder_by is not None:
            lines.append(f"Reorder by: {self.reorder_by.isoformat()}")
        return lines

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
