"""Check the model against a department's recorded cases and calibrate its uptake factor per agent.

**Prediction check.** Every audited case with end-tidal data is re-run by the engine on its recorded
fresh-gas flows: the wash-in (the audit's first ``maintenance_after`` minutes) as recorded, with the
dial that delivers the recorded vapour, then the recorded end-tidal agent held in blocks of
:data:`CHECK_BLOCK` (the scenarios of :func:`estimator.planning.audit_policy.case_scenarios`; the
engine's ideal hold chasing a rising end-tidal lags it by about a minute, which would under-predict
the wash-in). The re-run reads the log's litres at the gas-volume reference, as the audit does. The
engine's delivered liquid agent (*predicted*) is compared with the audit's (*recorded*: dial x carrier
gas, :func:`estimator.planning.audit.audit`); per agent the median of recorded / predicted with a
percentile-bootstrap interval over cases.

**Calibration.** The uptake factor f (:mod:`estimator.inputs.calibration_file`) multiplies the agent's
uptake into blood and tissues; at a held end-tidal the delivered agent is close to linear in f, so each
case is run at f = 1 and f = :data:`SECOND_FACTOR` and its delivered agent at any f read on the secant
(the engine's delivered agent departs from the secant by under 2 % over f = 0.5-2 on the demo plans:
measured, tests/test_calibration.py). f minimises the sum over cases of the squared log of recorded /
predicted (errors taken as multiplicative), searched in ``FACTOR_RANGE``; its interval is the 2.5 and
97.5 percentiles of f refitted on :data:`RESAMPLES` bootstrap resamples of the cases (the percentile
interval of Efron B, Tibshirani RJ. An Introduction to the Bootstrap. Chapman & Hall 1993; from memory)
with the fixed seed :data:`SEED`, so a log gives the same interval every time. The interval covers the
scatter between cases, not a bias the model shares across them.

Cases the model flags as outside its validity (a warning in :data:`EXCLUDE_CODES` from the f = 1 run,
a patient default standing in for a missing weight or age, nothing recorded) are checked but left out
of the fit, each with its reason. An agent with fewer than
:data:`estimator.limits.CALIBRATION_MINIMUM_CASES` usable cases is refused; a factor outside
:data:`estimator.limits.UPTAKE_FACTOR_SUPPORTED` carries ``UPTAKE_FACTOR_UNSUPPORTED``.

Examples
--------
>>> import numpy as np
>>> a, s = np.array([10.0, 20.0, 5.0]), np.array([5.0, 8.0, 2.0])
>>> round(fit_factor(a + 1.5 * s, a, s), 4)
1.5
"""

from __future__ import annotations

import datetime as dt
import math
import zlib
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from ..constants import REFERENCE_TEMPERATURE_C, STANDARD_PRESSURE_KPA
from ..errors import InputError
from ..inputs.calibration_file import FACTOR_RANGE, FixedFactor, calibration_from_dict, with_calibration
from ..limits import CALIBRATION_MINIMUM_CASES, UPTAKE_FACTOR_SUPPORTED

if TYPE_CHECKING:
    from .audit_report import AuditResult

#: Block of the end-tidal holds of the check [min] (the demo log samples every 5 min; our choice).
CHECK_BLOCK = "1 min"
#: The second factor each case is run at; the secant through f = 1 and this gives f in between and near.
SECOND_FACTOR = 2.0
#: Bootstrap resamples of the interval (common practice, no source: 1000-2000 for a 95 % percentile
#: interval) and their fixed seed (our choice), so a log always gives the same interval.
RESAMPLES = 2000
#: The bootstrap's fixed seed (our choice).
SEED = 20
#: Engine warnings that put a case outside the model's validity for the fit (a target not reached is
#: not one: a recorded end-tidal that falls faster than the model can wash out at low flow is no
#: fault of the uptake; a target the dial cannot reach is DIAL_AT_MAXIMUM).
EXCLUDE_CODES = (
    "PATIENT_WEIGHT_OUTSIDE_VALIDATED",
    "AGE_BELOW_MAPLESON_RANGE",
    "TARGET_NOT_HELD",
    "DIAL_AT_MAXIMUM",
    "VOLUME_DEFICIT",
)
#: The site of the re-runs: the gas-volume reference, at which the audit reads the log's litres
#: (:func:`estimator.planning.audit.audit`), so both sides count the same moles of carrier gas.
_REFERENCE_SITE = {"temperature": f"{REFERENCE_TEMPERATURE_C} degC", "ambient_pressure": f"{STANDARD_PRESSURE_KPA} kPa"}
METHOD = (
    f"uptake factor by least squares on log(recorded / predicted delivered liquid agent); interval: percentile "
    f"bootstrap over cases, {RESAMPLES} resamples, seed {SEED}; each case run at factors 1 and {SECOND_FACTOR:g} "
    f"on its recorded flows, wash-in as recorded, then its recorded end-tidal agent held in {CHECK_BLOCK} blocks "
    f"(a factor beyond {SECOND_FACTOR:g} is read on the extended secant)"
)


@dataclass(frozen=True)
class CaseCheck:
    """One case of the check: recorded and predicted delivered liquid agent [mL] at f = 1 and f = 2."""

    case_id: str
    agent: str
    recorded: float
    at_one: float
    at_two: float
    excluded: str | None


def engine_runner(doc: dict[str, Any], factor: float) -> Any:
    """Run a scenario dict through the engine with the uptake factor ``factor``."""
    from ..inputs.scenario import scenario_from_dict
    from ..simulation.engine import simulate

    return simulate(with_calibration(scenario_from_dict(doc), FixedFactor(factor)))


def run_cases(
    result: AuditResult,
    *,
    runner: Callable[[dict[str, Any], float], Any] | None = None,
    max_cases: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> tuple[list[CaseCheck], list[dict[str, str]]]:
    """Re-run each case with end-tidal data at f = 1 and f = :data:`SECOND_FACTOR`; the skipped cases with reasons."""
    from .audit_policy import case_scenarios, parse_policy

    run = runner or engine_runner
    policy = parse_policy({"fresh_gas_flow": "1 L/min", "block": CHECK_BLOCK})
    built, skipped = case_scenarios(result, policy)
    if max_cases is not None and len(built) > max_cases:
        skipped += [{"case_id": b["case_id"], "reason": f"beyond max_cases = {max_cases}"} for b in built[max_cases:]]
        built = built[:max_cases]
    out = []
    for done, item in enumerate(built):
        if progress is not None:
            progress(done, len(built))
        doc = {**item["recorded"], "site": _REFERENCE_SITE}  # the log's litres read as the audit reads them
        try:
            one, two = run(doc, 1.0), run(doc, SECOND_FACTOR)
        except InputError as exc:
            skipped.append({"case_id": item["case_id"], "reason": f"engine refused the scenario: {exc}"})
            continue
        recorded = float(result.cases.iloc[item["code"]]["agent_liquid_ml"])
        flagged = sorted({code for code, _ in one.warnings} & set(EXCLUDE_CODES))
        reason = None
        if flagged:
            reason = "outside the model's validity: " + ", ".join(flagged)
        elif item["defaults"]:
            reason = "patient " + " and ".join(item["defaults"]) + " not recorded"
        elif not recorded > 0:
            reason = "no agent recorded"
        at_one, at_two = (float(r.totals["agent_liquid"].to("mL").magnitude) for r in (one, two))
        out.append(CaseCheck(item["case_id"], item["agent"], recorded, at_one, at_two, reason))
    if progress is not None:
        progress(len(built), len(built))
    return out, skipped


def fit_factor(recorded: np.ndarray, a: np.ndarray, s: np.ndarray) -> float:
    """The f in ``FACTOR_RANGE`` minimising sum(log(recorded / (a + f s))^2): predicted = a + f s, the secant."""
    from scipy.optimize import minimize_scalar

    lo, hi = FACTOR_RANGE
    floor = np.where(s < 0, -a / np.where(s < 0, s, -1.0), np.inf).min()  # keep every prediction above 0
    hi = min(hi, 0.999 * floor) if np.isfinite(floor) else hi
    log_r = np.log(recorded)

    def loss(f: float) -> float:
        pred = np.maximum(a + f * s, 1e-12)
        return float(np.sum((log_r - np.log(pred)) ** 2))

    res = minimize_scalar(loss, bounds=(lo, hi), method="bounded", options={"xatol": 1e-6})
    return float(res.x)


def _interval(values: np.ndarray, stat: Callable[[np.ndarray], float], rng: np.random.Generator) -> tuple[float, float]:
    n = len(values)
    idx = rng.integers(0, n, size=(RESAMPLES, n))
    boot = np.array([stat(i) for i in idx])
    return float(np.percentile(boot, 2.5)), float(np.percentile(boot, 97.5))


def _ml(v: float) -> dict[str, Any]:
    return {"magnitude": v, "units": "milliliter"}


def check_and_calibrate(cases: list[CaseCheck], skipped: list[dict[str, str]], seed: int = SEED) -> dict[str, Any]:
    """The prediction check and the calibration of :func:`run_cases`'s cases (JSON-ready).

    Returns ``{"prediction_check": ..., "calibration": ...}``; ``calibration.agents.<agent>`` holds
    ``factor``, ``low``, ``high``, ``cases``, ``supported``; agents with too few cases are under ``refused``.
    """
    per_case: list[dict[str, Any]] = []
    summary: dict[str, dict[str, Any]] = {}
    agents: dict[str, dict[str, Any]] = {}
    refused: dict[str, str] = {}
    warnings: list[dict[str, str]] = []
    for agent in sorted({c.agent for c in cases}):
        mine = [c for c in cases if c.agent == agent]
        rng = np.random.default_rng([seed, zlib.crc32(agent.encode())])  # an agent's draws of its own
        ratio = np.array([c.recorded / c.at_one if c.at_one > 0 else math.nan for c in mine])
        ok = np.isfinite(ratio) & (ratio > 0)
        med = ratio[ok]
        summary[agent] = {"cases": int(ok.sum()), "median_ratio": float(np.median(med)) if len(med) else None}
        if len(med) >= 2:

            def median_of(i: np.ndarray, m: np.ndarray = med) -> float:
                return float(np.median(m[i]))

            summary[agent]["low"], summary[agent]["high"] = _interval(med, median_of, rng)
        use = [c for c in mine if c.excluded is None and c.at_one > 0]
        factor = None
        if len(use) < CALIBRATION_MINIMUM_CASES:
            refused[agent] = f"{len(use)} usable case(s); at least {CALIBRATION_MINIMUM_CASES} are needed"
        else:
            rec = np.array([c.recorded for c in use])
            a1, a2 = np.array([c.at_one for c in use]), np.array([c.at_two for c in use])
            s = (a2 - a1) / (SECOND_FACTOR - 1.0)
            a = a1 - s
            factor = fit_factor(rec, a, s)

            def refit(i: np.ndarray, a: np.ndarray = a, s: np.ndarray = s, r: np.ndarray = rec) -> float:
                return fit_factor(r[i], a[i], s[i])

            low, high = _interval(rec, refit, rng)
            low, high = min(low, factor), max(high, factor)
            agents[agent] = {"factor": factor, "low": low, "high": high, "cases": len(use)}
            lo_ok, hi_ok = UPTAKE_FACTOR_SUPPORTED
            agents[agent]["supported"] = [lo_ok, hi_ok]
            if not lo_ok <= factor <= hi_ok:
                warnings.append(
                    {
                        "code": "UPTAKE_FACTOR_UNSUPPORTED",
                        "message": f"{agent}: uptake factor {factor:.2f} (interval {low:.2f}-{high:.2f}) lies outside "
                        f"{lo_ok:.2f}-{hi_ok:.2f}, the range the published checks support; read its forecasts with care",
                    }
                )
        for c in mine:
            at_f = c.at_one + (factor - 1.0) * (c.at_two - c.at_one) / (SECOND_FACTOR - 1.0) if factor else None
            per_case.append(
                {
                    "case_id": c.case_id,
                    "agent": agent,
                    "recorded": _ml(c.recorded),
                    "predicted": _ml(c.at_one),
                    "predicted_calibrated": _ml(at_f) if at_f is not None else None,
                    "ratio": c.recorded / c.at_one if c.at_one > 0 else None,
                    "in_calibration": c.excluded is None and factor is not None,
                    "excluded": c.excluded,
                }
            )
    check = {
        "method": "engine re-run on the recorded flows, wash-in as recorded, then the recorded end-tidal agent held "
        f"({CHECK_BLOCK} blocks); "
        "ratio = recorded / predicted delivered liquid agent; interval: percentile bootstrap of the median "
        f"({RESAMPLES} resamples, seed {seed})",
        "agents": summary,
        "cases": per_case,
        "skipped": skipped,
    }
    calibration = {
        "method": METHOD,
        "agents": agents,
        "refused": refused,
        "minimum_cases": CALIBRATION_MINIMUM_CASES,
        "excluded": [{"case_id": c.case_id, "reason": c.excluded} for c in cases if c.excluded],
        "warnings": warnings,
    }
    return {"prediction_check": check, "calibration": calibration}


def provenance(result: AuditResult, log_name: str, log_sha256: str, cases: int) -> dict[str, Any]:
    """The ``[provenance]`` of a calibration file: log name and digest, date range of its cases, case count."""
    from .. import __version__

    starts = [str(s)[:10] for s in result.cases.get("start", []) if isinstance(s, str) and len(s) >= 10]
    out: dict[str, Any] = {"log_name": log_name, "log_sha256": log_sha256}
    if starts:
        out["first_case"], out["last_case"] = min(starts), max(starts)
    out.update({"cases": cases, "made": dt.date.today().isoformat(), "program": f"lowflow-estimator {__version__}"})
    return out


def calibration_toml(calibration: dict[str, Any], prov: dict[str, Any]) -> str:
    """The calibration file's text (checked by its own loader before it is returned)."""
    if not calibration["agents"]:
        raise InputError(
            "--calibration-out",
            "no agent",
            f"at least {CALIBRATION_MINIMUM_CASES} usable cases of one agent ({calibration['refused']})",
        )
    lines = [
        "# Uptake factors of a department, from its audit log (lowflow audit --calibrate).",
        "# The interval covers the scatter between cases; read the README, 'Calibration'.",
        f'method = "{calibration["method"]}"',
        "",
        "[provenance]",
    ]
    for key, value in prov.items():
        text = f'"{value}"' if isinstance(value, str) and key not in ("first_case", "last_case", "made") else value
        lines.append(f"{key} = {text}")
    for agent, rec in calibration["agents"].items():
        lines += ["", f"[agents.{agent}]"]
        lines += [f"{k} = {rec[k]:.4f}" for k in ("factor", "low", "high")] + [f"cases = {rec['cases']}"]
    text = "\n".join(lines) + "\n"
    from ..contracts import toml_from_text

    calibration_from_dict(toml_from_text(text, "calibration"))
    return text


def named_calibration(name: str, base_dir: Any, confine: bool = False) -> Any:
    """The calibration file a case-mix file names (``calibration``, relative to its folder)."""
    from ..inputs.calibration_file import load_calibration
    from ..inputs.casemix_files import referenced_file

    return load_calibration(
        referenced_file(name, "calibration", base_dir, ".toml", "calibration TOML", confine=confine)
    )


def calibrated_mix(mix: Any, calibration: Any, flag: str = "calibration") -> Any:
    """A case mix whose every case type runs with ``calibration``'s uptake factor (one calibration per mix)."""
    import dataclasses

    from ..simulation.batch import case_template

    if mix.calibration is not None:
        raise InputError(flag, "a second calibration", "either --calibration FILE or the file's calibration key")
    types = tuple(
        dataclasses.replace(ct, template=case_template(with_calibration(ct.scenario, calibration)))
        for ct in mix.case_types
    )
    return dataclasses.replace(mix, case_types=types, calibration=calibration)


def quantities(check: dict[str, Any]) -> list[dict[str, Any]]:
    """Rows of the prediction check for tables and charts (plain floats in mL)."""
    return [
        {
            "case_id": c["case_id"],
            "agent": c["agent"],
            "recorded_ml": c["recorded"]["magnitude"],
            "predicted_ml": c["predicted"]["magnitude"],
            "ratio": c["ratio"],
            "in_calibration": c["in_calibration"],
        }
        for c in check["cases"]
    ]


__all__ = [
    "CHECK_BLOCK",
    "EXCLUDE_CODES",
    "RESAMPLES",
    "SECOND_FACTOR",
    "SEED",
    "CaseCheck",
    "calibration_toml",
    "check_and_calibrate",
    "fit_factor",
    "provenance",
    "run_cases",
]
