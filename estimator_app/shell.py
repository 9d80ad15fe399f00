"""The frame of every page: page setup, the caution, the sidebar (units, scenario load and save), navigation."""

from __future__ import annotations

import importlib
import time
from collections.abc import Callable

import streamlit as st

from estimator.errors import InputError

from . import state, warmup
from .common import caution, show_error, unit_selectors

#: The one line a page shows for a fault that is not an input error (details stay in the server log).
FAULT = "This page could not finish: an internal error occurred ({name}). Your inputs are kept; please report it."

#: (module, title, url path, icon); titles follow the naming table of the design notes.
PAGES = (
    ("case_planner", "Case planner", "case-planner", ":material/monitor_heart:"),
    ("flow_floor", "Flow floor", "flow-floor", ":material/vertical_align_bottom:"),
    ("compare_plans", "Compare plans", "compare-plans", ":material/compare_arrows:"),
    ("supply_duration", "Supply duration", "supply-duration", ":material/inventory_2:"),
    ("demand_forecast", "Demand forecast", "demand-forecast", ":material/query_stats:"),
    ("fresh_gas_audit", "Fresh-gas audit", "fresh-gas-audit", ":material/fact_check:"),
    ("site_flowmeter", "Site and flowmeter", "site-and-flowmeter", ":material/landscape:"),
    ("methods", "Methods and sources", "methods-and-sources", ":material/menu_book:"),
)


def _renderer(module: str) -> Callable[[], None]:
    def run() -> None:
        guarded(importlib.import_module(f"estimator_app.pages.{module}").render)

    run.__name__ = module
    return run


def guarded(render: Callable[[], None]) -> None:
    """Run a page; an input error is its one readable line, any other fault one short line, never a traceback.

    Streamlit's own control flow (rerun, stop) derives from BaseException and passes through.
    """
    try:
        render()
    except InputError as exc:
        show_error(exc)
    except Exception as exc:  # noqa: BLE001 - the page shell is the last line before the user
        import logging

        logging.getLogger("estimator_app").exception("page fault")
        st.error(FAULT.format(name=type(exc).__name__), icon=":material/error:")


def frame() -> Callable[[], None]:
    """Caution and sidebar, shared by every page; returns what to draw after the page (the save button)."""
    caution()
    st.sidebar.markdown("### lowflow estimator")
    st.sidebar.caption("Low-flow anaesthesia gas use, supply and cost")
    unit_selectors()
    guarded(state.scenario_sidebar)
    slot = st.sidebar.container()
    return lambda: guarded(lambda: state.save_button(slot))


def stamp(started: float) -> None:
    """A quiet line at the foot of the sidebar: how long this page took on the server."""
    ms = 1e3 * (time.perf_counter() - started)
    st.sidebar.caption(f"Page computed in {ms:.0f} ms on the server (results are cached per input).")


def main() -> None:
    """Entry point of ``app.py``: every page through ``st.navigation``."""
    started = time.perf_counter()
    st.set_page_config(page_title="lowflow estimator", page_icon=":material/air:", layout="wide")
    pages = [
        st.Page(_renderer(m), title=t, url_path=u, icon=i, default=(k == 0)) for k, (m, t, u, i) in enumerate(PAGES)
    ]
    nav = st.navigation(pages)
    after = frame()
    nav.run()
    after()  # the save button holds the scenario as the page left it: what is on screen
    stamp(started)
    warmup.start()  # after the first page is drawn, so it does not compete with it
    warmup.settle()  # once, after a page drawn with the engine loaded


def page_main(module: str) -> None:
    """One page with the shared frame, without navigation (used by the page tests)."""
    st.set_page_config(page_title="lowflow estimator", layout="wide")
    after = frame()
    _renderer(module)()
    after()
