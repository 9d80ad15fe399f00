"""Scenario files: the TOML contract of one planned case, validated with pydantic.

Every quantity is a string pint parses ("2 L/min", "70 kg", "2 %", "1 MAC"). Unknown keys are errors,
so typos are caught; every error is an :class:`~estimator.errors.InputError` naming the field (as a
dotted path such as ``phases[1].oxygen``), the value and the valid range.

A phase gives its carrier gas either as flows (``oxygen``, ``air``, ``nitrous_oxide``; a missing one
is 0) or as ``oxygen_fraction`` plus ``total_flow`` with ``balance = "air"`` or ``"nitrous_oxide"``,
and exactly one of ``vaporizer`` (the dial, "2 %") or ``end_tidal_target`` ("1 MAC" or "2 %").

Examples
--------
>>> s = load_scenario('''
... [patient]
... weight = "70 kg"
... [agent]
... name = "sevoflurane"
... [[phases]]
... duration = "10 min"
... oxygen = "2 L/min"
... air = "4 L/min"
... vaporizer = "3 %"
... ''')
>>> s.phases[0].oxygen.to("L/min").magnitude, s.agent.name
(2.0, 'sevoflurane')
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal

import pint
from pydantic import BaseModel, BeforeValidator, ConfigDict, ValidationError, model_validator

from . import limits as lim
from .accounting import absorbent_capacity as _absorbent_capacity
from .errors import InputError, read_text_file
from .properties import AGENTS, gas
from .units import DIMENSIONS, Q_, parse_quantity

_AIR_O2 = gas("air").records["oxygen_fraction"].value


def _quantity(dimension: str, low: float, high: float, unit: str, *, low_open: bool = False):
    """A pydantic type: a pint Quantity of ``dimension`` within [low, high] ``unit``."""
    example = DIMENSIONS[dimension][1]

    def check(value: Any) -> pint.Quantity:
        try:
            q = parse_quantity(value, "", dimension)
        except InputError as exc:
            raise ValueError(exc.expected) from None
        mag = q.to(unit).magnitude
        if mag < low or mag > high or (low_open and mag <= low):
            lo = f"above {low:g}" if low_open else f"{low:g}"
            raise ValueError(f"{lo} to {high:g} {Q_(1, unit).units:~P} ({example})")
        return q

    return Annotated[pint.Quantity, BeforeValidator(check)]


Flow = _quantity("flow", 0.0, 15.0, "L/min")
Duration = _quantity("time", 0.0, 24 * 60.0, "min")
Fraction = _quantity("fraction", 0.0, 1.0, "dimensionless")


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", arbitrary_types_allowed=True, frozen=True)


class PatientInput(_Model):
    """``[patient]``: weight required; age default 40 years; optional physiological overrides."""

    weight: _quantity("mass", 0.5, 300.0, "kg")
    age: _quantity("age", 0.0, 120.0, "year") = Q_(40.0, "year")
    oxygen_consumption: _quantity("flow", 1.0, 2000.0, "mL/min", low_open=True) | None = None
    carbon_dioxide_production: _quantity("flow", 1.0, 2000.0, "mL/min", low_open=True) | None = None
    cardiac_output: _quantity("flow", 0.05, 30.0, "L/min") | None = None
    alveolar_ventilation: _quantity("flow", 0.05, 40.0, "L/min") | None = None
    minute_ventilation: _quantity("flow", 0.05, 50.0, "L/min") | None = None
    frc: _quantity("volume", 0.02, 8.0, "L") | None = None
    target_paco2: _quantity("pressure", 20.0, 80.0, "mmHg") = Q_(40.0, "mmHg")
    respiratory_rate: _quantity("rate", 2.0, 80.0, "1/min") = Q_(12.0, "1/min")
    initial: Literal["room_air", "preoxygenated"] = "room_air"


class AgentInput(_Model):
    """``[agent]``: name, optional vaporizer maximum and type."""

    name: str
    vaporizer_max: _quantity("fraction", 0.001, 0.25, "dimensionless") | None = None
    vaporizer_type: Literal["variable_bypass", "heated_pressurised"] | None = None

    @model_validator(mode="before")
    @classmethod
    def _known(cls, data: Any) -> Any:
        if isinstance(data, dict) and "name" in data:
            name = str(data["name"]).strip().lower()
            if name not in AGENTS:
                raise ValueError(f"name: one of {', '.join(sorted(AGENTS))} (got {data['name']!r})")
            data = {**data, "name": name}
        return data


class CircuitInput(_Model):
    """``[circuit]``: volume, leak, side-stream sample flow and whether it returns to the circuit."""

    volume: _quantity("volume", 0.5, 15.0, "L") = Q_(6.0, "L")
    leak: _quantity("flow", 0.0, 5.0, "L/min") = Q_(0.0, "L/min")
    sample_flow: _quantity("flow", 0.0, 0.5, "L/min") = Q_(0.2, "L/min")
    sample_returned: bool = True
    initial: Literal["room_air", "oxygen"] = "room_air"
    inspiratory_fraction: _quantity("fraction", 0.0, 0.8, "dimensionless") = Q_(1 / 3, "dimensionless")
    deficit_makeup: Literal["fresh_gas", "room_air"] = "fresh_gas"
    absorbent_capacity: _quantity("volume", 1.0, 26.0, "L") = _absorbent_capacity()
    """Practical CO2 capacity per 100 g of absorbent (default: the package's one value, estimator.accounting)."""


class SiteInput(_Model):
    """``[site]``: elevation or ambient pressure, temperature, oxygen source."""

    elevation: _quantity("length", -500.0, 11000.0, "m") | None = None
    ambient_pressure: _quantity("pressure", 22.6, 108.5, "kPa") | None = None
    temperature: _quantity("temperature", -20.0, 50.0, "degC") = Q_(20.0, "degC")
    oxygen_source: Literal["cylinder", "pipeline", "concentrator"] = "cylinder"
    oxygen_purity: _quantity("fraction", 0.80, 1.0, "dimensionless") | None = None
    argon_fraction: _quantity("fraction", 0.0, 0.2, "dimensionless") | None = None
    flowmeter_readings: bool = False
    """Phase flows are readings of float flowmeters, each calibrated for its own gas at 20 degC and
    101.325 kPa; the engine converts them to true flows at the site (estimator.flowmeter)."""


class PhaseInput(_Model):
    """``[[phases]]``: duration, carrier gas, and a dial or an end-tidal hold target."""

    duration: Duration
    oxygen: Flow | None = None
    air: Flow | None = None
    nitrous_oxide: Flow | None = None
    oxygen_fraction: _quantity("fraction", 0.21, 1.0, "dimensionless") | None = None
    total_flow: Flow | None = None
    balance: Literal["air", "nitrous_oxide"] | None = None
    vaporizer: _quantity("fraction", 0.0, 0.25, "dimensionless") | None = None
    end_tidal_target: Annotated[pint.Quantity, BeforeValidator(lambda v: _target(v))] | None = None
    label: str = ""

    @model_validator(mode="after")
    def _consistent(self) -> PhaseInput:
        by_fraction = self.oxygen_fraction is not None or self.total_flow is not None
        by_flows = any(v is not None for v in (self.oxygen, self.air, self.nitrous_oxide))
        if by_fraction and by_flows:
            raise ValueError(
                "oxygen_fraction: give flows (oxygen, air, nitrous_oxide) or oxygen_fraction with total_flow, not both"
            )
        if by_fraction and (self.oxygen_fraction is None or self.total_flow is None):
            raise ValueError("total_flow: oxygen_fraction and total_flow go together")
        if self.balance is not None and not by_fraction:
            raise ValueError("balance: only with oxygen_fraction and total_flow")
        if (self.vaporizer is None) == (self.end_tidal_target is None):
            raise ValueError("vaporizer: give exactly one of vaporizer or end_tidal_target")
        if (
            self.balance == "air"
            and self.oxygen_fraction is not None
            and self.oxygen_fraction.to("").magnitude < _AIR_O2
        ):
            raise ValueError(f"oxygen_fraction: at least {_AIR_O2:.4f} with an air balance")
        return self

    def flows(self) -> tuple[pint.Quantity, pint.Quantity, pint.Quantity]:
        """(oxygen, air, nitrous_oxide) flowmeter flows of the phase [L/min]."""
        zero = Q_(0.0, "L/min")
        if self.total_flow is None:
            return tuple((v or zero).to("L/min") for v in (self.oxygen, self.air, self.nitrous_oxide))
        total = self.total_flow.to("L/min")
        f = self.oxygen_fraction.to("").magnitude
        if (self.balance or "air") == "air":
            air = total * (1.0 - f) / (1.0 - _AIR_O2)
            return total - air, air, zero
        return total * f, zero, total * (1.0 - f)


def _target(value: Any) -> pint.Quantity:
    try:
        q = parse_quantity(value, "", "mac")
        if not 0.0 < q.magnitude <= 3.0:
            raise ValueError("above 0 to 3 MAC, or a fraction such as '2 %'")
        return q
    except InputError:
        pass
    try:
        q = parse_quantity(value, "", "fraction")
    except InputError:
        raise ValueError("a target such as '1 MAC' or '2 %'") from None
    if not 0.0 < q.to("").magnitude <= 0.2:
        raise ValueError("above 0 to 20 % (or a MAC multiple such as '1 MAC')")
    return q


class ScaleStep(_Model):
    """One band of a flowmeter scale: settable in ``step`` increments up to ``up_to``."""

    up_to: Flow
    step: _quantity("flow", 0.001, 5.0, "L/min", low_open=True)


class FlowFloorInput(_Model):
    """``[flow_floor]``: settings of the flow floor (``lowflow safe-flow``); every key optional."""

    threshold_inspired_oxygen: _quantity("fraction", 0.21, 1.0, "dimensionless") = Q_(lim.INSPIRED_OXYGEN_FLOOR, "")
    threshold_basis: Literal["fraction", "partial_pressure"] = "fraction"
    """``partial_pressure``: the threshold is read as the sea-level PiO2 it gives (for high sites)."""
    reach_within: _quantity("time", 0.5, 120.0, "min") = Q_(lim.TARGET_REACH_WITHIN, "min")
    wash_out_to: _quantity("mac", 0.05, 1.0, "MAC") = Q_(lim.WASH_OUT_TARGET, "MAC")
    """Emergence: end-tidal MAC (agent and N2O) to reach in a phase with the dial at 0."""
    wash_out_within: _quantity("time", 0.5, 120.0, "min") = Q_(lim.WASH_OUT_WITHIN, "min")
    basal_oxygen_flow: _quantity("flow", 0.0, 1.0, "L/min") = Q_(0.0, "L/min")
    minimum_oxygen_share: _quantity("fraction", 0.21, 1.0, "dimensionless") = Q_(lim.MINIMUM_OXYGEN_SHARE, "")
    maximum_flow: Flow = Q_(15.0, "L/min")
    grid_interval: _quantity("time", 1.0, 60.0, "min") = Q_(5.0, "min")
    scale: list[ScaleStep] | None = None
    policies: list[Literal["sevoflurane_us_label"]] = []


class OutputInput(_Model):
    """``[output]``: time step of the reported series."""

    interval: _quantity("time", 0.05, 60.0, "min") = Q_(1.0, "min")


class Scenario(_Model):
    """One planned case."""

    title: str = ""
    patient: PatientInput
    agent: AgentInput
    circuit: CircuitInput = CircuitInput()
    site: SiteInput = SiteInput()
    phases: list[PhaseInput]
    prices: dict[str, Any] | None = None
    output: OutputInput = OutputInput()
    flow_floor: FlowFloorInput = FlowFloorInput()
    notes: str = ""

    @model_validator(mode="after")
    def _phases(self) -> Scenario:
        if not self.phases:
            raise ValueError("phases: at least one [[phases]] table")
        total = sum(p.duration.to("min").magnitude for p in self.phases)
        if total <= 0:
            raise ValueError("phases: a total duration above 0 min")
        if total > 24 * 60 + 1e-9:
            raise ValueError(f"phases: a total duration of at most 24 h (got {total:g} min)")
        return self

    @property
    def duration(self) -> pint.Quantity:
        """Total duration of the phases [min]."""
        return Q_(sum(p.duration.to("min").magnitude for p in self.phases), "min")


def _loc(loc: tuple[Any, ...]) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif part not in ("function-before[check(), lambda]",) and not str(part).startswith(
            ("function-", "lax-", "union[")
        ):
            out += ("." if out else "") + str(part)
    return out


def input_error_from_validation(exc: ValidationError, prefix: str = "") -> InputError:
    """The first error of a pydantic ValidationError as an InputError (field, value, expected).

    Model-level messages of the form ``"field: expected text"`` name their own field.
    """
    err = exc.errors(include_url=False)[0]
    field = _loc(tuple(err.get("loc", ())))
    msg = str(err.get("msg", "")).removeprefix("Value error, ")
    value = err.get("input")
    if err.get("type") == "extra_forbidden":
        return InputError(_join(prefix, field), value, "no such key (check the spelling; see the README)")
    if err.get("type") == "missing":
        return InputError(_join(prefix, field), "(missing)", "a value: this key is required")
    if ": " in msg and err.get("type") == "value_error" and " " not in msg.split(": ", 1)[0]:
        sub, msg = msg.split(": ", 1)
        field = _join(field, sub)
        if isinstance(value, dict):
            value = value.get(sub, value)
    if isinstance(value, dict | list):
        value = "(table)"
    return InputError(_join(prefix, field), value, msg)


def _join(a: str, b: str) -> str:
    return f"{a}.{b}" if a and b else (a or b or "scenario")


def scenario_from_dict(data: dict[str, Any]) -> Scenario:
    """Validate a parsed scenario document.

    Raises
    ------
    InputError
    """
    try:
        scenario = Scenario.model_validate(data)
    except ValidationError as exc:
        raise input_error_from_validation(exc) from None
    if scenario.prices:
        from .costs import parse_prices

        parse_prices(scenario.prices)  # raises InputError naming prices.<key>
    return scenario


def load_scenario(source: str | Path) -> Scenario:
    """Read a scenario from a TOML file path or TOML text.

    Parameters
    ----------
    source : str or pathlib.Path
        A path to a ``.toml`` file, or the TOML text itself.

    Raises
    ------
    InputError
        On unreadable TOML or any invalid field.
    """
    text, name = _read(source)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(name, "(file)", f"valid TOML ({exc})") from None
    return scenario_from_dict(data)


def _read(source: str | Path) -> tuple[str, str]:
    if isinstance(source, Path) or (isinstance(source, str) and "\n" not in source and source.endswith(".toml")):
        path = Path(source)
        return read_text_file(path, "scenario", "an existing TOML file"), path.name
    return str(source), "scenario"
