"""The self-contained HTML reports: the fresh-gas audit and the tables of a case plan.

Safety: every user text is escaped; the page loads no script, font or stylesheet from anywhere and
draws its charts as inline SVG (:mod:`estimator.planning.svg_charts`). Column headers carry their unit
in square brackets, as in the CSV and XLSX exports (:mod:`estimator.planning.exports`).

Examples
--------
>>> page = tables_report_html("Plan <1>", {"totals": pd.DataFrame({"x": [1.0]})})
>>> "Plan &lt;1&gt;" in page and "<script" not in page
True
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..caution import CAUTION
from ..display import name as human_name
from ..display import text
from ..properties import CO2E_BASES
from ..units import GAS_VOLUME_REFERENCE
from .exports import column_header, export_table, kpi_rows, plain_cell
from .flow_classes import FLOW_CLASS_COLOURS, FLOW_CLASSES
from .svg_charts import svg_bars

if TYPE_CHECKING:
    from .audit_report import AuditResult


def _table(frame: pd.DataFrame, limit: int = 500) -> str:
    head = "".join(f"<th>{html.escape(str(c))}</th>" for c in frame.columns)
    body = []
    for rec in frame.head(limit).itertuples(index=False):
        cells = []
        for v in rec:
            v = plain_cell(v)
            cells.append(f"<td>{html.escape(text(v))}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    more = f"<p>{len(frame) - limit} more rows in the CSV/XLSX export.</p>" if len(frame) > limit else ""
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>{more}"


_STYLE = """body{font-family:system-ui,sans-serif;margin:2em;color:#1d2a33;max-width:1100px}
h1{font-size:1.5em}h2{font-size:1.15em;border-bottom:1px solid #c7d3db;padding-bottom:.2em;margin-top:1.6em}
table{border-collapse:collapse;font-size:.82em;margin:.5em 0}td,th{border:1px solid #d5dee4;padding:2px 6px}
th{background:#eef3f6;text-align:left}svg text{font-size:12px;fill:#1d2a33}svg .t{font-weight:600}
.caution{background:#fff6e0;border-left:4px solid #d9a400;padding:.6em}
li.safety{color:#8b1a1a;border-left:4px solid #b3261e;padding-left:.4em}li.warn{border-left:4px solid #d08c1b;padding-left:.4em}"""


def _page(title: str, body: str) -> str:
    """A self-contained HTML document: the escaped title as heading, our style, then ``body``."""
    esc = html.escape
    return f"""<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>{esc(title)}</title>
<style>{_STYLE}</style></head><body><h1>{esc(title)}</h1>{body}</body></html>"""


def marked_warnings(warnings: Sequence[tuple[str, str]] | None) -> list[tuple[str, str, bool]]:
    """(code, message, safety) of each code once, in order of first appearance: the distinct messages
    of one code (the model's and the flow floor's, say) joined by "; "; ``safety`` when the code is a
    clinical safety code of :data:`estimator.limits.CODES` (the reports mark those, as the app's pages do).

    >>> marked_warnings([("X", "a"), ("X", "a"), ("X", "b")])
    [('X', 'a; b', False)]
    """
    from ..limits import CODES

    by_code: dict[str, list[str]] = {}
    for c, m in warnings or ():
        if m not in by_code.setdefault(c, []):
            by_code[c].append(m)
    return [(c, "; ".join(ms), c in CODES and CODES[c].safety) for c, ms in by_code.items()]


def _warning_items(warnings: Sequence[tuple[str, str]] | None) -> str:
    """List items of (code, message) warnings, escaped, each once; a clinical safety code (estimator.limits)
    in red and marked "Safety:", as on the app's pages; one "None." item when there are none."""
    items = []
    for c, m, safety in marked_warnings(warnings):
        mark = '<li class="safety">Safety: ' if safety else '<li class="warn">'
        items.append(f"{mark}<b>{html.escape(c)}</b>: {html.escape(m)}</li>")
    return "".join(items) or "<li>None.</li>"


def _charts(result: AuditResult) -> list[str]:
    """The report's charts: each agent's liquid per room, CO2e per month, time per flow class."""
    label = CO2E_BASES[result.basis][1]
    rooms, months, k = result.rooms, result.months, result.kpis
    charts = [
        svg_bars(
            rooms["room"].astype(str).tolist(), rooms[col].tolist(), "mL", f"{human_name(col[7:-3])} delivered per room"
        )
        for col in _agent_columns(rooms)
    ]
    if len(months):
        charts.append(
            svg_bars(
                months["month"].astype(str).tolist(), months["co2e_kg"].tolist(), "kg", f"CO2e per month ({label})"
            )
        )
    shares = k["flow_class_shares"]
    charts.append(
        svg_bars(
            [
                f"up to {b:g} L/min" if math.isfinite(b) else f"over {FLOW_CLASSES[-2][1]:g} L/min"
                for _, b in FLOW_CLASSES
            ],
            [100 * (v if v == v else 0.0) for v in shares.values()],
            "%",
            "Share of maintenance time per flow class (Baum and Aitkenhead 1995; Brattwall et al. 2012)",
            colours=FLOW_CLASS_COLOURS,
            on_bar=list(shares),
        )
    )
    return charts


def _agent_columns(frame: pd.DataFrame) -> list[str]:
    """Columns of each agent's liquid (``liquid_<agent>_ml``) with some agent in them."""
    cols = [c for c in frame.columns if c.startswith("liquid_") and c.endswith("_ml")]
    return [c for c in cols if float(frame[c].sum()) > 0]


#: Cases shown on the report's per-case counterfactual chart (the largest savings; all are in the JSON).
CF_CASES_CHARTED = 20


def counterfactual_html(cf: dict[str, Any], basis_label: str) -> str:
    """The counterfactual section: totals (each agent apart), and the cases with the largest savings."""
    esc = html.escape
    t = cf["totals"]
    quantities = [("Fresh gas [L]", "fresh_gas"), (f"CO2e [kg, {basis_label}]", "co2e")]
    if "agent_liquid_by_agent" not in t["baseline"]:  # a document of an older version: all agents together
        quantities.insert(0, ("Liquid agent, all agents [mL]", "agent_liquid"))
    rows = [
        (
            f"{human_name(a)}, liquid [mL]",
            t["baseline"]["agent_liquid_by_agent"][a]["magnitude"],
            t["policy"]["agent_liquid_by_agent"][a]["magnitude"],
        )
        for a in t["baseline"].get("agent_liquid_by_agent", {})
    ] + [(q, t["baseline"][key]["magnitude"], t["policy"][key]["magnitude"]) for q, key in quantities]
    if "cost" in t.get("savings", {}):
        rows.append((f"Cost [{cf['currency']}]", t["baseline"]["cost"]["total"], t["policy"]["cost"]["total"]))
    table = pd.DataFrame(
        [(q, b, p, b - p) for q, b, p in rows], columns=["quantity", f"baseline ({cf['baseline']})", "policy", "saving"]
    )
    cases = sorted(cf.get("cases", []), key=lambda c: -c["savings"]["agent_liquid"]["magnitude"])[:CF_CASES_CHARTED]
    chart = svg_bars(
        [f"{c['case_id']} ({c['agent']})" for c in cases],
        [c["savings"]["agent_liquid"]["magnitude"] for c in cases],
        "mL",
        f"Liquid agent saved per case: the {len(cases)} largest of {len(cf.get('cases', []))} cases re-run",
        colours=("#0f6e6e",),
    )
    return (
        f"<h2>Counterfactual: {esc(str(cf['policy']['name']))}</h2><p>{esc(cf['method'])}. "
        f"Cases re-run: {t['cases']}; skipped: {len(cf['skipped'])}.</p>" + _table(table) + chart
    )


def report_html(result: AuditResult, title: str = "Fresh-gas audit") -> str:
    """The self-contained HTML report of an audit (with its counterfactual, when it was run)."""
    label = CO2E_BASES[result.basis][1]
    esc = html.escape
    rooms, months = result.rooms, result.months
    charts = _charts(result)
    cf = result.counterfactual
    cf_html = counterfactual_html(cf, label) if cf else ""
    mixed = ("agent_liquid_ml", "agent_vapour_l")  # all agents added together: in the CSV and JSON only
    totals = pd.DataFrame(
        [(column_header(c, label, result.currency), v) for c, v in result.totals.items() if c not in mixed],
        columns=["total", "value"],
    )
    kpi = pd.DataFrame(kpi_rows(result), columns=["kpi", "value"])
    rej = pd.DataFrame(result.rejections, columns=["line", "reason"])
    lab = lambda df: export_table(df, result, spreadsheet=False)  # noqa: E731 - headers with units
    warn = _warning_items(result.warnings)
    notes = "".join(f"<li>{esc(n)}</li>" for n in result.notes)
    return _page(
        title,
        f"""
<p>Rows read {result.rows["read"]}, used {result.rows["used"]}, rejected {result.rows["rejected"]}.
CO2e basis: {esc(label)}. Gas volumes: {esc(GAS_VOLUME_REFERENCE)}.
Costs: {esc(next((n[13:] for n in result.notes if n.startswith("prices used: ")), "no prices given"))}.</p>
<p class="caution">{esc(CAUTION)}</p>
<h2>Totals</h2>{_table(totals)}<h2>Key figures</h2>{_table(kpi)}
<h2>Charts</h2>{"".join(charts)}{cf_html}{_calibration_section(result)}
<h2>Rooms</h2>{_table(lab(rooms))}<h2>Months</h2>{_table(lab(months))}
<h2>Cases</h2>{_table(lab(result.cases))}
<h2>Rejected rows</h2>{_table(rej) if len(rej) else "<p>None.</p>"}
<h2>Warnings</h2><ul>{warn}</ul><h2>Method notes</h2><ul>{notes}</ul>
""",
    )


def _calibration_section(result: AuditResult) -> str:
    from .calibration_report import calibration_html

    return calibration_html(result.calibration) if result.calibration else ""


def write_html(result: AuditResult, path: str | Path, title: str = "Fresh-gas audit") -> Path:
    """Write the HTML report (UTF-8)."""
    path = Path(path)
    path.write_text(report_html(result, title), encoding="utf-8")
    return path


def tables_report_html(
    title: str,
    tables: dict[str, pd.DataFrame],
    *,
    notes: list[str] | None = None,
    warnings: list[tuple[str, str]] | None = None,
    limit: int = 500,
    charts: list[str] | None = None,
    advice: list[str] | None = None,
    after: dict[str, pd.DataFrame] | None = None,
) -> str:
    """A self-contained HTML report of named tables, with the caution and the warnings.

    Every text (title, headings, cells, notes, warnings) is escaped; nothing of the input becomes markup.
    Tables longer than ``limit`` rows are cut, with a line saying how many rows the CSV/XLSX hold.

    Parameters
    ----------
    title : str
        Heading and document title.
    tables : dict of str to pandas.DataFrame
        Section heading to table, in order.
    notes : list of str, optional
        Lines shown under the heading (units, references, the scenario's title).
    warnings : list of (code, message), optional
        Model warnings, listed in their own section.
    charts : list of str, optional
        Inline SVG charts made by :mod:`estimator.planning.svg_charts` (their labels escaped there),
        shown last.
    advice : list of str, optional
        Paragraphs under a "Monitoring" heading after the warnings.
    after : dict of str to pandas.DataFrame, optional
        Tables shown after the warnings and the advice (before the charts).

    Examples
    --------
    >>> page = tables_report_html("Case <1>", {"totals": pd.DataFrame({"q": ["<b>"], "v": [1.0]})})
    >>> "Case &lt;1&gt;" in page and "&lt;b&gt;" in page and "<b>" not in page
    True
    """
    esc = html.escape
    sections = "".join(f"<h2>{esc(str(name))}</h2>{_table(frame, limit)}" for name, frame in tables.items())
    later = "".join(f"<h2>{esc(str(name))}</h2>{_table(frame, limit)}" for name, frame in (after or {}).items())
    lines = "".join(f"<p>{esc(n)}</p>" for n in notes or ())
    warn = _warning_items(warnings)
    told = "<h2>Monitoring</h2>" + "".join(f"<p>{esc(a)}</p>" for a in advice) if advice else ""
    drawn = f"<h2>Charts</h2>{''.join(charts)}" if charts else ""
    return _page(
        title,
        f"""{lines}
<p class="caution">{esc(CAUTION)}</p>{sections}
<h2>Warnings</h2><ul>{warn}</ul>{told}{later}{drawn}
""",
    )
