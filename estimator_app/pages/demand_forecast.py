"""Demand forecast: weekly department demand per item (``estimator.forecast``, when present)."""

from __future__ import annotations

import importlib.util

import streamlit as st

from ..common import placeholder


def available() -> bool:
    return importlib.util.find_spec("estimator.forecast") is not None


def render() -> None:
    st.title("Demand forecast")
    st.caption("A department's case mix next quarter: cylinders and bottles a week, P50 and P95.")
    placeholder("The demand forecast", "estimator.forecast",
                "It will read a case-mix file (case types, cases a week, duration and weight spread), draw "
                "weekly case counts and report the mean, P50, P95 and P99 of each item a week with the "
                "orders to place. Until then, the supply duration page answers how long today's stock lasts "
                "for a fixed daily plan.")
