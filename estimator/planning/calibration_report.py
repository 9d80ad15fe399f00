"""The prediction check and calibration of an audit as HTML: a scatter of recorded against predicted, and tables.

Rendered into the audit's HTML report (:func:`estimator.planning.html_report.report_html`) when the audit
ran with ``--calibrate``; the app's audit page draws the same scatter with altair.

Examples
--------
>>> svg = svg_scatter([("a", 1.0, 2.0, True), ("b", 3.0, 2.5, False)], "t")
>>> svg.startswith("<svg") and "line of identity" in svg
True
"""

from __future__ import annotations

import html
import math
from typing import Any

#: Colours of the scatter: cases in the fit, cases left out.
_COLOURS = ("#3b6e8f", "#c0392b")


def svg_scatter(points: list[tuple[str, float, float, bool]], title: str, *, size: int = 420) -> str:
    """Recorded (y) against predicted (x) delivered liquid agent [mL], on equal log axes with the line of identity.

    ``points`` are (label, predicted, recorded, in the fit); labels are escaped.
    """
    good = [(lab, x, y, ok) for lab, x, y, ok in points if x > 0 and y > 0 and math.isfinite(x) and math.isfinite(y)]
    left, top, plot = 56, 30, size - 90
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{size}" height="{size}" role="img" '
        f'aria-label="{html.escape(title)}">',
        f'<text x="0" y="16" class="t">{html.escape(title)}</text>',
    ]
    if not good:
        return "".join(parts) + "</svg>"
    lo = math.log10(min(min(x, y) for _, x, y, _ in good)) - 0.05
    hi = math.log10(max(max(x, y) for _, x, y, _ in good)) + 0.05

    def pos(v: float) -> float:
        return plot * (math.log10(v) - lo) / (hi - lo)

    parts.append(f'<rect x="{left}" y="{top}" width="{plot}" height="{plot}" fill="none" stroke="#c7d3db"/>')
    parts.append(
        f'<line x1="{left}" y1="{top + plot}" x2="{left + plot}" y2="{top}" stroke="#888" stroke-dasharray="4 3">'
        "<title>line of identity</title></line>"
    )
    ticks = [m * 10.0**k for k in range(math.floor(lo), math.ceil(hi) + 1) for m in (1, 2, 5)]
    for v in (t for t in ticks if lo <= math.log10(t) <= hi):
        parts.append(f'<text x="{left + pos(v):.1f}" y="{top + plot + 14}" text-anchor="middle">{v:g}</text>')
        parts.append(f'<text x="{left - 4}" y="{top + plot - pos(v) + 4:.1f}" text-anchor="end">{v:g}</text>')
    for lab, x, y, ok in good:
        colour = _COLOURS[0] if ok else _COLOURS[1]
        parts.append(
            f'<circle cx="{left + pos(x):.1f}" cy="{top + plot - pos(y):.1f}" r="3" fill="{colour}" fill-opacity="0.7">'
            f"<title>{html.escape(str(lab))}: predicted {x:.3g} mL, recorded {y:.3g} mL</title></circle>"
        )
    parts.append(
        f'<text x="{left + plot / 2}" y="{size - 26}" text-anchor="middle">predicted liquid agent [mL]</text>'
        f'<text x="{left + plot / 2}" y="{size - 8}" text-anchor="middle">dashed: line of identity; '
        f'<tspan fill="{_COLOURS[0]}">in the fit</tspan>, <tspan fill="{_COLOURS[1]}">left out</tspan></text>'
    )
    parts.append(
        f'<text x="14" y="{top + plot / 2}" transform="rotate(-90 14 {top + plot / 2})" text-anchor="middle">'
        "recorded liquid agent [mL]</text>"
    )
    parts.append("</svg>")
    return "".join(parts)


def calibration_html(doc: dict[str, Any]) -> str:
    """The report section of ``{"prediction_check": ..., "calibration": ...}`` (every text escaped)."""
    esc = html.escape
    check, cal = doc["prediction_check"], doc["calibration"]
    rows = []
    for agent, s in check["agents"].items():
        ci = f"{s['low']:.2f}-{s['high']:.2f}" if s.get("low") is not None else "n/a"
        med = f"{s['median_ratio']:.2f}" if s["median_ratio"] is not None else "n/a"
        rec = cal["agents"].get(agent)
        factor = (
            f"{rec['factor']:.2f} ({rec['low']:.2f}-{rec['high']:.2f}; {rec['cases']} cases)"
            if rec
            else f"not calibrated: {cal['refused'].get(agent, '')}"
        )
        rows.append(f"<tr><td>{esc(agent)}</td><td>{s['cases']}</td><td>{med} ({ci})</td><td>{esc(factor)}</td></tr>")
    table = (
        "<table><thead><tr><th>agent</th><th>cases checked</th><th>median recorded / predicted (95 % interval)</th>"
        f"<th>uptake factor (95 % interval)</th></tr></thead><tbody>{''.join(rows)}</tbody></table>"
    )
    charts = "".join(
        svg_scatter(
            [
                (c["case_id"], c["predicted"]["magnitude"], c["recorded"]["magnitude"], c["in_calibration"])
                for c in check["cases"]
                if c["agent"] == agent
            ],
            f"{agent}: recorded against predicted",
        )
        for agent in check["agents"]
    )
    warn = "".join(f"<li><b>{esc(w['code'])}</b>: {esc(w['message'])}</li>" for w in cal["warnings"])
    excluded = len(cal["excluded"])
    return (
        f"<h2>Prediction check and calibration</h2><p>{esc(check['method'])}.</p>{table}{charts}"
        f"<p>Calibration: {esc(cal['method'])}. Cases left out of the fit (outside the model's validity or "
        f"unrecorded patient values): {excluded}; skipped (no end-tidal data, other reasons): "
        f"{len(check['skipped'])}. The interval covers the scatter between cases, not a bias shared by all.</p>"
        + (f"<ul>{warn}</ul>" if warn else "")
    )


def calibration_frames(doc: dict[str, Any]) -> dict[str, Any]:
    """Spreadsheet tables of ``{"prediction_check": ..., "calibration": ...}``: one row a case checked, one
    row an agent (its median ratio and, when calibrated, the factor with its interval).

    Examples
    --------
    >>> doc = {"prediction_check": {"agents": {}, "cases": []}, "calibration": {"agents": {}, "refused": {}}}
    >>> sorted(calibration_frames(doc))
    ['calibration', 'prediction check']
    """
    import pandas as pd

    check, cal = doc["prediction_check"], doc["calibration"]
    cases = pd.DataFrame(
        [
            {
                "case_id": c["case_id"],
                "agent": c["agent"],
                "recorded [mL]": c["recorded"]["magnitude"],
                "predicted [mL]": c["predicted"]["magnitude"],
                "predicted, calibrated [mL]": (c["predicted_calibrated"] or {}).get("magnitude"),
                "recorded / predicted": c["ratio"],
                "in the calibration": c["in_calibration"],
                "left out because": c["excluded"] or "",
            }
            for c in check["cases"]
        ],
        columns=[
            "case_id",
            "agent",
            "recorded [mL]",
            "predicted [mL]",
            "predicted, calibrated [mL]",
            "recorded / predicted",
            "in the calibration",
            "left out because",
        ],
    )
    agents = pd.DataFrame(
        [
            {
                "agent": agent,
                "cases checked": s["cases"],
                "median recorded / predicted": s["median_ratio"],
                "median, 95 % low": s.get("low"),
                "median, 95 % high": s.get("high"),
                "uptake factor": (cal["agents"].get(agent) or {}).get("factor"),
                "factor, 95 % low": (cal["agents"].get(agent) or {}).get("low"),
                "factor, 95 % high": (cal["agents"].get(agent) or {}).get("high"),
                "cases in the fit": (cal["agents"].get(agent) or {}).get("cases"),
                "not calibrated because": cal["refused"].get(agent, ""),
            }
            for agent, s in check["agents"].items()
        ]
    )
    return {"prediction check": cases, "calibration": agents}
