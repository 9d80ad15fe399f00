"""A cylinder described by a file's fields (an inventory entry or an orders size) turned into contents.

One check of the required fields for the inventory (:mod:`estimator.inputs.supply_file`) and the case
mix orders (:mod:`estimator.inputs.casemix_orders`); the contents themselves come from
:mod:`estimator.physics.cylinders`.
"""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from ..physics.cylinders import CylinderContents, compressed_cylinder, nitrous_oxide_cylinder

#: The fields a cylinder entry must give, by how its contents are counted.
REQUIRED_FIELDS = {
    "nitrous_oxide": (("gross_weight", "tare_weight"), "a mass such as '8.5 kg' (nitrous oxide is counted by weight)"),
    "compressed": (("water_capacity", "pressure"), "a value: required for a compressed-gas cylinder"),
}


def cylinder_from_fields(entry: Any, gas: str, where: str, **options: Any) -> CylinderContents:
    """Contents of a cylinder described by a file's fields: an inventory entry or an orders size.

    Nitrous oxide is counted by weight (``gross_weight``, ``tare_weight``, ``reserve_weight``),
    oxygen and air by pressure (``water_capacity``, ``pressure``, ``reserve_pressure``); a missing
    required field is an InputError naming it. ``options`` go to :func:`~estimator.physics.cylinders.nitrous_oxide_cylinder` or
    :func:`~estimator.physics.cylinders.compressed_cylinder` (``count``, ``ambient_pressure``...).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> size = SimpleNamespace(water_capacity="10 L", pressure=None, temperature="15 degC", reserve_pressure=None)
    >>> cylinder_from_fields(size, "oxygen", "orders.oxygen_cylinder")
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: orders.oxygen_cylinder.pressure: got '(missing)'; expected a value: required for a compressed-gas cylinder
    """
    keys, expected = REQUIRED_FIELDS["nitrous_oxide" if gas == "nitrous_oxide" else "compressed"]
    for key in keys:
        if getattr(entry, key) is None:
            raise InputError(f"{where}.{key}", "(missing)", expected)
    if gas == "nitrous_oxide":
        return nitrous_oxide_cylinder(
            entry.gross_weight,
            entry.tare_weight,
            entry.temperature,
            reserve_weight=entry.reserve_weight,
            field_prefix=where,
            **options,
        )
    return compressed_cylinder(
        gas,
        entry.water_capacity,
        entry.pressure,
        entry.temperature,
        entry.reserve_pressure,
        field_prefix=where,
        **options,
    )
