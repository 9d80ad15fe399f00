"""Scenario files: the TOML contract of one planned case, validated with pydantic.

Every quantity is a string pint parses ("2 L/min", "70 kg", "2 %", "1 MAC"); each is a field of
:func:`estimator.fields.quantity` with its range and unit. Unknown keys are errors,
so typos are caught; every error is an :class:`~estimator.errors.InputError` naming the field (as a
dotted path such as ``phases[1].oxygen``), the value and the valid range.

A phase gives its carrier gas either as flows (``oxygen``, ``air``, ``nitrous_oxide``; a missing one
is 0) or as ``oxygen_fraction`` plus ``total_flow`` with ``balance = "air"`` or ``"nitrous_oxide"``,
and exactly one of ``vaporizer`` (the dial, "2 %") or ``end_tidal_target`` ("1 MAC" or "2 %").

:func:`load_scenario` reads a file (its argument is always a path); :func:`scenario_from_text` parses
TOML text; :func:`scenario_from_dict` validates a parsed document.

Examples
--------
>>> s = scenario_from_text('''
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

import os
from typing import Annotated, Any, Literal

import pint
from pydantic import (
    BaseModel,
    ConfigDict,
    PrivateAttr,
    ValidationError,
    model_validator,
)

from .. import limits as lim
from ..accounts.accounting import absorbent_capacity as _absorbent_capacity
from ..contracts import as_path, check_scenario_suffix, input_error_from_validation, read_toml, toml_from_text
from ..fields import EndTidalTarget, Quantity
from ..fields import quantity as _quantity
from ..physics.site import ELEVATION_RANGE, PRESSURE_RANGE
from ..physics.site import TEMPERATURE_RANGE as SITE_TEMPERATURE
from ..properties import AGENTS, gas
from ..units import Q_

__all__ = [
    "Scenario",
    "input_error_from_validation",
    "load_scenario",
    "scenario_from_dict",
    "scenario_from_text",
]

_AIR_O2 = gas("air").records["oxygen_fraction"].value

#: A flowmeter tube per gas reads up to 15 L/min (common practice, no source), the engine's range.
Flow = Annotated[Quantity, _quantity("flow", 0.0, 15.0, "L/min", "flowmeter flow")]
#: One case lasts at most a day (the engine's horizon; common practice, no source).
Duration = Annotated[Quantity, _quantity("time", 0.0, 24 * 60.0, "min", "phase duration")]
Fraction = Annotated[Quantity, _quantity("fraction", 0.0, 1.0, "dimensionless")]
#: Site elevation and measured ambient pressure: the ISO 2533 troposphere (estimator.physics.site).
Elevation = Annotated[Quantity, _quantity("length", *ELEVATION_RANGE, "m", "site elevation above sea level")]
AmbientPressure = Annotated[
    Quantity, _quantity("pressure", *PRESSURE_RANGE, "kPa", "measured absolute ambient pressure")
]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", arbitrary_types_allowed=True, frozen=True)


class PatientInput(_Model):
    """``[patient]``: weight required; age default 40 years; optional physiological overrides."""

    # Ranges: practical limits of the physiology model (a preterm neonate to the heaviest adults;
    # ages of the Mapleson 1996 fit and beyond), no source beyond common practice.
    weight: Annotated[Quantity, _quantity("mass", *lim.SANE_WEIGHT, "kg", "body weight")]
    age: Annotated[Quantity, _quantity("age", *lim.SANE_AGE, "year", "age")] = Q_(40.0, "year")
    # Overrides of the weight-scaled values: from neonatal to heavy exercise (common practice).
    oxygen_consumption: Annotated[Quantity, _quantity("flow", 1.0, 2000.0, "mL/min", "VO2", low_open=True)] | None = (
        None
    )
    carbon_dioxide_production: (
        Annotated[Quantity, _quantity("flow", 1.0, 2000.0, "mL/min", "VCO2", low_open=True)] | None
    ) = None
    cardiac_output: Annotated[Quantity, _quantity("flow", 0.05, 30.0, "L/min", "cardiac output")] | None = None
    alveolar_ventilation: Annotated[Quantity, _quantity("flow", 0.05, 40.0, "L/min", "alveolar ventilation")] | None = (
        None
    )
    minute_ventilation: Annotated[Quantity, _quantity("flow", 0.05, 50.0, "L/min", "minute ventilation")] | None = None
    frc: Annotated[Quantity, _quantity("volume", 0.02, 8.0, "L", "functional residual capacity")] | None = None
    # Target arterial CO2 partial pressure: deliberate hypo- to permissive hypercapnia.
    target_paco2: Annotated[Quantity, _quantity("pressure", 20.0, 80.0, "mmHg", "target PaCO2")] = Q_(40.0, "mmHg")
    respiratory_rate: Annotated[Quantity, _quantity("rate", 2.0, 80.0, "1/min", "breaths a minute")] = Q_(12.0, "1/min")
    initial: Literal["room_air", "preoxygenated"] = "room_air"


class AgentInput(_Model):
    """``[agent]``: name, optional vaporizer maximum and type."""

    name: str
    # Highest dial mark: every vaporizer in use reads at most 18 % (desflurane); 25 % bounds typos.
    vaporizer_max: (
        Annotated[Quantity, _quantity("fraction", 0.001, 0.25, "dimensionless", "highest dial mark")] | None
    ) = None
    vaporizer_type: Literal["variable_bypass", "heated_pressurised"] | None = None

    @model_validator(mode="before")
    @classmethod
    def _known(cls, data: Any) -> Any:
        if isinstance(data, dict) and "name" in data:
            name = str(data["name"]).strip().lower()
            if name not in AGENTS:
                raise ValueError(f"name: one of {', '.join(sorted(AGENTS))}")
            data = {**data, "name": name}
        return data


class CircuitInput(_Model):
    """``[circuit]``: volume, leak, side-stream sample flow and whether it returns to the circuit."""

    # Circle volumes from a paediatric circuit to a large adult one with bag (common practice).
    volume: Annotated[Quantity, _quantity("volume", 0.5, 15.0, "L", "circle system volume")] = Q_(6.0, "L")
    leak: Annotated[Quantity, _quantity("flow", 0.0, 5.0, "L/min", "circuit leak")] = Q_(0.0, "L/min")
    # Side-stream gas monitors draw 50-250 mL/min (common practice, no source).
    sample_flow: Annotated[Quantity, _quantity("flow", 0.0, 0.5, "L/min", "side-stream sample flow")] = Q_(0.2, "L/min")
    sample_returned: bool = True
    initial: Literal["room_air", "oxygen"] = "room_air"
    inspiratory_fraction: Annotated[Quantity, _quantity("fraction", 0.0, 0.8, "dimensionless")] = Q_(
        1 / 3, "dimensionless"
    )
    deficit_makeup: Literal["fresh_gas", "room_air"] = "fresh_gas"
    # Up to 26 L, the theoretical capacity of soda lime per 100 g (estimator/data/supply.toml).
    absorbent_capacity: Annotated[Quantity, _quantity("volume", 1.0, 26.0, "L", "CO2 taken up per 100 g")] = (
        _absorbent_capacity()
    )
    """Practical CO2 capacity per 100 g of absorbent (default: the package's one value, estimator.accounts.accounting)."""


class SiteInput(_Model):
    """``[site]``: elevation or ambient pressure, temperature, oxygen source."""

    elevation: Elevation | None = None
    ambient_pressure: AmbientPressure | None = None
    # Room temperatures the site model accepts (estimator.physics.site.TEMPERATURE_RANGE).
    temperature: Annotated[Quantity, _quantity("temperature", *SITE_TEMPERATURE, "degC")] = Q_(20.0, "degC")
    oxygen_source: Literal["cylinder", "pipeline", "concentrator"] = "cylinder"
    # Concentrator product is at least 82 % O2 by the ISO 80601-2-69 alarm limit (from memory); 80 %
    # leaves room for a worn sieve. Argon stays in the product, up to a few percent.
    oxygen_purity: Annotated[Quantity, _quantity("fraction", 0.80, 1.0, "dimensionless", "O2 in the supply")] | None = (
        None
    )
    argon_fraction: (
        Annotated[Quantity, _quantity("fraction", 0.0, 0.2, "dimensionless", "argon in the supply")] | None
    ) = None
    flowmeter_readings: bool = False
    """Phase flows are readings of float flowmeters, each calibrated for its own gas at 20 degC and
    101.325 kPa; the engine converts them to true flows at the site (estimator.physics.flowmeter)."""


class PhaseInput(_Model):
    """``[[phases]]``: duration, carrier gas, and a dial or an end-tidal hold target."""

    duration: Duration
    oxygen: Flow | None = None
    air: Flow | None = None
    nitrous_oxide: Flow | None = None
    # From air (21 %) to pure oxygen: a fresh gas below air is hypoxic.
    oxygen_fraction: (
        Annotated[Quantity, _quantity("fraction", 0.21, 1.0, "dimensionless", "O2 in the fresh gas")] | None
    ) = None
    total_flow: Flow | None = None
    balance: Literal["air", "nitrous_oxide"] | None = None
    # The dial: 0 to 25 % bounds every vaporizer; the agent's own highest mark is checked per phase.
    vaporizer: Annotated[Quantity, _quantity("fraction", 0.0, 0.25, "dimensionless", "vaporizer dial")] | None = None
    end_tidal_target: EndTidalTarget | None = None
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
        if self.total_flow is None or self.oxygen_fraction is None:  # the contract gives both or neither
            o2, air, n2o = ((v or zero).to("L/min") for v in (self.oxygen, self.air, self.nitrous_oxide))
            return o2, air, n2o
        total = self.total_flow.to("L/min")
        f = self.oxygen_fraction.to("").magnitude
        if (self.balance or "air") == "air":
            air = total * (1.0 - f) / (1.0 - _AIR_O2)
            return total - air, air, zero
        return total * f, zero, total * (1.0 - f)


class ScaleStep(_Model):
    """One band of a flowmeter scale: settable in ``step`` increments up to ``up_to``."""

    up_to: Flow
    step: Annotated[Quantity, _quantity("flow", 0.001, 5.0, "L/min", low_open=True)]


class FlowFloorInput(_Model):
    """``[flow_floor]``: settings of the flow floor (``lowflow safe-flow``); every key optional."""

    threshold_inspired_oxygen: Annotated[Quantity, _quantity("fraction", 0.21, 1.0, "dimensionless")] = Q_(
        lim.INSPIRED_OXYGEN_FLOOR, ""
    )
    threshold_basis: Literal["fraction", "partial_pressure"] = "fraction"
    """``partial_pressure``: the threshold is read as the sea-level PiO2 it gives (for high sites)."""
    reach_within: Annotated[Quantity, _quantity("time", 0.5, 120.0, "min")] = Q_(lim.TARGET_REACH_WITHIN, "min")
    wash_out_to: Annotated[Quantity, _quantity("mac", 0.05, 1.0, "MAC")] = Q_(lim.WASH_OUT_TARGET, "MAC")
    """Emergence: end-tidal MAC (agent and N2O) to reach in a phase with the dial at 0."""
    wash_out_within: Annotated[Quantity, _quantity("time", 0.5, 120.0, "min")] = Q_(lim.WASH_OUT_WITHIN, "min")
    basal_oxygen_flow: Annotated[Quantity, _quantity("flow", 0.0, 1.0, "L/min")] = Q_(0.0, "L/min")
    minimum_oxygen_share: Annotated[Quantity, _quantity("fraction", 0.21, 1.0, "dimensionless")] = Q_(
        lim.MINIMUM_OXYGEN_SHARE, ""
    )
    maximum_flow: Flow = Q_(15.0, "L/min")
    grid_interval: Annotated[Quantity, _quantity("time", 1.0, 60.0, "min")] = Q_(5.0, "min")
    scale: list[ScaleStep] | None = None
    policies: list[Literal["sevoflurane_us_label"]] = []

    @model_validator(mode="after")
    def _bands_in_order(self) -> FlowFloorInput:
        tops = [b.up_to.to("L/min").magnitude for b in self.scale or []]
        for i in range(1, len(tops)):
            if tops[i] <= tops[i - 1]:
                raise ValueError(
                    f"scale[{i}].up_to: above the band before it ({tops[i - 1]:g} L/min); bands go up in flow"
                )
        return self


class OutputInput(_Model):
    """``[output]``: time step of the reported series."""

    interval: Annotated[Quantity, _quantity("time", 0.05, 60.0, "min")] = Q_(1.0, "min")


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
    calibration: str | None = None
    _price_table: Any = PrivateAttr(default=None)
    _calibration: Any = PrivateAttr(default=None)
    _uptake_at_least: float = PrivateAttr(default=0.0)

    @model_validator(mode="after")
    def _phases(self) -> Scenario:
        if not self.phases:
            raise ValueError("phases: at least one [[phases]] table")
        total = sum(p.duration.to("min").magnitude for p in self.phases)
        if total <= 0:
            raise ValueError("phases: a total duration above 0 min")
        if total > 24 * 60 + 1e-9:
            raise ValueError(f"phases: a total duration of at most 24 h (got {total:g} min)")
        limit = self.agent.vaporizer_max or AGENTS[self.agent.name].vaporizer_max
        for i, p in enumerate(self.phases):
            if limit is not None and p.vaporizer is not None and p.vaporizer.to("").magnitude > limit.to("").magnitude:
                top = limit.to("percent").magnitude
                raise ValueError(f"phases[{i}].vaporizer: 0 to {top:g} % (the vaporizer maximum of {self.agent.name})")
        return self

    @property
    def duration(self) -> pint.Quantity:
        """Total duration of the phases [min]."""
        return Q_(sum(p.duration.to("min").magnitude for p in self.phases), "min")

    @property
    def price_table(self) -> Any:
        """The ``[prices]`` table read once into :class:`~estimator.accounts.prices.Prices` (None without)."""
        if not self.prices:
            return None
        if self._price_table is None:
            from ..accounts.prices import parse_prices

            self._price_table = parse_prices(self.prices)  # raises InputError naming prices.<key>
        return self._price_table

    @property
    def attached_calibration(self) -> Any:
        """The department calibration attached (:mod:`estimator.inputs.calibration_file`), or None."""
        return self._calibration

    @property
    def uptake_factor(self) -> float:
        """The agent's uptake factor the engine applies (:mod:`estimator.inputs.calibration_file`; 1 without)."""
        f = self._calibration.factor(self.agent.name) if self._calibration is not None else None
        return max(1.0 if f is None else f, self._uptake_at_least)


def scenario_from_dict(data: dict[str, Any], base_dir: str | os.PathLike[str] | None = None) -> Scenario:
    """Validate a parsed scenario document; a ``calibration`` file is named relative to ``base_dir``.

    Raises
    ------
    InputError
    """
    try:
        scenario = Scenario.model_validate(data)
    except ValidationError as exc:
        raise input_error_from_validation(exc, model=Scenario) from None
    scenario.price_table  # noqa: B018 - read (and checked) once at load
    if scenario.calibration is not None:
        from .calibration_file import attach_named

        attach_named(scenario, base_dir)
    return scenario


def scenario_from_text(text: str, name: str = "scenario") -> Scenario:
    """Parse and validate a scenario from TOML text (never read as a path).

    Parameters
    ----------
    text : str
        The TOML document.
    name : str
        How errors name the text (default ``"scenario"``).

    Raises
    ------
    InputError
        On invalid TOML or any invalid field.
    """
    return scenario_from_dict(toml_from_text(text, name))


def load_scenario(path: str | os.PathLike[str]) -> Scenario:
    """Read a scenario from a ``.toml`` file; the argument is always a path, never TOML text.

    Parameters
    ----------
    path : str or os.PathLike
        The scenario file; it must end in ``.toml`` (the same rule for ``lowflow case``,
        ``safe-flow`` and scenarios named in an inventory).

    Raises
    ------
    InputError
        On a missing or unreadable file, invalid TOML or any invalid field.

    Examples
    --------
    >>> load_scenario("[patient]\\nweight = '70 kg'")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: scenario: got ...; expected a file path, not text (...scenario_from_text)
    """
    expected = "an existing scenario TOML file"
    p = as_path(path, "scenario", expected)
    check_scenario_suffix(p, "scenario")
    return scenario_from_dict(read_toml(p, "scenario", expected), base_dir=p.parent)
