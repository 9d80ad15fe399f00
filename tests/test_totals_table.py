"""One totals table for ``lowflow case`` and the app's case planner (a consistency check, not validation)."""

from __future__ import annotations

from pathlib import Path

import pytest

from estimator.cli.case import summary
from estimator.inputs.scenario import load_scenario
from estimator.simulation.engine import simulate
from estimator.simulation.totals_table import TOTAL_ROWS, totals_rows

DEMO = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_lap_chole.toml"


@pytest.fixture(scope="module")
def result():
    return simulate(load_scenario(DEMO))


def test_cli_prints_every_row_of_the_table(result):
    text = summary(result)
    for row in totals_rows(result):
        if row.key == "duration":
            continue
        digits = 1 if row.unit == "%" else 2
        assert f"{row.label}" in text and f"{row.value:.{digits}f} {row.unit}" in text, row


def test_app_shows_the_same_table(result):
    pytest.importorskip("streamlit")
    from estimator.display import sentence
    from estimator_app.pages.case_planner import totals_frame

    frame = totals_frame(result)
    rows = totals_rows(result)
    assert list(frame["quantity"]) == [sentence(r.label) for r in rows]  # first letter up for reading
    assert list(frame["value"]) == [r.value for r in rows]
    assert len(rows) == len(TOTAL_ROWS) + 2
