r"""The CSV layer of the audit log: the source by type, the header and its units, the rows.

A log arrives as a path (a string is always a path), an open file, or the bytes of an upload;
CSV text is never taken for a path. The header names the columns, each with an optional unit in
square brackets. Rows carry the physical line they start on (the header is line 1), counted the
same by the fast C reader and by the csv module: a quoted cell spanning lines moves later rows.
A row with fewer cells than the header reads the missing trailing cells as empty (a missing
required cell then rejects the row as empty); a row with more cells is rejected.

Examples
--------
>>> _physical_lines("a\nb\n"), _physical_lines("a\nb")
(2, 2)
>>> df, bad = _rows('A,"x\ny"\nB,z,extra\nC,w\n', ["id", "room"], ["id", "room"])
>>> df["line"].tolist(), bad
([2, 5], [(4, '3 fields where the header has 2')])
"""

from __future__ import annotations

import csv
import io
import os
import stat
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pint

from ..errors import InputError, read_text_file
from ..units import Q_, ureg

REQUIRED = ("case_id", "time", "oxygen_flow", "air_flow", "nitrous_oxide_flow", "agent", "vaporizer_setting")
OPTIONAL = ("end_tidal_agent", "inspired_oxygen", "room", "patient_weight", "patient_age")
#: Column -> (kind, default unit, canonical unit, valid range in the canonical unit).
SPEC: dict[str, tuple[str, str | None, str | None, tuple[float, float] | None]] = {
    "case_id": ("text", None, None, None),
    "time": ("time", "min", "min", None),
    "oxygen_flow": ("flow", "L/min", "L/min", (0.0, 30.0)),
    "air_flow": ("flow", "L/min", "L/min", (0.0, 30.0)),
    "nitrous_oxide_flow": ("flow", "L/min", "L/min", (0.0, 30.0)),
    "agent": ("text", None, None, None),
    "vaporizer_setting": ("fraction", "%", "", (0.0, 1.0)),
    "end_tidal_agent": ("fraction", "%", "", (0.0, 1.0)),
    "inspired_oxygen": ("fraction", "%", "", (0.0, 1.0)),
    "room": ("text", None, None, None),
    "patient_weight": ("mass", "kg", "kg", (0.5, 300.0)),
    "patient_age": ("age", "year", "year", (0.0, 120.0)),
}
DIMENSION = {"flow": "[length] ** 3 / [time]", "time": "[time]", "mass": "[mass]", "age": "[time]", "fraction": "[]"}
EXAMPLE = {
    "flow": "'L/min' or 'mL/min'",
    "time": "'min', 's', 'h' or 'ISO 8601'",
    "mass": "'kg' or 'lb'",
    "age": "'year'",
    "fraction": "'%' or '1' (a 0-1 fraction)",
}


def _header(raw: list[str]) -> tuple[list[str], dict[str, float | str]]:
    """Column names and the factor to the canonical unit (or 'iso' for time) of each column."""
    names: list[str] = []
    factors: dict[str, float | str] = {}
    for cell in raw:
        text = cell.strip().lstrip("\ufeff")
        name, _, rest = text.partition("[")
        name = name.strip().lower()
        unit = rest.rstrip().removesuffix("]").strip() if rest else None
        if rest and not rest.rstrip().endswith("]"):
            raise InputError(
                f"log column '{text}'",
                text,
                "a column name with its unit in square brackets, e.g. 'oxygen_flow [mL/min]'",
            )
        if name in names:
            raise InputError(f"log column '{name}'", text, "each column once")
        names.append(name)
        if name not in SPEC:
            continue
        kind, default, canonical, _ = SPEC[name]
        if kind == "text":
            if unit:
                raise InputError(f"log column '{name}'", unit, "no unit (a text column)")
            continue
        unit = unit or default
        if kind == "time" and unit.lower().replace(" ", "") in ("iso8601", "iso"):
            factors[name] = "iso"
            continue
        if kind == "fraction" and unit.lower() in ("1", "fraction", "dimensionless"):
            factors[name] = 1.0
            continue
        try:
            q = Q_(1.0, ureg.parse_units({"%": "percent", "years": "year", "y": "year"}.get(unit, unit)))
        except (pint.errors.PintError, ValueError, AttributeError, TypeError, SyntaxError, KeyError):
            raise InputError(f"log column '{name}'", unit, f"a known unit such as {EXAMPLE[kind]}") from None
        if not q.check(DIMENSION[kind]):
            raise InputError(f"log column '{name}'", unit, f"a unit of {kind} such as {EXAMPLE[kind]}")
        factors[name] = float(q.to(canonical or "dimensionless").magnitude)
    missing = [c for c in REQUIRED if c not in names]
    if missing:
        raise InputError(f"log column '{missing[0]}'", "missing", "a header with the columns " + ", ".join(REQUIRED))
    return names, factors


def _source_text(source: Any) -> str:
    """The CSV text of a log given as a path, a file object, or bytes (an upload), chosen by type."""
    if isinstance(source, bytes | bytearray | memoryview):
        return _decode(bytes(source), "(upload)")
    if isinstance(source, str | os.PathLike):
        if isinstance(source, str) and "\n" in source:
            raise InputError("log", "(text)", "a path to a CSV file; pass CSV text to log_from_text")
        try:
            regular = stat.S_ISREG(Path(source).stat().st_mode)
        except (OSError, ValueError):
            regular = False
        if not regular:
            raise InputError("log", str(source), "an existing CSV file")
        return read_text_file(source, "log", "an existing CSV file")
    if hasattr(source, "read"):
        data = source.read()
        return _decode(data, "(upload)") if isinstance(data, bytes) else str(data).lstrip("\ufeff")
    raise InputError("log", type(source).__name__, "a path, a file object or the bytes of a CSV file")


def _decode(data: bytes, shown: str) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("log", shown, "a CSV file in UTF-8 text") from None


def _physical_lines(text: str) -> int:
    """Lines of text as a CSV reader counts them (a last line without a newline counts)."""
    return text.count("\n") + (1 if text and not text.endswith("\n") else 0)


def _rows(text: str, raw: list[str], names: list[str]) -> tuple[pd.DataFrame, list[tuple[int, str]]]:
    """Data rows with a ``line`` column (the physical line a row starts on; the header is line 1).

    Numeric columns are parsed by the C reader; when a row has more cells than the header, or a
    quoted cell spans lines (records and lines then differ), a slower csv pass numbers the lines.
    Either way a row with fewer cells than the header reads its missing trailing cells as empty,
    and a row with more is rejected.
    """
    text_cols = {i: str for i, n in enumerate(names) if n not in SPEC or SPEC[n][0] in ("text", "time")}
    try:
        df = pd.read_csv(
            io.StringIO(text),
            header=None,
            names=list(range(len(raw))),
            dtype=text_cols,
            na_values=[""],
            keep_default_na=False,
            skip_blank_lines=False,
            skipinitialspace=True,
            engine="c",
            low_memory=False,
        )
        if len(df) == _physical_lines(text):  # one record per line: the line is the record's
            df["line"] = np.arange(2, len(df) + 2)
            return df, []
    except pd.errors.EmptyDataError:
        df = pd.DataFrame(columns=list(range(len(raw))), dtype=str)
        df["line"] = np.zeros(0, dtype=int)
        return df, []
    except pd.errors.ParserError:
        pass
    good, lines, bad = [], [], []
    reader = csv.reader(io.StringIO(text, newline=""), skipinitialspace=True)
    last = 0  # physical lines read by the csv reader so far; the header is line 1
    try:
        for row in reader:
            line = 2 + last
            last = reader.line_num
            if len(row) > len(raw):
                bad.append((line, f"{len(row)} fields where the header has {len(raw)}"))
                continue
            good.append(row + [""] * (len(raw) - len(row)))
            lines.append(line)
    except csv.Error as exc:
        bad.append((2 + last, f"unreadable CSV from this line on ({exc})"))
    df = pd.DataFrame(good, columns=list(range(len(raw))), dtype=str)
    df["line"] = np.array(lines, dtype=int)
    return df, bad
