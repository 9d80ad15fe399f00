"""Published file formats: the JSON Schema of every input file, from the same models that read it.

Editors and other programs can check a scenario, inventory, case mix, prices or policy file (as
parsed from TOML) before the tool reads it. Each quantity field carries its dimension, unit and
range (``x-dimension``, ``x-unit``, ``x-range``) as well as a description; a default that is a
quantity is written as text ("40 mmHg"). The committed copies in docs/schemas/ are checked against
these by the tests; ``lowflow schema KIND`` prints one.

Examples
--------
>>> s = json_schema("scenario")
>>> s["title"], "patient" in s["properties"]
('lowflow-estimator scenario file', True)
"""

from __future__ import annotations

from typing import Any

import pint
from pydantic import BaseModel
from pydantic.json_schema import GenerateJsonSchema

from ..accounts.prices import PricesInput
from ..errors import InputError
from .calibration_file import Calibration
from .casemix_schema import CaseMixInput
from .inventory_file import Inventory
from .policy_file import PolicyInput
from .scenario import Scenario

#: File kind -> (model of the file or of its table, name of the table the file may wrap it in).
KINDS: dict[str, tuple[type[BaseModel], str | None]] = {
    "scenario": (Scenario, None),
    "inventory": (Inventory, None),
    "case-mix": (CaseMixInput, None),
    "prices": (PricesInput, "prices"),
    "policy": (PolicyInput, "policy"),
    "calibration": (Calibration, None),
}
DRAFT = "https://json-schema.org/draft/2020-12/schema"


class _TextDefaults(GenerateJsonSchema):
    """Quantity defaults written as text, as a user would type them."""

    def encode_default(self, dft: Any) -> Any:
        if isinstance(dft, pint.Quantity):
            return f"{dft.magnitude:g} {dft.units:~}".strip()
        if isinstance(dft, BaseModel):
            return {k: self.encode_default(v) for k, v in dft.model_dump().items() if v is not None}
        return super().encode_default(dft)


def json_schema(kind: str) -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of one input file kind (a key of :data:`KINDS`)."""
    if kind not in KINDS:
        raise InputError("schema kind", kind, "one of " + ", ".join(KINDS))
    model, table = KINDS[kind]
    body = model.model_json_schema(schema_generator=_TextDefaults)
    title = f"lowflow-estimator {kind} file"
    if table is None:
        return {"$schema": DRAFT, "title": title, **{k: v for k, v in body.items() if k != "title"}}
    defs = body.pop("$defs", {})
    inner = {k: v for k, v in body.items() if k != "title"}
    return {
        "$schema": DRAFT,
        "title": title,
        "description": f"a [{table}] table, or its keys at the top level",
        "anyOf": [
            {"type": "object", "properties": {table: {"$ref": f"#/$defs/{table}"}}, "required": [table]},
            {"$ref": f"#/$defs/{table}"},
        ],
        "$defs": {**defs, table: inner},
    }
