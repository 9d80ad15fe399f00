"""Prediction check and uptake-factor calibration on recorded cases (consistency checks, not validation).

A synthetic log is made by the engine itself at a known uptake factor (tests/calibration_helpers.py),
so the factor recovered is checked against the one that made the log; nothing here is a published
value.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from calibration_helpers import synthetic_log
from engine_helpers import scenario

from estimator.errors import InputError
from estimator.inputs.audit_log import log_from_text, read_log
from estimator.inputs.calibration_file import (
    FixedFactor,
    calibration_from_text,
    load_calibration,
    with_calibration,
)
from estimator.limits import CALIBRATION_MINIMUM_CASES, UPTAKE_FACTOR_SUPPORTED
from estimator.planning.audit import audit
from estimator.planning.calibration import (
    SECOND_FACTOR,
    calibration_toml,
    check_and_calibrate,
    provenance,
    run_cases,
)
from estimator.simulation.engine import simulate

DEMO_LOG = Path(__file__).resolve().parent.parent / "demo_cases" / "kestrel_audit_log.csv"
FACTOR = 1.4


def calibrated(text: str, **kw):
    result = audit(log_from_text(text))
    cases, skipped = run_cases(result, **kw)
    return result, check_and_calibrate(cases, skipped)


@pytest.fixture(scope="module")
def known():
    """A synthetic log the engine made at uptake factor 1.4, and its calibration."""
    return calibrated(synthetic_log(FACTOR))


def test_synthetic_factor_is_recovered_within_its_interval(known):
    rec = known[1]["calibration"]["agents"]["sevoflurane"]
    assert rec["low"] <= FACTOR <= rec["high"]
    # 0.1: the log's dial scatters by 10 % between cases (SD of the log), so the fit's own spread is
    # about 0.1 x 1.4 / sqrt(24) x 2 (delivered moves about half as fast as the factor) = 0.06.
    assert rec["factor"] == pytest.approx(FACTOR, abs=0.1)
    assert rec["cases"] == 24


def test_interval_is_shown_with_every_factor(known):
    rec = known[1]["calibration"]["agents"]["sevoflurane"]
    assert rec["low"] < rec["factor"] < rec["high"]
    check = known[1]["prediction_check"]
    summary = check["agents"]["sevoflurane"]
    assert summary["low"] <= summary["median_ratio"] <= summary["high"]
    assert len(check["cases"]) == 24 and all(c["ratio"] > 0 for c in check["cases"])


def test_a_dial_thirty_percent_higher_raises_the_factor(known):
    higher = calibrated(synthetic_log(FACTOR, dial_scale=1.3))[1]["calibration"]["agents"]["sevoflurane"]
    assert higher["factor"] > known[1]["calibration"]["agents"]["sevoflurane"]["factor"]
    assert higher["low"] > known[1]["calibration"]["agents"]["sevoflurane"]["high"]


def test_the_same_log_gives_the_same_interval(known):
    again = calibrated(synthetic_log(FACTOR))[1]["calibration"]["agents"]["sevoflurane"]
    assert again == known[1]["calibration"]["agents"]["sevoflurane"]


def test_too_few_cases_are_refused():
    n = CALIBRATION_MINIMUM_CASES - 1
    _, out = calibrated(synthetic_log(FACTOR, n=n))
    assert out["calibration"]["agents"] == {}
    assert str(n) in out["calibration"]["refused"]["sevoflurane"]
    with pytest.raises(InputError) as err:
        calibration_toml(out["calibration"], {})
    assert err.value.field == "--calibration-out" and str(CALIBRATION_MINIMUM_CASES) in err.value.expected


def test_factor_outside_the_supported_range_is_warned(known):
    rec = known[1]["calibration"]["agents"]["sevoflurane"]
    inside = UPTAKE_FACTOR_SUPPORTED[0] <= rec["factor"] <= UPTAKE_FACTOR_SUPPORTED[1]
    codes = {w["code"] for w in known[1]["calibration"]["warnings"]}
    assert ("UPTAKE_FACTOR_UNSUPPORTED" in codes) == (not inside)


def test_demo_log_factor_is_plausible():
    """The invented demo log (first 120 cases): a factor between 0.5 and 3, with its interval around it."""
    result = audit(read_log(DEMO_LOG))
    cases, skipped = run_cases(result, max_cases=120)
    out = check_and_calibrate(cases, skipped)
    for agent, rec in out["calibration"]["agents"].items():
        assert 0.5 < rec["low"] <= rec["factor"] <= rec["high"] < 3.0, agent
        assert rec["cases"] >= CALIBRATION_MINIMUM_CASES
    assert "sevoflurane" in out["calibration"]["agents"]
    assert "desflurane" in out["calibration"]["refused"]  # 12 cases among the first 120


def test_secant_is_close_to_the_engine():
    """The check reads delivered agent at factor f on the secant through f = 1 and 2: within 2 % of
    the engine re-run at f = 0.5 and 1.5 (the curvature is small at a held end-tidal)."""
    phases = [
        {"duration": "10 min", "oxygen": "2 L/min", "air": "2 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "80 min", "oxygen": "0.3 L/min", "air": "0.3 L/min", "end_tidal_target": "1 MAC"},
    ]
    s = scenario("sevoflurane", phases)

    def liquid(f):
        return simulate(with_calibration(s, FixedFactor(f))).totals["agent_liquid"].to("mL").magnitude

    one, two = liquid(1.0), liquid(SECOND_FACTOR)
    for f in (0.5, 1.5):
        secant = one + (f - 1.0) * (two - one) / (SECOND_FACTOR - 1.0)
        assert secant == pytest.approx(liquid(f), rel=0.02)


def test_calibration_round_trips_through_the_file(tmp_path, known):
    result, out = known
    prov = provenance(result, "synthetic.csv", "a" * 64, len(result.cases))
    text = calibration_toml(out["calibration"], prov)
    path = tmp_path / "dept.toml"
    path.write_text(text, encoding="utf-8")
    cal = load_calibration(path)
    rec = out["calibration"]["agents"]["sevoflurane"]
    assert cal.factor("sevoflurane") == pytest.approx(rec["factor"], abs=1e-4)
    assert cal.agents["sevoflurane"].low == pytest.approx(rec["low"], abs=1e-4)
    assert cal.provenance.log_sha256 == "a" * 64 and cal.provenance.cases == 24
    assert cal.factor("isoflurane") is None
    # the scenario key reads the same file, relative to the scenario's folder
    (tmp_path / "case.toml").write_text(
        'calibration = "dept.toml"\n[patient]\nweight = "70 kg"\n[agent]\nname = "sevoflurane"\n'
        '[[phases]]\nduration = "30 min"\noxygen = "0.5 L/min"\nair = "0.5 L/min"\nend_tidal_target = "1 MAC"\n',
        encoding="utf-8",
    )
    from estimator.inputs.scenario import load_scenario

    sc = load_scenario(tmp_path / "case.toml")
    assert sc.uptake_factor == pytest.approx(rec["factor"], abs=1e-4)
    plain = simulate(scenario("sevoflurane", [sc.phases[0].model_dump()]))
    assert (simulate(sc).totals["agent_liquid"] > plain.totals["agent_liquid"]) == (rec["factor"] > 1)


GOOD = """method = "bootstrap"
[provenance]
log_name = "log.csv"
log_sha256 = "{sha}"
first_case = 2026-01-05
last_case = 2026-02-01
cases = 40
made = 2026-03-01
program = "lowflow-estimator"
[agents.sevoflurane]
factor = {factor}
low = 1.1
high = 1.3
cases = {cases}
"""


@pytest.mark.parametrize(
    ("change", "field", "value", "expected"),
    [
        ({"factor": "50"}, "calibration.agents.sevoflurane.factor", 50, "0.05 to 20"),
        ({"factor": "1.5"}, "calibration.agents.sevoflurane.factor", 1.5, "low 1.1 to high 1.3"),
        ({"cases": "5"}, "calibration.agents.sevoflurane.cases", 5, f"at least {CALIBRATION_MINIMUM_CASES}"),
        ({"sha": "xyz"}, "calibration.provenance.log_sha256", "xyz", "SHA-256"),
    ],
)
def test_a_bad_calibration_file_names_field_value_and_range(change, field, value, expected):
    values = {"sha": "0" * 64, "factor": "1.2", "cases": "40", **change}
    with pytest.raises(InputError) as err:
        calibration_from_text(GOOD.format(**values))
    assert err.value.field == field
    assert err.value.value == value
    assert expected in err.value.expected


def test_unknown_agent_and_keys_are_refused():
    text = GOOD.format(sha="0" * 64, factor="1.2", cases="40")
    with pytest.raises(InputError, match="nitrous_oxide"):
        calibration_from_text(text.replace("agents.sevoflurane", "agents.nitrous_oxide"))
    with pytest.raises(InputError, match="colour"):
        calibration_from_text(text + 'colour = "red"\n')


def test_a_named_file_in_text_is_refused():
    from estimator.inputs.scenario import scenario_from_text

    with pytest.raises(InputError) as err:
        scenario_from_text(
            'calibration = "dept.toml"\n[patient]\nweight = "70 kg"\n[agent]\nname = "sevoflurane"\n'
            '[[phases]]\nduration = "30 min"\noxygen = "1 L/min"\nvaporizer = "2 %"\n'
        )
    assert err.value.field == "calibration"
