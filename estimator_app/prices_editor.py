"""The prices a page costs with, shown and editable: currency, gas prices and each agent's price.

A prices document (a ``[prices]`` table, as ``lowflow audit --prices`` reads it) is edited in place
with the editors of :mod:`estimator_app.editing`: a value the user does not touch is written back as
read, a blank cell removes the key, keys without a widget (cylinder prices, the note) are kept. The
page then loads the edited text with the command line's loader, so the app and ``lowflow`` price alike.
"""

from __future__ import annotations

from typing import Any

import streamlit as st

from estimator.accounts.prices import MAX_PRICE, AgentPriceInput
from estimator.errors import InputError

from . import contracts
from .editing import Field, contract, number, table

GAS_PRICES = (("oxygen_per_m3", "Oxygen"), ("air_per_m3", "Air"), ("nitrous_oxide_per_m3", "Nitrous oxide"))


def _price(key: str, label: str) -> Field:
    return Field(key, label, low=0.0, high=MAX_PRICE, help="A plain number in the currency of these prices.")


def agent_fields() -> list[Field]:
    """Columns of the agent price table: the agent, price per bottle, bottle volume, price per mL."""
    return [
        Field("agent", "Agent", kind="text"),
        _price("agent_bottle", "Price per bottle"),
        contract(AgentPriceInput, "bottle_volume", "Bottle volume", "mL"),
        _price("agent_per_ml", "Price per mL"),
    ]


def edit(text: str, name: str, box: Any) -> str:
    """Widgets over the prices of ``text`` (empty: no prices); the edited prices as TOML text.

    Agent rows need a name: a row without one is an InputError, never dropped silently.
    """
    if not text:
        return ""
    doc = contracts.parse_toml(text, "prices")
    prices = doc.setdefault("prices", {}) if "prices" in doc else doc
    key = f"audit.prices.edit.{name}"
    with box.expander("Prices (edit to price the log at your own)", expanded=False):
        c = st.columns(4)
        currency = c[0].text_input(
            "Currency label", str(prices.get("currency", "")), key=f"{key}.currency", max_chars=40
        )
        if currency != str(prices.get("currency", "")):
            prices["currency"] = currency
        for col, (k, label) in zip(c[1:], GAS_PRICES, strict=True):
            number(col, prices, _price(k, f"{label} per m3"), f"{key}.{k}")
        agents = prices.get("agents", {}) if isinstance(prices.get("agents"), dict) else {}
        rows = [{"agent": a, **(v if isinstance(v, dict) else {})} for a, v in agents.items()]
        edited = table(rows, agent_fields(), f"{key}.agents")
        new = {}
        for i, row in enumerate(edited, start=1):
            agent = str(row.pop("agent", "") or "").strip()
            if not agent:
                raise InputError(f"prices.agents row {i}", "", "an agent name (sevoflurane, desflurane...)")
            new[agent] = row
        if new or agents:
            prices["agents"] = new
    return contracts.toml_text(doc)


def describe(name: str, prices: Any) -> str:
    """One line naming the prices used: their file (or source), currency and note."""
    if prices is None:
        return "No prices: costs are not computed."
    note = f" - {prices.note}" if prices.note else ""
    return f"Costs at the prices of {name} ({prices.currency}{note})."
