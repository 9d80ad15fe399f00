"""Calibration files: the TOML contract of a department's uptake factor per agent, with its provenance.

A calibration file is written by ``lowflow audit LOG --calibrate --calibration-out FILE``
(:mod:`estimator.planning.calibration`) and read by ``lowflow case``, ``safe-flow`` and ``forecast``
(``--calibration FILE``, or ``calibration = "FILE"`` in a scenario or case-mix file). Each agent
has an **uptake factor** with its interval: the factor multiplies the agent's uptake from the lungs
into blood and tissues at any alveolar partial pressure (applied to the agent's blood/gas coefficient
in the kernel parameters, :func:`estimator.simulation.kernel_parameters.base_parameters`; the
partial-pressure time course of blood and every tissue stays as published, so at a held end-tidal
the uptake scales by exactly the factor). The provenance names the log it came from (file name,
SHA-256, date range of its cases, case count), so a forecast made with it can be traced.

Layout::

    method = "bootstrap over cases: 2000 resamples, seed 20; ..."
    [provenance]
    log_name = "kestrel_audit_log.csv"
    log_sha256 = "<64 hex digits>"
    first_case = "2026-01-05"
    last_case = "2026-03-27"
    cases = 452
    made = "2026-12-03"
    program = "lowflow-estimator 0.1.0"
    [agents.sevoflurane]
    factor = 1.10
    low = 1.02
    high = 1.19
    cases = 310

Every value is checked: a factor and its interval lie in :data:`FACTOR_RANGE` with
``low <= factor <= high``, the case count is at least
:data:`estimator.limits.CALIBRATION_MINIMUM_CASES`, agent names are known agents; unknown keys are
refused. Errors name the field (``calibration.agents.sevoflurane.factor``), the value and the range.

Examples
--------
>>> cal = calibration_from_text('''
... method = "bootstrap"
... [provenance]
... log_name = "log.csv"
... log_sha256 = "''' + "0" * 64 + '''"
... first_case = "2026-01-05"
... last_case = "2026-02-01"
... cases = 40
... made = "2026-03-01"
... program = "lowflow-estimator"
... [agents.sevoflurane]
... factor = 1.2
... low = 1.1
... high = 1.3
... cases = 40
... ''')
>>> cal.factor("sevoflurane"), cal.factor("isoflurane")
(1.2, None)
"""

from __future__ import annotations

import datetime as dt
import os
import re
from typing import Any

from pydantic import BaseModel, ConfigDict, ValidationError, field_validator, model_validator

from ..contracts import input_error_from_validation, named_file, read_toml, toml_from_text
from ..errors import InputError
from ..limits import CALIBRATION_MINIMUM_CASES, UPTAKE_FACTOR_SUPPORTED
from ..properties import AGENTS

#: Uptake factors accepted in a file and searched by the calibration (a factor of 0.05 or 20 is a
#: model that misses the department's agent use twentyfold: our choice, a guard against typing slips).
FACTOR_RANGE = (0.05, 20.0)
_SHA256 = re.compile(r"^[0-9a-f]{64}$")


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class AgentFactor(_Model):
    """``[agents.<name>]``: the uptake factor, its interval and the cases it rests on."""

    factor: float
    low: float
    high: float
    cases: int

    @model_validator(mode="after")
    def _in_range(self) -> AgentFactor:
        lo, hi = FACTOR_RANGE
        for key in ("factor", "low", "high"):
            v = getattr(self, key)
            if not lo <= v <= hi:
                raise ValueError(f"{key}: {lo:g} to {hi:g}")
        if not self.low <= self.factor <= self.high:
            raise ValueError(
                f"factor: within its interval low {self.low:g} to high {self.high:g} (got {self.factor:g})"
            )
        if self.cases < CALIBRATION_MINIMUM_CASES:
            raise ValueError(f"cases: at least {CALIBRATION_MINIMUM_CASES} cases")
        return self


class Provenance(_Model):
    """``[provenance]``: where the factors came from."""

    log_name: str
    log_sha256: str
    first_case: dt.date | None = None  # none when the log gives elapsed times only
    last_case: dt.date | None = None
    cases: int
    made: dt.date
    program: str

    @field_validator("log_sha256")
    @classmethod
    def _digest(cls, v: str) -> str:
        if not _SHA256.match(v):
            raise ValueError("a SHA-256 digest: 64 lower-case hexadecimal digits")
        return v

    @model_validator(mode="after")
    def _dates(self) -> Provenance:
        if (self.first_case is None) != (self.last_case is None):
            raise ValueError("last_case: given with first_case, or both left out (a log of elapsed times)")
        if self.first_case is not None and self.last_case is not None and self.last_case < self.first_case:
            raise ValueError(f"last_case: on or after first_case {self.first_case}")
        if self.cases < CALIBRATION_MINIMUM_CASES:
            raise ValueError(f"cases: at least {CALIBRATION_MINIMUM_CASES} cases")
        return self


class Calibration(_Model):
    """A calibration file: the method, the provenance and the factor of each calibrated agent."""

    method: str
    provenance: Provenance
    agents: dict[str, AgentFactor]

    @field_validator("agents")
    @classmethod
    def _known(cls, v: dict[str, AgentFactor]) -> dict[str, AgentFactor]:
        if not v:
            raise ValueError("at least one [agents.<name>] table")
        for name in v:
            if name not in AGENTS or AGENTS[name].kind != "volatile":
                raise ValueError(f"{name}: one of " + ", ".join(volatile_agents()))
        return v

    def factor(self, agent: str) -> float | None:
        """The uptake factor of ``agent``, or None when the file has none for it."""
        entry = self.agents.get(agent)
        return entry.factor if entry is not None else None


def volatile_agents() -> list[str]:
    """Names of the volatile agents a file may calibrate."""
    return sorted(k for k, a in AGENTS.items() if a.kind == "volatile")


def calibration_from_dict(data: dict[str, Any]) -> Calibration:
    """Validate a parsed calibration document (InputError naming ``calibration.<field>``)."""
    try:
        return Calibration.model_validate(data)
    except ValidationError as exc:
        raise input_error_from_validation(exc, "calibration", model=Calibration) from None


def calibration_from_text(text: str) -> Calibration:
    """Parse a calibration from TOML text (never read as a path)."""
    return calibration_from_dict(toml_from_text(text, "calibration"))


def load_calibration(path: str | os.PathLike[str], field: str = "calibration") -> Calibration:
    """Read a calibration TOML file (the argument is always a path).

    >>> load_calibration("no/such/calibration.toml")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: calibration: got 'no/such/calibration.toml'; expected an existing calibration TOML file
    """
    return calibration_from_dict(read_toml(path, field, "an existing calibration TOML file"))


def attach_named(scenario: Any, base_dir: str | os.PathLike[str] | None) -> None:
    """Read the calibration file a scenario names (relative to ``base_dir``) and attach it in place (at load)."""
    if base_dir is None:
        raise InputError(
            "calibration",
            scenario.calibration,
            "a calibration file named in a scenario file read from disk (a case mix names its own calibration)",
        )
    scenario._calibration = load_calibration(named_file(scenario.calibration, base_dir, "calibration", (".toml",)))


def with_calibration(
    scenario: Any, calibration: Calibration | FixedFactor | None = None, *, at_least: float | None = None
) -> Any:
    """A copy of a :class:`~estimator.inputs.scenario.Scenario` with ``calibration`` attached (None keeps its
    own) and the factor applied raised to ``at_least`` (the flow floor's safe side: 1)."""
    out = scenario.model_copy()
    if calibration is not None:
        out._calibration = calibration
    if at_least is not None:
        out._uptake_at_least = float(at_least)
    return out


def calibration_of(scenario: Any) -> Calibration | None:
    """The calibration attached to a scenario, or None."""
    return scenario._calibration


class FixedFactor:
    """A bare uptake factor for every agent, in the place of a calibration file (checks and synthetic logs).

    >>> FixedFactor(1.5).factor("sevoflurane")
    1.5
    """

    def __init__(self, value: float):
        lo, hi = FACTOR_RANGE
        if not lo <= value <= hi:
            raise InputError("uptake factor", value, f"{lo:g} to {hi:g}")
        self.value = float(value)

    def factor(self, agent: str) -> float:
        """The same factor for any agent."""
        return self.value


def attach_option(scenario: Any, path: str | os.PathLike[str] | None, flag: str = "--calibration") -> Any:
    """The scenario with the calibration file given on the command line (``flag``) attached; one source only."""
    if path is None:
        return scenario
    if getattr(scenario, "calibration", None) is not None:
        raise InputError(flag, str(path), "either --calibration FILE or the file's calibration key, not both")
    return with_calibration(scenario, load_calibration(path, flag))


def calibration_note(calibration: Calibration, agent: str, applied: float) -> dict[str, Any]:
    """The ``calibration`` object of a case, flow-floor or forecast JSON document for ``agent``.

    ``applied`` is the factor the engine used (the flow floor's may be raised to 1). The interval is
    always given beside the factor; a factor outside :data:`estimator.limits.UPTAKE_FACTOR_SUPPORTED`
    carries ``UPTAKE_FACTOR_UNSUPPORTED``, an agent the file lacks ``CALIBRATION_AGENT_ABSENT``.
    """
    rec = calibration.agents.get(agent)
    lo, hi = UPTAKE_FACTOR_SUPPORTED
    warnings = []
    if rec is None:
        warnings.append(
            {
                "code": "CALIBRATION_AGENT_ABSENT",
                "message": f"the calibration file has no factor for {agent}: the published model (factor 1) is used",
            }
        )
    elif not lo <= rec.factor <= hi:
        warnings.append(
            {
                "code": "UPTAKE_FACTOR_UNSUPPORTED",
                "message": f"{agent}: uptake factor {rec.factor:.2f} (interval {rec.low:.2f}-{rec.high:.2f}) lies "
                f"outside {lo:.2f}-{hi:.2f}, the range the published checks support",
            }
        )
    values = {k: getattr(rec, k) if rec is not None else None for k in ("factor", "low", "high", "cases")}
    return {
        "agent": agent,
        **values,
        "applied": applied,
        "supported": [lo, hi],
        "method": calibration.method,
        "provenance": calibration.provenance.model_dump(mode="json"),
        "warnings": warnings,
    }


def note_text(note: dict[str, Any]) -> str:
    """One line for a text summary: the factor with its interval and where it came from."""
    prov = note["provenance"]
    span = f", {prov['first_case']} to {prov['last_case']}" if prov.get("first_case") else ""
    source = f"from {prov['log_name']} ({note['cases'] or prov['cases']} cases{span})"
    if note["factor"] is None:
        return f"Uptake factor: 1 (the calibration has none for {note['agent']}) {source}"
    used = "" if note["applied"] == note["factor"] else f"; {note['applied']:g} used here (the safe side)"
    return f"Uptake factor {note['factor']:.2f} (95 % interval {note['low']:.2f}-{note['high']:.2f}) {source}{used}"


def floor_side(scenario: Any) -> tuple[Any, list[tuple[str, str]]]:
    """The scenario the flow floor runs: the uptake factor at least 1, with a warning when that raised it.

    A higher uptake factor lowers inspired O2 at low flow (agent taken up is replaced by vapour that
    dilutes the O2: 0.15-0.3 percentage points from f = 0.5 to 2 on the low-flow demo plans; +0.003 at
    65 % O2), deepens a volume deficit and slows wash-in and wash-out, so the limits of the floor are
    at least as strict at max(f, 1) as at 1: a department factor below 1 never lowers a floor below
    the published model's (tests/test_calibration_use.py, one-sided).
    """
    f = scenario.uptake_factor
    if f >= 1.0:
        return scenario, []
    raised = with_calibration(scenario, at_least=1.0)
    return raised, [
        (
            "FLOOR_FACTOR_RAISED",
            f"the department's uptake factor {f:.2f} is below 1: the flow floor uses 1 (the published model), "
            "which is never less safe",
        )
    ]
