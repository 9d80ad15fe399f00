"""Recorder of reference checks for the validation report (docs/VALIDATION.md).

A test that checks a model value against a published one calls :func:`record` beside its
assertion. When the environment variable ``LOWFLOW_VALIDATION_OUT`` names a file, each call appends
one JSON line to it; otherwise the call does nothing, so an ordinary test run is unaffected.
``docs/make_validation.py`` sets the variable, runs the tests and turns the lines into the table.

The recorder never decides whether a check passes: the caller passes ``passed``, computed with the
same condition as the assertion next to it, and the assertion still fails the test.
"""

from __future__ import annotations

import json
import math
import os
from typing import Any

ENV = "LOWFLOW_VALIDATION_OUT"


def _plain(value: Any) -> Any:
    """A JSON-ready form of a number, a quantity, a numpy scalar or text."""
    if hasattr(value, "magnitude") and hasattr(value, "units"):
        return f"{_plain(value.magnitude)} {value.units:~P}"
    if hasattr(value, "item") and callable(value.item):
        try:
            value = value.item()
        except (ValueError, TypeError):
            return str(value)
    if isinstance(value, bool) or value is None:
        return value
    if isinstance(value, int | float):
        return float(value) if math.isfinite(float(value)) else str(value)
    return str(value)


def record(
    quantity: str,
    computed: Any,
    published: Any,
    source: str,
    tolerance: str,
    passed: Any,
    unit: str = "",
    conditions: str = "",
) -> None:
    """Append one reference check to the file named by ``LOWFLOW_VALIDATION_OUT`` (if it is set).

    Parameters
    ----------
    quantity : str
        What is compared, in words ("sevoflurane MAC at 80 years").
    computed, published : number, quantity or str
        The value the code gives and the value from outside the project.
    source : str
        Author, year and table (or "CoolProp", "common practice, no source", ...).
    tolerance : str
        The tolerance of the assertion beside the call ("rel 3 %", "abs 0.5 mmHg", "exact").
    passed : bool or None
        The outcome of the same comparison as the assertion; None for a row shown but not scored
        (no published spread to compare with).
    unit : str
        Unit of plain-number values [text].
    conditions : str
        The conditions of the comparison not already in ``quantity`` (patient, gases, what was
        assumed where the source is silent) [text].
    """
    path = os.environ.get(ENV)
    if not path:
        return
    row = {
        "quantity": quantity,
        "computed": _plain(computed),
        "published": _plain(published),
        "unit": unit,
        "source": source,
        "tolerance": tolerance,
        "passed": None if passed is None else bool(passed),
        "conditions": conditions,
        "test": os.environ.get("PYTEST_CURRENT_TEST", "").rsplit(" (", 1)[0],
    }
    with open(path, "a", encoding="utf-8") as fh:
        fh.write(json.dumps(row) + "\n")
