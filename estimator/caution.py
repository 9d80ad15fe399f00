"""The clinical caution and the provenance stamp every output of the tool carries (app, CLI, reports).

Imports nothing from the package but its version, so every layer may use it.
"""

from __future__ import annotations

import hashlib
from typing import Any

CAUTION = (
    "Planning and audit aid only: not a monitor and not a prescription. Continuous inspired-O2 and "
    "agent monitoring is mandatory at low flow. Follow the agent's local labelling, local codes and "
    "licensed clinical practice."
)


def stamp(document: dict[str, Any], made_by: str, inputs: dict[str, bytes | None] | None = None) -> dict[str, Any]:
    """A JSON document with the caution and where it came from added (``caution``, ``provenance``).

    Parameters
    ----------
    document : dict
        The result as JSON types (keys ``caution`` and ``provenance`` are set here).
    made_by : str
        What made it, e.g. ``"lowflow case"`` or ``"lowflow app: case planner"``.
    inputs : dict, optional
        Input name (a file name or an option) -> its bytes; each is listed with its SHA-256 digest
        and size, so the document can be traced to the exact input. None values are skipped.

    Returns
    -------
    dict
        The same document (changed in place and returned).

    Examples
    --------
    >>> d = stamp({"x": 1}, "lowflow case", {"case.toml": b"[patient]"})
    >>> d["provenance"]["program"], d["provenance"]["inputs"][0]["name"], d["caution"][:8]
    ('lowflow-estimator', 'case.toml', 'Planning')
    """
    from . import __version__

    listed = [
        {"name": name, "sha256": hashlib.sha256(data).hexdigest(), "bytes": len(data)}
        for name, data in (inputs or {}).items()
        if data is not None
    ]
    document["caution"] = CAUTION
    document["provenance"] = {
        "program": "lowflow-estimator",
        "version": __version__,
        "made_by": made_by,
        "inputs": listed,
    }
    return document
