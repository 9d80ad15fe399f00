"""The low-flow policy of an audit counterfactual: its TOML contract and the flows it sets.

A policy file has one ``[policy]`` table (or its keys at the top level): the policy fresh-gas flow,
the minimum O2 share of the fresh gas, the block length, the baseline (``recorded`` or ``engine``),
patient defaults and an optional case limit. :func:`policy_flows` scales a recorded O2 : air : N2O
mix down to the policy flow, raising O2 (from air first) to the minimum share. The counterfactual
itself is :mod:`estimator.planning.audit_policy`.

Examples
--------
>>> p = parse_policy({"fresh_gas_flow": "0.5 L/min"})
>>> [round(x, 3) for x in policy_flows(1.0, 3.0, 0.0, p)]
[0.3, 0.2, 0.0]
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, ValidationError

from ..contracts import input_error_from_validation, read_toml, toml_from_text
from ..errors import InputError
from ..fields import AsGiven, quantity
from ..limits import SANE_AGE
from ..units import check_range, parse_quantity

#: The engine's flowmeter range per gas [L/min] (scenario contract).
ENGINE_MAX_FLOW = 15.0
#: Most cases re-run in one counterfactual: about a second each, so a day of computing (practical
#: limit, no source).
MAX_CASES = 100_000


class PolicyInput(BaseModel):
    """The ``[policy]`` table of a policy file (``extra = "forbid"``)."""

    model_config = ConfigDict(extra="forbid", arbitrary_types_allowed=True)
    name: str = "low-flow policy"
    # The engine's flow range per gas, from 0.1 L/min (below any metered low-flow practice).
    fresh_gas_flow: Annotated[
        AsGiven,
        quantity(
            "flow",
            0.1,
            ENGINE_MAX_FLOW,
            "L/min",
            bare_unit="L/min",
            keep_text=True,
            description="policy fresh-gas flow",
        ),
    ] = "0.5 L/min"
    # Up to 10 h of recorded wash-in kept as recorded (longer than any induction; no source).
    maintenance_after: (
        Annotated[AsGiven, quantity("time", 0.0, 600.0, "min", bare_unit="min", keep_text=True)] | None
    ) = None
    # 21 % (air) to 100 % oxygen.
    minimum_oxygen_share: Annotated[AsGiven, quantity("fraction", 0.21, 1.0, "dimensionless", keep_text=True)] = "60 %"
    # Blocks from 1 min (the log's resolution) to 2 h (practical limits, no source).
    block: Annotated[AsGiven, quantity("time", 1.0, 120.0, "min", bare_unit="min", keep_text=True)] = "15 min"
    baseline: str = "recorded"
    # The scenario contract's patient ranges.
    default_weight: Annotated[AsGiven, quantity("mass", 0.5, 300.0, "kg", bare_unit="kg", keep_text=True)] = "70 kg"
    default_age: Annotated[AsGiven, quantity("age", *SANE_AGE, "year", bare_unit="year", keep_text=True)] = "40 years"
    max_cases: int | None = None


@dataclass(frozen=True)
class Policy:
    """A validated policy: flows [L/min], times [min], shares 0-1, weight [kg], age [years]."""

    name: str
    fresh_gas_flow: float
    minimum_oxygen_share: float
    block: float
    baseline: str
    default_weight: float
    default_age: float
    maintenance_after: float | None = None
    max_cases: int | None = None


def parse_policy(data: dict[str, Any]) -> Policy:
    """Validate a ``[policy]`` mapping (or a whole policy document with a ``policy`` table)."""
    data = data.get("policy", data)
    try:
        raw = PolicyInput.model_validate(data)
    except ValidationError as exc:
        raise input_error_from_validation(exc, "policy", PolicyInput) from None

    def q(value: AsGiven, field: str, dim: str, unit: str, lo: float, hi: float) -> float:
        v = parse_quantity(value, f"policy.{field}", dim, default_unit=None if dim == "fraction" else unit)
        check_range(v.to(unit), f"policy.{field}", lo, hi, value=value)
        return float(v.to(unit).magnitude)

    if raw.max_cases is not None and not 1 <= raw.max_cases <= MAX_CASES:
        raise InputError("policy.max_cases", raw.max_cases, f"a whole number of cases, 1 to {MAX_CASES}")
    if raw.baseline not in ("recorded", "engine"):
        raise InputError("policy.baseline", raw.baseline, "recorded or engine")
    return Policy(
        name=raw.name,
        fresh_gas_flow=q(raw.fresh_gas_flow, "fresh_gas_flow", "flow", "L/min", 0.1, ENGINE_MAX_FLOW),
        minimum_oxygen_share=q(
            raw.minimum_oxygen_share, "minimum_oxygen_share", "fraction", "dimensionless", 0.21, 1.0
        ),
        block=q(raw.block, "block", "time", "min", 1.0, 120.0),
        baseline=raw.baseline,
        default_weight=q(raw.default_weight, "default_weight", "mass", "kg", 0.5, 300.0),
        default_age=q(raw.default_age, "default_age", "age", "year", *SANE_AGE),
        maintenance_after=None
        if raw.maintenance_after is None
        else q(raw.maintenance_after, "maintenance_after", "time", "min", 0.0, 600.0),
        max_cases=raw.max_cases,
    )


def policy_from_text(text: str) -> Policy:
    """Parse a policy from TOML text (a ``[policy]`` table, or its keys at the top level)."""
    return parse_policy(toml_from_text(text, "policy"))


def load_policy(path: str | os.PathLike[str]) -> Policy:
    """Read a policy TOML file (always a path, never text).

    >>> load_policy("no/such/policy.toml")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: policy: got 'no/such/policy.toml'; expected an existing TOML policy file
    """
    return parse_policy(read_toml(path, "policy", "an existing TOML policy file"))


def policy_flows(o2: float, air: float, n2o: float, policy: Policy) -> tuple[float, float, float]:
    """Scale a recorded mix to the policy flow and keep O2 at or above the policy's minimum share.

    A recorded total at or below the policy flow is returned unchanged.
    """
    total = o2 + air + n2o
    if total <= policy.fresh_gas_flow or total <= 0:
        return o2, air, n2o
    k = policy.fresh_gas_flow / total
    o2, air, n2o = o2 * k, air * k, n2o * k
    deficit = policy.minimum_oxygen_share * policy.fresh_gas_flow - o2
    if deficit > 0:
        take = min(deficit, air)
        air -= take
        o2 += take
        take = min(deficit - take, n2o)
        n2o -= take
        o2 += take
    return o2, air, n2o
