"""``lowflow compare A.toml B.toml ...``: plans side by side, with their differences from the first."""

from __future__ import annotations

from pathlib import Path

import typer

from . import CAUTION, app
from .outputs import json_text


@app.command("compare")
def compare(
    files: list[Path] = typer.Argument(..., help="Two or more scenario files (TOML); the first is the baseline."),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of text."),
) -> None:
    """Two or more plans side by side: agent, gases, absorbent, CO2e, MAC-hours, cost and the differences."""
    from ..errors import InputError
    from ..inputs.scenario import load_scenario
    from ..planning.compare import compare_results, compare_text
    from ..simulation.engine import simulate

    names = [f.name for f in files]
    if len(set(names)) != len(names):
        raise InputError("FILES", ", ".join(names), "files with different names (each names its plan)")
    results = {f.name: simulate(load_scenario(f)) for f in files}
    c = compare_results(results)
    if json_out:
        typer.echo(json_text(c, "compare", {f"FILE{i}": f for i, f in enumerate(files)}))
        return
    agents = ", ".join(f"{n}: {a}" for n, a in c["agents"].items())
    lines = [f"Plans compared with {c['baseline']} (the baseline); agents {agents}.", *compare_text(c)]
    for n, r in results.items():
        lines += [f"  [{n}] [{code}] {msg}" for code, msg in r.warnings]
    lines += ["Gas litres: free gas at 15 degC and 101.325 kPa.", CAUTION]
    typer.echo("\n".join(lines))
