"""Pack sizes of a case mix's ``[orders]``: cylinders, agent bottles and absorbent packs.

Every size is checked when the case mix is loaded (:func:`check_orders`), so a wrong size is
named before the forecast runs, not after. Cylinder contents come from
:mod:`estimator.physics.cylinders` (real-gas for compressed gases, by weight for nitrous oxide), as free
gas at 15 degC and 101.325 kPa. Ranges: a bottle 1-5000 mL (common practice, no source: agent
bottles hold 240-250 mL), an absorbent pack above 0 to 1000 kg, cylinder values as in
:mod:`estimator.physics.cylinders`.

Examples
--------
>>> from estimator.inputs.casemix_schema import OrdersInput
>>> o = OrdersInput(bottle_volumes={"desflurane": "240 mL"}, absorbent_pack="5 kg")
>>> bottle_ml(o, "desflurane"), bottle_ml(o, "sevoflurane"), absorbent_pack_kg(o)
(240.0, 250.0, 5.0)
"""

from __future__ import annotations

from typing import Any

import pint

from ..errors import InputError
from ..properties import AGENTS
from ..units import parse_quantity
from .cylinder_entry import cylinder_from_fields

#: Agent bottle sizes accepted [mL].
BOTTLE_LIMITS = (1.0, 5000.0)
#: Largest absorbent pack accepted [kg].
MAX_PACK_KG = 1000.0
GASES = ("oxygen", "air", "nitrous_oxide")


def bottle_ml(orders: Any, agent: str) -> float:
    """The bottle size of an agent [mL]: ``bottle_volumes.<agent>``, else ``bottle_volume``."""
    value, where = (
        (orders.bottle_volumes[agent], f"orders.bottle_volumes.{agent}")
        if agent in orders.bottle_volumes
        else (orders.bottle_volume, "orders.bottle_volume")
    )
    q = parse_quantity(value, where, "volume", default_unit="mL").to("mL").magnitude
    if not BOTTLE_LIMITS[0] <= q <= BOTTLE_LIMITS[1]:
        raise InputError(where, value, f"{BOTTLE_LIMITS[0]:g} to {BOTTLE_LIMITS[1]:g} mL")
    return float(q)


def absorbent_pack_kg(orders: Any) -> float:
    """The absorbent pack size [kg] (``orders.absorbent_pack``)."""
    value = orders.absorbent_pack
    pack = parse_quantity(value, "orders.absorbent_pack", "mass", default_unit="kg").to("kg").magnitude
    if not 0 < pack <= MAX_PACK_KG:
        raise InputError("orders.absorbent_pack", value, f"above 0 to {MAX_PACK_KG:g} kg")
    return float(pack)


def cylinder_usable(size: Any, gas_name: str, where: str) -> pint.Quantity:
    """Usable contents of one cylinder of a size, free gas at 15 degC and 101.325 kPa [L]
    (:mod:`estimator.physics.cylinders`: real-gas for compressed gases, by weight for nitrous oxide)."""
    return cylinder_from_fields(size, gas_name, where).usable.to("L")


def check_orders(orders: Any) -> None:
    """Check every size ``[orders]`` gives (at load time); an InputError names the first bad one."""
    for g in GASES:
        size = getattr(orders, f"{g}_cylinder")
        if size is not None:
            cylinder_usable(size, g, f"orders.{g}_cylinder")
    bottle_ml(orders, "")
    for agent in orders.bottle_volumes:
        if agent not in AGENTS:
            raise InputError(f"orders.bottle_volumes.{agent}", agent, "an agent: " + ", ".join(sorted(AGENTS)))
        bottle_ml(orders, agent)
    if orders.absorbent_pack is not None:
        absorbent_pack_kg(orders)
