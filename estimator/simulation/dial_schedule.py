"""The vaporizer dial of each end-tidal hold phase as numbers: start, typical, end, and a table.

An end-tidal hold computes the dial minute by minute; users set it by hand, so they need it as a
schedule ("3.2 % at 11 min, falling to 1.65 % by 171 min"), not only as a chart. Read from the
case's series, so it is exactly what the model did.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

#: Spacing of the rows of the table [min]: one setting every 10 minutes is what a hand can follow
#: (common practice, no source).
STEP_MIN = 10.0


def dial_schedule(
    series: Mapping[str, Any] | pd.DataFrame, phases: list[dict[str, Any]], step: float = STEP_MIN
) -> list[dict[str, Any]]:
    """Per end-tidal hold phase: the dial at its start, its median, at its end, and every ``step`` minutes.

    Parameters
    ----------
    series : DataFrame or dict of arrays
        The case's series (``time [min]``, ``phase``, ``vaporizer_setting [%]``, ``end_tidal_agent [%]``):
        ``CaseResult.columns`` (:class:`~estimator.simulation.results.CaseResult`) or the frame.
    phases : list of dict
        The case's phase reports (``index``, ``start``, ``end``, ``mode``).
    step : float
        Spacing of the table [min].

    Returns
    -------
    list of dict
        ``index``, ``start`` and ``end`` [min], ``dial_start``, ``dial_median``, ``dial_end`` [%] and
        ``table``: rows of ``time`` [min], ``dial`` [%] and ``end_tidal`` [%] (the nearest sample at or
        after each time, the phase's last sample last).

    Examples
    --------
    >>> s = {"time [min]": [0.0, 5.0, 10.0], "vaporizer_setting [%]": [4.0, 3.0, 2.0],
    ...      "end_tidal_agent [%]": [0.5, 1.5, 1.8]}
    >>> d = dial_schedule(s, [{"index": 0, "start": 0.0, "end": 10.0, "mode": "end_tidal_hold"}], step=5)
    >>> d[0]["dial_start"], d[0]["dial_median"], d[0]["dial_end"], [r["dial"] for r in d[0]["table"]]
    (4.0, 3.0, 2.0, [4.0, 3.0, 2.0])
    """
    t = np.asarray(series["time [min]"], dtype=float)
    dial = np.asarray(series["vaporizer_setting [%]"], dtype=float)
    et = np.asarray(series["end_tidal_agent [%]"], dtype=float)
    out = []
    for ph in phases:
        if ph.get("mode") != "end_tidal_hold":
            continue
        t0, t1 = _minutes(ph["start"]), _minutes(ph["end"])
        if "phase" in series:  # a boundary time has a row in each phase: take this phase's rows
            sel = np.flatnonzero(np.asarray(series["phase"]) == ph["index"])
        else:
            sel = np.flatnonzero((t >= t0 - 1e-9) & (t <= t1 + 1e-9))
        if sel.size == 0:
            continue
        times = np.append(np.arange(t0, t1, step), t1)
        rows = []
        for when in times:
            i = sel[min(np.searchsorted(t[sel], when - 1e-9), sel.size - 1)]
            rows.append({"time": float(t[i]), "dial": float(dial[i]), "end_tidal": float(et[i])})
        out.append(
            {
                "index": ph["index"],
                "start": t0,
                "end": t1,
                "dial_start": float(dial[sel[0]]),
                "dial_median": float(np.median(dial[sel])),
                "dial_end": float(dial[sel[-1]]),
                "table": rows,
            }
        )
    return out


def dial_table(schedule: list[dict[str, Any]]) -> pd.DataFrame:
    """The rows of every hold phase's table as one frame: phase (from 1), time [min], dial [%], end-tidal [%].

    Parameters
    ----------
    schedule : list of dict
        As :func:`dial_schedule` returns it (times [min], dial and end-tidal [%]).

    Returns
    -------
    DataFrame
        Columns ``phase``, ``time [min]``, ``dial [%]``, ``end-tidal [%]`` (percentages to 0.01).

    Examples
    --------
    >>> t = dial_table([{"index": 1, "table": [{"time": 8.0, "dial": 4.016, "end_tidal": 1.733}]}])
    >>> list(t.columns), t["dial [%]"].tolist(), t["end-tidal [%]"].tolist()
    (['phase', 'time [min]', 'dial [%]', 'end-tidal [%]'], [4.02], [1.73])
    """
    import pandas as pd

    return pd.DataFrame(
        [
            {
                "phase": d["index"] + 1,  # numbered from 1, as the phases table shows them
                "time [min]": r["time"],
                "dial [%]": round(r["dial"], 2),
                "end-tidal [%]": round(r["end_tidal"], 2),
            }
            for d in schedule
            for r in d["table"]
        ],
        columns=["phase", "time [min]", "dial [%]", "end-tidal [%]"],
    )


def _minutes(value: Any) -> float:
    return float(value.to("min").magnitude) if hasattr(value, "to") else float(value)


def dial_text(schedule: list[dict[str, Any]]) -> list[str]:
    """One line per hold phase: where the dial starts, where it ends, its median.

    Parameters
    ----------
    schedule : list of dict
        As :func:`dial_schedule` returns it (times [min], dials [%]).

    Returns
    -------
    list of str

    Examples
    --------
    >>> dial_text([{"index": 1, "start": 10.0, "end": 78.0, "dial_start": 3.2, "dial_median": 1.9,
    ...             "dial_end": 1.65, "table": []}])
    ['phase 1 dial: 3.2 % at 10 min, 1.65 % by 78 min (median 1.9 %)']
    """
    return [
        f"phase {d['index']} dial: {d['dial_start']:.3g} % at {d['start']:.0f} min, {d['dial_end']:.3g} % by "
        f"{d['end']:.0f} min (median {d['dial_median']:.3g} %)"
        for d in schedule
    ]
