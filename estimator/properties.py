"""Sourced reference data: agents, carrier and inert gases, loaded and validated at import.

The values live in ``estimator/data/agents.toml``; each carries its source and a confidence code
(V read in the source, S secondary, M from memory, D derived, C common practice). Loading fails
loudly when a value has no source, names an unknown source, or has a unit pint cannot parse.

Examples
--------
>>> agent("sevoflurane").mac40.to("percent").magnitude
1.8
>>> round(agent("desflurane").blood_gas, 2)
0.42
>>> sorted(AGENTS)
['desflurane', 'halothane', 'isoflurane', 'sevoflurane']
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from functools import cache
from importlib import resources
from typing import Any

import pint

from .choices import CO2E_BASES
from .errors import InputError
from .units import Q_, ureg

CONFIDENCE_CODES = {
    "V": "read in the source",
    "S": "read in a secondary source quoting it",
    "M": "from memory, unverified",
    "D": "derived from the cited formula",
    "C": "common practice, no source",
    "F": "fitted to the named data set in the note (never to data used for validation)",
}

#: Tissue groups of the uptake model, in state order.
TISSUES = ("vrg", "muscle", "fat", "vpg")
TISSUE_NAMES = {"vrg": "vessel-rich group", "muscle": "muscle group", "fat": "fat group", "vpg": "vessel-poor group"}


class DataError(RuntimeError):
    """The packaged reference data are malformed (a developer error, raised at import)."""


@dataclass(frozen=True)
class Sourced:
    """One reference value with its provenance."""

    value: Any
    source: str
    confidence: str
    note: str = ""

    @property
    def citation(self) -> str:
        """Full reference text of the source."""
        return _raw()["sources"][self.source]


@dataclass(frozen=True)
class Species:
    """Properties of one agent or gas. Partition coefficients are dimensionless floats.

    Attributes
    ----------
    name : str
    kind : str
        ``"volatile"`` or ``"gas"``.
    molar_mass : pint.Quantity [g/mol]
    blood_gas : float
        Ostwald blood/gas partition coefficient at 37 degC (0 where the model does not use it).
    tissue_blood : dict[str, float]
        Tissue/blood partition coefficient of each group in :data:`TISSUES`.
    mac40 : pint.Quantity or None
        MAC at age 40 as a volume fraction at 1 atm (Mapleson 1996).
    """

    name: str
    kind: str
    molar_mass: pint.Quantity
    blood_gas: float = 0.0
    tissue_blood: dict[str, float] = field(default_factory=dict)
    mac40: pint.Quantity | None = None
    liquid_density: pint.Quantity | None = None
    vapour_pressure_20c: pint.Quantity | None = None
    vaporizer_max: pint.Quantity | None = None
    hepatic_extraction: float = 0.0
    gwp: dict[str, float] = field(default_factory=dict)
    lifetime: pint.Quantity | None = None
    formula: str = ""
    records: dict[str, Sourced] = field(default_factory=dict, repr=False)

    def source_of(self, prop: str) -> Sourced:
        """The :class:`Sourced` record behind a property name as written in the data file."""
        return self.records[prop]


#: What every volatile agent of the data file must give (the loader refuses an agent without one).
AGENT_REQUIRED = ("mac40", "liquid_density", "vapour_pressure_20c", "vaporizer_max")


@dataclass(frozen=True, kw_only=True)
class VolatileAgent(Species):
    """A volatile agent: a :class:`Species` whose MAC, liquid density, vapour pressure and highest dial
    mark are always known (:data:`AGENT_REQUIRED`)."""

    mac40: pint.Quantity
    liquid_density: pint.Quantity
    vapour_pressure_20c: pint.Quantity
    vaporizer_max: pint.Quantity


def _parse_value(name: str, prop: str, raw: Any) -> Any:
    if isinstance(raw, int | float) and not isinstance(raw, bool):
        return float(raw)
    if isinstance(raw, str):
        try:
            number, _, unit = raw.strip().partition(" ")
            return Q_(float(number), ureg.parse_units(unit.replace("%", "percent")))
        except (ValueError, pint.errors.PintError) as exc:
            raise DataError(f"agents.toml [{name}].{prop}: unparsable value {raw!r}") from exc
    raise DataError(f"agents.toml [{name}].{prop}: value must be a number or a unit string, got {raw!r}")


def validate_records(data: dict[str, Any]) -> dict[str, dict[str, Sourced]]:
    """Check every value of a data table for a known source, a confidence code and a unit.

    Parameters
    ----------
    data : dict
        The parsed TOML document (``sources``, ``agents``, ``gases``).

    Returns
    -------
    dict
        species name -> property -> :class:`Sourced`.

    Raises
    ------
    DataError
        On a value with no source, an unknown source key, a bad confidence code or a bad unit.
    """
    sources = data.get("sources", {})
    out: dict[str, dict[str, Sourced]] = {}
    for section in ("agents", "gases", "physiology"):
        for name, props in data.get(section, {}).items():
            recs: dict[str, Sourced] = {}
            for prop, raw in props.items():
                if prop in ("kind", "formula"):
                    continue
                if not isinstance(raw, dict) or "value" not in raw:
                    raise DataError(f"agents.toml [{name}].{prop}: expected {{value, source, confidence}}")
                src = raw.get("source")
                if not src:
                    raise DataError(f"agents.toml [{name}].{prop}: value has no source")
                if src not in sources:
                    raise DataError(f"agents.toml [{name}].{prop}: unknown source {src!r}")
                conf = raw.get("confidence")
                if conf not in CONFIDENCE_CODES:
                    raise DataError(
                        f"agents.toml [{name}].{prop}: confidence must be one of {sorted(CONFIDENCE_CODES)}"
                    )
                unknown = set(raw) - {"value", "source", "confidence", "note"}
                if unknown:
                    raise DataError(f"agents.toml [{name}].{prop}: unknown keys {sorted(unknown)}")
                recs[prop] = Sourced(_parse_value(name, prop, raw["value"]), src, conf, raw.get("note", ""))
            out[name] = recs
    return out


@cache
def _raw() -> dict[str, Any]:
    text = resources.files("estimator").joinpath("data/agents.toml").read_text(encoding="utf-8")
    return tomllib.loads(text)


def _fields(name: str, kind: str, recs: dict[str, Sourced], formula: str) -> dict[str, Any]:
    def val(key: str, default: Any = None) -> Any:
        return recs[key].value if key in recs else default

    gwp = {basis: recs[prop].value for basis, (prop, _) in CO2E_BASES.items() if prop in recs}
    return dict(
        name=name,
        kind=kind,
        molar_mass=val("molar_mass"),
        blood_gas=val("blood_gas", 0.0),
        tissue_blood={t: val(f"{t}_blood", 1.0) for t in TISSUES},
        mac40=val("mac40"),
        liquid_density=val("liquid_density"),
        vapour_pressure_20c=val("vapour_pressure_20c"),
        vaporizer_max=val("vaporizer_max"),
        hepatic_extraction=val("hepatic_extraction", 0.0),
        gwp=gwp,
        lifetime=val("lifetime_ar6"),
        formula=formula,
        records=recs,
    )


def _agent(name: str, recs: dict[str, Sourced], formula: str) -> VolatileAgent:
    missing = [key for key in AGENT_REQUIRED if key not in recs]
    if missing:
        raise DataError(f"agents.toml [agents.{name}]: no {', '.join(missing)}")
    return VolatileAgent(**_fields(name, "volatile", recs, formula))


def _load() -> tuple[dict[str, VolatileAgent], dict[str, Species]]:
    data = _raw()
    recs = validate_records(data)
    agents = {n: _agent(n, recs[n], p.get("formula", "")) for n, p in data["agents"].items()}
    gases = {n: Species(**_fields(n, "gas", recs[n], "")) for n in data["gases"]}
    return agents, gases


AGENTS, GASES = _load()


def physiology_value(name: str, table: str = "late_uptake") -> Any:
    """A sourced physiological constant of ``[physiology.<table>]`` in the data file (pint or float).

    >>> physiology_value("adipose_flow_high").to("L/min/kg").magnitude
    0.074
    """
    return _physiology()[table][name].value


@cache
def _physiology() -> dict[str, dict[str, Sourced]]:
    return validate_records({"sources": _raw()["sources"], "physiology": _raw()["physiology"]})


def agent(name: str, field_name: str = "agent.name") -> VolatileAgent:
    """Look up a volatile agent by name (case-insensitive).

    Raises
    ------
    InputError
        For an unknown agent, listing the known ones.
    """
    key = str(name).strip().lower()
    if key not in AGENTS:
        raise InputError(field_name, name, "one of " + ", ".join(sorted(AGENTS)))
    return AGENTS[key]


def gas(name: str, field_name: str = "gas") -> Species:
    """Look up a carrier or inert gas (oxygen, air, nitrous_oxide, nitrogen, argon, carbon_dioxide)."""
    key = str(name).strip().lower().replace(" ", "_").replace("-", "_")
    key = {"o2": "oxygen", "n2o": "nitrous_oxide", "n2": "nitrogen", "co2": "carbon_dioxide", "ar": "argon"}.get(
        key, key
    )
    if key not in GASES:
        raise InputError(field_name, name, "one of " + ", ".join(sorted(GASES)))
    return GASES[key]


def source_table() -> list[dict[str, str]]:
    """Every value of the data file with its source, for the methods page and the docs."""
    rows = []
    for name, recs in validate_records(_raw()).items():
        for prop, rec in recs.items():
            rows.append(
                {
                    "species": name,
                    "property": prop,
                    "value": str(rec.value),
                    "confidence": rec.confidence,
                    "source": _raw()["sources"][rec.source],
                    "note": rec.note,
                }
            )
    return rows
