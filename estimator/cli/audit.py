"""``lowflow audit``: the fresh-gas audit of recorded cases, with an optional low-flow counterfactual.

Examples
--------
>>> import contextlib, io, pathlib, tempfile
>>> from estimator.cli import main
>>> from estimator.inputs.audit_log import REQUIRED
>>> log = pathlib.Path(tempfile.mkdtemp()) / "log.csv"
>>> _ = log.write_text(",".join(REQUIRED) + "\\nA,0,1,1,0,sevoflurane,2\\nA,60,1,1,0,sevoflurane,2\\n")
>>> out = io.StringIO()
>>> with contextlib.redirect_stdout(out):
...     try:
...         main(["audit", str(log)])
...     except SystemExit:
...         pass
>>> "rows read 2, used 2, rejected 0" in out.getvalue()
True
"""

from __future__ import annotations

import dataclasses
import functools
import math
from pathlib import Path

import typer

from ..choices import Basis, Quadrature
from ..errors import InputError
from . import CAUTION, app
from .outputs import json_text, option_names, output_paths, terminal_progress, write_output

#: Fields of the audit set by an option, named by the option in errors.
_AUDIT_OPTIONS = {
    "basis": "--basis",
    "co2e_basis": "--basis",
    "quadrature": "--quadrature",
    "maintenance_after": "--maintenance-after",
    "manifold_loss": "--manifold-loss",
}


def _as_option(exc: InputError, name: str, flag: str) -> InputError:
    """An error about the whole file ``name`` names the option that gave it; a field keeps its path."""
    whole = exc.field == name or exc.field.startswith(name + " ")
    return InputError(flag, exc.value, exc.expected) if whole else exc


def _policy(path: Path):
    from ..planning.audit_policy import load_policy

    try:
        return load_policy(path)
    except InputError as exc:
        raise _as_option(exc, "policy", "--policy") from None


def _prices(path: Path):
    from ..accounts.costs import load_prices

    try:
        return load_prices(path)
    except InputError as exc:
        raise _as_option(exc, "prices", "--prices") from None


def _share(text: str, flag: str) -> float:
    """A share 0 to below 1 from ``'85 %'`` or ``0.85`` (the bare-number rule of every fraction)."""
    from ..units import check_range, parse_quantity

    q = parse_quantity(text, flag, "fraction").to("")
    return float(check_range(q, flag, 0.0, 0.999, value=text).magnitude)


def _fmt(v: float | None, unit: str = "") -> str:
    from ..display import text

    return "n/a" if v is None or not math.isfinite(v) else text(v, unit)


@app.command("audit")
def audit_command(
    log: Path = typer.Argument(..., help="Audit log CSV (see the README for the columns and units)."),
    policy: Path | None = typer.Option(None, "--policy", help="Low-flow policy TOML for the counterfactual."),
    basis: Basis = typer.Option(Basis.AR6_GWP100, "--basis", help="CO2e basis (global warming potential)."),
    prices: Path | None = typer.Option(None, "--prices", help="Prices TOML ([prices] table)."),
    demo_prices: bool = typer.Option(False, "--demo-prices", help="Use the invented demo prices."),
    json_out: bool = typer.Option(False, "--json", help="Print the JSON document."),
    report: Path | None = typer.Option(None, "--report", help="Write a self-contained HTML report."),
    xlsx: Path | None = typer.Option(None, "--xlsx", help="Write an XLSX workbook."),
    csv_out: Path | None = typer.Option(None, "--csv", help="Write the per-case table as CSV."),
    quadrature: Quadrature = typer.Option(
        Quadrature.HOLD, "--quadrature", help="hold (sample and hold) or trapezoid rule between samples."
    ),
    maintenance_after: str = typer.Option(
        "10 min", "--maintenance-after", help="Maintenance starts this long after a case's first sample."
    ),
    manifold_loss: str = typer.Option(
        "0", "--manifold-loss", help="Share of piped N2O lost before use, e.g. '85 %' or 0.85 (0 for cylinders)."
    ),
    calibrate: bool = typer.Option(
        False,
        "--calibrate",
        help="Check the model's predictions on the recorded cases and fit each agent's uptake factor.",
    ),
    calibration_out: str | None = typer.Option(
        None, "--calibration-out", help="Write the uptake factors as a calibration TOML file (implies --calibrate)."
    ),
) -> None:
    """Fresh-gas audit: agent, gases, CO2e and cost per case, room and month, with KPIs."""
    from ..accounts.costs import DEMO_PRICES
    from ..planning import exports, html_report
    from ..planning.audit import audit

    if prices is not None and demo_prices:
        raise InputError("--demo-prices", True, "either --prices FILE or --demo-prices, not both")
    loss = _share(manifold_loss, "--manifold-loss")
    outputs = output_paths(
        {"--report": report, "--xlsx": xlsx, "--csv": csv_out, "--calibration-out": calibration_out},
        {"LOG": log, "--policy": policy, "--prices": prices},
    )
    price_table = _prices(prices) if prices is not None else (DEMO_PRICES if demo_prices else None)
    if not log.is_file():
        raise InputError("LOG", str(log), "an existing CSV file")
    with option_names(_AUDIT_OPTIONS):
        result = audit(
            log,
            prices=price_table,
            basis=basis.value,
            quadrature=quadrature.value,
            maintenance_after=maintenance_after,
            manifold_loss=loss,
        )
    if policy is not None:
        from ..planning.audit_policy import counterfactual

        cf = counterfactual(
            result,
            _policy(policy),
            prices=price_table,
            manifold_loss=loss,
            progress=terminal_progress("re-running cases at the policy flow"),
        )
        result = dataclasses.replace(result, counterfactual=cf)
    if calibrate or calibration_out is not None:
        result = _calibrated(result, log, outputs.get("--calibration-out"))
    written = [str(outputs["--calibration-out"])] if "--calibration-out" in outputs else []
    for flag, writer in (
        ("--report", html_report.write_html),
        ("--xlsx", exports.write_xlsx),
        ("--csv", exports.write_csv),
    ):
        if flag in outputs:
            written.append(str(write_output(flag, outputs[flag], functools.partial(writer, result))))
    if json_out:
        files = {"LOG": log, "--policy": policy, "--prices": prices}
        typer.echo(json_text(result.to_json(), "audit", files))
        return
    _human(result, written)


def _calibrated(result, log: str | Path, out: Path | None):
    """The audit with its prediction check and calibration; the calibration file written to ``out``."""
    import hashlib

    from ..planning.calibration import calibration_toml, check_and_calibrate, provenance, run_cases

    cases, skipped = run_cases(result, progress=terminal_progress("re-running cases for the calibration"))
    doc = check_and_calibrate(cases, skipped)
    digest = hashlib.sha256(Path(log).read_bytes()).hexdigest()
    used = sum(rec["cases"] for rec in doc["calibration"]["agents"].values())
    doc["calibration"]["provenance"] = provenance(result, Path(log).name, digest, used)
    if out is not None:
        text = calibration_toml(doc["calibration"], doc["calibration"]["provenance"])
        write_output("--calibration-out", out, lambda p: p.write_text(text, encoding="utf-8"))
    return dataclasses.replace(result, calibration=doc)


def _calibration_lines(doc) -> list[str]:
    from ..planning.calibration_report import calibration_rows

    check, cal = doc["prediction_check"], doc["calibration"]
    lines = ["Prediction check (recorded / predicted liquid agent, median and 95 % interval):"]
    for r in calibration_rows(doc):
        ci = f"{_fmt(r.ratio_low)}-{_fmt(r.ratio_high)}" if r.ratio_low is not None else "n/a"
        fit = (
            f"uptake factor {r.factor:.2f} (95 % interval {r.low:.2f}-{r.high:.2f}, {r.cases} cases)"
            if r.factor is not None
            else f"not calibrated: {r.reason}"
        )
        lines.append(f"  {r.agent}: {r.checked} cases, ratio {_fmt(r.median_ratio)} ({ci}); {fit}")
    lines.append(f"  {len(cal['excluded'])} case(s) left out of the fit, {len(check['skipped'])} skipped (see --json)")
    lines += [f"warning {w['code']}: {w['message']}" for w in cal["warnings"]]
    return lines


def _human(result, written: list[str]) -> None:
    from ..properties import CO2E_BASES

    r, t, k = result.rows, result.totals, result.kpis
    echo = typer.echo
    echo(f"Fresh-gas audit: rows read {r['read']}, used {r['used']}, rejected {r['rejected']}")
    for line, reason in result.rejections[:20]:
        echo(f"  line {line}: {reason}")
    if len(result.rejections) > 20:
        echo(f"  ... {len(result.rejections) - 20} more rejected rows (see --json or the exports)")
    label = CO2E_BASES[result.basis][1]
    echo(f"Cases {t.get('cases', 0)}; duration {_fmt(t.get('duration_min', 0.0), 'min')}")
    liquid = [(k[7:-3], v) for k, v in t.items() if k.startswith("liquid_") and k.endswith("_ml") and v > 0]
    echo(
        "Liquid agent "
        + (", ".join(f"{a} {_fmt(v, 'mL')}" for a, v in liquid) or "none")
        + f"; O2 {_fmt(t.get('oxygen_l', 0.0), 'L')}, "
        f"air {_fmt(t.get('air_l', 0.0), 'L')}, N2O {_fmt(t.get('nitrous_oxide_l', 0.0), 'L')}"
    )
    echo(f"CO2e {_fmt(t.get('co2e_kg', 0.0), 'kg')} ({label})")
    if result.currency is not None:
        echo(
            f"Cost {_fmt(t.get('cost_total', 0.0))} {result.currency} (agent {_fmt(t.get('cost_agent', 0.0))}, "
            f"gases {_fmt(t.get('cost_gases', 0.0))})"
        )
    for note in (n for n in result.notes if n.startswith("prices used")):
        echo(note[:1].upper() + note[1:])
    echo(
        f"Mean maintenance flow {_fmt(k['mean_maintenance_flow_l_min'], 'L/min')} "
        f"({k['mean_maintenance_flow_class'] or 'no maintenance time'}; after {k['maintenance_after_min']:g} min); "
        f"time at <= 1 L/min {_fmt(100 * k['maintenance_share_le_1'], '%')}, "
        f"<= 0.5 L/min {_fmt(100 * k['maintenance_share_le_0_5'], '%')}"
    )
    echo(
        f"MAC-hours {_fmt(k['mac_hours'])} ({k['cases_with_mac_hours']} cases; {k['cases_without_mac_hours']} "
        f"without); CO2e per MAC-hour {_fmt(k['co2e_per_mac_hour_kg'], 'kg')}"
    )
    cf = result.counterfactual
    if cf:
        s = cf["totals"]["savings"]
        echo(
            f"Policy '{cf['policy']['name']}' ({cf['totals']['cases']} cases re-run, {len(cf['skipped'])} skipped): "
            "saves "
            + ", ".join(f"{_fmt(q['magnitude'], 'mL')} {a}" for a, q in s.get("agent_liquid_by_agent", {}).items())
            + f", {_fmt(s['co2e']['magnitude'], 'kg')} CO2e"
            + (f", {_fmt(s['cost']['total'])} {cf['currency']}" if "cost" in s else "")
            + f" against the {cf['baseline']} baseline"
        )
    for line in _calibration_lines(result.calibration) if result.calibration else []:
        echo(line)
    for code, msg in result.warnings:
        echo(f"warning {code}: {msg}")
    for w in (cf or {}).get("warnings", []):
        echo(f"warning {w['code']}: {w['message']}")
    for path in written:
        echo(f"wrote {path}")
    echo(CAUTION)
