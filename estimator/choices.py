"""The fixed sets of values an option or a file field takes, as enums the command line lists in ``--help``.

Imports nothing but the standard library, so ``lowflow --help`` shows the choices without loading the
numeric stack. Each set is defined here once; the modules that use it (``properties.CO2E_BASES``,
``planning.audit.QUADRATURES``, ``inputs.schemas.KINDS``, ``data/agents.toml``) are tied to it by
tests/test_cli_choices.py.

Examples
--------
>>> [b.value for b in Basis][:2], Quadrature("trapezoid").value
(['ar6_gwp100', 'ar6_gwp20'], 'trapezoid')
>>> CO2E_BASES["ar5_gwp100"][1]
'IPCC AR5 GWP100'
"""

from __future__ import annotations

from enum import StrEnum


class Basis(StrEnum):
    """Climate basis of every CO2e figure (global warming potential and horizon)."""

    AR6_GWP100 = "ar6_gwp100"
    AR6_GWP20 = "ar6_gwp20"
    AR5_GWP100 = "ar5_gwp100"
    SULBAEK2012_GWP100 = "sulbaek2012_gwp100"


#: Climate bases: key -> (property name in data/agents.toml, label shown beside every figure).
CO2E_BASES: dict[str, tuple[str, str]] = {
    Basis.AR6_GWP100.value: ("gwp100_ar6", "IPCC AR6 GWP100"),
    Basis.AR6_GWP20.value: ("gwp20_ar6", "IPCC AR6 GWP20"),
    Basis.AR5_GWP100.value: ("gwp100_ar5", "IPCC AR5 GWP100"),
    Basis.SULBAEK2012_GWP100.value: ("gwp100_sulbaek2012", "Sulbaek Andersen et al. 2012 GWP100"),
}


class Quadrature(StrEnum):
    """Rule that turns an audit log's samples into totals."""

    HOLD = "hold"  #: sample and hold (left-rectangle rule)
    TRAPEZOID = "trapezoid"


#: The audit's quadrature rules, as plain text.
QUADRATURES: tuple[str, ...] = tuple(q.value for q in Quadrature)


class Agent(StrEnum):
    """A volatile agent of ``data/agents.toml`` (its ``[agents.NAME]`` tables)."""

    SEVOFLURANE = "sevoflurane"
    ISOFLURANE = "isoflurane"
    DESFLURANE = "desflurane"
    HALOTHANE = "halothane"


class FileKind(StrEnum):
    """An input file format with a published JSON Schema (``lowflow schema KIND``)."""

    SCENARIO = "scenario"
    INVENTORY = "inventory"
    CASE_MIX = "case-mix"
    PRICES = "prices"
    POLICY = "policy"
    CALIBRATION = "calibration"
