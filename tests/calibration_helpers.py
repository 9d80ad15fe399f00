"""Synthetic audit logs made by the engine at a known uptake factor (for the calibration tests)."""

from __future__ import annotations

import numpy as np

from estimator.inputs.calibration_file import FixedFactor, with_calibration
from estimator.inputs.scenario import scenario_from_dict
from estimator.simulation.engine import simulate

HEADER = (
    "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,end_tidal_agent,"
    "patient_weight,patient_age"
)
#: Wash-in length [min] of every synthetic case.
WASH_IN = 10.0


def synthetic_log(
    factor: float,
    n: int = 24,
    *,
    agent: str = "sevoflurane",
    seed: int = 3,
    dial_scale: float = 1.0,
    scatter: float = 0.1,
):
    """CSV text of ``n`` cases the engine ran with uptake factor ``factor``: a 10-min wash-in at 4 L/min
    and a maintenance at 0.5-1.5 L/min, both end-tidal holds; samples every 0.5 min (the dial as the
    engine set it, times ``dial_scale`` and a lognormal factor per case of SD ``scatter`` in its log,
    standing in for the scatter between a department's patients)."""
    rng = np.random.default_rng(seed)
    rows = [HEADER]
    for k in range(n):
        weight, age = float(rng.uniform(50, 110)), float(rng.uniform(20, 80))
        flow = float(rng.choice([0.5, 0.8, 1.0, 1.5]))
        target = float(rng.uniform(0.9, 1.1))
        duration = float(rng.choice([60, 90, 120]))
        scale = dial_scale * float(np.exp(rng.normal(0.0, scatter))) if scatter else dial_scale
        doc = {
            "patient": {"weight": f"{weight} kg", "age": f"{age} years"},
            "agent": {"name": agent},
            "phases": [
                {
                    "duration": f"{WASH_IN} min",
                    "oxygen": "2 L/min",
                    "air": "2 L/min",
                    "end_tidal_target": f"{target} MAC",
                },
                {
                    "duration": f"{duration - WASH_IN} min",
                    "oxygen": f"{flow / 2} L/min",
                    "air": f"{flow / 2} L/min",
                    "end_tidal_target": f"{target} MAC",
                },
            ],
            "output": {"interval": "0.5 min"},
        }
        r = simulate(with_calibration(scenario_from_dict(doc), FixedFactor(factor)))
        s = r.series.drop_duplicates("time [min]", keep="last")
        for t, dial, et in zip(s["time [min]"], s["vaporizer_setting [%]"], s["end_tidal_agent [%]"], strict=True):
            o2 = 2.0 if t < WASH_IN else flow / 2
            rows.append(f"S{k:03d},{t:.2f},{o2},{o2},0,{agent},{dial * scale:.4f},{et:.4f},{weight:.1f},{age:.1f}")
    return "\n".join(rows) + "\n"


def calibration(factor: float, agent: str = "sevoflurane"):
    """A valid calibration file's contents with one agent's factor (interval +-5 %, 40 cases)."""
    from estimator.inputs.calibration_file import calibration_from_text

    return calibration_from_text(calibration_text(factor, agent))


def calibration_codes(factor: float, agent: str = "sevoflurane", use: str = "sevoflurane") -> set[str]:
    """Codes of the calibration note a case of ``use`` gets from a file calibrating ``agent``."""
    from estimator.inputs.calibration_file import calibration_note

    cal = calibration(factor, agent)
    return {w["code"] for w in calibration_note(cal, use, cal.factor(use) or 1.0)["warnings"]}


def audit_calibration_codes(factor: float) -> set[str]:
    """Codes of the audit's calibration of a synthetic log made at ``factor``."""
    from estimator.inputs.audit_log import log_from_text
    from estimator.planning.audit import audit
    from estimator.planning.calibration import check_and_calibrate, run_cases

    out = check_and_calibrate(*run_cases(audit(log_from_text(synthetic_log(factor)))))
    return {w["code"] for w in out["calibration"]["warnings"]}


def floor_codes(factor: float) -> set[str]:
    """Warnings of the flow floor of a small plan run with a department factor."""
    from estimator.planning.safety import flow_floor

    doc = {
        "patient": {"weight": "70 kg"},
        "agent": {"name": "sevoflurane"},
        "phases": [{"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", "end_tidal_target": "1 MAC"}],
    }
    sc = with_calibration(scenario_from_dict(doc), FixedFactor(factor))
    return {c for c, _ in flow_floor(sc, grid=False).warnings}


def calibration_text(factor: float, agent: str = "sevoflurane") -> str:
    """The TOML text of a valid calibration file with one agent's factor (interval +-5 %, 40 cases)."""
    return (
        f'method = "test"\n[provenance]\nlog_name = "log.csv"\nlog_sha256 = "{"0" * 64}"\n'
        'first_case = 2026-01-05\nlast_case = 2026-02-01\ncases = 40\nmade = 2026-03-01\nprogram = "test"\n'
        f"[agents.{agent}]\nfactor = {factor}\nlow = {0.95 * factor}\nhigh = {1.05 * factor}\ncases = 40\n"
    )
