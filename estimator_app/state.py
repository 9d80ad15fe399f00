"""The scenario the pages share, its TOML load and save, and the cached engine run.

The scenario document (a plain dict in the TOML contract) lives in ``st.session_state["scenario"]``;
``st.session_state["scenario.version"]`` counts loads, and the planner's widget keys carry it, so a
loaded file resets the widgets to its values.
"""

from __future__ import annotations

import tomllib
from typing import Any

import streamlit as st
import tomli_w

from estimator.errors import InputError

from . import demo
from .common import read_upload, show_error

DOC = "scenario"
VERSION = "scenario.version"


def stored(key: str, version_key: str, factory: Any) -> dict[str, Any]:
    """A document kept in session state under ``key``, made by ``factory()`` on first use."""
    if key not in st.session_state:
        st.session_state[key] = factory()
        st.session_state[version_key] = 0
    return st.session_state[key]


def document() -> dict[str, Any]:
    """The current scenario document (the demo case until the user changes it)."""
    return stored(DOC, VERSION, demo.scenario)


def version() -> int:
    document()
    return int(st.session_state[VERSION])


def set_document(doc: dict[str, Any], *, reset_widgets: bool = False) -> None:
    st.session_state[DOC] = doc
    if reset_widgets:
        st.session_state[VERSION] = version() + 1


def toml_text(doc: dict[str, Any] | None = None) -> str:
    """TOML text of a scenario document (the cache key of the engine run)."""
    return tomli_w.dumps(_clean(document() if doc is None else doc))


def _clean(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items() if v is not None}
    if isinstance(value, list):
        return [_clean(v) for v in value]
    return value


@st.cache_data(max_entries=128, show_spinner="Running the circle-system model...")
def run_case(text: str) -> Any:
    """Engine result of a scenario's TOML text (cached on the text)."""
    from estimator.engine import simulate
    from estimator.scenario import scenario_from_text

    return simulate(scenario_from_text(text))


def current_result() -> Any:
    """Engine result of the current scenario, or None after showing why it could not run."""
    try:
        return run_case(toml_text())
    except InputError as exc:
        show_error(exc)
        return None


def scenario_sidebar() -> None:
    """Sidebar: load a scenario TOML (parsed and validated, never executed) and save the current one."""
    st.sidebar.subheader("Scenario")
    up = st.sidebar.file_uploader(
        "Load scenario (TOML)",
        type=["toml"],
        key="scenario.upload",
        help="A scenario file as described in the README; at most 20 MB.",
    )
    if up is not None and st.session_state.get("scenario.loaded_id") != up.file_id:
        st.session_state["scenario.loaded_id"] = up.file_id
        try:
            load(read_upload(up, "scenario file"))
            st.sidebar.success(f"Loaded {up.name}")
        except InputError as exc:
            with st.sidebar:
                show_error(exc)
    doc = document()
    name = (doc.get("title") or "scenario").split(" - ")[0].strip().lower().replace(" ", "_")[:40] or "scenario"
    st.sidebar.download_button(
        "Save scenario (TOML)",
        toml_text().encode("utf-8"),
        f"{name}.toml",
        "application/toml",
        icon=":material/save:",
        width="stretch",
    )
    if st.sidebar.button("Back to the demo case", icon=":material/restart_alt:", width="stretch"):
        set_document(demo.scenario(), reset_widgets=True)
        st.rerun()


def load(text: str) -> None:
    """Validate TOML text as a scenario and make it current (InputError if it is not one)."""
    from estimator.scenario import scenario_from_text

    scenario_from_text(text)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:  # pragma: no cover - scenario_from_text has refused it already
        raise InputError("scenario file", "(file)", f"valid TOML ({exc})") from None
    set_document(doc, reset_widgets=True)


def upload_toml(label: str, key: str, help_text: str, doc_key: str, version_key: str, validate: Any = None) -> None:
    """A TOML upload that replaces the document under ``doc_key`` (parsed, validated, never run).

    ``validate(text)`` raises InputError for a file that is TOML but not the expected document.
    """
    up = st.file_uploader(label, type=["toml"], key=key, help=help_text)
    if up is None or st.session_state.get(f"{key}.loaded_id") == up.file_id:
        return
    st.session_state[f"{key}.loaded_id"] = up.file_id
    try:
        text = read_upload(up, label)
        try:
            doc = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise InputError(label, up.name, f"valid TOML ({exc})") from None
        if validate is not None:
            validate(text)
        st.session_state[doc_key] = doc
        st.session_state[version_key] = st.session_state.get(version_key, 0) + 1
    except InputError as exc:
        show_error(exc)
