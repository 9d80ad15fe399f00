"""The documents the pages share (scenario, inventory, case mix), their load and save, and the cached case run.

Each document is the parsed TOML of one file, kept whole in ``st.session_state`` with the text of the
files it names; a page edits it in place and hands it to the command line's loader
(``estimator_app.contracts``). A load (upload or demo file) is accepted only if that loader accepts
it, and bumps the document's version, which the pages' widget keys carry, so the widgets show it.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import streamlit as st

from estimator.errors import InputError

from . import contracts, demo, warmup
from .common import read_upload, show_error

#: kind -> (session key of the document, session key of its version, what users call it)
KINDS = {
    "scenario": ("scenario", "scenario.version", "scenario"),
    "inventory": ("supply.doc", "supply.version", "inventory"),
    "casemix": ("forecast.doc", "forecast.version", "case mix"),
}
DOC, VERSION = KINDS["scenario"][:2]


def _keys(kind: str) -> tuple[str, str, str]:
    doc_key, version_key, _ = KINDS[kind]
    return doc_key, version_key, f"{doc_key}.files"


def document(kind: str = "scenario") -> dict[str, Any]:
    """The current document of ``kind`` (the kind's demo file until the user loads another)."""
    doc_key, version_key, files_key = _keys(kind)
    if doc_key not in st.session_state:
        name = demo.DEFAULT[kind]
        doc, files = demo.document(name)
        st.session_state[doc_key] = doc
        st.session_state[files_key] = files
        st.session_state[f"{doc_key}.name"] = name
    st.session_state.setdefault(version_key, 0)
    st.session_state.setdefault(files_key, {})
    return st.session_state[doc_key]


def files(kind: str) -> dict[str, str]:
    """Text of the files the document of ``kind`` names, by name."""
    document(kind)
    return st.session_state[_keys(kind)[2]]


def version(kind: str = "scenario") -> int:
    document(kind)
    return int(st.session_state[_keys(kind)[1]])


def set_document(doc: dict[str, Any], kind: str = "scenario") -> None:
    """The document as the page's widgets now stand (no widget reset)."""
    document(kind)
    st.session_state[_keys(kind)[0]] = doc


def toml_text(doc: dict[str, Any] | None = None) -> str:
    """TOML text of a scenario document (the current one by default), every key as loaded (what is saved)."""
    return contracts.toml_text(document() if doc is None else doc)


def run_text(doc: dict[str, Any] | None = None) -> str:
    """TOML text of a scenario document as the engine runs it (the cache key of the run): without a
    ``calibration`` key, whose file is the calibration the user loaded (:func:`calibration`)."""
    return contracts.run_text(document() if doc is None else doc)


#: Session key of the department calibration the planning pages share: ``{"name", "text"}``.
CALIBRATION = "calibration.file"


def calibration() -> dict[str, str] | None:
    """The department calibration loaded for planning (``{"name": file name, "text": TOML}``), or None."""
    return st.session_state.get(CALIBRATION)


def calibration_text() -> str | None:
    """TOML text of the loaded calibration, or None."""
    cal = calibration()
    return None if cal is None else cal["text"]


def set_calibration(name: str, text: str) -> None:
    """Load a calibration for the planning pages if its contract accepts the text (InputError if not)."""
    contracts.calibration_text(text)
    st.session_state[CALIBRATION] = {"name": name, "text": text}


def clear_calibration() -> None:
    """Stop applying the loaded calibration."""
    st.session_state.pop(CALIBRATION, None)


def accept(kind: str, text: str, name: str, named: dict[str, str]) -> None:
    """Make TOML text the current document of ``kind`` if the command line's loader accepts it.

    A calibration file the document names, given with it, becomes the planning pages' calibration; one
    that an inventory's scenario files name stays with the inventory's files.
    """
    doc = contracts.parse_toml(text, KINDS[kind][2])
    given = contracts.given_files(kind, doc, named)
    contracts.check(kind, doc, given, run_text())
    cal = contracts.named_calibration(doc)
    if cal is not None and cal in named:
        set_calibration(cal, named[cal])
    doc_key, version_key, files_key = _keys(kind)
    document(kind)
    st.session_state[doc_key] = doc
    st.session_state[files_key] = given
    st.session_state[f"{doc_key}.name"] = name
    st.session_state[version_key] += 1


def load(text: str) -> None:
    """Validate TOML text as a scenario and make it current (InputError if it is not one)."""
    accept("scenario", text, "scenario.toml", {})


def load_demo(kind: str, name: str) -> None:
    doc, named = demo.document(name)
    accept(kind, contracts.toml_text(doc), name, named)


def demo_picker(kind: str, box: Any = st) -> None:
    """A select box of the demo folder's files of ``kind``; choosing one loads it."""
    document(kind)
    key = f"{_keys(kind)[0]}.demo"
    names = demo.files_of(kind)
    current = st.session_state.get(f"{_keys(kind)[0]}.name")

    def chosen() -> None:
        pick = st.session_state.get(key)
        if pick:
            try:
                load_demo(kind, pick)
            except InputError as exc:  # pragma: no cover - the demo files are tested
                st.session_state[f"{key}.error"] = str(exc)

    box.selectbox(
        f"Demo {KINDS[kind][2]}",
        names,
        index=names.index(current) if current in names else None,
        key=key,
        on_change=chosen,
        placeholder="Choose a demo file",
        help="The invented demo files of the repository's demo_cases folder, as the command line reads them.",
    )


def upload(kind: str, label: str, key: str, help_text: str, box: Any = st) -> None:
    """An upload of a document of ``kind`` with the files it names (parsed, validated, never run)."""
    single = kind == "scenario"
    up = box.file_uploader(
        label,
        type=["toml"] if single else ["toml", "csv"],
        key=key,
        help=help_text,
        accept_multiple_files=not single,
    )
    ups = [] if up is None else [up] if single else list(up)
    ident = tuple(u.file_id for u in ups)
    if not ups or st.session_state.get(f"{key}.loaded_id") == ident:
        return
    st.session_state[f"{key}.loaded_id"] = ident
    try:
        texts = {u.name: read_upload(u, label) for u in ups}
        main = _main_file(kind, texts)
        accept(kind, texts[main], main, {k: v for k, v in texts.items() if k != main})
        box.success(f"Loaded {main}")
    except InputError as exc:
        with box if box is not st else st.container():
            show_error(exc)


def _main_file(kind: str, texts: dict[str, str]) -> str:
    """The uploaded document among the files it names: the one no other file names."""
    if len(texts) == 1:
        return next(iter(texts))
    named = set()
    for text in texts.values():
        try:
            doc = contracts.parse_toml(text, KINDS[kind][2])
        except InputError:
            continue
        named.update([*contracts.referenced(kind, doc), contracts.named_calibration(doc)])
    roots = [n for n in texts if n not in named and n.lower().endswith(".toml")]
    if len(roots) != 1:
        raise InputError(KINDS[kind][2], ", ".join(texts), f"one {KINDS[kind][2]} file and the files it names")
    return roots[0]


@st.cache_data(max_entries=128, show_spinner=False)
def _cached_case(text: str, calibration: str | None) -> Any:
    from estimator.simulation.engine import simulate

    return simulate(contracts.load_scenario_text(text, calibration))


def run_case(text: str, calibration: str | None = None) -> Any:
    """Engine result of a scenario's TOML text with a calibration's text, if any (cached on both): the
    command line's loader and engine, as ``lowflow case FILE --calibration CAL``.

    A spinner is offered only while the engine may still be loading (:mod:`estimator_app.warmup`):
    a warm case takes milliseconds, well under the spinner's 0.5 s delay, and each spinner starts a
    timer thread on every rerun (37 ms of one rerun profiled on a busy machine, well under 1 ms idle).
    """
    if warmup.ready():
        return _cached_case(text, calibration)
    with st.spinner("Running the circle-system model..."):
        return _cached_case(text, calibration)


def current_result(calibration: str | None = None) -> Any:
    """Engine result of the current scenario (with a calibration's text), or None after showing why it could not run."""
    try:
        return run_case(run_text(), calibration)
    except InputError as exc:
        show_error(exc)
        return None


def scenario_sidebar() -> None:
    """Sidebar: a demo case or an uploaded scenario TOML (parsed and validated, never executed)."""
    st.sidebar.subheader("Scenario")
    demo_picker("scenario", st.sidebar)
    upload(
        "scenario",
        "Load scenario (TOML)",
        "scenario.upload",
        "A scenario file as in the README; at most 20 MB.",
        st.sidebar,
    )


def save_button(box: Any, kind: str = "scenario", doc: dict[str, Any] | None = None) -> None:
    """Save a document as it stands after the page ran (exactly what is on screen), under its loaded name."""
    doc_key, _, label = KINDS[kind]
    name = str(st.session_state.get(f"{doc_key}.name") or f"{kind}.toml")
    box.download_button(
        f"Save {label} (TOML)",
        contracts.toml_text(document(kind) if doc is None else doc).encode("utf-8"),
        name if name.endswith(".toml") else f"{Path(name).stem}.toml",
        "application/toml",
        icon=":material/save:",
        width="stretch" if kind == "scenario" else "content",
        key=f"{doc_key}.save",
    )
