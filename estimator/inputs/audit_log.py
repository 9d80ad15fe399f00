"""Reading and strict validation of a fresh-gas audit log (CSV, one row per sample).

The header names the columns, each with an optional unit in square brackets; file-level problems
(missing required column, duplicated or unknown-unit column) raise :class:`InputError` naming the
column. Row problems reject the row with its line number and reason; nothing is dropped silently.
The accepted rows come back as plain floats in fixed units (minutes, L/min, fractions 0-1, kg,
years), sorted per case, ready for vectorised integration by :mod:`estimator.planning.audit`.

Examples
--------
>>> log = log_from_text("case_id,time,oxygen_flow [mL/min],air_flow,nitrous_oxide_flow,agent,vaporizer_setting\\n"
...                "A,0,500,0,0,isoflurane,1\\nA,5,-1,0,0,isoflurane,1\\n")
>>> log.rows, log.rejections
({'read': 2, 'used': 1, 'rejected': 1}, [(3, "oxygen_flow: got '-1' mL/min; expected 0 to 30 L/min")])
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..errors import InputError
from ..properties import AGENTS
from .audit_csv import REQUIRED, SPEC, _header, _rows, _source_text

NO_AGENT = ("", "none", "off")
NO_DATE = "no date (elapsed-time log)"
#: Largest elapsed time a numeric ``time`` may give [min] (about 1.9 years, longer than any case;
#: a Unix time in seconds, about 1.7e9, lies far beyond it).
MAX_ELAPSED_MIN = 1e6
_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"


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


def _unit_of(raw: list[str], names: list[str], column: str) -> str:
    cell = raw[names.index(column)]
    return cell.partition("[")[2].rstrip().removesuffix("]").strip()


def _varying(values: pd.Series, codes: np.ndarray, case_ids: Any, column: str, unit: str) -> list[tuple[str, str]]:
    """A warning naming the cases whose rows give more than one value of a per-patient column."""
    g = values.groupby(codes)
    lo, hi = g.min().to_numpy(), g.max().to_numpy()
    first = g.first().to_numpy()
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


def _show(v: Any) -> str:
    return f"{v:g}" if isinstance(v, float | np.floating) else str(v).strip()


def _empty(col: pd.Series) -> np.ndarray:
    if pd.api.types.is_numeric_dtype(col):
        return col.isna().to_numpy()
    return (col.isna() | (col.fillna("").str.strip() == "")).to_numpy()


class _Reasons:
    """Collects rejection reasons per row index; loops only over the bad rows."""

    def __init__(self, n: int) -> None:
        self.bad = np.zeros(n, dtype=bool)
        self.skip = np.zeros(n, dtype=bool)
        self.text: dict[int, list[str]] = {}

    def add(self, mask: np.ndarray, message: Any, raw: pd.Series | None = None) -> None:
        idx = np.flatnonzero(mask & ~self.skip)
        self.bad[idx] = True
        for i in idx:
            msg = message(_show(raw.iat[i])) if callable(message) else message
            self.text.setdefault(int(i), []).append(msg)


def _numeric(
    col: pd.Series, name: str, reasons: _Reasons, factor: float, unit_label: str, required: bool
) -> np.ndarray:
    empty = _empty(col)
    if pd.api.types.is_numeric_dtype(col):
        values = col.to_numpy(dtype=float, copy=True)
    else:
        values = pd.to_numeric(col.where(~empty, None), errors="coerce").to_numpy(dtype=float, copy=True)
    bad_number = ~empty & ~np.isfinite(values)
    if required:
        reasons.add(empty, f"{name}: empty")
    reasons.add(bad_number, lambda v: f"{name}: got {v!r}; expected a number ({unit_label})", col)
    rng = SPEC[name][3]
    out = values * factor
    if rng is not None:
        lo, hi = rng
        outside = np.isfinite(out) & ((out < lo) | (out > hi))
        canonical = SPEC[name][2] or "fraction"
        shown = f"{lo * 100:g} to {hi * 100:g} %" if canonical == "fraction" else f"{lo:g} to {hi:g} {canonical}"
        reasons.add(outside, lambda v: f"{name}: got {v!r} {unit_label}; expected {shown}", col)
    out[empty | bad_number] = np.nan
    return out


def read_log(source: Any) -> LogData:
    """Read and validate an audit log from a file.

    Parameters
    ----------
    source : str, os.PathLike, file object or bytes
        A path (a string is always a path), an open file, or the bytes of an upload. CSV text goes
        to :func:`log_from_text`.

    Returns
    -------
    LogData

    Raises
    ------
    InputError
        For a file-level problem, naming the column.
    """
    return log_from_text(_source_text(source))


def log_from_text(text: str) -> LogData:
    """Read and validate an audit log given as CSV text (never read as a path).

    Raises
    ------
    InputError
        For a file-level problem, naming the column.
    """
    if not isinstance(text, str):
        raise InputError("log", type(text).__name__, "CSV text (str)")
    text = text.lstrip("\ufeff")
    first = io.StringIO(text, newline="").readline()  # the header, ended by \n, \r\n or \r
    rest = text[len(first) :]
    try:
        raw = next(csv.reader([first.rstrip("\r\n")]), []) if first.strip() else []
    except csv.Error:
        raise InputError("log", "(header row)", "a CSV header row with the columns " + ", ".join(REQUIRED)) from None
    if not raw:
        raise InputError("log", "empty file", "a CSV header with the columns " + ", ".join(REQUIRED))
    names, factors = _header(raw)
    df, bad_width = _rows(rest, raw, names)
    df.columns = [*names, "line"]
    unknown = [n for n in names if n not in SPEC]
    warnings: list[tuple[str, str]] = []
    if unknown:
        warnings.append(("UNUSED_COLUMNS", "columns not used by the audit: " + ", ".join(unknown)))
    n = len(df)
    r = _Reasons(n)
    blank = np.all(np.stack([_empty(df[c]) for c in names]), axis=0) if n else np.zeros(0, bool)
    r.add(blank, "empty line")
    r.skip = blank
    text = {c: df[c].fillna("").astype(str).str.strip() for c in ("case_id", "agent", "room", "time") if c in names}
    case = text["case_id"]
    r.add((case == "").to_numpy(), "case_id: empty")
    units: dict[str, str] = {}
    for c, cell in zip(names, raw, strict=True):
        if c in SPEC and SPEC[c][0] != "text":
            units[c] = cell.partition("[")[2].rstrip().removesuffix("]").strip() or str(SPEC[c][1])

    # Time: elapsed number in the header unit, or an ISO 8601 timestamp.
    ttext = text["time"]
    t_empty = (ttext == "").to_numpy()
    r.add(t_empty, "time: empty")
    iso_only = factors.get("time") == "iso"
    t_num = np.full(n, np.nan)
    if not iso_only:
        number = ttext.str.fullmatch(_NUMBER).fillna(False).to_numpy(dtype=bool)
        if number.any():
            t_num[number] = pd.to_numeric(ttext[number], errors="coerce").to_numpy(dtype=float)
        t_num[~np.isfinite(t_num)] = np.nan
    # A plain number is always elapsed time (never read as a year); the rest may be timestamps.
    need_ts = np.isnan(t_num) & ~t_empty
    ts = pd.to_datetime(ttext.where(need_ts, None), format="ISO8601", utc=True, errors="coerce")
    ts_ok = ts.notna().to_numpy()
    r.add(
        ~t_empty & ~ts_ok & np.isnan(t_num),
        lambda v: f"time: got {v!r}; expected elapsed time (a number) or an ISO 8601 timestamp",
        ttext,
    )
    t_factor = 1.0 if iso_only else float(factors["time"])
    units_time = "ISO 8601" if iso_only else (_unit_of(raw, names, "time") or "min")
    epoch_min = ((ts - pd.Timestamp(0, tz="UTC")) / pd.Timedelta(minutes=1)).to_numpy(dtype=float)
    is_ts = ts_ok
    t_abs = np.where(is_ts, epoch_min, t_num * t_factor)
    far = ~is_ts & np.isfinite(t_abs) & (np.abs(t_abs) > MAX_ELAPSED_MIN)
    if far.any():
        r.add(
            far,
            lambda v: (
                f"time: got {v!r} {units_time}; expected elapsed time within +-{MAX_ELAPSED_MIN:g} min (about "
                "2 years): a Unix time in seconds? write ISO 8601 timestamps (time [ISO 8601])"
            ),
            ttext,
        )
        far_cases = sorted(set(case[far]))
        warnings.append(
            (
                "TIME_NOT_ELAPSED",
                f"time: {int(far.sum())} row(s) of case(s) "
                + ", ".join(repr(c) for c in far_cases[:5])
                + (" ..." if len(far_cases) > 5 else "")
                + f" give elapsed times beyond {MAX_ELAPSED_MIN:g} min, more than any case lasts (Unix-epoch "
                "seconds?); those rows were rejected",
            )
        )

    flows = {
        c: _numeric(df[c], c, r, float(factors[c]), units[c], True)
        for c in ("oxygen_flow", "air_flow", "nitrous_oxide_flow")
    }
    setting = _numeric(
        df["vaporizer_setting"],
        "vaporizer_setting",
        r,
        float(factors["vaporizer_setting"]),
        units["vaporizer_setting"],
        True,
    )
    agent_s = text["agent"].str.lower()
    agent_codes, agent_uniques = pd.factorize(agent_s)
    agent_uniques = [str(a) for a in agent_uniques]
    known = np.isin(agent_codes, [i for i, a in enumerate(agent_uniques) if a in AGENTS])
    none = np.isin(agent_codes, [i for i, a in enumerate(agent_uniques) if a in NO_AGENT])
    r.add(
        ~known & ~none,
        lambda v: f"agent: got {v!r}; expected one of " + ", ".join(sorted(AGENTS)) + " (empty for none)",
        text["agent"],
    )
    r.add(none & (setting > 0), "agent: empty while vaporizer_setting is above 0")
    top = (
        np.array(
            [AGENTS[a].vaporizer_max.to("dimensionless").magnitude if a in AGENTS else 1.0 for a in agent_uniques]
        )[agent_codes]
        if n
        else np.zeros(0)
    )
    for name in sorted({a for a in agent_uniques if a in AGENTS}):
        mx = AGENTS[name].vaporizer_max.to("dimensionless").magnitude
        r.add(
            (agent_s == name).to_numpy() & (setting > top) & (setting < 1.0),
            f"vaporizer_setting: above the {name} vaporizer's maximum dial {mx * 100:g} %",
        )
    r.add(setting >= 1.0, "vaporizer_setting: must be below 100 %")
    opt = {
        c: _numeric(df[c], c, r, float(factors[c]), units[c], False)
        for c in ("end_tidal_agent", "inspired_oxygen", "patient_weight", "patient_age")
        if c in names
    }

    codes_all, uniques = pd.factorize(case)
    # A case keeps one kind of time: the kind of its first valid row; rows of the other kind are rejected.
    valid_t = ~r.bad & np.isfinite(t_abs)
    first_kind = pd.Series(np.where(valid_t, is_ts, np.nan)).groupby(codes_all).transform("first").to_numpy()
    mixed = valid_t & (is_ts != (first_kind == 1))
    r.add(mixed, lambda v: f"time: got {v!r}; this case mixes elapsed times and timestamps (first kind kept)", ttext)

    ok = ~r.bad
    rejections = sorted([(int(df["line"].iat[i]), "; ".join(m)) for i, m in r.text.items()] + bad_width)
    rows = {"read": n + len(bad_width), "used": int(ok.sum()), "rejected": len(rejections)}
    idx = np.flatnonzero(ok)
    codes, case_ids = pd.factorize(case.iloc[idx])
    t_used = t_abs[idx]
    lines = df["line"].to_numpy()[idx]
    file_order_t = pd.Series(t_used).groupby(codes).diff().to_numpy()
    if (file_order_t < 0).any():
        warnings.append(
            (
                "TIME_NOT_ORDERED",
                f"{int((file_order_t < 0).sum())} sample(s) out of time order within "
                "their case: samples were sorted by time",
            )
        )
    if (file_order_t == 0).any():
        warnings.append(
            (
                "DUPLICATE_TIME",
                f"{int((file_order_t == 0).sum())} sample(s) repeat the time of the "
                "previous sample of their case: the later one holds",
            )
        )
    order = np.lexsort((lines, t_used, codes))
    idx, codes, t_used = idx[order], codes[order], t_used[order]
    n_cases = len(case_ids)
    start = np.full(n_cases, np.inf)
    np.minimum.at(start, codes, t_used)
    used_agents = np.unique(agent_codes[idx])
    agent_names = ["", *sorted({agent_uniques[i] for i in used_agents if agent_uniques[i] not in NO_AGENT})]
    remap = np.array([agent_names.index(a) if a in agent_names else 0 for a in agent_uniques] or [0])
    s = pd.DataFrame(
        {
            "case": codes,
            "line": df["line"].to_numpy()[idx],
            "t_min": t_used - start[codes],
            "oxygen": flows["oxygen_flow"][idx],
            "air": flows["air_flow"][idx],
            "nitrous_oxide": flows["nitrous_oxide_flow"][idx],
            "setting": setting[idx],
            "agent_code": remap[agent_codes[idx]],
        }
    )
    per_case = {}
    for c, key in (
        ("end_tidal_agent", "end_tidal"),
        ("inspired_oxygen", "min_inspired_oxygen"),
        ("patient_weight", "weight"),
        ("patient_age", "age"),
    ):
        if c in opt:
            s[key] = opt[c][idx]
            if key in ("weight", "age"):
                per_case[key] = s[key].groupby(codes).first().reindex(range(n_cases)).to_numpy()
                warnings += _varying(s[key], codes, case_ids, c, SPEC[c][2])
                s[key] = per_case[key][codes]
    case_is_ts = np.zeros(n_cases, dtype=bool)
    case_is_ts[codes] = is_ts[idx]
    start_ts = pd.to_datetime(np.where(case_is_ts, start, 0.0) * 6e7, unit="us", utc=True)
    room = (
        text["room"].iloc[idx].reset_index(drop=True)
        if "room" in names
        else pd.Series(np.full(len(idx), "", dtype=object))
    )
    room_case = room.where(room != "").groupby(codes).first().reindex(range(n_cases)).fillna("unassigned")
    return LogData(
        samples=s,
        case_ids=[str(c) for c in case_ids],
        case_start=[ts.isoformat() if k else None for ts, k in zip(start_ts, case_is_ts, strict=True)],
        case_room=room_case.tolist(),
        case_month=[ts.strftime("%Y-%m") if k else NO_DATE for ts, k in zip(start_ts, case_is_ts, strict=True)],
        case_weight=per_case.get("weight", np.full(n_cases, np.nan)),
        case_age=per_case.get("age", np.full(n_cases, np.nan)),
        agent_names=agent_names,
        rows=rows,
        rejections=rejections,
        units=units,
        warnings=tuple(warnings),
    )
