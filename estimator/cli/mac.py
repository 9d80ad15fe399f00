"""``lowflow mac``: age-corrected MAC of an agent, and the end-tidal that makes a total MAC.

Examples
--------
>>> from estimator.cli import main
>>> try:
...     main(["mac", "--agent", "sevoflurane", "--age", "70"])
... except SystemExit:
...     pass
sevoflurane at 70 years: 1 MAC = 1.49 % end-tidal at 101.3 kPa (age factor 0.830)
...
"""

from __future__ import annotations

from typing import Any

import typer

from ..choices import Agent
from ..errors import InputError
from . import CAUTION, app
from .outputs import json_text, option_names

_FIELDS = {"age_field": "--age", "agent_field": "--agent", "pressure_field": "--ambient-pressure"}


def _site(elevation: Any, ambient_pressure: Any) -> Any:
    from ..physics.site import site_from_inputs

    # name the CLI option, not the scenario-file field
    with option_names({"site.elevation": "--elevation", "site.ambient_pressure": "--ambient-pressure"}):
        return site_from_inputs(elevation=elevation, ambient_pressure=ambient_pressure)


def mac_report(
    agent: str,
    age: Any,
    nitrous_oxide: Any = None,
    total: Any = None,
    ambient_pressure: Any = None,
    elevation: Any = None,
) -> dict[str, Any]:
    """The ``lowflow mac`` result: a dict of quantities, the JSON document before encoding.

    Parameters
    ----------
    agent : str
        Volatile agent name.
    age : [year]; a bare number is years.
    nitrous_oxide : optional end-tidal fraction of nitrous oxide.
    total : optional requested total MAC; a bare number is MAC.
    ambient_pressure : optional absolute pressure [kPa]; or
    elevation : optional site elevation [m] (ISO 2533 standard atmosphere). Default sea level.

    References
    ----------
    Mapleson WW. Br J Anaesth 1996;76:179; Nickalls RWD, Mapleson WW. Br J Anaesth 2003;91:170.

    Examples
    --------
    >>> r = mac_report("isoflurane", "40")
    >>> r["mac"].to("percent").magnitude, r["end_tidal_for_total"] is None
    (1.17, True)
    """
    from ..physics.mac import SOURCE, end_tidal_for_total_mac, mac_at_age, parse_fraction
    from ..units import Q_

    site = _site(elevation, ambient_pressure)
    pressure = site.ambient_pressure
    m = mac_at_age(agent, age, pressure, **_FIELDS)
    warnings = list(site.warnings)
    warnings += [w for w in m.warnings if w[0] not in {c for c, _ in warnings}]
    f_n2o = 0.0 if nitrous_oxide is None else parse_fraction(nitrous_oxide, "--nitrous-oxide")
    n2o = mac_at_age("nitrous_oxide", age, pressure, **_FIELDS)
    n2o_mac = Q_(f_n2o / n2o.mac.to("dimensionless").magnitude, "MAC")
    end_tidal = requested = None
    if total is not None:
        r = end_tidal_for_total_mac(
            m.agent,
            total,
            age,
            f_n2o,
            pressure,
            total_field="--total-mac",
            nitrous_field="--nitrous-oxide",
            age_field="--age",
            agent_field="--agent",
        )
        end_tidal, requested = r.end_tidal, r.total
        warnings += [w for w in r.warnings if w[0] not in {c for c, _ in warnings}]
    return {
        "agent": m.agent,
        "age": m.age,
        "ambient_pressure": m.ambient_pressure,
        "pressure_basis": site.basis,
        "mac": m.mac,
        "age_factor": m.factor,
        "nitrous_oxide": Q_(f_n2o, "dimensionless").to("percent"),
        "nitrous_oxide_mac_fraction": n2o_mac,
        "total_mac": requested,
        "end_tidal_for_total": end_tidal,
        "warnings": [{"code": c, "message": msg} for c, msg in warnings],
        "source": SOURCE,
    }


def _human(r: dict[str, Any]) -> str:
    lines = [
        f"{r['agent']} at {r['age'].magnitude:g} years: 1 MAC = {r['mac'].magnitude:.2f} % end-tidal "
        f"at {r['ambient_pressure'].magnitude:.1f} kPa (age factor {r['age_factor']:.3f})"
    ]
    if r["nitrous_oxide"].magnitude > 0:
        lines.append(
            f"nitrous oxide {r['nitrous_oxide'].magnitude:g} % end-tidal adds "
            f"{r['nitrous_oxide_mac_fraction'].magnitude:.2f} MAC"
        )
    if r["total_mac"] is not None:
        want = r["total_mac"].magnitude
        if r["end_tidal_for_total"] is None:
            lines.append(f"{want:g} MAC in total: not possible with this nitrous oxide")
        else:
            lines.append(f"{want:g} MAC in total: {r['end_tidal_for_total'].magnitude:.2f} % end-tidal {r['agent']}")
    lines += [f"warning [{w['code']}]: {w['message']}" for w in r["warnings"]]
    lines += [f"Source: {r['source']}.", CAUTION]
    return "\n".join(lines)


@app.command("mac")
def mac_command(
    agent: Agent = typer.Option(..., "--agent", case_sensitive=False, help="Volatile agent."),
    age: str = typer.Option(..., "--age", help="Age, e.g. '70' or '70 years' (0 to 120; the fit holds above 1 year)."),
    nitrous_oxide: str | None = typer.Option(None, "--nitrous-oxide", help="End-tidal nitrous oxide, e.g. '67 %'."),
    total: str | None = typer.Option(
        None, "--total-mac", help="Requested total MAC, e.g. 1.2; gives the agent end-tidal."
    ),
    ambient_pressure: str | None = typer.Option(
        None, "--ambient-pressure", help="Absolute ambient pressure, e.g. '80 kPa' (default 101.325 kPa)."
    ),
    elevation: str | None = typer.Option(
        None, "--elevation", help="Site elevation, e.g. '2400 m'; pressure from the standard atmosphere."
    ),
    json_out: bool = typer.Option(False, "--json", help="Print JSON (quantities as magnitude and units)."),
) -> None:
    """Age-corrected MAC (Mapleson 1996) and the end-tidal agent for a total MAC with nitrous oxide."""

    if agent is None:  # typer before 0.17 with click 8.2 passes a missing required option as None
        raise InputError("--agent", "(missing)", "one of " + ", ".join(a.value for a in Agent))
    r = mac_report(agent.value, age, nitrous_oxide, total, ambient_pressure, elevation)
    typer.echo(json_text(r, "mac") if json_out else _human(r))
