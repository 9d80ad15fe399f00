"""Reading and strict validation of a fresh-gas audit log (CSV, one row per sample).

The header names the columns, each with an optional unit in square brackets; file-level problems
(missing required column, duplicated or unknown-unit column) raise :class:`~estimator.errors.InputError` naming the
column. Row problems reject the row with its line number and reason; nothing is dropped silently.
The accepted rows come back as plain floats in fixed units (minutes, L/min, fractions 0-1, kg,
years), sorted per case, ready for vectorised integration by :mod:`estimator.planning.audit`.

The log is read in blocks of about ``block_bytes`` [bytes] (:mod:`estimator.inputs.audit_source`), so a log
larger than memory is never held whole: each block's rows are checked (:mod:`estimator.inputs.audit_rows`)
and only the rows used are kept, as codes and floats. Rows read, used and rejected, line numbers,
messages and results are the same whatever the block size.

Examples
--------
>>> log = log_from_text("case_id,time,oxygen_flow [mL/min],air_flow,nitrous_oxide_flow,agent,vaporizer_setting\\n"
...                "A,0,500,0,0,isoflurane,1\\nA,5,-1,0,0,isoflurane,1\\n")
>>> log.rows, log.rejections
({'read': 2, 'used': 1, 'rejected': 1}, [(3, "oxygen_flow: got '-1' mL/min; expected 0 to 30 L/min")])
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..errors import InputError
from .audit_csv import REQUIRED, SPEC, _header, chunks, header_cells, split_header
from .audit_rows import MAX_ELAPSED_MIN, NO_AGENT, US_PER_MIN, Context, RowState
from .audit_source import BLOCK_BYTES, LogSource

NO_DATE = "no date (elapsed-time log)"
__all__ = ["MAX_ELAPSED_MIN", "NO_AGENT", "NO_DATE", "REQUIRED", "LogData", "log_from_text", "read_log"]


@dataclass(frozen=True)
class LogData:
    """A validated log: samples used, the rejection report and per-case labels."""

    samples: pd.DataFrame
    case_ids: list[str]
    case_start: list[str | None]
    case_room: list[str]
    case_month: list[str]
    case_weight: np.ndarray
    case_age: np.ndarray
    agent_names: list[str]
    rows: dict[str, int]
    rejections: list[tuple[int, str]]
    units: dict[str, str] = field(default_factory=dict)
    warnings: tuple[tuple[str, str], ...] = ()


def read_log(source: Any, *, block_bytes: int = BLOCK_BYTES) -> LogData:
    """Read and validate an audit log from a file.

    Parameters
    ----------
    source : str, os.PathLike, file object or bytes
        A path (a string is always a path), an open file, or the bytes of an upload. CSV text goes
        to :func:`~estimator.inputs.audit_log.log_from_text`.
    block_bytes : int
        Bytes read at a time [bytes]; the result does not depend on it.

    Returns
    -------
    LogData

    Raises
    ------
    InputError
        For a file-level problem, naming the column.
    """
    return _read(LogSource.of(source, block_bytes))


def log_from_text(text: str, *, block_bytes: int = BLOCK_BYTES) -> LogData:
    """Read and validate an audit log given as CSV text (never read as a path).

    Raises
    ------
    InputError
        For a file-level problem, naming the column.
    """
    if not isinstance(text, str):
        raise InputError("log", type(text).__name__, "CSV text (str)")
    return _read(LogSource.of_text(text, block_bytes))


def _read(src: LogSource) -> LogData:
    blocks = src.blocks()
    try:
        first, rest = split_header(next(blocks, b""))
        raw = header_cells(first)
        if not raw:
            raise InputError("log", "empty file", "a CSV header with the columns " + ", ".join(REQUIRED))
        names, factors = _header(raw)
    except InputError:
        for _ in blocks:  # a later block that is not UTF-8 is refused first, as when read whole
            pass
        raise
    warnings: list[tuple[str, str]] = []
    unknown = [n for n in names if n not in SPEC]
    if unknown:
        warnings.append(("UNUSED_COLUMNS", "columns not used by the audit: " + ", ".join(unknown)))
    units = {
        c: cell.partition("[")[2].rstrip().removesuffix("]").strip() or str(SPEC[c][1])
        for c, cell in zip(names, raw, strict=True)
        if c in SPEC and SPEC[c][0] != "text"
    }
    iso = factors.get("time") == "iso"
    ctx = Context(names, factors, units, "ISO 8601" if iso else units["time"])
    dtypes = {j: "category" for j, c in enumerate(names) if c not in SPEC or SPEC[c][0] == "text"}
    if iso:
        dtypes[names.index("time")] = "str"
    state = RowState(ctx, size_hint=src.size)
    for chunk in chunks(itertools.chain([rest], blocks), raw, dtypes):
        state.add(chunk)
    return _assemble(state, warnings)


def _blocks_of(codes: np.ndarray) -> np.ndarray:
    """First row of each case in rows sorted by case."""
    return np.flatnonzero(np.r_[True, codes[1:] != codes[:-1]]) if len(codes) else np.zeros(0, dtype=np.intp)


def _first_valid(values: np.ndarray, codes: np.ndarray, n_cases: int) -> np.ndarray:
    """Per case (rows sorted by case), the first value that is not NaN (NaN if none)."""
    out = np.full(n_cases, np.nan)
    valid = np.flatnonzero(~np.isnan(values))
    firsts = valid[_blocks_of(codes[valid])]
    out[codes[firsts]] = values[firsts]
    return out


def _varying(
    values: np.ndarray, codes: np.ndarray, first: np.ndarray, case_ids: list[str], column: str, unit: str
) -> list[tuple[str, str]]:
    """A warning naming the cases whose rows give more than one value of a per-patient column."""
    starts = _blocks_of(codes)
    if not len(starts):
        return []
    with np.errstate(invalid="ignore"):
        lo, hi = np.fmin.reduceat(values, starts), np.fmax.reduceat(values, starts)
    varies = np.flatnonzero(np.isfinite(lo) & (hi > lo))
    if not len(varies):
        return []
    shown = [f"{case_ids[i]!r} ({lo[i]:g}-{hi[i]:g} {unit}, first {first[i]:g} {unit} used)" for i in varies[:5]]
    return [
        (
            "PATIENT_VALUE_VARIES",
            f"{column}: {len(varies)} case(s) give more than one value: "
            + "; ".join(shown)
            + (" ..." if len(varies) > 5 else "")
            + "; the first value of each case is used; check the log",
        )
    ]


def _start_labels(start: np.ndarray, is_ts: np.ndarray) -> tuple[list[str | None], list[str]]:
    """ISO 8601 start (UTC, to the microsecond) and month of each case; None and NO_DATE for elapsed times.

    >>> _start_labels(np.array([29_012_100.5, 3.0]), np.array([True, False]))
    (['2025-02-28T07:00:30+00:00', None], ['2025-02', 'no date (elapsed-time log)'])
    """
    us = np.where(is_ts, np.round(np.where(is_ts, start, 0.0) * US_PER_MIN), 0.0).astype(np.int64)
    text = np.datetime_as_string(us.astype("datetime64[us]"), unit="us").tolist()
    starts = [(t.removesuffix(".000000") + "+00:00") if k else None for t, k in zip(text, is_ts.tolist(), strict=True)]
    months = [t[:7] if k else NO_DATE for t, k in zip(text, is_ts.tolist(), strict=True)]
    return starts, months


def _assemble(st: RowState, warnings: list[tuple[str, str]]) -> LogData:
    """The rows used, sorted per case by time, with per-case labels and the warnings of the whole log."""
    names = st.ctx.names
    rejections = sorted(st.rejections)
    if st.far_rows:
        far_cases = sorted(st.far_cases)
        warnings.append(
            (
                "TIME_NOT_ELAPSED",
                f"time: {st.far_rows} row(s) of case(s) "
                + ", ".join(repr(c) for c in far_cases[:5])
                + (" ..." if len(far_cases) > 5 else "")
                + f" give elapsed times beyond {MAX_ELAPSED_MIN:g} min, more than any case lasts (Unix-epoch "
                "seconds?); those rows were rejected",
            )
        )
    codes = st.column("case")
    uniques = pd.unique(codes)  # cases numbered as they first appear among the rows used
    lut = np.zeros(len(st.cases.labels), dtype=np.int32)
    lut[uniques] = np.arange(len(uniques), dtype=np.int32)
    np.take(lut, codes, out=codes)
    case_ids = [st.cases.labels[u] for u in uniques]
    rows = {"read": st.read, "used": len(codes), "rejected": len(rejections)}
    t_used = st.column("t_abs")
    same = codes[1:] == codes[:-1]
    contiguous = bool(np.all(codes[1:] >= codes[:-1]))  # each case in one run of rows
    if contiguous:
        step = (t_used[1:] - t_used[:-1])[same]
    else:
        step = pd.Series(t_used).groupby(codes).diff().to_numpy()
    back, repeat = int((step < 0).sum()), int((step == 0).sum())
    del step, same
    if back:
        warnings.append(
            ("TIME_NOT_ORDERED", f"{back} sample(s) out of time order within their case: samples were sorted by time")
        )
    if repeat:
        warnings.append(
            (
                "DUPLICATE_TIME",
                f"{repeat} sample(s) repeat the time of the previous sample of their case: the later one holds",
            )
        )
    lines = st.column("line")
    order = None if contiguous and not back else np.lexsort((lines, t_used, codes))

    def take(values: np.ndarray) -> np.ndarray:
        return values if order is None else values[order]

    codes, t_used, lines = take(codes), take(t_used), take(lines)
    n_cases = len(case_ids)
    start = np.full(n_cases, np.inf)
    firsts = _blocks_of(codes)
    start[codes[firsts]] = t_used[firsts]  # sorted by time within the case: its first row starts it
    case_is_ts = np.zeros(n_cases, dtype=bool)
    case_is_ts[codes[firsts]] = take(st.column("is_ts"))[firsts]
    agent = take(st.column("agent"))
    lower = [a.lower() for a in st.agents.labels]
    agent_names = ["", *sorted({lower[i] for i in np.unique(agent) if lower[i] not in NO_AGENT})]
    remap = np.array([agent_names.index(a) if a in agent_names else 0 for a in lower], dtype=np.int8)
    t_used -= start[codes]
    cols: dict[str, np.ndarray] = {"case": codes, "line": lines, "t_min": t_used}
    for c, key in (
        ("oxygen_flow", "oxygen"),
        ("air_flow", "air"),
        ("nitrous_oxide_flow", "nitrous_oxide"),
        ("vaporizer_setting", "setting"),
    ):
        cols[key] = take(st.column(c))
    cols["agent_code"] = remap[agent]
    del agent
    per_case: dict[str, np.ndarray] = {}
    for c, key in (
        ("end_tidal_agent", "end_tidal"),
        ("inspired_oxygen", "min_inspired_oxygen"),
        ("patient_weight", "weight"),
        ("patient_age", "age"),
    ):
        if c in names:
            values = take(st.column(c))
            if key in ("weight", "age"):
                per_case[key] = _first_valid(values, codes, n_cases)
                warnings += _varying(values, codes, per_case[key], case_ids, c, str(SPEC[c][2]))
                values = per_case[key][codes]
            cols[key] = values
    samples = pd.DataFrame(cols, copy=False)
    if "room" in names:
        room = take(st.column("room")).astype(float)
        room[room == 0] = np.nan
        first_room = _first_valid(room, codes, n_cases)
        case_room = [st.rooms.labels[int(x)] if x == x else "unassigned" for x in first_room]
    else:
        case_room = ["unassigned"] * n_cases
    case_start, case_month = _start_labels(start, case_is_ts)
    return LogData(
        samples=samples,
        case_ids=[str(c) for c in case_ids],
        case_start=case_start,
        case_room=case_room,
        case_month=case_month,
        case_weight=per_case.get("weight", np.full(n_cases, np.nan)),
        case_age=per_case.get("age", np.full(n_cases, np.nan)),
        agent_names=agent_names,
        rows=rows,
        rejections=rejections,
        units=st.ctx.units,
        warnings=tuple(warnings),
    )
