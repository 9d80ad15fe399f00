"""Rows of input boxes: a table edited one box at a time, each edit sent on Enter or when the box loses focus.

Streamlit's table editor (:func:`estimator_app.editing.table`) holds an edited cell for 150 ms before
it sends it; a number box sends its value at once, so a page whose table is edited often draws one
row of boxes per table row instead. The rules are the table editor's: a value the user did not touch
is saved exactly as loaded (same text, same unit), a blank box removes the key (the contract's default
applies), a loaded value outside a box's range widens the box (the loader judges it), a row's keys
that no box shows are kept and listed read-only under the rows, and rows may be added and removed in place
(the order is kept).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from typing import Any

import streamlit as st

from .editing import Field, kept_text, merge, number

#: Width of a text box and of the remove button against a number box.
_TEXT, _REMOVE = 1.3, 0.45


def box(col: Any, row: dict[str, Any], field: Field, key: str, **kwargs: Any) -> None:
    """One box for ``row[field.key]`` in ``col``: a number box, a text box, a select box or a tick box."""
    if field.kind in ("number", "integer"):
        if field.kind == "number":
            kwargs.setdefault("format", "%g")  # 0.3 and 8, as the table showed them (not 0.30 and 8.00)
        number(col, row, field, key, clearable=True, **kwargs)
        return
    raw = row.get(field.key)
    seed = field.shown(raw)
    if field.kind == "text":
        value = col.text_input(field.title, seed, max_chars=80, help=field.help, key=key, **kwargs)
    elif field.kind == "select":
        options = list(field.options)
        index = options.index(seed) if seed in options else None
        value = col.selectbox(field.title, options, index=index, help=field.help, key=key, **kwargs)
    else:
        value = col.checkbox(field.title, bool(seed), help=field.help, key=key, **kwargs)
        seed = bool(seed)  # an absent tick box reads unticked; only a change writes the key
    merge(row, field, raw, seed, value)


def _ids(key: str, count: int) -> list[int]:
    """Stable ids of the rows (widget keys carry them, so removing a row leaves the others' boxes)."""
    ids = st.session_state.get(f"{key}.ids")
    if ids is None or len(ids) != count:  # a new editor, or rows changed elsewhere: fresh boxes
        start = st.session_state.get(f"{key}.next", 0)
        ids = list(range(start, start + count))
        st.session_state[f"{key}.next"] = start + count
    return list(ids)


def pending(key: str) -> bool:
    """True if a row of the editor ``key`` is to be added or removed in this run (a button was pressed)."""
    return bool(st.session_state.get(f"{key}.ops"))


def _queue(key: str, row_id: int | None) -> None:
    """Button callback: remove the row ``row_id``, or add a row when it is None (applied at the next run)."""
    st.session_state.setdefault(f"{key}.ops", []).append(row_id)


def rows(
    loaded: list[dict[str, Any]],
    fields: list[Field],
    key: str,
    noun: str = "row",
    on_edit: Callable[[int, Field, str], None] | None = None,
) -> list[dict[str, Any]]:
    """Rows of boxes over ``loaded`` (one row a document row, one column a field); returns the rows as
    they now stand (untouched values as loaded, other keys kept, rows added and removed in place).

    ``key`` must change when a new document is loaded or the display unit changes (the boxes start again
    from the document). Column headings are shown on the first row only. ``on_edit(row, field, key)``,
    if given, is each number box's change callback (Streamlit runs it before the page's next run).
    """
    out = [dict(r) for r in loaded]
    ids = _ids(key, len(out))
    for op in st.session_state.pop(f"{key}.ops", []):
        if op is None:
            out.append({})
            ids.append(st.session_state.get(f"{key}.next", 0))
            st.session_state[f"{key}.next"] = ids[-1] + 1
        elif op in ids:
            del out[ids.index(op)]
            ids.remove(op)
    st.session_state[f"{key}.ids"] = ids
    notes = [kept_text(r, fields) for r in out]  # before the edits: what the boxes cannot show, as loaded
    # One block of columns, each holding its field's box of every row (rows line up: every box is one
    # line high and the columns align at the bottom, below the headings of the first row). A column
    # per field, not a block per row: each element is one more message the browser draws on every rerun.
    widths = [_TEXT if f.kind == "text" else 1.0 for f in fields] + [_REMOVE]
    cols = st.columns(widths, gap="small", vertical_alignment="bottom")
    for col, f in zip(cols, fields, strict=False):
        for n, (row_id, row) in enumerate(zip(ids, out, strict=True)):
            shown = "visible" if n == 0 else "collapsed"  # heading and help once, on the first row
            box_key = f"{key}.{row_id}.{f.key}"
            changed = {} if on_edit is None or f.kind not in ("number", "integer") else {"on_change": on_edit}
            if changed:
                changed["args"] = (n, f, box_key)
            box(col, row, f if n == 0 else replace(f, help=None), box_key, label_visibility=shown, **changed)
    for row_id in ids:
        cols[-1].button(
            "",
            icon=":material/delete:",
            key=f"{key}.{row_id}.remove",
            help=f"Remove this {noun} (with its other keys)",
            on_click=_queue,
            args=(key, row_id),
        )
    for n, note in enumerate(notes):
        if note:  # the keys no box shows, read-only and saved unchanged; the row named by its text boxes
            name = ", ".join(str(out[n][f.key]) for f in fields if f.kind == "text" and out[n].get(f.key))
            st.caption(f"{noun.capitalize()} {n + 1}{f' ({name})' if name else ''}, kept as loaded: {note}")
    st.button(f"Add a {noun}", icon=":material/add:", key=f"{key}.add", on_click=_queue, args=(key, None))
    return out
