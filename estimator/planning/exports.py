"""Exports of a fresh-gas audit: CSV and XLSX tables (the HTML report: :mod:`estimator.planning.html_report`).

Safety of exported files
------------------------
* Spreadsheet formula injection: a text cell that came from user input and starts with ``=``,
  ``+``, ``-``, ``@``, a tab or a carriage return is prefixed with a single quote, so a spreadsheet
  shows it as text instead of running it (OWASP, "CSV Injection"). Numbers stay numbers.
* The HTML report (:mod:`estimator.planning.html_report`) escapes all user text and loads nothing.

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

import io
import math
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..caution import about_rows
from ..display import name as human_name
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


def column_header(column: str, basis_label: str, currency: str | None) -> str:
    if column in LABELS:
        return LABELS[column]
    if column == "co2e_per_mac_hour_kg":
        return f"CO2e per MAC-hour [kg CO2e, {basis_label}]"
    if column.startswith("cost_"):
        return f"{column.replace('_', ' ')} [{currency}]"
    if column.startswith("liquid_") and column.endswith("_ml"):
        return f"{human_name(column[7:-3])}, liquid [mL]"
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
    out.columns = [guard(column_header(c, label, result.currency)) for c in out.columns]
    return out


def kpi_rows(result: AuditResult) -> list[tuple[str, Any]]:
    rows: list[tuple[str, Any]] = []
    for k, v in result.kpis.items():
        if isinstance(v, dict):
            rows += [(f"{LABELS.get(k, k.replace('_', ' '))}: {n}", x) for n, x in v.items()]
        else:
            rows.append((column_header(k, CO2E_BASES[result.basis][1], result.currency), v))
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
            ws.append([plain_cell(v) for v in rec])
        for row in ws.iter_rows():
            for cell in row:
                if isinstance(cell.value, str):
                    cell.data_type = "s"  # never a formula, whatever the text

    sheet("cases", export_table(result.cases, result))
    sheet("rooms", export_table(result.rooms, result))
    sheet("months", export_table(result.months, result))
    sheet("kpis", pd.DataFrame(kpi_rows(result), columns=["kpi", "value"]))
    sheet(
        "rejections", pd.DataFrame([(line, neutralise(r)) for line, r in result.rejections], columns=["line", "reason"])
    )
    if result.calibration:  # audit --calibrate: the prediction check and the uptake factors
        from .calibration_report import calibration_frames

        for name, frame in calibration_frames(result.calibration).items():
            sheet(name, frame)
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


def plain_cell(v: Any) -> Any:
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v
