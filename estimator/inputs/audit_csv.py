r"""The CSV layer of the audit log: the header and its units, and the rows of each block.

The header names the columns, each with an optional unit in square brackets. The rows are read
block by block (:mod:`estimator.inputs.audit_source`); each row carries the physical line it starts on (the
header is line 1), counted the same by the fast C reader and by the csv module: a quoted cell
spanning lines moves later rows. A block goes to the C reader when it reads one record a line and no
row has more cells than the header; otherwise the csv module reads it (continuing into the next
block while a record is open). A row with fewer cells than the header reads the missing trailing
cells as empty (a missing required cell then rejects the row as empty); a row with more cells is
rejected.

Examples
--------
>>> split_header(b"case_id,time\r\nA,0\n")
('case_id,time', b'A,0\n')
>>> [(c.lines.tolist(), c.bad) for c in chunks(iter([b'A,"x\ny"\nB,z,extra\nC,w\n']), ["id", "room"], {})]
[([2, 5], [(4, '3 fields where the header has 2')])]
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import pint

from ..errors import InputError
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
        if kind == "text" or default is None:  # text columns have no unit
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


def split_header(block: bytes) -> tuple[str, bytes]:
    """The first line of a log's first block (without its line end) and the rest of the block."""
    ends = [i for i in (block.find(b"\n"), block.find(b"\r")) if i >= 0]
    if not ends:
        return block.decode("utf-8"), b""
    i = min(ends)
    return block[:i].decode("utf-8"), block[i + (2 if block[i : i + 2] == b"\r\n" else 1) :]


def header_cells(first: str) -> list[str]:
    """The cells of the header line (an empty list for a blank line)."""
    try:
        return next(csv.reader([first]), []) if first.strip() else []
    except csv.Error:
        raise InputError("log", "(header row)", "a CSV header row with the columns " + ", ".join(REQUIRED)) from None


def _lines_in(block: bytes) -> int:
    """Physical lines of a block (``\\n``, ``\\r\\n`` or ``\\r`` end a line; a last line without one counts)."""
    n = block.count(b"\n") + block.count(b"\r") - block.count(b"\r\n")
    return n + (1 if block and block[-1:] not in (b"\n", b"\r") else 0)


_OPTIONS: dict[str, Any] = {
    "header": None,
    "na_values": [""],
    "keep_default_na": False,
    "skip_blank_lines": False,
    "skipinitialspace": True,
    "engine": "c",
    "low_memory": False,
}


@dataclass
class Chunk:
    """Rows of one block: cells by column position, the physical line of each row, rows refused whole.

    Text columns come as categories (or text), numbers as numbers where the C reader could read the
    whole column of the block as numbers, else as text.
    """

    frame: pd.DataFrame
    lines: np.ndarray
    bad: list[tuple[int, str]]
    block: bytes | None = None
    nbytes: int = 0
    _raw: dict[int, pd.Series] = field(default_factory=dict)
    _text: pd.DataFrame | None = None

    def raw(self, j: int) -> pd.Series:
        """The text of column ``j`` as written, stripped ("" for an empty cell)."""
        if j not in self._raw:
            col = self.frame[j]
            if isinstance(col.dtype, pd.CategoricalDtype):
                col = col.astype(object)
            elif self.block is not None and not isinstance(col.dtype, pd.StringDtype):  # read as numbers
                if self._text is None:
                    k = self.frame.shape[1]
                    self._text = pd.read_csv(io.BytesIO(self.block), names=range(k), dtype=object, **_OPTIONS)
                col = self._text[j]
            if not isinstance(col.dtype, pd.StringDtype):
                col = col.where(col.notna(), "").astype(str)
            self._raw[j] = col.fillna("").str.strip()
        return self._raw[j]


def _fast(block: bytes, k: int, dtypes: dict[int, str]) -> pd.DataFrame | None:
    """The block read by the C reader, or None where its records and lines differ or a row is too wide.

    The C reader refuses a later row wider than the header, but takes the extra cells of a first
    row for an index: the first line's cells are counted with the csv module first.
    """
    ends = [i for i in (block.find(b"\n"), block.find(b"\r")) if i >= 0]
    try:
        first = next(csv.reader([block[: min(ends, default=len(block))].decode("utf-8")]), [])
    except csv.Error:
        return None
    if len(first) > k:
        return None
    try:
        df = pd.read_csv(io.BytesIO(block), names=range(k), dtype=dtypes, **_OPTIONS)
    except (pd.errors.ParserError, ValueError, OverflowError):
        return None
    return df if len(df) == _lines_in(block) else None


class _Lines:
    """Lines of a block for the csv module, pulling later blocks while a record is still open."""

    def __init__(self, block: bytes, more: Iterator[bytes]) -> None:
        self.available = 0
        self._it = self._gen(block, more)

    def _gen(self, block: bytes | None, more: Iterator[bytes]) -> Iterator[str]:
        while block is not None:
            lines = io.StringIO(block.decode("utf-8"), newline="").readlines()
            self.available += len(lines)
            yield from lines
            block = next(more, None)

    def __iter__(self) -> Iterator[str]:
        return self._it


def _slow(block: bytes, more: Iterator[bytes], first: int, k: int) -> tuple[Chunk, int, bool]:
    """The block read by the csv module: the chunk, the lines read, and whether reading must stop."""
    feed = _Lines(block, more)
    reader = csv.reader(feed, skipinitialspace=True)
    good, lines, bad = [], [], []
    last = 0  # physical lines read so far in this block
    stop = False
    try:
        for row in reader:
            line = first + last
            last = reader.line_num
            if len(row) > k:
                bad.append((line, f"{len(row)} fields where the header has {k}"))
            else:
                good.append(row + [""] * (k - len(row)))
                lines.append(line)
            if last >= feed.available:
                break
    except csv.Error as exc:
        bad.append((first + last, f"unreadable CSV from this line on ({exc})"))
        stop = True
    frame = pd.DataFrame(good, columns=range(k), dtype=str) if good else pd.DataFrame(columns=range(k), dtype=str)
    return Chunk(frame, np.array(lines, dtype=np.int64), bad), last, stop


def chunks(blocks: Iterator[bytes], raw: list[str], dtypes: dict[int, str]) -> Iterator[Chunk]:
    """The rows of the blocks after the header, chunk by chunk, each row with its physical line."""
    k = len(raw)
    line = 2
    for block in blocks:
        if not block:
            continue
        df = _fast(block, k, dtypes)
        if df is not None:
            yield Chunk(df, np.arange(line, line + len(df), dtype=np.int64), [], block, len(block))
            line += len(df)
            continue
        chunk, read, stop = _slow(block, blocks, line, k)
        chunk.nbytes = len(block)
        yield chunk
        line += read
        if stop:
            return
