"""The case-mix file's schema: the keys of the document, its ``[[case_types]]`` rows and ``[orders]``.

Unknown keys are errors (pydantic ``extra="forbid"``); values are kept as written and checked
with their units and ranges by :mod:`estimator.planning.casemix` and :mod:`estimator.inputs.casemix_draws`.

Examples
--------
>>> CaseTypeInput(name="hip", per_week=5, agent="sevoflurane").count
'poisson'
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import AfterValidator, BaseModel, ConfigDict, StrictInt

Value = str | int | float
#: Bottle size used for orders when none is given: 250 mL (common practice, no source).
DEFAULT_BOTTLE = "250 mL"


#: Longest planning horizon: ten years of weeks (practical limit, no source).
MAX_HORIZON_WEEKS = 520


def check_horizon_weeks(value: int) -> int:
    """The planning horizon's range check [weeks]: 1 to :data:`MAX_HORIZON_WEEKS`.

    >>> check_horizon_weeks(13)
    13
    """
    if not 1 <= value <= MAX_HORIZON_WEEKS:
        raise ValueError(f"a whole number of weeks, 1 to {MAX_HORIZON_WEEKS}")
    return value


#: The planning horizon in whole weeks (13 for a quarter): its totals and orders are given apart
#: from the weeks simulated for the statistics.
HorizonWeeks = Annotated[StrictInt, AfterValidator(check_horizon_weeks)]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class CaseTypeInput(_Strict):
    """One ``[[case_types]]`` row; see the module docstring and the README for every key."""

    name: str
    per_week: float | None = None
    per_weekday: list[float] | None = None
    count: Literal["poisson", "fixed"] = "poisson"
    scenario: str | None = None
    agent: str | None = None
    wash_in_flow: Value | None = None
    wash_in_time: Value | None = None
    maintenance_flow: Value | None = None
    oxygen_fraction: Value | None = None
    balance: Literal["air", "nitrous_oxide"] | None = None
    end_tidal_target: Value | None = None
    vaporizer: Value | None = None
    duration: Value | None = None
    duration_median: Value | None = None
    duration_p90: Value | None = None
    duration_min: Value | None = None
    duration_max: Value | None = None
    weight_mean: Value | None = None
    weight_sd: Value | None = None
    weight_min: Value | None = None
    weight_max: Value | None = None
    age_mean: Value | None = None
    age_sd: Value | None = None
    age_min: Value | None = None
    age_max: Value | None = None


class CylinderSize(_Strict):
    """A cylinder size for orders: compressed by pressure, or nitrous oxide by weight."""

    water_capacity: Value | None = None
    pressure: Value | None = None
    temperature: Value = "15 degC"
    reserve_pressure: Value | None = None
    gross_weight: Value | None = None
    tare_weight: Value | None = None
    reserve_weight: Value | None = None


class OrdersInput(_Strict):
    """``[orders]``: pack sizes; items without a size are reported without an order."""

    oxygen_cylinder: CylinderSize | None = None
    air_cylinder: CylinderSize | None = None
    nitrous_oxide_cylinder: CylinderSize | None = None
    bottle_volume: Value = DEFAULT_BOTTLE
    bottle_volumes: dict[str, Value] = {}
    absorbent_pack: Value | None = None


class CaseMixInput(_Strict):
    """The case-mix file."""

    title: str = ""
    weeks: StrictInt = 52
    horizon_weeks: HorizonWeeks | None = None
    seed: StrictInt | None = None
    cover: Value = "95 %"
    co2e_basis: str = "ar6_gwp100"
    nitrous_oxide_manifold_loss: Value = 0.0
    case_types: list[CaseTypeInput] = []
    case_types_file: str | None = None
    prices: dict[str, Any] | None = None
    orders: OrdersInput = OrdersInput()
    calibration: str | None = None  # a department's calibration TOML, relative to the case-mix file
