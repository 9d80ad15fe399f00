"""Editors over a parsed document that change only what the user changes.

A value the user did not touch is written back exactly as it was read (same text, same unit), a key
the page cannot edit is kept and shown read-only, and a blank cell removes the key so the contract's
default applies. Numbers are always number widgets: number columns with the unit in the label and the
contract's range, whether the table starts empty or not.
"""

from __future__ import annotations

import copy
import json
import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import pandas as pd
import streamlit as st
import tomli_w

from estimator.display import rounded
from estimator.errors import InputError
from estimator.units import parse_quantity

#: Column of a table editor listing the row's keys the page does not edit (read-only, saved unchanged).
KEPT = "other keys (kept as loaded)"
_ROW = "_row"
#: Labels shown for units whose pint name differs.
_PINT = {"%": "percent", "years": "year"}


@dataclass(frozen=True)
class Field:
    """One editable key of a document or of a table row.

    ``kind`` is ``number`` (a quantity of ``dimension`` shown in ``unit``, or a plain number when
    ``dimension`` is None), ``integer``, ``text``, ``select`` (one of ``options``) or ``bool`` (a tick box). ``low``/``high``
    bound the widget (the contract's range, in ``unit``); the loader still checks the value.
    """

    key: str
    label: str
    kind: str = "number"
    dimension: str | None = None
    unit: str = ""
    low: float | None = None
    high: float | None = None
    step: float | None = None
    options: tuple[str, ...] = ()
    default: Any = None
    help: str | None = None
    read: Callable[[Any], float] | None = None

    @property
    def title(self) -> str:
        return f"{self.label} [{self.unit}]" if self.unit else self.label

    def shown(self, raw: Any) -> Any:
        """The value the widget shows for a raw file value (None when absent or unreadable)."""
        if raw is None:  # a text cell shows a blank, not "None"; a blank cell leaves the key out as before
            return "" if self.default is None and self.kind in ("text", "select") else self.default
        if self.kind == "bool":
            return raw if isinstance(raw, bool) else None
        if self.kind in ("text", "select"):
            return str(raw)
        if self.read is not None:
            return _safe(lambda: self.read(raw))
        if self.dimension is None:
            return _safe(lambda: float(raw))
        # Shown to four figures (190 bar reads 2756 psi, not 2755.717): an untouched cell is still saved
        # as loaded, since only a value that differs from what is shown is written back.
        return _safe(
            lambda: rounded(
                parse_quantity(raw, self.key, self.dimension).to(_PINT.get(self.unit, self.unit)).magnitude, 4
            )
        )

    def written(self, value: Any) -> Any:
        """The raw file value of what the widget shows."""
        if self.kind == "bool":
            return bool(value)
        if self.kind in ("text", "select"):
            return str(value)
        if self.kind == "integer":
            return int(round(float(value)))
        number = float(value)
        return f"{number:g} {self.unit}" if self.dimension is not None else number


def contract(model: Any, key: str, label: str, unit: str, **overrides: Any) -> Field:
    """A field whose dimension, range, default and help come from the contract model, shown in ``unit``.

    The quantity spec of ``model.<key>`` (:func:`estimator.fields.quantity_spec`) gives the dimension,
    the range (converted to ``unit``) and the help line; the model's default is shown for an absent key.
    ``overrides`` fill in what a model does not state (a field that is not a typed quantity yet).
    """
    from pydantic_core import PydanticUndefined

    from estimator.fields import quantity_spec
    from estimator.units import Q_

    pint_unit = _PINT.get(unit, unit)
    spec = quantity_spec(model, key)
    kwargs: dict[str, Any] = {}
    if spec is not None:
        kwargs["dimension"] = spec.dimension
        kwargs["low"] = float(Q_(spec.low, spec.unit).to(pint_unit).magnitude)
        kwargs["high"] = float(Q_(spec.high, spec.unit).to(pint_unit).magnitude)
        if spec.description:
            kwargs["help"] = spec.description
    kwargs.update(overrides)
    field = Field(key, label, unit=unit, **kwargs)
    default = model.model_fields[key].default
    if default is not None and default is not PydanticUndefined and "default" not in overrides:
        shown = float(default.to(pint_unit).magnitude) if hasattr(default, "to") else field.shown(default)
        field = replace(field, default=shown)
    return field


def _safe(fn: Callable[[], float]) -> float | None:
    try:
        return float(fn())
    except (InputError, TypeError, ValueError):
        return None


def blank(value: Any) -> bool:
    return value is None or value == "" or (isinstance(value, float) and math.isnan(value))


def same(a: Any, b: Any) -> bool:
    """Equal widget values (both blank, equal text, or numbers equal to 1e-9 relative)."""
    if blank(a) or blank(b):
        return blank(a) and blank(b)
    if isinstance(a, str) or isinstance(b, str):
        return str(a) == str(b)
    try:
        x, y = float(a), float(b)
    except (TypeError, ValueError):
        return False
    return abs(x - y) <= 1e-9 * max(1.0, abs(x), abs(y))


def merge(target: dict[str, Any], field: Field, raw: Any, seed: Any, value: Any) -> None:
    """Write ``value`` into ``target[field.key]`` unless it equals ``seed`` (then ``raw`` stays)."""
    if same(value, seed):
        return
    if blank(value):
        target.pop(field.key, None)
    else:
        try:
            target[field.key] = field.written(value)
        except (TypeError, ValueError):
            target[field.key] = str(value)  # the loader names the field and what it accepts


def number(box: Any, doc: dict[str, Any], field: Field, key: str, clearable: bool = False, **kwargs: Any) -> None:
    """A number widget for ``doc[field.key]``, kept as written until the user changes it.

    ``clearable``: the box may be emptied (a blank removes the key). Streamlit reads an emptied box as
    its ``value`` argument, so such a box starts from session state instead, with no ``value``.
    """
    raw = doc.get(field.key)
    seed = field.shown(raw)
    low, high = field.low, field.high
    if seed is not None:  # never clamp a loaded value: widen the widget, the loader judges it
        low = None if low is None else min(low, seed)
        high = None if high is None else max(high, seed)
    integer = field.kind == "integer"
    cast = int if integer else float
    start = None if seed is None else cast(seed)
    if clearable:
        if key not in st.session_state:
            st.session_state[key] = start
        start = None
    value = box.number_input(
        field.title,
        min_value=None if low is None else cast(low),
        max_value=None if high is None else cast(high),
        value=start,
        step=cast(field.step) if field.step is not None else (1 if integer else None),
        help=field.help,
        key=key,
        **kwargs,
    )
    merge(doc, field, raw, seed, value)


def kept_text(row: dict[str, Any], fields: list[Field]) -> str:
    """The keys of a row that no column shows, as TOML-like ``key = value`` pairs."""
    edited = {f.key: f for f in fields}
    parts = []
    for k, v in row.items():
        if k in edited and (v is None or edited[k].shown(v) is not None):
            continue  # its column shows it (a value the column cannot show, e.g. a target in %, is listed)
        try:
            parts.append(tomli_w.dumps({k: v}).strip())
        except TypeError:
            parts.append(f"{k} = {json.dumps(v, default=str)}")
    return "; ".join(p.replace("\n", " ") for p in parts)


def frame(rows: list[dict[str, Any]], fields: list[Field]) -> pd.DataFrame:
    """Editor rows of a table: one column a field (numbers as float64 even when empty), the kept keys."""
    data: dict[str, Any] = {}
    for f in fields:
        values = [f.shown(r.get(f.key)) for r in rows]
        if f.kind in ("number", "integer"):
            data[f.title] = pd.Series(values, dtype="float64")
        else:
            data[f.title] = pd.Series(values, dtype="object")
    data[KEPT] = pd.Series([kept_text(r, fields) for r in rows], dtype="object")
    data[_ROW] = pd.Series(range(len(rows)), dtype="float64")
    return pd.DataFrame(data)


def column(f: Field) -> Any:
    """The column config of a field: a number column with its unit, a select or a text column."""
    cc = st.column_config
    if f.kind == "bool":
        return cc.CheckboxColumn(f.title, help=f.help)
    if f.kind == "select":
        return cc.SelectboxColumn(f.title, options=list(f.options), help=f.help)
    if f.kind == "text":
        return cc.TextColumn(f.title, help=f.help, max_chars=80)
    integer = f.kind == "integer"
    return cc.NumberColumn(
        f.title,
        min_value=f.low,
        max_value=f.high,
        step=1 if integer else f.step,
        format="%d" if integer else None,
        help=f.help,
    )


def table(rows: list[dict[str, Any]], fields: list[Field], key: str) -> list[dict[str, Any]]:
    """An editable table of ``rows``; returns the rows as they now stand (untouched cells as loaded).

    Rows may be added and deleted; a row keeps its other keys (shown read-only in the last column).
    """
    seed_key, rows_key = f"{key}.seed", f"{key}.rows"
    if key not in st.session_state or seed_key not in st.session_state:
        # A new editor (or one whose state Streamlit dropped when another page ran): start from the
        # document as it stands, and keep those rows as the base the edits apply to.
        st.session_state[seed_key] = frame(rows, fields)
        st.session_state[rows_key] = copy.deepcopy(rows)
    seed = st.session_state[seed_key]
    config = {f.title: column(f) for f in fields}
    config[KEPT] = st.column_config.TextColumn(
        KEPT, disabled=True, help="Keys this page does not edit; saved unchanged."
    )
    config[_ROW] = None  # hidden: which loaded row an edited row came from
    edited = st.data_editor(
        seed,
        key=key,
        num_rows="dynamic",
        hide_index=True,
        width="stretch",
        column_config=config,
        placeholder="",  # an empty cell reads blank, not "None" (the value stays missing)
    )
    return rows_back(edited, st.session_state[rows_key], fields, seed)


def rows_back(edited: pd.DataFrame, rows: list[dict[str, Any]], fields: list[Field], seed: pd.DataFrame) -> list[dict]:
    """Document rows from an edited frame: loaded rows keep every key, only changed cells are rewritten."""
    out = []
    for rec in edited.to_dict("records"):
        ref = rec.get(_ROW)
        loaded = not blank(ref) and 0 <= int(ref) < len(rows)
        row = dict(rows[int(ref)]) if loaded else {}
        for f in fields:
            start = seed[f.title].iloc[int(ref)] if loaded else None
            merge(row, f, row.get(f.key), start, rec.get(f.title))
        out.append(row)
    return out


def kept_view(doc: dict[str, Any], edited: set[str], title: str = "Keys this page does not edit") -> None:
    """The document's keys outside ``edited`` (read-only TOML), saved back unchanged.

    The TOML is drawn only while the expander is open: a code block makes the browser load its
    syntax highlighter (about 1.5 MB of script), which delayed the first page's results.
    """
    rest = {k: v for k, v in doc.items() if k not in edited}
    if not rest:
        return
    label = f"{title} ({len(rest)}, kept as loaded and saved unchanged)"
    box = st.expander(label, key=f"kept.{title}", on_change="rerun")
    if not box.open:
        return
    with box:
        try:
            st.code(tomli_w.dumps(rest), language="toml")
        except TypeError:
            st.json(rest)
