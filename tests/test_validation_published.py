"""The model held to published measurements of agent and gas use (issue 15, section 2).

Each row of ``tests/data/published/studies.toml`` is one published value (a liquid-agent requirement,
an end-tidal/fresh-gas or inspired/end-tidal ratio, an end-tidal value at a fixed dial, an inspired O2
or N2O, an N2O uptake) with the study's conditions written as a scenario. The test builds that
scenario with the public API (``estimator.scenario_from_dict`` and ``estimator.simulate``), reads the
same quantity from the result and compares it with the band derived from the study's own
between-patient spread (see the header of the data file). Every row is written to the validation
report; the issue's named targets (Eger 1997 FI/FA at 8 h, Coetzee & Stewart 2002 desflurane
end-tidal/fresh gas) are asserted row by row, the others together: at least 90 % of the held-out rows
with a published spread lie inside it. One model parameter, the intertissue diffusion clearance, was
fitted to the studies named in the data file's ``fit_half`` (and nothing else); their rows are reported
as the fit set and do not count as validation. Nothing is fitted here.
"""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from validation import record

import estimator

DATA = Path(__file__).parent / "data" / "published" / "studies.toml"
TABLE = tomllib.loads(DATA.read_text(encoding="utf-8"))
ROWS: list[dict[str, Any]] = [r for r in TABLE["rows"] if r.get("used", True)]
#: Studies the intertissue clearance was fitted to (estimator/data/agents.toml, intertissue_rate).
FIT_HALF = frozenset(TABLE["fit_half"])
#: Share of the scored rows that must lie inside their published spread (issue 15).
REQUIRED_SHARE = 0.90

pytestmark = pytest.mark.validation

_RESULTS: dict[tuple[str, float | None], Any] = {}


def _minutes(text: str) -> float:
    value, unit = text.split()
    assert unit == "min", text
    return float(value)


def scenario_data(key: str, end: float | None = None) -> dict[str, Any]:
    """The scenario ``key`` as a dict for ``scenario_from_dict``, cut at ``end`` minutes if given."""
    data = copy.deepcopy(TABLE["scenarios"][key])
    data.pop("assumed", None)
    if end is not None:
        phases, start = [], 0.0
        for phase in data["phases"]:
            length = _minutes(phase["duration"])
            if start >= end:
                break
            phases.append({**phase, "duration": f"{min(length, end - start):g} min"})
            start += length
        data["phases"] = phases
    return data


def result(key: str, end: float | None = None):
    """The simulated scenario (cached: every row of a scenario reads the same run)."""
    if (key, end) not in _RESULTS:
        _RESULTS[(key, end)] = estimator.simulate(estimator.scenario_from_dict(scenario_data(key, end)))
    return _RESULTS[(key, end)]


def _at(res, column: str, time: float) -> float:
    s = res.series.drop_duplicates("time [min]", keep="last").set_index("time [min]")[column]
    return float(np.interp(time, s.index.to_numpy(), s.to_numpy()))


def _liquid(key: str, time: float) -> float:
    if time <= 0:
        return 0.0
    return result(key, time).totals["agent_liquid"].to("mL").magnitude


def model_value(row: dict[str, Any]) -> float:
    """The model's value of the row's quantity, read as the row's ``measure`` says."""
    key, how = row["scenario"], row["measure"]
    if how == "ratio_at":
        res = result(key)
        return _at(res, row["numerator"], row["time"]) / _at(res, row["denominator"], row["time"])
    if how == "value_at":
        return _at(result(key), row["column"], row["time"]) * row.get("scale", 1.0)
    if how == "max_between":
        s = result(key).series
        sel = (s["time [min]"] >= row["t0"]) & (s["time [min]"] <= row["t1"])
        return float(s.loc[sel, row["column"]].max())
    if how == "liquid_between":
        return _liquid(key, row["t1"]) - _liquid(key, row["t0"])
    if how == "liquid_ratio":
        other = row["other"]
        return (
            result(key).totals["agent_liquid"].to("mL").magnitude
            / result(other).totals["agent_liquid"].to("mL").magnitude
        )
    raise ValueError(f"unknown measure {how!r}")


def band(row: dict[str, Any]) -> tuple[float, float, str] | None:
    """The band derived from the row's published spread, and how; None when no spread is reported."""
    kind = row["band"]
    if kind == "2sd":
        lo, hi = row["published"] - 2 * row["sd"], row["published"] + 2 * row["sd"]
        n = f", n = {row['n']}" if "n" in row else ""
        return lo, hi, f"+-2 SD of individuals (SD {row['sd']:g}{n})"
    if kind == "range":
        lo, hi = row["range"]
        return lo, hi, row.get("band_note", "published range")
    if kind == "iqr2sd":
        sd = (row["iqr"][1] - row["iqr"][0]) / 1.349
        centre = row["target"] * (1 + row["median_error"])
        return centre - 2 * sd * row["target"], centre + 2 * sd * row["target"], f"median +-2 x IQR/1.349 ({sd:.3f})"
    if kind == "none":
        return None
    raise ValueError(f"unknown band {kind!r}")


def spread_text(row: dict[str, Any]) -> str:
    """The published value with its spread as reported."""
    value = row["published"]
    if "sd" in row:
        return f"{value} +- {row['sd']} (SD)"
    if "iqr" in row:
        return f"{row['target']} x (1 + {row['median_error']:+.3f}), error IQR {row['iqr'][0]:+.3f} to {row['iqr'][1]:+.3f}"
    if "range" in row:
        return f"{value} (range {row['range'][0]:g} to {row['range'][1]:g})"
    return f"{value} (no spread reported)"


def evaluate(row: dict[str, Any]) -> dict[str, Any]:
    """Model value, band and outcome of one row (``passed`` is None for a row without a spread)."""
    value = model_value(row)
    b = band(row)
    passed = None if b is None else bool(b[0] <= value <= b[1])
    return {"value": value, "band": b, "passed": passed}


def _row_id(row: dict[str, Any]) -> str:
    return f"{row['study']}-{row['quantity'][:48]}".replace(" ", "_")


def _record(row: dict[str, Any], outcome: dict[str, Any]) -> None:
    study = TABLE["studies"][row["study"]]
    b = outcome["band"]
    tolerance = "not scored (no spread reported)" if b is None else f"{b[0]:.4g} to {b[1]:.4g}: {b[2]}"
    if row["study"] in FIT_HALF:
        tolerance += " [fit set: the intertissue clearance was fitted to this study; not validation]"
    record(
        row["quantity"],
        outcome["value"],
        spread_text(row),
        f"{study['citation']}; {study['where']} [{study['read']}]",
        tolerance,
        outcome["passed"],
        row.get("unit", ""),
        conditions=TABLE["scenarios"][row["scenario"]].get("assumed", ""),
    )


#: Named targets the model misses today (issue 15 stays open for them): strict expected failures, so
#: the day the model lands inside the published band the test reports it. Figures in docs/VALIDATION.md.
KNOWN_GAP = pytest.mark.xfail(
    strict=True,
    reason="known gap, issue 15 open: too little late uptake (Eger 1997 8-h FI/FA, bounded by the published "
    "tissue capacities: docs/MODEL_LATE_UPTAKE.md) and desflurane end-tidal/fresh gas above 0.9 at 3 L/min after an hour",
)
KNOWN_GAP_ROWS = {("eger1997", "FI/FA at 8 h"), ("coetzee2002", "3 L/min")}


def _param(row):
    gap = any(row["study"] == s and part in row["quantity"] for s, part in KNOWN_GAP_ROWS)
    return pytest.param(row, id=_row_id(row), marks=[KNOWN_GAP] if gap and row.get("hard") else [])


@pytest.mark.parametrize("row", [_param(r) for r in ROWS])
def test_published_row(row):
    # One published value against the model; the band is the study's own spread (data file header).
    # Only the issue's named targets assert here; the others count in the aggregate test below.
    outcome = evaluate(row)
    _record(row, outcome)
    if row.get("hard"):
        lo, hi, how = outcome["band"]
        assert lo <= outcome["value"] <= hi, (row["quantity"], outcome["value"], (lo, hi), how)


@pytest.mark.xfail(strict=True, reason="known gap, issue 15 open: 12 of 16 held-out scored rows inside their spread")
def test_at_least_ninety_percent_of_rows_within_published_spread():
    # Issue 15: at least 90 % of the rows with a published spread lie inside it. Only the held-out
    # rows count; the fit set is reported beside them.
    counts = {}
    for held_out in (True, False):
        rows = [r for r in ROWS if (r["study"] not in FIT_HALF) == held_out]
        scored = [o for o in (evaluate(r) for r in rows) if o["passed"] is not None]
        counts[held_out] = (sum(o["passed"] for o in scored), len(scored))
    fit_in, fit_n = counts[False]
    inside, n = counts[True]
    share = inside / n
    record(
        "held-out rows inside their published spread",
        share,
        f">= {REQUIRED_SHARE:.0%}",
        "tests/data/published/studies.toml",
        f"{inside} of {n} held-out scored rows (fit set, not counted: {fit_in} of {fit_n})",
        share >= REQUIRED_SHARE,
    )
    assert share >= REQUIRED_SHARE, f"{inside} of {n} held-out rows inside their published spread"


def test_table_covers_the_issue_scope():
    # At least 15 studies, the three common agents and N2O, flows from closed circuit to 3 L/min or
    # more, cases from 1 to 8 h (issue 15). A check of the data table, not of the model.
    studies = {r["study"] for r in TABLE["rows"]}
    agents = {TABLE["scenarios"][r["scenario"]]["agent"]["name"] for r in ROWS}
    assert len(studies) >= 15
    assert {"sevoflurane", "isoflurane", "desflurane"} <= agents
    assert any("nitrous_oxide" in r.get("column", "") for r in ROWS)
    for key in {r["scenario"] for r in ROWS}:
        data = TABLE["scenarios"][key]
        assert all(_minutes(p["duration"]) > 0 for p in data["phases"])
    durations = [sum(_minutes(p["duration"]) for p in TABLE["scenarios"][r["scenario"]]["phases"]) for r in ROWS]
    assert min(durations) <= 60 and max(durations) >= 480
