"""A department's calibration on the planning pages: load a calibration file, see what it applies, remove it.

The case planner, flow floor and demand forecast share one calibration (:func:`estimator_app.state.calibration`),
loaded from an upload (its text parsed by the calibration file's contract, never taken for a path) or
taken from the audit page's calibration. The engine applies it as ``lowflow case``, ``safe-flow`` and
``forecast --calibration`` apply a file (:mod:`estimator_app.contracts`), the flow floor with its
factor raised to at least 1 (:func:`estimator.inputs.calibration_file.floor_side`).

A scenario or case mix naming a calibration file (its ``calibration`` key) runs once that file is
loaded here; until then the page names the key and the file and shows no result. The key stays in the
document and in the file saved.
"""

from __future__ import annotations

from typing import Any

import pandas as pd
import streamlit as st

from estimator.errors import InputError

from . import contracts, state
from .common import read_upload, show_error, show_warnings, warning_pairs

#: Session key of the upload widget's generation (a removal starts a new, empty widget).
_GENERATION = "calibration.upload.generation"


def named_message(name: str, label: str) -> str:
    """What a page says when its document names a calibration file not loaded yet.

    >>> named_message("dept.toml", "scenario")[:60]
    'This scenario names a calibration file: calibration = "dept.'
    """
    return (
        f'This {label} names a calibration file: {contracts.CALIBRATION_KEY} = "{name}". Load {name} under '
        "'Department calibration' (case planner, flow floor or demand forecast) to run it with the department's "
        f"uptake factor (the command line reads it beside the {label} file); the key is kept when you save the "
        f"{label}."
    )


def given_message(scenario: str, name: str) -> str:
    """What the supply page says when a scenario file given with the inventory names a calibration file not given.

    >>> given_message("list.toml", "dept.toml")[:62]
    'The scenario file list.toml names a calibration file: calibrat'
    """
    return (
        f'The scenario file {scenario} names a calibration file: {contracts.CALIBRATION_KEY} = "{name}". Load '
        f"{name} together with the inventory and its scenario files to run its case plans with the department's "
        "uptake factor (lowflow supply reads it beside the scenario file)."
    )


def _upload(box: Any) -> None:
    """The calibration upload; a new file replaces the loaded calibration if its contract accepts it."""
    generation = int(st.session_state.get(_GENERATION, 0))
    key = f"calibration.upload.{generation}"
    up = box.file_uploader(
        "Load a calibration (TOML)",
        type=["toml"],
        key=key,
        help="A calibration file written by lowflow audit --calibrate --calibration-out (or the audit page); "
        "at most 20 MB.",
    )
    if up is None or st.session_state.get(f"{key}.loaded_id") == up.file_id:
        return
    st.session_state[f"{key}.loaded_id"] = up.file_id
    try:
        state.set_calibration(up.name, read_upload(up, "calibration"))
    except InputError as exc:
        with box:
            show_error(exc)


def file_table(calibration: Any) -> pd.DataFrame:
    """The file's agents: uptake factor, 95 % interval, cases and code (one row builder for every face)."""
    from estimator.planning.calibration_report import file_rows

    return pd.DataFrame(
        [
            {
                "agent": r.agent,
                "uptake factor": r.factor,
                "95 % low": r.low,
                "95 % high": r.high,
                "cases": r.cases,
                "code": r.code or "",
            }
            for r in file_rows(calibration)
        ]
    )


def source_text(name: str, calibration: Any) -> str:
    """Where the loaded calibration came from: its file, log, log digest (short), cases and dates."""
    p = calibration.provenance
    span = f", {p.first_case} to {p.last_case}" if p.first_case is not None else ""
    return (
        f"{name}: from {p.log_name} (SHA-256 {p.log_sha256[:12]}), {p.cases} cases{span}; made {p.made} by {p.program}."
    )


def panel(kind: str) -> tuple[str | None, bool]:
    """The calibration control of a planning page: (the calibration's text to apply or None, whether the page
    may run: not while its document names a calibration file that is not loaded)."""
    label = state.KINDS[kind][2]
    named = contracts.named_calibration(state.document(kind))
    cal = state.calibration()
    # The file box and table are drawn only when asked for (script the first page need not load), or
    # when a calibration is loaded or the document names one.
    asked = st.toggle(
        "Department calibration (uptake factor)",
        key=f"calibration.panel.{kind}",
        help="Load a calibration file written by lowflow audit --calibrate --calibration-out (or the audit page).",
    )
    if asked or cal is not None or named is not None:
        box = st.container(border=True)
        with box:
            _upload(box)
            cal = state.calibration()
            if cal is None:
                st.caption("None loaded: the published model (uptake factor 1).")
            else:
                parsed = contracts.calibration_text(cal["text"])
                st.caption(source_text(cal["name"], parsed))
                st.dataframe(file_table(parsed), hide_index=True, width="stretch")
                if st.button("Remove the calibration", key=f"calibration.remove.{kind}", icon=":material/delete:"):
                    state.clear_calibration()
                    st.session_state[_GENERATION] = int(st.session_state.get(_GENERATION, 0)) + 1
                    st.rerun()
    if named is not None and cal is None:
        st.warning(named_message(named, label), icon=":material/warning:")
        return None, False
    if named is not None and cal is not None and cal["name"] != named:
        st.info(
            f"The {label} names {named}; the calibration loaded ({cal['name']}) stands for it.", icon=":material/info:"
        )
    return (None if cal is None else cal["text"]), True


def notes(text: str | None, uses: list[tuple[str, float | None]]) -> dict[str, dict[str, Any]]:
    """The ``calibration`` object of the command line's JSON for each (agent, factor applied; None: the
    file's factor, else 1), by agent (:func:`estimator.inputs.calibration_file.calibration_note`)."""
    if text is None:
        return {}
    from estimator.inputs.calibration_file import calibration_note

    cal = contracts.calibration_text(text)
    return {
        agent: calibration_note(cal, agent, (cal.factor(agent) or 1.0) if applied is None else applied)
        for agent, applied in uses
    }


def show_applied(found: dict[str, dict[str, Any]], warnings: Any = (), where: str = "under Advisories") -> None:
    """What the engine applied: each agent's factor, interval and source, with the codes of its note, and
    the run's own calibration codes among ``warnings`` (such as FLOOR_FACTOR_RAISED, shown in full ``where``)."""
    from estimator.inputs.calibration_file import note_text

    if not found:
        return
    run = sorted({code for code, _ in warning_pairs(warnings) if code in CODES})
    also = f" Codes of this run: {', '.join(run)} ({where})." if run else ""
    st.caption("Department calibration applied: " + " ".join(note_text(n) + "." for n in found.values()) + also)
    show_warnings([w for n in found.values() for w in n["warnings"]])


#: Codes of a run that concern the department calibration, named beside what it applied.
CODES = ("FLOOR_FACTOR_RAISED",)
