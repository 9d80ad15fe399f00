"""From integrated segments to a :class:`~estimator.simulation.results.CaseResult`: series, totals, warnings.

The engine integrates each phase of a :class:`~estimator.simulation.case_setup.CaseSetup` and hands over one
typed :class:`Segment` per phase; this module reads the raw states and derived flows back into what
users read (pint totals, a series with units in its column names, the phase reports and the
warnings), and keeps the per-species mass balance for
:meth:`~estimator.simulation.results.CaseResult.mass_balance`. The totals are formed by
:func:`estimator.accounts.accounting.totals_from_deltas`, as in the batch.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..accounts.accounting import DELTA_TOTAL_UNITS, fresh_gas_litres, totals_from_deltas
from ..accounts.carbon_totals import totals_co2e
from ..limits import HYPOXIC_FRACTION
from ..physics import circuit as c
from ..properties import agent as agent_properties
from ..units import GAS_VOLUME_REFERENCE, Q_
from .case_setup import CaseSetup, PhaseSetup
from .kernel_parameters import vaporizer_type
from .results import FIO2_ADVISORY, P_H2O, TARGET_BAND, CaseResult, judged_samples, litres_per_mmol

_NAMES = {
    c.O2: "oxygen",
    c.CO2: "carbon_dioxide",
    c.N2: "nitrogen",
    c.N2O: "nitrous_oxide",
    c.AGENT: "agent",
    c.AR: "argon",
}


def _content(y: np.ndarray, base: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Amounts [mmol] per species held in circuit, lungs and body for state ``y``."""
    circ = base[c.P_NC] * y[c.Y_FC : c.Y_FC + c.NS]
    lung = base[c.P_NL] * y[c.Y_FA : c.Y_FA + c.NS]
    body = np.zeros(c.NS)
    for b, s in enumerate(c.BODY):
        o = c.Y_BODY + c.NBODYSTATE * b
        amt = base[c.P_VART] * y[o] + base[c.P_VVEN] * y[o + 1]
        for k in range(c.NT):
            amt += base[c.P_VT + k] * base[c.P_LAMBDA_T + c.NT * b + k] * y[o + 2 + k]
        body[s] = amt * base[c.P_LAMBDA + b] * base[c.P_CA]
    return circ, lung, body


@dataclass(frozen=True)
class Segment:
    """One integrated phase: a phase of the engine's case, or a trial run of the flow floor.

    Attributes
    ----------
    phase : PhaseSetup
        The phase's set-up (index, true flows, parameter vector).
    times : float64[m] [min]
        Output times, from the phase start to its end.
    states : float64[m, NY]
        States at ``times`` (layout of :mod:`estimator.physics.circuit`).
    derived : float64[m, NW]
        Flows and fractions at ``times`` (:func:`estimator.physics.circuit.derived_series`).
    stats : int64[3]
        Accepted steps, rejected steps, right-hand-side evaluations.
    """

    phase: PhaseSetup
    times: np.ndarray
    states: np.ndarray
    derived: np.ndarray
    stats: np.ndarray

    @property
    def makeup(self) -> float:
        """Deficit make-up gas over the phase, agent excluded [mmol]."""
        ys = self.states
        return sum(ys[-1, c.Y_MAKEUP + s] - ys[0, c.Y_MAKEUP + s] for s in range(c.NS) if s != c.AGENT)


def build_result(case: CaseSetup, segments: list[Segment]) -> CaseResult:
    """Assemble totals, series and warnings from the integrated phases of ``case``.

    Parameters
    ----------
    case : CaseSetup
    segments : list of Segment
        One integrated phase each, in order (states in the internal units of :mod:`estimator.physics.circuit`).

    Returns
    -------
    CaseResult
        Totals as pint quantities (gas litres free gas at 15 degC and 101.325 kPa), series with units in
        the column names, and warnings.

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> from estimator.simulation.engine import simulate
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "10 min", "oxygen": "1 L/min", "vaporizer": "2 %"}]})
    >>> r = simulate(s)  # integrates each phase, then calls build_result
    >>> round(float(r.totals["oxygen"].to("L").magnitude), 2), len(r.columns["time [min]"])
    (9.83, 11)
    """
    scenario, patient, site, base = case.scenario, case.patient, case.site, case.base
    amb = case.mmol_per_litre
    lpm = litres_per_mmol()
    ag = agent_properties(scenario.agent.name)
    kind_bypass = vaporizer_type(scenario) == "variable_bypass"
    from ..physics.mac import parse_age

    frames, phases, warns = [], [], list(patient.warnings) + parse_age(patient.age)[1] + list(site.warnings)
    steps = {"accepted": 0, "rejected": 0, "evaluations": 0}
    for seg in segments:
        index, times, ys, ws, p, stats = (
            seg.phase.index,
            seg.times,
            seg.states,
            seg.derived,
            seg.phase.parameters,
            seg.stats,
        )
        steps["accepted"] += int(stats[0])
        steps["rejected"] += int(stats[1])
        steps["evaluations"] += int(stats[2])
        u = ws[:, c.W_U]
        dial = u * site.ambient_pressure_kpa / 101.325 if kind_bypass else u
        cols: dict[str, Any] = {"time [min]": times, "phase": np.full(times.shape, index)}
        for sp, name in _NAMES.items():
            cols[f"inspired_{name} [%]"] = 100 * ws[:, c.W_FI + sp]
            cols[f"end_tidal_{name} [%]"] = 100 * ws[:, c.W_FET + sp]
        hold = p[c.P_MODE] == c.MODE_HOLD
        cols["end_tidal_target [%]"] = 100 * ws[:, c.W_TARGET] if hold else np.full(times.shape, np.nan)
        cols["inspired_oxygen_partial_pressure [kPa]"] = ws[:, c.W_FI + c.O2] * (site.ambient_pressure_kpa - P_H2O)
        cols["end_tidal_mac [MAC]"] = ws[:, c.W_MAC]
        cols["vaporizer_setting [%]"] = 100 * dial
        cols["delivered_agent [%]"] = 100 * u
        cols["fresh_gas_flow [L/min]"] = ws[:, c.W_FGF] / amb
        cols["exhaust_flow [L/min]"] = ws[:, c.W_EX] / amb
        cols["volume_deficit_flow [L/min]"] = ws[:, c.W_MAKEUP] / amb
        cols["oxygen_uptake [mL/min]"] = 1000 * lpm * ws[:, c.W_UPT + c.O2]
        cols["agent_uptake [mL/min]"] = 1000 * lpm * ws[:, c.W_UPT + c.AGENT]
        cols["nitrous_oxide_uptake [mL/min]"] = 1000 * lpm * ws[:, c.W_UPT + c.N2O]
        cols["co2_to_absorbent [mL/min]"] = 1000 * lpm * ws[:, c.W_CO2ABS]
        ml_per_mmol = ag.molar_mass.to("g/mol").magnitude / 1000 / ag.liquid_density.to("g/mL").magnitude
        agent_in = ys[:, c.Y_FGIN + c.AGENT] + ys[:, c.Y_MAKEUP + c.AGENT]  # accumulators start at 0
        cols["agent_liquid_cumulative [mL]"] = ml_per_mmol * agent_in
        df = cols
        frames.append(df)
        info: dict[str, Any] = {
            "index": index,
            "start": Q_(times[0], "min"),
            "end": Q_(times[-1], "min"),
            "mode": "end_tidal_hold" if hold else "vaporizer",
        }
        if hold:
            info.update(_hold_report(index, times, ws, p, warns))
        phases.append(info)
    series = {k: np.concatenate([f[k] for f in frames]) for k in frames[0]}  # a DataFrame only on demand
    gas_l = fresh_gas_litres(
        np.array([[seg.times[-1] - seg.times[0] for seg in segments]]),
        [seg.phase.true_flows for seg in segments],
        np.array([[seg.makeup for seg in segments]]),
        amb,
        base[c.P_MAKEUP_AIR] != 0.0,
    )[0]
    totals, balance = _totals(case, segments[0].states[0], segments[-1].states[-1], gas_l)
    fio2 = series["inspired_oxygen [%]"] / 100
    judged = judged_samples(series["time [min]"])
    _gas_warnings(series, fio2, judged, totals, warns)
    if site.ambient_pressure_kpa < 101.325 - 1e-6:
        from ..physics.inspired_oxygen import check_inspired_oxygen

        warns += [
            (code, msg)
            for code, msg in check_inspired_oxygen(fio2[judged], FIO2_ADVISORY, Q_(site.ambient_pressure_kpa, "kPa"))
        ]
    if scenario.site.flowmeter_readings:
        warns.append(
            (
                "FLOWMETER_ACCURACY",
                "phase flows are flowmeter readings converted to true flows; a "
                "calibrated tube reads to about +-2.5 % (common practice, no source), so gas totals carry "
                "that band",
            )
        )
        for key in ("oxygen", "air", "nitrous_oxide"):
            totals[f"{key}_band"] = {"low": totals[key] * 0.975, "high": totals[key] * 1.025}
    flow_ref = (
        f"series flows in ambient litres at the site ({site.ambient_pressure_kpa:.1f} kPa, "
        f"{site.temperature_k - 273.15:.0f} degC); totals in {GAS_VOLUME_REFERENCE}"
    )
    return CaseResult(
        scenario,
        patient,
        totals,
        series,
        warns,
        Q_(float(fio2[judged].min()), "dimensionless"),  # judged as the warnings and the batch judge it
        phases,
        balance,
        steps,
        flow_reference=flow_ref,
    )


def _hold_report(index: int, times: np.ndarray, ws: np.ndarray, p: np.ndarray, warns: list) -> dict:
    et = ws[:, c.W_FET + c.AGENT]
    target = ws[:, c.W_TARGET]
    reached = np.nonzero(et >= (1 - TARGET_BAND) * target)[0]
    out: dict[str, Any] = {"target_reached": None}
    no_carrier = p[c.P_CARRIER : c.P_CARRIER + c.NS].sum() <= 0.0
    if reached.size == 0:
        why = (
            "no fresh gas flows, so the vaporizer delivers nothing"
            if no_carrier
            else "the vaporizer maximum or the fresh-gas flow limits the wash-in"
        )
        warns.append(
            (
                "TARGET_NOT_REACHED",
                f"phase {index}: the end-tidal target ({100 * target[-1]:.2f} %) was not reached by "
                f"{times[-1]:.0f} min (end-tidal {100 * et[-1]:.2f} %); {why}",
            )
        )
        return out
    i = reached[0]
    out["target_reached"] = Q_(float(times[i]), "min")
    after = slice(i, None)
    at_max = (ws[after, c.W_U] >= p[c.P_UMAX] * (1 - 1e-9)) | no_carrier
    low = et[after] < (1 - TARGET_BAND) * target[after]
    if np.any(at_max & low):
        t_fail = times[after][np.argmax(at_max & low)]
        why = "no fresh gas flows, so the vaporizer delivers nothing" if no_carrier else "the dial is at its maximum"
        warns.append(
            (
                "TARGET_NOT_HELD",
                f"phase {index}: from {t_fail:.0f} min the end-tidal target cannot be held: {why}; raise the "
                "fresh-gas flow",
            )
        )
    elif np.any(at_max):
        warns.append(("DIAL_AT_MAXIMUM", f"phase {index}: the dial sits at the vaporizer maximum for part of the hold"))
    return out


def _totals(case: CaseSetup, y0: np.ndarray, y1: np.ndarray, gas_l: np.ndarray) -> tuple[dict, dict]:
    """Totals (pint, the ``totals`` of the JSON contract) and the per-species mass balance [mmol]."""
    scenario, base, amb, lpm = case.scenario, case.base, case.mmol_per_litre, litres_per_mmol()
    d = y1 - y0
    circ0, lung0, body0 = _content(y0, base)
    circ1, lung1, body1 = _content(y1, base)
    balance = {}
    for s, name in _NAMES.items():
        balance[name] = {
            "delivered": d[c.Y_FGIN + s] + d[c.Y_MAKEUP + s],
            "uptake": d[c.Y_UPTAKE + s],
            "vented": d[c.Y_VENT + s],
            "leaked": d[c.Y_LEAK + s],
            "sampled": d[c.Y_SAMPLE + s],
            "absorbed": d[c.Y_CO2ABS] if s == c.CO2 else 0.0,
            "stored_gas": (circ1[s] - circ0[s]) + (lung1[s] - lung0[s]),
            "stored_body": body1[s] - body0[s],
            "metabolised": d[c.Y_METAB] if s == c.AGENT else 0.0,
            "consumed": d[c.Y_O2CONS] if s == c.O2 else 0.0,
            "body_tracked": s in c.BODY or s == c.O2,
        }
    cap = scenario.circuit.absorbent_capacity.to("L").magnitude  # L CO2 per 100 g
    shared = totals_from_deltas(c.running_totals(d), gas_l, amb, scenario.agent.name, cap)
    q = {k: Q_(v, DELTA_TOTAL_UNITS[k]) for k, v in shared.items()}
    duration = scenario.duration.to("min").magnitude
    fg_mmol = sum(d[c.Y_FGIN + s] for s in range(c.NS))
    totals = {
        "duration": Q_(duration, "min"),
        "agent_liquid": q["agent_liquid"],
        "agent_vapour": q["agent_vapour"],
        "agent_uptake": q["agent_uptake"],
        "agent_vented": Q_(d[c.Y_VENT + c.AGENT] * lpm, "L"),
        "agent_leaked": Q_((d[c.Y_LEAK + c.AGENT] + d[c.Y_SAMPLE + c.AGENT]) * lpm, "L"),
        "agent_metabolised": q["agent_metabolised"],
        "agent_in_circuit": Q_(base[c.P_NC] * y1[c.Y_FC + c.AGENT] * lpm, "L"),
        "agent_in_lungs": Q_(base[c.P_NL] * y1[c.Y_FA + c.AGENT] * lpm, "L"),
        "agent_in_body": Q_(body1[c.AGENT] * lpm, "L"),
        "oxygen": q["oxygen"],
        "air": q["air"],
        "nitrous_oxide": q["nitrous_oxide"],
        "nitrous_oxide_mass": q["nitrous_oxide_mass"],
        "oxygen_consumed": Q_(d[c.Y_O2CONS] * lpm, "L"),
        "co2_absorbed": q["co2_absorbed"],
        "absorbent": Q_(float(shared["absorbent"]), "g"),
        "co2e": Q_(0.0, "kg"),
        "mac_hours": q["mac_hours"],
        "mean_fresh_gas_flow": Q_(fg_mmol / amb / duration, "L/min"),
        "volume_deficit": q["volume_deficit"],
    }
    totals["co2e"] = Q_(float(totals_co2e(totals, scenario.agent.name)["co2e_kg"]), "kg")  # the one CO2e rule
    return totals, balance


def _gas_warnings(
    series: dict[str, np.ndarray], fio2_all: np.ndarray, judged: np.ndarray, totals: dict, warns: list
) -> None:
    t = series["time [min]"][judged]
    fio2 = fio2_all[judged]
    deficit = series["volume_deficit_flow [L/min]"][judged]
    if totals["volume_deficit"].magnitude > 1e-9:
        first = t[np.argmax(deficit > 0)] if np.any(deficit > 0) else t[0]
        warns.append(
            (
                "VOLUME_DEFICIT",
                f"from {first:.0f} min the fresh gas does not cover uptake, leak and unreturned sample gas: "
                f"the bag empties ({totals['volume_deficit'].to('L').magnitude:.2f} L short in all); the model "
                "made the shortfall good with make-up gas (the fresh-gas mix, counted in the gas totals; room "
                "air where no fresh gas flows or the ventilator entrains air); raise the fresh-gas flow",
            )
        )
    if fio2.min() < HYPOXIC_FRACTION:
        warns.append(
            (
                "HYPOXIC_INSPIRED_MIXTURE",
                f"inspired O2 falls to {100 * fio2.min():.1f} % at {t[np.argmin(fio2)]:.0f} min: a hypoxic "
                "mixture; raise the O2 flow; monitor inspired O2 continuously",
            )
        )
    elif fio2.min() < FIO2_ADVISORY:
        warns.append(
            (
                "INSPIRED_OXYGEN_LOW",
                f"inspired O2 falls to {100 * fio2.min():.1f} % at {t[np.argmin(fio2)]:.0f} min, below the "
                f"{100 * FIO2_ADVISORY:.0f} % usually kept at low flow",
            )
        )
