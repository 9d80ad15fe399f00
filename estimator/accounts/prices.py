"""The price contract: prices a user pays, read and checked once into a typed :class:`Prices`.

Prices are what the user pays; the currency is a free-text label ("EUR", "site units") and is never
converted. Agent is priced per bottle (with its volume) or per mL of liquid, either one default for
every agent or per agent; gases per m3 of free gas at 15 degC and 101.325 kPa, or per cylinder with
its contents; absorbent per kg. The cost rule that uses them is :mod:`estimator.accounts.costs`.

Examples
--------
>>> p = parse_prices({"currency": "EUR", "agent_bottle": 100, "bottle_volume": "250 mL"})
>>> p.currency, p.agent_price("sevoflurane")
('EUR', 0.4)
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Annotated, Any

from pydantic import BaseModel, BeforeValidator, ConfigDict, ValidationError

from ..contracts import input_error_from_validation, read_toml, toml_from_text
from ..errors import InputError
from ..fields import AsGiven, quantity
from ..properties import AGENTS
from ..units import Q_, check_range, parse_quantity

GASES_PRICED = ("oxygen", "air", "nitrous_oxide")
COST_KEYS = ("agent", "gases", "absorbent", "total")
UNSPECIFIED_CURRENCY = "unspecified currency"


#: Largest price of one unit (bottle, mL, m3, cylinder, kg). A 250 mL bottle costs about 10^7 in
#: the currencies with the most digits per US dollar, so 10^9 leaves room for any currency label;
#: a larger number is a typing slip (practical limit, no source).
MAX_PRICE = 1e9
_PRICE_TEXT = f"a price of 0 to {MAX_PRICE:.0e} (a plain number in the currency)"


def _price(value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ValueError(_PRICE_TEXT)
    if not (math.isfinite(value) and 0 <= value <= MAX_PRICE):
        raise ValueError(_PRICE_TEXT)
    return float(value)


Price = Annotated[float, BeforeValidator(_price)]


class AgentPriceInput(BaseModel):
    """Price of one agent: per bottle with its volume, or per mL."""

    model_config = ConfigDict(extra="forbid", arbitrary_types_allowed=True)
    agent_bottle: Price | None = None
    # Agent bottles hold 1 mL to 5 L (250 mL is usual; practical limits, no source).
    bottle_volume: Annotated[AsGiven, quantity("volume", 1.0, 5000.0, "mL", bare_unit="mL", keep_text=True)] | None = (
        None
    )
    agent_per_ml: Price | None = None


class CylinderPriceInput(BaseModel):
    """Price of one cylinder of a gas and its free-gas contents (e.g. ``"680 L"``)."""

    model_config = ConfigDict(extra="forbid", arbitrary_types_allowed=True)
    price: Price
    # Free gas of one cylinder: 1 L to 100 000 L (the largest bulk cylinders hold about 10 000 L).
    contents: Annotated[AsGiven, quantity("volume", 1.0, 100000.0, "L", bare_unit="L", keep_text=True)]


class PricesInput(AgentPriceInput):
    """The ``[prices]`` table of a scenario or prices file (``extra = "forbid"``).

    Keys as in the scenario file: ``currency``, ``agent_bottle``, ``bottle_volume``,
    ``agent_per_ml``, ``oxygen_per_m3``, ``air_per_m3``, ``nitrous_oxide_per_m3``,
    ``absorbent_per_kg``; plus ``agents.<name>`` sub-tables (per-agent prices), ``cylinders.<gas>``
    sub-tables (``price``, ``contents``) and a free-text ``note``.
    """

    currency: str = UNSPECIFIED_CURRENCY
    oxygen_per_m3: Price | None = None
    air_per_m3: Price | None = None
    nitrous_oxide_per_m3: Price | None = None
    absorbent_per_kg: Price | None = None
    agents: dict[str, AgentPriceInput] = {}
    cylinders: dict[str, CylinderPriceInput] = {}
    note: str = ""


@dataclass(frozen=True)
class Prices:
    """Validated prices in plain floats, one currency label.

    Attributes
    ----------
    currency : str
    agent_per_ml : float or None
        Default price per mL of liquid for any agent without its own.
    agent_per_ml_by_agent : dict[str, float]
    gas_per_litre : dict[str, float]
        Per litre of free gas at 15 degC, 101.325 kPa: ``oxygen``, ``air``, ``nitrous_oxide``.
    absorbent_per_g : float or None
    note : str
    """

    currency: str = UNSPECIFIED_CURRENCY
    agent_per_ml: float | None = None
    agent_per_ml_by_agent: dict[str, float] = field(default_factory=dict)
    gas_per_litre: dict[str, float] = field(default_factory=dict)
    absorbent_per_g: float | None = None
    note: str = ""

    def agent_price(self, agent_name: str | None) -> float | None:
        """Price per mL of an agent, falling back to the default."""
        if agent_name and agent_name in self.agent_per_ml_by_agent:
            return self.agent_per_ml_by_agent[agent_name]
        return self.agent_per_ml


def _amount(value: float | None, field_name: str) -> float | None:
    if value is None:
        return None
    if not math.isfinite(value) or value < 0:
        raise InputError(field_name, value, "a price of 0 or more (a plain number in the currency)")
    return float(value)


def _per_ml(p: AgentPriceInput, where: str) -> float | None:
    bottle = _amount(p.agent_bottle, f"{where}.agent_bottle")
    per_ml = _amount(p.agent_per_ml, f"{where}.agent_per_ml")
    if bottle is not None and per_ml is not None:
        raise InputError(
            f"{where}.agent_per_ml", per_ml, "either agent_bottle with bottle_volume or agent_per_ml, not both"
        )
    if bottle is not None:
        if p.bottle_volume is None:
            raise InputError(
                f"{where}.bottle_volume", "(missing)", "a bottle volume such as '250 mL' beside agent_bottle"
            )
        vol = parse_quantity(p.bottle_volume, f"{where}.bottle_volume", "volume", default_unit="mL")
        check_range(
            vol, f"{where}.bottle_volume", Q_(1, "mL"), Q_(5000, "mL"), value=p.bottle_volume, low_inclusive=True
        )
        return bottle / vol.to("mL").magnitude
    if p.bottle_volume is not None:
        raise InputError(f"{where}.agent_bottle", "(missing)", "a bottle price beside bottle_volume")
    return per_ml


def parse_prices(data: Mapping[str, Any], where: str = "prices") -> Prices:
    """Validate a ``[prices]`` mapping into :class:`Prices`.

    Parameters
    ----------
    data : mapping
        ``currency`` (a label, never converted), agent prices per mL [currency/mL] or per bottle with
        its volume [mL], gas prices per m3 [currency/m^3] or per cylinder with its contents [L],
        ``absorbent_per_kg`` [currency/kg].
    where : str
        Name of the table, for error messages.

    Returns
    -------
    Prices
        Plain floats per mL of agent, per litre of free gas and per gram of absorbent.

    Raises
    ------
    InputError
        On an unknown key, a negative or non-numeric price, a bottle price without volume, an
        unknown agent or gas, or a gas priced both per m3 and per cylinder.

    Examples
    --------
    >>> parse_prices({"currency": "EUR", "agent_per_ml": 0.3}).agent_price("isoflurane")
    0.3
    """
    try:
        raw = PricesInput.model_validate(dict(data))
    except ValidationError as exc:
        raise input_error_from_validation(exc, where, PricesInput) from None
    currency = raw.currency.strip()
    if not currency or len(currency) > 40 or any(c in currency for c in "\r\n\t"):
        raise InputError(f"{where}.currency", raw.currency, "a currency label of 1 to 40 characters")
    by_agent = {}
    for name, p in raw.agents.items():
        if name not in AGENTS:
            raise InputError(f"{where}.agents", name, "one of " + ", ".join(sorted(AGENTS)))
        v = _per_ml(p, f"{where}.agents.{name}")
        if v is not None:
            by_agent[name] = v
    per_l = {}
    for g in GASES_PRICED:
        v = _amount(getattr(raw, f"{g}_per_m3"), f"{where}.{g}_per_m3")
        if v is not None:
            per_l[g] = v / 1000.0
    for g, cyl in raw.cylinders.items():
        if g not in GASES_PRICED:
            raise InputError(f"{where}.cylinders", g, "one of " + ", ".join(GASES_PRICED))
        if g in per_l:
            raise InputError(f"{where}.cylinders.{g}", cyl.price, f"a price per m3 or per cylinder for {g}, not both")
        price = _amount(cyl.price, f"{where}.cylinders.{g}.price")
        contents = parse_quantity(cyl.contents, f"{where}.cylinders.{g}.contents", "volume", default_unit="L")
        check_range(contents, f"{where}.cylinders.{g}.contents", Q_(1, "L"), Q_(100000, "L"), value=cyl.contents)
        per_l[g] = price / contents.to("L").magnitude
    absorbent = _amount(raw.absorbent_per_kg, f"{where}.absorbent_per_kg")
    return Prices(
        currency=currency,
        agent_per_ml=_per_ml(raw, where),
        agent_per_ml_by_agent=by_agent,
        gas_per_litre=per_l,
        absorbent_per_g=None if absorbent is None else absorbent / 1000.0,
        note=raw.note,
    )


def prices_from_text(text: str) -> Prices:
    """Parse prices from TOML text: its ``[prices]`` table, or the top level if none.

    Parameters
    ----------
    text : str
        TOML text (never taken for a path).

    Returns
    -------
    Prices

    Examples
    --------
    >>> prices_from_text('[prices]\\ncurrency = "EUR"\\nair_per_m3 = 2.0').gas_per_litre["air"]
    0.002
    """
    data = toml_from_text(text, "prices")
    return parse_prices(data.get("prices", data))


def load_prices(path: str | os.PathLike[str]) -> Prices:
    """Read prices from a TOML file (always a path, never text): its ``[prices]`` table, or the top
    level if none.

    Parameters
    ----------
    path : str or os.PathLike
        An existing TOML file.

    Returns
    -------
    Prices

    Examples
    --------
    >>> import pathlib, tempfile
    >>> f = pathlib.Path(tempfile.mkdtemp(), "prices.toml")
    >>> _ = f.write_text('[prices]\\ncurrency = "EUR"\\noxygen_per_m3 = 5.0\\n', encoding="utf-8")
    >>> load_prices(f).gas_per_litre["oxygen"]
    0.005
    """
    data = read_toml(path, "prices", "an existing prices TOML file")
    return parse_prices(data.get("prices", data))


#: Invented demo prices (not real prices of any supplier or site), in an invented currency label.
DEMO_PRICES = Prices(
    currency="demo units",
    agent_per_ml=None,
    agent_per_ml_by_agent={"sevoflurane": 0.40, "isoflurane": 0.12, "desflurane": 0.55, "halothane": 0.10},
    gas_per_litre={"oxygen": 0.004, "air": 0.002, "nitrous_oxide": 0.02},
    absorbent_per_g=0.006,
    note="invented demo prices for illustration only",
)
