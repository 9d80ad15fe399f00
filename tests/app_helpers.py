"""Helpers of the app tests: one page run by streamlit's AppTest, its metrics, and data-editor edits."""

from __future__ import annotations

import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # app.py runs from the repository root; estimator_app is not installed
    sys.path.insert(0, str(ROOT))

from streamlit.runtime.media_file_manager import MediaFileManager  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

#: First run of a page imports the engine and loads numba's compiled cache; allow for a slow runner.
TIMEOUT = 60


def page(name: str, scenario: dict | None = None) -> AppTest:
    """One page with the shared frame, run once."""
    at = AppTest.from_string(f"from estimator_app.shell import page_main\npage_main({name!r})", default_timeout=TIMEOUT)
    if scenario is not None:
        at.session_state["scenario"] = scenario
        at.session_state["scenario.version"] = 0
    return at.run()


def metric(at: AppTest, label: str) -> str:
    return next(m.value for m in at.metric if m.label == label)


def number(text: str) -> float:
    """The number a metric shows (estimator.display.text: thousands set apart by a narrow space)."""
    from estimator.display import number as leading

    return leading(text.replace(",", ""))


def assert_clean(at: AppTest) -> None:
    assert not at.exception, [e.value for e in at.exception]
    # A safety warning of the model is red on purpose (estimator_app.common.SAFETY_PREFIX); any other
    # error is a fault.
    errors = [e.value for e in at.error if not e.value.startswith("Safety:")]
    assert not errors, errors


def open_calibration_panel(at: AppTest) -> AppTest:
    """Switch on a planning page's calibration panel (it draws its file box only when asked for) and run."""
    for toggle in at.toggle:
        if toggle.key is not None and toggle.key.startswith("calibration.panel."):
            toggle.set_value(True)
    return at.run()


def show_view(at: AppTest, label: str, key: str = "case.view") -> AppTest:
    """Choose the tab ``label`` of a page's views (only the chosen view is drawn) and run the page."""
    at.session_state[key] = label
    return at.run()


def edit_table(at: AppTest, key: str, edits: dict) -> AppTest:
    """Send a data editor the edit a browser sends (AppTest has no data-editor API): the editor's
    JSON state of edited, added and deleted rows, with the other widgets as they stand."""
    el = next(e for e in at.dataframe if e.key == key)
    states = at._tree.get_widget_states()
    w = states.widgets.add()
    w.id = el.proto.id
    w.string_value = json.dumps({"edited_rows": {}, "added_rows": [], "deleted_rows": [], **edits})
    return at._run(states, timeout=TIMEOUT)


def capture_saves(monkeypatch) -> dict[str, bytes]:  # noqa: ANN001 - pytest's monkeypatch
    """Bytes of every download the app builds eagerly (the save buttons), by file name."""
    files: dict[str, bytes] = {}
    real = MediaFileManager.add

    def spy(self, data, mimetype, coordinates, file_name=None, is_for_static_download=False):  # noqa: ANN001
        if file_name is not None and isinstance(data, bytes):
            files[file_name] = data
        return real(self, data, mimetype, coordinates, file_name, is_for_static_download)

    monkeypatch.setattr(MediaFileManager, "add", spy)
    return files
