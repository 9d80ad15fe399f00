"""Turn results into JSON: quantities as ``{"magnitude", "units"}``, dataclasses as objects.

Examples
--------
>>> from estimator.units import Q_
>>> jsonable({"flow": Q_(0.5, "L/min"), "n": 3})
{'flow': {'magnitude': 0.5, 'units': 'liter / minute'}, 'n': 3}
"""

from __future__ import annotations

import dataclasses
import json
import math
from datetime import date, datetime
from typing import Any

import numpy as np
import pint

from .units import quantity_to_json


def jsonable(obj: Any) -> Any:
    """Recursively convert quantities, dataclasses, numpy scalars and arrays to JSON types.

    Non-finite floats become ``None`` (JSON has no NaN).
    """
    if isinstance(obj, pint.Quantity):
        out = quantity_to_json(obj)
        out["magnitude"] = jsonable(out["magnitude"])
        return out
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        if hasattr(obj, "to_json"):
            return obj.to_json()
        return {f.name: jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, np.generic):
        return jsonable(obj.item())
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, datetime | date):
        return obj.isoformat()
    return obj


def dumps(obj: Any) -> str:
    """JSON text of :func:`jsonable` (indent 2, no NaN)."""
    return json.dumps(jsonable(obj), indent=2, allow_nan=False)
