"""Shared pieces of every page: the caution, display units, uploads with a size cap, downloads.

Nothing here computes a model result; it formats what ``estimator`` returns.
"""

from __future__ import annotations

import io
import json
from typing import TYPE_CHECKING, Any

import streamlit as st

from estimator.caution import CAUTION
from estimator.errors import InputError

if TYPE_CHECKING:
    import pandas as pd

#: Largest upload accepted, checked on the bytes received [bytes].
MAX_UPLOAD_BYTES = 20 * 1024 * 1024

FLOW_UNITS = ("L/min", "mL/min")
PRESSURE_UNITS = ("bar", "kPa", "psi")
MASS_UNITS = ("kg", "lb")
_FLOW_SCALE = {"L/min": 1.0, "mL/min": 1000.0}


def caution() -> None:
    """The safety caution, shown at the top of every page."""
    st.warning(CAUTION, icon=":material/health_and_safety:")


def unit(kind: str) -> str:
    """The display unit the user chose for ``kind`` (flow, pressure, mass) or the currency label."""
    defaults = {"flow": FLOW_UNITS[0], "pressure": PRESSURE_UNITS[0], "mass": MASS_UNITS[0], "currency": ""}
    return st.session_state.get(f"unit.{kind}", defaults[kind])


def unit_selectors() -> None:
    """Sidebar selectors of the display units (kept in session state under ``unit.*``)."""
    st.sidebar.subheader("Display units")
    c1, c2 = st.sidebar.columns(2)
    c1.selectbox("Flow", FLOW_UNITS, key="unit.flow")
    c2.selectbox("Pressure", PRESSURE_UNITS, key="unit.pressure")
    c1.selectbox("Mass", MASS_UNITS, key="unit.mass")
    c2.text_input(
        "Currency label",
        key="unit.currency",
        max_chars=40,
        help="Shown beside costs. A label only: no exchange rate is applied.",
    )


def flow_factor() -> float:
    """Display flow per L/min."""
    return _FLOW_SCALE[unit("flow")]


def to_display(q: Any, kind: str) -> float:
    """Magnitude of a pint quantity in the chosen display unit of ``kind``."""
    return float(q.to(unit(kind)).magnitude)


def read_upload(upload: Any, field: str, limit: int = MAX_UPLOAD_BYTES) -> str:
    """Text of an uploaded file, refusing more than ``limit`` bytes or text that is not UTF-8.

    The bytes are only decoded here; callers parse them (TOML or CSV) and never execute them.
    """
    data = upload.getvalue()
    if len(data) > limit:
        raise InputError(field, f"{len(data) / 1e6:.1f} MB", f"a file of at most {limit / 1e6:.0f} MB")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(field, upload.name, "a UTF-8 text file") from None


def show_error(exc: InputError) -> None:
    """One readable line for a user error: field (rows counted from 1, as the tables show them), value
    and what is accepted."""
    from estimator.display import field_path

    shown = InputError(field_path(exc.field), exc.value, exc.expected) if isinstance(exc, InputError) else exc
    st.error(f"Input not accepted: {shown}", icon=":material/error:")


def warning_pairs(warnings: Any) -> list[tuple[str, str]]:
    """(code, message) pairs of warnings given as pairs or as JSON dicts with code and message."""
    return [(w["code"], w["message"]) if isinstance(w, dict) else tuple(w) for w in warnings or ()]


#: Start of the text of a warning shown in red: a clinical safety limit of the registry is at stake.
SAFETY_PREFIX = "Safety:"


def show_warnings(warnings: Any, empty: str | None = None) -> None:
    """Model warnings as (code, message) pairs, or dicts with code and message, each code once (its
    distinct messages joined, as in the reports: :func:`estimator.planning.html_report.marked_warnings`).

    The title is the code's plain meaning from :mod:`estimator.limits`, the code follows in the text
    (and in every file). A clinical safety code (``Code.safety``, such as an inspired O2 below its
    threshold) is shown in red, every other warning in amber: the same on every page.
    """
    from estimator.limits import CODES
    from estimator.planning.html_report import marked_warnings

    items = marked_warnings(warning_pairs(warnings))
    for code, message, safety in items:
        entry = CODES.get(code)
        title = entry.meaning[:1].upper() + entry.meaning[1:] if entry else code
        if safety:
            st.error(f"{SAFETY_PREFIX} **{title}** - {message} (`{code}`)", icon=":material/emergency_home:")
        else:
            st.warning(f"**{title}** - {message} (`{code}`)", icon=":material/report:")
    if not items and empty:
        st.success(empty, icon=":material/check_circle:")


def flag(warnings: Any, codes: tuple[str, ...]) -> tuple[str, str, str] | None:
    """The most severe of ``codes`` among the warnings: (``"safety"`` or ``"warning"``, plain meaning, code).

    A clinical safety code of :mod:`estimator.limits` (``Code.safety``) is ``"safety"``; None when no code is raised.
    """
    from estimator.limits import CODES

    raised = [CODES[c] for c, _ in warning_pairs(warnings) if c in codes and c in CODES]
    if not raised:
        return None
    worst = next((c for c in raised if c.safety), raised[0])
    return ("safety" if worst.safety else "warning", worst.meaning, worst.name)


#: Longest note under a metric [characters]: a third of a 1440 px page shows it whole (measured in chromium).
METRIC_NOTE_CHARS = 36


def metric(box: Any, label: str, value: str, flagged: tuple[str, str, str] | None = None, **kwargs: Any) -> None:
    """A metric flagged by severity: a safety flag in red with a falling arrow, a warning in amber, each
    with its plain meaning (the full text and the code in the tooltip).

    The same rule as :func:`show_warnings`, so a metric and its warning carry the same severity on every
    page. Streamlit releases without coloured deltas show a safety flag as a negative (red) delta.
    """
    if flagged is None:
        box.metric(label, value, **kwargs)
        return
    import inspect

    severity, meaning, code = flagged
    kwargs["help"] = f"{meaning} (`{code}`)" + (f". {kwargs['help']}" if kwargs.get("help") else "")
    short = meaning.split(" (")[0]  # the full meaning and the code are in the tooltip
    short = short if len(short) <= METRIC_NOTE_CHARS else "see the warning below"
    text = f"{SAFETY_PREFIX} {short}" if severity == "safety" else short
    if "delta_arrow" in inspect.signature(box.metric).parameters:
        colour = "red" if severity == "safety" else "orange"
        box.metric(label, value, delta=text, delta_color=colour, delta_arrow="down", border=True, **kwargs)
    elif severity == "safety":
        box.metric(label, value, delta=f"-{text}", delta_color="normal", border=True, **kwargs)
    else:
        box.metric(label, value, delta=text, delta_color="off", border=True, **kwargs)


def xlsx_bytes(sheets: dict[str, pd.DataFrame], made_by: str = "lowflow app") -> bytes:
    """An XLSX workbook with one sheet per frame and an "about" sheet (the caution and who made it);
    text cells are stored as text, never formulas."""
    import pandas as pd
    from openpyxl import Workbook

    from estimator.caution import about_rows
    from estimator.planning.exports import neutralise

    wb = Workbook()
    wb.remove(wb.active)
    about = pd.DataFrame(about_rows(made_by), columns=["item", "value"])
    for name, frame in {**sheets, "about": about}.items():
        ws = wb.create_sheet(name[:31])
        ws.append([str(neutralise(str(c))) for c in frame.columns])
        for rec in frame.itertuples(index=False):
            ws.append([_cell(v) for v in rec])
        for row in ws.iter_rows():
            for cell in row:
                if isinstance(cell.value, str):
                    cell.data_type = "s"
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _cell(v: Any) -> Any:
    from estimator.planning.exports import neutralise

    if v is None or (isinstance(v, float) and v != v):
        return None
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, int | float | bool):
        return v
    return neutralise(str(v))


def csv_bytes(frame: pd.DataFrame, made_by: str = "lowflow app") -> bytes:
    """CSV (UTF-8) of a frame with text cells neutralised against spreadsheet formulas, led by ``#``
    lines with the caution and who made it."""
    import pandas as pd

    from estimator.planning.exports import csv_text, neutralise

    safe = frame.copy()
    for col in safe.columns:
        if not pd.api.types.is_numeric_dtype(safe[col]):
            safe[col] = safe[col].map(lambda v: neutralise(v) if isinstance(v, str) else v)
    return csv_text(safe, made_by).encode("utf-8")


def downloads(
    stem: str,
    sheets: dict[str, pd.DataFrame],
    document: Any,
    key: str,
    *,
    title: str = "",
    notes: list[str] | None = None,
    warnings: Any = None,
) -> None:
    """Download buttons: the first sheet as CSV, all sheets as XLSX, an HTML report of all sheets
    (with the caution and the warnings), and the document as JSON.

    The files are built only when a button is pressed (deferred data), so reruns stay fast;
    ``document`` may be a callable returning the JSON document.
    """
    first = next(iter(sheets.values()))
    made_by = f"lowflow app: {stem.replace('_', ' ')}"

    def as_json() -> bytes:
        from estimator.caution import stamp
        from estimator.jsonout import dumps, jsonable

        doc = document() if callable(document) else document
        doc = json.loads(doc) if isinstance(doc, str) else jsonable(doc)  # malformed: a bug, fail here
        if not isinstance(doc, dict):
            doc = {"result": doc}
        return dumps(stamp(doc, made_by)).encode("utf-8")

    def as_html() -> bytes:
        from estimator.planning.html_report import tables_report_html

        pairs = warning_pairs(warnings)
        return tables_report_html(title or stem.replace("_", " "), sheets, notes=notes, warnings=pairs).encode("utf-8")

    download_row(
        [
            ("Download CSV", lambda: csv_bytes(first, made_by), f"{stem}.csv", "text/csv", ":material/table_view:"),
            ("Download XLSX", lambda: xlsx_bytes(sheets, made_by), f"{stem}.xlsx", XLSX, ":material/grid_on:"),
            ("Report (HTML)", as_html, f"{stem}.html", "text/html", ":material/description:"),
            ("Download JSON", as_json, f"{stem}.json", "application/json", ":material/data_object:"),
        ],
        key,
    )


XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


def download_row(buttons: list[tuple[str, Any, str, str, str | None]], key: str) -> None:
    """One row of download buttons (label, bytes or a callable giving them, file name, MIME type, icon).

    Callables run only when their button is pressed (deferred data), so reruns stay fast; the key of
    each button is ``key`` and the file's extension.
    """
    # One horizontal container, not a block of columns: each block is one more message the browser
    # applies on every rerun (a block of four columns is five).
    row = st.container(horizontal=True)
    for label, data, name, mime, icon in buttons:
        row.download_button(
            label,
            data,
            name,
            mime,
            key=f"{key}.{name.rsplit('.', 1)[-1]}",
            icon=icon,
            width="stretch",
            on_click="ignore",
        )


def placeholder(what: str, module: str, detail: str) -> None:
    """A page whose model is still being written: say so plainly."""
    st.info(
        f"**{what} is coming.** This page will run `{module}` once that module is part of the package. {detail}",
        icon=":material/construction:",
    )
