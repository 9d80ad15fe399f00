r"""The fresh-gas plan of an inline case type, with defaults derived from the O2 balance.

An inline case type is a wash-in phase and a maintenance phase that lasts to the drawn end of the
case. Keys the case type leaves out get defaults; the maintenance defaults are derived so that
inspired O2 stays at or above the scenario's inspired-O2 threshold (``[flow_floor]
threshold_inspired_oxygen``, default 0.30) for the heaviest patient the case type can draw.

Steady-state O2 balance of a circle system with an absorber (gas leaving the circuit taken, on the
safe side, at the inspired O2 fraction; agent and N2O uptake, which only raise the inspired O2,
left out): carrier flow F with O2 fraction f, vaporizer output D (the vapour adds F D / (1 - D)),
O2 consumption VO2 and threshold theta hold when

    f F - VO2 >= theta (F / (1 - D) - VO2),

i.e. F (f - theta') >= VO2 (1 - theta) with theta' = theta / (1 - D). VO2 is Brody's
10 kg^0.75 mL/min STPD (Lowe and Ernst 1981) at the heaviest weight drawn, taken to the site's
temperature; D is the dial given, or the agent's vaporizer maximum under an end-tidal hold.

Defaults (also in the README's case-mix section):

* wash-in: 6 L/min for 10 min at 50 % O2 (common practice, no source);
* no ``maintenance_flow`` and no ``oxygen_fraction``: 0.25 L/min of the balance gas (air unless
  ``balance = "nitrous_oxide"``) plus the O2 flow the balance needs, rounded up to 0.1 L/min;
* ``maintenance_flow`` alone: the O2 share the balance needs (at least 50 %, in 5 % steps),
  refused when even 100 % O2 would not do;
* ``oxygen_fraction`` alone: the flow the balance needs (at least 0.5 L/min, rounded up to
  0.1 L/min), refused when the fraction is at or below theta';
* both: the case type's own plan (the engine warns if it is hypoxic).

References
----------
.. [1] Lowe HJ, Ernst EA. The Quantitative Practice of Anesthesia: Use of Closed Circuit. Williams
   & Wilkins 1981 (Brody's law, VO2 = 10 kg^0.75 mL/min).
.. [2] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37-44 (inspired O2
   kept at or above 30 % at low flow; from memory).

Examples
--------
>>> round(oxygen_consumption_site(80.0), 3)
0.287
>>> round(minimum_flow(0.286, 0.5, 0.30, 0.08), 2)
1.15
"""

from __future__ import annotations

import math
from typing import Any

from pydantic import ValidationError

from ..errors import InputError
from ..inputs.scenario import AgentInput, FlowFloorInput, SiteInput
from ..physics.physiology import brody_oxygen_consumption
from ..properties import AGENTS, gas
from ..units import parse_quantity

#: Inspired-O2 threshold of a scenario without a ``[flow_floor]`` table (the scenario's default).
THRESHOLD = float(FlowFloorInput().threshold_inspired_oxygen.to("").magnitude)
#: Gas temperature of a scenario without a ``[site]`` table [K] (flows are read at the site).
SITE_TEMPERATURE_K = float(SiteInput().temperature.to("K").magnitude)
#: Default wash-in (common practice, no source).
WASH_IN_FLOW, WASH_IN_TIME, WASH_IN_OXYGEN = "6 L/min", "10 min", "50 %"
#: Default maintenance balance-gas flow [L/min] and the least default O2 share and total flow
#: (common practice, no source).
BALANCE_FLOW, LEAST_OXYGEN_SHARE, LEAST_FLOW = 0.25, 0.50, 0.5
#: Flowmeter step at low flow [L/min] (as the flow floor's default scale) and O2-share step.
FLOW_STEP, SHARE_STEP = 0.1, 0.05
_AIR_O2 = float(gas("air").records["oxygen_fraction"].value)


def oxygen_consumption_site(weight_kg: float) -> float:
    """Brody O2 consumption [L/min] at the site temperature of a default scenario (20 degC, 1 atm).

    >>> round(oxygen_consumption_site(70.0), 3)
    0.26
    """
    return brody_oxygen_consumption(weight_kg) / 1000.0 * SITE_TEMPERATURE_K / 273.15


def minimum_flow(vo2: float, oxygen_share: float, threshold: float, dial: float) -> float:
    """Least carrier flow [L/min] at O2 share ``oxygen_share`` keeping inspired O2 >= threshold
    (steady state; ``inf`` when the share cannot).

    >>> minimum_flow(0.3, 0.3, 0.3, 0.0)
    inf
    """
    top = threshold / (1.0 - dial)
    return vo2 * (1.0 - threshold) / (oxygen_share - top) if oxygen_share > top else math.inf


def minimum_share(vo2: float, flow: float, threshold: float, dial: float) -> float:
    """Least O2 share of a carrier flow [L/min] keeping inspired O2 >= threshold (may exceed 1).

    >>> round(minimum_share(0.3, 1.0, 0.3, 0.0), 2)
    0.51
    """
    return threshold / (1.0 - dial) + vo2 * (1.0 - threshold) / flow


def minimum_oxygen_flow(vo2: float, balance_flow: float, balance_o2: float, threshold: float, dial: float) -> float:
    """Least O2 flow [L/min] beside ``balance_flow`` of a gas with O2 share ``balance_o2``.

    >>> round(minimum_oxygen_flow(0.3, 0.25, 0.2095, 0.3, 0.0), 3)
    0.332
    """
    top = threshold / (1.0 - dial)
    return (vo2 * (1.0 - threshold) + balance_flow * (top - balance_o2)) / (1.0 - top)


def _up(x: float, step: float) -> float:
    return round(math.ceil(x / step - 1e-9) * step, 6)


def _dial(row: Any, where: str) -> float:
    if row.vaporizer is not None:
        return float(parse_quantity(row.vaporizer, f"{where}.vaporizer", "fraction").to("").magnitude)
    return float(AGENTS[agent_name(row.agent, where)].vaporizer_max.to("").magnitude)


def agent_name(agent: Any, where: str) -> str:
    """The agent's table name, or an InputError naming ``<where>.agent``."""
    try:
        return AgentInput.model_validate({"name": agent}).name
    except ValidationError:
        raise InputError(
            f"{where}.agent", agent, "an agent (" + ", ".join(sorted(AGENTS)) + ") or a scenario file"
        ) from None


def maintenance_gas(row: Any, where: str, heaviest_kg: float) -> dict[str, Any]:
    """The maintenance phase's carrier-gas keys for an inline case type (see the module docstring).

    Parameters
    ----------
    row : CaseTypeInput
    where : str
        The row, e.g. ``case_types[2]``, for errors.
    heaviest_kg : float
        The heaviest weight the case type draws [kg].
    """
    dial = min(_dial(row, where), 0.99)
    vo2 = oxygen_consumption_site(heaviest_kg)
    balance = row.balance or "air"
    why = f"for the heaviest weight drawn, {heaviest_kg:g} kg (O2 use {1000 * vo2:.0f} mL/min)"
    if row.maintenance_flow is not None and row.oxygen_fraction is not None:
        return {"total_flow": row.maintenance_flow, "oxygen_fraction": row.oxygen_fraction, "balance": balance}
    if row.maintenance_flow is not None:
        flow = parse_quantity(row.maintenance_flow, f"{where}.maintenance_flow", "flow", default_unit="L/min")
        flow_l = float(flow.to("L/min").magnitude)
        need = minimum_share(vo2, flow_l, THRESHOLD, dial) if flow_l > 0 else math.inf
        if need > 1.0:
            least = minimum_flow(vo2, 1.0, THRESHOLD, dial)
            raise InputError(
                f"{where}.maintenance_flow",
                row.maintenance_flow,
                f"at least {_up(least, FLOW_STEP):g} L/min {why} to keep inspired O2 at "
                f"{100 * THRESHOLD:g} % even with pure O2, or an oxygen_fraction beside it",
            )
        share = max(LEAST_OXYGEN_SHARE, _up(need, SHARE_STEP), _AIR_O2 if balance == "air" else 0.0)
        return {
            "total_flow": row.maintenance_flow,
            "oxygen_fraction": f"{100 * min(share, 1.0):g} %",
            "balance": balance,
        }
    if row.oxygen_fraction is not None:
        share = float(parse_quantity(row.oxygen_fraction, f"{where}.oxygen_fraction", "fraction").to("").magnitude)
        least = minimum_flow(vo2, share, THRESHOLD, dial)
        if not math.isfinite(least):
            raise InputError(
                f"{where}.oxygen_fraction",
                row.oxygen_fraction,
                f"above {100 * THRESHOLD / (1 - dial):.1f} % (the {100 * THRESHOLD:g} % inspired-O2 threshold with "
                f"the vaporizer at up to {100 * dial:g} %) to derive a maintenance flow, or a maintenance_flow beside it",
            )
        flow_l = max(LEAST_FLOW, _up(least, FLOW_STEP))
        return {"total_flow": f"{flow_l:g} L/min", "oxygen_fraction": row.oxygen_fraction, "balance": balance}
    balance_o2 = _AIR_O2 if balance == "air" else 0.0
    o2 = _up(minimum_oxygen_flow(vo2, BALANCE_FLOW, balance_o2, THRESHOLD, dial), FLOW_STEP)
    key = "air" if balance == "air" else "nitrous_oxide"
    return {"oxygen": f"{o2:g} L/min", key: f"{BALANCE_FLOW:g} L/min"}


def inline_scenario(row: Any, where: str, weight: float, age: float, heaviest_kg: float) -> dict[str, Any]:
    """The scenario document of an inline case type (a wash-in, then maintenance)."""
    if row.agent is None:
        raise InputError(
            f"{where}.agent", "(missing)", "an agent (" + ", ".join(sorted(AGENTS)) + ") or a scenario file"
        )
    if row.end_tidal_target is not None and row.vaporizer is not None:
        raise InputError(f"{where}.vaporizer", row.vaporizer, "either end_tidal_target or vaporizer, not both")
    drive = (
        {"vaporizer": row.vaporizer}
        if row.vaporizer is not None
        else {"end_tidal_target": row.end_tidal_target or "1 MAC"}
    )
    wash = {
        "duration": row.wash_in_time or WASH_IN_TIME,
        "total_flow": row.wash_in_flow or WASH_IN_FLOW,
        "oxygen_fraction": row.oxygen_fraction or WASH_IN_OXYGEN,
        "balance": row.balance or "air",
    }
    keep = {"duration": "60 min", **maintenance_gas(row, where, heaviest_kg)}
    return {
        "title": row.name,
        "patient": {"weight": f"{weight} kg", "age": f"{age} year"},
        "agent": {"name": row.agent},
        "phases": [{**wash, **drive, "label": "wash-in"}, {**keep, **drive, "label": "maintenance"}],
    }
