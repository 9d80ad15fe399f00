"""Allocation of a site's weekly demand to its sources by priority, and run-out times of the stocks.

Each gas demand is met by the sources in the priority order (pipelines, concentrators, cylinders by
default); what falls to the cylinders is each gas pool's draw. The week repeats, so the time a
cumulative draw reaches an amount follows exactly from one week's cumulative draw.

Examples
--------
>>> import numpy as np
>>> pool = Pool("oxygen", "L", draw=np.full(WEEK, 1.0))
>>> time_of(pool, 1440.0), float(cum_at(pool, np.array([2 * WEEK]))[0]) == 2 * WEEK
(1440.0, True)
"""

from __future__ import annotations

import numpy as np

from ..accounts.accounting import absorbent_mass
from ..errors import InputError
from ..inputs.supply_file import ARGON_PER_OXYGEN, GASES, SOURCE_KINDS, WEEK, Inventory, Pool, gas_name
from ..physics.cylinders import supply_data
from ..units import Q_
from .supply_report import SupplyItem


def cum_at(pool: Pool, t: np.ndarray) -> np.ndarray:
    """Cumulative draw at times ``t`` [min] from the start (the week repeats)."""
    cum = np.concatenate([[0.0], np.cumsum(pool.draw)])
    return np.floor(t / WEEK) * cum[-1] + np.interp(np.mod(t, WEEK), np.arange(WEEK + 1), cum)


def time_of(pool: Pool, amount: float) -> float:
    """Minutes until the cumulative draw reaches ``amount`` (inf if nothing is drawn)."""
    cum = np.concatenate([[0.0], np.cumsum(pool.draw)])
    total = cum[-1]
    if total <= 0:
        return float("inf")
    if amount <= 0:
        return 0.0
    n = np.ceil(amount / total) - 1
    rest = amount - n * total
    i = int(np.clip(np.searchsorted(cum, rest, side="left"), 1, WEEK))
    step = cum[i] - cum[i - 1]
    return float(n * WEEK + (i - 1) + ((rest - cum[i - 1]) / step if step > 0 else 0.0))


def failure(pool: Pool, exhausted: float) -> float:
    """First minute at or after ``exhausted`` whose demand the later sources cannot meet."""
    if not np.isfinite(exhausted):
        return float("inf")
    idx = np.flatnonzero(pool.unmet_after > 1e-9 * max(pool.unmet_after.max(), 1e-300))
    if idx.size == 0:
        return float("inf")
    base = exhausted - np.mod(exhausted, WEEK)
    m = int(np.floor(np.mod(exhausted, WEEK)))
    later = idx[idx >= m]
    return float(max(exhausted, base + later[0])) if later.size else float(base + WEEK + idx[0])


def allocate(
    inv: Inventory,
    need: dict[str, np.ndarray],
    pools: dict[str, Pool],
    concs: list,
    ignore: set[str],
    warns: list[tuple[str, str]],
) -> list[SupplyItem]:
    """Meet each gas demand by priority; set each pool's draw; describe the renewable sources."""
    priority = [p.strip().lower() for p in inv.supply.priority]
    if sorted(priority) != sorted(SOURCE_KINDS):
        raise InputError("supply.priority", inv.supply.priority, "an ordering of " + ", ".join(SOURCE_KINDS))
    renewables: list[SupplyItem] = []
    pipes = []
    for k, p in enumerate(inv.pipelines):
        pipes.append((p, gas_name(p.gas, f"pipelines[{k}].gas")))
    limit = supply_data()["concentrator"]["purity_minimum"]
    for g in GASES:
        demand = need.get(g, np.zeros(WEEK))
        res, after, seen = demand.copy(), np.zeros(WEEK), False
        for kind in priority:
            if kind == "cylinders":
                draw, seen = res.copy(), True
                continue
            if kind == "pipelines":
                caps = [
                    (p.name or f"{gg} pipeline", np.full(WEEK, np.inf if p.available else 0.0), None, None)
                    for p, gg in pipes
                    if gg == g
                ]
            else:
                caps = [(n, cap, c, curve) for n, c, cap, curve in concs] if g == "oxygen" else []
            for name, cap, c, curve in caps:
                given = np.minimum(res if not seen else draw, cap)
                if seen:
                    after = after + cap
                else:
                    res = res - given
                if c is None:
                    continue
                per_unit = given / max(c.count, 1)
                purity = np.interp(per_unit, curve[0], curve[1])
                on = given > 0
                o2 = float((given * purity).sum()) / 7
                details = {
                    "standby_until_cylinders_run_out": seen,
                    "product_per_day": Q_(float(given.sum()) / 7, "L/day"),
                    "oxygen_per_day": Q_(o2, "L/day"),
                    "argon_per_day": Q_(o2 * ARGON_PER_OXYGEN, "L/day"),
                    "lowest_purity": float(purity[on].min()) if on.any() else None,
                }
                if on.any() and purity[on].min() < limit:
                    warns.append(
                        (
                            "CONCENTRATOR_PURITY_LOW",
                            f"{name}: product falls to "
                            f"{100 * purity[on].min():.1f} % O2 at its operating flow, below "
                            f"{100 * limit:.0f} % (Oxygen 93 per cent)",
                        )
                    )
                renewables.append(
                    SupplyItem(
                        name,
                        "concentrator",
                        "oxygen",
                        Q_(float(cap.sum()) / 7, "L/day"),
                        None,
                        "renewable",
                        None,
                        details,
                    )
                )
        for p, gg in pipes:
            if gg == g:
                renewables.append(
                    SupplyItem(
                        p.name or f"{g} pipeline",
                        "pipeline",
                        g,
                        None,
                        None,
                        "unlimited" if p.available else "unavailable",
                        None,
                        {},
                    )
                )
        if g in ignore:
            continue
        if g in pools or demand.sum() > 0:
            pool = pools.setdefault(g, Pool(g, "L"))
            pool.draw, pool.unmet_after = draw, np.maximum(draw - after, 0.0)
    for key, pool in pools.items():
        if key in GASES:
            continue
        if key == "absorbent":
            cap = pool.items[0][3]["co2_per_100g"].to("L").magnitude
            pool.draw = absorbent_mass(need.get("co2", np.zeros(WEEK)), cap)
        else:
            pool.draw = need.get(key, np.zeros(WEEK)).copy()
        pool.unmet_after = pool.draw
    for key in need:
        if key not in pools and key not in ignore and key != "co2" and need[key].sum() > 0:
            pools[key] = Pool(key, "mL", draw=need[key], unmet_after=need[key])
    for key in sorted(ignore):
        warns.append(("NOT_TRACKED", f"{key}: left out of the analysis (supply.ignore)"))
    if "absorbent" not in pools and "absorbent" not in ignore and need.get("co2", np.zeros(1)).sum() > 0:
        warns.append(
            (
                "ABSORBENT_NOT_TRACKED",
                "the cases load CO2 absorbent but the inventory lists none "
                "(add [absorbent] stock, or 'absorbent' to supply.ignore)",
            )
        )
    return renewables


__all__ = ["allocate", "cum_at", "failure", "time_of"]
