"""Patient spread (estimator.simulation.spread): draws, percentiles, JSON, CLI, forecast option, and one check of
the spread of agent use against a published closed-circuit study."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from estimator.cli import main
from estimator.errors import InputError
from estimator.inputs.scenario import scenario_from_dict
from estimator.physics import circuit as c
from estimator.simulation.batch import case_template, run_batch
from estimator.simulation.engine import base_parameters, patient_from_scenario, simulate, site_state
from estimator.simulation.spread import (
    FACTORS,
    SPREAD_TOTALS,
    apply_factors,
    distributions,
    draw_factors,
    simulate_spread,
    sources,
)
from estimator.units import Q_

DEMO = Path(__file__).parent.parent / "demo_cases"
HOLD = {"oxygen": "0.3 L/min", "air": "0.2 L/min", "end_tidal_target": "1 MAC"}


def _scenario(agent: str = "sevoflurane", **phase):
    ph = {**HOLD, "duration": "45 min", **phase}
    return scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": agent}, "phases": [ph]})


def test_every_spread_is_sourced():
    # The data file is the only place a spread is defined; each has a source that resolves and a
    # confidence code, and a CV in a physiological range (a CV of 50 % would be a different population).
    for agent in ("sevoflurane", "isoflurane", "desflurane", "halothane"):
        d = distributions(agent)
        assert tuple(d) == FACTORS
        for s in d.values():
            assert s.source in sources()
            assert s.confidence in "VSMDC"
            assert 0.0 < s.cv < 0.5
            assert s.derivation
    # Esper et al. 2015 (Anesth Analg 120:45, abstract): 0.74 +- 0.06, 1.45 +- 0.12, 0.57 +- 0.04.
    assert distributions("sevoflurane")["blood_gas"].cv == pytest.approx(0.06 / 0.74, abs=5e-4)
    assert distributions("isoflurane")["blood_gas"].cv == pytest.approx(0.12 / 1.45, abs=5e-4)
    assert distributions("desflurane")["blood_gas"].cv == pytest.approx(0.04 / 0.57, abs=5e-4)
    with pytest.raises(InputError):
        distributions("xenon")


def test_draws_are_lognormal_with_the_published_cv():
    # 20,000 draws: the sample CV of a lognormal factor has a relative SE of about 1/sqrt(2n) = 0.5 %;
    # the 3-SD truncation lowers the CV by under 1 %; 3 % covers both.
    f = draw_factors("isoflurane", 20_000, np.random.default_rng(11))
    for j, s in enumerate(distributions("isoflurane").values()):
        cv = f[:, j].std() / f[:, j].mean()
        assert cv == pytest.approx(s.cv, rel=0.03)
        assert np.median(f[:, j]) == pytest.approx(1.0, abs=0.01)
    assert (f > 0).all()


def test_reproducible_with_a_seed():
    s = _scenario()
    a = simulate_spread(s, 8, seed=42)
    b = simulate_spread(s, 8, seed=42)
    other = simulate_spread(s, 8, seed=43)
    np.testing.assert_array_equal(a.totals["agent_liquid"], b.totals["agent_liquid"])
    np.testing.assert_array_equal(a.bands["end_tidal_agent"]["p95"], b.bands["end_tidal_agent"]["p95"])
    assert not np.array_equal(a.totals["agent_liquid"], other.totals["agent_liquid"])
    assert a.seed == 42


def test_median_stays_near_the_typical_patient():
    # Factors have median 1, so the median patient is the typical one up to (i) the sampling error of
    # a median of 200 (1.25 CV / sqrt(200) = 0.7 % at a CV of 8 %) and (ii) the curvature of agent use
    # in the factors (second order in sigma^2, about 0.15^2 / 2 = 1 %). 3 % covers three sampling SEs
    # and the curvature.
    r = simulate_spread(_scenario(duration="90 min"), 200, seed=7)
    assert r.percentiles("agent_liquid")["p50"] == pytest.approx(r.typical["agent_liquid"], rel=0.03)
    assert r.percentiles("co2e")["p50"] == pytest.approx(r.typical["co2e"], rel=0.03)


def test_band_widens_with_the_spread():
    s = _scenario()
    widths = []
    for scale in (0.0, 0.5, 1.0, 1.5):
        pc = simulate_spread(s, 40, seed=3, scale=scale).percentiles("agent_liquid")
        widths.append(pc["p95"] - pc["p05"])
    assert widths[0] == pytest.approx(0.0, abs=1e-9)
    assert widths[0] < widths[1] < widths[2] < widths[3]
    with pytest.raises(InputError):
        simulate_spread(s, 5, seed=1, scale=3.0)


def test_bands_are_ordered_over_time():
    r = simulate_spread(_scenario(), 30, seed=5)
    assert len(r.time) == len(r.bands["end_tidal_agent"]["p50"])
    for key in ("end_tidal_agent", "inspired_oxygen", "agent_liquid_cumulative"):
        b = r.bands[key]
        assert (b["p05"] <= b["p50"] + 1e-12).all() and (b["p50"] <= b["p95"] + 1e-12).all()
    cum = r.bands["agent_liquid_cumulative"]["p50"]
    assert np.all(np.diff(cum) >= -1e-9)
    assert cum[-1] == pytest.approx(r.percentiles("agent_liquid")["p50"], rel=1e-6)


def test_cumulative_series_ends_at_the_total():
    # One code path: the cumulative liquid-agent series is the same accumulator as the total.
    r = simulate(_scenario())
    assert r.series["agent_liquid_cumulative [mL]"].iloc[-1] == pytest.approx(r.totals["agent_liquid"].magnitude)
    assert r.series["agent_liquid_cumulative [mL]"].iloc[0] == 0.0


def test_a_varied_patient_conserves_mass():
    # The factors change flows, solubilities and volumes consistently: mass balance to 1e-6 holds.
    row = np.array([1.3, 0.8, 1.1, 0.9, 1.6])
    r = simulate(_scenario(), adjust=lambda p: apply_factors(p, row))
    assert max(r.mass_balance().values()) < 1e-6
    s = _scenario()
    base = base_parameters(s, patient_from_scenario(s), site_state(s))
    p = apply_factors(base, row)
    vt = slice(c.P_VT, c.P_VT + c.NT)
    assert p[vt].sum() == pytest.approx(base[vt].sum())  # body volume kept
    assert p[c.P_Q] == pytest.approx(1.3 * base[c.P_Q])


def test_batch_engine_agrees_with_the_single_case_engine_for_varied_patients():
    # Consistency (same equations): the batch adjust hook and the single-case hook give the same totals
    # within the batch engine's stated agreement, 1e-3 relative.
    s = _scenario(duration="60 min")
    rows = draw_factors("sevoflurane", 3, np.random.default_rng(9))
    out = run_batch(
        case_template(s), [70.0] * 3, [40.0] * 3, [60.0] * 3, adjust=lambda p, sl: apply_factors(p, rows[sl][:, None])
    )
    for i, row in enumerate(rows):
        one = simulate(s, adjust=lambda p, row=row: apply_factors(p, row))
        assert out["agent_liquid"][i] == pytest.approx(one.totals["agent_liquid"].magnitude, rel=1e-3)


def test_bad_arguments_name_the_field():
    s = _scenario()
    for n in (0, -3, 10_000, 2.5, True):
        with pytest.raises(InputError) as exc:
            simulate_spread(s, n, seed=1)
        assert exc.value.field == "spread"
    with pytest.raises(InputError) as exc:
        simulate_spread(s, 3, seed=-1)
    assert exc.value.field == "seed"


def test_json_keys():
    doc = simulate_spread(_scenario(), 6, seed=2).to_json()
    for key, unit in SPREAD_TOTALS.items():
        assert set(doc[key]) == {"p05", "p50", "p95"}
        assert doc[key]["p05"]["magnitude"] <= doc[key]["p95"]["magnitude"]
        assert Q_(1, doc[key]["p50"]["units"]).units == Q_(1, unit).units
    assert doc["patients"] == 6 and doc["seed"] == 2
    assert set(doc["series"]) == {"time", "units", "end_tidal_agent", "inspired_oxygen", "agent_liquid_cumulative"}
    assert set(doc["distributions"]) == set(FACTORS)


def _cli(capsys, *args):
    with pytest.raises(SystemExit) as exc:
        main(["case", *map(str, args)])
    out = capsys.readouterr()
    return exc.value.code, out.out, out.err


def test_cli_spread_json_and_text(capsys):
    case = DEMO / "kestrel_lap_chole.toml"
    code, out, _ = _cli(capsys, case, "--spread", 10, "--seed", 4, "--json")
    assert code == 0
    doc = json.loads(out)
    assert doc["spread"]["seed"] == 4 and doc["spread"]["patients"] == 10
    for key in SPREAD_TOTALS:
        assert {"p05", "p50", "p95"} <= set(doc["spread"][key])
    code, out, _ = _cli(capsys, case, "--spread", 10, "--seed", 4)
    assert code == 0
    liquid = next(line for line in out.splitlines() if "liquid agent" in line)
    assert "P5-P95" in liquid and out.count("P5-P95") >= 5
    code, out, _ = _cli(capsys, case, "--json")
    assert "spread" not in json.loads(out)
    code, _, err = _cli(capsys, case, "--spread", -2)
    assert code == 2 and "spread" in err


def test_forecast_patient_spread_is_an_option(tmp_path):
    from estimator.planning.casemix import load_casemix
    from estimator.planning.forecast import forecast

    mix = load_casemix(DEMO / "kestrel_case_mix.toml")
    off = forecast(mix, weeks=8, seed=1)
    on = forecast(mix, weeks=8, seed=1, patient_spread=True)
    again = forecast(mix, weeks=8, seed=1, patient_spread=True)
    assert off.solver["patient_spread"] is False and on.solver["patient_spread"] is True
    # Same case draws (counts, durations, weights): the case count is identical; agent use differs.
    assert on.items["cases"]["mean"].magnitude == off.items["cases"]["mean"].magnitude
    assert on.items["sevoflurane"]["mean"].magnitude != off.items["sevoflurane"]["mean"].magnitude
    assert on.items["sevoflurane"]["mean"].magnitude == again.items["sevoflurane"]["mean"].magnitude


# --- validation ------------------------------------------------------------------------------------
#: Closed-circuit isoflurane, group A ("Utilisation de l'isoflurane en circuit ferme: avantages
#: economiques", English abstract as indexed; authors, journal, volume and pages not retrieved):
#: 20 adults, orthopaedic surgery, fresh gas 482.5 +- 186.6 mL/min matched to metabolic demand, O2 50 %
#: in N2O, end-tidal isoflurane 0.92 % held by liquid injection, controlled ventilation; liquid
#: isoflurane in the first hour 5.85 +- 1.32 mL.
CLOSED_CIRCUIT_N = 20
CLOSED_CIRCUIT_MEAN, CLOSED_CIRCUIT_SD = 5.85, 1.32
#: The cohort's weights are not in the abstract; an adult surgical cohort of 74 (SD 13) kg stands in
#: (Lerou JGC, Verheijen R, Booij LHDJ. Br J Anaesth 2002;88:175-83, 58 adults, abstract).
COHORT_WEIGHT = (74.0, 13.0)


def cv_interval(cv: float, n: int, z: float = 1.96) -> tuple[float, float]:
    """Approximate 95 % interval of a sample CV of ``n`` normal values (McKay 1932; Vangel 1996):
    SE = CV sqrt((1 + 2 CV^2) / (2 (n - 1)))."""
    se = cv * math.sqrt((1 + 2 * cv**2) / (2 * (n - 1)))
    return cv - z * se, cv + z * se


@pytest.mark.validation
@pytest.mark.xfail(
    strict=True,
    raises=AssertionError,
    reason="known gap: with the published physiological spreads (and a cohort weight spread) the model's "
    "between-patient CV of first-hour closed-circuit isoflurane is 0.14, below the published "
    "0.23 (95 % interval 0.15-0.30); see README 'Patient spread', limits",
)
def test_spread_of_closed_circuit_agent_use_matches_published_variation():
    # Band: the published CV (1.32 / 5.85 = 0.226) with the sampling uncertainty of a CV from 20
    # patients, 0.150-0.301. Two-sided: a model with no spread, or an implausibly wide one, fails.
    # The published CV also holds measurement error and clinical differences the model does not
    # simulate, so the model may sit in the lower half of the band but not below it.
    lo, hi = cv_interval(CLOSED_CIRCUIT_SD / CLOSED_CIRCUIT_MEAN, CLOSED_CIRCUIT_N)
    rng = np.random.default_rng(2024)
    n = 300
    weights = rng.normal(*COHORT_WEIGHT, n)
    factors = draw_factors("isoflurane", n, rng)
    use = np.empty(n)
    for i, (w, row) in enumerate(zip(weights, factors, strict=True)):
        s = scenario_from_dict(
            {
                "patient": {"weight": f"{w} kg", "age": "45 year", "initial": "preoxygenated"},
                "agent": {"name": "isoflurane"},
                "circuit": {"initial": "oxygen"},
                "phases": [
                    {
                        "duration": "60 min",
                        "oxygen": "0.25 L/min",
                        "nitrous_oxide": "0.23 L/min",
                        "end_tidal_target": "0.92 %",
                    }
                ],
            }
        )
        use[i] = simulate(s, adjust=lambda p, row=row: apply_factors(p, row)).totals["agent_liquid"].magnitude
    cv = use.std(ddof=1) / use.mean()
    assert lo <= cv <= hi, f"model CV {cv:.3f}, published band {lo:.3f}-{hi:.3f}"


# --- app -------------------------------------------------------------------------------------------
def _app_path():
    import sys

    root = str(Path(__file__).resolve().parents[1])
    if root not in sys.path:  # app.py runs from the repository root; estimator_app is not installed
        sys.path.insert(0, root)


def test_band_spec_follows_the_vega_lite_schema():
    _app_path()
    from altair.utils.schemapi import validate_jsonschema
    from altair.vegalite.v6.schema.core import load_schema

    from estimator_app.charts import time_course
    from estimator_app.spread_view import with_band

    r = simulate_spread(_scenario(duration="10 min"), 5, seed=1)
    base = simulate(_scenario(duration="10 min")).series
    spec = with_band(time_course(base, {"end_tidal_agent [%]": "end-tidal"}, "agent [%]"), r, "end_tidal_agent")
    validate_jsonschema(spec, load_schema())
    assert spec["layer"][0]["mark"]["type"] == "area"
    assert len(spec["layer"][0]["data"]["values"]) == len(r.time)


def test_case_planner_shows_the_band():
    _app_path()
    from streamlit.testing.v1 import AppTest

    at = AppTest.from_string("from estimator_app.shell import page_main\npage_main('case_planner')", default_timeout=90)
    at.run()
    assert not at.exception
    assert all("P5" not in list(df.value.columns) for df in at.dataframe)  # off by default
    at.number_input(key="case.spread.n").set_value(20).run()
    assert not at.exception and not at.error
    table = next(df.value for df in at.dataframe if "P95" in df.value.columns)
    assert list(table["quantity"])[0] == "liquid agent"
    assert (table["P5"] <= table["P95"]).all()
    dist = next(df.value for df in at.dataframe if "derivation" in df.value.columns)
    assert any("Esper" in src for src in dist["source"])
