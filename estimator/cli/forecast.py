"""``lowflow forecast FILE``: the demand forecast, weekly demand of a case mix by Monte Carlo."""

from __future__ import annotations

from pathlib import Path

import typer

from ..errors import InputError
from ..planning.forecast_size import CASE_CEILING, MAX_CASES, check_size
from . import CAUTION, app
from .outputs import json_text, option_names, terminal_progress

#: Forecasts estimated to run at least this long [s] say so (on stderr) before they start.
ANNOUNCE_AFTER = 5.0

_LABELS = {
    "cases": "cases",
    "oxygen": "oxygen",
    "air": "air",
    "nitrous_oxide": "nitrous oxide",
    "absorbent": "CO2 absorbent",
    "co2e": "CO2e",
    "mac_hours": "MAC-hours",
}


@app.command("forecast")
def forecast(
    file: Path = typer.Argument(..., help="Case-mix file, TOML or CSV (see the README)."),
    weeks: int | None = typer.Option(None, "--weeks", help="Weeks to simulate (default: the file's, else 52)."),
    seed: int | None = typer.Option(None, "--seed", help="Random seed, for a repeatable run."),
    json_out: bool = typer.Option(False, "--json", help="Print the JSON contract instead of a summary."),
    max_cases: int = typer.Option(
        MAX_CASES,
        "--max-cases",
        help=f"Most expected cases to simulate (default {MAX_CASES:,}, at most {CASE_CEILING:,}); "
        "a larger forecast is refused before it runs.",
    ),
    patient_spread: bool = typer.Option(
        False, "--patient-spread", help="Draw each case's physiology from published between-patient variation."
    ),
    calibration: Path | None = typer.Option(
        None,
        "--calibration",
        help="A department's calibration TOML (lowflow audit --calibration-out): its uptake factor.",
    ),
) -> None:
    """Demand forecast: weekly gas, agent and absorbent demand of a case mix, P50/P95/P99, orders."""
    from ..planning.casemix import MAX_WEEKS, load_casemix
    from ..planning.forecast import forecast as run

    if not 1 <= max_cases <= CASE_CEILING:
        raise InputError("--max-cases", max_cases, f"a whole number from 1 to {CASE_CEILING}")
    mix = load_casemix(file)
    if calibration is not None:
        from ..inputs.calibration_file import load_calibration
        from ..planning.calibration import calibrated_mix

        mix = calibrated_mix(mix, load_calibration(calibration, "--calibration"), "--calibration")
    span = mix.weeks if weeks is None else weeks
    if 1 <= span <= MAX_WEEKS:  # other week counts are refused by the forecast, naming --weeks
        size = check_size(mix, span, max_cases)
        if size.seconds >= ANNOUNCE_AFTER:
            typer.echo(size.text(span), err=True)
    with option_names(
        {"weeks": "--weeks" if weeks is not None else None, "seed": "--seed" if seed is not None else None}
    ):
        show = terminal_progress("simulating the weeks (per cent)")
        result = run(
            mix,
            weeks=weeks,
            seed=seed,
            max_cases=max_cases,
            patient_spread=patient_spread,
            progress=lambda share: show(round(100 * share), 100),
        )
    files = {"FILE": file, "--calibration": calibration}
    if json_out:
        typer.echo(json_text({**result.to_json(), **_calibration(mix)}, "forecast", files))
        return
    from ..inputs.calibration_file import note_text

    text = summary(result).rsplit("\n", 1)  # the calibration lines go before the closing caution
    notes = [
        line
        for n in _calibration(mix).get("calibration", {}).values()
        for line in [note_text(n)] + [f"  [{w['code']}] {w['message']}" for w in n["warnings"]]
    ]
    typer.echo("\n".join([text[0], *notes, *text[1:]]))


def _calibration(mix) -> dict:
    """``{"calibration": {agent: note}}`` for the agents of the mix, when a calibration is applied."""
    from ..inputs.calibration_file import calibration_note

    if mix.calibration is None:
        return {}
    agents = sorted({ct.agent for ct in mix.case_types})
    return {"calibration": {a: calibration_note(mix.calibration, a, mix.calibration.factor(a) or 1.0) for a in agents}}


def _fmt(q) -> str:
    mag = q.magnitude
    return f"{mag:10.0f}" if abs(mag) >= 1000 else f"{mag:10.2f}" if abs(mag) < 100 else f"{mag:10.1f}"


def summary(result) -> str:
    """Readable summary of a :class:`~estimator.planning.forecast.ForecastResult`."""
    lines = [
        f"Demand forecast{': ' + result.title if result.title else ''} - {result.weeks} simulated weeks, "
        f"seed {result.seed}, {result.solver['cases']} cases"
    ]
    for c in result.cases:
        lines.append(
            f"  {c['name']}: {c['mean_per_week']:g} a week ({c['count']}), {c['agent']}, "
            f"mean {c['mean_duration'].to('min').magnitude:.0f} min"
        )
    lines.append(f"  {'per week':<26}{'mean':>10}{'P50':>10}{'P95':>10}{'P99':>10}  unit")
    for key, stats in result.items.items():
        label = _LABELS.get(key, key.replace("_bottles", " bottles").replace("_", " "))
        unit = result.units[key] or ("bottles" if key.endswith("_bottles") else "")
        if key in ("sevoflurane", "isoflurane", "desflurane", "halothane"):
            label += " (liquid)"
        lines.append(
            f"  {label:<26}"
            + "".join(_fmt(stats[s]) for s in ("mean", "p50", "p95", "p99"))
            + f"  {unit.replace('MAC_hour', 'MAC h')}"
        )
    if result.cost:
        cost = result.cost
        lines.append(
            f"  {'cost (' + cost['currency'] + ')':<26}"
            + "".join(
                f"{cost[s]:10.0f}" if cost[s] >= 1000 else f"{cost[s]:10.2f}" for s in ("mean", "p50", "p95", "p99")
            )
        )
    if result.orders:
        lines.append(f"Orders that cover a P{100 * result.cover:g} week:")
        for o in result.orders:
            lines.append(
                f"  {o['item'].replace('_', ' '):<16}{o['count']:5d} {o['unit']}(s) of "
                f"{o['per_unit'].magnitude:.4g} {result.units[o['item']]} usable "
                f"(need {o['need'].magnitude:.4g} {result.units[o['item']]})"
            )
    lines.append(f"Gas litres: free gas at 15 degC and 101.325 kPa. CO2e basis: {result.to_json()['co2e_basis']}.")
    if result.warnings:
        lines.append("Warnings:")
        lines += [f"  [{code}] {msg}" for code, msg in result.warnings]
    lines.append(CAUTION)
    return "\n".join(lines)
