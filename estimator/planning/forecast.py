"""Demand forecast: Monte-Carlo weekly demand of a department from its case mix.

For every simulated week the number of cases of each case type is drawn (Poisson with the stated
mean, or fixed), then each case's duration, weight and age from the case type's distributions
(:mod:`estimator.planning.casemix`); every case runs through the batch engine (:mod:`estimator.simulation.batch`,
the single-case model's equations) and its totals are summed into its week. Each item's weekly
demand is summarised by its mean and its 50th, 95th and 99th percentiles over the weeks, and the
order that covers the chosen percentile week (P95 by default) is given in whole cylinders,
bottles and packs. Costs (:mod:`estimator.accounts.costs`) and CO2e (:mod:`estimator.accounts.carbon`) are summed
the same way. Runs are reproducible: the same seed gives the same draws (numpy ``Generator``,
PCG64).

Percentiles are the empirical ones of the simulated weeks (``numpy.percentile``, linear
interpolation); a P99 needs some hundreds of weeks to settle, and a warning says so below 100.

References
----------
.. [1] Hyndman RJ, Fan Y. Sample quantiles in statistical packages. Am Stat 1996;50:361-5
   (definition 7, numpy's default).

Examples
--------
>>> from estimator.planning.casemix import casemix_from_text
>>> mix = casemix_from_text('''
... weeks = 20
... seed = 3
... [[case_types]]
... name = "short day case"
... per_week = 10
... agent = "sevoflurane"
... duration_median = "45 min"
... duration_p90 = "70 min"
... weight_mean = "75 kg"
... weight_sd = "12 kg"
... ''')
>>> r = forecast(mix)
>>> s = r.items["sevoflurane"]
>>> bool(s["p50"] <= s["p95"] <= s["p99"])
True
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import pint

from ..accounts.carbon import basis_label
from ..accounts.carbon_totals import totals_co2e
from ..accounts.costs import cost_table
from ..errors import InputError
from ..inputs.casemix_orders import absorbent_pack_kg, bottle_ml, cylinder_usable
from ..limits import FEW_WEEKS, HYPOXIC_FRACTION
from ..physics.cylinders import reference_molar_volume
from ..properties import gas
from ..simulation.batch import TOTAL_UNITS, run_batch
from ..simulation.results import FIO2_ADVISORY, TARGET_BAND
from ..simulation.spread import forecast_adjuster
from ..units import GAS_VOLUME_REFERENCE, Q_
from .casemix import MAX_WEEKS, CaseMix
from .forecast_size import MAX_CASES, check_size

STATISTICS = ("mean", "p50", "p95", "p99")


@dataclass
class ForecastResult:
    """Weekly demand of a case mix.

    Attributes
    ----------
    weeks, seed : int
    cover : float
        Percentile the orders cover (0.95 for P95).
    items : dict
        Item name -> ``{"mean", "p50", "p95", "p99"}`` quantities.
    weekly : dict
        Item name -> array of weekly totals (plain floats in ``units[item]``).
    units : dict
    orders : list of dict
    cost : dict or None
    cases : list of dict
        Per case type: name, mean cases a week, cases simulated, mean duration.
    warnings : list of (code, message)
    """

    title: str
    weeks: int
    seed: int
    cover: float
    items: dict[str, dict[str, pint.Quantity]]
    weekly: dict[str, np.ndarray]
    units: dict[str, str]
    orders: list[dict[str, Any]]
    cost: dict[str, Any] | None
    cases: list[dict[str, Any]]
    co2e_basis: str
    warnings: list[tuple[str, str]] = field(default_factory=list)
    solver: dict[str, float] = field(default_factory=dict)
    horizon: dict[str, Any] | None = None  # totals and orders of the planning horizon (forecast_horizon)

    def to_json(self) -> dict[str, Any]:
        """The ``lowflow forecast --json`` contract (see the README)."""
        from ..jsonout import jsonable

        return jsonable(
            {
                "title": self.title,
                "weeks": self.weeks,
                "seed": self.seed,
                "cover": Q_(100 * self.cover, "percent"),
                "items": self.items,
                "orders": self.orders,
                "cost": self.cost,
                "cases": self.cases,
                "co2e_basis": basis_label(self.co2e_basis),
                "warnings": [{"code": c, "message": m} for c, m in self.warnings],
                "solver": self.solver,
                "horizon": self.horizon,
                "gas_volume_reference": GAS_VOLUME_REFERENCE,
            }
        )


def summary_statistics(values: np.ndarray) -> dict[str, float]:
    """Mean, P50, P95 and P99 of weekly totals (empirical percentiles, linear interpolation).

    >>> summary_statistics(np.arange(101.0))
    {'mean': 50.0, 'p50': 50.0, 'p95': 95.0, 'p99': 99.0}
    """
    v = np.asarray(values, dtype=float)
    p = np.percentile(v, [50.0, 95.0, 99.0])
    return {"mean": float(v.mean()), "p50": float(p[0]), "p95": float(p[1]), "p99": float(p[2])}


def case_co2e(totals: dict[str, np.ndarray], agent: str, basis: str, manifold_loss: float = 0.0) -> np.ndarray:
    """CO2e per case [kg] from batch totals: :func:`estimator.accounts.carbon_totals.totals_co2e`, the rule of the case."""
    return totals_co2e(totals, agent, basis, manifold_loss)["co2e_kg"]


def _draw(mix: CaseMix, weeks: int, rng: np.random.Generator):
    counts = np.empty((weeks, len(mix.case_types)), dtype=np.int64)
    for j, ct in enumerate(mix.case_types):
        counts[:, j] = round(ct.mean_per_week) if ct.fixed else rng.poisson(ct.mean_per_week, weeks)
    draws = []
    for j, ct in enumerate(mix.case_types):
        n = int(counts[:, j].sum())
        draws.append(
            (
                ct.duration.sample(rng, n),
                ct.weight.sample(rng, n),
                ct.age.sample(rng, n),
                np.repeat(np.arange(weeks), counts[:, j]),
            )
        )
    return counts, draws


def forecast(
    mix: CaseMix,
    *,
    weeks: int | None = None,
    seed: int | None = None,
    progress: Callable[[float], None] | None = None,
    max_cases: int = MAX_CASES,
    patient_spread: bool = False,
) -> ForecastResult:
    """Monte-Carlo weekly demand of a case mix.

    Parameters
    ----------
    mix : CaseMix
    weeks : int, optional
        Weeks to simulate (default the file's ``weeks``), 1 to :data:`~estimator.planning.casemix.MAX_WEEKS` (1040).
    seed : int, optional
        Seed of the random generator (default the file's ``seed``; without either a fresh one,
        reported in the result so that the run can be repeated).
    progress : callable, optional
        Called with the fraction of cases done, from 0 to 1.
    max_cases : int
        Most expected cases to run (default :data:`estimator.planning.forecast_size.MAX_CASES`, at most
        :data:`~estimator.planning.forecast_size.CASE_CEILING`); a larger forecast is refused before it runs.
    patient_spread : bool
        Draw each case's physiology (cardiac output, metabolic rate, agent solubility, fat volume)
        from the published between-patient variation of :mod:`estimator.simulation.spread`, after the case
        draws and from the same generator (off by default: the pinned forecasts stay comparable).

    Returns
    -------
    ForecastResult
    """
    weeks = mix.weeks if weeks is None else weeks
    if isinstance(weeks, bool) or not isinstance(weeks, int) or not 1 <= weeks <= MAX_WEEKS:
        raise InputError("weeks", weeks, f"1 to {MAX_WEEKS} weeks")
    check_size(mix, weeks, max_cases)
    seed = mix.seed if seed is None else seed
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])  # a fresh 32-bit seed, reported
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise InputError("seed", seed, "a whole number of 0 or more")
    rng = np.random.default_rng(seed)
    counts, draws = _draw(mix, weeks, rng)
    total_cases = int(counts.sum())
    agents = sorted({ct.agent for ct in mix.case_types})
    units = {
        "cases": "",
        "oxygen": "L",
        "air": "L",
        "nitrous_oxide": "kg",
        "absorbent": "kg",
        "co2e": "kg",
        "mac_hours": "MAC_hour",
        **{a: "mL" for a in agents},
    }
    weekly = {k: np.zeros(weeks) for k in units}
    weekly["cases"] = counts.sum(axis=1).astype(float)
    cost_weekly = np.zeros(weeks) if mix.prices is not None else None
    unpriced: set[str] = set()
    flag_rows = []
    evaluations, done, t0 = 0, 0, time.perf_counter()
    cases = []
    for ct, (dur, wt, age, week) in zip(mix.case_types, draws, strict=True):
        n = len(dur)

        def report(frac: float, n=n, done=done) -> None:
            if progress is not None and total_cases:
                progress((done + frac * n) / total_cases)

        adjust = forecast_adjuster(ct.agent, n, rng) if patient_spread and n else None
        tot = (
            run_batch(ct.template, wt, age, dur, progress=report, adjust=adjust)
            if n
            else {k: np.zeros(0) for k in TOTAL_UNITS}
        )
        done += n
        evaluations += int(tot["evaluations"].sum()) if n else 0
        add = {
            "oxygen": tot["oxygen"],
            "air": tot["air"],
            "nitrous_oxide": tot["nitrous_oxide_mass"] / 1000.0,
            "absorbent": tot["absorbent"] / 1000.0,
            "mac_hours": tot["mac_hours"],
            ct.agent: tot["agent_liquid"],
            "co2e": case_co2e(tot, ct.agent, mix.co2e_basis, mix.manifold_loss),
        }
        for key, v in add.items():
            weekly[key] += np.bincount(week, weights=v, minlength=weeks)
        if cost_weekly is not None and mix.prices is not None and n:
            usage = pd.DataFrame(
                {
                    "agent": ct.agent,
                    "agent_liquid_ml": tot["agent_liquid"],
                    "oxygen_l": tot["oxygen"],
                    "air_l": tot["air"],
                    "nitrous_oxide_l": tot["nitrous_oxide"],
                    "absorbent_g": tot["absorbent"],
                }
            )
            table = cost_table(usage, mix.prices)
            cost_weekly += np.bincount(week, weights=table["total"].to_numpy(), minlength=weeks)
            unpriced |= {u for s in table["unpriced"] for u in s.split(";") if u}
        flag_rows.append(
            (
                ct.name,
                n,
                {
                    "cut": int((dur < ct.template.fixed_duration).sum()),
                    "hypoxic": int((tot["minimum_inspired_oxygen"] < HYPOXIC_FRACTION).sum()),
                    "low_o2": int((tot["minimum_inspired_oxygen"] < FIO2_ADVISORY).sum()),
                    "deficit": int((tot["volume_deficit"] > 1e-6).sum()),
                    "not_held": int((tot["final_mac_ratio"] < 1.0 - TARGET_BAND).sum()),
                },
            )
        )
        cases.append(
            {
                "name": ct.name,
                "agent": ct.agent,
                "mean_per_week": ct.mean_per_week,
                "count": "fixed" if ct.fixed else "poisson",
                "simulated": n,
                "mean_duration": Q_(float(dur.mean()) if n else 0.0, "min"),
            }
        )
    if progress is not None:
        progress(1.0)
    elapsed = time.perf_counter() - t0
    for a in agents:
        size = bottle_ml(mix.orders, a)
        weekly[f"{a}_bottles"] = weekly[a] / size
        units[f"{a}_bottles"] = ""
    items = {k: {s: Q_(v, units[k]) for s, v in summary_statistics(weekly[k]).items()} for k in units}
    cost = None
    if cost_weekly is not None and mix.prices is not None:
        cost = {"currency": mix.prices.currency, **summary_statistics(cost_weekly), "unpriced": sorted(unpriced)}
        weekly["cost"] = cost_weekly
    warns = list(mix.warnings) + _warnings(weeks, flag_rows, unpriced)
    orders = order_list(mix, weekly, units, warns)
    solver = {
        "cases": total_cases,
        "seconds": round(elapsed, 3),
        "evaluations_per_case": evaluations / total_cases if total_cases else 0.0,
        "patient_spread": patient_spread,
    }
    return ForecastResult(
        mix.title, weeks, seed, mix.cover, items, weekly, units, orders, cost, cases, mix.co2e_basis, warns, solver
    )


def _warnings(weeks: int, flag_rows: list, unpriced: set[str]) -> list[tuple[str, str]]:
    out = []
    if weeks < FEW_WEEKS:
        out.append(
            (
                "FEW_WEEKS",
                f"{weeks} simulated weeks: the P99 (and less so the P95) is rough; simulate at "
                f"least {FEW_WEEKS} weeks for a stable bad-week figure",
            )
        )
    texts = {
        "cut": (
            "CASES_CUT_SHORT",
            "ended part-way through the template's fixed phases (shorter than them, e.g. during the wash-in)",
        ),
        "hypoxic": (
            "HYPOXIC_INSPIRED_MIXTURE",
            "had inspired O2 below 21 %: a hypoxic mixture; raise the O2 "
            "flow (checked at the integrator's step ends, so brief dips may be missed)",
        ),
        "low_o2": (
            "INSPIRED_OXYGEN_LOW",
            f"had inspired O2 below the {100 * FIO2_ADVISORY:.0f} % usually kept at low flow (checked at step ends)",
        ),
        "deficit": (
            "VOLUME_DEFICIT",
            "had fresh gas short of uptake, leak and unreturned sample gas (the "
            "bag empties); the make-up gas is counted in the totals",
        ),
        "not_held": (
            "TARGET_NOT_HELD",
            "ended below the end-tidal hold target (the vaporizer maximum or the flow limits it)",
        ),
    }
    for name, n, flags in flag_rows:
        for key, (code, text) in texts.items():
            if flags[key] and not (key == "low_o2" and flags["hypoxic"]):
                out.append((code, f"{name}: {flags[key]} of {n} cases ({100 * flags[key] / n:.1f} %) {text}"))
    if unpriced:
        out.append(("UNPRICED_ITEMS", "used but not priced, so not in the cost: " + ", ".join(sorted(unpriced))))
    return out


def order_list(
    mix: CaseMix, weekly: dict[str, np.ndarray], units: dict[str, str], warns: list[tuple[str, str]]
) -> list[dict[str, Any]]:
    """Whole cylinders, bottles and packs that cover the ``mix.cover`` percentile week."""
    q = 100.0 * mix.cover
    out = []
    mw_n2o = gas("nitrous_oxide").molar_mass.to("g/mol").magnitude
    for g in ("oxygen", "air", "nitrous_oxide"):
        size = getattr(mix.orders, f"{g}_cylinder")
        need = float(np.percentile(weekly[g], q))
        if size is None:
            continue
        usable = cylinder_usable(size, g, f"orders.{g}_cylinder")
        per = (
            usable.magnitude
            if g != "nitrous_oxide"
            else usable.magnitude / reference_molar_volume().to("L/mol").magnitude * mw_n2o / 1000.0
        )
        out.append(_order(g, "cylinder", need, units[g], per, q))
    for a in [k for k in units if units[k] == "mL"]:
        out.append(_order(a, "bottle", float(np.percentile(weekly[a], q)), "mL", bottle_ml(mix.orders, a), q))
    if mix.orders.absorbent_pack is not None:
        pack = absorbent_pack_kg(mix.orders)
        out.append(_order("absorbent", "pack", float(np.percentile(weekly["absorbent"], q)), "kg", pack, q))
    for o in out:
        if o["need"].magnitude > 0 and o["per_unit"].magnitude <= 0:
            warns.append(("ORDER_SIZE_EMPTY", f"{o['item']}: a {o['unit']} of that size holds nothing usable"))
    return out


def _order(item: str, unit: str, need: float, units: str, per_unit: float, q: float) -> dict[str, Any]:
    count = math.ceil(need / per_unit - 1e-9) if per_unit > 0 and need > 0 else 0
    return {
        "item": item,
        "unit": unit,
        "covers": f"P{q:g}",
        "need": Q_(need, units),
        "per_unit": Q_(per_unit, units),
        "count": int(count),
    }
