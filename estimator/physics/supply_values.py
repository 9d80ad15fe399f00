"""Reader of the supply data file (``estimator/data/supply.toml``), every value checked for a source.

The file holds the values of supply planning (ventilator drive gas, concentrator purity, absorbent
capacity...), each with a ``source`` key of its ``[sources]`` table and a confidence code.

Examples
--------
>>> supply_data()["ventilator"]["drive_multiplier"]
2.0
"""

from __future__ import annotations

import tomllib
from functools import cache
from importlib import resources
from typing import Any

from ..properties import CONFIDENCE_CODES, DataError


@cache
def supply_data() -> dict[str, dict[str, Any]]:
    """Values of ``estimator/data/supply.toml`` (section -> key -> value), each checked for a source.

    Returns
    -------
    dict of str -> dict of str -> value
        Section -> key -> value, in the unit the file names beside each key.

    Raises
    ------
    DataError
        On a value without a known source or a valid confidence code.

    Examples
    --------
    >>> supply_data()["ventilator"]["drive_multiplier"]
    2.0
    """
    text = resources.files("estimator").joinpath("data/supply.toml").read_text(encoding="utf-8")
    raw = tomllib.loads(text)
    sources = raw.pop("sources")
    out: dict[str, dict[str, Any]] = {}
    for section, values in raw.items():
        out[section] = {}
        for key, rec in values.items():
            if (
                not isinstance(rec, dict)
                or rec.get("source") not in sources
                or rec.get("confidence") not in CONFIDENCE_CODES
                or "value" not in rec
            ):
                raise DataError(f"supply.toml [{section}].{key}: needs value, a known source and a confidence code")
            out[section][key] = rec["value"]
    return out
