"""Summaries of a fresh-gas audit: the result record, totals, KPIs, room and month tables, and JSON.

:class:`AuditResult` is the record :func:`estimator.planning.audit.audit` returns. Everything here works on the per-case table of :func:`estimator.planning.audit.audit` (plain floats, units
in the column-name suffix) so that large logs stay fast; quantities appear only in the JSON, as
``{"magnitude", "units"}``, and every CO2e figure also carries its ``basis``.

Examples
--------
>>> import pandas as pd
>>> cases = pd.DataFrame({"room": ["A", "A", "B"], "duration_min": [60.0, 30.0, 90.0],
...                       "co2e_kg": [1.0, 2.0, 4.0], "maintenance_time_min": [50.0, 20.0, 80.0],
...                       "mean_maintenance_flow_l_min": [1.0, 2.0, 0.5],
...                       "maintenance_share_le_1": [1.0, 0.0, 1.0], "maintenance_share_le_0_5": [0.0, 0.0, 1.0],
...                       "mac_hours": [1.0, float("nan"), 1.5]})
>>> group_table(cases, "room")[["room", "cases", "co2e_kg", "mean_maintenance_flow_l_min"]].round(3).values.tolist()
[['A', 2, 3.0, 1.286], ['B', 1, 4.0, 0.5]]
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pandas as pd

from ..properties import CO2E_BASES
from ..units import GAS_VOLUME_REFERENCE, ureg
from .flow_classes import FLOW_CLASS_SOURCE, FLOW_CLASSES, flow_class

SUM_COLUMNS = (
    "duration_min",
    "oxygen_l",
    "air_l",
    "nitrous_oxide_l",
    "fresh_gas_l",
    "agent_vapour_l",
    "agent_liquid_ml",
    "co2e_agent_kg",
    "co2e_nitrous_oxide_kg",
    "co2e_kg",
    "cost_agent",
    "cost_gases",
    "cost_total",
    "maintenance_time_min",
)
#: The unit a column's name ends in (the one table for JSON, exports and the app), longest first.
SUFFIX_UNITS = (
    ("_l_min", "L/min"),
    ("_kg", "kg"),
    ("_ml", "mL"),
    ("_min", "min"),
    ("_l", "L"),
    ("_year", "year"),
)
#: The same units in pint's long names, as the JSON documents write them ("liter / minute").
UNIT_OF_SUFFIX = tuple((suffix, f"{ureg.Unit(unit):D}") for suffix, unit in SUFFIX_UNITS)


@dataclasses.dataclass(frozen=True)
class AuditResult:
    """Fresh-gas audit of a log.

    Attributes
    ----------
    rows : dict
        ``read``, ``used``, ``rejected``.
    rejections : list of (line, reason)
    cases, rooms, months : DataFrame
        One row per case / room / month; units in column-name suffixes (``_ml``, ``_l``, ``_min``,
        ``_kg`` CO2e, ``_l_min``) and costs in the currency of ``currency``.
    totals, kpis : dict of plain floats (units in the key suffix)
    basis : str
    quadrature : str
    currency : str or None
    samples : DataFrame
        The samples used, sorted per case (``case``, ``t_min`` from case start, flows in L/min,
        ``setting``, ``end_tidal``, fractions 0-1), for the counterfactual.
    notes, warnings : tuples
    counterfactual : dict or None
    calibration : dict or None
        ``{"prediction_check", "calibration"}`` of :mod:`estimator.planning.calibration` (``--calibrate``).
    """

    rows: dict[str, int]
    rejections: list[tuple[int, str]]
    cases: pd.DataFrame
    rooms: pd.DataFrame
    months: pd.DataFrame
    totals: dict[str, float]
    kpis: dict[str, Any]
    basis: str
    quadrature: str
    currency: str | None
    samples: pd.DataFrame
    notes: tuple[str, ...] = ()
    warnings: tuple[tuple[str, str], ...] = ()
    counterfactual: dict[str, Any] | None = None
    calibration: dict[str, Any] | None = None

    def to_json(self) -> dict[str, Any]:
        """JSON document of the audit (see the README for the keys)."""
        return audit_json(self)

    def table(self, name: str) -> pd.DataFrame:
        """The ``cases``, ``rooms`` or ``months`` table in the package's table convention: quantity
        columns named ``name [unit]`` (:func:`~estimator.planning.audit_report.unit_columns`), as a case result's ``series`` is."""
        if name not in ("cases", "rooms", "months"):
            raise ValueError(f"table: one of cases, rooms, months (got {name!r})")
        return unit_columns(getattr(self, name))

    def total_quantities(self) -> dict[str, Any]:
        """The totals as pint Quantities, named as the JSON document names them (``co2e``, ``agent_liquid``;
        per agent ``liquid_<agent>``); counts stay whole numbers and costs plain numbers in ``currency``."""
        out: dict[str, Any] = {}
        for key, value in self.totals.items():
            name, shown = _value(key, value, self.basis)
            is_quantity = isinstance(shown, dict) and "magnitude" in shown
            out[name] = ureg.Quantity(shown["magnitude"], shown["units"]) if is_quantity else shown
        return out


def unit_columns(df: pd.DataFrame) -> pd.DataFrame:
    """A copy of an audit table with each suffixed quantity column named ``name [unit]``.

    Text, counts, fractions and costs keep their names (costs are in the audit's currency).

    Examples
    --------
    >>> cols = ["room", "cases", "co2e_kg", "mean_maintenance_flow_l_min", "liquid_sevoflurane_ml", "mac_hours"]
    >>> unit_columns(pd.DataFrame(columns=cols)).columns.tolist()
    ['room', 'cases', 'co2e [kg]', 'mean_maintenance_flow [L/min]', 'liquid_sevoflurane [mL]', 'mac_hours [MAC_hour]']
    """
    special = {"mac_hours": "mac_hours [MAC_hour]", "co2e_per_mac_hour_kg": "co2e_per_mac_hour [kg/MAC_hour]"}

    def named(column: str) -> str:
        if column in special or column.startswith("cost_"):
            return special.get(column, column)
        suffix, unit = next(((s, u) for s, u in SUFFIX_UNITS if column.endswith(s)), ("", ""))
        return f"{column[: -len(suffix)]} [{unit}]" if suffix else column

    return df.rename(columns=named)


def _pooled(df: pd.DataFrame, column: str) -> float:
    """Maintenance-time-weighted mean of a per-case column (cases without maintenance left out)."""
    m = df["maintenance_time_min"].to_numpy()
    v = df[column].to_numpy()
    ok = np.isfinite(v) & (m > 0)
    return float(np.sum(v[ok] * m[ok]) / np.sum(m[ok])) if ok.any() else math.nan


def group_table(cases: pd.DataFrame, key: str) -> pd.DataFrame:
    """Sums per room or month, with pooled maintenance KPIs and MAC-hours of the cases that have them."""
    rows = []
    for value, df in cases.groupby(key, sort=True):
        row: dict[str, Any] = {key: value, "cases": len(df)}
        for c in SUM_COLUMNS:
            if c in df:
                row[c] = float(df[c].sum())
        for c in [c for c in df.columns if c.startswith("liquid_") and c.endswith("_ml")]:
            row[c] = float(df[c].sum())
        for c in ("mean_maintenance_flow_l_min", "maintenance_share_le_1", "maintenance_share_le_0_5"):
            row[c] = _pooled(df, c)
        mh = df["mac_hours"].to_numpy()
        ok = np.isfinite(mh)
        row["mac_hours"] = float(mh[ok].sum()) if ok.any() else math.nan
        row["cases_with_mac_hours"] = int(ok.sum())
        row["co2e_per_mac_hour_kg"] = (
            float(df["co2e_kg"].to_numpy()[ok].sum() / mh[ok].sum()) if ok.any() and mh[ok].sum() > 0 else math.nan
        )
        rows.append(row)
    return pd.DataFrame(rows)


def totals_of(cases: pd.DataFrame) -> dict[str, float]:
    """Sums over all cases (plain floats, unit in the key suffix)."""
    table = group_table(cases.assign(_all="all"), "_all")
    if table.empty:
        return {"cases": 0, **{c: 0.0 for c in SUM_COLUMNS if c in cases}}
    out = table.iloc[0].to_dict()
    out.pop("_all")
    for c in (
        "mean_maintenance_flow_l_min",
        "maintenance_share_le_1",
        "maintenance_share_le_0_5",
        "co2e_per_mac_hour_kg",
    ):
        out.pop(c, None)
    return {k: (int(v) if k.startswith("cases") else float(v)) for k, v in out.items()}


def kpi_summary(cases: pd.DataFrame, class_time: np.ndarray, after: float) -> dict[str, Any]:
    """Pooled KPIs over all cases: maintenance flow, low-flow shares, flow classes, MAC-hours."""
    total = float(class_time.sum())
    mean = _pooled(cases, "mean_maintenance_flow_l_min") if len(cases) else math.nan
    mh = cases["mac_hours"].to_numpy() if len(cases) else np.zeros(0)
    ok = np.isfinite(mh)
    mac_total = float(mh[ok].sum()) if ok.any() else math.nan
    co2e_ok = float(cases["co2e_kg"].to_numpy()[ok].sum()) if ok.any() else math.nan
    return {
        "maintenance_after_min": after,
        "maintenance_time_min": total,
        "mean_maintenance_flow_l_min": mean,
        "mean_maintenance_flow_class": flow_class(mean) if math.isfinite(mean) else None,
        "maintenance_share_le_1": _pooled(cases, "maintenance_share_le_1") if len(cases) else math.nan,
        "maintenance_share_le_0_5": _pooled(cases, "maintenance_share_le_0_5") if len(cases) else math.nan,
        "flow_class_shares": {
            name: (float(class_time[i] / total) if total > 0 else math.nan) for i, (name, _) in enumerate(FLOW_CLASSES)
        },
        "flow_class_bounds_l_min": {name: b if math.isfinite(b) else None for name, b in FLOW_CLASSES},
        "flow_class_source": FLOW_CLASS_SOURCE,
        "mac_hours": mac_total,
        "cases_with_mac_hours": int(ok.sum()),
        "cases_without_mac_hours": int((~ok).sum()),
        "co2e_per_mac_hour_kg": co2e_ok / mac_total if ok.any() and mac_total > 0 else math.nan,
    }


def _unit(key: str) -> str | None:
    for suffix, unit in UNIT_OF_SUFFIX:
        if key.endswith(suffix):
            return unit
    return None


def _value(key: str, value: Any, basis: str) -> tuple[str, Any]:
    """Map a suffixed plain-float entry to (JSON key, JSON value)."""
    if isinstance(value, float | np.floating) and not math.isfinite(float(value)):
        value = None
    unit = _unit(key)
    if key == "mac_hours":
        return key, None if value is None else {"magnitude": float(value), "units": "MAC_hour"}
    if key == "co2e_per_mac_hour_kg":
        per_mac = None if value is None else {"magnitude": float(value), "units": "kilogram / MAC_hour", "basis": basis}
        return "co2e_per_mac_hour", per_mac
    if unit is None or key.startswith("cost_") or isinstance(value, str):
        return key, value.item() if isinstance(value, np.generic) else value
    name = key[: -len(next(s for s, u in UNIT_OF_SUFFIX if u == unit))]
    if value is None:
        return name, None
    q: dict[str, Any] = {"magnitude": float(value), "units": unit}
    if name.startswith("co2e"):
        q["basis"] = basis
    return name, q


def records(df: pd.DataFrame, basis: str, currency: str | None, keep_zero: bool = False) -> list[dict[str, Any]]:
    """Rows of a case, room or month table as JSON objects (quantities with units)."""
    out = []
    for rec in df.to_dict("records"):
        item: dict[str, Any] = {}
        by_agent = {}
        for k, v in rec.items():
            if k.startswith("liquid_") and k.endswith("_ml"):
                if float(v) > 0 or keep_zero:
                    by_agent[k[len("liquid_") : -3]] = {"magnitude": float(v), "units": "milliliter"}
                continue
            if k.startswith("cost_") or k == "unpriced":
                continue
            jk, jv = _value(k, v, basis)
            item[jk] = jv
        if by_agent:
            item["agent_liquid_by_agent"] = by_agent
        if currency is not None and "cost_total" in rec:
            item["cost"] = {
                "currency": currency,
                "agent": float(rec["cost_agent"]),
                "gases": float(rec["cost_gases"]),
                "absorbent": None,
                "total": float(rec["cost_total"]),
                "unpriced": [u for u in str(rec.get("unpriced", "")).split(";") if u],
            }
        elif "cost_total" not in rec:
            item["cost"] = None
        out.append(item)
    return out


def audit_json(result: AuditResult) -> dict[str, Any]:
    """The ``lowflow audit --json`` document."""
    totals = records(pd.DataFrame([result.totals]), result.basis, result.currency, True)[0] if result.totals else {}
    kpis = dict(
        records(
            pd.DataFrame([{k: v for k, v in result.kpis.items() if not isinstance(v, dict)}]),
            result.basis,
            result.currency,
        )[0]
    )
    kpis.pop("cost", None)
    for k, v in result.kpis.items():
        if isinstance(v, dict):
            kpis[k] = {n: (None if isinstance(x, float) and not math.isfinite(x) else x) for n, x in v.items()}
    totals.pop("cost", None)
    if result.currency is not None:
        totals["cost"] = {
            "currency": result.currency,
            "agent": result.totals.get("cost_agent", 0.0),
            "gases": result.totals.get("cost_gases", 0.0),
            "absorbent": None,
            "total": result.totals.get("cost_total", 0.0),
        }
    else:
        totals["cost"] = None
    return {
        "rows": dict(result.rows),
        "rejections": [{"line": line, "reason": reason} for line, reason in result.rejections],
        "cases": records(result.cases, result.basis, result.currency),
        "rooms": records(result.rooms, result.basis, result.currency),
        "months": records(result.months, result.basis, result.currency),
        "totals": totals,
        "kpis": kpis,
        "counterfactual": result.counterfactual,
        "co2e_basis": result.basis,
        "co2e_basis_label": CO2E_BASES[result.basis][1],
        "gas_volume_reference": GAS_VOLUME_REFERENCE,
        "quadrature": result.quadrature,
        "currency": result.currency,
        "notes": list(result.notes),
        "warnings": [{"code": c, "message": m} for c, m in result.warnings],
        **(result.calibration or {}),  # prediction_check and calibration, with --calibrate only
    }
