"""``lowflow compare A.toml B.toml ...``: plans, or stocks with ``--stock``, side by side.

Each with its differences from the first (the baseline)."""

from __future__ import annotations

from pathlib import Path

import typer

from . import CAUTION, app
from .outputs import json_text


@app.command("compare")
def compare(
    files: list[Path] = typer.Argument(
        ..., help="Two or more scenario files (TOML), or inventories with --stock; the first is the baseline."
    ),
    stock: bool = typer.Option(
        False, "--stock", help="The files are inventories: compare days of supply, cases possible, reorder dates."
    ),
    start: str | None = typer.Option(
        None, "--start", help="With --stock: first day of every supply plan (YYYY-MM-DD); default each file's."
    ),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of text."),
) -> None:
    """Two or more plans side by side (agent, gases, absorbent, CO2e, MAC-hours, cost), or stocks (--stock)."""
    from ..errors import InputError
    from ..planning.compare import compare_text

    names = [f.name for f in files]
    if len(set(names)) != len(names):
        raise InputError("FILES", ", ".join(names), "files with different names (each names its plan)")
    if start is not None and not stock:
        raise InputError("--start", start, "--start with --stock (the first day of the supply plans)")
    c, warnings = _stocks(files, start) if stock else _plans(files)
    if json_out:
        typer.echo(json_text(c, "compare", {f"FILE{i}": f for i, f in enumerate(files)}))
        return
    if stock:
        first = [f"Stocks compared with {c['baseline']} (the baseline)."]
        first += [f"  {n}: bottleneck {c['bottleneck'][n] or 'none'}; reorder: {c['reorder'][n]}" for n in c["plans"]]
    else:
        agents = ", ".join(f"{n}: {a}" for n, a in c["agents"].items())
        first = [f"Plans compared with {c['baseline']} (the baseline); agents {agents}."]
    lines = [*first, *compare_text(c)]
    lines += [f"  [{n}] [{code}] {msg}" for n, code, msg in warnings]
    lines += ["Gas litres: free gas at 15 degC and 101.325 kPa.", CAUTION]
    typer.echo("\n".join(lines))


def _plans(files: list[Path]) -> tuple[dict, list[tuple[str, str, str]]]:
    from ..inputs.scenario import load_scenario
    from ..planning.compare import compare_results
    from ..simulation.engine import simulate

    results = {f.name: simulate(load_scenario(f)) for f in files}
    return compare_results(results), [(n, code, msg) for n, r in results.items() for code, msg in r.warnings]


def _stocks(files: list[Path], start: str | None) -> tuple[dict, list[tuple[str, str, str]]]:
    from ..planning.compare import compare_stocks
    from ..planning.supply import load_inventory, plan_supply
    from .outputs import option_names

    with option_names({"plan.start": "--start" if start is not None else None}):
        reports = {f.name: plan_supply(load_inventory(f), start=start) for f in files}
    return compare_stocks(reports), [(n, code, msg) for n, r in reports.items() for code, msg in r.warnings]
