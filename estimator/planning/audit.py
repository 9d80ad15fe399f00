"""Fresh-gas audit of recorded cases: agent, gases, CO2e and cost per case, room and month, with KPIs.

Log format (CSV, one row per sample)
------------------------------------
Required columns ``case_id, time, oxygen_flow, air_flow, nitrous_oxide_flow, agent,
vaporizer_setting``; optional ``end_tidal_agent, inspired_oxygen, room, patient_weight,
patient_age``. A unit may follow a column name in square brackets, ``oxygen_flow [mL/min]``.
Defaults: L/min for flows, % for ``vaporizer_setting``, ``end_tidal_agent`` and
``inspired_oxygen`` (``[1]`` or ``[fraction]`` for 0-1 fractions), minutes for a numeric ``time``
(elapsed), kg and years for the patient. ``time`` is either elapsed time (a number) or an ISO 8601
timestamp; timestamps with an offset are converted to UTC. Sampling may be irregular. Logged flows
are taken as free gas at 15 degC and 101.325 kPa, the package's reference.

Validation is strict: a missing required column, a duplicated column, an unknown column unit or a
unit of the wrong dimension is a file-level :class:`~estimator.errors.InputError` naming the
column. Every other problem rejects the row, reported with its line number (the header is line 1)
and reason; the rest are audited, and ``rows read = rows used + rows rejected``.

Method
------
Delivered vapour flow = carrier flow x D/(1 - D), with carrier = O2 + air + N2O and D the dial
setting (the vaporizer output). It is integrated over time by one of two rules:

* ``"hold"`` (default): sample and hold, the left-rectangle rule. A setting holds until the next
  sample changes it, which is how a dial or flowmeter behaves; the last sample of a case closes it.
* ``"trapezoid"``: the trapezoid rule, for logs of measured (smoothly varying) values.

Both are written as a weight per sample (hold: the interval after it; trapezoid: half of each
neighbouring interval), summed per case in one vectorised pass. Vapour is converted to liquid with
the ideal-gas molar volume at the reference, the molar mass and the liquid density (Dion 1992).

KPIs use the setting that holds over each interval, whatever the quadrature of the totals:
maintenance starts ``maintenance_after`` (default 10 min) after the first sample of a case; mean
maintenance flow, the share of maintenance time at or below 1 and 0.5 L/min, the share in each
flow class (Baum and Aitkenhead 1995; Brattwall et al. 2012), MAC-hours (end-tidal agent over the
age-corrected MAC of Mapleson 1996; volatile agent only) and CO2e per MAC-hour.

References
----------
.. [1] Dion P. The cost of anaesthetic vapours. Can J Anaesth 1992;39:633.
.. [2] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37.
.. [3] Brattwall M et al. Brief review: theory and practice of minimal fresh gas flow anesthesia.
   Can J Anesth 2012;59:785 (flow classes).
.. [4] Mapleson WW. Effect of age on MAC in humans: a meta-analysis. Br J Anaesth 1996;76:179.

Examples
--------
>>> import io
>>> log = io.StringIO("case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting\\n"
...                   "A,0,1,1,0,sevoflurane,2\\nA,60,1,1,0,sevoflurane,2\\n")
>>> r = audit(log)
>>> r.rows, round(float(r.cases["agent_vapour_l"].iloc[0]), 3)
({'read': 2, 'used': 2, 'rejected': 0}, 2.449)
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..accounts import carbon
from ..accounts.costs import Prices, cost_table
from ..choices import QUADRATURES
from ..errors import InputError
from ..inputs.audit_log import LogData, read_log
from ..limits import INSPIRED_OXYGEN_FLOOR
from ..physics.closed_form import vapour_per_liquid
from ..physics.mac_age import mapleson_factor
from ..properties import AGENTS, CO2E_BASES
from ..units import GAS_VOLUME_REFERENCE, REFERENCE_PRESSURE, REFERENCE_TEMPERATURE, parse_quantity
from .audit_report import AuditResult, group_table, kpi_summary, totals_of
from .flow_classes import FLOW_CLASS_SOURCE, FLOW_CLASSES, flow_class

#: Minimum inspired O2 at low flow (the registry's INSPIRED_OXYGEN_FLOOR, Baum and Aitkenhead 1995).
MIN_INSPIRED_OXYGEN = INSPIRED_OXYGEN_FLOOR
UNITS = {
    "l": "liter",
    "ml": "milliliter",
    "min": "minute",
    "l_min": "liter / minute",
    "kg": "kilogram",
    "mac_h": "MAC_hour",
    "kg_mac_h": "kilogram / MAC_hour",
}


def age_mac(agent_name: str, age_years: Any) -> np.ndarray:
    """MAC [fraction] of an agent at an age (Mapleson 1996), vectorised over ages.

    >>> round(float(age_mac("sevoflurane", 70)) * 100, 3)
    1.495
    """
    mac40 = AGENTS[agent_name].mac40.to("dimensionless").magnitude
    return mac40 * np.asarray(mapleson_factor(np.asarray(age_years, dtype=float)))


def _weights(t: np.ndarray, same_next: np.ndarray, rule: str) -> tuple[np.ndarray, np.ndarray]:
    """Per-sample quadrature weights [min] and the interval after each sample [min]."""
    dt_next = np.zeros_like(t)
    dt_next[:-1] = np.where(same_next, t[1:] - t[:-1], 0.0)
    if rule == "hold":
        return dt_next, dt_next
    dt_prev = np.zeros_like(t)
    dt_prev[1:] = dt_next[:-1]
    return 0.5 * (dt_prev + dt_next), dt_next


def _case_sum(codes: np.ndarray, values: np.ndarray, n: int) -> np.ndarray:
    return np.bincount(codes, weights=values, minlength=n)


def audit(
    source: Any,
    *,
    prices: Prices | None = None,
    basis: str = "ar6_gwp100",
    quadrature: str = "hold",
    maintenance_after: Any = "10 min",
    max_gap: Any = "30 min",
    manifold_loss: float = 0.0,
) -> AuditResult:
    """Audit a log of recorded cases.

    Parameters
    ----------
    source : path, file object, bytes or LogData (CSV text: pass log_from_text(text))
    prices : Prices, optional
        Without prices the cost columns are left out (and say so).
    basis : str
        CO2e basis, a key of :data:`estimator.choices.CO2E_BASES`.
    quadrature : {"hold", "trapezoid"}
    maintenance_after : [min]
        Maintenance starts this long after a case's first sample.
    max_gap : [min]
        Longer gaps between samples of a case are warned about (the hold rule bridges them).
    manifold_loss : float
        Share of piped N2O lost before use, for CO2e (0 = cylinders at the point of use).

    Returns
    -------
    AuditResult
    """
    label = carbon.basis_label(basis)
    if quadrature not in QUADRATURES:
        raise InputError("quadrature", quadrature, "one of " + ", ".join(QUADRATURES))
    after = parse_quantity(maintenance_after, "maintenance_after", "time", default_unit="min").to("min").magnitude
    if not 0 <= after <= 600:
        raise InputError("maintenance_after", maintenance_after, "0 to 600 min")
    gap = parse_quantity(max_gap, "max_gap", "time", default_unit="min").to("min").magnitude
    log = source if isinstance(source, LogData) else read_log(source)
    warnings = list(log.warnings)
    s = log.samples
    n_cases = len(log.case_ids)
    codes = s["case"].to_numpy()
    t = s["t_min"].to_numpy()
    same_next = codes[1:] == codes[:-1]
    w, dt_next = _weights(t, same_next, quadrature)
    o2, air, n2o = (s[c].to_numpy() for c in ("oxygen", "air", "nitrous_oxide"))
    fgf = o2 + air + n2o
    d = s["setting"].to_numpy()
    vapour = fgf * d / (1.0 - d)

    cases = pd.DataFrame({"case_id": log.case_ids})
    cases["samples"] = np.bincount(codes, minlength=n_cases)
    cases["duration_min"] = _case_sum(codes, dt_next, n_cases)
    cases["start"] = log.case_start
    cases["room"] = log.case_room
    cases["month"] = log.case_month
    cases["patient_weight_kg"] = log.case_weight
    cases["patient_age_year"] = log.case_age
    for name, arr in (("oxygen_l", o2), ("air_l", air), ("nitrous_oxide_l", n2o)):
        cases[name] = _case_sum(codes, arr * w, n_cases)
    cases["fresh_gas_l"] = cases["oxygen_l"] + cases["air_l"] + cases["nitrous_oxide_l"]
    with np.errstate(invalid="ignore", divide="ignore"):
        cases["mean_fresh_gas_flow_l_min"] = cases["fresh_gas_l"] / cases["duration_min"]

    # Agent delivered per (case, agent): vapour litres -> liquid mL.
    agent_codes = s["agent_code"].to_numpy()
    agent_names = log.agent_names
    n_ag = len(agent_names)
    pair = _case_sum(codes * n_ag + agent_codes, vapour * w, n_cases * n_ag).reshape(n_cases, n_ag)
    liquid = np.zeros_like(pair)
    ref = (REFERENCE_TEMPERATURE, REFERENCE_PRESSURE)
    co2e_agent = np.zeros(n_cases)
    for j, name in enumerate(agent_names):
        if not name:
            continue
        sp = AGENTS[name]
        liquid[:, j] = pair[:, j] * 1000.0 / vapour_per_liquid(name, *ref).to("mL/mL").magnitude
        grams = liquid[:, j] * sp.liquid_density.to("g/mL").magnitude
        co2e_agent += carbon.released_co2e(name, basis, delivered_g=grams)["agent_co2e_kg"]  # no uptake in a log
    cases["agent_vapour_l"] = pair.sum(axis=1)
    cases["agent_liquid_ml"] = liquid.sum(axis=1)
    named = [j for j, n in enumerate(agent_names) if n]
    main = (
        np.array(agent_names, dtype=object)[np.argmax(np.where(np.arange(n_ag) == 0, -1, pair), axis=1)]
        if named
        else np.full(n_cases, "", dtype=object)
    )
    used = pair[:, named] > 0 if named else np.zeros((n_cases, 0), bool)
    cases["agent"] = [
        ("+".join(agent_names[named[k]] for k in np.flatnonzero(row)) or m) for row, m in zip(used, main, strict=True)
    ]
    for j in named:
        cases[f"liquid_{agent_names[j]}_ml"] = liquid[:, j]
    n2o = carbon.released_co2e(
        None, basis, nitrous_oxide_l=cases["nitrous_oxide_l"].to_numpy(), manifold_loss=manifold_loss
    )
    cases["co2e_agent_kg"] = co2e_agent
    cases["co2e_nitrous_oxide_kg"] = n2o["nitrous_oxide_co2e_kg"]
    cases["co2e_kg"] = cases["co2e_agent_kg"] + cases["co2e_nitrous_oxide_kg"]

    currency = None
    if prices is not None:
        currency = prices.currency
        pairs = pd.DataFrame(
            {"agent": np.tile(np.array(agent_names, dtype=object), n_cases), "agent_liquid_ml": liquid.ravel()}
        )
        agent_cost = cost_table(pairs, prices)
        by_case = agent_cost["agent"].to_numpy().reshape(n_cases, n_ag).sum(axis=1)
        gas_cost = cost_table(cases[["oxygen_l", "air_l", "nitrous_oxide_l"]], prices)
        cases["cost_agent"] = by_case
        cases["cost_gases"] = gas_cost["gases"].to_numpy()
        cases["cost_total"] = cases["cost_agent"] + cases["cost_gases"]
        unpriced = agent_cost["unpriced"].to_numpy().reshape(n_cases, n_ag)
        cases["unpriced"] = [
            ";".join(sorted({u for u in (*row, g) if u})) for row, g in zip(unpriced, gas_cost["unpriced"], strict=True)
        ]

    # Maintenance KPIs with the interval after each sample (sample-and-hold of the setting).
    t_end = t + dt_next
    m_len = np.clip(t_end - np.maximum(t, after), 0.0, None)
    m_case = _case_sum(codes, m_len, n_cases)
    cases["maintenance_time_min"] = m_case
    with np.errstate(invalid="ignore", divide="ignore"):
        cases["mean_maintenance_flow_l_min"] = _case_sum(codes, fgf * m_len, n_cases) / m_case
        cases["maintenance_share_le_1"] = _case_sum(codes, m_len * (fgf <= 1.0), n_cases) / m_case
        cases["maintenance_share_le_0_5"] = _case_sum(codes, m_len * (fgf <= 0.5), n_cases) / m_case
    cases["flow_class"] = np.where(m_case > 0, flow_class(cases["mean_maintenance_flow_l_min"].fillna(0.0)), "")
    sample_class = np.searchsorted(np.array([b for _, b in FLOW_CLASSES[:-1]]), fgf, side="left")
    class_time = np.bincount(sample_class, weights=m_len, minlength=len(FLOW_CLASSES))

    _mac_hours(cases, s, codes, w, agent_names, n_cases, warnings)
    with np.errstate(invalid="ignore", divide="ignore"):
        cases["co2e_per_mac_hour_kg"] = cases["co2e_kg"] / cases["mac_hours"]
    if "min_inspired_oxygen" in s:
        low = np.isfinite(cases["min_inspired_oxygen"]) & (cases["min_inspired_oxygen"] < MIN_INSPIRED_OXYGEN)
        if low.any():
            warnings.append(
                (
                    "INSPIRED_OXYGEN_LOW",
                    f"{int(low.sum())} case(s) recorded inspired O2 below "
                    f"{MIN_INSPIRED_OXYGEN:.0%} (Baum and Aitkenhead 1995): see min_inspired_oxygen",
                )
            )
    long_gap = dt_next > gap
    if long_gap.any():
        bad = sorted({log.case_ids[c] for c in codes[long_gap]})
        warnings.append(
            (
                "LONG_SAMPLE_GAP",
                f"{int(long_gap.sum())} gap(s) longer than {gap:g} min between "
                f"samples, bridged by the {quadrature} rule, in case(s) "
                + ", ".join(map(str, bad[:10]))
                + (" ..." if len(bad) > 10 else ""),
            )
        )
    if log.rows["used"] == 0:
        warnings.append(
            ("NO_ROWS_USED", f"no row of the log could be used ({log.rows['rejected']} rejected): see the rejections")
        )
    single = cases["samples"] == 1
    if single.any():
        warnings.append(
            (
                "SINGLE_SAMPLE_CASE",
                f"{int(single.sum())} case(s) have one sample and no duration: "
                + ", ".join(map(str, cases.loc[single, "case_id"].head(10))),
            )
        )

    notes: tuple[str, ...] = (
        f"quadrature: {quadrature} ({'sample and hold, left-rectangle rule' if quadrature == 'hold' else 'trapezoid rule'})",
        "delivered vapour = carrier flow x D/(1 - D); liquid via ideal-gas molar volume at the reference, "
        "molar mass and liquid density",
        carbon.RELEASE_NOTE + "; uptake is not in a log, so the metabolised share is taken of the delivered agent",
        carbon.NITROUS_NOTE,
        "absorbent use is not in the log and is not counted",
        f"maintenance starts {after:g} min after each case's first sample; KPIs use the setting held over "
        "each interval",
        f"flow classes: {FLOW_CLASS_SOURCE}",
        "MAC-hours count the volatile agent only (end-tidal N2O is not in the log); end-tidal % taken at 1 atm",
    )
    if prices is None:
        notes += ("no prices given: costs not computed",)
    else:
        notes += (f"prices used: {prices.currency}" + (f" ({prices.note})" if prices.note else ""),)
    kpis = kpi_summary(cases, class_time, after)
    return AuditResult(
        rows=dict(log.rows),
        rejections=list(log.rejections),
        cases=cases,
        rooms=group_table(cases, "room"),
        months=group_table(cases, "month"),
        totals=totals_of(cases),
        kpis=kpis,
        basis=basis,
        quadrature=quadrature,
        currency=currency,
        samples=s,
        notes=notes + (f"CO2e basis: {label}", GAS_VOLUME_REFERENCE),
        warnings=tuple(warnings),
    )


def _mac_hours(
    cases: pd.DataFrame,
    s: pd.DataFrame,
    codes: np.ndarray,
    w: np.ndarray,
    agent_names: list[str],
    n_cases: int,
    warnings: list[tuple[str, str]],
) -> None:
    """MAC-hours per case where every sample has an end-tidal agent and the case an age."""
    cases["mac_hours"] = np.nan
    cases["mac_hours_note"] = ""
    has_et = "end_tidal" in s
    has_age = "age" in s
    if "min_inspired_oxygen" in s:
        cases["min_inspired_oxygen"] = s["min_inspired_oxygen"].groupby(codes).min().reindex(range(n_cases)).to_numpy()
    if not (has_et and has_age):
        missing = [c for c, ok in (("end_tidal_agent", has_et), ("patient_age", has_age)) if not ok]
        cases["mac_hours_note"] = "no " + " and no ".join(missing) + " column"
        warnings.append(
            (
                "MAC_HOURS_UNAVAILABLE",
                "MAC-hours need end_tidal_agent and patient_age; the log has "
                "no " + " and no ".join(missing) + " column",
            )
        )
        return
    et = s["end_tidal"].to_numpy()
    age = s["age"].to_numpy()
    ag = s["agent_code"].to_numpy()
    mac = np.full(len(et), np.nan)
    for j, name in enumerate(agent_names):
        if name:
            sel = ag == j
            mac[sel] = age_mac(name, age[sel])
    frac = np.where(ag == 0, np.where(np.isnan(et), np.nan, 0.0), et / mac)
    ok = np.isfinite(frac)
    n_bad = np.bincount(codes, weights=~ok, minlength=n_cases)
    mh = _case_sum(codes, np.where(ok, frac * w, 0.0), n_cases) / 60.0
    cases["mac_hours"] = np.where(n_bad == 0, mh, np.nan)
    cases["mac_hours_note"] = np.where(
        n_bad == 0, "", [f"end-tidal agent or age missing in {int(k)} sample(s)" for k in n_bad]
    )
    if (n_bad > 0).any():
        warnings.append(
            (
                "MAC_HOURS_INCOMPLETE",
                f"{int((n_bad > 0).sum())} case(s) lack end-tidal agent or age in some samples: no MAC-hours for them",
            )
        )


__all__ = ["FLOW_CLASSES", "QUADRATURES", "AuditResult", "CO2E_BASES", "age_mac", "audit", "flow_class", "read_log"]
