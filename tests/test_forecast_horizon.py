"""A forecast by planning horizon (issue 19, item 8): the horizon's totals and orders apart from the weeks
simulated for the statistics, a demo mix that opens without safety warnings, whole-week histogram axes.

The horizon is a bootstrap of the simulated weeks (Efron 1979); the checks below are consistency checks
of that arithmetic and of the faces against each other, not validation against a published source.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
from pathlib import Path

import numpy as np
import pytest
from app_helpers import assert_clean, page

from estimator.cli import main
from estimator.errors import InputError
from estimator.planning.casemix import casemix_from_text, load_casemix
from estimator.planning.forecast import forecast
from estimator.planning.forecast_horizon import RESAMPLES, horizon_totals, plan_horizon

DEMO = Path(__file__).resolve().parents[1] / "demo_cases" / "kestrel_case_mix.toml"


@pytest.fixture(scope="module")
def demo_result():
    mix = load_casemix(DEMO)
    return mix, plan_horizon(forecast(mix), mix)


def test_horizon_mean_is_the_weeks_times_the_weekly_mean(demo_result):
    # Resampling keeps the mean: E[sum of H weeks] = H x the weekly mean; the mean of RESAMPLES sums
    # lies within 4 standard errors (sd of a week x sqrt(H) / sqrt(RESAMPLES)) of it.
    mix, r = demo_result
    h = r.horizon
    assert h["weeks"] == mix.horizon_weeks == 13 and r.weeks == 104
    for key in ("cases", "oxygen", "sevoflurane", "co2e"):
        weekly = r.weekly[key]
        se = weekly.std() * math.sqrt(13) / math.sqrt(RESAMPLES)
        assert h["items"][key]["mean"].magnitude == pytest.approx(13 * weekly.mean(), abs=4 * se), key


def test_horizon_orders_cover_less_than_the_weeks_times_a_bad_week(demo_result):
    # Bad weeks seldom come together: the P95 of a quarter is below 13 x the P95 week, and above its mean.
    _, r = demo_result
    h = r.horizon
    for key in ("oxygen", "sevoflurane", "desflurane"):
        p95 = h["items"][key]["p95"].magnitude
        assert h["items"][key]["mean"].magnitude < p95 < 13 * r.items[key]["p95"].magnitude, key
    weekly = {o["item"]: o["count"] for o in r.orders}
    quarter = {o["item"]: o for o in h["orders"]}
    assert set(quarter) == set(weekly)
    for item, o in quarter.items():
        assert o["covers"] == "P95" and o["count"] <= 13 * weekly[item], item
        assert o["count"] * o["per_unit"].magnitude >= o["need"].magnitude  # whole units cover the need


def test_horizon_is_repeatable_and_checked():
    weekly = {"cases": np.arange(10.0)}
    a, b = horizon_totals(weekly, 4, seed=7), horizon_totals(weekly, 4, seed=7)
    assert np.array_equal(a["cases"], b["cases"]) and len(a["cases"]) == RESAMPLES
    for bad in (0, 521, 2.5, True):
        with pytest.raises(InputError, match="horizon_weeks"):
            horizon_totals(weekly, bad, seed=7)
    text = DEMO.read_text(encoding="utf-8").replace("horizon_weeks = 13", "horizon_weeks = 0")
    with pytest.raises(InputError, match="horizon_weeks"):
        casemix_from_text(text)


def _cli(*argv: str) -> tuple[int, str]:
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out), pytest.raises(SystemExit) as done:
        main(list(argv))
    return done.value.code, out.getvalue()


def test_command_line_horizon_option_and_the_demo_without_safety_warnings():
    code, text = _cli("forecast", str(DEMO), "--json", "--horizon-weeks", "26")
    assert code == 0
    doc = json.loads(text)
    assert doc["horizon"]["weeks"] == 26 and doc["weeks"] == 104
    # The demo mix (invented) opens without hypoxia, low inspired O2 or cut-short cases.
    codes = {w["code"] for w in doc["warnings"]}
    assert not codes & {"HYPOXIC_INSPIRED_MIXTURE", "INSPIRED_OXYGEN_LOW", "CASES_CUT_SHORT", "FEW_WEEKS"}, codes
    code, text = _cli("forecast", str(DEMO), "--horizon-weeks", "0")
    assert code == 2 and "--horizon-weeks" in text
    code, text = _cli("forecast", str(DEMO))
    assert "Orders that cover a P95 horizon of 13 weeks:" in text


def test_page_horizon_control_and_whole_week_histogram():
    at = page("demand_forecast")
    assert_clean(at)
    assert not [w.value for w in at.warning if "HYPOXIC" in w.value or "CUT_SHORT" in w.value]
    quarter = next(m for m in at.metric if m.label == "Cases in 13 weeks (mean)")
    at.number_input(key="forecast.horizon_weeks.0").set_value(26).run()
    assert_clean(at)
    half_year = next(m for m in at.metric if m.label == "Cases in 26 weeks (mean)")
    # The same simulated weeks resampled: twice the horizon, about twice the cases (4 % for the resampling).
    from estimator.display import number

    assert number(half_year.value) == pytest.approx(2 * number(quarter.value), rel=0.04)
    spec = json.loads(at.get("vega_lite_chart")[0].proto.spec)
    assert spec["encoding"]["y"]["axis"]["format"] == "d" and spec["encoding"]["y"]["axis"]["tickMinStep"] == 1
