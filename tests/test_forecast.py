"""Demand forecast: case-mix reading, distributions, Monte-Carlo weekly totals, orders, cost, CO2e."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from estimator.accounts.carbon_totals import case_carbon
from estimator.accounts.costs import case_cost
from estimator.errors import InputError
from estimator.physics.cylinders import compressed_cylinder
from estimator.planning.casemix import Z90, Distribution, case_types_from_text, casemix_from_text, load_casemix
from estimator.planning.forecast import case_co2e, forecast, summary_statistics
from estimator.simulation import batch, engine

DATA = Path(__file__).parent / "data"
#: Batch against single-case engine (tests/test_batch.py): 1e-3 relative.
AGREEMENT = 1e-3

POINT = """
weeks = 3
seed = 1
[[case_types]]
name = "fixed hernia list"
per_week = 4
count = "fixed"
agent = "sevoflurane"
wash_in_flow = "6 L/min"
wash_in_time = "10 min"
maintenance_flow = "0.8 L/min"
duration = "75 min"
weight_mean = "82 kg"
age_mean = "55 years"
[[case_types]]
name = "fixed N2O list"
per_weekday = [1, 1]
count = "fixed"
agent = "isoflurane"
balance = "nitrous_oxide"
oxygen_fraction = "50 %"
maintenance_flow = "1 L/min"
end_tidal_target = "1.1 MAC"
duration = "40 min"
weight_mean = "64 kg"
[prices]
currency = "demo units"
oxygen_per_m3 = 3.0
air_per_m3 = 1.5
nitrous_oxide_per_m3 = 15.0
absorbent_per_kg = 5.0
agent_per_ml = 0.3
"""


def test_point_collapse_equals_single_cases_times_counts():
    # With every distribution a point and counts fixed, each week is exactly 4 x case A + 2 x case B
    # of the single-case engine (within the batch agreement), cost from estimator.accounts.costs and CO2e
    # from estimator.accounts.carbon_totals of those engine totals.
    mix = casemix_from_text(POINT)
    r = forecast(mix)
    refs = []
    for ct, n in zip(mix.case_types, (4, 2), strict=True):
        sc = batch.single_case_scenario(ct.template, ct.weight.loc, ct.age.loc, ct.duration.loc)
        refs.append((engine.simulate(sc).totals, ct.agent, n))
    expect = {
        "oxygen": sum(n * t["oxygen"].to("L").magnitude for t, _, n in refs),
        "air": sum(n * t["air"].to("L").magnitude for t, _, n in refs),
        "nitrous_oxide": sum(n * t["nitrous_oxide_mass"].to("kg").magnitude for t, _, n in refs),
        "absorbent": sum(n * t["absorbent"].to("kg").magnitude for t, _, n in refs),
        "sevoflurane": 4 * refs[0][0]["agent_liquid"].to("mL").magnitude,
        "isoflurane": 2 * refs[1][0]["agent_liquid"].to("mL").magnitude,
        "co2e": sum(n * case_carbon(t, a, "ar6_gwp100").total.to("kg").magnitude for t, a, n in refs),
        "cases": 6.0,
    }
    for key, value in expect.items():
        np.testing.assert_allclose(r.weekly[key], value, rtol=AGREEMENT, err_msg=key)
        for s in ("mean", "p50", "p95", "p99"):
            assert r.items[key][s].magnitude == pytest.approx(value, rel=AGREEMENT)
    cost = sum(n * case_cost(t, mix.prices, a)["total"] for t, a, n in refs)
    np.testing.assert_allclose(r.weekly["cost"], cost, rtol=AGREEMENT)
    assert r.cost["p95"] == pytest.approx(cost, rel=AGREEMENT)


def test_case_co2e_matches_carbon_module():
    tpl = batch.case_template(casemix_from_text(POINT).case_types[1].template.scenario)
    tot = batch.run_batch(tpl, [64.0], [40.0], [40.0])
    q = {
        k: batch.Q_(tot[k][0], batch.TOTAL_UNITS[k])
        for k in ("agent_liquid", "agent_uptake", "agent_metabolised", "nitrous_oxide")
    }
    ref = case_carbon(q, "isoflurane", "ar5_gwp100", manifold_loss=0.5).total.to("kg").magnitude
    assert case_co2e(tot, "isoflurane", "ar5_gwp100", 0.5)[0] == pytest.approx(ref, rel=1e-12)


SHORT = """
seed = 4
weeks = 300
[[case_types]]
name = "brief cases"
per_week = {n}
agent = "sevoflurane"
duration_median = "20 min"
duration_p90 = "30 min"
weight_mean = "70 kg"
weight_sd = "10 kg"
"""


def test_percentiles_ordered_and_grow_with_case_count():
    small = forecast(casemix_from_text(SHORT.format(n=10)))
    large = forecast(casemix_from_text(SHORT.format(n=20)))
    for key in ("oxygen", "air", "sevoflurane", "absorbent", "co2e", "cases"):
        for r in (small, large):
            s = r.items[key]
            assert s["p50"] <= s["p95"] <= s["p99"], key
        for stat in ("mean", "p50", "p95", "p99"):
            assert large.items[key][stat] > small.items[key][stat], (key, stat)


def test_poisson_counts():
    # Poisson counts: mean = variance = per_week (a property of the distribution). With 300 weeks
    # the sample mean's standard error is sqrt(10/300) = 0.18; allow 4 SE. The sample variance of
    # a Poisson(10) over 300 weeks has a standard error of about sqrt(2 x 10^2 / 300) + ... = 0.85;
    # allow 4 SE as well.
    r = forecast(casemix_from_text(SHORT.format(n=10)))
    counts = r.weekly["cases"]
    assert abs(counts.mean() - 10.0) < 4 * math.sqrt(10.0 / 300)
    assert abs(counts.var(ddof=1) - 10.0) < 4 * 0.85
    assert np.all(counts == np.round(counts))


def test_reproducible_with_seed_and_progress():
    mix = casemix_from_text(SHORT.format(n=5))
    seen = []
    a = forecast(mix, weeks=30, progress=seen.append)
    b = forecast(mix, weeks=30)
    c = forecast(mix, weeks=30, seed=99)
    np.testing.assert_array_equal(a.weekly["oxygen"], b.weekly["oxygen"])
    assert not np.array_equal(a.weekly["oxygen"], c.weekly["oxygen"])
    assert seen == sorted(seen) and seen[-1] == 1.0 and 0.0 <= seen[0]
    fresh = casemix_from_text(SHORT.format(n=5).replace("seed = 4", ""))
    r = forecast(fresh, weeks=4)
    assert isinstance(r.seed, int)
    np.testing.assert_array_equal(forecast(fresh, weeks=4, seed=r.seed).weekly["air"], r.weekly["air"])


def test_lognormal_duration_against_scipy():
    # The duration law: log-normal with the median and P90 given (scipy.stats.lognorm with
    # s = ln(P90/median)/z0.90 and scale = median). With no truncation in reach the sampled
    # median and P90 of 40,000 draws lie within 2 % of scipy's (sampling error of a quantile of
    # 40,000 draws is well under 1 %).
    d = Distribution("lognormal", math.log(90.0), math.log(150 / 90) / Z90, 1.0, 1440.0)
    x = d.sample(np.random.default_rng(8), 40_000)
    law = stats.lognorm(s=math.log(150 / 90) / Z90, scale=90.0)
    assert law.ppf(0.9) == pytest.approx(150.0, rel=1e-9)
    assert np.median(x) == pytest.approx(law.ppf(0.5), rel=0.02)
    assert np.percentile(x, 90) == pytest.approx(law.ppf(0.9), rel=0.02)


def test_truncated_normal_weight_against_scipy():
    # Normal truncated to [low, high]: compared with scipy.stats.truncnorm by a Kolmogorov-Smirnov
    # test (p > 0.001 for a correct sampler in all but 1 in 1000 seeds).
    d = Distribution("normal", 22.0, 8.0, 10.0, 50.0)
    x = d.sample(np.random.default_rng(3), 5000)
    assert x.min() >= 10.0 and x.max() <= 50.0
    law = stats.truncnorm((10.0 - 22.0) / 8.0, (50.0 - 22.0) / 8.0, loc=22.0, scale=8.0)
    assert stats.kstest(x, law.cdf).pvalue > 1e-3
    outside = 1.0 - (stats.norm.cdf(50, 22, 8) - stats.norm.cdf(10, 22, 8))
    assert d.truncated_mass() == pytest.approx(outside, rel=1e-9)


def test_department_file_orders_and_cost():
    mix = load_casemix(DATA / "casemix_department.toml")
    r = forecast(mix, weeks=40)
    assert {o["item"] for o in r.orders} == {"oxygen", "air", "nitrous_oxide", "sevoflurane", "isoflurane", "absorbent"}
    ox = next(o for o in r.orders if o["item"] == "oxygen")
    usable = compressed_cylinder("oxygen", "10 L", "200 bar", "15 degC", "10 bar").usable.to("L").magnitude
    assert ox["per_unit"].magnitude == pytest.approx(usable)
    for o in r.orders:
        need, per = o["need"].magnitude, o["per_unit"].magnitude
        assert o["count"] * per >= need > (o["count"] - 1) * per
        assert need == pytest.approx(float(np.percentile(r.weekly[o["item"]], 95)))
    sevo = r.items["sevoflurane_bottles"]["mean"].magnitude
    assert sevo == pytest.approx(r.items["sevoflurane"]["mean"].magnitude / 250.0)
    assert r.cost["currency"] == "demo units" and r.cost["p95"] >= r.cost["p50"] > 0
    assert "FEW_WEEKS" in {c for c, _ in r.warnings}


def test_csv_equals_toml(tmp_path):
    text = (
        "name,per_week,agent,duration_median [min],duration_p90 [min],weight_mean [kg],weight_sd [kg]\n"
        "brief cases,10,sevoflurane,20,30,70,10\n"
    )
    p = tmp_path / "mix.csv"
    p.write_text(text)
    from_csv = forecast(load_casemix(p), weeks=20, seed=4)
    from_toml = forecast(casemix_from_text(SHORT.format(n=10)), weeks=20)
    np.testing.assert_array_equal(from_csv.weekly["sevoflurane"], from_toml.weekly["sevoflurane"])
    assert case_types_from_text("name,per_weekday,agent\nx,2;3,sevoflurane\n")[0].per_weekday == [2.0, 3.0]


def _row(**keys):
    base = {
        "name": '"x"',
        "per_week": "2",
        "agent": '"sevoflurane"',
        "weight_mean": '"70 kg"',
        "duration_median": '"60 min"',
        "duration_p90": '"90 min"',
    }
    base.update(keys)
    return "[[case_types]]\n" + "\n".join(f"{k} = {v}" for k, v in base.items() if v is not None)


@pytest.mark.parametrize(
    "row, field",
    [
        (_row(per_week="-3"), "case_types[1].per_week"),
        (_row(duration_p90='"40 min"'), "case_types[1].duration_p90"),
        (_row(agent='"chloroform"'), "case_types[1].agent"),
        (_row(colour='"red"'), "case_types[1].colour"),
        (_row(count='"fixed"', per_week="2.5"), "case_types[1].per_week"),
        (_row(weight_sd='"10 kg"', weight_min='"80 kg"', weight_max='"60 kg"'), "case_types[1].weight_max"),
        (_row(wash_in_flow='"40 L/min"'), "case_types[1].wash_in_flow"),
        (_row(scenario='"missing.toml"', agent=None), "case_types[1].scenario"),
        (_row(per_weekday="[1, 2]"), "case_types[1].per_week"),
        (_row(weight_mean='"70 L"'), "case_types[1].weight_mean"),
    ],
)
def test_bad_rows_name_the_row(row, field):
    text = _row() + "\n" + row
    with pytest.raises(InputError) as err:
        casemix_from_text(text)
    assert err.value.field == field


def test_template_with_per_patient_override_is_refused(tmp_path):
    (tmp_path / "t.toml").write_text(
        (DATA / "casemix_lap_scenario.toml")
        .read_text()
        .replace('age = "50 years"', 'age = "50 years"\ncardiac_output = "5 L/min"')
    )
    (tmp_path / "m.toml").write_text('[[case_types]]\nname = "t"\nper_week = 1\nscenario = "t.toml"\n')
    with pytest.raises(InputError) as err:
        load_casemix(tmp_path / "m.toml")
    assert err.value.field == "case_types[0].scenario" and "cardiac_output" in err.value.expected


def test_top_level_errors():
    for text, field in (
        ("weeks = 0\n" + _row(), "weeks"),
        ('cover = "20 %"\n' + _row(), "cover"),
        ('co2e_basis = "ar9"\n' + _row(), "co2e_basis"),
        ("weeks = 3", "case_types"),
    ):
        with pytest.raises(InputError) as err:
            casemix_from_text(text)
        assert err.value.field == field


def test_summary_statistics_numpy_definition():
    # numpy.percentile's default (Hyndman and Fan 1996, definition 7): linear interpolation.
    v = np.array([1.0, 2.0, 3.0, 4.0, 10.0])
    s = summary_statistics(v)
    assert s == {"mean": 4.0, "p50": 3.0, "p95": pytest.approx(8.8), "p99": pytest.approx(9.76)}


def test_neonatal_point_patient_keeps_age_zero_and_warns():
    mix = casemix_from_text(_row(weight_mean='"3.5 kg"', age_mean='"0 years"'))
    ct = mix.case_types[0]
    assert ct.age.kind == "point" and ct.age.loc == 0.0 and ct.weight.loc == 3.5
    codes = {c for c, _ in mix.warnings}
    assert {"PATIENT_WEIGHT_OUTSIDE_VALIDATED", "AGE_BELOW_MAPLESON_RANGE"} <= codes


def test_empty_case_type_runs():
    text = (
        _row(per_week="0")
        + "\n"
        + _row(name='"y"', per_week="1", duration='"20 min"', duration_median=None, duration_p90=None)
    )
    r = forecast(casemix_from_text(text), weeks=2, seed=0)
    assert r.cases[0]["simulated"] == 0 and r.cases[1]["simulated"] == int(r.weekly["cases"].sum())


def test_case_types_file_rows_follow_the_toml_rows(tmp_path):
    (tmp_path / "rows.csv").write_text(
        "name,per_week,agent,duration [min],weight_mean [kg],weight_sd [kg]\n"
        "ok,2,sevoflurane,30,70,\nbad,-1,sevoflurane,30,70,5\n"
    )
    text = 'case_types_file = "rows.csv"\n' + _row()
    (tmp_path / "mix.toml").write_text(text)
    with pytest.raises(InputError) as err:
        load_casemix(tmp_path / "mix.toml")
    assert err.value.field == "case_types[2].per_week"
