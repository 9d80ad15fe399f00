"""``lowflow case FILE``: run one planned case through the circle-system model."""

from __future__ import annotations

from pathlib import Path

import typer

from ..errors import InputError
from ..simulation.totals_table import totals_rows
from . import CAUTION, app
from .outputs import calibration_json, calibration_lines, json_text, output_paths, write_output
from .process import loading


@app.command("case")
def case(
    file: Path = typer.Argument(..., help="Scenario TOML file (see the README)."),
    json_out: bool = typer.Option(False, "--json", help="Print the JSON contract instead of a summary."),
    csv: Path | None = typer.Option(None, "--csv", help="Write the time series to this CSV file."),
    report: Path | None = typer.Option(
        None,
        "--report",
        help="Write a printable case plan (phases and dial, flow floor, totals, warnings, charts): "
        "HTML for a .html or .htm file, PDF for a .pdf file (the pdf extra).",
    ),
    spread: int = typer.Option(
        0, "--spread", help="Also simulate N patients drawn from published between-patient variation (0 = off)."
    ),
    seed: int | None = typer.Option(None, "--seed", help="Seed of the patient draws (--spread); reported in the JSON."),
    calibration: Path | None = typer.Option(
        None,
        "--calibration",
        help="A department's calibration TOML (lowflow audit --calibration-out): its uptake factor.",
    ),
) -> None:
    """Simulate one case: agent and gas use, inspired O2, end-tidal agent and MAC, warnings."""
    outputs = output_paths({"--csv": csv, "--report": report}, {"FILE": file, "--calibration": calibration})
    kind = report_kind(outputs["--report"]) if "--report" in outputs else None
    with loading():  # the libraries and the compiled model load here (estimator.cli.process)
        from ..inputs.scenario import load_scenario
        from ..simulation.engine import simulate

        scenario = load_scenario(file)
        if calibration is not None:  # the calibration code loads only when a calibration is given
            from ..inputs.calibration_file import attach_option

            scenario = attach_option(scenario, calibration)
        result = simulate(scenario)
    band = None
    if spread:
        from ..simulation.spread import simulate_spread

        band = simulate_spread(scenario, spread, seed=seed)
    if "--csv" in outputs:
        from ..planning.exports import csv_text

        text = csv_text(result.series, "lowflow case", {file.name: file.read_bytes()})
        write_output("--csv", outputs["--csv"], lambda p: p.write_text(text, encoding="utf-8", newline=""))
    if "--report" in outputs:
        from ..planning.case_plan import case_plan, plan_html
        from ..planning.safety import flow_floor

        plan = case_plan(result, flow_floor(scenario, grid=False), band)
        if kind == "pdf":
            from ..planning.case_plan_pdf import plan_pdf

            data = plan_pdf(plan)
            write_output("--report", outputs["--report"], lambda p: p.write_bytes(data))
        else:
            page = plan_html(plan)
            write_output("--report", outputs["--report"], lambda p: p.write_text(page, encoding="utf-8"))
    if json_out:
        out = result.to_json()
        if band is not None:
            out["spread"] = band.to_json()
        out.update(calibration_json(scenario))
        typer.echo(json_text(out, "case", {"FILE": file, "--calibration": calibration}))
        return
    typer.echo(summary(result, band))


#: File suffix of ``--report`` -> the plan it writes.
REPORT_KINDS = {".html": "html", ".htm": "html", ".pdf": "pdf"}


def report_kind(path: Path) -> str:
    """``"html"`` or ``"pdf"``: the plan ``--report`` writes, chosen by the file's suffix (any case).

    A PDF needs fpdf2 (the ``pdf`` extra); without it, or with another suffix, an error naming
    ``--report`` before the run.

    >>> report_kind(Path("plan.HTM"))
    'html'
    >>> report_kind(Path("plan.txt"))
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: --report: got 'plan.txt'; expected a file ending in .html or .htm (HTML plan) or .pdf (PDF plan)
    """
    kind = REPORT_KINDS.get(path.suffix.lower())
    if kind is None:
        raise InputError("--report", str(path), "a file ending in .html or .htm (HTML plan) or .pdf (PDF plan)")
    if kind == "pdf":
        from ..planning.case_plan_pdf import PDF_EXTRA, pdf_available

        if not pdf_available():
            raise InputError(
                "--report", str(path), f"the pdf extra for a PDF plan: {PDF_EXTRA} (or write a .html plan)"
            )
    return kind


def summary(result, band=None) -> str:
    """Readable summary of a :class:`~estimator.simulation.results.CaseResult`."""
    t = result.totals
    sc = result.scenario
    lines = [
        f"{sc.title or 'Case'}: {sc.agent.name}, {t['duration'].to('min').magnitude:.0f} min, "
        f"mean fresh-gas flow {t['mean_fresh_gas_flow'].to('L/min').magnitude:.2f} L/min"
    ]
    keys = {"agent_liquid", "oxygen", "nitrous_oxide", "co2e"}
    lines += [
        f"  {r.label:<30}{r.value:10.2f} {r.unit}"
        + (f"   ({band.band_text(r.key)})" if band is not None and r.key in keys else "")
        for r in totals_rows(result)[:-2]
        if r.key != "duration"
    ]
    lines.append(f"  {'lowest inspired O2':<30}{100 * result.minimum_inspired_oxygen.magnitude:10.1f} %")
    if result.cost:
        cost = result.cost
        lines.append(
            f"  {'cost':<30}{cost['total']:10.2f} {cost['currency']} (agent {cost['agent']:.2f}, "
            f"gases {cost['gases']:.2f}, absorbent {cost['absorbent']:.2f})"
        )
    from ..simulation.dial_schedule import dial_schedule, dial_text

    lines += [f"  {line}" for line in dial_text(dial_schedule(result.columns, result.phases))]
    for ph in result.phases:
        if ph.get("mode") == "end_tidal_hold":
            reached = ph.get("target_reached")
            when = f"reached at {reached.to('min').magnitude:.0f} min" if reached is not None else "not reached"
            lines.append(f"  phase {ph['index']}: end-tidal hold target {when}")
    lines.append("Gas litres: free gas at 15 degC and 101.325 kPa.")
    lines += calibration_lines(sc)
    if band is not None:
        lines.append(
            f"P5-P95: {band.n} patients drawn from published between-patient variation (seed {band.seed}); "
            "see the README, 'Patient spread'."
        )
    if result.warnings:
        lines.append("Warnings:")
        lines += [f"  [{code}] {msg}" for code, msg in result.warnings]
    lines.append(CAUTION)
    return "\n".join(lines)
