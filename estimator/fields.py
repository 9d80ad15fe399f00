"""One factory for the quantity fields of every TOML contract.

Dimension, unit, range and meaning are metadata a form can read, checked once where the file is
parsed.

``Annotated[Quantity, quantity("flow", 0, 15, "L/min", description=...)]`` is a pydantic field type:
it parses ``"2 L/min"`` (or a bare number in ``bare_unit``), refuses a wrong dimension or a value
outside the range, and carries the :class:`QuantitySpec` that :func:`quantity_spec` reads back from
the model, so an app can build a number input with its unit, limits and help text from the same
source. A field made with ``keep_text=True`` is checked and kept as given (:data:`AsGiven`). The
type stays a plain ``Annotated`` type, so type checkers read the field's type.

Each range is chosen where the field is declared, with its reason beside it. :data:`EndTidalTarget` is
the one quantity field of two dimensions (a MAC multiple or an agent fraction).

Examples
--------
>>> from typing import Annotated
>>> from pydantic import BaseModel, ConfigDict
>>> class Tank(BaseModel):
...     model_config = ConfigDict(arbitrary_types_allowed=True)
...     flow: Annotated[Quantity, quantity("flow", 0, 15, "L/min", description="oxygen flow")]
>>> Tank(flow="2 L/min").flow.to("mL/min").magnitude
2000.0
>>> s = quantity_spec(Tank, "flow")
>>> s.unit, s.low, s.high, s.description
('L/min', 0.0, 15.0, 'oxygen flow')
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any

import pint
from pydantic import BaseModel, BeforeValidator, GetCoreSchemaHandler, GetJsonSchemaHandler, WithJsonSchema
from pydantic_core import CoreSchema, core_schema

from .errors import InputError
from .units import DIMENSIONS, parse_pressure, parse_quantity, range_text


@dataclass(frozen=True)
class QuantitySpec:
    """What a quantity field accepts.

    Attributes
    ----------
    dimension : str
        A key of :data:`estimator.units.DIMENSIONS` (``"flow"``, ``"fraction"``...).
    low, high : float
        The accepted range in ``unit`` (inclusive; ``low`` exclusive if ``low_open``).
    unit : str
        Unit of the range, and the natural unit of a form widget.
    description : str
        One line of help text.
    low_open : bool
        ``low`` itself is refused.
    bare_unit : str or None
        Unit of a bare number; ``None``: a bare number is refused (a fraction reads it as 0 to 1).
    keep_text : bool
        Check the value but keep it as given (a pressure keeps its gauge or absolute marker).
    """

    dimension: str
    low: float
    high: float
    unit: str
    description: str = ""
    low_open: bool = False
    bare_unit: str | None = None
    keep_text: bool = False

    @property
    def example(self) -> str:
        """An example of an accepted value, for messages."""
        return DIMENSIONS[self.dimension][1]

    def parse(self, value: Any, field: str = "") -> pint.Quantity:
        """``value`` as a Quantity within the range, or :class:`~estimator.errors.InputError` naming ``field``."""
        if self.dimension == "pressure" and self.keep_text and isinstance(value, str):
            q = parse_pressure(value, field).quantity
        else:
            q = parse_quantity(value, field, self.dimension, self.bare_unit)
        mag = q.to(self.unit).magnitude
        if mag < self.low or mag > self.high or (self.low_open and mag <= self.low):
            shown = range_text(self.low, self.high, self.unit, value, low_open=self.low_open)
            raise InputError(field, value, f"{shown} ({self.example})")
        return q

    def json_schema(self) -> dict[str, Any]:
        """The field in JSON Schema: a text with a unit (or a bare number where one is read), with the
        dimension, unit and range as ``x-`` keys and in the description, for editors and other programs.

        >>> QuantitySpec("flow", 0.0, 15.0, "L/min", "oxygen flow").json_schema()["x-range"]
        [0.0, 15.0]
        """
        shown = range_text(self.low, self.high, self.unit, f"{self.high:g} {self.unit}", low_open=self.low_open)
        text = {"type": "string", "examples": [self.example]}
        kinds = [text] if self.bare_unit is None and self.dimension != "fraction" else [text, {"type": "number"}]
        described = f"{self.description}: " if self.description else ""
        return {
            "anyOf": kinds,
            "description": f"{described}{self.dimension}, {shown}",
            "x-dimension": self.dimension,
            "x-unit": self.unit,
            "x-range": [self.low, self.high],
            "x-low-open": self.low_open,
        }

    def __get_pydantic_core_schema__(self, source: Any, handler: GetCoreSchemaHandler) -> CoreSchema:
        """The pydantic hook: :meth:`validate`, then a Quantity (or, with ``keep_text``, the value as given)."""
        kept = core_schema.any_schema() if self.keep_text else core_schema.is_instance_schema(pint.Quantity)
        return core_schema.no_info_before_validator_function(self.validate, kept)

    def __get_pydantic_json_schema__(self, schema: CoreSchema, handler: GetJsonSchemaHandler) -> dict[str, Any]:
        """The pydantic hook: :meth:`json_schema`."""
        return self.json_schema()

    def validate(self, value: Any) -> Any:
        """The pydantic hook: the message (without field) becomes the error's expected text."""
        try:
            q = self.parse(value)
        except InputError as exc:
            raise ValueError(exc.expected) from None
        return value if self.keep_text else q


#: The type of a quantity field.
Quantity = pint.Quantity
#: The type of a ``keep_text`` quantity field: checked, then kept as given (text or a number).
AsGiven = str | float


def quantity(
    dimension: str,
    low: float,
    high: float,
    unit: str,
    description: str = "",
    *,
    low_open: bool = False,
    bare_unit: str | None = None,
    keep_text: bool = False,
) -> QuantitySpec:
    """The metadata of a quantity field: a pint Quantity of ``dimension`` within [low, high] ``unit``.

    Parameters
    ----------
    dimension : str
        Key of :data:`estimator.units.DIMENSIONS`.
    low, high : float
        Accepted range [unit].
    unit : str
        Unit of the range.
    description : str
        Help text, readable with :func:`quantity_spec`.
    low_open : bool
        Refuse ``low`` itself.
    bare_unit : str, optional
        Unit given to a bare number.
    keep_text : bool
        Return the value as given after checking it (for values parsed again downstream).

    Returns
    -------
    QuantitySpec
        Written in a model as ``Annotated[Quantity, quantity(...)]`` (``Annotated[AsGiven, ...]`` with
        ``keep_text``); pydantic validates and describes the field through the spec's hooks.
    """
    return QuantitySpec(dimension, float(low), float(high), unit, description, low_open, bare_unit, keep_text)


def parse_end_tidal_target(value: Any) -> pint.Quantity:
    """An end-tidal hold target: a MAC multiple (above 0 to 3 MAC) or a fraction (above 0 to 20 %)."""
    try:
        q = parse_quantity(value, "", "mac")
        if not 0.0 < q.magnitude <= 3.0:
            raise ValueError("above 0 to 3 MAC, or a fraction such as '2 %'")
        return q
    except InputError:
        pass
    try:
        q = parse_quantity(value, "", "fraction")
    except InputError:
        raise ValueError("a target such as '1 MAC' or '2 %'") from None
    if not 0.0 < q.to("").magnitude <= 0.2:
        raise ValueError("above 0 to 20 % (or a MAC multiple such as '1 MAC')")
    return q


#: The end-tidal target of a hold phase (a scenario's ``end_tidal_target``): a Quantity in MAC or a fraction.
EndTidalTarget = Annotated[
    pint.Quantity,
    BeforeValidator(parse_end_tidal_target),
    WithJsonSchema(
        {
            "type": "string",
            "examples": ["1 MAC", "2 %"],
            "description": "end-tidal agent to hold: above 0 to 3 MAC, or a fraction above 0 to 20 %",
        }
    ),
]


def quantity_spec(model: type[BaseModel], name: str) -> QuantitySpec | None:
    """The :class:`QuantitySpec` of field ``name`` of ``model`` (``None`` if not a quantity)."""
    field = model.model_fields[name]
    for item in field.metadata:
        if isinstance(item, QuantitySpec):
            return item
    return _find(field.annotation)


def _find(annotation: Any) -> QuantitySpec | None:
    for item in getattr(annotation, "__metadata__", ()):
        if isinstance(item, QuantitySpec):
            return item
    for arg in getattr(annotation, "__args__", ()):
        found = _find(arg)
        if found is not None:
            return found
    return None


def quantity_specs(model: type[BaseModel]) -> dict[str, QuantitySpec]:
    """Every quantity field of ``model`` with its spec.

    >>> from estimator.inputs.scenario import PatientInput
    >>> quantity_specs(PatientInput)["weight"].unit
    'kg'
    """
    out = {}
    for name in model.model_fields:
        spec = quantity_spec(model, name)
        if spec is not None:
            out[name] = spec
    return out
