"""Exports of a fresh-gas audit: CSV and XLSX tables and a self-contained HTML report.

Safety of exported files
------------------------
* Spreadsheet formula injection: a text cell that came from user input and starts with ``=``,
  ``+``, ``-``, ``@``, a tab or a carriage return is prefixed with a single quote, so a spreadsheet
  shows it as text instead of running it (OWASP, "CSV Injection"). Numbers stay numbers.
* The HTML report escapes all user text, loads no script, font or stylesheet from anywhere, and
  draws its charts as inline SVG generated here.

Column headers carry their unit in square brackets, the CO2e columns their basis, and the cost
columns the currency label.

References
----------
.. [1] OWASP Foundation. CSV Injection (owasp.org/www-community/attacks/CSV_Injection).

Examples
--------
>>> neutralise("=HYPERLINK(\\"x\\")"), neutralise("-2+3"), neutralise("OR 1"), neutralise(-2.0)
('\\'=HYPERLINK("x")', "'-2+3", 'OR 1', -2.0)
"""

from __future__ import annotations

import html
import io
import math
from collections.abc import Sequence
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..caution import CAUTION, about_rows
from ..properties import CO2E_BASES
from ..units import GAS_VOLUME_REFERENCE
from .audit_report import SUFFIX_UNITS

if TYPE_CHECKING:
    from .audit_report import AuditResult

FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")


def neutralise(value: Any) -> Any:
    """Make a text cell safe for spreadsheets (prefix ``'`` before a formula trigger)."""
    if isinstance(value, str) and value.startswith(FORMULA_PREFIXES):
        return "'" + value
    return value


#: Readable names of columns and KPIs whose key alone reads badly.
LABELS = {
    "maintenance_share_le_1": "share of maintenance time at or below 1 L/min",
    "maintenance_share_le_0_5": "share of maintenance time at or below 0.5 L/min",
    "mac_hours": "MAC-hours",
    "cases_with_mac_hours": "cases with MAC-hours",
    "cases_without_mac_hours": "cases without MAC-hours",
    "mac_hours_note": "MAC-hours note",
    "min_inspired_oxygen": "lowest inspired O2 (fraction)",
    "flow_class_shares": "share of maintenance time",
    "flow_class_bounds_l_min": "flow class upper bound [L/min]",
}


def _header(column: str, basis_label: str, currency: str | None) -> str:
    if column in LABELS:
        return LABELS[column]
    if column == "co2e_per_mac_hour_kg":
        return f"CO2e per MAC-hour [kg CO2e, {basis_label}]"
    if column.startswith("cost_"):
        return f"{column.replace('_', ' ')} [{currency}]"
    for suffix, unit in SUFFIX_UNITS:
        if column.endswith(suffix):
            name = column[: -len(suffix)].replace("_", " ")
            if unit == "kg" and name.startswith("co2e"):
                return f"{name.replace('co2e', 'CO2e')} [kg CO2e, {basis_label}]"
            return f"{name} [{'years' if unit == 'year' else unit}]"
    return column.replace("_", " ")


def export_table(df: pd.DataFrame, result: AuditResult, *, spreadsheet: bool = True) -> pd.DataFrame:
    """A case, room or month table with unit headers; text cells neutralised for spreadsheets."""
    label = CO2E_BASES[result.basis][1]
    out = df.copy()
    guard = neutralise if spreadsheet else (lambda v: v)
    for c in out.columns:
        if out[c].dtype == object or pd.api.types.is_string_dtype(out[c]):
            out[c] = out[c].map(guard)
    out.columns = [guard(_header(c, label, result.currency)) for c in out.columns]
    return out


def _kpi_rows(result: AuditResult) -> list[tuple[str, Any]]:
    rows: list[tuple[str, Any]] = []
    for k, v in result.kpis.items():
        if isinstance(v, dict):
            rows += [(f"{LABELS.get(k, k.replace('_', ' '))}: {n}", x) for n, x in v.items()]
        else:
            rows.append((_header(k, CO2E_BASES[result.basis][1], result.currency), v))
    return rows


def csv_text(frame: pd.DataFrame, made_by: str, inputs: dict[str, bytes | None] | None = None) -> str:
    """A table as CSV text led by ``#`` lines: the caution and who made it (:func:`~estimator.caution.comment_lines`).

    Lines end in ``\\n`` on every platform; write the text with ``newline=""`` or as bytes.

    Examples
    --------
    >>> text = csv_text(pd.DataFrame({"a": [1]}), "lowflow case")
    >>> text.splitlines()[0][:17], text.splitlines()[-2:]
    ('# caution: Planni', ['a', '1'])
    """
    from ..caution import comment_lines

    return comment_lines(made_by, inputs) + frame.to_csv(index=False, lineterminator="\n")


def read_csv_export(source: str | Path | IO[str]) -> pd.DataFrame:
    """Read a CSV export of this package: the leading ``#`` lines are skipped, every other line is data
    (a text cell may hold ``#``, which ``pandas.read_csv(comment="#")`` would cut).

    Examples
    --------
    >>> import io
    >>> read_csv_export(io.StringIO(csv_text(pd.DataFrame({"room": ["OR #2"]}), "x")))["room"].tolist()
    ['OR #2']
    """
    text = Path(source).read_text(encoding="utf-8") if isinstance(source, str | Path) else source.read()
    lines = text.splitlines(keepends=True)
    skip = next((i for i, line in enumerate(lines) if not line.startswith("#")), len(lines))
    return pd.read_csv(io.StringIO("".join(lines[skip:])))


def write_csv(result: AuditResult, path: str | Path, made_by: str = "lowflow audit") -> Path:
    """Write the per-case table as CSV (UTF-8), led by the caution and the generator line."""
    path = Path(path)
    path.write_text(csv_text(export_table(result.cases, result), made_by), encoding="utf-8", newline="")
    return path


def write_xlsx(result: AuditResult, path: str | Path, made_by: str = "lowflow audit") -> Path:
    """Write an XLSX workbook: cases, rooms, months, KPIs, rejections and an about sheet."""
    from openpyxl import Workbook

    path = Path(path)
    wb = Workbook()
    wb.remove(wb.active)

    def sheet(name: str, frame: pd.DataFrame) -> None:
        ws = wb.create_sheet(name)
        ws.append([str(neutralise(c)) for c in frame.columns])
        for rec in frame.itertuples(index=False):
            ws.append([_cell(v) for v in rec])
        for row in ws.iter_rows():
            for cell in row:
                if isinstance(cell.value, str):
                    cell.data_type = "s"  # never a formula, whatever the text

    sheet("cases", export_table(result.cases, result))
    sheet("rooms", export_table(result.rooms, result))
    sheet("months", export_table(result.months, result))
    sheet("kpis", pd.DataFrame(_kpi_rows(result), columns=["kpi", "value"]))
    sheet(
        "rejections", pd.DataFrame([(line, neutralise(r)) for line, r in result.rejections], columns=["line", "reason"])
    )
    about = [
        ("rows read", result.rows["read"]),
        ("rows used", result.rows["used"]),
        ("rows rejected", result.rows["rejected"]),
        ("CO2e basis", CO2E_BASES[result.basis][1]),
        ("gas volumes", GAS_VOLUME_REFERENCE),
        ("currency", neutralise(result.currency or "no prices")),
        *[("note", n) for n in result.notes],
        *[(f"warning {c}", neutralise(m)) for c, m in result.warnings],
        *about_rows(made_by),
    ]
    sheet("about", pd.DataFrame(about, columns=["item", "value"]))
    wb.save(path)
    return path


def _cell(v: Any) -> Any:
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


# ----------------------------------------------------------------------------- HTML report
def svg_bars(
    labels: list[str],
    values: list[float],
    unit: str,
    title: str,
    *,
    width: int = 640,
    colours: tuple[str, ...] = ("#3b6e8f",),
) -> str:
    """A horizontal bar chart as an inline SVG string (labels escaped).

    >>> "<svg" in svg_bars(["a<b"], [1.0], "mL", "t") and "a&lt;b" in svg_bars(["a<b"], [1.0], "mL", "t")
    True
    """
    vals = [0.0 if v is None or not math.isfinite(v) else float(v) for v in values]
    top = max([abs(v) for v in vals] + [1e-12])
    bar_h, gap, left, right = 18, 6, 170, 110
    height = 28 + len(vals) * (bar_h + gap)
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" role="img" '
        f'aria-label="{html.escape(title)}">',
        f'<text x="0" y="16" class="t">{html.escape(title)}</text>',
    ]
    span = width - left - right
    for i, (lab, v) in enumerate(zip(labels, vals, strict=True)):
        y = 28 + i * (bar_h + gap)
        w = span * abs(v) / top
        fill = colours[i % len(colours)]
        parts.append(f'<text x="{left - 6}" y="{y + 13}" text-anchor="end">{html.escape(str(lab)[:28])}</text>')
        parts.append(f'<rect x="{left}" y="{y}" width="{w:.1f}" height="{bar_h}" fill="{fill}"/>')
        parts.append(f'<text x="{left + w + 4:.1f}" y="{y + 13}">{v:.3g} {html.escape(unit)}</text>')
    parts.append("</svg>")
    return "".join(parts)


def _table(frame: pd.DataFrame, limit: int = 500) -> str:
    head = "".join(f"<th>{html.escape(str(c))}</th>" for c in frame.columns)
    body = []
    for rec in frame.head(limit).itertuples(index=False):
        cells = []
        for v in rec:
            v = _cell(v)
            text = "" if v is None else (f"{v:.4g}" if isinstance(v, float) else str(v))
            cells.append(f"<td>{html.escape(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    more = f"<p>{len(frame) - limit} more rows in the CSV/XLSX export.</p>" if len(frame) > limit else ""
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>{more}"


_STYLE = """body{font-family:system-ui,sans-serif;margin:2em;color:#1d2a33;max-width:1100px}
h1{font-size:1.5em}h2{font-size:1.15em;border-bottom:1px solid #c7d3db;padding-bottom:.2em;margin-top:1.6em}
table{border-collapse:collapse;font-size:.82em;margin:.5em 0}td,th{border:1px solid #d5dee4;padding:2px 6px}
th{background:#eef3f6;text-align:left}svg text{font-size:12px;fill:#1d2a33}svg .t{font-weight:600}
.caution{background:#fff6e0;border-left:4px solid #d9a400;padding:.6em}"""


def _page(title: str, body: str) -> str:
    """A self-contained HTML document: the escaped title as heading, our style, then ``body``."""
    esc = html.escape
    return f"""<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>{esc(title)}</title>
<style>{_STYLE}</style></head><body><h1>{esc(title)}</h1>{body}</body></html>"""


def _warning_items(warnings: Sequence[tuple[str, str]] | None) -> str:
    """List items of (code, message) warnings, escaped; one "None." item when there are none."""
    items = "".join(f"<li><b>{html.escape(c)}</b>: {html.escape(m)}</li>" for c, m in warnings or ())
    return items or "<li>None.</li>"


def report_html(result: AuditResult, title: str = "Fresh-gas audit") -> str:
    """The self-contained HTML report of an audit."""
    label = CO2E_BASES[result.basis][1]
    esc = html.escape
    k = result.kpis
    rooms, months = result.rooms, result.months
    charts = [
        svg_bars(
            rooms["room"].astype(str).tolist(),
            rooms["agent_liquid_ml"].tolist(),
            "mL",
            "Liquid agent delivered per room",
        )
        if len(rooms)
        else "",
        svg_bars(months["month"].astype(str).tolist(), months["co2e_kg"].tolist(), "kg", f"CO2e per month ({label})")
        if len(months)
        else "",
        svg_bars(
            list(k["flow_class_shares"]),
            [100 * (v if v == v else 0.0) for v in k["flow_class_shares"].values()],
            "%",
            "Share of maintenance time per flow class (Baum and Aitkenhead 1995; Brattwall et al. 2012)",
            colours=("#5b8c5a", "#7aa35f", "#a7b94f", "#d9a400", "#d9742b", "#c0392b"),
        ),
    ]
    cf = result.counterfactual
    cf_html = ""
    if cf:
        t = cf["totals"]
        names = ["agent liquid [mL]", "fresh gas [L]", f"CO2e [kg, {label}]"]
        keys = ["agent_liquid", "fresh_gas", "co2e"]
        vals_b = [t["baseline"][x]["magnitude"] for x in keys]
        vals_p = [t["policy"][x]["magnitude"] for x in keys]
        rows = pd.DataFrame(
            {
                "quantity": names,
                cf["baseline"]: vals_b,
                "policy": vals_p,
                "saving": [b - p for b, p in zip(vals_b, vals_p, strict=True)],
            }
        )
        cf_html = (
            f"<h2>Counterfactual: {esc(str(cf['policy']['name']))}</h2><p>{esc(cf['method'])}. "
            f"Cases re-run: {t['cases']}; skipped: {len(cf['skipped'])}.</p>"
            + _table(rows)
            + svg_bars(
                [f"{n} ({s})" for n in ("agent", "CO2e") for s in (cf["baseline"], "policy")],
                [vals_b[0], vals_p[0], vals_b[2], vals_p[2]],
                "",
                "Baseline against policy",
                colours=("#3b6e8f", "#5b8c5a"),
            )
        )
    totals = pd.DataFrame(
        [(_header(c, label, result.currency), v) for c, v in result.totals.items()], columns=["total", "value"]
    )
    kpi = pd.DataFrame(_kpi_rows(result), columns=["kpi", "value"])
    rej = pd.DataFrame(result.rejections, columns=["line", "reason"])
    lab = lambda df: export_table(df, result, spreadsheet=False)  # noqa: E731 - headers with units
    warn = _warning_items(result.warnings)
    notes = "".join(f"<li>{esc(n)}</li>" for n in result.notes)
    return _page(
        title,
        f"""
<p>Rows read {result.rows["read"]}, used {result.rows["used"]}, rejected {result.rows["rejected"]}.
CO2e basis: {esc(label)}. Gas volumes: {esc(GAS_VOLUME_REFERENCE)}.
Costs: {esc(result.currency or "no prices given")}.</p>
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

    Examples
    --------
    >>> page = tables_report_html("Case <1>", {"totals": pd.DataFrame({"q": ["<b>"], "v": [1.0]})})
    >>> "Case &lt;1&gt;" in page and "&lt;b&gt;" in page and "<b>" not in page
    True
    """
    esc = html.escape
    sections = "".join(f"<h2>{esc(str(name))}</h2>{_table(frame, limit)}" for name, frame in tables.items())
    lines = "".join(f"<p>{esc(n)}</p>" for n in notes or ())
    warn = _warning_items(warnings)
    return _page(
        title,
        f"""{lines}
<p class="caution">{esc(CAUTION)}</p>{sections}
<h2>Warnings</h2><ul>{warn}</ul>
""",
    )
