"""The printable case plan as an A4 PDF, drawn by fpdf2 (the optional ``pdf`` extra).

The same plan as the HTML page, read from the same :class:`~estimator.planning.case_plan.CasePlan`
and in the same order: title, notes, the clinical caution, phases with flows and dial, flow floor,
totals, warnings (safety codes marked, each once), monitoring advice, the dial every 10 minutes, then
the charts, drawn with fpdf2's lines (no image, no script). Every page carries the caution and its
number in the footer. Long cells wrap inside their column; a table that runs over a page repeats its
header row.

The PDF's built-in fonts hold Latin-1 only: other characters are written as their nearest ASCII
(``>=`` for a greater-or-equal sign, a space for a narrow one) or, failing that, ``?``
(:func:`latin1`). fpdf2 is imported only when a PDF is drawn, so the package imports without it.

References
----------
fpdf2 documentation, "Tables" and "Page header and footer" (the layout calls used here).
"""

from __future__ import annotations

import math
import unicodedata
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..caution import CAUTION
from ..display import text as shown
from ..errors import InputError
from .case_plan import CasePlan, PlanChart, case_plan
from .exports import plain_cell
from .html_report import marked_warnings
from .svg_charts import SERIES

if TYPE_CHECKING:
    from fpdf import FPDF

#: How to install what the PDF needs (the ``pdf`` extra: fpdf2), as the error and the docs say it.
PDF_EXTRA = 'pip install "lowflow-estimator[pdf]"'

#: Page margins [mm] and the height kept free for the footer (caution and page number) [mm].
MARGIN, FOOTER = 15.0, 22.0

#: Height of one chart [mm]: the plan's four fit on one A4 page under their heading.
CHART_HEIGHT = 56.0

#: Characters outside Latin-1 that the plans use, and what the PDF writes for them.
_ASCII = {
    "\u202f": " ",  # narrow no-break space: thousands separator of estimator.display
    "\u2009": " ",
    "\u2013": "-",
    "\u2014": "-",
    "\u2212": "-",
    "\u2018": "'",
    "\u2019": "'",
    "\u201c": '"',
    "\u201d": '"',
    "\u2026": "...",
    "\u2022": "-",
    "\u2192": "->",
    "\u2264": "<=",
    "\u2265": ">=",
    "\u2248": "~",
}


def latin1(value: str) -> str:
    """``value`` in the characters the PDF's built-in fonts hold (Latin-1); see the module doc.

    >>> latin1("1\u202f234 mL \u2265 5 \u00b0C, CO\u2082, \u4e2d")
    '1 234 mL >= 5 \u00b0C, CO2, ?'
    """
    out = []
    for ch in value:
        ch = _ASCII.get(ch, ch)
        if len(ch) == 1 and ord(ch) > 255:
            ch = unicodedata.normalize("NFKD", ch)
            ch = ch if ch.isascii() and ch.isprintable() else "?"
        out.append(ch)
    return "".join(out)


def pdf_available() -> bool:
    """True when fpdf2 (the ``pdf`` extra) is installed; found without importing it (the import takes
    about a second, which the app's first page would otherwise wait for)."""
    from importlib.util import find_spec

    try:
        return find_spec("fpdf") is not None
    except (ImportError, ValueError):
        return False


def _require() -> None:
    if not pdf_available():
        raise InputError("PDF plan", "fpdf2 not installed", f"the pdf extra: {PDF_EXTRA} (or uv sync in a checkout)")


def _document(title: str) -> FPDF:
    """An A4 portrait document whose footer carries the caution and the page number."""
    from fpdf import FPDF

    class _Plan(FPDF):
        def footer(self) -> None:
            self.set_y(-FOOTER + 4)
            self.set_font("Helvetica", "", 6.5)
            self.set_text_color(70, 70, 70)
            self.multi_cell(0, 2.8, latin1(CAUTION), align="L")
            self.cell(0, 3.2, f"Page {self.page_no()} of {{nb}}", align="R")

    pdf = _Plan(orientation="portrait", unit="mm", format="A4")
    pdf.set_margins(MARGIN, MARGIN, MARGIN)
    pdf.set_auto_page_break(True, margin=FOOTER)
    pdf.set_title(latin1(title))
    pdf.set_creator("lowflow-estimator")
    pdf.add_page()
    return pdf


def _para(
    pdf: FPDF, line: str, size: float = 9.0, style: str = "", colour: tuple[int, int, int] = (29, 42, 51)
) -> None:
    from fpdf.enums import XPos, YPos

    pdf.set_font("Helvetica", style, size)
    pdf.set_text_color(*colour)
    pdf.multi_cell(0, size * 0.45, latin1(line), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def _heading(pdf: FPDF, name: str, room: float = 18.0) -> None:
    """A section heading, on a new page when less than ``room`` [mm] of what it heads would follow it."""
    if pdf.will_page_break(room):
        pdf.add_page()
    pdf.ln(3)
    _para(pdf, name, 11.0, "B")
    pdf.set_draw_color(199, 211, 219)
    pdf.line(pdf.l_margin, pdf.get_y(), pdf.w - pdf.r_margin, pdf.get_y())
    pdf.ln(1.5)


def column_widths(natural: list[float], room: float) -> list[float]:
    """Widths [mm] of columns whose content wants ``natural``: as wanted when they fit in ``room``,
    else the widest cut to one common width so that all fit (their text then wraps).

    >>> column_widths([10.0, 20.0], 100.0), column_widths([10.0, 80.0, 60.0], 100.0)
    ([10.0, 20.0], [10.0, 45.0, 45.0])
    """
    if sum(natural) <= room:
        return list(natural)
    ordered = sorted(natural)
    left, cap = room, room / len(natural)
    for i, w in enumerate(ordered):
        cap = left / (len(ordered) - i)
        if w > cap:
            break
        left -= w
    return [min(w, cap) for w in natural]


def _cells(frame: pd.DataFrame) -> list[list[str]]:
    """Header and rows of a table as the HTML shows them (estimator.display rounding, blanks for None)."""
    rows = [[str(c) for c in frame.columns]]
    rows += [[latin1(shown(plain_cell(v))) for v in rec] for rec in frame.itertuples(index=False)]
    return [[latin1(c) for c in row] for row in rows]


def _table(pdf: FPDF, frame: pd.DataFrame) -> None:
    from fpdf.fonts import FontFace

    rows = _cells(frame)
    if len(rows) == 1:
        _para(pdf, "None.")
        return
    size = 8.0
    pdf.set_font("Helvetica", "", size)
    pdf.set_text_color(29, 42, 51)
    pdf.set_draw_color(213, 222, 228)
    pdf.set_fill_color(255, 255, 255)  # cells on white (fpdf2 fills with the colour last set)
    pad = 2 * pdf.c_margin + 1.0  # the cell's inner margins, and some air
    wide = [max(pdf.get_string_width(r[j]) for r in rows[1:]) for j in range(len(rows[0]))]
    pdf.set_font("Helvetica", "B", size)  # the header row: bold, wrapped between words at most
    natural = [
        max(w, *(pdf.get_string_width(p) for p in h.split() or [""])) + pad for w, h in zip(wide, rows[0], strict=True)
    ]
    pdf.set_font("Helvetica", "", size)
    widths = column_widths(natural, pdf.epw)
    head = FontFace(emphasis="BOLD", fill_color=(238, 243, 246))
    with pdf.table(
        width=sum(widths),
        col_widths=tuple(widths),
        align="LEFT",
        text_align="LEFT",
        line_height=size * 0.45,
        headings_style=head,
    ) as table:
        for r in rows:
            row = table.row()
            for c in r:
                row.cell(c)


def _warnings(pdf: FPDF, warnings: list[tuple[str, str]]) -> None:
    items = marked_warnings(warnings)
    if not items:
        _para(pdf, "None.")
    for code, message, safety in items:
        if safety:
            _para(pdf, f"Safety: {code}: {message}", 9.0, "B", (139, 26, 26))
        else:
            _para(pdf, f"{code}: {message}")
        pdf.ln(0.8)


def _rgb(colour: str) -> tuple[int, int, int]:
    return int(colour[1:3], 16), int(colour[3:5], 16), int(colour[5:7], 16)


def _chart(pdf: FPDF, chart: PlanChart, height: float = CHART_HEIGHT) -> None:
    """One time course: title, legend, axes with their end values, one line a series (as the SVG)."""
    if pdf.will_page_break(height + 2):
        pdf.add_page()
    x_left, top = pdf.l_margin, pdf.get_y() + 2
    left, width = x_left + 16, pdf.epw - 18
    plot_top, plot_h = top + 12, height - 23
    pdf.set_text_color(29, 42, 51)
    pdf.set_font("Helvetica", "B", 9)
    pdf.text(x_left, top + 3, latin1(chart.title))
    pdf.set_font("Helvetica", "", 7.5)
    pdf.text(x_left, top + 8.5, latin1(chart.y_title))  # the y axis' title, then the legend on its row
    lx = max(left + 20, x_left + pdf.get_string_width(latin1(chart.y_title)) + 8)
    for i, name in enumerate(chart.series):
        pdf.set_fill_color(*_rgb(SERIES[i % len(SERIES)]))
        pdf.rect(lx, top + 7.2, 5, 1.2, style="F")
        pdf.text(lx + 6.5, top + 8.5, latin1(name))
        lx += pdf.get_string_width(latin1(name)) + 16
    xs = [float(v) for v in chart.x]
    ys = [float(v) for vals in chart.series.values() for v in vals if v is not None and math.isfinite(float(v))]
    x0, x1 = (min(xs), max(xs)) if xs else (0.0, 1.0)
    y0, y1 = min(ys + [0.0]), max(ys + [1e-12])
    x1 = x1 if x1 > x0 else x0 + 1.0
    y1 = y1 if y1 > y0 else y0 + 1.0

    def px(v: float) -> float:
        return left + width * (v - x0) / (x1 - x0)

    def py(v: float) -> float:
        return plot_top + plot_h * (1 - (v - y0) / (y1 - y0))

    pdf.set_draw_color(138, 143, 152)
    pdf.set_line_width(0.2)
    pdf.line(left, plot_top, left, plot_top + plot_h)
    pdf.line(left, plot_top + plot_h, left + width, plot_top + plot_h)
    for label, y in ((shown(y1), py(y1) + 1), (shown(y0), py(y0))):
        pdf.text(left - 1.5 - pdf.get_string_width(latin1(label)), y, latin1(label))
    base = plot_top + plot_h + 3.5
    pdf.text(left, base, latin1(shown(x0)))
    pdf.text(left + width - pdf.get_string_width(latin1(shown(x1))), base, latin1(shown(x1)))
    pdf.text(left + width / 2 - pdf.get_string_width(latin1(chart.x_title)) / 2, base + 4, latin1(chart.x_title))
    pdf.set_line_width(0.45)
    for i, vals in enumerate(chart.series.values()):
        pdf.set_draw_color(*_rgb(SERIES[i % len(SERIES)]))
        points = [(px(a), py(float(b))) for a, b in zip(xs, vals, strict=True) if b is not None and math.isfinite(b)]
        if len(points) > 1:
            pdf.polyline(points)
    pdf.set_line_width(0.2)
    pdf.set_y(top + height)


def plan_pdf(plan: CasePlan, *, compress: bool = True) -> bytes:
    """A :class:`~estimator.planning.case_plan.CasePlan` as the bytes of an A4 PDF (see the module doc).

    Parameters
    ----------
    plan : CasePlan
        The plan, as :func:`~estimator.planning.case_plan.case_plan` gathers it.
    compress : bool, optional
        Compress the page streams (the default; tests read the text of an uncompressed file).

    Returns
    -------
    bytes
        The PDF file.

    Raises
    ------
    InputError
        When fpdf2 is not installed (the message names the ``pdf`` extra).
    """
    _require()
    pdf = _document(plan.title)
    pdf.set_compression(compress)
    _para(pdf, plan.title, 15.0, "B")
    pdf.ln(1)
    for note in plan.notes:
        _para(pdf, note)
    pdf.ln(1.5)
    pdf.set_fill_color(255, 246, 224)
    from fpdf.enums import XPos, YPos

    pdf.set_font("Helvetica", "", 9)
    pdf.multi_cell(0, 4.2, latin1(CAUTION), align="L", fill=True, new_x=XPos.LMARGIN, new_y=YPos.NEXT)
    for name, frame in plan.tables.items():
        _heading(pdf, name)
        _table(pdf, frame)
    _heading(pdf, "Warnings")
    _warnings(pdf, plan.warnings)
    _heading(pdf, "Monitoring")
    _para(pdf, plan.monitoring)
    for name, frame in plan.after.items():
        _heading(pdf, name)
        _table(pdf, frame)
    if plan.charts:
        _heading(pdf, "Charts", CHART_HEIGHT + 14)
        for chart in plan.charts:
            _chart(pdf, chart)
    return bytes(pdf.output())


def case_plan_pdf(result: Any, floor: Any | None = None, band: Any | None = None, *, compress: bool = True) -> bytes:
    """The printable plan of a simulated case as an A4 PDF: :func:`plan_pdf` of
    :func:`~estimator.planning.case_plan.case_plan` (the HTML plan's content, in its order).

    Examples
    --------
    >>> import estimator
    >>> sc = estimator.scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", "end_tidal_target": "1 MAC"}]})
    >>> case_plan_pdf(estimator.simulate(sc))[:5] if pdf_available() else b"%PDF-"
    b'%PDF-'
    """
    return plan_pdf(case_plan(result, floor, band), compress=compress)


__all__ = ["PDF_EXTRA", "case_plan_pdf", "column_widths", "latin1", "pdf_available", "plan_pdf"]
