"""Row rules of the audit log, applied chunk by chunk with what earlier chunks left behind.

Each chunk of rows (:func:`estimator.inputs.audit_csv.chunks`) is checked against the rules of
:mod:`estimator.inputs.audit_log`; the rows used are kept as compact columns (codes for case ids, agents
and rooms, floats in the canonical units, minutes for times), the rest are reported with their line
and reasons. A rule that spans chunks keeps its state here: the one code of each case id, agent and
room, and the kind of time (elapsed or timestamp) each case started with. A chunked read therefore
gives the same rows, rejections and messages as a read in one piece.

Examples
--------
>>> v = Vocab()
>>> v.lut(["A ", " B", "A"]).tolist(), v.labels
([1, 2, 1, 0], ['', 'A', 'B'])
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..properties import AGENTS
from .audit_csv import SPEC, Chunk

NO_AGENT = ("", "none", "off")
#: Largest elapsed time a numeric ``time`` may give [min] (about 1.9 years, longer than any case;
#: a Unix time in seconds, about 1.7e9, lies far beyond it).
MAX_ELAPSED_MIN = 1e6
_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
#: Microseconds per minute (timestamps are kept as minutes since 1970-01-01 UTC).
US_PER_MIN = 6e7


class Vocab:
    """Codes of the stripped texts of a column, the same over all chunks (code 0 is the empty text)."""

    def __init__(self) -> None:
        self.labels: list[str] = [""]
        self._code: dict[str, int] = {"": 0}

    def code(self, text: str) -> int:
        c = self._code.get(text)
        if c is None:
            c = self._code[text] = len(self.labels)
            self.labels.append(text)
        return c

    def lut(self, labels: Any) -> np.ndarray:
        """Global codes of a chunk's labels, then the code of an empty cell (local code -1)."""
        texts = [str(x).strip() for x in pd.Index(labels).tolist()]
        get = self._code.get
        codes = [get(t) for t in texts]
        return np.array([self.code(t) if c is None else c for t, c in zip(texts, codes, strict=True)] + [0], np.int32)

    def codes(self, col: pd.Series) -> np.ndarray:
        """Global code of every cell of a text column (categories or text)."""
        if isinstance(col.dtype, pd.CategoricalDtype):
            local, labels = col.cat.codes.to_numpy(), col.cat.categories
        else:
            local, labels = pd.factorize(col)
        return self.lut(labels)[local]


def _empty_text(col: pd.Series) -> np.ndarray:
    """Empty cells (nothing but spaces) of a column read as text or categories."""
    if isinstance(col.dtype, pd.CategoricalDtype):
        lut = np.array([str(x).strip() == "" for x in col.cat.categories] + [True])
        return lut[col.cat.codes.to_numpy()]
    if pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_bool_dtype(col):
        return col.isna().to_numpy()
    if isinstance(col.dtype, pd.StringDtype):
        return (col.fillna("").str.strip() == "").to_numpy(dtype=bool)
    return (col.isna() | (col.astype(object).where(col.notna(), "").astype(str).str.strip() == "")).to_numpy()


class _Reasons:
    """Collects rejection reasons per row index; loops only over the bad rows."""

    def __init__(self, n: int) -> None:
        self.bad = np.zeros(n, dtype=bool)
        self.skip = np.zeros(n, dtype=bool)
        self.text: dict[int, list[str]] = {}

    def add(self, mask: np.ndarray, message: Any, raw: Callable[[], Any] | None = None) -> None:
        idx = np.flatnonzero(mask & ~self.skip)
        if not len(idx):
            return
        self.bad[idx] = True
        cells = raw() if raw is not None else None
        for i in idx:
            if not callable(message):
                msg = message
            elif cells is None:
                raise TypeError("a message made from the cells needs raw")
            else:
                msg = message(str(cells[i]).strip())
            self.text.setdefault(int(i), []).append(msg)


@dataclass
class Context:
    """What the header fixed: column positions, unit factors and labels."""

    names: list[str]
    factors: dict[str, float | str]
    units: dict[str, str]
    units_time: str

    @property
    def iso_only(self) -> bool:
        return self.factors.get("time") == "iso"


#: Kept per row used, in file order: name -> dtype.
KEPT = {
    "case": np.int32,
    "line": np.int64,
    "t_abs": np.float64,
    "is_ts": np.bool_,
    "oxygen_flow": np.float64,
    "air_flow": np.float64,
    "nitrous_oxide_flow": np.float64,
    "vaporizer_setting": np.float64,
    "agent": np.int32,
    "room": np.int32,
    "end_tidal_agent": np.float64,
    "inspired_oxygen": np.float64,
    "patient_weight": np.float64,
    "patient_age": np.float64,
}


class Column:
    """A growing column of the rows used, written in place (no pieces joined at the end).

    The first allocation is the expected size; pages never written are never resident in memory.
    """

    def __init__(self, dtype: Any, capacity: int) -> None:
        self.data = np.empty(max(capacity, 16), dtype=dtype)
        self.n = 0

    def extend(self, values: np.ndarray) -> None:
        end = self.n + len(values)
        if end > len(self.data):
            grown = np.empty(max(end, len(self.data) * 3 // 2), dtype=self.data.dtype)
            grown[: self.n] = self.data[: self.n]
            self.data = grown
        self.data[self.n : end] = values
        self.n = end

    def array(self) -> np.ndarray:
        return self.data[: self.n]


@dataclass
class RowState:
    """What the chunks read so far leave behind: counts, rejections, the rows used and the vocabularies.

    ``size_hint`` [bytes] is the size of the log when known; with the bytes per row of the first
    chunk it sizes the kept columns once.
    """

    ctx: Context
    size_hint: int | None = None
    read: int = 0
    rejections: list[tuple[int, str]] = field(default_factory=list)
    cases: Vocab = field(default_factory=Vocab)
    agents: Vocab = field(default_factory=Vocab)
    rooms: Vocab = field(default_factory=Vocab)
    kind: np.ndarray = field(default_factory=lambda: np.full(1, -1, dtype=np.int8))
    far_rows: int = 0
    far_cases: set[str] = field(default_factory=set)
    kept: dict[str, Column] = field(default_factory=dict)

    def add(self, chunk: Chunk) -> None:
        """Check the rows of one chunk and keep the ones used."""
        ok, cols = _check(chunk, self)
        rows = len(chunk.lines) + len(chunk.bad)
        if not self.kept:
            capacity = rows
            if self.size_hint and chunk.nbytes and rows:  # a row used has 7 cells and 6 commas at least
                capacity = min(int(self.size_hint / chunk.nbytes * rows * 1.02), self.size_hint // 14) + 1024
            self.kept = {name: Column(KEPT[name], capacity) for name in cols}
        self.read += rows
        self.rejections += chunk.bad
        idx = None if ok.all() else np.flatnonzero(ok)
        for name, values in cols.items():
            self.kept[name].extend(values if idx is None else values[idx])

    def column(self, name: str) -> np.ndarray:
        """All rows used of a kept column, in file order."""
        col = self.kept.pop(name, None)
        return col.array() if col is not None else np.zeros(0, dtype=KEPT[name])


def _numeric(chunk: Chunk, j: int, name: str, r: _Reasons, ctx: Context, required: bool) -> np.ndarray:
    """A number column in its canonical unit (NaN where empty or refused), its rejections added."""
    col = chunk.frame[j]
    factor, unit_label = float(ctx.factors[name]), ctx.units[name]
    if col.dtype.kind in "iuf":
        values = col.to_numpy(dtype=float, copy=True)
        empty = np.isnan(values)
    else:  # text somewhere in this chunk's column: the cells as written
        text = chunk.raw(j)
        empty = (text == "").to_numpy()
        values = pd.to_numeric(text.where(~empty, None), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    bad_number = ~empty & ~np.isfinite(values)
    if required:
        r.add(empty, f"{name}: empty")
    raw = lambda: chunk.raw(j)  # noqa: E731
    r.add(bad_number, lambda v: f"{name}: got {v!r}; expected a number ({unit_label})", raw)
    rng = SPEC[name][3]
    out = values * factor
    if rng is not None:
        lo, hi = rng
        outside = np.isfinite(out) & ((out < lo) | (out > hi))
        canonical = SPEC[name][2] or "fraction"
        shown = f"{lo * 100:g} to {hi * 100:g} %" if canonical == "fraction" else f"{lo:g} to {hi:g} {canonical}"
        r.add(outside, lambda v: f"{name}: got {v!r} {unit_label}; expected {shown}", raw)
    out[empty | bad_number] = np.nan
    return out


def _times(chunk: Chunk, j: int, ctx: Context) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Elapsed times as numbers [header unit], timestamps [min since 1970 UTC] and empty cells."""
    col = chunk.frame[j]
    n = len(col)
    if not ctx.iso_only and col.dtype.kind in "iuf":
        t_num = col.to_numpy(dtype=float, copy=True)
        if not np.isinf(t_num).any():  # every cell a finite number or empty: no timestamps
            return t_num, np.full(n, np.nan), np.isnan(t_num)
    text = chunk.raw(j)
    empty = (text == "").to_numpy()
    t_num = np.full(n, np.nan)
    if not ctx.iso_only:
        number = text.str.fullmatch(_NUMBER).fillna(False).to_numpy(dtype=bool)
        if number.any():
            t_num[number] = pd.to_numeric(text[number], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        t_num[~np.isfinite(t_num)] = np.nan
    # A plain number is always elapsed time (never read as a year); the rest may be timestamps.
    need_ts = np.isnan(t_num) & ~empty
    epoch = np.full(n, np.nan)
    if need_ts.any():
        ts = pd.to_datetime(text.where(need_ts, None), format="ISO8601", utc=True, errors="coerce")
        ok = ts.notna().to_numpy()
        us = ts.dt.tz_convert(None).to_numpy().astype("datetime64[us]").view(np.int64)
        epoch[ok] = us[ok] / US_PER_MIN
    return t_num, epoch, empty


def _check(chunk: Chunk, st: RowState) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Rows of a chunk that are used, and the columns to keep of all its rows."""
    ctx, frame = st.ctx, chunk.frame
    pos = {c: j for j, c in enumerate(ctx.names)}
    n = len(frame)
    r = _Reasons(n)
    blank = np.all(np.stack([_empty_text(frame[j]) for j in range(frame.shape[1])]), axis=0) if n else np.zeros(0, bool)
    r.add(blank, "empty line")
    r.skip = blank
    case = st.cases.codes(frame[pos["case_id"]])
    r.add(case == 0, "case_id: empty")

    # Time: elapsed number in the header unit, or an ISO 8601 timestamp.
    jt = pos["time"]
    raw_t = lambda: chunk.raw(jt)  # noqa: E731
    t_num, epoch, t_empty = _times(chunk, jt, ctx)
    r.add(t_empty, "time: empty")
    is_ts = np.isfinite(epoch)
    r.add(
        ~t_empty & ~is_ts & np.isnan(t_num),
        lambda v: f"time: got {v!r}; expected elapsed time (a number) or an ISO 8601 timestamp",
        raw_t,
    )
    t_factor = 1.0 if ctx.iso_only else float(ctx.factors["time"])
    with np.errstate(over="ignore"):
        t_abs = np.where(is_ts, epoch, t_num * t_factor)
    far = ~is_ts & ~np.isnan(t_abs) & (np.abs(t_abs) > MAX_ELAPSED_MIN)  # an overflow to inf is far too
    if far.any():
        r.add(
            far,
            lambda v: (
                f"time: got {v!r} {ctx.units_time}; expected elapsed time within +-{MAX_ELAPSED_MIN:g} min (about "
                "2 years): a Unix time in seconds? write ISO 8601 timestamps (time [ISO 8601])"
            ),
            raw_t,
        )
        st.far_rows += int(far.sum())
        st.far_cases.update(st.cases.labels[c] for c in np.unique(case[far]))

    cols: dict[str, np.ndarray] = {"case": case, "line": chunk.lines, "t_abs": t_abs, "is_ts": is_ts}
    for c in ("oxygen_flow", "air_flow", "nitrous_oxide_flow", "vaporizer_setting"):
        cols[c] = _numeric(chunk, pos[c], c, r, ctx, True)
    setting = cols["vaporizer_setting"]
    ja = pos["agent"]
    agent = st.agents.codes(frame[ja])
    lower = [a.lower() for a in st.agents.labels]
    known = np.array([a in AGENTS for a in lower])[agent]
    none = np.array([a in NO_AGENT for a in lower])[agent]
    r.add(
        ~known & ~none,
        lambda v: f"agent: got {v!r}; expected one of " + ", ".join(sorted(AGENTS)) + " (empty for none)",
        lambda: np.array(st.agents.labels, dtype=object)[agent],
    )
    r.add(none & (setting > 0), "agent: empty while vaporizer_setting is above 0")
    top = np.array([AGENTS[a].vaporizer_max.to("dimensionless").magnitude if a in AGENTS else 1.0 for a in lower])
    above = known & (setting > top[agent]) & (setting < 1.0)
    if above.any():
        names = np.array(lower, dtype=object)[agent]
        for name in sorted(set(names[above])):
            mx = AGENTS[name].vaporizer_max.to("dimensionless").magnitude
            r.add(
                above & (names == name), f"vaporizer_setting: above the {name} vaporizer's maximum dial {mx * 100:g} %"
            )
    r.add(setting >= 1.0, "vaporizer_setting: must be below 100 %")
    cols["agent"] = agent
    for c in ("end_tidal_agent", "inspired_oxygen", "patient_weight", "patient_age"):
        if c in pos:
            cols[c] = _numeric(chunk, pos[c], c, r, ctx, False)
    cols["room"] = st.rooms.codes(frame[pos["room"]]) if "room" in pos else np.zeros(n, dtype=np.int32)

    # A case keeps one kind of time: the kind of its first valid row; rows of the other kind are rejected.
    valid_t = ~r.bad & np.isfinite(t_abs)
    if len(st.kind) < len(st.cases.labels):
        st.kind = np.concatenate([st.kind, np.full(len(st.cases.labels) - len(st.kind), -1, dtype=np.int8)])
    first_codes, first_rows = np.unique(case[valid_t], return_index=True)
    new = st.kind[first_codes] < 0
    st.kind[first_codes[new]] = is_ts[valid_t][first_rows[new]]
    mixed = valid_t & (is_ts != (st.kind[case] == 1))
    r.add(mixed, lambda v: f"time: got {v!r}; this case mixes elapsed times and timestamps (first kind kept)", raw_t)

    st.rejections += [(int(chunk.lines[i]), "; ".join(m)) for i, m in r.text.items()]
    return ~r.bad, cols
