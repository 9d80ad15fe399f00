"""Cost accounting: agent, gases and absorbent priced in one currency label, per case and period.

One rule (:func:`cost_arrays`) on plain arrays serves a single case (:func:`case_cost`) and many
(:func:`cost_table`). An item used but not priced is listed in ``unpriced``, never silently costed
at zero without saying so. The prices themselves (the TOML contract, :class:`~estimator.accounts.prices.Prices`) are read by
:mod:`estimator.accounts.prices`, whose names stay importable from here.

Cost of agent = liquid mL x price per mL (Dion's vapour-cost formula gives the liquid from dial,
flow and time; here the liquid comes from the engine or the fresh-gas audit).

References
----------
.. [1] Dion P. The cost of anaesthetic vapours. Can J Anaesth 1992;39:633 (cost = liquid volume x
   price per mL).

Examples
--------
>>> p = parse_prices({"currency": "EUR", "agent_bottle": 100, "bottle_volume": "250 mL",
...                   "oxygen_per_m3": 5.0})
>>> c = case_cost({"agent_liquid": Q_(25, "mL"), "oxygen": Q_(200, "L")}, p)
>>> c["currency"], c["agent"], c["gases"], c["total"]
('EUR', 10.0, 1.0, 11.0)
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
import pint

from ..errors import InputError
from ..units import Q_  # noqa: F401  (doctests)

# The price contract lives in .prices; its names stay importable from here.
from .prices import (  # noqa: F401
    COST_KEYS,
    DEMO_PRICES,
    GASES_PRICED,
    MAX_PRICE,
    UNSPECIFIED_CURRENCY,
    AgentPriceInput,
    CylinderPriceInput,
    Prices,
    PricesInput,
    load_prices,
    parse_prices,
    prices_from_text,
)


def cost_table(usage: pd.DataFrame, prices: Prices) -> pd.DataFrame:
    """Vectorised cost of many cases (rows) in the currency of ``prices``.

    Parameters
    ----------
    usage : DataFrame
        Columns ``agent`` (name or empty), ``agent_liquid_ml`` [mL], ``oxygen_l``, ``air_l``,
        ``nitrous_oxide_l`` [L] and optionally ``absorbent_g`` [g]; missing gas columns count as 0.
    prices : Prices

    Returns
    -------
    DataFrame
        ``agent``, ``gases``, ``absorbent``, ``total`` (plain floats) and ``unpriced`` (text list
        of the items used but not priced, joined by ``;``), same index.

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633 (agent cost = liquid volume x price per mL); gases priced per litre.

    Examples
    --------
    >>> t = cost_table(pd.DataFrame({"agent": ["sevoflurane"], "agent_liquid_ml": [10.0],
    ...                              "oxygen_l": [100.0]}), DEMO_PRICES)
    >>> float(t["total"].iloc[0])
    4.4
    """
    n = len(usage.index)

    def column(name: str) -> np.ndarray:
        return usage[name].to_numpy(dtype=float) if name in usage else np.zeros(n)

    names = usage["agent"].fillna("").astype(str).tolist() if "agent" in usage else [""] * n
    gases = {g: column(f"{g}_l") for g in GASES_PRICED}
    parts = cost_arrays(names, column("agent_liquid_ml"), gases, column("absorbent_g"), prices)
    out = pd.DataFrame({k: parts[k] for k in COST_KEYS}, index=usage.index)
    out["unpriced"] = pd.Series([";".join(u) for u in parts["unpriced"]], index=usage.index, dtype=object)
    return out


def cost_arrays(
    agents: Sequence[str],
    liquid_ml: np.ndarray,
    gases_l: Mapping[str, np.ndarray],
    absorbent_g: np.ndarray,
    prices: Prices,
) -> dict[str, Any]:
    """The cost rule on plain arrays (one entry a case): what :func:`cost_table` and
    :func:`case_cost` both compute with.

    Parameters
    ----------
    agents : sequence of str
        Agent name of each case (empty for none).
    liquid_ml : numpy.ndarray [mL]
        Liquid agent of each case.
    gases_l : mapping of str -> numpy.ndarray [L]
        Free gas of each case by gas (15 degC, 101.325 kPa); a gas not given counts as 0.
    absorbent_g : numpy.ndarray [g]
    prices : Prices

    Returns
    -------
    dict
        ``agent``, ``gases``, ``absorbent``, ``total`` [currency] as arrays and ``unpriced``, a list
        (one a case) of the items used but not priced.

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633 (agent cost = liquid volume x price per mL); gases priced per litre.

    Examples
    --------
    >>> c = cost_arrays(["sevoflurane"], np.array([10.0]), {"oxygen": np.array([100.0])}, np.zeros(1), DEMO_PRICES)
    >>> float(c["total"][0]), c["unpriced"]
    (4.4, [[]])
    """
    n = len(agents)
    unpriced: list[list[str]] = [[] for _ in range(n)]
    price = np.array([prices.agent_price(a or None) for a in agents], dtype=object)
    missing = np.array([p is None for p in price], dtype=bool)
    for i in np.flatnonzero(missing & (liquid_ml > 0)):
        unpriced[i].append("agent")
    agent = liquid_ml * np.where(missing, 0.0, price).astype(float)
    gas = np.zeros(n)
    for g in GASES_PRICED:
        vol = gases_l.get(g, np.zeros(n))
        if g in prices.gas_per_litre:
            gas = gas + vol * prices.gas_per_litre[g]
        else:
            for i in np.flatnonzero(vol > 0):
                unpriced[i].append(g)
    if prices.absorbent_per_g is None:
        for i in np.flatnonzero(absorbent_g > 0):
            unpriced[i].append("absorbent")
        absorbent = np.zeros(n)
    else:
        absorbent = absorbent_g * prices.absorbent_per_g
    return {
        "agent": agent,
        "gases": gas,
        "absorbent": absorbent,
        "total": agent + gas + absorbent,
        "unpriced": unpriced,
    }


def _mag(v: Any, unit: str) -> float:
    if v is None:
        return 0.0
    return float(v.to(unit).magnitude) if isinstance(v, pint.Quantity) else float(v)


def case_cost(totals: Mapping[str, Any], prices: Prices, agent: str | None = None) -> dict[str, Any]:
    """Cost of one case from engine-style totals.

    Parameters
    ----------
    totals : mapping
        ``agent_liquid`` [mL], ``oxygen``, ``air``, ``nitrous_oxide`` [L free gas at 15 degC,
        101.325 kPa], ``absorbent`` [g]; Quantities or plain numbers in those units.
    prices : Prices
    agent : str, optional
        Agent name, for per-agent prices.

    Returns
    -------
    dict
        ``currency``, ``agent``, ``gases``, ``absorbent``, ``total`` (plain floats in the currency),
        ``gas_detail`` (per gas) and ``unpriced`` (items used but without a price).

    References
    ----------
    Dion P. Can J Anaesth 1992;39:633 (agent cost = liquid volume x price per mL); gases priced per litre.

    Examples
    --------
    >>> c = case_cost({"agent_liquid": Q_(10, "mL"), "oxygen": Q_(100, "L")}, DEMO_PRICES, "sevoflurane")
    >>> c["agent"], c["total"]
    (4.0, 4.4)
    """
    litres = {g: _mag(totals.get(g), "L") for g in GASES_PRICED}
    t = cost_arrays(
        [agent or ""],
        np.array([_mag(totals.get("agent_liquid"), "mL")]),
        {g: np.array([v]) for g, v in litres.items()},
        np.array([_mag(totals.get("absorbent"), "g")]),
        prices,
    )
    detail = {g: litres[g] * prices.gas_per_litre[g] for g in GASES_PRICED if g in prices.gas_per_litre}
    return {
        "currency": prices.currency,
        **{k: float(t[k][0]) for k in COST_KEYS},
        "gas_detail": detail,
        "unpriced": t["unpriced"][0],
    }


def period_cost(costs: Sequence[Mapping[str, Any]]) -> dict[str, Any]:
    """Sum of case costs (all in one currency) over a period.

    Parameters
    ----------
    costs : sequence of mapping
        Case costs as :func:`case_cost` returns them [currency].

    Returns
    -------
    dict
        ``currency``, ``cases`` and the summed ``agent``, ``gases``, ``absorbent``, ``total``
        [currency], with ``unpriced`` (every item used but not priced).

    Examples
    --------
    >>> period_cost([{"currency": "EUR", "agent": 1.0, "gases": 2.0, "absorbent": 0.0, "total": 3.0},
    ...              {"currency": "EUR", "agent": 1.5, "gases": 0.5, "absorbent": 0.0, "total": 2.0}])["total"]
    5.0
    """
    currencies = {c["currency"] for c in costs}
    if len(currencies) > 1:
        raise InputError("prices.currency", sorted(currencies), "one currency label for every case (never converted)")
    out: dict[str, Any] = {"currency": currencies.pop() if currencies else UNSPECIFIED_CURRENCY, "cases": len(costs)}
    for k in COST_KEYS:
        out[k] = float(sum(c[k] for c in costs))
    out["unpriced"] = sorted({u for c in costs for u in c.get("unpriced", [])})
    return out


def compare_costs(scenarios: Mapping[str, Mapping[str, Any]]) -> pd.DataFrame:
    """Side-by-side comparison of scenario costs; the first scenario is the baseline.

    Parameters
    ----------
    scenarios : mapping of str -> mapping
        Scenario name -> cost as :func:`case_cost` or :func:`period_cost` returns it [currency].

    Returns
    -------
    DataFrame
        One column per scenario plus ``change vs <first>: <name>`` columns [currency]; rows
        ``agent``, ``gases``, ``absorbent``, ``total``.

    Examples
    --------
    >>> df = compare_costs({"2 L/min": {"currency": "EUR", "agent": 8.0, "gases": 1.0, "absorbent": 0.5, "total": 9.5},
    ...                     "0.5 L/min": {"currency": "EUR", "agent": 3.0, "gases": 0.3, "absorbent": 1.0, "total": 4.3}})
    >>> float(df.loc["total", "change vs 2 L/min: 0.5 L/min"])
    -5.2
    """
    if not scenarios:
        raise InputError("scenarios", {}, "at least one scenario to compare")
    period_cost(list(scenarios.values()))  # one currency check
    names = list(scenarios)
    df = pd.DataFrame({n: [float(scenarios[n][k]) for k in COST_KEYS] for n in names}, index=list(COST_KEYS))
    for n in names[1:]:
        df[f"change vs {names[0]}: {n}"] = df[n] - df[names[0]]
    df.attrs["currency"] = scenarios[names[0]]["currency"]
    return df
