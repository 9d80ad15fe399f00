"""The app's demo inputs: the repository's demo_cases/ files (invented sites, cases, stocks, logs, prices).

There is no second demo set: the app opens on the same files the command line's examples and
tests/test_demo_cases.py run, so the app and ``lowflow`` can be compared on them.
"""

from __future__ import annotations

import tomllib
from functools import cache
from typing import Any

from .contracts import DEMO_DIR, referenced

#: The demo file each page opens on.
DEFAULT = {
    "scenario": "kestrel_lap_chole.toml",
    "inventory": "highland_clinic_inventory.toml",
    "casemix": "kestrel_case_mix.toml",
    "log": "kestrel_audit_log.csv",
    "prices": "kestrel_prices.toml",
    "policy": "kestrel_lowflow_policy.toml",
}


@cache
def _text(name: str) -> str:
    return (DEMO_DIR / name).read_text(encoding="utf-8")


def text(name: str) -> str:
    """Text of a demo file (only names listed in the demo folder)."""
    if name not in {p.name for p in DEMO_DIR.iterdir()}:
        raise KeyError(name)
    return _text(name)


def kind_of(doc: dict[str, Any]) -> str:
    """Which contract a TOML demo document follows, by its top-level keys."""
    if "phases" in doc:
        return "scenario"
    if "case_types" in doc or "case_types_file" in doc:
        return "casemix"
    if {"cylinders", "bottles", "concentrators", "pipelines", "demand"} & set(doc):
        return "inventory"
    if "policy" in doc:
        return "policy"
    return "prices"


@cache
def files_of(kind: str) -> list[str]:
    """Names of the demo files of ``kind`` (scenario, inventory, casemix, prices, policy, log)."""
    if kind == "log":
        return sorted(p.name for p in DEMO_DIR.glob("*.csv"))
    return [p.name for p in sorted(DEMO_DIR.glob("*.toml")) if kind_of(tomllib.loads(_text(p.name))) == kind]


def document(name: str) -> tuple[dict[str, Any], dict[str, str]]:
    """A demo TOML file parsed, and the text of the demo files it names (by name)."""
    doc = tomllib.loads(text(name))
    names = referenced(kind_of(doc), doc)
    return doc, {n: text(n) for n in names if (DEMO_DIR / n).is_file() and "/" not in n}


def scenario() -> dict[str, Any]:
    """A fresh copy of the demo scenario the app opens on."""
    return document(DEFAULT["scenario"])[0]


def inventory() -> dict[str, Any]:
    """A fresh copy of the demo inventory the supply page opens on."""
    return document(DEFAULT["inventory"])[0]


def casemix() -> dict[str, Any]:
    """A fresh copy of the demo case mix the forecast page opens on."""
    return document(DEFAULT["casemix"])[0]
