"""The one display rule (estimator.display): the figures issue 19 found hard to read, read well.

Consistency checks of our own formatting (no published source: three figures is common practice).
"""

from __future__ import annotations

import math

import pandas as pd
import pytest

from estimator.display import THOUSANDS, field_path, name, number, rounded, table, text, unit_label


@pytest.mark.parametrize(
    ("value", "unit", "shown"),
    [
        (13539.889, "L", f"13{THOUSANDS}540 L"),
        (2755.717, "psi", f"2{THOUSANDS}756 psi"),
        (0.5449, "", "0.545"),
        (12.4, "days", "12.4 days"),
        (44, "cases", "44 cases"),
        (-0.70, "L/min", "-0.700 L/min"),
        (None, "mL", ""),
        (math.nan, "mL", ""),
    ],
)
def test_numbers_read_to_three_figures_never_losing_whole_digits(value, unit, shown):
    assert text(value, unit) == shown
    if shown:
        assert number(shown) == pytest.approx(rounded(value))


def test_names_and_units_are_human():
    assert [name(k) for k in ("nitrous_oxide", "mac_hours", "oxygen", "co2e")] == [
        "Nitrous oxide",
        "MAC-h",
        "Oxygen",
        "CO2e",
    ]
    assert [unit_label(u) for u in ("liter", "l", "MAC_hour", "liter / minute", "l/d")] == [
        "L",
        "L",
        "MAC-h",
        "L/min",
        "L/day",
    ]


def test_tables_round_and_leave_blanks_not_none():
    frame = pd.DataFrame({"usable": [13539.889, None], "unit": ["L", None], "count": [3, 4]})
    out = table(frame)
    assert out["usable"].tolist() == [f"13{THOUSANDS}540", ""]  # a gap: the column reads as text
    assert out["unit"].tolist() == ["L", ""]
    assert out["count"].tolist() == [3.0, 4.0]
    assert frame["usable"].iloc[0] == 13539.889  # the frame given is left as it was


def test_rows_count_from_one_in_field_paths():
    assert field_path("cylinders[0].pressure") == "cylinders (row 1).pressure"
    assert field_path("case_types[11].weight_mean") == "case_types (row 12).weight_mean"
