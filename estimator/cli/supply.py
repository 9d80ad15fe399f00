"""``lowflow supply FILE``: supply duration of an inventory, its bottleneck and the reorder date."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from . import CAUTION, app
from .outputs import json_text, option_names

if TYPE_CHECKING:
    from ..planning.supply import SupplyReport


def _amount(q) -> str:  # noqa: ANN001 - pint quantity or None
    from ..display import text

    if q is None:
        return "-"
    unit = f"{q.units:~P}".replace("ml", "mL").replace("l", "L").replace("/d", "/day")
    return text(q.magnitude, unit)


def _runtime(item) -> str:  # noqa: ANN001
    from ..display import text

    if item.runtime is None:
        return item.status
    return text(item.runtime.to("day").magnitude, "days") + (" (empty)" if item.status == "empty" else "")


def render(report: SupplyReport) -> str:
    """Readable text of a :class:`~estimator.planning.supply.SupplyReport`, ending with the caution."""
    lines = [f"Supply duration{': ' + report.title if report.title else ''} (from {report.start.isoformat()})", ""]
    lines += [*report.headline(), ""]  # the answer first: bottleneck, days, cases, reorder
    header = f"{'item':<28} {'kind':<12} {'usable':>16} {'draw a day':>16} {'lasts':>12}"
    lines += [header, "-" * len(header)]
    for i in report.items:
        lines.append(
            f"{i.name[:28]:<28} {i.kind:<12} {_amount(i.usable):>16} {_amount(i.draw_per_day):>16} {_runtime(i):>12}"
        )
    lines.append("")
    lines.append(f"Gas volumes: {report.gas_volume_reference}.")
    if report.warnings:
        lines += ["", "Warnings:"] + [f"  [{c}] {m}" for c, m in report.warnings]
    lines += ["", CAUTION]
    return "\n".join(lines)


@app.command("supply")
def supply(
    file: Annotated[Path, typer.Argument(help="Inventory file (TOML): stocks, sources and demand.")],
    json_out: Annotated[bool, typer.Option("--json", help="Print JSON instead of text.")] = False,
    start: Annotated[
        str | None, typer.Option("--start", help="First day (YYYY-MM-DD); default plan.start or today.")
    ] = None,
) -> None:
    """How long the stocks last, which runs out first (the bottleneck) and when to reorder."""
    from ..planning.supply import load_inventory, plan_supply

    inventory = load_inventory(file)
    with option_names({"plan.start": "--start" if start is not None else None}):
        report = plan_supply(inventory, start=start)
    typer.echo(json_text(report, "supply", {"FILE": file}) if json_out else render(report))
