"""Counterfactual of a fresh-gas audit: the same cases under a low-flow policy, re-run by the engine.

Each audited case becomes a scenario for :func:`estimator.simulation.engine.simulate`:

* **wash-in** (the first ``maintenance_after`` minutes) as recorded: blocks of the recorded mean
  flows and the dial that delivers the recorded mean vapour flow, D = v / (F + v), so the engine
  delivers what the log shows;
* **maintenance** in blocks of ``block`` minutes, each an *end-tidal hold* at the block's recorded
  mean end-tidal agent, with the policy's total fresh-gas flow where the recorded flow was higher
  (a lower recorded flow is kept). The recorded O2 : air : N2O mix is scaled to the policy flow and
  O2 raised, taking from air first, to at least ``minimum_oxygen_share`` of the fresh gas.

Savings = baseline - policy in liquid agent, fresh gas, CO2e and cost. The baseline is the audit
itself (``baseline = "recorded"``) or the engine run on the recorded flows (``"engine"``), which
cancels model bias. CO2e of both sides uses the audit's rule (metabolised share of delivered
agent), so the difference is the agent not delivered. Cases without an end-tidal agent, with more
than one agent, or with flows beyond the engine's range are skipped and listed with the reason. The
engine re-runs every case by default, at about 25-30 ms of CPU per case (the demo's 452 cases in
about 12 s on one core); ``max_cases`` re-runs only the first N cases (the rest are listed as skipped,
and the savings are those of the cases re-run, never scaled up). ``progress(done, total)`` is called
after each case, for a progress bar.

The policy file (its TOML contract and the flows it sets) is :mod:`estimator.inputs.policy_file`,
re-exported here. The engine is called through ``runner`` (a callable taking the scenario as a dict and returning an
object with ``.totals`` and ``.warnings``), so a stand-in can take its place in tests.

Examples
--------
>>> p = parse_policy({"fresh_gas_flow": "0.5 L/min"})
>>> p.fresh_gas_flow, p.minimum_oxygen_share
(0.5, 0.6)
>>> [round(x, 3) for x in policy_flows(1.0, 3.0, 0.0, p)]
[0.3, 0.2, 0.0]
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict
from typing import TYPE_CHECKING, Any

import numpy as np

from ..accounts import carbon_totals
from ..accounts.costs import Prices, case_cost
from ..errors import InputError
from ..inputs.policy_file import (
    ENGINE_MAX_FLOW,
    MAX_CASES,
    Policy,
    PolicyInput,
    load_policy,
    parse_policy,
    policy_flows,
    policy_from_text,
)
from ..units import GAS_VOLUME_REFERENCE

if TYPE_CHECKING:
    from .audit_report import AuditResult


def _blocks(t0: float, t1: float, length: float) -> list[tuple[float, float]]:
    n = max(1, math.ceil((t1 - t0) / length - 1e-9))
    edges = np.linspace(t0, t1, n + 1)
    return [(float(a), float(b)) for a, b in zip(edges[:-1], edges[1:], strict=True) if b > a]


def _held_mean(t: np.ndarray, t_end: np.ndarray, v: np.ndarray, a: float, b: float) -> float:
    """Mean over [a, b] of a sample-and-hold signal (value v over [t, t_end])."""
    overlap = np.clip(np.minimum(t_end, b) - np.maximum(t, a), 0.0, None)
    return float(np.sum(overlap * v) / (b - a))


def case_scenarios(result: AuditResult, policy: Policy) -> tuple[list[dict[str, Any]], list[dict[str, str]]]:
    """Per case: the policy scenario and the recorded-flow scenario (dicts), or the skip reason."""
    s = result.samples
    after = policy.maintenance_after if policy.maintenance_after is not None else result.kpis["maintenance_after_min"]
    out, skipped = [], []
    has_et = "end_tidal" in s
    for code, df in s.groupby("case", sort=True):
        row = result.cases.iloc[int(code)]
        cid = str(row["case_id"])
        agent = str(row["agent"])
        reason = None
        if not has_et or df["end_tidal"].isna().any():
            reason = "end_tidal_agent missing: the engine needs the recorded end-tidal to hold"
        elif not agent or "+" in agent:
            reason = "no volatile agent" if not agent else "more than one agent in the case"
        elif df[["oxygen", "air", "nitrous_oxide"]].to_numpy().max() > ENGINE_MAX_FLOW:
            reason = f"a recorded flow above the engine's {ENGINE_MAX_FLOW:g} L/min per gas"
        elif row["duration_min"] <= 0:
            reason = "no duration"
        elif row["duration_min"] > 24 * 60:
            reason = "longer than the engine's 24 h"
        if reason:
            skipped.append({"case_id": cid, "reason": reason})
            continue
        t = df["t_min"].to_numpy()
        t_end = np.append(t[1:], t[-1])
        fl = {g: df[g].to_numpy() for g in ("oxygen", "air", "nitrous_oxide")}
        carrier = fl["oxygen"] + fl["air"] + fl["nitrous_oxide"]
        d = df["setting"].to_numpy()
        vapour = carrier * d / (1.0 - d)
        et = df["end_tidal"].to_numpy()
        end = float(t[-1])
        phases: dict[str, list[dict[str, str]]] = {"policy": [], "recorded": []}
        for a, b in _blocks(0.0, min(after, end), policy.block) if after > 0 else []:
            f = {g: _held_mean(t, t_end, v, a, b) for g, v in fl.items()}
            v = _held_mean(t, t_end, vapour, a, b)
            total = sum(f.values())
            dial = v / (total + v) if total + v > 0 else 0.0
            ph = {
                "duration": f"{b - a} min",
                **{g: f"{x} L/min" for g, x in f.items()},
                "vaporizer": f"{dial * 100} %",
                "label": "wash-in as recorded",
            }
            phases["policy"].append(ph)
            phases["recorded"].append(ph)
        for a, b in _blocks(after, end, policy.block) if end > after else []:
            f = {g: _held_mean(t, t_end, v, a, b) for g, v in fl.items()}
            target = _held_mean(t, t_end, et, a, b)
            hold = {"end_tidal_target": f"{target * 100} %"} if target > 1e-5 else {"vaporizer": "0 %"}
            p = dict(zip(f, policy_flows(f["oxygen"], f["air"], f["nitrous_oxide"], policy), strict=True))
            phases["policy"].append(
                {
                    "duration": f"{b - a} min",
                    **{g: f"{x} L/min" for g, x in p.items()},
                    **hold,
                    "label": "maintenance under the policy",
                }
            )
            phases["recorded"].append(
                {
                    "duration": f"{b - a} min",
                    **{g: f"{x} L/min" for g, x in f.items()},
                    **hold,
                    "label": "maintenance as recorded",
                }
            )
        weight = row.get("patient_weight_kg", math.nan)
        age = row.get("patient_age_year", math.nan)
        defaults = [n for n, v in (("weight", weight), ("age", age)) if not math.isfinite(v)]
        patient = {
            "weight": f"{weight if math.isfinite(weight) else policy.default_weight} kg",
            "age": f"{age if math.isfinite(age) else policy.default_age} year",
        }
        docs = {
            k: {
                "title": f"{cid} ({k})",
                "patient": patient,
                "agent": {"name": agent},
                "phases": v,
                "output": {"interval": "5 min"},
            }
            for k, v in phases.items()
        }
        out.append({"case_id": cid, "code": int(code), "agent": agent, "defaults": defaults, **docs})
    return out, skipped


def engine_runner(doc: dict[str, Any]) -> Any:
    """Run a scenario dict through the engine."""
    from ..inputs.scenario import scenario_from_dict
    from ..simulation.engine import simulate

    return simulate(scenario_from_dict(doc))


def _side(
    totals: dict[str, Any], agent: str, prices: Prices | None, basis: str, loss: float, engine: bool = False
) -> dict[str, float]:
    """One side of the comparison; with ``engine`` both sides are engine runs, so the metabolised agent is
    the engine's (as the case counts it), else the share of the delivered agent, as for a log."""
    keep = ("agent_liquid", "oxygen", "air", "nitrous_oxide") + (
        ("agent_uptake", "agent_metabolised") if engine else ()
    )
    q = {k: totals[k] for k in keep if k in totals}
    co2e = carbon_totals.case_carbon(q, agent, basis, manifold_loss=loss).released_co2e.to("kg").magnitude
    out = {
        "agent_liquid_ml": float(q["agent_liquid"].to("mL").magnitude),
        "fresh_gas_l": float(sum(q[g].to("L").magnitude for g in ("oxygen", "air", "nitrous_oxide") if g in q)),
        "co2e_kg": float(co2e),
    }
    if prices is not None:
        out["cost_total"] = case_cost(q, prices, agent)["total"]
    return out


def _quantities(
    side: dict[str, float], basis: str, currency: str | None, by_agent: dict[str, float] | None = None
) -> dict[str, Any]:
    out: dict[str, Any] = {
        "agent_liquid": {"magnitude": side["agent_liquid_ml"], "units": "milliliter"},
        "fresh_gas": {"magnitude": side["fresh_gas_l"], "units": "liter"},
        "co2e": {"magnitude": side["co2e_kg"], "units": "kilogram", "basis": basis},
    }
    if "cost_total" in side:
        out["cost"] = {"currency": currency, "total": side["cost_total"]}
    if by_agent is not None:  # liquid of each agent apart: millilitres of two agents are not one stock
        out["agent_liquid_by_agent"] = {a: {"magnitude": v, "units": "milliliter"} for a, v in sorted(by_agent.items())}
    return out


def counterfactual(
    result: AuditResult,
    policy: Policy,
    *,
    prices: Prices | None = None,
    runner: Callable[[dict[str, Any]], Any] | None = None,
    manifold_loss: float = 0.0,
    progress: Callable[[int, int], None] | None = None,
) -> dict[str, Any]:
    """Savings of a low-flow policy over the audited cases (JSON-ready dict, see module doc)."""
    from ..units import Q_

    run = runner or engine_runner
    built, skipped = case_scenarios(result, policy)
    keys = ["agent_liquid_ml", "fresh_gas_l", "co2e_kg"] + (["cost_total"] if prices is not None else [])
    cases, warnings = [], []
    sums = {side: dict.fromkeys(keys, 0.0) for side in ("baseline", "policy")}
    by_agent: dict[str, dict[str, float]] = {"baseline": {}, "policy": {}}
    if policy.max_cases is not None and len(built) > policy.max_cases:
        skipped += [
            {"case_id": b["case_id"], "reason": f"beyond policy.max_cases = {policy.max_cases}"}
            for b in built[policy.max_cases :]
        ]
        built = built[: policy.max_cases]
    for done, item in enumerate(built, start=1):
        if progress is not None:
            progress(done - 1, len(built))
        try:
            res_p = run(item["policy"])
            res_b = run(item["recorded"]) if policy.baseline == "engine" else None
        except InputError as exc:
            skipped.append({"case_id": item["case_id"], "reason": f"engine refused the scenario: {exc}"})
            continue
        both = res_b is not None
        pol = _side(res_p.totals, item["agent"], prices, result.basis, manifold_loss, both)
        if res_b is not None:
            base = _side(res_b.totals, item["agent"], prices, result.basis, manifold_loss, both)
        else:
            row = result.cases.iloc[item["code"]]
            totals = {
                "agent_liquid": Q_(row["agent_liquid_ml"], "mL"),
                **{g: Q_(row[f"{g}_l"], "L") for g in ("oxygen", "air", "nitrous_oxide")},
            }
            base = _side(totals, item["agent"], prices, result.basis, manifold_loss)
        for k in keys:
            sums["baseline"][k] += base[k]
            sums["policy"][k] += pol[k]
        for side, values in (("baseline", base), ("policy", pol)):
            by_agent[side][item["agent"]] = by_agent[side].get(item["agent"], 0.0) + values["agent_liquid_ml"]
        case_warn = [{"code": c, "message": m} for c, m in res_p.warnings]
        if item["defaults"]:
            case_warn.append(
                {
                    "code": "PATIENT_DEFAULTS",
                    "message": "policy default used for patient " + " and ".join(item["defaults"]),
                }
            )
        cur = prices.currency if prices is not None else None
        cases.append(
            {
                "case_id": item["case_id"],
                "agent": item["agent"],
                "baseline": _quantities(base, result.basis, cur),
                "policy": _quantities(pol, result.basis, cur),
                "savings": _quantities({k: base[k] - pol[k] for k in keys}, result.basis, cur),
                "warnings": case_warn,
            }
        )
    flagged = sorted({w["code"] for c in cases for w in c["warnings"]})
    if flagged:
        warnings.append(
            {
                "code": "POLICY_CASE_WARNINGS",
                "message": "the engine warned for some policy cases: " + ", ".join(flagged) + " (see each case)",
            }
        )
    if skipped:
        warnings.append({"code": "CASES_SKIPPED", "message": f"{len(skipped)} case(s) not re-run (see skipped)"})
    savings = {k: sums["baseline"][k] - sums["policy"][k] for k in keys}
    by_agent["savings"] = {a: v - by_agent["policy"][a] for a, v in by_agent["baseline"].items()}
    currency = prices.currency if prices is not None else None
    share = {k: (savings[k] / sums["baseline"][k] if sums["baseline"][k] > 0 else None) for k in keys}
    if progress is not None:
        progress(len(built), len(built))
    return {
        "policy": asdict(policy),
        "baseline": policy.baseline,
        "method": "engine re-run of each case: wash-in as recorded, maintenance as an end-tidal hold at the "
        "recorded end-tidal agent with the policy's fresh-gas flow",
        "cases": cases,
        "skipped": skipped,
        "totals": {
            "baseline": _quantities(sums["baseline"], result.basis, currency, by_agent["baseline"]),
            "policy": _quantities(sums["policy"], result.basis, currency, by_agent["policy"]),
            "savings": _quantities(savings, result.basis, currency, by_agent["savings"]),
            "savings_share": {k.rsplit("_", 1)[0]: v for k, v in share.items()},
            "cases": len(cases),
        },
        "currency": currency,
        "co2e_basis": result.basis,
        "gas_volume_reference": GAS_VOLUME_REFERENCE,
        "warnings": warnings,
    }


__all__ = [
    "ENGINE_MAX_FLOW",
    "MAX_CASES",
    "Policy",
    "PolicyInput",
    "case_scenarios",
    "counterfactual",
    "engine_runner",
    "load_policy",
    "parse_policy",
    "policy_flows",
    "policy_from_text",
]
