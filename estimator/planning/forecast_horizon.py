"""Demand over a planning horizon (a quarter, say): its totals and orders, apart from the weeks simulated.

The forecast simulates ``weeks`` independent weeks for its statistics (more weeks, steadier P95 and P99);
a manager orders for a horizon of ``horizon_weeks`` (13 for a quarter). The horizon's total of each item
is the sum of ``horizon_weeks`` weeks drawn with replacement from the simulated ones, repeated
:data:`RESAMPLES` times (the bootstrap, Efron 1979): the simulated weeks are independent draws of one
week's demand, so a sum of resampled weeks is a draw of the horizon's demand. The orders then cover the
chosen percentile (P95 by default) of the horizon's total, which is less than the horizon times a P95
week: bad weeks seldom come all together. The resampling has its own random stream of the forecast's
seed, so the same seed gives the same horizon.

References
----------
.. [1] Efron B. Bootstrap methods: another look at the jackknife. Ann Stat 1979;7:1-26.

Examples
--------
>>> import numpy as np
>>> totals = horizon_totals({"cases": np.array([20.0, 30.0])}, horizon_weeks=13, seed=1)
>>> bool(13 * 20 <= totals["cases"].min() and totals["cases"].max() <= 13 * 30)
True
"""

from __future__ import annotations

import dataclasses
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError
from ..inputs.casemix_schema import MAX_HORIZON_WEEKS
from ..units import Q_
from .forecast import order_list, summary_statistics

if TYPE_CHECKING:
    from .casemix import CaseMix
    from .forecast import ForecastResult

#: Resampled horizons: the P95 of 4000 draws has a sampling error of about 0.3 percentile points
#: (binomial, sqrt(0.95 x 0.05 / 4000)); common practice, no source for the count.
RESAMPLES = 4000
#: The resampling's stream of the forecast's seed (apart from the case draws).
_STREAM = 19


def horizon_totals(weekly: dict[str, np.ndarray], horizon_weeks: int, seed: int) -> dict[str, np.ndarray]:
    """:data:`RESAMPLES` horizon totals of each item: sums of ``horizon_weeks`` resampled simulated weeks."""
    if isinstance(horizon_weeks, bool) or not isinstance(horizon_weeks, int):
        raise InputError("horizon_weeks", horizon_weeks, f"a whole number of weeks, 1 to {MAX_HORIZON_WEEKS}")
    if not 1 <= horizon_weeks <= MAX_HORIZON_WEEKS:
        raise InputError("horizon_weeks", horizon_weeks, f"a whole number of weeks, 1 to {MAX_HORIZON_WEEKS}")
    n = len(next(iter(weekly.values())))
    pick = np.random.default_rng([seed, _STREAM]).integers(0, n, size=(RESAMPLES, horizon_weeks))
    return {k: np.asarray(v, dtype=float)[pick].sum(axis=1) for k, v in weekly.items()}


def plan_horizon(result: ForecastResult, mix: CaseMix, horizon_weeks: int | None = None) -> ForecastResult:
    """The forecast with its planning horizon: totals (mean, P50, P95, P99) and orders over the horizon.

    ``horizon_weeks`` defaults to the case mix's ``horizon_weeks``; without either the result is
    returned as it is (orders for one week only).

    Parameters
    ----------
    result : ForecastResult
        A forecast of ``mix``.
    mix : CaseMix
    horizon_weeks : int, optional
        The planning horizon [weeks], 1 to 520.

    Returns
    -------
    ForecastResult
        With ``horizon``: ``weeks``, ``resamples``, ``items``, ``orders``, ``cost`` and ``method``.
    """
    weeks = mix.horizon_weeks if horizon_weeks is None else horizon_weeks
    if weeks is None:
        return result
    totals = horizon_totals(result.weekly, weeks, result.seed)
    items = {
        k: {s: Q_(v, result.units[k]) for s, v in summary_statistics(totals[k]).items()}
        for k in result.units
        if k in totals
    }
    warns: list[tuple[str, str]] = []
    orders = order_list(mix, totals, result.units, warns)
    cost = None
    if result.cost is not None and "cost" in totals:
        cost = {"currency": result.cost["currency"], **summary_statistics(totals["cost"])}
    horizon = {
        "weeks": weeks,
        "resamples": RESAMPLES,
        "method": f"sums of {weeks} weeks resampled from the {result.weeks} simulated weeks (bootstrap, Efron 1979)",
        "items": items,
        "orders": orders,
        "cost": cost,
    }
    return dataclasses.replace(result, horizon=horizon, warnings=[*result.warnings, *warns])


__all__ = ["RESAMPLES", "horizon_totals", "plan_horizon"]
