"""The clinical caution and the provenance stamp every output of the tool carries (app, CLI, reports).

Imports nothing from the package but its version, so every layer may use it.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from typing import Any

CAUTION = (
    "Planning and audit aid only: not a monitor and not a prescription. Continuous inspired-O2 and "
    "agent monitoring is mandatory at low flow. Follow the agent's local labelling, local codes and "
    "licensed clinical practice."
)


def stamp(document: dict[str, Any], made_by: str, inputs: Mapping[str, bytes | None] | None = None) -> dict[str, Any]:
    """A JSON document with the caution and where it came from added (``caution``, ``generator``,
    ``provenance``).

    Parameters
    ----------
    document : dict
        The result as JSON types (keys ``caution``, ``generator`` (``name``, ``version``) and
        ``provenance`` are set here).
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
    >>> d["generator"]["name"] == d["provenance"]["program"]
    True
    """
    from . import __version__

    document["caution"] = CAUTION
    document["generator"] = {"name": PROGRAM, "version": __version__}
    document["provenance"] = provenance(made_by, inputs)
    return document


#: The program's name in every provenance record (JSON, CSV comment lines, workbook "about" sheets).
PROGRAM = "lowflow-estimator"


def provenance(made_by: str, inputs: Mapping[str, bytes | None] | None = None) -> dict[str, Any]:
    """Who made an output: the program, its version, the verb or page, each input's digest and size.

    Examples
    --------
    >>> sorted(provenance("lowflow case"))
    ['inputs', 'made_by', 'program', 'version']
    """
    from . import __version__

    listed = [
        {"name": name, "sha256": hashlib.sha256(data).hexdigest(), "bytes": len(data)}
        for name, data in (inputs or {}).items()
        if data is not None
    ]
    return {"program": PROGRAM, "version": __version__, "made_by": made_by, "inputs": listed}


def about_rows(made_by: str, inputs: Mapping[str, bytes | None] | None = None) -> list[tuple[str, str]]:
    """The caution and the provenance as (item, value) rows: a workbook's "about" sheet, or with
    :func:`comment_lines` the leading ``#`` lines of a CSV export.

    Examples
    --------
    >>> [item for item, _ in about_rows("lowflow case", {"case.toml": b"x"})]
    ['caution', 'made by', 'input']
    """
    made = provenance(made_by, inputs)
    rows = [("caution", CAUTION), ("made by", f"{PROGRAM} {made['version']} ({made_by})")]
    rows += [("input", f"{i['name']} (sha256 {i['sha256']}, {i['bytes']} bytes)") for i in made["inputs"]]
    return rows


def comment_lines(made_by: str, inputs: Mapping[str, bytes | None] | None = None) -> str:
    """The leading lines of a CSV export, each starting with ``#`` and a space: the caution, the program, its
    version and what made the file, each input's digest; then the table's header line follows.

    Read such a file with :func:`estimator.planning.exports.read_csv_export` (or ``pandas.read_csv``
    with ``comment="#"`` when no text cell holds a ``#``).

    Examples
    --------
    >>> print(comment_lines("lowflow case").splitlines()[1][:30])
    # made by: lowflow-estimator 0
    """
    one_line = {ord("\r"): " ", ord("\n"): " "}  # a file name never starts a line of its own
    return "".join(f"# {item}: {value.translate(one_line)}\n" for item, value in about_rows(made_by, inputs))
