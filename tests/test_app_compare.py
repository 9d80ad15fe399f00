"""The Compare plans page gives the numbers `lowflow compare` gives for the same plans (AppTest)."""

from __future__ import annotations

import pytest

pytest.importorskip("streamlit")

from app_helpers import assert_clean, page  # noqa: E402


def test_compare_page_matches_the_cli_and_offers_downloads():
    from estimator.display import table as readable
    from estimator.inputs.scenario import scenario_from_text
    from estimator.planning.compare import compare_results
    from estimator.simulation.engine import simulate
    from estimator_app import demo
    from estimator_app.pages.compare_plans import PLANNER, frame, texts

    at = page("compare_plans", demo.scenario())
    assert_clean(at)
    chosen = at.multiselect[0].value
    assert chosen[0] == PLANNER and len(chosen) == 2
    shown = at.dataframe[0].value
    want = frame(compare_results({n: simulate(scenario_from_text(t)) for n, t in texts(chosen).items()}))
    assert list(shown["quantity"]) == list(want["quantity"])
    # The page shows the same numbers rounded for reading (estimator.display).
    assert shown[chosen[1]].tolist() == readable(want)[chosen[1]].tolist()
    labels = {b.label for b in at.get("download_button")}
    assert {"Download CSV", "Download XLSX", "Report (HTML)", "Download JSON"} <= labels


def test_a_safety_warning_is_red_and_other_warnings_amber():
    # Severity that matches risk: an inspired O2 below the threshold (a safety code of the registry)
    # in red with its plain meaning first and the code after; the same warning shown once.
    from streamlit.testing.v1 import AppTest

    script = (
        "from estimator_app.common import show_warnings\n"
        "show_warnings([('INSPIRED_OXYGEN_LOW', 'falls to 25 %'), ('INSPIRED_OXYGEN_LOW', 'falls to 25 %'),"
        " ('FLOWMETER_ACCURACY', 'readings within 2.5 %')])\n"
    )
    at = AppTest.from_string(script).run()
    assert (
        len(at.error) == 1 and at.error[0].value.startswith("Safety:") and "`INSPIRED_OXYGEN_LOW`" in at.error[0].value
    )
    assert len(at.warning) == 1 and "`FLOWMETER_ACCURACY`" in at.warning[0].value
