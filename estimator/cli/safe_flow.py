"""``lowflow safe-flow FILE``: the flow floor of a planned case and the limit that binds."""

from __future__ import annotations

from pathlib import Path

import typer

from . import CAUTION, app
from .outputs import calibration_json, calibration_lines, json_text


@app.command("safe-flow")
def safe_flow(
    file: Path = typer.Argument(..., help="Scenario TOML file; its [flow_floor] table holds the settings."),
    json_out: bool = typer.Option(False, "--json", help="Print the JSON contract instead of a summary."),
    threshold: str | None = typer.Option(
        None, "--threshold", help="Inspired O2 threshold, '30 %' or 0.30 (21 to 100 %; default 30 %)."
    ),
    no_grid: bool = typer.Option(False, "--no-grid", help="Skip the floor on the time grid."),
    calibration: Path | None = typer.Option(
        None,
        "--calibration",
        help="A department's calibration TOML (lowflow audit --calibration-out): its uptake factor.",
    ),
) -> None:
    """Lowest safe fresh-gas flow per phase and over time, what limits it, and a settable schedule."""
    from ..inputs.calibration_file import attach_option
    from ..inputs.scenario import load_scenario
    from ..planning.safety import flow_floor
    from ..units import check_range, parse_quantity

    level = None
    if threshold is not None:  # the bare-number rule of every fraction: 0.3 is 30 %, 30 is refused
        q = parse_quantity(threshold, "--threshold", "fraction")
        level = float(check_range(q.to(""), "--threshold", 0.21, 1.0, value=threshold).magnitude)
    scenario = attach_option(load_scenario(file), calibration)
    result = flow_floor(scenario, threshold=level, grid=not no_grid)
    if json_out:
        out = {**result.to_json(), **calibration_json(scenario, result.scenario.uptake_factor)}
        typer.echo(json_text(out, "safe-flow", {"FILE": file, "--calibration": calibration}))
        return
    lines = [f"Flow floor (inspired O2 threshold {100 * result.settings.threshold:.0f} %):"]
    for ph in result.phases:
        span = f"{ph['start'].to('min').magnitude:g}-{ph['end'].to('min').magnitude:g} min"
        if ph["floor"] is None:
            lines.append(f"  {ph['label']:<12} {span:<14} no safe setting: {ph['binding_text']}")
            continue
        lines.append(
            f"  {ph['label']:<12} {span:<14} floor {ph['floor'].to('L/min').magnitude:5.2f} L/min "
            f"(plan {ph['planned_total'].to('L/min').magnitude:.2f}); {ph['flow_class']}; "
            f"limited by {ph['binding']}: {ph['binding_text']}"
        )
        if ph["lowest_oxygen_flow"] is not None:
            lines.append(
                f"  {'':<12} {'':<14} lowest O2 flow at that total: "
                f"{ph['lowest_oxygen_flow'].to('L/min').magnitude:.2f} L/min"
            )
    lines.append(f"Recommended: {result.schedule_text}")
    lines += calibration_lines(scenario, result.scenario.uptake_factor)
    cmp_ = result.comparison
    for key, unit, name in (
        ("agent_liquid", "mL", "liquid agent"),
        ("oxygen", "L", "oxygen"),
        ("air", "L", "air"),
        ("nitrous_oxide", "L", "nitrous oxide"),
        ("co2e", "kg", "CO2e (AR6 GWP100)"),
    ):
        lines.append(
            f"  {name:<20} plan {cmp_['plan'][key].to(unit).magnitude:9.2f}  recommended "
            f"{cmp_['recommended'][key].to(unit).magnitude:9.2f} {unit}"
        )
    if result.grid:
        pts = ", ".join(
            f"{g['time'].to('min').magnitude:g} min: "
            + (f"{g['floor'].to('L/min').magnitude:g}" if g["floor"] is not None else "none")
            for g in result.grid[:: max(1, len(result.grid) // 8)]
        )
        lines.append(f"Floor over time (L/min): {pts}")
    if result.warnings:
        lines.append("Advisories:")
        lines += [f"  [{code}] {msg}" for code, msg in result.warnings]
    lines.append(CAUTION)
    typer.echo("\n".join(lines))
