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
from dataclasses import dataclass
from typing import Any

from ..limits import UPTAKE_FACTOR_SUPPORTED

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


@dataclass(frozen=True)
class CalibrationRow:
    """One agent of a calibration summary, as values each face formats (text, HTML, spreadsheet, app).

    ``checked``, ``median_ratio``, ``ratio_low`` and ``ratio_high`` are the prediction check's (None for a
    calibration file, which holds no check); ``factor``, ``low``, ``high`` and ``cases`` the uptake factor,
    its 95 % interval and the cases of its fit (None when the agent is not calibrated, ``reason`` says why);
    ``code`` is ``UPTAKE_FACTOR_UNSUPPORTED`` for a factor outside
    :data:`estimator.limits.UPTAKE_FACTOR_SUPPORTED`, else None.
    """

    agent: str
    checked: int | None
    median_ratio: float | None
    ratio_low: float | None
    ratio_high: float | None
    factor: float | None
    low: float | None
    high: float | None
    cases: int | None
    code: str | None
    reason: str

    @property
    def status(self) -> str:
        """``"calibrated"`` or ``"not calibrated"``."""
        return "not calibrated" if self.factor is None else "calibrated"


def _code(factor: float | None, supported: Any = UPTAKE_FACTOR_SUPPORTED) -> str | None:
    lo, hi = supported
    return None if factor is None or lo <= factor <= hi else "UPTAKE_FACTOR_UNSUPPORTED"


def calibration_rows(doc: dict[str, Any]) -> list[CalibrationRow]:
    """One row an agent checked, of ``{"prediction_check": ..., "calibration": ...}``
    (:func:`estimator.planning.calibration.check_and_calibrate`).

    Examples
    --------
    >>> doc = {"prediction_check": {"agents": {"sevoflurane": {"cases": 3, "median_ratio": 1.1}}},
    ...        "calibration": {"agents": {}, "refused": {"sevoflurane": "3 usable case(s)"}}}
    >>> row = calibration_rows(doc)[0]
    >>> row.status, row.reason, row.ratio_low
    ('not calibrated', '3 usable case(s)', None)
    """
    check, cal = doc["prediction_check"], doc["calibration"]
    rows = []
    for agent, s in check["agents"].items():
        rec = cal["agents"].get(agent) or {}
        rows.append(
            CalibrationRow(
                agent=agent,
                checked=s["cases"],
                median_ratio=s["median_ratio"],
                ratio_low=s.get("low"),
                ratio_high=s.get("high"),
                factor=rec.get("factor"),
                low=rec.get("low"),
                high=rec.get("high"),
                cases=rec.get("cases"),
                code=_code(rec.get("factor"), rec.get("supported", UPTAKE_FACTOR_SUPPORTED)),
                reason=cal["refused"].get(agent, ""),
            )
        )
    return rows


def file_rows(calibration: Any) -> list[CalibrationRow]:
    """One row an agent of a calibration file (:class:`estimator.inputs.calibration_file.Calibration`).

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> cal = NS(agents={"desflurane": NS(factor=2.4, low=2.1, high=2.8, cases=30)})
    >>> row = file_rows(cal)[0]
    >>> row.factor, row.code
    (2.4, 'UPTAKE_FACTOR_UNSUPPORTED')
    """
    return [
        CalibrationRow(agent, None, None, None, None, a.factor, a.low, a.high, a.cases, _code(a.factor), "")
        for agent, a in calibration.agents.items()
    ]


def fit_text(row: CalibrationRow, sep: str = ", ") -> str:
    """The uptake factor with its interval and cases, or why the agent is not calibrated (text and HTML faces)."""
    if row.factor is None:
        return f"not calibrated: {row.reason}"
    return f"{row.factor:.2f} ({row.low:.2f}-{row.high:.2f}{sep}{row.cases} cases)"


def calibration_html(doc: dict[str, Any]) -> str:
    """The report section of ``{"prediction_check": ..., "calibration": ...}`` (every text escaped)."""
    esc = html.escape
    check, cal = doc["prediction_check"], doc["calibration"]
    rows = []
    for r in calibration_rows(doc):
        ci = f"{r.ratio_low:.2f}-{r.ratio_high:.2f}" if r.ratio_low is not None else "n/a"
        med = f"{r.median_ratio:.2f}" if r.median_ratio is not None else "n/a"
        rows.append(
            f"<tr><td>{esc(r.agent)}</td><td>{r.checked}</td><td>{med} ({ci})</td><td>{esc(fit_text(r, '; '))}</td></tr>"
        )
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

    check = doc["prediction_check"]
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
                "agent": r.agent,
                "cases checked": r.checked,
                "median recorded / predicted": r.median_ratio,
                "median, 95 % low": r.ratio_low,
                "median, 95 % high": r.ratio_high,
                "uptake factor": r.factor,
                "factor, 95 % low": r.low,
                "factor, 95 % high": r.high,
                "cases in the fit": r.cases,
                "not calibrated because": r.reason,
            }
            for r in calibration_rows(doc)
        ]
    )
    return {"prediction check": cases, "calibration": agents}
