"""``lowflow flowmeter``: the true flow behind a float-flowmeter reading at the site.

Examples
--------
>>> from estimator.cli import main
>>> try:
...     main(["flowmeter", "--reading", "10 L/min", "--calibrated-for", "oxygen", "--gas", "oxygen",
...           "--elevation", "3000 m"])
... except SystemExit:
...     pass
true flow of oxygen at reading 10 L/min (tube calibrated for oxygen at 20 degC, 101.325 kPa)
...
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import typer

from . import CAUTION, app
from .outputs import json_text, option_names

if TYPE_CHECKING:
    from ..physics.flowmeter import TrueFlow

#: Model field names -> the option that sets them, so an error names what the user typed.
_OPTIONS = {
    "site.elevation": "--elevation",
    "site.ambient_pressure": "--ambient-pressure",
    "site.temperature": "--temperature",
    "reading": "--reading",
    "calibrated_for": "--calibrated-for",
    "gas": "--gas",
    "purity": "--purity",
    "back_pressure": "--back-pressure",
    "accuracy": "--accuracy",
}


def flowmeter_report(
    reading: Any,
    calibrated_for: str,
    gas: str | None = None,
    elevation: Any = None,
    ambient_pressure: Any = None,
    temperature: Any = None,
    purity: Any = None,
    back_pressure: Any = None,
) -> dict[str, Any]:
    """The ``lowflow flowmeter`` result: the JSON document before encoding.

    Parameters
    ----------
    reading : [L/min]; calibrated_for, gas : gas names or mixtures (gas defaults to calibrated_for);
    elevation : [m]; ambient_pressure : absolute [kPa]; temperature : room [degC];
    purity : concentrator O2 fraction; back_pressure : gauge at the tube outlet [kPa].

    Examples
    --------
    >>> r = flowmeter_report("5 L/min", "oxygen")
    >>> r["regime"], round(r["true_flow_ambient"].magnitude, 6)
    ('turbulent', 5.0)
    """
    from ..physics.flowmeter import true_flow
    from ..physics.site import site_from_inputs
    from ..units import parse_quantity

    with option_names(_OPTIONS):
        site = site_from_inputs(elevation, ambient_pressure, temperature)
        r = true_flow(
            reading,
            calibrated_for,
            calibrated_for if gas is None else gas,
            site,
            purity=purity,
            back_pressure=back_pressure,
        )
    return _document(
        r,
        parse_quantity(reading, "--reading", "flow", "L/min").to("L/min"),
        calibrated_for,
        calibrated_for if gas is None else gas,
    )


def _document(r: TrueFlow, reading: Any, calibrated_for: str, gas: str) -> dict[str, Any]:
    return {
        "reading": reading,
        "calibrated_for": calibrated_for,
        "gas": gas,
        "composition": r.composition,
        "true_flow_ambient": r.true_flow_ambient,
        "true_flow_standard": r.true_flow_standard,
        "regime": r.regime,
        "uncertainty": r.uncertainty,
        "uncertainty_standard": r.uncertainty_standard,
        "reynolds": r.reynolds,
        "transition_reynolds": r.transition_reynolds,
        "viscous_share": r.viscous_share,
        "correction": r.correction,
        "site": {
            "pressure": r.site.ambient_pressure,
            "temperature": r.site.temperature,
            "elevation": r.site.elevation,
            "basis": r.site.basis,
        },
        "tube_pressure": r.tube_pressure,
        "warnings": [{"code": c, "message": m} for c, m in r.warnings],
        "gas_volume_reference": r.gas_volume_reference,
    }


def _human(d: dict[str, Any]) -> str:
    s, u = d["site"], d["uncertainty"]
    where = f"{s['elevation']:~P}, " if s["elevation"] is not None else ""
    lines = [
        f"true flow of {d['gas']} at reading {d['reading'].magnitude:g} L/min "
        f"(tube calibrated for {d['calibrated_for']} at 20 degC, 101.325 kPa)",
        f"site: {where}{s['pressure'].to('kPa').magnitude:.1f} kPa ({s['basis']}), "
        f"{s['temperature'].to('degC').magnitude:g} degC",
        f"true flow at ambient pressure: {d['true_flow_ambient'].magnitude:.3g} L/min "
        f"(range {u['low'].magnitude:.3g} to {u['high'].magnitude:.3g} L/min from the tube's accuracy)",
        f"true flow as free gas at 15 degC, 101.325 kPa: {d['true_flow_standard'].magnitude:.3g} L/min",
        f"regime: {d['regime']} ({100 * d['viscous_share']:.0f} % of the float's pressure drop viscous; "
        f"annulus Reynolds number {d['reynolds']:.0f})",
    ]
    lines += [f"warning [{w['code']}]: {w['message']}" for w in d["warnings"]]
    lines.append(CAUTION)
    return "\n".join(lines)


@app.command("flowmeter")
def flowmeter_command(
    reading: str = typer.Option(..., "--reading", help="Scale reading, e.g. '10 L/min' (0 to 100 L/min)."),
    calibrated_for: str = typer.Option(..., "--calibrated-for", help="Gas the tube is calibrated for, e.g. oxygen."),
    gas: str | None = typer.Option(
        None,
        "--gas",
        help="Gas flowing: oxygen, air, nitrous_oxide, nitrogen, argon, "
        "helium, carbon_dioxide, concentrator, or 'oxygen=30 %, nitrous_oxide=70 %' "
        "(default: the calibration gas).",
    ),
    elevation: str | None = typer.Option(None, "--elevation", help="Site elevation, e.g. '3000 m' (-500 to 11000 m)."),
    ambient_pressure: str | None = typer.Option(
        None,
        "--ambient-pressure",
        help="Measured absolute pressure, e.g. '70 kPa' (used in preference to the elevation).",
    ),
    temperature: str | None = typer.Option(
        None, "--temperature", help="Room temperature, e.g. '30 degC' (default 20)."
    ),
    purity: str | None = typer.Option(None, "--purity", help="Oxygen in concentrator product, e.g. '93 %'."),
    back_pressure: str | None = typer.Option(
        None, "--back-pressure", help="Gauge pressure at the tube outlet, e.g. '1 kPa' (default 0)."
    ),
    json_out: bool = typer.Option(False, "--json", help="Print JSON (quantities as magnitude and units)."),
) -> None:
    """True flow behind a float-flowmeter reading at the site's pressure and temperature."""

    d = flowmeter_report(reading, calibrated_for, gas, elevation, ambient_pressure, temperature, purity, back_pressure)
    typer.echo(json_text(d, "flowmeter") if json_out else _human(d))
